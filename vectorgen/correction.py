"""Correction and the signal path after it: beam plan (mm) -> drive -> stages -> channels.

Correction applies the exact inverse of the profile's deflection model, so the spot lands where
the drawing says. The stage chain then conditions the drive for the hardware after the jack.
The full-scale check runs on the final drive, after the last stage: nothing is ever clipped
silently; a sample beyond full scale is a `FullScaleError` naming where in the drawing it is.
"""

from __future__ import annotations

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

from .channels import ChannelMap
from .deflection import DeflectionModel
from .errors import FullScaleError
from .stages import StageChain

__all__ = ["FULL_SCALE_SLACK", "TRUE_PEAK_SLACK", "correct", "check_full_scale", "check_true_peak",
           "inter_sample_peaks", "plan_signal", "CHUNK"]

FULL_SCALE_SLACK = 1e-9
CHUNK = 1 << 14        # samples corrected at a time by plan_signal


def correct(plan, model: DeflectionModel) -> np.ndarray:
    """Drive values (n, 2) that put the spot on the plan's points (no stages, checked)."""
    return check_full_scale(model.drive_from_xy(plan.x, plan.y), plan)


def check_full_scale(drive: np.ndarray, plan, before: np.ndarray | None = None) -> np.ndarray:
    """The drive, if every sample is within full scale (rounding within FULL_SCALE_SLACK
    removed); else a `FullScaleError` naming the first place in the drawing that is beyond.
    `before`: the drive ahead of the stage chain; where it was within full scale, the error
    says the stages' compensation asks for the rest.

    Examples
    --------
    >>> import numpy as np
    >>> check_full_scale(np.array([[0.5, 1.0 + 1e-12]]), None).tolist()
    [[0.5, 1.0]]
    """
    if drive.size and -1.0 <= drive.min() and drive.max() <= 1.0:
        return drive                # the usual case: all within full scale, nothing to clip
    over = np.abs(drive) > 1.0 + FULL_SCALE_SLACK
    if over.any():
        i = int(np.argmax(over.any(axis=1)))
        axis = 0 if over[i, 0] else 1
        if before is not None and abs(before[i, axis]) <= 1.0:
            raise FullScaleError(
                f"drive {'xy'[axis]} = {drive[i, axis]:+.4f} is beyond full scale "
                f"{_where(plan, i)}: the point is within reach ({before[i, axis]:+.4f}) but "
                f"the compensation of the hardware asks for more drive than is left there "
                f"(lower the writing speed, or draw that part further in)")
        raise FullScaleError(f"drive {'xy'[axis]} = {drive[i, axis]:+.4f} is beyond full scale "
                             f"{_where(plan, i)}: the profile's deflection cannot reach that "
                             f"point (shrink the drawing or the usable area)")
    return np.clip(drive, -1.0, 1.0)   # removes only the FULL_SCALE_SLACK rounding


TP_TAPS = 12            # input samples either side in the 4x interpolator (BS.1770-4 uses 48 taps)
TP_SCREEN_CHUNK = 0.7   # a chunk whose samples stay below this is not looked into: the planner's
                        # paths (even-speed strokes, band-limited jumps) overshoot far less
_TP_PHASES = None


def _tp_phases() -> np.ndarray:
    """(2 TP_TAPS, 3) Kaiser-windowed sinc weights of the three in-between points of a 4x
    oversampling interpolator (t = 1/4, 1/2, 3/4 of the way from sample k to k + 1)."""
    global _TP_PHASES
    if _TP_PHASES is None:
        k = np.arange(-TP_TAPS + 1, TP_TAPS + 1)          # neighbours k - 11 .. k + 12
        t = np.array([0.25, 0.5, 0.75])
        x = t[None, :] - k[:, None]
        w = np.kaiser(4 * TP_TAPS + 1, 8.0)
        win = np.interp(x, np.linspace(-TP_TAPS, TP_TAPS, len(w)), w)
        _TP_PHASES = np.sinc(x) * win
    return _TP_PHASES


TP_BLOCKS_PER_PASS = 256      # blocks of TP_TAPS gaps interpolated at a time (arrays < 128 KiB)
_TP_BAND = None


def _tp_band() -> np.ndarray:
    """(3 TP_TAPS - 1, 3 TP_TAPS) weights: a window of 35 samples times this gives the three
    in-between points of each of the block's 12 gaps (column p B + o: phase p, gap o)."""
    global _TP_BAND
    if _TP_BAND is None:
        h = _tp_phases()
        B = TP_TAPS
        band = np.zeros((B + 2 * TP_TAPS - 1, 3 * B))
        for o in range(B):
            band[o:o + 2 * TP_TAPS, o::B] = h
        _TP_BAND = band
    return _TP_BAND


def _loop_span(part, n: int, a: int, b: int) -> np.ndarray:
    """Samples a .. b - 1 of a looping frame of n samples (a may be < 0, b > n: it wraps round,
    as often as it takes), from `part(i, j)`, which gives samples i .. j - 1 for 0 <= i < j <= n."""
    parts = []
    while a < b:
        i = a % n
        j = min(n, i + (b - a))
        parts.append(part(i, j))
        a += j - i
    return parts[0] if len(parts) == 1 else np.concatenate(parts)


def inter_sample_peaks(drive: np.ndarray, halo: tuple | None = None) -> tuple[float, int, int]:
    """The largest |value| of a looping frame's band-limited path between its samples, as a
    4x interpolator sees it (ITU-R BS.1770-4 Annex 2 measures true peak so). Returns (peak,
    sample index, axis).

    Only the gaps that can reach beyond full scale are interpolated: between samples k and
    k + 1 the path is sum_j h_j x_(k+j), so it stays within |x_k| + H1 max_j |x_(k+j) - x_k|
    (H1 = sum |h_j|). That bound is taken a block of TP_TAPS samples at a time, from the
    block's largest |x| and the range of x over it and both neighbours (which hold every tap
    of its gaps); only the gaps of blocks where it reaches 1 are interpolated, each block's
    twelve at once (its window of 35 samples times a band of the weights). So a peak beyond
    full scale is exact; below it the result lies between the sample peak and the true peak.
    `halo`, for a chunk of a longer frame: the TP_TAPS samples before and after it
    ((TP_TAPS, 2) each); without it the frame wraps round (it loops)."""
    n = len(drive)
    if n < 2:
        return (float(np.abs(drive).max()) if drive.size else 0.0), 0, 0
    h = _tp_phases()
    h1 = float(np.abs(h).sum(axis=0).max())
    B = TP_TAPS
    if halo is None:
        def part(i, j):
            return drive[i:j]
        halo = (_loop_span(part, n, -TP_TAPS, 0), _loop_span(part, n, n, n + TP_TAPS))
    # the chunk with its halo, and room after the last gap's taps for a whole block's window
    # (zeros, never a gap's tap)
    ext = np.concatenate([halo[0], drive, halo[1], np.zeros((B, drive.shape[1]))])
    L = n + 2 * TP_TAPS
    starts = np.arange(0, L, B)
    hb = _tp_band()
    best, at, axis = float(max(drive.max(), -drive.min())), 0, 0
    for ax in range(drive.shape[1]):
        col = ext[:, ax]
        bmax = np.maximum.reduceat(col[:L], starts)
        bmin = np.minimum.reduceat(col[:L], starts)
        hi, lo = bmax.copy(), bmin.copy()            # over the block and both neighbours
        np.maximum(hi[1:], bmax[:-1], out=hi[1:])
        np.maximum(hi[:-1], bmax[1:], out=hi[:-1])
        np.minimum(lo[1:], bmin[:-1], out=lo[1:])
        np.minimum(lo[:-1], bmin[1:], out=lo[:-1])
        hi -= lo
        hi *= h1
        hi += np.maximum(bmax, -bmin)
        hi[0] = 0.0                                  # blocks of halo rows only: no gap
        hi[starts >= TP_TAPS + n] = 0.0
        flagged = np.flatnonzero(hi > 1.0)
        if not flagged.size:
            continue
        # gap k (between samples k and k + 1) is ext row k + TP_TAPS, its taps rows k + 1 ..
        # k + 24; the gaps of block b take rows bB - 11 .. bB + 23, one window: the 4x path
        # of its B gaps is that window times a band of the interpolator's weights
        windows = sliding_window_view(col, B + 2 * TP_TAPS - 1)
        for f0 in range(0, len(flagged), TP_BLOCKS_PER_PASS):
            f = flagged[f0:f0 + TP_BLOCKS_PER_PASS]
            v = windows[f * B + 1 - TP_TAPS] @ hb          # (blocks, 3 phases x B gaps)
            np.abs(v, out=v)
            v = np.maximum(np.maximum(v[:, :B], v[:, B:2 * B]), v[:, 2 * B:])
            row = f[:, None] * B + np.arange(B)
            v[(row < TP_TAPS) | (row >= TP_TAPS + n)] = 0.0
            j = int(np.argmax(v))
            if v.flat[j] > best:
                best, at, axis = float(v.flat[j]), int(row.flat[j]) - TP_TAPS, ax
    return best, at, axis


TRUE_PEAK_SLACK = 0.002     # 0.2 % of full scale (0.1 mm on a 50 mm half-width) is let pass


def check_true_peak(drive: np.ndarray, plan) -> float:
    """The true peak of a looping frame; a `FullScaleError` when its band-limited path (what an
    audio interface's reconstruction filter makes of it) goes beyond full scale between samples
    by more than TRUE_PEAK_SLACK (less is a clip of a fraction of the spot size)."""
    n, T = len(drive), TP_TAPS
    if n <= CHUNK:
        peak, i, axis = inter_sample_peaks(drive)
    else:                   # a chunk at a time, each with the samples either side of it
        peak, i, axis = 0.0, 0, 0

        def part(a, b):
            return drive[a:b]

        for c0 in range(0, n, CHUNK):
            c1 = min(n, c0 + CHUNK)
            d = drive[c0:c1]
            top = float(max(d.max(), -d.min()))
            if top <= TP_SCREEN_CHUNK:
                p, j, ax = top, 0, 0
            else:
                halo = (_loop_span(part, n, c0 - T, c0), _loop_span(part, n, c1, c1 + T))
                p, j, ax = inter_sample_peaks(d, halo)
            if p > peak:
                peak, i, axis = p, c0 + j, ax
    _raise_true_peak(peak, i, axis, plan)
    return peak


def _raise_true_peak(peak: float, i: int, axis: int, plan) -> None:
    if peak > 1.0 + TRUE_PEAK_SLACK:
        raise FullScaleError(f"true peak {'xy'[axis]} = {peak:.4f} is beyond full scale between "
                             f"samples {_where(plan, i)}: the interface's low-pass would "
                             f"overshoot (shrink the drawing or the usable area, or lower the "
                             f"writing speed)")


def _where(plan, i: int) -> str:
    """Where sample i is, in the user's terms: the point and the stroke (or the jump)."""
    x, y = plan.positions(i, i + 1)
    # the run sample i is in (runs: lit on stroke k, then blanked, in turn), found from the
    # run lengths rather than a stroke index for every sample of the frame
    run = int(np.searchsorted(np.cumsum(plan.runs), i, side="right"))
    if run % 2:
        lit_after = np.flatnonzero(plan.runs[run + 1::2] > 0)
        what = "a blanked move" + (f" towards {plan.strokes.labels[(run + 1) // 2 + lit_after[0]]}"
                                   if lit_after.size else "")
    else:
        what = plan.strokes.labels[run // 2]
    return f"at ({x[0]:.2f}, {y[0]:.2f}) mm in {what}"


def plan_signal(plan, model: DeflectionModel, chain: StageChain, cmap: ChannelMap, rate: int,
                true_peak: bool = False, drive: np.ndarray | None = None,
                fail_fast: bool = False):
    """The channel signal of a beam plan: correction, the stage chain, the full-scale check and
    the channel map. Returns (signal (n, channels) float32, peak |drive|, the final drive (n, 2)
    when it was made whole, else None, the true peak or None).

    With no pincushion terms and a chain of pointwise stages, each sample's drive depends on
    its position alone, so the frame goes through in cache-sized chunks straight into the
    signal and the full (n, 2) drive is never made (with `true_peak`, each chunk is checked
    with the samples either side of it). Otherwise (Newton's iterations run on the whole
    frame; a filtering stage sees the whole loop), or when a chunk comes out beyond full
    scale (to be refused, or clipped within the slack), the frame is done whole. Both give the
    same samples. `drive`: the final drive, already worked out and checked (it is not made
    again). `fail_fast`: for a frame that will be tried again slower when it fails, the chunked
    path refuses at the first chunk beyond full scale (its sample peak or, with `true_peak`,
    between its samples), with a short message, instead of finding the worst place."""
    if drive is not None or model.has_distortion or not chain.pointwise:
        return _whole(plan, model, chain, cmap, rate, true_peak, drive)
    n = plan.samples
    sig = np.empty((n, cmap.channels), dtype=np.float32)
    if cmap.has_z:                      # the Z level of every lit or blanked run
        zrun = _z_runs(plan, cmap)
        run_end = np.cumsum(plan.runs)
        run_start = run_end - plan.runs
    lo, hi = np.inf, -np.inf
    tp, tp_at, tp_axis = 0.0, 0, 0

    def drive(a, b):
        return chain.frame(model.drive_from_xy(*plan.positions(a, b)), rate)

    T = TP_TAPS if true_peak else 0     # each chunk with the samples either side of it
    for c0 in range(0, n, CHUNK):
        c1 = min(n, c0 + CHUNK)
        wide = _loop_span(drive, n, c0 - T, c1 + T)
        d = wide[T:len(wide) - T]
        dlo, dhi = d.min(), d.max()
        if not (-1.0 <= dlo and dhi <= 1.0):
            if fail_fast:
                raise FullScaleError(f"drive {max(-dlo, dhi):.4f} is beyond full scale")
            return _whole(plan, model, chain, cmap, rate, true_peak)
        lo, hi = min(lo, dlo), max(hi, dhi)
        if true_peak and max(-dlo, dhi) > TP_SCREEN_CHUNK:
            halo = (wide[:T], wide[len(wide) - T:])
            p, i, ax = inter_sample_peaks(d, halo)
            if p > tp:
                tp, tp_at, tp_axis = p, c0 + i, ax
                if fail_fast:
                    _raise_true_peak(tp, tp_at, tp_axis, plan)
        cmap.write_xy(sig[c0:c1], d)
        if cmap.has_z:
            r0 = int(np.searchsorted(run_end, c0, side="right"))
            r1 = int(np.searchsorted(run_end, c1 - 1, side="right")) + 1
            sizes = np.minimum(run_end[r0:r1], c1) - np.maximum(run_start[r0:r1], c0)
            cmap.write_z(sig[c0:c1], np.repeat(zrun[r0:r1], sizes))
    peak = float(max(abs(lo), abs(hi))) if n else 0.0
    if true_peak:
        tp = max(tp, peak)
        _raise_true_peak(tp, tp_at, tp_axis, plan)
    return sig, peak, None, (tp if true_peak else None)


def _whole(plan, model, chain, cmap, rate, true_peak=False, drive=None):
    if drive is None:
        if model.has_distortion:        # (every point takes the same Newton steps: at once)
            corrected = model.drive_from_xy(plan.x, plan.y)
        else:                           # a chunk at a time into the frame's drive
            n = plan.samples
            corrected = np.empty((n, 2))
            for c0 in range(0, n, CHUNK):
                c1 = min(n, c0 + CHUNK)
                corrected[c0:c1] = model.drive_from_xy(*plan.positions(c0, c1))
        drive = check_full_scale(chain.frame(corrected, rate), plan,
                                 None if chain.pointwise else corrected)
    sig = np.empty((len(drive), cmap.channels), dtype=np.float32)
    cmap.write_xy(sig, drive)
    if cmap.has_z:
        cmap.write_z(sig, np.repeat(_z_runs(plan, cmap), plan.runs))
    tp = check_true_peak(drive, plan) if true_peak else None
    return sig, (float(np.abs(drive).max()) if len(drive) else 0.0), drive, tp


def _z_runs(plan, cmap: ChannelMap) -> np.ndarray:
    """float32 Z of each run of a beam plan (lit on stroke i, blanked after it, in turn)."""
    S = len(plan.runs) // 2
    inten = np.column_stack([plan.stroke_intensity, np.zeros(S)]).ravel()
    lit = np.tile(np.array([True, False]), S)
    return cmap.z_level(inten, lit).astype(np.float32)

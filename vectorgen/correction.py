"""Correction and the signal path after it: beam plan (mm) -> drive -> stages -> channels.

Correction applies the exact inverse of the profile's deflection model, so the spot lands where
the drawing says. The stage chain then conditions the drive for the hardware after the jack.
The full-scale check runs on the final drive, after the last stage: nothing is ever clipped
silently; a sample beyond full scale is a `FullScaleError` naming where in the drawing it is.
"""

from __future__ import annotations

import numpy as np

from .channels import ChannelMap
from .deflection import DeflectionModel
from .errors import FullScaleError
from .stages import StageChain

__all__ = ["FULL_SCALE_SLACK", "correct", "check_full_scale", "plan_signal", "CHUNK"]

FULL_SCALE_SLACK = 1e-9
CHUNK = 1 << 14        # samples corrected at a time by plan_signal


def correct(plan, model: DeflectionModel) -> np.ndarray:
    """Drive values (n, 2) that put the spot on the plan's points (no stages, checked)."""
    return check_full_scale(model.drive_from_xy(plan.x, plan.y), plan)


def check_full_scale(drive: np.ndarray, plan) -> np.ndarray:
    """The drive, if every sample is within full scale (rounding within FULL_SCALE_SLACK
    removed); else a `FullScaleError` naming the first place in the drawing that is beyond.

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
        raise FullScaleError(f"drive {'xy'[axis]} = {drive[i, axis]:+.4f} is beyond full scale "
                             f"{_where(plan, i)}: the profile's deflection cannot reach that "
                             f"point (shrink the drawing or the usable area)")
    return np.clip(drive, -1.0, 1.0)   # removes only the FULL_SCALE_SLACK rounding


def _where(plan, i: int) -> str:
    """Where sample i is, in the user's terms: the point and the stroke (or the jump)."""
    x, y = plan.positions(i, i + 1)
    s = plan.stroke[i]
    if s < 0:
        nxt = plan.stroke[i:][plan.stroke[i:] >= 0]
        what = "a blanked move" + (f" towards {plan.strokes.labels[nxt[0]]}" if nxt.size else "")
    else:
        what = plan.strokes.labels[s]
    return f"at ({x[0]:.2f}, {y[0]:.2f}) mm in {what}"


def plan_signal(plan, model: DeflectionModel, chain: StageChain, cmap: ChannelMap, rate: int):
    """The channel signal of a beam plan: correction, the stage chain, the full-scale check and
    the channel map. Returns (signal (n, channels) float32, peak |drive|, the final drive (n, 2)
    when it was made whole, else None).

    With no pincushion terms and a chain of pointwise stages, each sample's drive depends on
    its position alone, so the frame goes through in cache-sized chunks straight into the
    signal and the full (n, 2) drive is never made. Otherwise (Newton's iterations run on the
    whole frame; a filtering stage sees the whole loop), or when a chunk comes out beyond full
    scale (to be refused, or clipped within the slack), the frame is done whole. Both give the
    same samples."""
    if model.has_distortion or not chain.pointwise:
        return _whole(plan, model, chain, cmap, rate)
    n = plan.samples
    sig = np.empty((n, cmap.channels), dtype=np.float32)
    if cmap.has_z:                      # the Z level of every lit or blanked run
        zrun = _z_runs(plan, cmap)
        run_end = np.cumsum(plan.runs)
        run_start = run_end - plan.runs
    lo, hi = np.inf, -np.inf
    for c0 in range(0, n, CHUNK):
        c1 = min(n, c0 + CHUNK)
        d = chain.frame(model.drive_from_xy(*plan.positions(c0, c1)), rate)
        dlo, dhi = d.min(), d.max()
        if not (-1.0 <= dlo and dhi <= 1.0):
            return _whole(plan, model, chain, cmap, rate)
        lo, hi = min(lo, dlo), max(hi, dhi)
        cmap.write_xy(sig[c0:c1], d)
        if cmap.has_z:
            r0 = int(np.searchsorted(run_end, c0, side="right"))
            r1 = int(np.searchsorted(run_end, c1 - 1, side="right")) + 1
            sizes = np.minimum(run_end[r0:r1], c1) - np.maximum(run_start[r0:r1], c0)
            cmap.write_z(sig[c0:c1], np.repeat(zrun[r0:r1], sizes))
    return sig, (float(max(abs(lo), abs(hi))) if n else 0.0), None


def _whole(plan, model, chain, cmap, rate):
    drive = check_full_scale(chain.frame(model.drive_from_xy(plan.x, plan.y), rate), plan)
    sig = np.empty((len(drive), cmap.channels), dtype=np.float32)
    cmap.write_xy(sig, drive)
    if cmap.has_z:
        cmap.write_z(sig, np.repeat(_z_runs(plan, cmap), plan.runs))
    return sig, (float(np.abs(drive).max()) if len(drive) else 0.0), drive


def _z_runs(plan, cmap: ChannelMap) -> np.ndarray:
    """float32 Z of each run of a beam plan (lit on stroke i, blanked after it, in turn)."""
    S = len(plan.runs) // 2
    inten = np.column_stack([plan.stroke_intensity, np.zeros(S)]).ravel()
    lit = np.tile(np.array([True, False]), S)
    return cmap.z_level(inten, lit).astype(np.float32)

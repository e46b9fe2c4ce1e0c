"""Beam plan: where the spot is at every sample of one frame, and whether it is lit.

`plan_frame` reads as the pipeline, one job per module:

* `ordering`: in what order and which way round the strokes are drawn (a strategy by name:
  ``"tour"`` the shortest tour in jump time, ``"greedy"`` nearest entry point, ``"input"``
  as given);
* `layout`: strokes on one global arc-length axis, cut at their sharp corners into pieces, and
  the frame's samples as blocks on that axis (every stroke resampled by one `numpy.interp`);
* `dwell`: dwells at stroke ends, sharp corners and dots;
* `jumps`: the blanked jump between strokes and the settle after it (the jump model);
* `budget`: the steps of each piece, free-running at the writing speed or shared out for an
  exact-N frame;
* `plan`: the result, `Plan`, which works out the spot position of any span on demand.

The frame ends with the jump back to its first stroke, so frames repeat seamlessly.
"""

from __future__ import annotations

import functools
from typing import NamedTuple

import numpy as np

from ..clip import check_drawing_size
from ..errors import InputError
from ..runs import run_ranks
from ..strokes import Strokes
from .budget import apportion, piece_steps
from .dwell import dwells, turn_deg
from .jumps import LagJumps, ShapedJumps, StraightJumps
from .layout import CHUNK, GAP, Layout, arc_axis
from .ordering import ORDERINGS, greedy_order, input_order, register_ordering, tour_order
from .plan import Plan
from .timing import Timing

__all__ = ["MAX_FRAME_SAMPLES", "ORDERINGS", "LagJumps", "Plan", "ShapedJumps", "StraightJumps", "Timing", "apportion",
           "greedy_order", "input_order", "order_frame", "check_frame_size", "tour_order", "plan_frame", "register_ordering",
           "turn_deg", "CHUNK", "GAP"]

MAX_FRAME_SAMPLES = 50_000_000   # ~17 minutes at 48 kHz: beyond this a frame is a mistake
CAP_STEP_MM = 2.0       # with a drive limit, strokes are cut into segments at most this long ...
CAP_BREAK = 1.25        # ... and a piece ends where the allowed speed changes by more than this


def plan_frame(strokes, timing: Timing, target_samples: int | None = None,
               ordering: str = "tour", jumps=None, speed_cap=None, ordered=None,
               accel=None, settle=None) -> Plan:
    """The beam plan for one frame.

    Parameters
    ----------
    strokes : StrokeSet
        The drawing in mm, already clipped to the screen (`Strokes` or a clipped drawing).
    timing : Timing
        Beam timing in samples.
    target_samples : int, optional
        Fit the frame into exactly this many samples (None: free-running at the writing speed).
    ordering : str
        Name of the ordering strategy in `ORDERINGS` (``"tour"``, ``"greedy"``, ``"input"``).
    jumps : jump model, optional
        How blanked jumps move (`jumps.StraightJumps`, `ShapedJumps`, `LagJumps`); default the
        timing's straight jumps.
    speed_cap : callable, optional
        ``speed_cap(px, py) -> (P - 1,) spacing_mm``: the largest point spacing each segment
        (vertex i to i + 1) may be drawn at (the drive's limits). Strokes are then cut into
        segments of at most CAP_STEP_MM, a piece ends (with no dwell) wherever the cap changes
        by more than CAP_BREAK, and every piece is drawn no faster than its segments allow:
        strokes slow down where their speed needs more drive than is left, and only there.
    accel : callable, optional
        ``accel(px, py, speed) -> (P,) mm per sample^2``: the largest change of the spot's
        speed per sample at each vertex, where it moves at most `speed` (P,) mm per sample
        (a deflection whose drive acts on the acceleration, such as a
        second-order amplifier, can make no sudden change of velocity). Every lit piece then
        speeds up and slows down evenly (`layout.ramp_distance`) between its ends, at rest
        where it stops (stroke ends, sharp corners) and at the slower of the two speeds where
        it runs on into the next piece, with its junction speeds brought within reach of
        each other by a forward and a backward pass; and a gentle corner (a turn below
        corner_angle_deg, passed without stopping) is taken no faster than its change of
        direction allows in one sample, 2 v sin(turn / 2) <= accel: the slow-down grows with
        the turn (none on a straight run). Needs `speed_cap`.
    settle : callable, optional
        For a lagging deflection drawn without compensation: ``settle(turn_deg, speed_mm_s)
        -> samples`` the spot needs to follow a turn to within its size; sharp corners and
        stroke ends dwell at least that long (`dwell.dwells`).
    ordered : tuple, optional
        `order_frame`'s answer for these strokes, when the caller already has it (it then
        checked the frame's size with `check_frame_size` before ordering; it is not checked
        again).

    Returns
    -------
    Plan

    Raises
    ------
    InputError
        Nothing to draw, a frame too short for the drawing, or a frame too long.

    Examples
    --------
    >>> from vectorgen.profile import Beam
    >>> from vectorgen.strokes import strokes_from_polylines
    >>> line = strokes_from_polylines([[(0.0, 0.0), (10.0, 0.0)]])
    >>> plan = plan_frame(line, Timing.from_beam(Beam(), 48000))
    >>> plan.samples, plan.drawn_length_mm, plan.blanked_moves
    (32, 10.0, 1)
    """
    if strokes.count == 0:
        raise InputError("nothing to draw: the drawing is empty (or wholly off the screen)")
    if ordered is None:         # (a caller that ordered the frame checked its size first)
        check_frame_size(strokes, timing, target_samples)
    strategy = ORDERINGS[ordering]
    jumps = timing.jumps if jumps is None else jumps
    if ordered is None:
        ordered = _ordered(strokes, strategy, jumps)
    px, py, offs, stroke_intensity, drawn, kept = ordered
    # what does not depend on the writing speed is worked out once per ordered frame and
    # kept for every plan of it (a frame may be planned at several speeds), so nothing below
    # writes into these arrays (they are not marked read-only: numpy's interp and others
    # copy a read-only array on every call)
    if speed_cap is not None:
        if "densified" not in kept:
            kept["densified"] = _densified_frame(px, py, offs, drawn)
        px, py, offs, drawn = kept["densified"]
    S = len(offs) - 1
    first, last = offs[:-1], offs[1:] - 1
    axis_key = ("axis", speed_cap is not None, float(timing.corner_angle_deg))
    if axis_key not in kept:
        kept[axis_key] = _frame_axis(px, py, first, last, timing.corner_angle_deg)
    is_last, s, sharp, pz = kept[axis_key]
    lengths = s[last] - s[first]

    # Pieces between consecutive boundary vertices (first, sharp corners, last) of a stroke:
    # a pair of consecutive boundaries belongs to one stroke unless the first is a stroke's last.
    soft = np.zeros(len(px), dtype=bool)         # piece ends with no dwell: the cap changes
    acc = None
    if speed_cap is not None and len(px) > 1:
        seg_cap = speed_cap(px, py)
        if accel is not None:
            near = np.minimum(np.r_[seg_cap, np.inf], np.r_[np.inf, seg_cap])
            acc = np.asarray(accel(px, py, np.minimum(near, timing.spacing_mm)), dtype=float)
            seg_cap = np.minimum(seg_cap, _turn_caps(px, py, is_last, sharp, acc))
        seg_cap[is_last[:-1]] = np.inf             # the gap from one stroke to the next
        c_in, c_out = seg_cap[:-1], seg_cap[1:]
        lo = np.minimum(c_in, c_out)
        soft[1:-1] = (np.maximum(c_in, c_out) > lo * CAP_BREAK) & np.isfinite(lo)
        soft &= ~sharp
        soft[first] = False
        soft[last] = False
    boundary = sharp | soft
    boundary[first] = True
    boundary[last] = True
    bidx = np.flatnonzero(boundary)
    a, b = bidx[:-1], bidx[1:]
    keep = ~is_last[a]
    a, b = a[keep], b[keep]
    piece_stroke = np.searchsorted(offs, a, side="right") - 1
    piece_len = s[b] - s[a]
    follow = None
    if settle is not None:
        def follow(turn, speed=timing.spacing_mm * timing.rate):
            return settle(turn, speed)
    start_rep, piece_rep, closed_sharp = dwells(px, py, first, last, lengths, piece_stroke,
                                                is_last[b], timing, b, follow)
    piece_rep[soft[b]] = 0

    # Blanked jumps from each stroke's end to the next stroke's start (the last one wraps).
    nxt = np.roll(np.arange(S), -1)
    jump_from = np.column_stack([px[last], py[last]])
    jump_to = np.column_stack([px[first[nxt]], py[first[nxt]]])
    jump_len = np.hypot(*(jump_to - jump_from).T)
    move = jumps.moves(jump_from, jump_to)
    settles = jumps.settle_samples(move)

    fixed = int(start_rep.sum() + piece_rep.sum() + move.sum() + settles.sum())
    piece_n, start_rep = piece_steps(piece_len, timing.spacing_mm, target_samples, fixed,
                                     start_rep)
    if speed_cap is not None and len(piece_len):
        # the drive's limits: a piece may need more steps than the writing speed gives it
        seg = np.append(seg_cap, np.inf)
        cap = np.minimum.reduceat(seg, np.column_stack([a, b]).ravel())[::2]
        piece_n = np.maximum(piece_n, np.ceil(piece_len / cap - 1e-9).astype(np.int64))
    ramp = None
    if acc is not None and len(piece_len):
        seg_acc = np.append(np.minimum(acc[:-1], acc[1:]), np.inf)
        seg_acc[is_last] = np.inf
        a_piece = np.minimum.reduceat(seg_acc, np.column_stack([a, b]).ravel())[::2]
        runs_on = soft[a] & (np.r_[False, b[:-1] == a[1:]])      # joined to the piece before
        piece_n, piece_step, ramp = _ramped(piece_len, piece_n, a_piece, runs_on)
    else:
        piece_step = piece_len / np.maximum(piece_n, 1)
    n_total = int(piece_n.sum() + start_rep.sum() + piece_rep.sum() + move.sum() + settles.sum())
    if n_total > MAX_FRAME_SAMPLES:
        raise InputError(f"one frame would take {n_total} samples ({n_total / timing.rate:.0f}"
                         f" s): raise the writing speed or draw less", parameter="speed")

    layout, lit, runs = _blocks(s, px, py, pz, first, last, a, piece_step, piece_n,
                                piece_stroke, start_rep, piece_rep, move, settles, jump_from,
                                jump_to, jumps, ramp)
    return Plan(layout, lit, runs, drawn, stroke_intensity,
                drawn_length_mm=float(lengths.sum()),
                moving_samples=int(piece_n.sum()),
                blanked_moves=int((move > 0).sum()),
                blanked_length_mm=float(jump_len.sum()),
                corners=int(sharp.sum() + closed_sharp.sum()),
                jump_samples=int(move.sum()))


def check_frame_size(strokes, timing: Timing, target_samples: int | None = None) -> None:
    """The limits, before any ordering or layout: the drawing's size, and a frame that could
    not be shorter than MAX_FRAME_SAMPLES (its strokes at the writing speed, one sample each
    at least).

    Raises
    ------
    InputError
        Giving the numbers (parameter ``speed`` or ``frame_samples``).

    Examples
    --------
    >>> from vectorgen.profile import Beam
    >>> from vectorgen.strokes import strokes_from_polylines
    >>> line = strokes_from_polylines([[(0.0, 0.0), (10.0, 0.0)]])
    >>> check_frame_size(line, Timing.from_beam(Beam(), 48000))
    >>> try:
    ...     check_frame_size(line, Timing.from_beam(Beam(), 48000, 1e-300))
    ... except InputError as exc:
    ...     refused = str(exc)
    >>> refused[:38]
    'one frame would take at least 4.8e+305'
    """
    check_drawing_size(strokes)
    if target_samples is not None:
        if target_samples > MAX_FRAME_SAMPLES:
            raise InputError(f"samples per frame must be at most {MAX_FRAME_SAMPLES} "
                             f"(frame_samples={target_samples})", parameter="frame_samples")
        return
    with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
        total = strokes.packed().total_length()
        least = float(np.float64(total) / np.float64(timing.spacing_mm)) + strokes.count
    if not least <= MAX_FRAME_SAMPLES:          # (NaN or inf too)
        need = (f"at least {least:.3g} samples, more than" if np.isfinite(least)
                else "far more than")
        speed = timing.spacing_mm * timing.rate
        raise InputError(f"one frame would take {need} the {MAX_FRAME_SAMPLES} samples "
                         f"({MAX_FRAME_SAMPLES / timing.rate:.0f} s at {timing.rate} Hz) a frame "
                         f"may have: raise the writing speed or draw less"
                         + (f" (speed={speed:.3g} mm/s)" if speed > 0 else ""),
                         parameter="speed")


class Ordered(NamedTuple):
    """A frame's strokes in drawing order (`order_frame`): the vertices x, y (contiguous),
    the stroke offsets and intensities, the drawn strokes (a Strokes, or a function
    that makes it once, only if asked for), and `kept`: what `plan_frame` worked out from them
    that does not depend on the writing speed, for the next plan of the same frame (none of
    these arrays is written to once made)."""

    px: np.ndarray
    py: np.ndarray
    offsets: np.ndarray
    intensity: np.ndarray
    drawn: object
    kept: dict


def order_frame(strokes, ordering: str, jumps):
    """The strokes in drawing order, for `plan_frame(..., ordered=...)`: a frame planned at
    several writing speeds is ordered once (the order does not depend on the speed)."""
    check_drawing_size(strokes)         # before the ordering's work
    return _ordered(strokes, ORDERINGS[ordering], jumps)


def _ordered(strokes, strategy, jumps):
    """The vertices x, y (contiguous), offsets and intensities of the strokes in drawing order,
    and the drawn strokes (a Strokes, or a function that makes it only if asked for)."""
    if strokes.packing_drops_points() or strokes.count <= 2 or strategy is input_order:
        strokes = strokes.packed()
    arrays = strokes.arrays()
    found = strategy(*strokes.end_points(), jumps.cost, arrays)
    order, flip = found[0], found[1]
    rotate = found[2] if len(found) > 2 else None
    if strategy is input_order:
        pts = strokes.points
        return Ordered(np.ascontiguousarray(pts[:, 0]), np.ascontiguousarray(pts[:, 1]),
                       strokes.offsets, strokes.intensity, strokes, {})
    if rotate is not None and np.any(rotate):
        from ..tour import rethread_ring

        arrays = list(arrays)
        for pos in np.flatnonzero(rotate).tolist():
            i = int(order[pos])
            arrays[i] = rethread_ring(arrays[i], int(rotate[pos]))
    # x, y as contiguous 1-D arrays (whole-array arithmetic on them is several times faster
    # than on the columns of a (P, 2) array) in the new order; the reordered Strokes are made
    # from them only if asked for
    px, py = _reordered_xy(arrays, order, flip)
    offs = _reordered_offsets(strokes.offsets, order)
    intensity = strokes.intensity[order]
    labels = strokes.labels

    @functools.cache
    def drawn():
        return Strokes(np.column_stack([px, py]), offs, intensity, [labels[i] for i in order])
    return Ordered(px, py, offs, intensity, drawn, {})


def _frame_axis(px, py, first, last, corner_angle_deg: float):
    """(is_last, s, sharp, pz) of an ordered frame's vertices: each stroke's last
    vertex, the global arc-length axis, the sharp interior corners (not at stroke ends) and the
    vertices as px + i py (for `Layout.positions`)."""
    is_last = np.zeros(len(px), dtype=bool)
    is_last[last] = True
    s, sharp = arc_axis(px, py, is_last, np.cos(np.radians(corner_angle_deg)))
    sharp[first] = False
    sharp[last] = False
    pz = np.empty(len(px), dtype=complex)
    pz.real, pz.imag = px, py
    return is_last, s, sharp, pz


def _densified_frame(px, py, offs, drawn):
    """(px, py, offs, drawn) of an ordered frame with its long segments cut (`_densified` at
    CAP_STEP_MM), the drawn strokes (or the function that makes them, once) to match."""
    px, py, offs = _densified(px, py, offs, CAP_STEP_MM)
    if callable(drawn):
        @functools.cache
        def drawn(make=drawn):
            st = make()
            return Strokes(np.column_stack([px, py]), offs, st.intensity, st.labels)
    else:
        drawn = Strokes(np.column_stack([px, py]), offs, drawn.intensity, drawn.labels)
    return px, py, offs, drawn


def _densified(px, py, offs, most_mm: float):
    """The vertices with every segment longer than `most_mm` cut into equal parts (the new
    vertices lie on the segment: the drawing is unchanged), and the new offsets."""
    P = len(px)
    if P < 2:
        return px, py, offs
    seg = np.hypot(np.diff(px), np.diff(py))
    gap = np.zeros(P - 1, dtype=bool)
    gap[offs[1:-1] - 1] = True
    long = np.flatnonzero(~gap & (seg > most_mm))
    if len(long) == 0:
        return px, py, offs
    # vertex i (a long segment's first) is followed by extra = parts - 1 new ones, evenly
    # along its segment; the work is over the vertices once and over the new ones
    parts = np.ceil(seg[long] / most_mm).astype(np.int64)     # (1 where seg / most rounds to 1)
    extra = parts - 1
    shift = np.zeros(P, dtype=np.int64)
    shift[long + 1] = np.cumsum(extra)                  # new vertices before vertex i
    np.maximum.accumulate(shift, out=shift)
    new_index = np.arange(P) + shift                    # where each old vertex now is
    total = P + int(extra.sum())
    nx, ny = np.empty(total), np.empty(total)
    nx[new_index], ny[new_index] = px, py
    seg_of = np.repeat(np.arange(len(long)), extra)
    k = run_ranks(extra) + 1
    frac = k / parts[seg_of]
    a = long[seg_of]
    at = new_index[a] + k
    nx[at] = px[a] + (px[a + 1] - px[a]) * frac
    ny[at] = py[a] + (py[a + 1] - py[a]) * frac
    return nx, ny, np.concatenate([new_index[offs[:-1]], [total]]).astype(np.int64)


def _reordered_offsets(offsets: np.ndarray, order: np.ndarray) -> np.ndarray:
    counts = np.diff(offsets)[order]
    return np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)


def _reordered_xy(arrays: list, order: np.ndarray, flip: np.ndarray):
    """x and y of the strokes' points (`arrays`: each stroke's (k, 2) points) in the new order,
    reversed strokes flipped, as two contiguous arrays."""
    xs, ys = [], []
    for i, f in zip(order.tolist(), flip.tolist()):
        p = arrays[i][::-1] if f else arrays[i]
        xs.append(p[:, 0])
        ys.append(p[:, 1])
    return np.concatenate(xs), np.concatenate(ys)


def _turn_caps(px, py, is_last, sharp, acc) -> np.ndarray:
    """(P - 1,) the spacing each segment may be drawn at for the gentle corners at its ends:
    a turn of angle t passed at speed v changes the velocity by 2 v sin(t / 2) within a
    sample, which must stay within acc there. Stroke ends and sharp corners (where the spot
    stops) set no cap."""
    P = len(px)
    cap = np.full(P, np.inf)
    inner = np.ones(P, dtype=bool)
    inner[0] = inner[-1] = False
    inner[is_last] = False
    inner[1:][is_last[:-1]] = False             # a stroke's first vertex
    inner &= ~sharp
    i = np.flatnonzero(inner)
    if i.size:
        d_in = np.column_stack([px[i] - px[i - 1], py[i] - py[i - 1]])
        d_out = np.column_stack([px[i + 1] - px[i], py[i + 1] - py[i]])
        half = np.radians(turn_deg(d_in, d_out)) / 2.0
        with np.errstate(divide="ignore"):
            cap[i] = np.where(half > 0, acc[i] / (2.0 * np.sin(half)), np.inf)
    return np.minimum(cap[:-1], cap[1:])


def _ramped(piece_len, piece_n, a_piece, runs_on):
    """Acceleration-limited pieces: (samples per piece, cruise step per piece, the layout's
    ramp (v_in, v_out, r_in, r_out)).

    The speed a piece was planned at (length / samples) is its cruise speed at most. Where a
    piece runs on into the next (`runs_on[p]`: piece p joins piece p - 1 without a stop) the
    junction speed is the slower cruise; elsewhere the spot is at rest. Junction speeds are
    then brought within reach: w_k = v_k^2 <= w_(k-1) + 2 a L over the piece between them,
    forwards and backwards, each pass one running minimum (w_k = S_k + min_(m<=k) (C_m -
    S_m), S the running sum of 2 a L). Each piece speeds up evenly from v_in to its peak
    speed (its cruise, or less on a piece too short to reach it), holds it, and slows to
    v_out, in whole samples; its step is then worked out so the piece ends exactly at its
    end."""
    L = np.asarray(piece_len, dtype=float)
    P = len(L)
    a = np.maximum(np.asarray(a_piece, dtype=float), 1e-12)
    cruise = L / np.maximum(piece_n, 1)
    cap = np.zeros(P + 1)                          # squared junction speeds, k = 0 .. P
    join = np.flatnonzero(runs_on)
    cap[join] = np.minimum(cruise[join - 1], cruise[join]) ** 2
    reach = 2.0 * a * L
    S = np.concatenate([[0.0], np.cumsum(reach)])
    fwd = S + np.minimum.accumulate(cap - S)
    R = np.concatenate([np.cumsum(reach[::-1])[::-1], [0.0]])
    bwd = R + np.minimum.accumulate((cap - R)[::-1])[::-1]
    w = np.maximum(np.minimum(fwd, bwd), 0.0)
    v_in, v_out = np.sqrt(w[:-1]), np.sqrt(w[1:])
    peak = np.minimum(cruise, np.sqrt(a * L + (v_in ** 2 + v_out ** 2) / 2.0))
    peak = np.maximum(peak, np.maximum(v_in, v_out))
    r_in = np.ceil((peak - v_in) / a - 1e-9).astype(np.int64)
    r_out = np.ceil((peak - v_out) / a - 1e-9).astype(np.int64)
    rest = L - (v_in + peak) * r_in / 2.0 - (peak + v_out) * r_out / 2.0
    with np.errstate(divide="ignore", invalid="ignore"):
        c = np.where(peak > 0, np.ceil(np.maximum(rest, 0.0) / peak - 1e-9), 0.0).astype(np.int64)
    n = np.maximum(r_in + c + r_out, 1)
    c = n - r_in - r_out
    den = (r_in + r_out) / 2.0 + c
    step = np.where(den > 0, (L - (v_in * r_in + v_out * r_out) / 2.0) / np.maximum(den, 1e-300),
                    0.0)
    return n, np.maximum(step, 0.0), (v_in, v_out, r_in.astype(float), r_out.astype(float))


def _blocks(s, px, py, pz, first, last, a, piece_step, piece_n, piece_stroke, start_rep,
            piece_rep, move, settles, jump_from, jump_to, jumps, ramp=None):
    """The frame's sample blocks in drawing order (per stroke a start block, its pieces, then
    its blanked jump) as a Layout, with the lit flags and the lit/blanked run lengths."""
    S = len(first)
    blank_size = move + settles
    blk_key = np.concatenate([2 * first, 2 * a + 1, 2 * last + 1])
    blk_base = np.concatenate([s[first], s[a], s[last]])
    blk_step = np.concatenate([np.zeros(S), piece_step, np.zeros(S)])
    blk_move = np.concatenate([np.zeros(S, dtype=np.int64), piece_n, np.zeros(S, dtype=np.int64)])
    blk_rep = np.concatenate([start_rep, piece_rep, blank_size]).astype(np.int64)
    blk_stroke = np.concatenate([np.arange(S), piece_stroke, np.arange(S)])
    blk_lit = np.concatenate([np.ones(S + len(a), dtype=bool), np.zeros(S, dtype=bool)])
    o = np.argsort(blk_key, kind="stable")
    blk_base, blk_step, blk_move, blk_rep, blk_stroke, blk_lit = (
        blk_base[o], blk_step[o], blk_move[o], blk_rep[o], blk_stroke[o], blk_lit[o])
    blk_ramp = None
    if ramp is not None:
        z = np.zeros(S)
        blk_ramp = tuple(np.concatenate([z, r, z])[o] for r in ramp)
    blk_size = blk_move + blk_rep
    blk_end = np.cumsum(blk_size)
    lit_count = np.bincount(blk_stroke[blk_lit], weights=blk_size[blk_lit],
                            minlength=S).astype(np.int64)
    runs = np.column_stack([lit_count, blank_size]).ravel()
    lit = np.repeat(np.tile(np.array([True, False]), S), runs)

    # Blanked samples: the jump's move (the jump model's path), then the settle at the
    # destination.
    blank_total = int(blank_size.sum())
    kb = run_ranks(blank_size)
    at = np.repeat(np.cumsum(runs)[1::2] - blank_size, blank_size) + kb
    moving = kb < np.repeat(move, blank_size)
    blank = np.empty((blank_total, 2))
    blank[moving] = jumps.path(jump_from, jump_to, move)
    blank[~moving] = np.repeat(jump_to, settles, axis=0)
    blank_x, blank_y = np.ascontiguousarray(blank[:, 0]), np.ascontiguousarray(blank[:, 1])
    layout = Layout(s, px, py, pz, blk_end - blk_size, blk_end, blk_move, blk_step, blk_base,
                    at, blank_x, blank_y, blk_ramp)
    return layout, lit, runs

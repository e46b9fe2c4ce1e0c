"""Flattening: curve segments to polylines (adaptive, vectorised).

Flattening works on whole arrays of segments of one kind at a time; the number of chords per
segment follows from a bound on the chord error, so no per-sample svgpathtools call is made:
  * quadratic/cubic Bezier, uniform steps in t: error <= max|B''| / (8 n^2)
  * elliptical arc, uniform steps in the parametric angle: error <= max(rx, ry)(1 - cos(d/2))
and every curve is also cut into steps turning at most MAX_TURN_DEG, so that flattened curves
never look like sharp corners to the beam planner.
"""

from __future__ import annotations

__all__ = ["MAX_TURN_DEG", "SegmentTable", "bezier_points", "circle_points", "flatten_arcs",
           "flatten_beziers", "flatten_table", "segment_table"]

import numpy as np

from .errors import InputError
from .runs import concat_ranges

MAX_TURN_DEG = 10.0
MAX_CHORDS = 100_000        # per segment; more means the tolerance is absurd for the drawing


def _counts_from_bound(second_deriv_max: np.ndarray, tol: float) -> np.ndarray:
    return np.ceil(np.sqrt(second_deriv_max / (8.0 * tol))).astype(np.int64)


def bezier_points(ctrl: np.ndarray, t: np.ndarray) -> np.ndarray:
    """Evaluate Beziers given per-point control points ctrl (m, k+1) complex at t (m,)."""
    k = ctrl.shape[1] - 1
    s = 1.0 - t
    if k == 1:
        return s * ctrl[:, 0] + t * ctrl[:, 1]
    if k == 2:
        return s * s * ctrl[:, 0] + 2 * s * t * ctrl[:, 1] + t * t * ctrl[:, 2]
    return (s ** 3 * ctrl[:, 0] + 3 * s * s * t * ctrl[:, 1] + 3 * s * t * t * ctrl[:, 2]
            + t ** 3 * ctrl[:, 3])


_TURN_STEPS = 32


def _along_x(dx: np.ndarray, dy: np.ndarray) -> np.ndarray:
    """dx with directions of zero length made +x: np.angle(0) is 0, so the tangent estimate
    has always counted such a direction as pointing along +x (a curve whose control point
    sits on its end point is given a little more turning than it has, never less)."""
    zero = (dx == 0) & (dy == 0)
    return np.where(zero, 1.0, dx) if zero.any() else dx


def _turn(dx0, dy0, dx1, dy1) -> np.ndarray:
    """|angle| from one direction to the next, in [0, pi]."""
    return np.abs(np.arctan2(dx0 * dy1 - dy0 * dx1, dx0 * dx1 + dy0 * dy1))


def _bezier_turn_counts(ctrl: np.ndarray) -> np.ndarray:
    """Chords needed so each turns <= MAX_TURN_DEG, from the total turning of the tangent.

    A quadratic's derivative runs along a straight line, so its direction turns one way only
    and the total is the angle between the end derivatives. A cubic's may turn back at its
    inflections: the total is summed over 32 even steps of t."""
    d = np.diff(ctrl, axis=1)           # derivative control points (up to the degree factor)
    dx, dy = d.real, d.imag
    if ctrl.shape[1] == 3:
        turn = _turn(_along_x(dx[:, 0], dy[:, 0]), dy[:, 0], _along_x(dx[:, 1], dy[:, 1]),
                     dy[:, 1])
    else:
        t = np.linspace(0.0, 1.0, _TURN_STEPS + 1)
        w0, w1, w2 = (1 - t) ** 2, 2 * (1 - t) * t, t ** 2
        turn = np.empty(len(ctrl))
        rows = _CHUNK_POINTS // (_TURN_STEPS + 1)      # curves at a time (see _chunks)
        for lo in range(0, len(ctrl), rows):
            x, y = dx[lo:lo + rows], dy[lo:lo + rows]
            sx = x[:, :1] * w0 + x[:, 1:2] * w1 + x[:, 2:] * w2             # (m, 33)
            sy = y[:, :1] * w0 + y[:, 1:2] * w1 + y[:, 2:] * w2
            sx = _along_x(sx, sy)
            turn[lo:lo + rows] = _turn(sx[:, :-1], sy[:, :-1], sx[:, 1:], sy[:, 1:]).sum(axis=1)
    return np.ceil(np.degrees(turn) / MAX_TURN_DEG).astype(np.int64)


def _bezier_counts(ctrl: np.ndarray, tol: float) -> np.ndarray:
    """Chords of each Bezier (ctrl (m, k+1) complex): the chord-error bound and the turn
    limit."""
    k = ctrl.shape[1] - 1
    if k == 1:
        return np.ones(len(ctrl), dtype=np.int64)
    second = np.abs(ctrl[:, :-2] - 2 * ctrl[:, 1:-1] + ctrl[:, 2:]).max(axis=1) * k * (k - 1)
    n = np.maximum(_counts_from_bound(second, tol), _bezier_turn_counts(ctrl))
    return np.clip(n, 1, MAX_CHORDS)


def _steps(n: np.ndarray):
    """For segments of n[j] chords: each point's segment and its parameter k / n[j]
    (k = 1 .. n[j])."""
    seg = np.repeat(np.arange(len(n)), n)
    first = np.cumsum(n) - n
    k = np.arange(len(seg)) - np.repeat(first - 1, n)
    return seg, k / np.repeat(n, n)


def _bezier_xy(ctrl: np.ndarray, n: np.ndarray):
    """x and y of the points t = k / n (k = 1 .. n) of each Bezier (Bernstein form: t = 1
    lands exactly on the end point)."""
    seg, t = _steps(n)
    s = 1.0 - t
    k = ctrl.shape[1] - 1
    if k == 1:
        w = (t,)
        cols = ctrl[:, 1:]
    elif k == 2:
        w = (s * s, 2 * s * t, t * t)
        cols = ctrl
    else:
        st = s * t
        w = (s * s * s, 3 * s * st, 3 * st * t, t * t * t)
        cols = ctrl
    x = np.zeros(len(t))
    y = np.zeros(len(t))
    for j, wj in enumerate(w):
        c = cols[:, j]
        x += wj * c.real[seg]
        y += wj * c.imag[seg]
    return x, y


def flatten_beziers(ctrl: np.ndarray, tol: float) -> tuple[np.ndarray, np.ndarray]:
    """Flatten m Beziers of one degree (ctrl (m, k+1) complex). Returns (points complex,
    counts) where segment j contributes counts[j] points: t in (0, 1], start point excluded."""
    n = _bezier_counts(ctrl, tol)
    x, y = _bezier_xy(ctrl, n)
    return x + 1j * y, n


def _arc_counts(rx, ry, delta, tol: float) -> np.ndarray:
    r = np.maximum(rx, ry)
    cos_arg = np.clip(1.0 - tol / np.maximum(r, 1e-300), -1.0, 1.0)
    # The tangent of x = a cos t, y = b sin t (a >= b) turns at up to a / b times the rate of
    # the parametric angle t (at the ends of the major axis), so a flat ellipse needs steps
    # shorter by b / a to keep every chord's turn under MAX_TURN_DEG.
    flat = np.minimum(rx, ry) / np.maximum(r, 1e-300)
    step = np.minimum(2.0 * np.arccos(cos_arg), np.radians(MAX_TURN_DEG) * flat)
    step = np.where(step > 0, step, np.radians(MAX_TURN_DEG))
    return np.clip(np.ceil(np.abs(delta) / step).astype(np.int64), 1, MAX_CHORDS)


def _arc_xy(center, rx, ry, rot, theta0, delta, n):
    seg, u = _steps(n)
    ang = theta0[seg] + delta[seg] * u
    c, s = np.cos(ang), np.sin(ang)
    cr, sr = np.cos(rot), np.sin(rot)
    x = center.real[seg] + (rx * cr)[seg] * c - (ry * sr)[seg] * s
    y = center.imag[seg] + (rx * sr)[seg] * c + (ry * cr)[seg] * s
    return x, y


def flatten_arcs(center: np.ndarray, rx: np.ndarray, ry: np.ndarray, rot: np.ndarray,
                 theta0: np.ndarray, delta: np.ndarray, tol: float):
    """Flatten m elliptical arcs (angles in radians; rot = ellipse rotation). Same output
    convention as flatten_beziers. The last point of each arc is its exact end angle."""
    n = _arc_counts(rx, ry, delta, tol)
    x, y = _arc_xy(center, rx, ry, rot, theta0, delta, n)
    return x + 1j * y, n


class SegmentTable:
    """The segments of many continuous runs, read out of the svgpathtools objects in one pass:
    per kind (1 line, 2 quadratic, 3 cubic, 4 arc) an array with a row per segment, in drawing
    order. Lines and Beziers: their control points (complex); arcs: centre, radii, rotation,
    start angle and sweep (radians) and end point. `arcs` keeps the arc segments themselves."""

    def __init__(self, run_len, kinds, data, starts, arcs):
        self.run_len = run_len      # (R,) segments per run
        self.kinds = kinds          # (m,) int8 kind of every segment
        self.data = data            # {kind: array}
        self.starts = starts        # (R,) complex start point of every run
        self.arcs = arcs            # the Arc segments, in order

    @property
    def segments(self) -> int:
        return len(self.kinds)

    def control_points(self) -> np.ndarray:
        """End and control points of the lines and Beziers (complex, flat)."""
        parts = [self.data[k].ravel() for k in (1, 2, 3) if k in self.data]
        return np.concatenate(parts) if parts else np.zeros(0, dtype=complex)


def segment_table(runs) -> SegmentTable:
    """One pass over the segments of `runs` (lists of svgpathtools segments, none empty)."""
    from svgpathtools import Arc, CubicBezier, Line, QuadraticBezier

    kind_of = {Line: 1, QuadraticBezier: 2, CubicBezier: 3, Arc: 4}
    run_len = np.array([len(r) for r in runs], dtype=np.int64)
    if (run_len == 0).any():
        raise ValueError("flatten_runs: empty run")
    kinds = []
    rows = {1: [], 2: [], 3: [], 4: []}
    arcs = []
    for r in runs:
        for seg in r:
            kind = kind_of.get(type(seg))
            if kind is None:
                for cls, k in kind_of.items():
                    if isinstance(seg, cls):
                        kind = k
                        break
                else:  # pragma: no cover - svgpathtools has no other kinds
                    raise InputError(f"unsupported path segment {type(seg).__name__}")
            kinds.append(kind)
            if kind == 1:
                rows[1].append((seg.start, seg.end))
            elif kind == 2:
                rows[2].append((seg.start, seg.control, seg.end))
            elif kind == 3:
                rows[3].append((seg.start, seg.control1, seg.control2, seg.end))
            else:
                arcs.append(seg)
                rows[4].append((seg.center, seg.radius, seg.rotation, seg.theta, seg.delta,
                                seg.end))
    data = {k: np.array(v, dtype=complex) for k, v in rows.items() if v}
    if 4 in data:
        # (degrees to radians on whole columns: the same single product per element)
        a = data[4]
        data[4] = np.column_stack([a[:, 0], a[:, 1].real, a[:, 1].imag,
                                   np.radians(a[:, 2].real), np.radians(a[:, 3].real),
                                   np.radians(a[:, 4].real), a[:, 5]])
    starts = np.array([r[0].start for r in runs], dtype=complex)
    return SegmentTable(run_len, np.array(kinds, dtype=np.int8), data, starts, arcs)


def flatten_table(table: SegmentTable, tol: float) -> tuple[np.ndarray, np.ndarray]:
    """Flatten every run of a segment table at once (every segment of one kind in one
    vectorised call). Returns the points (P, 2) of all runs packed end to end and the run offsets
    (R + 1,): run r is points[offsets[r]:offsets[r + 1]], its first point the run's start. A
    table can be flattened again at another tolerance."""
    kinds, run_len = np.asarray(table.kinds), np.asarray(table.run_len, dtype=np.int64)
    m = len(kinds)
    counts = {}
    for kind in (1, 2, 3):
        if kind in table.data:
            counts[kind] = _bezier_counts(table.data[kind], tol)
    if 4 in table.data:
        a = table.data[4]
        counts[4] = _arc_counts(a[:, 1].real, a[:, 2].real, a[:, 5].real, tol)

    # Layout: each run is its start point followed by its segments' points in order.
    n_seg = np.zeros(m, dtype=np.int64)
    for kind, n in counts.items():
        n_seg[kinds == kind] = n
    seg_run = np.repeat(np.arange(len(run_len)), run_len)
    run_first = np.cumsum(run_len) - run_len
    per_run = np.bincount(seg_run, weights=n_seg, minlength=len(run_len)).astype(np.int64)
    offsets = np.concatenate([[0], np.cumsum(1 + per_run)]).astype(np.int64)
    before = np.cumsum(n_seg) - n_seg                  # points of earlier segments, all runs
    seg_dest = offsets[seg_run] + 1 + before - before[run_first][seg_run]
    out = np.empty((int(offsets[-1]), 2))
    starts = np.asarray(table.starts)
    out[offsets[:-1], 0], out[offsets[:-1], 1] = starts.real, starts.imag
    for kind, n in counts.items():
        rows, dest_of = table.data[kind], seg_dest[kinds == kind]
        if kind == 4:
            rows = np.column_stack([rows[:, 0].real, rows[:, 0].imag, rows[:, 1].real,
                                    rows[:, 2].real, rows[:, 3].real, rows[:, 4].real,
                                    rows[:, 5].real, rows[:, 6].real, rows[:, 6].imag])
        for lo, hi in _chunks(n):
            nk = n[lo:hi]
            if kind == 4:
                a = rows[lo:hi]
                x, y = _arc_xy(a[:, 0] + 1j * a[:, 1], a[:, 2], a[:, 3], a[:, 4], a[:, 5],
                               a[:, 6], nk)
                last = np.cumsum(nk) - 1
                x[last], y[last] = a[:, 7], a[:, 8]      # land exactly on each end point
            else:
                x, y = _bezier_xy(rows[lo:hi], nk)
            dest = concat_ranges(dest_of[lo:hi], nk)
            out[dest, 0], out[dest, 1] = x, y
    return out, offsets


_CHUNK_POINTS = 1 << 15


def _chunks(n: np.ndarray):
    """(lo, hi) ranges of segments with about _CHUNK_POINTS points each: evaluated a chunk
    at a time, the temporary arrays stay small, in cache and reused (a whole drawing's
    temporaries at once are fresh memory, a page fault per 4 KiB)."""
    ends = np.cumsum(n)
    total = int(ends[-1]) if len(n) else 0
    cuts = np.searchsorted(ends, np.arange(_CHUNK_POINTS, total, _CHUNK_POINTS)).tolist()
    bounds = [0] + [c + 1 for c in cuts if c + 1 < len(n)] + [len(n)]
    bounds = sorted(set(bounds))
    return list(zip(bounds[:-1], bounds[1:]))


def circle_points(radius: float, center=(0.0, 0.0), tolerance_mm: float = 0.02) -> np.ndarray:
    """A closed polyline on a circle whose chords stay within `tolerance_mm` of it (chord
    error r (1 - cos(step / 2)); steps of at most MAX_TURN_DEG; 8 to 100,000 chords).

    Examples
    --------
    >>> pts = circle_points(10.0, tolerance_mm=0.01)
    >>> bool(np.allclose(np.hypot(*pts.T), 10.0)), bool((pts[0] == pts[-1]).all())
    (True, True)
    """
    step = 2.0 * np.arccos(max(-1.0, 1.0 - tolerance_mm / radius)) if radius > 0 else np.pi
    # (a huge radius makes the step underflow to 0: the chord count is capped anyway)
    n = int(np.clip(np.ceil(2 * np.pi / max(min(step, np.radians(MAX_TURN_DEG)),
                                            2 * np.pi / MAX_CHORDS)), 8, MAX_CHORDS))
    t = np.linspace(0.0, 2.0 * np.pi, n + 1)
    t[-1] = 0.0      # close exactly on the first point
    return np.column_stack([center[0] + radius * np.cos(t), center[1] + radius * np.sin(t)])

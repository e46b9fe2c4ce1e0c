"""Geometry: curves to polylines (adaptive, vectorised), fitting into the screen, clipping.

Flattening works on whole arrays of segments of one kind at a time; the number of chords per
segment follows from a bound on the chord error, so no per-sample svgpathtools call is made:
  * quadratic/cubic Bezier, uniform steps in t: error <= max|B''| / (8 n^2)
  * elliptical arc, uniform steps in the parametric angle: error <= max(rx, ry)(1 - cos(d/2))
and every curve is also cut into steps turning at most MAX_TURN_DEG, so that flattened curves
never look like sharp corners to the beam planner.
"""

from __future__ import annotations

import numpy as np

from .errors import VectorgenError
from .strokes import Strokes

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


def _bezier_turn_counts(ctrl: np.ndarray) -> np.ndarray:
    """Chords needed so each turns <= MAX_TURN_DEG: total turning estimated on 32 steps."""
    t = np.linspace(0.0, 1.0, 33)
    k = ctrl.shape[1] - 1
    d = k * np.diff(ctrl, axis=1)       # derivative control points
    tt = np.broadcast_to(t, (len(ctrl), len(t)))
    if k == 2:
        deriv = (1 - tt) * d[:, :1] + tt * d[:, 1:2]
    else:
        deriv = ((1 - tt) ** 2 * d[:, :1] + 2 * (1 - tt) * tt * d[:, 1:2] + tt ** 2 * d[:, 2:3])
    ang = np.angle(deriv)
    turn = np.abs(np.angle(np.exp(1j * np.diff(ang, axis=1)))).sum(axis=1)
    return np.ceil(np.degrees(turn) / MAX_TURN_DEG).astype(np.int64)


def flatten_beziers(ctrl: np.ndarray, tol: float) -> tuple[np.ndarray, np.ndarray]:
    """Flatten m Beziers of one degree (ctrl (m, k+1) complex). Returns (points complex,
    counts) where segment j contributes counts[j] points: t in (0, 1], start point excluded."""
    k = ctrl.shape[1] - 1
    if k == 1:
        n = np.ones(len(ctrl), dtype=np.int64)
    else:
        second = np.abs(ctrl[:, :-2] - 2 * ctrl[:, 1:-1] + ctrl[:, 2:]).max(axis=1) * k * (k - 1)
        n = np.maximum(_counts_from_bound(second, tol), _bezier_turn_counts(ctrl))
        n = np.clip(n, 1, MAX_CHORDS)
    seg = np.repeat(np.arange(len(ctrl)), n)
    idx = np.arange(n.sum()) - np.repeat(np.cumsum(n) - n, n) + 1
    t = idx / n[seg]
    return bezier_points(ctrl[seg], t), n


def flatten_arcs(center: np.ndarray, rx: np.ndarray, ry: np.ndarray, rot: np.ndarray,
                 theta0: np.ndarray, delta: np.ndarray, tol: float):
    """Flatten m elliptical arcs (angles in radians; rot = ellipse rotation). Same output
    convention as flatten_beziers. The last point of each arc is its exact end angle."""
    r = np.maximum(rx, ry)
    cos_arg = np.clip(1.0 - tol / np.maximum(r, 1e-300), -1.0, 1.0)
    # The tangent of x = a cos t, y = b sin t (a >= b) turns at up to a / b times the rate of
    # the parametric angle t (at the ends of the major axis), so a flat ellipse needs steps
    # shorter by b / a to keep every chord's turn under MAX_TURN_DEG.
    flat = np.minimum(rx, ry) / np.maximum(r, 1e-300)
    step = np.minimum(2.0 * np.arccos(cos_arg), np.radians(MAX_TURN_DEG) * flat)
    step = np.where(step > 0, step, np.radians(MAX_TURN_DEG))
    n = np.clip(np.ceil(np.abs(delta) / step).astype(np.int64), 1, MAX_CHORDS)
    seg = np.repeat(np.arange(len(center)), n)
    idx = np.arange(n.sum()) - np.repeat(np.cumsum(n) - n, n) + 1
    ang = theta0[seg] + delta[seg] * (idx / n[seg])
    local = rx[seg] * np.cos(ang) + 1j * ry[seg] * np.sin(ang)
    return center[seg] + local * np.exp(1j * rot[seg]), n


def flatten_path_segments(segments, tol: float) -> np.ndarray:
    """Flatten a continuous run of svgpathtools segments to an (n, 2) polyline."""
    pts, offsets = flatten_runs([segments], tol)
    return pts


def flatten_runs(runs, tol: float) -> tuple[np.ndarray, np.ndarray]:
    """Flatten many continuous runs of svgpathtools segments at once: every segment of one kind
    in the whole drawing goes through one vectorised call. Returns the points (P, 2) of all runs
    packed end to end and the run offsets (R + 1,): run r is points[offsets[r]:offsets[r + 1]],
    its first point the run's start."""
    return flatten_table(segment_table(runs), tol)


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
                    raise VectorgenError(f"unsupported path segment {type(seg).__name__}")
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
    """flatten_runs on a segment table (which can be flattened again at another tolerance)."""
    kinds, run_len = table.kinds, table.run_len
    m = len(kinds)
    flat = {}
    for kind in (1, 2, 3):
        if kind in table.data:
            flat[kind] = flatten_beziers(table.data[kind], tol)
    if 4 in table.data:
        a = table.data[4]
        pts, n = flatten_arcs(a[:, 0], a[:, 1].real, a[:, 2].real, a[:, 3].real, a[:, 4].real,
                              a[:, 5].real, tol)
        pts[np.cumsum(n) - 1] = a[:, 6]      # land exactly on each arc's end point
        flat[4] = (pts, n)

    # Layout: each run is its start point followed by its segments' points in order.
    n_seg = np.zeros(m, dtype=np.int64)
    for kind, (_pts, n) in flat.items():
        n_seg[kinds == kind] = n
    seg_run = np.repeat(np.arange(len(run_len)), run_len)
    run_first = np.cumsum(run_len) - run_len
    offsets = np.concatenate([[0], np.cumsum(1 + np.bincount(seg_run, weights=n_seg,
                                                             minlength=len(run_len)))]).astype(np.int64)
    before = np.cumsum(n_seg) - n_seg                  # points of earlier segments, all runs
    seg_dest = offsets[seg_run] + 1 + before - before[run_first][seg_run]
    z = np.empty(offsets[-1], dtype=complex)
    z[offsets[:-1]] = table.starts
    for kind, (pts, n) in flat.items():
        dest = np.repeat(seg_dest[kinds == kind], n)
        z[dest + np.arange(len(pts)) - np.repeat(np.cumsum(n) - n, n)] = pts
    return np.column_stack([z.real, z.imag]), offsets


def polyline_length(points: np.ndarray) -> float:
    return float(np.hypot(*np.diff(points, axis=0).T).sum()) if len(points) > 1 else 0.0


# --- fitting ------------------------------------------------------------------------------------

def fit_transform(box: tuple[float, float, float, float], screen, flip_y: bool = True):
    """Matrix and offset mapping the rectangle `box` (x0, y0, x1, y1, source units) into the
    usable area, aspect ratio kept, centred; y flipped when the source has +y down (SVG)."""
    x0, y0, x1, y1 = box
    bw, bh = x1 - x0, y1 - y0
    if screen.shape == "round":
        diag = np.hypot(bw, bh)
        s = screen.diameter_mm / diag if diag > 0 else 1.0
    else:
        cand = [v for v in ((screen.width_mm / bw) if bw > 0 else None,
                            (screen.height_mm / bh) if bh > 0 else None) if v is not None]
        s = min(cand) if cand else 1.0
    sy = -s if flip_y else s
    m = np.array([[s, 0.0], [0.0, sy]])
    cx, cy = (x0 + x1) / 2.0, (y0 + y1) / 2.0
    return m, -m @ np.array([cx, cy])


# --- clipping -----------------------------------------------------------------------------------

def area_polygon(screen):
    import shapely

    if screen.shape == "round":
        return shapely.Point(0.0, 0.0).buffer(screen.diameter_mm / 2.0, quad_segs=256)
    w, h = screen.half_extent
    return shapely.box(-w, -h, w, h)


def inside_mask(points: np.ndarray, screen, eps: float = 1e-9) -> np.ndarray:
    if screen.shape == "round":
        r = screen.diameter_mm / 2.0
        return np.hypot(points[:, 0], points[:, 1]) <= r * (1 + eps)
    w, h = screen.half_extent
    return (np.abs(points[:, 0]) <= w * (1 + eps)) & (np.abs(points[:, 1]) <= h * (1 + eps))


def clip_to_screen(strokes: Strokes, screen) -> tuple[Strokes, int]:
    """Cut every stroke at the edge of the usable area. Strokes wholly inside pass untouched
    (checked with numpy); strokes that cross the edge are clipped segment by segment with
    shapely, all segments in one vectorised call, and the kept parts joined back into runs in
    drawing order. (Intersecting a whole stroke as one LineString is set arithmetic: it merges
    a stretch drawn twice into one and nodes the stroke where it crosses itself, and GEOS can
    return slivers outside the area for spiky strokes.) Returns the clipped drawing and the
    number of strokes that were cut or dropped."""
    out, n_cut = clip_parts(strokes, screen)
    return (out.packed() if isinstance(out, ClippedStrokes) else out), n_cut


def clip_parts(strokes: Strokes, screen):
    """clip_to_screen, with the clipped drawing (when anything was cut) as a ClippedStrokes:
    its strokes are views of the drawing's points and the cut pieces, not yet packed into one
    array (the beam planner reads them in its own order without that copy)."""
    if not strokes.count:
        return strokes, 0
    if _bounds_inside(strokes.points, screen):
        return strokes, 0                   # the usual case: one min/max, no per-stroke work
    inside = inside_mask(strokes.points, screen)
    all_in = np.logical_and.reduceat(inside, strokes.offsets[:-1])
    if all_in.all():
        return strokes, 0
    import shapely

    area = area_polygon(screen)
    cut = np.flatnonzero(~all_in)
    # The crossing strokes' segments, each closed stroke rotated to start at a vertex outside
    # the area, so that no kept run wraps round its start.
    seg_a, seg_b, seg_sid = [], [], []
    for i in cut:
        pts = strokes.stroke(i)
        if len(pts) < 2:
            continue                                    # a dot off the screen
        if len(pts) > 2 and np.array_equal(pts[0], pts[-1]):
            k = int(np.argmin(inside[strokes.offsets[i]:strokes.offsets[i + 1] - 1]))
            ring = pts[:-1]
            pts = np.concatenate([ring[k:], ring[:k], ring[k:k + 1]])
        seg_a.append(pts[:-1])
        seg_b.append(pts[1:])
        seg_sid.append(np.full(len(pts) - 1, i))
    pieces = []                         # (stroke index, points) of the cut strokes' kept runs
    if seg_a:
        p0, p1, sid = np.concatenate(seg_a), np.concatenate(seg_b), np.concatenate(seg_sid)
        a, b = p0.copy(), p1.copy()
        keep = inside_mask(p0, screen) & inside_mask(p1, screen)   # convex area: wholly in
        todo = np.flatnonzero(~keep)
        if todo.size:
            parts = shapely.intersection(shapely.linestrings(np.stack([p0[todo], p1[todo]], 1)),
                                         area)
            ok = (shapely.get_type_id(parts) == 1) & (shapely.length(parts) > 0)
            first = shapely.get_coordinates(shapely.get_point(parts[ok], 0))
            last = shapely.get_coordinates(shapely.get_point(parts[ok], -1))
            t = todo[ok]
            backwards = np.einsum("ij,ij->i", last - first, p1[t] - p0[t]) < 0
            a[t] = np.where(backwards[:, None], last, first)
            b[t] = np.where(backwards[:, None], first, last)
            keep[t] = True
        # A run starts at a kept segment that begins a stroke, follows a dropped segment, or
        # does not start where the previous kept part ended (it re-enters the area).
        prev_keep = np.concatenate([[False], keep[:-1]])
        new_stroke = np.concatenate([[True], sid[1:] != sid[:-1]])
        joined = np.concatenate([[False], np.all(a[1:] == b[:-1], axis=1)])
        start = keep & (new_stroke | ~prev_keep | ~joined)
        kept = np.flatnonzero(keep)
        for rows in (np.split(kept, np.flatnonzero(start[kept])[1:]) if kept.size else []):
            pieces.append((int(sid[rows[0]]), _onto_area(np.vstack([a[rows[:1]], b[rows]]),
                                                         screen)))
    # The result in drawing order: every stretch of untouched strokes is one slice of the
    # packed points, with the cut strokes' runs (in their own order) between the stretches.
    offs = strokes.offsets
    chunks, counts, sids = [], [], []
    done = 0                            # strokes before this index are laid out
    j = 0                               # next piece
    for i in [*cut.tolist(), strokes.count]:
        if i > done:                    # untouched strokes done .. i - 1
            chunks.append((strokes.points[offs[done]:offs[i]], i - done))
            counts.append(np.diff(offs[done:i + 1]))
            sids.append(np.arange(done, i))
        while j < len(pieces) and pieces[j][0] == i:
            chunks.append((pieces[j][1], 1))
            counts.append([len(pieces[j][1])])
            sids.append([i])
            j += 1
        done = i + 1
    if not chunks:
        return Strokes.empty(), int((~all_in).sum())
    sids = np.concatenate(sids).astype(np.int64)
    return ClippedStrokes(strokes, chunks, counts, sids), int((~all_in).sum())


class ClippedStrokes:
    """A clipped drawing before packing: the strokes in order, as stretches of untouched
    strokes (views of the source drawing's points) and cut pieces. `packed()` is the Strokes
    clip_to_screen returns (one points array, consecutive duplicate points dropped)."""

    def __init__(self, source: Strokes, chunks: list, counts: list, sids: np.ndarray):
        self._chunks = chunks           # [(points (k, 2), strokes in it)] in order
        counts = np.concatenate(counts).astype(np.int64)
        self.offsets = np.concatenate([[0], np.cumsum(counts)])
        self.intensity = source.intensity[sids].astype(float)
        self.labels = [source.labels[i] for i in sids.tolist()]
        self._packed = None

    @property
    def count(self) -> int:
        return len(self.offsets) - 1

    def packed(self) -> Strokes:
        if self._packed is None:
            from .strokes import clean

            pts = np.concatenate([c for c, _n in self._chunks]).astype(float, copy=False)
            self._packed = clean(Strokes(pts, self.offsets, self.intensity, self.labels))
        return self._packed

    @property
    def points(self) -> np.ndarray:
        return self.packed().points

    def arrays(self) -> list:
        """Each stroke's (k, 2) points, in order (views)."""
        out = []
        offs = self.offsets.tolist()
        at = 0                          # stroke index
        for chunk, n in self._chunks:
            start = offs[at]
            for i in range(at, at + n):
                out.append(chunk[offs[i] - start:offs[i + 1] - start])
            at += n
        return out

    def has_duplicates(self) -> bool:
        """Whether a stroke repeats a point consecutively (packing would drop it)."""
        offs = self.offsets
        at = 0
        for chunk, n in self._chunks:
            if len(chunk) > 1:
                same = (chunk[1:, 0] == chunk[:-1, 0]) & (chunk[1:, 1] == chunk[:-1, 1])
                same[offs[at + 1:at + n] - offs[at] - 1] = False    # across strokes
                if same.any():
                    return True
            at += n
        return False


def _bounds_inside(points: np.ndarray, screen, eps: float = 1e-9) -> bool:
    """Whether every point lies inside the usable area, from the bounding box alone: the same
    answer as inside_mask(...).all() for a rectangle; for a round face True only when the box's
    corners are inside too (otherwise the per-point test decides)."""
    if not len(points):
        return True
    x, y = points[:, 0], points[:, 1]       # (column reductions: min(axis=0) is slow)
    ax, ay = max(-x.min(), x.max()), max(-y.min(), y.max())
    if not (np.isfinite(ax) and np.isfinite(ay)):
        return False
    if screen.shape == "round":
        # the farthest corner of the box, with a hair of margin for hypot's rounding
        return bool(np.hypot(ax, ay) <= screen.diameter_mm / 2.0 * (1 + eps) * (1 - 1e-12))
    w, h = screen.half_extent
    return bool(ax <= w * (1 + eps) and ay <= h * (1 + eps))


def _onto_area(points: np.ndarray, screen) -> np.ndarray:
    """Pull clipped points that rounding left a hair outside the area back onto its edge."""
    if screen.shape == "round":
        r = screen.diameter_mm / 2.0
        d = np.hypot(points[:, 0], points[:, 1])
        over = d > r
        if over.any():
            points = points.copy()
            points[over] *= (r / d[over])[:, None]
        return points
    w, h = screen.half_extent
    return np.column_stack([np.clip(points[:, 0], -w, w), np.clip(points[:, 1], -h, h)])


def _line_parts(geom) -> list:
    if geom.is_empty:
        return []
    kind = geom.geom_type
    if kind in ("LineString", "LinearRing"):
        return [np.asarray(geom.coords)]
    if kind == "Point":
        return [np.asarray(geom.coords)]
    if kind.startswith("Multi") or kind == "GeometryCollection":
        return [p for g in geom.geoms for p in _line_parts(g)]
    return []

"""Clipping: strokes cut at the edge of the usable area.

Strokes wholly inside pass untouched (one min/max decides for most drawings); strokes that cross
the edge are clipped segment by segment, all segments in whole-array operations (the area is a
rectangle or a disc: `inside_span`).
"""

from __future__ import annotations

import numpy as np

from .errors import InputError
from .strokes import Strokes, clean

__all__ = ["MAX_POINTS", "MAX_STROKES", "ClippedStrokes", "check_drawing_size", "clip_parts",
           "clip_to_screen", "inside_span"]

# Limits on one frame's drawing, checked before any per-stroke work: ordering costs about a
# fifth of a millisecond per stroke, so a bigger drawing would be slow, and on a tube it would
# refresh far too slowly to be seen as a picture anyway.
MAX_STROKES = 50_000
MAX_POINTS = 10_000_000


def check_drawing_size(strokes) -> None:
    """Refuse, at once, a drawing with more strokes or points than one frame can hold.

    Raises
    ------
    InputError
        Giving the drawing's count and the limit.

    Examples
    --------
    >>> from vectorgen.strokes import strokes_from_polylines
    >>> check_drawing_size(strokes_from_polylines([[(0.0, 0.0), (1.0, 0.0)]]))
    """
    count = int(strokes.count)
    if count > MAX_STROKES:
        raise InputError(f"the drawing has {count} strokes; one frame can draw at most "
                         f"{MAX_STROKES} (draw less, or join strokes into longer ones)")
    points = int(strokes.offsets[-1]) if len(strokes.offsets) else 0
    if points > MAX_POINTS:
        raise InputError(f"the drawing has {points} points; one frame can draw at most "
                         f"{MAX_POINTS} (draw less, or flatten curves more coarsely)")


def clip_to_screen(strokes: Strokes, screen) -> tuple[Strokes, int]:
    """Cut every stroke at the edge of the usable area. Strokes wholly inside pass untouched
    (checked with numpy); strokes that cross the edge are clipped segment by segment, all
    segments at once (`inside_span`), and the kept parts joined back into runs in drawing
    order. (Intersecting a whole stroke as one LineString is set arithmetic: it merges
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
    check_drawing_size(strokes)
    if screen.contains_box(strokes.points):
        return strokes, 0                   # the usual case: one min/max, no per-stroke work
    inside = screen.contains(strokes.points)
    all_in = np.logical_and.reduceat(inside, strokes.offsets[:-1])
    if all_in.all():
        return strokes, 0
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
        keep = screen.contains(p0) & screen.contains(p1)   # convex area: wholly in
        todo = np.flatnonzero(~keep)
        if todo.size:
            first, last, ok = _inside_parts(screen, p0[todo], p1[todo])
            t = todo[ok]
            a[t], b[t] = first, last
            keep[t] = True
        # A run starts at a kept segment that begins a stroke, follows a dropped segment, or
        # does not start where the previous kept part ended (it re-enters the area elsewhere;
        # a stroke that goes out and comes back along one line meets the edge at one point,
        # worked out from two segments: within a billionth of the screen's size is the same).
        prev_keep = np.concatenate([[False], keep[:-1]])
        new_stroke = np.concatenate([[True], sid[1:] != sid[:-1]])
        same = 1e-9 * max(screen.half_extent)
        joined = np.concatenate([[False], np.abs(a[1:] - b[:-1]).max(axis=1) <= same])
        start = keep & (new_stroke | ~prev_keep | ~joined)
        kept = np.flatnonzero(keep)
        for rows in (np.split(kept, np.flatnonzero(start[kept])[1:]) if kept.size else []):
            pieces.append((int(sid[rows[0]]), screen.clamp(np.vstack([a[rows[:1]], b[rows]]))))
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


def _inside_parts(screen, p0: np.ndarray, p1: np.ndarray):
    """The part of each segment inside the area: (first, last) points of the parts, in the
    segment's direction, and a mask of the segments that have one. A cut point is worked out
    from the segment with its ends in a fixed order, so that a stroke which leaves and comes
    back the same way meets the edge at the very same point both times (and stays one run);
    the segment's own ends are kept exactly. A part of no length (a segment touching the edge
    from outside) is none."""
    swap = (p0[:, 0] > p1[:, 0]) | ((p0[:, 0] == p1[:, 0]) & (p0[:, 1] > p1[:, 1]))
    c0 = np.where(swap[:, None], p1, p0)
    c1 = np.where(swap[:, None], p0, p1)
    t0, t1 = inside_span(screen, c0, c1)
    ok = t1 > t0
    c0, c1, t0, t1, swap = c0[ok], c1[ok], t0[ok], t1[ok], swap[ok]
    d = c1 - c0
    lo = np.where((t0 > 0)[:, None], screen.clamp(c0 + t0[:, None] * d), c0)
    hi = np.where((t1 < 1)[:, None], screen.clamp(c0 + t1[:, None] * d), c1)
    first = np.where(swap[:, None], hi, lo)
    last = np.where(swap[:, None], lo, hi)
    length = np.any(first != last, axis=1)
    ok[ok] = length
    return first[length], last[length], ok


def inside_span(screen, p0: np.ndarray, p1: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The part of each segment p0 + t (p1 - p0), 0 <= t <= 1, inside the usable area, as
    its parameters (t0, t1); t0 >= t1 where none of it is (or only a point).

    Notes
    -----
    The area is convex: a rectangle |x| <= w, |y| <= h (Liang and Barsky: each slab
    -w <= x0 + t dx <= w bounds t from both sides) or a disc |p| <= r (the roots of
    |p0 + t d|^2 = r^2, the smaller as c / q with q = -(b + sign(b) sqrt(b^2 - 4 a c)) / 2,
    which keeps its digits when the two are far apart).

    Examples
    --------
    >>> from vectorgen.screen import Screen
    >>> t0, t1 = inside_span(Screen(width_mm=100.0, height_mm=80.0),
    ...                      np.array([[0.0, 0.0]]), np.array([[80.0, 30.0]]))
    >>> float(t0[0]), float(t1[0])
    (0.0, 0.625)
    """
    d = p1 - p0
    t0, t1 = np.zeros(len(p0)), np.ones(len(p0))
    # (a step too small for its division gives t = +-inf, which is what the slabs need)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        if screen.round:
            r = screen.radius_mm
            a = np.einsum("ij,ij->i", d, d)
            b = 2.0 * np.einsum("ij,ij->i", p0, d)
            c = np.einsum("ij,ij->i", p0, p0) - r * r
            disc = b * b - 4.0 * a * c
            q = -0.5 * (b + np.copysign(np.sqrt(np.maximum(disc, 0.0)), b))
            ra, rb = q / a, c / q
            lo, hi = np.minimum(ra, rb), np.maximum(ra, rb)
            meets = (disc > 0) & (a > 0)
            t0 = np.where(meets, np.maximum(t0, lo), 1.0)
            t1 = np.where(meets, np.minimum(t1, hi), 0.0)
        else:
            for k, lim in enumerate(screen.half_extent):
                dk, pk = d[:, k], p0[:, k]
                ta, tb = (-lim - pk) / dk, (lim - pk) / dk
                level = dk == 0                     # parallel to the slab: all in or all out
                inside = np.abs(pk) <= lim
                lo = np.where(level, np.where(inside, -np.inf, np.inf), np.minimum(ta, tb))
                hi = np.where(level, np.where(inside, np.inf, -np.inf), np.maximum(ta, tb))
                t0, t1 = np.maximum(t0, lo), np.minimum(t1, hi)
    return t0, t1


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

    def end_points(self) -> tuple[np.ndarray, np.ndarray]:
        """Each stroke's first and last point, (S, 2) each."""
        arrays = self.arrays()
        return np.array([a[0] for a in arrays]), np.array([a[-1] for a in arrays])

    def packing_drops_points(self) -> bool:
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

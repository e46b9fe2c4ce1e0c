"""The drawing handed from every source to the engine: strokes as packed polylines in mm.

A `Strokes` holds all polylines of a drawing in one (P, 2) array with offsets, so the engine
works on whole arrays. Stroke i is points[offsets[i]:offsets[i+1]]. A stroke of one point is a
dot. Each stroke carries an intensity (0..1, brightness on the Z channel) and a label naming
where it came from, for error messages.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Protocol

import numpy as np

from .errors import InputError

__all__ = ["COORD_LIMIT", "StrokeSet", "Strokes", "check_finite", "clean", "concat",
           "repeated_points", "strokes_from_polylines"]

# Coordinates beyond this (in mm, or SVG user units before fitting) are refused as nonsense.
COORD_LIMIT = 1e9
LENGTH_CHUNK = 1 << 14      # segments measured at a time by Strokes.total_length


class StrokeSet(Protocol):
    """What the engine reads from a drawing: `Strokes`, or a clipped drawing not yet packed into
    one array (`vectorgen.clip.ClippedStrokes`).

    Attributes: `count` (S), `offsets` ((S + 1,) int64), `intensity` ((S,) 0..1) and `labels`
    (S names, for messages). `arrays()` gives each stroke's (k, 2) points (views, in order);
    `packed()` the drawing as one `Strokes` (consecutive duplicate points dropped);
    `packing_drops_points()` whether packing would drop any point; `end_points()` each
    stroke's first and last point ((S, 2) each)."""

    offsets: np.ndarray
    intensity: np.ndarray
    labels: list

    @property
    def count(self) -> int: ...

    def arrays(self) -> list: ...

    def packed(self) -> "Strokes": ...

    def packing_drops_points(self) -> bool: ...

    def end_points(self) -> tuple[np.ndarray, np.ndarray]: ...


@dataclass
class Strokes:
    points: np.ndarray                  # (P, 2) float64, mm, +y up
    offsets: np.ndarray                 # (S + 1,) int64
    intensity: np.ndarray               # (S,) float64 in [0, 1]
    labels: list = field(default_factory=list)

    @property
    def count(self) -> int:
        return len(self.offsets) - 1

    def stroke(self, i: int) -> np.ndarray:
        return self.points[self.offsets[i]:self.offsets[i + 1]]

    def __iter__(self):
        for i in range(self.count):
            yield self.stroke(i)

    def arrays(self) -> list:
        """Each stroke's (k, 2) points, in order (views of `points`)."""
        pts, o = self.points, self.offsets.tolist()
        return [pts[a:b] for a, b in zip(o[:-1], o[1:])]

    def packed(self) -> "Strokes":
        """A Strokes is packed already."""
        return self

    def packing_drops_points(self) -> bool:
        return False

    def end_points(self) -> tuple[np.ndarray, np.ndarray]:
        """Each stroke's first and last point, (S, 2) each."""
        o = self.offsets
        return self.points[o[:-1]], self.points[o[1:] - 1]

    def lengths(self) -> np.ndarray:
        """Arc length of every stroke, mm."""
        seg = np.hypot(*np.diff(self.points, axis=0).T) if len(self.points) > 1 else np.zeros(0)
        csum = np.concatenate([[0.0], np.cumsum(seg)])
        ends = self.offsets[1:] - 1
        return csum[ends] - csum[self.offsets[:-1]]

    def total_length(self) -> float:
        """Drawn length of all strokes, mm: LENGTH_CHUNK segments at a time (no frame-long
        temporaries), the steps from one stroke's last point to the next one's first left out."""
        pts = np.asarray(self.points, dtype=float)
        between = np.asarray(self.offsets[1:-1]) - 1     # segment i runs from point i to i + 1
        total = 0.0
        for g0 in range(0, len(pts) - 1, LENGTH_CHUNK):
            p = pts[g0:g0 + LENGTH_CHUNK + 1]
            seg, dy = np.diff(p[:, 0]), np.diff(p[:, 1])
            seg *= seg
            dy *= dy
            seg += dy
            np.sqrt(seg, out=seg)
            a, b = np.searchsorted(between, [g0, g0 + len(seg)])
            seg[between[a:b] - g0] = 0.0
            total += float(seg.sum())
        return total

    def transformed(self, matrix: np.ndarray, offset=(0.0, 0.0)) -> "Strokes":
        """Affine map p -> matrix @ p + offset (matrix 2 x 2)."""
        m = np.asarray(matrix, dtype=float)
        e, f = np.asarray(offset, dtype=float)
        x, y = self.points[:, 0], self.points[:, 1]
        pts = np.empty_like(self.points)
        # column by column into one new array (broadcasting over rows of two is slower)
        for k, (c0, c1, add) in enumerate(((m[0, 0], m[0, 1], e), (m[1, 0], m[1, 1], f))):
            col = pts[:, k]
            np.multiply(x, c0, out=col)
            if c1 != 0:
                col += y * c1
            col += add
        return Strokes(pts, self.offsets.copy(), self.intensity.copy(), list(self.labels))

    def bounds(self) -> tuple[float, float, float, float]:
        if not len(self.points):
            return (0.0, 0.0, 0.0, 0.0)
        x, y = self.points[:, 0], self.points[:, 1]    # (min(axis=0) is many times slower)
        return float(x.min()), float(y.min()), float(x.max()), float(y.max())

    @staticmethod
    def empty() -> "Strokes":
        return Strokes(np.zeros((0, 2)), np.zeros(1, dtype=np.int64), np.zeros(0), [])


def strokes_from_polylines(polylines, intensity=1.0, labels=None) -> Strokes:
    """Pack a list of (n_i, 2) arrays (n_i >= 1). `intensity` is one value or one per stroke."""
    polys = [np.asarray(p, dtype=float).reshape(-1, 2) for p in polylines]
    polys = [p for p in polys if len(p)]
    if not polys:
        return Strokes.empty()
    counts = np.array([len(p) for p in polys], dtype=np.int64)
    offsets = np.concatenate([[0], np.cumsum(counts)])
    inten = np.broadcast_to(np.asarray(intensity, dtype=float), (len(polys),)).copy()
    labs = list(labels) if labels is not None else [f"stroke {i + 1}" for i in range(len(polys))]
    return clean(Strokes(np.concatenate(polys), offsets, inten, labs))


def concat(parts) -> Strokes:
    """Join several Strokes into one drawing."""
    parts = [p for p in parts if p.count]
    if not parts:
        return Strokes.empty()
    pts = np.concatenate([p.points for p in parts])
    base = np.cumsum([0] + [len(p.points) for p in parts[:-1]])
    offs = np.concatenate([[0]] + [p.offsets[1:] + b for p, b in zip(parts, base)])
    return Strokes(pts, offs.astype(np.int64), np.concatenate([p.intensity for p in parts]),
                   [lab for p in parts for lab in p.labels])


def check_finite(strokes: Strokes, what: str = "drawing") -> None:
    """Refuse NaN, infinite or absurdly large coordinates, naming the stroke."""
    pts = strokes.points
    # One min and one max over the whole array decide (a NaN propagates into both, an
    # infinity or an enormous value fails the comparison); the search for the offending point
    # runs only when something is wrong.
    if pts.size and not (-COORD_LIMIT <= pts.min() and pts.max() <= COORD_LIMIT):
        bad = ~np.isfinite(pts).all(axis=1) | (np.abs(pts) > COORD_LIMIT).any(axis=1)
        p = int(np.argmax(bad))
        s = int(np.searchsorted(strokes.offsets, p, side="right") - 1)
        label = strokes.labels[s] if s < len(strokes.labels) else f"stroke {s + 1}"
        raise InputError(f"{what}: coordinate {strokes.points[p].tolist()} in {label} is not "
                             f"a finite number below {COORD_LIMIT:g}")
    inten = strokes.intensity
    if inten.size and not (0.0 <= inten.min() and inten.max() <= 1.0):     # NaN fails too
        raise InputError(f"{what}: stroke intensity must be between 0 and 1")


def repeated_points(points: np.ndarray, offsets: np.ndarray) -> np.ndarray:
    """Indices of the points that repeat the point before them in the same stroke.

    Examples
    --------
    >>> pts = np.array([[0.0, 0], [0, 0], [1, 0], [1, 0], [1, 0], [2, 0]])
    >>> repeated_points(pts, np.array([0, 3, 6])).tolist()
    [1, 4]
    """
    if len(points) < 2:
        return np.zeros(0, dtype=np.int64)
    x, y = points[:, 0], points[:, 1]
    same = x[1:] == x[:-1]                                   # (all(axis=1) is slow)
    same &= y[1:] == y[:-1]
    idx = np.flatnonzero(same) + 1
    if len(idx):                                            # a stroke's first point stays
        starts = np.asarray(offsets[:-1])
        at = np.minimum(np.searchsorted(starts, idx), len(starts) - 1)
        idx = idx[starts[at] != idx]
    return idx


def clean(strokes: Strokes) -> Strokes:
    """Drop consecutive duplicate points inside each stroke (a stroke keeps at least one)."""
    pts, offs = strokes.points, strokes.offsets
    drop = repeated_points(pts, offs)
    if not len(drop):
        return strokes
    removed = np.bincount(np.searchsorted(offs, drop, side="right") - 1,
                          minlength=len(offs) - 1)
    new_offs = np.zeros(len(offs), dtype=np.int64)
    np.cumsum(np.diff(offs) - removed, out=new_offs[1:])
    keep = np.ones(len(pts), dtype=bool)
    keep[drop] = False
    # (take with indices: a boolean index on the rows of a 2-D array is many times slower)
    return Strokes(pts.take(np.flatnonzero(keep), axis=0), new_offs, strokes.intensity,
                   strokes.labels)

"""The basic shapes (rect, circle, ellipse, line, polyline, polygon) as the paths the
specification says they are, as plain segment lists; path data itself is read by
`vectorgen.pathdata`.

A `PathData` holds the segments of one element, in user units of that element, grouped into
continuous sub-paths ("runs"). Segment kinds: 1 line (start, end), 2 quadratic Bezier
(start, control, end), 3 cubic Bezier (start, c1, c2, end), all as complex numbers x + iy, and
4 elliptical arc in endpoint form (start, end, rx, ry, x-axis rotation in degrees, large-arc
flag, sweep flag). `tables_of` turns many of them into one `vectorgen.pathdata.PathTable`
(arcs in centre form), for the geometry stage to map and flatten in vectorised calls.
"""

from __future__ import annotations

import numpy as np

from .pathdata import PathTable, arc_centre_form

__all__ = ["PathData", "circle_path", "ellipse_path", "line_path", "points_path", "rect_path",
           "tables_of"]


class PathData:
    """The segments of one element in its own user units, as continuous runs.

    Attributes
    ----------
    kinds : list of int
        The kind of every segment, in drawing order (1 line, 2 quadratic, 3 cubic, 4 arc).
    rows : dict
        kind -> list of tuples, one per segment of that kind, in drawing order.
    run_len : list of int
        Segments in each run.
    starts : list of complex
        Each run's first point.
    closed : list of bool
        Whether each run was closed (Z, or a closed basic shape).

    Examples
    --------
    >>> p = rect_path(0, 0, 10, 5, 0, 0)
    >>> p.run_len, p.closed, p.kinds
    ([4], [True], [1, 1, 1, 1])
    """

    __slots__ = ("kinds", "rows", "run_len", "starts", "closed")

    def __init__(self):
        self.kinds: list[int] = []
        self.rows: dict[int, list] = {1: [], 2: [], 3: [], 4: []}
        self.run_len: list[int] = []
        self.starts: list[complex] = []
        self.closed: list[bool] = []

    @property
    def segments(self) -> int:
        return len(self.kinds)

    def _begin(self, start: complex) -> None:
        self.run_len.append(0)
        self.starts.append(start)
        self.closed.append(False)

    def _seg(self, kind: int, row: tuple) -> None:
        self.kinds.append(kind)
        self.rows[kind].append(row)
        self.run_len[-1] += 1

    def _drop_empty_run(self) -> None:
        if self.run_len and self.run_len[-1] == 0:
            self.run_len.pop()
            self.starts.pop()
            self.closed.pop()


def points_path(values: list[float], closed: bool) -> PathData:
    """A polyline (open) or polygon (closed) from its coordinate list (SVG 1.1, 9.6 and 9.7: a
    polygon closes back to its first point).

    Examples
    --------
    >>> p = points_path([0, 0, 10, 0, 10, 5], closed=True)
    >>> p.rows[1][-1], p.closed
    (((10+5j), 0j), [True])
    """
    out = PathData()
    pts = [complex(values[i], values[i + 1]) for i in range(0, len(values) - 1, 2)]
    if len(pts) < 2:
        return out
    out._begin(pts[0])
    for a, b in zip(pts[:-1], pts[1:]):
        out._seg(1, (a, b))
    if closed:
        if pts[-1] != pts[0]:
            out._seg(1, (pts[-1], pts[0]))
        out.closed[-1] = True
    return out


def line_path(x1: float, y1: float, x2: float, y2: float) -> PathData:
    """A <line>: one open segment (SVG 1.1, 9.5).

    Examples
    --------
    >>> line_path(0, 0, 3, 4).rows[1]
    [(0j, (3+4j))]
    """
    out = PathData()
    out._begin(complex(x1, y1))
    out._seg(1, (complex(x1, y1), complex(x2, y2)))
    return out


def rect_path(x: float, y: float, w: float, h: float, rx: float, ry: float) -> PathData:
    """A <rect> with corner radii already resolved (SVG 2, 10.2: the equivalent path starts at
    (x + rx, y) and runs clockwise: top edge, top-right corner arc, right edge ...; square
    corners when either radius is 0). Sides of zero length are left out.

    Examples
    --------
    >>> p = rect_path(0, 0, 10, 4, 0, 0)
    >>> [seg[0] for seg in p.rows[1]]
    [0j, (10+0j), (10+4j), 4j]
    """
    out = PathData()
    if rx <= 0 or ry <= 0:
        corners = [complex(x, y), complex(x + w, y), complex(x + w, y + h), complex(x, y + h)]
        out._begin(corners[0])
        for a, b in zip(corners, corners[1:] + corners[:1]):
            out._seg(1, (a, b))
        out.closed[-1] = True
        return out
    pts = [complex(x + rx, y), complex(x + w - rx, y), complex(x + w, y + ry),
           complex(x + w, y + h - ry), complex(x + w - rx, y + h), complex(x + rx, y + h),
           complex(x, y + h - ry), complex(x, y + ry), complex(x + rx, y)]
    out._begin(pts[0])
    for i in range(8):
        a, b = pts[i], pts[i + 1]
        if i % 2 == 0:
            if a != b:
                out._seg(1, (a, b))
        else:
            out._seg(4, (a, b, rx, ry, 0.0, 0, 1))
    out.closed[-1] = True
    return out


def ellipse_path(cx: float, cy: float, rx: float, ry: float) -> PathData:
    """An <ellipse> (or a <circle> with rx = ry = r): four quarter arcs from (cx + rx, cy) in
    the direction of positive angles (SVG 2, 10.3 and 10.4).

    Examples
    --------
    >>> p = ellipse_path(0, 0, 2, 1)
    >>> [seg[1] for seg in p.rows[4]]
    [1j, (-2+0j), -1j, (2+0j)]
    """
    out = PathData()
    pts = [complex(cx + rx, cy), complex(cx, cy + ry), complex(cx - rx, cy), complex(cx, cy - ry)]
    out._begin(pts[0])
    for a, b in zip(pts, pts[1:] + pts[:1]):
        out._seg(4, (a, b, rx, ry, 0.0, 0, 1))
    out.closed[-1] = True
    return out


def circle_path(cx: float, cy: float, r: float) -> PathData:
    """A <circle>: `ellipse_path` with both radii r.

    Examples
    --------
    >>> circle_path(0, 0, 1).rows[4][0][:2]
    ((1+0j), 1j)
    """
    return ellipse_path(cx, cy, r, r)


def tables_of(paths: list) -> PathTable:
    """The segments of many `PathData` in one table; each run's owner is the index of its
    `PathData` in `paths`. Arcs are converted to centre form
    (`vectorgen.pathdata.arc_centre_form`).

    Examples
    --------
    >>> t = tables_of([line_path(0, 0, 3, 4), circle_path(0, 0, 1)])
    >>> t.kinds.tolist(), t.run_owner.tolist(), t.closed.tolist(), t.paths
    ([1, 4, 4, 4, 4], [0, 1], [False, True], 2)
    """
    kinds, run_len, starts, closed, owner = [], [], [], [], []
    rows: dict = {1: [], 2: [], 3: [], 4: []}
    for i, p in enumerate(paths):
        kinds.extend(p.kinds)
        for k in (1, 2, 3, 4):
            rows[k].extend(p.rows[k])
        run_len.extend(p.run_len)
        starts.extend(p.starts)
        closed.extend(p.closed)
        owner.extend([i] * len(p.run_len))
    data = {k: np.array(rows[k], dtype=complex) for k in (1, 2, 3) if rows[k]}
    if rows[4]:
        a = np.array(rows[4], dtype=complex)
        centre, rx, ry, rot, theta, delta = arc_centre_form(
            a[:, 0], a[:, 1], a[:, 2].real, a[:, 3].real, a[:, 4].real, a[:, 5].real != 0,
            a[:, 6].real != 0)
        data[4] = np.column_stack([centre, rx, ry, rot, theta, delta, a[:, 1]])
    return PathTable(np.array(run_len, dtype=np.int64), np.array(kinds, dtype=np.int8), data,
                     np.array(starts, dtype=complex), np.array(closed, dtype=bool),
                     np.array(owner, dtype=np.int64), len(paths))

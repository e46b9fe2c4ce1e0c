"""SVG geometry as plain segment lists: path data parsed by the SVG path grammar, and the basic
shapes (rect, circle, ellipse, line, polyline, polygon) as the paths the specification says they
are.

A `PathData` holds the segments of one element, in user units of that element, grouped into
continuous sub-paths ("runs"). Segment kinds: 1 line (start, end), 2 quadratic Bezier
(start, control, end), 3 cubic Bezier (start, c1, c2, end), all as complex numbers x + iy, and
4 elliptical arc in the path data's own endpoint form (start, end, rx, ry, x-axis rotation in
degrees, large-arc flag, sweep flag). The geometry stage converts arcs to centre form, maps
everything through the element's transform and flattens the lot in vectorised calls.
"""

from __future__ import annotations

import math
import re

from .svgvalues import BadValue

__all__ = ["PathData", "circle_path", "ellipse_path", "line_path", "parse_path_data",
           "points_path", "rect_path"]

# Characters the SVG path grammar allows (SVG 1.1, 8.3.9): command letters, numbers, separators.
_BAD_CHAR = re.compile(r"[^MmZzLlHhVvCcSsQqTtAa0-9eE+\-.,\s]")
_NUM = r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"
_NUMS = re.compile(_NUM)
_ARGS_OK = re.compile(rf"\s*(?:{_NUM}(?:\s*,?\s*{_NUM})*)?\s*")
_COMMAND = re.compile(r"([MmZzLlHhVvCcSsQqTtAa])([^MmZzLlHhVvCcSsQqTtAa]*)")
_SEP = r"\s*,?\s*"
_ARC_ARGS = re.compile(rf"\s*,?\s*({_NUM}){_SEP}({_NUM}){_SEP}({_NUM}){_SEP}([01]){_SEP}([01])"
                       rf"{_SEP}({_NUM}){_SEP}({_NUM})\s*")
_ARITY = {"l": 2, "h": 1, "v": 1, "c": 6, "s": 4, "q": 4, "t": 2, "m": 2}


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
    >>> p = parse_path_data("M 0 0 L 10 0 L 10 10 Z M 20 0 h 5")
    >>> p.run_len, p.closed, p.kinds
    ([3, 1], [True, False], [1, 1, 1, 1])
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


def parse_path_data(d: str) -> PathData:
    """The segments of SVG path data (the ``d`` attribute), absolute and relative.

    Notes
    -----
    SVG 1.1, 8.3: M/m (later pairs are implicit L/l), Z/z (a line back to the sub-path's start
    when it is elsewhere; a command after it starts at that start), L H V C S Q T A; S and T
    reflect the previous control point about the current point when the previous command was
    of their kind (C/S, Q/T), else use the current point. Arcs, SVG 1.1 F.6.2: equal end
    points omit the segment; a zero radius makes it a line; radii are taken as absolute values.
    Anything outside the grammar raises `BadValue` saying where.

    Examples
    --------
    >>> p = parse_path_data("M10,10 q 5 -5 10 0 t 10 0")
    >>> p.rows[2]
    [((10+10j), (15+5j), (20+10j)), ((20+10j), (25+15j), (30+10j))]
    >>> parse_path_data("M 0 0 a 5 5 0 1010 0").rows[4]          # flags written together
    [(0j, (10+0j), 5.0, 5.0, 0.0, 1, 0)]
    """
    m = _BAD_CHAR.search(d)
    if m:
        raise BadValue(f"{m.group()!r} at character {m.start() + 1}, which SVG path syntax does "
                       "not allow")
    if not d.strip() or d.strip() == "none":
        return PathData()
    commands = _commands_fast(d)
    if commands is None:
        commands = _commands_exact(d)
    return _build(commands)


class _Slow(Exception):
    """The quick reading cannot decide: read again command by command."""


_LETTERS = frozenset("MmZzLlHhVvCcSsQqTtAa")
_POSSESSIVE_NUM = r"[+-]?+(?:\d++\.?+\d*+|\.\d++)(?:[eE][+-]?+\d++)?+"
_SPLIT = re.compile(r"([MmZzLlHhVvCcSsQqTtAa])")
# The whole string is letters and numbers with separators between (possessive: no backtracking,
# whatever the input).
_ALL_TOKENS = re.compile(rf"(?:[\s,]*+(?:[MmZzLlHhVvCcSsQqTtAa]|{_POSSESSIVE_NUM}))*+[\s,]*+")


def _commands_fast(d: str):
    """(letter, groups of numbers) for each command: the whole string checked by one pattern,
    split at its command letters, each command's numbers read at once; None when anything
    needs the exact reading (its messages say where)."""
    if not _ALL_TOKENS.fullmatch(d):
        return None
    parts = _SPLIT.split(d)
    if parts[0].strip(" \t\r\n,") or len(parts) < 3 or parts[1] not in "Mm":
        return None
    out = []
    findall = _NUMS.findall
    for i in range(1, len(parts), 2):
        letter, args = parts[i], parts[i + 1]
        low = letter.lower()
        if low == "z":
            if args.strip(" \t\r\n,"):
                return None
            out.append((letter, ()))
            continue
        toks = findall(args)
        k = 7 if low == "a" else _ARITY[low]
        if not toks or len(toks) % k:
            return None
        nums = list(map(float, toks))
        if not math.isfinite(sum(nums)):        # 1e999: the exact reading says which
            return None
        if k == 2:
            out.append((letter, list(zip(nums[0::2], nums[1::2]))))
        elif low == "a":
            if any(f not in ("0", "1") for f in toks[3::7] + toks[4::7]):
                return None                     # flags written together: read exactly
            out.append((letter, [(nums[q], nums[q + 1], nums[q + 2], int(nums[q + 3]),
                                  int(nums[q + 4]), nums[q + 5], nums[q + 6])
                                 for q in range(0, len(nums), 7)]))
        elif k == 1:
            out.append((letter, [(v,) for v in nums]))
        else:
            out.append((letter, [nums[q:q + k] for q in range(0, len(nums), k)]))
    return out


def _commands_exact(d: str) -> list:
    """(letter, groups of numbers) for each command, read command by command, every fault
    raised with its place."""
    out = []
    pos = len(d) - len(d.lstrip())
    for cm in _COMMAND.finditer(d):
        if cm.start() != pos:
            raise BadValue(f"numbers before the first command at character {pos + 1}")
        pos = cm.end()
        letter, args = cm.group(1), cm.group(2)
        low = letter.lower()
        if not out and low != "m":
            raise BadValue(f"path data must begin with a moveto (M), not {letter!r}")
        if low == "z":
            if args.strip(" \t\r\n,"):
                raise BadValue(f"numbers after {letter!r} at character {cm.start(2) + 1}")
            out.append((letter, ()))
            continue
        if low == "a":
            out.append((letter, _arc_args(args, cm.start(2))))
            continue
        if not _ARGS_OK.fullmatch(args):
            raise BadValue(f"malformed numbers after {letter!r} at character {cm.start(2) + 1}")
        nums = [float(v) for v in _NUMS.findall(args)]
        k = _ARITY[low]
        if not nums or len(nums) % k:
            raise BadValue(f"{letter!r} at character {cm.start() + 1} takes numbers in groups "
                           f"of {k}, not {len(nums)}")
        if not all(map(math.isfinite, nums)):
            raise BadValue(f"a number beyond the range of numbers after {letter!r}")
        out.append((letter, [nums[i:i + k] for i in range(0, len(nums), k)]))
    if not out:
        raise BadValue("path data without a command")
    return out


def _build(commands) -> PathData:
    out = PathData()
    kinds, r1, r2, r3, r4 = out.kinds, out.rows[1], out.rows[2], out.rows[3], out.rows[4]
    run_len, starts, closed = out.run_len, out.starts, out.closed
    cur = start = 0j
    prev_cmd = ""
    prev_ctrl = 0j
    in_run = False
    count = 0                       # segments in the current run
    for letter, vals in commands:
        low = letter.lower()
        rel = letter != letter.upper()
        if low == "z":
            if in_run:
                if cur != start:
                    kinds.append(1)
                    r1.append((cur, start))
                    count += 1
                closed[-1] = True
                if count:
                    run_len.append(count)
                else:
                    starts.pop()
                    closed.pop()
            cur = start
            in_run = False
            count = 0
            prev_cmd = "z"
            continue
        if low == "m":
            x, y = vals[0]
            cur = complex(x, y) + (cur if rel and prev_cmd else 0)
            start = cur
            if in_run:
                if count:
                    run_len.append(count)
                else:               # a lone moveto draws nothing
                    starts.pop()
                    closed.pop()
            starts.append(cur)
            closed.append(False)
            in_run, count = True, 0
            prev_cmd = "m"
            vals = vals[1:]
            low = "l"               # later pairs are implicit linetos
            if not vals:
                continue
        if not in_run:              # a drawing command right after Z starts at the same point
            starts.append(cur)
            closed.append(False)
            in_run, count = True, 0
        for v in vals:
            base = cur if rel else 0j
            if low == "l":
                end = complex(v[0], v[1]) + base
                kinds.append(1)
                r1.append((cur, end))
            elif low == "h":
                end = complex(v[0] + (cur.real if rel else 0.0), cur.imag)
                kinds.append(1)
                r1.append((cur, end))
            elif low == "v":
                end = complex(cur.real, v[0] + (cur.imag if rel else 0.0))
                kinds.append(1)
                r1.append((cur, end))
            elif low == "c":
                c1, c2 = complex(v[0], v[1]) + base, complex(v[2], v[3]) + base
                end = complex(v[4], v[5]) + base
                kinds.append(3)
                r3.append((cur, c1, c2, end))
                prev_ctrl = c2
            elif low == "s":
                c1 = 2 * cur - prev_ctrl if prev_cmd in ("c", "s") else cur
                c2, end = complex(v[0], v[1]) + base, complex(v[2], v[3]) + base
                kinds.append(3)
                r3.append((cur, c1, c2, end))
                prev_ctrl = c2
            elif low == "q":
                c, end = complex(v[0], v[1]) + base, complex(v[2], v[3]) + base
                kinds.append(2)
                r2.append((cur, c, end))
                prev_ctrl = c
            elif low == "t":
                c = 2 * cur - prev_ctrl if prev_cmd in ("q", "t") else cur
                end = complex(v[0], v[1]) + base
                kinds.append(2)
                r2.append((cur, c, end))
                prev_ctrl = c
            else:                   # arc
                rx, ry, phi, large, sweep, x, y = v
                end = complex(x, y) + base
                if end == cur:      # F.6.2: equal end points omit the arc
                    prev_cmd = low
                    continue
                if rx == 0 or ry == 0:
                    kinds.append(1)
                    r1.append((cur, end))
                else:
                    kinds.append(4)
                    r4.append((cur, end, abs(rx), abs(ry), phi, large, sweep))
            count += 1
            cur = end
            prev_cmd = low
    if in_run:
        if count:
            run_len.append(count)
        else:
            starts.pop()
            closed.pop()
    return out


def _arc_args(args: str, offset: int) -> list[tuple]:
    vals, pos = [], 0
    while pos < len(args) and args[pos:].strip(" \t\r\n"):
        m = _ARC_ARGS.match(args, pos)
        if not m:
            raise BadValue(f"an arc needs rx ry rotation large-arc-flag sweep-flag x y (flags 0 "
                           f"or 1) at character {offset + pos + 1}")
        g = m.groups()
        nums = (float(g[0]), float(g[1]), float(g[2]), int(g[3]), int(g[4]), float(g[5]),
                float(g[6]))
        if not all(math.isfinite(v) for v in nums):
            raise BadValue("a number beyond the range of numbers in an arc")
        vals.append(nums)
        pos = m.end()
    if not vals:
        raise BadValue(f"an arc command without numbers at character {offset + 1}")
    return vals


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

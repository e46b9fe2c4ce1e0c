"""SVG path data to segment tables, in whole-array operations.

Path data (the ``d`` attribute, SVG 1.1 section 8.3, SVG 2 section 9.3) becomes a
`PathTable`: the `vectorgen.flatten.SegmentTable` the flattener consumes (per kind 1 line,
2 quadratic, 3 cubic Bezier, 4 elliptical arc an array with a row per segment, complex
x + iy), plus each run's closed flag and the string it came from. Three steps, each over
every character, number or command of many strings at once (a drawing's are read in parts of
about 128k characters, whose arrays stay in cache):

1. lexing: characters are classed by a lookup table; a number ends where the grammar's
   longest match ends it (a sign not after an exponent mark, a second decimal point, a point
   after an exponent); each value is assembled from its digits column by column, M 10^k with
   M < 2^53 and |k| <= 22, one correctly rounded operation, so the same double as ``float``
   (the rare number outside that range is read by ``float`` itself);
2. structure: commands take their numbers in groups (implicit repeats; later pairs of a moveto
   are linetos); arc flags written without separators are split off by a 7-state scan of the
   arc's numbers; relative coordinates are running sums, closepath returns to the start of the
   sub-path, smooth curves reflect the previous control point;
3. geometry: arcs from endpoint to centre form (SVG 1.1, F.6.5, with the radii correction of
   F.6.6).

`read_path_list` reads a document's strings and sets aside those at fault (an error only for
an element that is drawn); `select_paths` and `select_runs` take strings or runs of a table in
any order; `transform_table` maps a table through affine maps exactly (arcs through the image
of their ellipse), `concat_tables` joins tables, `table_bounds` and `hull_points` bound them.
"""

from __future__ import annotations

__all__ = ["PathTable", "arc_centre_form", "concat_tables", "hull_points", "parse_path_data",
           "parse_path_list", "read_path_list", "select_paths", "select_runs", "table_bounds",
           "transform_table"]

import numpy as np

from .errors import InputError
from .flatten import SegmentTable

# --- character classes (SVG 1.1, 8.3.9: wsp is #x20 #x9 #xD #xA; SVG 2 adds #xC) ----------
_BAD, _WS, _COMMA, _DIGIT, _DOT, _SIGN, _EXP, _CMD, _BOUND = range(9)
_CLASS = np.zeros(256, dtype=np.uint8)
_CLASS[list(b" \t\r\n\f")] = _WS
_CLASS[ord(",")] = _COMMA
_CLASS[list(b"0123456789")] = _DIGIT
_CLASS[ord(".")] = _DOT
_CLASS[list(b"+-")] = _SIGN
_CLASS[list(b"eE")] = _EXP
_CLASS[list(b"MmZzLlHhVvCcSsQqTtAa")] = _CMD
_CLASS[0] = _BOUND                   # joins path strings (refused inside them)
_CLASS_BYTES = _CLASS.tobytes()

# --- op codes: _START opens every path string (current point 0, nothing to reflect) -------
_START, _M, _Z, _L, _H, _V, _C, _S, _Q, _T, _A = range(11)
_LETTERS = " MZLHVCSQTA"
_OPCODE = np.zeros(256, dtype=np.int8)
for _i, _ch in enumerate(_LETTERS[1:], start=1):
    _OPCODE[ord(_ch)] = _OPCODE[ord(_ch.lower())] = _i
_ARITY = np.array([0, 2, 0, 2, 1, 1, 6, 4, 4, 2, 7], dtype=np.int64)
_GROUPS = {2: "pairs", 4: "groups of 4", 6: "groups of 6", 7: "groups of 7"}
# argument holding the end point's x and y of each op (-1: none)
_X_ARG = np.array([-1, 0, -1, 0, 0, -1, 4, 2, 2, 0, 5])
_Y_ARG = np.array([-1, 1, -1, 1, -1, 0, 5, 3, 3, 1, 6])

_POW10 = 10.0 ** np.arange(23)       # exact doubles
_EXACT_MANTISSA = 2.0 ** 53
_MAX_DIGITS = 22                     # longer mantissas go to float()
_PAD = _MAX_DIGITS + 8


class PathTable(SegmentTable):
    """A `SegmentTable` read from path data, with what the SVG geometry needs besides.

    Parameters
    ----------
    run_len, kinds, data, starts
        As `SegmentTable`: segments per run (R,), kind of every segment (m,) int8, kind ->
        rows, each run's start point (R,) complex. Arcs: columns centre, rx, ry, rotation,
        start angle, sweep (radians), end point.
    closed : (R,) bool
        The run was closed by a closepath (Z or z), whether or not that added a segment.
    run_owner : (R,) int64
        Index of the path string (or of the joined table) each run came from.
    paths : int
        How many path strings the table was read from (owners are 0 .. paths - 1).

    Notes
    -----
    `arcs` (the segment objects of tables built from svgpathtools) is None.
    """

    def __init__(self, run_len, kinds, data, starts, closed, run_owner, paths: int):
        super().__init__(run_len, kinds, data, starts, None)
        self.closed = closed
        self.run_owner = run_owner
        self.paths = int(paths)

    @classmethod
    def empty(cls, paths: int = 0) -> "PathTable":
        """A table without segments."""
        return cls(np.zeros(0, np.int64), np.zeros(0, np.int8), {}, np.zeros(0, complex),
                   np.zeros(0, bool), np.zeros(0, np.int64), paths)


# --- public functions ------------------------------------------------------------------------

def parse_path_data(d: str, where: str = "path") -> PathTable:
    """The segments of one SVG path data string.

    Parameters
    ----------
    d : str
        Path data (the ``d`` attribute). Empty, blank or ``none`` gives an empty table.
    where : str
        What the data belongs to, for error messages (``"path#logo"``).

    Returns
    -------
    PathTable
        One run per sub-path that draws something.

    Raises
    ------
    InputError
        Text outside the path grammar, naming `where` and the character (counted from 1).

    Notes
    -----
    SVG 1.1, 8.3 and SVG 2, 9.3: M/m start a sub-path (their later pairs are L/l); Z/z close
    it with a line back to its start unless already there, and a command after it starts at
    that point; L H V C S Q T A draw, lower case relative to the current point, a first m
    from the origin; S reflects the previous C/S second control point about the current
    point (T the previous Q/T control point), else uses the current point. Arcs (F.6.2, F.6.6):
    equal end points draw nothing, a zero radius draws a line, negative radii count as
    positive, radii too small to reach are scaled up. A moveto with nothing drawn after it
    draws nothing.

    Examples
    --------
    >>> t = parse_path_data("M10,10 h5 q5-5 10 0 t10 0 Z m-1.5.5 l1e1 0")
    >>> t.run_len.tolist(), t.kinds.tolist(), t.closed.tolist()
    ([4, 1], [1, 2, 2, 1, 1], [True, False])
    >>> t.data[2][1].tolist()
    [(25+10j), (30+15j), (35+10j)]
    >>> t.starts.tolist()
    [(10+10j), (8.5+10.5j)]
    """
    return parse_path_list([d], [where])


def parse_path_list(ds, wheres=None) -> PathTable:
    """The segments of many path data strings, read in one pass (see `parse_path_data`).

    Parameters
    ----------
    ds : sequence of str
        Path data strings; each starts from the origin with nothing to reflect.
    wheres : sequence of str, optional
        A name per string for error messages (default ``"path 1"``, ``"path 2"`` ...).

    Returns
    -------
    PathTable
        The runs of all strings in order; ``run_owner`` says which string each came from.

    Raises
    ------
    InputError
        At the first string with text outside the grammar.

    Examples
    --------
    >>> t = parse_path_list(["M0 0 1 1", "", "m2 2 h1z"])
    >>> t.run_owner.tolist(), t.run_len.tolist(), t.paths
    ([0, 2], [1, 2], 3)
    """
    ds = ["" if d.strip() == "none" else d for d in ds]
    if wheres is not None and len(wheres) != len(ds):
        raise InputError(f"wheres must name each of the {len(ds)} path strings (wheres has "
                         f"{len(wheres)})", parameter="wheres")
    if not any(ds):
        return PathTable.empty(len(ds))
    try:
        return _read(ds)
    except _Fault as fault:
        where = wheres[fault.index] if wheres is not None else f"path {fault.index + 1}"
        raise InputError(f"{where}: {fault.reason}") from None


def read_path_list(ds) -> tuple[PathTable, dict]:
    """The segments of many path data strings, read in one pass, with the strings that are
    not path data set aside instead of raising (see `parse_path_data`).

    Parameters
    ----------
    ds : sequence of str

    Returns
    -------
    table : PathTable
        The runs of every string that reads; a string set aside has none.
    faults : dict
        For each string set aside, its index -> the reason, one line saying the character
        (counted from 1 in that string) and what is wrong there.

    Notes
    -----
    A document may hold path data that is never drawn (in ``<defs>``, under ``display:
    none``), where a fault is no error; so every string of a document is read at once and
    a fault is only reported for the element that is drawn. A batch with a fault is split
    round the string at fault and its parts read again: k faults cost about 2 k + 2 passes
    over shorter and shorter parts.

    Examples
    --------
    >>> t, faults = read_path_list(["M0 0 L1 1", "M 0 0 L 10 x", "m2 2 h1"])
    >>> t.run_owner.tolist(), faults
    ([0, 2], {1: "path data not understood at character 12: 'x' is not part of the path \
syntax (near 'M 0 0 L 10 x')"})
    """
    ds = ["" if d.strip() == "none" else d for d in ds]
    faults: dict = {}

    def sweep(lo: int, hi: int) -> None:
        part = ds[lo:hi]
        if not any(part):
            return
        try:
            _read(part)
        except _Fault as fault:
            at = lo + fault.index
            faults[at] = fault.reason
            sweep(lo, at)
            mid = (at + 1 + hi) // 2
            sweep(at + 1, mid)
            sweep(mid, hi)

    try:
        return (_read(ds) if any(ds) else PathTable.empty(len(ds))), faults
    except _Fault:
        sweep(0, len(ds))
    kept = ["" if i in faults else d for i, d in enumerate(ds)]
    return (_read(kept) if any(kept) else PathTable.empty(len(ds))), faults


def select_runs(table: PathTable, runs, run_owner=None, paths=None) -> PathTable:
    """The table of some of a table's runs, in the order given (a run may come more than
    once).

    Parameters
    ----------
    table : PathTable
    runs : array_like of int
        Indices of the runs to take.
    run_owner : array_like of int, optional
        The owner of each run taken (default: its owner in `table`).
    paths : int, optional
        How many owners the new table counts (default: as `table`).

    Returns
    -------
    PathTable

    Examples
    --------
    >>> t = parse_path_list(["M0 0 L1 1", "M5 5 Q 6 6 7 5 Z"])
    >>> u = select_runs(t, [1, 0, 1])
    >>> u.kinds.tolist(), u.run_owner.tolist(), u.closed.tolist()
    ([2, 1, 1, 2, 1], [1, 0, 1], [True, False, True])
    """
    runs = np.asarray(runs, dtype=np.int64).reshape(-1)
    run_len = np.asarray(table.run_len, dtype=np.int64)
    kinds = np.asarray(table.kinds, dtype=np.int8)
    first = np.cumsum(run_len) - run_len
    new_len = run_len[runs]
    n = int(new_len.sum())
    head = np.cumsum(new_len) - new_len
    segs = np.repeat(first[runs] - head, new_len) + np.arange(n)
    new_kinds = kinds[segs]
    data = {}
    for k, rows in table.data.items():
        if len(rows):
            rank = np.cumsum(kinds == k) - 1            # each segment's row among its kind
            rows_taken = rank[segs[new_kinds == k]]
            if len(rows_taken):
                data[k] = rows[rows_taken]
    owner = table.run_owner[runs] if run_owner is None else np.asarray(run_owner,
                                                                        dtype=np.int64)
    return PathTable(new_len, new_kinds, data, np.asarray(table.starts)[runs],
                     np.asarray(table.closed)[runs], owner,
                     table.paths if paths is None else paths)


def select_paths(table: PathTable, which) -> PathTable:
    """The runs of some of a table's path strings, in the order given (a string may come
    more than once); each run's owner becomes the place of its string in `which`.

    Parameters
    ----------
    table : PathTable
    which : array_like of int
        Indices of path strings of `table` (its owners).

    Returns
    -------
    PathTable
        ``paths`` is ``len(which)``.

    Examples
    --------
    >>> t = parse_path_list(["M0 0 L1 1", "", "M5 5 h1 m1 1 v1"])
    >>> u = select_paths(t, [2, 0])
    >>> u.run_owner.tolist(), u.run_len.tolist(), u.paths
    ([0, 0, 1], [1, 1, 1], 2)
    """
    which = np.asarray(which, dtype=np.int64).reshape(-1)
    owner = np.asarray(table.run_owner, dtype=np.int64)
    if len(which) == table.paths and np.array_equal(which, np.arange(table.paths)):
        return table
    lo = np.searchsorted(owner, which, side="left")       # owners are in order
    count = np.searchsorted(owner, which, side="right") - lo
    total = int(count.sum())
    head = np.cumsum(count) - count
    runs = np.repeat(lo - head, count) + np.arange(total)
    return select_runs(table, runs, np.repeat(np.arange(len(which)), count), len(which))


def hull_points(table: SegmentTable) -> np.ndarray:
    """Points whose bounding box holds every segment of a table (complex): run starts,
    control and end points of lines and Beziers, and arc ends with those extremes of their
    ellipses that lie on their sweep (see `table_bounds`).

    Examples
    --------
    >>> hull_points(parse_path_data("M1 0 A1 1 0 0 1 -1 0")).round(12).tolist()
    [(1+0j), (-1+0j), (1+0j), 1j, (-1+0j)]
    """
    parts = [np.asarray(table.starts, dtype=complex)]
    parts += [table.data[k].ravel() for k in (1, 2, 3) if k in table.data]
    if 4 in table.data and len(table.data[4]):
        a = table.data[4]
        parts.append(a[:, 6])
        parts.append(_arc_extremes(a[:, 0], a[:, 1].real, a[:, 2].real, a[:, 3].real,
                                   a[:, 4].real, a[:, 5].real))
    return np.concatenate(parts)


def arc_centre_form(start, end, rx, ry, rotation_deg, large_arc, sweep):
    """Elliptical arcs from endpoint to centre parameterisation.

    Parameters
    ----------
    start, end : array_like, complex
        End points (not equal).
    rx, ry : array_like
        Radii (non-zero; signs are dropped).
    rotation_deg : array_like
        Rotation of the ellipse's x axis, degrees.
    large_arc, sweep : array_like of bool
        The arc flags.

    Returns
    -------
    centre : complex ndarray
    rx, ry : ndarray
        Radii, scaled up where they were too small.
    rotation, theta, delta : ndarray
        Rotation, start angle and sweep of the parametric angle, radians: the arc is
        centre + R(rotation) (rx cos t, ry sin t), t from theta to theta + delta.

    Notes
    -----
    SVG 1.1, F.6.5, with (x1', y1') = R(-phi) (p1 - p2) / 2:
    c' = +-sqrt((rx^2 ry^2 - rx^2 y1'^2 - ry^2 x1'^2) / (rx^2 y1'^2 + ry^2 x1'^2))
    (rx y1' / ry, -ry x1' / rx), + when the flags differ; c = R(phi) c' + (p1 + p2) / 2;
    theta = angle((1, 0), u), delta = angle(u, v) mod 360 degrees with u = ((x1' - cx') / rx,
    (y1' - cy') / ry), v = ((-x1' - cx') / rx, (-y1' - cy') / ry), negative when sweep is 0,
    positive when 1. F.6.6: with Lambda = x1'^2 / rx^2 + y1'^2 / ry^2 > 1 the radii are
    multiplied by sqrt(Lambda) (the centre is then the chord's midpoint).

    Examples
    --------
    >>> c, rx, ry, rot, theta, delta = arc_centre_form(0j, 10 + 0j, 5, 5, 0, False, True)
    >>> complex(c[0]), float(np.degrees(theta[0])), float(np.degrees(delta[0]))
    ((5+0j), 180.0, 180.0)
    """
    start = np.atleast_1d(np.asarray(start, dtype=complex))
    end = np.atleast_1d(np.asarray(end, dtype=complex))
    rx = np.abs(np.atleast_1d(np.asarray(rx, dtype=float)))
    ry = np.abs(np.atleast_1d(np.asarray(ry, dtype=float)))
    phi = np.radians(np.atleast_1d(np.asarray(rotation_deg, dtype=float)))
    large = np.atleast_1d(np.asarray(large_arc, dtype=bool))
    sweep = np.atleast_1d(np.asarray(sweep, dtype=bool))
    cphi, sphi = np.cos(phi), np.sin(phi)
    half = (start - end) / 2.0
    x1 = cphi * half.real + sphi * half.imag
    y1 = -sphi * half.real + cphi * half.imag
    lam = (x1 / rx) ** 2 + (y1 / ry) ** 2
    grow = np.sqrt(np.maximum(lam, 1.0))
    rx, ry = rx * grow, ry * grow
    with np.errstate(divide="ignore", invalid="ignore"):
        num = (rx * ry) ** 2 - (rx * y1) ** 2 - (ry * x1) ** 2
        den = (rx * y1) ** 2 + (ry * x1) ** 2
        # scaled radii put the centre on the chord: the radicand is 0 up to rounding
        root = np.where(lam < 1.0, np.sqrt(np.maximum(num, 0.0) / den), 0.0)
    root = np.where(large != sweep, root, -root)
    cxp, cyp = root * rx * y1 / ry, -root * ry * x1 / rx
    mid = (start + end) / 2.0
    centre = (cphi * cxp - sphi * cyp + mid.real) + 1j * (sphi * cxp + cphi * cyp + mid.imag)
    ux, uy = (x1 - cxp) / rx, (y1 - cyp) / ry
    vx, vy = (-x1 - cxp) / rx, (-y1 - cyp) / ry
    theta = np.arctan2(uy, ux)
    delta = np.arctan2(ux * vy - uy * vx, ux * vx + uy * vy)
    delta = np.where(~sweep & (delta > 0), delta - 2 * np.pi, delta)
    delta = np.where(sweep & (delta < 0), delta + 2 * np.pi, delta)
    return centre, rx, ry, phi, theta, delta


def concat_tables(tables) -> PathTable:
    """Several tables joined in order into one.

    Parameters
    ----------
    tables : sequence of SegmentTable
        `PathTable` or any `SegmentTable` (their runs count as open, from one string each).

    Returns
    -------
    PathTable
        Runs in order; owners numbered on from table to table (a `PathTable` of n strings
        takes n numbers, any other table one).

    Examples
    --------
    >>> t = concat_tables([parse_path_data("M0 0 L1 0"), parse_path_data("M5 5 H9 Z")])
    >>> t.run_len.tolist(), t.run_owner.tolist(), t.closed.tolist()
    ([1, 2], [0, 1], [False, True])
    """
    tables = list(tables)
    if not tables:
        return PathTable.empty()
    run_len, kinds, starts, closed, owner = [], [], [], [], []
    rows = {1: [], 2: [], 3: [], 4: []}
    paths = 0
    for t in tables:
        run_len.append(np.asarray(t.run_len, dtype=np.int64))
        kinds.append(np.asarray(t.kinds, dtype=np.int8))
        starts.append(np.asarray(t.starts, dtype=complex))
        n_runs = len(t.run_len)
        if isinstance(t, PathTable):
            closed.append(t.closed)
            owner.append(t.run_owner + paths)
            paths += t.paths
        else:
            closed.append(np.zeros(n_runs, dtype=bool))
            owner.append(np.full(n_runs, paths, dtype=np.int64))
            paths += 1
        for k in rows:
            if k in t.data and len(t.data[k]):
                rows[k].append(t.data[k])
    data = {k: np.concatenate(v) for k, v in rows.items() if v}
    return PathTable(np.concatenate(run_len), np.concatenate(kinds), data,
                     np.concatenate(starts), np.concatenate(closed), np.concatenate(owner),
                     paths)


def transform_table(table: SegmentTable, matrix, run_map=None) -> PathTable:
    """A table mapped through affine maps p -> A p + b, exactly.

    Parameters
    ----------
    table : SegmentTable
    matrix : array_like
        One map as a 3 x 3 or 2 x 3 matrix ([[a, c, e], [b, d, f]] as SVG's
        ``matrix(a b c d e f)``) or the six numbers (a, b, c, d, e, f); or a stack of K of
        them, shape (K, 3, 3), (K, 2, 3) or (K, 6), with `run_map`.
    run_map : array_like of int, optional
        For a stack: the map of each run (R,), indices into the stack.

    Returns
    -------
    PathTable

    Raises
    ------
    InputError
        A matrix of the wrong shape, or `run_map` not matching. (A map with non-finite
        entries gives non-finite points, for the caller's checks on coordinates to catch.)

    Notes
    -----
    Lines and Beziers map through their control points. An arc is c + K (cos t, sin t) with
    K = A R(phi) diag(rx, ry); with the singular value decomposition K = U S V^T (U made a
    rotation) its image is A c + b + R(phi') diag(s1, s2) (cos t', sin t'), phi' the angle of
    U's first column: t' = t - beta when V = R(beta) (det A > 0), t' = beta - t, the sweep
    reversed, when V = R(beta) diag(1, -1) (det A < 0). An arc whose image is flat (s2 at
    most 1e-12 s1, as under a map of rank < 2) becomes the line between its mapped end
    points.

    Examples
    --------
    >>> t = parse_path_data("M1 0 A1 1 0 0 1 0 1")          # a quarter circle
    >>> u = transform_table(t, [[2, 0, 0], [0, 1, 0]])      # x stretched twice
    >>> a = u.data[4][0]
    >>> round(float(a[1].real), 12), round(float(a[2].real), 12), complex(a[6])
    (2.0, 1.0, 1j)
    """
    mats = _affine_stack(matrix)
    n_runs = len(table.run_len)
    if run_map is None:
        if len(mats) != 1:
            raise InputError(f"a stack of {len(mats)} matrices needs run_map, one index per "
                             "run (run_map=None)", parameter="run_map")
        run_mat = np.zeros(n_runs, dtype=np.int64)
    else:
        run_mat = np.asarray(run_map, dtype=np.int64).reshape(-1)
        if run_mat.shape != (n_runs,) or (run_mat.size and (
                run_mat.min() < 0 or run_mat.max() >= len(mats))):
            raise InputError(f"run_map must give each of the {n_runs} runs an index below "
                             f"{len(mats)} (run_map has {run_mat.size} entries)",
                             parameter="run_map")
    kinds = np.asarray(table.kinds, dtype=np.int8)
    seg_mat = np.repeat(run_mat, np.asarray(table.run_len, dtype=np.int64))
    data = {}
    for k in (1, 2, 3):
        if k in table.data and len(table.data[k]):
            data[k] = _map_points(table.data[k], mats, seg_mat[kinds == k])
    starts = _map_points(np.asarray(table.starts, dtype=complex), mats, run_mat)
    new_kinds = kinds
    if 4 in table.data and len(table.data[4]):
        arc_seg = np.flatnonzero(kinds == 4)
        arc_mat = seg_mat[arc_seg]
        arcs, flat = _map_arcs(table.data[4], mats, arc_mat)
        if flat.any():
            seg_start = _segment_starts(table)
            line_rows = np.column_stack([_map_points(seg_start[arc_seg[flat]], mats,
                                                     arc_mat[flat]),
                                         arcs[flat, 6]])
            new_kinds = kinds.copy()
            new_kinds[arc_seg[flat]] = 1
            every = np.zeros((len(kinds), 2), dtype=complex)
            if 1 in data:
                every[kinds == 1] = data[1]
            every[arc_seg[flat]] = line_rows
            data[1] = every[new_kinds == 1]
            arcs = arcs[~flat]
        if len(arcs):
            data[4] = arcs
    closed = table.closed if isinstance(table, PathTable) else np.zeros(n_runs, dtype=bool)
    owner = table.run_owner if isinstance(table, PathTable) else np.zeros(n_runs, np.int64)
    paths = table.paths if isinstance(table, PathTable) else 1
    return PathTable(np.asarray(table.run_len, dtype=np.int64), new_kinds, data, starts,
                     closed, owner, paths)


def table_bounds(table: SegmentTable):
    """The bounding box (x0, y0, x1, y1) of a table's segments; None without segments.

    Lines and Beziers count with their control points (the box holds the curve, not always
    tightly); an arc with its end points and those extremes of its ellipse in x and in y that
    lie on its sweep.

    Notes
    -----
    On c + R(phi) (rx cos t, ry sin t), dx/dt = 0 at t = atan2(-ry sin phi, rx cos phi) and
    dy/dt = 0 at t = atan2(ry cos phi, rx sin phi), each also + pi. An angle t is on the arc
    when (t - theta) mod 2 pi <= delta (delta >= 0), or (theta - t) mod 2 pi <= -delta.

    Examples
    --------
    >>> table_bounds(parse_path_data("M1 0 A1 1 0 0 1 -1 0"))   # upper half circle (y down)
    (-1.0, 0.0, 1.0, 1.0)
    """
    if not len(table.kinds):
        return None
    z = hull_points(table)
    return (float(z.real.min()), float(z.imag.min()), float(z.real.max()),
            float(z.imag.max()))


# --- reading ---------------------------------------------------------------------------------

_BATCH_CHARS = 1 << 17


def _read(ds: list) -> PathTable:
    """The table of path strings, read in batches of about _BATCH_CHARS characters (every
    array of a batch stays small enough to be in cache and reused: a whole drawing's arrays
    at once are fresh memory, a page fault per 4 KiB); raises `_Fault` for the first string
    at fault, by its index in `ds`."""
    sizes = np.fromiter((len(d) + 1 for d in ds), dtype=np.int64, count=len(ds))
    ends = np.cumsum(sizes)
    if not len(ds) or ends[-1] <= _BATCH_CHARS:
        return _Reader(ds).table()
    cuts = np.searchsorted(ends, np.arange(_BATCH_CHARS, ends[-1], _BATCH_CHARS)) + 1
    bounds = sorted({0, len(ds), *cuts[cuts < len(ds)].tolist()})
    tables = []
    for lo, hi in zip(bounds[:-1], bounds[1:]):
        part = ds[lo:hi]
        if not any(part):
            tables.append(PathTable.empty(hi - lo))
            continue
        try:
            tables.append(_Reader(part).table())
        except _Fault as fault:
            fault.index += lo
            raise
    return concat_tables(tables)


class _Fault(Exception):
    """Text outside the path grammar: the string's index in its batch and the reason."""

    def __init__(self, index: int, reason: str):
        super().__init__(reason)
        self.index, self.reason = index, reason


class _Reader:
    """One pass over many path strings joined into one text, each opened by a start mark."""

    def __init__(self, ds: list):
        self.ds = ds
        lens = np.fromiter((len(d) for d in ds), dtype=np.int64, count=len(ds))
        self.offsets = np.cumsum(lens + 1) - (lens + 1)      # each path's start mark
        text = "\x00" + "\x00".join(ds)
        self.text = text
        for i, d in enumerate(ds):
            if "\x00" in d:
                self._fail(int(self.offsets[i]) + 1 + d.index("\x00"),
                           "'\\x00' is not part of the path syntax")
        try:
            raw = (text + " " * _PAD).encode("ascii")
        except UnicodeEncodeError as exc:
            self._fail(exc.start, f"{text[exc.start]!r} is not part of the path syntax")
        self.codes = np.frombuffer(raw, dtype=np.uint8)
        self.cls = np.frombuffer(raw.translate(_CLASS_BYTES), dtype=np.uint8)

    # errors ----------------------------------------------------------------------------------

    def _fail(self, pos: int, reason: str):
        i = int(np.searchsorted(self.offsets, pos, side="right")) - 1
        local = int(pos - self.offsets[i] - 1)
        near = self.ds[i][max(0, local - 12):local + 12]
        raise _Fault(i, f"path data not understood at character {local + 1}: {reason} "
                        f"(near {near!r})")

    def _first(self, problems: list):
        """Raise the problem (position, reason) earliest in the text, if any."""
        if problems:
            pos, reason = min(problems, key=lambda p: p[0])
            self._fail(pos, reason() if callable(reason) else reason)

    def _char(self, pos: int) -> str:
        return repr(self.text[pos])

    # the table -------------------------------------------------------------------------------

    def table(self) -> PathTable:
        st, en = self._numbers()
        fields = self._fields(st, en)
        return _geometry(fields, len(self.ds))

    def _numbers(self):
        """Number tokens as [start, end) character spans, checked against the grammar:
        number ::= sign? (digits "."? digits? | "." digits) (("e" | "E") sign? digits)?"""
        cls = self.cls
        numeric = (cls >= _DIGIT) & (cls <= _EXP)
        before = np.empty_like(numeric)
        before[0] = False
        before[1:] = numeric[:-1]
        after_exp = np.empty_like(numeric)
        after_exp[0] = False
        after_exp[1:] = cls[:-1] == _EXP
        fresh = numeric & ~before
        fresh |= (cls == _SIGN) & ~after_exp
        # a point starts a new number when one before it in the same stretch had a point or
        # an exponent mark ("1.5.5" is 1.5 and .5; "1e5.5" is 1e5 and .5)
        marks = np.flatnonzero((cls == _DOT) | (cls == _EXP))
        if marks.size > 1:
            stretch = np.cumsum(fresh, dtype=np.int32)[marks]
            again = np.flatnonzero((stretch[1:] == stretch[:-1]) & (cls[marks[1:]] == _DOT))
            fresh[marks[again + 1]] = True
        goes_on = np.empty_like(numeric)
        goes_on[-1] = False
        goes_on[:-1] = numeric[1:] & ~fresh[1:]
        st = np.flatnonzero(fresh)
        en = np.flatnonzero(numeric & ~goes_on) + 1
        self._check_lexemes(st, en, marks)
        return st, en

    def _check_lexemes(self, st, en, marks):
        cls, problems = self.cls, []
        bad = np.flatnonzero(cls == _BAD)
        if bad.size:
            p = int(bad[0])
            problems.append((p, lambda p=p: f"{self._char(p)} is not part of the path syntax"))
        # the mantissa needs a digit: sign? then a digit, or a point and a digit
        m0 = st + (cls[st] == _SIGN)
        c0 = cls[m0]
        ok = (c0 == _DIGIT) | ((c0 == _DOT) & (cls[m0 + 1] == _DIGIT))
        ok &= m0 < en
        if not ok.all():
            p = int(st[np.argmin(ok)])
            problems.append((p, lambda p=p: f"a number needs a digit before {self._char(p)}"
                             if cls[p] == _EXP else "a number has no digits"))
        exps = marks[cls[marks] == _EXP]
        if exps.size:
            nxt = cls[exps + 1]
            ok = (nxt == _DIGIT) | ((nxt == _SIGN) & (cls[exps + 2] == _DIGIT))
            if exps.size > 1:         # one exponent per number
                tok = np.searchsorted(st, exps, side="right")
                ok[1:] &= tok[1:] != tok[:-1]
            if not ok.all():
                p = int(exps[np.argmin(ok)])
                problems.append((p, "an exponent mark needs digits after it"))
        commas = np.flatnonzero(cls == _COMMA)
        if commas.size:
            problems += self._check_commas(commas, st)
        self._first(problems)

    def _check_commas(self, commas, st):
        """A comma stands between two numbers (comma-wsp: wsp* "," wsp*)."""
        cls = self.cls
        other = np.flatnonzero((cls == _COMMA) | (cls >= _CMD) | (cls == _BAD))
        # with -1 and len(text) at both ends, every comma has a neighbour each way
        far = len(cls)
        nums = np.concatenate([[-1], st, [far]])
        others = np.concatenate([[-1], other, [far]])
        prev_num = nums[np.searchsorted(nums, commas) - 1]
        prev_other = others[np.searchsorted(others, commas) - 1]
        next_num = nums[np.searchsorted(nums, commas, side="right")]
        next_other = others[np.searchsorted(others, commas, side="right")]
        ok = (prev_num > prev_other) & (next_num < next_other)
        if ok.all():
            return []
        return [(int(commas[np.argmin(ok)]), "a comma must stand between two numbers")]

    def _fields(self, st, en):
        """Commands with their numbers (arc flags split off), checked for counts."""
        cls, codes = self.cls, self.codes
        cpos = np.flatnonzero(cls >= _CMD)
        op = _OPCODE[codes[cpos]].astype(np.int64)
        n_tok = len(st)
        nb = np.searchsorted(st, cpos)
        cnt = np.diff(np.append(nb, n_tok))
        share = np.ones(n_tok, dtype=np.int64)       # numbers each token stands for
        arcs = np.flatnonzero(op == _A)
        pieces = None
        if arcs.size:
            # a bad flag explains a wrong count after it: it is reported first
            pieces, arc_problems = self._arc_pieces(st, en, nb, cnt, arcs, share)
            self._first(arc_problems)
        first_field = np.concatenate([[0], np.cumsum(share)])
        n_fields = first_field[nb + cnt] - first_field[nb]
        self._first(self._check_counts(cpos, op, n_fields, nb, cnt, st))
        values = _number_values(self.codes, self.cls, self.text, st, en)
        if not np.isfinite(values).all():
            p = int(st[np.argmin(np.isfinite(values))])
            self._fail(p, "a number beyond the range of double precision")
        fields = np.empty(int(first_field[-1]))
        fields[first_field[:-1]] = values
        if pieces is not None:
            for at, value in pieces:
                fields[first_field[at[0]] + at[1]] = value
        return _Commands(op, codes[cpos] >= ord("a"), n_fields, first_field[nb], fields)

    def _arc_pieces(self, st, en, nb, cnt, arcs, share):
        """Split arc flags written without separators ("a1 1 0 0110 20": flags 0 and 1,
        x 10) off the tokens at flag positions; returns the values that replace tokens'
        own ((token, piece) -> value) and problems. `share` gets each token's field count.

        A 7-state scan (the field an arc's next number fills): a token at field 3 may hold
        both flags and x, one at field 4 the second flag and x; composed as a parallel
        prefix over each arc command's tokens."""
        codes, cls = self.codes, self.cls
        lens = cnt[arcs]
        n = int(lens.sum())
        problems = []
        if n == 0:
            return None, problems
        head = np.cumsum(lens) - lens
        tok = np.repeat(nb[arcs] - head, lens) + np.arange(n)
        place = np.arange(n) - np.repeat(head, lens)
        size = (en - st)[tok]
        state = place % 7
        if (size[(state == 3) | (state == 4)] > 1).any():
            state = _arc_states(size, place, int(lens.max()))
        at3, at4 = state == 3, state == 4
        share[tok] = np.where(at3, np.minimum(size, 3), np.where(at4, np.minimum(size, 2), 1))
        s = st[tok]
        c0, c1 = codes[s], codes[s + 1]
        flag0_bad = (at3 | at4) & (c0 != 48) & (c0 != 49)
        flag1_bad = at3 & (size >= 2) & (c1 != 48) & (c1 != 49)
        rest = (at3 & (size >= 3)) | (at4 & (size >= 2))
        r = s + np.where(at3, 2, 1)
        rest_bad = rest & ~((cls[r] == _DIGIT) | ((cls[r] == _DOT) & (cls[r + 1] == _DIGIT)))
        for mask, shift, reason in ((flag0_bad, 0, "an arc flag must be 0 or 1"),
                                    (flag1_bad, 1, "an arc flag must be 0 or 1"),
                                    (rest_bad, None, "an arc's x must follow its flags")):
            if mask.any():
                k = int(np.argmax(mask))
                p = int(s[k] + (shift if shift is not None else (2 if at3[k] else 1)))
                problems.append((p, reason))
        pieces = []
        flags = at3 | at4
        if flags.any():
            pieces.append(((tok[flags], 0), (c0[flags] - 48).astype(float)))
        two = at3 & (size >= 2)
        if two.any():
            pieces.append(((tok[two], 1), (c1[two] - 48).astype(float)))
        if rest.any() and not rest_bad.any():
            vals = _number_values(codes, cls, self.text, r[rest], en[tok[rest]])
            pieces.append(((tok[rest], np.where(at3[rest], 2, 1)), vals))
        return pieces, problems

    def _check_counts(self, cpos, op, n_fields, nb, cnt, st):
        problems = []
        text = self.text
        start = op == _START
        following = np.append(op[1:], _START)         # the command after each start mark
        first_bad = start & (following != _START) & (following != _M)
        if first_bad.any():
            p = int(cpos[np.argmax(first_bad) + 1])
            problems.append((p, f"path data must begin with a moveto (M or m), not "
                                f"{text[p]!r}"))
        lead = start & (cnt > 0)
        if lead.any():
            k = int(np.argmax(lead))
            problems.append((int(st[nb[k]]), "path data must begin with a moveto (M or m)"))
        closes = (op == _Z) & (cnt > 0)
        if closes.any():
            k = int(np.argmax(closes))
            problems.append((int(st[nb[k]]), f"{text[cpos[k]]!r} takes no numbers"))
        arity = _ARITY[op]
        draws = arity > 0
        wrong = draws & ((n_fields == 0) | (n_fields % np.maximum(arity, 1) != 0))
        if wrong.any():
            k = int(np.argmax(wrong))
            letter = text[cpos[k]]
            reason = (f"{letter!r} needs numbers after it" if n_fields[k] == 0 else
                      f"{letter!r} takes numbers in {_GROUPS[int(arity[k])]}, not "
                      f"{int(n_fields[k])}")
            problems.append((int(cpos[k]), reason))
        return problems


def _arc_states(size, place, longest: int) -> np.ndarray:
    """The field (0 to 6) each arc number token starts at, when flags may share tokens.

    Each token maps the field before it to the field after it: +1, except that at field 3 a
    token of 2 or 3 characters or more also holds the second flag (and x), at field 4 a token
    of 2 or more also holds x. The maps are composed along each arc command (Hillis-Steele
    scan, `place` the token's index in its command), from field 0.
    """
    n = len(size)
    step = np.tile(((np.arange(7) + 1) % 7).astype(np.intp), (n, 1))
    step[:, 3] = (3 + np.minimum(size, 3)) % 7
    step[:, 4] = (4 + np.minimum(size, 2)) % 7
    reach = 1
    while reach < longest:
        rows = np.flatnonzero(place >= reach)
        step[rows] = np.take_along_axis(step[rows], step[rows - reach], axis=1)
        reach *= 2
    state = np.zeros(n, dtype=np.intp)
    state[1:] = step[:-1, 0]
    state[place == 0] = 0
    return state


class _Commands:
    """Commands in text order: op code, relative, number of fields, first field index, and
    the flat field values."""

    def __init__(self, op, rel, n_fields, first, fields):
        self.op, self.rel, self.n_fields, self.first, self.fields = (op, rel, n_fields, first,
                                                                     fields)


def _number_values(codes, cls, text, st, en) -> np.ndarray:
    """Values of valid number spans [st, en), digit column by digit column.

    Notes
    -----
    The mantissa digits give an integer M (exact in a double while M < 2^53) and the
    number is M 10^k, k the exponent less the digits after the point; with |k| <= 22 the
    power is an exact double, so one multiplication or division rounds once, correctly,
    as ``float`` does. Other numbers are read by ``float``.
    """
    k_n = len(st)
    if not k_n:
        return np.zeros(0)
    mant = en - st
    lo = int(st[0])
    exps = np.flatnonzero(cls[lo:int(en[-1])] == _EXP) + lo
    if exps.size:
        owner = np.searchsorted(st, exps, side="right") - 1
        keep = (owner >= 0) & (exps < en[np.maximum(owner, 0)])
        exps, owner = exps[keep], owner[keep]
        mant[owner] = exps - st[owner]
    width = int(min(mant.max(), _MAX_DIGITS + 2))
    m = np.zeros(k_n)
    frac = np.zeros(k_n, dtype=np.int64)
    point = np.zeros(k_n, dtype=bool)
    for j in range(width):
        c = codes[st + j]
        inside = j < mant
        digit = c - np.uint8(48)
        is_digit = (digit < 10) & inside
        m = np.where(is_digit, m * 10.0 + digit, m)
        point |= (c == 46) & inside
        frac += is_digit & point
    power = -frac
    if exps.size:
        power[owner] += _exponents(codes, exps, en[owner])
    exact = (m < _EXACT_MANTISSA) & (np.abs(power) <= 22) & (mant <= width)
    up = _POW10[np.clip(power, 0, 22)]
    down = _POW10[np.clip(-power, 0, 22)]
    value = np.where(power >= 0, m * up, m / down)
    value = np.where(codes[st] == 45, -value, value)
    if not exact.all():
        for i in np.flatnonzero(~exact).tolist():
            value[i] = float(text[st[i]:en[i]])
    return value


def _exponents(codes, exps, ends) -> np.ndarray:
    """Exponent values after the marks at `exps` (numbers ending at `ends`); beyond 4
    digits they are capped (the number then goes to ``float``)."""
    sign = codes[exps + 1]
    neg = sign == 45
    first = exps + 1 + ((sign == 45) | (sign == 43))
    n = ends - first
    x = np.zeros(len(exps), dtype=np.int64)
    for j in range(int(min(n.max(), 5))):
        inside = j < n
        x = np.where(inside, x * 10 + (codes[first + j].astype(np.int64) - 48), x)
    x = np.where(n > 5, 99999, x)
    return np.where(neg, -x, x)


# --- geometry --------------------------------------------------------------------------------

def _geometry(cmds: _Commands, paths: int) -> PathTable:
    """Commands to segments: implicit repeats, running current point, reflections, arcs."""
    op_c, ar = cmds.op, _ARITY[cmds.op]
    n_ops = np.where(ar > 0, cmds.n_fields // np.maximum(ar, 1), 1)
    cmd = np.repeat(np.arange(len(op_c)), n_ops)
    head = np.cumsum(n_ops) - n_ops
    within = np.arange(len(cmd)) - head[cmd]
    code = op_c[cmd]
    code[(code == _M) & (within > 0)] = _L            # later pairs of a moveto are linetos
    rel = cmds.rel[cmd]
    arity = _ARITY[code]
    base = cmds.first[cmd] + within * arity
    cols = np.arange(7)
    take = cols[None, :] < arity[:, None]
    idx = np.where(take, base[:, None] + cols[None, :], 0)
    args = np.where(take, cmds.fields[idx] if len(cmds.fields) else 0.0, 0.0)

    n = len(code)
    rows = np.arange(n)
    is_z = code == _Z
    last_m = np.maximum.accumulate(np.where(code == _M, rows, 0))
    axes = []
    for arg_of in (_X_ARG, _Y_ARG):
        a = arg_of[code]
        has = a >= 0
        val = np.where(has, args[rows, np.maximum(a, 0)], 0.0)
        absolute = (code == _START) | (has & ~rel)
        axes.append(_running(absolute, val, is_z, last_m))
    end = axes[0] + 1j * axes[1]
    cur = np.empty(n, dtype=complex)
    cur[0] = 0.0
    cur[1:] = end[:-1]

    offset = np.where(rel, cur, 0.0)
    p01 = args[:, 0] + 1j * args[:, 1] + offset
    p23 = args[:, 2] + 1j * args[:, 3] + offset
    prev = np.concatenate([[_START], code[:-1]])
    c2 = np.where(code == _C, p23, p01)               # second control point of C and S
    c1 = np.where(code == _C, p01, cur)
    smooth = (code == _S) & ((prev == _C) | (prev == _S))
    if smooth.any():
        c1[smooth] = 2.0 * cur[smooth] - c2[np.flatnonzero(smooth) - 1]
    quad = p01.copy()
    tees = np.flatnonzero(code == _T)
    if tees.size:
        quad[tees] = _smooth_quadratic_controls(tees, code, cur, end, quad)

    kind = np.zeros(n, dtype=np.int8)
    kind[(code == _L) | (code == _H) | (code == _V) | (is_z & (cur != end))] = 1
    kind[(code == _Q) | (code == _T)] = 2
    kind[(code == _C) | (code == _S)] = 3
    arc_ops = np.flatnonzero(code == _A)
    arc_rows = None
    if arc_ops.size:
        a = args[arc_ops]
        s, e = cur[arc_ops], end[arc_ops]
        omit = s == e                                  # F.6.2: nothing drawn
        straight = ~omit & ((a[:, 0] == 0) | (a[:, 1] == 0))
        curved = ~omit & ~straight
        kind[arc_ops[straight]] = 1
        kind[arc_ops[curved]] = 4
        if curved.any():
            ac = a[curved]
            centre, rx, ry, rot, theta, delta = arc_centre_form(
                s[curved], e[curved], ac[:, 0], ac[:, 1], ac[:, 2], ac[:, 3] != 0,
                ac[:, 4] != 0)
            arc_rows = np.column_stack([centre, rx, ry, rot, theta, delta, e[curved]])

    drawn = np.flatnonzero(kind)
    if not drawn.size:
        return PathTable.empty(paths)
    run_id = np.cumsum((code == _M) | (code == _START)) + np.cumsum(is_z) - is_z
    rid = run_id[drawn]
    new_run = np.ones(len(drawn), dtype=bool)
    new_run[1:] = rid[1:] != rid[:-1]
    firsts = np.flatnonzero(new_run)
    run_len = np.diff(np.append(firsts, len(drawn))).astype(np.int64)
    owner = (np.cumsum(code == _START) - 1)[drawn[firsts]].astype(np.int64)
    z_runs = run_id[is_z]                       # in order (np.isin would sort them again)
    at = np.minimum(np.searchsorted(z_runs, rid[firsts]), max(len(z_runs) - 1, 0))
    closed = (z_runs[at] == rid[firsts]) if len(z_runs) else np.zeros(len(firsts), bool)
    kinds = kind[drawn]
    data = {}
    for k, cols_of in ((1, lambda i: (cur[i], end[i])),
                       (2, lambda i: (cur[i], quad[i], end[i])),
                       (3, lambda i: (cur[i], c1[i], c2[i], end[i]))):
        i = np.flatnonzero(kind == k)
        if i.size:
            data[k] = np.column_stack(cols_of(i))
    if arc_rows is not None:
        data[4] = arc_rows
    return PathTable(run_len, kinds, data, cur[drawn[firsts]], closed, owner, paths)


def _running(absolute, val, is_z, last_m) -> np.ndarray:
    """One coordinate of the current point after every op.

    Ops that set the coordinate (`absolute`) are roots; relative ops add `val` to the one
    before; a closepath takes the value at the last moveto. Each value is a root's value plus
    a difference of one running sum; closepaths whose moveto hangs from an earlier
    closepath are resolved by pointer jumping (log2 of the chain's length rounds).
    """
    n = len(val)
    rows = np.arange(n)
    root = absolute | is_z
    total = np.cumsum(np.where(root, 0.0, val))
    last = np.maximum.accumulate(np.where(root, rows, 0))
    off = total - total[last]
    level = np.where(absolute, val, 0.0)
    zs = np.flatnonzero(is_z)
    if zs.size:
        ref = last_m[zs]
        parent, add = last[ref], off[ref]
        slot = np.full(n, -1, dtype=np.int64)
        slot[zs] = np.arange(len(zs))
        up = slot[parent]
        while (up >= 0).any():
            hop = up >= 0
            q = up[hop]
            add, parent, up = add.copy(), parent.copy(), up.copy()
            add[hop] += add[q]
            parent[hop] = parent[q]
            up[hop] = up[q]
        level[zs] = level[parent] + add
    return level[last] + off


def _smooth_quadratic_controls(tees, code, cur, end, quad) -> np.ndarray:
    """Control points of T ops: each the reflection of the previous Q/T control point
    about the current point, else the current point.

    Notes
    -----
    With v_i = q_i - end_i, q_i = 2 cur_i - q_(i-1) gives q_i = cur_i - v_(i-1) and
    v_i = -(end_i - cur_i) - v_(i-1): along a chain of T ops, (-1)^i v_i is a running sum
    of the chords with alternating signs (a segmented cumulative sum).
    """
    chain_start = np.ones(len(tees), dtype=bool)
    chain_start[1:] = tees[1:] != tees[:-1] + 1
    first = np.maximum.accumulate(np.where(chain_start, np.arange(len(tees)), 0))
    i0 = tees[first]
    before_q = code[i0 - 1] == _Q
    v_init = np.where(before_q, quad[i0 - 1] - end[i0 - 1], 0.0)   # else: current point
    sign = np.where(tees % 2 == 0, 1.0, -1.0)
    g = sign * (end[tees] - cur[tees])
    total = np.cumsum(g)
    run = total - (total[first] - g[first])
    sign0 = np.where((i0 - 1) % 2 == 0, 1.0, -1.0)
    u = sign0 * v_init - run
    v = sign * u
    v_prev = np.where(chain_start, v_init, np.concatenate([[0.0], v[:-1]]))
    return cur[tees] - v_prev


# --- maps and bounds -------------------------------------------------------------------------

def _affine_stack(matrix) -> np.ndarray:
    """(K, 6) rows (a, b, c, d, e, f) from one or a stack of SVG matrices."""
    m = np.asarray(matrix, dtype=float)
    if m.shape[-2:] in ((3, 3), (2, 3)):
        m = m.reshape(-1, *m.shape[-2:])
        if m.shape[1] == 3 and not np.array_equal(m[:, 2], np.tile([0.0, 0.0, 1.0],
                                                                   (len(m), 1))):
            raise InputError("the last row of a 3 x 3 affine map must be 0 0 1 (matrix has "
                             f"{m[:, 2][0].tolist()})", parameter="matrix")
        rows = np.stack([m[:, 0, 0], m[:, 1, 0], m[:, 0, 1], m[:, 1, 1], m[:, 0, 2],
                         m[:, 1, 2]], axis=1)
    elif m.shape[-1:] == (6,):
        rows = m.reshape(-1, 6)
    else:
        raise InputError(f"an affine map is a 3 x 3 or 2 x 3 matrix or six numbers "
                         f"(matrix of shape {m.shape})", parameter="matrix")
    return rows


def _map_points(z, mats, which) -> np.ndarray:
    """Complex points z (m,) or (m, k) mapped, row r by mats[which[r]]."""
    z = np.asarray(z, dtype=complex)
    a, b, c, d, e, f = (mats[which, i].reshape((-1,) + (1,) * (z.ndim - 1)) for i in range(6))
    x, y = z.real, z.imag
    return (a * x + c * y + e) + 1j * (b * x + d * y + f)


def _map_arcs(rows, mats, which) -> np.ndarray:
    """Arc rows (centre, rx, ry, rot, theta, delta, end) through their maps (see
    `transform_table`), and a mask of the arcs whose image is flat (their rows come out
    meaningless but finite)."""
    centre, end = rows[:, 0], rows[:, 6]
    rx, ry, rot = rows[:, 1].real, rows[:, 2].real, rows[:, 3].real
    theta, delta = rows[:, 4].real, rows[:, 5].real
    m = mats[which]
    amat = np.stack([np.stack([m[:, 0], m[:, 2]], -1), np.stack([m[:, 1], m[:, 3]], -1)], -2)
    cr, sr = np.cos(rot), np.sin(rot)
    ell = np.stack([np.stack([cr * rx, -sr * ry], -1), np.stack([sr * rx, cr * ry], -1)], -2)
    u, s, vt = np.linalg.svd(amat @ ell)
    mirror_u = np.linalg.det(u) < 0
    u[mirror_u, :, 1] *= -1.0                          # U a rotation; S unchanged
    vt[mirror_u, 1, :] *= -1.0
    new_rot = np.arctan2(u[:, 1, 0], u[:, 0, 0])
    beta = np.arctan2(vt[:, 0, 1], vt[:, 0, 0])        # V's first column (cos b, sin b)
    mirrored = np.linalg.det(vt) < 0
    new_theta = np.where(mirrored, beta - theta, theta - beta)
    new_delta = np.where(mirrored, -delta, delta)
    flat = s[:, 1] <= 1e-12 * np.maximum(s[:, 0], 1e-300)
    return np.column_stack([_map_points(centre, mats, which), s[:, 0], s[:, 1], new_rot,
                            new_theta, new_delta, _map_points(end, mats, which)]), flat


def _segment_ends(table) -> np.ndarray:
    """End point of every segment, in drawing order."""
    kinds = np.asarray(table.kinds)
    out = np.empty(len(kinds), dtype=complex)
    for k in (1, 2, 3):
        if k in table.data and len(table.data[k]):
            out[kinds == k] = table.data[k][:, -1]
    if 4 in table.data and len(table.data[4]):
        out[kinds == 4] = table.data[4][:, 6]
    return out


def _segment_starts(table) -> np.ndarray:
    """Start point of every segment: its run's start, else the end of the one before."""
    run_len = np.asarray(table.run_len, dtype=np.int64)
    out = np.empty(len(table.kinds), dtype=complex)
    out[1:] = _segment_ends(table)[:-1]
    out[np.cumsum(run_len) - run_len] = table.starts
    return out


def _arc_extremes(centre, rx, ry, rot, theta, delta) -> np.ndarray:
    """The points of each ellipse where x or y is extreme that lie on the arc's sweep."""
    c, s = np.cos(rot), np.sin(rot)
    t = np.stack([np.arctan2(-ry * s, rx * c), np.arctan2(ry * c, rx * s)], axis=1)
    t = np.concatenate([t, t + np.pi], axis=1)                    # (m, 4)
    two_pi = 2.0 * np.pi
    swept = np.where(delta[:, None] >= 0, (t - theta[:, None]) % two_pi,
                     (theta[:, None] - t) % two_pi)
    on = swept <= np.abs(delta)[:, None]
    pts = centre[:, None] + (rx[:, None] * np.cos(t) + 1j * ry[:, None] * np.sin(t)) \
        * np.exp(1j * rot)[:, None]
    return pts[on]

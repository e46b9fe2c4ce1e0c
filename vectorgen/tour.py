"""Stroke tour: in what order, which way round and from which vertex a frame's strokes are
drawn, so that the frame spends as little time as it can jumping between them.

A frame loops, so its blanked jumps close into a tour: from the exit point of each stroke to the
entry point of the next, and from the last stroke back to the first. With the planner's jump
model ``cost(distance_mm)`` (seconds or samples; any non-decreasing function of the jump length,
concave ones such as ``a + b sqrt(d)`` included) the time the frame spends on jumps is

    T = sum_k cost(|exit_k - entry_(k+1)|),   k = 0 .. S - 1,   entry_S = entry_0

An open stroke may be drawn backwards (its entry and exit swap); a closed stroke (first point ==
last point) may be started at any of its vertices (entry = exit = that vertex). The drawn
segments never change: only the order, the direction and the starting vertex of each stroke.

`plan_tour` works in three phases:

1. nearest neighbour (`greedy_tour`): from stroke 0, always jump to the nearest entry point of a
   stroke not yet drawn; the nearest candidates of every point come from one nearest-points
   query (a distance matrix, a uniform grid or, for the largest sets, `scipy.spatial.cKDTree`),
   and a point whose list is used up measures the rest (or searches a grid of them, when many
   are left);
2. local search in rounds: each round evaluates, as whole arrays, the 2-opt moves (reverse a run
   of strokes, flipping each) and the Or-opt moves (move a run of 1 to 3 strokes elsewhere,
   either way round) that the `NEIGHBOURS` nearest endpoints of each endpoint suggest, around
   the strokes whose jumps changed in the last round; it then applies the improving ones, best
   first, each only if the jumps it removes are still in the tour (so its gain is still exact);
3. entry vertices: between rounds every closed stroke whose neighbours changed is re-entered at
   the vertex (of all its vertices) that makes its two jumps cheapest.

The search stops when no move improves the tour, when its time budget is spent
(`default_budget_s`: 15 ms + 16 us per stroke, the whole call included; the Python loop that
applies moves checks the clock) or, if asked, after a given number of rounds or after a round
that gained less than a given share of the cost and of the length (both fixed by the input
alone). The result never costs more than the input order or the nearest-neighbour tour: the
search starts from the cheaper of the two and only takes moves that lower the cost (with a
`travel_cost`, the cost plus that much per mm of jump), and the final tour is costed again from
scratch, by the cost alone, and compared with both.

`merge_strokes` joins strokes whose ends meet into one stroke before ordering, which removes
their jump and two end dwells.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from .errors import InputError
from .runs import concat_ranges, run_ranks

__all__ = ["Tour", "plan_tour", "greedy_tour", "merge_strokes", "rethread_ring",
           "default_budget_s", "RING_ENTRY_CANDIDATES", "NEIGHBOURS"]

# Entry vertices the nearest-neighbour phase considers per closed stroke (evenly spaced along
# its vertex list); the entry-vertex phase afterwards considers all of them. Each one is a
# point in the KD-tree query: on 10,000 strokes, 30 % of them rings, 4 rather than 8 halves the
# time to converge and ends 0.3 % costlier.
RING_ENTRY_CANDIDATES = 4
# Nearest endpoints per endpoint that suggest local-search moves. On scattered strokes 5, 6, 8
# and 10 end within 2 % of each other once converged; 8 is the middle.
NEIGHBOURS = 8
# Nearest candidates kept per point for the nearest-neighbour phase (a point whose list is used
# up asks `_Remaining`).
NN_NEIGHBOURS = 8
BUDGET_BASE_S = 0.015
BUDGET_PER_STROKE_S = 16e-6
MAX_SEGMENT = 3                 # longest run of strokes an Or-opt move carries
# Up to this many points, neighbours come from a distance matrix; up to GRID_POINTS from a
# uniform grid (the same answers, ties by index); beyond, from a KD-tree: a drawing of a few
# thousand strokes does not pay for importing scipy.spatial (about 0.5 s). The matrix is the
# faster of the first two up to about 550 points (k = 10: 2.4 ms against 2.8 at 510 points,
# 3.5 against 3.1 at 600).
BRUTE_FORCE_POINTS = 512
GRID_POINTS = 12_000
KNN_BLOCK = 32_768              # distances per block of the distance-matrix search
GRID_FILL = 2.0                 # points per occupied grid cell the grid aims at
GRID_QUERIES_PER_PASS = 512
# Candidates left below which a used-up neighbour list measures them all rather than search a
# grid: the grid's dozens of numpy calls a search, and its rebuilding, cost more (the walk through
# 40,000 scattered strokes takes 0.18 s with 12,000 here, 0.29 s with 4,096 or 0.27 s with 40,000)
REMAINING_DIRECT = 12_000


def _knn(xy: np.ndarray, queries: np.ndarray, k: int, workers: int = 1):
    """(distances, indices), each (len(queries), k), nearest first, ties by index: a distance
    matrix for small sets, a grid (`_grid_knn`) for larger ones, cKDTree(xy).query beyond
    GRID_POINTS (which may order equal distances otherwise)."""
    xy, queries = np.asarray(xy, dtype=float), np.asarray(queries, dtype=float)
    big = max(len(xy), len(queries))
    if big > BRUTE_FORCE_POINTS and (big > GRID_POINTS or k < len(xy)):
        found = _grid_knn(xy, queries, k) if big <= GRID_POINTS else None
        if found is not None:
            return found
        from scipy.spatial import cKDTree

        # sliding-midpoint splits build in half the time of median ones; queries cost the same
        d, j = cKDTree(xy, balanced_tree=False).query(queries, k=k, workers=workers)
        return np.asarray(d).reshape(len(queries), k), np.asarray(j).reshape(len(queries), k)
    kk = min(k, len(xy))
    n = len(xy)
    dist = np.empty((len(queries), kk))
    near = np.empty((len(queries), kk), dtype=np.int64)
    px, py = np.ascontiguousarray(xy[:, 0]), np.ascontiguousarray(xy[:, 1])
    # a few dozen queries at a time: the distance block stays small enough to be reused
    # instead of fresh memory (a page fault per 4 KiB) for every call
    rows = max(8, KNN_BLOCK // max(n, 1))
    for a in range(0, len(queries), rows):
        q = queries[a:a + rows]
        m = len(q)
        d2 = np.subtract(q[:, 0, None], px[None, :])
        d2 *= d2
        dy = np.subtract(q[:, 1, None], py[None, :])
        dy *= dy
        d2 += dy
        # each query's kk-th smallest squared distance (partitioning values is several times
        # cheaper than partitioning indices); the points no farther than it (ties at it
        # included) in a narrow block, sorted by distance, then index: the first kk of each
        kth = np.partition(d2, kk - 1, axis=1)[:, kk - 1]
        flat = np.flatnonzero(d2 <= kth[:, None])
        r, c = np.divmod(flat, n)                      # see `_nonzero_2d`
        per = np.bincount(r, minlength=m)
        rank = run_ranks(per)
        dd = np.full((m, int(per.max())), np.inf)
        jj = np.full(dd.shape, n, dtype=np.int64)
        dd[r, rank], jj[r, rank] = d2.ravel()[flat], c
        o = np.lexsort((jj, dd), axis=1)[:, :kk]
        dist[a:a + m] = np.sqrt(np.take_along_axis(dd, o, axis=1))
        near[a:a + m] = np.take_along_axis(jj, o, axis=1)
    return dist, near


def _grid_cell(span, n: int, fill: float) -> float:
    """The cell of a uniform grid over `span` ((2,) mm) that holds about `fill` of n points
    each (along the longer side when the points lie on a line; 1 when all are one point)."""
    area = float(span[0] * span[1])
    cell = float(np.sqrt(area * fill / n)) if area > 0 else float(span.max()) * fill / n
    return cell if cell > 0 else 1.0


def _grid_cells(xy, lo, span, cell: float):
    """(nx, ny, each point's cell id, row by row) of the grid of `cell` from `lo` over `span`."""
    nx, ny = int(span[0] // cell) + 1, int(span[1] // cell) + 1
    gx = np.minimum(((xy[:, 0] - lo[0]) // cell).astype(np.int64), nx - 1)
    gy = np.minimum(((xy[:, 1] - lo[1]) // cell).astype(np.int64), ny - 1)
    return nx, ny, gy * nx + gx


def _by_cell(cid, cells: int):
    """(the points sorted by cell, stable; where each cell's points start in that order, and
    one past the last): a row of cells is then one slice."""
    o = np.argsort(cid, kind="stable")
    return o, np.searchsorted(cid[o], np.arange(cells + 1))


def _grid_knn(xy: np.ndarray, queries: np.ndarray, k: int):
    """The k nearest points of xy to each query, exactly as the distance matrix finds them
    (by squared distance, then index), from a uniform grid.

    The points are sorted by cell (row by row, so a row of cells is one slice). Each query
    looks at the window of cells within R of its own and keeps its k nearest candidates;
    they are the k nearest of all when the k-th lies no farther than the window's nearest
    edge that is not the grid's. The queries for which that fails look again with R doubled.
    The cell is halved while occupied cells hold more than 2 GRID_FILL points on average (a
    clustered drawing), so a window holds a few dozen candidates; None when even then they
    hold more than 4 GRID_FILL (a few tight clusters far apart: a KD-tree serves better)."""
    n, m = len(xy), len(queries)
    lo = np.minimum(xy.min(axis=0), queries.min(axis=0))
    span = np.maximum(xy.max(axis=0), queries.max(axis=0)) - lo
    cell = _grid_cell(span, n, GRID_FILL)
    for _ in range(8):
        nx, ny, cid = _grid_cells(xy, lo, span, cell)
        fill = n / len(np.unique(cid))
        if fill <= 2 * GRID_FILL or nx * ny > 16 * n:
            break
        cell /= 2.0
    if fill > 4 * GRID_FILL:                       # clustered beyond what a grid serves
        return None
    o, start = _by_cell(cid, nx * ny)
    sx, sy = xy[o, 0], xy[o, 1]
    qx, qy = queries[:, 0], queries[:, 1]
    qgx = np.clip(((qx - lo[0]) // cell).astype(np.int64), 0, nx - 1)
    qgy = np.clip(((qy - lo[1]) // cell).astype(np.int64), 0, ny - 1)
    dist = np.empty((m, k))
    near = np.empty((m, k), dtype=np.int64)
    todo = np.arange(m)
    R = 2
    while len(todo):
        c0, c1 = np.maximum(qgx[todo] - R, 0), np.minimum(qgx[todo] + R, nx - 1)
        r0, r1 = np.maximum(qgy[todo] - R, 0), np.minimum(qgy[todo] + R, ny - 1)
        rows = r1 - r0 + 1
        t = np.repeat(np.arange(len(todo)), rows)                # one segment per row
        row = concat_ranges(r0, rows)
        a, b = start[row * nx + c0[t]], start[row * nx + c1[t] + 1]
        size = b - a
        per_q = np.bincount(t, weights=size, minlength=len(todo)).astype(np.int64)
        qi = np.repeat(t, size)
        cand = concat_ranges(a, size)
        d2 = (sx[cand] - qx[todo][qi]) ** 2 + (sy[cand] - qy[todo][qi]) ** 2
        idx = o[cand]
        # the candidates of each query in a row of a padded block, its k nearest by partition
        first = np.cumsum(per_q) - per_q
        col = np.arange(len(cand)) - np.repeat(first, per_q)
        kd2 = np.full((len(todo), k), np.inf)
        kid = np.zeros((len(todo), k), dtype=np.int64)
        for g0 in range(0, len(todo), GRID_QUERIES_PER_PASS):
            g1 = min(g0 + GRID_QUERIES_PER_PASS, len(todo))
            c_lo, c_hi = first[g0], first[g1 - 1] + per_q[g1 - 1]
            width = int(per_q[g0:g1].max())
            if width < k:
                continue
            block = np.full((g1 - g0, width), np.inf)
            ids = np.zeros((g1 - g0, width), dtype=np.int64)
            r, c = qi[c_lo:c_hi] - g0, col[c_lo:c_hi]
            block[r, c], ids[r, c] = d2[c_lo:c_hi], idx[c_lo:c_hi]
            j = np.argpartition(block, k - 1, axis=1)[:, :k]
            dd, jj = np.take_along_axis(block, j, axis=1), np.take_along_axis(ids, j, axis=1)
            srt = np.lexsort((jj, dd), axis=1)          # by distance, then index
            kd2[g0:g1] = np.take_along_axis(dd, srt, axis=1)
            kid[g0:g1] = np.take_along_axis(jj, srt, axis=1)
        edge = np.minimum.reduce([np.where(c0 > 0, qx[todo] - (lo[0] + c0 * cell), np.inf),
                                  np.where(c1 < nx - 1, lo[0] + (c1 + 1) * cell - qx[todo],
                                           np.inf),
                                  np.where(r0 > 0, qy[todo] - (lo[1] + r0 * cell), np.inf),
                                  np.where(r1 < ny - 1, lo[1] + (r1 + 1) * cell - qy[todo],
                                           np.inf)])
        ok = (per_q >= k) & (kd2[:, -1] <= edge * edge)
        done = todo[ok]
        dist[done] = np.sqrt(kd2[ok])
        near[done] = kid[ok]
        todo = todo[~ok]
        R *= 2
    return dist, near


def _close_pairs(xy: np.ndarray, r: float) -> np.ndarray:
    """(m, 2) index pairs i < j of points within r: cKDTree.query_pairs's set of pairs, from
    the points sorted along their wider axis, each compared with the next ones until they
    lie more than r further along it (stroke ends meet at a few points each: few passes)."""
    xy = np.asarray(xy, dtype=np.float64)
    n = len(xy)
    if n < 2:
        return np.zeros((0, 2), dtype=np.int64)
    axis = int(np.ptp(xy[:, 1]) > np.ptp(xy[:, 0]))
    o = np.argsort(xy[:, axis], kind="stable")
    sx, sy = xy[o, 0], xy[o, 1]
    along = sx if axis == 0 else sy
    found = []
    for s in range(1, n):
        near = np.flatnonzero(along[s:] - along[:-s] <= r)
        if len(near) == 0:
            break
        dx, dy = sx[near + s] - sx[near], sy[near + s] - sy[near]
        near = near[dx * dx + dy * dy <= r * r]
        found.append(np.column_stack([o[near], o[near + s]]))
    if not found:
        return np.zeros((0, 2), dtype=np.int64)
    pairs = np.concatenate(found).astype(np.int64)
    return np.sort(pairs, axis=1)


def _components(n: int, pairs: np.ndarray) -> np.ndarray:
    """Connected-component label of each of n nodes linked by `pairs` (labels 0..c-1)."""
    if len(pairs) == 0:
        return np.arange(n)
    label = np.arange(n)
    while True:                                    # propagate the smallest label along links
        low = np.minimum(label[pairs[:, 0]], label[pairs[:, 1]])
        new = label.copy()
        np.minimum.at(new, pairs[:, 0], low)
        np.minimum.at(new, pairs[:, 1], low)
        new = new[new]                             # jump to the label's own label
        if np.array_equal(new, label):
            break
        label = new
    return np.unique(label, return_inverse=True)[1].ravel()


@dataclass(frozen=True, eq=False)
class Tour:
    """A frame's drawing order.

    Attributes
    ----------
    order : (S,) int64 ndarray
        The strokes in drawing order (a permutation of 0 .. S - 1).
    reverse : (S,) bool ndarray
        ``reverse[k]``: the stroke drawn k-th (``order[k]``) is drawn backwards (open strokes
        only; always False for a closed stroke).
    rotate : (S,) int64 ndarray
        ``rotate[k]``: the vertex the stroke drawn k-th starts from, 0 = as given (closed
        strokes only; 0 for an open one). `rethread_ring` makes the re-threaded ring.
    cost : float
        Total jump cost of the closed tour, the jump back to the first stroke included.
    """

    order: np.ndarray
    reverse: np.ndarray
    rotate: np.ndarray
    cost: float


def default_budget_s(stroke_count: int) -> float:
    """The time `plan_tour` may take for a drawing of this many strokes.

    Notes
    -----
    budget_s = 15 ms + 16 us * S, the whole call included (0.175 s for 10,000 strokes). The
    nearest-neighbour phase always completes; the local search stops at the budget or earlier
    when no move improves the tour.

    Examples
    --------
    >>> round(default_budget_s(10_000), 3)
    0.175
    """
    return BUDGET_BASE_S + BUDGET_PER_STROKE_S * int(stroke_count)


def rethread_ring(ring: np.ndarray, start: int) -> np.ndarray:
    """The closed stroke `ring` ((m, 2), first point == last point) drawn from vertex `start`.

    The segments are the same; only where the beam enters (and leaves) the ring moves.

    Examples
    --------
    >>> sq = np.array([[0, 0], [1, 0], [1, 1], [0, 1], [0, 0]])
    >>> rethread_ring(sq, 2).tolist()
    [[1, 1], [0, 1], [0, 0], [1, 0], [1, 1]]
    """
    ring = np.asarray(ring)
    m = len(ring)
    if m < 2 or not 0 <= start < max(m - 1, 1):
        raise InputError(f"start must be a vertex of the ring, 0 .. {max(m - 2, 0)} "
                         f"(start={start})", parameter="start")
    if start == 0:
        return ring.copy()
    return np.concatenate([ring[start:-1], ring[:start + 1]])


def greedy_tour(starts, ends, closed_rings=None, cost=None) -> Tour:
    """The nearest-neighbour tour: from stroke 0 (drawn as given) always jump to the nearest
    entry point of a stroke not yet drawn.

    Parameters
    ----------
    starts, ends : (S, 2) array_like
        First and last point of each stroke, mm. A stroke whose first point equals its last is
        closed.
    closed_rings : sequence of (m + 1, 2) arrays or None, optional
        Entry ``i`` gives closed stroke i's vertices (first == last == ``starts[i]``), so it may
        be entered at any of its m distinct vertices if m <= c = `RING_ENTRY_CANDIDATES`, else
        at vertices ``j * m // c``, j = 0 .. c - 1; None (or an entry of None) enters it at its
        first point. Entries of open strokes are ignored.
    cost : callable, optional
        Jump model ``cost(distance_mm) -> seconds or samples``, vectorised, non-decreasing.
        Only used for `Tour.cost`: the nearest point is also the cheapest one. Default: the
        distance itself.

    Returns
    -------
    Tour

    Raises
    ------
    InputError
        Arrays of the wrong shape or not finite, a ring that does not start and end at its
        stroke's first point, a cost that is not a non-decreasing function.

    Examples
    --------
    >>> starts = np.array([[0.0, 0.0], [10.0, 0.0], [2.0, 0.0]])
    >>> ends = np.array([[1.0, 0.0], [11.0, 0.0], [3.0, 0.0]])
    >>> t = greedy_tour(starts, ends)
    >>> t.order.tolist(), t.reverse.tolist(), t.cost
    ([0, 2, 1], [False, False, False], 19.0)
    """
    geo = _Geometry(starts, ends, closed_rings)
    cost_fn = _checked_cost(cost)
    seq, flip, rot, _ = _nearest_neighbour(geo)
    return _make_tour(geo, cost_fn, seq, flip, rot)


def plan_tour(starts, ends, closed_rings=None, cost=None, first_fixed=True,
              budget_s=None, max_rounds: int | None = None, min_gain: float = 0.0,
              travel_cost: float = 0.0) -> Tour:
    """A short closed tour through the strokes: nearest neighbour, then 2-opt and Or-opt moves
    with free stroke direction and free entry vertex of closed strokes, within a time budget.

    Parameters
    ----------
    starts, ends : (S, 2) array_like
        First and last point of each stroke, mm. A stroke whose first point equals its last is
        closed (a dot is a closed stroke of one point).
    closed_rings : sequence of (m, 2) arrays or None, optional
        Entry ``i`` gives closed stroke i's vertices (first == last == ``starts[i]``), so it may
        be entered at any of them; None (or an entry of None) enters it at its first point.
        Entries of open strokes are ignored, so the caller may pass every stroke's points.
    cost : callable, optional
        Jump model ``cost(distance_mm) -> seconds or samples``: takes an array of distances,
        returns an array of the same shape, non-decreasing in the distance (concave is fine).
        ``cost(0)`` is used as given: a model in which a zero-length jump is free returns 0
        there. Default: the distance itself (blanked travel in mm).
    first_fixed : bool, default True
        Stroke 0 is drawn first, forwards and from its first vertex (a frame starts with its
        first stroke lit). False: any stroke may come first, in any direction; the loop is then
        cut after its costliest jump.
    budget_s : float, optional
        Wall-clock time the call may take; default `default_budget_s` (15 ms + 16 us per
        stroke). The nearest-neighbour phase always completes.
    max_rounds : int, optional
        Stop the local search after this many rounds of moves instead (with ``budget_s =
        math.inf``): the same input then always gives the same tour, whatever the machine's
        load (files and live output must agree sample for sample).
    min_gain : float, default 0
        Also stop after a round that lowered both the tour's cost and its jumps' length by
        less than this share of what they are now (0.005: half a per cent): later rounds
        would gain less still. It depends on the input only, so the same input still gives
        the same tour. 0: go on while any move improves the tour.
    travel_cost : float, default 0
        While searching, each mm of a jump also costs this much (in `cost`'s units): with a
        cost in time, the search then also shortens the blanked travel, trading at most this
        much time for a mm. The tour returned is still the best by `cost` alone of the input
        order, the nearest-neighbour tour and the search's result, so it never costs more than
        either of the first two.

    Returns
    -------
    Tour
        Never costlier than the input order (each stroke as given) or `greedy_tour`.

    Raises
    ------
    InputError
        Arrays of the wrong shape or not finite, a ring that does not start and end at its
        stroke's first point, a cost that is not a non-decreasing function, budget_s <= 0,
        min_gain < 0, travel_cost < 0.

    Notes
    -----
    A 2-opt move that removes the jumps after positions i and j reverses the strokes between
    them (flipping each) and changes the cost by

        cost(|out_i - out_j|) + cost(|in_(i+1) - in_(j+1)|) - J_i - J_j

    (J_k: the jump after position k); the jumps inside the reversed run keep their lengths. An
    Or-opt move takes the run s .. e out (jump out_(s-1) -> in_(e+1)) and puts it between p and
    p + 1 either way round. Moves are suggested by each endpoint's `NEIGHBOURS` nearest
    endpoints and evaluated with the actual cost callable.

    Examples
    --------
    Four strokes along a line, given in a bad order and direction:

    >>> starts = np.array([[0.0, 0.0], [3.0, 0.0], [4.0, 0.0], [1.0, 0.0]])
    >>> ends = np.array([[1.0, 0.0], [2.0, 0.0], [3.0, 0.0], [2.0, 0.0]])
    >>> t = plan_tour(starts, ends, budget_s=1.0)
    >>> t.order.tolist(), t.reverse.tolist(), t.cost
    ([0, 3, 1, 2], [False, False, True, True], 4.0)
    """
    t0 = time.perf_counter()
    geo = _Geometry(starts, ends, closed_rings)
    cost_fn = _checked_cost(cost)
    if budget_s is None:
        budget_s = default_budget_s(geo.S)
    elif not budget_s > 0:
        raise InputError(f"budget_s must be > 0 (budget_s={budget_s})", parameter="budget_s")
    if not min_gain >= 0:
        raise InputError(f"min_gain must be >= 0 (min_gain={min_gain})", parameter="min_gain")
    if not (travel_cost >= 0 and np.isfinite(travel_cost)):
        raise InputError(f"travel_cost must be finite and >= 0 (travel_cost={travel_cost})",
                         parameter="travel_cost")
    search_fn = cost_fn
    if travel_cost > 0 and cost_fn is not None:
        def search_fn(d, w=float(travel_cost)):
            return cost_fn(d) + w * np.asarray(d, dtype=np.float64)
    S = geo.S
    given = (np.arange(S), np.zeros(S, dtype=bool), np.zeros(S, dtype=np.int64))
    # one nearest-points query serves both phases
    lists = (_endpoint_lists(geo.A, geo.B, geo.closed, NEIGHBOURS)
             if len(geo.ring_stroke) == 0 and S >= 2 else None)
    *greedy, lists = _nearest_neighbour(geo, lists)
    given_cost, greedy_cost = _cycle_costs(geo, cost_fn, given, greedy)
    start = greedy if greedy_cost <= given_cost else given
    best, best_cost = start, min(greedy_cost, given_cost)
    if S >= 2:
        search = _Search(geo, search_fn, *start, fixed_rotation=0 if first_fixed else -1,
                         lists=lists)
        search.run(t0 + budget_s, max_rounds, min_gain)
        found = search.state()
        found_cost = _cycle_cost(geo, cost_fn, *found)
        if found_cost < best_cost:
            best, best_cost = found, found_cost
    return _make_tour(geo, cost_fn, *best, first_fixed=first_fixed, cost=best_cost)


def merge_strokes(points, offsets, intensity, tol):
    """Join strokes whose ends meet (within `tol`) and that share an intensity into one stroke,
    as a line merge does: chains run through nodes where exactly two stroke ends meet, never
    through a junction of three or more; a chain that comes back to where it began becomes a
    closed stroke.

    Parameters
    ----------
    points : (P, 2) array_like
        All strokes' points, packed: stroke i is ``points[offsets[i]:offsets[i + 1]]``.
    offsets : (S + 1,) array_like of int
    intensity : (S,) array_like
    tol : float
        Ends at most this far apart (mm) meet; ends linked by such meetings form one node.

    Returns
    -------
    points : (P', 2) ndarray
    offsets : (S' + 1,) int64 ndarray
    intensity : (S',) ndarray
    groups : list of (k,) int64 ndarrays
        ``groups[j]``: the input strokes that make output stroke j, in drawing order.

    Notes
    -----
    A node's degree counts the ends of one intensity only: where a bright and a dim stroke
    meet a third, bright one, the two bright ones are joined. Every input point is kept
    exactly: where two joined ends are the same point it appears once; where they differ (by
    at most `tol`) both stay, with the short segment between them drawn. Strokes of one point
    and strokes of zero length (dots) are never merged. A stroke stays where it was in the
    drawing order; a merged stroke takes the place of its earliest member and runs in that
    member's direction (a closed one starts at that member's first point).

    Examples
    --------
    >>> pts = np.array([[0, 0], [1, 0], [1, 0], [1, 1], [5, 5], [6, 6]], dtype=float)
    >>> p, o, i, g = merge_strokes(pts, [0, 2, 4, 6], [1.0, 1.0, 1.0], tol=1e-6)
    >>> p.tolist(), o.tolist(), [x.tolist() for x in g]
    ([[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [5.0, 5.0], [6.0, 6.0]], [0, 3, 5], [[0, 1], [2]])
    """
    pts = np.asarray(points, dtype=np.float64)
    offs = np.asarray(offsets, dtype=np.int64)
    inten = np.asarray(intensity)
    S = len(offs) - 1
    if pts.ndim != 2 or pts.shape[1] != 2:
        raise InputError(f"points must be an (P, 2) array (shape={pts.shape})",
                         parameter="points")
    if S < 0 or offs[0] != 0 or offs[-1] != len(pts) or np.any(np.diff(offs) < 1):
        raise InputError("offsets must rise from 0 to the number of points, at least one point "
                         f"per stroke (offsets={_short(offs)})", parameter="offsets")
    if inten.shape != (S,):
        raise InputError(f"intensity must have one value per stroke ({S}) "
                         f"(shape={inten.shape})", parameter="intensity")
    if not tol >= 0:
        raise InputError(f"tol must be >= 0 (tol={tol})", parameter="tol")
    if S == 0:
        return pts.copy(), offs.copy(), inten.copy(), []
    chains = _chains(pts, offs, inten, float(tol))
    if len(chains) == S and not any(c[2] for c in chains):   # nothing joined: as given
        return pts, offs, inten, [np.array(c[0], dtype=np.int64) for c in chains]
    return _joined(pts, offs, inten, chains)


# --- problem set-up -----------------------------------------------------------------------------

def _short(a) -> str:
    a = np.asarray(a).ravel()
    return str(a.tolist()) if a.size <= 6 else f"[{a[0]}, {a[1]}, ..., {a[-1]}]"


def _checked_cost(cost):
    """The jump model as a vectorised float function (None: the distance), checked once."""
    if cost is None:
        return None
    if not callable(cost):
        raise InputError(f"cost must be a function of the jump length (cost={cost!r})",
                         parameter="cost")
    probe = np.array([0.0, 0.5, 1.0, 10.0, 100.0, 1000.0])
    try:
        vals = np.broadcast_to(np.asarray(cost(probe), dtype=np.float64), probe.shape)
    except Exception as exc:           # any failure of a user's function, said in one line
        raise InputError(f"cost must take an array of jump lengths in mm ({exc})",
                         parameter="cost") from None
    if not np.all(np.isfinite(vals)) or np.any(np.diff(vals) < 0):
        raise InputError("cost must be finite and non-decreasing in the jump length "
                         f"(cost({probe.tolist()})={vals.tolist()})", parameter="cost")

    def cost_fn(d):
        return np.broadcast_to(np.asarray(cost(d), dtype=np.float64), np.shape(d))
    return cost_fn


class _Geometry:
    """Each stroke's entry point A and exit point B when drawn forwards (for a closed stroke
    both are its entry vertex), and the vertices of the closed strokes that have them."""

    def __init__(self, starts, ends, closed_rings):
        a = np.array(starts, dtype=np.float64)
        b = np.array(ends, dtype=np.float64)
        if a.ndim != 2 or a.shape[1] != 2 or a.shape[0] < 1:
            raise InputError(f"starts must be an (S, 2) array, S >= 1 (shape={a.shape})",
                             parameter="starts")
        if b.shape != a.shape:
            raise InputError(f"ends must have the shape of starts {a.shape} "
                             f"(shape={b.shape})", parameter="ends")
        if not (np.all(np.isfinite(a)) and np.all(np.isfinite(b))):
            raise InputError("starts and ends must be finite (a point is nan or inf)",
                             parameter="starts")
        self.S = S = len(a)
        self.A, self.B = a, b
        self.closed = np.all(a == b, axis=1)
        # ring vertices, distinct ones only (the closing duplicate dropped), packed
        ring_strokes, arrays = [], []
        if closed_rings is not None:
            if len(closed_rings) != S:
                raise InputError(f"closed_rings must have one entry per stroke ({S}) "
                                 f"(len={len(closed_rings)})", parameter="closed_rings")
            for i in np.flatnonzero(self.closed).tolist():
                r = closed_rings[i]
                if r is not None:
                    ring_strokes.append(i)
                    arrays.append(np.asarray(r, dtype=np.float64))
        bad = [i for i, r in zip(ring_strokes, arrays)
               if r.ndim != 2 or r.shape[1:] != (2,) or len(r) < 1]
        if not bad and arrays:
            heads = np.array([r[0] for r in arrays])
            tails = np.array([r[-1] for r in arrays])
            wrong = np.flatnonzero(np.any(heads != a[ring_strokes], axis=1)
                                   | np.any(tails != heads, axis=1))
            bad = [ring_strokes[k] for k in wrong[:1].tolist()]
        if bad:
            i = bad[0]
            raise InputError(f"closed_rings[{i}] must be the closed stroke's vertices, "
                             f"starting and ending at its first point {a[i].tolist()}",
                             parameter="closed_rings")
        keep = [k for k, r in enumerate(arrays) if len(r) > 2]
        ring_strokes = [ring_strokes[k] for k in keep]
        arrays = [arrays[k][:-1] for k in keep]
        self.ring_stroke = np.array(ring_strokes, dtype=np.int64)
        counts = np.array([len(r) for r in arrays], dtype=np.int64)
        self.ring_start = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
        self.ring_pts = np.concatenate(arrays) if arrays else np.zeros((0, 2))
        self.ring_of = np.full(S, -1, dtype=np.int64)
        self.ring_of[self.ring_stroke] = np.arange(len(ring_strokes))

    def at_rotation(self, rot: np.ndarray):
        """(A, B): entry and exit points with closed strokes entered at vertex `rot`."""
        A, B = self.A.copy(), self.B.copy()
        if len(self.ring_stroke):
            r = self.ring_stroke
            v = self.ring_pts[self.ring_start[:-1] + rot[r]]
            A[r] = v
            B[r] = v
        return A, B


def _jump_lengths(geo: _Geometry, seq, flip, rot) -> np.ndarray:
    """The length of each jump of the closed tour, from position k to k + 1 (flip: per
    position; rot: per stroke)."""
    A, B = geo.at_rotation(rot)
    a, b, f = A[seq], B[seq], flip[:, None]
    inp, out = np.where(f, b, a), np.where(f, a, b)
    out[:-1] -= inp[1:]
    out[-1] -= inp[0]
    return np.sqrt((out ** 2).sum(axis=1))


def _cycle_costs(geo: _Geometry, cost_fn, *tours) -> list:
    """Total jump cost of each closed tour (seq, flip, rot), the jump model asked once."""
    d = np.concatenate([_jump_lengths(geo, *t) for t in tours])
    c = d if cost_fn is None else cost_fn(d)
    return [float(np.sum(part)) for part in np.split(c, len(tours))]


def _cycle_cost(geo: _Geometry, cost_fn, seq, flip, rot) -> float:
    """Total jump cost of the closed tour (flip: per position; rot: per stroke)."""
    return _cycle_costs(geo, cost_fn, (seq, flip, rot))[0]


def _make_tour(geo: _Geometry, cost_fn, seq, flip, rot, first_fixed=True, cost=None) -> Tour:
    """The Tour of a closed tour (seq, flip per position, rot per stroke): stroke 0 first and
    forwards (the mirror image of a tour costs the same), or cut after the costliest jump.
    `cost`: the closed tour's cost if known (the same jumps, whichever comes first)."""
    seq = np.asarray(seq, dtype=np.int64)
    flip = np.asarray(flip, dtype=bool) & ~geo.closed[seq]
    S = len(seq)
    if first_fixed:
        k = int(np.flatnonzero(seq == 0)[0])
        if flip[k]:
            idx = (k - np.arange(S)) % S
            seq, flip = seq[idx], ~flip[idx] & ~geo.closed[seq[idx]]
        else:
            seq, flip = np.roll(seq, -k), np.roll(flip, -k)
    else:
        d = _jump_lengths(geo, seq, flip, rot)
        k = int(np.argmax(d if cost_fn is None else cost_fn(d)))
        seq, flip = np.roll(seq, -(k + 1)), np.roll(flip, -(k + 1))
    rotate = np.asarray(rot, dtype=np.int64)[seq]
    for a in (seq, flip, rotate):
        a.setflags(write=False)
    if cost is None:
        cost = _cycle_cost(geo, cost_fn, seq, flip, rot)
    return Tour(seq, flip, rotate, cost)


# --- phase 1: nearest neighbour -----------------------------------------------------------------

def _workers(n: int) -> int:
    """Threads for a KD-tree query of n points: starting them costs more than they save on a
    small query."""
    return -1 if n >= 8192 else 1


def _endpoint_lists(A, B, closed, k):
    """Each endpoint's k nearest endpoints of other strokes, by one `_knn` query.

    Endpoint ids: 2 t = stroke t's point A (its first point, or a closed stroke's entry
    vertex), 2 t + 1 = its point B; a closed stroke has only 2 t (row 2 t + 1 repeats it).
    Returns (nb (2 S, k + 2) ids, -1 where none; nd (2 S, k + 2) distances, inf where none),
    each row nearest first (the stroke's own ends are holes, -1)."""
    S = len(A)
    ids = np.flatnonzero(~np.repeat(closed, 2) | (np.arange(2 * S) % 2 == 0))
    xy = np.where((ids % 2 == 0)[:, None], A[ids >> 1], B[ids >> 1])
    q = int(min(len(ids), k + 2))                 # + 2: the point itself, its stroke's other end
    d, j = _knn(xy, xy, q, _workers(len(xy)))
    d, j = d.reshape(len(ids), q), ids[j.reshape(len(ids), q)]
    own = (j >> 1) == (ids >> 1)[:, None]
    j[own] = -1
    d[own] = np.inf
    nb = np.full((2 * S, q), -1, dtype=np.int64)
    nd = np.full((2 * S, q), np.inf)
    nb[ids], nd[ids] = j, d
    cl = np.flatnonzero(closed)
    nb[2 * cl + 1], nd[2 * cl + 1] = nb[2 * cl], nd[2 * cl]
    return nb, nd


def _spread_hubs(nb, nd, A, B, closed):
    """Neighbour lists for the local search where many ends share one point (a hub): a row
    whose every entry is at its own point says nothing about the rest of the drawing, so it is
    remade from up to two other ends at that point and the first two ends at each of the
    nearest other points. Returns (nb, nd), rows nearest first."""
    S = len(A)
    full = np.flatnonzero(np.all((nd == 0) | (nb < 0), axis=1) & (nb >= 0).any(axis=1))
    if len(full) == 0:
        return nb, nd
    ids = np.flatnonzero(~np.repeat(closed, 2) | (np.arange(2 * S) % 2 == 0))
    xy = np.where((ids % 2 == 0)[:, None], A[ids >> 1], B[ids >> 1])
    where_of = np.full(2 * S, -1)
    where_of[ids] = np.arange(len(ids))
    uniq, loc = np.unique(xy, axis=0, return_inverse=True)
    loc = loc.ravel()
    o = np.argsort(loc, kind="stable")
    head = np.searchsorted(loc[o], np.arange(len(uniq) + 1))
    size = np.diff(head)
    rank = np.empty(len(ids), dtype=np.int64)
    rank[o] = np.arange(len(ids)) - head[loc[o]]
    q = nb.shape[1]
    rows = where_of[full]
    g, r = loc[rows], rank[rows]
    cols = []
    for step in (1, 2):                              # other ends at the same point, cyclically
        ok = size[g] > step
        cols.append(np.where(ok, ids[o[head[g] + (r + step) % np.maximum(size[g], 1)]], -1))
    ku = int(min(len(uniq), (q - 2) // 2 + 1))
    near = _knn(uniq, uniq[g], ku)[1].reshape(len(full), ku)[:, 1:]
    for c in range(near.shape[1]):
        for m in (0, 1):
            L = near[:, c]
            ok = size[L] > m
            cols.append(np.where(ok, ids[o[head[L] + np.minimum(m, size[L] - 1)]], -1))
    new = np.column_stack(cols)[:, :q]
    new = np.pad(new, ((0, 0), (0, q - new.shape[1])), constant_values=-1)
    new[(new >> 1) == (full >> 1)[:, None]] = -1
    here = xy[rows]
    there = xy[where_of[np.maximum(new, 0)]]
    dist = np.where(new >= 0, np.hypot(*(there - here[:, None, :]).transpose(2, 0, 1)), np.inf)
    nb, nd = nb.copy(), nd.copy()
    nb[full], nd[full] = new, dist
    cl = np.flatnonzero(closed)
    nb[2 * cl + 1], nd[2 * cl + 1] = nb[2 * cl], nd[2 * cl]
    return nb, nd


def _ring_candidates(geo: _Geometry):
    """Entry points when some closed strokes have several vertices: (xy (N, 2), stroke (N,),
    flip (N,), vertex (N,), exit id (N,)). Open strokes: first point (forwards) and last point
    (backwards), each leaving by the other; closed strokes: up to RING_ENTRY_CANDIDATES
    vertices, evenly spaced, vertex 0 first, each leaving where it came in."""
    o = np.flatnonzero(~geo.closed)
    n_o = len(o)
    c = np.flatnonzero(geo.closed)
    m = np.ones(len(c), dtype=np.int64)
    has_ring = geo.ring_of[c] >= 0
    rs = geo.ring_of[c[has_ring]]
    m[has_ring] = geo.ring_start[rs + 1] - geo.ring_start[rs]
    k = np.minimum(m, RING_ENTRY_CANDIDATES)
    rep = np.repeat(np.arange(len(c)), k)
    j = run_ranks(k)
    vert = (j * m[rep]) // k[rep]
    cxy = geo.A[c][rep].copy()
    ring = geo.ring_of[c][rep]
    on_ring = ring >= 0
    cxy[on_ring] = geo.ring_pts[geo.ring_start[ring[on_ring]] + vert[on_ring]]
    xy = np.concatenate([geo.A[o], geo.B[o], cxy])
    stroke = np.concatenate([o, o, c[rep]])
    flip = np.concatenate([np.zeros(n_o, bool), np.ones(n_o, bool), np.zeros(len(rep), bool)])
    vertex = np.concatenate([np.zeros(2 * n_o, np.int64), vert])
    exit_id = np.concatenate([np.arange(n_o) + n_o, np.arange(n_o),
                              2 * n_o + np.arange(len(rep))])
    return xy, stroke, flip, vertex, exit_id


def _nearest_neighbour(geo: _Geometry, lists=None):
    """(seq, flip per position, rot per stroke, lists) of the nearest-neighbour tour from
    stroke 0 drawn as given. `lists`: `_endpoint_lists` of the strokes' ends (for a drawing
    without multi-vertex closed strokes), shared with the local search; with such strokes the
    lists returned are made from this phase's query instead (see `_lists_from_candidates`).

    Every candidate's nearest candidates come from one `_knn` query; the first one in the
    list whose stroke is not drawn yet is the nearest of all such. When a list is used up,
    `_Remaining` finds it."""
    S = geo.S
    rot = np.zeros(S, dtype=np.int64)
    if S == 1:
        return np.zeros(1, np.int64), np.zeros(1, bool), rot, lists
    if len(geo.ring_stroke) == 0:
        nb = (lists if lists is not None else
              _endpoint_lists(geo.A, geo.B, geo.closed, NN_NEIGHBOURS))[0]
        ids = np.flatnonzero(~np.repeat(geo.closed, 2) | (np.arange(2 * S) % 2 == 0))
        xy = np.where((ids % 2 == 0)[:, None], geo.A[ids >> 1], geo.B[ids >> 1])
        stroke = np.arange(2 * S) >> 1
        flip = (np.arange(2 * S) % 2 == 1)
        vertex = np.zeros(2 * S, dtype=np.int64)
        exit_id = np.where(np.repeat(geo.closed, 2), np.arange(2 * S) & ~1,
                           np.arange(2 * S) ^ 1)
        px, py = np.zeros(2 * S), np.zeros(2 * S)
        px[ids], py[ids] = xy[:, 0], xy[:, 1]
        pool = ids
        start = 0
    else:
        xy, stroke, flip, vertex, exit_id = _ring_candidates(geo)
        N = len(xy)
        k = int(min(N, NN_NEIGHBOURS + 1 + min(RING_ENTRY_CANDIDATES,
                                                int(np.bincount(stroke).max()))))
        nd, nb = _knn(xy, xy, k, _workers(N))
        nd, nb = nd.reshape(N, k), nb.reshape(N, k)
        px, py = xy[:, 0].copy(), xy[:, 1].copy()
        pool = np.arange(N)
        start = int(np.flatnonzero((stroke == 0) & ~flip & (vertex == 0))[0])
    # memoryviews: element reads without building Python lists of the whole arrays
    k = nb.shape[1]
    nbv = memoryview(np.ascontiguousarray(nb, dtype=np.int64).ravel())
    stv = memoryview(np.ascontiguousarray(stroke, dtype=np.int64))
    exv = memoryview(np.ascontiguousarray(exit_id, dtype=np.int64))
    alive = bytearray(b"\x01") * S
    alive[0] = 0
    picks = [start]
    far = _Remaining(np.column_stack([px, py])[pool], pool, stroke,
                     np.frombuffer(alive, dtype=bool), picks)
    cur = exv[start]
    for _ in range(S - 1):
        base = cur * k
        for j in range(base, base + k):
            c = nbv[j]
            if c >= 0 and alive[stv[c]]:
                break
        else:
            c = far.nearest(px[cur], py[cur], S - len(picks))
        t = stv[c]
        alive[t] = 0
        picks.append(c)
        cur = exv[c]
    picks = np.array(picks)
    seq = stroke[picks]
    rot[seq] = vertex[picks]
    if len(geo.ring_stroke):
        lists = _lists_from_candidates(geo, nb, nd, stroke, flip, picks)
    return seq.astype(np.int64), flip[picks] & ~geo.closed[seq], rot, lists


def _lists_from_candidates(geo, nb, nd, stroke, flip, picks):
    """Endpoint neighbour lists (as `_endpoint_lists`) from the candidates' query: an open
    stroke's end takes its candidate's row, a closed stroke the row of the vertex it was
    entered at; each listed candidate stands for its stroke's end (a closed stroke's other
    vertices for the one it is entered at: the distance is then only a guide)."""
    S = geo.S
    ep = 2 * stroke + (flip & ~geo.closed[stroke])      # the endpoint id a candidate stands for
    row = np.empty(2 * S, dtype=np.int64)
    o = np.flatnonzero(~geo.closed[stroke])
    row[ep[o]] = o
    c = picks[geo.closed[stroke[picks]]]
    row[2 * stroke[c]], row[2 * stroke[c] + 1] = c, c
    out = ep[nb[row]]
    d = nd[row].copy()
    own = (out >> 1) == (np.arange(2 * S) >> 1)[:, None]
    out[own] = -1
    d[own] = np.inf
    return out, d


class _Remaining:
    """The nearest candidate of a stroke not drawn yet, for when a neighbour list is used up.

    While more than `REMAINING_DIRECT` candidates are left they sit in a uniform grid of about
    two per cell (sorted by cell, so a row of cells is one slice). A search looks through a
    window of cells round the query point, doubling it until it holds a live candidate, and
    widens it once more if the nearest one found is farther away than the window's edge; so
    the answer is exact. Fewer candidates are simply all measured (a few dozen numpy calls on
    a window, and rebuilding the grid, cost more than one pass over ten thousand points):
    the strokes the walk has drawn since the last search are moved to infinity first, and
    equal distances go to the lowest candidate id. Once the dead are more than half of what
    was built, it is rebuilt from the live candidates only."""

    def __init__(self, xy, ids, stroke, live, picks):
        self.stroke = stroke
        self.live = live                      # (S,) bool, the walk's own: not drawn yet
        self.picks = picks                    # the walk's candidates picked so far (a list)
        self.xy, self.ids = xy, ids
        self.grid = None                      # built when first needed

    def _build(self, left: int):
        keep = self.live[self.stroke[self.ids]]
        xy, ids = self.xy[keep], self.ids[keep]
        n = len(xy)
        self.in_grid = left
        self.xy, self.ids = xy, ids
        self.direct = n <= REMAINING_DIRECT
        if self.direct:
            self.grid = ()
            self.dx, self.dy = xy[:, 0].copy(), xy[:, 1].copy()
            self.dst = self.stroke[ids]
            # where each stroke's candidates are (by stroke, in id order within it): a stroke
            # drawn since is taken out by moving its candidates to infinity
            self.by_stroke = (np.arange(n) if n < 2 or np.all(self.dst[1:] >= self.dst[:-1])
                              else np.argsort(self.dst, kind="stable"))
            self.first_of = np.searchsorted(self.dst[self.by_stroke],
                                            np.arange(len(self.live) + 1))
            self.seen = len(self.picks)
            return
        lo = xy.min(axis=0)
        span = xy.max(axis=0) - lo
        cell = _grid_cell(span, n, 2.0) if n else 1.0
        nx, ny, cid = _grid_cells(xy, lo, span, cell)
        o, self.start = _by_cell(cid, nx * ny)
        self.gx_, self.gy_ = xy[o, 0], xy[o, 1]
        self.gid, self.gst = ids[o], self.stroke[ids[o]]
        self.grid = (float(lo[0]), float(lo[1]), cell, nx, ny)

    def nearest(self, x, y, left: int) -> int:
        """The nearest candidate to (x, y) of the `left` strokes not drawn yet."""
        if self.grid is None or 2 * left < self.in_grid:
            self._build(left)
        if self.direct:
            if len(self.picks) > self.seen:
                drawn = self.stroke[np.asarray(self.picks[self.seen:], dtype=np.int64)]
                self.seen = len(self.picks)
                a, b = self.first_of[drawn], self.first_of[drawn + 1]
                size = b - a
                at = self.by_stroke[concat_ranges(a, size)]
                self.dx[at] = np.inf
            d2 = self.dx - x
            d2 *= d2
            dy = self.dy - y
            dy *= dy
            d2 += dy
            return int(self.ids[int(d2.argmin())])
        x0g, y0g, cell, nx, ny = self.grid
        cx = min(max(int((x - x0g) // cell), 0), nx - 1)
        cy = min(max(int((y - y0g) // cell), 0), ny - 1)
        R = 2
        while True:
            c0, c1 = max(cx - R, 0), min(cx + R, nx - 1)
            r0, r1 = max(cy - R, 0), min(cy + R, ny - 1)
            rows = np.arange(r0, r1 + 1) * nx
            a = self.start[rows + c0]
            lens = self.start[rows + c1 + 1] - a
            tot = int(lens.sum())
            whole = c0 == 0 and r0 == 0 and c1 == nx - 1 and r1 == ny - 1
            if tot:
                idx = concat_ranges(a, lens)
                idx = idx[self.live[self.gst[idx]]]
                if len(idx):
                    d2 = (self.gx_[idx] - x) ** 2 + (self.gy_[idx] - y) ** 2
                    k = int(np.argmin(d2))
                    # the window's edges that are not the grid's: nothing nearer lies beyond
                    inner = min(x - (x0g + c0 * cell) if c0 > 0 else np.inf,
                                x0g + (c1 + 1) * cell - x if c1 < nx - 1 else np.inf,
                                y - (y0g + r0 * cell) if r0 > 0 else np.inf,
                                y0g + (r1 + 1) * cell - y if r1 < ny - 1 else np.inf)
                    if d2[k] <= inner * inner or whole:
                        return int(self.gid[idx[k]])
                    R = max(2 * R, int(np.sqrt(d2[k]) // cell) + 2)
                    continue
            if whole:
                raise RuntimeError("no stroke left to draw")    # cannot happen: S - 1 picks
            R *= 2


# --- phase 2 and 3: local search ----------------------------------------------------------------

class _Search:
    """Local search on a closed tour.

    State: seq (the stroke at each position), rot (entry vertex per stroke) and slot: where
    stroke t's end A (endpoint id 2 t, see `_endpoint_lists`) is along the loop, 2 pos for an
    entry, 2 pos + 1 for an exit (its end B is at `slot[t] ^ 1`); position and flip follow from
    it. A closed stroke is handled as an open one whose two ends are at one point (its flip is
    dropped at the end), so a jump always joins an exit slot 2 q + 1 to the entry slot 2 q + 2.

    A round evaluates, as arrays, every move suggested around the active strokes and keeps the
    improving ones, best first. It then applies them one after another, each only if the jumps
    it removes are all still in the tour (see `_round`): its change in cost depends only on
    those jumps' endpoints, so it is still exact. Strokes next to new jumps become active for
    the next round.
    """

    def __init__(self, geo: _Geometry, cost_fn, seq, flip_pos, rot, fixed_rotation=0,
                 lists=None):
        self.geo, self.cost_fn = geo, cost_fn
        self.S = S = geo.S
        self.seq = np.asarray(seq, dtype=np.int64).copy()
        self.rot = np.asarray(rot, dtype=np.int64).copy()
        self.slot = np.empty(S, dtype=np.int64)
        self.slot[self.seq] = 2 * np.arange(S) + (np.asarray(flip_pos, dtype=bool)
                                                  & ~geo.closed[self.seq])
        self.closed = geo.closed
        self.A, self.B = geo.at_rotation(self.rot)
        self.AB = np.hstack([self.A, self.B])
        self.rings = geo.ring_stroke[geo.ring_stroke != fixed_rotation]
        self.active = np.ones(S, dtype=bool)
        self.lists = lists
        self.rotated_since_lists = False

    def C(self, d):
        return d if self.cost_fn is None else self.cost_fn(d)

    def state(self):
        f = (self.slot[self.seq] & 1).astype(bool)
        return self.seq.copy(), f & ~self.geo.closed[self.seq], self.rot.copy()

    def _layout(self):
        """Per position: entry and exit point, their endpoint ids, and the jump cost J[k] from
        position k to k + 1."""
        s = self.seq
        self.pos = self.slot >> 1
        self.flip = self.slot & 1
        f = self.flip[s].astype(bool)
        P = self.AB[s]                          # ax, ay, bx, by of the stroke at each position
        self.ix = np.where(f, P[:, 2], P[:, 0])
        self.iy = np.where(f, P[:, 3], P[:, 1])
        self.ox = np.where(f, P[:, 0], P[:, 2])
        self.oy = np.where(f, P[:, 1], P[:, 3])
        self.in_id = 2 * s + f
        self.out_id = 2 * s + 1 - f
        nx, ny = np.empty_like(self.ix), np.empty_like(self.iy)
        nx[:-1], nx[-1], ny[:-1], ny[-1] = self.ix[1:], self.ix[0], self.iy[1:], self.iy[0]
        self.D = np.hypot(self.ox - nx, self.oy - ny)     # jump lengths (mm)
        self.J = self.C(self.D)

    def _neighbour_lists(self):
        if self.lists is None or self.rotated_since_lists:
            self.lists = _endpoint_lists(self.A, self.B, self.closed, NEIGHBOURS)
        nb, nd = _spread_hubs(*self.lists, self.A, self.B, self.closed)
        fin = np.isfinite(nd)
        nc = np.full_like(nd, np.inf)
        nc[fin] = self.C(nd[fin])
        self.nb, self.nc = nb, nc
        self.nc_least = nc.min(axis=1)         # rows whose least cost says no move: skipped
        self.rotated_since_lists = False

    def run(self, deadline: float, max_rounds: int | None = None, min_gain: float = 0.0) -> None:
        self._neighbour_lists()
        self._layout()
        rebuilds = 0
        rounds = 0
        before, before_mm = float(np.sum(self.J)), float(np.sum(self.D))
        while time.perf_counter() < deadline and (max_rounds is None or rounds < max_rounds):
            rounds += 1
            was_active = self.active.copy()
            improved = self._round(deadline)
            if len(self.rings):
                improved |= self._rotate_rings(was_active | self.active)
            if improved:
                # a round that shortened the jumps' travel by a share worth having goes on
                # too: a cost that counts the length little or not at all (a jump's time)
                # gains little cost while the travel still falls
                now, now_mm = float(np.sum(self.J)), float(np.sum(self.D))
                if before - now < min_gain * now and before_mm - now_mm < min_gain * now_mm:
                    break
                before, before_mm = now, now_mm
                continue
            if self.rotated_since_lists and rebuilds < 3:
                # closed strokes now start at other vertices: their neighbours are stale
                rebuilds += 1
                self._neighbour_lists()
                self.active[:] = True
                continue
            break

    # candidate moves -------------------------------------------------------------------------

    def _role(self, c):
        """(is entry, is exit) of endpoint ids c in the current tour."""
        t = c >> 1
        cl = self.closed[t]
        same = (c & 1) == self.flip[t]
        return cl | same, cl | ~same

    def _two_opt(self, act):
        """2-opt moves from the active positions, by exit-to-exit neighbours (new jump
        out_i -> out_j) and entry-to-entry ones (new jump in_k -> in_m). Returns the removed
        jumps e1, e2 (positions) and the change in cost as (the new jumps' lengths, the
        removed jumps' costs): (C(a) + C(b)) - r1 - r2 (see `_deltas`)."""
        S = self.S
        e1s, e2s = [], []
        for use_exit in (True, False):
            a = self.out_id[act] if use_exit else self.in_id[act]
            own = act if use_exit else (act - 1) % S
            lim = self.J[own]
            near = self.nc_least[a] < lim
            a, own, lim = a[near], own[near], lim[near]
            c = self.nb[a]
            r, col = _nonzero_2d((c >= 0) & (self.nc[a] < lim[:, None]))
            c = c[r, col]
            is_in, is_out = self._role(c)
            other = self.pos[c >> 1]
            if use_exit:
                e1, e2 = own[r][is_out], other[is_out]
            else:
                e1, e2 = own[r][is_in], (other[is_in] - 1) % S
            keep = e1 != e2
            e1s.append(e1[keep])
            e2s.append(e2[keep])
        e1, e2 = np.concatenate(e1s), np.concatenate(e2s)
        ix, iy, ox, oy, J = self.ix, self.iy, self.ox, self.oy, self.J
        n1, n2 = (e1 + 1) % S, (e2 + 1) % S
        return e1, e2, (np.hypot(ox[e1] - ox[e2], oy[e1] - oy[e2]),
                        np.hypot(ix[n1] - ix[n2], iy[n1] - iy[n2]), J[e1], J[e2])

    def _or_opt(self, act):
        """Or-opt moves of runs of 1 .. MAX_SEGMENT strokes s .. e (an end at an active
        position) to between p and p + 1, forwards or reversed (rev). Returns s, e, p, rev and
        the change in cost as `_two_opt` does."""
        S = self.S
        ix, iy, ox, oy, J = self.ix, self.iy, self.ox, self.oy, self.J
        starts, lengths = [], []
        for L in range(1, min(MAX_SEGMENT, S - 3) + 1):
            mark = np.zeros(S, dtype=bool)
            mark[act] = True
            mark[(act - (L - 1)) % S] = True
            st = np.flatnonzero(mark)
            starts.append(st)
            lengths.append(np.full(len(st), L))
        s, L = np.concatenate(starts), np.concatenate(lengths)
        e = (s + L - 1) % S
        before, after = (s - 1) % S, (e + 1) % S
        gain = J[before] + J[e] - self.C(np.hypot(ox[before] - ix[after],
                                                  oy[before] - iy[after]))
        good = gain > 0
        s, e, L, gain = s[good], e[good], L[good], gain[good]
        # from the run's entry (first half) and from its exit (second half)
        a = np.concatenate([self.in_id[s], self.out_id[e]])
        from_entry = np.arange(2 * len(s)) < len(s)
        g2 = np.concatenate([gain, gain])
        row = np.flatnonzero(self.nc_least[a] < g2)
        c = self.nb[a[row]]
        r, col = _nonzero_2d((c >= 0) & (self.nc[a[row]] < g2[row, None]))
        c = c[r, col]
        r = row[r]
        is_in, is_out = self._role(c)
        q = self.pos[c >> 1]
        fe = from_entry[r]
        # the neighbour is an exit: the run goes after it; an entry: before it. From the run's
        # entry that is forwards after an exit, reversed before an entry; from its exit the
        # other way round
        rr = np.concatenate([r[is_out], r[is_in]]) % max(len(s), 1)
        p = np.concatenate([q[is_out], (q[is_in] - 1) % S])
        rev = np.concatenate([~fe[is_out], fe[is_in]])
        ss, ee, LL, g = s[rr], e[rr], L[rr], gain[rr]
        keep = (p - ss + 1) % S > LL                       # p not in s - 1 .. e
        ss, ee, g, p, rev = ss[keep], ee[keep], g[keep], p[keep], rev[keep]
        p1 = (p + 1) % S
        # forwards: out_p -> in_s and out_e -> in_(p+1); reversed: out_p -> out_e, in_s -> in_(p+1)
        hx, hy = np.where(rev, ox[ee], ix[ss]), np.where(rev, oy[ee], iy[ss])
        tx, ty = np.where(rev, ix[ss], ox[ee]), np.where(rev, iy[ss], oy[ee])
        return ss, ee, p, rev, (np.hypot(ox[p] - hx, oy[p] - hy),
                                np.hypot(tx - ix[p1], ty - iy[p1]), J[p], g)

    def _deltas(self, *moves):
        """The change in cost of each kind of move, (C(a) + C(b)) - r1 - r2 from the
        (a, b, r1, r2) of each, with one call of the jump model for all."""
        n = [len(m[0]) for m in moves]
        c = self.C(np.concatenate([x for m in moves for x in m[:2]]))
        out, at = [], 0
        for m, k in zip(moves, n):
            out.append((c[at:at + k] + c[at + k:at + 2 * k]) - m[2] - m[3])
            at += 2 * k
        return out

    # one round -------------------------------------------------------------------------------

    def _candidates(self, act):
        """The improving moves around the active positions, best first, each as the jumps it
        removes: (delta, kind (0: 2-opt, 1: Or-opt), six endpoint ids, rev). 2-opt: jumps
        (u1 -> v1), (u2 -> v2); Or-opt: the jump into the run, out of it, and the jump at p."""
        S = self.S
        tol = 1e-9 * float(np.mean(np.abs(self.J))) + 1e-300
        inn, out = self.in_id, self.out_id
        e1, e2, m2 = self._two_opt(act)
        if S >= 4:
            s, e, p, rev, m3 = self._or_opt(act)
            d2, d3 = self._deltas(m2, m3)
            k = d3 < -tol
            s, e, p, rev, d3 = s[k], e[k], p[k], rev[k], d3[k]
        else:
            (d2,) = self._deltas(m2)
            s = e = p = np.zeros(0, np.int64)
            rev, d3 = np.zeros(0, bool), np.zeros(0)
        k = d2 < -tol
        e1, e2, d2 = e1[k], e2[k], d2[k]
        n1, n2 = (e1 + 1) % S, (e2 + 1) % S
        d = np.concatenate([d2, d3])
        kind = np.concatenate([np.zeros(len(d2), np.int8), np.ones(len(d3), np.int8)])
        ends = np.concatenate([
            np.column_stack([out[e1], inn[n1], out[e2], inn[n2], out[e1], inn[n1]]),
            np.column_stack([out[(s - 1) % S], inn[s], out[e], inn[(e + 1) % S],
                             out[p], inn[(p + 1) % S]])])
        rev = np.concatenate([np.zeros(len(d2), bool), rev])
        # the same move is often found from several of its endpoints: keep it once
        lo_hi = np.concatenate([np.minimum(e1, e2), (s - 1) % S])
        hi_lo = np.concatenate([np.maximum(e1, e2), p])
        code = np.concatenate([np.zeros(len(d2), np.int64), 2 * ((e - s) % S) + 1 + rev[len(d2):]])
        key = code * S * S + lo_hi * S + hi_lo
        _, first = np.unique(key, return_index=True)
        first = first[np.argsort(d[first], kind="stable")]
        return d[first], kind[first], ends[first], rev[first]

    def _round(self, deadline: float) -> bool:
        """One round: evaluate around the active strokes, then apply the improving moves best
        first, each only if the jumps it removes are all still in the tour. Returns whether
        the tour changed.

        A jump is still there if its two endpoints face each other across neighbouring
        positions, either way round (a reversal elsewhere may have turned it round). A 2-opt
        move needs its two jumps turned the same way (otherwise reconnecting them would split
        the loop); an Or-opt move needs the two jumps around its run turned the same way, and
        its third jump outside the run. The move's new jumps join the same endpoints as when
        it was evaluated, so its change in cost is the same."""
        S = self.S
        act = np.flatnonzero(self.active[self.seq])
        if len(act) == 0:
            return False
        delta, kind, ends, rev = self._candidates(act)
        self.active[self.seq[act]] = False
        if len(delta) == 0:
            return False
        S2 = 2 * S
        # element access through memoryviews of the arrays (which the moves rewrite in place):
        # no numpy scalar or index array per access
        slot, active, seq = memoryview(self.slot), memoryview(self.active), memoryview(self.seq)

        def where(u, v):
            """q + 1 if the jump runs q -> q + 1 from u to v, -(q + 1) if from v to u, 0 if
            it is gone."""
            su, sv = slot[u >> 1] ^ (u & 1), slot[v >> 1] ^ (v & 1)
            if su & 1 and (su + 1) % S2 == sv:
                return (su >> 1) + 1
            if sv & 1 and (sv + 1) % S2 == su:
                return -((sv >> 1) + 1)
            return 0

        applied = 0
        for n_seen, (mk, (a1, b1, a2, b2, a3, b3), mrev) in enumerate(
                zip(kind.tolist(), ends.tolist(), rev.tolist())):
            if n_seen & 63 == 63 and time.perf_counter() > deadline:
                break
            w1, w2 = where(a1, b1), where(a2, b2)
            if w1 == 0 or w2 == 0 or (w1 > 0) != (w2 > 0):
                active[a1 >> 1] = active[b1 >> 1] = active[a2 >> 1] = active[b2 >> 1] = True
                continue
            if mk == 0:
                new_jumps = self._reverse(abs(w1) - 1, abs(w2) - 1)
            else:
                w3 = where(a3, b3)
                q0, q1, p = abs(w1) - 1, abs(w2) - 1, abs(w3) - 1
                s, e = (q0 + 1, q1) if w1 > 0 else (q1 + 1, q0)
                s, L = s % S, (e - s) % S + 1
                if w3 == 0 or (p - s + 1) % S <= L:
                    active[a1 >> 1] = active[b1 >> 1] = active[a3 >> 1] = active[b3 >> 1] = True
                    continue
                new_jumps = self._move_run(s, L, p, mrev ^ (w1 < 0) ^ (w3 < 0))
            applied += 1
            for k in new_jumps:
                active[seq[k % S]] = True
                active[seq[(k + 1) % S]] = True
        if applied:
            self._layout()
        return applied > 0

    def _reverse(self, i: int, j: int):
        """2-opt: drop the jumps after positions i and j, reverse what lies between (the
        shorter way round). Returns the positions of the new jumps."""
        S = self.S
        n = (j - i) % S                                     # positions i+1 .. j, or j+1 .. i
        lo, n = ((i + 1) % S, n) if 2 * n <= S else ((j + 1) % S, S - n)
        seq = self.seq
        hi = lo + n - 1
        if hi < S:
            moved = seq[lo:hi + 1][::-1].copy()
            seq[lo:hi + 1] = moved
        else:
            idx = _arc(lo, n, S)
            moved = seq[idx[::-1]]
            seq[idx] = moved
        # the stroke at position p goes to lo + hi - p, turned round: slot x -> K - x
        v = self.slot[moved]
        np.subtract(2 * (lo + hi) + 1, v, out=v)
        if hi >= S:
            v %= 2 * S
        self.slot[moved] = v
        return lo - 1, hi

    def _move_run(self, s: int, L: int, p: int, rev: bool):
        """Or-opt: move the run at positions s .. s+L-1 to between p and p + 1, reversed if
        `rev`, rewriting the shorter stretch of the loop. Returns the new jumps' positions."""
        S = self.S
        e = (s + L - 1) % S
        n_a, n_b = (p - s) % S + 1, (e - p) % S
        seq, slot = self.seq, self.slot
        # without wrapping round: the others shift along by L (their slots by 2 L, the flip
        # bit kept), the run goes in after them (s .. p) or before them (p + 1 .. e)
        if n_a <= n_b and s + n_a <= S:
            m = n_a - L
            run = seq[s:s + L].copy()
            slot[seq[s + L:s + n_a]] -= 2 * L
            seq[s:s + m] = seq[s + L:s + n_a]
            at = s + m
        elif n_a > n_b and p + 1 + n_b <= S:
            m, q0 = n_b - L, p + 1
            run = seq[q0 + m:q0 + n_b].copy()
            slot[seq[q0:q0 + m]] += 2 * L
            seq[q0 + L:q0 + n_b] = seq[q0:q0 + m]
            at = q0
        else:
            at = None
        if at is not None:
            if rev:
                run = run[::-1]
            seq[at:at + L] = run
            slot[run] = 2 * np.arange(at, at + L) + ((slot[run] & 1) ^ int(rev))
            return (s - 1, s + m - 1, s + n_a - 1) if n_a <= n_b else (p, p + L, p + n_b)
        if n_a <= n_b:                                      # positions s .. p: others, run
            idx = _arc(s, n_a, S)
            run, rest = idx[:L], idx[L:]
            src = np.concatenate([rest, run[::-1] if rev else run])
            new_jumps = (s - 1, s + n_a - L - 1, s + n_a - 1)
            run_at = slice(n_a - L, None)
        else:                                               # positions p+1 .. e: run, others
            idx = _arc(p + 1, n_b, S)
            run, rest = idx[n_b - L:], idx[:n_b - L]
            src = np.concatenate([run[::-1] if rev else run, rest])
            new_jumps = (p, p + L, p + n_b)
            run_at = slice(0, L)
        moved = seq[src]
        seq[idx] = moved
        f = self.slot[moved] & 1
        if rev:
            f[run_at] ^= 1
        self.slot[moved] = 2 * idx + f
        return new_jumps

    # phase 3: entry vertices ------------------------------------------------------------------

    def _rotate_rings(self, active) -> bool:
        """Re-enter each active closed stroke at its cheapest vertex given its neighbours; in
        two or three passes, so that no two strokes moved together are next to each other."""
        geo, S = self.geo, self.S
        rings = self.rings[active[self.rings]]
        if len(rings) == 0:
            return False
        p = self.pos[rings]
        group = p % 2
        if S % 2:
            group[p == S - 1] = 2
        changed = False
        for g in range(3):
            r = rings[group == g]
            if len(r) == 0:
                continue
            pr = self.pos[r]
            px, py = self.ox[(pr - 1) % S], self.oy[(pr - 1) % S]
            qx, qy = self.ix[(pr + 1) % S], self.iy[(pr + 1) % S]
            ri = geo.ring_of[r]
            first = geo.ring_start[ri]
            count = geo.ring_start[ri + 1] - first
            head = np.cumsum(count) - count
            which = np.repeat(np.arange(len(r)), count)
            v = np.arange(len(which)) - head[which]
            vxy = geo.ring_pts[first[which] + v]
            val = (self.C(np.hypot(vxy[:, 0] - px[which], vxy[:, 1] - py[which]))
                   + self.C(np.hypot(vxy[:, 0] - qx[which], vxy[:, 1] - qy[which])))
            best = np.minimum.reduceat(val, head)
            now = val[head + self.rot[r]]
            tol = 1e-9 * float(np.mean(np.abs(self.J))) + 1e-300
            better = best < now - tol
            if not better.any():
                continue
            hit = np.flatnonzero(val <= best[which])
            _, at = np.unique(which[hit], return_index=True)
            new_v = v[hit[at]][better]
            rr = r[better]
            self.rot[rr] = new_v
            xy = geo.ring_pts[first[better] + new_v]
            self.A[rr] = xy
            self.B[rr] = xy
            self.AB[rr, :2] = self.AB[rr, 2:] = xy
            prr = self.pos[rr]
            self.active[self.seq[(prr - 1) % S]] = True
            self.active[rr] = True
            self.active[self.seq[(prr + 1) % S]] = True
            self.rotated_since_lists = True
            changed = True
            self._layout()
        return changed


def _nonzero_2d(mask: np.ndarray):
    """np.nonzero of a 2-D mask (row, column of each True, row by row), through the flat
    index: numpy's 1-D search is many times faster than its 2-D one."""
    return np.divmod(np.flatnonzero(mask), mask.shape[1])


def _arc(lo: int, n: int, S: int) -> np.ndarray:
    """Positions lo .. lo + n - 1 round the loop."""
    lo %= S
    if lo + n <= S:
        return np.arange(lo, lo + n)
    return np.arange(lo, lo + n) % S


# --- merging --------------------------------------------------------------------------------

def _chains(pts, offs, inten, tol):
    """The output strokes as chains of input strokes: a list of (members, reversed, closed)
    (lists), members in drawing order, the chains in the order of their earliest member.

    Ends (2 i: the first point of line stroke i, 2 i + 1: its last) within `tol` of each other
    and of the same intensity form a node (connected components of the close pairs). Where
    exactly two ends meet, each is the other's partner; a chain is walked from partner to
    partner, so it stops at a free end or a junction of three or more."""
    S = len(offs) - 1
    counts = np.diff(offs)
    # a stroke has a length when any of its points differs from another (its extent > 0)
    first = offs[:-1]
    extent = np.zeros(S, dtype=bool)
    for k in range(2):
        c = pts[:, k]
        extent |= np.maximum.reduceat(c, first) > np.minimum.reduceat(c, first)
    line = np.flatnonzero((counts >= 2) & extent)             # dots are never joined
    singles = [([i], [False], False)
               for i in np.flatnonzero((counts < 2) | ~extent).tolist()]
    if len(line) == 0:
        return singles
    ends = np.empty((2 * len(line), 2))
    ends[0::2], ends[1::2] = pts[offs[line]], pts[offs[line + 1] - 1]
    end_inten = np.repeat(inten[line], 2)
    n = len(ends)
    pairs = _close_pairs(ends, tol)
    pairs = pairs[end_inten[pairs[:, 0]] == end_inten[pairs[:, 1]]]
    node = _components(n, pairs)
    degree = np.bincount(node)[node]
    partner = np.full(n, -1, dtype=np.int64)
    two = np.flatnonzero(degree == 2)
    two = two[np.argsort(node[two], kind="stable")]
    partner[two[0::2]], partner[two[1::2]] = two[1::2], two[0::2]
    if np.all((two[0::2] >> 1) == (two[1::2] >> 1)):
        # no two strokes meet (at most a stroke's own ends, which close it): each stroke is
        # its own chain, in drawing order
        shut = np.zeros(len(line), dtype=bool)
        shut[two[0::2] >> 1] = True
        chains = [([i], [False], c) for i, c in zip(line.tolist(), shut.tolist())]
        return sorted(singles + chains, key=lambda c: c[0][0]) if singles else chains
    partner = partner.tolist()
    line_l = line.tolist()
    used = bytearray(len(line))
    chains = []
    for i in range(len(line)):
        if used[i]:
            continue
        # back from i's first point to the chain's free end, or round to i again
        look, closed = 2 * i, False
        while True:
            q = partner[look]
            if q < 0:
                break
            if q >> 1 == i:
                closed, look = True, 2 * i
                break
            look = q ^ 1
        members, revs = [], []
        e = look                                    # enter the chain's first stroke here
        while not used[e >> 1]:
            used[e >> 1] = 1
            members.append(e >> 1)
            revs.append(bool(e & 1))
            e = partner[e ^ 1]
            if e < 0:
                break
        # start with the earliest input stroke (a closed chain), and run it forwards
        k = members.index(min(members))
        if closed:
            members, revs = members[k:] + members[:k], revs[k:] + revs[:k]
            k = 0
        if revs[k]:
            members, revs = members[::-1], [not r for r in revs[::-1]]
            if closed:
                members, revs = members[-1:] + members[:-1], revs[-1:] + revs[:-1]
        chains.append(([line_l[m] for m in members], revs, closed))
    return sorted(singles + chains, key=lambda c: min(c[0]))


def _joined(pts, offs, inten, chains):
    """Pack the chains into strokes (see `_joined_all`). A stroke left as it was (one member,
    forwards, not closed by the merge) is copied as a slice, consecutive ones as one; only the
    joined chains are packed by `_joined_all`."""
    simple = [len(c[0]) == 1 and not c[1][0] and not c[2] for c in chains]
    if sum(simple) < len(chains) // 2:
        return _joined_all(pts, offs, inten, chains)
    other = [c for c, sm in zip(chains, simple) if not sm]
    o_pts, o_offs, _o_inten, _ = _joined_all(pts, offs, inten, other)
    pieces, counts = [], []
    run_a = run_b = None                    # input strokes run_a .. run_b - 1, copied as one
    j = 0
    for c, sm in zip(chains, simple):
        m = c[0][0]
        if sm:
            if run_b == m:
                run_b = m + 1
            else:
                if run_a is not None:
                    pieces.append(pts[offs[run_a]:offs[run_b]])
                run_a, run_b = m, m + 1
            counts.append(int(offs[m + 1] - offs[m]))
            continue
        if run_a is not None:
            pieces.append(pts[offs[run_a]:offs[run_b]])
            run_a = run_b = None
        pieces.append(o_pts[o_offs[j]:o_offs[j + 1]])
        counts.append(int(o_offs[j + 1] - o_offs[j]))
        j += 1
    if run_a is not None:
        pieces.append(pts[offs[run_a]:offs[run_b]])
    offsets = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
    first = np.array([min(c[0]) for c in chains])
    groups = [np.array(c[0], dtype=np.int64) for c in chains]
    return np.concatenate(pieces), offsets, inten[first], groups


def _joined_all(pts, offs, inten, chains):
    """Pack the chains into strokes: each member's points in its direction; where a member
    starts on the very point the previous one ended, that point once; a closed chain ends on
    its first point. All members at once: one index array into the input points."""
    M = np.array([m for c in chains for m in c[0]], dtype=np.int64)
    R = np.array([r for c in chains for r in c[1]], dtype=bool)
    size = np.array([len(c[0]) for c in chains])
    groups = np.split(M, np.cumsum(size)[:-1])
    chain_of = np.repeat(np.arange(len(chains)), size)
    lead = np.zeros(len(M), dtype=bool)
    lead[np.cumsum(size) - size] = True                 # the first member of each chain
    first_v = np.where(R, offs[M + 1] - 1, offs[M])
    last_v = np.where(R, offs[M], offs[M + 1] - 1)
    step = np.where(R, -1, 1)
    prev_last = np.roll(last_v, 1)
    drop = ~lead & np.all(pts[first_v] == pts[prev_last], axis=1)
    keep = (offs[M + 1] - offs[M]) - drop
    rep = np.repeat(np.arange(len(M)), keep)
    k = run_ranks(keep) + drop[rep]
    idx = first_v[rep] + k * step[rep]
    per_chain = np.bincount(chain_of, weights=keep, minlength=len(chains)).astype(np.int64)
    ends_at = np.cumsum(per_chain)
    closed = np.array([bool(c[2]) for c in chains])
    head = idx[ends_at - per_chain]
    shut = closed & ~np.all(pts[idx[ends_at - 1]] == pts[head], axis=1)
    idx = np.insert(idx, ends_at[shut], head[shut])
    per_chain = per_chain + shut
    offsets = np.concatenate([[0], np.cumsum(per_chain)]).astype(np.int64)
    first = np.array([min(c[0]) for c in chains])
    return pts[idx], offsets, inten[first], groups

"""Stroke ordering: in what order, and which way round, the strokes of a frame are drawn.

An ordering strategy is a function

    strategy(starts, ends, jump_cost, strokes=None) -> (order, reverse[, rotate])

given each stroke's first and last point ((S, 2) mm each), the jump model's cost of a jump of
a given length (`jump_cost(length_mm) -> samples`, vectorised; None: the length itself) and,
optionally, each stroke's points (a list of (k, 2) arrays); it returns the drawing order ((S,)
int, a permutation that keeps stroke 0 first: a frame starts with its first stroke lit), which
strokes are drawn backwards ((S,) bool, by drawing position; never a closed stroke) and,
optionally, the vertex each closed stroke starts from ((S,) int, by drawing position).
Strategies are found by name in `ORDERINGS`; a new one is one function plus one
`register_ordering` line.

* ``"tour"`` (the default): nearest neighbour, then 2-opt and Or-opt moves with
  free direction and free entry vertex of closed strokes, minimising the jumps' time
  (`vectorgen.tour`; the search also counts `TRAVEL_COST` samples per mm of blanked travel,
  and the shorter travel breaks ties of time), at most `TOUR_ROUNDS`
  rounds and none after one that gained less than `TOUR_MIN_GAIN` of the cost and of the
  travel, so that the same drawing always gives the same frame;
* ``"greedy"``: the nearest entry point each time (the order of earlier versions);
* ``"input"``: as given.
"""

from __future__ import annotations

import numpy as np

from ..registry import Registry

__all__ = ["ORDERINGS", "TOUR_ROUNDS", "register_ordering", "greedy_order", "input_order",
           "tour_order"]

TOUR_ROUNDS = 4     # rounds of improving moves (more gain a few per cent, at a cost per frame)
# ... and fewer once a round gains less than this share of the tour's cost: on the benchmark
# drawing rounds 3 and 4 took about 3 ms to save 5 jump samples (0.2 % of the jumps, of a
# 121,173-sample frame), while on 10,000 scattered strokes each of the four gains over 2 %
TOUR_MIN_GAIN = 0.005
TIE_BREAK = 0.25    # samples: the most the tie-break adds to a whole tour's jump time
# While searching, a mm of blanked travel also costs this many samples. A jump's time grows
# slowly with its length (the settle is the same for all, and a shaped jump's move grows
# slower than its length), so a search on time alone leaves the travel long. Over 17
# drawings (the benchmark drawing, the demo, the clock face, text, scattered text and 12
# sets of scattered strokes) the blanked travel was on average 0.94 of the nearest-neighbour
# walk's on time alone, 0.83 with the tie-break, 0.80 with this as well, for the same jump
# time as on time alone (0.6 % more than with the tie-break alone; 0.2 and 0.3 left more of
# those sets above 0.85 of the walk's travel). Slewing across the screen is the hardest work
# the deflection does, for nothing on the picture. The tour is still chosen by time (its
# ties by travel): never slower than the nearest-neighbour walk or the input order.
TRAVEL_COST = 0.5

ORDERINGS = Registry("stroke ordering")


def register_ordering(name: str, strategy) -> None:
    """Make an ordering strategy available by name (one line per new strategy)."""
    ORDERINGS.register(name, strategy)


def input_order(starts: np.ndarray, ends: np.ndarray, jump_cost=None, strokes=None):
    """The strokes as given, each forwards (for scripted effects that rely on the order).

    Examples
    --------
    >>> o, r = input_order(np.zeros((3, 2)), np.ones((3, 2)))
    >>> o.tolist(), r.tolist()
    ([0, 1, 2], [False, False, False])
    """
    S = len(starts)
    return np.arange(S, dtype=np.int64), np.zeros(S, dtype=bool)


def greedy_order(starts: np.ndarray, ends: np.ndarray, jump_cost=None, strokes=None):
    """Greedy nearest entry point from the end of stroke 0; open strokes may be reversed.

    The nearest point is the nearest in distance; a jump model's cost grows with distance, so
    it is the cheapest jump too.

    Examples
    --------
    >>> starts = np.array([[0.0, 0.0], [10.0, 0.0], [2.0, 0.0]])
    >>> ends = np.array([[1.0, 0.0], [11.0, 0.0], [3.0, 0.0]])
    >>> o, r = greedy_order(starts, ends)
    >>> o.tolist(), r.tolist()
    ([0, 2, 1], [False, False, False])
    """
    if len(starts) <= 2:
        return input_order(starts, ends)
    return _greedy_order(starts, ends)


def _greedy_order(starts: np.ndarray, ends: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(order, reversed) of the greedy nearest-entry walk through strokes with these first and
    last points ((S, 2) each). Candidate entry points: 2 i = the start of stroke i, 2 i + 1 =
    its end (entering there draws it backwards; never for a closed stroke). Each step is one
    squared distance dx dx + dy dy from the beam to every candidate (x and y as contiguous 1-D
    arrays, the arithmetic in preallocated buffers) and one argmin (the first of equal minima);
    the bookkeeping is in Python lists. A used candidate is moved to infinity, so its distance
    is infinite, and once most are used up they are dropped (order kept, so ties still go to
    the lowest candidate)."""
    S = len(starts)
    cx, cy = np.empty(2 * S), np.empty(2 * S)
    cx[0::2], cx[1::2] = starts[:, 0], ends[:, 0]
    cy[0::2], cy[1::2] = starts[:, 1], ends[:, 1]
    ex, ey = cx.tolist(), cy.tolist()   # the beam leaves by the other end: candidate k ^ 1
    closed = (cx[0::2] == cx[1::2]) & (cy[0::2] == cy[1::2])
    row = np.arange(2 * S)              # where each candidate is in cx, cy (-1: used or never)
    row[1::2][closed] = -1
    row[0:2] = -1                       # stroke 0 is drawn first, forwards
    cx[row < 0] = np.inf
    live = int((row >= 0).sum())
    row_of = row.tolist()
    ids = list(range(2 * S))            # the candidate at each position of cx, cy
    order, flip = [0], [False]
    bx, by = np.empty(2 * S), np.empty(2 * S)
    subtract, multiply, add = np.subtract, np.multiply, np.add
    inf = np.inf
    e = 1                               # the beam is at the end of stroke 0
    for _ in range(1, S):
        subtract(cx, ex[e], out=bx)
        multiply(bx, bx, out=bx)
        subtract(cy, ey[e], out=by)
        multiply(by, by, out=by)
        add(bx, by, out=bx)
        k = ids[bx.argmin()]
        pick = k >> 1
        order.append(pick)
        flip.append(bool(k & 1))
        e = k ^ 1
        for q in (k & ~1, k | 1):
            r = row_of[q]
            if r >= 0:
                cx[r] = inf
                row_of[q] = -1
                live -= 1
        if 4 * live < len(ids) and len(ids) > 256:
            keep = [i for i, c in enumerate(ids) if row_of[c] >= 0]
            cx, cy = cx[keep], cy[keep]
            ids = [ids[i] for i in keep]
            for i, c in enumerate(ids):
                row_of[c] = i
            bx, by = np.empty(len(ids)), np.empty(len(ids))
    return np.array(order, dtype=np.int64), np.array(flip, dtype=bool)


def tour_order(starts: np.ndarray, ends: np.ndarray, jump_cost=None, strokes=None):
    """The shortest tour in jump time the local search finds (see `vectorgen.tour.plan_tour`):
    never costlier than the greedy order or the input order.

    Examples
    --------
    >>> starts = np.array([[0.0, 0.0], [10.0, 0.0], [2.0, 0.0]])
    >>> ends = np.array([[1.0, 0.0], [11.0, 0.0], [3.0, 0.0]])
    >>> o, r, rot = tour_order(starts, ends)
    >>> o.tolist(), r.tolist()
    ([0, 2, 1], [False, False, False])
    """
    import math

    from ..tour import plan_tour

    if len(starts) <= 2:
        order, flip = input_order(starts, ends)
        return order, flip, np.zeros(len(starts), dtype=np.int64)
    cost = jump_cost
    if jump_cost is not None:
        # the jump's time in samples, then the shorter travel among tours of the same time:
        # a jump model's times are whole samples, so many tours tie, and the least travel
        # among them is the one to draw (less slewing of the deflection for nothing). The
        # length term stays below TIE_BREAK samples over the whole tour (no jump is longer
        # than the diagonal of the bounding box of every point a jump may start or end at:
        # the strokes' ends and the closed strokes' vertices), so it never buys length with
        # time.
        starts, ends = np.asarray(starts, dtype=float), np.asarray(ends, dtype=float)
        pts = [starts, ends]
        if strokes is not None:
            pts += [np.asarray(strokes[i], dtype=float).reshape(-1, 2)
                    for i in np.flatnonzero(np.all(starts == ends, axis=1)).tolist()]
        pts = np.vstack(pts)
        diag = float(np.hypot(*(pts.max(axis=0) - pts.min(axis=0))))
        per_mm = TIE_BREAK / (len(starts) * diag) if diag > 0 else 0.0

        def cost(length_mm):
            d = np.asarray(length_mm, dtype=float)
            return np.asarray(jump_cost(d), dtype=float) + per_mm * d
    t = plan_tour(starts, ends, closed_rings=strokes, cost=cost, budget_s=math.inf,
                  max_rounds=TOUR_ROUNDS, min_gain=TOUR_MIN_GAIN,
                  travel_cost=TRAVEL_COST if jump_cost is not None else 0.0)
    return t.order, t.reverse, t.rotate


register_ordering("tour", tour_order)
register_ordering("greedy", greedy_order)
register_ordering("input", input_order)

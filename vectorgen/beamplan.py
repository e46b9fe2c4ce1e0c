"""Beam plan: where the spot is at every sample of one frame, and whether it is lit.

* Strokes are ordered to keep blanked travel short (greedy nearest end, open strokes may be
  drawn backwards).
* Each stroke is cut at its sharp corners into pieces; each piece is resampled to evenly spaced
  points along its arc length (spacing = writing speed / sample rate, rounded per piece so a
  sample lands exactly on every corner), all strokes at once with numpy.interp on one global
  arc-length axis.
* Dwells: the start and end of each stroke and every sharp corner hold the spot for a few
  samples, so they come out bright and square; a dot (one-point stroke) dwells longer.
* Between strokes the spot jumps blanked in as few samples as the jump speed allows, then
  settles (blanked) at the next start. The frame ends with the jump back to its first stroke,
  so frames repeat seamlessly.

In `target_samples` mode the frame is fitted into exactly N samples: the dwells, jumps and
settles keep their lengths and the drawing's samples are shared out by arc length.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from .errors import VectorgenError
from .geometry import ClippedStrokes
from .strokes import Strokes

MAX_FRAME_SAMPLES = 50_000_000   # ~17 minutes at 48 kHz: beyond this a frame is a mistake
CHUNK = 1 << 14               # vertices or samples worked on at a time
GAP = 1.0  # arc-length gap between strokes on the global axis (any positive number works)


@dataclass
class Timing:
    """Beam timing in samples, worked out from the profile for one sample rate."""
    rate: int
    spacing_mm: float           # writing speed / rate
    jump_step_mm: float         # jump speed / rate (inf: every jump is a single sample)
    settle: int
    end_dwell: int
    corner_dwell: int
    dot_dwell: int
    corner_angle_deg: float

    @classmethod
    def from_beam(cls, beam, rate: int, writing_speed: float | None = None) -> "Timing":
        def samples(us):
            return int(round(us * 1e-6 * rate))
        speed = beam.writing_speed_mm_per_s if writing_speed is None else writing_speed
        jump = beam.jump_speed_mm_per_s
        return cls(rate, speed / rate, jump / rate if jump > 0 else np.inf,
                   samples(beam.settle_us), max(1, samples(beam.end_dwell_us)),
                   samples(beam.corner_dwell_us), max(1, samples(beam.dot_dwell_us)),
                   beam.corner_angle_deg)


class Plan:
    """Where the spot is at every sample of one frame, and whether it is lit.

    The frame is a run of lit samples per stroke (in drawing order), each followed by the run
    of blanked samples that jumps to the next stroke. `lit` is stored per sample; the spot
    position of any span of samples is worked out from the frame's layout on demand
    (`positions`), so the signal path goes through the frame in cache-sized chunks and never
    holds it whole. `x`, `y`, `points`, `intensity`, `stroke` and the reordered `strokes` are
    made when first asked for, and kept."""

    def __init__(self, layout: "_Layout", lit: np.ndarray, runs: np.ndarray, strokes,
                 stroke_intensity: np.ndarray, drawn_length_mm: float, moving_samples: int,
                 blanked_moves: int, blanked_length_mm: float, corners: int):
        self._layout = layout
        self.lit = lit              # (n,) bool: beam on
        self.runs = runs            # (2 S,) samples lit on stroke i, then blanked, in turn
        self.stroke_intensity = stroke_intensity    # (S,) of the strokes in the order drawn
        self.drawn_length_mm = drawn_length_mm
        self.moving_samples = moving_samples    # lit samples that advance along a stroke
        self.blanked_moves = blanked_moves
        self.blanked_length_mm = blanked_length_mm
        self.corners = corners
        # the strokes in the order drawn, or a function that makes them
        self._strokes = strokes

    def positions(self, start: int, stop: int) -> tuple[np.ndarray, np.ndarray]:
        """Spot x and y in mm of samples start .. stop - 1."""
        if "_xy" in self.__dict__:               # the whole frame was already worked out
            return self._xy[0][start:stop], self._xy[1][start:stop]
        return self._layout.positions(start, stop)

    @cached_property
    def _xy(self) -> tuple[np.ndarray, np.ndarray]:
        return self._layout.positions(0, self.samples)

    @property
    def x(self) -> np.ndarray:
        """(n,) spot x in mm at every sample."""
        return self._xy[0]

    @property
    def y(self) -> np.ndarray:
        """(n,) spot y in mm at every sample."""
        return self._xy[1]

    @property
    def samples(self) -> int:
        return len(self.lit)

    @property
    def stroke_count(self) -> int:
        return len(self.stroke_intensity)

    @property
    def strokes(self) -> Strokes:
        """The strokes in the order drawn (reversed ones flipped)."""
        if callable(self._strokes):
            self._strokes = self._strokes()
        return self._strokes

    @cached_property
    def points(self) -> np.ndarray:
        """(n, 2) spot position in mm at every sample."""
        return np.column_stack([self.x, self.y])

    @cached_property
    def intensity(self) -> np.ndarray:
        """(n,) brightness 0..1 (0 where blanked)."""
        S = self.stroke_count
        return np.repeat(np.column_stack([self.stroke_intensity, np.zeros(S)]).ravel(), self.runs)

    @cached_property
    def stroke(self) -> np.ndarray:
        """(n,) index into `strokes` of each lit sample, -1 when blanked."""
        S = self.stroke_count
        return np.repeat(np.column_stack([np.arange(S), np.full(S, -1)]).ravel(), self.runs)


def order_strokes(strokes: Strokes) -> Strokes:
    """Greedy nearest-neighbour order from the first stroke; open strokes may be reversed."""
    if strokes.count <= 2:
        return strokes
    offs = strokes.offsets
    return _reordered(strokes, *_greedy_order(strokes.points[offs[:-1]],
                                              strokes.points[offs[1:] - 1]))


def _reordered(strokes: Strokes, order: np.ndarray, flip: np.ndarray) -> Strokes:
    """The packed arrays in the new order, reversed strokes flipped: one slice (a view) per
    stroke and one copy, rather than per-vertex index arrays."""
    pts, offs = strokes.points, strokes.offsets.tolist()
    parts = []
    for i, f in zip(order.tolist(), flip.tolist()):
        part = pts[offs[i]:offs[i + 1]]
        parts.append(part[::-1] if f else part)
    return Strokes(np.concatenate(parts), _reordered_offsets(strokes, order),
                   strokes.intensity[order], [strokes.labels[i] for i in order])


def _reordered_offsets(strokes: Strokes, order: np.ndarray) -> np.ndarray:
    counts = np.diff(strokes.offsets)[order]
    return np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)


def _reordered_xy(arrays: list, order: np.ndarray, flip: np.ndarray):
    """x and y of the strokes' points (`arrays`: each stroke's (k, 2) points) in the new order,
    reversed strokes flipped, as two contiguous arrays: the same values as
    _reordered(...).points."""
    xs, ys = [], []
    for i, f in zip(order.tolist(), flip.tolist()):
        a = arrays[i][::-1] if f else arrays[i]
        xs.append(a[:, 0])
        ys.append(a[:, 1])
    return np.concatenate(xs), np.concatenate(ys)


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


def _turn_deg(d_in: np.ndarray, d_out: np.ndarray) -> np.ndarray:
    """Turning angle in degrees between incoming and outgoing direction vectors (m, 2)."""
    cosang = np.einsum("ij,ij->i", d_in, d_out) / (np.hypot(*d_in.T) * np.hypot(*d_out.T))
    return np.degrees(np.arccos(np.clip(cosang, -1.0, 1.0)))


def _apportion(budget: int, lengths: np.ndarray) -> np.ndarray:
    """Integers >= 1 summing to `budget`: the step counts of pieces of these lengths drawn at one
    common spacing d, n = max(1, round(L / d)), as the free-running speed mode does; d is found by
    bisection and the few samples left over go to the pieces closest to rounding up. (Shares
    proportional to length plus one sample each would slow every short piece down.)"""
    P = len(lengths)
    if budget < P:
        raise ValueError
    total = float(lengths.sum())
    if total <= 0:
        n = np.full(P, budget // P, dtype=np.int64)
        n[:budget - int(n.sum())] += 1
        return n

    def counts(d):
        return np.maximum(1, np.floor(lengths / d + 0.5)).astype(np.int64)

    lo, hi = total / (budget + P), 2.0 * float(lengths.max())   # counts(lo) >= budget >= counts(hi)
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        if not lo < mid < hi:
            break
        if counts(mid).sum() > budget:
            lo = mid
        else:
            hi = mid
    n = counts(hi)
    rest = budget - int(n.sum())
    if rest > 0:
        n[np.argsort(-(lengths / hi - n), kind="stable")[:rest]] += 1
    return n


def plan_frame(strokes: Strokes, timing: Timing, target_samples: int | None = None,
               reorder: bool = True) -> Plan:
    """The beam plan for one frame of `strokes` (mm, already clipped to the screen)."""
    if strokes.count == 0:
        raise VectorgenError("nothing to draw: the drawing is empty (or wholly off the screen)")
    S = strokes.count
    if isinstance(strokes, ClippedStrokes) and (not (reorder and S > 2)
                                                 or strokes.has_duplicates()):
        strokes = strokes.packed()
    if reorder and S > 2:
        # per-stroke points: views of the packed array, or of a clipped drawing's pieces
        if isinstance(strokes, ClippedStrokes):
            arrays = strokes.arrays()
            starts, ends = np.array([a[0] for a in arrays]), np.array([a[-1] for a in arrays])
        else:
            pts, o = strokes.points, strokes.offsets
            arrays = [pts[a:b] for a, b in zip(o[:-1].tolist(), o[1:].tolist())]
            starts, ends = pts[o[:-1]], pts[o[1:] - 1]
        order, flip = _greedy_order(starts, ends)
        # x, y (contiguous: whole-array arithmetic on them is several times faster than on
        # the columns of an (P, 2) array) in the new order; the reordered Strokes themselves
        # are made from them only if asked for
        px, py = _reordered_xy(arrays, order, flip)
        del arrays
        offs = _reordered_offsets(strokes, order)
        stroke_intensity = strokes.intensity[order]
        labels = strokes.labels

        def drawn():
            return Strokes(np.column_stack([px, py]), offs, stroke_intensity,
                           [labels[i] for i in order])
    else:
        px = np.ascontiguousarray(strokes.points[:, 0])
        py = np.ascontiguousarray(strokes.points[:, 1])
        offs, stroke_intensity, drawn = strokes.offsets, strokes.intensity, strokes
    P = len(px)
    first, last = offs[:-1], offs[1:] - 1

    # Global arc-length axis s: strokes laid end to end with a gap between them; and the
    # sharp corners (interior vertices only). Worked out CHUNK segments at a time (each chunk
    # starts one segment early, for the corner at its first vertex; the running sum goes on
    # from the last chunk's end), so the only full-length arrays are s and the corner flags.
    is_last = np.zeros(P, dtype=bool)
    is_last[last] = True
    s = np.empty(P)
    s[0] = 0.0
    sharp = np.zeros(P, dtype=bool)
    cos_corner = np.cos(np.radians(timing.corner_angle_deg))
    for g0 in range(0, P - 1, CHUNK):
        g1 = min(P - 1, g0 + CHUNK)             # segments g0 .. g1 - 1 (segment i: i -> i + 1)
        a0 = max(g0 - 1, 0)
        dx, dy = np.diff(px[a0:g1 + 1]), np.diff(py[a0:g1 + 1])
        sq = dx * dx                            # squared segment lengths dx dx + dy dy
        sq += dy * dy
        seg = np.empty(g1 - g0 + 1)             # the sum so far, then segment lengths
        seg[0] = s[g0]
        np.sqrt(sq[g0 - a0:], out=seg[1:])
        seg[1:][is_last[g0:g1]] = GAP           # a stroke's last vertex -> the next's first
        np.cumsum(seg, out=seg)
        s[g0 + 1:g1 + 1] = seg[1:]
        if len(dx) > 1:
            # turn > corner angle <=> cos(turn) = d_in . d_out / (|d_in| |d_out|) < cos(angle)
            dot = dx[:-1] * dx[1:]
            dot += dy[:-1] * dy[1:]
            norm = sq[:-1] * sq[1:]
            np.sqrt(norm, out=norm)
            norm *= cos_corner
            np.less(dot, norm, out=sharp[a0 + 1:g1])
    sharp[first] = False
    sharp[last] = False
    lengths = s[last] - s[first]

    # Pieces between consecutive boundary vertices (first, sharp corners, last) of a stroke:
    # a pair of consecutive boundaries belongs to one stroke unless the first is a stroke's last.
    boundary = sharp.copy()
    boundary[first] = True
    boundary[last] = True
    bidx = np.flatnonzero(boundary)
    a, b = bidx[:-1], bidx[1:]
    keep = ~is_last[a]
    a, b = a[keep], b[keep]
    piece_stroke = np.searchsorted(offs, a, side="right") - 1
    piece_len = s[b] - s[a]
    piece_last = is_last[b]
    # A closed stroke (ends on its start) has no free ends: its start point is lit once and
    # dwells again at the end only if the closure is a sharp corner (a rectangle's corner).
    is_dot = lengths == 0
    closed = ~is_dot & (px[first] == px[last]) & (py[first] == py[last])
    closed_sharp = np.zeros(S, dtype=bool)
    cs = np.flatnonzero(closed & (last - first >= 2))
    if cs.size:
        def at(i):
            return np.column_stack([px[i], py[i]])
        closed_sharp[cs] = _turn_deg(at(last[cs]) - at(last[cs] - 1),
                                     at(first[cs] + 1) - at(first[cs])) > timing.corner_angle_deg
    end_rep = np.where(closed, np.where(closed_sharp, timing.corner_dwell, 0), timing.end_dwell)
    piece_rep = np.where(piece_last, end_rep[piece_stroke], timing.corner_dwell)
    start_rep = np.where(is_dot, timing.dot_dwell, np.where(closed, 1, timing.end_dwell))

    # Blanked jumps from each stroke's end to the next stroke's start (the last one wraps).
    nxt = np.roll(np.arange(S), -1)
    jump_from = np.column_stack([px[last], py[last]])
    jump_to = np.column_stack([px[first[nxt]], py[first[nxt]]])
    jump_len = np.hypot(*(jump_to - jump_from).T)
    jumps = np.where(jump_len > 0, np.maximum(1, np.ceil(jump_len / timing.jump_step_mm)), 0)
    jumps = jumps.astype(np.int64)
    settles = np.where(jumps > 0, timing.settle, 0)

    if target_samples is None:
        piece_n = np.maximum(1, np.round(piece_len / timing.spacing_mm)).astype(np.int64)
    else:
        fixed = int(start_rep.sum() + piece_rep.sum() + jumps.sum() + settles.sum())
        budget = int(target_samples) - fixed
        if len(piece_len) == 0:
            if budget < 0:
                raise VectorgenError(f"a frame of {target_samples} samples is too short for "
                                     f"this drawing: it needs at least {fixed}")
            # Only dots: share the spare samples out as longer dwells.
            extra = _apportion(budget + S, np.ones(S)) - 1
            start_rep = start_rep + extra
            piece_n = np.zeros(0, dtype=np.int64)
        else:
            try:
                piece_n = _apportion(budget, piece_len)
            except ValueError:
                raise VectorgenError(
                    f"a frame of {target_samples} samples is too short for this drawing: it "
                    f"needs at least {fixed + len(piece_len)} (dwells, jumps and settles take "
                    f"{fixed}); lower the refresh rate or raise the sample count") from None

    n_total = int(piece_n.sum() + start_rep.sum() + piece_rep.sum() + jumps.sum() + settles.sum())
    if n_total > MAX_FRAME_SAMPLES:
        raise VectorgenError(f"one frame would take {n_total} samples ({n_total / timing.rate:.0f} s):"
                             f" raise the writing speed or draw less")

    # Blocks in drawing order: per stroke a start block, its pieces, then its blanked jump.
    # Block: param = base + step * min(k + 1, n_move) for k in 0 .. n_move + n_rep - 1 (so a
    # piece moves n_move samples, then dwells n_rep on its end; a start block dwells).
    # A jump block sits at its stroke's end; its samples are set afterwards (a straight line).
    blank_size = jumps + settles
    blk_key = np.concatenate([2 * first, 2 * a + 1, 2 * last + 1])
    blk_base = np.concatenate([s[first], s[a], s[last]])
    blk_step = np.concatenate([np.zeros(S), piece_len / np.maximum(piece_n, 1), np.zeros(S)])
    blk_move = np.concatenate([np.zeros(S, dtype=np.int64), piece_n, np.zeros(S, dtype=np.int64)])
    blk_rep = np.concatenate([start_rep, piece_rep, blank_size]).astype(np.int64)
    blk_stroke = np.concatenate([np.arange(S), piece_stroke, np.arange(S)])
    blk_lit = np.concatenate([np.ones(S + len(a), dtype=bool), np.zeros(S, dtype=bool)])
    o = np.argsort(blk_key, kind="stable")
    blk_base, blk_step, blk_move, blk_rep, blk_stroke, blk_lit = (
        blk_base[o], blk_step[o], blk_move[o], blk_rep[o], blk_stroke[o], blk_lit[o])
    blk_size = blk_move + blk_rep
    blk_end = np.cumsum(blk_size)
    lit_count = np.bincount(blk_stroke[blk_lit], weights=blk_size[blk_lit],
                            minlength=S).astype(np.int64)
    runs = np.column_stack([lit_count, blank_size]).ravel()
    lit = np.repeat(np.tile(np.array([True, False]), S), runs)

    # Blanked samples: jump samples then settle samples at the destination.
    blank_total = int(blank_size.sum())
    kb = np.arange(blank_total) - np.repeat(np.cumsum(blank_size) - blank_size, blank_size)
    frac = np.minimum(kb + 1, np.repeat(jumps, blank_size)) / \
        np.repeat(np.maximum(jumps, 1), blank_size)
    at = np.repeat(np.cumsum(runs)[1::2] - blank_size, blank_size) + kb
    blank_x = np.repeat(jump_from[:, 0], blank_size) + \
        np.repeat(jump_to[:, 0] - jump_from[:, 0], blank_size) * frac
    blank_y = np.repeat(jump_from[:, 1], blank_size) + \
        np.repeat(jump_to[:, 1] - jump_from[:, 1], blank_size) * frac

    layout = _Layout(s, px, py, blk_end - blk_size, blk_end, blk_move, blk_step, blk_base,
                     at, blank_x, blank_y)
    return Plan(layout, lit, runs, drawn, stroke_intensity,
                drawn_length_mm=float(lengths.sum()),
                moving_samples=int(piece_n.sum()),
                blanked_moves=int((jumps > 0).sum()),
                blanked_length_mm=float(jump_len.sum()),
                corners=int(sharp.sum() + closed_sharp.sum()))


class _Layout:
    """A frame's samples as blocks on the global arc-length axis s (vertices px, py): block b
    covers samples start[b] .. end[b] - 1 at parameters base + step * min(k + 1, move), k the
    sample's place in its block; the blanked samples `at` lie on straight jumps instead."""

    def __init__(self, s, px, py, start, end, move, step, base, at, blank_x, blank_y):
        self.s, self.px, self.py = s, px, py
        self.start, self.end, self.move, self.step, self.base = start, end, move, step, base
        self.at, self.blank_x, self.blank_y = at, blank_x, blank_y

    def positions(self, c0: int, c1: int) -> tuple[np.ndarray, np.ndarray]:
        """x and y of samples c0 .. c1 - 1, by linear interpolation along the axis."""
        b0 = int(np.searchsorted(self.end, c0, side="right"))
        b1 = int(np.searchsorted(self.end, c1 - 1, side="right")) + 1
        sizes = np.minimum(self.end[b0:b1], c1) - np.maximum(self.start[b0:b1], c0)
        mult = np.arange(c0 + 1, c1 + 1)                        # k + 1 ...
        mult -= np.repeat(self.start[b0:b1], sizes)
        np.minimum(mult, np.repeat(self.move[b0:b1], sizes), out=mult)     # ... held at n_move
        param = np.repeat(self.step[b0:b1], sizes)
        param *= mult
        param += np.repeat(self.base[b0:b1], sizes)
        x = np.interp(param, self.s, self.px)
        y = np.interp(param, self.s, self.py)
        i0, i1 = np.searchsorted(self.at, [c0, c1])
        if i1 > i0:
            j = self.at[i0:i1] - c0
            x[j] = self.blank_x[i0:i1]
            y[j] = self.blank_y[i0:i1]
        return x, y

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

import numpy as np

from .errors import VectorgenError
from .strokes import Strokes

MAX_FRAME_SAMPLES = 50_000_000   # ~17 minutes at 48 kHz: beyond this a frame is a mistake
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


@dataclass
class Plan:
    points: np.ndarray          # (n, 2) spot position in mm at every sample
    lit: np.ndarray             # (n,) bool: beam on
    intensity: np.ndarray       # (n,) brightness 0..1 (0 where blanked)
    stroke: np.ndarray          # (n,) index into `strokes` of each lit sample, -1 when blanked
    strokes: Strokes            # the strokes in the order drawn
    drawn_length_mm: float
    moving_samples: int         # lit samples that advance along a stroke (no dwells)
    blanked_moves: int
    blanked_length_mm: float
    corners: int

    @property
    def samples(self) -> int:
        return len(self.lit)


def order_strokes(strokes: Strokes) -> Strokes:
    """Greedy nearest-neighbour order from the first stroke; open strokes may be reversed."""
    S = strokes.count
    if S <= 2:
        return strokes
    order, flip = _greedy_order(strokes)
    # Rebuild the packed arrays in the new order, reversed strokes flipped: one slice (a view)
    # per stroke and one copy, rather than per-vertex index arrays.
    pts, offs = strokes.points, strokes.offsets.tolist()
    parts = []
    for i, f in zip(order.tolist(), flip.tolist()):
        part = pts[offs[i]:offs[i + 1]]
        parts.append(part[::-1] if f else part)
    counts = np.diff(strokes.offsets)[order]
    new_offs = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
    return Strokes(np.concatenate(parts), new_offs, strokes.intensity[order],
                   [strokes.labels[i] for i in order])


def _greedy_order(strokes: Strokes) -> tuple[np.ndarray, np.ndarray]:
    """(order, reversed) of the greedy nearest-entry walk. Candidate entry points: 2 i = the
    start of stroke i, 2 i + 1 = its end (entering there draws it backwards; never for a closed
    stroke). Each step is one squared distance dx dx + dy dy from the beam to every candidate
    (x and y as contiguous 1-D arrays, the arithmetic in preallocated buffers) and one argmin
    (the first of equal minima). A used candidate is moved to infinity, so its distance is
    infinite, and once most are used up they are dropped (order kept, so ties still go to the
    lowest candidate)."""
    S = strokes.count
    pts, offs = strokes.points, strokes.offsets
    cx, cy = np.empty(2 * S), np.empty(2 * S)
    cx[0::2], cx[1::2] = pts[offs[:-1], 0], pts[offs[1:] - 1, 0]
    cy[0::2], cy[1::2] = pts[offs[:-1], 1], pts[offs[1:] - 1, 1]
    ex, ey = cx.tolist(), cy.tolist()   # the beam leaves by the other end: candidate k ^ 1
    closed = (cx[0::2] == cx[1::2]) & (cy[0::2] == cy[1::2])
    row_of = np.arange(2 * S)           # where each candidate is in cx, cy (-1: used or never)
    row_of[1::2][closed] = -1
    row_of[0:2] = -1                    # stroke 0 is drawn first, forwards
    cx[row_of < 0] = np.inf
    ids = np.arange(2 * S)              # the candidate at each position of cx, cy
    live = int((row_of >= 0).sum())
    order = np.empty(S, dtype=np.int64)
    flip = np.zeros(S, dtype=bool)
    order[0] = 0
    bx, by = np.empty(2 * S), np.empty(2 * S)
    subtract, multiply, add = np.subtract, np.multiply, np.add
    e = 1                               # the beam is at the end of stroke 0
    for used in range(1, S):
        subtract(cx, ex[e], out=bx)
        multiply(bx, bx, out=bx)
        subtract(cy, ey[e], out=by)
        multiply(by, by, out=by)
        add(bx, by, out=bx)
        k = int(ids[int(bx.argmin())])
        pick = k >> 1
        order[used], flip[used] = pick, k & 1
        e = k ^ 1
        for q in (2 * pick, 2 * pick + 1):
            r = int(row_of[q])
            if r >= 0:
                cx[r] = np.inf
                row_of[q] = -1
                live -= 1
        if 4 * live < len(ids) and len(ids) > 256:
            keep = row_of[ids] >= 0
            cx, cy, ids = cx[keep], cy[keep], ids[keep]
            row_of[ids] = np.arange(len(ids))
            bx, by = np.empty(len(ids)), np.empty(len(ids))
    return order, flip


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
    if reorder:
        strokes = order_strokes(strokes)
    pts, offs = strokes.points, strokes.offsets
    S, P = strokes.count, len(pts)
    first, last = offs[:-1], offs[1:] - 1

    # Global arc-length axis: strokes laid end to end with a gap between them.
    # (x and y as contiguous 1-D arrays: whole-array arithmetic on them is several times
    # faster than on the columns of an (P, 2) array or with fancy indexing; in-place where a
    # temporary would only be thrown away)
    px, py = np.ascontiguousarray(pts[:, 0]), np.ascontiguousarray(pts[:, 1])
    dx, dy = np.diff(px), np.diff(py)
    sq = dx * dx                        # squared segment lengths dx dx + dy dy
    sq += dy * dy
    seg = np.sqrt(sq)
    if P > 1:
        seg[last[:-1]] = GAP
    s = np.empty(P)
    s[0] = 0.0
    np.cumsum(seg, out=s[1:])
    del seg
    lengths = s[last] - s[first]
    is_last = np.zeros(P, dtype=bool)
    is_last[last] = True

    # Sharp corners (interior vertices only).
    sharp = np.zeros(P, dtype=bool)
    if P > 2:
        # turn > corner angle  <=>  cos(turn) = d_in . d_out / (|d_in| |d_out|) < cos(angle)
        dot = dx[:-1] * dx[1:]
        dot += dy[:-1] * dy[1:]
        norm = sq[:-1] * sq[1:]
        np.sqrt(norm, out=norm)
        norm *= np.cos(np.radians(timing.corner_angle_deg))
        np.less(dot, norm, out=sharp[1:-1])
        del dot, norm
        sharp[first] = False
        sharp[last] = False
    del dx, dy, sq

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
        closed_sharp[cs] = _turn_deg(pts[last[cs]] - pts[last[cs] - 1],
                                     pts[first[cs] + 1] - pts[first[cs]]) > timing.corner_angle_deg
    end_rep = np.where(closed, np.where(closed_sharp, timing.corner_dwell, 0), timing.end_dwell)
    piece_rep = np.where(piece_last, end_rep[piece_stroke], timing.corner_dwell)
    start_rep = np.where(is_dot, timing.dot_dwell, np.where(closed, 1, timing.end_dwell))

    # Blanked jumps from each stroke's end to the next stroke's start (the last one wraps).
    nxt = np.roll(np.arange(S), -1)
    jump_from = pts[last]
    jump_to = pts[first[nxt]]
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

    # Lit blocks in drawing order: a start block per stroke, then its pieces.
    # Block: param = base + step * min(k + 1, n_move) for k in 0 .. n_move + n_rep - 1.
    blk_key = np.concatenate([2 * first, 2 * a + 1])
    blk_base = np.concatenate([s[first], s[a]])
    blk_step = np.concatenate([np.zeros(S), piece_len / np.maximum(piece_n, 1)])
    blk_move = np.concatenate([np.zeros(S, dtype=np.int64), piece_n])
    blk_rep = np.concatenate([start_rep, piece_rep]).astype(np.int64)
    blk_stroke = np.concatenate([np.arange(S), piece_stroke])
    o = np.argsort(blk_key, kind="stable")
    blk_base, blk_step, blk_move, blk_rep, blk_stroke = (
        blk_base[o], blk_step[o], blk_move[o], blk_rep[o], blk_stroke[o])
    blk_size = blk_move + blk_rep
    blk_end = np.cumsum(blk_size)
    lit_total = int(blk_end[-1])

    # Blanked blocks: jump samples then settle samples at the destination.
    blank_size = jumps + settles
    blank_total = int(blank_size.sum())
    kb = np.arange(blank_total) - np.repeat(np.cumsum(blank_size) - blank_size, blank_size)
    frac = np.minimum(kb + 1, np.repeat(jumps, blank_size)) / \
        np.repeat(np.maximum(jumps, 1), blank_size)
    blank_x = np.repeat(jump_from[:, 0], blank_size) + \
        np.repeat(jump_to[:, 0] - jump_from[:, 0], blank_size) * frac
    blank_y = np.repeat(jump_from[:, 1], blank_size) + \
        np.repeat(jump_to[:, 1] - jump_from[:, 1], blank_size) * frac

    # Stroke i's lit samples, then its jump to stroke i + 1 (both in order, so boolean masks
    # place them).
    lit_count = np.bincount(blk_stroke, weights=blk_size, minlength=S).astype(np.int64)
    runs = np.column_stack([lit_count, blank_size]).ravel()
    n = lit_total + blank_total
    lit = np.repeat(np.tile(np.array([True, False]), S), runs)
    dark = ~lit
    points = np.empty((n, 2))
    points[dark, 0] = blank_x
    points[dark, 1] = blank_y
    del dark

    # The lit samples' positions along the global axis, then x and y by linear interpolation,
    # each written into its column of `points` at once (full-length temporaries are dropped as
    # soon as they are used, so they reuse each other's memory).
    mult = np.arange(1, lit_total + 1)                      # k + 1 ...
    mult -= np.repeat(blk_end - blk_size, blk_size)
    np.minimum(mult, np.repeat(blk_move, blk_size), out=mult)   # ... held at n_move
    param = np.repeat(blk_step, blk_size)
    param *= mult
    del mult
    param += np.repeat(blk_base, blk_size)
    points[lit, 0] = np.interp(param, s, px)
    points[lit, 1] = np.interp(param, s, py)
    del param, s, px, py
    stroke_idx = np.repeat(np.column_stack([np.arange(S), np.full(S, -1)]).ravel(), runs)
    intensity = np.repeat(np.column_stack([strokes.intensity, np.zeros(S)]).ravel(), runs)

    return Plan(points, lit, intensity, stroke_idx, strokes,
                drawn_length_mm=float(lengths.sum()),
                moving_samples=int(piece_n.sum()),
                blanked_moves=int((jumps > 0).sum()),
                blanked_length_mm=float(jump_len.sum()),
                corners=int(sharp.sum() + closed_sharp.sum()))

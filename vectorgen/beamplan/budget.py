"""The sample budget: how many steps each piece of a stroke gets.

Free-running (the writing speed sets the frame time), a piece of length L gets
n = max(1, round(L / spacing)) steps. For an exact-N frame (a waveform generator's memory, or a
fixed refresh) the dwells, jumps and settles keep their lengths and the drawing's steps are
shared out by arc length at one common spacing (`apportion`).
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError

__all__ = ["apportion", "piece_steps"]


def apportion(budget: int, lengths: np.ndarray) -> np.ndarray:
    """Integers >= 1 summing to `budget`: the step counts of pieces of these lengths drawn at one
    common spacing d, n = max(1, round(L / d)), as the free-running speed mode does; d is found by
    bisection and the few samples left over go to the pieces closest to rounding up. (Shares
    proportional to length plus one sample each would slow every short piece down.)

    Raises
    ------
    ValueError
        When the budget is smaller than the number of pieces.

    Examples
    --------
    >>> apportion(10, np.array([1.0, 1.0, 3.0])).tolist()
    [2, 2, 6]
    """
    P = len(lengths)
    if budget < P:
        raise ValueError("budget below one step per piece")
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


def piece_steps(piece_len: np.ndarray, spacing_mm: float, target_samples: int | None,
                fixed: int, start_rep: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(steps per piece, start dwells): free-running at `spacing_mm`, or fitted into exactly
    `target_samples` when `fixed` samples (dwells, jumps, settles) are already taken. A frame
    of dots only shares its spare samples out as longer dwells (`start_rep` grows)."""
    if target_samples is None:
        return np.maximum(1, np.round(piece_len / spacing_mm)).astype(np.int64), start_rep
    budget = int(target_samples) - fixed
    if len(piece_len) == 0:
        if budget < 0:
            raise InputError(f"a frame of {target_samples} samples is too short for this drawing:"
                             f" it needs at least {fixed}", parameter="frame_samples")
        S = len(start_rep)
        extra = apportion(budget + S, np.ones(S)) - 1
        return np.zeros(0, dtype=np.int64), start_rep + extra
    try:
        return apportion(budget, piece_len), start_rep
    except ValueError:
        raise InputError(
            f"a frame of {target_samples} samples is too short for this drawing: it needs at "
            f"least {fixed + len(piece_len)} (dwells, jumps and settles take {fixed}); lower "
            f"the refresh rate or raise the sample count", parameter="frame_samples") from None

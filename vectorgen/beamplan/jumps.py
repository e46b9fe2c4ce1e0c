"""Blanked jumps: how many samples a jump between strokes takes and where the spot is during it.

The jump model is the planner's one answer to "what does a jump of d mm cost": the layout asks
it for every jump of a frame, and an ordering strategy can ask it for the cost of a candidate
tour. Today's model moves in a straight line at the profile's jump speed (one sample when the
speed is unlimited) and then settles, blanked, for a fixed time.
"""

from __future__ import annotations

import numpy as np

__all__ = ["StraightJumps"]


class StraightJumps:
    """Straight blanked moves at a fixed step per sample, then a fixed settle.

    Parameters
    ----------
    step_mm : float
        Longest step per sample (inf: a jump is one sample).
    settle : int
        Blanked samples held at the destination after every jump.

    Examples
    --------
    >>> j = StraightJumps(2.0, 3)
    >>> j.move_samples(np.array([0.0, 1.0, 5.0])).tolist(), j.cost(5.0)
    ([0, 1, 3], 6)
    """

    def __init__(self, step_mm: float, settle: int):
        self.step_mm = float(step_mm)
        self.settle = int(settle)

    def move_samples(self, length_mm: np.ndarray) -> np.ndarray:
        """(J,) int64 samples of the move itself for jumps of these lengths (0 for none)."""
        length_mm = np.asarray(length_mm, dtype=float)
        n = np.where(length_mm > 0, np.maximum(1, np.ceil(length_mm / self.step_mm)), 0)
        return n.astype(np.int64)

    def settle_samples(self, move: np.ndarray) -> np.ndarray:
        """(J,) int64 blanked samples held at the destination after each move."""
        return np.where(move > 0, self.settle, 0).astype(np.int64)

    def cost(self, length_mm) -> np.ndarray:
        """Samples a jump of `length_mm` takes in all (move + settle): the jump's time, for
        ordering strategies."""
        move = self.move_samples(np.atleast_1d(length_mm))
        total = move + self.settle_samples(move)
        return total if np.ndim(length_mm) else int(total[0])

    def fractions(self, k: np.ndarray, move: np.ndarray) -> np.ndarray:
        """How far along its jump (0 .. 1) the spot is at blanked sample k of a jump whose move
        takes `move` samples (k counts from 0; k >= move is the settle: 1)."""
        return np.minimum(k + 1, move) / np.maximum(move, 1)

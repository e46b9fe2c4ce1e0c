"""Runs laid end to end: the two index idioms the vectorised code keeps needing.

A flat array often holds runs of `sizes[i]` elements one after another (the samples of each
jump, the points of each stroke, the candidates in each grid cell). Without a Python loop:

* `run_ranks(sizes)`: each element's place (0, 1, ...) within its own run;
* `concat_ranges(starts, sizes)`: the ranges starts[i] .. starts[i] + sizes[i] - 1, one after
  another (``np.concatenate([np.arange(a, a + k) for a, k in zip(starts, sizes)])``).
"""

from __future__ import annotations

import numpy as np

__all__ = ["run_ranks", "concat_ranges"]


def run_ranks(sizes) -> np.ndarray:
    """Each element's place within its run, for runs of `sizes` (non-negative ints) end to end.

    Examples
    --------
    >>> run_ranks(np.array([3, 0, 2])).tolist()
    [0, 1, 2, 0, 1]
    """
    sizes = np.asarray(sizes)
    return np.arange(int(sizes.sum())) - np.repeat(np.cumsum(sizes) - sizes, sizes)


def concat_ranges(starts, sizes) -> np.ndarray:
    """The ranges starts[i] .. starts[i] + sizes[i] - 1, one after another.

    Examples
    --------
    >>> concat_ranges(np.array([10, 4, 7]), np.array([2, 0, 3])).tolist()
    [10, 11, 7, 8, 9]
    """
    sizes = np.asarray(sizes)
    return np.repeat(np.asarray(starts) - (np.cumsum(sizes) - sizes), sizes) + np.arange(
        int(sizes.sum()))

"""Blanked jumps: how many samples a jump between strokes takes and where the spot is during it.

The jump model is the planner's one answer to "what does this jump cost, and what path does the
spot take": the layout asks it for every jump of a frame (`moves`, `settles`, `path`), and an
ordering strategy can ask it for the cost of a jump of a given length (`cost`). Three models:

* `StraightJumps`: a straight move at the profile's jump speed (one sample when unlimited): for
  an output that holds each sample (a waveform generator), or with compensation turned off.
* `ShapedJumps`: for a band-limited output (an audio interface): a smooth move whose length
  grows with the distance, shaped so that through the interface's anti-imaging low-pass the
  spot has settled on the stroke before Z turns on and stays on it until Z is off
  (`vectorgen.interface.jump_shape`).
* `LagJumps`: for a lagging deflection (`[response]`): the fastest move the drive allows,
  x(t) = V + (x0 - V) exp(-t / tau) with V the drive limit towards the target, laid out as the
  spot's path so that the compensation stage turns it into full drive (`vectorgen.response`).

Every model then holds the spot, blanked, for the profile's settle time.
"""

from __future__ import annotations

import numpy as np

from ..runs import run_ranks

__all__ = ["StraightJumps", "ShapedJumps", "LagJumps", "JUMP_TOL_MM"]

JUMP_TOL_MM = 0.07      # largest error a jump may add to a lit sample (the goal is 0.1 mm)


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

    def moves(self, jump_from: np.ndarray, jump_to: np.ndarray) -> np.ndarray:
        """(J,) int64 move samples of the jumps from (J, 2) to (J, 2) mm."""
        return self.move_samples(np.hypot(*(jump_to - jump_from).T))

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
        """How far along its jump (0 .. 1) the spot is at move sample k (from 0) of a jump
        whose move takes `move` samples."""
        return np.minimum(k + 1, move) / np.maximum(move, 1)

    def path(self, jump_from: np.ndarray, jump_to: np.ndarray, move: np.ndarray) -> np.ndarray:
        """(sum(move), 2) spot positions (mm) of every jump's move samples, jump by jump; the
        last sample of each move is its destination."""
        k = run_ranks(move)
        frac = self.fractions(k, np.repeat(move, move))[:, None]
        a = np.repeat(jump_from, move, axis=0)
        return a + (np.repeat(jump_to, move, axis=0) - a) * frac


def _reach(errors: np.ndarray, tol: float) -> np.ndarray | None:
    """reach[i]: the longest jump (mm, a float) with jump * errors[i] <= tol, worked out
    exactly in floating point (the product is monotone in the jump), so that `length <=
    reach[i]` is that test itself; None unless the errors fall with the move length (reach
    then grows, and one binary search finds the shortest move)."""
    e = np.asarray(errors, dtype=float)
    if not (len(e) and np.all(e > 0) and np.all(np.isfinite(e)) and np.all(np.diff(e) <= 0)):
        return None
    r = tol / e
    for _ in range(64):
        over = r * e > tol
        if not over.any():
            break
        r[over] = np.nextafter(r[over], 0.0)
    for _ in range(64):
        up = np.nextafter(r, np.inf)
        more = up * e <= tol
        if not more.any():
            break
        r[more] = up[more]
    if np.any(r * e > tol) or np.any(np.nextafter(r, np.inf) * e <= tol):
        return None
    return r


class ShapedJumps(StraightJumps):
    """Band-limited blanked moves: the shortest shaped move whose ringing through the
    interface's low-pass stays within `tol_mm`, at least as long as the jump speed allows.

    Examples
    --------
    >>> j = ShapedJumps(np.inf, 0)
    >>> j.move_samples(np.array([0.0, 1.0, 100.0])).tolist()
    [0, 4, 8]
    """

    def __init__(self, step_mm: float, settle: int, tol_mm: float = JUMP_TOL_MM):
        from ..interface import MAX_MOVE_SAMPLES, jump_error, jump_shape

        super().__init__(step_mm, settle)
        self.tol_mm = float(tol_mm)
        self._errors = np.array([jump_error(m) for m in range(1, MAX_MOVE_SAMPLES + 1)])
        shapes = [jump_shape(m) for m in range(1, MAX_MOVE_SAMPLES + 1)]
        self._flat = np.concatenate(shapes)
        self._base = np.concatenate([[0], np.cumsum([len(s) for s in shapes])])
        self._most = MAX_MOVE_SAMPLES
        self._reach = _reach(self._errors, self.tol_mm)

    def move_samples(self, length_mm):
        length_mm = np.asarray(length_mm, dtype=float)
        # the shortest m with length * error(m) <= tol
        if self._reach is not None:
            m = np.minimum(np.searchsorted(self._reach, length_mm, side="left") + 1,
                           self._most)
        else:
            ok = length_mm[..., None] * self._errors <= self.tol_mm
            m = np.where(ok.any(axis=-1), ok.argmax(axis=-1) + 1, self._most)
        slew = np.ceil(length_mm / self.step_mm) if np.isfinite(self.step_mm) else 0
        return np.where(length_mm > 0, np.maximum(m, slew), 0).astype(np.int64)

    def fractions(self, k, move):
        """The stored shape of each move length; a move longer than the longest shape (a slow
        jump speed) follows a raised cosine, which is smoother still."""
        k = np.asarray(k)
        move = np.asarray(move)
        short = move <= self._most
        out = np.empty(k.shape)
        idx = self._base[np.clip(move[short], 1, self._most) - 1] + k[short]
        out[short] = self._flat[idx]
        long_ = ~short
        out[long_] = (1.0 - np.cos(np.pi * (k[long_] + 1) / move[long_])) / 2.0
        return out


class LagJumps(StraightJumps):
    """The fastest blanked moves a lagging deflection allows within the drive limit, laid out as
    the spot's path (the compensation stage makes the drive from it).

    Parameters
    ----------
    response : vectorgen.response.Response
        First order (tau per axis) uses `vectorgen.response.jump_paths_xy`; second order a
        raised-cosine move long enough that the compensated drive stays within the limit.
    model : DeflectionModel
        mm <-> drive.
    drive_limit : float
        Largest |drive| a jump may ask for (below 1: headroom for the interface's overshoot).
    rate : int
    tol_mm : float
        How close to its destination the spot must be when the jump ends (the spot size).
    settle : int
    """

    def __init__(self, response, model, drive_limit: float, rate: int, tol_mm: float,
                 settle: int):
        super().__init__(np.inf, settle)
        self.response = response
        self.model = model
        self.limit = float(drive_limit)
        self.rate = int(rate)
        gain = model.weakest_mm_per_fs
        self.tol_fs = float(tol_mm) / gain
        self._fs_per_mm = 1.0 / gain

    def _drive(self, pts_mm: np.ndarray) -> np.ndarray:
        return self.model.mm_to_drive(pts_mm)

    def _limits(self, a, b) -> np.ndarray:
        """(J, 1) drive limit per jump: the headroom limit, or just beyond a jump's ends when
        they lie further out (a stroke drawn near full scale), never beyond full scale."""
        ends = np.maximum(np.abs(a).max(axis=-1), np.abs(b).max(axis=-1))
        return np.minimum(np.maximum(self.limit, ends + 0.02), 1.0)[:, None]

    def moves(self, jump_from, jump_to):
        from ..response import jump_samples

        a, b = self._drive(jump_from), self._drive(jump_to)
        if self.response.order == 1:
            tau = np.asarray(self.response.tau_s, dtype=float)
            lim = self._limits(a, b)
            a, b = np.clip(a, -lim, lim), np.clip(b, -lim, lim)
            n = jump_samples(a, b, tau, lim, self.rate, self.tol_fs).max(axis=-1)
        else:
            n = self._smooth_samples(a, b)
        d = np.hypot(*(jump_to - jump_from).T)
        return np.where(d > 0, np.maximum(n, 1), 0).astype(np.int64)

    def _smooth_samples(self, a, b):
        """Second order: a raised cosine of duration T over distance d needs peak drive about
        |u| + d pi / (2 T) * lag + d pi^2 / (2 T^2 wn^2); the shortest T within the limit."""
        lag = np.asarray(self.response.lag_s, dtype=float)
        wn = 2 * np.pi * np.asarray(self.response.natural_hz, dtype=float)
        d = np.abs(b - a)
        room = np.maximum(self.limit - np.maximum(np.abs(a), np.abs(b)), 1e-3)
        # solve room = d pi lag / (2T) + d pi^2 / (2 T^2 wn^2) for T (positive root)
        A = d * np.pi ** 2 / (2 * wn ** 2)
        B = d * np.pi * lag / 2
        T = (B + np.sqrt(B * B + 4 * room * A)) / (2 * room)
        return np.ceil(T * self.rate).max(axis=-1).astype(np.int64)

    def cost(self, length_mm):
        """An estimate for ordering: the first-order fastest move across `length_mm` from the
        centre (the real cost depends on where the jump is)."""
        from ..response import jump_samples

        d = np.atleast_1d(np.asarray(length_mm, dtype=float)) * self._fs_per_mm
        d = np.minimum(d, 2 * self.limit)
        if self.response.order == 1:
            tau = float(np.max(self.response.tau_s))
            n = jump_samples(-d / 2, d / 2, tau, self.limit, self.rate, self.tol_fs)
        else:
            n = self._smooth_samples(np.column_stack([-d / 2] * 2), np.column_stack([d / 2] * 2))
        total = np.where(d > 0, np.maximum(n, 1) + self.settle, 0)
        return total if np.ndim(length_mm) else int(total[0])

    def path(self, jump_from, jump_to, move):
        from ..response import jump_paths_xy

        move = np.asarray(move, dtype=np.int64)
        go = move > 0
        pa, pb, n = np.asarray(jump_from)[go], np.asarray(jump_to)[go], move[go]
        if not len(n):
            return np.zeros((0, 2))
        if self.response.order == 1:
            a, b = self._drive(pa), self._drive(pb)
            lim = self._limits(a, b)
            tau = np.asarray(self.response.tau_s, dtype=float)
            u = jump_paths_xy(np.clip(a, -lim, lim), np.clip(b, -lim, lim), tau, lim,
                              self.rate, self.tol_fs, samples=n)
            xy = self.model.drive_to_mm(u)
        else:
            j = np.repeat(np.arange(len(n)), n)
            k = run_ranks(n)
            f = (1.0 - np.cos(np.pi * (k + 1) / n[j])) / 2.0
            xy = pa[j] + (pb - pa)[j] * f[:, None]
        xy[np.cumsum(n) - 1] = pb          # land exactly where the next stroke starts
        return xy

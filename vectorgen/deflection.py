"""The deflection model: drive (full-scale units) <-> position on the tube face (mm).

Forward:  p = D(q),  q = A u + c
  D: x' = x (1 + k_r rho^2 + k_x yh^2),  y' = y (1 + k_r rho^2 + k_y xh^2)
     with xh = x / R, yh = y / R, rho^2 = xh^2 + yh^2, R the usable area's half-diagonal.
Inverse (the correction stage): q = D^-1(p) by vectorised Newton iterations, u = A^-1 (q - c).

Everything is array-in/array-out: points are (n, 2) float arrays.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from .errors import ProfileError

__all__ = ["DeflectionModel", "INVERSE_TOL_MM"]

INVERSE_TOL_MM = 1e-6      # the inverse must reproduce every point to a nanometre
NEWTON_CHUNK = 1 << 13     # points stepped at a time by the inverse distortion


@dataclass(frozen=True)
class DeflectionModel:
    matrix: np.ndarray          # A, (2, 2), mm per full-scale drive
    offset: np.ndarray          # c, (2,), mm
    k_radial: float = 0.0
    k_x: float = 0.0
    k_y: float = 0.0
    norm_radius: float = 1.0    # R, mm

    @classmethod
    def from_profile(cls, prof) -> "DeflectionModel":
        d = prof.deflection
        return cls(np.asarray(d.matrix_mm, dtype=float), np.asarray(d.offset_mm, dtype=float),
                   float(d.k_radial), float(d.k_x), float(d.k_y), float(prof.screen.norm_radius))

    @cached_property
    def _inverse(self) -> np.ndarray:
        """A^-1 (worked out once: the model is immutable)."""
        return np.linalg.inv(self.matrix)

    @cached_property
    def weakest_mm_per_fs(self) -> float:
        """mm per full-scale drive along the weakest direction of A (its smallest eigenvalue
        magnitude): a drive distance times this is never more than the mm it moves."""
        return float(np.abs(np.linalg.eigvals(self.matrix)).min())

    @property
    def has_distortion(self) -> bool:
        return bool(self.k_radial or self.k_x or self.k_y)

    # -- distortion D and its Jacobian: the one copy of the formula ---------------------------
    def _factors(self, x: np.ndarray, y: np.ndarray):
        """The scale factors of D at (x, y): D(x, y) = (x fx, y fy), with
        fx = 1 + k_r rho^2 + k_x yh^2, fy = 1 + k_r rho^2 + k_y xh^2. Also xh^2, yh^2."""
        R2 = self.norm_radius ** 2
        x2, y2 = x * x / R2, y * y / R2
        r2 = x2 + y2
        return 1.0 + self.k_radial * r2 + self.k_x * y2, 1.0 + self.k_radial * r2 + self.k_y * x2, \
            x2, y2

    def _jacobian(self, x, y, fx, fy):
        """The Jacobian of D at (x, y) given its factors: (j11, j12, j21, j22)."""
        R2 = self.norm_radius ** 2
        kr, kx, ky = self.k_radial, self.k_x, self.k_y
        return (fx + 2.0 * kr * x * x / R2, 2.0 * (kr + kx) * x * y / R2,
                2.0 * (kr + ky) * x * y / R2, fy + 2.0 * kr * y * y / R2)

    def distort(self, q: np.ndarray) -> np.ndarray:
        """D(q) for points q (..., 2) in mm."""
        q = np.asarray(q, dtype=float)
        if not self.has_distortion:
            return q.copy()
        fx, fy, _x2, _y2 = self._factors(q[..., 0], q[..., 1])
        out = np.empty_like(q)
        out[..., 0] = q[..., 0] * fx
        out[..., 1] = q[..., 1] * fy
        return out

    def undistort(self, p: np.ndarray, tol_mm: float = 1e-9, max_iter: int = 50) -> np.ndarray:
        """D^-1 by Newton's method, all points at once; converges to well below 1 um."""
        p = np.asarray(p, dtype=float)
        if not self.has_distortion:
            return p.copy()
        x, y = self._undistort_xy(p[..., 0], p[..., 1], tol_mm, max_iter)
        return np.stack([x, y], axis=-1)

    def _undistort_xy(self, px: np.ndarray, py: np.ndarray, tol_mm: float = 1e-9,
                      max_iter: int = 50) -> tuple[np.ndarray, np.ndarray]:
        """undistort on x and y given apart (arrays of one shape); returns (x, y)."""
        def step(x, y, px, py):
            """One Newton step on (x, y) towards D(x, y) = (px, py): (x, y, converged)."""
            fx, fy, _x2, _y2 = self._factors(x, y)
            rx = x * fx - px
            ry = y * fy - py
            j11, j12, j21, j22 = self._jacobian(x, y, fx, fy)
            det = j11 * j22 - j12 * j21
            dx = (rx * j22 - ry * j12) / det
            dy = (ry * j11 - rx * j21) / det
            return x - dx, y - dy, bool(np.all(np.abs(dx) + np.abs(dy) < tol_mm))

        # First guess: p itself. All points take the same number of steps: until every one
        # has converged. A large drawing goes through in chunks that stay in cache, each chunk
        # stepped as far as the others, which gives the very numbers of stepping it whole.
        shape = np.shape(px)
        n = int(np.prod(shape)) if shape else 1
        fpx, fpy = np.ravel(px), np.ravel(py)
        bounds = [(c0, min(n, c0 + NEWTON_CHUNK)) for c0 in range(0, n, NEWTON_CHUNK)]
        if len(bounds) <= 1:
            x, y = fpx, fpy
            for _ in range(max_iter):
                x, y, done = step(x, y, fpx, fpy)
                if done:
                    break
            parts = [(np.asarray(x, dtype=float), np.asarray(y, dtype=float))]
            bounds = [(0, n)]
        else:
            state = [[fpx[a:b], fpy[a:b], 0, {}] for a, b in bounds]  # x, y, steps, done at

            def advance(st, a, b, to):
                while st[2] < to:
                    st[0], st[1], done = step(st[0], st[1], fpx[a:b], fpy[a:b])
                    st[2] += 1
                    st[3][st[2]] = done

            for st, (a, b) in zip(state, bounds):      # each chunk to its own convergence
                while st[2] < max_iter and not (st[2] and st[3][st[2]]):
                    advance(st, a, b, st[2] + 1)
            k = max(st[2] for st in state)
            while True:                 # the first step count at which every chunk is done
                for st, (a, b) in zip(state, bounds):
                    advance(st, a, b, k)
                if k >= max_iter or all(st[3][k] for st in state):
                    break
                k += 1
            parts = [(st[0], st[1]) for st in state]

        # The result must land back on p, and only the branch joined to the tube axis is
        # physical: there both scale factors and the Jacobian stay positive. Beyond a fold
        # (strong barrel) Newton can converge to a far point that also satisfies D(q) = p;
        # refuse it rather than drive the beam there. (Checked chunk by chunk: the same worst
        # error and first fold as over the whole.)
        finite, errs, fold_at = True, [], -1
        for (x, y), (a, b) in zip(parts, bounds):
            finite = finite and bool(np.all(np.isfinite(x)) and np.all(np.isfinite(y)))
            fx, fy, _x2, _y2 = self._factors(x, y)
            errs.append(np.abs(x * fx - fpx[a:b]).max(initial=0.0))
            errs.append(np.abs(y * fy - fpy[a:b]).max(initial=0.0))
            if fold_at < 0:
                j11, j12, j21, j22 = self._jacobian(x, y, fx, fy)
                folded = (fx <= 0) | (fy <= 0) | (j11 * j22 - j12 * j21 <= 0)
                if np.any(folded):
                    fold_at = a + int(np.argmax(folded))
        if not finite or np.max(errs) > INVERSE_TOL_MM:
            raise ProfileError("the profile's pincushion terms cannot be inverted over the "
                               "drawing (check k_radial, k_x, k_y)")
        if fold_at >= 0:
            raise ProfileError("the profile's pincushion terms fold the picture: no position "
                               f"near the axis lands at ({fpx[fold_at]:.2f}, "
                               f"{fpy[fold_at]:.2f}) mm (check k_radial, k_x, k_y)")
        if len(parts) == 1:
            x, y = parts[0]
        else:
            x = np.concatenate([p[0] for p in parts])
            y = np.concatenate([p[1] for p in parts])
        return x.reshape(shape), y.reshape(shape)

    # -- full model ------------------------------------------------------------------------------
    def drive_to_mm(self, u: np.ndarray) -> np.ndarray:
        u = np.asarray(u, dtype=float)
        return self.distort(u @ self.matrix.T + self.offset)

    def mm_to_drive(self, p: np.ndarray) -> np.ndarray:
        p = np.asarray(p, dtype=float)
        return self.drive_from_xy(p[..., 0], p[..., 1])

    def drive_from_xy(self, px: np.ndarray, py: np.ndarray) -> np.ndarray:
        """mm_to_drive of the points (px, py) given as two arrays of one shape: (..., 2)."""
        if self.has_distortion:
            px, py = self._undistort_xy(px, py)
        # u = A^-1 (q - c), the 2 x 2 inverse applied elementwise (a LAPACK solve against a
        # (2, n) right-hand side costs several times more per sample), each product written
        # into the output or into a reused buffer
        inv = self._inverse
        shape = np.shape(px)
        x, y = np.empty(shape), np.empty(shape)
        np.subtract(px, self.offset[0], out=x)
        np.subtract(py, self.offset[1], out=y)
        out = np.empty(shape + (2,))
        u, v = out[..., 0], out[..., 1]
        np.multiply(inv[0, 0], x, out=u)
        np.multiply(inv[1, 0], x, out=v)
        np.multiply(inv[0, 1], y, out=x)
        np.add(u, x, out=u)             # inv00 x + inv01 y
        np.multiply(inv[1, 1], y, out=x)
        np.add(v, x, out=v)             # inv10 x + inv11 y
        return out

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

from .errors import VectorgenError

INVERSE_TOL_MM = 1e-6      # the inverse must reproduce every point to a nanometre


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

    @property
    def has_distortion(self) -> bool:
        return bool(self.k_radial or self.k_x or self.k_y)

    # -- distortion D and its Jacobian -----------------------------------------------------------
    def distort(self, q: np.ndarray) -> np.ndarray:
        q = np.asarray(q, dtype=float)
        if not self.has_distortion:
            return q.copy()
        xh = q[..., 0] / self.norm_radius
        yh = q[..., 1] / self.norm_radius
        r2 = xh * xh + yh * yh
        out = np.empty_like(q)
        out[..., 0] = q[..., 0] * (1.0 + self.k_radial * r2 + self.k_x * yh * yh)
        out[..., 1] = q[..., 1] * (1.0 + self.k_radial * r2 + self.k_y * xh * xh)
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
        R2 = self.norm_radius ** 2
        kr, kx, ky = self.k_radial, self.k_x, self.k_y
        # First guess: divide by the local scale factor evaluated at p.
        x, y = px, py
        for _ in range(max_iter):
            x2, y2 = x * x / R2, y * y / R2
            fx = 1.0 + kr * (x2 + y2) + kx * y2
            fy = 1.0 + kr * (x2 + y2) + ky * x2
            rx = x * fx - px
            ry = y * fy - py
            # Jacobian of (x fx, y fy)
            j11 = fx + x * (2.0 * kr * x / R2)
            j12 = x * (2.0 * (kr + kx) * y / R2)
            j21 = y * (2.0 * (kr + ky) * x / R2)
            j22 = fy + y * (2.0 * kr * y / R2)
            det = j11 * j22 - j12 * j21
            dx = (rx * j22 - ry * j12) / det
            dy = (ry * j11 - rx * j21) / det
            x = x - dx
            y = y - dy
            if np.all(np.abs(dx) + np.abs(dy) < tol_mm):
                break
        x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
        # the result must land back on p (distort() written out on x and y)
        xh, yh = x / self.norm_radius, y / self.norm_radius
        r2 = xh * xh + yh * yh
        err = np.max([np.abs(x * (1.0 + kr * r2 + kx * yh * yh) - px).max(initial=0.0),
                      np.abs(y * (1.0 + kr * r2 + ky * xh * xh) - py).max(initial=0.0)])
        if not (np.all(np.isfinite(x)) and np.all(np.isfinite(y))) or err > INVERSE_TOL_MM:
            raise VectorgenError("the profile's pincushion terms cannot be inverted over the "
                                 "drawing (check k_radial, k_x, k_y)")
        # Only the branch joined to the tube axis is physical: there both scale factors and the
        # Jacobian stay positive. Beyond a fold (strong barrel) Newton can converge to a far
        # point that also satisfies D(q) = p; refuse it rather than drive the beam there.
        x2, y2 = x * x / R2, y * y / R2
        fx = 1.0 + kr * (x2 + y2) + kx * y2
        fy = 1.0 + kr * (x2 + y2) + ky * x2
        det = (fx + 2.0 * kr * x2) * (fy + 2.0 * kr * y2) - 4.0 * (kr + kx) * (kr + ky) * x2 * y2
        folded = (fx <= 0) | (fy <= 0) | (det <= 0)
        if np.any(folded):
            i = int(np.argmax(np.ravel(folded)))
            where = (np.ravel(px)[i], np.ravel(py)[i])
            raise VectorgenError("the profile's pincushion terms fold the picture: no position "
                                 f"near the axis lands at ({where[0]:.2f}, {where[1]:.2f}) mm "
                                 "(check k_radial, k_x, k_y)")
        return x, y

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

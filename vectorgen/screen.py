"""The usable area of the tube face: one object that answers every question about it.

Millimetres on the face, origin at the centre, +y up. A face is a rectangle (width x height) or
round (a diameter). Every stage that needs the area asks `Screen`: whether points are inside
(`contains`), whether a whole set is inside from its bounds alone (`contains_box`), pulling
points a hair outside back onto the edge (`clamp`), the outline and the shapely polygon, the
radius the pincushion terms are normalised by, and the scale that fits a box into the area.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["Screen", "SCREEN_SHAPES", "fit_transform"]

SCREEN_SHAPES = ("rectangle", "round")
EDGE_EPS = 1e-9     # relative slack at the edge: rounding never pushes a point outside


@dataclass
class Screen:
    """The usable area.

    Examples
    --------
    >>> import numpy as np
    >>> s = Screen("round", diameter_mm=100.0)
    >>> s.contains(np.array([[30.0, 40.0], [40.0, 40.0]])).tolist()
    [True, False]
    >>> Screen(width_mm=100.0, height_mm=80.0).half_extent
    (50.0, 40.0)
    """

    shape: str = "rectangle"
    width_mm: float = 100.0
    height_mm: float = 80.0
    diameter_mm: float = 0.0

    @property
    def round(self) -> bool:
        return self.shape == "round"

    @property
    def radius_mm(self) -> float:
        """The radius of a round face (0 for a rectangle)."""
        return self.diameter_mm / 2.0 if self.round else 0.0

    @property
    def half_extent(self) -> tuple[float, float]:
        """Half width and half height of the area's bounding box, mm."""
        if self.round:
            return self.diameter_mm / 2.0, self.diameter_mm / 2.0
        return self.width_mm / 2.0, self.height_mm / 2.0

    @property
    def norm_radius(self) -> float:
        """The radius the distortion terms are normalised by: the half-diagonal of a rectangle,
        the radius of a round face."""
        if self.round:
            return self.diameter_mm / 2.0
        return math.hypot(self.width_mm, self.height_mm) / 2.0

    def contains(self, points: np.ndarray, extent: float = 1.0, eps: float = EDGE_EPS
                 ) -> np.ndarray:
        """(n,) bool: which points ((n, 2) mm) lie inside the area scaled by `extent`."""
        points = np.asarray(points, dtype=float).reshape(-1, 2)
        if self.round:
            return np.hypot(points[:, 0], points[:, 1]) <= extent * self.radius_mm * (1 + eps)
        w, h = self.half_extent
        return ((np.abs(points[:, 0]) <= extent * w * (1 + eps))
                & (np.abs(points[:, 1]) <= extent * h * (1 + eps)))

    def contains_box(self, points: np.ndarray, eps: float = EDGE_EPS) -> bool:
        """Whether every point lies inside, decided from the bounding box alone: the same answer
        as ``contains(points).all()`` for a rectangle; for a round face True only when the box's
        corners are inside too (otherwise ask `contains`)."""
        if not len(points):
            return True
        x, y = points[:, 0], points[:, 1]       # (column reductions: min(axis=0) is slow)
        ax, ay = max(-x.min(), x.max()), max(-y.min(), y.max())
        if not (np.isfinite(ax) and np.isfinite(ay)):
            return False
        if self.round:
            # the farthest corner of the box, with a hair of margin for hypot's rounding
            return bool(np.hypot(ax, ay) <= self.radius_mm * (1 + eps) * (1 - 1e-12))
        w, h = self.half_extent
        return bool(ax <= w * (1 + eps) and ay <= h * (1 + eps))

    def clamp(self, points: np.ndarray) -> np.ndarray:
        """The points with any that lie outside pulled onto the edge (radially on a round face,
        per axis on a rectangle)."""
        if self.round:
            r = self.radius_mm
            d = np.hypot(points[:, 0], points[:, 1])
            over = d > r
            if over.any():
                points = points.copy()
                points[over] *= (r / d[over])[:, None]
            return points
        w, h = self.half_extent
        return np.column_stack([np.clip(points[:, 0], -w, w), np.clip(points[:, 1], -h, h)])

    def outline(self, n: int = 721) -> np.ndarray:
        """Closed outline of the area as an (m, 2) array, mm (n points on a round face)."""
        if self.round:
            t = np.linspace(0.0, 2.0 * np.pi, n)
            r = self.radius_mm
            return np.column_stack([r * np.cos(t), r * np.sin(t)])
        w, h = self.half_extent
        return np.array([[-w, -h], [w, -h], [w, h], [-w, h], [-w, -h]], dtype=float)

    def polygon(self):
        """The area as a shapely polygon."""
        import shapely

        if self.round:
            return shapely.Point(0.0, 0.0).buffer(self.radius_mm, quad_segs=256)
        w, h = self.half_extent
        return shapely.box(-w, -h, w, h)

    def samples(self, n: int = 41) -> np.ndarray:
        """Points filling the area on an n x n lattice, plus its outline (mm)."""
        w, h = self.half_extent
        gx, gy = np.meshgrid(np.linspace(-w, w, n), np.linspace(-h, h, n))
        pts = np.column_stack([gx.ravel(), gy.ravel()])
        return np.vstack([pts[self.contains(pts, eps=0.0)], self.outline(721)])

    def fit_scale(self, width: float, height: float) -> float:
        """The largest scale at which a box `width` x `height` fits the area (1 for an empty
        box): the diagonal on a round face, the tighter side on a rectangle."""
        if self.round:
            diag = math.hypot(width, height)
            return self.diameter_mm / diag if diag > 0 else 1.0
        cand = [v for v in ((self.width_mm / width) if width > 0 else None,
                            (self.height_mm / height) if height > 0 else None) if v is not None]
        return min(cand) if cand else 1.0


def fit_transform(box: tuple[float, float, float, float], screen: Screen, flip_y: bool = True):
    """Matrix and offset mapping the rectangle `box` (x0, y0, x1, y1, source units) into the
    usable area, aspect ratio kept, centred; y flipped when the source has +y down (SVG).

    Examples
    --------
    >>> m, c = fit_transform((0.0, 0.0, 200.0, 100.0), Screen(width_mm=100.0, height_mm=80.0))
    >>> (m @ [200.0, 100.0] + c).tolist()
    [50.0, -25.0]
    """
    x0, y0, x1, y1 = box
    s = screen.fit_scale(x1 - x0, y1 - y0)
    m = np.array([[s, 0.0], [0.0, -s if flip_y else s]])
    return m, -m @ np.array([(x0 + x1) / 2.0, (y0 + y1) / 2.0])

"""A wireframe cube turning about the vertical axis, seen from slightly above, with a caption.

    vectorgen play examples/spinning_cube.py
    vectorgen render examples/spinning_cube.py --seconds 4 -o cube.wav

Re-drawn 50 times a second. The cube turns SPIN_DEG_PER_S degrees a second about the screen's
vertical axis, tilted TILT_DEG towards the viewer, drawn in perspective (pinhole at VIEW_MM
from the cube's centre). Its twelve edges are drawn as six strokes: the top square, the
bottom square and the four uprights.
"""

import numpy as np

from vectorgen.scene import polyline, strokes, text

UPDATE_HZ = 50.0
SPIN_DEG_PER_S = 45.0
TILT_DEG = 20.0
VIEW_MM = 250.0

# Cube corners, unit half-size: bottom square (y = -1) then top square (y = +1).
CORNERS = np.array([[-1, -1, -1], [1, -1, -1], [1, -1, 1], [-1, -1, 1],
                    [-1, 1, -1], [1, 1, -1], [1, 1, 1], [-1, 1, 1]], dtype=float)


def project(points3, half_size, spin_deg):
    """Screen mm of 3-D points (x right, y up, z towards the viewer) after the spin and tilt."""
    a, b = np.radians(spin_deg), np.radians(TILT_DEG)
    spin = np.array([[np.cos(a), 0, np.sin(a)], [0, 1, 0], [-np.sin(a), 0, np.cos(a)]])
    tilt = np.array([[1, 0, 0], [0, np.cos(b), -np.sin(b)], [0, np.sin(b), np.cos(b)]])
    p = points3 * half_size @ spin.T @ tilt.T
    scale = VIEW_MM / (VIEW_MM - p[:, 2])
    return p[:, :2] * scale[:, None]


def cube_edges(screen, t):
    """The four polylines (screen mm) that draw the cube at time t."""
    w, h = screen.half_extent
    size = 0.42 * min(w, h)
    c = project(CORNERS, size, SPIN_DEG_PER_S * t) + np.array([0.0, 0.08 * h])
    return [c[[0, 1, 2, 3, 0]], c[[4, 5, 6, 7, 4]],
            c[[0, 4]], c[[1, 5]], c[[2, 6]], c[[3, 7]]]


def draw(t, screen):
    h = screen.half_extent[1]
    edges = [polyline(e, label="cube edge") for e in cube_edges(screen, t)]
    caption = text("VECTORGEN", 0.09 * h, center=(0.0, -0.8 * h))
    return strokes(edges, caption)

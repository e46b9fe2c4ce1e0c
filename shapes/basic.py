"""Test grid, crosshair and circle, sized from the screen's usable area."""

from __future__ import annotations

import numpy as np

from vectorgen.errors import InputError

from vectorgen.flatten import circle_points
from vectorgen.strokes import Strokes, strokes_from_polylines


def circle(screen, radius: float | None = None, tolerance_mm: float = 0.02) -> Strokes:
    """A circle centred on the screen; default radius 90 % of the largest that fits."""
    if radius is None:
        radius = 0.9 * min(screen.half_extent)
    return strokes_from_polylines([circle_points(radius, tolerance_mm=tolerance_mm)],
                                  labels=[f"circle r={radius:g} mm"])


def crosshair(screen, arm: float | None = None) -> Strokes:
    """Horizontal and vertical lines through the centre, plus a centre dot."""
    w, h = screen.half_extent
    ax = arm if arm is not None else 0.9 * w
    ay = arm if arm is not None else 0.9 * h
    return strokes_from_polylines(
        [[(-ax, 0.0), (ax, 0.0)], [(0.0, -ay), (0.0, ay)], [(0.0, 0.0)]],
        labels=["crosshair horizontal", "crosshair vertical", "crosshair centre"])


MAX_GRID_DOTS = 10_000      # crossings, each a dot the beam dwells on


def grid_positions(screen, step: float) -> tuple[np.ndarray, np.ndarray]:
    """Grid line positions (mm) on each axis: multiples of `step` through the centre that lie
    inside the usable area."""
    w, h = screen.half_extent
    xs = np.arange(-np.floor(w / step), np.floor(w / step) + 1) * step
    ys = np.arange(-np.floor(h / step), np.floor(h / step) + 1) * step
    return xs, ys


def grid(screen, step: float = 10.0) -> Strokes:
    """Lines every `step` mm through the centre and a dot at every crossing, all at known
    millimetre positions. On a round face the lines are cut to the circle by the engine."""
    if not (step > 0 and np.isfinite(step)):
        raise InputError(f"grid step must be > 0 mm (got {step})")
    w, h = screen.half_extent
    nx, ny = 2 * np.floor(w / step) + 1, 2 * np.floor(h / step) + 1
    if nx * ny > MAX_GRID_DOTS:
        least = np.sqrt(4 * w * h / MAX_GRID_DOTS)
        raise InputError(f"a grid step of {step:g} mm makes {nx * ny:.3g} crossings: use a "
                             f"step of at least {least:.2g} mm")
    xs, ys = grid_positions(screen, step)
    lines = [[(x, -h), (x, h)] for x in xs] + [[(-w, y), (w, y)] for y in ys]
    labels = [f"grid line x={x:g} mm" for x in xs] + [f"grid line y={y:g} mm" for y in ys]
    gx, gy = np.meshgrid(xs, ys)
    dots = [[(x, y)] for x, y in zip(gx.ravel(), gy.ravel())]
    labels += [f"grid dot ({x:g}, {y:g}) mm" for x, y in zip(gx.ravel(), gy.ravel())]
    return strokes_from_polylines(lines + dots, labels=labels)

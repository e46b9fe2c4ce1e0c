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


GRID_FILL = 0.9             # the grid keeps to 90 % of the usable area (as the circle and the
                            # crosshair do): a line on the edge sits at full scale, where a fast
                            # spot stopping at its end overshoots between samples
GRID_CELLS = 10             # the default step gives at most this many cells across the wider side
MAX_GRID_CROSSINGS = 10_000


def grid_step(screen) -> float:
    """The default grid spacing for `screen`, mm: the smallest step of 1, 2 or 5 times a power
    of ten that gives at most GRID_CELLS cells across the wider side of the grid's area (10 mm on
    the built-in 100 x 80 mm screen).

    Examples
    --------
    >>> from vectorgen.screen import Screen
    >>> grid_step(Screen(width_mm=100.0, height_mm=80.0))
    10.0
    >>> grid_step(Screen(width_mm=140.0, height_mm=105.0))
    20.0
    """
    raw = 2 * GRID_FILL * max(screen.half_extent) / GRID_CELLS
    power = 10.0 ** np.floor(np.log10(raw))
    for m in (1.0, 2.0, 5.0):
        if m * power >= raw * (1 - 1e-9):
            return float(m * power)
    return float(10.0 * power)


def grid_positions(screen, step: float) -> tuple[np.ndarray, np.ndarray]:
    """Grid line positions (mm) on each axis: multiples of `step` through the centre within
    GRID_FILL of the half-width and half-height (of the radius on a round face)."""
    w, h = (GRID_FILL * e * (1 + 1e-9) for e in screen.half_extent)
    xs = np.arange(-np.floor(w / step), np.floor(w / step) + 1) * step
    ys = np.arange(-np.floor(h / step), np.floor(h / step) + 1) * step
    return xs, ys


def _spans(positions: np.ndarray, fill: float) -> tuple[float, float]:
    """Where the lines across these positions end: at the outermost lines, so the grid closes
    in a frame (or at the fill extent when there is only the centre line)."""
    if len(positions) > 1:
        return float(positions[0]), float(positions[-1])
    return -fill, fill


def grid(screen, step: float | None = None) -> Strokes:
    """Lines every `step` mm through the centre, at known millimetre positions, within 90 % of
    the usable area: on a rectangle each line runs between the outermost lines across it, so
    the grid closes in a frame; on a round face the lines are chords of a circle of 90 % of
    its radius. The crossings are where the lines cross (no dots: a dot the beam dwells on
    costs as much frame time as a line of several centimetres). `step` defaults to
    `grid_step(screen)`."""
    if step is None:
        step = grid_step(screen)
    if not (step > 0 and np.isfinite(step)):
        raise InputError(f"grid step must be > 0 mm (got {step})")
    fw, fh = (GRID_FILL * e for e in screen.half_extent)
    nx, ny = 2 * np.floor(fw / step) + 1, 2 * np.floor(fh / step) + 1
    if nx * ny > MAX_GRID_CROSSINGS:
        least = np.sqrt(4 * fw * fh / MAX_GRID_CROSSINGS)
        raise InputError(f"a grid step of {step:g} mm makes {nx * ny:.3g} crossings: use a "
                         f"step of at least {least:.2g} mm")
    xs, ys = grid_positions(screen, step)
    lines, labels = [], []
    if screen.round:
        r = GRID_FILL * screen.radius_mm
        for axis, positions in ((0, xs), (1, ys)):
            for p in positions:
                half = np.sqrt(max(r * r - p * p, 0.0))
                if half <= 1e-9 * r:
                    continue            # touches the circle only: nothing to draw
                ends = [(p, -half), (p, half)] if axis == 0 else [(-half, p), (half, p)]
                lines.append(ends)
                labels.append(f"grid line {'xy'[axis]}={p:g} mm")
    else:
        y0, y1 = _spans(ys, fh)
        x0, x1 = _spans(xs, fw)
        lines = [[(x, y0), (x, y1)] for x in xs] + [[(x0, y), (x1, y)] for y in ys]
        labels = [f"grid line x={x:g} mm" for x in xs] + [f"grid line y={y:g} mm" for y in ys]
    return strokes_from_polylines(lines, labels=labels)

"""Built-in drawings, all returning `vectorgen.strokes.Strokes` in screen millimetres:
test grid, crosshair, circle, clock face and single-stroke text.

Importing this package registers them with the engine's source registries
(`vectorgen.sources.SHAPES` and `STROKE_FONTS`); the engine itself never imports it.
"""

from vectorgen.clocktime import hms
from vectorgen.errors import InputError
from vectorgen.sources import register_shape, register_stroke_font, SHAPES as _REGISTRY

from .basic import circle, crosshair, grid
from .clock import clock_face, hand_angles
from .text import text_strokes

__all__ = ["circle", "clock_face", "crosshair", "grid", "hand_angles", "text_strokes"]


def _radius(options):
    r = options.radius_mm
    if r is not None and not r > 0:
        raise InputError(f"radius must be > 0 mm (radius_mm={r})", parameter="radius_mm")
    return r


def _grid(screen, options):
    return grid(screen, options.grid_step_mm)


def _crosshair(screen, options):
    return crosshair(screen)


def _circle(screen, options):
    return circle(screen, _radius(options), tolerance_mm=options.tolerance_mm)


def _clock(screen, options):
    radius = _radius(options)
    if options.time_s is None:
        h, m, s = 10, 10, None
    else:
        h, m, s = hms(options.time_s)
    return clock_face(screen, h, m, s if options.seconds_hand else None, radius=radius,
                      center=options.center, numerals=options.numerals)


if "grid" not in _REGISTRY:            # (registered once, however often this is imported)
    register_shape("grid", _grid)
    register_shape("crosshair", _crosshair)
    register_shape("circle", _circle)
    register_shape("clock", _clock)
    register_stroke_font("hershey-futural", text_strokes)

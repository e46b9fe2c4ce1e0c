"""Built-in drawings, all returning `vectorgen.strokes.Strokes` in screen millimetres:
test grid, crosshair, circle, clock face and single-stroke text."""

from .basic import circle, crosshair, grid
from .clock import clock_face, hand_angles
from .text import text_strokes

SHAPES = ("grid", "crosshair", "circle", "clock")

__all__ = ["SHAPES", "circle", "clock_face", "crosshair", "grid", "hand_angles", "text_strokes"]

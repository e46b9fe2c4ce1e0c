"""Sources: where drawings come from, found by name.

* `FILE_SOURCES`: drawing files by extension (``.svg`` ...): ``reader(path, screen, options)``
  returns `Strokes` in screen mm.
* `SHAPES`: built-in drawings by name: ``maker(screen, options)`` returns `Strokes`. The
  `shapes` package registers its own (grid, crosshair, circle, clock) when imported; the engine
  never imports it.
* `STROKE_FONTS`: single-stroke fonts: ``font(text, height_mm, align, center, intensity)``
  returns `Strokes`; the first registered is the one used.

A new source is one function plus one `register_file_source` or `register_shape` line.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

from .errors import InputError
from .registry import Registry

__all__ = ["DrawingOptions", "FILE_SOURCES", "SHAPES", "STROKE_FONTS", "drawing_from_file",
           "register_file_source", "register_shape", "register_stroke_font", "shape",
           "stroke_text"]

FILE_SOURCES = Registry("drawing file type")
SHAPES = Registry("shape")
STROKE_FONTS = Registry("stroke font")


@dataclass
class DrawingOptions:
    """Options a source may use (each takes what applies to it).

    Attributes
    ----------
    fit : str
        SVG placement: "page", "content", "true" (physical size) or "off".
    tolerance_mm : float
        Chord tolerance for flattening curves.
    text_height_mm : float or None
        Cap height of text (None: a tenth of the screen height).
    align : str
        "left", "center" or "right".
    time_s : float or None
        Time of day shown by a clock (None: 10:10).
    seconds_hand : bool
        Whether a clock shows its seconds hand.
    grid_step_mm : float or None
        Spacing of the test grid's lines; None lets the grid choose it from the screen.
    radius_mm : float or None
    center : (float, float)
        Where a shape is centred, mm.
    numerals : bool
        Whether a clock shows its numerals.
    """

    fit: str = "page"
    tolerance_mm: float = 0.02
    text_height_mm: float | None = None
    align: str = "center"
    time_s: float | None = None
    seconds_hand: bool = False
    grid_step_mm: float | None = None
    radius_mm: float | None = None
    center: tuple = (0.0, 0.0)
    numerals: bool = True


def register_file_source(extension: str, reader) -> None:
    """Make drawing files with this extension (with the dot) readable."""
    FILE_SOURCES.register(extension.lower(), reader)


def register_shape(name: str, maker) -> None:
    """Make a built-in drawing available by name."""
    SHAPES.register(name, maker)


def register_stroke_font(name: str, font) -> None:
    """Make a single-stroke font available (the first registered is used for text)."""
    STROKE_FONTS.register(name, font)


def drawing_from_file(path, screen, options: DrawingOptions | None = None):
    """The Strokes of a drawing file, read by the source registered for its extension."""
    ext = os.path.splitext(os.fspath(path))[1].lower()
    if ext not in FILE_SOURCES:
        raise InputError(f"cannot draw '{path}': give one of "
                         + ", ".join(FILE_SOURCES.names()) + " (or a .py scene script)")
    return FILE_SOURCES[ext](path, screen, options or DrawingOptions())


def shape(name: str, screen, options: DrawingOptions | None = None):
    """A built-in drawing by name (the `shapes` package must have been imported)."""
    if not SHAPES.names():
        raise InputError("no built-in shapes are registered (import the shapes package)")
    return SHAPES[name](screen, options or DrawingOptions())


def stroke_text(text: str, height_mm: float = 8.0, align: str = "center", center=(0.0, 0.0),
                intensity: float = 1.0):
    """Text in the registered single-stroke font."""
    names = STROKE_FONTS.names()
    if not names:
        raise InputError("no stroke font is registered (import the shapes package)")
    return STROKE_FONTS[names[0]](text, height_mm, align, center, intensity)


def _read_svg(path, screen, options: DrawingOptions):
    from .svgsource import svg_to_strokes

    return svg_to_strokes(path, screen, fit=options.fit, tolerance_mm=options.tolerance_mm)


register_file_source(".svg", _read_svg)

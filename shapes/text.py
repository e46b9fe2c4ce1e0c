"""Single-stroke text: the one module that owns the font.

Glyphs come from the Hershey vector fonts (public-domain glyph data from the U.S. National
Bureau of Standards, carried by the Hershey-Fonts package), font "futural" (simplex roman),
which covers printable ASCII. Font units: cap line at -12, base line at 9 (+y down), so the
cap height is 21 units.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from vectorgen.errors import InputError
from vectorgen.strokes import Strokes, strokes_from_polylines

FONT = "futural"
CAP_UNITS = 21.0          # base_line - cap_line of the Hershey fonts
LINE_PITCH = 1.6          # line spacing in cap heights
ALIGNMENTS = ("left", "center", "right")


@lru_cache(maxsize=1)
def _font():
    from HersheyFonts import HersheyFonts

    font = HersheyFonts()
    font.load_default_font(FONT)
    return font


@lru_cache(maxsize=256)
def glyph(ch: str):
    """(strokes in font units with +y up and the left edge at 0, advance width)."""
    found = list(_font().glyphs_for_text(ch))
    if not found:
        raise InputError(f"no glyph for {ch!r} in the stroke font: use printable ASCII")
    g = found[0]
    left = g.left_offset
    strokes = tuple(np.array([(x - left, -y) for x, y in s], dtype=float) for s in g.strokes)
    return strokes, float(g.char_width)


def text_width(line: str, height_mm: float) -> float:
    return sum(glyph(c)[1] for c in line) * height_mm / CAP_UNITS


def text_strokes(text: str, height_mm: float = 8.0, align: str = "center",
                 center=(0.0, 0.0), intensity: float = 1.0) -> Strokes:
    """Strokes for `text` (lines split on newlines), cap height `height_mm`, each line aligned
    left/center/right within the block, the block centred on `center`."""
    if align not in ALIGNMENTS:
        raise InputError(f"unknown alignment {align!r}: use left, center or right")
    if not (np.isfinite(height_mm) and height_mm > 0):
        raise InputError(f"text height must be > 0 mm (got {height_mm})")
    lines = text.replace("\\n", "\n").split("\n")
    bad = sorted({c for c in text.replace("\\n", "") if c != "\n" and not (" " <= c <= "~")})
    if bad:
        raise InputError("the stroke font has printable ASCII only; cannot draw "
                             + ", ".join(repr(c) for c in bad))
    scale = height_mm / CAP_UNITS
    widths = [text_width(line, height_mm) for line in lines]
    block_w = max(widths) if widths else 0.0
    pitch = LINE_PITCH * height_mm
    block_h = height_mm + pitch * (len(lines) - 1)
    top = center[1] + block_h / 2.0          # cap line of the first line
    polys, labels = [], []
    for row, (line, w) in enumerate(zip(lines, widths)):
        if align == "left":
            x = center[0] - block_w / 2.0
        elif align == "right":
            x = center[0] + block_w / 2.0 - w
        else:
            x = center[0] - w / 2.0
        base = top - height_mm - row * pitch
        for col, ch in enumerate(line):
            strokes, adv = glyph(ch)
            for s in strokes:
                # font +y up after flip: base line at -9, cap line at +12
                polys.append(np.column_stack([x + s[:, 0] * scale, base + (s[:, 1] + 9.0) * scale]))
                labels.append(f"text line {row + 1} char {col + 1} {ch!r}")
            x += adv * scale
    if not polys:
        raise InputError("the text has nothing to draw")
    return strokes_from_polylines(polys, intensity, labels)

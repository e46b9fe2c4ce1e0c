"""SVG as drawing editors save it, against an independent renderer: resvg (resvg_py) draws each
file with strokes only; the spot's lit path from the real engine must fall on resvg's stroked
pixels and cover them, within two pixels (0.5 mm at 4 px per mm). Brightness against resvg's
coverage of wide strokes: opacity down the tree times stroke-opacity, with the CSS cascade
deciding which stroke-opacity applies.

Outside references: resvg (a complete SVG renderer: CSS, <use>, <symbol>, nested viewports,
clip paths, dashes) for every picture and brightness; the CSS 2.1 cascade (6.4.1 order, 6.4.2
!important, 6.4.3 specificity) written out by hand beside each brightness case; SVG 1.1, 14.5
(object and group opacity multiply). Each picture test has a control showing that the check
fails for a renderer that gets the rule wrong.
"""

from __future__ import annotations

import re

import numpy as np
import pytest
from scipy.spatial import cKDTree

from render_helpers import lit_path_points, render, resvg_alpha
from vectorgen.profile import Profile
from vectorgen.svgsource import svg_to_strokes

PX_PER_MM = 4                   # resvg picture: 400 x 320 px for the 100 x 80 mm page
NEAR_PX = 2.0                   # "within a pixel or two"
FAINT, SOLID = 0.1, 0.5         # coverage: any ink / the middle of a stroke

EDITOR_SVG = """<?xml version="1.0" encoding="UTF-8" standalone="no"?>
<svg xmlns="http://www.w3.org/2000/svg" xmlns:xlink="http://www.w3.org/1999/xlink"
     xmlns:inkscape="http://www.inkscape.org/namespaces/inkscape"
     xmlns:sodipodi="http://sodipodi.sourceforge.net/DTD/sodipodi-0.dtd"
     width="100mm" height="80mm" viewBox="0 0 100 80" version="1.1">
  <style type="text/css">
    .outline { fill: none; stroke: #000000; stroke-width: 0.35 }
    .off { display: none }
    g.layer > .dashed { stroke-dasharray: 4 2; stroke-dashoffset: 1 }
  </style>
  <defs>
    <symbol id="mark" viewBox="-5 -5 10 10">
      <circle r="4" class="outline"/>
      <path d="M -4 0 H 4 M 0 -4 V 4" class="outline"/>
    </symbol>
    <clipPath id="left"><rect x="0" y="0" width="50" height="80"/></clipPath>
  </defs>
  <sodipodi:namedview id="view" pagecolor="#ffffff" inkscape:zoom="1"/>
  <g inkscape:groupmode="layer" inkscape:label="Base" class="layer" id="base">
    <rect class="outline" x="5mm" y="0.5cm" width="30" height="20" rx="3"/>
    <path class="outline dashed" d="M 5 40 H 45 M 5 44 H 45"/>
    <use href="#mark" x="55" y="10" width="10" height="10"/>
    <use xlink:href="#mark" x="75" y="5" width="16" height="16"/>
    <circle class="outline" cx="50" cy="50" r="20" clip-path="url(#left)"/>
    <svg x="55" y="40" width="40" height="30" viewBox="0 0 20 10"
         preserveAspectRatio="xMinYMid meet">
      <ellipse class="outline" cx="10" cy="5" rx="12" ry="4"/>
    </svg>
    <g transform="translate(70 62) rotate(30)">
      <polyline class="outline" points="-8,0 0,-6 8,0"/>
    </g>
  </g>
  <g inkscape:groupmode="layer" inkscape:label="Hidden" style="display:none" id="hidden">
    <path class="outline" d="M 0 0 L 100 80"/>
  </g>
  <g class="layer off" id="off"><circle class="outline" cx="20" cy="65" r="8"/></g>
</svg>
"""


def pixel_centres(alpha: np.ndarray, level: float) -> np.ndarray:
    """Screen mm of every pixel at or above a coverage level (page 100 x 80 mm centred)."""
    j, i = np.nonzero(alpha >= level)
    return np.column_stack([(i + 0.5) / PX_PER_MM - 50.0, 40.0 - (j + 0.5) / PX_PER_MM])


def lit_path(svg_text: str, tmp_path, name="drawing.svg") -> np.ndarray:
    path = tmp_path / name
    path.write_text(svg_text, encoding="utf-8")
    strokes = svg_to_strokes(str(path), Profile().screen, fit="true", tolerance_mm=0.01)
    return lit_path_points(render(strokes).plan)


def distances_px(lit: np.ndarray, alpha: np.ndarray):
    """(how far each lit point is from resvg's ink, how far each solid resvg pixel is from the
    lit path), in pixels."""
    fall = cKDTree(pixel_centres(alpha, FAINT)).query(lit)[0] * PX_PER_MM
    cover = cKDTree(lit).query(pixel_centres(alpha, SOLID))[0] * PX_PER_MM
    return fall, cover


def test_editor_file_lit_path_lies_on_resvgs_strokes_and_covers_them(tmp_path):
    lit = lit_path(EDITOR_SVG, tmp_path)
    fall, cover = distances_px(lit, resvg_alpha(EDITOR_SVG, 100 * PX_PER_MM))
    assert fall.max() <= NEAR_PX, f"lit spot {fall.max():.1f} px from resvg's strokes"
    assert cover.max() <= NEAR_PX, f"a resvg stroke {cover.max():.1f} px from the lit path"


def test_control_a_renderer_ignoring_the_style_sheet_fails_the_check(tmp_path):
    """Control: the same checks bite. Without its <style> sheet the file draws the layer
    hidden by class (and solid lines where resvg dashes): lit points off resvg's strokes."""
    no_css = re.sub(r"<style.*?</style>", "", EDITOR_SVG, flags=re.S)
    lit = lit_path(no_css, tmp_path)
    fall, _cover = distances_px(lit, resvg_alpha(EDITOR_SVG, 100 * PX_PER_MM))
    assert fall.max() > 5 * NEAR_PX


def test_control_a_hidden_layer_drawn_by_the_reference_fails_the_check(tmp_path):
    """Control: when the reference draws the layer hidden by display:none on its group, the
    lit path (which leaves it out) no longer covers the reference's strokes."""
    lit = lit_path(EDITOR_SVG, tmp_path)
    shown = EDITOR_SVG.replace('style="display:none"', "")
    _fall, cover = distances_px(lit, resvg_alpha(shown, 100 * PX_PER_MM))
    assert cover.max() > 5 * NEAR_PX


CLIP_DASH_SVG = """<svg xmlns="http://www.w3.org/2000/svg" width="100mm" height="80mm"
     viewBox="0 0 200 160">
  <defs>
    <clipPath id="donut" clip-rule="evenodd">
      <path d="M 100 20 a 40 40 0 1 0 0.001 0 Z M 100 50 a 10 10 0 1 0 0.001 0 Z"/>
    </clipPath>
    <clipPath id="box" clipPathUnits="objectBoundingBox">
      <rect x="0.25" y="0" width="0.5" height="1"/>
    </clipPath>
  </defs>
  <g fill="none" stroke="black" stroke-width="0.8">
    <g clip-path="url(#donut)">
      <path d="M 40 60 H 160 M 100 0 V 140"/>
      <circle cx="100" cy="60" r="25" stroke-dasharray="6 4"/>
    </g>
    <rect x="20" y="110" width="160" height="40" clip-path="url(#box)"/>
    <path d="M 10 10 h 30 v 30" stroke-dasharray="5 3 1 3" transform="scale(1.5 1)"/>
  </g>
</svg>
"""


def test_clip_rules_bounding_box_units_and_dashes_match_resvg(tmp_path):
    lit = lit_path(CLIP_DASH_SVG, tmp_path)
    fall, cover = distances_px(lit, resvg_alpha(CLIP_DASH_SVG, 100 * PX_PER_MM))
    assert fall.max() <= NEAR_PX, f"lit spot {fall.max():.1f} px from resvg's strokes"
    assert cover.max() <= NEAR_PX, f"a resvg stroke {cover.max():.1f} px from the lit path"


def test_control_without_the_clip_paths_the_check_fails(tmp_path):
    unclipped = re.sub(r' clip-path="url\(#\w+\)"', "", CLIP_DASH_SVG)
    lit = lit_path(unclipped, tmp_path)
    fall, _cover = distances_px(lit, resvg_alpha(CLIP_DASH_SVG, 100 * PX_PER_MM))
    assert fall.max() > 5 * NEAR_PX


# --- brightness -----------------------------------------------------------------------------
# Each case: a horizontal line, 3 px wide, in its own band; the expected brightness worked out
# by hand from the cascade and opacity rules, and resvg's coverage at the line's middle.

BRIGHTNESS_CASES = [
    # (id, markup, expected, rule)
    ("plain", '<line id="plain" {L}/>', 1.0, "stroke-opacity initial 1"),
    ("attr", '<line id="attr" stroke-opacity="0.5" {L}/>', 0.5, "presentation attribute"),
    ("class", '<line id="class" class="half" {L}/>', 0.5, "class rule .half"),
    ("class-beats-attr", '<line id="class-beats-attr" class="half" stroke-opacity="0.9" {L}/>',
     0.5, "SVG 2 6.8: a presentation attribute loses to any sheet rule"),
    ("id-beats-class", '<line id="id-beats-class" class="half" {L}/>', 0.3,
     "CSS 2.1 6.4.3: #id (1,0,0) beats .half (0,1,0)"),
    ("style-beats-id", '<line id="style-beats-id" style="stroke-opacity:0.7" {L}/>', 0.7,
     "CSS 2.1 6.4.3: the style attribute beats any selector"),
    ("important", '<line id="important" class="strong" style="stroke-opacity:0.7" {L}/>', 0.8,
     "CSS 2.1 6.4.2: !important in the sheet beats a normal style attribute"),
    ("later-wins", '<line id="later-wins" class="a b" {L}/>', 0.6,
     "CSS 2.1 6.4.1: equal specificity, the later rule .b wins"),
    ("inherited", '<g style="stroke-opacity:0.4"><line id="inherited" {L}/></g>', 0.4,
     "stroke-opacity inherits"),
    ("group-opacity", '<g opacity="0.5"><line id="group-opacity" stroke-opacity="0.5" {L}/></g>',
     0.25, "SVG 1.1 14.5: group opacity times stroke-opacity"),
    ("nested-opacity", '<g opacity="0.5"><g class="dimgroup"><line id="nested-opacity" {L}/>'
     '</g></g>', 0.3, "opacity 0.5 times opacity 0.6 from a class"),
    ("not-inherited", '<g opacity="0.5"><line id="not-inherited" opacity="1" {L}/></g>', 0.5,
     "opacity does not inherit: the child's 1 does not undo the group's 0.5"),
]

BRIGHTNESS_STYLE = """<style>
  line { stroke: black; stroke-width: 3 }
  .half { stroke-opacity: 0.5 }
  #id-beats-class { stroke-opacity: 0.3 }
  #style-beats-id { stroke-opacity: 0.2 }
  .strong { stroke-opacity: 0.8 !important }
  .a { stroke-opacity: 0.9 }
  .b { stroke-opacity: 0.6 }
  .dimgroup { opacity: 0.6 }
</style>"""


def brightness_svg() -> str:
    body = []
    for k, (_name, markup, _exp, _rule) in enumerate(BRIGHTNESS_CASES):
        y = 6 + 6 * k
        body.append(markup.format(L=f'x1="20" y1="{y}" x2="80" y2="{y}"'))
    return ('<svg xmlns="http://www.w3.org/2000/svg" width="100mm" height="80mm" '
            f'viewBox="0 0 100 80">{BRIGHTNESS_STYLE}{"".join(body)}</svg>')


def test_brightness_follows_the_cascade_and_opacity_like_resvg(tmp_path):
    svg = brightness_svg()
    path = tmp_path / "bright.svg"
    path.write_text(svg)
    strokes = svg_to_strokes(str(path), Profile().screen, fit="true")
    ours = dict(zip(strokes.labels, strokes.intensity))
    alpha = resvg_alpha(svg, 100 * PX_PER_MM)
    for k, (name, _markup, expected, rule) in enumerate(BRIGHTNESS_CASES):
        row = int(round((6 + 6 * k) * PX_PER_MM))
        ref = np.median(alpha[row - 1:row + 1, 30 * PX_PER_MM:70 * PX_PER_MM].max(axis=0))
        got = ours[f"<line id={name!r}>"]
        assert got == pytest.approx(expected, abs=1e-12), rule       # the rule, by hand
        assert got == pytest.approx(ref, abs=2.5 / 255), (name, ref)  # resvg agrees


def test_control_resvg_sees_the_difference_between_the_cases():
    """Control: the resvg measurement separates the cases (it would catch a wrong winner)."""
    alpha = resvg_alpha(brightness_svg(), 100 * PX_PER_MM)
    refs = []
    for k in range(len(BRIGHTNESS_CASES)):
        row = int(round((6 + 6 * k) * PX_PER_MM))
        refs.append(np.median(alpha[row - 1:row + 1, 120:280].max(axis=0)))
    assert refs[2] == pytest.approx(0.5, abs=0.01) and refs[3] == pytest.approx(0.5, abs=0.01)
    assert refs[4] == pytest.approx(0.3, abs=0.01) and refs[6] == pytest.approx(0.8, abs=0.01)

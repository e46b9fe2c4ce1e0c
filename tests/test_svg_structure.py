"""SVG structure: <use> instances, <symbol> and nested <svg> viewports, units in every length,
and true size, each against a worked example done by hand from the specification.

Outside references: SVG 1.1 5.6 and SVG 2 5.6 (<use>: x and y as a translation after the
use's transform; href over xlink:href), SVG 2 8.2 (the equivalent transform of a viewBox with
preserveAspectRatio: meet, slice, none and the nine alignments), SVG 1.1 7.9 and SVG 2's user
agent style sheet (inner viewports clip unless overflow is visible), CSS Values and Units 3,
6.2 (1in = 2.54cm = 25.4mm = 72pt = 6pc = 96px = 101.6Q) and SVG 1.1 7.10 (percentages:
width, height, or the normalised diagonal sqrt((w^2 + h^2)/2)); shapely for clipped lengths.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import shapely

from render_helpers import write_svg
from vectorgen.errors import InputError, VectorgenWarning
from vectorgen.profile import Profile
from vectorgen.svgsource import svg_to_strokes

SCREEN = Profile().screen       # 100 x 80 mm


def to_screen(xy):
    """fit="off" on a 100 x 80 viewBox: 1 unit = 1 mm, page centre at the screen centre,
    +y flipped."""
    xy = np.atleast_2d(np.asarray(xy, dtype=float))
    return np.column_stack([xy[:, 0] - 50.0, 40.0 - xy[:, 1]])


def strokes_of(tmp_path, body, fit="off", **kw):
    return svg_to_strokes(write_svg(tmp_path, body, **kw), SCREEN, fit=fit,
                          tolerance_mm=0.005)


def by_label(s):
    out = {}
    for i, lab in enumerate(s.labels):
        out.setdefault(lab, []).append(s.stroke(i))
    return out


P = '<polyline id="p" points="0,0 10,0 10,5"/>'
P_PTS = np.array([(0, 0), (10, 0), (10, 5)], dtype=float)


# --- <use> ---------------------------------------------------------------------------------

def test_use_places_a_copy_at_x_y_after_its_transform(tmp_path):
    body = (f'<defs>{P}<g id="pair"><use href="#p"/><use href="#p" x="15"/></g></defs>'
            '<use href="#p" x="20" y="30"/>'
            '<use xlink:href="#pair" x="5" y="5" transform="translate(1 1)" '
            'xmlns:xlink="http://www.w3.org/1999/xlink"/>')
    got = sorted((tuple(a[0]) for a in strokes_of(tmp_path, body)))
    # SVG 2 5.6: the instance is translated by (x, y), appended after the use's transform;
    # nested uses add up: (5, 5) + (1, 1), then 0 or 15 more
    expected = sorted(tuple(to_screen(P_PTS + off)[0]) for off in
                      [(20, 30), (6, 6), (21, 6)])
    assert got == expected


def test_href_wins_over_xlink_href(tmp_path):
    body = (f'<defs>{P}<circle id="c" r="3"/></defs>'
            '<use href="#p" xlink:href="#c" xmlns:xlink="http://www.w3.org/1999/xlink"/>')
    # SVG 2 16.1.3 (from memory): with both, the attribute without a namespace is used
    assert list(by_label(strokes_of(tmp_path, body))) == ["<polyline id='p'> in <use>"]


@pytest.mark.parametrize("body,words", [
    ('<g id="a"><line x2="5"/><use id="u" href="#a"/></g>', "cycle"),
    ('<use id="u1" href="#u2"/><use id="u2" href="#u1"/>', "cycle"),
    ('<use id="u" href="#nowhere"/>', "'nowhere'"),
    ('<use id="u" href="other.svg#p"/>', "another file"),
])
def test_bad_use_references_name_the_element(tmp_path, body, words):
    with pytest.raises(InputError) as err:
        strokes_of(tmp_path, body)
    msg = str(err.value)
    assert "<use id=" in msg and "line 3" in msg and "href" in msg and words in msg, msg


def test_use_explosion_is_refused(tmp_path):
    # each level uses the previous one ten times: 10^7 copies
    levels = ['<line id="l0" x2="1"/>'] + [
        f'<g id="l{k}">' + "".join(f'<use href="#l{k - 1}"/>' for _ in range(10)) + "</g>"
        for k in range(1, 8)]
    body = "<defs>" + "".join(levels) + '</defs><use href="#l7"/>'
    with pytest.raises(InputError, match="more than"):
        strokes_of(tmp_path, body)


# --- viewports -------------------------------------------------------------------------------

SQUARE = '<polygon points="0,0 10,0 10,10 0,10"/>'


@pytest.mark.parametrize("aspect,box", [
    # viewport (10, 10) 60 x 30, viewBox 0 0 10 10 (SVG 2 8.2, worked by hand):
    ("xMidYMid meet", (25, 10, 55, 40)),    # s = min(6, 3) = 3; tx = 10 + (60 - 30) / 2
    ("xMinYMin meet", (10, 10, 40, 40)),
    ("xMaxYMax", (40, 10, 70, 40)),         # meet is the default; tx = 10 + 30
    ("none", (10, 10, 70, 40)),             # sx = 6, sy = 3
])
def test_nested_svg_viewbox_and_aspect(tmp_path, aspect, box):
    body = (f'<svg x="10" y="10" width="60" height="30" viewBox="0 0 10 10" '
            f'preserveAspectRatio="{aspect}">{SQUARE}</svg>')
    s = strokes_of(tmp_path, body)
    x0, y0, x1, y1 = box
    ref = shapely.Polygon(to_screen([(x0, y0), (x1, y0), (x1, y1), (x0, y1)]))
    assert s.count == 1
    assert shapely.Polygon(s.stroke(0)).symmetric_difference(ref).area < 1e-9
    assert shapely.Polygon(s.stroke(0)).area == pytest.approx(ref.area, rel=1e-12)


def test_slice_is_clipped_to_the_viewport_unless_overflow_is_visible(tmp_path):
    # slice: s = max(6, 3) = 6, the square is 60 x 60 from (10, -5); the viewport (10, 10)
    # 60 x 30 keeps its two vertical sides between y = 10 and 40: 2 x 30 units
    body = ('<svg x="10" y="10" width="60" height="30" viewBox="0 0 10 10" '
            'preserveAspectRatio="xMidYMid slice" {ov}>' + SQUARE + '</svg>')
    clipped = strokes_of(tmp_path, body.format(ov=""))
    square = shapely.LineString(to_screen([(10, -5), (70, -5), (70, 55), (10, 55), (10, -5)]))
    view = shapely.box(*to_screen([(10, 40)])[0], *to_screen([(70, 10)])[0])
    assert clipped.total_length() == pytest.approx(square.intersection(view).length, abs=1e-9)
    assert clipped.total_length() == pytest.approx(60.0, abs=1e-9)
    free = strokes_of(tmp_path, body.format(ov='overflow="visible"'))
    assert free.total_length() == pytest.approx(240.0, abs=1e-9)    # control: whole square


def test_symbol_through_use_takes_the_use_size(tmp_path):
    body = ('<defs><symbol id="s" viewBox="0 0 10 5"><polygon points="0,0 10,0 10,5 0,5"/>'
            '</symbol></defs><use href="#s" x="10" y="20" width="40" height="40"/>')
    # SVG 2 5.6 / 8.2: viewport (10, 20) 40 x 40; meet s = min(4, 8) = 4; the 40 x 20 result
    # centred vertically: ty = 20 + (40 - 20) / 2 = 30
    s = strokes_of(tmp_path, body)
    np.testing.assert_allclose(s.stroke(0), to_screen([(10, 30), (50, 30), (50, 50), (10, 50),
                                                       (10, 30)]), atol=1e-9)


def test_percentages_inside_a_nested_viewport_are_of_its_viewbox(tmp_path):
    body = ('<svg x="0" y="0" width="100" height="80" viewBox="0 0 50 40">'
            '<line x1="0" y1="50%" x2="100%" y2="50%"/></svg>')
    # SVG 1.1 7.10: % of the nearest viewport (viewBox 50 x 40), then scaled by 2
    np.testing.assert_allclose(strokes_of(tmp_path, body).stroke(0),
                               to_screen([(0, 40), (100, 40)]), atol=1e-9)


# --- units -----------------------------------------------------------------------------------

UNITS_96PX = ["1in", "2.54cm", "25.4mm", "72pt", "6pc", "96px", "101.6Q", "96"]


@pytest.mark.parametrize("value", UNITS_96PX)
def test_absolute_units_are_96_px_per_inch(tmp_path, value):
    # CSS Values 3, 6.2: each of these is 96 px = 96 user units here
    s = strokes_of(tmp_path, f'<line x1="0" y1="10" x2="{value}" y2="10"/>')
    assert s.total_length() == pytest.approx(96.0, rel=1e-12)


def test_percentages_and_font_relative_units(tmp_path):
    body = ('<line id="w" x1="0" y1="0" x2="50%" y2="0"/>'
            '<line id="h" x1="0" y1="0" x2="0" y2="50%"/>'
            '<circle id="r" cx="50" cy="40" r="10%"/>'
            '<rect id="rx" x="10" y="10" width="20" height="10" rx="50%"/>'
            '<line id="em" x1="0" y1="5" x2="3em" y2="5" font-size="4pt"/>')
    s = strokes_of(tmp_path, body)
    got = dict(zip(s.labels, s.lengths()))
    assert got["<line id='w'>"] == pytest.approx(50.0)          # 50% of the width 100
    assert got["<line id='h'>"] == pytest.approx(40.0)          # 50% of the height 80
    r = 0.1 * math.sqrt((100 ** 2 + 80 ** 2) / 2)               # SVG 1.1 7.10: diagonal
    # (an inscribed polyline within the chord tolerance e is short by about e / (3 r))
    assert got["<circle id='r'>"] == pytest.approx(2 * math.pi * r, rel=0.005 / r)
    # rx = 50% of the width = 50, clamped to half the rect's width, 10; ry takes rx and is
    # clamped to half the height, 5 (SVG 2 10.2): the rect is an ellipse of radii 10 and 5,
    # perimeter 4 a E(1 - b^2/a^2)
    ell = 4 * 10 * _ellipse_e(1 - (5 / 10) ** 2)
    assert got["<rect id='rx'>"] == pytest.approx(ell, rel=0.005 / 5)
    assert got["<line id='em'>"] == pytest.approx(3 * 4 * 96 / 72)   # 3 em of 4 pt


def _ellipse_e(m):
    """Complete elliptic integral of the second kind E(m) (scipy.special.ellipe)."""
    from scipy.special import ellipe

    return ellipe(m)


@pytest.mark.parametrize("attr,value,words", [
    ("x", "1q5", "not a length"),
    ("width", "10 px", "not a length"),
    ("height", "3cmm", "unknown unit 'cmm'"),
    ("rx", "NaN", "not a length"),
    ("x", "1e999", "range"),
])
def test_unreadable_lengths_name_the_element_and_the_attribute(tmp_path, attr, value, words):
    attrs = {"x": "1", "width": "5", "height": "5", attr: value}
    body = "<g>\n<rect id=\"box\" " + " ".join(f'{k}="{v}"' for k, v in attrs.items()) + "/></g>"
    with pytest.raises(InputError) as err:
        strokes_of(tmp_path, body)
    msg = str(err.value)
    assert "<rect id='box'> on line 4" in msg and f"{attr}={value!r}" in msg and words in msg


# --- true size -------------------------------------------------------------------------------

def test_true_size_from_a_page_in_mm_with_a_viewbox(tmp_path):
    body = '<line x1="0" y1="80" x2="200" y2="80"/><line x1="100" y1="0" x2="100" y2="40"/>'
    s = strokes_of(tmp_path, body, fit="true",
                   attrs='width="100mm" height="80mm" viewBox="0 0 200 160"')
    # 100 mm over 200 units: 0.5 mm a unit; the page centre (100, 80) at the screen centre
    np.testing.assert_allclose(s.stroke(0), [(-50, 0), (50, 0)], atol=1e-9)
    np.testing.assert_allclose(s.stroke(1), [(0, 40), (0, 20)], atol=1e-9)


def test_true_size_without_a_viewbox_is_96_px_per_inch(tmp_path):
    s = strokes_of(tmp_path, '<line x1="96" y1="144" x2="192" y2="144"/>', fit="true",
                   attrs='width="4in" height="3in"')
    # 96 px = 1 in = 25.4 mm, starting 1 in right of the page's left edge (the page is
    # 4 in wide, centred): x from -2 in + 1 in = -25.4 mm to 0; y at the page's middle
    np.testing.assert_allclose(s.stroke(0), [(-25.4, 0), (0, 0)], atol=1e-9)


def test_true_size_keeps_aspect_alignment_and_none(tmp_path):
    meet = strokes_of(tmp_path, '<line x1="0" y1="0" x2="10" y2="10"/>', fit="true",
                      attrs='width="100mm" height="50mm" viewBox="0 0 10 10"')
    # SVG 2 8.2 meet: 5 mm a unit, centred: x offset (100 - 50) / 2 = 25 mm on the page
    np.testing.assert_allclose(meet.stroke(0), [(-25, 25), (25, -25)], atol=1e-9)
    none = strokes_of(tmp_path, '<line x1="0" y1="0" x2="1" y2="1"/>', fit="true",
                      attrs='width="72pt" height="36pt" viewBox="0 0 1 1" '
                            'preserveAspectRatio="none"')
    # none: 25.4 mm a unit across, 12.7 mm down
    np.testing.assert_allclose(none.stroke(0), [(-12.7, 6.35), (12.7, -6.35)], atol=1e-9)


def test_true_size_without_a_physical_size_warns_and_takes_px(tmp_path):
    with pytest.warns(VectorgenWarning, match="96 px per inch"):
        s = strokes_of(tmp_path, '<line x1="0" y1="40" x2="96" y2="40"/>', fit="true",
                       attrs='viewBox="0 0 100 80"')
    assert s.total_length() == pytest.approx(25.4)
    # control: fit="off" takes the same 96 units as 96 mm
    assert strokes_of(tmp_path, '<line x1="0" y1="40" x2="96" y2="40"/>',
                      attrs='viewBox="0 0 100 80"').total_length() == pytest.approx(96.0)


def test_an_unknown_fit_mode_names_the_parameter(tmp_path):
    with pytest.raises(InputError) as err:
        strokes_of(tmp_path, '<line x2="5"/>', fit="actual")
    assert err.value.parameter == "fit" and "true" in str(err.value)


@pytest.mark.parametrize("symbol_attr,use_attr,length", [
    ("", "", 20.0),                              # clipped to the 20-unit viewport
    ("", 'style="overflow:visible"', 20.0),      # overflow on the <use> does not reach it
    ('overflow="visible"', "", 60.0),            # the symbol's own overflow does
])
def test_a_symbol_is_clipped_to_its_viewport_by_its_own_overflow(tmp_path, symbol_attr,
                                                                 use_attr, length):
    # SVG 2 UA style sheet: symbol { overflow: hidden }; overflow does not inherit (resvg
    # draws the same three cases the same way, checked here)
    body = (f'<defs><symbol id="s" viewBox="-10 -10 20 20" {symbol_attr}><line x1="-30" y1="0" '
            f'x2="30" y2="0"/></symbol></defs><use href="#s" x="40" y="30" width="20" '
            f'height="20" {use_attr}/>')
    assert strokes_of(tmp_path, body).total_length() == pytest.approx(length, abs=1e-9)

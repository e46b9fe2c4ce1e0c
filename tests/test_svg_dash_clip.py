"""Dashes and clipping: stroke-dasharray / stroke-dashoffset / pathLength cut strokes into
dashes along their arc length, and clip-path (with clipPathUnits and clip-rule) and mask cut
them to a region; each against a worked example or shapely.

Outside references: SVG 1.1 11.4 and SVG 2 13.5.5 (dashing: alternate dash and gap lengths,
an odd list repeated, the offset into the pattern, a zero sum or a negative value drawn solid,
lengths in the element's user units, the pattern restarted on every sub-path; pathLength
scaling; a zero-length dash drawn as a dot only with round or square caps), SVG 1.1 14.3
(clipping paths: userSpaceOnUse and objectBoundingBox units, clip-rule, a clip-path on the
clipPath itself, transforms on its children), SVG 1.1 11.3 (fill rules), SVG 1.1 14.4
(mask region defaults); shapely as the reference for clipped lengths.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import shapely

from render_helpers import write_svg
from vectorgen.errors import VectorgenWarning
from vectorgen.profile import Profile
from vectorgen.svgsource import svg_to_strokes

SCREEN = Profile().screen
TOL = 0.002


def strokes_of(tmp_path, body):
    return svg_to_strokes(write_svg(tmp_path, body), SCREEN, fit="off", tolerance_mm=TOL)


def dash_spans(strokes, y_svg):
    """The [x0, x1] of every stroke on the horizontal line y (SVG units), in SVG x."""
    out = []
    for p in strokes:
        if np.allclose(p[:, 1], 40.0 - y_svg):
            out.append((round(p[0, 0] + 50.0, 9), round(p[-1, 0] + 50.0, 9)))
    return sorted(out)


# --- dashes --------------------------------------------------------------------------------

LINE40 = 'x1="10" y1="10" x2="50" y2="10" stroke="black"'


@pytest.mark.parametrize("attrs,spans", [
    # a 40-unit line, dashes worked out by hand (positions along it)
    ('stroke-dasharray="5 3"', [(0, 5), (8, 13), (16, 21), (24, 29), (32, 37)]),
    ('stroke-dasharray="5,3" stroke-dashoffset="2"',
     [(0, 3), (6, 11), (14, 19), (22, 27), (30, 35), (38, 40)]),
    ('stroke-dasharray="5 3" stroke-dashoffset="-2"',
     [(2, 7), (10, 15), (18, 23), (26, 31), (34, 39)]),
    # an odd list is repeated: 5 3 2 5 3 2, period 20
    ('stroke-dasharray="5 3 2"', [(0, 5), (8, 10), (15, 18), (20, 25), (28, 30), (35, 38)]),
    # pathLength 20 on a 40-unit line: every dash length doubles
    ('stroke-dasharray="5 5" pathLength="20"', [(0, 10), (20, 30)]),
    ('style="stroke-dasharray: 12px 1em; font-size: 8px"', [(0, 12), (20, 32)]),
])
def test_dash_positions_along_a_line(tmp_path, attrs, spans):
    s = strokes_of(tmp_path, f'<line {LINE40} {attrs}/>')
    assert dash_spans(s, 10) == [(10 + a, 10 + b) for a, b in spans]


def test_dash_percentages_are_of_the_normalised_diagonal(tmp_path):
    s = strokes_of(tmp_path, f'<line {LINE40} stroke-dasharray="10%"/>')
    d = 0.1 * math.sqrt((100 ** 2 + 80 ** 2) / 2)      # SVG 1.1 7.10: d = 9.055
    # "d" repeated to "d d": dashes at [0, d], [2d, 3d], [4d, 40] (the last cut by the end)
    np.testing.assert_allclose(s.lengths(), [d, d, 40 - 4 * d], atol=1e-9)


@pytest.mark.parametrize("value,warns", [("0 0", False), ("5 -1", True), ("none", False)])
def test_zero_sum_or_negative_dash_arrays_draw_solid(tmp_path, value, warns):
    body = f'<line {LINE40} stroke-dasharray="{value}"/>'
    if warns:
        with pytest.warns(VectorgenWarning, match="negative"):
            s = strokes_of(tmp_path, body)
    else:
        s = strokes_of(tmp_path, body)
    assert dash_spans(s, 10) == [(10, 50)]


def test_dashes_are_measured_in_the_elements_own_units(tmp_path):
    # scale(2, 1): 5-unit dashes of the local 20-unit line are 10 long on the page; the
    # vertical line under the same scale keeps its 5-unit dashes
    body = ('<g transform="translate(10 10) scale(2 1)">'
            '<line x1="0" y1="0" x2="20" y2="0" stroke="black" stroke-dasharray="5"/>'
            '<line x1="0" y1="10" x2="0" y2="30" stroke="black" stroke-dasharray="5"/></g>')
    s = strokes_of(tmp_path, body)
    assert dash_spans(s, 10) == [(10, 20), (30, 40)]
    vertical = sorted(round(float(ln), 9) for p, ln in zip(s, s.lengths())
                      if np.all(p[:, 0] == -40.0))
    assert vertical == [5.0, 5.0]


def test_the_pattern_restarts_on_every_sub_path(tmp_path):
    s = strokes_of(tmp_path, '<path d="M 10 10 H 17 M 10 20 H 17" stroke="black" '
                             'stroke-dasharray="5 5"/>')
    assert dash_spans(s, 10) == [(10, 15)] and dash_spans(s, 20) == [(10, 15)]


def test_a_dashed_circle_keeps_its_dashes_on_the_circle(tmp_path):
    r, dash, gap = 10.0, 3.0, 2.0
    s = strokes_of(tmp_path, f'<circle cx="50" cy="40" r="{r}" stroke="black" fill="none" '
                             f'stroke-dasharray="{dash} {gap}"/>')
    c = 2 * math.pi * r
    whole, rest = divmod(c, dash + gap)
    assert s.count == int(whole) + (rest > 0)
    # drawn length: whole periods' dashes plus what the last part holds (chords are short of
    # the arc by a relative TOL / (3 r) at most)
    expected = whole * dash + min(rest, dash)
    assert s.total_length() == pytest.approx(expected, rel=TOL / r)
    rad = np.hypot(*s.points.T)
    assert rad.max() <= r + 1e-9 and rad.min() >= r - TOL * 1.001


def test_zero_length_dashes_are_dots_only_with_round_or_square_caps(tmp_path):
    line = 'x1="10" y1="10" x2="22" y2="10" stroke="black" stroke-dasharray="0 4"'
    round_caps = strokes_of(tmp_path, f'<line {line} stroke-linecap="round"/>')
    assert [len(p) for p in round_caps] == [1, 1, 1, 1]                # at 0, 4, 8, 12
    np.testing.assert_allclose(round_caps.points[:, 0] + 50, [10, 14, 18, 22])
    butt = strokes_of(tmp_path, f'<line {line}/><line x1="0" y1="0" x2="5" y2="0"/>')
    assert butt.count == 1                                             # only the other line


# --- clipping --------------------------------------------------------------------------------

def dense_circle(cx, cy, r, n=20001):
    t = np.linspace(0, 2 * np.pi, n)
    return np.column_stack([cx + r * np.cos(t), cy + r * np.sin(t)])


def test_a_clip_rectangle_halves_a_circle(tmp_path):
    body = ('<clipPath id="c"><rect x="0" y="0" width="50" height="80"/></clipPath>'
            '<circle cx="50" cy="40" r="20" fill="none" stroke="black" clip-path="url(#c)"/>')
    s = strokes_of(tmp_path, body)
    ref = shapely.LineString(dense_circle(50, 40, 20)).intersection(shapely.box(0, 0, 50, 80))
    assert s.total_length() == pytest.approx(ref.length, rel=1e-4)
    assert (s.points[:, 0] <= 0 + 1e-9).all()          # x <= 50 on the page
    assert s.count == 1                                 # one arc, joined round its start


OUTER = "M 20 40 A 30 30 0 0 1 80 40 A 30 30 0 0 1 20 40 Z"        # clockwise on the page
INNER_SAME = "M 40 40 A 10 10 0 0 1 60 40 A 10 10 0 0 1 40 40 Z"
INNER_REVERSED = "M 40 40 A 10 10 0 0 0 60 40 A 10 10 0 0 0 40 40 Z"
# the line y = 41 crosses the circles r = 30 and r = 10 (centre (50, 40)) at
# x = 50 +- sqrt(r^2 - 1)
RING = 2 * (math.sqrt(899.0) - math.sqrt(99.0))
DISK = 2 * math.sqrt(899.0)


@pytest.mark.parametrize("rule,inner,length", [
    ("evenodd", INNER_SAME, RING),          # SVG 1.1 11.3: crossings odd in the ring only
    ("nonzero", INNER_SAME, DISK),          # same direction: winding 2 inside: all the disk
    ("nonzero", INNER_REVERSED, RING),      # reversed: winding 0 inside the inner circle
    ("evenodd", INNER_REVERSED, RING),
])
def test_clip_rule(tmp_path, rule, inner, length):
    body = (f'<clipPath id="c"><path clip-rule="{rule}" d="{OUTER} {inner}"/></clipPath>'
            '<line x1="0" y1="41" x2="100" y2="41" stroke="black" clip-path="url(#c)"/>')
    s = strokes_of(tmp_path, body)
    # the clip region's circles are inscribed polygons within TOL of the true circles
    assert s.total_length() == pytest.approx(length, abs=0.01)


def test_bounding_box_units_clip_transforms_and_nesting(tmp_path):
    body = ('<clipPath id="mid" clipPathUnits="objectBoundingBox">'
            '<rect x="0.25" y="0" width="0.5" height="1"/></clipPath>'
            '<clipPath id="moved" transform="translate(40 0)">'
            '<rect x="0" y="0" width="30" height="80" transform="scale(0.5 1)"/></clipPath>'
            '<clipPath id="narrow" clip-path="url(#moved)"><rect x="0" y="0" width="50" '
            'height="80"/></clipPath>'
            '<rect id="bb" x="20" y="10" width="60" height="20" fill="none" stroke="black" '
            'clip-path="url(#mid)"/>'
            '<g clip-path="url(#narrow)"><line id="ln" x1="0" y1="50" x2="100" y2="50" '
            'stroke="black"/></g>')
    s = strokes_of(tmp_path, body)
    lengths = {}
    for lab, ln in zip(s.labels, s.lengths()):
        lengths[lab] = lengths.get(lab, 0.0) + ln
    # bounding box 20..80 x 10..30: x in [35, 65] kept: top and bottom edges, 30 each
    assert lengths["<rect id='bb'>"] == pytest.approx(60.0, abs=1e-9)
    # moved: x in [40, 55]; narrow: x in [0, 50], clipped by moved: [40, 50]
    assert lengths["<line id='ln'>"] == pytest.approx(10.0, abs=1e-9)


def test_control_without_a_clip_path_everything_is_drawn(tmp_path):
    s = strokes_of(tmp_path, '<rect x="20" y="10" width="60" height="20" fill="none" '
                             'stroke="black"/>')
    assert s.total_length() == pytest.approx(160.0)


def test_clip_on_a_group_and_on_its_child_intersect(tmp_path):
    body = ('<clipPath id="a"><rect x="0" y="0" width="60" height="80"/></clipPath>'
            '<clipPath id="b"><rect x="30" y="0" width="70" height="80"/></clipPath>'
            '<g clip-path="url(#a)"><line x1="0" y1="40" x2="100" y2="40" stroke="black" '
            'clip-path="url(#b)"/></g>')
    assert strokes_of(tmp_path, body).total_length() == pytest.approx(30.0, abs=1e-9)


def test_an_empty_clip_path_clips_everything_away(tmp_path):
    body = ('<clipPath id="none"/><line x1="0" y1="40" x2="100" y2="40" stroke="black" '
            'clip-path="url(#none)"/><line id="other" x1="0" y1="0" x2="5" y2="0"/>')
    assert strokes_of(tmp_path, body).labels == ["<line id='other'>"]


def test_a_mask_is_taken_as_a_clip_by_its_shapes_with_a_warning(tmp_path):
    body = ('<mask id="m" maskUnits="userSpaceOnUse" x="0" y="0" width="100" height="80">'
            '<rect x="10" y="0" width="30" height="80" fill="white"/></mask>'
            '<line x1="0" y1="40" x2="100" y2="40" stroke="black" mask="url(#m)"/>')
    with pytest.warns(VectorgenWarning, match="mask"):
        s = strokes_of(tmp_path, body)
    assert s.total_length() == pytest.approx(30.0, abs=1e-9)


def test_the_mask_region_defaults_to_the_bounding_box_plus_ten_percent(tmp_path):
    body = ('<mask id="m"><rect x="-100" y="-100" width="400" height="400" fill="white"/>'
            '</mask><line x1="20" y1="40" x2="80" y2="40" stroke="black" mask="url(#m)"/>'
            '<line x1="20" y1="40" x2="80" y2="40" stroke="black" transform="translate(0 5)"/>')
    with pytest.warns(VectorgenWarning, match="mask"):
        s = strokes_of(tmp_path, body)
    # SVG 1.1 14.4: x, y = -10 %, width, height = 120 % of the bounding box; the line's box
    # has no height (SVG 1.1 7.11: no bounding box to measure by), so the masked line is
    # not drawn (resvg draws nothing for it either, checked here)
    assert s.count == 1

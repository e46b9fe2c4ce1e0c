"""SVG source: every element kind, path commands, units, placement modes, <text> reporting and
SVGs without a namespace, each checked against the SVG / CSS specifications' own rules and
independent curve formulas."""

from __future__ import annotations

import math

import numpy as np
import pytest
import shapely
from scipy.integrate import quad

from render_helpers import render, run_cli, write_svg
from test_geometry import c2xy, cubic_point, ellipse_point, max_gap, quad_bezier_point, \
    svg_arc_center, to_screen
from vectorgen.errors import VectorgenError
from vectorgen.profile import Profile, Screen
from vectorgen.errors import VectorgenWarning
from vectorgen.svgsource import svg_to_strokes

SCREEN = Profile().screen        # 100 x 80 mm


def strokes_of(path, fit="off", tol=0.005, screen=SCREEN):
    return svg_to_strokes(path, screen, fit=fit, tolerance_mm=tol)


def by_label(strokes):
    out = {}
    for i, lab in enumerate(strokes.labels):
        out.setdefault(lab, []).append(strokes.stroke(i))
    return out


# --- every element kind -------------------------------------------------------------------------

def test_line_polyline_polygon_vertices_are_exact(tmp_path):
    path = write_svg(tmp_path, '<line id="l" x1="5" y1="5" x2="50" y2="7"/>'
                               '<polyline id="pl" points="1,1 5,8 9,1"/>'
                               '<polygon id="pg" points="60,60 70,75 80,60"/>')
    got = by_label(strokes_of(path))
    np.testing.assert_allclose(got["<line id='l'>"][0], to_screen([(5, 5), (50, 7)]))
    np.testing.assert_allclose(got["<polyline id='pl'>"][0], to_screen([(1, 1), (5, 8), (9, 1)]))
    # SVG 1.1 9.7: a polygon closes back to its first point.
    np.testing.assert_allclose(got["<polygon id='pg'>"][0],
                               to_screen([(60, 60), (70, 75), (80, 60), (60, 60)]))


def test_rect_square_corners(tmp_path):
    path = write_svg(tmp_path, '<rect x="10" y="12" width="30" height="20"/>')
    s = strokes_of(path)
    assert s.count == 1
    assert s.total_length() == pytest.approx(100.0, abs=1e-9)
    assert shapely.Polygon(s.stroke(0)).equals(shapely.box(-40, 8, -10, 28))


@pytest.mark.parametrize("attrs,rx,ry", [
    ('rx="3"', 3.0, 3.0),              # ry missing: takes rx (SVG 1.1, 9.2)
    ('ry="4"', 4.0, 4.0),              # rx missing: takes ry
    ('rx="6" ry="2.5"', 6.0, 2.5),
    ('rx="8"', 8.0, 5.0),              # ry = 8 clamped to half the height (SVG 1.1, 9.2)
    ('rx="30" ry="30"', 10.0, 5.0),    # both clamped: the rect becomes an ellipse
])
def test_rounded_rect_perimeter_and_outline(tmp_path, attrs, rx, ry):
    w, h, tol = 20.0, 10.0, 0.005
    path = write_svg(tmp_path, f'<rect x="10" y="10" width="{w}" height="{h}" {attrs}/>')
    s = strokes_of(path, tol=tol)
    assert s.count == 1
    # Perimeter: the straight parts plus one whole ellipse (rx, ry) made of the four corners;
    # the ellipse's length by scipy.integrate.quad of its speed.
    ell, _ = quad(lambda t: math.hypot(rx * math.sin(t), ry * math.cos(t)), 0, 2 * math.pi)
    expected = 2 * (w - 2 * rx) + 2 * (h - 2 * ry) + ell
    assert s.total_length() == pytest.approx(expected, abs=0.02)
    assert s.total_length() <= expected + 1e-9
    # Outline: every drawn point lies on the rounded rect's boundary (corner ellipses centred
    # rx, ry in from the corners).
    p = s.stroke(0) * [1, -1] + [50, 40]               # back to SVG user units
    cx = np.clip(p[:, 0], 10 + rx, 10 + w - rx)
    cy = np.clip(p[:, 1], 10 + ry, 10 + h - ry)
    u, v = (p[:, 0] - cx) / rx, (p[:, 1] - cy) / ry
    corner = (np.abs(p[:, 0] - cx) > 1e-9) & (np.abs(p[:, 1] - cy) > 1e-9)
    assert np.abs(np.hypot(u, v)[corner] - 1).max(initial=0) <= tol / min(rx, ry) + 1e-9
    side = ~corner
    on_side = np.minimum.reduce([np.abs(p[side, 0] - 10), np.abs(p[side, 0] - 10 - w),
                                 np.abs(p[side, 1] - 10), np.abs(p[side, 1] - 10 - h)])
    assert on_side.max(initial=0) <= 1e-9


def test_circle_and_ellipse(tmp_path):
    tol = 0.005
    path = write_svg(tmp_path, '<circle id="c" cx="30" cy="40" r="12"/>'
                               '<ellipse id="e" cx="70" cy="40" rx="20" ry="9"/>')
    got = by_label(strokes_of(path, tol=tol))
    c = got["<circle id='c'>"][0]
    r = np.hypot(c[:, 0] + 20, c[:, 1])
    assert r.max() <= 12 + 1e-9 and r.min() >= 12 - tol
    assert np.allclose(c[0], c[-1])                    # closed
    e = got["<ellipse id='e'>"][0]
    dense = to_screen(ellipse_point(70, 40, 20, 9, 0.0, np.linspace(0, 2 * np.pi, 40001)))
    d1, d2 = max_gap(dense, e)
    assert d1 <= tol * 1.01 and d2 <= tol * 1.01


def test_every_path_command_against_the_spec(tmp_path):
    """Absolute and relative M L H V C S Q T A Z: the drawn stroke against the curve built by hand
    from the SVG 1.1 path rules (8.3): S and T reflect the previous control point about the
    current point; arcs from the F.6.5 centre parameterisation."""
    d = ("M 10 10 H 30 V 20 h -5 v 5 L 10 25 l 2 2 C 20 40 30 40 40 30 S 60 20 70 30 "
         "Q 80 40 90 30 T 95 20 A 5 5 0 0 1 95 10 a 3 3 0 1 0 -6 0 Z")
    tol = 0.005
    path = write_svg(tmp_path, f'<path d="{d}"/>')
    s = strokes_of(path, tol=tol)
    assert s.count == 1
    t = np.linspace(0, 1, 4001)

    def seg(a, b):
        return np.linspace(a, b, 50)

    pieces = [seg(10 + 10j, 30 + 10j), seg(30 + 10j, 30 + 20j), seg(30 + 20j, 25 + 20j),
              seg(25 + 20j, 25 + 25j), seg(25 + 25j, 10 + 25j), seg(10 + 25j, 12 + 27j),
              cubic_point([12 + 27j, 20 + 40j, 30 + 40j, 40 + 30j], t),
              cubic_point([40 + 30j, 50 + 20j, 60 + 20j, 70 + 30j], t),     # reflected (30,40)
              quad_bezier_point([70 + 30j, 80 + 40j, 90 + 30j], t),
              quad_bezier_point([90 + 30j, 100 + 20j, 95 + 20j], t)]       # reflected (80,40)
    for arc in [(95, 20, 5, 5, 0, 0, 1, 95, 10), (95, 10, 3, 3, 0, 1, 0, 89, 10)]:
        cx, cy, rx, ry, phi, th1, dth = svg_arc_center(*arc)
        xy = ellipse_point(cx, cy, rx, ry, phi, np.linspace(th1, th1 + dth, 4001))
        pieces.append(xy[:, 0] + 1j * xy[:, 1])
    pieces.append(seg(89 + 10j, 10 + 10j))                                  # Z
    ref = to_screen(c2xy(np.concatenate(pieces)))
    drawn = s.stroke(0)
    np.testing.assert_allclose(drawn[0], ref[0], atol=1e-9)
    np.testing.assert_allclose(drawn[-1], ref[0], atol=1e-9)
    d1, d2 = max_gap(ref, drawn)
    assert d1 <= tol * 1.01 + 1e-6 and d2 <= tol * 1.01 + 1e-6


def test_subpaths_become_separate_strokes(tmp_path):
    path = write_svg(tmp_path, '<path d="M 10 10 L 20 10 M 30 30 L 40 30 L 40 40"/>')
    s = strokes_of(path)
    assert s.count == 2
    assert sorted(np.round(s.lengths(), 9)) == [10.0, 20.0]


def test_nested_group_translations_add_up(tmp_path):
    path = write_svg(tmp_path, '<g transform="translate(10,0)"><g transform="translate(0,5)">'
                               '<g transform="translate(1,1)"><line x1="0" y1="0" x2="10" y2="0"/>'
                               '</g></g></g>')
    np.testing.assert_allclose(strokes_of(path).stroke(0), to_screen([(11, 6), (21, 6)]))


def test_hidden_elements_are_not_drawn(tmp_path):
    path = write_svg(tmp_path, '<line x1="0" y1="0" x2="10" y2="0"/>'
                               '<line x1="0" y1="5" x2="10" y2="5" style="display:none"/>'
                               '<line x1="0" y1="9" x2="10" y2="9" visibility="hidden"/>')
    assert strokes_of(path).count == 1


def test_opacity_is_the_stroke_intensity(tmp_path):
    path = write_svg(tmp_path, '<line id="dim" x1="0" y1="0" x2="10" y2="0" '
                               'stroke-opacity="0.5"/>'
                               '<line id="full" x1="0" y1="9" x2="10" y2="9"/>')
    s = strokes_of(path)
    assert dict(zip(s.labels, s.intensity)) == {"<line id='dim'>": 0.5, "<line id='full'>": 1.0}


# --- units and placement ------------------------------------------------------------------------
# CSS Values and Units Level 3, 5.2 (absolute lengths): 1in = 2.54cm = 25.4mm = 72pt = 6pc = 96px,
# 1Q = 1/4 mm.
PX_PER = {"px": 1.0, "in": 96.0, "cm": 96.0 / 2.54, "mm": 96.0 / 25.4, "pt": 96.0 / 72.0,
          "pc": 16.0, "Q": 96.0 / 101.6, "": 1.0}


@pytest.mark.parametrize("unit", list(PX_PER))
def test_width_height_units_set_the_page(tmp_path, unit):
    """No viewBox: the page is width x height in px (user units). A line across half the page
    width, fitted with fit=page into a 100 x 80 face of the same aspect, is 50 mm long."""
    w, h = 5.0, 4.0
    wpx, hpx = w * PX_PER[unit], h * PX_PER[unit]
    path = write_svg(tmp_path, f'<line x1="0" y1="{hpx / 2}" x2="{wpx / 2}" y2="{hpx / 2}"/>',
                     attrs=f'width="{w}{unit}" height="{h}{unit}"')
    s = strokes_of(path, fit="page")
    np.testing.assert_allclose(s.stroke(0), [(-50, 0), (0, 0)], atol=1e-9)


def test_page_in_mm_maps_one_to_one(tmp_path):
    """width=100mm height=80mm on a 100 x 80 mm face: a user unit (px) is 25.4/96 mm."""
    path = write_svg(tmp_path, '<line x1="96" y1="0" x2="192" y2="0"/>',
                     attrs='width="100mm" height="80mm"')
    s = strokes_of(path, fit="page")
    np.testing.assert_allclose(s.stroke(0), [(-50 + 25.4, 40), (-50 + 50.8, 40)], atol=1e-9)


def test_viewbox_is_the_page(tmp_path):
    """The viewBox (x y w h) is fitted, aspect kept, centred; width/height only scale it on a
    page and do not change the placement on the tube."""
    body = '<polyline points="-20,-10 180,-10 180,150 -20,150"/>'
    for attrs in ('viewBox="-20 -10 200 160"', 'viewBox="-20,-10,200,160" width="4in" '
                  'height="1in"'):
        path = write_svg(tmp_path, body, attrs=attrs)
        s = strokes_of(path, fit="page")
        np.testing.assert_allclose(s.stroke(0), [(-50, 40), (50, 40), (50, -40), (-50, -40)],
                                   atol=1e-9)


def test_wide_page_is_centred_with_its_aspect_kept(tmp_path):
    path = write_svg(tmp_path, '<polyline points="0,0 200,0 200,50 0,50"/>',
                     attrs='viewBox="0 0 200 50"')
    s = strokes_of(path, fit="page")
    # scale = min(100/200, 80/50) = 0.5: the page spans x +-50, y +-12.5
    np.testing.assert_allclose(s.stroke(0), [(-50, 12.5), (50, 12.5), (50, -12.5), (-50, -12.5)],
                               atol=1e-9)


def test_fit_content_fills_the_area_with_the_drawing(tmp_path):
    path = write_svg(tmp_path, '<circle cx="10" cy="10" r="5"/>')
    s = strokes_of(path, fit="content", tol=0.01)
    x0, y0, x1, y1 = s.bounds()
    # content box 10 x 10 into 100 x 80: scale 8, centred
    # (the flattened outline's bounds are fitted, so the circle may grow by up to the chord
    # tolerance in the direction where no vertex sits on the extreme)
    assert (x0, y0, x1, y1) == pytest.approx((-40, -40, 40, 40), abs=0.01)
    assert y1 - y0 == pytest.approx(80, abs=1e-9)          # the height limits the fit
    r = np.hypot(*s.points.T)
    assert r.max() <= 40.01 and r.min() >= 40 - 0.01 * (1 + 1e-6)


def test_fit_page_round_face(tmp_path):
    """A round face: the page's diagonal spans the diameter, so the page's corners touch it."""
    screen = Screen(shape="round", diameter_mm=100.0)
    path = write_svg(tmp_path, '<polyline points="0,0 60,0 60,80"/>', attrs='viewBox="0 0 60 80"')
    s = strokes_of(path, fit="page", screen=screen)
    # 3-4-5 triangle: diagonal 100 user units -> 100 mm, scale 1
    np.testing.assert_allclose(s.stroke(0), [(-30, 40), (30, 40), (30, -40)], atol=1e-9)


def test_fit_off_keeps_user_units_as_mm(tmp_path):
    path = write_svg(tmp_path, '<line x1="50" y1="40" x2="60" y2="30"/>', attrs='viewBox="0 0 100 80"')
    np.testing.assert_allclose(strokes_of(path, fit="off").stroke(0), [(0, 0), (10, 10)])
    # No page at all: the drawing's centre sits at the screen centre.
    path = write_svg(tmp_path, '<line x1="500" y1="400" x2="510" y2="390"/>', attrs="")
    np.testing.assert_allclose(strokes_of(path, fit="off").stroke(0), [(-5, -5), (5, 5)])


def test_y_axis_is_flipped(tmp_path):
    """SVG +y is down (SVG 1.1, 7.3); the screen's +y is up: the page's top edge is +40 mm."""
    path = write_svg(tmp_path, '<line x1="0" y1="0" x2="100" y2="0"/>')
    np.testing.assert_allclose(strokes_of(path, fit="page").stroke(0), [(-50, 40), (50, 40)])


# --- <text>, namespaces -------------------------------------------------------------------------

def test_text_elements_are_drawn_and_reported(tmp_path):
    """<text> is drawn in the single-stroke font (test_svg_text.py has the placement rules);
    what is not drawn about it, a named font-family, is reported."""
    path = write_svg(tmp_path, '<line x1="0" y1="0" x2="10" y2="0"/><text x="5" y="5">hi</text>'
                               '<text x="5" y="15" font-family="Courier">there</text>')
    with pytest.warns(VectorgenWarning, match="font-family Courier"):
        s = strokes_of(path)
    assert {"<text> #2", "<text> #3"} <= set(s.labels) and s.count > 3
    out = run_cli("render", path, "-o", tmp_path / "out.wav")
    assert out.returncode == 0
    assert "warning" in out.stderr and "font-family" in out.stderr


def test_text_only_svg_without_a_font_is_an_error_that_says_so(tmp_path, monkeypatch):
    from vectorgen import sources
    from vectorgen.registry import Registry

    monkeypatch.setattr(sources, "STROKE_FONTS", Registry("stroke font"))
    path = write_svg(tmp_path, '<text x="5" y="5">only words</text>')
    with pytest.raises(VectorgenError, match="text"):
        strokes_of(path)


def test_svg_without_namespace_reads_the_same(tmp_path):
    body = ('<g transform="translate(5 5)"><rect x="1" y="2" width="30" height="20" rx="3"/>'
            '<circle cx="60" cy="40" r="10"/><path d="M 0 70 Q 50 50 100 70"/></g>')
    with_ns = strokes_of(write_svg(tmp_path, body, name="a.svg"))
    without = strokes_of(write_svg(tmp_path, body, name="b.svg", xmlns=False))
    assert with_ns.count == without.count == 3
    np.testing.assert_array_equal(np.sort(with_ns.lengths()), np.sort(without.lengths()))


def test_svg_renders_end_to_end(tmp_path):
    path = write_svg(tmp_path, '<rect x="10" y="10" width="80" height="60" rx="5"/>')
    frame = render(strokes_of(path, fit="page"))
    assert frame.samples > 100
    assert np.abs(frame.signal).max() <= 1.0

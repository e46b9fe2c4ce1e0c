"""Geometry: curve flattening, chord tolerance, SVG transforms and clipping, each checked against
something outside the engine (numerical integration, textbook formulas, the SVG specification's
own formulas, shapely)."""

from __future__ import annotations

import math

import numpy as np
import pytest
import shapely
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from scipy.integrate import quad

from render_helpers import polylines, render, write_svg
from vectorgen.clip import clip_to_screen
from vectorgen.flatten import MAX_TURN_DEG, flatten_arcs, flatten_beziers
from vectorgen.profile import Profile, Screen
from vectorgen.svgsource import svg_to_strokes

# --- independent curve formulas -----------------------------------------------------------------


def cubic_point(c, t):
    """Cubic Bezier in Bernstein form (textbook definition), c = 4 complex control points."""
    s = 1.0 - t
    return s**3 * c[0] + 3 * s * s * t * c[1] + 3 * s * t * t * c[2] + t**3 * c[3]


def cubic_speed(c, t):
    """|B'(t)| from the derivative of the Bernstein form."""
    s = 1.0 - t
    d = 3 * (s * s * (c[1] - c[0]) + 2 * s * t * (c[2] - c[1]) + t * t * (c[3] - c[2]))
    return abs(d)


def quad_bezier_point(c, t):
    s = 1.0 - t
    return s * s * c[0] + 2 * s * t * c[1] + t * t * c[2]


def svg_arc_center(x1, y1, rx, ry, phi_deg, fa, fs, x2, y2):
    """Endpoint -> centre parameterisation of an SVG elliptical arc, written out from the SVG 1.1
    specification, implementation notes F.6.5 and F.6.6 (radius correction). Returns
    (cx, cy, rx, ry, phi, theta1, dtheta), angles in radians, SVG user space (+y down)."""
    phi = math.radians(phi_deg)
    cp, sp = math.cos(phi), math.sin(phi)
    dx, dy = (x1 - x2) / 2.0, (y1 - y2) / 2.0
    x1p, y1p = cp * dx + sp * dy, -sp * dx + cp * dy
    rx, ry = abs(rx), abs(ry)
    lam = x1p**2 / rx**2 + y1p**2 / ry**2
    if lam > 1:
        rx, ry = rx * math.sqrt(lam), ry * math.sqrt(lam)
    num = rx**2 * ry**2 - rx**2 * y1p**2 - ry**2 * x1p**2
    den = rx**2 * y1p**2 + ry**2 * x1p**2
    coef = math.sqrt(max(0.0, num / den)) * (1 if fa != fs else -1)
    cxp, cyp = coef * rx * y1p / ry, -coef * ry * x1p / rx
    cx = cp * cxp - sp * cyp + (x1 + x2) / 2.0
    cy = sp * cxp + cp * cyp + (y1 + y2) / 2.0

    def angle(ux, uy, vx, vy):
        return math.atan2(ux * vy - uy * vx, ux * vx + uy * vy)

    ux, uy = (x1p - cxp) / rx, (y1p - cyp) / ry
    vx, vy = (-x1p - cxp) / rx, (-y1p - cyp) / ry
    th1 = angle(1.0, 0.0, ux, uy)
    dth = angle(ux, uy, vx, vy)
    if not fs and dth > 0:
        dth -= 2 * math.pi
    elif fs and dth < 0:
        dth += 2 * math.pi
    return cx, cy, rx, ry, phi, th1, dth


def ellipse_point(cx, cy, rx, ry, phi, theta):
    """Point of a rotated ellipse at parametric angle theta (SVG 1.1, F.6.3)."""
    c, s = math.cos(phi), math.sin(phi)
    x = cx + rx * c * np.cos(theta) - ry * s * np.sin(theta)
    y = cy + rx * s * np.cos(theta) + ry * c * np.sin(theta)
    return np.column_stack([np.atleast_1d(x), np.atleast_1d(y)])


def poly_length(xy):
    return float(np.hypot(*np.diff(xy, axis=0).T).sum())


def length_deficit_bound(xy, tol):
    """Upper estimate of (arc length - inscribed polyline length) when every chord stays within
    `tol` of the curve: per chord c with sagitta h <= tol, arc - c ~= 8 h^2 / (3 c) (the
    textbook arc-length approximation for a shallow circular segment, s^2 ~= c^2 + 16 h^2 / 3);
    50 % headroom for non-circular pieces."""
    c = np.hypot(*np.diff(xy, axis=0).T)
    c = c[c > 0]
    return 1.5 * float(np.sum(8.0 * tol**2 / (3.0 * c))) + 1e-9


def c2xy(z):
    z = np.asarray(z)
    return np.column_stack([z.real, z.imag])


# --- arc length against numerical integration ---------------------------------------------------

CUBIC = np.array([0 + 0j, 30 + 60j, 70 - 40j, 100 + 10j])


@pytest.mark.parametrize("tol", [0.1, 0.02, 0.005])
def test_cubic_bezier_length_matches_quad_of_speed(tol):
    pts, _n = flatten_beziers(CUBIC[None, :], tol)
    xy = c2xy(np.concatenate([[CUBIC[0]], pts]))
    # Reference: arc length = integral of |B'(t)| dt, scipy.integrate.quad (adaptive Gauss-Kronrod).
    ref, err = quad(lambda t: cubic_speed(CUBIC, t), 0.0, 1.0, limit=200, epsabs=1e-11)
    got = poly_length(xy)
    # An inscribed polyline is never longer than the curve (triangle inequality) ...
    assert got <= ref + 1e-9
    # ... and falls short only by the chord sagittas allowed by the tolerance.
    assert ref - got <= length_deficit_bound(xy, tol)


@pytest.mark.parametrize("tol", [0.1, 0.02, 0.005])
def test_elliptical_arc_length_matches_quad_of_speed(tol):
    rx, ry, rot, th0, dth = 40.0, 15.0, math.radians(25.0), 0.3, 4.1
    pts, _n = flatten_arcs(np.array([5 + 3j]), np.array([rx]), np.array([ry]), np.array([rot]),
                           np.array([th0]), np.array([dth]), tol)
    start = ellipse_point(5, 3, rx, ry, rot, th0)
    xy = np.vstack([start, c2xy(pts)])
    # Reference: ds/dtheta = sqrt(rx^2 sin^2 + ry^2 cos^2) (speed of x = rx cos, y = ry sin;
    # rotation does not change length), integrated with scipy.integrate.quad.
    ref, _ = quad(lambda t: math.hypot(rx * math.sin(t), ry * math.cos(t)), th0, th0 + dth,
                  limit=200, epsabs=1e-11)
    got = poly_length(xy)
    assert got <= ref + 1e-9
    assert ref - got <= length_deficit_bound(xy, tol)
    end = ellipse_point(5, 3, rx, ry, rot, th0 + dth)[0]
    np.testing.assert_allclose(xy[-1], end, atol=1e-9)


def test_svg_cubic_and_arc_paths_measure_as_quad(tmp_path):
    """Through the whole SVG source (fit off: 1 user unit = 1 mm): every stroke's length equals
    the integral of the curve's speed."""
    arc = (10.0, 20.0, 30.0, 15.0, 25.0, 1, 1, 60.0, 40.0)
    cub = "M 5 70 C 25 10 60 95 95 60"
    body = (f'<path id="cubic" d="{cub}"/>'
            f'<path id="arc" d="M {arc[0]} {arc[1]} A {arc[2]} {arc[3]} {arc[4]} {arc[5]} '
            f'{arc[6]} {arc[7]} {arc[8]}"/>')
    path = write_svg(tmp_path, body)
    tol = 0.01
    strokes = svg_to_strokes(path, Profile().screen, fit="off", tolerance_mm=tol)
    by_label = dict(zip(strokes.labels, strokes.lengths()))
    c = np.array([5 + 70j, 25 + 10j, 60 + 95j, 95 + 60j])
    ref_c, _ = quad(lambda t: cubic_speed(c, t), 0, 1, limit=200)  # scipy.integrate.quad
    cx, cy, rx, ry, phi, th1, dth = svg_arc_center(*arc)           # SVG 1.1 F.6.5
    ref_a, _ = quad(lambda t: math.hypot(rx * math.sin(t), ry * math.cos(t)), th1, th1 + dth,
                    limit=200)
    assert by_label["<path id='cubic'>"] == pytest.approx(ref_c, rel=2e-4)
    assert by_label["<path id='arc'>"] == pytest.approx(ref_a, rel=2e-4)
    assert by_label["<path id='cubic'>"] <= ref_c + 1e-9
    assert by_label["<path id='arc'>"] <= ref_a + 1e-9


# --- chord tolerance ----------------------------------------------------------------------------

def max_gap(curve_xy, poly_xy):
    """Largest distance from the dense reference curve to the polyline, and from the polyline's
    vertices to the dense curve (shapely distances as the independent measure)."""
    line = shapely.LineString(poly_xy)
    ref = shapely.LineString(curve_xy)
    d1 = shapely.distance(shapely.points(curve_xy), line).max()
    d2 = shapely.distance(shapely.points(poly_xy), ref).max()
    return d1, d2


coord = st.floats(-60, 60, allow_nan=False, allow_infinity=False)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(ctrl=st.lists(st.tuples(coord, coord), min_size=4, max_size=4),
       tol=st.sampled_from([0.2, 0.05, 0.01]))
def test_random_cubics_stay_within_chord_tolerance(ctrl, tol):
    c = np.array([complex(x, y) for x, y in ctrl])
    assume(np.ptp(c.real) + np.ptp(c.imag) > 1e-3)      # a curve, not a point
    pts, _n = flatten_beziers(c[None, :], tol)
    poly = c2xy(np.concatenate([[c[0]], pts]))
    dense = c2xy(cubic_point(c, np.linspace(0.0, 1.0, 20001)))
    d_curve_to_poly, d_vertex_to_curve = max_gap(dense, poly)
    assert d_curve_to_poly <= tol * (1 + 1e-6) + 1e-9
    # vertices are exact curve points (up to the dense reference's own chord error)
    assert d_vertex_to_curve <= 1e-3 * tol + 1e-6


@settings(max_examples=40, deadline=None)
@given(ctrl=st.lists(st.tuples(coord, coord), min_size=3, max_size=3),
       tol=st.sampled_from([0.2, 0.02]))
def test_random_quadratics_stay_within_chord_tolerance(ctrl, tol):
    c = np.array([complex(x, y) for x, y in ctrl])
    assume(np.ptp(c.real) + np.ptp(c.imag) > 1e-3)      # a curve, not a point
    pts, _n = flatten_beziers(c[None, :], tol)
    poly = c2xy(np.concatenate([[c[0]], pts]))
    dense = c2xy(quad_bezier_point(c, np.linspace(0.0, 1.0, 20001)))
    d1, _ = max_gap(dense, poly)
    assert d1 <= tol * (1 + 1e-6) + 1e-9


@settings(max_examples=60, deadline=None)
@given(rx=st.floats(0.5, 60), ry=st.floats(0.5, 60), rot=st.floats(-3.2, 3.2),
       th0=st.floats(-3.2, 3.2), dth=st.floats(-6.28, 6.28).filter(lambda v: abs(v) > 1e-3),
       tol=st.sampled_from([0.2, 0.05, 0.01]))
def test_random_arcs_stay_within_chord_tolerance(rx, ry, rot, th0, dth, tol):
    pts, _n = flatten_arcs(np.array([0j]), np.array([rx]), np.array([ry]), np.array([rot]),
                           np.array([th0]), np.array([dth]), tol)
    poly = np.vstack([ellipse_point(0, 0, rx, ry, rot, th0), c2xy(pts)])
    dense = ellipse_point(0, 0, rx, ry, rot, np.linspace(th0, th0 + dth, 20001))
    d1, d2 = max_gap(dense, poly)
    assert d1 <= tol * (1 + 1e-6) + 1e-9
    assert d2 <= 1e-3 * tol + 1e-6


def turn_angles_deg(xy):
    d = np.diff(xy, axis=0)
    d = d[np.hypot(*d.T) > 0]
    a = np.arctan2(d[:, 1], d[:, 0])
    return np.degrees(np.abs(np.angle(np.exp(1j * np.diff(a)))))


@pytest.mark.parametrize("rx,ry", [(45.0, 4.0), (4.0, 38.0), (30.0, 29.0)])
def test_flattened_ellipses_never_turn_like_sharp_corners(tmp_path, rx, ry):
    """A smooth curve must not be flattened into chords that turn as much as a drawn corner:
    the beam planner would dwell there and burn bright dots into a smooth outline. The engine's
    own contract: no chord turns more than MAX_TURN_DEG."""
    path = write_svg(tmp_path, f'<ellipse cx="50" cy="40" rx="{rx}" ry="{ry}"/>')
    strokes = svg_to_strokes(path, Profile().screen, fit="off")
    assert turn_angles_deg(strokes.points).max() <= MAX_TURN_DEG + 1e-6
    assert render(strokes).plan.corners == 0


def test_circle_lit_points_lie_on_the_radius(tmp_path):
    """An SVG circle of radius r: every lit beam point is within the chord tolerance of r
    (chords lie inside the circle, so r - tol <= |p| <= r)."""
    r, tol = 31.0, 0.02
    path = write_svg(tmp_path, f'<circle cx="50" cy="40" r="{r}"/>')
    strokes = svg_to_strokes(path, Profile().screen, fit="off", tolerance_mm=tol)
    plan = render(strokes).plan
    rad = np.hypot(*plan.points[plan.lit].T)
    assert rad.max() <= r + 1e-9
    assert rad.min() >= r - tol * (1 + 1e-6)


def test_rect_drawn_length_is_its_perimeter(tmp_path):
    path = write_svg(tmp_path, '<rect x="12" y="9" width="61.5" height="37.25"/>')
    strokes = svg_to_strokes(path, Profile().screen, fit="off")
    frame = render(strokes)
    perimeter = 2 * (61.5 + 37.25)
    assert frame.report(Profile())["drawn_length_mm"] == pytest.approx(perimeter, abs=1e-6)
    assert frame.plan.corners == 4


# --- transforms against hand-computed matrices --------------------------------------------------
# SVG 1.1 section 7.4/7.5: translate(tx,ty) = [1 0 tx; 0 1 ty], scale(sx,sy) = diag(sx, sy),
# rotate(a) = [cos a, -sin a; sin a, cos a], skewX(a) = [1 tan a; 0 1],
# matrix(a b c d e f) = [a c e; b d f]; a transform list and nested groups multiply left to
# right (outermost first).

def T(tx, ty):
    return np.array([[1.0, 0, tx], [0, 1.0, ty], [0, 0, 1.0]])


def S(sx, sy):
    return np.diag([sx, sy, 1.0])


def R(deg):
    a = math.radians(deg)
    return np.array([[math.cos(a), -math.sin(a), 0], [math.sin(a), math.cos(a), 0], [0, 0, 1.0]])


def SKX(deg):
    return np.array([[1.0, math.tan(math.radians(deg)), 0], [0, 1.0, 0], [0, 0, 1.0]])


def MAT(a, b, c, d, e, f):
    return np.array([[a, c, e], [b, d, f], [0, 0, 1.0]])


def apply(m, xy):
    xy = np.atleast_2d(np.asarray(xy, dtype=float))
    return xy @ m[:2, :2].T + m[:2, 2]


def to_screen(xy):
    """fit="off" with viewBox 0 0 100 80: 1 unit = 1 mm, page centre at the screen centre,
    SVG +y down flipped to screen +y up."""
    xy = np.atleast_2d(xy)
    return np.column_stack([xy[:, 0] - 50.0, 40.0 - xy[:, 1]])


NESTED = [
    ("translate(5,5) rotate(30)", "scale(2,1)", T(5, 5) @ R(30) @ S(2, 1)),
    ("matrix(0 1 1 0 0 0)", "translate(3 -2)", MAT(0, 1, 1, 0, 0, 0) @ T(3, -2)),
    ("translate(50,40) skewX(20)", "rotate(-15) scale(0.7 1.6)",
     T(50, 40) @ SKX(20) @ R(-15) @ S(0.7, 1.6)),
    ("scale(-1,1) translate(-100,0)", "rotate(90, 20, 30)",
     S(-1, 1) @ T(-100, 0) @ T(20, 30) @ R(90) @ T(-20, -30)),
]


def strokes_by_label(path, tol=0.005):
    s = svg_to_strokes(path, Profile().screen, fit="off", tolerance_mm=tol)
    out = {}
    for i, lab in enumerate(s.labels):
        out.setdefault(lab, []).append(s.stroke(i))
    return out


@pytest.mark.parametrize("outer,inner,m", NESTED, ids=[n[0] for n in NESTED])
def test_nested_transforms_match_hand_matrices(tmp_path, outer, inner, m):
    tol = 0.005
    arc = (10.0, 10.0, 5.0, 3.0, 20.0, 0, 1, 20.0, 15.0)
    body = (f'<g transform="{outer}"><g transform="{inner}">'
            '<polyline id="pl" points="1,2 11,4 7,13 15,15"/>'
            '<circle id="c" cx="12" cy="9" r="6"/>'
            f'<path id="arc" d="M {arc[0]} {arc[1]} A {arc[2]} {arc[3]} {arc[4]} {arc[5]} '
            f'{arc[6]} {arc[7]} {arc[8]}"/>'
            '</g></g>')
    got = strokes_by_label(write_svg(tmp_path, body), tol)

    # Polyline: every vertex is exactly the hand-transformed vertex.
    pl = np.array([(1, 2), (11, 4), (7, 13), (15, 15)], dtype=float)
    np.testing.assert_allclose(got["<polyline id='pl'>"][0], to_screen(apply(m, pl)), atol=1e-9)

    # Circle: after the affine map it is the ellipse {M c + A u : |u| = r}; every drawn vertex,
    # mapped back with the hand-computed inverse, lies on the circle within the chord tolerance
    # (scaled by the largest stretch of the inverse).
    circ = got["<circle id='c'>"][0]
    back = apply(np.linalg.inv(m), circ * [1, -1] + [50, 40])   # screen -> SVG user space
    stretch = 1.0 / np.linalg.svd(m[:2, :2], compute_uv=False).min()
    rad = np.hypot(back[:, 0] - 12, back[:, 1] - 9)
    assert np.abs(rad - 6).max() <= tol * stretch + 1e-9

    # Arc: the curve from the SVG spec's centre parameterisation (F.6.5), mapped by the hand
    # matrix, against the drawn stroke both ways (shapely distances).
    cx, cy, rx, ry, phi, th1, dth = svg_arc_center(*arc)
    dense = to_screen(apply(m, ellipse_point(cx, cy, rx, ry, phi,
                                             np.linspace(th1, th1 + dth, 40001))))
    drawn = got["<path id='arc'>"][0]
    np.testing.assert_allclose(drawn[0], dense[0], atol=1e-9)
    np.testing.assert_allclose(drawn[-1], dense[-1], atol=1e-9)
    d1, d2 = max_gap(dense, drawn)
    assert d1 <= tol * 1.01 + 1e-6, f"arc drawn up to {d1:.4f} mm away from the true curve"
    assert d2 <= tol * 1.01 + 1e-6


# --- clipping -----------------------------------------------------------------------------------

def test_line_crossing_the_edge_is_cut_at_the_edge():
    screen = Profile().screen                         # 100 x 80 mm, edges at x = +-50
    strokes = polylines([(0.0, 0.0), (80.0, 30.0)])
    clipped, n_cut = clip_to_screen(strokes, screen)
    assert n_cut == 1 and clipped.count == 1
    # Hand-computed: the line y = 30/80 x meets x = 50 at y = 18.75.
    np.testing.assert_allclose(clipped.stroke(0)[-1], [50.0, 18.75], atol=1e-12)
    assert clipped.total_length() == pytest.approx(math.hypot(50.0, 18.75), abs=1e-9)
    # shapely as the second reference
    ref = shapely.LineString([(0, 0), (80, 30)]).intersection(shapely.box(-50, -40, 50, 40))
    assert clipped.total_length() == pytest.approx(ref.length, abs=1e-9)


def test_circle_cut_by_the_edge_keeps_its_pieces_whole():
    """A circle r = 45 on a 100 x 80 face crosses y = +-40: two arcs remain (the closed stroke's
    start point is not a cut), total length as shapely's intersection."""
    t = np.linspace(0, 2 * np.pi, 721)
    t[-1] = 0.0
    ring = np.column_stack([45 * np.cos(t), 45 * np.sin(t)])
    clipped, _ = clip_to_screen(polylines(ring), Profile().screen)
    assert clipped.count == 2
    ref = shapely.LineString(ring).intersection(shapely.box(-50, -40, 50, 40))
    assert clipped.total_length() == pytest.approx(ref.length, abs=1e-9)


def test_round_face_clips_to_the_circle():
    prof = Profile(screen=Screen(shape="round", diameter_mm=70.0))
    frame = render(polylines([(-60, 10), (60, 10)], [(0, -50), (0, 50)]), prof)
    pts = frame.plan.points
    assert np.hypot(*pts.T).max() <= 35.0 * (1 + 1e-9)
    # Chord of a circle at distance d from the centre: 2 sqrt(r^2 - d^2) (textbook).
    expected = 2 * math.sqrt(35.0**2 - 10.0**2) + 70.0
    assert frame.plan.drawn_length_mm == pytest.approx(expected, rel=1e-9)


near_disc = st.floats(-80, 80, allow_nan=False, allow_infinity=False)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(lines=st.lists(st.lists(st.tuples(near_disc, near_disc), min_size=2, max_size=6),
                      min_size=1, max_size=4))
def test_round_face_clipped_length_matches_shapely_and_stays_in_the_circle(lines):
    screen = Screen(shape="round", diameter_mm=70.0)
    # shapely's 16384-gon inscribed in the circle: its edge is within dr = r (1 - cos(pi /
    # 16384)) ~ 6e-7 mm of the circle, so a chord's length is within 2 sqrt(2 r dr) ~ 0.013 mm
    # even where it grazes the circle (textbook chord length 2 sqrt(r^2 - d^2))
    disc = shapely.Point(0.0, 0.0).buffer(35.0, quad_segs=4096)
    pairs = [(a, b) for p in lines for a, b in zip(p[:-1], p[1:]) if a != b]
    ref = sum(shapely.LineString([a, b]).intersection(disc).length for a, b in pairs)
    clipped, _ = clip_to_screen(polylines(*lines), screen)
    if clipped.count:
        assert np.hypot(*clipped.points.T).max() <= 35.0 * (1 + 1e-12)
    assert clipped.total_length() == pytest.approx(ref, abs=0.013 * max(len(pairs), 1))


finite = st.floats(-150, 150, allow_nan=False, allow_infinity=False)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(lines=st.lists(st.lists(st.tuples(finite, finite), min_size=2, max_size=6),
                      min_size=1, max_size=5))
def test_spot_never_leaves_the_area_and_clipped_length_matches_shapely(lines):
    strokes = polylines(*lines)
    area = shapely.box(-50, -40, 50, 40)
    # segment by segment, so a stroke that doubles back on itself counts twice, as drawn
    ref = sum(shapely.LineString([a, b]).intersection(area).length
              for p in lines for a, b in zip(p[:-1], p[1:]) if a != b)
    if ref < 1e-6:
        return   # nothing (or only a touch) on the screen: that is a bad-input case
    # in the given order: joining strokes whose ends meet within the chord tolerance would
    # bridge two cut ends on the edge (a few micrometres of added line)
    frame = render(strokes, ordering="input")
    pts = frame.plan.points
    assert (np.abs(pts[:, 0]) <= 50 + 1e-9).all() and (np.abs(pts[:, 1]) <= 40 + 1e-9).all()
    assert frame.plan.drawn_length_mm == pytest.approx(ref, rel=1e-9, abs=1e-7)


def test_a_stroke_drawn_out_and_back_keeps_both_passes():
    """The beam retraces: cut at the edge, both passes are drawn (80 mm), not merged into one
    as a set intersection would."""
    clipped, _ = clip_to_screen(polylines([(0.0, 0.0), (0.0, 41.0), (0.0, 0.0)]),
                                Profile().screen)
    assert clipped.total_length() == pytest.approx(80.0, abs=1e-9)


def test_a_self_crossing_stroke_is_not_split_where_it_crosses_itself():
    # A figure-of-eight-like zigzag crossing itself at (0, 0), leaving the screen on the right.
    zig = [(-30.0, -20.0), (30.0, 20.0), (30.0, -20.0), (-30.0, 20.0), (60.0, 20.0)]
    clipped, _ = clip_to_screen(polylines(zig), Profile().screen)
    assert clipped.count == 1                      # one cut (at x = 50), no cut at (0, 0)
    np.testing.assert_allclose(clipped.stroke(0)[-1], [50.0, 20.0])
    assert clipped.total_length() == pytest.approx(
        2 * math.hypot(60, 40) + 40 + 80, abs=1e-9)   # hand arithmetic, cut at x = 50


def test_a_spike_past_the_edge_never_leaves_a_sliver_outside():
    """A thin spike out of the area (GEOS's whole-line overlay once returned the outside piece
    (0.976, 40) - (1, 41) here): every clipped point is inside."""
    spike = [(0.0, 5.324535016505568e-181), (1.0, 41.0), (0.0, 0.0)]
    clipped, _ = clip_to_screen(polylines(spike), Profile().screen)
    assert np.abs(clipped.points[:, 1]).max() <= 40.0
    frame = render(polylines(spike))
    assert np.abs(frame.plan.points[:, 1]).max() <= 40.0


def test_a_stroke_touching_the_edge_from_outside_leaves_no_dot():
    touching = [(-60.0, 50.0), (-50.0, 40.0), (-60.0, 30.0)]     # touches the corner only
    clipped, n_cut = clip_to_screen(polylines(touching, [(0, 0), (10, 0)]), Profile().screen)
    assert n_cut == 1 and clipped.count == 1
    np.testing.assert_allclose(clipped.stroke(0), [(0, 0), (10, 0)])

"""Built-in shapes and stroke text: grid positions, crosshair, circle, clock hand angles against
the textbook clock-angle formulas, text height, alignment and line stacking."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import shapes
from render_helpers import make_profile, render, run_cli
from shapes.basic import grid_positions, grid_step
from vectorgen.errors import VectorgenError
from vectorgen.profile import Profile

SCREEN = Profile().screen


# --- grid, crosshair, circle --------------------------------------------------------------------

@pytest.mark.parametrize("step", [10.0, 7.5, 25.0])
def test_grid_lines_sit_on_multiples_of_the_step_within_ninety_percent_of_the_area(step):
    g = shapes.grid(SCREEN, step)
    xs, ys = grid_positions(SCREEN, step)
    # multiples of the step through the centre, every one within 90 % of the 100 x 80 mm area
    # (45 and 36 mm from the centre), none missing
    assert np.allclose(xs / step, np.round(xs / step)) and 0.0 in xs and 0.0 in ys
    assert xs.max() <= 45 < xs.max() + step and ys.max() <= 36 < ys.max() + step
    np.testing.assert_array_equal(xs, -xs[::-1])
    assert g.count == len(xs) + len(ys)             # lines only: no dots at the crossings
    frame = render(g)
    lit = frame.plan.points[frame.plan.lit]
    on_x = np.abs(lit[:, 0] / step - np.round(lit[:, 0] / step)) < 1e-9
    on_y = np.abs(lit[:, 1] / step - np.round(lit[:, 1] / step)) < 1e-9
    assert (on_x | on_y).all(), "a lit point off every grid line"
    # each line runs between the outermost lines across it, so the grid closes in a frame:
    # for the 10 mm grid 9 x 60 mm + 7 x 80 mm (worked by hand)
    assert frame.plan.drawn_length_mm == pytest.approx(
        len(xs) * 2 * ys.max() + len(ys) * 2 * xs.max(), abs=1e-6)
    if step == 10.0:
        assert frame.plan.drawn_length_mm == pytest.approx(9 * 60 + 7 * 80, abs=1e-6)
    # every crossing is drawn through: a lit sample lies within half the point spacing of it
    gx, gy = np.meshgrid(xs, ys)
    crossings = np.column_stack([gx.ravel(), gy.ravel()])
    nearest = np.hypot(*(crossings[:, None, :] - lit[None, :, :]).transpose(2, 0, 1)).min(axis=1)
    spacing = frame.report(Profile())["point_spacing_mm"]
    assert nearest.max() <= spacing / 2 + 1e-9


def test_the_default_grid_step_is_the_smallest_one_two_five_step_with_at_most_ten_cells():
    """The 1-2-5 series of round steps (common practice, no source): the default step gives at
    most 10 cells across the wider side of the grid's area (90 % of the usable area), and the
    next smaller step of the series would give more."""
    series = np.array([m * 10.0 ** k for k in range(-1, 4) for m in (1, 2, 5)])
    for size in ((100.0, 80.0), (140.0, 105.0), (60.0, 200.0), (33.0, 33.0), (1000.0, 500.0)):
        screen = make_profile(screen={"width_mm": size[0], "height_mm": size[1]}).screen
        step = grid_step(screen)
        span = 0.9 * max(size)
        assert step in series and span / step <= 10 + 1e-9
        assert span / series[series < step].max() > 10
    assert grid_step(SCREEN) == 10.0           # the built-in screen: the command line's 10 mm
    np.testing.assert_array_equal(shapes.grid(SCREEN).points, shapes.grid(SCREEN, 10.0).points)


def test_grid_on_a_round_face_is_chords_of_a_circle_of_ninety_percent_of_its_radius():
    prof = make_profile(screen={"shape": "round", "diameter_mm": 70.0})
    frame = render(shapes.grid(prof.screen, 10.0), prof)
    r = 0.9 * 35.0
    assert np.hypot(*frame.plan.points.T).max() <= r * (1 + 1e-9)
    assert frame.report(prof)["clipped_strokes"] == 0           # inside: nothing cut at the edge
    d = np.arange(-30.0, 31.0, 10.0)
    # chord at distance d from the centre of a circle of radius r: 2 sqrt(r^2 - d^2) (textbook),
    # on both axes
    expected = 2 * np.sum(2 * np.sqrt(r * r - d * d))
    assert frame.plan.drawn_length_mm == pytest.approx(expected, rel=1e-9)


def test_crosshair():
    c = shapes.crosshair(SCREEN)
    assert c.count == 3
    h, v, dot = (c.stroke(i) for i in range(3))
    assert np.all(h[:, 1] == 0) and np.all(v[:, 0] == 0)
    assert h[:, 0].min() == -h[:, 0].max() and v[:, 1].min() == -v[:, 1].max()
    np.testing.assert_array_equal(dot, [[0.0, 0.0]])


@pytest.mark.parametrize("radius,tol", [(None, 0.02), (12.5, 0.005)])
def test_circle_shape(radius, tol):
    c = shapes.circle(SCREEN, radius, tolerance_mm=tol)
    r = 0.9 * 40 if radius is None else radius       # default: 90 % of the largest that fits
    rad = np.hypot(*c.points.T)
    assert rad.max() == pytest.approx(r, abs=1e-12) and rad.min() >= r - 1e-12
    # the chords stay within the tolerance: sagitta r (1 - cos(step / 2)) (textbook)
    ang = np.diff(np.unwrap(np.arctan2(c.points[:, 1], c.points[:, 0])))
    assert (r * (1 - np.cos(np.abs(ang) / 2))).max() <= tol
    np.testing.assert_array_equal(c.points[0], c.points[-1])


# --- clock --------------------------------------------------------------------------------------

@settings(max_examples=200, deadline=None)
@given(h=st.integers(0, 23), m=st.integers(0, 59), s=st.integers(0, 59))
def test_hand_angles_match_the_clock_angle_formulas(h, m, s):
    """Textbook clock-angle formulas, clockwise from 12: hour hand 30 H + 0.5 M (+ S / 120),
    minute hand 6 M (+ S / 10), second hand 6 S."""
    a = shapes.hand_angles(h, m, s)
    assert a["hour"] == pytest.approx((30 * (h % 12) + 0.5 * m + s / 120) % 360, abs=1e-9)
    assert a["minute"] == pytest.approx((6 * m + s / 10) % 360, abs=1e-9)
    assert a["second"] == pytest.approx(6 * s, abs=1e-9)


def clockwise_from_12(xy):
    return math.degrees(math.atan2(xy[0], xy[1])) % 360


def same_angle(a, b, tol=1e-9):
    return abs((a - b + 180.0) % 360.0 - 180.0) <= tol


@pytest.mark.parametrize("h,m,s,hour,minute", [
    (3, 0, None, 90.0, 0.0), (6, 30, None, 195.0, 180.0), (9, 45, None, 292.5, 270.0),
    (12, 0, None, 0.0, 0.0), (10, 10, None, 305.0, 60.0), (15, 20, 30, 100.25, 123.0),
])
def test_drawn_hands_point_at_the_time(h, m, s, hour, minute):
    c = shapes.clock_face(SCREEN, h, m, s)
    hands = {lab: c.stroke(i) for i, lab in enumerate(c.labels) if lab.endswith("hand")}
    R = 0.9 * 40
    for name, angle, length in (("hour hand", hour, 0.5 * R), ("minute hand", minute, 0.8 * R)):
        start, tip = hands[name]
        np.testing.assert_allclose(start, [0, 0], atol=1e-12)
        assert same_angle(clockwise_from_12(tip), angle)
        assert np.hypot(*tip) == pytest.approx(length)
    if s is not None:
        tail, tip = hands["second hand"]
        assert same_angle(clockwise_from_12(tip), 6 * s)
        assert same_angle(clockwise_from_12(tail), 6 * s + 180)
    else:
        assert "second hand" not in hands


def test_clock_ticks_and_numerals():
    c = shapes.clock_face(SCREEN, 10, 10, radius=30.0)
    ticks = [c.stroke(i) for i, lab in enumerate(c.labels) if lab.startswith("clock tick")]
    assert len(ticks) == 60
    angles = sorted(clockwise_from_12(t[1]) for t in ticks)
    np.testing.assert_allclose(np.diff(angles), 6.0, atol=1e-9)      # 360 / 60
    lengths = np.array([np.hypot(*(t[1] - t[0])) for t in ticks])
    assert (lengths[::5] > lengths[1]).all()                          # hour ticks are longer
    assert all(np.hypot(*t[1]) == pytest.approx(30.0) for t in ticks)
    # "12" is drawn at the top, "6" at the bottom
    digits = {}
    for i, lab in enumerate(c.labels):
        if lab.startswith("text"):
            digits.setdefault(lab.split()[-1], []).append(c.stroke(i))
    top = np.vstack(digits["'2'"] + digits["'1'"])
    assert top[:, 1].min() > 0 and top[:, 1].max() < 30
    assert np.vstack(digits["'6'"])[:, 1].max() < 0


def test_cli_clock_time(tmp_path):
    out = run_cli("render", "--shape", "clock", "--time", "04:20:15", "-o", tmp_path / "c.wav",
                  "--report", tmp_path / "c.json", "-q")
    assert out.returncode == 0, out.stderr
    rep = json.loads((tmp_path / "c.json").read_text())
    # 60 ticks + numerals + three hands
    assert rep["strokes"] > 63


# --- text ---------------------------------------------------------------------------------------

def ink(strokes):
    return strokes.bounds()


def line_bounds(strokes, row):
    pts = [strokes.stroke(i) for i, lab in enumerate(strokes.labels)
           if lab.startswith(f"text line {row} ")]
    p = np.vstack(pts)
    return p[:, 0].min(), p[:, 1].min(), p[:, 0].max(), p[:, 1].max()


@pytest.mark.parametrize("height", [3.0, 8.0, 20.0])
def test_cap_height(height):
    """A capital H spans exactly the cap height (typography: H has no overshoot, no descender)."""
    x0, y0, x1, y1 = ink(shapes.text_strokes("H", height, center=(7.0, -4.0)))
    assert y1 - y0 == pytest.approx(height, abs=1e-9)
    assert (y0 + y1) / 2 == pytest.approx(-4.0, abs=1e-9)              # centred on `center`
    assert (x0 + x1) / 2 == pytest.approx(7.0, abs=1e-9)


def test_text_scales_with_height():
    a = shapes.text_strokes("Vector 42", 5.0)
    b = shapes.text_strokes("Vector 42", 10.0)
    np.testing.assert_allclose(b.points, 2 * a.points, atol=1e-9)
    assert b.total_length() == pytest.approx(2 * a.total_length())


def test_lines_stack_downwards_evenly():
    t = shapes.text_strokes("HH\nHH\nHH", 6.0)
    tops = [line_bounds(t, r)[3] for r in (1, 2, 3)]
    bases = [line_bounds(t, r)[1] for r in (1, 2, 3)]
    assert tops[0] > tops[1] > tops[2]                  # first line on top
    pitch = np.diff(tops)
    assert pitch[0] == pytest.approx(pitch[1]) and -pitch[0] > 6.0   # even, no overlap
    assert bases[0] > tops[1]
    assert (tops[0] + bases[2]) / 2 == pytest.approx(0.0, abs=1e-9)  # the block is centred


def test_escaped_newline_starts_a_line():
    assert shapes.text_strokes("AB\\nC", 5.0).bounds() == shapes.text_strokes("AB\nC", 5.0).bounds()


@pytest.mark.parametrize("align", ["left", "center", "right"])
def test_alignment(align):
    t = shapes.text_strokes("HHHHHH\nH", 5.0, align=align, center=(3.0, 0.0))
    long_, short = line_bounds(t, 1), line_bounds(t, 2)
    if align == "left":
        assert short[0] == pytest.approx(long_[0])
    elif align == "right":
        assert short[2] == pytest.approx(long_[2])
    else:
        assert (short[0] + short[2]) / 2 == pytest.approx((long_[0] + long_[2]) / 2)
    # the block as a whole stays centred on `center`
    assert (long_[0] + long_[2]) / 2 == pytest.approx(3.0, abs=1e-9)


def test_every_printable_ascii_character_draws():
    chars = "".join(chr(c) for c in range(0x21, 0x7F))
    t = shapes.text_strokes(chars, 2.0)
    drawn = {lab.split(" ", 5)[-1] for lab in t.labels}
    assert drawn == {repr(c) for c in chars}
    # a space draws nothing but takes room
    assert shapes.text_strokes("H H", 5.0).bounds()[2] - shapes.text_strokes("H H", 5.0).bounds()[0] \
        > 2 * (shapes.text_strokes("H", 5.0).bounds()[2] - shapes.text_strokes("H", 5.0).bounds()[0])


@pytest.mark.parametrize("text", ["caf\u00e9", "tab\there", "\u2603"])
def test_non_ascii_is_refused(text):
    with pytest.raises(VectorgenError, match="ASCII"):
        shapes.text_strokes(text, 5.0)


def test_cli_text(tmp_path):
    out = run_cli("render", "--text", "TOP\\nlow", "--text-height", "9", "--align", "left",
                  "--channels", "3", "-o", tmp_path / "t.wav", "--report", tmp_path / "t.json")
    assert out.returncode == 0, out.stderr
    rep = json.loads((tmp_path / "t.json").read_text())
    expected = shapes.text_strokes("TOP\nlow", 9.0, "left").total_length()
    assert rep["drawn_length_mm"] == pytest.approx(expected, abs=1e-5)

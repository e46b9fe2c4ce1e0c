"""Scene scripts: the clock's hands, the update timing of files, the example scenes, the
helpers and the one-line errors for broken scripts."""

from __future__ import annotations

import datetime
import hashlib
import math
import runpy
import textwrap
from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest
from scipy.io import wavfile

from render_helpers import REPO, make_profile, run_cli
from vectorgen.deflection import DeflectionModel
from vectorgen.errors import VectorgenError
from vectorgen.profile import Profile
from vectorgen.pipeline import Renderer, Settings
from vectorgen.scene import (FixedSchedule, WallClockSchedule, as_strokes, hms, load_scene,
                             move, polyline, rotate, scaled, scene_timeline, strokes)
from vectorgen.channels import ChannelMap

CLOCK = REPO / "examples" / "clock_scene.py"
CUBE = REPO / "examples" / "spinning_cube.py"


def bench_profile():
    """A tube with rotated, unequal gains, an offset and pincushion: the hands must still
    point the right way on the face once the correction is undone by the forward model."""
    return make_profile(
        screen={"width_mm": 100.0, "height_mm": 80.0},
        deflection={"matrix_mm": [[62.0, 4.0], [-3.0, 55.0]], "offset_mm": [0.6, -0.4],
                    "k_radial": 0.03, "k_x": 0.01, "k_y": -0.01, "calibrated": True})


def hand_angle(frame, profile, label: str) -> float:
    """Clockwise angle from 12 o'clock (degrees) of a hand's tip, measured on the face from
    the output samples: channels -> drive -> mm through the profile's forward model."""
    drive, _z = ChannelMap(profile.output, frame.signal.shape[1]).from_channels(frame.signal)
    mm = DeflectionModel.from_profile(profile).drive_to_mm(drive)
    idx = frame.plan.strokes.labels.index(label)
    pts = mm[frame.plan.stroke == idx]
    tip = pts[np.argmax(np.hypot(pts[:, 0], pts[:, 1]))]
    return math.degrees(math.atan2(tip[0], tip[1])) % 360.0


def angle_diff(a: float, b: float) -> float:
    return (b - a + 180.0) % 360.0 - 180.0


def write_scene(folder, body: str, name: str = "scene.py") -> str:
    path = Path(folder) / name
    path.write_text(textwrap.dedent(body), encoding="utf-8")
    return str(path)


# --- the clock -----------------------------------------------------------------------------------

def test_clock_hands_turn_by_the_right_angle_between_two_times():
    prof = bench_profile()
    # in the given order: the hands meet at the centre, and joining strokes whose ends meet
    # would draw both as one stroke (the test finds each hand by its label)
    renderer = Renderer(prof, Settings(rate=48000, ordering="input"))
    t1 = 10 * 3600 + 10 * 60            # 10:10:00
    t2 = 10 * 3600 + 35 * 60            # 10:35:00, 25 minutes later
    f1 = scene_timeline(str(CLOCK), renderer, None, start=t1)[0][0]
    f2 = scene_timeline(str(CLOCK), renderer, None, start=t2)[0][0]
    # Common practice, no source: the minute hand turns 360 degrees an hour (6 per minute),
    # the hour hand 360 degrees in 12 hours (0.5 per minute), both clockwise from 12.
    assert angle_diff(hand_angle(f1, prof, "minute hand"),
                      hand_angle(f2, prof, "minute hand")) == pytest.approx(25 * 6.0, abs=1e-3)
    assert angle_diff(hand_angle(f1, prof, "hour hand"),
                      hand_angle(f2, prof, "hour hand")) == pytest.approx(25 * 0.5, abs=1e-3)
    # and where they point: at 10:10 the minute hand is on the 2 (60 degrees) and the hour
    # hand a sixth of the way from the 10 to the 11 (300 + 5 degrees)
    assert hand_angle(f1, prof, "minute hand") == pytest.approx(60.0, abs=1e-3)
    assert hand_angle(f1, prof, "hour hand") == pytest.approx(305.0, abs=1e-3)


def test_clock_file_advances_the_second_hand_six_degrees_per_second_of_file():
    prof = Profile()
    renderer = Renderer(prof, Settings(rate=48000))
    parts = scene_timeline(str(CLOCK), renderer, 5.0)
    start = 10 * 3600 + 9 * 60 + 52          # the example's START_TIME "10:09:52"
    pos = 0
    seen = []
    for frame, reps in parts:
        # the frame shows the latest whole second that had begun when it went on
        second = math.floor(pos / 48000)
        expected = ((start + second) % 60) * 6.0
        assert hand_angle(frame, prof, "second hand") == pytest.approx(expected, abs=1e-3)
        seen.append(second)
        pos += frame.samples * reps
    assert sorted(set(seen)) == [0, 1, 2, 3, 4]
    assert pos >= 5 * 48000 and pos - parts[-1][0].samples < 5 * 48000


def test_rendering_a_scene_file_is_reproducible_and_equals_the_timeline(tmp_path):
    a, b = tmp_path / "a.wav", tmp_path / "b.wav"
    for out in (a, b):
        r = run_cli("render", str(CLOCK), "--seconds", "3", "-o", str(out), "--channels", "3")
        assert r.returncode == 0, r.stderr
    assert hashlib.sha256(a.read_bytes()).digest() == hashlib.sha256(b.read_bytes()).digest()
    rate, data = wavfile.read(a)                      # scipy's reader, not ours
    assert rate == 48000 and data.dtype == np.float32 and data.shape[1] == 3
    renderer = Renderer(Profile(), Settings(rate=48000, channels=3))
    parts = scene_timeline(str(CLOCK), renderer, 3.0)
    np.testing.assert_array_equal(data, np.concatenate([np.tile(f.signal, (n, 1))
                                                        for f, n in parts]))


def test_each_update_goes_on_at_the_first_boundary_after_its_time(tmp_path):
    # The drawing encodes its update number k as the x position of a dot, and the frame
    # length changes with k, so the check sees both which update and where it starts.
    path = write_scene(tmp_path, """
        UPDATE_HZ = 7
        START_TIME = 0

        def draw(t, screen):
            k = round(t * 7)
            return [[(k, -20.0)], [(-30.0, 0.0), (-30.0 + 3 * (k % 5) + 1, 25.0)]]
        """)
    renderer = Renderer(Profile(), Settings(rate=48000))
    parts = scene_timeline(path, renderer, 2.0)
    pos, last_k = 0, -1
    for frame, reps in parts:
        dot = frame.plan.strokes.labels.index("scene polyline")   # first polyline: the dot
        k = int(round(frame.plan.points[frame.plan.stroke == dot][0, 0]))
        # the latest update whose time k / 7 s had come at this boundary (exact fractions)
        want = max(j for j in range(100) if Fraction(j, 7) * 48000 <= pos)
        assert k == want and k > last_k
        last_k = k
        pos += frame.samples * reps
    assert last_k == 13                                 # 2 s at 7 Hz: updates 0..13
    assert pos >= 96000


def test_scene_without_seconds_gives_one_frame_at_start_time(tmp_path):
    path = write_scene(tmp_path, """
        START_TIME = "01:02:03.5"

        def draw(t):
            return [(t - 3723.5, 0.0), (10.0, 10.0)]
        """)
    parts = scene_timeline(path, Renderer(Profile(), Settings()), None)
    assert len(parts) == 1 and parts[0][1] == 1
    assert parts[0][0].plan.points[:, 0].min() == pytest.approx(0.0, abs=1e-9)


# --- the cube ------------------------------------------------------------------------------------

def test_cube_looks_the_same_after_a_quarter_turn():
    mod = runpy.run_path(str(CUBE))
    screen = Profile().screen

    def segments(t):
        segs = set()
        for line in mod["cube_edges"](screen, t):
            for p, q in zip(line[:-1], line[1:]):
                a, b = tuple(np.round(p, 6)), tuple(np.round(q, 6))
                segs.add((min(a, b), max(a, b)))
        return segs

    quarter = 90.0 / mod["SPIN_DEG_PER_S"]
    # a cube is symmetric under a quarter turn about an axis through two face centres
    assert segments(0.37) == segments(0.37 + quarter)
    assert segments(0.37) != segments(0.37 + quarter / 3)
    assert len(segments(0.37)) == 12


def test_cube_renders_to_file_reproducibly(tmp_path):
    outs = []
    for name in ("a.wav", "b.wav"):
        r = run_cli("render", str(CUBE), "--seconds", "0.5", "-o", str(tmp_path / name))
        assert r.returncode == 0, r.stderr
        outs.append((tmp_path / name).read_bytes())
    assert outs[0] == outs[1]
    _rate, data = wavfile.read(tmp_path / "a.wav")
    assert len(data) >= 24000


# --- schedules -----------------------------------------------------------------------------------

def test_fixed_schedule_due_samples_are_exact_ceilings():
    s = FixedSchedule(44100, 3.0, start=10.0)
    assert [s.due(k) for k in range(4)] == [0, 14700, 29400, 44100]
    s = FixedSchedule(48000, 7.0)
    assert [s.due(k) for k in (1, 2, 7)] == [math.ceil(48000 / 7), math.ceil(96000 / 7), 48000]
    assert s.time(14) == pytest.approx(2.0)


def test_wall_clock_updates_fall_on_whole_seconds():
    origin = datetime.datetime(2026, 3, 4, 5, 6, 7, 250000).timestamp()
    s = WallClockSchedule(48000, 1.0, origin)
    assert s.due(0) == 0
    assert s.due(1) == 36000                         # 0.75 s to 05:06:08.000
    assert s.due(2) == 36000 + 48000
    # the scene time is the local time of day (datetime's arithmetic as the reference)
    assert s.time(0) == pytest.approx(5 * 3600 + 6 * 60 + 7.25, abs=1e-6)
    assert s.time(3) == pytest.approx(5 * 3600 + 6 * 60 + 10, abs=1e-6)


# --- helpers -------------------------------------------------------------------------------------

def test_helpers_build_strokes():
    sq = polyline([(0, 0), (10, 0), (10, 10), (0, 10)], closed=True)
    assert sq.count == 1 and len(sq.points) == 5 and sq.total_length() == pytest.approx(40.0)
    r = rotate(polyline([(1.0, 0.0), (2.0, 0.0)]), 90.0, center=(1.0, 0.0))
    np.testing.assert_allclose(r.points, [[1.0, 0.0], [1.0, 1.0]], atol=1e-12)
    m = move(scaled(polyline([(1.0, 1.0), (2.0, 2.0)]), 2.0), 1.0, -1.0)
    np.testing.assert_allclose(m.points, [[3.0, 1.0], [5.0, 3.0]])
    both = strokes(sq, [(0, 0), (5, 5)], [[(1, 1)], np.array([[2.0, 2.0], [3.0, 3.0]])])
    assert both.count == 4
    assert hms(3661.5) == (1, 1, 1.5) and hms(86400 + 60) == (0, 1, 0.0)
    with pytest.raises(VectorgenError, match="must return"):
        as_strokes({"x": 1})


# --- broken scripts ------------------------------------------------------------------------------

@pytest.mark.parametrize("body, pattern", [
    ("def draw(t, screen):\n    return [(0, 0), (1, 1)]\nx = (\n",
     r"scene script .*broken\.py:3: SyntaxError"),
    ("def draw(t, screen):\n    a = 1\n    return a / 0\n",
     r"scene script .*broken\.py:3: ZeroDivisionError: division by zero \(in draw\(t=0\.000\)\)"),
    ("import no_such_module_here\n", r"broken\.py:1: ModuleNotFoundError"),
    ("x = 1\n", r"must define draw\(t, screen\)"),
    ("UPDATE_HZ = -2\ndef draw(t, s):\n    return [(0, 0)]\n", r"UPDATE_HZ must be a number"),
    ("START_TIME = '25:00'\ndef draw(t, s):\n    return [(0, 0)]\n", r"START_TIME must be"),
    ("LIVE_CLOCK = 'yes'\ndef draw(t, s):\n    return [(0, 0)]\n", r"LIVE_CLOCK must be"),
    ("def draw(t, s):\n    return 42\n", r"must return Strokes"),
    ("def draw(t, s):\n    return []\n", r"returned nothing to draw"),
    ("def draw(t, s):\n    return [(900, 0), (950, 0)]\n",
     r"scene .*broken\.py at t=0\.000: nothing to draw: .*outside"),
])
def test_broken_scripts_give_one_line_and_status_2(tmp_path, body, pattern):
    path = write_scene(tmp_path, body, "broken.py")
    r = run_cli("render", path, "--seconds", "1", "-o", str(tmp_path / "out.wav"))
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1, r.stderr
    assert "Traceback" not in r.stderr
    import re

    assert re.search(pattern, lines[0]), lines[0]
    assert not (tmp_path / "out.wav").exists()


def test_missing_scene_script(tmp_path):
    with pytest.raises(VectorgenError, match="scene script not found"):
        load_scene(str(tmp_path / "nope.py"))

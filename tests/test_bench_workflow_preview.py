"""Scenes and the clock at a chosen time: `preview --time`, a range of time exposed into one
picture, and the clock shape ticking over a duration.

References: the README's scene rule (update k at scene time START + k / UPDATE_HZ, due at
sample ceil(k rate / UPDATE_HZ), on screen from the first frame boundary at or after it), worked
out here frame by frame; a clock's second hand turns 6 degrees a second, clockwise from 12
(common practice, no source); PNG pictures decoded with Pillow, located by the usable area's
own outline (test_preview.to_px), so the tests do not borrow the engine's layout arithmetic.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from PIL import Image

from test_preview import to_px
from vectorgen.cli import build_parser, main

SCENE = '''UPDATE_HZ = 1
def draw(t):
    # a level line 40 mm long at y = 5 t mm
    return [(-20.0, 5.0 * t), (20.0, 5.0 * t)]
'''


def lit_rows_at_centre(png) -> np.ndarray:
    """y (mm) of the lit pixels down the picture's centre column."""
    with Image.open(png) as im:
        img = np.asarray(im.convert("RGB"))
    ys = np.linspace(-39.0, 39.0, 781)
    r, c = to_px(img, np.zeros_like(ys), ys)
    return ys[img[r, c, 1] > 60]


@pytest.fixture
def scene(tmp_path):
    path = tmp_path / "level.py"
    path.write_text(SCENE)
    return path


def test_preview_shows_a_scene_at_the_time_asked(tmp_path, scene, capsys):
    assert main(["preview", str(scene), "--time", "00:00:03", "--channels", "3", "-o",
                 str(tmp_path / "t3.png"), "-q"]) == 0
    ys = lit_rows_at_centre(tmp_path / "t3.png")
    assert ys.size and np.all(np.abs(ys - 15.0) < 1.0)        # draw(3): y = 15 mm
    assert main(["preview", str(scene), "--time", "2.5", "--channels", "3", "-o",
                 str(tmp_path / "t25.png"), "-q"]) == 0
    assert np.all(np.abs(lit_rows_at_centre(tmp_path / "t25.png") - 12.5) < 1.0)
    # control: without --time the scene starts at its START_TIME (0): the line at y = 0
    assert main(["preview", str(scene), "--channels", "3", "-o", str(tmp_path / "t0.png"),
                 "-q"]) == 0
    assert np.all(np.abs(lit_rows_at_centre(tmp_path / "t0.png")) < 1.0)


def test_a_range_of_time_exposes_every_update_in_it(tmp_path, scene, capsys):
    assert main(["preview", str(scene), "--time", "1..4", "--channels", "3", "-o",
                 str(tmp_path / "r.png")]) == 0
    assert "3 frames over 3 s exposed together" in capsys.readouterr().out
    ys = lit_rows_at_centre(tmp_path / "r.png")
    # updates at t = 1, 2, 3 (the range ends before t = 4): lines at 5, 10 and 15 mm
    for y in (5.0, 10.0, 15.0):
        assert np.any(np.abs(ys - y) < 1.0), y
    assert not np.any(np.abs(ys - 20.0) < 1.0) and not np.any(np.abs(ys) < 1.0)


def test_bad_times_are_one_line_errors(tmp_path, scene, capsys):
    for bad, words in (("4..1", "must end after it starts"), ("noon", "HH:MM"),
                       ("1..2", "a range applies to a scene script or --shape clock")):
        src = ["--shape", "grid"] if bad == "1..2" else [str(scene)]
        assert main(["preview", *src, "--time", bad, "-o", str(tmp_path / "x.png")]) == 2
        err = capsys.readouterr().err
        assert words in err and len(err.strip().splitlines()) == 1, err
    assert not (tmp_path / "x.png").exists()


def second_hand_deg(frame, radius_mm: float) -> float:
    """Clockwise angle from 12 o'clock of the lit points between 0.81 and 0.855 of the clock's
    radius: only the second hand reaches there (the minute hand ends at 0.80, the ticks start
    at 0.86, the numerals lie within 0.77)."""
    pts = frame.plan.points[frame.plan.lit]
    r = np.hypot(pts[:, 0], pts[:, 1])
    sel = pts[(r > 0.81 * radius_mm) & (r < 0.855 * radius_mm)]
    assert len(sel), "no second hand"
    ang = np.degrees(np.arctan2(sel[:, 0], sel[:, 1])) % 360.0
    return float(np.median(ang))


def test_the_clock_shape_ticks_over_a_duration():
    from vectorgen.cli.render import load_setup, timed_timeline

    args = build_parser().parse_args(["render", "--shape", "clock", "--time", "10:10:58",
                                      "-o", "unused.wav", "--seconds", "3", "--channels", "3"])
    profile, renderer = load_setup(args)
    parts = list(timed_timeline(args, profile, renderer, 3.0))
    radius = 0.9 * min(profile.screen.half_extent)
    # three updates: 10:10:58, 10:10:59, 10:11:00: the hand at 348, 354 and 0 deg
    angles = [second_hand_deg(f, radius) for f, _n in parts]
    assert len(parts) == 3
    for got, want in zip(angles, (348.0, 354.0, 0.0)):
        assert min(abs(got - want), 360 - abs(got - want)) < 1.5
    # the scene rule, frame by frame: update k is due at sample 48000 k and goes on at the
    # first frame boundary at or after it; the frames fill the 3 s
    pos = 0
    for k, (frame, n) in enumerate(parts):
        if k:
            assert pos >= 48000 * k and pos - 48000 * k < parts[k - 1][0].samples
        pos += n * frame.samples
    assert 3 * 48000 <= pos < 3 * 48000 + parts[-1][0].samples
    # control: without a duration the clock is one still frame, no second hand unless given
    still = build_parser().parse_args(["preview", "--shape", "clock", "-o", "unused.png"])
    profile, renderer = load_setup(still)
    assert len(list(timed_timeline(still, profile, renderer, None))) == 1


def test_a_scene_script_starts_at_the_time_asked_in_a_timeline(tmp_path, scene):
    from vectorgen.cli.render import load_setup, time_window, timed_timeline

    args = build_parser().parse_args(["render", str(scene), "--time", "00:00:02..00:00:04",
                                      "-o", str(tmp_path / "s.wav"), "--channels", "3"])
    start, seconds = time_window(args, args.seconds)
    assert (start, seconds) == (2.0, 2.0)
    profile, renderer = load_setup(args)
    parts = list(timed_timeline(args, profile, renderer, seconds))
    ys = [float(np.median(f.plan.points[f.plan.lit][:, 1])) for f, _n in parts]
    assert ys == pytest.approx([10.0, 15.0], abs=1e-6)          # draw(2), draw(3)


def test_render_of_the_clock_for_several_seconds_ticks(tmp_path):
    from scipy.io import wavfile

    out, one = tmp_path / "clock.wav", tmp_path / "one.wav"
    assert main(["render", "--shape", "clock", "--time", "10:10:58", "--seconds", "3",
                 "--channels", "3", "-o", str(out), "-q"]) == 0
    assert main(["render", "--shape", "clock", "--time", "10:10:58", "--channels", "3", "-o",
                 str(one), "-q"]) == 0
    rate, sig = wavfile.read(out)
    _, frame = wavfile.read(one)
    n = len(frame)
    assert np.array_equal(sig[:n], frame)           # it starts at 10:10:58 ...
    assert not np.array_equal(sig[-n:], frame)      # ... and has moved on by the end
    assert math.isclose(len(sig) / rate, 3.0, rel_tol=0.02)

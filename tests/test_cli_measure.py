"""The measuring commands: `fit-response`, `pattern step`, `pattern ztiming`, `reach`, and the
checks `loopback` makes before and after it measures (its JACK runs: test_cli_measure_loopback).

Outside references, each named beside its check:
* `scipy.signal.lsim` of the textbook first-order lag 1 / (tau s + 1) and second-order system
  wn^2 / (s^2 + 2 zeta wn s + wn^2), driven by a square wave: the scope captures.
* `scipy.io.wavfile.read` and `tomllib` (Python's standard TOML reader): what the commands
  wrote, read back by readers that are not the project's.
* The coil law V = R i + L di/dt (any circuits textbook): for i = I cos(w t) the peak voltage is
  I |R + j w L|; worked by hand in the test.
* `scipy.signal.butter(1, fc, 'high')` + `lfilter`: a model of an AC-coupled loop, standing in
  for the interface where the loopback measurement is replaced.
* The profile's [output] keys as documented (order = the signal on each channel, invert =
  negated, z_blank_level = Z where the beam is off): the channel layout of the step pattern.
"""

from __future__ import annotations

import json
import math
import re
import tomllib
from pathlib import Path

import numpy as np
import pytest

from render_helpers import REPO, run_cli
from vectorgen.cli import main

RATE = 48000


# --- plumbing -----------------------------------------------------------------------------------

def cli(capsys, *args):
    """`vectorgen ARGS` in this process (faster than a child): (exit status, stdout, stderr)."""
    code = main([str(a) for a in args])
    out = capsys.readouterr()
    return code, out.out, out.err


def files_in(folder: Path) -> dict:
    return {p.name: p.read_bytes() for p in folder.iterdir() if p.is_file()}


def check_refused(code, err, folder: Path, before: dict, what: str = ""):
    """Exit 2, one line on stderr in the tool's words, nothing written or changed."""
    __tracebackhide__ = True
    lines = err.strip().splitlines()
    assert code == 2, f"{what}: exit {code}, stderr {err!r}"
    assert "Traceback" not in err
    assert len(lines) == 1, f"{what}: expected one stderr line, got {lines!r}"
    assert lines[0].startswith("vectorgen: error: "), lines[0]
    assert "VECTORGEN_DEBUG" not in lines[0], lines[0]       # foreseen, not the catch-all
    changed = set(files_in(folder).items()) ^ set(before.items())
    assert not changed, f"{what}: files changed: {sorted(name for name, _ in changed)}"


def write_toml(path: Path, text: str) -> Path:
    path.write_text(text, encoding="utf-8")
    return path


def square_capture(path: Path, num, den, dt: float, half_s: float, halves: int, lead_s: float,
                   noise: float = 0.005, volts: float = 0.4, seed: int = 0) -> Path:
    """A scope capture of the system num/den (scipy.signal.lsim) driven by a square wave that
    starts settled on its low level: time_s, sense_V, with white noise of `noise` of the jump."""
    from scipy.signal import lsim

    n = int(round((lead_s + halves * half_s) / dt))
    t = np.arange(n) * dt
    high = (t >= lead_s) & (np.floor((t - lead_s) / half_s) % 2 == 0)
    _, y, _ = lsim((num, den), high.astype(float), t)
    y = volts * (y - 0.5) + noise * volts * np.random.default_rng(seed).standard_normal(n)
    with open(path, "w") as fh:
        fh.write("time_s,sense_V\n")
        np.savetxt(fh, np.column_stack([t, y]), fmt="%.9g", delimiter=",")
    return path


def first_order_capture(path, tau_s, seed=0):
    # 10 samples per tenth of tau or better, 16 tau on each level, 4 edges
    return square_capture(path, [1.0], [tau_s, 1.0], tau_s / 30, 16 * tau_s, 4, 3 * tau_s,
                          seed=seed)


def second_order_capture(path, fn_hz, zeta, seed=1):
    wn = 2 * math.pi * fn_hz
    # envelope time constant 1 / (zeta wn) = 99.5 us: 10 of them on each level
    return square_capture(path, [wn * wn], [1.0, 2 * zeta * wn, wn * wn], 2e-6, 1e-3, 4, 0.2e-3,
                          seed=seed)


def response_of(path: Path) -> dict:
    return tomllib.loads(path.read_text())["response"]


def rel(got, want):
    return abs(got - want) / abs(want)


# --- fit-response -------------------------------------------------------------------------------

def test_a_first_order_capture_gives_its_tau_and_both_axes_when_the_base_has_none(tmp_path,
                                                                                   capsys):
    cap = first_order_capture(tmp_path / "x.csv", 300e-6)
    code, out, err = cli(capsys, "fit-response", cap, "--axis", "x", "-o", tmp_path / "t.toml",
                         "--report", tmp_path / "r.json")
    assert code == 0, err
    tau = response_of(tmp_path / "t.toml")["tau_us"]
    # lsim's lag had tau = 300 us (the capture's reference); within 2 % (the brief's bound)
    assert rel(tau[0], 300.0) < 0.02, tau
    # no [response] in the base: y gets the same value, and the user is told
    assert tau[1] == tau[0]
    assert "no [response] for y" in err and "warning" in err
    # the summary says what tau is and what the fit rests on
    assert "time constant" in out and "63 %" in out
    rep = json.loads((tmp_path / "r.json").read_text())
    assert f"rests on {rep['points_used']} of the capture's {rep['capture_points']} points" in out
    assert rep["order"] == 1 and len(rep["edge_times_s"]) == 4
    # the picture's default name, a PNG (its magic number, PNG specification)
    assert (tmp_path / "t-response-x.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_control_another_tau_gives_another_value(tmp_path, capsys):
    # the check above bites: a lag of 120 us comes back as 120 us, not 300
    cap = first_order_capture(tmp_path / "x.csv", 120e-6, seed=4)
    code, _out, err = cli(capsys, "fit-response", cap, "--axis", "y", "-o", tmp_path / "t.toml",
                          "-q")
    assert code == 0, err
    tau = response_of(tmp_path / "t.toml")["tau_us"]
    assert rel(tau[1], 120.0) < 0.02 and rel(tau[1], 300.0) > 0.5, tau


def test_a_second_order_capture_replaces_one_axis_and_keeps_the_other_and_a_backup(tmp_path,
                                                                                    capsys):
    base_text = "[response]\nnatural_hz = [3000.0, 3500.0]\ndamping = [0.6, 0.7]\n"
    base = write_toml(tmp_path / "tube.toml", base_text)
    cap = second_order_capture(tmp_path / "y.csv", 4000.0, 0.4)
    code, out, err = cli(capsys, "fit-response", cap, "--axis", "y", "--profile", base, "-o",
                         base)
    assert code == 0, err
    r = response_of(base)
    # lsim's system: f_n = 4 kHz, zeta = 0.4; within 5 % (the brief's bound)
    assert rel(r["natural_hz"][1], 4000.0) < 0.05 and rel(r["damping"][1], 0.4) < 0.05, r
    # x is the base's, untouched
    assert r["natural_hz"][0] == 3000.0 and r["damping"][0] == 0.6
    # auto chose the second order for a ringing capture, and said what the figures mean
    assert "second order" in out and "natural frequency" in out and "overshoots" in out
    assert "warning" not in err
    # the profile it replaced is kept as the first numbered backup
    assert (tmp_path / "tube.toml.bak1").read_text() == base_text


def test_control_a_first_order_capture_is_not_taken_for_a_second_order_one(tmp_path, capsys):
    cap = first_order_capture(tmp_path / "x.csv", 300e-6, seed=2)
    code, out, err = cli(capsys, "fit-response", cap, "--axis", "x", "-o", tmp_path / "t.toml")
    assert code == 0, err
    assert "first order" in out
    assert set(response_of(tmp_path / "t.toml")) == {"tau_us"}


def test_mixed_orders_between_the_axes_are_refused_and_nothing_is_written(tmp_path, capsys):
    write_toml(tmp_path / "tube.toml", "[response]\ntau_us = [250.0, 260.0]\n")
    second_order_capture(tmp_path / "y.csv", 4000.0, 0.4)
    before = files_in(tmp_path)
    code, _out, err = cli(capsys, "fit-response", tmp_path / "y.csv", "--axis", "y",
                          "--profile", tmp_path / "tube.toml", "-o", tmp_path / "tube.toml")
    check_refused(code, err, tmp_path, before, "mixed orders")
    assert "second-order" in err and "first-order" in err and "--order" in err


def test_a_second_run_keeps_the_previous_picture_and_profile(tmp_path, capsys):
    cap = first_order_capture(tmp_path / "x.csv", 300e-6)
    for _ in range(2):
        code, _out, err = cli(capsys, "fit-response", cap, "--axis", "x", "-o",
                              tmp_path / "t.toml", "-q")
        assert code == 0, err
    assert (tmp_path / "t-response-x.png.bak1").read_bytes()[:4] == b"\x89PNG"
    assert "tau_us" in tomllib.loads((tmp_path / "t.toml.bak1").read_text())["response"]
    assert not (tmp_path / "t.toml.bak2").exists()


def _flat(t):
    return 0.2 + 0.001 * np.random.default_rng(5).standard_normal(t.size)


BAD_CAPTURES = {
    "empty.csv": "",
    "one-column.csv": "".join(f"{i * 1e-6}\n" for i in range(100)),
    "words.csv": "this is not\na capture\n",
    "decreasing.csv": "time_s,v\n" + "".join(f"{(50 - i) * 1e-6},{i % 2}\n" for i in range(50)),
    "flat.csv": "time_s,v\n" + "".join(f"{i * 1e-6},{v:.6f}\n" for i, v in
                                        enumerate(_flat(np.arange(400) * 1e-6))),
    "too-fast.csv": "time_s,v\n" + "".join(f"{i * 1e-6},{-0.2 if i < 200 else 0.2}\n"
                                           for i in range(400)),
}


@pytest.mark.parametrize("name", sorted(BAD_CAPTURES) + ["missing.csv", "folder.csv"])
def test_a_bad_capture_is_one_line_and_writes_nothing(tmp_path, capsys, name):
    for n, text in BAD_CAPTURES.items():
        (tmp_path / n).write_text(text)
    (tmp_path / "folder.csv").mkdir()
    before = files_in(tmp_path)
    code, _out, err = cli(capsys, "fit-response", tmp_path / name, "--axis", "x", "-o",
                          tmp_path / "t.toml", "--report", tmp_path / "r.json")
    check_refused(code, err, tmp_path, before, name)


@pytest.mark.parametrize("extra,words", [
    (["--column", "5"], "--column"), (["--column", "nosuch"], "nosuch"),
    (["--order", "3"], "--order"), (["--residuals", "p.jpg"], ".png"),
    (["--report", "r.txt"], ".json"), (["--profile", "nowhere.toml"], "not found"),
    (["-o", "t.txt"], ".toml"), ([], "--axis")])
def test_bad_fit_response_options_are_one_line_and_write_nothing(tmp_path, capsys, extra,
                                                                 words, monkeypatch):
    monkeypatch.chdir(tmp_path)
    first_order_capture(tmp_path / "x.csv", 300e-6)
    before = files_in(tmp_path)
    args = ["fit-response", "x.csv"] + (["--axis", "x"] if words != "--axis" else [])
    if "-o" not in extra:
        args += ["-o", "t.toml"]
    code, _out, err = cli(capsys, *args, *extra)
    check_refused(code, err, tmp_path, before, " ".join(extra))
    assert words in err


# --- pattern step -------------------------------------------------------------------------------

def test_the_step_pattern_is_a_square_wave_of_the_asked_level_and_period(tmp_path, capsys):
    from scipy.io import wavfile

    code, out, err = cli(capsys, "pattern", "step", "--axis", "x", "--amplitude", "0.4",
                         "--period-ms", "8", "--seconds", "0.05", "--channels", "3", "-o",
                         tmp_path / "s.wav")
    assert code == 0, err
    rate, data = wavfile.read(tmp_path / "s.wav")       # scipy's reader, not the project's
    assert rate == RATE and data.dtype == np.float32 and data.shape[1] == 3
    x, y, z = data.T.astype(float)
    # two levels only, +-0.4, starting low; y held at 0; Z at the blank level (0) throughout
    assert set(np.unique(x)) == {np.float32(-0.4), np.float32(0.4)}
    assert x[0] < 0 and not y.any() and not z.any()
    # a jump every half period: 4 ms at 48 kHz = 192 samples (by hand), and whole periods
    edges = np.flatnonzero(np.diff(x)) + 1
    assert np.all(np.diff(edges) == 192) and edges[0] == 192
    assert len(x) % 384 == 0 and len(x) >= 0.05 * RATE
    assert "Z is blanked" in out and "yoke current" in out
    assert "warning" not in err


def test_the_step_pattern_follows_the_profiles_channel_map(tmp_path, capsys):
    from scipy.io import wavfile

    prof = write_toml(tmp_path / "p.toml", '[output]\nchannels = 3\norder = ["y", "x", "z"]\n'
                      'invert = ["x"]\nz_blank_level = -0.5\n')
    code, _out, err = cli(capsys, "pattern", "step", "--axis", "x", "--profile", prof, "-o",
                          tmp_path / "s.wav")
    assert code == 0, err
    _, data = wavfile.read(tmp_path / "s.wav")
    # channel 1 carries x, inverted: the first half period (drive -0.5) reads +0.5
    half = len(data) // 2
    np.testing.assert_array_equal(data[:half, 1], 0.5)
    np.testing.assert_array_equal(data[half:, 1], -0.5)
    assert not data[:, 0].any()                          # y, held
    np.testing.assert_array_equal(data[:, 2], -0.5)      # Z blanked at the profile's level
    # control: the y pattern moves channel 0 and leaves channel 1 alone
    code, _out, err = cli(capsys, "pattern", "step", "--axis", "y", "--profile", prof, "-o",
                          tmp_path / "sy.wav")
    assert code == 0, err
    _, data = wavfile.read(tmp_path / "sy.wav")
    assert np.abs(data[:, 0]).min() == np.float32(0.5) and not data[:, 1].any()


def test_without_a_z_channel_the_step_pattern_warns_of_the_lit_spot(tmp_path, capsys):
    code, out, err = cli(capsys, "pattern", "step", "--axis", "y", "--channels", "2", "-o",
                         tmp_path / "s.wav")
    assert code == 0, err
    assert "no Z channel" in out and "brightness" in out


@pytest.mark.parametrize("args,words", [
    (["step"], "--axis"), (["step", "--axis", "x", "--sheet", "s.csv"], "--sheet"),
    (["step", "--axis", "x", "--amplitude", "0"], "--amplitude"),
    (["step", "--axis", "x", "--amplitude", "1.5"], "--amplitude"),
    (["step", "--axis", "x", "--amplitude", "nan"], "--amplitude"),
    (["step", "--axis", "x", "--period-ms", "0"], "--period-ms"),
    (["step", "--axis", "x", "--period-ms", "0.01"], "--period-ms"),
    (["step", "--axis", "x", "--preview", "p.png"], "preview"),
    (["step", "--axis", "x", "--speed", "1000"], "--speed"),
    (["ztiming", "--order", "greedy"], "--order"),
    (["ztiming", "--refresh", "50"], "--speed"),
    (["ztiming", "--sheet", "s.csv"], "--sheet"),
    (["grid"], "--sheet"),
])
def test_bad_pattern_options_are_one_line_and_write_nothing(tmp_path, capsys, monkeypatch,
                                                            args, words):
    monkeypatch.chdir(tmp_path)
    before = files_in(tmp_path)
    code, _out, err = cli(capsys, "pattern", *args, "-o", "out.wav")
    check_refused(code, err, tmp_path, before, " ".join(args))
    assert words in err


# --- pattern ztiming ----------------------------------------------------------------------------

def lit_runs(signal: np.ndarray, mm_per_fs=(50.0, 40.0)) -> list:
    """(start, end) points in mm of every run of lit samples (Z above half) of an X, Y, Z
    signal, in time order."""
    lit = signal[:, 2] > 0.5
    idx = np.flatnonzero(lit)
    runs = np.split(idx, np.flatnonzero(np.diff(idx) != 1) + 1)
    mm = signal[:, :2].astype(float) * mm_per_fs
    return [(mm[r[0]], mm[r[-1]]) for r in runs if r.size]


def dash_rows(runs) -> list:
    """(y, direction) of the horizontal runs longer than 15 mm, in time order."""
    return [(round(float(a[1]), 3), int(np.sign(b[0] - a[0]))) for a, b in runs
            if abs(b[0] - a[0]) > 15 and abs(b[1] - a[1]) < 0.01]


ZT_PROFILE = ("[output]\nchannels = 3\n[deflection]\nmatrix_mm = [[50.0, 0.0], [0.0, 40.0]]\n"
              "[beam]\nwriting_speed_mm_per_s = 20000.0\n")


def test_the_ztiming_pattern_alternates_direction_over_a_scale_set_by_the_speed(tmp_path,
                                                                                capsys):
    from scipy.io import wavfile

    prof = write_toml(tmp_path / "p.toml", ZT_PROFILE)
    code, out, err = cli(capsys, "pattern", "ztiming", "--profile", prof, "-o",
                         tmp_path / "z.wav", "--preview", tmp_path / "z.png")
    assert code == 0, err
    _, data = wavfile.read(tmp_path / "z.wav")
    runs = lit_runs(data)
    rows = dash_rows(runs)
    assert len(rows) == 6, rows
    # consecutive rows run opposite ways, the top one left to right, each below the last
    assert [d for _y, d in rows] == [1, -1, 1, -1, 1, -1]
    ys = [y for y, _d in rows]
    assert np.all(np.diff(ys) < 0) and np.ptp(np.diff(ys)) < 1e-3
    # the ticks at the left end are vertical strokes one tick spacing apart: at 20 mm/ms the
    # smallest of 0.5, 1, 2, 5, 10, 20, 50 us spanning 0.5 mm or more is 50 us = 1 mm (by hand)
    ticks = sorted(float(a[0]) for a, b in runs
                   if abs(b[0] - a[0]) < 0.01 and abs(b[1] - a[1]) > 0.5 and a[0] < 0)
    assert len(ticks) >= 5
    np.testing.assert_allclose(np.diff(ticks), 1.0, atol=0.02)
    assert "each tick is 50 us (1 mm)" in out
    assert (tmp_path / "z.png").read_bytes()[:4] == b"\x89PNG"
    # twice the speed: 0.04 mm/us, and 20 us = 0.8 mm is the smallest tick of 0.5 mm or more
    code, out, err = cli(capsys, "pattern", "ztiming", "--profile", prof, "--speed", "40000",
                         "-o", tmp_path / "z2.wav")
    assert code == 0, err
    assert "each tick is 20 us (0.8 mm)" in out


def test_the_ztiming_scale_is_the_speed_the_dashes_are_drawn_at(tmp_path, capsys):
    # a lagging deflection may make the renderer draw slower than asked: whatever speed the
    # dashes come out at, the printed scale and the ticks in the signal must be that speed's
    from scipy.io import wavfile

    prof = write_toml(tmp_path / "p.toml", "[output]\nchannels = 3\n[deflection]\nmatrix_mm "
                      "= [[50.0, 0.0], [0.0, 40.0]]\n[beam]\nwriting_speed_mm_per_s = "
                      "100000.0\n[response]\ntau_us = 300.0\n")
    code, out, err = cli(capsys, "pattern", "ztiming", "--profile", prof, "-o",
                         tmp_path / "z.wav")
    assert code == 0, err
    said_mm_per_ms = float(re.search(r"dashes drawn at ([0-9.]+) mm/ms", out).group(1))
    tick_us = float(re.search(r"each tick is ([0-9.]+) us", out).group(1))
    _, data = wavfile.read(tmp_path / "z.wav")
    mm = data[:, :2].astype(float) * (50.0, 40.0)
    lit = data[:, 2] > 0.5
    step = np.hypot(*np.diff(mm, axis=0).T)
    along = lit[:-1] & lit[1:] & (np.abs(np.diff(mm[:, 1])) < 1e-6) & (step > 1e-6)
    # the dashes' speed from the samples: the median step between lit samples along a row
    drawn_mm_per_ms = float(np.median(step[along])) * RATE / 1000
    assert rel(said_mm_per_ms, drawn_mm_per_ms) < 0.01, (said_mm_per_ms, drawn_mm_per_ms)
    ticks = sorted(float(a[0]) for a, b in lit_runs(data)
                   if abs(b[0] - a[0]) < 0.01 and abs(b[1] - a[1]) > 0.5 and a[0] < 0)
    np.testing.assert_allclose(np.diff(ticks), tick_us * 1e-3 * drawn_mm_per_ms, rtol=0.02)


def test_control_strokes_that_all_run_one_way_do_not_alternate():
    # the direction check above bites: six dashes drawn left to right read as such
    from render_helpers import make_profile, render
    from vectorgen.strokes import strokes_from_polylines

    prof = make_profile(**tomllib.loads(ZT_PROFILE))
    lines = [np.array([[-10.0, y], [10.0, y]]) for y in (5.0, 3.0, 1.0, -1.0, -3.0, -5.0)]
    frame = render(strokes_from_polylines(lines), prof, channels=3, ordering="input")
    assert [d for _y, d in dash_rows(lit_runs(frame.signal))] == [1] * 6


# --- reach --------------------------------------------------------------------------------------

DRIVE_PROFILE = """\
[screen]
width_mm = 100.0
height_mm = 100.0
[deflection]
matrix_mm = [[40.0, 0.0], [0.0, 40.0]]
[beam]
end_dwell_us = 0.0
corner_dwell_us = 0.0
settle_us = 0.0
[drive]
kind = "current"
yoke_ohm = 10.0
yoke_mh = 3.0
amps_per_fs = 2.0
rail_v = 24.0
"""


def test_reach_of_a_circle_matches_the_coil_law_worked_by_hand(tmp_path, capsys):
    prof = write_toml(tmp_path / "p.toml", DRIVE_PROFILE)
    # a circle of 38 mm at 40 mm per full scale: X = 0.95 FS cos(w t), one turn per frame,
    # the frame 96 samples at 48 kHz (refresh 500 Hz). A current amplifier: no lag to
    # compensate, the coil current follows the drawing.
    code, out, err = cli(capsys, "reach", "--shape", "circle", "--radius", "38", "--profile",
                         prof, "--refresh", "500", "--report", tmp_path / "r.json")
    assert code == 0, err
    rep = json.loads((tmp_path / "r.json").read_text())
    # by hand: I = 0.95 * 2 A = 1.9 A; w L = 2 pi 500 * 3 mH = 9.4248 ohm;
    # V = I |R + j w L| = 1.9 * sqrt(10^2 + 9.4248^2) = 26.109 V (coil law, textbook)
    i_peak = 1.9
    wl = 2 * math.pi * 500 * 3e-3
    v_peak = i_peak * math.hypot(10.0, wl)
    assert abs(v_peak - 26.109) < 1e-3
    # 1.5 %: the frame's turn closes on a repeated sample, a little off a pure sine
    assert rel(rep["needs"]["amps_peak"][0], i_peak) < 0.005
    assert rel(rep["needs"]["yoke_v_peak"][0], v_peak) < 0.015, rep["needs"]
    # the rails (24 V) allow 24 / 26.109 = 0.919 of the width; at full size, slowing by s keeps
    # I and scales w L: 1.9 |10 + j s 9.4248| = 24 gives s = sqrt((24/1.9)^2 - 100) / 9.4248
    assert rel(rep["reach"]["rail_fraction"][0], 24.0 / v_peak) < 0.015
    s = math.sqrt((24.0 / i_peak) ** 2 - 100.0) / wl
    assert abs(s - 0.8188) < 1e-3
    assert rel(rep["reach"]["rail_speed_fraction"][0], s) < 0.02
    # controls: neither the resistance alone (19 V) nor the inductance alone (17.9 V) would do
    assert rel(rep["needs"]["yoke_v_peak"][0], i_peak * 10.0) > 0.2
    assert rel(rep["needs"]["yoke_v_peak"][0], i_peak * wl) > 0.2
    # what is printed: the peaks, the limit, the verdict and the fractions
    assert "V peak across the yoke" in out and "1.90 A peak" in out
    assert "rails 24 V" in out and "the rails give 24 V" in out
    assert "% of the width" in out and "% of the writing speed" in out
    assert "warning" not in err         # the verdict is printed once, not also as a warning


def test_control_at_half_the_refresh_the_circle_fits_within_the_rails(tmp_path, capsys):
    prof = write_toml(tmp_path / "p.toml", DRIVE_PROFILE)
    code, out, err = cli(capsys, "reach", "--shape", "circle", "--radius", "38", "--profile",
                         prof, "--refresh", "250", "--report", tmp_path / "r.json")
    assert code == 0, err
    rep = json.loads((tmp_path / "r.json").read_text())
    # 1.9 * |10 + j 2 pi 250 * 3 mH| = 1.9 * 11.055 = 21.00 V, under the 24 V rails
    v_peak = 1.9 * math.hypot(10.0, 2 * math.pi * 250 * 3e-3)
    assert rel(rep["needs"]["yoke_v_peak"][0], v_peak) < 0.015
    assert rep["reach"]["deflection"] == 1.0
    assert "within the amplifier's limits" in out and "100 % of the width" in out


def test_reach_of_a_current_limited_circle(tmp_path, capsys):
    # the same circle with rails to spare (48 V) but 1.5 A of current: the picture can be at
    # most 1.5 / 1.9 = 0.789 of its size, and slowing down does not lower the current (by hand)
    prof = write_toml(tmp_path / "p.toml", DRIVE_PROFILE.replace("rail_v = 24.0",
                                                                 "rail_v = 48.0\n"
                                                                 "current_limit_a = 1.5"))
    code, out, err = cli(capsys, "reach", "--shape", "circle", "--radius", "38", "--profile",
                         prof, "--refresh", "500", "--report", tmp_path / "r.json")
    assert code == 0, err
    rep = json.loads((tmp_path / "r.json").read_text())
    assert rel(rep["reach"]["current_fraction"][0], 1.5 / 1.9) < 0.005
    assert rep["reach"]["rail_fraction"][0] == 1.0 and rep["reach"]["speed"] == 0.0
    assert "1.90 A" in out and "writing slower does not help" in out


def test_reach_of_a_scene_takes_its_first_frame(tmp_path, capsys):
    prof = write_toml(tmp_path / "p.toml", DRIVE_PROFILE)
    # the same circle from a scene script whose later frames would be smaller
    (tmp_path / "scene.py").write_text(
        "import numpy as np\nUPDATE_HZ = 10\n\ndef draw(t, screen):\n"
        "    a = np.linspace(0.0, 2 * np.pi, 721)\n    r = 38.0 / (1.0 + t)\n"
        "    return np.column_stack([r * np.cos(a), r * np.sin(a)])\n")
    code, _out, err = cli(capsys, "reach", tmp_path / "scene.py", "--profile", prof,
                          "--refresh", "500", "--report", tmp_path / "r.json")
    assert code == 0, err
    rep = json.loads((tmp_path / "r.json").read_text())
    # at t = 0 the radius is 38 mm: the worked example above, 1.9 |10 + j 9.4248| = 26.109 V;
    # 3 % (the open polyline's frame closes with a jump of a sample or two), while the next
    # frame, at t = 0.1 s, would need 1 / 1.1 of it: 9 % less
    v_first = 1.9 * math.hypot(10.0, 2 * math.pi * 500 * 3e-3)
    assert rel(rep["needs"]["yoke_v_peak"][0], v_first) < 0.03
    assert rel(rep["needs"]["amps_peak"][0], 1.9) < 0.005


def test_reach_without_a_drive_table_names_the_table_and_its_keys(tmp_path, capsys):
    write_toml(tmp_path / "p.toml", "[beam]\nwriting_speed_mm_per_s = 20000.0\n")
    before = files_in(tmp_path)
    code, _out, err = cli(capsys, "reach", "--shape", "grid", "--profile", tmp_path / "p.toml",
                          "--report", tmp_path / "r.json")
    check_refused(code, err, tmp_path, before, "no [drive]")
    assert "[drive]" in err and "yoke_ohm" in err and "amps_per_fs" in err and "rail_v" in err


# --- loopback, around the measurement -----------------------------------------------------------

def crossed_loop(output_device, input_device, rate, channels, input_corner_hz=0.0,
                 seconds=None):
    """In place of the interface: output k comes back on input 1 - k through a 10 Hz
    first-order high-pass (scipy.signal.butter + lfilter) and 40 samples of delay."""
    from scipy.signal import butter, lfilter

    from vectorgen.loopback import fit_loopback, probe_signal

    x = probe_signal(rate, channels, seconds)
    b, a = butter(1, 10.0, "high", fs=rate)
    r = np.zeros(x.shape)
    r[40:] = lfilter(b, a, x[:-40].astype(float), axis=0)[:, ::-1]
    return fit_loopback(x, r, rate, input_corner_hz)


def half_wired_loop(output_device, input_device, rate, channels, input_corner_hz=0.0,
                    seconds=None):
    """In place of the interface: output 0 comes back on input 0 through a 10 Hz first-order
    high-pass (scipy.signal.butter + lfilter); input 1 hears only its own noise (-80 dBFS)."""
    from scipy.signal import butter, lfilter

    from vectorgen.loopback import fit_loopback, probe_signal

    x = probe_signal(rate, channels, seconds)
    b, a = butter(1, 10.0, "high", fs=rate)
    r = 1e-4 * np.random.default_rng(7).standard_normal(x.shape)
    r[40:, 0] += lfilter(b, a, x[:-40, 0].astype(float))
    return fit_loopback(x, r, rate, input_corner_hz)


def test_loopback_writes_the_corner_of_the_channels_that_measured_ok(tmp_path, capsys,
                                                                      monkeypatch):
    import vectorgen.loopback

    monkeypatch.setattr(vectorgen.loopback, "measure_loopback", half_wired_loop)
    code, out, err = cli(capsys, "loopback", "--out-device", "1", "--in-device", "1",
                         "--seconds", "3.25", "-o", tmp_path / "i.toml")
    assert code == 0, err
    written = tomllib.loads((tmp_path / "i.toml").read_text())["output"]["highpass_hz"]
    # the 10 Hz of the one wired channel, within 5 %; the silent one left out, and said so
    assert rel(written, 10.0) < 0.05, written
    assert "1 channel(s) left out" in err and "input 1 got no signal" in err
    assert "differ" not in err
    assert "channel 1: no signal" in out and "(channel 0)" in out


def test_loopback_writes_nothing_when_no_channel_measures_ok(tmp_path, capsys, monkeypatch):
    import vectorgen.loopback

    monkeypatch.setattr(vectorgen.loopback, "measure_loopback", crossed_loop)
    before = files_in(tmp_path)
    code, out, err = cli(capsys, "loopback", "--out-device", "1", "--in-device", "1",
                         "--seconds", "3.25", "-o", tmp_path / "i.toml", "--report",
                         tmp_path / "r.json")
    check_refused(code, err, tmp_path, before, "crossed loop")
    assert "no channel" in err and "hears output 1" in err
    # the wiring and the cautions came first, on stdout
    assert out.index("wiring: output k") < out.index("caution: a line-level loop only")
    assert "yoke" in out


@pytest.mark.parametrize("extra,words", [
    (["--seconds", "1"], "--seconds"), (["--seconds", "nan"], "--seconds"),
    (["--input-corner-hz", "-3"], "--input-corner-hz"), (["--rate", "0"], "rate"),
    (["--report", "r.txt"], ".json"), (["-o", "i.txt"], ".toml"),
    (["--profile", "nowhere.toml"], "not found")])
def test_bad_loopback_options_are_one_line_and_write_nothing(tmp_path, capsys, monkeypatch,
                                                             extra, words):
    monkeypatch.chdir(tmp_path)
    before = files_in(tmp_path)
    args = ["loopback", "--out-device", "no-such-box", "--in-device", "no-such-box"]
    if "-o" not in extra:
        args += ["-o", "i.toml"]
    code, _out, err = cli(capsys, *args, *extra)
    check_refused(code, err, tmp_path, before, " ".join(extra))
    assert words in err


# --- the command line stays light ---------------------------------------------------------------

def test_the_new_commands_are_listed_and_load_no_heavy_module():
    import subprocess
    import sys

    out = run_cli("--help")
    assert out.returncode == 0
    for name in ("loopback", "fit-response", "reach"):
        assert name in out.stdout
    code = ("import sys\nfrom vectorgen.cli import build_parser\nbuild_parser()\n"
            "print(sorted(m for m in sys.modules if m.split('.')[0] in "
            "('numpy', 'scipy', 'matplotlib', 'sounddevice', 'calibration')))")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=REPO,
                       timeout=60)
    assert r.stdout.strip() == "[]", r.stdout + r.stderr

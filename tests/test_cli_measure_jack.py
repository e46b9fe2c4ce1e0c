"""`vectorgen loopback` and `vectorgen pattern step --play` through a real JACK server (dummy
backend), the command run in a child process exactly as a user runs it: the loopback with a
filtering JACK client in the loop, the step pattern recorded sample for sample.

Outside references:
* The JACK client in the loop applies a first-order high-pass per channel made with
  `scipy.signal.butter(1, fc, 'high')` + `lfilter` (tests/test_loopback.py's HighPassClient):
  the corners the written profile must hold are the ones it applies.
* `tomllib` (Python's standard TOML reader) reads the written profile back; `scipy.io.wavfile`
  reads the step pattern's file, the reference for what plays live.
* A real JACK server and the real sounddevice / PortAudio path; nothing of the audio library is
  replaced.
"""

from __future__ import annotations

import json
import re
import tomllib

import numpy as np
import pytest

from jack_helpers import find_frame, play_and_record, summary_counts
from render_helpers import run_cli
from test_loopback import DEVICE, RATE, HighPassClient, run_child

PROBE_SECONDS = 4.25        # 1.5 s per channel: 10 time constants of an 8 Hz corner per step


def run_loopback(server, tmp_path, corners_hz, extra=()):
    """`vectorgen loopback` in a child, its ports wired through a high-pass client at
    `corners_hz`; returns (exit status, stdout, stderr, wired, xruns)."""
    argv = ["loopback", "--out-device", DEVICE, "--in-device", DEVICE, "--rate", str(RATE),
            "--seconds", str(PROBE_SECONDS), *map(str, extra)]
    code = f"import sys\nfrom vectorgen.cli import main\nsys.exit(main({argv!r}))\n"
    filt = HighPassClient(server, corners_hz)
    try:
        status, out, err, wired = run_child(server, code, tmp_path, timeout=90.0, wire_to=filt)
    finally:
        filt.close()
    return status, out, err, wired, filt.xruns


def rel(got, want):
    return abs(got - want) / want


def test_loopback_writes_the_measured_corner_into_the_base_profile_and_keeps_a_backup(
        jack_server, tmp_path):
    pytest.importorskip("jack")
    base = tmp_path / "base.toml"
    base.write_text("[beam]\nwriting_speed_mm_per_s = 12345.0\n")
    out_path = tmp_path / "interface.toml"
    out_path.write_text("name = 'an older measurement'\n")
    status, out, err, wired, xruns = run_loopback(
        jack_server, tmp_path, (12.0, 12.0),
        ["--profile", base, "-o", out_path, "--report", tmp_path / "r.json"])
    assert wired, f"the child's PortAudio ports never appeared: {err[-2000:]}"
    assert status == 0, f"{out}\n{err[-2000:]} (xruns {xruns})"
    prof = tomllib.loads(out_path.read_text())
    # the client's corner on both channels, 12 Hz; within 5 % (the brief's bound)
    assert rel(prof["output"]["highpass_hz"], 12.0) < 0.05, prof["output"]
    assert prof["beam"]["writing_speed_mm_per_s"] == 12345.0        # the base's keys kept
    assert (tmp_path / "interface.toml.bak1").read_text() == "name = 'an older measurement'\n"
    # one corner for both channels: no warning that they differ
    assert "differ" not in err
    # the wiring and the cautions before the results; each channel's corner and round trip
    assert out.index("wiring:") < out.index("caution:") < out.index("channel 0: corner")
    rep = json.loads((tmp_path / "r.json").read_text())
    for ch in rep["channels"]:
        assert ch["status"] == "ok" and rel(ch["corner_hz"], 12.0) < 0.05
        # ms from samples at 48 kHz
        assert abs(ch["latency_ms"] - 1e3 * ch["latency_samples"] / RATE) < 1e-6
        assert re.search(rf"channel {ch['channel']}: corner [0-9.]+ Hz, round trip "
                         rf"{ch['latency_samples']} samples \({ch['latency_ms']:.2f} ms\), ok",
                         out), out


def test_loopback_warns_and_writes_the_mean_when_the_channels_differ(jack_server, tmp_path):
    pytest.importorskip("jack")
    out_path = tmp_path / "interface.toml"
    status, out, err, wired, xruns = run_loopback(jack_server, tmp_path, (8.0, 15.0),
                                                  ["-o", out_path])
    assert wired, f"the child's PortAudio ports never appeared: {err[-2000:]}"
    assert status == 0, f"{out}\n{err[-2000:]} (xruns {xruns})"
    written = tomllib.loads(out_path.read_text())["output"]["highpass_hz"]
    # the mean of the two corners the client applies, (8 + 15) / 2 = 11.5 Hz, within 5 %
    assert rel(written, 11.5) < 0.05, written
    # control: far from either channel's own corner
    assert rel(written, 8.0) > 0.3 and rel(written, 15.0) > 0.2
    warning = [line for line in err.splitlines() if "differ by more than 10 %" in line]
    assert len(warning) == 1, err
    assert re.search(r"channel 0: 8(\.\d+)? Hz", warning[0]), warning[0]
    assert re.search(r"channel 1: 1[45](\.\d+)? Hz", warning[0]), warning[0]


def test_the_step_pattern_plays_live_the_period_it_writes(jack_server, tmp_path):
    pytest.importorskip("jack")
    from scipy.io import wavfile

    step = ["step", "--axis", "y", "--amplitude", "0.3", "--period-ms", "10", "--channels", "3"]
    r = run_cli("pattern", *step, "-o", tmp_path / "step.wav")
    assert r.returncode == 0, r.stderr
    rate, period = wavfile.read(tmp_path / "step.wav")      # one period, scipy's reader
    assert rate == RATE and len(period) == 480
    seconds = 1.0
    r = play_and_record(jack_server, [*step, "--play", "--seconds", seconds], 3, seconds,
                        command=("pattern",))
    assert r.returncode == 0, r.stderr
    assert r.connected and r.xruns == 0
    assert summary_counts(r.stdout).get("underruns") == 0
    i = find_frame(r.capture, period)
    assert i >= 0, "no full copy of the step period in the recording"
    loops = 0
    while i + (loops + 1) * len(period) <= len(r.capture) and np.array_equal(
            r.capture[i + loops * len(period):i + (loops + 1) * len(period)], period):
        loops += 1
    assert loops >= 0.5 * seconds * RATE / len(period)      # most of the run, exact periods

"""Loopback measurement of an interface's AC coupling and round trip (vectorgen.loopback).

Outside references, each named beside its check:
* `scipy.signal.butter(1, fc, 'high', fs=rate)` + `scipy.signal.lfilter`: an independent
  digital model of first-order AC coupling, used to make the synthetic loops (offline) and inside
  the JACK client that stands in for the interface (live).
* `scipy.signal.lsim` of H(s) = s / (s + 2 pi fc), the RC high-pass H(jw) = jwRC / (1 + jwRC) of
  any circuits textbook: a continuous-time loop, to show the fitted corner is the continuous one.
* LTI systems in series commute (any signals-and-systems textbook): the two corners of a loop
  can be swapped without changing the recording.
* A real JACK server (dummy backend, tests/conftest.py) and the real sounddevice / PortAudio
  path in a child process; nothing of the audio library is replaced.
"""

from __future__ import annotations

import json
import os
import re
import subprocess
import sys
import time

import numpy as np
import pytest

from jack_helpers import REPO
from vectorgen.errors import InputError
from vectorgen.loopback import (LEAD_IN_S, STEP_LEVEL_FS, SWEEP_LEVEL_FS, TAIL_S, FitStatus,
                                fit_loopback, highpass_coefficients, probe_signal)

RATE = 48000
DELAY = 1234                # samples, a round trip that is no multiple of anything in the probe
NOISE_FS = 1e-3             # -60 dBFS RMS, a poor interface's noise floor (from memory)


def short_probe(channels):
    """A probe of 2 s per channel: enough for corners of a few hertz, and quicker to fit."""
    return probe_signal(RATE, channels, seconds=LEAD_IN_S + 2.0 * channels + TAIL_S)


def reference_loop(played, corners_hz, input_corners_hz=None, delay=DELAY, gain=0.8,
                   noise_fs=NOISE_FS, seed=0):
    """What input k records from output k: butter(1, fc, 'high') + lfilter for the output's
    coupling, again for the input's, a gain, a whole-sample delay and white noise."""
    from scipy.signal import butter, lfilter

    x = np.asarray(played, dtype=float)
    out = np.zeros_like(x)
    for k, fc in enumerate(corners_hz):
        y = x[:, k]
        for corner in (fc, None if input_corners_hz is None else input_corners_hz[k]):
            if corner:
                b, a = butter(1, corner, "high", fs=RATE)
                y = lfilter(b, a, y)
        out[delay:, k] = gain * y[:len(y) - delay]
    return out + noise_fs * np.random.default_rng(seed).standard_normal(out.shape)


def rel_err(got, want):
    return abs(got - want) / want


# --- the probe -----------------------------------------------------------------------------------

def test_probe_is_one_channel_at_a_time_modest_and_quiet_at_both_ends():
    x = probe_signal(RATE, 3)
    assert x.shape == (int(round((LEAD_IN_S + 3 * 3.0 + TAIL_S) * RATE)), 3)
    assert x.dtype == np.float32
    # modest drive: at most 0.5 FS anywhere (brief: a yoke may be connected)
    assert np.abs(x).max() <= max(STEP_LEVEL_FS, SWEEP_LEVEL_FS) + 1e-6 <= 0.5 + 1e-6
    assert np.all(np.count_nonzero(x, axis=1) <= 1)
    lead, tail = int(LEAD_IN_S * RATE), int(TAIL_S * RATE)
    assert not x[:lead].any() and not x[-tail:].any()
    # each channel in its own segment, in order
    starts = [np.flatnonzero(x[:, k])[0] for k in range(3)]
    assert starts == sorted(starts) and starts[0] >= lead
    # steps held for longer than the time constant of a 0.5 Hz corner, tau = 1 / (2 pi fc)
    # (textbook RC): a run at +STEP_LEVEL_FS of at least 1.2 tau in every channel
    tau = 1.0 / (2 * np.pi * 0.5)
    for k in range(3):
        held = np.isclose(x[:, k], STEP_LEVEL_FS)
        edges = np.flatnonzero(np.diff(np.concatenate([[0], held.astype(int), [0]])))
        assert np.max(edges[1::2] - edges[::2]) >= 1.2 * tau * RATE


def test_probe_refuses_what_cannot_be_a_probe():
    with pytest.raises(InputError, match=r"seconds must be at least 3.25 for 2 channel.*seconds=2"):
        probe_signal(RATE, 2, seconds=2)
    with pytest.raises(InputError, match=r"channels=0"):
        probe_signal(RATE, 0)
    with pytest.raises(InputError, match=r"rate=-5"):
        probe_signal(-5, 1)


# --- the discretisation --------------------------------------------------------------------------

def test_highpass_coefficients_are_butterworth_first_order_with_the_corner_at_minus_3_db():
    from scipy.signal import butter, freqz

    for fc in (0.5, 8.0, 50.0, 2000.0):
        b, a = highpass_coefficients(fc, RATE)
        b_ref, a_ref = butter(1, fc, "high", fs=RATE)          # reference library
        np.testing.assert_allclose(b, b_ref, rtol=1e-12)
        np.testing.assert_allclose(a, a_ref, rtol=1e-12)
        # the corner of an RC high-pass: |H| = 1/sqrt(2), phase +45 degrees (textbook)
        _, h = freqz(b, a, worN=[fc], fs=RATE)
        assert abs(abs(h[0]) - 2 ** -0.5) < 1e-9
        assert abs(np.degrees(np.angle(h[0])) - 45.0) < 1e-6


# --- the fit, offline ---------------------------------------------------------------------------

def test_fit_recovers_each_output_corner_and_the_exact_latency_through_noise():
    x = probe_signal(RATE, 3)
    corners = (0.5, 8.0, 50.0)                       # the brief's range of AC couplings
    r = reference_loop(x, corners)
    fits = fit_loopback(x, r, RATE)
    for k, (fit, fc) in enumerate(zip(fits, corners)):
        assert fit.ok, fit.verdict
        assert fit.channel == k
        assert rel_err(fit.corner_hz, fc) < 0.02, (k, fit.corner_hz)
        assert fit.latency_samples == DELAY
        assert abs(fit.fraction_samples) < 0.05
        assert rel_err(fit.gain, 0.8) < 0.01
        # what is left is the noise that was added, and no more
        assert rel_err(fit.rms_residual, NOISE_FS) < 0.1, fit.rms_residual


def test_fit_of_a_continuous_rc_highpass_gives_its_continuous_corner():
    from scipy.signal import lsim

    x = short_probe(1)
    fc = 20.0
    wc = 2 * np.pi * fc
    t = np.arange(len(x)) / RATE
    # textbook RC high-pass H(s) = s / (s + wc), integrated by lsim (linear between samples)
    _, y, _ = lsim(([1.0, 0.0], [1.0, wc]), x[:, 0].astype(float), t)
    r = np.zeros_like(y)
    r[DELAY:] = y[:-DELAY]
    fit = fit_loopback(x, r[:, None], RATE)[0]
    assert fit.ok, fit.verdict
    assert rel_err(fit.corner_hz, fc) < 0.02, fit.corner_hz
    assert fit.latency_samples == DELAY


def test_a_dc_coupled_loop_fits_no_corner():
    # control for the corner tests: a loop with no high-pass at all gets no corner invented
    x = short_probe(1)
    r = reference_loop(x, [0.0])
    fit = fit_loopback(x, r, RATE)[0]
    assert fit.ok, fit.verdict
    assert fit.corner_hz < 0.05 and "DC-coupled" in fit.verdict
    assert fit.latency_samples == DELAY


def test_a_known_input_corner_in_series_is_taken_out_and_ignoring_it_biases_the_fit():
    x = short_probe(2)
    out_hz, in_hz = (12.0, 30.0), (4.0, 2.0)
    r = reference_loop(x, out_hz, in_hz)
    with_input = fit_loopback(x, r, RATE, input_corner_hz=in_hz)
    for fit, fc in zip(with_input, out_hz):
        assert fit.ok, fit.verdict
        assert rel_err(fit.corner_hz, fc) < 0.02, fit.corner_hz
        assert fit.latency_samples == DELAY
    # control: assuming a DC-coupled input lumps both corners into one, well off the output's
    ignoring = fit_loopback(x, r, RATE, input_corner_hz=0.0)
    for fit, good, fc in zip(ignoring, with_input, out_hz):
        assert rel_err(fit.corner_hz, fc) > 0.05, fit.corner_hz
        assert fit.rms_residual > 3 * good.rms_residual


def test_one_loop_cannot_tell_the_output_corner_from_the_input_corner():
    # LTI blocks in series commute (textbook): assuming the output's corner for the input hands
    # back the input's corner as the "output" one, fitted just as well
    x = short_probe(1)
    r = reference_loop(x, [12.0], [4.0])
    right = fit_loopback(x, r, RATE, input_corner_hz=4.0)[0]
    swapped = fit_loopback(x, r, RATE, input_corner_hz=12.0)[0]
    assert rel_err(right.corner_hz, 12.0) < 0.02
    assert rel_err(swapped.corner_hz, 4.0) < 0.02
    assert rel_err(swapped.rms_residual, right.rms_residual) < 0.01


def test_a_crossed_or_missing_cable_is_reported_not_fitted():
    x = probe_signal(RATE, 2)
    good = reference_loop(x, (8.0, 15.0))
    crossed = fit_loopback(x, good[:, ::-1], RATE)
    assert [f.status for f in crossed] == [FitStatus.MISWIRED] * 2
    assert "input 0 hears output 1" in crossed[0].verdict
    assert all(np.isnan(f.corner_hz) for f in crossed)
    # nothing but the input's own noise (-80 dBFS) on one channel
    unplugged = good.copy()
    unplugged[:, 1] = 1e-4 * np.random.default_rng(3).standard_normal(len(x))
    fits = fit_loopback(x, unplugged, RATE)
    assert fits[0].ok and fits[1].status is FitStatus.NO_SIGNAL
    assert "input 1 got no signal" in fits[1].verdict
    # mains hum at -20 dBFS and no probe: loud, but not the probe coming back
    hum = 0.1 * np.sin(2 * np.pi * 50 * np.arange(len(x)) / RATE)
    fits = fit_loopback(x, np.column_stack([hum, hum]), RATE)
    assert [f.status for f in fits] == [FitStatus.NO_MATCH] * 2


def test_fit_refuses_arrays_that_do_not_pair():
    x = probe_signal(RATE, 2)
    with pytest.raises(InputError, match=r"same shape.*played \(\d+, 2\), recorded \(\d+, 1\)"):
        fit_loopback(x, x[:, :1], RATE)
    with pytest.raises(InputError, match=r"input_corner_hz=-3"):
        fit_loopback(x, x, RATE, input_corner_hz=-3)
    with pytest.raises(InputError, match=r"input_corner_hz=\[1, 2, 3\]"):
        fit_loopback(x, x, RATE, input_corner_hz=[1, 2, 3])


# --- through a real JACK server ------------------------------------------------------------------

FILTER_CORNERS_HZ = (8.0, 15.0)
PA_PORT = re.compile(r"^PortAudio[^:]*:(out|in)_(\d+)$")
DEVICE = "system JACK"      # the server's own device: other clients show up as devices too

CHILD_MEASURE = f"""
import dataclasses, json, sys
from vectorgen.errors import VectorgenError
from vectorgen.loopback import measure_loopback
try:
    fits = measure_loopback({DEVICE!r}, {DEVICE!r}, {RATE}, {len(FILTER_CORNERS_HZ)})
except VectorgenError as exc:
    print(json.dumps({{"error": str(exc), "type": type(exc).__name__}}))
    sys.exit(2)
print(json.dumps([dataclasses.asdict(f) for f in fits]))
"""

CHILD_ERRORS = f"""
import json
from vectorgen.errors import VectorgenError
from vectorgen.loopback import measure_loopback, LEAD_IN_S, TAIL_S, MIN_CHANNEL_SECONDS
cases = {{
    "no such output": ("no-such-box", {DEVICE!r}, 1, None),
    "too few inputs": ({DEVICE!r}, {DEVICE!r}, 3, None),
    "not wired": ({DEVICE!r}, {DEVICE!r}, 1, LEAD_IN_S + MIN_CHANNEL_SECONDS + TAIL_S),
}}
found = {{}}
for name, (out, inp, ch, sec) in cases.items():
    try:
        measure_loopback(out, inp, {RATE}, ch, seconds=sec)
        found[name] = None
    except VectorgenError as exc:
        found[name] = [type(exc).__name__, str(exc)]
print(json.dumps(found))
"""


class HighPassClient:
    """A JACK client standing in for the interface: input port k -> first-order high-pass at
    corners_hz[k] (scipy.signal.butter + lfilter, state carried between periods) -> output
    port k."""

    def __init__(self, server, corners_hz):
        import jack
        from scipy.signal import butter, lfilter

        self._lfilter = lfilter
        self.client = jack.Client(f"vgloopfilt{os.getpid()}", servername=server.name,
                                  no_start_server=True)
        rate = self.client.samplerate
        self.filters = [butter(1, fc, "high", fs=rate) for fc in corners_hz]
        self.state = [np.zeros(1) for _ in corners_hz]
        self.ins = [self.client.inports.register(f"in_{k}") for k in range(len(corners_hz))]
        self.outs = [self.client.outports.register(f"out_{k}") for k in range(len(corners_hz))]
        self.xruns = 0
        self.before = {p.name for p in self.client.get_ports(is_audio=True)}
        self.client.set_process_callback(self._process)
        self.client.set_xrun_callback(self._xrun)
        self.client.activate()

    def _xrun(self, delay):
        self.xruns += 1

    def _process(self, frames):
        for k, (b, a) in enumerate(self.filters):
            y, self.state[k] = self._lfilter(b, a, self.ins[k].get_array(), zi=self.state[k])
            self.outs[k].get_array()[:] = y

    def new_portaudio_ports(self) -> dict:
        found = {"out": {}, "in": {}}
        for p in self.client.get_ports(is_audio=True):
            m = PA_PORT.match(p.name)
            if m and p.name not in self.before:
                found[m.group(1)][int(m.group(2))] = p.name
        return found

    def wire_when_ready(self, proc, timeout=20.0) -> bool:
        """Poll (1 ms) for the child's PortAudio ports; wire PortAudio out_k -> our in_k and
        our out_k -> PortAudio in_k. False if they do not appear in time."""
        n = len(self.ins)
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline and proc.poll() is None:
            ports = self.new_portaudio_ports()
            if len(ports["out"]) >= n and len(ports["in"]) >= n:
                for k in range(n):
                    self.client.connect(ports["out"][k], self.ins[k])
                    self.client.connect(self.outs[k], ports["in"][k])
                return True
            time.sleep(0.001)
        return False

    def close(self):
        try:
            self.client.deactivate()
        finally:
            self.client.close()


def run_child(server, code, tmp_path, timeout=60.0, wire_to=None, env=None):
    """`python -c code` against the server, its output in files (no pipe to fill); with
    `wire_to` (a HighPassClient) its PortAudio ports are wired through that client."""
    out_path, err_path = tmp_path / "child.out", tmp_path / "child.err"
    with open(out_path, "w") as out, open(err_path, "w") as err:
        proc = subprocess.Popen([sys.executable, "-c", code], stdout=out, stderr=err,
                                stdin=subprocess.DEVNULL, env=env or server.env)
        try:
            wired = wire_to.wire_when_ready(proc) if wire_to is not None else None
            proc.wait(timeout)
        finally:
            if proc.poll() is None:
                proc.kill()
                proc.wait(10)
    return proc.returncode, out_path.read_text(), err_path.read_text(), wired


def test_jack_loop_through_a_highpass_client_recovers_each_corner_and_one_latency(
        jack_server, tmp_path):
    pytest.importorskip("jack")
    filt = HighPassClient(jack_server, FILTER_CORNERS_HZ)
    try:
        code, out, err, wired = run_child(jack_server, CHILD_MEASURE, tmp_path, wire_to=filt)
    finally:
        filt.close()
    assert wired, f"the child's PortAudio ports never appeared: {err[-2000:]}"
    assert code == 0, f"{out}\n{err[-2000:]}"
    fits = json.loads(out.strip().splitlines()[-1])
    detail = f"{fits} (xruns seen by the filter client: {filt.xruns})"
    for k, (fit, fc) in enumerate(zip(fits, FILTER_CORNERS_HZ)):
        assert fit["status"] == "ok", detail
        # within 5 % of the corner the client applies (the brief's bound)
        assert rel_err(fit["corner_hz"], fc) < 0.05, detail
        # and far from the other channel's: each input fitted against its own output
        other = FILTER_CORNERS_HZ[1 - k]
        assert rel_err(fit["corner_hz"], other) > 0.3, detail
        # JACK carries float32 samples unchanged (NOTES.md): unit gain in the pass band
        assert abs(fit["gain"] - 1.0) < 0.01, detail
        assert abs(fit["fraction_samples"]) < 0.05, detail
    latencies = {fit["latency_samples"] for fit in fits}
    assert len(latencies) == 1, detail
    latency = latencies.pop()
    assert 0 < latency < TAIL_S * RATE, detail
    # the loop closes through a client that reads and writes in the same cycle, so it is
    # whole server periods long (common practice, no source; one period was seen here)
    assert latency % jack_server.period == 0, detail


def test_jack_measure_refuses_a_missing_device_too_few_inputs_and_an_unwired_loop(
        jack_server, tmp_path):
    code, out, err, _ = run_child(jack_server, CHILD_ERRORS, tmp_path)
    assert code == 0, err[-2000:]
    found = json.loads(out.strip().splitlines()[-1])
    kind, msg = found["no such output"]
    assert kind == "DeviceError" and "no output device match" in msg and "no-such-box" in msg
    # the fixture's server has 2 capture ports (jackd -C 2)
    kind, msg = found["too few inputs"]
    assert kind == "DeviceError" and "has 2 input channel(s); the loopback needs 3" in msg
    # nobody wired the child's inputs: what comes back is silence (control for the test above)
    kind, msg = found["not wired"]
    assert kind == "DeviceError" and "recorded nothing that matches the probe" in msg
    assert "system" in msg and "wire output k" in msg


def test_without_portaudio_the_measurement_names_the_package():
    # the system library lookup finds nothing, as on a machine without libportaudio2;
    # sounddevice's own import then fails with its own OSError
    code = ("import ctypes.util; ctypes.util.find_library = lambda name: None\n"
            "from vectorgen.errors import DeviceError\n"
            "from vectorgen.loopback import measure_loopback\n"
            "try:\n    measure_loopback(None, None, 48000, 1)\n"
            "except DeviceError as exc:\n    print(exc)\n")
    env = dict(os.environ)
    env["PYTHONPATH"] = str(REPO) + os.pathsep + env.get("PYTHONPATH", "")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env,
                       timeout=60)
    assert r.stdout.strip() == ("PortAudio library not found: install the system package "
                                "libportaudio2 (Debian/Ubuntu: apt-get install libportaudio2)")

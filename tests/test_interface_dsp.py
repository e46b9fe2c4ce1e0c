"""The audio-interface DSP (vectorgen.interface) against references from outside the project.

Outside references used here, each named again beside its check:
- ITU-R BS.1770-4 Annex 2: true peak = max |x| after 4x oversampling with an interpolating
  low-pass; 4x under-reads a band-limited peak by at most cos(pi/8) (-0.69 dB, a sine at half
  the rate; worked out by hand below).
- scipy.signal.resample_poly (a Kaiser-windowed polyphase FIR interpolator) and a long,
  sharp linear-phase FIR from scipy.signal.firwin (1025 taps at 8x, 128 input samples long,
  cut-off 0.45 and 0.5 of the input rate): independent models of an interface's
  reconstruction filter, applied to the frame tiled so it loops.
- scipy.signal.butter(1, fc, 'high', fs) + scipy.signal.lfilter over many repeated frames:
  an independent first-order AC coupling, run to its steady state.
- The RC high-pass H(jw) = jwRC / (1 + jwRC) (any circuits textbook), evaluated by hand.
- shapely.distance: distance from each reconstructed lit point to the drawn strokes.
- sin(w (n - d)): the exact fractional delay of a sampled sine.
- The kinematics of a Z error on a dash drawn at speed v (worked out by hand in the
  pattern test): the lit part starts v*t late and the dash end stays where the beam stops.

The frames here are built by a small frame builder of this file (straight strokes of evenly
spaced points, blanked jumps from the module's timing and shape), not by the planner.
"""

from __future__ import annotations

import numpy as np
import pytest

from vectorgen.errors import InputError, ProfileError
from vectorgen.interface import (ACCoupling, JumpTiming, balance_dwell, fractional_delay,
                                 highpass_response, interface_view, jump_error, jump_shape,
                                 jump_timing, oversample_periodic, true_peak, z_edge,
                                 z_timing_pattern)

RATE = 48000
SPEED_MM_PER_SAMPLE = 0.4        # 19.2 mm/ms at 48 kHz: the writing speed
HALF_SCREEN_MM = 50.0            # +-50 mm is +-1.0 full scale
UP = 8                           # reconstruction models interpolate 8x


# --------------------------------------------------------------------------- a drawing

_FONT = {   # block letters on a 4 x 6 grid, as polylines
    "H": [[(0, 0), (0, 6)], [(4, 0), (4, 6)], [(0, 3), (4, 3)]],
    "E": [[(4, 6), (0, 6), (0, 0), (4, 0)], [(0, 3), (3, 3)]],
    "L": [[(0, 6), (0, 0), (4, 0)]],
    "O": [[(0, 0), (4, 0), (4, 6), (0, 6), (0, 0)]],
    "V": [[(0, 6), (2, 0), (4, 6)]],
    "C": [[(4, 6), (0, 6), (0, 0), (4, 0)]],
    "T": [[(0, 6), (4, 6)], [(2, 6), (2, 0)]],
    "R": [[(0, 0), (0, 6), (4, 6), (4, 3), (0, 3), (4, 0)]],
    "A": [[(0, 0), (2, 6), (4, 0)], [(1, 3), (3, 3)]],
    "X": [[(0, 0), (4, 6)], [(0, 6), (4, 0)]],
    "1": [[(1, 5), (2, 6), (2, 0)]],
    "2": [[(0, 6), (4, 6), (4, 3), (0, 3), (0, 0), (4, 0)]],
    "4": [[(0, 6), (0, 3), (4, 3)], [(3, 6), (3, 0)]],
    "5": [[(4, 6), (0, 6), (0, 3), (4, 3), (4, 0), (0, 0)]],
    ":": [[(2, 1), (2, 1.4)], [(2, 4), (2, 4.4)]],
}


def _text(s, x0, y0, unit_mm=1.2):
    return [np.array(pl, float) * unit_mm + [x0 + i * 6 * unit_mm, y0]
            for i, ch in enumerate(s) for pl in _FONT.get(ch, [])]


def _clock(radius_mm):
    a = np.linspace(0, 2 * np.pi, 121)
    strokes = [np.column_stack([radius_mm * np.cos(a), radius_mm * np.sin(a)])]
    for k in range(12):
        u = np.array([np.cos(2 * np.pi * k / 12), np.sin(2 * np.pi * k / 12)])
        strokes.append(np.array([0.84 * radius_mm * u, 0.95 * radius_mm * u]))
    for turn, length in ((2 / 12 + 40 / 720, 0.5), (40 / 60, 0.75)):
        th = np.pi / 2 - 2 * np.pi * turn
        strokes.append(np.array([[0, 0], [length * radius_mm * np.cos(th),
                                          length * radius_mm * np.sin(th)]]))
    return strokes


def _drawing(radius_mm=49.0):
    """A clock face reaching 0.98 of full scale, with two lines of text inside it."""
    return _clock(radius_mm) + _text("HELLO VECTOR", -43, 12) + _text("12:45 TAXI", -36, -22)


# --------------------------------------------------------------------------- a frame builder

def _lit_samples(polyline):
    pts = [polyline[:1]]
    for a, b in zip(polyline[:-1], polyline[1:]):
        n = max(1, int(np.ceil(np.linalg.norm(b - a) / SPEED_MM_PER_SAMPLE)))
        pts.append(a + (b - a) * (np.arange(1, n + 1)[:, None] / n))
    return np.vstack(pts)


def _one_sample_jump(distance_mm):
    return JumpTiming(0, 1, 0)


def _build(strokes, timing=None, shape=None):
    """(xy mm (n, 2), z (n,)) of a looping frame: each stroke lit, then a blanked jump to the
    next stroke's start. timing(distance_mm) -> JumpTiming; shape(move) -> fractions."""
    timing = timing or _one_sample_jump
    shape = shape or (lambda m: np.arange(1, m + 1) / m)
    xs, zs = [], []
    for i, pl in enumerate(strokes):
        lit = _lit_samples(pl)
        a, b = lit[-1], strokes[(i + 1) % len(strokes)][0]
        t = timing(float(np.linalg.norm(b - a)))
        path = np.vstack([np.repeat(a[None], t.lead, 0), a + (b - a) * shape(t.move)[:, None],
                          np.repeat(b[None], t.settle, 0)])
        z = np.zeros(len(path))
        if t.z_edge:
            edge = z_edge(t.z_edge)
            z[:t.z_edge] = edge[::-1]
            z[len(path) - t.z_edge:] = edge
        xs += [lit, path]
        zs += [np.ones(len(lit)), z]
    return np.vstack(xs), np.concatenate(zs)


def _shaped(**kw):
    return lambda d: jump_timing(d, RATE, **kw)


# --------------------------------------------------------------------------- interface models

def _tile_for(x, span):
    reps = int(np.ceil(span / len(x))) + 1
    return np.concatenate([x] * (2 * reps + 1)), reps


def _resample_poly_model(x, up=UP):
    """scipy.signal.resample_poly on the frame tiled three times: the middle period."""
    from scipy import signal
    n = len(x)
    y = signal.resample_poly(np.concatenate([x, x, x]), up, 1, axis=0)
    return y[up * n:2 * up * n]


def _firwin_model(cutoff, window):
    """A 1025-tap linear-phase FIR at 8x (128 input samples long), scipy.signal.firwin."""
    from scipy import signal
    taps = signal.firwin(UP * 128 + 1, cutoff, fs=UP, window=window) * UP

    def model(x):
        n = len(x)
        tiled, reps = _tile_for(x, 128)
        stuffed = np.zeros((len(tiled) * UP,) + x.shape[1:])
        stuffed[::UP] = tiled
        y = signal.oaconvolve(stuffed, taps[:, None], mode="full", axes=0)
        d = (len(taps) - 1) // 2
        return y[d:d + len(stuffed)][UP * n * reps:UP * n * (reps + 1)]
    return model


MODELS = {
    "resample_poly": _resample_poly_model,
    "firwin 0.45 kaiser": _firwin_model(0.45, ("kaiser", 10.0)),
    "firwin 0.5 hamming": _firwin_model(0.5, "hamming"),
}


def _lit_deviation_mm(strokes, xy, z, model, z_above):
    """Distance (shapely) from every reconstructed point with Z > z_above to the strokes."""
    import shapely
    y = model(np.column_stack([xy, z]))
    lit = y[:, 2] > z_above
    drawn = shapely.multilinestrings([shapely.linestrings(p) for p in strokes])
    return shapely.distance(shapely.points(y[lit, :2]), drawn)


@pytest.fixture(scope="module")
def frames():
    strokes = _drawing()
    return {
        "strokes": strokes,
        "one-sample": _build(strokes),
        "shaped": _build(strokes, _shaped(), jump_shape),
        "shaped z_floor": _build(strokes, _shaped(z_floor=0.05), jump_shape),
    }


# --------------------------------------------------------------------------- band-limited jumps

@pytest.mark.parametrize("model", MODELS)
def test_lit_points_stay_within_a_tenth_of_a_mm_through_each_reconstruction_model(frames,
                                                                                    model):
    # Goal from the issue: lit points within 0.1 mm of the drawing through the band limit.
    # Reference: resample_poly / firwin reconstruction, shapely distances.
    xy, z = frames["shaped"]
    d = _lit_deviation_mm(frames["strokes"], xy, z, MODELS[model], 0.5)
    assert d.max() < 0.1, f"{model}: worst lit point {d.max():.3f} mm off"


@pytest.mark.parametrize("model", MODELS)
def test_with_shaped_z_edges_the_beam_is_on_the_drawing_wherever_z_exceeds_5_percent(frames,
                                                                                     model):
    # The stricter check: position within 0.1 mm wherever Z > 0.05 of lit.
    xy, z = frames["shaped z_floor"]
    d = _lit_deviation_mm(frames["strokes"], xy, z, MODELS[model], 0.05)
    assert d.max() < 0.1, f"{model}: worst point with Z > 0.05 {d.max():.3f} mm off"


@pytest.mark.parametrize("model", MODELS)
def test_control_one_sample_jumps_land_lit_points_millimetres_off(frames, model):
    # Control: the old one-sample jumps, same frame builder, same check (the issue measured
    # up to 8 mm, 99th percentile 1.4 mm).
    xy, z = frames["one-sample"]
    d = _lit_deviation_mm(frames["strokes"], xy, z, MODELS[model], 0.5)
    assert d.max() > 3.0 and np.percentile(d, 99) > 0.5


def test_control_without_shaped_z_edges_z_above_5_percent_lights_the_moving_beam(frames):
    # Control for the stricter check: one-sample Z edges ring at half the rate.
    xy, z = frames["shaped"]
    d = _lit_deviation_mm(frames["strokes"], xy, z, MODELS["resample_poly"], 0.05)
    assert d.max() > 1.0


def test_shaped_jumps_keep_the_true_peak_within_full_scale(frames):
    # BS.1770-4 Annex 2 true peak, by the module and by resample_poly 4x on the looping frame
    # (independent); the drawing itself reaches 0.98 of full scale.
    for name, limit_ok in (("shaped", True), ("one-sample", False)):
        drive = frames[name][0] / HALF_SCREEN_MM
        ours = true_peak(drive, rate=RATE)
        ref = np.abs(_resample_poly_model(drive, 4)).max(axis=0)
        assert np.allclose(ours, ref, atol=2e-3)
        if limit_ok:
            assert ours.max() <= 1.0 and ref.max() <= 1.0
        else:                    # control: one-sample jumps overshoot full scale
            assert ours.max() > 1.02 and ref.max() > 1.02


def test_shaped_jumps_cost_at_most_a_fifth_more_frame_time(frames):
    # Goal from the issue: <= 20 % longer frames than one-sample jumps on text and a clock.
    ratio = len(frames["shaped"][0]) / len(frames["one-sample"][0])
    assert 1.0 < ratio <= 1.2


@pytest.mark.parametrize("move", [3, 4, 5, 6, 7, 8])
def test_jump_error_bounds_an_isolated_jump_through_a_sharp_filter(move):
    # jump_error(m) is documented as the worst error, as a fraction of the jump, where a
    # one-sample Z edge can light it (t <= -1/2 before the move, t >= m - 1/2 after), for any
    # linear-phase filter flat below 0.40 of the rate. Reference: the firwin Kaiser model
    # (its own passband ripple, under 1e-5 here, is the slack).
    pad = 200
    seq = np.concatenate([np.zeros(pad), jump_shape(move), np.ones(pad)])
    loop = np.concatenate([seq, 1 - seq])[:, None] - 0.5           # loops: up, then down
    y = MODELS["firwin 0.45 kaiser"](loop)[:, 0]
    t = np.arange(len(y)) / UP - pad                               # 0 = first move sample
    before = (t <= -0.5) & (t > -pad / 2)
    after = (t >= move - 0.5) & (t < pad / 2)
    worst = max(np.abs(y[before] + 0.5).max(), np.abs(y[after] - 0.5).max())
    assert worst <= jump_error(move) + 1e-5
    # control: a straight ramp of the same length rings far more
    ramp = np.concatenate([np.zeros(pad), np.arange(1, move + 1) / move, np.ones(pad)])
    y = MODELS["firwin 0.45 kaiser"](np.concatenate([ramp, 1 - ramp])[:, None] - 0.5)[:, 0]
    assert max(np.abs(y[before] + 0.5).max(), np.abs(y[after] - 0.5).max()) > 1.5 * worst


def test_jump_duration_grows_with_distance_and_a_holding_output_jumps_in_one_sample():
    totals = [jump_timing(d, RATE).total for d in (0.5, 1, 2, 5, 10, 20, 50, 100, 150)]
    assert totals == sorted(totals)
    assert totals[0] <= 4 and totals[-1] > totals[0] + 2
    assert jump_timing(100.0, RATE, band_limited=False) == JumpTiming(0, 1, 0)
    s = jump_shape(7)
    assert 0 < s[0] < 0.01 and s[-1] == 1.0 and np.all(np.diff(s) > 0)


def test_z_edge_rises_strictly_between_dark_and_lit():
    e = z_edge(3)
    assert e.shape == (3,) and np.all((0 < e) & (e < 1)) and np.all(np.diff(e) > 0)
    assert z_edge(0).shape == (0,)


# --------------------------------------------------------------------------- true peak

def test_true_peak_of_a_quarter_rate_sine_sampled_45_degrees_off_its_crests():
    # Worked example (BS.1770-4 Annex 2, by hand): sin(2 pi n / 4 + pi / 4) has samples
    # +-0.7071; 4x oversampling puts points at 22.5-degree steps, one on the crest at 90
    # degrees, so the true peak is 1.0 (and 4x is never below cos(pi/8) = 0.924).
    n = np.arange(64)
    s = np.sin(2 * np.pi * n / 4 + np.pi / 4)
    assert np.isclose(np.abs(s).max(), np.sqrt(0.5))
    assert np.isclose(true_peak(s), 1.0, atol=1e-12)
    # a signal that starts and stops: the same sine faded in and out over 400 samples
    long = np.sin(2 * np.pi * np.arange(4000) / 4 + np.pi / 4)
    fade = np.minimum(1, np.minimum(np.arange(4000), np.arange(4000)[::-1]) / 400)
    tp = true_peak(long * fade, periodic=False)
    assert np.cos(np.pi / 8) <= tp <= 1.0 + 1e-3
    # control: no oversampling reads the sample peak
    assert np.isclose(true_peak(s, oversample=1), np.sqrt(0.5))


def _band_limited_frame(n, top_fraction, seed):
    """A random looping frame with harmonics only below `top_fraction` of the rate, where
    resample_poly's filter is flat."""
    rng = np.random.default_rng(seed)
    spec = np.zeros((n // 2 + 1, 2), complex)
    k = int(top_fraction * n)
    spec[1:k] = rng.normal(size=(k - 1, 2)) + 1j * rng.normal(size=(k - 1, 2))
    x = np.fft.irfft(spec, n=n, axis=0)
    return 0.7 * x / np.abs(x).max(axis=0)


def test_true_peak_matches_resample_poly_on_a_tiled_frame():
    # Reference: scipy.signal.resample_poly 4x on the frame tiled three times.
    x = _band_limited_frame(300, 0.35, 7)
    ref = np.abs(_resample_poly_model(x, 4)).max(axis=0)
    ours = true_peak(x)
    assert np.allclose(ours, ref, atol=2e-3)
    assert np.any(ours > np.abs(x).max(axis=0) + 0.01)      # control: it sees between samples


def test_the_frame_check_finds_the_overshoot_resample_poly_finds():
    # Reference: scipy.signal.resample_poly 4x on the frame tiled three times. The frame check
    # (correction.inter_sample_peaks) interpolates only the gaps that can reach full scale:
    # wherever the band-limited path goes beyond 1 it must read the same peak, whole or in
    # chunks with the neighbouring samples given; below 1 it reads at most the true peak.
    from vectorgen.correction import inter_sample_peaks

    # every sample within full scale (0.98), the path between them beyond it (1.009 .. 1.042),
    # or within it (the last: 0.95 * 0.98 / 0.7)
    for seed, n, top in ((1, 300, 0.98), (2, 1000, 0.98), (3, 257, 0.98), (4, 5000, 0.98),
                         (5, 700, 0.95 * 0.98)):
        x = _band_limited_frame(n, 0.3, seed)
        x *= top / np.abs(x).max()
        ref = np.abs(_resample_poly_model(x, 4)).max()
        assert ref > 1.005 or top < 0.98           # (the frames do what they are for)
        peak, at, axis = inter_sample_peaks(x)
        if ref > 1.0 + 3e-3:
            # (two 4x interpolators with different filters: they differ by up to 2e-3 here)
            assert abs(peak - ref) < 3e-3, (seed, peak, ref)
            assert abs(x[at, axis]) > 0.5          # the peak is reported where it is
        else:
            assert np.abs(x).max() - 1e-12 <= peak <= ref + 3e-3
        # the same frame in chunks of 97 samples, each with 12 samples either side
        T, parts = 12, []
        ext = np.concatenate([x[-T:], x, x[:T]])
        for c0 in range(0, n, 97):
            c1 = min(n, c0 + 97)
            parts.append(inter_sample_peaks(x[c0:c1], (ext[c0:c0 + T], ext[c1 + T:c1 + 2 * T]))[0])
        assert abs(max(parts) - peak) < 1e-12


def test_oversampled_frame_passes_through_the_samples_and_matches_resample_poly():
    x = _band_limited_frame(256, 0.35, 3)
    y = oversample_periodic(x, 8)
    assert np.allclose(y[::8], x, atol=1e-12)
    assert np.abs(y - _resample_poly_model(x)).max() < 2e-3
    # By hand: the band-limited loop through +1, -1, +1, ... is cos(pi t), t in samples
    alt = np.cos(np.pi * np.arange(16))
    assert np.allclose(oversample_periodic(alt, 4), np.cos(np.pi * np.arange(64) / 4))


def test_true_peak_oversamples_more_below_48_khz():
    # BS.1770-4 states 4x for 48 kHz (from memory): at 44.1 kHz the module uses 5x.
    # By hand: cos(2 pi (n - 0.2) / 4) crests 0.2 samples after every 4th sample, on the 5x
    # grid; the 4x grid comes within 0.05 samples: cos(2 pi 0.05 / 4) = 0.9969.
    s = np.cos(2 * np.pi * (np.arange(100) - 0.2) / 4)
    assert np.isclose(true_peak(s, rate=44100), 1.0, atol=1e-12)
    assert np.isclose(true_peak(s, rate=48000), np.cos(2 * np.pi * 0.05 / 4), atol=1e-12)


# --------------------------------------------------------------------------- AC coupling

def test_highpass_response_is_the_rc_formula_worked_by_hand():
    # H(jw) = jwRC / (1 + jwRC), fc = 1 / (2 pi RC): by hand at f = 0, fc/10, fc, 10 fc.
    h = highpass_response([0.0, 1.0, 10.0, 100.0], 10.0)
    assert np.allclose(h, [0, 0.1j / (1 + 0.1j), (1 + 1j) / 2, (100 + 10j) / 101])
    assert np.isclose(abs(h[2]), 1 / np.sqrt(2)) and np.isclose(np.angle(h[2]), np.pi / 4)
    assert np.allclose(highpass_response([0.0, 5.0], 0.0), 1.0)     # corner 0: DC-coupled


def _butter_steady(x, corner_hz, repeats=50):
    """scipy.signal.butter(1, fc, 'high') + lfilter over `repeats` loops: the last loop."""
    from scipy import signal
    b, a = signal.butter(1, corner_hz, "high", fs=RATE)
    return signal.lfilter(b, a, np.tile(x, (repeats, 1)), axis=0)[-len(x):]


def test_ac_coupling_hardware_matches_butter_and_lfilter_in_steady_state(frames):
    drive = frames["shaped"][0] / HALF_SCREEN_MM
    drive = drive - drive.mean(axis=0)
    stage = ACCoupling(10.0)
    ref = _butter_steady(drive, 10.0)
    assert np.abs(stage.hardware(drive, RATE) - ref).max() < 2e-4
    assert np.abs(drive - ref).max() > 0.05                 # control: the coupling bites


def _balanced(strokes, reach=0.95):
    """The frame of `strokes` (drive), with a blanked excursion from its last lit sample that
    brings its mean to zero (balance_dwell iterated with jump_timing, as its docstring says)."""
    xy, z = _build(strokes, _shaped(), jump_shape)
    drive = xy / HALF_SCREEN_MM
    cut = np.flatnonzero(z > 0)[-1] + 1
    start = drive[cut - 1]
    total = 0
    for _ in range(10):
        m, p = balance_dwell(drive.sum(axis=0), len(drive), reach, jump_samples=total,
                             start=start)
        need = jump_timing(np.linalg.norm(p - start) * HALF_SCREEN_MM, RATE).total
        if need <= total:
            break
        total = need
    t = jump_timing(np.linalg.norm(p - start) * HALF_SCREEN_MM, RATE)
    hold = t.settle + total - t.total                    # pad the settle up to `total`
    s = jump_shape(t.move)[:, None]
    there = np.vstack([start + (p - start) * s, np.repeat(p[None], hold, 0)])
    back = np.vstack([p + (start - p) * s, np.repeat(start[None], hold, 0)])
    excursion = np.vstack([there, np.repeat(p[None], m, 0), back])
    return (np.vstack([drive[:cut], excursion, drive[cut:]]),
            np.concatenate([z[:cut], np.zeros(len(excursion)), z[cut:]]), drive, z)


def test_compensated_balanced_frame_lands_on_the_drawing_through_a_10_hz_highpass():
    # Reference: butter + lfilter over 50 loops (10 Hz), then resample_poly for the band
    # limit; goal from the issue: within 0.3 mm (0.003 of full scale) of the drawing.
    strokes = [(p + [12.0, -7.0]) * 0.8 for p in _drawing()]     # off centre
    frame, z, unbalanced, z_unbalanced = _balanced(strokes)
    assert np.abs(frame.mean(axis=0)).max() < 1e-12
    stage = ACCoupling(10.0)
    played = stage.frame(frame, RATE)
    seen = _butter_steady(played, 10.0)
    assert np.abs(seen - frame).max() < 0.003
    d = _lit_deviation_mm(strokes, seen * HALF_SCREEN_MM, z, _resample_poly_model, 0.5)
    assert d.max() < 0.3
    report = stage.report()
    assert np.allclose(report["dc_offset"], 0, atol=1e-12) and min(report["peak_boost"]) > 0
    # control: not compensated, the balanced frame lands millimetres off on average
    plain = _butter_steady(frame, 10.0)
    assert np.linalg.norm(plain - frame, axis=1)[z > 0].mean() * HALF_SCREEN_MM > 2.0
    # control: compensated but not balanced, the drawing loses its offset (a capacitor
    # passes no DC): off by the frame's mean, about 10 mm here
    lost = _butter_steady(stage.frame(unbalanced, RATE), 10.0)
    off_mm = np.linalg.norm(lost - unbalanced, axis=1)[z_unbalanced > 0].mean() * HALF_SCREEN_MM
    assert off_mm > 5.0
    assert np.allclose(stage.report()["dc_offset"], unbalanced.mean(axis=0))


def test_ac_coupling_merged_with_a_lag_still_reports_its_offset_and_the_boost():
    """The chain divides consecutive linear stages at once; the coupling's report then still
    gives the frame's mean (numpy) and the peak boost of the whole division, computed here
    by hand with numpy's FFT: each harmonic divided by jwRC / (1 + jwRC) (the RC high-pass)
    and by 1 / (1 + jw tau) (a first-order lag), the DC term passed as it is."""
    from vectorgen.response import LagCompensation, Response
    from vectorgen.stages import StageChain

    n, fc, tau = 960, 10.0, 300e-6
    ph = 2 * np.pi * np.arange(n) / n
    u = np.column_stack([0.3 * np.cos(ph) + 0.1 * np.sin(7 * ph) + 0.05,
                         0.2 * np.sin(3 * ph) - 0.02])
    chain = StageChain([ACCoupling(fc), LagCompensation(Response(tau_s=(tau, tau)))])
    out = chain.frame(u, RATE)
    w = 2 * np.pi * np.fft.rfftfreq(n, 1 / RATE)
    rc = 1 / (2 * np.pi * fc)
    h = np.ones_like(w, dtype=complex)
    h[1:] = (1j * w[1:] * rc / (1 + 1j * w[1:] * rc)) / (1 + 1j * w[1:] * tau)
    by_hand = np.fft.irfft(np.fft.rfft(u, axis=0) / h[:, None], n, axis=0)
    assert np.allclose(out, by_hand, atol=1e-12)
    rep = chain.report()["ac_coupling"]
    assert np.allclose(rep["dc_offset"], u.mean(axis=0), atol=1e-15)
    assert np.allclose(rep["peak_boost"], np.abs(by_hand).max(axis=0) / np.abs(u).max(axis=0),
                       rtol=1e-12)
    assert rep["peak_boost_with"] == ["response"]
    # alone, the same stage reports its own division, with nothing merged
    alone = ACCoupling(fc)
    alone.frame(u, RATE)
    assert "peak_boost_with" not in alone.report()
    assert np.allclose(alone.report()["dc_offset"], u.mean(axis=0), atol=1e-15)


def test_balance_dwell_worked_example_is_the_fewest_samples():
    # By hand: a sum of (30, -12) at reach 1 needs 30 samples at (-1, 0.4); 29 would need
    # |x| = 30/29 > 1.
    m, p = balance_dwell([30.0, -12.0], 1000, 1.0)
    assert m == 30 and np.allclose(p, [-1.0, 0.4])
    m, p = balance_dwell([3.0, -40.0], 1000, [0.5, 0.8])
    assert m == 50 and np.allclose(p, [-0.06, 0.8])
    assert balance_dwell([0.0, 0.0], 1000, 1.0)[0] == 0


def test_balance_dwell_counts_a_jump_there_and_back_exactly():
    # Summed sample by sample: the frame plus the jump to p, the dwell and the jump back.
    rng = np.random.default_rng(5)
    frame = rng.uniform(-0.2, 0.6, (900, 2))
    start = frame[-1]
    t = jump_timing(80.0, RATE)
    m, p = balance_dwell(frame.sum(axis=0), len(frame), 0.9, jump_samples=t.total,
                         start=start)
    s = jump_shape(t.move)[:, None]
    excursion = np.vstack([start + (p - start) * s, np.repeat(p[None], m, 0),
                           p + (start - p) * s])
    full = np.vstack([frame, excursion])
    assert np.abs(full.sum(axis=0)).max() < 1e-9
    assert np.all(np.abs(p) <= 0.9 + 1e-12)
    # control: the same dwell with the jumps left out of the count does not balance
    m0, p0 = balance_dwell(frame.sum(axis=0), len(frame), 0.9)
    off = np.vstack([frame, start + (p0 - start) * s, np.repeat(p0[None], m0, 0),
                     p0 + (start - p0) * s])
    assert np.abs(off.sum(axis=0)).max() > 1.0


# --------------------------------------------------------------------------- Z timing

def test_fractional_delay_matches_an_analytic_sine():
    # Reference: sin(w (n - d)) for a sine periodic in the frame.
    n = np.arange(64)
    w = 2 * np.pi * 5 / 64
    x = np.column_stack([np.sin(w * n), np.cos(3 * w * n)])
    for d in (0.3, -1.7, 2.5):
        ref = np.column_stack([np.sin(w * (n - d)), np.cos(3 * w * (n - d))])
        assert np.allclose(fractional_delay(x, d), ref, atol=1e-12)
    # control: rounding the delay to a whole sample misses by far more
    assert np.abs(np.roll(x, 0, axis=0) - np.column_stack(
        [np.sin(w * (n - 0.3)), np.cos(3 * w * (n - 0.3))])).max() > 0.1


def test_interface_view_delays_band_limited_z_like_an_analytic_sine():
    # Reference: z(t) = 0.5 + 0.5 sin(2 pi k t / N) seen z_delay_us later, on the 4x grid.
    n = 96
    k = 5
    z = 0.5 + 0.5 * np.sin(2 * np.pi * k * np.arange(n) / n)
    xy = np.zeros((n, 2))
    _, seen, rate_out = interface_view(xy, z, RATE, True, 0.0, z_delay_us=10.0)
    t = np.arange(4 * n) / 4 - 10e-6 * RATE
    assert rate_out == 4 * RATE
    assert np.allclose(seen, 0.5 + 0.5 * np.sin(2 * np.pi * k * t / n), atol=1e-12)


def test_interface_view_holds_samples_without_band_limit_and_applies_the_highpass():
    rng = np.random.default_rng(11)
    xy = rng.uniform(-0.5, 0.5, (120, 2))
    xy -= xy.mean(axis=0)
    z = (rng.uniform(size=120) > 0.5).astype(float)
    held, zh, _ = interface_view(xy, z, RATE, False, 0.0, 0.0, oversample=3)
    assert np.array_equal(held, np.repeat(xy, 3, axis=0))
    assert np.array_equal(zh, np.repeat(z, 3))
    # the hold delays Z by whole output points: 1/rate_out is 6.94 us at 3 x 48 kHz
    _, zd, _ = interface_view(xy, z, RATE, False, 0.0, 2 * 1e6 / (3 * RATE), oversample=3)
    assert np.array_equal(zd, np.roll(np.repeat(z, 3), 2))
    # X/Y through the coupling: butter + lfilter at the output rate on the held staircase
    from scipy import signal
    coupled, _, rate_out = interface_view(xy, z, RATE, False, 10.0, 0.0, oversample=3)
    b, a = signal.butter(1, 10.0, "high", fs=rate_out)
    ref = signal.lfilter(b, a, np.tile(np.repeat(xy, 3, axis=0), (200, 1)), axis=0)[-360:]
    assert np.abs(coupled - ref).max() < 2e-4


def test_z_timing_pattern_ends_line_up_only_when_z_is_on_time():
    # By hand: with Z t late a dash drawn at v lights v*t in from the end it starts at and
    # still ends where the beam leaves it sideways; t early, it ends v*t short. Simulated
    # here: the serpentine drawn at 1 mm per sample, Z shifted by whole samples.
    v_mm_per_sample = 1.0
    speed = v_mm_per_sample * RATE
    pat = z_timing_pattern(speed, dash_mm=20.0, rows=4, tick_us=20.0)
    path, z = [], []
    for i, dash in enumerate(pat.dashes):
        a, b = dash
        n = int(round(np.linalg.norm(b - a) / v_mm_per_sample))
        pts = a + (b - a) * (np.arange(n + 1)[:, None] / n)
        nxt = pat.dashes[(i + 1) % len(pat.dashes)][0]
        jump = b + (nxt - b) * (np.arange(1, 7)[:, None] / 7)     # sideways, blanked
        path += [pts, jump]
        z += [np.ones(n + 1), np.zeros(len(jump))]
    path, z = np.vstack(path), np.concatenate(z)
    left, right = pat.dashes[0][0][0], pat.dashes[0][1][0]
    for shift in (0, 3, -2):                     # samples of Z delay
        lit = np.roll(z, shift) > 0.5
        for i in range(len(pat.dashes)):
            on = lit & (np.abs(path[:, 1] - pat.dashes[i][0][1]) < 1e-9)
            xs = path[on, 0]
            short_mm = abs(shift) * v_mm_per_sample
            rightward = i % 2 == 0
            starts_short = shift > 0
            lo = left + short_mm if rightward == starts_short else left
            hi = right - short_mm if rightward != starts_short else right
            assert np.isclose(xs.min(), lo) and np.isclose(xs.max(), hi), (shift, i)
    # the pattern's own reading: ticks every tick_us * mm_per_us from the long tick inwards
    us_per_sample = 1e6 / RATE
    assert np.isclose(pat.mm_per_us, v_mm_per_sample / us_per_sample)
    tick_x = sorted(t[0, 0] for t in pat.ticks if t[0, 0] < 0)
    assert np.allclose(np.diff(tick_x), 20.0 * pat.mm_per_us) and np.isclose(tick_x[0], left)
    assert "20 us" in pat.text


# --------------------------------------------------------------------------- errors

def test_bad_values_raise_one_line_errors_naming_the_parameter():
    with pytest.raises(InputError, match=r"corner_hz.*corner_hz=-3"):
        highpass_response([1.0], -3)
    with pytest.raises(ProfileError, match=r"corner_hz"):
        ACCoupling(-1.0)
    with pytest.raises(InputError, match=r"tol_mm=0"):
        jump_timing(10.0, RATE, tol_mm=0)
    with pytest.raises(InputError, match=r"move_samples"):
        jump_shape(0)
    with pytest.raises(InputError, match=r"reach"):
        balance_dwell([1.0, 1.0], 10, 0.0)
    with pytest.raises(InputError, match=r"factor"):
        oversample_periodic(np.zeros(4), 1.5)


def test_the_stored_jump_shapes_are_the_designed_ones():
    # the table a render reads (vectorgen/data/jump_shapes.json) must be the solution of the
    # linear programs the shapes are defined by (scipy.optimize.linprog, HiGHS)
    from vectorgen import interface

    stored = interface._stored_steps()
    assert sorted(stored) == list(range(1, interface.MAX_MOVE_SAMPLES + 1))
    for m, (steps, err) in stored.items():
        d_steps, d_err = interface.design_steps(m)
        assert np.allclose(steps, d_steps, atol=1e-9) and abs(err - d_err) < 1e-9, m

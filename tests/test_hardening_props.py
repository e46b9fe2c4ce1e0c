"""Property-based tests (hypothesis) for each stage: strokes -> plan -> drive -> channels,
profiles, sheets, and the signal files. Whatever the input, a stage either returns a result
that keeps the project's stated promises, or refuses with one of the tool's own exceptions
(`VectorgenError`); no other exception may escape.

The promises checked, and where they come from:
* full scale is +-1.0 on every channel and nothing is clipped silently (DEVELOPERS.md,
  Conventions): every sample is finite and within [-1, 1];
* `--samples N` fits a frame into exactly N samples (README, Drawing): len(signal) == N;
* Z is at the profile's blank level on every blanked sample, before polarity (README, the
  [output] table);
* a signal file holds exactly the samples written: read back with `scipy.io.wavfile` and the
  standard `wave` and `csv` modules, bit for bit for float32 (IEEE 754: 9 significant digits
  restore any binary32 value, for CSV), within half a step of 1/32767 for 16-bit.
"""

from __future__ import annotations

import csv
import io
import math
import os
import tempfile
import warnings
import wave

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from vectorgen.errors import VectorgenError

FAST = settings(max_examples=40, deadline=None, derandomize=True,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


# --- strategies ----------------------------------------------------------------------------------

def coordinate():
    # mostly on a 100 x 80 mm screen, some off it, a few absurd or not numbers at all
    return st.one_of(st.floats(-70, 70, allow_nan=False),
                     st.sampled_from([0.0, 1e-300, -1e-300, 1e12, -1e308, math.inf, math.nan]))


def polyline():
    return st.lists(st.tuples(coordinate(), coordinate()), min_size=1, max_size=12)


def drawing():
    return st.tuples(st.lists(polyline(), min_size=1, max_size=8),
                     st.one_of(st.floats(0, 1), st.sampled_from([-0.5, 1.5, math.nan])))


def make_strokes(lines, intensity):
    from vectorgen.strokes import strokes_from_polylines

    return strokes_from_polylines([np.asarray(p, dtype=float) for p in lines], intensity)


def check_signal(signal, channels):
    assert signal.dtype == np.float32 and signal.ndim == 2 and signal.shape[1] == channels
    assert len(signal) > 0
    assert np.isfinite(signal).all()
    assert np.abs(signal).max() <= 1.0          # full scale, never beyond


# --- strokes -> plan -> drive -> channels, end to end --------------------------------------------

@FAST
@given(drawing(), st.sampled_from([1000, 8000, 44100, 48000, 96000]), st.sampled_from([2, 3]),
       st.one_of(st.none(), st.integers(1, 20000)), st.booleans())
def test_any_drawing_renders_within_full_scale_or_is_refused(draw, rate, channels, n, plain):
    from vectorgen.pipeline import Renderer, Settings
    from vectorgen.profile import Profile

    lines, intensity = draw
    try:
        strokes = make_strokes(lines, intensity)
        frame = Renderer(Profile(), Settings(rate=rate, channels=channels, frame_samples=n,
                                             compensate=not plain)).frame(strokes)
    except VectorgenError:
        return
    check_signal(frame.signal, channels)
    if n is not None:
        assert frame.samples == n                # exactly N samples
    assert len(frame.plan.lit) == frame.samples
    z = frame.names.index("z") if "z" in frame.names else None
    if z is not None:                           # blanked samples at the blank level (0)
        assert np.all(frame.signal[~frame.plan.lit, z] == 0.0)


@FAST
@given(drawing(), st.one_of(st.none(), st.integers(1, 50000)),
       st.floats(1.0, 1e6), st.sampled_from(["tour", "greedy", "input"]))
def test_any_plan_has_the_samples_asked_for_and_finite_positions(draw, n, speed, order):
    from vectorgen.beamplan import Timing, plan_frame
    from vectorgen.clip import clip_to_screen
    from vectorgen.profile import Beam, Profile
    from vectorgen.strokes import check_finite

    lines, _i = draw
    try:
        strokes = make_strokes(lines, 1.0)
        check_finite(strokes)
        clipped, _cut = clip_to_screen(strokes, Profile().screen)
        plan = plan_frame(clipped, Timing.from_beam(Beam(), 48000, speed), n, order)
    except VectorgenError:
        return
    if n is not None:
        assert plan.samples == n
    pts = plan.points
    assert pts.shape == (plan.samples, 2) and np.isfinite(pts).all()
    hw, hh = Profile().screen.half_extent
    # nothing is driven past the usable area: every sample lies on the screen (1 um slack)
    assert np.all(np.abs(pts[:, 0]) <= hw + 1e-3) and np.all(np.abs(pts[:, 1]) <= hh + 1e-3)


def profile_dicts():
    """Profile tables with every [output], [deflection] and [beam] key, of any value: valid,
    out of range, of the wrong type, absurd."""
    number = st.one_of(st.floats(-1e3, 1e6, allow_nan=False), st.integers(-10, 10**6),
                       st.sampled_from([0, 0.0, -0.0, 1e-300, 1e300, math.inf, math.nan]))
    any_value = st.one_of(number, st.booleans(), st.text(max_size=5),
                          st.lists(number, max_size=3),
                          st.lists(st.lists(number, min_size=2, max_size=2), min_size=2,
                                   max_size=2))
    from vectorgen.profile import SCHEMA

    tables = {name: st.dictionaries(st.sampled_from(sorted(fields)), any_value, max_size=3)
              for name, (_cls, fields) in SCHEMA.items() if name != "screen"}
    return st.fixed_dictionaries({}, optional=tables)


# Known failures outside these files (listed in the report for the owners): absurd [beam]
# timings reach int conversions unchecked. Until profile.py bounds them, keep the timings in
# the tested dictionaries to what the validation promises to handle.
TIMING_KEYS = {"settle_us", "end_dwell_us", "corner_dwell_us", "dot_dwell_us"}


@FAST
@given(profile_dicts())
def test_any_profile_loads_and_renders_or_is_refused(data):
    from vectorgen.pipeline import Renderer, Settings
    from vectorgen.profile import profile_from_dict
    from vectorgen.strokes import strokes_from_polylines

    beam = data.get("beam", {})
    assume(not any(isinstance(beam.get(k), (int, float)) and not isinstance(beam.get(k), bool)
                   and not (math.isfinite(beam[k]) and abs(beam[k]) < 1e7)
                   for k in TIMING_KEYS))
    try:
        prof = profile_from_dict(data, "<hypothesis>")
        frame = Renderer(prof, Settings(rate=48000)).frame(strokes_from_polylines(
            [[(-20.0, -10.0), (20.0, -10.0), (20.0, 10.0)], [(0.0, 0.0)]]))
    except VectorgenError:
        return
    check_signal(frame.signal, frame.signal.shape[1])


def test_known_gap_an_absurd_settle_time_is_refused_in_the_tools_words():
    from vectorgen.pipeline import Renderer, Settings
    from vectorgen.profile import profile_from_dict
    from vectorgen.strokes import strokes_from_polylines

    with pytest.raises(VectorgenError):
        Renderer(profile_from_dict({"beam": {"settle_us": 1e300}}), Settings()).frame(
            strokes_from_polylines([[(-20.0, 0.0), (20.0, 0.0)], [(0.0, 5.0), (1.0, 5.0)]]))


@FAST
@given(st.lists(st.sampled_from(["x", "y", "z"]), min_size=2, max_size=3, unique=True),
       st.lists(st.sampled_from(["x", "y"]), max_size=2, unique=True),
       st.sampled_from(["positive", "negative"]), st.floats(-1, 1),
       st.integers(1, 300), st.data())
def test_the_channel_map_keeps_full_scale_and_the_blank_level(order, invert, polarity, blank,
                                                              n, data):
    from vectorgen.channels import ChannelMap
    from vectorgen.profile import profile_from_dict

    channels = len(order)
    try:
        prof = profile_from_dict({"output": {"channels": channels, "order": order,
                                             "invert": invert, "z_polarity": polarity,
                                             "z_blank_level": blank}})
    except VectorgenError:
        return
    drive = np.asarray(data.draw(st.lists(st.tuples(st.floats(-1, 1), st.floats(-1, 1)),
                                          min_size=n, max_size=n)), dtype=float)
    intensity = np.asarray(data.draw(st.lists(st.floats(0, 1), min_size=n, max_size=n)))
    lit = np.asarray(data.draw(st.lists(st.booleans(), min_size=n, max_size=n)))
    cmap = ChannelMap(prof.output, channels)
    out = np.asarray(cmap.to_channels(drive, intensity, lit))
    assert out.shape == (n, channels) and np.isfinite(out).all()
    assert np.abs(out).max() <= 1.0
    if "z" in order:        # README: z_blank_level is "Z while blanked (before polarity)"
        z = out[:, order.index("z")]
        sign = -1.0 if polarity == "negative" else 1.0
        assert np.all(z[~lit] == np.float32(sign * blank))


# --- sheets --------------------------------------------------------------------------------------

def sheet_texts():
    cell = st.one_of(st.floats(-1e3, 1e3, allow_nan=False).map(repr), st.just(""),
                     st.sampled_from(["nan", "inf", "1e999", "abc", "1,5", " 3 ", "-"]))
    header = st.sampled_from(["point,drive_x,drive_y,measured_x_mm,measured_y_mm",
                              "point,target_x_mm,target_y_mm,measured_x_mm,measured_y_mm",
                              "point,x,y", "", "\ufeffpoint,drive_x,drive_y,measured_x_mm,"
                              "measured_y_mm"])
    row = st.tuples(st.sampled_from(["p1", "p2", "p3", "", "p1"]), cell, cell, cell, cell
                    ).map(",".join)
    return st.tuples(header, st.lists(row, max_size=8)).map(
        lambda hr: "\n".join([hr[0], *hr[1]]) + "\n")


@FAST
@given(sheet_texts())
def test_any_sheet_is_read_or_refused_with_a_line_to_blame(text):
    from calibration.sheet import read_sheet

    with tempfile.TemporaryDirectory() as folder:
        path = os.path.join(folder, "s.csv")
        with open(path, "w", encoding="utf-8") as fh:
            fh.write(text)
        try:
            sheet = read_sheet(path)
        except VectorgenError:
            return
    coords = np.asarray(sheet.coords, dtype=float)
    assert coords.shape == (sheet.count, 2) and np.isfinite(coords).all()
    measured = np.asarray(sheet.measured, dtype=float)
    assert measured.shape == (sheet.count, 2)
    assert not np.isinf(measured).any()          # a number, or NaN for an empty cell


# --- signal files --------------------------------------------------------------------------------

@FAST
@given(st.integers(1, 400), st.sampled_from([2, 3]), st.lists(st.integers(1, 5), min_size=1,
       max_size=4), st.sampled_from([".wav", ".csv", ".raw"]), st.booleans(), st.data())
def test_streamed_files_hold_exactly_the_samples_written(n, channels, repeats, ext, pcm16,
                                                         data):
    from vectorgen.sinks import write_frames

    rng = np.random.default_rng(data.draw(st.integers(0, 2**32 - 1)))
    frames = [(rng.uniform(-1, 1, (n, channels)).astype(np.float32), r) for r in repeats]
    want = np.concatenate([np.tile(f, (r, 1)) for f, r in frames])
    names = ["x", "y", "z"][:channels]
    with tempfile.TemporaryDirectory() as folder:
        path = os.path.join(folder, "s" + ext)
        count = write_frames(path, frames, 48000, names, pcm16, total_samples=n)
        assert count == len(want)
        as16 = np.round(want * 32767.0).astype(np.int16)         # full scale x 32767
        if ext == ".wav":
            from scipy.io import wavfile

            rate, got = wavfile.read(path)
            assert rate == 48000
            np.testing.assert_array_equal(got, as16 if pcm16 else want)
            if pcm16:
                with wave.open(path) as w:
                    assert (w.getnframes(), w.getnchannels()) == (len(want), channels)
        elif ext == ".csv":
            with open(path, newline="") as fh:
                rows = list(csv.reader(fh))
            assert rows[0] == names
            got = np.array(rows[1:], dtype=np.float64)
            if pcm16:
                np.testing.assert_array_equal(got, as16)
            else:       # 9 significant digits give back every binary32 value
                np.testing.assert_array_equal(got.astype(np.float32), want)
        else:
            got = np.fromfile(path, dtype="<i2").reshape(-1, channels)
            np.testing.assert_array_equal(got, as16)


def test_control_a_wav_header_that_lies_is_caught_by_the_reader():
    """Control for the file test: the reader does check what the header says (a header
    promising more samples than the file holds is read short or refused)."""
    from scipy.io import wavfile

    from vectorgen.sinks import WavStream

    buf = io.BytesIO()
    s = WavStream(buf, 48000, ["x", "y"], False, total_samples=1000)
    s.write(np.zeros((10, 2), np.float32))          # finish() not called: the header lies
    buf.seek(0)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")     # scipy warns of the early end of the file
            _rate, got = wavfile.read(buf)
    except ValueError:
        return
    assert len(got) != 1000

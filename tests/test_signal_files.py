"""Signal and sinks: WAV (float32, 16-bit), CSV and raw files read back with independent readers
(scipy.io.wavfile, the standard `wave` and `csv` modules, numpy.fromfile), channel order and
polarity from a profile, Z intensity, and the beyond-full-scale error."""

from __future__ import annotations

import csv
import struct
import wave

import numpy as np
import pytest
from scipy.io import wavfile

from render_helpers import files_in, make_profile, polylines, render, run_cli, write_svg
from vectorgen.errors import VectorgenError
from vectorgen.profile import Profile
from vectorgen.sinks import write_signal

LSB = 1.0 / 32767.0


@pytest.fixture(scope="module")
def frame():
    import shapes

    return render(shapes.clock_face(Profile().screen, 3, 40, 15), channels=3, rate=44100)


def riff_chunks(path):
    """RIFF chunk ids and bodies, parsed by hand from the Microsoft RIFF/WAVE layout:
    'RIFF' size 'WAVE' then (id, little-endian uint32 size, body, pad to even)."""
    data = open(path, "rb").read()
    assert data[:4] == b"RIFF" and data[8:12] == b"WAVE"
    assert struct.unpack("<I", data[4:8])[0] == len(data) - 8
    out, pos = {}, 12
    while pos < len(data):
        cid, size = data[pos:pos + 4], struct.unpack("<I", data[pos + 4:pos + 8])[0]
        out[cid] = data[pos + 8:pos + 8 + size]
        pos += 8 + size + (size & 1)
    return out


def test_wav_float32_round_trip(tmp_path, frame):
    path = tmp_path / "f.wav"
    write_signal(path, frame.signal, frame.rate, frame.names)
    rate, data = wavfile.read(path)                     # scipy.io.wavfile as the reader
    assert rate == 44100 and data.dtype == np.float32
    np.testing.assert_array_equal(data, frame.signal)  # bit for bit
    fmt = riff_chunks(path)[b"fmt "]
    tag, channels, srate, byte_rate, align, bits = struct.unpack("<HHIIHH", fmt[:16])
    # WAVE_FORMAT_IEEE_FLOAT = 3 (Microsoft mmreg.h), or 0xFFFE (extensible) with that subtype
    assert tag in (3, 0xFFFE) and channels == 3 and srate == 44100 and bits == 32
    assert byte_rate == 44100 * 3 * 4 and align == 12


def test_wav_int16_round_trip_with_scipy_and_wave(tmp_path, frame):
    path = tmp_path / "i.wav"
    write_signal(path, frame.signal, frame.rate, frame.names, pcm16=True)
    rate, data = wavfile.read(path)
    assert rate == 44100 and data.dtype == np.int16 and data.shape == frame.signal.shape
    # 16-bit: within half a step of full scale / 32767 of the float signal
    assert np.abs(data / 32767.0 - frame.signal).max() <= 0.5 * LSB + 1e-9
    with wave.open(str(path), "rb") as w:               # the standard library's reader
        assert (w.getnchannels(), w.getsampwidth(), w.getframerate()) == (3, 2, 44100)
        assert w.getnframes() == frame.samples
        raw = np.frombuffer(w.readframes(w.getnframes()), dtype="<i2").reshape(-1, 3)
    np.testing.assert_array_equal(raw, data)
    # full scale lands on the extremes, never past them
    assert raw.max() <= 32767 and raw.min() >= -32767


def test_csv_round_trip(tmp_path, frame):
    path = tmp_path / "s.csv"
    write_signal(path, frame.signal, frame.rate, frame.names)
    with open(path, newline="") as fh:                  # the standard csv module
        rows = list(csv.reader(fh))
    assert rows[0] == ["x", "y", "z"]
    values = np.array(rows[1:], dtype=np.float64)
    assert values.shape == frame.signal.shape
    # 9 significant digits are enough to restore any binary32 value exactly (IEEE 754-2008,
    # 5.12.2: decimal digits needed for binary32 = 9)
    np.testing.assert_array_equal(values.astype(np.float32), frame.signal)


def test_csv_int16(tmp_path, frame):
    path = tmp_path / "s.csv"
    write_signal(path, frame.signal, frame.rate, frame.names, pcm16=True)
    with open(path, newline="") as fh:
        rows = list(csv.reader(fh))
    values = np.array(rows[1:], dtype=np.int64)
    assert np.abs(values / 32767.0 - frame.signal).max() <= 0.5 * LSB + 1e-9


@pytest.mark.parametrize("ext", [".raw", ".bin"])
def test_raw_little_endian_int16(tmp_path, frame, ext):
    path = tmp_path / f"s{ext}"
    write_signal(path, frame.signal, frame.rate, frame.names)
    assert path.stat().st_size == frame.samples * 3 * 2
    data = np.fromfile(path, dtype="<i2").reshape(-1, 3)   # interleaved, little-endian
    assert np.abs(data / 32767.0 - frame.signal).max() <= 0.5 * LSB + 1e-9


def test_cli_writes_each_format(tmp_path):
    for name in ("a.wav", "b.csv", "c.raw"):
        out = run_cli("render", "--shape", "crosshair", "--channels", "3", "-o", tmp_path / name,
                      "-q")
        assert out.returncode == 0, out.stderr
    rate, wav = wavfile.read(tmp_path / "a.wav")
    csv_data = np.loadtxt(tmp_path / "b.csv", delimiter=",", skiprows=1)
    raw = np.fromfile(tmp_path / "c.raw", dtype="<i2").reshape(-1, 3)
    np.testing.assert_array_equal(csv_data.astype(np.float32), wav)
    assert np.abs(raw / 32767.0 - wav).max() <= 0.5 * LSB + 1e-9
    assert files_in(tmp_path) == {"a.wav", "b.csv", "c.raw"}


def test_channel_order_inversion_and_z_polarity_from_the_profile():
    """Default linear profile: drive = position / half extent (full scale at the edges of the
    usable area, the issue's definition of the default)."""
    strokes = polylines([(-40, -30), (10, 20)], [(25, -35)], intensity=[1.0, 0.5])
    plain = render(strokes, channels=3)
    prof = make_profile(output={"channels": 3, "order": ["y", "z", "x"], "invert": ["x"],
                                "z_polarity": "negative"})
    f = render(strokes, prof)
    assert f.names == ["y", "z", "x"]
    pts, lit = f.plan.points, f.plan.lit
    np.testing.assert_allclose(f.signal[:, 0], pts[:, 1] / 40.0, atol=1e-6)   # y
    np.testing.assert_allclose(f.signal[:, 2], -pts[:, 0] / 50.0, atol=1e-6)  # -x
    z = f.signal[:, 1]
    assert np.all(z[~lit] == 0.0)
    intensity = np.where(f.plan.stroke >= 0, f.plan.strokes.intensity[f.plan.stroke], 0.0)
    np.testing.assert_allclose(z[lit], -intensity[lit])                       # negative: on < 0
    assert set(np.round(-z[lit], 6)) == {1.0, 0.5}
    # the same drawing with the default mapping carries the same samples, reordered
    np.testing.assert_array_equal(plain.plan.points, f.plan.points)
    np.testing.assert_allclose(plain.signal[:, 0], -f.signal[:, 2])
    np.testing.assert_allclose(plain.signal[:, 2], -f.signal[:, 1])


def test_swapped_two_channel_output():
    strokes = polylines([(-40, -30), (10, 20)])
    f = render(strokes, make_profile(output={"order": ["y", "x"]}), channels=2)
    assert f.names == ["y", "x"]
    np.testing.assert_allclose(f.signal[:, 1], f.plan.points[:, 0] / 50.0, atol=1e-6)


def test_z_blank_level():
    prof = make_profile(output={"channels": 3, "z_blank_level": -0.25})
    f = render(polylines([(-40, 0), (-30, 0)], [(30, 0), (40, 0)]), prof)
    z = f.signal[:, f.names.index("z")]
    assert np.all(z[~f.plan.lit] == np.float32(-0.25))
    assert np.all(z[f.plan.lit] == 1.0)


def test_svg_opacity_reaches_z(tmp_path):
    path = write_svg(tmp_path, '<line x1="10" y1="10" x2="40" y2="10" stroke-opacity="0.3"/>'
                               '<line x1="10" y1="60" x2="90" y2="60"/>')
    out = run_cli("render", path, "--channels", "3", "-o", tmp_path / "z.wav", "-q")
    assert out.returncode == 0, out.stderr
    _rate, data = wavfile.read(tmp_path / "z.wav")
    assert {round(float(v), 6) for v in np.unique(data[:, 2])} == {0.0, 0.3, 1.0}


# --- nothing clipped silently -------------------------------------------------------------------

def small_deflection():
    # The amplifier reaches only +-30 mm in x: a point at x = 40 mm needs drive 1.33.
    return make_profile(deflection={"matrix_mm": [[30.0, 0.0], [0.0, 40.0]]})


def test_beyond_full_scale_is_an_error_naming_the_stroke():
    strokes = polylines([(-20, 0), (20, 0)], [(0, -30), (40, 30)],
                        labels=["short line", "long diagonal"])
    with pytest.raises(VectorgenError, match="long diagonal") as err:
        render(strokes, small_deflection())
    assert "full scale" in str(err.value)


def test_cli_beyond_full_scale_names_the_svg_element(tmp_path):
    prof = tmp_path / "narrow.toml"
    prof.write_text("[deflection]\nmatrix_mm = [[30.0, 0.0], [0.0, 40.0]]\n")
    svg = write_svg(tmp_path, '<line id="inside" x1="40" y1="40" x2="60" y2="40"/>'
                              '<line id="too-wide" x1="10" y1="20" x2="90" y2="20"/>')
    out_file = tmp_path / "never.wav"
    out = run_cli("render", svg, "--profile", prof, "-o", out_file)
    assert out.returncode == 2
    assert "too-wide" in out.stderr and "full scale" in out.stderr
    assert "Traceback" not in out.stderr and len(out.stderr.strip().splitlines()) == 1
    assert not out_file.exists()
    assert files_in(tmp_path) == {"narrow.toml", "drawing.svg"}


def test_exact_full_scale_is_allowed():
    """The default profile puts full scale exactly at the usable area's edges: drawing on the
    edge is allowed and reaches +-1.0, no further."""
    f = render(polylines([(-50, -40), (50, -40), (50, 40), (-50, 40), (-50, -40)]))
    assert np.abs(f.signal).max() == np.float32(1.0)

"""Sinks: signal arrays to files. Every file is written through `files.atomic_write` (a
temporary file beside the target, renamed into place), so a failure never leaves a half-written
file behind.

Formats by extension, each a writer in `SINKS`:
  .wav        scipy.io.wavfile, float32 (default) or 16-bit PCM
  .csv        one column per channel, a header row naming the signals
  .raw .bin   little-endian signed 16-bit integers, channels interleaved (waveform generators)

A writer is ``writer(fh, signal, rate, names, pcm16)`` writing to a binary file object; a new
format is one writer function and one `register_sink` line.
"""

from __future__ import annotations

import io
import os

import numpy as np

from .errors import InputError
from .files import atomic_write, check_output_path
from .registry import Registry

__all__ = ["SINKS", "register_sink", "signal_extensions", "write_signal", "read_signal",
           "to_int16"]

SINKS = Registry("signal file format")


def register_sink(extension: str, writer) -> None:
    """Make a signal file format available by its extension (with the dot, e.g. ".wav")."""
    SINKS.register(extension.lower(), writer)


def signal_extensions() -> tuple[str, ...]:
    """The extensions of every registered format, e.g. ('.wav', '.csv', '.raw', '.bin')."""
    return tuple(SINKS.names())


def to_int16(signal: np.ndarray) -> np.ndarray:
    """Full scale +-1.0 to signed 16-bit, rounded, +1.0 -> 32767 and -1.0 -> -32767."""
    return np.round(np.clip(signal, -1.0, 1.0) * 32767.0).astype("<i2")


def write_signal(path, signal: np.ndarray, rate: int, names: list[str],
                 pcm16: bool = False) -> None:
    """Write an (n, channels) float array (full scale +-1.0) in the format the extension names.

    Raises
    ------
    InputError
        An extension no sink is registered for, or an output path that cannot be written.
    """
    ext = check_output_path(path, signal_extensions())
    writer = SINKS[ext]
    signal = np.asarray(signal)
    atomic_write(path, lambda fh: writer(fh, signal, int(rate), list(names), pcm16))


def _write_wav(fh, signal, rate, names, pcm16):
    from scipy.io import wavfile

    data = to_int16(signal) if pcm16 else signal.astype(np.float32, copy=False)
    wavfile.write(fh, rate, data)      # straight into the temporary file


def _write_csv(fh, signal, rate, names, pcm16):
    text = io.StringIO()
    text.write(",".join(names) + "\n")
    if pcm16:
        np.savetxt(text, to_int16(signal), fmt="%d", delimiter=",")
    else:
        # %.9g keeps every bit of a float32 sample.
        np.savetxt(text, signal.astype(np.float32), fmt="%.9g", delimiter=",")
    fh.write(text.getvalue().encode("ascii"))


def _write_raw(fh, signal, rate, names, pcm16):
    fh.write(to_int16(signal).tobytes())


register_sink(".wav", _write_wav)
register_sink(".csv", _write_csv)
register_sink(".raw", _write_raw)
register_sink(".bin", _write_raw)


def read_signal(path: str) -> tuple[np.ndarray, int | None, list[str]]:
    """Read back what write_signal wrote: (samples, rate or None, channel names)."""
    ext = os.path.splitext(path)[1].lower()
    if ext == ".wav":
        from scipy.io import wavfile

        rate, data = wavfile.read(path)
        if data.dtype == np.int16:
            data = data.astype(np.float32) / 32767.0
        return np.atleast_2d(data.T).T, rate, []
    if ext == ".csv":
        with open(path) as fh:
            names = fh.readline().strip().split(",")
        data = np.loadtxt(path, delimiter=",", skiprows=1, ndmin=2)
        return data, None, names
    raise InputError(f"cannot read signals from {path}")

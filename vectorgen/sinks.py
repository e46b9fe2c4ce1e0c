"""Sinks: signal arrays to files. Every file is written to a temporary file beside the target
and renamed into place, so a failure never leaves a half-written file behind.

Formats by extension:
  .wav        scipy.io.wavfile, float32 (default) or 16-bit PCM
  .csv        one column per channel, a header row naming the signals
  .raw .bin   little-endian signed 16-bit integers, channels interleaved (waveform generators)
"""

from __future__ import annotations

import io
import os
import tempfile

import numpy as np

from .errors import VectorgenError

SIGNAL_EXTENSIONS = (".wav", ".csv", ".raw", ".bin")


def check_output_path(path: str, extensions: tuple[str, ...] | None = None) -> str:
    """Fail early (before any work) if `path` cannot be written; returns its extension."""
    path = os.fspath(path)
    ext = os.path.splitext(path)[1].lower()
    if extensions is not None and ext not in extensions:
        raise VectorgenError(f"cannot tell the format of '{path}': use one of "
                             + ", ".join(extensions))
    folder = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(folder):
        raise VectorgenError(f"output folder does not exist: {os.path.dirname(path) or '.'}")
    if os.path.isdir(path):
        raise VectorgenError(f"output path is a folder: {path}")
    if not os.access(folder, os.W_OK):
        raise VectorgenError(f"output folder is not writable: {folder}")
    return ext


def atomic_write_bytes(path: str, data: bytes) -> None:
    atomic_write(path, lambda fh: fh.write(data))


def atomic_write(path: str, writer) -> None:
    """Call writer(binary_file) on a temporary file, then rename it onto `path`."""
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    fd, tmp = tempfile.mkstemp(dir=folder, prefix=".vectorgen-", suffix=".part")
    try:
        with os.fdopen(fd, "wb") as fh:
            writer(fh)
        os.replace(tmp, path)
    except BaseException as exc:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        if isinstance(exc, OSError):
            raise VectorgenError(f"cannot write {path}: {exc.strerror or exc}") from None
        raise


def to_int16(signal: np.ndarray) -> np.ndarray:
    """Full scale +-1.0 to signed 16-bit, rounded, +1.0 -> 32767 and -1.0 -> -32767."""
    return np.round(np.clip(signal, -1.0, 1.0) * 32767.0).astype("<i2")


def write_signal(path: str, signal: np.ndarray, rate: int, names: list[str],
                 pcm16: bool = False) -> None:
    """Write an (n, channels) float array (full scale +-1.0) in the format the extension names."""
    ext = check_output_path(path, SIGNAL_EXTENSIONS)
    signal = np.asarray(signal)
    if ext == ".wav":
        from scipy.io import wavfile

        data = to_int16(signal) if pcm16 else signal.astype(np.float32, copy=False)

        def writer(fh):
            wavfile.write(fh, int(rate), data)      # straight into the temporary file
    elif ext == ".csv":
        def writer(fh):
            text = io.StringIO()
            text.write(",".join(names) + "\n")
            if pcm16:
                np.savetxt(text, to_int16(signal), fmt="%d", delimiter=",")
            else:
                # %.9g keeps every bit of a float32 sample.
                np.savetxt(text, signal.astype(np.float32), fmt="%.9g", delimiter=",")
            fh.write(text.getvalue().encode("ascii"))
    else:  # .raw / .bin
        def writer(fh):
            fh.write(to_int16(signal).tobytes())
    atomic_write(path, writer)


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
    raise VectorgenError(f"cannot read signals from {path}")

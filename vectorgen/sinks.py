"""Sinks: signal arrays to files. Every file is written through `files.atomic_write` (a
temporary file beside the target, renamed into place), so a failure never leaves a half-written
file behind.

Formats by extension, each a writer in `SINKS`:
  .wav        RIFF/WAVE, float32 (WAVE_FORMAT_IEEE_FLOAT, with a fact chunk) or 16-bit PCM
  .csv        one column per channel, a header row naming the signals
  .raw .bin   little-endian signed 16-bit integers, channels interleaved (waveform generators)

A writer is ``writer(fh, signal, rate, names, pcm16)`` writing to a binary file object; a new
format is one writer function and one `register_sink` line. A format may also give a *stream*
(``register_sink(ext, writer, stream=Cls)``): ``Cls(fh, rate, names, pcm16, total_samples)``
with ``write(chunk)`` and ``finish()``, so that long outputs go to the file chunk by chunk
(`write_frames`) and memory stays flat in the duration. The built-in formats all stream.
"""

from __future__ import annotations

import io
import os
import struct

import numpy as np

from .errors import InputError
from .files import atomic_write, check_output_path
from .registry import Registry

__all__ = ["SINKS", "STREAMS", "MAX_WAV_BYTES", "register_sink", "signal_extensions",
           "write_signal", "write_frames", "stream_frames", "frame_chunks", "estimate_bytes",
           "read_signal", "to_int16", "WavStream", "CsvStream", "RawStream"]

SINKS = Registry("signal file format")
STREAMS = Registry("streaming signal file format")
MAX_WAV_BYTES = 0xFFFFFFFF          # RIFF sizes are unsigned 32-bit
CHUNK_BYTES = 4 << 20               # frames are written in pieces of about this size
CSV_BYTES_PER_VALUE = (12, 7)       # a typical float32 ("%.9g") and int16 value with its comma


def register_sink(extension: str, writer, stream=None) -> None:
    """Make a signal file format available by its extension (with the dot, e.g. ".wav");
    `stream`, if given, writes the format chunk by chunk (see the module docstring)."""
    SINKS.register(extension.lower(), writer)
    if stream is not None:
        STREAMS.register(extension.lower(), stream)


def signal_extensions() -> tuple[str, ...]:
    """The extensions of every registered format, e.g. ('.wav', '.csv', '.raw', '.bin')."""
    return tuple(SINKS.names())


def to_int16(signal: np.ndarray) -> np.ndarray:
    """Full scale +-1.0 to signed 16-bit, rounded, +1.0 -> 32767 and -1.0 -> -32767.

    Examples
    --------
    >>> to_int16(np.array([-1.0, 0.0, 0.5, 1.0])).tolist()
    [-32767, 0, 16384, 32767]
    """
    return np.round(np.clip(signal, -1.0, 1.0) * 32767.0).astype("<i2")


def estimate_bytes(extension: str, samples: int, channels: int, pcm16: bool) -> int:
    """About how many bytes `samples` samples of `channels` channels take in a format: exact
    for WAV and raw, typical for CSV (text).

    Examples
    --------
    >>> estimate_bytes(".wav", 48000, 3, False)
    576058
    >>> estimate_bytes(".raw", 48000, 3, False)
    288000
    """
    values = int(samples) * int(channels)
    if extension == ".wav":
        return values * (2 if pcm16 else 4) + WavStream.header_bytes(pcm16)
    if extension in (".raw", ".bin"):
        return values * 2
    if extension == ".csv":
        return values * CSV_BYTES_PER_VALUE[1 if pcm16 else 0]
    return values * 4


def frame_chunks(signal: np.ndarray, repeats: int, chunk_bytes: int = CHUNK_BYTES):
    """The samples of `signal` repeated `repeats` times, as (m, channels) pieces of about
    `chunk_bytes` (whole frames, except that one frame larger than that is one piece). The
    same piece object is yielded again while it repeats, so a stream may reuse its encoding.

    Examples
    --------
    >>> f = np.zeros((3, 2), np.float32)
    >>> [len(c) for c in frame_chunks(f, 5, chunk_bytes=48)]
    [6, 6, 3]
    """
    signal = np.asarray(signal)
    repeats = int(repeats)
    if repeats <= 0 or len(signal) == 0:
        return
    per = max(1, int(chunk_bytes // max(1, signal.nbytes)))
    if repeats <= per:
        yield signal if repeats == 1 else np.tile(signal, (repeats, 1))
        return
    block = np.tile(signal, (per, 1))
    full, rest = divmod(repeats, per)
    for _ in range(full):
        yield block
    if rest:
        yield block[:rest * len(signal)]


# --- streams -------------------------------------------------------------------------------------

class WavStream:
    """RIFF/WAVE written chunk by chunk (Microsoft RIFF/WAVE layout: 'RIFF' size 'WAVE', a
    'fmt ' chunk, for float a 'fact' chunk with the sample count, then 'data'). The header is
    written for `total_samples`; when the count differs at `finish` (a scene's last frame is
    only known at the end), the sizes are put right in place (the file is seekable)."""

    @staticmethod
    def header_bytes(pcm16: bool) -> int:
        return 44 if pcm16 else 58

    def __init__(self, fh, rate: int, names, pcm16: bool, total_samples: int = 0):
        self.fh = fh
        self.channels = len(names)
        self.pcm16 = pcm16
        self.width = 2 if pcm16 else 4
        self.rate = int(rate)
        self.samples = 0
        self._last = None
        fh.write(self._header(int(total_samples)))

    def _header(self, samples: int) -> bytes:
        ch, w, rate = self.channels, self.width, self.rate
        data = samples * ch * w
        if self.pcm16:
            fmt = struct.pack("<HHIIHH", 1, ch, rate, rate * ch * w, ch * w, 8 * w)
            extra = b""
        else:       # WAVE_FORMAT_IEEE_FLOAT: cbSize = 0 and a fact chunk (non-PCM formats)
            fmt = struct.pack("<HHIIHH", 3, ch, rate, rate * ch * w, ch * w, 8 * w) + b"\0\0"
            extra = b"fact" + struct.pack("<II", 4, min(samples, 0xFFFFFFFF))
        body = b"WAVE" + b"fmt " + struct.pack("<I", len(fmt)) + fmt + extra
        riff = len(body) + 8 + data
        return (b"RIFF" + struct.pack("<I", min(riff, 0xFFFFFFFF)) + body + b"data"
                + struct.pack("<I", min(data, 0xFFFFFFFF)))

    def write(self, chunk: np.ndarray) -> None:
        if self._last is not None and chunk is self._last[0]:
            data = self._last[1]
        else:
            data = to_int16(chunk) if self.pcm16 else np.ascontiguousarray(chunk, dtype="<f4")
            self._last = (chunk, data)
        end = (self.samples + len(chunk)) * self.channels * self.width
        if end + self.header_bytes(self.pcm16) - 8 > MAX_WAV_BYTES:
            raise InputError(f"the signal would pass the 4 GiB a WAV file can hold (after "
                             f"{self.samples} samples): shorten the duration or lower the "
                             f"sample rate", parameter="seconds")
        self.fh.write(data)
        self.samples += len(chunk)

    def finish(self) -> None:
        head = self._header(self.samples)
        self._last = None
        self.fh.seek(0)
        self.fh.write(head)     # the same length whatever the count
        self.fh.seek(0, io.SEEK_END)


class CsvStream:
    """CSV: a header row naming the signals, then one row per sample (%.9g keeps every bit of
    a float32 sample; 16-bit integers as %d)."""

    def __init__(self, fh, rate: int, names, pcm16: bool, total_samples: int = 0):
        self.fh = fh
        self.pcm16 = pcm16
        self.samples = 0
        self._last = None
        fh.write((",".join(names) + "\n").encode("ascii"))

    def write(self, chunk: np.ndarray) -> None:
        if self._last is not None and chunk is self._last[0]:
            data = self._last[1]
        else:
            text = io.StringIO()
            if self.pcm16:
                np.savetxt(text, to_int16(chunk), fmt="%d", delimiter=",")
            else:
                # the shortest decimal that reads back as the same float32 (0.1, not
                # 0.100000001)
                n = chunk.shape[1]
                flat = [str(v) for v in np.asarray(chunk, dtype=np.float32).ravel()]
                text.write("\n".join(",".join(flat[i:i + n]) for i in range(0, len(flat), n))
                           + "\n")
            data = text.getvalue().encode("ascii")
            self._last = (chunk, data)
        self.fh.write(data)
        self.samples += len(chunk)

    def finish(self) -> None:
        self._last = None


class RawStream:
    """Little-endian signed 16-bit integers, channels interleaved, no header."""

    def __init__(self, fh, rate: int, names, pcm16: bool, total_samples: int = 0):
        self.fh = fh
        self.samples = 0
        self._last = None

    def write(self, chunk: np.ndarray) -> None:
        if self._last is not None and chunk is self._last[0]:
            data = self._last[1]
        else:
            data = to_int16(chunk)
            self._last = (chunk, data)
        self.fh.write(data)
        self.samples += len(chunk)

    def finish(self) -> None:
        self._last = None


def _whole(stream_cls):
    """A whole-signal writer from a stream class."""
    def writer(fh, signal, rate, names, pcm16):
        s = stream_cls(fh, rate, names, pcm16, len(signal))
        s.write(np.asarray(signal))
        s.finish()
    writer.__doc__ = f"The whole signal at once through {stream_cls.__name__}."
    return writer


register_sink(".wav", _whole(WavStream), stream=WavStream)
register_sink(".csv", _whole(CsvStream), stream=CsvStream)
register_sink(".raw", _whole(RawStream), stream=RawStream)
register_sink(".bin", _whole(RawStream), stream=RawStream)


# --- writing -------------------------------------------------------------------------------------

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


def stream_frames(fh, extension: str, frames, rate: int, names: list[str], pcm16: bool = False,
                  total_samples: int = 0, max_bytes: int | None = None, progress=None) -> int:
    """Write `frames` (an iterable of (signal, repeats)) to the open binary file `fh` in the
    format of `extension`, chunk by chunk; returns the samples written.

    Parameters
    ----------
    total_samples : int
        The expected count (a WAV header is written for it and put right at the end).
    max_bytes : int, optional
        Stop with an `InputError` once the file would pass this size.
    progress : callable, optional
        ``progress(samples_written)`` after each chunk.
    """
    stream_cls = STREAMS.get(extension)
    if stream_cls is None:              # a plug-in format without a stream: all at once
        parts = [np.tile(np.asarray(s), (int(n), 1)) for s, n in frames]
        signal = np.concatenate(parts) if parts else np.zeros((0, len(names)), np.float32)
        SINKS[extension](fh, signal, int(rate), list(names), pcm16)
        return len(signal)
    stream = stream_cls(fh, int(rate), list(names), pcm16, int(total_samples))
    for signal, repeats in frames:
        for chunk in frame_chunks(signal, repeats):
            stream.write(chunk)
            if max_bytes is not None and fh.tell() > max_bytes:
                raise InputError(f"the output passed {max_bytes / 2**30:.1f} GiB after "
                                 f"{stream.samples} samples: shorten the duration or lower the "
                                 f"sample rate", parameter="seconds")
            if progress is not None:
                progress(stream.samples)
    stream.finish()
    return stream.samples


def write_frames(path, frames, rate: int, names: list[str], pcm16: bool = False,
                 total_samples: int = 0, max_bytes: int | None = None, progress=None) -> int:
    """`stream_frames` into the file at `path` (atomically: a temporary file renamed into
    place); returns the samples written.

    Examples
    --------
    >>> import tempfile, os, wave
    >>> p = os.path.join(tempfile.mkdtemp(), "s.wav")
    >>> frame = np.zeros((100, 2), np.float32)
    >>> write_frames(p, [(frame, 3), (frame[:10], 1)], 48000, ["x", "y"], pcm16=True)
    310
    >>> wave.open(p).getnframes()
    310
    """
    ext = check_output_path(path, signal_extensions())
    written = []
    atomic_write(path, lambda fh: written.append(stream_frames(
        fh, ext, frames, rate, names, pcm16, total_samples, max_bytes, progress)))
    return written[0]


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

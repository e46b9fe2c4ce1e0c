"""Signal stages: what happens to the drive between correction and the channel map.

The render path is plan -> correction (drive, full scale +-1) -> stages -> channel map -> sink.
A stage is a small object that turns one frame of drive, an (n, 2) float64 array, into another.
A frame loops (files repeat it, the live player plays it again and again), so the main entry
point, `Stage.frame`, treats its input as one period of a periodic signal and returns one period
of the steady-state output. State that must carry across frames is explicit, as scipy.signal's
`zi` is: live output shows a stage the frame switch through `Stage.first_pass`.

Each stage also knows the hardware it stands in front of (`Stage.hardware`): the preview runs the
final samples through the chain's hardware models in turn, so it pictures what the tube shows,
not what the jack carries.

A new stage is one file with a `Stage` subclass and one `register_stage` line; see
`vectorgen.stages.Gain` for the smallest real one.
"""

from __future__ import annotations

import threading

import numpy as np

from .errors import ProfileError
from .registry import Registry

__all__ = ["Stage", "LinearStage", "Gain", "StageChain", "STAGES", "register_stage",
           "periodic_apply", "fast_length"]


class Stage:
    """One signal stage. Subclasses override `frame` and, where it applies, `hardware`,
    `first_pass` and `report`.

    Attributes
    ----------
    name : str
        Short name used in reports and messages.
    pointwise : bool
        True when the stage acts sample by sample with no memory (a gain, a fixed offset): the
        render path may then run it chunk by chunk. A stage with memory (a filter, an FFT over
        the frame) leaves it False and sees whole frames.
    """

    name = "stage"
    pointwise = False

    def frame(self, drive: np.ndarray, rate: int) -> np.ndarray:
        """One period of the steady-state output for a looping frame of `drive` ((n, 2))."""
        return drive

    def hardware(self, drive: np.ndarray, rate: int) -> np.ndarray:
        """What the hardware this stage compensates does to a looping frame (for the preview)."""
        return drive

    def first_pass(self, prev: np.ndarray, nxt: np.ndarray, rate: int) -> np.ndarray | None:
        """Live frame switch: the output to play for the first pass of `nxt` when it follows a
        loop of `prev` (both this stage's inputs, (n, 2)); None plays the steady frame."""
        return None

    def report(self) -> dict:
        """Entries for the frame report (the chain adds them under the stage's name)."""
        return {}


def periodic_apply(x: np.ndarray, rate: int, response) -> np.ndarray:
    """Apply a frequency response to a looping frame, exactly: each harmonic k of the frame
    (frequency k * rate / n) is multiplied by ``response(f_hz)``.

    Parameters
    ----------
    x : (n, 2) array
        One period of the signal.
    rate : int
        Sample rate, Hz.
    response : callable
        ``response(f_hz) -> (m, 2) complex``: the gain per axis at each frequency of ``f_hz``
        (m,), from 0 to rate / 2.

    Returns
    -------
    (n, 2) float64 array

    Examples
    --------
    >>> import numpy as np
    >>> x = np.column_stack([np.cos(2 * np.pi * np.arange(8) / 8)] * 2)
    >>> y = periodic_apply(x, 8, lambda f: np.full((len(f), 2), 0.5 + 0j))
    >>> bool(np.allclose(y, 0.5 * x))
    True
    """
    return _times_spectrum(x, response(np.fft.rfftfreq(len(x), 1.0 / rate)))


_WORK = threading.local()       # per thread: reused column and spectrum buffers
WORK_KEPT = 1 << 21             # the longest frame whose buffers are kept (about 64 MB)


def _times_spectrum(x: np.ndarray, gain: np.ndarray) -> np.ndarray:
    """The looping frame x ((n, c)) with its harmonics multiplied by `gain` ((n // 2 + 1, c)).

    A column at a time through buffers kept for the last frame length (a frame of 125,000
    samples would otherwise take several megabytes of fresh memory, a page fault per 4 KiB):
    only the result is new."""
    n = len(x)
    if x.ndim != 2 or n < 2:
        spec = np.fft.rfft(x, axis=0)
        spec *= gain
        return np.fft.irfft(spec, n=n, axis=0)
    work = getattr(_WORK, "bufs", None)
    if work is None or len(work[0]) != n:
        work = (np.empty(n), np.empty(n // 2 + 1, dtype=complex), np.empty(n))
        # (kept for frames of up to WORK_KEPT samples: about 32 bytes a sample stay allocated)
        _WORK.bufs = work if n <= WORK_KEPT else None
    col, spec, back = work
    out = np.empty(x.shape)
    for k in range(x.shape[1]):
        col[:] = x[:, k]
        np.fft.rfft(col, out=spec)
        spec *= gain[:, k]
        np.fft.irfft(spec, n=n, out=back)
        out[:, k] = back
    return out


class _LastInverse:
    """1 / H at the harmonics of a looping frame of n samples at `rate`, for the last (n, rate)
    asked: a replayed or fixed-length frame is divided by the same array again. (The stages
    are not changed once made, so H is a function of n and rate alone.)"""

    def __init__(self, response):
        self.response = response            # response(f_hz) -> (m, 2) complex
        self.entry = None                   # ((n, rate), 1 / H): one object, swapped whole

    def __call__(self, n: int, rate: int) -> np.ndarray:
        key = (int(n), int(rate))
        entry = self.entry                  # (read once: another thread may swap it)
        if entry is None or entry[0] != key:
            found = _safe_inverse(self.response(np.fft.rfftfreq(n, 1.0 / rate)))
            found.flags.writeable = False
            entry = self.entry = (key, found)
        return entry[1]


FAST_PRIMES = (2, 3, 5, 7, 11)


def fast_length(n: int) -> int:
    """The smallest length >= n whose prime factors are all 2, 3, 5, 7 or 11: an FFT of such a
    length runs on the transform's fast radix passes (a length with a large prime factor,
    such as 125122 = 2 x 62561, takes about 30 times longer).

    Examples
    --------
    >>> fast_length(125122), fast_length(1024), fast_length(1)
    (125440, 1024, 1)
    """
    m = max(int(n), 1)
    while True:
        r = m
        for p in FAST_PRIMES:
            while r % p == 0:
                r //= p
        if r == 1:
            return m
        m += 1


class LinearStage(Stage):
    """A stage standing in front of linear, time-invariant hardware with frequency response
    H(f) per axis (`response`). Its output for a looping frame is the frame divided by H at
    every harmonic, so the hardware's steady-state output is the frame itself: exact for a loop.
    Consecutive linear stages are merged by the chain into one division by their product.

    Where H(f) is 0 (a coupling capacitor passes no DC) that harmonic is passed through
    unchanged; `hardware` then removes it, as the hardware does."""

    def response(self, f_hz: np.ndarray) -> np.ndarray:
        """(m, 2) complex gain of the hardware at the frequencies `f_hz` (m,)."""
        return np.ones((len(f_hz), 2), dtype=complex)

    def saw(self, drive: np.ndarray, out: np.ndarray, rate: int, merged=()) -> None:
        """Told of each looping frame this stage divided (for its report): the drive it was
        given and the result. `merged`: the names of the other stages it was divided together
        with (the chain merges consecutive linear stages into one division); `out` is then
        the merged division's result."""

    def frame(self, drive, rate):
        inverse = self.__dict__.get("_inverse")
        if inverse is None:
            inverse = self._inverse = _LastInverse(self.response)
        out = _times_spectrum(drive, inverse(len(drive), rate))
        self.saw(drive, out, rate)
        return out

    def hardware(self, drive, rate):
        return periodic_apply(drive, rate, self.response)


def _safe_inverse(h: np.ndarray) -> np.ndarray:
    """1 / h, and 1 where h is 0 (that harmonic cannot be compensated: it passes as it is)."""
    return np.divide(1.0, h, out=np.ones_like(h), where=h != 0)


def _product(stages, f_hz: np.ndarray) -> np.ndarray:
    h = np.ones((len(f_hz), 2), dtype=complex)
    for s in stages:
        h = h * s.response(f_hz)
    return h


class Gain(Stage):
    """Multiply the drive by `gain` (one number or one per axis). Its hardware model is the
    matching attenuation, so a gain stage is invisible at the spot: the simplest real stage,
    and the one the stage seam is tested with.

    Examples
    --------
    >>> import numpy as np
    >>> Gain(0.5).frame(np.array([[1.0, -0.5]]), 48000)
    array([[ 0.5 , -0.25]])
    """

    name = "gain"
    pointwise = True

    def __init__(self, gain=1.0):
        g = np.broadcast_to(np.asarray(gain, dtype=float), (2,)).copy()
        if not (np.all(np.isfinite(g)) and np.all(g != 0)):
            raise ProfileError(f"gain must be finite and not zero (gain={gain!r})")
        self.gain = g

    def frame(self, drive, rate):
        return drive * self.gain

    def hardware(self, drive, rate):
        return drive / self.gain

    def report(self):
        return {"gain": self.gain.tolist()}


class StageChain:
    """The stages in order. `frame` runs them in turn; `hardware` runs the hardware models in
    the reverse order (the hardware after the last stage acts first on the samples).

    Examples
    --------
    >>> import numpy as np
    >>> chain = StageChain([Gain(2.0), Gain(0.25)])
    >>> chain.frame(np.array([[0.4, 0.8]]), 48000)
    array([[0.2, 0.4]])
    >>> chain.hardware(chain.frame(np.array([[0.4, 0.8]]), 48000), 48000)
    array([[0.4, 0.8]])
    """

    def __init__(self, stages=()):
        self.stages = list(stages)
        self._inverses: dict = {}           # merged linear groups' `_LastInverse`s

    def __bool__(self) -> bool:
        return bool(self.stages)

    def __iter__(self):
        return iter(self.stages)

    @property
    def pointwise(self) -> bool:
        """Whether every stage acts sample by sample (an empty chain is pointwise)."""
        return all(s.pointwise for s in self.stages)

    def frame(self, drive: np.ndarray, rate: int) -> np.ndarray:
        """Each stage in turn; consecutive linear stages as one division by the product of
        their responses (one FFT, and one rounding, for the whole linear part)."""
        for group in self._groups():
            if len(group) > 1:
                # (keyed by the stages themselves, which the entry keeps alive: their ids
                # cannot be reused while it is there)
                key = tuple(id(st) for st in group)
                inverse = self._inverses.get(key)
                if inverse is None:
                    inverse = self._inverses[key] = _LastInverse(
                        lambda f, g=tuple(group): _product(g, f))
                out = _times_spectrum(drive, inverse(len(drive), rate))
                for st in group:
                    st.saw(drive, out, rate, tuple(o.name for o in group if o is not st))
                drive = out
            else:
                drive = group[0].frame(drive, rate)
        return drive

    def hardware(self, drive: np.ndarray, rate: int) -> np.ndarray:
        """The hardware models in the order the hardware acts: the last stage's first."""
        for group in reversed(self._groups()):
            if len(group) > 1:
                drive = periodic_apply(drive, rate, lambda f, g=group: _product(g, f))
            else:
                drive = group[0].hardware(drive, rate)
        return drive

    def _groups(self) -> list:
        """The stages as runs: consecutive LinearStages together, every other stage alone."""
        groups: list = []
        for s in self.stages:
            if isinstance(s, LinearStage) and groups and isinstance(groups[-1][-1], LinearStage):
                groups[-1].append(s)
            else:
                groups.append([s])
        return groups

    def first_pass(self, prev: np.ndarray, nxt: np.ndarray, rate: int) -> np.ndarray | None:
        """The chain's output for the first pass of `nxt` after `prev` (chain inputs), or None
        when no stage changes it. Each stage sees its own inputs: the steady outputs of the
        stages before it for `prev`, and their first-pass outputs for `nxt`."""
        changed = False
        for s in self.stages:
            first = s.first_pass(prev, nxt, rate)
            prev_out = s.frame(prev, rate)
            if first is not None:
                changed = True
                nxt = first
            else:
                nxt = s.frame(nxt, rate)
            prev = prev_out
        return nxt if changed else None

    def report(self) -> dict:
        return {s.name: s.report() for s in self.stages if s.report()}


STAGES = Registry("signal stage")
"""Stage classes by name: `STAGES["gain"]` is `Gain`."""


def register_stage(name: str, cls) -> None:
    """Make a Stage subclass available by name (one line per new stage)."""
    STAGES.register(name, cls)


register_stage("gain", Gain)

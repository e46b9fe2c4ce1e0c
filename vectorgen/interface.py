"""The audio interface between the samples and the spot: band limit, AC coupling, Z timing.

An audio interface does three things to a looping frame that the samples do not show:

* **Band limit.** The converter rebuilds its output through an anti-imaging low-pass whose
  cut-off sits just under half its sample rate. For a looping frame that is band-limited
  periodic interpolation (`oversample_periodic`): exact for what a perfect interface does, and
  what the preview shows between samples. A blanked jump made in one sample rings for about
  +-10 samples through that filter and the Z edges light part of the ringing; `jump_timing`
  and `jump_shape` make jumps whose band-limited path stays put wherever the beam is lit, and
  `true_peak` (ITU-R BS.1770-4 Annex 2) sees peaks between samples that the converter clips.
* **AC coupling.** A coupling capacitor makes a first-order high-pass
  ``H(f) = j(f/fc) / (1 + j f/fc)`` (`highpass_response`). `ACCoupling` divides each harmonic
  of the frame by it; the DC term cannot pass, so a drawing that is off centre is first
  balanced to zero mean by a blanked dwell (`balance_dwell`).
* **Z timing.** Z passes the same low-pass and may reach the tube early or late against X/Y;
  `fractional_delay` shifts it by a fraction of a sample, `interface_view` shows the result,
  and `z_timing_pattern` draws a pattern to measure the delay on the tube.

Time is in samples of the frame's rate unless a name says otherwise; drive is in full-scale
units (+-1), drawing space in mm.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np

from .errors import InputError, ProfileError
from .stages import LinearStage, periodic_apply, register_stage

__all__ = ["true_peak", "oversample_periodic", "fractional_delay", "highpass_response",
           "ACCoupling", "balance_dwell", "JumpTiming", "jump_shape", "jump_timing",
           "jump_error", "z_edge", "interface_view", "ZTimingPattern", "z_timing_pattern",
           "QUIET_FROM", "MAX_MOVE_SAMPLES"]

QUIET_FROM = 0.40
"""Fraction of the sample rate above which a jump's spectrum is held down to its design error.
Audio interfaces' reconstruction filters start to cut between about 0.40 and 0.45 of the rate
(common practice, no source): content up there comes out of the converter changed, so a jump
must carry next to none of it."""

MAX_MOVE_SAMPLES = 12
"""Longest shaped move. Its error bound, about 1e-6 of the jump, is far below anything a tube
shows; longer designs would only chase the solver's own tolerance."""

_DESIGN_OVERSAMPLE = 16     # design grid: 16 points per sample between the samples
_DESIGN_REACH = 32          # samples either side of a jump over which its path is held still
_PEAK_BASE_RATE = 48000     # BS.1770-4 Annex 2 states its 4x for 48 kHz signals
_Z_EDGE_MARGIN = 0.8        # a shaped Z edge keeps Z at most 0.8 of z_floor where the beam moves


# --------------------------------------------------------------------------- band limit

def oversample_periodic(x, factor: int) -> np.ndarray:
    """Band-limited periodic interpolation of a looping frame by an integer factor.

    Parameters
    ----------
    x : (n,) or (n, ch) array_like
        One period of the signal.
    factor : int
        Output points per input sample, >= 1.

    Returns
    -------
    (n * factor,) or (n * factor, ch) float64 array
        Every `factor`-th point is the input sample; the points between lie on the one
        periodic signal band-limited to half the input rate that passes through the samples.

    Raises
    ------
    InputError
        If `factor` is not a whole number >= 1 or the frame is empty.

    Notes
    -----
    Zero-padding the DFT is exact for a periodic band-limited signal:
    ``y[m] = (1/n) sum_k X[k] exp(2 pi j k m / (n factor))`` over ``|k| <= n/2``. The term at
    exactly half the rate (even n) is split evenly between +k and -k, so the result is real
    and still passes through the samples.

    Examples
    --------
    >>> y = oversample_periodic([0.0, 1.0, 0.0, -1.0], 2)
    >>> np.round(y, 3).tolist()
    [0.0, 0.707, 1.0, 0.707, 0.0, -0.707, -1.0, -0.707]
    """
    x = _frame_array(x, "x")
    factor = _whole(factor, "factor", 1)
    if factor == 1:
        return x.copy()
    n = len(x)
    spec = np.fft.rfft(x, axis=0)
    if n % 2 == 0:
        spec[-1] *= 0.5
    m = n * factor
    padded = np.zeros((m // 2 + 1,) + x.shape[1:], dtype=complex)
    padded[:len(spec)] = spec
    return np.fft.irfft(padded, n=m, axis=0) * factor


def true_peak(x, rate=None, oversample: int = 4, periodic: bool = True) -> np.ndarray:
    """Peak |value| per channel between the samples as well as on them (ITU-R BS.1770-4 Annex 2).

    Parameters
    ----------
    x : (n,) or (n, ch) array_like
        The signal, full-scale units.
    rate : float, optional
        Sample rate, Hz. Given, the oversampling is raised so the oversampled rate reaches at
        least ``oversample * 48 kHz`` (the standard's 4x is stated for 48 kHz signals); never
        lowered below `oversample`.
    oversample : int
        Oversampling factor, 4 in the standard.
    periodic : bool
        True: `x` is one period of a looping frame, interpolated with wrap-around
        (`oversample_periodic`). False: a signal that starts and stops, interpolated by a
        linear-phase FIR low-pass with zeros before and after it.

    Returns
    -------
    float64 array, shape ``x.shape[1:]``
        The true peak per channel (a 0-d array for 1-d input); ``20 log10`` of it is dBTP.

    Raises
    ------
    InputError
        If `oversample` is not a whole number >= 1, `rate` is not > 0, or `x` is empty.

    Notes
    -----
    Annex 2: oversample by 4 with an interpolating low-pass, take the absolute value, take the
    maximum. 4x finds the peak of any signal band-limited to half the rate to within
    ``cos(pi / 8)`` (-0.69 dB), the worst case being a sine at half the rate; the standard's
    12.04 dB attenuation before the filter only gives fixed-point arithmetic headroom and is
    not needed in floating point.

    Examples
    --------
    A sine at a quarter of the rate sampled 45 degrees off its crests peaks at 0.7071 on the
    samples and at 1.0 between them:

    >>> s = np.sin(2 * np.pi * np.arange(16) / 4 + np.pi / 4)
    >>> round(float(np.abs(s).max()), 4), round(float(true_peak(s)), 4)
    (0.7071, 1.0)
    """
    x = _frame_array(x, "x")
    factor = _whole(oversample, "oversample", 1)
    if rate is not None:
        rate = _positive(rate, "rate")
        factor = max(factor, math.ceil(factor * _PEAK_BASE_RATE / rate - 1e-9))
    if periodic:
        y = oversample_periodic(x, factor)
    else:
        y = _oversample_fir(x, factor)
    return np.abs(y).max(axis=0)


def _oversample_fir(x: np.ndarray, factor: int) -> np.ndarray:
    """Interpolate a non-looping signal by `factor` through a Kaiser-windowed sinc low-pass
    (24 input samples long, -80 dB stopband, cut-off at half the input rate)."""
    if factor == 1:
        return x.copy()
    from scipy import signal
    taps = signal.firwin(24 * factor + 1, 1.0 / factor, window=("kaiser", 8.0))
    return signal.resample_poly(x, factor, 1, axis=0, window=taps)   # it scales by factor


def fractional_delay(x, delay_samples: float) -> np.ndarray:
    """Delay a looping frame by any number of samples, fractions included (band-limited).

    Parameters
    ----------
    x : (n,) or (n, ch) array_like
        One period of the signal.
    delay_samples : float
        Delay in samples; positive comes later, negative earlier. Whole numbers rotate the
        frame exactly.

    Returns
    -------
    float64 array, the shape of `x`

    Raises
    ------
    InputError
        If `delay_samples` is not finite or the frame is empty.

    Notes
    -----
    Each harmonic k of the frame is turned by ``exp(-2 pi j k d / n)``. The term at exactly
    half the rate (even n) can only stay real: it is scaled by ``cos(pi d)``, the real part of
    its delayed self.

    Examples
    --------
    >>> n = np.arange(8)
    >>> y = fractional_delay(np.cos(2 * np.pi * n / 8), 0.5)
    >>> bool(np.allclose(y, np.cos(2 * np.pi * (n - 0.5) / 8)))
    True
    """
    x = _frame_array(x, "x")
    d = float(delay_samples)
    if not math.isfinite(d):
        raise InputError(f"delay_samples must be finite (delay_samples={delay_samples!r})")
    n = len(x)
    if d == round(d):
        return np.roll(x, int(round(d)), axis=0)
    spec = np.fft.rfft(x, axis=0)
    turn = np.exp(-2j * np.pi * np.arange(len(spec)) * d / n)
    spec *= turn.reshape((-1,) + (1,) * (x.ndim - 1))
    return np.fft.irfft(spec, n=n, axis=0)


# --------------------------------------------------------------------------- AC coupling

def highpass_response(f_hz, corner_hz) -> np.ndarray:
    """Gain of a first-order RC high-pass (a coupling capacitor) at the frequencies `f_hz`.

    Parameters
    ----------
    f_hz : array_like
        Frequencies, Hz (any shape).
    corner_hz : float or array_like
        -3 dB corner ``fc = 1 / (2 pi R C)``, Hz, >= 0; broadcast against `f_hz` (a pair
        against ``f_hz[:, None]`` gives one column per axis). 0 means DC-coupled: gain 1.

    Returns
    -------
    complex128 array, the broadcast shape

    Raises
    ------
    InputError
        If a corner is negative or not finite.

    Notes
    -----
    ``H(f) = j (f/fc) / (1 + j f/fc)``, i.e. ``H(jw) = jwRC / (1 + jwRC)``: 0 at DC, 1/sqrt(2)
    at 45 degrees lead at fc, 1 far above it.

    Examples
    --------
    >>> complex(highpass_response(10.0, 10.0))
    (0.5+0.5j)
    """
    f = np.asarray(f_hz, dtype=float)
    fc = np.asarray(corner_hz, dtype=float)
    if not (np.all(np.isfinite(fc)) and np.all(fc >= 0)):
        raise InputError(f"corner_hz must be >= 0 and finite (corner_hz={corner_hz!r})")
    # j r / (1 + j r) = (r^2 + j r) / (1 + r^2), r = f / fc: in real arithmetic
    r = f / np.where(fc > 0, fc, 1.0)
    den = 1.0 + r * r
    out = np.empty(np.broadcast(f, fc).shape, dtype=complex)
    out.real = np.where(fc > 0, r * r / den, 1.0)
    out.imag = np.where(fc > 0, r / den, 0.0)
    return out


class ACCoupling(LinearStage):
    """Stand in front of an AC-coupled output: divide each harmonic of the frame by the
    coupling's high-pass response, so the coupled output is the frame itself.

    Parameters
    ----------
    corner_hz : float or (2,) array_like
        The coupling's -3 dB corner per axis (one number for both), Hz, >= 0; 0 passes all.

    Raises
    ------
    ProfileError
        If a corner is negative or not finite.

    Notes
    -----
    The DC term cannot pass a capacitor: `frame` leaves it as it is and the hardware removes
    it, so the spot lands where the drawing says only when the frame's mean is zero (see
    `balance_dwell`). The division boosts the frame's lowest harmonics by
    ``|1/H| = sqrt(1 + (fc/f)^2)``: `report` gives the resulting peak boost, which can take a
    frame near full scale beyond it.

    Examples
    --------
    >>> t = np.arange(480) / 48000
    >>> frame = np.column_stack([np.sin(2 * np.pi * 100 * t)] * 2)
    >>> stage = ACCoupling(10.0)
    >>> out = stage.frame(frame, 48000)
    >>> bool(np.allclose(stage.hardware(out, 48000), frame))
    True
    """

    name = "ac_coupling"

    def __init__(self, corner_hz=10.0):
        fc = np.broadcast_to(np.asarray(corner_hz, dtype=float), (2,)).copy()
        if not (np.all(np.isfinite(fc)) and np.all(fc >= 0)):
            raise ProfileError(f"corner_hz must be >= 0 and finite (corner_hz={corner_hz!r})")
        self.corner_hz = fc
        self._last: dict = {}

    def response(self, f_hz):
        return highpass_response(np.asarray(f_hz, dtype=float)[:, None], self.corner_hz)

    def saw(self, drive, out, rate, merged=()):
        # a column at a time: a reduction over axis 0 of an (n, 2) array (down its long
        # columns, strided) costs twenty times as much here
        n = len(drive)

        def peak(a):
            return np.array([max(a[:, k].max(), -a[:, k].min()) if n else 0.0
                             for k in range(2)])
        peak_in, peak_out = peak(drive), peak(out)
        self._last = {
            "dc_offset": [float(drive[:, k].sum()) / n if n else 0.0 for k in range(2)],
            "peak_boost": np.divide(peak_out, peak_in, out=np.ones(2),
                                    where=peak_in > 0).tolist(),
        }
        if merged:
            self._last["peak_boost_with"] = list(merged)

    def report(self):
        """``corner_hz``; after a frame: ``dc_offset``, the frame's mean per axis (drive
        units) that the coupling removes, and ``peak_boost``, |out|max / |in|max per axis
        (when the chain divided the frame by this stage and the next linear ones at once,
        ``peak_boost_with`` names them: the boost is then the whole division's)."""
        return {"corner_hz": self.corner_hz.tolist(), **self._last}


def balance_dwell(frame_sum, n_samples: int, reach, *, jump_samples: int = 0,
                  start=(0.0, 0.0)) -> tuple[int, np.ndarray]:
    """The shortest blanked dwell that brings a frame's mean to zero, and where to put it.

    The caller cuts the frame at the drive point `start`, jumps to `point`, dwells `m` samples
    there and jumps back, both jumps `jump_samples` long. Then the frame's new sum
    ``frame_sum + jump_samples * start + (jump_samples + m) * point`` is zero, so an AC-coupled
    output shows the drawing where it is drawn.

    Parameters
    ----------
    frame_sum : (2,) array_like
        Drive summed over the frame's samples, before the dwell and its jumps.
    n_samples : int
        Samples in the frame; a sum below ``1e-12 * n_samples`` counts as balanced already.
    reach : float or (2,) array_like
        Largest |drive| allowed at the dwell point, per axis (> 0): full scale less a margin.
    jump_samples : int
        Samples of each of the two jumps (0: jumps not counted).
    start : (2,) array_like
        Drive point where the frame is cut for the excursion.

    Returns
    -------
    m : int
        Dwell samples at `point` (0 when the jumps alone balance the frame, or it is balanced).
    point : (2,) float64 array
        The dwell point, ``|point| <= reach``.

    Raises
    ------
    InputError
        If `reach` is not > 0, or `n_samples` or `jump_samples` is not a whole number >= 0.

    Notes
    -----
    A jump there and the same jump back (the same `jump_timing` and `jump_shape`) weigh
    exactly as `jump_samples` samples at `start` plus `jump_samples` at `point`: each sample of
    the way back sits at the complementary fraction ``1 - s`` of the way there. Hence
    ``m + T = ceil(max_i |S'_i| / reach_i)`` with ``S' = frame_sum + T * start`` and
    ``point = -S' / (m + T)``, T = `jump_samples`.

    The jump length depends on the distance to `point`, so iterate: start with T = 0; call;
    take T' = ``jump_timing(distance from start to point).total``; stop when T' <= T, else
    call again with T = T'. T only rises and is bounded by the longest jump on the screen, so
    this ends in a few calls. If the last jump needs fewer than T samples, pad its settle to
    T (a jump longer than it needs stays within its tolerance).

    Examples
    --------
    A frame that sums to (30, -12) over 1000 samples, reach 1 per axis:

    >>> m, p = balance_dwell([30.0, -12.0], 1000, 1.0)
    >>> m, p.tolist()
    (30, [-1.0, 0.4])
    """
    s = np.asarray(frame_sum, dtype=float).reshape(2)
    r = np.broadcast_to(np.asarray(reach, dtype=float), (2,))
    if not (np.all(np.isfinite(r)) and np.all(r > 0)):
        raise InputError(f"reach must be > 0 per axis (reach={reach!r})")
    n = _whole(n_samples, "n_samples", 0)
    t = _whole(jump_samples, "jump_samples", 0)
    s = s + t * np.asarray(start, dtype=float).reshape(2)
    if np.abs(s).max() <= 1e-12 * max(n, 1):
        return 0, np.zeros(2) if t == 0 else -s / t
    total = max(1, t, math.ceil(float(np.max(np.abs(s) / r))))
    return total - t, -s / total


# --------------------------------------------------------------------------- blanked jumps

@dataclass(frozen=True)
class JumpTiming:
    """Samples of one blanked jump, in the order they are played.

    Attributes
    ----------
    lead : int
        Samples held at the start point after the last lit sample, before moving; Z dark
        (or on its shaped falling edge, see `z_edge`).
    move : int
        Samples of the shaped move, Z dark; the last lands on the destination (`jump_shape`).
    settle : int
        Samples held at the destination before the next stroke's first lit sample; Z dark
        (or on its shaped rising edge).
    z_edge : int
        Of those held samples, how many carry a shaped Z edge (`z_edge`): the first `z_edge`
        of the lead fall from lit to dark, the last `z_edge` of the settle rise. 0: Z switches
        in one sample, between the last lit sample and the first lead (or move) sample.
    """

    lead: int
    move: int
    settle: int
    z_edge: int = 0

    @property
    def total(self) -> int:
        """All samples of the jump, lit stroke samples at either end excluded."""
        return self.lead + self.move + self.settle


def jump_shape(move_samples: int) -> np.ndarray:
    """Fractions of the way from start to destination for the samples of a shaped move.

    Parameters
    ----------
    move_samples : int
        Samples of the move, 1 to `MAX_MOVE_SAMPLES`.

    Returns
    -------
    (move_samples,) float64 array
        Rising from just above 0 to exactly 1.0 and symmetric (``s[k] + s[-2-k] = 1``); the
        sample before the move is the start point, the last is the destination.

    Raises
    ------
    InputError
        If `move_samples` is not a whole number from 1 to `MAX_MOVE_SAMPLES`.

    Notes
    -----
    The steps ``w = diff(s)`` solve, for each length, the minimax problem

        minimise e  such that  |p(t) - 0| <= e  for t <= -1/2,
                               |p(t) - 1| <= e  for t >= move - 1/2,
                               |W(f)| <= e  for QUIET_FROM <= f <= 1/2,

    where p(t) is the band-limited (ideal low-pass at half the rate) path through the
    samples, t in samples from the first move sample, and W(f) the steps' spectrum (sum 1):
    the path is held still wherever a one-sample Z edge can light it, and next to nothing is
    left where real reconstruction filters cut. It is a small linear program (symmetric
    steps, the path sampled 16 times a sample over 32 samples either side), solved once per
    length with scipy.optimize.linprog and cached. `jump_error` gives the resulting error.

    Examples
    --------
    >>> np.round(jump_shape(4), 3)
    array([0.124, 0.5  , 0.876, 1.   ])
    """
    move = _whole(move_samples, "move_samples", 1)
    if move > MAX_MOVE_SAMPLES:
        raise InputError(f"move_samples must be at most {MAX_MOVE_SAMPLES} "
                         f"(move_samples={move_samples!r})")
    steps = _step_design(move)[0]
    s = np.cumsum(steps)
    s[-1] = 1.0
    return s


def jump_error(move_samples: int) -> float:
    """Worst position error of a `move_samples` shaped jump wherever a one-sample Z edge can
    light it, as a fraction of the jump, through any linear-phase reconstruction filter that
    is flat below `QUIET_FROM` of the rate.

    Returns the design error e of `jump_shape` plus a bound on what a filter can change above
    `QUIET_FROM`: ``2 * integral |W(f)| / sin(pi f) df`` from `QUIET_FROM` to 1/2 (the content
    there, and its image above half the rate, taken as wholly changed). The filter's own
    passband ripple is not counted: it bends every signal alike.

    Examples
    --------
    >>> jump_error(1) > 0.5 > jump_error(4) > jump_error(8)
    True
    """
    move = _whole(move_samples, "move_samples", 1)
    if move > MAX_MOVE_SAMPLES:
        raise InputError(f"move_samples must be at most {MAX_MOVE_SAMPLES} "
                         f"(move_samples={move_samples!r})")
    steps, err = _step_design(move)
    return err + _quiet_band_bound(steps)


def jump_timing(distance_mm: float, rate: float, tol_mm: float = 0.05,
                band_limited: bool = True, z_floor: float | None = None) -> JumpTiming:
    """The shortest blanked jump over `distance_mm` whose ringing stays within `tol_mm`.

    Parameters
    ----------
    distance_mm : float
        Straight distance from start to destination, mm (>= 0).
    rate : float
        Sample rate, Hz. The interface's low-pass scales with its rate, so the counts in
        samples do not depend on it; a jump takes half the time at twice the rate.
    tol_mm : float
        Largest position error the jump may add to a lit sample or the path between lit
        samples, mm (> 0).
    band_limited : bool
        True for an audio interface. False for an output that holds each sample (a waveform
        generator): the plain one-sample jump.
    z_floor : float, optional
        The Z level, as a fraction of lit, below which the tube shows nothing. None: Z switches
        in one sample and positions are right wherever the band-limited Z is above 1/2. Given
        (e.g. 0.05): the Z edges are shaped over held samples at both ends so that Z stays
        under 0.8 * z_floor wherever the beam moves, and positions are right wherever Z is
        above `z_floor`; this costs ``2 * z_edge`` samples.

    Returns
    -------
    JumpTiming

    Raises
    ------
    InputError
        If a distance, rate, tolerance or z_floor is out of range, or the tolerance cannot be
        met within `MAX_MOVE_SAMPLES`.

    Notes
    -----
    The move is the shortest m with ``distance_mm * jump_error(m) <= tol_mm``: the error of a
    shaped jump scales with its length, and each extra move sample divides the relative error
    by 3 to 5, so the move grows with the logarithm of the distance. The design holds the path still
    from half a sample before the first move sample back, and from half a sample after the
    last forward, which is exactly where a one-sample Z edge of a linear-phase filter crosses
    1/2: no held samples are needed. With `z_floor`, Z itself gets a shaped edge of k held
    samples, the least with ``jump_error(k + 1) <= 0.8 * z_floor``.

    Examples
    --------
    >>> jump_timing(1.0, 48000)
    JumpTiming(lead=0, move=4, settle=0, z_edge=0)
    >>> jump_timing(100.0, 48000).total, jump_timing(100.0, 48000, band_limited=False).total
    (8, 1)
    """
    d = float(distance_mm)
    if not (math.isfinite(d) and d >= 0):
        raise InputError(f"distance_mm must be >= 0 and finite (distance_mm={distance_mm!r})")
    _positive(rate, "rate")
    tol = float(tol_mm)
    if not (math.isfinite(tol) and tol > 0):
        raise InputError(f"tol_mm must be > 0 (tol_mm={tol_mm!r})")
    if z_floor is not None and not (0 < float(z_floor) < 1):
        raise InputError(f"z_floor must be between 0 and 1 (z_floor={z_floor!r})")
    if not band_limited:
        return JumpTiming(0, 1, 0)
    move = _shortest_move(lambda m: d * jump_error(m) <= tol)
    if move is None:
        raise InputError(f"tol_mm={tol_mm!r} is too fine for a jump of {d:g} mm: a shaped "
                         f"jump of {MAX_MOVE_SAMPLES} samples reaches "
                         f"{d * jump_error(MAX_MOVE_SAMPLES):.3g} mm")
    if z_floor is None:
        return JumpTiming(0, move, 0)
    edge = _shortest_move(lambda m: jump_error(m) <= _Z_EDGE_MARGIN * float(z_floor))
    if edge is None:
        raise InputError(f"z_floor={z_floor!r} is too low for a shaped Z edge of at most "
                         f"{MAX_MOVE_SAMPLES - 1} samples")
    return JumpTiming(edge - 1, move, edge - 1, edge - 1)


def z_edge(samples: int) -> np.ndarray:
    """Z levels of a shaped rising Z edge, for `samples` held samples before the first lit one.

    Parameters
    ----------
    samples : int
        Held samples that carry the edge, 0 to ``MAX_MOVE_SAMPLES - 1``.

    Returns
    -------
    (samples,) float64 array
        Levels strictly between 0 (dark) and 1 (lit), rising; reverse it for a falling edge
        after the last lit sample.

    Notes
    -----
    The edge is ``jump_shape(samples + 1)`` without its final 1.0, which is the first lit
    sample itself: band-limited, Z then stays within ``jump_error(samples + 1)`` of dark from
    half a sample after the last move sample back, where the beam may be moving. A one-sample
    Z edge instead rings at half the rate, with lobes near 0.05 of lit two samples out.

    Examples
    --------
    >>> np.round(z_edge(3), 3)
    array([0.124, 0.5  , 0.876])
    """
    k = _whole(samples, "samples", 0)
    if k >= MAX_MOVE_SAMPLES:
        raise InputError(f"samples must be less than {MAX_MOVE_SAMPLES} (samples={samples!r})")
    return jump_shape(k + 1)[:-1].copy()


def _shortest_move(ok) -> int | None:
    for m in range(1, MAX_MOVE_SAMPLES + 1):
        if ok(m):
            return m
    return None


@functools.lru_cache(maxsize=None)
def _step_design(move: int) -> tuple[np.ndarray, float]:
    """(steps, design error e) of the shaped move of `move` samples: the stored solution
    (`vectorgen/data/jump_shapes.json`, so a render needs no solver), else `design_steps`."""
    stored = _stored_steps().get(move)
    if stored is not None:
        return stored
    return design_steps(move)


@functools.lru_cache(maxsize=1)
def _stored_steps() -> dict:
    import json
    import os

    path = os.path.join(os.path.dirname(__file__), "data", "jump_shapes.json")
    try:
        with open(path, encoding="utf-8") as fh:
            data = json.load(fh)
    except (OSError, ValueError):
        return {}
    if data.get("quiet_from") != QUIET_FROM:
        return {}
    return {int(k): (np.array(v["steps"], dtype=float), float(v["design_error"]))
            for k, v in data["moves"].items()}


def design_steps(move: int) -> tuple[np.ndarray, float]:
    """(steps, design error e) of the shaped move of `move` samples, solved (see `jump_shape`)."""
    if move == 1:
        steps = np.ones(1)
        return steps, _held_error(steps)
    from scipy.optimize import linprog
    half = (move + 1) // 2
    k = np.arange(move)
    sym = np.zeros((move, half))
    sym[k, np.minimum(k, move - 1 - k)] = 1.0       # steps symmetric: half of them are free
    paths, target = _step_paths(move)
    rows = paths @ sym
    f = np.linspace(QUIET_FROM, 0.5, 64)
    amp = np.cos(2 * np.pi * np.outer(f, k - (move - 1) / 2)) @ sym  # zero-phase spectrum
    one = np.ones((len(rows), 1))
    a_ub = np.vstack([np.hstack([rows, -one]), np.hstack([-rows, -one]),
                      np.hstack([amp, -one[:len(f)]]), np.hstack([-amp, -one[:len(f)]])])
    b_ub = np.concatenate([target, -target, np.zeros(2 * len(f))])
    a_eq = np.hstack([sym.sum(axis=0), [0.0]])[None, :]
    cost = np.zeros(half + 1)
    cost[-1] = 1.0
    res = linprog(cost, A_ub=a_ub, b_ub=b_ub, A_eq=a_eq, b_eq=[1.0],
                  bounds=[(None, None)] * half + [(0, None)], method="highs")
    if res.status != 0:             # not expected: the problem is always feasible
        raise RuntimeError(f"jump shape design for move_samples={move} failed: {res.message}")
    steps = sym @ res.x[:half]
    return steps, max(float(res.x[-1]), _held_error(steps))


@functools.lru_cache(maxsize=None)
def _step_paths(move: int) -> tuple[np.ndarray, np.ndarray]:
    """Band-limited paths of the unit steps at each move sample, at the design times where the
    jump must hold still, and the value it must hold there (0 before, 1 after).

    The design frame loops: a rise at the move, a fall half a period later, far enough
    (2 * _DESIGN_REACH + move samples) that each design window sees only its own step."""
    period = 4 * _DESIGN_REACH + 2 * move
    fine = _DESIGN_OVERSAMPLE
    origin = _DESIGN_REACH                         # first move sample
    pulses = np.zeros((period, move))
    for j in range(move):
        pulses[origin + j:origin + j + period // 2, j] = 1.0
    paths = oversample_periodic(pulses, fine)
    t = np.arange(period * fine) / fine - origin
    before = (t <= -0.5) & (t >= -_DESIGN_REACH)
    after = (t >= move - 0.5) & (t <= move - 1 + _DESIGN_REACH)
    keep = before | after
    return paths[keep], after[keep].astype(float)


def _held_error(steps: np.ndarray) -> float:
    """Worst departure of the band-limited path of the step `cumsum(steps)` from 0 before it
    and 1 after it (the design times of `_step_paths`)."""
    paths, target = _step_paths(len(steps))
    return float(np.abs(paths @ steps - target).max())


def _quiet_band_bound(steps: np.ndarray) -> float:
    f = np.linspace(QUIET_FROM, 0.5, 257)
    k = np.arange(len(steps)) - (len(steps) - 1) / 2
    amp = np.abs(np.cos(2 * np.pi * np.outer(f, k)) @ steps)
    integrand = amp / np.sin(np.pi * f)
    return float(2 * np.sum((integrand[1:] + integrand[:-1]) / 2 * np.diff(f)))


# --------------------------------------------------------------------------- what the tube sees

def interface_view(signal_xy, z, rate: float, band_limited: bool = True,
                   corner_hz=0.0, z_delay_us: float = 0.0, oversample: int = 4,
                   z_corner_hz: float = 0.0):
    """What the tube sees of a looping frame played through the interface.

    Parameters
    ----------
    signal_xy : (n, 2) array_like
        X and Y as played (full-scale units).
    z : (n,) array_like
        Z as played (0 dark, 1 lit).
    rate : float
        Sample rate, Hz.
    band_limited : bool
        True for an audio interface (band-limited periodic interpolation between samples);
        False for an output that holds each sample (zero-order hold).
    corner_hz : float or (2,) array_like
        The X/Y coupling's high-pass corner, Hz (0: DC-coupled).
    z_delay_us : float
        How much later Z reaches the tube than X/Y, microseconds (negative: earlier).
    oversample : int
        Points shown per sample.
    z_corner_hz : float
        The Z path's high-pass corner, Hz; 0 (the default) for a DC-coupled or DC-restored Z
        input. A coupled Z loses its mean: its blank level moves with the frame's duty cycle.

    Returns
    -------
    xy : (n * oversample, 2) float64 array
    z : (n * oversample,) float64 array
    rate_out : float
        ``rate * oversample``.

    Raises
    ------
    InputError
        If the shapes disagree or a value is out of range.

    Notes
    -----
    Every stage is the steady state of the loop. The high-pass acts on the oversampled
    signal, so with zero-order hold it sees the staircase the output really holds; the Z
    delay is band-limited (`fractional_delay`) in the first case and a shift of the
    staircase, to the nearest output point, in the second.

    Examples
    --------
    >>> xy = np.column_stack([np.sin(2 * np.pi * np.arange(32) / 32)] * 2)
    >>> v_xy, v_z, r = interface_view(xy, np.ones(32), 48000, oversample=2)
    >>> v_xy.shape, r, bool(np.allclose(v_xy[::2], xy))
    ((64, 2), 96000, True)
    """
    xy = _frame_array(signal_xy, "signal_xy")
    zz = _frame_array(z, "z")
    if xy.ndim != 2 or xy.shape[1] != 2:
        raise InputError(f"signal_xy must be (n, 2) (signal_xy shape={xy.shape})")
    if zz.shape != (len(xy),):
        raise InputError(f"z must be (n,) with n={len(xy)} (z shape={zz.shape})")
    rate = _positive(rate, "rate")
    factor = _whole(oversample, "oversample", 1)
    delay = float(z_delay_us)
    if not math.isfinite(delay):
        raise InputError(f"z_delay_us must be finite (z_delay_us={z_delay_us!r})")
    rate_out = rate * factor
    if band_limited:
        fine_xy = oversample_periodic(xy, factor)
        fine_z = oversample_periodic(fractional_delay(zz, delay * 1e-6 * rate), factor)
    else:
        fine_xy = np.repeat(xy, factor, axis=0)
        fine_z = np.roll(np.repeat(zz, factor), int(round(delay * 1e-6 * rate_out)))
    corners = np.broadcast_to(np.asarray(corner_hz, dtype=float), (2,))
    if np.any(corners != 0):
        fine_xy = periodic_apply(fine_xy, rate_out,
                                 lambda f: highpass_response(f[:, None], corners))
    if z_corner_hz:
        fine_z = periodic_apply(fine_z[:, None], rate_out,
                                lambda f: highpass_response(f[:, None], z_corner_hz))[:, 0]
    return fine_xy, fine_z, (int(rate_out) if float(rate_out).is_integer() else rate_out)


# --------------------------------------------------------------------------- Z timing pattern

@dataclass(frozen=True)
class ZTimingPattern:
    """Geometry of a pattern that shows the Z timing on the tube.

    Attributes
    ----------
    polylines : list of (k, 2) float64 arrays
        All strokes in drawing order, mm: the dashes first, then the ticks.
    dashes : list of (2, 2) float64 arrays
        The dashes from the top row down, each from its first point to its last: even rows
        left to right, odd rows right to left, so the way from one row to the next is a
        short vertical jump.
    ticks : list of (2, 2) float64 arrays
        Vertical tick marks under the rows at both ends (a Z error moves their lit part along
        them, never sideways). The first tick of each end, longer, marks the dash ends.
    mm_per_us : float
        How far a dash end moves per microsecond of Z error at the writing speed.
    tick_us : float
        Z error per tick spacing, microseconds.
    text : str
        How to read it.
    """

    polylines: list
    dashes: list
    ticks: list
    mm_per_us: float
    tick_us: float
    text: str


_NICE_TICK_US = (0.5, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0, 200.0, 500.0, 1000.0)


def z_timing_pattern(writing_speed_mm_per_s: float, dash_mm: float = 20.0, rows: int = 6,
                     row_pitch_mm: float = 2.0, tick_us: float | None = None,
                     ticks: int = 8, centre_mm=(0.0, 0.0),
                     min_tick_mm: float = 0.5) -> ZTimingPattern:
    """Rows of dashes drawn alternately left to right and right to left, whose ends line up
    only when Z is on time, over a scale of ticks to read the error off the tube.

    Parameters
    ----------
    writing_speed_mm_per_s : float
        Speed the dashes will be drawn at, mm/s (> 0). Faster shows a smaller error: at
        1 mm per sample and 48 kHz one microsecond is 0.048 mm.
    dash_mm : float
        Dash length, mm.
    rows : int
        Rows of dashes (>= 2).
    row_pitch_mm : float
        Distance between rows, mm.
    tick_us : float, optional
        Z error per tick spacing, microseconds; None picks the smallest of 0.5, 1, 2, 5, 10,
        20 ... whose ticks are at least `min_tick_mm` apart.
    ticks : int
        Ticks after the zero tick at each end, inwards (>= 1).
    centre_mm : (2,) array_like
        Centre of the pattern, mm.
    min_tick_mm : float
        Smallest tick spacing `tick_us` = None may choose, mm.

    Returns
    -------
    ZTimingPattern

    Raises
    ------
    InputError
        If a length, count or speed is out of range.

    Notes
    -----
    A dash is lit from when Z turns on to when it turns off. If Z reaches the tube t late,
    the beam has already run ``v t`` into the dash when it lights, and stands at the dash end
    (or leaves it sideways, down to the next row) when it goes dark: every dash loses
    ``v t`` at the end it starts from. If Z is t early, every dash loses ``v t`` at the end
    it finishes at. Neighbouring rows run opposite ways, so at each end of the pattern every
    second row is short by ``d = v |t|``: the Z error is ``d / v``. Late shortens the
    left-to-right rows (the top row and every second one) at the left; early shortens them
    at the right. This holds as long as the beam stops at dash ends or leaves them sideways,
    which the vertical jumps between rows do.

    Examples
    --------
    >>> p = z_timing_pattern(48000.0, tick_us=10.0)
    >>> len(p.dashes), round(p.mm_per_us, 3), p.dashes[1][0].tolist()
    (6, 0.048, [10.0, 3.0])
    """
    v = _positive(writing_speed_mm_per_s, "writing_speed_mm_per_s")
    dash = _positive(dash_mm, "dash_mm")
    pitch = _positive(row_pitch_mm, "row_pitch_mm")
    n_rows = _whole(rows, "rows", 2)
    n_ticks = _whole(ticks, "ticks", 1)
    min_tick = _positive(min_tick_mm, "min_tick_mm")
    cx, cy = np.asarray(centre_mm, dtype=float).reshape(2)
    mm_per_us = v * 1e-6
    if tick_us is None:
        tick = next((t for t in _NICE_TICK_US if t * mm_per_us >= min_tick), _NICE_TICK_US[-1])
    else:
        tick = _positive(tick_us, "tick_us")
    spacing = tick * mm_per_us
    if n_ticks * spacing > dash / 2:
        raise InputError(f"ticks={ticks!r} of {spacing:.3g} mm do not fit in half a dash "
                         f"(dash_mm={dash_mm!r}): fewer ticks or a smaller tick_us")
    left, right = cx - dash / 2, cx + dash / 2
    top = cy + (n_rows - 1) * pitch / 2
    dashes = []
    for i in range(n_rows):
        y = top - i * pitch
        ends = [[left, y], [right, y]] if i % 2 == 0 else [[right, y], [left, y]]
        dashes.append(np.array(ends, dtype=float))
    y0 = top - (n_rows - 1) * pitch - pitch / 2
    tick_list = []
    for end, inwards in ((left, 1.0), (right, -1.0)):
        for j in range(n_ticks + 1):
            x = end + inwards * j * spacing
            length = 2.0 * pitch if j == 0 else (1.4 * pitch if j % 5 == 0 else pitch)
            tick_list.append(np.array([[x, y0], [x, y0 - length]], dtype=float))
    text = (f"Z timing (dashes drawn at {v / 1000:g} mm/ms; the top row runs left to right, "
            f"the next right to left, and so on). With Z on time every dash end sits over the "
            f"long tick at its end of the pattern. Otherwise, at each end every second row "
            f"falls short: count the ticks from the long one to the short ends, each tick is "
            f"{tick:g} us ({spacing:.3g} mm); ends d mm short mean Z is d / {mm_per_us:.3g} us "
            f"off. Late Z shortens each dash where it starts (the left-to-right rows at the "
            f"left), early Z where it ends (the left-to-right rows at the right).")
    return ZTimingPattern(polylines=dashes + tick_list, dashes=dashes, ticks=tick_list,
                          mm_per_us=mm_per_us, tick_us=tick, text=text)


# --------------------------------------------------------------------------- helpers

def _frame_array(x, name: str) -> np.ndarray:
    a = np.asarray(x, dtype=float)
    if a.ndim not in (1, 2) or len(a) == 0:
        raise InputError(f"{name} must be a non-empty (n,) or (n, ch) array "
                         f"({name} shape={a.shape})")
    return a


def _whole(value, name: str, least: int) -> int:
    try:
        v = int(value)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a whole number >= {least} ({name}={value!r})") from None
    if v != value or v < least:
        raise InputError(f"{name} must be a whole number >= {least} ({name}={value!r})")
    return v


def _positive(value, name: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a number > 0 ({name}={value!r})") from None
    if not (math.isfinite(v) and v > 0):
        raise InputError(f"{name} must be > 0 ({name}={value!r})")
    return v


register_stage("ac_coupling", ACCoupling)

"""Loopback measurement of an audio interface: each output's AC-coupling corner and the round trip.

A probe (slow steps and a log sweep, one channel at a time) is played on the outputs and recorded
on inputs wired back from them; each channel's recording is fitted, by least squares, to the
played probe through a first-order high-pass with an unknown corner, an unknown gain and offset
and an unknown delay. The results feed the interface's profile (the lead writes them there).

Wiring
    Output channel k to input channel k, line level, one cable per channel (a second interface's
    inputs will do). No amplifier and no yoke connected while probing: the probe holds steps for
    tenths of a second, which is harmless on a line input and not what a deflection amplifier
    should be given. Set the input gain so that 0.5 FS played does not clip; the probe never
    records above 0.5 FS through a unity loop. The channels are probed one after the other, the
    others held quiet, so an input that hears the wrong output (a crossed cable) or nothing (an
    unplugged one) is reported rather than fitted.

Model
    For channel k, with played samples x and recorded samples r,

        r[n] = g * (h_in * h_out * x)[n - D] + c + noise,

    h_out the output's coupling (corner f_c, unknown), h_in the input's (corner f_in, known),
    g the loop gain, c an offset, D the round trip in samples (integer part found by
    cross-correlating the first differences of x and r, which whitens the probe and is blind
    to the slow high-pass; the fit then refines it to a fraction of a sample with a band-limited
    delay). Each high-pass is the RC high-pass of any circuits textbook,
    H(s) = s / (s + 2 pi f_c), discretised by the bilinear transform prewarped at its corner:

        K = tan(pi f_c / f_s),   H(z) = (1 - z^-1) / ((1 + K) - (1 - K) z^-1).

    The prewarp puts the digital filter's -3 dB, 45 degree point exactly at the continuous
    corner, and the bilinear map keeps H = 0 at DC and H = 1 at Nyquist (the continuous
    filter's values at 0 and infinity); elsewhere below a few hundred hertz the warp of the
    frequency axis is a relative (pi f / f_s)^2 / 3, under 1e-5 at 48 kHz: so the fitted
    corner is the continuous one. g and c enter linearly and are solved for in closed form at
    every step (variable projection); f_c and D go to `scipy.optimize.least_squares`.

The input's own coupling
    The loop is the output's high-pass and then the input's, in series, and the product of the
    two is symmetric in the two corners: swapping them changes nothing in the recording, so one
    loop cannot tell which corner belongs to which side. The input's corner is therefore an
    assumption the caller states (`input_corner_hz`): 0 when the input is DC-coupled, or the
    value from the input's data sheet, or a value measured separately by this same fit with the
    input fed from a source known to be DC-coupled (a DC-coupled output or a signal generator),
    where the fitted corner is then the input's. Fitting with 0 while the input is in fact
    AC-coupled lumps both corners into one, too high.

Examples
--------
>>> x = probe_signal(8000, 2)
>>> x.shape, x.dtype.name
((58000, 2), 'float32')
"""

from __future__ import annotations

import threading
import warnings
from dataclasses import dataclass
from enum import Enum

import numpy as np

from .errors import DeviceError, InputError, VectorgenWarning

__all__ = ["FitStatus", "ChannelFit", "probe_signal", "fit_loopback", "measure_loopback",
           "highpass_coefficients", "LEAD_IN_S", "TAIL_S", "CHANNEL_SECONDS",
           "MIN_CHANNEL_SECONDS", "STEP_LEVEL_FS", "SWEEP_LEVEL_FS"]

# Levels kept modest: a yoke or an amplifier may be left connected by mistake, and a sustained
# full-scale drive is what would hurt it. Steps of +-0.25 FS through a high-pass swing the
# recording by at most 0.5 FS (a step from a settled -0.25 to +0.25), the sweep peaks at 0.5 FS.
STEP_LEVEL_FS = 0.25
SWEEP_LEVEL_FS = 0.5
LEAD_IN_S = 0.5          # quiet start: the stream and the inputs settle, the loop gets wired up
TAIL_S = 0.75            # quiet end: the longest round trip the probe can still see whole
CHANNEL_SECONDS = 3.0    # default probe time per channel
MIN_CHANNEL_SECONDS = 1.0
EDGE_MS = 0.5            # raised-cosine edges: the steps stay inside any interface's pass band
SWEEP_LOW_HZ = 5.0
SWEEP_FADE_S = 0.02
# Shares of each channel's segment: four step half-periods, a rest, the sweep, a gap. A half
# period of 0.14 * 3 s = 0.42 s is 1.3 time constants of a 0.5 Hz corner and 130 of a 50 Hz one:
# every corner of 0.5-50 Hz shows its decay.
STEP_SHARE, REST_SHARE, SWEEP_SHARE = 0.56, 0.04, 0.30

SILENCE_DBFS = -70.0     # a recording quieter than this (RMS) got no signal
MIN_MATCH = 0.3          # normalised cross-correlation below this: not the probe coming back
POOR_FIT = 0.1           # residual RMS over recorded RMS above this: the model does not hold
CLIP_FS = 0.999
DC_COUPLED_HZ = 0.05     # corners below this are reported as DC-coupled
STREAM_MARGIN_S = 15.0   # how much longer than the probe the stream may take before we give up


class FitStatus(str, Enum):
    """What a channel's fit came to (a string, so results serialise as they are)."""

    OK = "ok"
    NO_SIGNAL = "no signal"
    NO_MATCH = "no match"
    MISWIRED = "miswired"
    CLIPPED = "clipped"
    TRUNCATED = "truncated"
    OUT_OF_RANGE = "out of range"
    POOR_FIT = "poor fit"


@dataclass(frozen=True)
class ChannelFit:
    """The loopback fit of one channel (output k recorded on input k).

    Attributes
    ----------
    channel : int
        Channel number k, from 0.
    corner_hz : float
        The output's high-pass corner (nan when the channel could not be fitted).
    latency_samples : int
        The round trip, whole samples: the fitted delay rounded (the fit starts from the
        cross-correlation's peak and stays within 1.5 samples of it); -1 when not fitted.
    fraction_samples : float
        The fitted delay minus `latency_samples`, in [-0.5, 0.5] (nan when not fitted).
    gain : float
        Loop gain in the pass band (negative when a side inverts).
    offset_fs : float
        Constant offset of the recording.
    rms_residual : float
        RMS of recorded minus model over the fitted window, in FS.
    relative_residual : float
        `rms_residual` over the recording's RMS in the same window.
    match : float
        Normalised cross-correlation of this input with its own output (1 = a clean loop).
    input_corner_hz : float
        The input corner the fit assumed.
    status : FitStatus
        OK or the first problem found.
    verdict : str
        One line for the user.
    """

    channel: int
    corner_hz: float
    latency_samples: int
    fraction_samples: float
    gain: float
    offset_fs: float
    rms_residual: float
    relative_residual: float
    match: float
    input_corner_hz: float
    status: FitStatus
    verdict: str

    @property
    def ok(self) -> bool:
        """True when the fit can go into the profile."""
        return self.status is FitStatus.OK

    @property
    def delay_samples(self) -> float:
        """The fitted round trip with its fraction."""
        return self.latency_samples + self.fraction_samples


# --- the probe -----------------------------------------------------------------------------------

def probe_signal(rate: int, channels: int, seconds: float | None = None) -> np.ndarray:
    """The loopback probe: a quiet lead-in, then each channel in turn (the others quiet) with
    slow steps and a log sweep, then a quiet tail.

    Parameters
    ----------
    rate : int
        Sample rate, Hz.
    channels : int
        Number of channels to probe.
    seconds : float, optional
        Whole length of the probe; by default ``LEAD_IN_S + channels * CHANNEL_SECONDS +
        TAIL_S``. Each channel gets ``(seconds - LEAD_IN_S - TAIL_S) / channels``, at least
        `MIN_CHANNEL_SECONDS`.

    Returns
    -------
    numpy.ndarray
        (n, channels) float32, n = round(seconds * rate).

    Raises
    ------
    InputError
        For a rate, channel count or length that cannot make a probe.

    Notes
    -----
    A channel's segment of length S holds a square wave of +-`STEP_LEVEL_FS` (four half
    periods of 0.14 S, edges a 0.5 ms raised cosine), a rest, a log sweep of `SWEEP_LEVEL_FS`
    from 5 Hz to rate / 8 over 0.3 S (phase 2 pi f0 T / ln(f1/f0) (exp(t ln(f1/f0) / T) - 1),
    20 ms fades) and a quiet gap. The steps show the high-pass decay, the sweep gives the
    cross-correlation a sharp peak; both stay well inside an interface's pass band.

    Examples
    --------
    >>> x = probe_signal(48000, 2)
    >>> x.shape, float(abs(x).max()) <= 0.5
    ((348000, 2), True)
    >>> bool(np.all(np.count_nonzero(x, axis=1) <= 1))    # one channel at a time
    True
    """
    rate = _check_rate(rate)
    if isinstance(channels, bool) or not isinstance(channels, (int, np.integer)) or channels < 1:
        raise InputError(f"channels must be a whole number >= 1 (channels={channels!r})",
                         "channels")
    if seconds is None:
        seconds = LEAD_IN_S + channels * CHANNEL_SECONDS + TAIL_S
    least = LEAD_IN_S + channels * MIN_CHANNEL_SECONDS + TAIL_S
    if not np.isfinite(seconds) or seconds < least:
        raise InputError(f"seconds must be at least {least:g} for {channels} channel(s) "
                         f"(seconds={seconds!r})", "seconds")
    n = int(round(seconds * rate))
    lead, tail = int(round(LEAD_IN_S * rate)), int(round(TAIL_S * rate))
    seg = (n - lead - tail) // channels
    one = channel_probe(rate, seg)
    out = np.zeros((n, channels), dtype=np.float32)
    for k in range(channels):
        out[lead + k * seg:lead + (k + 1) * seg, k] = one
    return out


def channel_probe(rate: int, n: int) -> np.ndarray:
    """One channel's segment of the probe (steps, rest, sweep, gap), n samples, float64."""
    half = int(STEP_SHARE * n / 4)
    rest = int(REST_SHARE * n)
    sweep_n = int(SWEEP_SHARE * n)
    steps = np.repeat(STEP_LEVEL_FS * np.array([1.0, -1.0, 1.0, -1.0]), half)
    steps = _soft_edges(np.concatenate([[0.0], steps, np.zeros(rest)]), rate)[1:]
    sweep = log_sweep(rate, sweep_n, SWEEP_LOW_HZ, rate / 8.0) * SWEEP_LEVEL_FS
    out = np.zeros(n)
    out[:len(steps)] = steps
    out[len(steps):len(steps) + sweep_n] = sweep
    return out


def log_sweep(rate: int, n: int, low_hz: float, high_hz: float) -> np.ndarray:
    """n samples of a unit log sweep from low_hz to high_hz with raised-cosine fades."""
    t = np.arange(n) / rate
    span = n / rate
    growth = np.log(high_hz / low_hz)
    x = np.sin(2 * np.pi * low_hz * span / growth * np.expm1(t * growth / span))
    fade = min(int(SWEEP_FADE_S * rate), n // 4)
    if fade > 0:
        w = 0.5 - 0.5 * np.cos(np.pi * np.arange(fade) / fade)
        x[:fade] *= w
        x[n - fade:] *= w[::-1]
    return x


def _soft_edges(levels: np.ndarray, rate: int) -> np.ndarray:
    """Levels with every jump spread over EDGE_MS by a unit-area Hann kernel (raised cosine)."""
    m = max(int(EDGE_MS * 1e-3 * rate), 1)
    if m < 2:
        return levels
    kernel = np.hanning(m + 2)[1:-1]
    kernel /= kernel.sum()
    padded = np.concatenate([levels, np.full(m, levels[-1])])
    return np.convolve(padded, kernel)[:len(levels)]


# --- the fit -------------------------------------------------------------------------------------

def highpass_coefficients(corner_hz: float, rate: float) -> tuple[np.ndarray, np.ndarray]:
    """(b, a) for `scipy.signal.lfilter`: the first-order RC high-pass, bilinear transform
    prewarped at the corner (corner 0 gives the identity).

    Notes
    -----
    K = tan(pi f_c / f_s); b = [1, -1] / (1 + K); a = [1, (K - 1) / (K + 1)].

    Examples
    --------
    >>> b, a = highpass_coefficients(0.0, 48000)
    >>> b.tolist(), a.tolist()
    ([1.0, 0.0], [1.0, 0.0])
    """
    if corner_hz <= 0.0:
        return np.array([1.0, 0.0]), np.array([1.0, 0.0])
    k = np.tan(np.pi * corner_hz / rate)
    return np.array([1.0, -1.0]) / (1.0 + k), np.array([1.0, (k - 1.0) / (k + 1.0)])


def fit_loopback(played, recorded, rate: int, input_corner_hz=0.0) -> list[ChannelFit]:
    """Fit each channel's output high-pass corner, gain and round-trip delay from a loopback.

    Parameters
    ----------
    played : array_like
        (n, channels) samples played (the probe, or any signal with quiet lead-in and tail).
    recorded : array_like
        (n, channels) samples recorded on input k wired from output k, same start as `played`
        (as `sounddevice.playrec` returns them).
    rate : int
        Sample rate, Hz.
    input_corner_hz : float or sequence of float
        The inputs' own high-pass corners, assumed known (0 = DC-coupled); one for all channels
        or one per channel. See the module docstring for why the loop cannot measure them.

    Returns
    -------
    list of ChannelFit
        One per channel; check `ChannelFit.ok` / `status` before using a result.

    Raises
    ------
    InputError
        For arrays of the wrong shape, non-finite samples, a bad rate or input corner.

    Notes
    -----
    Model r[n] = g (h_in * h_out * x)[n - D] + c; h_out, h_in first-order high-passes
    (`highpass_coefficients`); least squares over (f_c, D) with (g, c) projected out.

    Examples
    --------
    >>> from scipy.signal import butter, lfilter
    >>> x = probe_signal(8000, 1)
    >>> b, a = butter(1, 10.0, 'high', fs=8000)
    >>> r = np.concatenate([np.zeros(100), lfilter(b, a, x[:-100, 0])])[:, None]
    >>> fit = fit_loopback(x, r, 8000)[0]
    >>> fit.ok, round(fit.corner_hz, 3), fit.latency_samples
    (True, 10.0, 100)
    """
    rate = _check_rate(rate)
    x, r = _check_pair(played, recorded)
    n, channels = x.shape
    corners_in = _check_input_corners(input_corner_hz, channels, rate)
    # the longest round trip that still records the whole probe: a longer lag would pair an
    # input with a later channel's segment (the segments are alike) and hide a crossed cable
    active = np.flatnonzero(np.any(x != 0, axis=1))
    max_lag = max(1, n - 1 - int(active[-1])) if active.size else 1
    match, lag = cross_match(x, r, max_lag)
    return [_fit_channel(k, x[:, k], r[:, k], rate, corners_in[k], match[k], lag[k], max_lag)
            for k in range(channels)]


def cross_match(played: np.ndarray, recorded: np.ndarray,
                max_lag: int) -> tuple[np.ndarray, np.ndarray]:
    """For every input j and output k: the normalised cross-correlation peak of their first
    differences over lags 0..max_lag (match[j, k], 0..1) and its lag in samples (lag[j, k],
    with a parabolic fraction)."""
    from scipy import fft

    dx, dr = np.diff(played, axis=0), np.diff(recorded, axis=0)
    m = len(dx)
    nfft = fft.next_fast_len(2 * m)
    spec_x, spec_r = fft.rfft(dx, nfft, axis=0), fft.rfft(dr, nfft, axis=0)
    norm_x, norm_r = np.linalg.norm(dx, axis=0), np.linalg.norm(dr, axis=0)
    ch = played.shape[1]
    match, lag = np.zeros((ch, ch)), np.zeros((ch, ch))
    for j in range(ch):
        for k in range(ch):
            c = np.abs(fft.irfft(spec_r[:, j] * np.conj(spec_x[:, k]), nfft)[:max_lag + 1])
            i = int(np.argmax(c))
            scale = norm_x[k] * norm_r[j]
            match[j, k] = c[i] / scale if scale > 0 else 0.0
            lag[j, k] = i + _parabola_peak(c, i)
    return match, lag


def _parabola_peak(c: np.ndarray, i: int) -> float:
    if i == 0 or i == len(c) - 1:
        return 0.0
    den = c[i - 1] - 2 * c[i] + c[i + 1]
    return 0.0 if den == 0 else float(np.clip(0.5 * (c[i - 1] - c[i + 1]) / den, -0.5, 0.5))


def _fit_channel(k, x, r, rate, corner_in, match_row, lag_row, max_lag) -> ChannelFit:
    active = np.flatnonzero(x)
    nan = float("nan")

    def result(status, verdict, corner=nan, delay=nan, gain=nan, offset=nan, res=nan, rel=nan):
        whole = int(round(delay)) if np.isfinite(delay) else -1
        frac = float(delay - whole) if np.isfinite(delay) else nan
        return ChannelFit(k, float(corner), whole, frac, float(gain), float(offset), float(res),
                          float(rel), float(match_row[k]), float(corner_in), status, verdict)

    if active.size == 0:
        return result(FitStatus.NO_SIGNAL, f"channel {k}: nothing was played on output {k}")
    s0, s1 = int(active[0]), int(active[-1])
    w0 = max(0, s0 - 8)
    rms_all = float(np.sqrt(np.mean(r[w0:] ** 2)))
    if rms_all < 10 ** (SILENCE_DBFS / 20):
        return result(FitStatus.NO_SIGNAL,
                      f"channel {k}: input {k} got no signal ({_dbfs(rms_all)} RMS): check that "
                      f"output {k} is wired to input {k} and the input is up")
    best = int(np.argmax(match_row))
    if best != k and match_row[best] > 2 * match_row[k]:
        return result(FitStatus.MISWIRED,
                      f"channel {k}: input {k} hears output {best}, not output {k}: wire "
                      f"output {k} to input {k}")
    if match_row[k] < MIN_MATCH:
        return result(FitStatus.NO_MATCH,
                      f"channel {k}: what input {k} recorded does not match the probe "
                      f"(match {match_row[k]:.2f}): check the wiring, hum and the input level")

    d0 = float(lag_row[k])
    w1 = min(len(r), s1 + int(np.ceil(d0)) + int(0.1 * rate))
    corner, delay, gain, offset, res = _least_squares(x, r[w0:w1], w0, rate, corner_in, d0)
    rms = float(np.sqrt(np.mean(r[w0:w1] ** 2)))
    rms_res = float(np.sqrt(np.mean(res ** 2)))
    rel = rms_res / rms
    fitted = dict(corner=corner, delay=delay, gain=gain, offset=offset, res=rms_res, rel=rel)
    peak = float(np.max(np.abs(r[w0:w1])))
    if peak >= CLIP_FS:
        return result(FitStatus.CLIPPED, f"channel {k}: input {k} clipped (peak {peak:.3f} FS): "
                      f"turn the input gain down", **fitted)
    if d0 >= max_lag - 1:
        return result(FitStatus.TRUNCATED,
                      f"channel {k}: the round trip ({delay:.0f} samples or more) is longer than "
                      f"the probe's quiet tail ({max_lag} samples)", **fitted)
    if corner >= 0.99 * _corner_limit(rate):
        return result(FitStatus.OUT_OF_RANGE,
                      f"channel {k}: the loop cuts far above any AC coupling (corner >= "
                      f"{_corner_limit(rate):.0f} Hz): is something else in the loop?", **fitted)
    if rel > POOR_FIT:
        return result(FitStatus.POOR_FIT,
                      f"channel {k}: a first-order high-pass does not explain the recording "
                      f"(residual {rel:.1%} of the signal): check for distortion, dropouts or a "
                      f"filter in the loop", **fitted)
    if corner < DC_COUPLED_HZ:
        verdict = (f"channel {k}: DC-coupled (corner below {DC_COUPLED_HZ:g} Hz), round trip "
                   f"{delay:.2f} samples")
    else:
        verdict = f"channel {k}: corner {corner:.3g} Hz, round trip {delay:.2f} samples"
    return result(FitStatus.OK, verdict, **fitted)


def _corner_limit(rate: int) -> float:
    return rate / 10.0


def _least_squares(x, r_win, w0, rate, corner_in, d0):
    """Fit (corner, delay) of the model to r_win = recorded[w0:w0 + len(r_win)], with gain and
    offset projected out. Returns corner, delay, gain, offset, residual."""
    from scipy import fft
    from scipy.optimize import least_squares
    from scipy.signal import lfilter

    n_win = len(r_win)
    nfft = fft.next_fast_len(len(x) + 64)
    spec = fft.rfft(x, nfft)
    freq = fft.rfftfreq(nfft)        # cycles per sample
    b_in, a_in = highpass_coefficients(corner_in, rate)
    sum_r = r_win.sum()

    delayed = {}

    def shape(corner, delay):
        # band-limited delay: a circular shift of the zero-padded probe, exact for whole samples
        if delay not in delayed:
            delayed.clear()
            delayed[delay] = fft.irfft(spec * np.exp(-2j * np.pi * freq * delay),
                                       nfft)[w0:w0 + n_win]
        xd = delayed[delay]
        b, a = highpass_coefficients(corner, rate)
        y = lfilter(b, a, xd)
        return lfilter(b_in, a_in, y) if corner_in > 0 else y

    def project(m):
        # least squares of r ~ g m + c, solved in closed form (2 x 2 normal equations); einsum
        # rather than a BLAS dot, whose threads stall for milliseconds on a busy 2-core machine
        smm, sm, smr = np.einsum("i,i->", m, m), m.sum(), np.einsum("i,i->", m, r_win)
        det = smm * n_win - sm * sm
        if det <= 0:
            return 0.0, sum_r / n_win
        g = (smr * n_win - sm * sum_r) / det
        return g, (sum_r - g * sm) / n_win

    def residual(p):
        m = shape(p[0], p[1])
        g, c = project(m)
        return r_win - g * m - c

    limit = _corner_limit(rate)
    grid = np.concatenate([[0.0], np.geomspace(0.05, 0.9 * limit, 24)])
    costs = [np.sum(residual((fc, d0)) ** 2) for fc in grid]
    start = (float(grid[int(np.argmin(costs))]), d0)
    lo, hi = [0.0, d0 - 1.5], [limit, d0 + 1.5]
    fit = least_squares(residual, start, bounds=(lo, hi), x_scale="jac", method="trf",
                        max_nfev=200)
    corner, delay = float(fit.x[0]), float(fit.x[1])
    g, c = project(shape(corner, delay))
    return corner, delay, float(g), float(c), fit.fun


def _dbfs(rms: float) -> str:
    return "-inf dBFS" if rms <= 0 else f"{20 * np.log10(rms):.0f} dBFS"


def _check_rate(rate) -> int:
    if isinstance(rate, bool) or not np.isfinite(rate) or rate <= 0 or rate != int(rate):
        raise InputError(f"rate must be a whole number of Hz > 0 (rate={rate!r})", "rate")
    return int(rate)


def _check_pair(played, recorded) -> tuple[np.ndarray, np.ndarray]:
    x = np.asarray(played, dtype=float)
    r = np.asarray(recorded, dtype=float)
    x = x[:, None] if x.ndim == 1 else x
    r = r[:, None] if r.ndim == 1 else r
    if x.ndim != 2 or x.shape != r.shape or len(x) < 16:
        raise InputError(f"played and recorded must be (n, channels) arrays of the same shape "
                         f"(played {np.shape(played)}, recorded {np.shape(recorded)})", "recorded")
    if not (np.all(np.isfinite(x)) and np.all(np.isfinite(r))):
        raise InputError("played and recorded must be finite (a sample is nan or inf)",
                         "recorded")
    return x, r


def _check_input_corners(input_corner_hz, channels: int, rate: int) -> np.ndarray:
    c = np.asarray(input_corner_hz, dtype=float)
    fits = c.ndim == 0 or c.shape == (channels,)
    if not fits or not np.all(np.isfinite(c)) or np.any(c < 0) or np.any(c >= rate / 2):
        raise InputError(f"input_corner_hz must be >= 0 and below rate / 2, one value or one per "
                         f"channel (input_corner_hz={input_corner_hz!r})", "input_corner_hz")
    return np.broadcast_to(c, (channels,))


# --- the measurement -----------------------------------------------------------------------------

def measure_loopback(output_device, input_device, rate: int, channels: int,
                     input_corner_hz=0.0, seconds: float | None = None) -> list[ChannelFit]:
    """Play the probe on `output_device`, record it on `input_device` (output k wired to input
    k), and fit every channel.

    Parameters
    ----------
    output_device, input_device : int, str or None
        Device number, or a case-insensitive part of its name (several space-separated parts
        match in order, as sounddevice matches them), or None for PortAudio's default.
    rate : int
        Sample rate, Hz.
    channels : int
        Channels to probe (outputs 0..channels-1 wired to inputs 0..channels-1).
    input_corner_hz : float or sequence of float
        The inputs' own high-pass corners, assumed known (0 = DC-coupled).
    seconds : float, optional
        Length of the probe (see `probe_signal`).

    Returns
    -------
    list of ChannelFit
        One per channel, as `fit_loopback` returns them.

    Raises
    ------
    DeviceError
        PortAudio missing, no such device, too few channels, settings refused, a stream that
        does not finish, or no input recorded anything that matches the probe (the loop is not
        wired). A loop wired on some channels only, or crossed, is not an error: those
        channels come back with their `FitStatus`.
    InputError
        For a bad rate, channel count, length or input corner.

    Examples
    --------
    >>> fits = measure_loopback("system", "system", 48000, 2)    # doctest: +SKIP
    >>> [round(f.corner_hz, 1) for f in fits]                   # doctest: +SKIP
    [8.0, 15.0]
    """
    rate = _check_rate(rate)
    probe = probe_signal(rate, channels, seconds)
    _check_input_corners(input_corner_hz, channels, rate)
    sd = _sounddevice()
    out_index, out_name = _find_device(sd, output_device, "output", channels, rate)
    in_index, in_name = _find_device(sd, input_device, "input", channels, rate)
    recorded = _play_and_record(sd, probe, rate, channels, in_index, out_index,
                                f"'{out_name}' -> '{in_name}'")
    fits = fit_loopback(probe, recorded, rate, input_corner_hz)
    # a loop that is not wired at all is an error; a partly wired or crossed one is reported
    # channel by channel in the results
    if all(f.status in (FitStatus.NO_SIGNAL, FitStatus.NO_MATCH) for f in fits):
        rms = float(np.sqrt(np.mean(recorded.astype(float) ** 2)))
        raise DeviceError(f"input device {in_index} '{in_name}' recorded nothing that matches "
                          f"the probe ({_dbfs(rms)} RMS): wire output k of device {out_index} "
                          f"'{out_name}' to input k, line level, and check the input is selected "
                          f"and up", "input_device")
    return fits


PORTAUDIO_MISSING = ("PortAudio library not found: install the system package libportaudio2 "
                     "(Debian/Ubuntu: apt-get install libportaudio2)")


def _sounddevice():
    try:
        import sounddevice as sd
    except OSError:
        raise DeviceError(PORTAUDIO_MISSING) from None
    return sd


def _find_device(sd, spec, kind: str, channels: int, rate: int) -> tuple[int, str]:
    """(index, name) of the device `spec` for `kind` ('output' or 'input'), checked for
    `channels` float32 channels at `rate`."""
    param = f"{kind}_device"
    text = None if spec is None else str(spec).strip()
    try:
        if text is None:
            info = sd.query_devices(kind=kind)
        elif text.lstrip("-").isdigit():
            info = sd.query_devices(int(text))
        else:
            info = sd.query_devices(text, kind)
    except ValueError as exc:
        what = f"'{text}'" if text is not None else "the default"
        many = str(exc).startswith("Multiple")
        raise DeviceError(f"{'several' if many else 'no'} {kind} device{'s' if many else ''} "
                          f"match {what} ({param}={spec!r}): give the device's number or more of "
                          f"its name (is the audio server running?)", param) from None
    except sd.PortAudioError as exc:
        raise DeviceError(f"cannot query {kind} device {spec!r} ({param}={spec!r}): "
                          f"{_one_line(exc)}", param) from None
    if not info:
        raise DeviceError(f"there is no default {kind} device ({param}=None): name one", param)
    index, name = int(info["index"]), info["name"]
    have = int(info[f"max_{kind}_channels"])
    if have < channels:
        raise DeviceError(f"{kind} device {index} '{name}' has {have} {kind} channel(s); the "
                          f"loopback needs {channels} (channels={channels}): wire output k to "
                          f"input k on a device that has them", param)
    check = sd.check_output_settings if kind == "output" else sd.check_input_settings
    try:
        check(device=index, channels=channels, dtype="float32", samplerate=rate)
    except (sd.PortAudioError, ValueError) as exc:
        raise DeviceError(f"{kind} device {index} '{name}' refuses {channels} channel(s) at "
                          f"{rate} Hz ({_one_line(exc)})", param) from None
    return index, name


def _play_and_record(sd, probe, rate, channels, in_index, out_index, label) -> np.ndarray:
    """sounddevice.playrec, waited for with a bound: a stream whose server went away can block
    its close forever, so the wait runs on a daemon thread that is given up on."""
    try:
        recorded = sd.playrec(probe, samplerate=rate, channels=channels, dtype="float32",
                              device=(in_index, out_index), blocking=False)
    except (sd.PortAudioError, ValueError) as exc:
        raise DeviceError(f"cannot start the loopback stream {label} ({_one_line(exc)})",
                          "output_device") from None
    box = {}

    def finish():
        try:
            box["status"] = sd.wait()
        except Exception as exc:            # reported below, on the caller's thread
            box["error"] = exc

    waiter = threading.Thread(target=finish, name="loopback-wait", daemon=True)
    waiter.start()
    bound = len(probe) / rate + STREAM_MARGIN_S
    waiter.join(bound)
    if waiter.is_alive():
        raise DeviceError(f"the loopback stream {label} did not finish within {bound:.0f} s: is "
                          f"the device (or the audio server) still there?", "output_device")
    if "error" in box:
        raise DeviceError(f"the loopback stream {label} failed ({_one_line(box['error'])})",
                          "output_device")
    status = box.get("status")
    if status:
        warnings.warn(f"the loopback stream {label} reported {_one_line(status)}: the recording "
                      f"may have a gap (the fit says so if it matters)", VectorgenWarning)
    return recorded


def _one_line(exc) -> str:
    return " ".join(str(exc).split())

"""Measure a deflection channel's step response from a scope capture, by least squares.

The drive is a slow square wave of jumps on one axis (`step_pattern`); the scope captures the
yoke current (the voltage across a sense resistor in series with the yoke) or the amplifier
output, and saves it as CSV (`calibration.capture.read_capture`). `fit_response` fits the
closed-form step response of a first-order lag (time constant tau) or of a second-order system
(natural frequency f_n, damping zeta) to every edge in the capture, and `response_section` turns
the fits of both axes into the profile's ``[response]`` keys (``tau_us = [x, y]``, or
``natural_hz = [x, y]`` with ``damping = [x, y]``).

Model (linear, time-invariant): the capture is the response to a sum of steps,

    y(t) = y_base + sum_k a_k s(t - t_k),     s(t) = 0 for t < 0,

with t_k the start of edge k, a_k its signed step and s the unit step response (closed forms in
`fit_response`). One shape (tau, or f_n and zeta) is shared by all edges; the base level, every
a_k and every t_k are fitted too. Summing steps is exact for an LTI system whatever the spacing
of the edges, provided the system had settled before the capture's first edge.

Limits: the levels are taken as flat, so the droop of an AC-coupled interface over the capture
shows in the residual, not in the fit (keep the window short, see `step_pattern`); the edge
that reaches the amplifier is already rounded by the interface's reconstruction filter, which
the fitted response therefore includes (negligible when tau spans many audio samples).
"""

from __future__ import annotations

__all__ = ["Edge", "ResponseFit", "step_pattern", "find_edges", "fit_response",
           "write_fit_png", "response_section", "ORDERS"]

import math
import os
from dataclasses import dataclass

import numpy as np

from vectorgen.files import atomic_write

from .capture import Capture, InputError

ORDERS = ("auto", 1, 2)

MIN_RISE_SAMPLES = 4.0      # 10-90 % rise of the edge, in sample intervals (tau >= ~1.8 of them)
MIN_PRE_SAMPLES = 10        # samples on the old level before the first edge fitted
MIN_SETTLE = 3.0            # an edge must be followed by this many slowest time constants...
GOOD_SETTLE = 5.0           # ...and this many for the levels to be well pinned (99.3 %)
EDGE_SNR = 10.0             # the step must exceed this many noise RMS to count as an edge
MAX_EDGES = 8               # edges fitted at most (the first ones in the capture)
MAX_FIT_POINTS = 200_000    # samples fitted at most (a long record is cropped around its edges)
AUTO_RATIO = 1.25           # auto: second order when first-order RMS > 1.25 x second-order RMS
AUTO_EXCESS = 0.002         # ... and the first order's extra misfit exceeds 0.2 % of the step
AUTO_SPAN = 5.0             # ... both RMS taken over t_k to t_k + 5 tau (the transitions)
MAX_MISFIT = 0.25           # residual RMS beyond 25 % of the step: not a step response
ZETA_BOUNDS = (0.01, 100.0)


@dataclass(frozen=True)
class Edge:
    """One jump of the square wave as found on the samples (before any fit)."""

    index: int          # first sample past 70 % of the way to the new level
    time_s: float       # the 50 % crossing (linear interpolation between samples)
    rising: bool
    rise_s: float       # 10 % to 90 % transition time; NaN when the capture cuts it


@dataclass(frozen=True)
class ResponseFit:
    """A fitted step response. Levels and steps are in the capture's signal unit."""

    order: int                      # 1 or 2
    tau_s: float | None             # first order
    natural_hz: float | None        # second order: f_n = omega_n / (2 pi)
    damping: float | None           # second order: zeta
    step: float                     # mean |a_k| over the fitted edges
    low_level: float
    high_level: float
    t0_s: float                     # start of the first fitted edge
    edge_times_s: tuple             # start t_k of every fitted edge
    edge_steps: tuple               # signed step a_k of every fitted edge
    base_level: float               # the level before the first fitted edge
    rms_residual: float             # RMS of capture - fit over the points used
    noise_rms: float                # the capture's noise, from sample-to-sample differences
    points_used: int
    window: tuple                   # (start, stop) sample indices of the points used
    rms_first_order: float | None   # the residual of each order tried (auto tries both)
    rms_second_order: float | None
    quality: str                    # a few sentences: how well, what to improve

    @property
    def tau_us(self) -> float | None:
        return None if self.tau_s is None else self.tau_s * 1e6

    @property
    def rise_s(self) -> float:
        """10 % to 90 % rise time of the fitted response."""
        return _rise_s(self.order, self._shape())

    @property
    def settle_tau_s(self) -> float:
        """The slowest time constant of the fitted response (the envelope for order 2)."""
        return _slowest_tau_s(self.order, self._shape())

    def curve(self, time_s) -> np.ndarray:
        """The fitted response at `time_s` (s, the capture's time axis)."""
        t = np.asarray(time_s, dtype=float)
        y = np.full(t.shape, self.base_level)
        for t_k, a_k in zip(self.edge_times_s, self.edge_steps):
            y += a_k * _unit_step(self.order, self._shape(), t - t_k)
        return y

    def summary(self) -> str:
        """One line for the terminal."""
        if self.order == 1:
            what = f"first order, tau = {self.tau_s * 1e6:.4g} us"
        else:
            what = (f"second order, f_n = {self.natural_hz:.5g} Hz, zeta = "
                    f"{self.damping:.4g}")
        pct = 100 * self.rms_residual / self.step if self.step else float("nan")
        return (f"{what}; {len(self.edge_times_s)} edge(s), step {self.step:.4g}, residual "
                f"RMS {pct:.2f} % of the step")

    def _shape(self) -> tuple:
        if self.order == 1:
            return (self.tau_s,)
        return (2 * math.pi * self.natural_hz, self.damping)


# --- the scope pattern --------------------------------------------------------------------------

def step_pattern(rate: float, axis: str, amplitude: float = 0.5, period_s: float = 0.02,
                 cycles: int = 4) -> np.ndarray:
    """A slow square wave of jumps on one axis, to capture a channel's step response.

    Set-up: drive the axis with this pattern (looped), trigger the scope on the edge of the
    yoke current (or of the amplifier output), and capture that signal: the yoke current as the
    voltage across the sense resistor in series with the yoke, or the amplifier's output
    voltage. Choose a timebase that shows some of the old level before the edge and at least
    five time constants after it (more edges in one capture are fine: all are fitted), with a
    sample interval of a tenth of the time constant or less. Set the volts per division so the
    whole step fits on the screen (a clipped capture is refused). Save as CSV (time, signal).

    Parameters
    ----------
    rate : float
        Sample rate, Hz.
    axis : {'x', 'y'}
        The axis that jumps; the other is held at 0.
    amplitude : float, optional
        The drive jumps between -amplitude and +amplitude (full-scale units, 0 < a <= 1).
    period_s : float, optional
        One period of the square wave, s (rounded to an even number of samples). Long enough
        for the step to settle (half a period >= 10 time constants), short enough that AC
        coupling barely droops the levels within a capture (see Notes).
    cycles : int, optional
        Periods in the returned frame.

    Returns
    -------
    numpy.ndarray
        (n, 2) float64 drive, n = cycles * 2 * half, half = round(period_s * rate / 2): each
        period is half samples at -amplitude then half at +amplitude, so the frame loops.

    Raises
    ------
    InputError
        A parameter out of range, named with its value.

    Notes
    -----
    A first-order high-pass with corner f_c (AC coupling) droops a level by a fraction
    1 - exp(-2 pi f_c T) after a time T: at f_c = 5 Hz that is 0.3 % in 100 us and 3 % in
    1 ms. The fit assumes flat levels, so keep the capture's window short where the
    interface is AC coupled.

    Examples
    --------
    >>> d = step_pattern(1000, "x", amplitude=0.25, period_s=0.008, cycles=2)
    >>> d.shape
    (16, 2)
    >>> d[:, 0].tolist()[:8], float(abs(d[:, 1]).max())
    ([-0.25, -0.25, -0.25, -0.25, 0.25, 0.25, 0.25, 0.25], 0.0)
    """
    if not (isinstance(rate, (int, float)) and math.isfinite(rate) and rate > 0):
        raise InputError(f"rate must be a sample rate in Hz above 0 (rate={rate!r})", "rate")
    if axis not in ("x", "y"):
        raise InputError(f"axis must be 'x' or 'y' (axis={axis!r})", "axis")
    if not (isinstance(amplitude, (int, float)) and 0 < amplitude <= 1):
        raise InputError(f"amplitude must be above 0 and at most 1 (full scale) "
                         f"(amplitude={amplitude!r})", "amplitude")
    if not (isinstance(period_s, (int, float)) and math.isfinite(period_s) and period_s > 0):
        raise InputError(f"period_s must be above 0 (period_s={period_s!r})", "period_s")
    half = int(round(period_s * rate / 2))
    if half < 2:
        raise InputError(f"period_s is under 4 samples at {rate:g} Hz (period_s={period_s!r})",
                         "period_s")
    if isinstance(cycles, bool) or not isinstance(cycles, (int, np.integer)) or cycles < 1:
        raise InputError(f"cycles must be a whole number >= 1 (cycles={cycles!r})", "cycles")
    one = np.repeat([-float(amplitude), float(amplitude)], half)
    drive = np.zeros((2 * half * int(cycles), 2))
    drive[:, 0 if axis == "x" else 1] = np.tile(one, int(cycles))
    return drive


# --- edges --------------------------------------------------------------------------------------

def find_edges(capture: Capture) -> tuple:
    """The jumps between the capture's two levels.

    Parameters
    ----------
    capture : Capture

    Returns
    -------
    tuple of Edge
        In time order; empty when the signal never goes from one level to the other, or when
        the levels are closer than EDGE_SNR noise RMS.

    Notes
    -----
    The two levels are the medians of the samples below and above the middle of the 1st to
    99th percentile range. An edge is a crossing from below 30 % to above 70 % of the way
    between them (or back): the 40 % hysteresis ignores noise and ringing. Its time is the
    interpolated 50 % crossing, its rise the 10 % to 90 % time. The noise RMS is
    1.4826 MAD(diff(y)) / sqrt(2), white noise assumed.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(200) * 1e-6
    >>> y = (np.arange(200) >= 100).astype(float)
    >>> cap = Capture.from_arrays(t, y)
    >>> [(e.index, e.rising) for e in find_edges(cap)]
    [(100, True)]
    """
    y = capture.signal
    lo, hi = _levels(y)
    if not (hi - lo) > EDGE_SNR * _noise_rms(y):
        return ()
    frac = (y - lo) / (hi - lo)
    state = np.where(frac > 0.7, 1, np.where(frac < 0.3, -1, 0))
    known = np.flatnonzero(state)
    if known.size == 0:
        return ()
    # Hold the last known state through the middle band: a state machine with hysteresis.
    idx = np.maximum.accumulate(np.where(state != 0, np.arange(y.size), known[0]))
    held = state[idx]
    changes = np.flatnonzero(np.diff(held) != 0) + 1
    bounds = np.concatenate([[0], changes, [y.size]])
    t = capture.time_s
    edges = []
    for j, k in enumerate(changes):
        rising = bool(held[k] > 0)
        f = frac if rising else 1.0 - frac
        before, after = slice(bounds[j], k), slice(k, bounds[j + 2])
        t10 = _crossing_before(t, f, before, 0.1)
        t50 = _crossing_before(t, f, before, 0.5)
        t90 = _crossing_after(t, f, after, 0.9)
        edges.append(Edge(int(k), t50, rising, t90 - t10))
    return tuple(edges)


# --- the fit ------------------------------------------------------------------------------------

def fit_response(capture: Capture, order="auto") -> ResponseFit:
    """Fit a first- or second-order step response to the edges of a capture.

    Parameters
    ----------
    capture : Capture
        From `calibration.capture.read_capture`: a square wave of jumps (`step_pattern`).
    order : {'auto', 1, 2}, optional
        The model. 'auto' fits both and keeps the second order only when the first does not
        fit: when, over the edges' transitions (each t_k to t_k + AUTO_SPAN = 5 first-order
        tau), the first-order residual RMS exceeds AUTO_RATIO (1.25) times the second-order
        one AND the first order's extra misfit there, sqrt(rms_1^2 - rms_2^2), exceeds
        AUTO_EXCESS (0.2 %) of the step. (A first-order lag cannot overshoot or start an edge
        with zero slope, so ringing or an S-shaped start shows there.)

    Returns
    -------
    ResponseFit

    Raises
    ------
    InputError
        `order` not one of ORDERS; no edge in the capture; an edge faster than
        MIN_RISE_SAMPLES sample intervals (tau not resolvable: use a faster timebase); a
        clipped capture (a flat top at its maximum or minimum where the noise vanishes); a
        capture that starts on its only edge; a capture in which no edge settles; a fit that
        misses the capture by more than MAX_MISFIT of the step.

    Notes
    -----
    Unit step responses s(t) for t >= 0 (s = 0 for t < 0), omega_n = 2 pi f_n, from any
    control or circuits textbook:

      first order, 1 / (tau s + 1):
          s(t) = 1 - exp(-t / tau),
          i.e. y = x1 + (x0 - x1) exp(-(t - t0) / tau) from level x0 to x1.
      second order, omega_n^2 / (s^2 + 2 zeta omega_n s + omega_n^2):
          underdamped (zeta < 1), omega_d = omega_n sqrt(1 - zeta^2):
              s(t) = 1 - exp(-zeta omega_n t) (cos(omega_d t)
                                               + zeta / sqrt(1 - zeta^2) sin(omega_d t))
          critically damped (zeta = 1):
              s(t) = 1 - exp(-omega_n t) (1 + omega_n t)
          overdamped (zeta > 1), p_1,2 = omega_n (zeta -+ sqrt(zeta^2 - 1)):
              s(t) = 1 - (p2 exp(-p1 t) - p1 exp(-p2 t)) / (p2 - p1)

    The three second-order forms are evaluated as one expression, continuous through
    zeta = 1 (series for sin(x)/x and sinh(x)/x near 0). The fit is
    scipy.optimize.least_squares (Levenberg-Marquardt, analytic Jacobian) over y_base, a_k,
    t_k and log tau (or log omega_n and log zeta, held within ZETA_BOUNDS), started from the
    10-90 % rise and the 50 % crossings measured on the samples; for order 2 from three
    dampings (about the one the overshoot OS implies, zeta = -ln OS / sqrt(pi^2 + ln^2 OS),
    or well damped to overdamped guesses without one), keeping the best.

    Points used: the first MAX_EDGES complete edges, from half way to the transition before
    the first to half way to the transition after the last (a neighbouring edge, one the
    record cuts short, or, for two or more edges, the next edge of the square wave at the
    median spacing), so no partial edge sits unmodelled in the window.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(2000) * 1e-6
    >>> y = np.where(t > 5e-4, -np.expm1(-(t - 5e-4) / 50e-6), 0.0)
    >>> y = y + np.random.default_rng(1).normal(0, 0.01, t.size)
    >>> fit = fit_response(Capture.from_arrays(t, y))
    >>> fit.order, round(fit.tau_us)
    (1, 50)
    """
    from scipy.optimize import least_squares

    if isinstance(order, bool) or order not in ORDERS:
        raise InputError(f"order must be 'auto', 1 or 2 (order={order!r})", "order")
    path, t, y = capture.path, capture.time_s, capture.signal
    dt = capture.sample_interval_s
    lo, hi = _levels(y)
    noise = _noise_rms(y)
    edges = find_edges(capture)
    if not edges:
        raise InputError(f"{path}: no edge in the capture (the signal spans "
                         f"{_span(y)}, noise RMS {noise:.3g}): capture the square wave's "
                         f"jumps")
    _check_clipping(path, capture)
    rises = np.array([e.rise_s for e in edges])
    rise = float(np.median(rises[np.isfinite(rises)])) if np.isfinite(rises).any() else None
    if rise is not None and rise < MIN_RISE_SAMPLES * dt:
        raise InputError(f"{path}: the edge rises 10-90 % in {rise / dt:.2g} sample intervals "
                         f"({_fmt_s(rise)}): too fast to resolve tau; capture with a faster "
                         f"timebase (a sample interval of tau / 10 or less)")
    used, window = _choose_edges(path, capture, edges, rise)
    sl = slice(*window)
    tt, yy = t[sl], y[sl]
    scale = hi - lo
    x0 = _start_common(capture, used, window, lo, hi, noise)
    rise = rise if rise is not None else 10 * dt

    fits = {}
    if order in ("auto", 1):
        fits[1] = _fit_order(least_squares, 1, tt, yy, dt, scale, x0, used, rise)
    if order in ("auto", 2):
        fits[2] = _fit_order(least_squares, 2, tt, yy, dt, scale, x0, used, rise)
    rms = {k: _rms(v[2]) for k, v in fits.items()}
    if order == "auto":
        chosen, why = _auto_order(fits, tt, scale)
    else:
        chosen, why = order, f"order {order} as asked"
    base, steps, times, shape = fits[chosen][:2] + fits[chosen][3:]
    residual = fits[chosen][2]
    fit_rms = rms[chosen]
    _check_fit(path, chosen, shape, times, tt, dt, steps, fit_rms)
    levels = base + np.concatenate([[0.0], np.cumsum(steps)])
    after_rise = np.concatenate([[steps[0] < 0], steps > 0])     # level k is high?
    high = float(np.mean(levels[after_rise])) if after_rise.any() else float(levels.max())
    low = float(np.mean(levels[~after_rise])) if (~after_rise).any() else float(levels.min())
    step = float(np.mean(np.abs(steps)))
    quality = _quality(why, chosen, shape, times, tt, dt, step, fit_rms, noise, len(used),
                       residual.size)
    return ResponseFit(
        order=chosen,
        tau_s=float(shape[0]) if chosen == 1 else None,
        natural_hz=float(shape[0] / (2 * math.pi)) if chosen == 2 else None,
        damping=float(shape[1]) if chosen == 2 else None,
        step=step, low_level=low, high_level=high, t0_s=float(times[0]),
        edge_times_s=tuple(float(v) for v in times), edge_steps=tuple(float(v) for v in steps),
        base_level=float(base), rms_residual=fit_rms, noise_rms=noise,
        points_used=int(residual.size), window=tuple(int(v) for v in window),
        rms_first_order=rms.get(1), rms_second_order=rms.get(2), quality=quality)


def response_section(fit_x: ResponseFit, fit_y: ResponseFit) -> dict:
    """The profile's ``[response]`` keys from the fits of the two axes.

    Parameters
    ----------
    fit_x, fit_y : ResponseFit
        The fits of the x and the y channel.

    Returns
    -------
    dict
        ``{"tau_us": [x, y]}`` when both are first order, ``{"natural_hz": [x, y],
        "damping": [x, y]}`` when both are second order (6 significant digits).

    Raises
    ------
    InputError
        The two fits are of different orders (fit both with the same `order`).

    Examples
    --------
    >>> f = ResponseFit(1, 1.2345678e-4, None, None, 1.0, 0.0, 1.0, 0.0, (0.0,), (1.0,), 0.0,
    ...                 0.01, 0.01, 100, (0, 100), 0.01, None, "")
    >>> response_section(f, f)
    {'tau_us': [123.457, 123.457]}
    """
    if fit_x.order != fit_y.order:
        raise InputError(f"the axes were fitted with different orders (x: order {fit_x.order}, "
                         f"y: order {fit_y.order}): fit both with order=1 or both with order=2")
    if fit_x.order == 1:
        return {"tau_us": [_sig(fit_x.tau_s * 1e6), _sig(fit_y.tau_s * 1e6)]}
    return {"natural_hz": [_sig(fit_x.natural_hz), _sig(fit_y.natural_hz)],
            "damping": [_sig(fit_x.damping), _sig(fit_y.damping)]}


# --- residual picture ---------------------------------------------------------------------------

def write_fit_png(path, capture: Capture, fit: ResponseFit) -> None:
    """Draw the capture, the fitted response and the residual below it, as a PNG.

    Parameters
    ----------
    path : str or os.PathLike
        The picture, ending in .png. Written atomically: a temporary file in the same folder,
        then os.replace; on any error no file (and no half-written picture) is left and an
        existing file at `path` is untouched.
    capture : Capture
    fit : ResponseFit
        The fit of `capture`.

    Raises
    ------
    InputError
        `path` does not end in .png, or the folder cannot be written.

    Examples
    --------
    >>> import os, tempfile
    >>> import numpy as np
    >>> t = np.arange(1000) * 1e-6
    >>> y = np.where(t > 2e-4, -np.expm1(-(t - 2e-4) / 40e-6), 0.0)
    >>> y = y + np.random.default_rng(2).normal(0, 0.01, t.size)
    >>> cap = Capture.from_arrays(t, y)
    >>> out = os.path.join(tempfile.mkdtemp(), "fit.png")
    >>> write_fit_png(out, cap, fit_response(cap, order=1))
    >>> open(out, "rb").read(4)
    b'\x89PNG'
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    path = os.fspath(path)
    if not path.lower().endswith(".png"):
        raise InputError(f"the fit picture must be a .png file (path={path!r})", "path")
    sl = slice(*fit.window)
    t, y = capture.time_s[sl], capture.signal[sl]
    model = fit.curve(t)
    unit, k = _time_axis(t[-1] - t[0])
    tx = (t - t[0]) * k
    fig = Figure(figsize=(8, 6), dpi=100)
    FigureCanvasAgg(fig)
    top, bottom = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [3, 1.3]})
    top.plot(tx, y, ".", ms=2, color="0.55", label="capture")
    top.plot(tx, model, color="tab:red", lw=1.2, label="fit")
    for t_k in fit.edge_times_s:
        top.axvline((t_k - t[0]) * k, color="tab:blue", lw=0.6, alpha=0.5)
    top.set_ylabel(capture.signal_name)
    top.legend(loc="best", fontsize=8)
    top.grid(alpha=0.25)
    top.set_title(fit.summary(), fontsize=9)
    bottom.plot(tx, y - model, lw=0.6, color="tab:red")
    bottom.axhline(0.0, color="0.3", lw=0.6)
    for s in (-1, 1):
        bottom.axhline(s * fit.noise_rms, color="0.5", lw=0.5, ls="--")
    bottom.set_ylabel("residual")
    bottom.set_xlabel(f"time from {_fmt_s(float(t[0]))} ({unit})")
    bottom.grid(alpha=0.25)
    fig.tight_layout()
    atomic_write(path, lambda fh: fig.savefig(fh, format="png"))


# --- helpers: levels, noise, crossings ----------------------------------------------------------

def _levels(y: np.ndarray) -> tuple[float, float]:
    p1, p99 = np.percentile(y, [1, 99])
    mid = 0.5 * (p1 + p99)
    below, above = y[y < mid], y[y >= mid]
    if below.size == 0 or above.size == 0:
        return float(p1), float(p99)
    return float(np.median(below)), float(np.median(above))


def _noise_rms(y: np.ndarray) -> float:
    d = np.diff(y)
    return float(1.4826 * np.median(np.abs(d - np.median(d))) / math.sqrt(2))


def _crossing_before(t, f, region: slice, level: float) -> float:
    """Time where f last rises through `level` before the end of `region`."""
    below = np.flatnonzero(f[region] < level) + region.start
    if below.size == 0 or below[-1] + 1 >= f.size:
        return float("nan")
    i = int(below[-1])
    return _interp(t, f, i, level)


def _crossing_after(t, f, region: slice, level: float) -> float:
    """Time where f first reaches `level` from the start of `region`."""
    above = np.flatnonzero(f[region] >= level) + region.start
    if above.size == 0 or above[0] == 0:
        return float("nan")
    return _interp(t, f, int(above[0]) - 1, level)


def _interp(t, f, i: int, level: float) -> float:
    f0, f1 = f[i], f[i + 1]
    w = 0.0 if f1 == f0 else min(max((level - f0) / (f1 - f0), 0.0), 1.0)
    return float(t[i] + w * (t[i + 1] - t[i]))


def _check_clipping(path: str, capture: Capture) -> None:
    """Refuse a flat top: a run of samples held exactly at the capture's max or min, where the
    noise (at least one quantisation step) would move them. A noise-free capture (heavy
    averaging) that clips cannot be told from a quiet level and is not caught."""
    y = capture.signal
    codes = np.unique(y)
    step = float(np.min(np.diff(codes))) if codes.size > 1 else 0.0
    # The noise on the levels but off the extremes: a capture clipped for most of its length
    # would otherwise look noise-free, and the edges' slopes are no noise.
    lo, hi = _levels(y)
    frac = (y - lo) / (hi - lo)
    inside = ((frac < 0.1) | (frac > 0.9)) & (y != codes[0]) & (y != codes[-1])
    d = np.diff(y)[inside[:-1] & inside[1:]]
    if d.size < 2:
        return
    noise = float(1.4826 * np.median(np.abs(d - np.median(d))) / math.sqrt(2))
    if not (noise > 0 and noise >= step):
        return
    need = max(8, y.size // 250)
    for name, v in (("maximum", codes[-1]), ("minimum", codes[0])):
        run, at = _longest_run(y == v)
        if run >= need:
            raise InputError(f"{path}: line {capture.line_numbers[at]}: the capture is clipped: "
                             f"{run} samples in a row sit exactly at its {name} ({v:.6g}) "
                             f"where the noise should move them; set the scope's volts per "
                             f"division so the whole step fits on the screen")


def _longest_run(mask: np.ndarray) -> tuple[int, int]:
    """Length and start index of the longest run of True."""
    d = np.diff(np.concatenate([[0], mask.astype(np.int8), [0]]))
    starts, stops = np.flatnonzero(d == 1), np.flatnonzero(d == -1)
    if starts.size == 0:
        return 0, 0
    j = int(np.argmax(stops - starts))
    return int(stops[j] - starts[j]), int(starts[j])


# --- helpers: the models ------------------------------------------------------------------------

def _unit_step(order: int, shape, t) -> np.ndarray:
    """Unit step response at times t (s) from the edge; 0 before it."""
    t = np.maximum(t, 0.0)
    if order == 1:
        return -np.expm1(-t / shape[0])
    omega_n, zeta = shape
    return _unit_step_2(omega_n * t, zeta)


def _unit_slope(order: int, shape, t) -> np.ndarray:
    """d s / d t of the unit step response (the impulse response), 0 before the edge."""
    t = np.maximum(t, 0.0)
    if order == 1:
        return np.exp(-t / shape[0]) / shape[0] * (t > 0)
    omega_n, zeta = shape
    return omega_n * _unit_slope_2(omega_n * t, zeta) * (t > 0)


def _unit_slope_2(x: np.ndarray, zeta: float) -> np.ndarray:
    """d s / d x of `_unit_step_2`: exp(-zeta x) sin(phi) / r, or sinh(phi) / r overdamped."""
    r = math.sqrt(abs(1.0 - zeta * zeta))
    phi = r * x
    if zeta < 1.0:
        return np.exp(-zeta * x) * x * _sin_over(phi)
    slow, fast = 1.0 / (zeta + r), zeta + r
    p2 = phi * phi
    safe_r = r if r > 0 else 1.0
    return np.where(phi < 1e-2, np.exp(-zeta * x) * x * (1 + p2 / 6 + p2 * p2 / 120),
                    0.5 * (np.exp(-slow * x) - np.exp(-fast * x)) / safe_r)


def _unit_step_2(x: np.ndarray, zeta: float) -> np.ndarray:
    """Second-order unit step response at x = omega_n t >= 0 (see fit_response's Notes), as
    s = 1 - exp(-zeta x) (C + zeta x S) with C = cos, S = sin(phi)/phi (underdamped) or cosh,
    sinh(phi)/phi (overdamped), phi = sqrt|1 - zeta^2| x."""
    r = math.sqrt(abs(1.0 - zeta * zeta))
    phi = r * x
    if zeta < 1.0:
        return 1.0 - np.exp(-zeta * x) * (np.cos(phi) + zeta * x * _sin_over(phi))
    # Overdamped: the two real exponentials written so that neither overflows.
    slow, fast = 1.0 / (zeta + r), zeta + r
    e_slow, e_fast = np.exp(-slow * x), np.exp(-fast * x)
    small = phi < 1e-2
    e = np.exp(-zeta * x)
    p2 = phi * phi
    cosh_part = np.where(small, e * (1 + p2 / 2 + p2 * p2 / 24), 0.5 * (e_slow + e_fast))
    safe_r = r if r > 0 else 1.0
    sinh_part = np.where(small, e * zeta * x * (1 + p2 / 6 + p2 * p2 / 120),
                         zeta / safe_r * 0.5 * (e_slow - e_fast))
    return 1.0 - cosh_part - sinh_part


def _sin_over(phi: np.ndarray) -> np.ndarray:
    """sin(phi) / phi, 1 at phi = 0 (phi >= 0)."""
    out = np.ones_like(phi)
    np.divide(np.sin(phi), phi, out=out, where=phi > 0)
    return out


def _unit_marks(order: int, zeta: float = 1.0) -> tuple[float, float, float]:
    """(x10, x50, x90) of the unit step response in units of tau (order 1) or of 1/omega_n."""
    if order == 1:
        return math.log(1 / 0.9), math.log(2.0), math.log(10.0)
    span = 40.0 * (zeta + math.sqrt(abs(zeta * zeta - 1)) + 1.0)
    x = np.linspace(0.0, span, 40001)
    s = _unit_step_2(x, zeta)
    marks = []
    for level in (0.1, 0.5, 0.9):
        i = int(np.argmax(s >= level))
        marks.append(float(np.interp(level, s[i - 1:i + 1], x[i - 1:i + 1])))
    return tuple(marks)


def _rise_s(order: int, shape) -> float:
    if order == 1:
        return shape[0] * math.log(9.0)
    x10, _, x90 = _unit_marks(2, shape[1])
    return (x90 - x10) / shape[0]


def _slowest_tau_s(order: int, shape) -> float:
    if order == 1:
        return shape[0]
    omega_n, zeta = shape
    if zeta < 1:
        return 1.0 / (zeta * omega_n)           # the envelope exp(-zeta omega_n t)
    return (zeta + math.sqrt(zeta * zeta - 1)) / omega_n     # 1 / p1, the slow pole


# --- helpers: the fit ---------------------------------------------------------------------------

def _choose_edges(path, capture, edges, rise) -> tuple[list, tuple]:
    """The edges to fit and the window (start, stop) of samples around them.

    The window reaches half way to any transition it leaves out: a neighbouring edge dropped
    here, one the capture cuts (it crosses 50 % but the record ends, or begins, before it
    completes) and, with two or more edges, the square wave's next edge at the median
    spacing. So a partial edge never sits in the window unmodelled."""
    t, y = capture.time_s, capture.signal
    lo, hi = _levels(y)
    frac = (y - lo) / (hi - lo)
    keep = list(edges)
    lo_t, hi_t = -np.inf, np.inf
    if len(keep) >= 2:
        spacing = float(np.median(np.diff([e.time_s for e in keep])))
        lo_t, hi_t = keep[0].time_s - spacing / 2, keep[-1].time_s + spacing / 2
    first, last = keep[0], keep[-1]
    new_side = frac if first.rising else 1.0 - frac      # 1 on the first edge's new level
    # Beyond the edges' own transitions (their 10 % and 90 % points), where noise near the
    # 50 % crossing cannot count.
    margin_first = first.rise_s if np.isfinite(first.rise_s) else 0.0
    margin_last = last.rise_s if np.isfinite(last.rise_s) else 0.0
    before = np.flatnonzero((new_side > 0.5) & (t < first.time_s - margin_first))
    if before.size:                                      # the record opens on a cut edge
        lo_t = max(lo_t, 0.5 * (t[before[-1]] + first.time_s))
    old_side = 1.0 - frac if last.rising else frac       # 1 on the level the last edge left
    after = np.flatnonzero((old_side > 0.5) & (t > last.time_s + margin_last))
    if after.size:                                       # the record closes on a cut edge
        hi_t = min(hi_t, 0.5 * (last.time_s + t[after[0]]))
    start = int(np.searchsorted(t, lo_t))
    stop = int(np.searchsorted(t, hi_t))
    pre = _samples_before(capture, keep[0]) - start
    if pre < MIN_PRE_SAMPLES:
        if len(keep) == 1:
            raise InputError(f"{path}: the capture starts on its only edge ({max(pre, 0)} "
                             f"samples before it): keep at least {MIN_PRE_SAMPLES} samples of "
                             f"the old level (more pre-trigger)")
        start = int(np.searchsorted(t, 0.5 * (keep[0].time_s + keep[1].time_s)))
        keep = keep[1:]
    if len(keep) > MAX_EDGES:
        stop = int(np.searchsorted(t, 0.5 * (keep[MAX_EDGES - 1].time_s
                                             + keep[MAX_EDGES].time_s)))
        keep = keep[:MAX_EDGES]
    while len(keep) > 1 and stop - start > MAX_FIT_POINTS:
        stop = int(np.searchsorted(t, 0.5 * (keep[-2].time_s + keep[-1].time_s)))
        keep = keep[:-1]
    if stop - start > MAX_FIT_POINTS:       # one edge in a long record: crop around it
        start = max(start, keep[0].index - MAX_FIT_POINTS // 4)
        stop = min(stop, start + MAX_FIT_POINTS)
    return keep, (start, stop)


def _samples_before(capture, edge: Edge) -> int:
    """Index of the first sample of the edge's transition (its 10 % point, or its 50 % point
    when the rise is unknown): the samples before it are on the old level."""
    back = edge.rise_s if np.isfinite(edge.rise_s) else 0.0
    return int(np.searchsorted(capture.time_s, edge.time_s - back))


def _start_common(capture, edges, window, lo, hi, noise) -> dict:
    """Starting values from the samples: levels, steps, 50 % times and the overshoot (the
    largest excursion past the new level after each edge, as a fraction of the step; None
    when within 4 noise RMS, i.e. none seen)."""
    base = lo if edges[0].rising else hi
    steps = np.array([(hi - lo) if e.rising else (lo - hi) for e in edges])
    y = capture.signal
    ends = [e.index for e in edges[1:]] + [window[1]]
    peaks = [float(np.max((y[e.index:end] - hi) if e.rising else (lo - y[e.index:end])))
             for e, end in zip(edges, ends) if end > e.index]
    peak = float(np.median(peaks)) if peaks else 0.0
    overshoot = peak / (hi - lo) if peak > 4 * noise else None
    return {"base": base, "steps": steps, "t50": np.array([e.time_s for e in edges]),
            "overshoot": overshoot}


def _start_dampings(overshoot) -> tuple:
    """Starting dampings for the second-order fit: from an overshoot OS seen on the samples,
    zeta = -ln OS / sqrt(pi^2 + ln^2 OS) (the inverse of OS = exp(-pi zeta / sqrt(1 - zeta^2)))
    and a neighbour either side; without one, well damped to overdamped guesses."""
    if overshoot is None or not 0 < overshoot < 1:
        return (0.7, 1.3, 3.0)
    k = math.log(overshoot)
    zeta = -k / math.sqrt(math.pi ** 2 + k * k)
    return (max(zeta, 0.02), 0.6 * zeta + 0.02, min(1.6 * zeta, 0.9))


def _fit_order(least_squares, order, t, y, dt, scale, x0, edges, rise):
    """Best fit of one order: (base, steps, residual, times, shape), in the capture's units.

    Internally time is in sample intervals from the window's start and the signal in units of
    the step, so every parameter is of order one; the Jacobian is analytic but for d/d log zeta
    (a central difference)."""
    t_ref = t[0]
    u = (t - t_ref) / dt
    K = len(edges)
    y_n = y / scale
    if order == 1:
        lower, upper = [math.log(0.05)], [math.log(1e9)]             # log tau (samples)
    else:
        lower = [math.log(1e-9), math.log(ZETA_BOUNDS[0])]           # log omega_n (/sample)
        upper = [math.log(20.0), math.log(ZETA_BOUNDS[1])]           # log zeta

    def unpack(p):
        # Clipped logarithms keep the shape positive and in range: 'lm' takes no bounds.
        logs = np.clip(p[2 * K + 1:], lower, upper)
        free = (p[2 * K + 1:] > lower) & (p[2 * K + 1:] < upper)
        return p[0], p[1:K + 1], p[K + 1:2 * K + 1], np.exp(logs), free

    def model(p):
        base, steps, times, shape, _ = unpack(p)
        out = np.full(u.shape, base)
        for a_k, c_k in zip(steps, times):
            out += a_k * _unit_step(order, shape, u - c_k)
        return out

    def fun(p):
        return model(p) - y_n

    def jac(p):
        base, steps, times, shape, free = unpack(p)
        J = np.zeros((u.size, p.size))
        J[:, 0] = 1.0
        for k, (a_k, c_k) in enumerate(zip(steps, times)):
            v = np.maximum(u - c_k, 0.0)
            J[:, 1 + k] = _unit_step(order, shape, v)
            g = _unit_slope(order, shape, v)                  # ds/dv, 0 before the edge
            J[:, K + 1 + k] = -a_k * g
            J[:, 2 * K + 1] += a_k * (-v * g if order == 1 else v * g)   # d/d log tau, omega
            if order == 2:
                h = 1e-6
                up = _unit_step_2(shape[0] * v, shape[1] * math.exp(h))
                dn = _unit_step_2(shape[0] * v, shape[1] * math.exp(-h))
                J[:, 2 * K + 2] += a_k * (up - dn) / (2 * h)
        J[:, 2 * K + 1:] *= free
        return J

    starts = []
    if order == 1:
        tau = rise / math.log(9.0) / dt
        c = (x0["t50"] - t_ref) / dt - tau * math.log(2.0)
        starts.append(np.concatenate([[x0["base"] / scale], x0["steps"] / scale, c,
                                      [math.log(tau)]]))
    else:
        for zeta in _start_dampings(x0["overshoot"]):
            x10, x50, x90 = _unit_marks(2, zeta)
            omega = (x90 - x10) / (rise / dt)
            c = (x0["t50"] - t_ref) / dt - x50 / omega
            starts.append(np.concatenate([[x0["base"] / scale], x0["steps"] / scale, c,
                                          [math.log(omega), math.log(zeta)]]))
    best = None
    for p0 in starts:
        p0[2 * K + 1:] = np.clip(p0[2 * K + 1:], np.add(lower, 1e-6), np.subtract(upper, 1e-6))
        res = least_squares(fun, p0, jac=jac, method="lm", x_scale="jac", xtol=1e-10,
                            ftol=1e-10, gtol=1e-10, max_nfev=200 * len(p0))
        if best is None or res.cost < best.cost:
            best = res
    base, steps, times, shape, _ = unpack(best.x)
    residual = (y_n - model(best.x)) * scale
    times_s = t_ref + np.asarray(times) * dt
    shape_s = (shape[0] * dt,) if order == 1 else (shape[0] / dt, shape[1])
    return base * scale, np.asarray(steps) * scale, residual, times_s, shape_s


def _auto_order(fits, t, scale) -> tuple[int, str]:
    """The auto rule (see fit_response) on the transitions: the samples from each edge to
    AUTO_SPAN first-order time constants after it, where the two models differ (the flat
    levels between edges would dilute the comparison)."""
    times, (tau,) = fits[1][3], fits[1][4]
    near = np.zeros(t.shape, dtype=bool)
    for t_k in times:
        near |= (t >= t_k) & (t < t_k + AUTO_SPAN * tau)
    r1, r2 = _rms(fits[1][2][near]), _rms(fits[2][2][near])
    excess = math.sqrt(max(r1 * r1 - r2 * r2, 0.0))
    chosen = 2 if (r1 > AUTO_RATIO * r2 and excess > AUTO_EXCESS * scale) else 1
    return chosen, (f"auto: order {chosen}, over the edges' transitions the first-order "
                    f"residual is {r1 / max(r2, 1e-300):.3g} x the second-order's (rule: "
                    f"order 2 when > {AUTO_RATIO:g} x and the extra misfit > "
                    f"{100 * AUTO_EXCESS:g} % of the step)")


def _check_fit(path, order, shape, times, t, dt, steps, fit_rms) -> None:
    rise = _rise_s(order, shape)
    if rise < MIN_RISE_SAMPLES * dt:
        raise InputError(f"{path}: the fitted edge rises 10-90 % in {rise / dt:.2g} sample "
                         f"intervals ({_fmt_s(rise)}): too fast to resolve; capture with a "
                         f"faster timebase (a sample interval of tau / 10 or less)")
    settle = _settle_spans(order, shape, times, t)
    if settle.max() < MIN_SETTLE:
        raise InputError(f"{path}: no edge settles in the capture (at most {settle.max():.2g} "
                         f"time constants of {_fmt_s(_slowest_tau_s(order, shape))} before "
                         f"the next edge or the end): use a slower timebase or a longer "
                         f"period_s")
    step = float(np.mean(np.abs(steps)))
    if fit_rms > MAX_MISFIT * step:
        raise InputError(f"{path}: the fitted step response misses the capture by "
                         f"{100 * fit_rms / step:.0f} % of the step (RMS): it does not look "
                         f"like the response to a square wave")


def _settle_spans(order, shape, times, t) -> np.ndarray:
    """Slowest time constants between each edge and the next (or the window's end)."""
    ends = np.concatenate([np.asarray(times)[1:], [t[-1]]])
    return (ends - np.asarray(times)) / _slowest_tau_s(order, shape)


def _quality(why, order, shape, times, t, dt, step, fit_rms, noise, n_edges, n_points) -> str:
    notes = [why + "."]
    ratio = fit_rms / noise if noise > 0 else float("inf")
    pct = 100 * fit_rms / step
    if noise == 0:
        notes.append(f"Residual RMS {pct:.2f} % of the step; the capture shows no noise "
                     f"(averaged, or below its resolution) to compare it with.")
    elif ratio <= 1.5:
        notes.append(f"Residual RMS {pct:.2f} % of the step, {ratio:.2f} x the noise: the "
                     f"model describes the capture.")
    else:
        notes.append(f"Residual RMS {pct:.2f} % of the step, {ratio:.2g} x the noise: the "
                     f"capture has a shape the model lacks (droop from AC coupling, a second "
                     f"pole, ringing?); see the residual picture.")
    if order == 2 and shape[1] < 1:
        overshoot = 100 * math.exp(-math.pi * shape[1] / math.sqrt(1 - shape[1] ** 2))
        notes.append(f"Overshoot {overshoot:.3g} %.")
    per = _slowest_tau_s(order, shape) / dt
    if per < 10:
        notes.append(f"Only {per:.2g} samples per time constant: a faster timebase would "
                     f"resolve it better.")
    settle = _settle_spans(order, shape, times, t)
    if settle.max() < GOOD_SETTLE:
        notes.append(f"No edge settles for {GOOD_SETTLE:g} time constants (at most "
                     f"{settle.max():.2g}): the levels are less certain (a slower timebase "
                     f"helps).")
    notes.append(f"{n_edges} edge(s), {n_points} points.")
    return " ".join(notes)


def _rms(r: np.ndarray) -> float:
    return float(np.sqrt(np.mean(np.square(r))))


def _span(y: np.ndarray) -> str:
    return f"{float(np.min(y)):.4g} to {float(np.max(y)):.4g}"


def _sig(v: float) -> float:
    return float(f"{v:.6g}")


def _fmt_s(v: float) -> str:
    a = abs(v)
    for unit, k in (("s", 1.0), ("ms", 1e3), ("us", 1e6), ("ns", 1e9)):
        if a >= 1.0 / k or unit == "ns":
            return f"{v * k:.4g} {unit}"
    return f"{v:.4g} s"


def _time_axis(span_s: float) -> tuple[str, float]:
    for unit, k in (("s", 1.0), ("ms", 1e3), ("us", 1e6)):
        if span_s >= 2.0 / k:
            return unit, k
    return "ns", 1e9


"""The deflection response (amplifier and yoke lag), its pre-compensation, and the drive's limits.

Between the samples and the spot sit an amplifier and a deflection yoke (or plates). Per axis
the spot follows the drive u through a linear response H(s):

  ideal:         H = 1
  first order:   H = 1 / (1 + s tau)                  (a voltage-driven yoke: tau = L / R_total)
  second order:  H = wn^2 / (s^2 + 2 zeta wn s + wn^2) (an amplifier with overshoot)

Pre-compensation divides the drawing by H at every harmonic of the looping frame
(`LagCompensation`, a `LinearStage`): for a first-order lag that is v = u + tau du/dt, the same
law as the yoke's V = R i + L di/dt. The compensated drive must stay within full scale, so the
beam planner shapes its path to what the drive can do, with the pure timing functions here:
`fastest_jump` / `jump_samples` (blanked jumps), `speed_limit` (lit strokes) and
`corner_dwell_samples` (corners the compensation cannot square).

`Drive` is the physical side, from the profile's ``[drive]`` table: volts and amps a frame needs
from the amplifier, the fraction of the deflection and of the writing speed reachable within the
rails and the current limit, and the sentences that tell the user.

Units: times in seconds (``tau_s``) unless a name says otherwise (``tau_us`` in the profile),
positions and speeds in drive units (full scale = 1) unless stated; tolerances in the same unit
as the positions they compare.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np

from .errors import FullScaleError, InputError, ProfileError, VectorgenWarning
from .runs import run_ranks
from .stages import LinearStage, register_stage

__all__ = ["Response", "LagCompensation", "fastest_jump", "fastest_jump_xy", "jump_paths",
           "jump_paths_xy", "jump_samples",
           "speed_limit", "corner_dwell_samples", "Drive", "DEFAULT_EDGE_SAMPLES"]

DEFAULT_EDGE_SAMPLES = 6
"""Length of each drive transition of a jump (samples). A drive that steps within one sample
rings when the frame is compensated harmonic by harmonic (measured: a 1.8 FS step overshoots by
35 % of full scale); smooth edges of 6 samples keep the overshoot within 0.3 % of full scale
(measured over random jumps at 48 to 192 kHz, tau 30 us to 1 ms) at the cost of 6 samples per
jump (12 for a jump too short to reach full drive)."""

_AXES = "xy"


# --- the response -----------------------------------------------------------------------------

@dataclass(frozen=True)
class _Axis:
    """One axis of a response: ideal (order 0), first order (tau_s) or second order (wn, zeta)."""

    order: int
    tau_s: float = 0.0
    wn: float = 0.0
    zeta: float = 0.0

    def gain(self, w: np.ndarray) -> np.ndarray:
        s = 1j * w
        if self.order == 1:
            return 1.0 / (1.0 + s * self.tau_s)
        if self.order == 2:
            return self.wn ** 2 / (s * s + 2.0 * self.zeta * self.wn * s + self.wn ** 2)
        return np.ones_like(s)

    @property
    def lag_s(self) -> float:
        """The steady lag behind a ramp (s): tau, or 2 zeta / wn; 0 when ideal."""
        if self.order == 1:
            return self.tau_s
        if self.order == 2:
            return 2.0 * self.zeta / self.wn
        return 0.0

    def step_error(self, t: np.ndarray) -> np.ndarray:
        """1 - s(t): how far the unit step response is from its target at t >= 0."""
        t = np.asarray(t, dtype=float)
        if self.order == 0 or (self.order == 1 and self.tau_s == 0):
            return np.zeros_like(t)
        if self.order == 1:
            return np.exp(-t / self.tau_s)
        wn, z = self.wn, self.zeta
        if z < 1.0:
            sig, wd = z * wn, wn * math.sqrt(1.0 - z * z)
            return np.exp(-sig * t) * (np.cos(wd * t) + sig / wd * np.sin(wd * t))
        if z == 1.0:
            return np.exp(-wn * t) * (1.0 + wn * t)
        p1, p2 = self._real_poles()
        return (p1 * np.exp(p2 * t) - p2 * np.exp(p1 * t)) / (p1 - p2)

    def ramp_tail(self, t: np.ndarray) -> np.ndarray:
        """The integral of 1 - s from t to infinity: after a velocity change dv the lag still to
        settle is dv times this (at t = 0 it is the steady lag, tau or 2 zeta / wn)."""
        t = np.asarray(t, dtype=float)
        if self.order == 0 or (self.order == 1 and self.tau_s == 0):
            return np.zeros_like(t)
        if self.order == 1:
            return self.tau_s * np.exp(-t / self.tau_s)
        wn, z = self.wn, self.zeta
        if z < 1.0:
            sig, wd = z * wn, wn * math.sqrt(1.0 - z * z)
            return np.exp(-sig * t) / wn ** 2 * (2.0 * sig * np.cos(wd * t)
                                                 + (sig * sig / wd - wd) * np.sin(wd * t))
        if z == 1.0:
            return np.exp(-wn * t) * (2.0 + wn * t) / wn
        p1, p2 = self._real_poles()
        return (p2 / p1 * np.exp(p1 * t) - p1 / p2 * np.exp(p2 * t)) / (p1 - p2)

    def _real_poles(self) -> tuple[float, float]:
        r = self.wn * math.sqrt(self.zeta ** 2 - 1.0)
        return -self.zeta * self.wn + r, -self.zeta * self.wn - r

    def _envelope(self, which: str, t: np.ndarray) -> np.ndarray:
        """An upper bound on |step_error| or |ramp_tail| at every time >= t (non-increasing)."""
        if self.order == 2 and self.zeta < 1.0:
            wn, z = self.wn, self.zeta
            sig, wd = z * wn, wn * math.sqrt(1.0 - z * z)
            if which == "step":
                c = 1.0 / math.sqrt(1.0 - z * z)
            else:
                c = math.hypot(2.0 * sig, sig * sig / wd - wd) / wn ** 2
            return c * np.exp(-sig * t)
        # Not oscillating: the function itself is positive and decreasing.
        return np.abs(self.step_error(t) if which == "step" else self.ramp_tail(t))

    def settle_s(self, which: str, level: np.ndarray) -> np.ndarray:
        """The last time |step_error| (which="step") or |ramp_tail| (which="ramp") is at or
        above `level` (array), 0 where it never is."""
        level = np.asarray(level, dtype=float)
        if self.order == 0 or (self.order == 1 and self.tau_s == 0):
            return np.zeros_like(level)
        if self.order == 1:
            scale = 1.0 if which == "step" else self.tau_s
            with np.errstate(divide="ignore"):
                return np.maximum(self.tau_s * np.log(scale / level), 0.0)
        return _last_time_at_or_above(self, which, level)


def _last_time_at_or_above(axis: _Axis, which: str, level: np.ndarray) -> np.ndarray:
    """Second-order settle times, for every level at once: a grid fine against the ringing
    period out to where the envelope is below the smallest level, then bisection between the
    grid points that bracket the last exceedance."""
    f = axis.step_error if which == "step" else axis.ramp_tail
    out = np.zeros_like(level)
    if (wanted := level > 0).sum() == 0:
        return out
    lo_level = level[wanted].min()
    t_end = 1.0 / axis.wn
    while axis._envelope(which, np.array(t_end)) >= lo_level:
        t_end *= 2.0
    # Ringing needs a grid fine against its period; a monotone settle only a fine enough one.
    dt = t_end / 4096.0 if axis.zeta >= 1.0 else min(2 * math.pi / axis.wn / 256.0,
                                                     t_end / 4096.0)
    grid = np.arange(0.0, t_end + dt, dt)
    mag = np.abs(f(grid))
    suffix_max = np.maximum.accumulate(mag[::-1])[::-1]
    # suffix_max is non-increasing: the count of points above a level finds its last exceedance
    idx = np.searchsorted(-suffix_max, -level[wanted], side="right")
    has = idx > 0
    a = grid[np.maximum(idx - 1, 0)]
    b = grid[np.minimum(idx, len(grid) - 1)]
    lv = level[wanted]
    for _ in range(48):
        mid = 0.5 * (a + b)
        above = np.abs(f(mid)) >= lv
        a = np.where(above, mid, a)
        b = np.where(above, b, mid)
    out[wanted] = np.where(has, a, 0.0)
    return out


@dataclass(frozen=True)
class Response:
    """The spot's response to the drive, per axis: ideal, first order or second order.

    Parameters
    ----------
    tau_s : (float, float)
        First-order time constant per axis (s); 0 is an ideal axis (and both 0 for second
        order).
    natural_hz : (float, float) or None
        Second-order natural frequency per axis (Hz); None for first order or ideal.
    damping : (float, float) or None
        Second-order damping ratio zeta per axis (> 0; below 1 the spot overshoots).

    Raises
    ------
    ProfileError
        A value out of range; the message names it.

    Notes
    -----
    H_1(j w) = 1 / (1 + j w tau);  H_2(j w) = wn^2 / (wn^2 - w^2 + 2 j zeta wn w),  wn = 2 pi f_n.

    Examples
    --------
    >>> r = Response.from_table({"tau_us": [300, 300]})
    >>> r.order, r.tau_s
    (1, (0.0003, 0.0003))
    >>> round(float(abs(r.gain([1 / (2 * 3.141592653589793 * 300e-6)])[0, 0]) ** 2), 12)
    0.5
    """

    tau_s: tuple = (0.0, 0.0)
    natural_hz: tuple | None = None
    damping: tuple | None = None

    def __post_init__(self):
        tau = _pair_of(self.tau_s, "tau_s")
        if any(not (math.isfinite(t) and t >= 0) for t in tau):
            raise ProfileError(f"tau_s must be >= 0 seconds (tau_s={list(tau)})", "tau_s")
        object.__setattr__(self, "tau_s", tau)
        if (self.natural_hz is None) != (self.damping is None):
            raise ProfileError("natural_hz and damping go together: give both or neither "
                               f"(natural_hz={self.natural_hz!r}, damping={self.damping!r})",
                               "natural_hz")
        if self.natural_hz is not None:
            fn = _pair_of(self.natural_hz, "natural_hz")
            zeta = _pair_of(self.damping, "damping")
            if any(not (math.isfinite(f) and f > 0) for f in fn):
                raise ProfileError(f"natural_hz must be > 0 (natural_hz={list(fn)})",
                                   "natural_hz")
            if any(not (math.isfinite(z) and z > 0) for z in zeta):
                raise ProfileError(f"damping must be > 0 (damping={list(zeta)})", "damping")
            if any(t > 0 for t in tau):
                raise ProfileError("give a first-order tau_s or a second-order natural_hz, not "
                                   f"both (tau_s={list(tau)}, natural_hz={list(fn)})", "tau_s")
            object.__setattr__(self, "natural_hz", fn)
            object.__setattr__(self, "damping", zeta)

    @classmethod
    def from_table(cls, table: dict | None, where: str = "[response]") -> "Response":
        """The response described by a profile's ``[response]`` table (None or empty: ideal).

        Keys: ``tau_us`` (first-order lag per axis, microseconds), or ``natural_hz`` with
        ``damping`` (second order). Each value is a number (both axes) or ``[x, y]``.

        Raises
        ------
        ProfileError
            An unknown key, a value of the wrong type or out of range; the message names the
            key and its value.

        Examples
        --------
        >>> Response.from_table({"natural_hz": [4000, 5000], "damping": 0.5}).order
        2
        >>> Response.from_table({"tau_us": -3})
        Traceback (most recent call last):
        ...
        vectorgen.errors.ProfileError: [response] tau_us must be >= 0 (tau_us=-3)
        """
        table = {} if table is None else table
        if not isinstance(table, dict):
            raise ProfileError(f"{where} must be a table (got {table!r})", "response")
        known = ("tau_us", "natural_hz", "damping")
        for key in table:
            if key not in known:
                raise ProfileError(f"{where}: unknown key {key!r} (known: {', '.join(known)})",
                                   key)
        if "tau_us" in table and "natural_hz" in table:
            raise ProfileError(f"{where}: give tau_us (first order) or natural_hz with damping "
                               f"(second order), not both (tau_us={table['tau_us']!r}, "
                               f"natural_hz={table['natural_hz']!r})", "tau_us")
        if "tau_us" in table:
            tau = _table_pair(table, "tau_us", where, lambda v: v >= 0, ">= 0")
            return cls(tau_s=(tau[0] * 1e-6, tau[1] * 1e-6))
        if "natural_hz" in table or "damping" in table:
            for key in ("natural_hz", "damping"):
                if key not in table:
                    raise ProfileError(f"{where}: natural_hz and damping go together; "
                                       f"{key} is missing", key)
            fn = _table_pair(table, "natural_hz", where, lambda v: v > 0, "> 0")
            zeta = _table_pair(table, "damping", where, lambda v: v > 0, "> 0")
            return cls(natural_hz=fn, damping=zeta)
        return cls()

    @property
    def order(self) -> int:
        """0 (ideal), 1 (first order) or 2 (second order)."""
        if self.natural_hz is not None:
            return 2
        return 1 if any(t > 0 for t in self.tau_s) else 0

    def axes(self) -> tuple[_Axis, _Axis]:
        """The two per-axis models (x, y)."""
        if self.order == 2:
            return tuple(_Axis(2, wn=2 * math.pi * f, zeta=z)
                         for f, z in zip(self.natural_hz, self.damping))
        return tuple(_Axis(1 if t > 0 else 0, tau_s=t) for t in self.tau_s)

    @property
    def lag_s(self) -> np.ndarray:
        """(2,) steady lag behind a ramp per axis (s): tau, or 2 zeta / wn for second order."""
        return np.array([a.lag_s for a in self.axes()])

    def gain(self, f_hz) -> np.ndarray:
        """H(j 2 pi f) per axis: ``(m, 2)`` complex for the frequencies `f_hz` (m,), Hz."""
        w = 2.0 * np.pi * np.asarray(f_hz, dtype=float).reshape(-1)
        return np.column_stack([a.gain(w) for a in self.axes()])

    def step(self, t_s) -> np.ndarray:
        """Closed-form unit step response per axis, ``(len(t), 2)``; 0 before t = 0.

        Notes
        -----
        First order: 1 - exp(-t / tau). Second order, zeta < 1:
        1 - exp(-zeta wn t) (cos wd t + zeta wn / wd sin wd t), wd = wn sqrt(1 - zeta^2);
        zeta = 1: 1 - exp(-wn t)(1 + wn t); zeta > 1, real poles p1, p2:
        1 - (p1 exp(p2 t) - p2 exp(p1 t)) / (p1 - p2).

        Examples
        --------
        >>> Response(tau_s=(1.0, 0.0)).step([0.0, 1.0]).round(4)
        array([[0.    , 1.    ],
               [0.6321, 1.    ]])
        """
        t = np.asarray(t_s, dtype=float).reshape(-1)
        tp = np.maximum(t, 0.0)
        out = np.column_stack([1.0 - a.step_error(tp) for a in self.axes()])
        out[t < 0] = 0.0
        return out

    def settle_s(self, distance, tol) -> np.ndarray:
        """Time after a step of size `distance` from which the spot stays within `tol` of the
        target, per axis: shape ``np.shape(distance) + (2,)`` (0 where the step is within tol).

        Notes
        -----
        First order, closed form: t = tau ln(d / tol). Second order: the last time
        d |1 - s(t)| >= tol, found on the closed-form step response (bisected to below 1 ns).

        Examples
        --------
        >>> (Response(tau_s=(300e-6, 300e-6)).settle_s(1.0, 0.01) * 1e6).round(3)  # 300 us ln 100
        array([1381.551, 1381.551])
        """
        d = np.abs(np.asarray(distance, dtype=float))
        tol = float(tol)
        if not tol > 0:
            raise InputError(f"tol must be > 0 (tol={tol})", "tol")
        with np.errstate(divide="ignore"):
            level = np.where(d > 0, tol / np.where(d > 0, d, 1.0), np.inf)
        return np.stack([a.settle_s("step", level.reshape(-1)).reshape(d.shape)
                         for a in self.axes()], axis=-1)


def _pair_of(value, name: str) -> tuple[float, float]:
    """A number or two numbers as an (x, y) pair of floats (constructor arguments)."""
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        arr = np.empty(0)
    if arr.ndim == 0:
        arr = np.broadcast_to(arr, (2,))
    if arr.shape != (2,):
        raise ProfileError(f"{name} must be one number or two [x, y] ({name}={value!r})", name)
    return float(arr[0]), float(arr[1])


def _table_pair(table: dict, key: str, where: str, ok, rule: str) -> tuple[float, float]:
    """A profile value that is one number (both axes) or [x, y], each passing `ok`."""
    value = table[key]
    items = value if isinstance(value, list) else [value]
    if len(items) not in (1, 2) or not all(
            isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)
            for v in items):
        raise ProfileError(f"{where} {key} must be a number or two numbers [x, y] "
                           f"({key}={value!r})", key)
    if not all(ok(v) for v in items):
        raise ProfileError(f"{where} {key} must be {rule} ({key}={value!r})", key)
    return (float(items[0]), float(items[-1]))


# --- the stage --------------------------------------------------------------------------------

class LagCompensation(LinearStage):
    """Pre-compensation of the deflection response: each harmonic of the looping frame is
    divided by the spot's response H, so the spot draws the frame itself.

    Parameters
    ----------
    model : Response
        The spot's response (amplifier and yoke).

    Notes
    -----
    v_k = u_k / H(f_k) at every harmonic f_k = k rate / n. First order: v = u + tau du/dt;
    second order: v = u + (2 zeta / wn) du/dt + (1 / wn^2) d2u/dt2. The chain merges this
    stage with other linear stages (e.g. the interface's coupling) into one division.

    Examples
    --------
    >>> import numpy as np
    >>> n, rate, tau = 96, 96000, 300e-6
    >>> ph = 2 * np.pi * np.arange(n) / n                    # 1 kHz circle, radius 0.5
    >>> u = 0.5 * np.column_stack([np.cos(ph), np.sin(ph)])
    >>> stage = LagCompensation(Response(tau_s=(tau, tau)))
    >>> v = stage.frame(u, rate)
    >>> w = 2 * np.pi * 1000.0                                 # v = u + tau du/dt, by hand:
    >>> bool(np.allclose(v[:, 0], 0.5 * (np.cos(ph) - w * tau * np.sin(ph))))
    True
    >>> bool(np.allclose(stage.hardware(v, rate), u))
    True
    """

    name = "response"

    def __init__(self, model: Response):
        if not isinstance(model, Response):
            raise TypeError(f"LagCompensation needs a Response (got {type(model).__name__})")
        self.model = model
        self._top_hz = 0.0

    def response(self, f_hz):
        return self.model.gain(np.asarray(f_hz, dtype=float))

    def saw(self, drive, out, rate, merged=()):
        # kept only for the report: the boost is worst at the frame's top harmonic
        n = len(drive)
        self._top_hz = (n // 2) * rate / n if n > 0 else 0.0

    def report(self) -> dict:
        """The response and the peak boost |1 / H| over the frequencies last compensated (the
        highest-frequency harmonic costs the most drive)."""
        m = self.model
        out = {"order": m.order}
        if m.order == 1:
            out["tau_us"] = [t * 1e6 for t in m.tau_s]
        elif m.order == 2:
            out["natural_hz"] = list(m.natural_hz)
            out["damping"] = list(m.damping)
        if self._top_hz > 0:
            f = np.linspace(0.0, self._top_hz, 1025)
            boost = 1.0 / np.abs(m.gain(f))
            k = np.unravel_index(np.argmax(boost), boost.shape)
            out["peak_boost"] = float(boost[k])
            out["peak_boost_hz"] = float(f[k[0]])
        return out


register_stage("response", LagCompensation)


# --- planner-facing timing: blanked jumps -----------------------------------------------------

def _edge_response(t: np.ndarray, r: float, tau: float) -> np.ndarray:
    """q(t): the lag's output at time t (from rest at 0) when its input rises from 0 to 1
    along w(t / r), w(x) = x - sin(2 pi x) / (2 pi) (flat ends up to the second derivative)."""
    e = np.exp(-t / tau)
    a = 2.0 * np.pi / r * tau
    ramp = (t - tau * (1.0 - e)) / r
    wave = (np.sin(2.0 * np.pi * t / r) - a * np.cos(2.0 * np.pi * t / r) + a * e) / (1.0 + a * a)
    return ramp - wave / (2.0 * np.pi)


def _jump_plan(x0, x1, tau, limit, tol, edge_s):
    """The drive plan of the fastest jump, elementwise: (peak drive P, hold time h, end time T).

    The drive rises from x0 to P over edge_s, holds P for h, and falls to x1 over edge_s; the
    spot starts at rest at x0 and comes to rest at x1. With P at the limit the jump takes
    T = edge_s + tau ln(|P - x0| / |P - x1|): the edges cost one edge length over the ideal
    full-drive move. Short jumps never reach the limit (h = 0, P = (x1 - E x0) / (1 - E),
    E = exp(-edge_s / tau)). A target within `tol` of the limit is reached to within tol."""
    x0, x1, tau, limit = np.broadcast_arrays(*(np.asarray(a, dtype=float)
                                               for a in (x0, x1, tau, limit)))
    sign = np.where(x1 >= x0, 1.0, -1.0)
    full = sign * limit
    lag = tau > 0
    safe_tau = np.where(lag, tau, 1.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        if edge_s > 0:
            e = np.exp(-edge_s / safe_tau)
            peak = (x1 - e * x0) / (1.0 - e)
            short = np.abs(peak) <= limit
            # Hold until the spot's distance to P, |P - x0| (1 - q) exp(-h / tau) after the
            # rising edge q, is what the falling edge closes, |P - x1| (1 - q) / E: 1 - q
            # cancels. Capped at tol / E, the spot then ends within (1 - q) tol of x1.
            gap = np.maximum(np.abs(full - x1), tol) / e
        else:
            short = np.zeros(x0.shape, dtype=bool)
            peak = full
            gap = np.maximum(np.abs(full - x1), tol)
        hold = np.where(short, 0.0, np.maximum(safe_tau * np.log(np.abs(full - x0) / gap), 0.0))
    peak = np.where(short, peak, full)
    total = 2.0 * edge_s + hold
    moving = x1 != x0
    total = np.where(moving & lag, total, 0.0)
    return peak, np.where(lag, hold, 0.0), total, moving, lag


def _check_jump(x0, x1, limit, tol):
    limit = np.asarray(limit, dtype=float)
    if not (np.all(np.isfinite(limit)) and np.all(limit > 0)):
        raise InputError(f"drive_limit must be > 0 (drive_limit={limit.tolist()})",
                         "drive_limit")
    if not (math.isfinite(tol) and tol > 0):
        raise InputError(f"tol must be > 0 (tol={tol})", "tol")
    for name, x in (("x0", x0), ("x1", x1)):
        over = np.abs(np.asarray(x, dtype=float)) > limit
        if np.any(over):
            worst = float(np.max(np.abs(np.asarray(x, dtype=float))))
            raise FullScaleError(f"a jump end is beyond the drive limit ({name}={worst:g}, "
                                 f"drive_limit={np.max(limit):g})", name)


def _edge_s(edge_samples, rate) -> float:
    if not (isinstance(edge_samples, (int, np.integer)) and edge_samples >= 0):
        raise InputError(f"edge_samples must be a whole number >= 0 "
                         f"(edge_samples={edge_samples!r})", "edge_samples")
    if not (rate > 0):
        raise InputError(f"rate must be > 0 (rate={rate!r})", "rate")
    return edge_samples / float(rate)


def jump_samples(x0, x1, tau_s, drive_limit, rate, tol,
                 edge_samples: int = DEFAULT_EDGE_SAMPLES) -> np.ndarray:
    """Samples the fastest blanked jump takes, elementwise over arrays of jumps.

    Parameters
    ----------
    x0, x1 : array_like
        Start and end positions (drive units), broadcast together; the spot is at rest at both.
    tau_s : float or array_like
        First-order lag (s), broadcast with x0 (``(2,)`` for per-axis columns).
    drive_limit : float or array_like
        Largest |drive| allowed, > 0 (1.0 is full scale; leave a little headroom, see Notes).
    rate : float
        Sample rate, Hz.
    tol : float
        Arrival tolerance (drive units), > 0: only used when the target is so close to the
        limit that it can be reached in no finite time.
    edge_samples : int
        Length of each drive transition (see `DEFAULT_EDGE_SAMPLES`).

    Returns
    -------
    int array
        Samples after the start until the spot is at x1 (0 for no move, 1 for an ideal axis).
        A 2-D jump moves both axes at once, each its fastest: its cost is the larger of the
        two, ``jump_samples(p0, p1, tau_xy, ...).max(axis=-1)``.

    Raises
    ------
    FullScaleError
        An end beyond the drive limit.

    Notes
    -----
    Full drive P = +-drive_limit towards the target: x(t) = P + (x0 - P) exp(-t / tau), the
    fastest a first-order lag moves with |v| <= drive_limit, arriving exactly at
    T = tau ln(|P - x0| / |P - x1|) (+ one edge length for the smooth drive edges), or within
    tol at tau ln(|P - x0| / tol) when |P - x1| < tol. The compensated drive of the sampled
    path rings over drive_limit by up to 0.3 % of full scale with 6-sample edges (kinks in the
    strokes next to it add their own): plan with drive_limit = 0.99 for a full scale of 1.

    Examples
    --------
    >>> # 300 us lag at 96 kHz, full drive 1.0: 0.0 -> 0.5 takes 300 us ln 2 (19.96) + 6 samples
    >>> int(jump_samples(0.0, 0.5, 300e-6, 1.0, 96000, 0.006))
    26
    """
    edge_s = _edge_s(edge_samples, rate)
    _check_jump(x0, x1, drive_limit, tol)
    _, _, total, moving, lag = _jump_plan(x0, x1, tau_s, drive_limit, tol, edge_s)
    count = np.ceil(total * rate - 1e-9).astype(int)
    return np.where(moving, np.where(lag, np.maximum(count, 1), 1), 0)


def fastest_jump(x0: float, x1: float, tau_s: float, drive_limit: float, rate: float,
                 tol: float, edge_samples: int = DEFAULT_EDGE_SAMPLES
                 ) -> tuple[np.ndarray, int]:
    """The spot path of the fastest blanked jump from x0 to x1 on one axis.

    Parameters
    ----------
    x0, x1, tau_s, drive_limit, rate, tol, edge_samples
        As for `jump_samples`, for one jump (numbers).

    Returns
    -------
    samples : (count,) float64
        Spot positions at t = 1 / rate ... count / rate after the start; the last is x1. Give
        these to the compensation stage: its drive for them is the full-drive move.
    count : int

    Notes
    -----
    Drive rises from x0 to P along w(t / r), w(x) = x - sin(2 pi x) / (2 pi), r the edge
    length, holds P, and falls back to x1 along the same shape, timed so that the spot lands
    at x1 at rest. The spot follows tau dx/dt = v - x in closed form on each piece; with
    ``edge_samples=0`` it is exactly x(t) = P + (x0 - P) exp(-t / tau), then x1.
    Both axes of a 2-D jump move at once (`fastest_jump_xy`).

    A target within tol of drive_limit is reached in no finite time: the path then ends within
    tol and its last sample steps onto x1, which asks for about tol tau rate more drive than
    the limit for that sample (0.16 FS at 300 us, 96 kHz, tol 0.006). Keep jump targets more
    than tol inside drive_limit.

    Examples
    --------
    >>> x, n = fastest_jump(0.0, 0.5, 300e-6, 1.0, 96000, 0.006, edge_samples=0)
    >>> n, round(float(x[0]), 5), float(x[-1])     # 1 - exp(-1 / 28.8) after one sample
    (20, 0.03413, 0.5)
    """
    x0, x1, tau, limit = float(x0), float(x1), float(tau_s), float(drive_limit)
    count = int(jump_samples(x0, x1, tau, limit, rate, tol, edge_samples))
    if count == 0:
        _check_jump(x0, x1, limit, tol)
        return np.empty(0), 0
    x = jump_paths(np.array([x0]), np.array([x1]), tau, limit, rate, tol, edge_samples)
    return x, count


def jump_paths(x0, x1, tau_s, drive_limit, rate, tol,
               edge_samples: int = DEFAULT_EDGE_SAMPLES, samples=None) -> np.ndarray:
    """The spot paths of many fastest jumps on one axis (`fastest_jump`'s path for each),
    one after another in one array.

    Parameters
    ----------
    x0, x1 : (J,) array_like
        Start and end of each jump (drive units).
    tau_s, drive_limit : float or (J,) array_like
    rate, tol, edge_samples
        As for `jump_samples`.
    samples : (J,) array_like of int, optional
        Samples to give each jump (default: its own count). A longer jump holds x1 after it
        arrives; a shorter one is cut.

    Returns
    -------
    (sum of samples,) float64
        Jump j's positions at t = 1 / rate, 2 / rate, ... after its start.
    """
    x0, x1, tau, limit = np.broadcast_arrays(*(np.atleast_1d(np.asarray(a, dtype=float))
                                               for a in (x0, x1, tau_s, drive_limit)))
    edge_s = _edge_s(edge_samples, rate)
    _check_jump(x0, x1, limit, tol)
    count = np.asarray(jump_samples(x0, x1, tau, limit, rate, tol, edge_samples),
                       dtype=np.int64).reshape(x0.shape)
    n = count if samples is None else np.broadcast_to(np.asarray(samples, dtype=np.int64),
                                                      x0.shape)
    J = len(x0)
    j = np.repeat(np.arange(J), n)
    k = run_ranks(n)                                       # sample of its jump, from 0
    x = x1[j]
    peak, hold, total, moving, lag = _jump_plan(x0, x1, tau, limit, tol, edge_s)
    live = np.flatnonzero(moving[j] & lag[j] & (k < count[j] - 1))   # the last is x1
    if not live.size:
        return x
    jl = j[live]
    t = (k[live] + 1) / float(rate)
    tl, pl, hl, x0l, x1l = tau[jl], peak[jl], hold[jl], x0[jl], x1[jl]
    safe = np.where(lag, tau, 1.0)
    if edge_s > 0:
        x_edge = x0 + (peak - x0) * _edge_response(np.full(J, edge_s), edge_s, safe)
    else:
        x_edge = x0.copy()
    x_fall = peak + (x_edge - peak) * np.exp(-hold / safe)
    v = x1l.copy()
    held = (t > edge_s) & (t <= edge_s + hl)
    v[held] = pl[held] + (x_edge[jl][held] - pl[held]) * np.exp(-(t[held] - edge_s) / tl[held])
    if edge_s > 0:
        rise = t <= edge_s
        v[rise] = x0l[rise] + (pl[rise] - x0l[rise]) * _edge_response(t[rise], edge_s, tl[rise])
        fall = (t > edge_s + hl) & (t < total[jl])
        tf = t[fall] - edge_s - hl[fall]
        ef = np.exp(-tf / tl[fall])
        v[fall] = (x_fall[jl][fall] * ef + pl[fall] * (1.0 - ef)
                   + (x1l[fall] - pl[fall]) * _edge_response(tf, edge_s, tl[fall]))
    x[live] = v
    return x


def fastest_jump_xy(p0, p1, tau_s, drive_limit, rate, tol,
                    edge_samples: int = DEFAULT_EDGE_SAMPLES) -> np.ndarray:
    """The fastest 2-D blanked jump: each axis makes its own fastest move at the same time; the
    one that arrives first holds its target. Returns ``(count, 2)`` spot positions after the
    start, the last row p1; count = the larger axis count.

    ``tau_s`` and ``drive_limit`` are one number or (x, y). ``tol`` is split between the axes
    (tol / sqrt 2 each) so the spot lands within tol of p1.

    Examples
    --------
    >>> xy = fastest_jump_xy((0.0, 0.0), (0.5, -0.1), 300e-6, 1.0, 96000, 0.006)
    >>> xy.shape, xy[-1].tolist()
    ((26, 2), [0.5, -0.1])
    """
    p0, p1 = np.asarray(p0, dtype=float)[None], np.asarray(p1, dtype=float)[None]
    return jump_paths_xy(p0, p1, tau_s, drive_limit, rate, tol, edge_samples)


def jump_paths_xy(p0, p1, tau_s, drive_limit, rate, tol,
                  edge_samples: int = DEFAULT_EDGE_SAMPLES, samples=None) -> np.ndarray:
    """Many 2-D fastest jumps (`fastest_jump_xy` for each of the rows of p0 and p1, (J, 2)),
    one after another: ``(sum of samples, 2)``. ``drive_limit``: one number, (2,) per axis or
    (J, 1) per jump. ``samples`` (J,): each jump's length (default its count, the larger of
    its axes'); a longer one holds p1, a shorter one is cut."""
    p0, p1 = np.asarray(p0, dtype=float), np.asarray(p1, dtype=float)
    tau = np.broadcast_to(np.asarray(tau_s, dtype=float), (2,))
    limit = np.broadcast_to(np.asarray(drive_limit, dtype=float), (len(p0), 2))
    tol_axis = tol / math.sqrt(2.0)
    if samples is None:
        samples = np.max([jump_samples(p0[:, i], p1[:, i], tau[i], limit[:, i], rate, tol_axis,
                                       edge_samples) for i in range(2)], axis=0)
    return np.column_stack([jump_paths(p0[:, i], p1[:, i], tau[i], limit[:, i], rate, tol_axis,
                                       edge_samples, samples) for i in range(2)])


# --- planner-facing timing: lit strokes and corners -------------------------------------------

def _lag_per_axis(tau_s) -> np.ndarray:
    """(2,) steady lag per axis (s) from a first-order tau (number or pair) or a Response."""
    if isinstance(tau_s, Response):
        return tau_s.lag_s
    lag = np.broadcast_to(np.asarray(tau_s, dtype=float), (2,)).copy()
    if not np.all(np.isfinite(lag) & (lag >= 0)):
        raise InputError(f"tau_s must be >= 0 (tau_s={lag.tolist()})", "tau_s")
    return lag


def speed_limit(u, tau_s, drive_limit, direction=None) -> np.ndarray:
    """The largest steady writing speed (drive units per second) at spot position u for which
    the compensated drive stays within the limit.

    Parameters
    ----------
    u : (..., 2) array_like
        Spot positions (drive units) along a stroke.
    tau_s : float, (2,) or Response
        First-order lag per axis (s), or a Response (second order uses its ramp lag
        2 zeta / wn, see Notes).
    drive_limit : float or (2,)
        Largest |drive| per axis.
    direction : (..., 2) array_like, optional
        Direction of travel (any length). Without it: the per-axis limit for travel in either
        sense.

    Returns
    -------
    (..., 2) array without `direction` (per axis), (...,) with it; inf where no axis limits
    (an ideal response, or travel along an unlagged axis), 0 where u is at the limit already.

    Notes
    -----
    Per axis the drive is v = u + T du/dt, T = tau (first order) or 2 zeta / wn (second order
    on a straight run; a curve of curvature k adds s^2 k n / wn^2, n its normal). At speed s in
    unit direction d: s <= (limit - sign(d_i) u_i) / (T_i |d_i|) for every axis with d_i != 0.

    Examples
    --------
    >>> speed_limit([0.5, 0.0], 300e-6, 1.0).round(1)            # (1 - |u|) / tau
    array([1666.7, 3333.3])
    >>> float(speed_limit([0.5, 0.0], 300e-6, 1.0, direction=[-1.0, 0.0]).round(1))
    5000.0
    """
    u = np.asarray(u, dtype=float)
    lag = _lag_per_axis(tau_s)
    limit = np.broadcast_to(np.asarray(drive_limit, dtype=float), (2,))
    with np.errstate(divide="ignore", invalid="ignore"):
        if direction is None:
            room = np.maximum(limit - np.abs(u), 0.0)
            return np.where(lag > 0, room / np.where(lag > 0, lag, 1.0), np.inf)
        d = np.asarray(direction, dtype=float)
        norm = np.linalg.norm(d, axis=-1, keepdims=True)
        d = d / np.where(norm > 0, norm, 1.0)      # no direction: nothing moves, no limit
        room = np.maximum(limit - np.sign(d) * u, 0.0)
        rate = lag * np.abs(d)
        per_axis = np.where(rate > 0, room / np.where(rate > 0, rate, 1.0), np.inf)
    return per_axis.min(axis=-1)


def corner_dwell_samples(turn_deg, speed, lag, rate, tol) -> np.ndarray:
    """Samples to dwell at a corner the compensation cannot square, so the spot's lag settles
    into the new direction to within `tol`.

    Parameters
    ----------
    turn_deg : array_like
        Turning angle (0 = straight on, 180 = reversal).
    speed : float or array_like
        Writing speed (length units per second, as `tol`).
    lag : float, (natural_hz, damping) or Response
        A first-order tau (s), a second-order pair, or a Response (its slower axis).
    rate : float
        Sample rate, Hz.
    tol : float
        Settle tolerance (e.g. the spot size, in the unit of `speed` x seconds).

    Returns
    -------
    int array, shape of the broadcast of turn_deg and speed

    Notes
    -----
    A turn changes the velocity by dv = 2 v sin(turn / 2). The lag vector (T v behind the
    drive) then has dv times R(t) = integral_t^inf (1 - s(tau)) d tau left to settle, s the
    step response: first order R = tau exp(-t / tau), so t = tau ln(tau dv / tol); second order
    R(t) = exp(-zeta wn t) (2 zeta wn cos wd t + (zeta^2 wn^2 / wd - wd) sin wd t) / wn^2,
    settled at its last crossing of tol / dv.

    Examples
    --------
    >>> # 90 deg: 28.8 samples x ln(300 us x 566 / 0.006) = 96.3
    >>> corner_dwell_samples([0, 90, 180], 400.0, 300e-6, 96000, 0.006).tolist()
    [0, 97, 107]
    """
    if isinstance(lag, Response):
        axes = lag.axes()
    elif np.ndim(lag) == 0:
        tau = float(lag)
        if not (math.isfinite(tau) and tau >= 0):
            raise InputError(f"lag must be a tau >= 0 seconds (lag={lag!r})", "lag")
        axes = (_Axis(1 if tau > 0 else 0, tau_s=tau),)
    else:
        if np.shape(lag) != (2,):
            raise InputError(f"lag must be a tau in seconds, (natural_hz, damping) or a "
                             f"Response (lag={lag!r})", "lag")
        fn, zeta = (float(v) for v in lag)
        axes = Response(natural_hz=(fn, fn), damping=(zeta, zeta)).axes()[:1]
    if not (math.isfinite(tol) and tol > 0):
        raise InputError(f"tol must be > 0 (tol={tol})", "tol")
    turn, v = np.broadcast_arrays(np.asarray(turn_deg, dtype=float),
                                  np.abs(np.asarray(speed, dtype=float)))
    dv = 2.0 * v * np.abs(np.sin(np.radians(turn) / 2.0))
    with np.errstate(divide="ignore"):
        level = np.where(dv > 0, tol / np.where(dv > 0, dv, 1.0), np.inf).reshape(-1)
    t = np.max([a.settle_s("ramp", level) for a in axes], axis=0).reshape(dv.shape)
    return np.ceil(t * rate - 1e-9).astype(int)


# --- the drive, physically ---------------------------------------------------------------------

_DRIVE_KEYS = ("kind", "yoke_ohm", "yoke_mh", "amp_ohm", "sense_ohm", "rail_v",
               "current_limit_a", "amps_per_fs", "volts_per_fs")


@dataclass(frozen=True)
class Drive:
    """The deflection amplifier and its load, per axis, from a profile's ``[drive]`` table.

    Parameters
    ----------
    kind : {"voltage", "current"}
        A voltage amplifier (the coil current lags, tau = L / R_total) or a current-driving
        one (its own bandwidth applies: [response]).
    yoke_ohm, yoke_mh : (float, float) or None
        Coil resistance (ohm) and inductance (mH) per axis (magnetic deflection).
    amp_ohm : (float, float)
        Output resistance of a voltage amplifier (ohm), in series with the coil.
    sense_ohm : (float, float)
        Current-sense resistor in series with the coil (ohm).
    rail_v : (float, float) or None
        Peak output voltage the amplifier's supply allows; None = not limited.
    current_limit_a : (float, float) or None
        Peak output current; None = not limited.
    amps_per_fs : (float, float) or None
        Coil current at full-scale drive (A, magnetic deflection), or
    volts_per_fs : (float, float) or None
        Plate voltage at full-scale drive (V, electrostatic deflection).

    Notes
    -----
    Coil: V_yoke = R_yoke i + L di/dt, i = amps_per_fs u. The amplifier supplies
    V_amp = (R_yoke + R_sense [+ R_amp for a voltage amplifier]) i + L di/dt, which the rails
    bound; a voltage drive's lag is tau = L / (R_yoke + R_amp + R_sense).

    Examples
    --------
    >>> d = Drive.from_table({"yoke_ohm": 10, "yoke_mh": 3, "amps_per_fs": 2, "rail_v": 24})
    >>> [round(t * 1e6, 3) for t in d.tau_s]
    [300.0, 300.0]
    """

    kind: str = "voltage"
    yoke_ohm: tuple | None = None
    yoke_mh: tuple | None = None
    amp_ohm: tuple = (0.0, 0.0)
    sense_ohm: tuple = (0.0, 0.0)
    rail_v: tuple | None = None
    current_limit_a: tuple | None = None
    amps_per_fs: tuple | None = None
    volts_per_fs: tuple | None = None

    def __post_init__(self):
        if self.kind not in ("voltage", "current"):
            raise ProfileError(f"kind must be 'voltage' or 'current' (kind={self.kind!r})",
                               "kind")
        rules = {"yoke_ohm": ">", "yoke_mh": ">", "amp_ohm": ">=", "sense_ohm": ">=",
                 "rail_v": ">", "current_limit_a": ">", "amps_per_fs": ">", "volts_per_fs": ">"}
        for key, rule in rules.items():
            value = getattr(self, key)
            if value is None:
                continue
            pair = _pair_of(value, key)
            if not all(math.isfinite(v) and (v > 0 if rule == ">" else v >= 0) for v in pair):
                raise ProfileError(f"{key} must be {rule} 0 ({key}={list(pair)})", key)
            object.__setattr__(self, key, pair)
        if self.amps_per_fs is not None and self.volts_per_fs is not None:
            raise ProfileError("give amps_per_fs (magnetic) or volts_per_fs (electrostatic), "
                               f"not both (amps_per_fs={list(self.amps_per_fs)}, "
                               f"volts_per_fs={list(self.volts_per_fs)})", "amps_per_fs")
        if self.volts_per_fs is not None and (self.yoke_ohm or self.yoke_mh):
            raise ProfileError("volts_per_fs is for deflection plates, which have no yoke "
                               f"(yoke_ohm={self.yoke_ohm}, yoke_mh={self.yoke_mh})",
                               "volts_per_fs")
        if self.amps_per_fs is not None:
            for key in ("yoke_ohm", "yoke_mh"):
                if getattr(self, key) is None:
                    raise ProfileError(f"amps_per_fs needs the coil's {key} "
                                       f"(amps_per_fs={list(self.amps_per_fs)})", key)
        if (self.yoke_ohm is None) != (self.yoke_mh is None):
            missing = "yoke_mh" if self.yoke_mh is None else "yoke_ohm"
            raise ProfileError(f"the coil needs both yoke_ohm and yoke_mh; {missing} is missing",
                               missing)

    @classmethod
    def from_table(cls, table: dict, where: str = "[drive]") -> "Drive":
        """The drive described by a profile's ``[drive]`` table; each number may be given once
        (both axes) or as ``[x, y]``.

        Raises
        ------
        ProfileError
            An unknown key, a wrong type or an impossible value; the message names the key and
            its value.

        Examples
        --------
        >>> Drive.from_table({"kind": "voltage", "yoke_ohm": [8, 12], "yoke_mh": 3}).yoke_ohm
        (8.0, 12.0)
        >>> Drive.from_table({"yoke_ohms": 8})
        Traceback (most recent call last):
        ...
        vectorgen.errors.ProfileError: [drive]: unknown key 'yoke_ohms' (known: kind, yoke_ohm, \
yoke_mh, amp_ohm, sense_ohm, rail_v, current_limit_a, amps_per_fs, volts_per_fs)
        """
        if not isinstance(table, dict):
            raise ProfileError(f"{where} must be a table (got {table!r})", "drive")
        kwargs = {}
        for key, value in table.items():
            if key not in _DRIVE_KEYS:
                raise ProfileError(f"{where}: unknown key {key!r} "
                                   f"(known: {', '.join(_DRIVE_KEYS)})", key)
            if key == "kind":
                if value not in ("voltage", "current"):
                    raise ProfileError(f"{where} kind must be 'voltage' or 'current' "
                                       f"(kind={value!r})", key)
                kwargs[key] = value
                continue
            ok = (lambda v: v >= 0) if key in ("amp_ohm", "sense_ohm") else (lambda v: v > 0)
            rule = ">= 0" if key in ("amp_ohm", "sense_ohm") else "> 0"
            kwargs[key] = _table_pair(table, key, where, ok, rule)
        try:
            return cls(**kwargs)
        except ProfileError as exc:
            raise ProfileError(f"{where} {exc}", exc.parameter) from None

    @property
    def magnetic(self) -> bool:
        return self.volts_per_fs is None

    @property
    def tau_s(self) -> tuple[float, float] | None:
        """L / (R_yoke + R_amp + R_sense) per axis for a voltage-driven coil; None otherwise
        (a current drive's or plate amplifier's lag is its own bandwidth, from [response])."""
        if self.kind != "voltage" or self.yoke_mh is None:
            return None
        return tuple(float(l * 1e-3 / r) for l, r in zip(self.yoke_mh, self._loop_ohm()))

    def _loop_ohm(self) -> np.ndarray:
        """Resistance the amplifier drives through: coil and sense resistor, plus a voltage
        amplifier's own output resistance (it drops inside the rails)."""
        r = np.add(self.yoke_ohm, self.sense_ohm)
        return r + np.asarray(self.amp_ohm) if self.kind == "voltage" else r

    def spot_response(self, response: Response | None = None) -> Response:
        """The response to compensate: a given ``[response]`` (a measurement) wins; otherwise a
        voltage-driven coil's L / R lag, else ideal. Warns when a first-order ``[response]``
        disagrees with L / R by more than 20 %."""
        tau = self.tau_s
        if response is not None and response.order > 0:
            if tau is not None and response.order == 1:
                given = np.asarray(response.tau_s)
                if np.any(np.abs(given - tau) > 0.2 * np.asarray(tau)):
                    warnings.warn(
                        f"[response] tau_us = {[round(t * 1e6, 1) for t in given]} but the coil "
                        f"in [drive] gives L / R = {[round(t * 1e6, 1) for t in tau]} us; "
                        "using [response]", VectorgenWarning, stacklevel=2)
            return response
        if tau is not None:
            return Response(tau_s=tau)
        return response if response is not None else Response()

    def needs(self, drive_frame, rate) -> dict:
        """Volts and amps the amplifier must supply for a looping frame.

        Parameters
        ----------
        drive_frame : (n, 2) array_like
            One period of the intended deflection (drive units; the drawing, before
            compensation: the current the coil must carry).
        rate : float
            Sample rate, Hz.

        Returns
        -------
        dict
            ``refresh_hz``; per axis (2,) arrays: ``amps_peak``, ``yoke_v_peak`` (across the
            coil), ``amp_v_peak`` (what the amplifier supplies), ``resistive_v_peak``;
            and the (m, 2) series ``amp_v_resistive`` and ``amp_v_inductive`` (4x
            oversampled) that `reach` uses. Electrostatic: ``plate_v_peak``.

        Notes
        -----
        di/dt of the looping frame is exact: each harmonic times j 2 pi f (FFT). Peaks are
        read from the band-limited waveform at 4x the sample rate (between samples too).

        Examples
        --------
        >>> import numpy as np
        >>> d = Drive(yoke_ohm=10, yoke_mh=3, amps_per_fs=2)
        >>> ph = 2 * np.pi * np.arange(96) / 96                 # 1 kHz full-scale sine
        >>> n = d.needs(np.column_stack([np.sin(ph), np.zeros(96)]), 96000)
        >>> round(float(n["yoke_v_peak"][0]), 1)                 # 2 A |10 + j 18.85| ohm
        42.7
        """
        u = np.asarray(drive_frame, dtype=float)
        if u.ndim != 2 or u.shape[1] != 2 or len(u) < 2:
            raise InputError(f"drive_frame must be (n, 2) with n >= 2 (shape={u.shape})",
                             "drive_frame")
        if not rate > 0:
            raise InputError(f"rate must be > 0 (rate={rate!r})", "rate")
        out = {"refresh_hz": rate / len(u)}
        if not self.magnetic:
            plate = _oversampled(u, rate, deriv=False) * np.asarray(self.volts_per_fs)
            out["plate_v_peak"] = np.abs(plate).max(axis=0)
            return out
        if self.amps_per_fs is None:
            raise ProfileError("the drive's needs take amps_per_fs (magnetic) or volts_per_fs "
                               "(electrostatic); [drive] has neither", "amps_per_fs")
        k = np.asarray(self.amps_per_fs)
        i = _oversampled(u, rate, deriv=False) * k
        di = _oversampled(u, rate, deriv=True) * k
        inductive = di * np.asarray(self.yoke_mh) * 1e-3
        resistive = i * self._loop_ohm()
        out.update(
            amps_peak=np.abs(i).max(axis=0),
            yoke_v_peak=np.abs(i * np.asarray(self.yoke_ohm) + inductive).max(axis=0),
            amp_v_peak=np.abs(resistive + inductive).max(axis=0),
            resistive_v_peak=np.abs(resistive).max(axis=0),
            amp_v_resistive=resistive,
            amp_v_inductive=inductive)
        return out

    def reach(self, needs: dict) -> dict:
        """What the rails and the current limit allow for the frame `needs` describes.

        Returns
        -------
        dict
            Per axis (2,): ``rail_fraction`` and ``current_fraction`` (largest scale of the
            picture each limit allows at this speed, <= 1), ``deflection_fraction`` (the
            smaller), ``rail_speed_fraction`` (largest fraction of the writing speed at full
            size within the rails; 0 when writing slower cannot help), ``speed_fraction`` (the
            same with the current limit too); ``limited_by`` (per axis, the limits passed);
            and ``deflection``, ``speed`` (the smaller of the axes).

        Notes
        -----
        Scaling the picture by a scales V and i by a: a = min(rail / V_peak, I_max / I_peak).
        Slowing by s keeps i and scales L di/dt by s: the largest s with
        |R i + s L di/dt| <= rail everywhere is min over samples of
        (rail - sign(L di/dt) R i) / |L di/dt|. Current does not depend on speed.

        Examples
        --------
        >>> import numpy as np
        >>> d = Drive(yoke_ohm=10, yoke_mh=3, amps_per_fs=2, rail_v=24)
        >>> ph = 2 * np.pi * np.arange(96) / 96
        >>> r = d.reach(d.needs(np.column_stack([np.sin(ph), np.cos(ph)]), 96000))
        >>> # 24 / 42.68; and 2 sqrt(10^2 + (s 18.85)^2) = 24 at s = 0.352
        >>> round(r["deflection"], 3), round(r["speed"], 3)
        (0.562, 0.352)
        """
        plates = "plate_v_peak" in needs
        rail_frac, current_frac, rail_speed = np.ones(2), np.ones(2), np.ones(2)
        if self.rail_v is not None:
            rail = np.asarray(self.rail_v)
            peak = needs["plate_v_peak" if plates else "amp_v_peak"]
            rail_frac = np.minimum(1.0, rail / np.maximum(peak, 1e-300))
            if not plates:
                rail_speed = _speed_within(rail, needs["amp_v_resistive"],
                                           needs["amp_v_inductive"])
        if self.current_limit_a is not None and not plates:
            lim = np.asarray(self.current_limit_a)
            current_frac = np.minimum(1.0, lim / np.maximum(needs["amps_peak"], 1e-300))
        frac = np.minimum(rail_frac, current_frac)
        speed = np.where(current_frac < 1.0, 0.0, rail_speed)
        limited = [tuple(name for name, f in (("rail", rail_frac[a]), ("current", current_frac[a]))
                         if f < 1.0) for a in range(2)]
        return {"rail_fraction": rail_frac, "current_fraction": current_frac,
                "deflection_fraction": frac, "rail_speed_fraction": rail_speed,
                "speed_fraction": speed, "limited_by": limited,
                "deflection": float(frac.min()), "speed": float(speed.min())}

    def verdict_lines(self, needs: dict) -> list[str]:
        """Sentences for the user about the frame `needs` describes: one per axis and limit
        passed, with the numbers and the ways out; or one line saying it fits.

        Examples
        --------
        >>> import numpy as np
        >>> d = Drive(yoke_ohm=10, yoke_mh=3, amps_per_fs=2, rail_v=24)
        >>> ph = 2 * np.pi * np.arange(96) / 96
        >>> print(d.verdict_lines(d.needs(np.column_stack([np.sin(ph), 0 * ph]), 96000))[0])
        x: full deflection at this refresh (1000 Hz) needs 43 V peak across the yoke; the \
rails give 24 V: you can reach 56 % of the width, or write at 35 % of the speed
        """
        reach = self.reach(needs)
        lines = []
        for a in range(2):
            name, extent = _AXES[a], ("width", "height")[a]
            if "rail" in reach["limited_by"][a]:
                lines.append(self._rail_line(needs, reach, a, name, extent))
            if "current" in reach["limited_by"][a]:
                lines.append(f"{name}: full deflection needs {needs['amps_peak'][a]:.2f} A "
                             f"peak; the amplifier gives {self.current_limit_a[a]:.2f} A: you "
                             f"can reach {_pct(reach['current_fraction'][a])} of the {extent} "
                             "(writing slower does not help)")
        if not lines:
            if "plate_v_peak" in needs:
                parts = [f"{_AXES[a]} {needs['plate_v_peak'][a]:.0f} V" for a in range(2)]
            else:
                parts = [f"{_AXES[a]} {needs['amp_v_peak'][a]:.0f} V, "
                         f"{needs['amps_peak'][a]:.2f} A" for a in range(2)]
            lines.append("the drive is within the amplifier's limits at this refresh ("
                         + "; ".join(parts) + ")")
        return lines

    def _rail_line(self, needs, reach, a, name, extent) -> str:
        rail, frac = self.rail_v[a], _pct(reach["rail_fraction"][a])
        if "plate_v_peak" in needs:
            return (f"{name}: full deflection needs {needs['plate_v_peak'][a]:.0f} V peak on "
                    f"the plates; the rails give {rail:.0f} V: you can reach {frac} of the "
                    f"{extent}")
        amp_v, yoke_v = needs["amp_v_peak"][a], needs["yoke_v_peak"][a]
        where = (f"{yoke_v:.0f} V peak across the yoke" if abs(amp_v - yoke_v) < 0.5
                 else f"{amp_v:.0f} V peak from the amplifier ({yoke_v:.0f} V across the yoke)")
        speed = reach["rail_speed_fraction"][a]
        if speed > 0:
            way = f"or write at {_pct(speed)} of the speed"
            if "current" in reach["limited_by"][a]:
                way += " (which does not cure the current, below)"
        else:
            way = ("and writing slower does not help: the resistance alone needs "
                   f"{needs['resistive_v_peak'][a]:.0f} V")
        return (f"{name}: full deflection at this refresh ({needs['refresh_hz']:.0f} Hz) needs "
                f"{where}; the rails give {rail:.0f} V: you can reach {frac} of the {extent}, "
                f"{way}")


def _speed_within(rail: np.ndarray, resistive: np.ndarray, inductive: np.ndarray) -> np.ndarray:
    """Per axis, the largest s in [0, 1] with |R i + s L di/dt| <= rail at every sample
    (0 when R i alone is over the rail)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        room = (rail - np.sign(inductive) * resistive) / np.abs(inductive)
    room = np.where(np.abs(inductive) > 0, room, np.inf)
    s = np.clip(room.min(axis=0), 0.0, 1.0)
    return np.where(np.abs(resistive).max(axis=0) > rail, 0.0, s)


def _pct(fraction: float) -> str:
    return f"{100.0 * fraction:.0f} %"


def _oversampled(u: np.ndarray, rate: float, deriv: bool, factor: int = 4) -> np.ndarray:
    """The band-limited looping waveform of u (or its time derivative, per second) at `factor`
    times the sample rate: the harmonics of the frame, zero-padded. The Nyquist harmonic of an
    even frame is split in two (its real part; it has no derivative)."""
    n = len(u)
    spec = np.fft.rfft(u, axis=0)
    if deriv:
        spec = spec * (2j * np.pi * np.fft.rfftfreq(n, 1.0 / rate))[:, None]
        if n % 2 == 0:
            spec[-1] = 0.0
    elif n % 2 == 0:
        spec[-1] = spec[-1].real / 2.0
    m = n * factor
    padded = np.zeros((m // 2 + 1, u.shape[1]), dtype=complex)
    padded[:len(spec)] = spec
    return np.fft.irfft(padded, n=m, axis=0) * factor

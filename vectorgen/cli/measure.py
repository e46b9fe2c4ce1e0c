"""Commands `loopback`, `fit-response` and `reach`: measure the interface and the deflection once,
and check a drawing against what the amplifier can do.

    vectorgen loopback --out-device 3 --in-device 3 -o interface.toml [--profile tube.toml]
    vectorgen pattern step --axis x -o step-x.wav            (then capture the yoke current)
    vectorgen fit-response step-x.csv --axis x -o tube.toml --profile tube.toml
    vectorgen reach drawing.svg --profile tube.toml

The work is done by `vectorgen.loopback`, `calibration.capture`, `calibration.response_fit` and
`vectorgen.response.Drive`; this module parses options, checks every output path before any
work, turns the results into profile keys and prints. Heavy modules are imported inside the
functions (`vectorgen --help` must start fast).
"""

from __future__ import annotations

import json
import math
import os
import warnings
from dataclasses import dataclass

from ..errors import DeviceError, InputError, ProfileError, VectorgenError, VectorgenWarning

__all__ = ["register", "cmd_loopback", "cmd_fit_response", "cmd_reach", "OutputCorner",
           "output_corner", "response_update", "fit_lines", "drive_lines", "SPREAD_LIMIT"]

SPREAD_LIMIT = 0.10         # outputs whose corners differ by more than this share one value badly

# engine parameters these commands set, and the option that sets each (the ones the command
# line's own table does not know)
OPTION_FOR = {
    "output_device": "--out-device", "input_device": "--in-device",
    "input_corner_hz": "--input-corner-hz", "seconds": "--seconds", "column": "--column",
    "order": "--order", "axis": "--axis",
}

LOOPBACK_WIRING = (
    "wiring: output k of the output device ({out}) to input k of the input device ({inp}), "
    "k = 0 .. {last}, one cable per channel, line level (a second interface's inputs will do)",
    "caution: a line-level loop only: unplug the deflection amplifiers, the yoke and the Z "
    "input first; the probe holds steps for tenths of a second, which is not what an "
    "amplifier or a yoke should be given",
    "set the input gain so that the probe (at most 0.5 of full scale) does not clip; the "
    "probe plays one channel at a time, the others quiet, for {seconds:.2f} s",
)


# --- pure helpers -------------------------------------------------------------------------------

@dataclass(frozen=True)
class OutputCorner:
    """The one AC-coupling corner written for a whole output, from the channels measured OK.

    Attributes
    ----------
    corner_hz : float
        Mean of the OK channels' corners (0 when every one of them is DC-coupled).
    channels : tuple of int
        The channels the mean rests on.
    corners_hz : tuple of float
        Their corners, in the same order.
    spread : float
        Largest over smallest corner, minus 1 (0 for one channel).
    """

    corner_hz: float
    channels: tuple
    corners_hz: tuple
    spread: float

    @property
    def uneven(self) -> bool:
        """Whether the channels differ by more than SPREAD_LIMIT."""
        return self.spread > SPREAD_LIMIT


def output_corner(fits, dc_coupled_hz: float = 0.05) -> OutputCorner:
    """The corner to write as ``[output] highpass_hz`` from per-channel loopback fits.

    Parameters
    ----------
    fits : sequence of ChannelFit
        As `vectorgen.loopback.measure_loopback` returns them (``ok``, ``channel``,
        ``corner_hz``, ``verdict``).
    dc_coupled_hz : float
        Corners below this count as DC-coupled (0).

    Returns
    -------
    OutputCorner

    Raises
    ------
    DeviceError
        No channel measured OK; the message quotes each channel's verdict.

    Notes
    -----
    The profile has one corner for the whole output, so the OK channels' corners are averaged:
    f = (1 / K) sum f_k; spread = max f_k / min f_k - 1.

    Examples
    --------
    >>> from types import SimpleNamespace as F
    >>> c = output_corner([F(ok=True, channel=0, corner_hz=8.0, verdict=""),
    ...                    F(ok=True, channel=1, corner_hz=12.0, verdict="")])
    >>> c.corner_hz, round(c.spread, 2), c.uneven
    (10.0, 0.5, True)
    """
    good = [f for f in fits if f.ok]
    if not good:
        raise DeviceError("no channel of the loop measured OK, so no profile was written: "
                          + "; ".join(f.verdict for f in fits))
    corners = [0.0 if f.corner_hz < dc_coupled_hz else float(f.corner_hz) for f in good]
    mean = sum(corners) / len(corners)
    low, high = min(corners), max(corners)
    spread = 0.0 if high == low else (math.inf if low == 0 else high / low - 1.0)
    return OutputCorner(_sig(mean, 4), tuple(f.channel for f in good), tuple(corners), spread)


def response_update(base: dict, axis: str, fit) -> tuple[dict, str | None]:
    """The ``[response]`` table with one axis replaced by a fitted step response.

    Parameters
    ----------
    base : dict
        The base profile's ``[response]`` table (empty when it has none).
    axis : {'x', 'y'}
        The axis the capture measured.
    fit : ResponseFit
        From `calibration.response_fit.fit_response`.

    Returns
    -------
    (dict, str or None)
        The new table (``tau_us = [x, y]``, or ``natural_hz`` and ``damping``, six
        significant digits), and a note when the other axis had no value and was given the
        same one.

    Raises
    ------
    InputError
        The base's other axis is of a different order than the fit (a profile's two axes are
        of one order).

    Examples
    --------
    >>> from types import SimpleNamespace as Fit
    >>> table, note = response_update({"tau_us": [250.0, 310.0]}, "x", Fit(order=1, tau_s=3e-4))
    >>> table, note
    ({'tau_us': [300.0, 310.0]}, None)
    """
    from ..response import Response

    j = 0 if axis == "x" else 1
    other_axis = "xy"[1 - j]
    old = Response.from_table(base or {}, "the base profile's [response]")
    new = _response_values(fit)
    note = None
    if old.order == 0:
        other = new
        note = (f"the base profile has no [response] for {other_axis}: it gets the {axis} "
                f"axis's value too (fit a capture of {other_axis} with --axis {other_axis} to "
                f"replace it)")
    elif old.order != fit.order:
        raise InputError(
            f"this capture fits a {_order_name(fit.order)} response, but the base profile's "
            f"[response] is {_order_name(old.order)} ({_describe_table(base)}); both axes must "
            f"be of one order: fit this capture with --order {old.order}, or fit the "
            f"{other_axis} axis again with --order {fit.order}", "order")
    elif old.order == 1:
        other = {"tau_us": old.tau_s[1 - j] * 1e6}
    else:
        other = {"natural_hz": old.natural_hz[1 - j], "damping": old.damping[1 - j]}
    table = {}
    for key, value in new.items():
        pair = [0.0, 0.0]
        pair[j], pair[1 - j] = _sig(value), _sig(other[key])
        table[key] = pair
    return table, note


def fit_lines(fit, capture) -> list[str]:
    """Lines for the terminal: the fit, what each figure means, and the points it rests on.

    Examples
    --------
    >>> import numpy as np
    >>> from calibration.capture import Capture
    >>> from calibration.response_fit import fit_response
    >>> t = np.arange(2000) * 1e-6
    >>> y = np.where(t > 5e-4, -np.expm1(-(t - 5e-4) / 50e-6), 0.0)
    >>> y = y + np.random.default_rng(1).normal(0, 0.01, t.size)
    >>> print(fit_lines(fit_response(Capture.from_arrays(t, y), 1), None)[0][:40])
    first order, tau = 50.14 us: the time co
    """
    lines = []
    if fit.order == 1:
        tau = fit.tau_s
        lines.append(f"first order, tau = {_fmt_s(tau)}: the time constant, after a jump the "
                     f"current covers 63 % of the way in tau and 99.3 % in 5 tau "
                     f"({_fmt_s(5 * tau)}); 10-90 % rise 2.197 tau = {_fmt_s(fit.rise_s)}")
    else:
        zeta = fit.damping
        # the peak overshoot of the second-order step, exp(-pi zeta / sqrt(1 - zeta^2))
        shoot = ("it does not overshoot" if zeta >= 1 else "it overshoots by "
                 f"{100 * math.exp(-math.pi * zeta / math.sqrt(1 - zeta ** 2)):.3g} % of the jump")
        lines.append(f"second order, f_n = {fit.natural_hz:.5g} Hz, zeta = {zeta:.4g}: f_n the "
                     f"natural frequency, zeta the damping (below 1 the spot overshoots; {shoot}"
                     f"); 10-90 % rise {_fmt_s(fit.rise_s)}, it settles with the time constant "
                     f"{_fmt_s(fit.settle_tau_s)} (99.3 % after {_fmt_s(5 * fit.settle_tau_s)})")
    pct = 100 * fit.rms_residual / fit.step if fit.step else float("nan")
    noise = (f"{fit.rms_residual / fit.noise_rms:.2g} x the capture's own noise "
             f"({fit.noise_rms:.3g})" if fit.noise_rms > 0 else "the capture shows no noise")
    lines.append(f"jump {fit.step:.4g} between the levels {fit.low_level:.4g} and "
                 f"{fit.high_level:.4g} (in the capture's unit); residual RMS {pct:.2f} % of the "
                 f"jump, {noise}")
    if capture is not None:
        t = capture.time_s
        a, b = fit.window
        lines.append(f"rests on {fit.points_used} of the capture's {capture.count} points, "
                     f"{_fmt_s(float(t[a]))} to {_fmt_s(float(t[b - 1]))}: "
                     f"{len(fit.edge_times_s)} edge(s) at "
                     + ", ".join(_fmt_s(v) for v in fit.edge_times_s))
    if fit.rms_first_order is not None and fit.rms_second_order is not None:
        lines.append(f"residual RMS of each order tried: first {fit.rms_first_order:.3g}, "
                     f"second {fit.rms_second_order:.3g}")
    lines.append(fit.quality)
    return lines


def drive_lines(drive, needs: dict, reach: dict) -> list[str]:
    """What the frame asks of the amplifier, per axis, then `Drive.verdict_lines` and the
    reachable fractions.

    Examples
    --------
    >>> import numpy as np
    >>> from vectorgen.response import Drive
    >>> d = Drive(kind="current", yoke_ohm=10, yoke_mh=3, amps_per_fs=2, rail_v=24)
    >>> ph = 2 * np.pi * np.arange(96) / 96
    >>> needs = d.needs(np.column_stack([np.sin(ph), 0 * ph]), 96000)
    >>> print(drive_lines(d, needs, d.reach(needs))[0])
    x: 42.7 V peak across the yoke, 42.7 V from the amplifier, 2.00 A peak
    """
    lines = []
    for a, name in enumerate("xy"):
        if "plate_v_peak" in needs:
            lines.append(f"{name}: {needs['plate_v_peak'][a]:.1f} V peak on the plates")
        else:
            lines.append(f"{name}: {needs['yoke_v_peak'][a]:.1f} V peak across the yoke, "
                         f"{needs['amp_v_peak'][a]:.1f} V from the amplifier, "
                         f"{needs['amps_peak'][a]:.2f} A peak")
    limits = []
    if drive.rail_v is not None:
        limits.append("rails " + " / ".join(f"{v:g} V" for v in _distinct(drive.rail_v)))
    if drive.current_limit_a is not None and "plate_v_peak" not in needs:
        limits.append("current limit " + " / ".join(f"{v:g} A"
                                                    for v in _distinct(drive.current_limit_a)))
    lines.append("the amplifier allows: " + ("; ".join(limits) if limits else
                                             "no limits given (rail_v, current_limit_a)"))
    lines.extend(drive.verdict_lines(needs))
    frac = reach["deflection_fraction"]
    lines.append(f"reachable at this refresh: {100 * frac[0]:.0f} % of the width, "
                 f"{100 * frac[1]:.0f} % of the height; at full size, "
                 f"{100 * reach['speed']:.0f} % of the writing speed")
    return lines


# --- loopback -----------------------------------------------------------------------------------

def cmd_loopback(args) -> int:
    from .. import loopback
    from ..files import atomic_write_bytes, check_output_path
    from ..profile import load_profile, profile_from_dict, profile_to_dict, save_profile

    check_output_path(args.output, (".toml",))
    if args.report:
        check_output_path(args.report, (".json",))
    _check_finite(args.input_corner_hz, "--input-corner-hz")
    _check_finite(args.seconds, "--seconds")
    base = load_profile(args.profile)
    channels = args.channels or base.output.channels
    with _option_names():
        loopback.probe_signal(args.rate, channels, args.seconds)   # its checks, before the wiring
        seconds = args.seconds or (loopback.LEAD_IN_S + channels * loopback.CHANNEL_SECONDS
                                   + loopback.TAIL_S)
        for line in LOOPBACK_WIRING:
            print(line.format(out=args.out_device, inp=args.in_device, last=channels - 1,
                              seconds=seconds))
        fits = loopback.measure_loopback(args.out_device, args.in_device, args.rate, channels,
                                         args.input_corner_hz or 0.0, args.seconds)
    if not args.quiet:
        for f in fits:
            print(_channel_line(f, args.rate))
    corner = output_corner(fits, loopback.DC_COUPLED_HZ)
    if corner.corner_hz > 1000:
        raise DeviceError(f"the loop cuts at {corner.corner_hz:.4g} Hz, above any AC coupling "
                          f"[output] highpass_hz may hold (at most 1000 Hz): is a filter or "
                          f"something else in the loop? No profile written")
    prof = base.copy()
    prof.output.highpass_hz = corner.corner_hz
    profile_from_dict(profile_to_dict(prof), "<measured profile>")   # it must load back
    left_out = [f for f in fits if not f.ok]
    if left_out:
        _warn(f"{len(left_out)} channel(s) left out of [output] highpass_hz: "
              + "; ".join(f.verdict for f in left_out))
    if corner.uneven:
        _warn("the outputs' corners differ by more than "
              f"{100 * SPREAD_LIMIT:.0f} % ("
              + ", ".join(f"channel {k}: {_hz(c)}" for k, c in zip(corner.channels,
                                                                   corner.corners_hz))
              + f"); [output] highpass_hz is one number for the whole output: writing their "
              f"mean, {_hz(corner.corner_hz)}")
    backup = save_profile(prof, args.output)
    if args.report:
        rep = {"output_device": args.out_device, "input_device": args.in_device,
               "sample_rate": args.rate, "channels": [_fit_dict(f, args.rate) for f in fits],
               "highpass_hz": corner.corner_hz, "mean_of_channels": list(corner.channels),
               "spread": None if math.isinf(corner.spread) else round(corner.spread, 6),
               "input_corner_hz": args.input_corner_hz or 0.0, "profile": args.output,
               "base": args.profile or "<built-in>", "backup": backup}
        atomic_write_bytes(args.report, (json.dumps(rep, indent=2) + "\n").encode())
    if not args.quiet:
        names = ", ".join(map(str, corner.channels))
        what = (f"the mean of channels {names}" if len(corner.channels) > 1 else
                f"channel {names}")
        print(f"wrote {args.output}: [output] highpass_hz = {corner.corner_hz:g} ("
              + ("DC-coupled, " if corner.corner_hz == 0 else "") + what + ")"
              + (f" (previous profile kept as {backup})" if backup else ""))
    return 0


def _channel_line(fit, rate: int) -> str:
    if not fit.ok:
        verdict = fit.verdict.removeprefix(f"channel {fit.channel}: ")
        return f"channel {fit.channel}: {fit.status.value}: {verdict}"
    from ..loopback import DC_COUPLED_HZ

    corner = ("DC-coupled" if fit.corner_hz < DC_COUPLED_HZ else f"corner {_hz(fit.corner_hz)}")
    return (f"channel {fit.channel}: {corner}, round trip {fit.latency_samples} samples "
            f"({1e3 * fit.latency_samples / rate:.2f} ms), ok")


def _hz(v: float) -> str:
    return f"{v:.2f} Hz" if v < 100 else f"{v:.1f} Hz"


def _fit_dict(fit, rate: int) -> dict:
    from dataclasses import asdict

    out = {k: (None if isinstance(v, float) and not math.isfinite(v) else v)
           for k, v in asdict(fit).items()}
    out["status"] = fit.status.value
    out["latency_ms"] = (round(1e3 * fit.latency_samples / rate, 6)
                         if fit.latency_samples >= 0 else None)
    return out


# --- fit-response -------------------------------------------------------------------------------

def default_picture_path(profile_path: str, axis: str) -> str:
    """PROFILE-response-AXIS.png beside the profile."""
    stem = profile_path[:-5] if profile_path.lower().endswith(".toml") else profile_path
    return f"{stem}-response-{axis}.png"


def cmd_fit_response(args) -> int:
    from calibration.capture import read_capture
    from calibration.response_fit import fit_response, write_fit_png

    from ..files import atomic_write_bytes, check_output_path, keep_backup
    from ..profile import load_profile, profile_from_dict, profile_to_dict, save_profile

    check_output_path(args.output, (".toml",))
    picture = args.residuals or default_picture_path(args.output, args.axis)
    check_output_path(picture, (".png",))
    if args.report:
        check_output_path(args.report, (".json",))
    outputs = [os.path.abspath(p) for p in (args.output, picture, args.report) if p]
    if len(set(outputs)) < len(outputs) or os.path.abspath(args.capture) in outputs:
        raise InputError("the capture, the profile (-o), the picture (--residuals) and the "
                         "report (--report) must be different files")
    base = load_profile(args.profile)
    order = args.order if args.order == "auto" else int(args.order)
    column = None if args.column is None else (int(args.column) if args.column.isdigit()
                                               else args.column)
    with _option_names():
        capture = read_capture(args.capture, column)
        fit = fit_response(capture, order)
        table, note = response_update(base.response, args.axis, fit)
    for n in capture.notes:
        _warn(f"{args.capture}: {n}")
    if note:
        _warn(note)
    prof = base.copy()
    prof.response = table
    prof = profile_from_dict(profile_to_dict(prof), "<fitted profile>")   # it must load back
    prof.response_model()           # warns when [drive]'s L / R disagrees with the fit
    picture_backup = keep_backup(picture)
    write_fit_png(picture, capture, fit)
    backup = save_profile(prof, args.output)
    if args.report:
        rep = _fit_report(fit, capture, args, table, picture, picture_backup, backup)
        atomic_write_bytes(args.report, (json.dumps(rep, indent=2) + "\n").encode())
    if not args.quiet:
        print(capture.describe())
        for line in fit_lines(fit, capture):
            print(line)
        print(f"wrote {args.output}: [response] " + ", ".join(f"{k} = {v}" for k, v in
                                                              table.items())
              + f" (x, y; {args.axis} from this capture)"
              + (f" (previous profile kept as {backup})" if backup else "")
              + f"; fit picture {picture}"
              + (f" (previous picture kept as {picture_backup})" if picture_backup else ""))
    return 0


def _fit_report(fit, capture, args, table, picture, picture_backup, backup) -> dict:
    t = capture.time_s
    a, b = fit.window
    return {
        "capture": args.capture, "axis": args.axis, "order": fit.order,
        "tau_us": None if fit.tau_s is None else fit.tau_s * 1e6,
        "natural_hz": fit.natural_hz, "damping": fit.damping,
        "rise_10_90_us": fit.rise_s * 1e6, "settle_tau_us": fit.settle_tau_s * 1e6,
        "step": fit.step, "low_level": fit.low_level, "high_level": fit.high_level,
        "rms_residual": fit.rms_residual, "noise_rms": fit.noise_rms,
        "rms_first_order": fit.rms_first_order, "rms_second_order": fit.rms_second_order,
        "points_used": fit.points_used, "capture_points": capture.count,
        "window_s": [float(t[a]), float(t[b - 1])], "edge_times_s": list(fit.edge_times_s),
        "edge_steps": list(fit.edge_steps), "quality": fit.quality,
        "capture_notes": list(capture.notes), "response": table, "profile": args.output,
        "base": args.profile or "<built-in>", "backup": backup, "picture": picture,
        "picture_backup": picture_backup,
    }


# --- reach --------------------------------------------------------------------------------------

def cmd_reach(args) -> int:
    from dataclasses import fields

    from ..files import atomic_write_bytes, check_output_path
    from ..response import Drive
    from .render import load_setup, timeline

    if args.report:
        check_output_path(args.report, (".json",))
    profile, renderer = load_setup(args)
    drive = profile.drive_model()
    if drive is None:
        where = args.profile or "the built-in profile"
        raise ProfileError(f"{where} has no [drive] table: add one describing the amplifier and "
                           f"its load, keys " + ", ".join(f.name for f in fields(Drive))
                           + " (e.g. yoke_ohm, yoke_mh, amps_per_fs and rail_v)")
    # The renderer refuses a frame the amplifier cannot make, and that frame is the point
    # here: render it, only not refused
    renderer.settings.check_drive = False
    frame = timeline(args, profile, renderer, None)[0][0]
    needs = drive.needs(frame.corrected, renderer.rate)
    reach = drive.reach(needs)
    verdicts = drive.verdict_lines(needs)
    lines = drive_lines(drive, needs, reach)
    if args.report:
        rep = {"profile": args.profile or "<built-in>", "sample_rate": renderer.rate,
               "samples_per_frame": frame.samples, "refresh_hz": needs["refresh_hz"],
               "needs": {k: _plain(v) for k, v in needs.items()
                         if k not in ("amp_v_resistive", "amp_v_inductive")},
               "reach": {k: _plain(v) for k, v in reach.items()}, "verdict": verdicts}
        atomic_write_bytes(args.report, (json.dumps(rep, indent=2) + "\n").encode())
    print(f"frame of {frame.samples} samples at {renderer.rate} Hz = "
          f"{needs['refresh_hz']:.1f} Hz refresh")
    for line in lines:
        print(line)
    return 0


def _plain(v):
    """JSON-ready: arrays to lists of floats, tuples of names kept."""
    if hasattr(v, "tolist"):
        return v.tolist()
    if isinstance(v, (list, tuple)):
        return [_plain(e) for e in v]
    return v


# --- helpers ------------------------------------------------------------------------------------

class _option_names:
    """Re-raise the engine's errors about the parameters these commands set with the option
    that sets them (the command line's own table covers the shared ones)."""

    def __enter__(self):
        return self

    def __exit__(self, kind, exc, tb):
        if isinstance(exc, VectorgenError) and exc.parameter in OPTION_FOR:
            flag = OPTION_FOR[exc.parameter]
            message = str(exc) if flag in str(exc) else f"{exc} (option {flag})"
            raise type(exc)(message) from None
        return False


def _warn(message: str) -> None:
    warnings.warn(message, VectorgenWarning, stacklevel=2)


def _check_finite(value, option: str) -> None:
    if value is not None and not math.isfinite(value):
        raise InputError(f"{option} must be a finite number (got {value})")


def _response_values(fit) -> dict:
    if fit.order == 1:
        return {"tau_us": fit.tau_s * 1e6}
    return {"natural_hz": fit.natural_hz, "damping": fit.damping}


def _order_name(order: int) -> str:
    return {1: "first-order", 2: "second-order"}.get(order, "ideal")


def _describe_table(table: dict) -> str:
    return ", ".join(f"{k} = {v}" for k, v in table.items())


def _distinct(pair) -> list:
    return [pair[0]] if pair[0] == pair[1] else list(pair)


def _sig(v: float, digits: int = 6) -> float:
    return float(f"{v:.{digits}g}")


def _fmt_s(v: float) -> str:
    a = abs(v)
    if a == 0:
        return "0 s"
    for unit, k in (("s", 1.0), ("ms", 1e3), ("us", 1e6)):
        if a >= 1.0 / k:
            return f"{v * k:.4g} {unit}"
    return f"{v * 1e9:.4g} ns"


# --- parsers ------------------------------------------------------------------------------------

def register(sub) -> None:
    p = sub.add_parser(
        "loopback", help="measure the interface's AC coupling and round trip",
        description="Play a probe on the output device, record it on the input device wired "
        "back from it (output k to input k, line level, nothing else connected), fit each "
        "channel's high-pass corner and round trip, and write a profile with [output] "
        "highpass_hz set to the measured corner (the mean over the channels that measured OK; "
        "the base profile's other keys are kept). An existing profile at -o is kept as "
        "PROFILE.toml.bakN.")
    p.add_argument("--out-device", required=True, metavar="NUMBER|NAME",
                   help="output device: its number or a case-insensitive part of its name")
    p.add_argument("--in-device", required=True, metavar="NUMBER|NAME",
                   help="input device wired back from the outputs")
    p.add_argument("--rate", type=int, default=48000, metavar="HZ",
                   help="sample rate (default 48000)")
    p.add_argument("--channels", type=int, choices=(2, 3), default=None,
                   help="channels to probe (default: the base profile's)")
    p.add_argument("--input-corner-hz", type=float, default=None, metavar="HZ",
                   help="the inputs' own high-pass corner, from their data sheet (default 0: "
                        "DC-coupled inputs); one loop cannot tell it from the output's")
    p.add_argument("--seconds", type=float, default=None,
                   help="length of the probe (default: 3 s per channel and a second more)")
    p.add_argument("-o", "--output", required=True, metavar="PROFILE.toml")
    p.add_argument("--profile", metavar="BASE.toml",
                   help="keep this profile's other keys (default: the built-in profile)")
    p.add_argument("--report", metavar="FILE.json", help="also write the results as JSON")
    p.add_argument("-q", "--quiet", action="store_true", help="no results table")
    p.set_defaults(func=cmd_loopback)

    p = sub.add_parser(
        "fit-response", help="fit a deflection axis's step response to a scope capture",
        description="Read a scope capture (CSV: time and the yoke current or amplifier output) "
        "of the step pattern (`vectorgen pattern step`), fit a first- or second-order step "
        "response to its edges, and write a profile whose [response] has the fitted value for "
        "this axis and the base profile's for the other (both axes must be of one order). "
        "Also draws the capture, the fit and the residual. Existing files are kept as "
        "numbered backups.")
    p.add_argument("capture", metavar="CAPTURE.csv")
    p.add_argument("--axis", required=True, choices=("x", "y"),
                   help="the axis the capture measured")
    p.add_argument("--order", choices=("auto", "1", "2"), default="auto",
                   help="1: first-order lag (tau); 2: second order (f_n, zeta); auto (default): "
                        "the second only where the first does not fit")
    p.add_argument("--column", metavar="N|NAME",
                   help="the signal column: its number (1 = the first after time, the "
                        "default) or its header name")
    p.add_argument("-o", "--output", required=True, metavar="PROFILE.toml")
    p.add_argument("--profile", metavar="BASE.toml",
                   help="keep this profile's keys and its other axis (default: built-in)")
    p.add_argument("--residuals", metavar="FILE.png",
                   help="fit picture (default: PROFILE-response-AXIS.png)")
    p.add_argument("--report", metavar="FILE.json", help="also write the fit as JSON")
    p.add_argument("-q", "--quiet", action="store_true")
    p.set_defaults(func=cmd_fit_response)

    from .render import add_output_arguments
    from .source_options import add_source_arguments

    p = sub.add_parser(
        "reach", help="what a drawing asks of the deflection amplifier",
        description="Render a drawing like `preview` does (a scene: its first frame) and, from "
        "the profile's [drive] table (the amplifier and its load), print the peak volts across "
        "the yoke and from the amplifier and the peak amps per axis, what the rails and the "
        "current limit allow, and the fraction of the width and of the writing speed they "
        "reach. A frame the amplifier cannot make, which `render` refuses, is measured here "
        "as drawn.")
    add_source_arguments(p)
    add_output_arguments(p)
    p.add_argument("--report", metavar="FILE.json", help="also write the numbers as JSON")
    p.set_defaults(func=cmd_reach)

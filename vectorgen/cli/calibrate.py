"""Commands `pattern`, `fit`, `check`, `anode` and `spots`: measure a tube once, correct every
drawing, and measure what is left.

    vectorgen pattern grid -o grid.wav --sheet grid.csv [--rows 7 --cols 7] [--profile T.toml]
    vectorgen fit grid.csv -o tube.toml [--base T.toml] [--kv 8.0] [--deflection magnetic]
    vectorgen pattern check -o check.wav --sheet check.csv --profile tube.toml
    vectorgen check check.csv --tolerance-mm 0.5
    vectorgen anode tube.toml --kv 9.0
    vectorgen pattern box -o box.wav --sheet box.csv --profile tube.toml
    vectorgen fit --gains-only box.csv --base tube.toml -o tube.toml
    vectorgen spots photo.jpg --sheet grid.csv [--ref PX,PY=X_MM,Y_MM ...]

The work is done in the `calibration` package; this module only parses options, checks output
paths before any work and prints.
"""

from __future__ import annotations

import json
import math
import os

from ..errors import VectorgenError

TERMS = ("auto", "gains", "affine", "full")
SHOW_NAMES = 8


def _warn(msg: str) -> None:
    from .terminal import warn

    warn(msg)


def _name_list(names: list) -> str:
    shown = ", ".join(names[:SHOW_NAMES])
    return shown + (f" and {len(names) - SHOW_NAMES} more" if len(names) > SHOW_NAMES else "")


def _check_finite(value, option: str):
    if value is not None and not math.isfinite(value):
        raise VectorgenError(f"{option} must be a finite number (got {value})")
    return value


# --- pattern ------------------------------------------------------------------------------------

def cmd_pattern(args) -> int:
    import numpy as np

    from calibration.patterns import SIGNAL_PATTERNS, make_pattern
    from calibration.sheet import write_sheet

    from ..files import check_output_path, transaction
    from ..pipeline import report_line
    from ..preview import phosphor_image, write_png
    from ..sinks import write_signal
    from .render import _check_seconds, load_setup, repeats_for

    if args.output is None and not args.play:
        raise VectorgenError("give -o OUT to write the pattern to a file, or --play to show it "
                             "live (or both)")
    if args.kind in SIGNAL_PATTERNS:
        return _signal_pattern(args)
    if args.sheet is None:
        raise VectorgenError(f"the {args.kind} pattern writes its measurement sheet: give "
                             f"--sheet SHEET.csv")
    _check_signal_outputs(args)
    check_output_path(args.sheet, (".csv",))
    if args.output is not None and os.path.abspath(args.sheet) == os.path.abspath(args.output):
        raise VectorgenError("the signal (-o) and the sheet (--sheet) must be different files")
    _check_sheet_free(args.sheet, args.replace_sheet)
    if args.preview:
        check_output_path(args.preview, (".png",))
    _check_report_path(args, [("--sheet", args.sheet)])
    _check_seconds(args.seconds)
    _check_finite(args.extent, "--extent")
    profile, renderer = load_setup(args)
    if args.kind == "check" and not profile.deflection.calibrated:
        _warn("the check pattern is drawn through an uncalibrated profile (give --profile "
              "with the fitted one): it will measure the uncorrected tube")
    pat = make_pattern(args.kind, profile, rows=args.rows, cols=args.cols, extent=args.extent,
                       mark=args.mark)
    frame = renderer.frame(pat.strokes)
    repeats = repeats_for(args.seconds, renderer.rate, frame.samples)
    device = _device_for(args, renderer) if args.play else None     # before any file is written
    kept = []
    kind = "check" if args.kind == "check" else "fit"
    places = pat.nominal_mm if kind == "check" else pat.drive
    rep = frame.report(profile)
    with transaction():                     # the signal, sheet, preview and report: all or none
        if args.output is not None:
            kept.append(_keep_old(args.output))
            write_signal(args.output, np.tile(frame.signal, (repeats, 1)), renderer.rate,
                         frame.names, pcm16=args.pcm16)
        backup = write_sheet(args.sheet, pat.names, places, kind=kind)
        if args.preview:
            kept.append(write_png(args.preview, phosphor_image(
                frame.signal, profile, renderer.channels, frame.plan.lit, chain=renderer.chain,
                rate=renderer.rate, intensity=frame.plan.intensity)))
        _write_report(args, rep, repeats, frame.samples, renderer.rate, pattern=args.kind,
                      targets=len(pat.names), sheet=args.sheet)
    if not args.quiet:
        print(report_line(rep) + (f"; wrote {repeats} frame(s) to {args.output}"
                                  if args.output is not None else ""))
        print(f"{args.kind} pattern: {len(pat.names)} targets; "
              + "; ".join(pat.notes) + f"; sheet {args.sheet}"
              + (f" (previous sheet kept as {backup})" if backup else "")
              + _kept_text(kept))
        print("measure where each target's centre lands, in mm from the centre of the face "
              "(+x right, +y up), and fill measured_x_mm, measured_y_mm"
              + ("; then: vectorgen check SHEET.csv --tolerance-mm MM" if kind == "check"
                 else ""))
    if args.play:
        from .live import play_frame

        return play_frame(frame, profile, device, args.seconds, args.quiet)
    return 0


def _check_sheet_free(path: str, replace: bool) -> None:
    """Refuse, before any work, to replace a sheet that holds measurements (or a file that is
    not a sheet), unless asked to (the old file is then kept as a backup)."""
    from calibration.sheet import sheet_in_the_way

    why = sheet_in_the_way(path)
    if why and not replace:
        raise VectorgenError(f"{why}: give another --sheet, or --replace-sheet to replace it "
                             f"(it is then kept as {os.path.basename(path)}.bakN)")


def _device_for(args, renderer):
    """The --play device, found and checked before anything is written: a device that is
    missing or refuses the settings must not cost the user a file."""
    from .. import live

    device = live.find_device(args.device)
    live.check_device(device, renderer.channels, renderer.rate)
    return device.index


def _keep_old(path: str) -> str | None:
    """Keep a file about to be rewritten as a numbered backup (signal files are written by
    sinks.write_signal, which keeps none itself)."""
    from ..files import keep_backup

    return keep_backup(path)


def _kept_text(backups) -> str:
    kept = [b for b in backups if b]
    return f"; previous file(s) kept as {', '.join(kept)}" if kept else ""


def _check_report_path(args, others=()) -> None:
    """Before any work: --report is a .json file, and no two outputs (nor the profile) name
    one file."""
    from ..files import check_output_path, check_outputs

    if args.report:
        check_output_path(args.report, (".json",))
    check_outputs([("-o", args.output), *others, ("--preview", args.preview),
                   ("--report", args.report)], [("profile", args.profile)])


def _write_report(args, rep: dict, repeats: int, frame_samples: int, rate: int,
                  **about) -> None:
    """--report: the frame report (`Frame.report`, or the same keys for a signal pattern) with
    what the command wrote, as `render --report` writes it."""
    if not args.report:
        return
    from ..files import atomic_write_bytes

    rep = dict(rep, **about)
    total = repeats * frame_samples
    rep.update(frames=int(repeats), total_samples=int(total), duration_s=total / rate,
               output=args.output, sample_format="int16" if args.pcm16 else "float32")
    atomic_write_bytes(args.report, (json.dumps(rep, indent=2) + "\n").encode())


def _check_signal_outputs(args) -> None:
    """Before anything is written: PortAudio is present for --play, and -o names a signal
    file that may be written."""
    from ..files import check_output_path
    from ..sinks import signal_extensions

    if args.play:
        from .. import live

        live.sounddevice()
    if args.output is not None:
        check_output_path(args.output, signal_extensions())


def _signal_pattern(args) -> int:
    """`pattern step` and `pattern ztiming`: no targets, so no sheet."""
    from ..files import check_output_path
    from .render import _check_seconds

    if args.sheet is not None:
        raise VectorgenError(f"the {args.kind} pattern has no targets to measure and writes no "
                             f"sheet: leave out --sheet")
    _check_signal_outputs(args)
    if args.preview:
        check_output_path(args.preview, (".png",))
    _check_report_path(args)
    _check_seconds(args.seconds)
    if args.kind == "step":
        return _step_pattern(args)
    return _ztiming_pattern(args)


def _step_pattern(args) -> int:
    import numpy as np

    from calibration.patterns import step_signal

    from ..files import transaction
    from ..sinks import write_signal
    from .render import load_setup, repeats_for

    if args.axis is None:
        raise VectorgenError("the step pattern jumps on one axis: give --axis x or --axis y")
    given = [o for o, v in (("--speed", args.speed), ("--refresh", args.refresh),
                            ("--samples", args.samples)) if v is not None]
    if given:
        raise VectorgenError(f"the step pattern's timing is --period-ms: {', '.join(given)} "
                             f"do not apply")
    if args.preview:
        raise VectorgenError("the step pattern keeps the beam blanked: there is no picture to "
                             "preview (leave out --preview)")
    amplitude = _check_finite(args.amplitude, "--amplitude")
    if not 0 < amplitude <= 1:
        raise VectorgenError(f"--amplitude must be above 0 and at most 1 (full scale; got "
                             f"{amplitude:g})")
    period_ms = _check_finite(args.period_ms, "--period-ms")
    if not period_ms > 0:
        raise VectorgenError(f"--period-ms must be above 0 (got {period_ms:g})")
    profile, renderer = load_setup(args)
    try:
        step = step_signal(profile, renderer.rate, renderer.channels, args.axis, amplitude,
                           period_ms * 1e-3)
    except VectorgenError as exc:
        flag = {"period_s": "--period-ms", "amplitude": "--amplitude"}.get(exc.parameter)
        raise type(exc)(f"{exc} (option {flag})" if flag else str(exc), exc.parameter) from None
    rate = renderer.rate
    repeats = repeats_for(args.seconds, rate, len(step.signal))
    kept = []
    if args.output is not None:
        _check_size(repeats * step.signal.size)
    n = len(step.signal)
    # the step pattern has no beam plan: its report gives the same timing keys as a frame's
    rep = {"sample_rate": rate, "samples_per_frame": n, "refresh_hz": round(rate / n, 6),
           "frame_time_s": n / rate, "channels": step.names, "axis": args.axis,
           "amplitude": amplitude, "half_period_samples": step.half_samples,
           "profile": profile.source}
    with transaction():                     # the signal and the report: both or neither
        if args.output is not None:
            kept.append(_keep_old(args.output))
            write_signal(args.output, np.tile(step.signal, (repeats, 1)), rate, step.names,
                         pcm16=args.pcm16)
        _write_report(args, rep, repeats, n, rate, pattern="step")
    if not args.quiet:
        print("step pattern: " + "; ".join(step.notes)
              + (f"; wrote {repeats} period(s) to {args.output}" if args.output else "")
              + _kept_text(kept))
        print(f"capture the {args.axis} yoke current (the voltage across its sense resistor) "
              f"with a timebase showing some of the old level and five time constants after "
              f"an edge, save it as CSV, then: vectorgen fit-response CAPTURE.csv --axis "
              f"{args.axis} -o PROFILE.toml")
    if args.play:
        from types import SimpleNamespace

        from .live import play_frame

        return play_frame(SimpleNamespace(signal=step.signal, rate=rate), profile, args.device,
                          args.seconds, args.quiet)
    return 0


def _ztiming_pattern(args) -> int:
    import numpy as np

    from calibration.patterns import ztiming_strokes

    from ..files import transaction
    from ..pipeline import report_line
    from ..preview import phosphor_image, write_png
    from ..sinks import write_signal
    from .render import load_setup, repeats_for

    given = [o for o, v in (("--refresh", args.refresh), ("--samples", args.samples))
             if v is not None]
    if given:
        raise VectorgenError(f"the Z timing scale is read at a known writing speed: set it with "
                             f"--speed, not {', '.join(given)}")
    if args.order not in (None, "input"):
        raise VectorgenError("the Z timing pattern is drawn in its own order (the rows run "
                             "alternately left to right and right to left): leave out --order")
    args.order = "input"
    profile, renderer = load_setup(args)
    speed = args.speed if args.speed is not None else profile.beam.writing_speed_mm_per_s
    strokes, pat = ztiming_strokes(profile, speed)
    frame = renderer.frame(strokes)
    drawn = _dash_speed(frame.plan, len(pat.dashes), renderer.rate)
    if abs(drawn / speed - 1) > 0.01:
        # the renderer drew the dashes at another speed (a lagging deflection slows them): the
        # scale must be the one they are drawn at; the dashes themselves do not change
        strokes, pat = ztiming_strokes(profile, drawn)
        frame = renderer.frame(strokes)
    repeats = repeats_for(args.seconds, renderer.rate, frame.samples)
    if args.output is not None:
        _check_size(repeats * frame.signal.size)
    if renderer.channels < 3:
        _warn("the Z timing pattern needs the Z channel (--channels 3 or [output] channels = 3): "
              "without it every jump between the dashes is lit too")
    kept = []
    rep = frame.report(profile)
    with transaction():                     # the signal, preview and report: all or none
        if args.output is not None:
            kept.append(_keep_old(args.output))
            write_signal(args.output, np.tile(frame.signal, (repeats, 1)), renderer.rate,
                         frame.names, pcm16=args.pcm16)
        if args.preview:
            kept.append(write_png(args.preview, phosphor_image(
                frame.signal, profile, renderer.channels, frame.plan.lit, chain=renderer.chain,
                rate=renderer.rate, intensity=frame.plan.intensity)))
        _write_report(args, rep, repeats, frame.samples, renderer.rate, pattern="ztiming",
                      tick_us=pat.tick_us)
    if not args.quiet:
        print(report_line(rep) + (f"; wrote {repeats} frame(s) to "
                                                    f"{args.output}" if args.output else "")
              + _kept_text(kept))
        print(pat.text)
    if args.play:
        from .live import play_frame

        return play_frame(frame, profile, args.device, args.seconds, args.quiet)
    return 0


def _check_size(values: int) -> None:
    from .render import MAX_OUTPUT_BYTES

    if values * 4 > MAX_OUTPUT_BYTES:
        raise VectorgenError(f"the output would be {values * 4 / 2**30:.1f} GiB, over the 4 GiB "
                             f"a WAV file can hold; shorten --seconds or lower --rate")


def _dash_speed(plan, dashes: int, rate: int) -> float:
    """The speed the first `dashes` strokes were drawn at, mm/s: the median step between lit
    samples of those strokes that move (dwells at their ends left out)."""
    import numpy as np

    x, y = np.asarray(plan.x), np.asarray(plan.y)
    lit = np.asarray(plan.lit) & (np.asarray(plan.stroke) < dashes)
    both = lit[:-1] & lit[1:] & (np.asarray(plan.stroke)[:-1] == np.asarray(plan.stroke)[1:])
    step = np.hypot(np.diff(x), np.diff(y))[both]
    step = step[step > 1e-9]
    if not step.size:
        raise VectorgenError("the Z timing dashes were not drawn (are they inside the usable "
                             "area?)")
    return float(np.median(step)) * rate


# --- fit ----------------------------------------------------------------------------------------

def _default_residuals_path(profile_path: str) -> str:
    stem = profile_path[:-5] if profile_path.lower().endswith(".toml") else profile_path
    return stem + "-residuals.png"


def cmd_fit(args) -> int:
    from calibration.anode import check_kv
    from calibration.area import choose_area, with_area
    from calibration.fit import (check_model, fit_sheet, fitted_profile, make_report,
                                 report_lines, rewired, warnings_for, write_residual_png)
    from calibration.sheet import read_sheet
    from calibration.wiring import diagnose

    from ..files import check_output_path, write_with_backup
    from ..profile import load_profile, save_profile

    check_output_path(args.output, (".toml",))
    residuals = args.residuals or _default_residuals_path(args.output)
    check_output_path(residuals, (".png",))
    if args.report:
        check_output_path(args.report, (".json",))
    if args.kv is not None:
        check_kv(args.kv, "--kv")
    if args.gains_only and not args.base:
        raise VectorgenError("--gains-only keeps the rotation, skew and pincushion of a fitted "
                             "profile: give it with --base PROFILE")
    base = load_profile(args.base)
    sheet = read_sheet(args.sheet, "fit")
    result = fit_sheet(sheet, base, terms=args.terms, gains_only=args.gains_only)
    if result.skipped:
        _warn(f"{len(result.skipped)} row(s) without both measurements left out: "
              f"{_name_list(result.skipped)}")
    for n in result.notes:
        _warn(n)
    fixed = None
    if args.fix_wiring:
        wiring = diagnose(result.model.matrix, base.output.order, base.output.invert)
        if wiring.needs_fix:
            base = base.copy()
            base.output.order, base.output.invert = list(wiring.order), list(wiring.invert)
            result = rewired(result, wiring)
            result.report = make_report(result, base, sheet)
            fixed = wiring
        elif not args.quiet:
            print("--fix-wiring: the wiring is as the profile says, nothing to fix"
                  if wiring.finding == "as-profile" else
                  "--fix-wiring: no wiring mistake can be named, nothing changed")
    rep = result.report
    for w in warnings_for(rep):
        _warn(w)
    name = args.name
    if name is None and args.base is None:
        name = f"tube calibrated from {sheet.path}"
    prof = fitted_profile(base, result, kind=args.deflection, anode_kv=args.kv, name=name)
    area = choose_area(result.model, base.screen, args.area)
    prof = with_area(prof, area.written)
    rep.update(area.report())
    if area.changed:
        # the figures of the area now in the profile (the pincushion terms rescaled to it)
        from ..deflection import DeflectionModel

        rep.update(check_model(DeflectionModel.from_profile(prof), prof.screen))
        rep.update(k_radial=prof.deflection.k_radial, k_x=prof.deflection.k_x,
                   k_y=prof.deflection.k_y)
    if area.mode == "keep" and area.scale is not None and area.scale < 1:
        _warn(f"the usable area kept needs drive up to {rep['max_drive_usable_area']:.3f}, "
              f"beyond full scale: drawings near its edge will be refused (leave out --area "
              f"keep to write the area the tube reaches, or raise the amplifier gain)")
    rep.update(deflection=prof.deflection.kind, anode_kv=prof.deflection.anode_kv or None,
               profile=args.output, base=args.base or "<built-in>", residual_picture=residuals,
               wiring_fixed=fixed is not None)
    if not prof.deflection.anode_kv:
        _warn("the profile does not record the anode voltage (give --kv KV): `vectorgen anode` "
              "needs it to rescale the gains later")
    mag, picture_backup = write_residual_png(residuals, result, prof.screen)
    rep["residual_magnification"] = mag
    backup = save_profile(prof, args.output)
    rep["backup"] = backup
    kept = [picture_backup]
    if args.report:
        kept.append(write_with_backup(args.report, (json.dumps(rep, indent=2) + "\n").encode(),
                                      (".json",)))
    if not args.quiet:
        for line in report_lines(rep):
            print(line)
        print(area.text())
        if fixed is not None:
            print(f"wiring fixed in the profile: [output] order = {fixed.order}, invert = "
                  f"{fixed.invert}, the matrix turned to match (the drawings land where they "
                  f"did; the figures above are for the fixed map)")
        print(f"wrote {args.output}" + (f" (previous profile kept as {backup})" if backup else "")
              + f"; residuals (arrows from fitted to measured position) x{mag:g} in {residuals}"
              + _kept_text(kept))
        print("next: draw the check pattern through it (vectorgen pattern check --sheet "
              "CHECK.csv --profile " + args.output + ") and measure what is left")
    return 0


# --- check --------------------------------------------------------------------------------------

def cmd_check(args) -> int:
    from calibration.check import check_sheet
    from calibration.fit import write_arrows_png
    from calibration.sheet import read_sheet

    from ..files import check_output_path, write_with_backup

    if args.report:
        check_output_path(args.report, (".json",))
    if args.residuals:
        check_output_path(args.residuals, (".png",))
    tol = _check_finite(args.tolerance_mm, "--tolerance-mm")
    if not tol > 0:
        raise VectorgenError(f"--tolerance-mm must be a distance > 0 mm (got {tol:g})")
    sheet = read_sheet(args.sheet, "check")
    res = check_sheet(sheet, tol)
    if res.skipped:
        _warn(f"{len(res.skipped)} row(s) without both measurements left out: "
              f"{_name_list(res.skipped)}")
    for n in res.notes:
        _warn(n)
    rep = res.report()
    rep["sheet"] = sheet.path
    kept = []
    if args.residuals:
        screen = _outline_for(args.profile, res.target)
        mag, b = write_arrows_png(args.residuals, res.target, res.error, res.names, screen,
                                  "target", f"check: remaining error, RMS {rep['rms_mm']:.3f} "
                                  f"mm, worst {rep['worst_mm']:.3f} mm")
        rep["residual_magnification"] = mag
        kept.append(b)
    if args.report:
        kept.append(write_with_backup(args.report, (json.dumps(rep, indent=2) + "\n").encode(),
                                      (".json",)))
    if not args.quiet:
        for line in res.lines():
            print(line)
        if args.residuals:
            print(f"arrows from target to measured position x{rep['residual_magnification']:g} "
                  f"in {args.residuals}" + _kept_text(kept))
    return 0 if res.passed else 1


def _outline_for(profile_path, targets):
    """The usable area to outline in the check's picture: the profile's, or without one a box
    a little larger than the targets."""
    if profile_path is not None:
        from ..profile import load_profile

        return load_profile(profile_path).screen
    import numpy as np

    from ..screen import Screen

    half = 1.1 * np.abs(targets).max(axis=0)
    return Screen(width_mm=float(2 * max(half[0], 1.0)), height_mm=float(2 * max(half[1], 1.0)))


# --- anode --------------------------------------------------------------------------------------

def cmd_anode(args) -> int:
    import numpy as np

    from calibration.anode import rescale_profile
    from calibration.fit import check_model, geometry

    from ..files import check_output_path
    from ..profile import load_profile, save_profile

    out = args.output or args.profile
    check_output_path(out, (".toml",))
    _check_finite(args.kv, "--kv")
    _check_finite(args.from_kv, "--from-kv")
    prof = load_profile(args.profile)
    new, f, kv_old = rescale_profile(prof, args.kv, args.from_kv)
    from ..deflection import DeflectionModel

    model = DeflectionModel.from_profile(new)
    reach = check_model(model, new.screen)["max_drive_usable_area"]
    backup = save_profile(new, out)
    g_old = geometry(np.asarray(prof.deflection.matrix_mm))
    g_new = geometry(np.asarray(new.deflection.matrix_mm))
    if reach > 1.0:
        from calibration.area import choose_area, screen_text

        area = choose_area(model, new.screen)
        size = (f" to {screen_text(area.reached)}, the most it reaches" if area.reached
                else "")
        _warn(f"at {args.kv:g} kV the usable area needs drive up to {reach:.3f}, beyond full "
              f"scale: drawings near its edge will be refused (raise the amplifier gain, or "
              f"shrink [screen]{size}; the box trim's fit does that)")
    if not args.quiet:
        print(f"{new.deflection.kind} deflection, {kv_old:g} kV -> {args.kv:g} kV: gains x{f:.6f} "
              f"(the same spot now needs x{1 / f:.6f} the drive); gain x "
              f"{g_old['gain_x_mm_per_fs']:.3f} -> {g_new['gain_x_mm_per_fs']:.3f} mm/FS, y "
              f"{g_old['gain_y_mm_per_fs']:.3f} -> {g_new['gain_y_mm_per_fs']:.3f} mm/FS; "
              f"offset scaled alike, pincushion kept")
        print(f"wrote {out}" + (f" (previous profile kept as {backup})" if backup else "")
              + "; trim with the box pattern and `vectorgen fit --gains-only`")
    return 0


# --- spots --------------------------------------------------------------------------------------

def cmd_spots(args) -> int:
    from calibration.sheet import read_sheet, write_sheet
    from calibration.spots import parse_refs, spots_to_sheet

    from ..files import check_output_path

    out = args.output or args.sheet
    check_output_path(out, (".csv",))
    if args.overlay:
        check_output_path(args.overlay, (".png",))
    _check_finite(args.threshold, "--threshold")
    refs = parse_refs(args.ref) if args.ref else None
    if args.overwrite and refs is None:
        raise VectorgenError("--overwrite replaces measurements with the photo's: it needs the "
                             "reference marks from --ref (without --ref the sheet's own "
                             "measurements are the references)")
    sheet = read_sheet(args.sheet)
    res = spots_to_sheet(args.photo, sheet, refs=refs, threshold=args.threshold,
                         min_area=args.min_area, overwrite=args.overwrite)
    for n in res.notes:
        _warn(n)
    overlay_backup = res.write_overlay(args.overlay) if args.overlay else None
    if not res.filled:
        print(f"{res.summary}; nothing new to fill, {out} not written"
              + _kept_text([overlay_backup]))
        return 0
    backup = write_sheet(out, sheet.names, sheet.coords, res.measured, kind=sheet.kind)
    if not args.quiet:
        print(f"{res.summary}; filled {len(res.filled)} row(s) of {out}"
              + (f" (previous sheet kept as {backup})" if backup else "")
              + _kept_text([overlay_backup]))
    return 0


# --- parsers ------------------------------------------------------------------------------------

def register(sub) -> None:
    from .render import add_output_arguments

    p = sub.add_parser(
        "pattern", help="draw a calibration pattern and write its measurement sheet",
        description="Draw a test pattern at known drive positions, through the profile in use, "
        "into a signal file like `render` (-o) or live through the audio interface (--play), and "
        "write the measurement sheet: one CSV row per target, columns point, drive_x, drive_y, "
        "measured_x_mm, measured_y_mm, the measured columns empty for you to fill in (mm from "
        "the centre of the face, +x right, +y up). grid: ROWS x COLS targets for the full fit "
        "and linearity; box: centre and four corners for a quick gain trim; circle: a circle "
        "in the drawing with ticks every 45 degrees, for an aspect check; check: ROWS x COLS "
        "targets at round millimetre positions drawn through a calibrated profile, whose sheet "
        "lists where each should land (target_x_mm, target_y_mm), for `vectorgen check`. A "
        "sheet that holds measurements is never replaced unless --replace-sheet is given. "
        "Two patterns have no "
        "targets and no sheet: step, a slow square wave of jumps on one axis with the beam "
        "blanked, to capture the yoke current for `vectorgen fit-response`; ztiming, rows of "
        "dashes drawn alternately left to right and right to left over a scale of ticks, that "
        "shows how early or late Z acts.")
    p.add_argument("kind", choices=("grid", "box", "circle", "check", "step", "ztiming"),
                   metavar="grid|box|circle|check|step|ztiming")
    p.add_argument("--play", action="store_true",
                   help="show the pattern live through the audio interface (until Ctrl-C or "
                        "--seconds)")
    p.add_argument("--device", metavar="NUMBER|NAME",
                   help="with --play: the output device (see 'vectorgen devices')")
    p.add_argument("-o", "--output", default=None, metavar="OUT",
                   help="signal file: .wav, .csv, .raw or .bin")
    p.add_argument("--sheet", default=None, metavar="SHEET.csv",
                   help="measurement sheet to write (grid, box, circle and check); an empty "
                        "sheet already there is kept as SHEET.csv.bakN, one holding measurements "
                        "is refused")
    p.add_argument("--replace-sheet", action="store_true",
                   help="replace a sheet that holds measurements (it is kept as SHEET.csv.bakN)")
    p.add_argument("--rows", type=int, default=7,
                   help="grid and check rows (default 7: with 7 columns, 49 targets, which "
                        "refresh at about 47 Hz at 48 kHz as dots and over-determine the full "
                        "fit)")
    p.add_argument("--cols", type=int, default=7, help="grid and check columns (default 7)")
    p.add_argument("--extent", type=float, default=0.9, metavar="FRACTION",
                   help="the targets fill this fraction of the usable area, judged with the "
                        "profile (default 0.9)")
    p.add_argument("--mark", choices=("cross", "dot"), default=None,
                   help="mark each target with a small cross or a dot (default: dots for grid "
                        "and check, whose many crosses would flicker; crosses for box and "
                        "circle)")
    p.add_argument("--axis", choices=("x", "y"), default=None,
                   help="step: the axis that jumps (the other is held at 0)")
    p.add_argument("--amplitude", type=float, default=0.5, metavar="FRACTION",
                   help="step: jump between -FRACTION and +FRACTION of full scale (default 0.5)")
    p.add_argument("--period-ms", type=float, default=20.0, metavar="MS",
                   help="step: one period of the square wave (default 20 ms, 10 ms on each "
                        "level: make half a period ten time constants of the yoke or more)")
    p.add_argument("--seconds", type=float, default=None,
                   help="repeat frames to this duration; with --play, stop after it")
    p.add_argument("--pcm16", action="store_true", help="16-bit integer samples")
    p.add_argument("--preview", metavar="FILE.png", help="also write a phosphor preview")
    p.add_argument("--report", metavar="FILE.json",
                   help="also write the frame report as JSON (sample_rate, samples_per_frame, "
                        "refresh_hz and more, as `render --report`)")
    p.add_argument("-q", "--quiet", action="store_true")
    add_output_arguments(p)
    p.set_defaults(func=cmd_pattern)

    p = sub.add_parser(
        "fit", help="fit the deflection model to a measurement sheet",
        description="Fit the deflection model p = D(A u + c) to a filled measurement sheet by "
        "least squares and write a profile: the base profile's channels and timing with the "
        "fitted deflection, and the largest usable area of the base's shape the fitted tube "
        "reaches within full scale (--area). Reports gains, rotation, skew, pincushion, the "
        "residual of the fitted model, the linearity of the uncorrected tube, each with the "
        "number of targets it rests on, names wiring mistakes (mirrored, swapped or inverted "
        "axes) with the change that fixes them, and draws the residuals (arrows from fitted "
        "to measured, magnified). Rows without measurements are left out with a warning; with "
        "few rows fewer terms are fitted. Files already at OUT, the report and the picture "
        "are kept as numbered backups (.bakN).")
    p.add_argument("sheet", metavar="SHEET.csv")
    p.add_argument("-o", "--output", required=True, metavar="PROFILE.toml")
    p.add_argument("--base", metavar="PROFILE", help="keep this profile's screen, output and "
                   "beam timing (default: the built-in profile)")
    p.add_argument("--kv", type=float, metavar="KV", help="anode voltage during the "
                   "measurement, in kV (recorded for `vectorgen anode`)")
    p.add_argument("--deflection", choices=("magnetic", "electrostatic"), default=None,
                   help="deflection kind (default: the base profile's; the built-in is magnetic)")
    p.add_argument("--terms", choices=TERMS, default="auto",
                   help="gains: offset and per-axis gains; affine: + rotation and skew; full: "
                        "+ pincushion; auto (default): as many as the rows allow")
    p.add_argument("--gains-only", action="store_true",
                   help="trim only the gains and offset of --base (e.g. from the box pattern "
                        "after an anode change), keeping its rotation, skew and pincushion")
    p.add_argument("--area", choices=("shrink", "reach", "keep"), default="shrink",
                   help="the usable area written: shrink (default) the base's [screen] to the "
                        "largest area of its shape the fitted tube reaches within full scale, "
                        "never enlarging it; reach: that area, larger too (when the base's "
                        "[screen] is not the face, e.g. the built-in 100 x 80 mm); keep: the "
                        "base's [screen] as it is")
    p.add_argument("--fix-wiring", action="store_true",
                   help="when the fit shows swapped or inverted axes, write the [output] order "
                        "and invert that undo them, with the matrix to match (no new "
                        "measurements needed)")
    p.add_argument("--report", metavar="FILE.json", help="also write the report as JSON")
    p.add_argument("--residuals", metavar="FILE.png",
                   help="residual picture (default: PROFILE-residuals.png)")
    p.add_argument("--name", help="the profile's name (default: the base's)")
    p.add_argument("-q", "--quiet", action="store_true")
    p.set_defaults(func=cmd_fit)

    p = sub.add_parser(
        "check", help="the remaining error of a calibrated tube, from the check pattern's sheet",
        description="Read the check pattern's sheet (`vectorgen pattern check`, drawn through "
        "the calibrated profile) with the measured positions filled in, and report what is "
        "left after calibration: the distance from each target's intended position to where "
        "it landed (nothing is fitted to these points), as RMS, worst and per axis, the shift "
        "and size of the whole picture, and a verdict against --tolerance-mm (exit status 0 "
        "within it, 1 beyond it).")
    p.add_argument("sheet", metavar="SHEET.csv")
    p.add_argument("--tolerance-mm", type=float, required=True, metavar="MM",
                   help="the largest distance from target you accept, mm")
    p.add_argument("--report", metavar="FILE.json", help="also write the result as JSON")
    p.add_argument("--residuals", metavar="FILE.png",
                   help="also draw arrows from each target to where it landed (magnified)")
    p.add_argument("--profile", metavar="TOML",
                   help="with --residuals: the profile whose usable area is outlined "
                        "(default: a box around the targets)")
    p.add_argument("-q", "--quiet", action="store_true")
    p.set_defaults(func=cmd_check)

    p = sub.add_parser(
        "anode", help="rescale a profile's gains for a new anode voltage",
        description="Rescale the gains (and the centring offset) of a profile for a new anode "
        "voltage from the physics of deflection: magnetic 1/sqrt(V (1 + V / 1022 kV)), "
        "electrostatic 1/V; the pincushion terms are kept. Then trim with the box pattern and "
        "`vectorgen fit --gains-only`. The anode supply is lethal: change it only with the "
        "equipment made safe, as its maker says.")
    p.add_argument("profile", metavar="PROFILE.toml")
    p.add_argument("--kv", type=float, required=True, metavar="NEW", help="new anode voltage, kV")
    p.add_argument("--from-kv", type=float, default=None, metavar="OLD",
                   help="the voltage the profile was measured at, when it does not record it")
    p.add_argument("-o", "--output", metavar="OUT.toml",
                   help="write here instead of back to PROFILE (which is then kept as "
                        "PROFILE.bakN)")
    p.add_argument("-q", "--quiet", action="store_true")
    p.set_defaults(func=cmd_anode)

    p = sub.add_parser(
        "spots", help="fill a measurement sheet from a photo of the screen",
        description="Find the pattern's targets in a photo of the screen (threshold, label, "
        "centroid), match them to the sheet's targets, map pixels to mm with a homography from "
        "four or more reference marks, and fill the sheet's measured columns. The reference "
        "marks are either given with --ref (pixel position in the photo = mm position on the "
        "face, e.g. graticule corners or marks stuck on the face; read the pixels in any image "
        "viewer), or, without --ref, the targets you already measured with a ruler and entered "
        "in the sheet (at least four, e.g. the four corners). Take the photo square on and "
        "upright, the room dark. Missing or ambiguous targets are reported and left empty.")
    p.add_argument("photo", metavar="PHOTO")
    p.add_argument("--sheet", required=True, metavar="SHEET.csv")
    p.add_argument("-o", "--output", metavar="OUT.csv",
                   help="write the filled sheet here (default: back to SHEET, which is then kept "
                        "as SHEET.csv.bakN)")
    p.add_argument("--ref", action="append", metavar="PX,PY=X_MM,Y_MM",
                   help="a reference mark: its pixel position (column, row from the top left) "
                        "and its mm position on the face; give it four or more times")
    p.add_argument("--threshold", type=float, default=0.35, metavar="FRACTION",
                   help="a dot is brighter than this fraction of the way from the background "
                        "to the brightest dot (default 0.35)")
    p.add_argument("--min-area", type=int, default=None, metavar="PX",
                   help="ignore specks smaller than this many pixels (default: a fifth of the "
                        "typical dot)")
    p.add_argument("--overwrite", action="store_true",
                   help="with --ref: replace measurements already in the sheet")
    p.add_argument("--overlay", metavar="FILE.png",
                   help="also write the photo marked with the dots found and matched")
    p.add_argument("-q", "--quiet", action="store_true")
    p.set_defaults(func=cmd_spots)

"""Commands `render`, `preview` and `init-profile`."""

from __future__ import annotations

import json
import math


from ..errors import InputError
from .source_options import add_source_arguments

MAX_OUTPUT_BYTES = 2**32 - 2**20     # a RIFF/WAV file holds at most 4 GiB; all formats share it


def add_output_arguments(parser) -> None:
    """Options shared by every command that produces a signal (render, preview, play, ...)."""
    g = parser.add_argument_group("signal")
    g.add_argument("--profile", metavar="TOML", help="tube profile (default: built-in, "
                   "uncalibrated 100 x 80 mm)")
    g.add_argument("--rate", type=int, default=48000, metavar="HZ",
                   help="sample rate (default 48000)")
    g.add_argument("--channels", type=int, choices=(2, 3), default=None,
                   help="2 = X,Y; 3 = X,Y,Z blanking (default: the profile's)")
    g.add_argument("--speed", type=float, default=None, metavar="MM_PER_S",
                   help="writing speed; the frame time follows (default: the profile's)")
    g.add_argument("--refresh", type=float, default=None, metavar="HZ",
                   help="target refresh rate; the writing speed follows")
    g.add_argument("--samples", type=int, default=None, metavar="N",
                   help="fit one frame into exactly N samples (waveform generator memory)")
    g.add_argument("--keep-order", action="store_true",
                   help="draw strokes in source order (default: ordered for short blanked moves)")
    g.add_argument("--no-compensation", action="store_true",
                   help="render as for ideal hardware: no shaped jumps, no AC-coupling or lag "
                        "compensation, no frame balancing (a preview then shows what the "
                        "profile's interface and deflection make of it)")
    g.add_argument("--no-balance", action="store_true",
                   help="with an AC-coupled output ([output] highpass_hz): do not balance frames "
                        "to zero mean; the picture shifts by the frame's mean instead")
    g.add_argument("--slow-to-fit", action="store_true",
                   help="when the [drive] cannot make the frame at this writing speed, slow "
                        "down to fit instead of refusing")
    g.add_argument("--order", default=None, metavar="STRATEGY",
                   help="stroke ordering strategy by name: tour (default: shortest jump time), "
                   "greedy (nearest next stroke), input (= --keep-order); an unknown name lists "
                   "every one")


def load_setup(args, stages=()):
    """(profile, Renderer) from the shared signal options."""
    from ..pipeline import Renderer, Settings
    from ..profile import load_profile

    profile = load_profile(args.profile)
    ordering = getattr(args, "order", None) or ("input" if args.keep_order else "tour")
    if args.keep_order and getattr(args, "order", None) not in (None, "input"):
        raise InputError("--keep-order and --order say different things: give one")
    from .source_options import source_kind

    scene = getattr(args, "source", None) is not None and source_kind(args) == "scene"
    settings = Settings(rate=args.rate, channels=args.channels, speed=args.speed,
                        refresh=args.refresh, frame_samples=args.samples, ordering=ordering,
                        compensate=not getattr(args, "no_compensation", False),
                        balance=not getattr(args, "no_balance", False),
                        slow_to_fit=getattr(args, "slow_to_fit", False), switch_ready=scene)
    return profile, Renderer(profile, settings, stages)


def timeline(args, profile, renderer, seconds: float | None):
    """The frames to output, as a list of (Frame, repeats) (`iter_timeline` as a list)."""
    return list(iter_timeline(args, profile, renderer, seconds))


def iter_timeline(args, profile, renderer, seconds: float | None):
    """The frames to output, one (Frame, repeats) at a time. A static drawing is one frame
    repeated to fill `seconds` (one frame when None); a scene script is rendered on its own
    clock, each frame only when asked for. A frame sampled too coarsely to show its drawing
    is warned about."""
    from .source_options import source_kind, static_strokes

    if source_kind(args) == "scene":
        from ..scene import iter_scene_timeline

        for frame, repeats in iter_scene_timeline(args.source, renderer, seconds):
            warn_if_coarse(frame, profile)
            yield frame, repeats
        return
    frame = renderer.frame(static_strokes(args, profile))
    warn_if_coarse(frame, profile)
    yield frame, repeats_for(seconds, renderer.rate, frame.samples)


COARSE_FRACTION = 0.04      # lit samples further apart than this share of the screen diagonal


def coarse_sampling(frame, profile) -> str | None:
    """The warning for a frame whose lit samples lie so far apart (a low --rate, a huge
    --speed) that its lines become a few scattered points, or None."""
    plan = frame.plan
    if plan.drawn_length_mm <= 0 or plan.moving_samples <= 0:
        return None
    spacing = plan.drawn_length_mm / plan.moving_samples
    hw, hh = profile.screen.half_extent
    if spacing <= COARSE_FRACTION * 2 * math.hypot(hw, hh):
        return None
    return (f"the beam moves {spacing:.3g} mm between samples at {frame.rate} Hz: the "
            f"{plan.drawn_length_mm:.0f} mm of drawing get only {plan.moving_samples} lit "
            f"samples a frame, too few to show its shape (lower --speed or raise --rate)")


def warn_if_coarse(frame, profile) -> None:
    import warnings

    from ..errors import VectorgenWarning

    note = coarse_sampling(frame, profile)
    if note is not None:
        warnings.warn(note, VectorgenWarning, stacklevel=2)


def repeats_for(seconds: float | None, rate: int, frame_samples: int) -> int:
    """Whole frames that fill `seconds` (one frame when None)."""
    return 1 if seconds is None else max(1, math.ceil(seconds * rate / frame_samples))


def _check_seconds(seconds, most_s: float = 24 * 3600, most: str = "a day"):
    if seconds is not None and not (math.isfinite(seconds) and 0 < seconds <= most_s):
        raise InputError(f"--seconds must be > 0 and at most {most} (got {seconds})")


def cmd_render(args) -> int:
    """Render a source into a signal file, streamed frame by frame: the size is checked before
    any work, the outputs (signal, --preview, --report) are all written or none is, and a
    progress line shows on a terminal for a long render."""
    import itertools
    import sys

    from ..files import atomic_write_bytes, check_output_path, check_outputs, transaction
    from ..pipeline import report_line
    from ..sinks import signal_extensions, write_frames
    from .source_options import source_kind
    from .terminal import Progress, say

    ext = check_output_path(args.output, signal_extensions())
    if args.report:
        check_output_path(args.report, (".json",))
    if args.preview:
        check_output_path(args.preview, (".png",))
    kind = source_kind(args)
    check_outputs([("-o", args.output), ("--report", args.report), ("--preview", args.preview)],
                  [("profile", args.profile),
                   ("scene script" if kind == "scene" else "drawing",
                    args.source if kind in ("scene", "file") else None)])
    _check_seconds(args.seconds)
    _start, seconds = time_window(args, args.seconds)    # --time A..B sets the duration too
    profile, renderer = load_setup(args)
    rate, channels = renderer.rate, renderer.channels
    if seconds is not None:                 # before any frame is made: at least this much
        _check_output_size(ext, math.ceil(seconds * rate), channels, args.pcm16, args)
    parts = timed_timeline(args, profile, renderer, seconds)
    first, repeats = next(parts)
    static = kind != "scene" and not (ticks(args) and seconds is not None)
    expected = first.samples * repeats if static else max(
        first.samples, math.ceil((seconds or 0) * rate))
    if static:
        _check_output_size(ext, expected, channels, args.pcm16, args)
    counts = {"frames": 0, "distinct": 0}

    def frames():
        for frame, n in itertools.chain([(first, repeats)], parts):
            counts["frames"] += n
            counts["distinct"] += 1
            yield frame.signal, n

    progress = Progress(expected / rate, "rendering") if (
        not args.quiet and sys.stderr.isatty()) else None
    with transaction():
        try:
            total = write_frames(args.output, frames(), rate, first.names, args.pcm16, expected,
                                 MAX_OUTPUT_BYTES,
                                 None if progress is None else
                                 (lambda done: progress.update(done / rate)))
        finally:
            if progress is not None:
                progress.close()
        rep = first.report(profile)
        rep.update(frames=int(counts["frames"]), distinct_frames=counts["distinct"],
                   total_samples=int(total), duration_s=total / rate, output=args.output,
                   sample_format="int16" if args.pcm16 else "float32")
        if args.preview:
            from ..preview import phosphor_image, write_png

            write_png(args.preview, phosphor_image(first.signal, profile, channels,
                                                   first.plan.lit, chain=renderer.hardware_chain,
                                                   rate=rate, intensity=first.plan.intensity))
        if args.report:
            atomic_write_bytes(args.report, (json.dumps(rep, indent=2) + "\n").encode())
        if not args.quiet:      # said before the files go into place: a failure writes none
            say(report_line(rep) + f"; wrote {rep['frames']} frame(s), "
                f"{rep['duration_s']:.3f} s to {args.output}", nothing_written=True)
    return 0


def _check_output_size(ext: str, samples: int, channels: int, pcm16: bool, args) -> None:
    """Refuse, before the work, an output over MAX_OUTPUT_BYTES."""
    from ..sinks import estimate_bytes

    size = estimate_bytes(ext, samples, channels, pcm16)
    if size > MAX_OUTPUT_BYTES:
        sample = "16-bit" if pcm16 or ext in (".raw", ".bin") else "float32"
        what = "about " if ext == ".csv" else ""
        raise InputError(f"the output would be {what}{size / 2**30:.1f} GiB ({samples} samples "
                         f"of {channels} channels, {sample}), over the "
                         f"{MAX_OUTPUT_BYTES / 2**30:.0f} GiB a signal file may hold: shorten "
                         f"--seconds or lower --rate")


TIME_RANGE = ".."          # --time A..B: from A to B


def parse_time(text: str, option: str = "--time") -> float:
    """Seconds of a time given as seconds ("3", "2.5") or "HH:MM[:SS]".

    Examples
    --------
    >>> parse_time("00:00:03"), parse_time("2.5")
    (3.0, 2.5)
    """
    from ..clocktime import parse_time_of_day

    t = str(text).strip()
    try:
        value = float(t)
    except ValueError:
        return parse_time_of_day(t, option)[0]
    if not math.isfinite(value):
        raise InputError(f"{option} must be seconds or HH:MM[:SS] (got {text!r})")
    return value


def time_window(args, seconds: float | None) -> tuple[float | None, float | None]:
    """(start, seconds) from --time: its start (None without --time) and the duration, which
    is `seconds` (--seconds), or the length of a range --time A..B (--seconds must then agree
    or be left out).

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> time_window(SimpleNamespace(time="00:00:03..00:00:05"), None)
    (3.0, 2.0)
    """
    text = getattr(args, "time", None)
    if text is None:
        return None, seconds
    if TIME_RANGE not in text:
        return parse_time(text), seconds
    a, _, b = text.partition(TIME_RANGE)
    start, end = parse_time(a), parse_time(b)
    if not end > start:
        raise InputError(f"--time {text}: the range must end after it starts")
    if seconds is not None and abs(seconds - (end - start)) > 1e-9:
        raise InputError(f"--time {text} lasts {end - start:g} s but --seconds says {seconds:g}: "
                         f"give one")
    return start, end - start


def ticks(args) -> bool:
    """Whether the source is the clock shape shown over a duration (it then ticks)."""
    from .source_options import source_kind

    return source_kind(args) == "shape" and args.shape == "clock"


def timed_timeline(args, profile, renderer, seconds: float | None):
    """`iter_timeline` that honours --time: a scene starts at scene time --time (instead of its
    START_TIME); --shape clock over a duration ticks once a second from --time (10:10 when not
    given), its seconds hand shown, like a scene at UPDATE_HZ = 1. Yields (Frame, repeats);
    `seconds` is the duration (see `time_window`)."""
    from .source_options import source_kind

    start, _ = time_window(args, None)
    kind = source_kind(args)
    if kind == "scene" and start is not None:
        from ..scene import iter_scene_timeline

        for frame, repeats in iter_scene_timeline(args.source, renderer, seconds, start):
            warn_if_coarse(frame, profile)
            yield frame, repeats
        return
    if kind == "shape" and args.shape == "clock" and seconds is not None:
        yield from _ticking_clock(args, profile, renderer, seconds,
                                  start if start is not None else 10 * 3600 + 10 * 60)
        return
    if start is not None and TIME_RANGE in args.time:
        raise InputError(f"--time {args.time}: a range applies to a scene script or --shape "
                         f"clock only")
    yield from iter_timeline(args, profile, renderer, seconds)


def _ticking_clock(args, profile, renderer, seconds: float, start: float):
    """The clock shape as a 1 Hz scene from `start` (seconds since midnight): update k shows
    start + k and goes on at the first frame boundary at or after sample ceil(k * rate), the
    rule of vectorgen.scene for scene scripts."""
    import copy
    import dataclasses

    from ..clocktime import DAY_S
    from ..scene import FixedSchedule
    from ..sources import shape
    from .source_options import drawing_options

    plain = copy.copy(args)
    plain.time = None
    opts = drawing_options(plain, profile)
    sched = FixedSchedule(renderer.rate, 1.0, start)

    def frame_at(k):
        t = sched.time(k) % DAY_S
        frame = renderer.frame(shape("clock", profile.screen,
                                     dataclasses.replace(opts, time_s=t, seconds_hand=True)))
        warn_if_coarse(frame, profile)
        return frame

    # (the frame-boundary rule of scene.iter_scene_timeline, for a drawing made here)
    total = max(1, math.ceil(seconds * renderer.rate))
    pos, k = 0, 0
    frame = frame_at(0)
    while True:
        n = frame.samples
        reps = max(1, -(-(sched.due(k + 1) - pos) // n))
        reps = min(reps, max(1, -(-(total - pos) // n)))
        yield frame, reps
        pos += reps * n
        if pos >= total:
            return
        while sched.due(k + 1) <= pos:
            k += 1
        frame = frame_at(k)


def cmd_preview(args) -> int:
    """Picture what the tube shows: one frame, or, for a scene or the clock over a --time range,
    every frame of the range exposed together, each for as long as it is on screen."""
    from ..files import check_output_path, check_outputs, transaction
    from ..pipeline import report_line
    from ..preview import exposure_image, write_png, write_signal_plot

    check_output_path(args.output, (".png",))
    if args.signals:
        check_output_path(args.signals, (".png",))
    check_outputs([("-o", args.output), ("--signals", args.signals)],
                  [("profile", args.profile), ("drawing", args.source)])
    if not 16 <= args.width <= 8000:
        raise InputError(f"--width must be between 16 and 8000 pixels (got {args.width})")
    if not (math.isfinite(args.spot) and 0.01 <= args.spot <= 100):
        raise InputError(f"--spot must be between 0.01 and 100 mm (got {args.spot:g})")
    _start, seconds = time_window(args, None)
    profile, renderer = load_setup(args)
    parts = list(timed_timeline(args, profile, renderer, seconds))
    frame = parts[0][0]
    with transaction():
        kept = [write_png(args.output, exposure_image(
            [(f.signal, f.plan.lit, f.plan.intensity, n * f.samples) for f, n in parts],
            profile, renderer.channels, width_px=args.width, spot_mm=args.spot,
            chain=renderer.hardware_chain, rate=renderer.rate))]
        if args.signals:
            kept.append(write_signal_plot(args.signals, frame.signal, frame.names,
                                          renderer.rate))
    if not args.quiet:
        kept = [k for k in kept if k]
        shown = (f"; {len(parts)} frames over {seconds:g} s exposed together" if len(parts) > 1
                 else "")
        print(report_line(frame.report(profile)) + shown + f"; preview in {args.output}"
              + (f" (previous file(s) kept as {', '.join(kept)})" if kept else ""))
    return 0


def cmd_init_profile(args) -> int:
    from ..profile import Profile, default_for_screen, profile_from_dict, save_profile

    prof = Profile(name=args.name)
    if args.round is not None:
        if not (math.isfinite(args.round) and args.round > 0):
            raise InputError(f"--round must be a diameter > 0 mm (got {args.round})")
        prof.screen.shape, prof.screen.diameter_mm = "round", args.round
    if args.size is not None:
        try:
            w, h = (float(v) for v in args.size.lower().split("x"))
        except ValueError:
            raise InputError(f"--size must be WIDTHxHEIGHT in mm, e.g. 100x80 "
                                 f"(got {args.size!r})") from None
        if not (w > 0 and h > 0 and math.isfinite(w) and math.isfinite(h)):
            raise InputError(f"--size must be positive (got {args.size!r})")
        prof.screen.width_mm, prof.screen.height_mm = w, h
    if args.channels:
        prof.output.channels = args.channels
    prof = default_for_screen(prof)
    from ..profile import profile_to_dict

    profile_from_dict(profile_to_dict(prof), "<new profile>")   # it must load back
    backup = save_profile(prof, args.output)
    print(f"wrote {args.output}" + (f" (previous file kept as {backup})" if backup else ""))
    return 0


def register(sub) -> None:
    p = sub.add_parser("render", help="draw a source into a signal file (WAV, CSV, raw)",
                       description="Render a drawing into X/Y(/Z) deflection samples and write "
                       "them to OUT: .wav (float32, or 16-bit with --pcm16), .csv, or .raw/.bin "
                       "(little-endian 16-bit).")
    add_source_arguments(p)
    add_output_arguments(p)
    p.add_argument("-o", "--output", required=True, metavar="OUT")
    p.add_argument("--seconds", type=float, default=None,
                   help="repeat frames to fill this duration (a scene runs on its own clock)")
    p.add_argument("--pcm16", action="store_true", help="16-bit integer samples instead of float32")
    p.add_argument("--report", metavar="FILE.json", help="write the frame report as JSON")
    p.add_argument("--preview", metavar="FILE.png", help="also write a phosphor preview")
    p.add_argument("-q", "--quiet", action="store_true", help="no report line")
    p.set_defaults(func=cmd_render)

    p = sub.add_parser("preview", help="picture of what the tube will show (PNG)",
                       description="Render a drawing and picture what the tube will show, from "
                       "the actual output samples.")
    add_source_arguments(p)
    add_output_arguments(p)
    p.add_argument("-o", "--output", required=True, metavar="OUT.png")
    p.add_argument("--signals", metavar="PLOT.png", help="also plot X, Y, Z against time")
    p.add_argument("--width", type=int, default=800, help="image width in pixels (default 800)")
    p.add_argument("--spot", type=float, default=0.35, metavar="MM",
                   help="spot size on the phosphor (default 0.35 mm)")
    p.add_argument("-q", "--quiet", action="store_true")
    p.set_defaults(func=cmd_preview)

    p = sub.add_parser("init-profile", help="write the built-in default profile as a start",
                       description="Write an uncalibrated tube profile to edit by hand (an "
                       "existing file is kept as a numbered backup).")
    p.add_argument("-o", "--output", required=True, metavar="PROFILE.toml")
    p.add_argument("--size", metavar="WxH", help="rectangular usable area in mm (default 100x80)")
    p.add_argument("--round", type=float, metavar="DIAMETER", help="round face of this diameter")
    p.add_argument("--channels", type=int, choices=(2, 3))
    p.add_argument("--name", default="my tube (uncalibrated)")
    p.set_defaults(func=cmd_init_profile)


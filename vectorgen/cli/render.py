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
    """The frames to output, as a list of (Frame, repeats). A static drawing is one frame
    repeated to fill `seconds` (one frame when None); a scene script is rendered on its own
    clock."""
    from .source_options import source_kind, static_strokes

    if source_kind(args) == "scene":
        from ..scene import scene_timeline

        return scene_timeline(args.source, renderer, seconds)
    frame = renderer.frame(static_strokes(args, profile))
    return [(frame, repeats_for(seconds, renderer.rate, frame.samples))]


def repeats_for(seconds: float | None, rate: int, frame_samples: int) -> int:
    """Whole frames that fill `seconds` (one frame when None)."""
    return 1 if seconds is None else max(1, math.ceil(seconds * rate / frame_samples))


def _check_seconds(seconds, most_s: float = 24 * 3600, most: str = "a day"):
    if seconds is not None and not (math.isfinite(seconds) and 0 < seconds <= most_s):
        raise InputError(f"--seconds must be > 0 and at most {most} (got {seconds})")


def cmd_render(args) -> int:
    import numpy as np

    from ..files import atomic_write_bytes, check_output_path
    from ..pipeline import report_line
    from ..sinks import signal_extensions, write_signal

    check_output_path(args.output, signal_extensions())
    if args.report:
        check_output_path(args.report, (".json",))
    if args.preview:
        check_output_path(args.preview, (".png",))
    _check_seconds(args.seconds)
    profile, renderer = load_setup(args)
    parts = timeline(args, profile, renderer, args.seconds)
    total = sum(f.samples * n for f, n in parts) * renderer.channels
    if total * 4 > MAX_OUTPUT_BYTES:
        raise InputError(f"the output would be {total * 4 / 2**30:.1f} GiB, over the 4 GiB "
                             f"a WAV file can hold; shorten --seconds or lower --rate")
    if len(parts) == 1 and parts[0][1] == 1:
        signal = parts[0][0].signal         # one frame once: no copies
    else:
        signal = np.concatenate([np.tile(f.signal, (n, 1)) for f, n in parts])
    first = parts[0][0]
    rep = first.report(profile)
    rep.update(frames=int(sum(n for _f, n in parts)), distinct_frames=len(parts),
               total_samples=len(signal), duration_s=len(signal) / renderer.rate,
               output=args.output, sample_format="int16" if args.pcm16 else "float32")
    write_signal(args.output, signal, renderer.rate, first.names, pcm16=args.pcm16)
    if args.preview:
        from ..preview import phosphor_image, write_png

        write_png(args.preview, phosphor_image(first.signal, profile, renderer.channels,
                                               first.plan.lit, chain=renderer.hardware_chain,
                                               rate=renderer.rate))
    if args.report:
        atomic_write_bytes(args.report, (json.dumps(rep, indent=2) + "\n").encode())
    if not args.quiet:
        print(report_line(rep) + f"; wrote {rep['frames']} frame(s), "
              f"{rep['duration_s']:.3f} s to {args.output}")
    return 0


def cmd_preview(args) -> int:
    from ..files import check_output_path
    from ..pipeline import report_line
    from ..preview import phosphor_image, write_png, write_signal_plot

    check_output_path(args.output, (".png",))
    if args.signals:
        check_output_path(args.signals, (".png",))
    if not 16 <= args.width <= 8000:
        raise InputError(f"--width must be between 16 and 8000 pixels (got {args.width})")
    if not (math.isfinite(args.spot) and args.spot > 0):
        raise InputError(f"--spot must be > 0 mm (got {args.spot})")
    profile, renderer = load_setup(args)
    frame = timeline(args, profile, renderer, None)[0][0]
    write_png(args.output, phosphor_image(frame.signal, profile, renderer.channels,
                                          frame.plan.lit, width_px=args.width,
                                          spot_mm=args.spot, chain=renderer.hardware_chain,
                                          rate=renderer.rate))
    if args.signals:
        write_signal_plot(args.signals, frame.signal, frame.names, renderer.rate)
    if not args.quiet:
        print(report_line(frame.report(profile)) + f"; preview in {args.output}")
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


"""Command `demo`: render the embedded demo drawing to a WAV file and a preview PNG, with no
audio hardware and no input files needed. A first run at the bench, and the README's
set-up check."""

from __future__ import annotations

import argparse
import os

from ..errors import InputError

DEMO_SVG = os.path.join(os.path.dirname(os.path.dirname(__file__)), "data", "demo.svg")


def cmd_demo(args) -> int:
    from .render import cmd_render

    stem, ext = os.path.splitext(args.output)
    if ext.lower() != ".wav":
        raise InputError(f"the demo writes a .wav file (got {args.output!r})")
    render_args = argparse.Namespace(
        source=DEMO_SVG, text=None, shape=None, fit="page", tolerance=None, text_height=None,
        align="center", time=None, grid_step=None, radius=None,
        profile=args.profile, rate=args.rate, channels=args.channels, speed=None,
        refresh=args.refresh, samples=None, keep_order=False, order=None, no_compensation=False,
        no_balance=False, slow_to_fit=False,
        output=args.output, seconds=args.seconds, pcm16=False,
        report=stem + ".json", preview=stem + ".png", quiet=False)
    code = cmd_render(render_args)
    print(f"preview: {render_args.preview}   report: {render_args.report}")
    return code


def register(sub) -> None:
    p = sub.add_parser("demo", help="render the built-in demo drawing to WAV + preview PNG",
                       description="Render the embedded demo drawing (a harbour light) to "
                       "OUT.wav, with OUT.png (phosphor preview) and OUT.json (frame report) "
                       "beside it. Needs no audio hardware.")
    p.add_argument("-o", "--output", default="vectorgen-demo.wav", metavar="OUT.wav",
                   help="default: vectorgen-demo.wav in the current folder")
    p.add_argument("--profile", metavar="TOML")
    p.add_argument("--rate", type=int, default=48000, metavar="HZ")
    p.add_argument("--channels", type=int, choices=(2, 3), default=3)
    p.add_argument("--refresh", type=float, default=40.0, metavar="HZ",
                   help="target refresh (default 40 Hz)")
    p.add_argument("--seconds", type=float, default=2.0,
                   help="length of the WAV file (default 2 s)")
    p.set_defaults(func=cmd_demo)

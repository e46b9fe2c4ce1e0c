"""Source options of the command line: a drawing file (any registered extension), a .py scene
script, --text or --shape, and the drawing options they take. The sources themselves are the
engine's registries (`vectorgen.sources`); importing `shapes` here registers the built-in ones.
"""

from __future__ import annotations

import os

from ..clocktime import parse_time_of_day
from ..errors import InputError
from ..sources import FILE_SOURCES, DrawingOptions, drawing_from_file, shape, stroke_text

SCENE_EXTENSION = ".py"


def load_builtin_sources() -> None:
    """Register the built-in shapes and the stroke font (imported only when a source is read:
    `vectorgen --help` must start fast)."""
    import shapes  # noqa: F401


def add_source_arguments(parser) -> None:
    g = parser.add_argument_group("source (give one)")
    g.add_argument("source", nargs="?", metavar="SOURCE",
                   help="a drawing (" + ", ".join(FILE_SOURCES.names()) + ") or a .py scene "
                   "script")
    g.add_argument("--text", help='text in the stroke font; "\\n" starts a new line')
    g.add_argument("--shape", help="a built-in drawing by name: grid, crosshair, circle, clock "
                   "(an unknown name lists every one)")
    o = parser.add_argument_group("drawing options")
    o.add_argument("--fit", default="page", choices=("page", "content", "off", "true"),
                   help="SVG placement: fit the page (default) or the drawing's bounds into the "
                        "usable area; 'true': the document's true size from its width and "
                        "height units (1 mm on the page = 1 mm on the tube), centred; 'off': "
                        "one SVG user unit = 1 mm")
    o.add_argument("--tolerance", type=float, default=None, metavar="MM",
                   help="chord tolerance for flattening curves (default: the profile's)")
    o.add_argument("--text-height", type=float, default=None, metavar="MM",
                   help="cap height of --text (default: a tenth of the screen height)")
    o.add_argument("--align", default="center", choices=("left", "center", "right"),
                   help="alignment of --text lines")
    o.add_argument("--time", default=None, metavar="HH:MM[:SS]",
                   help="time shown by --shape clock (default 10:10); a scene's time to start "
                   "at (seconds or HH:MM[:SS], in place of START_TIME); A..B a range: render "
                   "lasts B-A, preview exposes every update in it; --shape clock over a "
                   "duration ticks")
    o.add_argument("--grid-step", type=float, default=None, metavar="MM",
                   help="spacing of --shape grid lines (default: from the usable area, a 1-2-5 "
                   "step giving at most 10 cells across; 10 mm on the built-in screen)")
    o.add_argument("--radius", type=float, default=None, metavar="MM",
                   help="radius of --shape circle or clock")


def source_kind(args) -> str:
    """"file", "scene", "text" or "shape"; a one-line error unless exactly one is given."""
    load_builtin_sources()
    given = [k for k in ("source", "text", "shape") if getattr(args, k) is not None]
    if not given:
        raise InputError("no source: give a drawing file or a .py scene script, --text \"...\" "
                         "or --shape NAME")
    if len(given) > 1:
        raise InputError("give one source only (" + ", ".join(
            "SOURCE" if g == "source" else f"--{g}" for g in given) + ")")
    if given[0] == "source":
        ext = os.path.splitext(args.source)[1].lower()
        if ext == SCENE_EXTENSION:
            return "scene"
        if ext not in FILE_SOURCES:
            raise InputError(f"cannot draw '{args.source}': give a drawing ("
                             + ", ".join(FILE_SOURCES.names()) + ") or a .py scene script")
        if not os.path.exists(args.source):
            raise InputError(f"file not found: {args.source}")
        return "file"
    return given[0]


def drawing_options(args, profile) -> DrawingOptions:
    tol = args.tolerance if args.tolerance is not None else profile.beam.chord_tolerance_mm
    if not (tol > 0 and tol < 1e6):
        raise InputError(f"--tolerance must be > 0 mm (got {tol})")
    time_s, with_seconds = None, False
    if args.time is not None:
        first = str(args.time).split("..")[0].strip()      # a range starts at its first time
        try:
            time_s, with_seconds = float(first), True
        except ValueError:
            time_s, with_seconds = parse_time_of_day(first, "--time")
        if not (0 <= time_s < 24 * 3600):
            raise InputError(f"--time must be a time of day (got {args.time!r})")
    return DrawingOptions(fit=args.fit, tolerance_mm=tol, text_height_mm=args.text_height,
                          align=args.align, time_s=time_s, seconds_hand=with_seconds,
                          grid_step_mm=args.grid_step, radius_mm=args.radius)


def static_strokes(args, profile):
    """The Strokes of a static source (a drawing file, text or a shape)."""
    kind = source_kind(args)
    opts = drawing_options(args, profile)
    screen = profile.screen
    if kind == "file":
        return drawing_from_file(args.source, screen, opts)
    if kind == "text":
        h = opts.text_height_mm if opts.text_height_mm is not None else \
            0.1 * 2 * screen.half_extent[1]
        return stroke_text(args.text, h, opts.align)
    if kind == "shape":
        return shape(args.shape, screen, opts)
    raise InputError("a scene script is not a static drawing")

"""Sources for the command line: an SVG file, --text, --shape, or a scene script (.py).

Each static source resolves to `Strokes` in screen mm. A scene script resolves to a scene
(see scene.py) that yields Strokes as a function of time.
"""

from __future__ import annotations

import os

from .errors import VectorgenError

SHAPE_NAMES = ("grid", "crosshair", "circle", "clock")


def add_source_arguments(parser) -> None:
    g = parser.add_argument_group("source (give one)")
    g.add_argument("source", nargs="?", metavar="SOURCE",
                   help="an .svg drawing or a .py scene script")
    g.add_argument("--text", help='text in the stroke font; "\\n" starts a new line')
    g.add_argument("--shape", help="a built-in drawing: " + ", ".join(SHAPE_NAMES))
    o = parser.add_argument_group("drawing options")
    o.add_argument("--fit", default="page", choices=("page", "content", "off"),
                   help="SVG placement: fit the page (default) or the drawing's bounds into the "
                        "usable area, or 'off': one SVG unit = 1 mm")
    o.add_argument("--tolerance", type=float, default=None, metavar="MM",
                   help="chord tolerance for flattening curves (default: the profile's)")
    o.add_argument("--text-height", type=float, default=None, metavar="MM",
                   help="cap height of --text (default: a tenth of the screen height)")
    o.add_argument("--align", default="center", choices=("left", "center", "right"),
                   help="alignment of --text lines")
    o.add_argument("--time", default=None, metavar="HH:MM[:SS]",
                   help="time shown by --shape clock (default 10:10)")
    o.add_argument("--grid-step", type=float, default=10.0, metavar="MM",
                   help="spacing of --shape grid lines (default 10 mm)")
    o.add_argument("--radius", type=float, default=None, metavar="MM",
                   help="radius of --shape circle or clock")


def source_kind(args) -> str:
    given = [k for k in ("source", "text", "shape") if getattr(args, k) is not None]
    if not given:
        raise VectorgenError("no source: give an .svg or .py file, --text \"...\" or --shape NAME")
    if len(given) > 1:
        raise VectorgenError("give one source only (" + ", ".join(
            "SOURCE" if g == "source" else f"--{g}" for g in given) + ")")
    if given[0] == "source":
        ext = os.path.splitext(args.source)[1].lower()
        if ext == ".py":
            return "scene"
        if ext not in (".svg",):
            raise VectorgenError(f"cannot draw '{args.source}': give an .svg drawing or a .py "
                                 f"scene script")
        if not os.path.exists(args.source):
            raise VectorgenError(f"file not found: {args.source}")
        return "svg"
    return given[0]


def parse_clock_time(text: str | None) -> tuple[int, int, int | None]:
    if text is None:
        return 10, 10, None
    parts = text.split(":")
    try:
        nums = [int(p) for p in parts]
    except ValueError:
        nums = []
    if len(nums) not in (2, 3) or not (0 <= nums[0] < 24 and 0 <= nums[1] < 60) or \
            (len(nums) == 3 and not 0 <= nums[2] < 60):
        raise VectorgenError(f"--time must be HH:MM or HH:MM:SS (got {text!r})")
    return nums[0], nums[1], (nums[2] if len(nums) == 3 else None)


def static_strokes(args, profile, notes: list):
    """The Strokes of a static source (svg, text or shape)."""
    kind = source_kind(args)
    tol = args.tolerance if args.tolerance is not None else profile.beam.chord_tolerance_mm
    if not (tol > 0 and tol < 1e6):
        raise VectorgenError(f"--tolerance must be > 0 mm (got {tol})")
    screen = profile.screen
    if kind == "svg":
        from .svgsource import svg_to_strokes

        return svg_to_strokes(args.source, screen, fit=args.fit, tolerance_mm=tol, notes=notes)
    if kind == "text":
        from shapes.text import text_strokes

        h = args.text_height if args.text_height is not None else 0.1 * 2 * screen.half_extent[1]
        return text_strokes(args.text, h, args.align)
    if kind == "shape":
        import shapes

        name = args.shape.lower()
        if name not in SHAPE_NAMES:
            raise VectorgenError(f"unknown shape {args.shape!r}: choose from "
                                 + ", ".join(SHAPE_NAMES))
        if args.radius is not None and not args.radius > 0:
            raise VectorgenError(f"--radius must be > 0 mm (got {args.radius})")
        if name == "grid":
            return shapes.grid(screen, args.grid_step)
        if name == "crosshair":
            return shapes.crosshair(screen)
        if name == "circle":
            return shapes.circle(screen, args.radius, tolerance_mm=tol)
        h, m, s = parse_clock_time(args.time)
        return shapes.clock_face(screen, h, m, s, radius=args.radius)
    raise VectorgenError("a scene script is not a static drawing")

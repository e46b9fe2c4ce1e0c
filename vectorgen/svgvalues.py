"""SVG attribute and property values: numbers, lengths, lists, transforms, viewBox and
preserveAspectRatio, read as the specifications write them.

Every reader is a pure function of the text (and, for lengths, of the context a relative unit
needs). A value that cannot be read raises `BadValue` with a short reason; the document reader
turns it into a one-line `InputError` naming the element and the attribute.

Affine transforms are 6-tuples ``(a, b, c, d, e, f)`` as in SVG's ``matrix(a b c d e f)``:
``x' = a x + c y + e``, ``y' = b x + d y + f`` (SVG 1.1, 7.4).
"""

from __future__ import annotations

import math
import re

__all__ = ["BadValue", "IDENTITY", "FONT_SIZE_KEYWORDS", "PX_PER_UNIT", "Viewport",
           "apply_affine", "compose", "invert", "is_singular", "parse_aspect", "parse_length",
           "parse_length_list", "parse_number", "parse_number_list", "parse_transform",
           "parse_viewbox", "resolve_length", "viewbox_transform"]

IDENTITY = (1.0, 0.0, 0.0, 1.0, 0.0, 0.0)

# CSS Values and Units 3, 6.2 (absolute lengths): 1in = 2.54cm = 25.4mm = 72pt = 6pc = 96px,
# 1Q = 1/4 mm. One SVG user unit is one px in a document with no viewBox.
PX_PER_UNIT = {"px": 1.0, "in": 96.0, "cm": 96.0 / 2.54, "mm": 96.0 / 25.4, "q": 96.0 / 101.6,
               "pt": 96.0 / 72.0, "pc": 16.0}

# CSS Fonts 3, 3.5 (font-size keywords): the scale factors of 'medium' = 16px (CSS 2.1's
# recommended medium, the value browsers use).
FONT_SIZE_KEYWORDS = {"xx-small": 16.0 * 3 / 5, "x-small": 16.0 * 3 / 4, "small": 16.0 * 8 / 9,
                      "medium": 16.0, "large": 16.0 * 6 / 5, "x-large": 16.0 * 3 / 2,
                      "xx-large": 32.0, "xxx-large": 48.0}

# A number as SVG 1.1 (4.2) and CSS write it: no NaN, no infinity, no hexadecimal.
_NUM = r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"
_NUMBER = re.compile(rf"^\s*({_NUM})\s*$")
_LENGTH = re.compile(rf"^\s*({_NUM})([a-zA-Z]+|%)?\s*$")
_LIST_SEP = re.compile(r"\s*,\s*|\s+")
_TRANSFORM_ITEM = re.compile(r"\s*(matrix|translate|scale|rotate|skewX|skewY)\s*\(([^()]*)\)"
                             r"\s*,?")
_TRANSFORM_ARGS = {"matrix": (6,), "translate": (1, 2), "scale": (1, 2), "rotate": (1, 3),
                   "skewX": (1,), "skewY": (1,)}
_ALIGNS = ("none", "xminymin", "xmidymin", "xmaxymin", "xminymid", "xmidymid", "xmaxymid",
           "xminymax", "xmidymax", "xmaxymax")


class BadValue(ValueError):
    """A value that does not follow its grammar; the message is the reason, in a few words."""


class Viewport:
    """What relative lengths are relative to: the nearest viewport's width and height (user
    units, for %) and the element's font size (user units, for em and ex).

    Examples
    --------
    >>> vp = Viewport(200.0, 100.0, 10.0)
    >>> resolve_length("50%", vp, "x"), resolve_length("2em", vp, "x")
    (100.0, 20.0)
    """

    __slots__ = ("width", "height", "font_size")

    def __init__(self, width: float, height: float, font_size: float = 16.0):
        self.width, self.height, self.font_size = width, height, font_size

    def with_font(self, font_size: float) -> "Viewport":
        return Viewport(self.width, self.height, font_size)

    def percent_base(self, axis: str) -> float:
        """100% along `axis`: "x" the width, "y" the height, "xy" the normalised diagonal
        sqrt((w^2 + h^2) / 2) (SVG 1.1, 7.10: units for other lengths)."""
        if axis == "x":
            return self.width
        if axis == "y":
            return self.height
        return math.sqrt((self.width ** 2 + self.height ** 2) / 2.0)


def parse_number(text: str) -> float:
    """A plain number (no unit).

    Examples
    --------
    >>> parse_number(" -1.5e2 "), parse_number(".5")
    (-150.0, 0.5)
    """
    m = _NUMBER.match(text)
    if not m:
        raise BadValue("not a number")
    value = float(m.group(1))
    if not math.isfinite(value):
        raise BadValue("beyond the range of numbers")
    return value


def parse_length(text: str) -> tuple[float, str]:
    """A length as (number, unit); the unit lower case, "" for none, "%" for a percentage.

    Examples
    --------
    >>> parse_length("1cm"), parse_length("20"), parse_length("50%")
    ((1.0, 'cm'), (20.0, ''), (50.0, '%'))
    """
    m = _LENGTH.match(text)
    if not m:
        raise BadValue("not a length (a number with an optional unit)")
    value = float(m.group(1))
    if not math.isfinite(value):
        raise BadValue("beyond the range of numbers")
    unit = (m.group(2) or "").lower()
    if unit and unit != "%" and unit not in PX_PER_UNIT and unit not in ("em", "ex", "rem"):
        raise BadValue(f"unknown unit {m.group(2)!r} (use px, mm, cm, in, pt, pc, q, em, ex "
                       "or %)")
    return value, unit


def resolve_length(text: str, viewport: Viewport | None, axis: str = "xy") -> float:
    """A length in user units. Absolute units at 96 px per inch, % of the viewport along
    `axis` ("x", "y" or "xy"), em of the font size, ex as half an em, rem of 16 px.

    Notes
    -----
    CSS Values and Units 3: 6.1 (font-relative: 1ex is taken as 0.5em when the font gives no
    x-height), 6.2 (absolute); SVG 1.1, 7.10 (percentages of the viewport).

    Examples
    --------
    >>> resolve_length("1in", None), resolve_length("25.4mm", None)
    (96.0, 96.0)
    """
    value, unit = parse_length(text)
    if not unit:
        return value
    if unit in PX_PER_UNIT:
        return value * PX_PER_UNIT[unit]
    if unit == "rem":
        return value * 16.0
    if viewport is None:
        raise BadValue(f"a length in {unit} needs a viewport or a font size")
    if unit == "%":
        return value / 100.0 * viewport.percent_base(axis)
    if unit == "em":
        return value * viewport.font_size
    return value * viewport.font_size * 0.5


def _split_list(text: str) -> list[str]:
    text = text.strip()
    if not text:
        return []
    parts = _LIST_SEP.split(text)
    if any(p == "" for p in parts):
        raise BadValue("a list with an empty item")
    return parts


def parse_number_list(text: str) -> list[float]:
    """Numbers separated by white space and/or commas (SVG 1.1, 4.2: list of numbers).

    Examples
    --------
    >>> parse_number_list("1,2 3 ,4")
    [1.0, 2.0, 3.0, 4.0]
    """
    return [parse_number(p) for p in _split_list(text)]


def parse_length_list(text: str, viewport: Viewport | None, axis: str = "xy") -> list[float]:
    """Lengths separated by white space and/or commas, in user units.

    Examples
    --------
    >>> parse_length_list("1in, 2", None)
    [96.0, 2.0]
    """
    return [resolve_length(p, viewport, axis) for p in _split_list(text)]


def compose(outer, inner):
    """The transform that applies `inner` first, then `outer` (matrix product outer @ inner).

    Examples
    --------
    >>> compose((2.0, 0.0, 0.0, 2.0, 0.0, 0.0), (1.0, 0.0, 0.0, 1.0, 3.0, 4.0))
    (2.0, 0.0, 0.0, 2.0, 6.0, 8.0)
    """
    a1, b1, c1, d1, e1, f1 = outer
    a2, b2, c2, d2, e2, f2 = inner
    return (a1 * a2 + c1 * b2, b1 * a2 + d1 * b2, a1 * c2 + c1 * d2, b1 * c2 + d1 * d2,
            a1 * e2 + c1 * f2 + e1, b1 * e2 + d1 * f2 + f1)


def invert(m):
    """The inverse transform (`BadValue` when it is singular).

    Examples
    --------
    >>> m = (2.0, 0.0, 0.0, 4.0, 2.0, 4.0)
    >>> compose(m, invert(m)) == IDENTITY
    True
    """
    a, b, c, d, e, f = m
    det = a * d - b * c
    if det == 0 or not math.isfinite(det):
        raise BadValue("the transform is singular")
    ia, ib, ic, id_ = d / det, -b / det, -c / det, a / det
    return (ia, ib, ic, id_, -(ia * e + ic * f), -(ib * e + id_ * f))


def is_singular(m) -> bool:
    """Whether the transform squashes the plane onto a line or a point (determinant 0).

    Examples
    --------
    >>> is_singular((1.0, 0.0, 0.0, 0.0, 5.0, 5.0)), is_singular(IDENTITY)
    (True, False)
    """
    return m[0] * m[3] - m[1] * m[2] == 0.0


def apply_affine(m, x: float, y: float) -> tuple[float, float]:
    """The point (x, y) mapped by the transform.

    Examples
    --------
    >>> apply_affine((0.0, 1.0, -1.0, 0.0, 10.0, 0.0), 1.0, 0.0)
    (10.0, 1.0)
    """
    a, b, c, d, e, f = m
    return a * x + c * y + e, b * x + d * y + f


def parse_transform(text: str):
    """A transform list (SVG 1.1, 7.6): matrix, translate, scale, rotate (with an optional
    centre), skewX and skewY, applied right to left, as one 6-tuple.

    Notes
    -----
    translate(tx [ty]) = [1 0 tx; 0 1 ty] (ty = 0); scale(sx [sy]) = diag(sx, sy) (sy = sx);
    rotate(a [cx cy]) = T(cx, cy) R(a) T(-cx, -cy); skewX(a) = [1 tan a; 0 1];
    skewY(a) = [1 0; tan a 1] (SVG 1.1, 7.4 and 7.6).

    Examples
    --------
    >>> parse_transform("translate(10) scale(2, 3)")
    (2.0, 0.0, 0.0, 3.0, 10.0, 0.0)
    >>> [round(v, 12) for v in parse_transform("rotate(90 10 0)")]
    [0.0, 1.0, -1.0, 0.0, 10.0, -10.0]
    """
    pos, out = 0, IDENTITY
    text = text.strip()
    if not text or text == "none":
        return IDENTITY
    while pos < len(text):
        m = _TRANSFORM_ITEM.match(text, pos)
        if not m:
            raise BadValue(f"not a transform list at character {pos + 1}")
        pos = m.end()
        name, args = m.group(1), parse_number_list(m.group(2))
        if len(args) not in _TRANSFORM_ARGS[name]:
            raise BadValue(f"{name}() takes {' or '.join(map(str, _TRANSFORM_ARGS[name]))} "
                           f"numbers, not {len(args)}")
        out = compose(out, _transform_item(name, args))
    if not all(math.isfinite(v) for v in out):
        raise BadValue("the transform is beyond the range of numbers")
    return out


def _transform_item(name: str, args: list[float]):
    if name == "matrix":
        return tuple(args)
    if name == "translate":
        return (1.0, 0.0, 0.0, 1.0, args[0], args[1] if len(args) > 1 else 0.0)
    if name == "scale":
        return (args[0], 0.0, 0.0, args[1] if len(args) > 1 else args[0], 0.0, 0.0)
    if name == "rotate":
        a = math.radians(args[0])
        cos, sin = math.cos(a), math.sin(a)
        rot = (cos, sin, -sin, cos, 0.0, 0.0)
        if len(args) == 3:
            cx, cy = args[1], args[2]
            rot = compose(compose((1.0, 0.0, 0.0, 1.0, cx, cy), rot),
                          (1.0, 0.0, 0.0, 1.0, -cx, -cy))
        return rot
    t = math.tan(math.radians(args[0]))
    return (1.0, 0.0, t, 1.0, 0.0, 0.0) if name == "skewX" else (1.0, t, 0.0, 1.0, 0.0, 0.0)


def parse_viewbox(text: str) -> tuple[float, float, float, float]:
    """viewBox="min-x min-y width height" (SVG 1.1, 7.7); width and height may not be negative.

    Examples
    --------
    >>> parse_viewbox("0,0 210 297")
    (0.0, 0.0, 210.0, 297.0)
    """
    vals = parse_number_list(text)
    if len(vals) != 4:
        raise BadValue("a viewBox is four numbers: min-x min-y width height")
    if vals[2] < 0 or vals[3] < 0:
        raise BadValue("a viewBox may not have a negative width or height")
    return tuple(vals)


def parse_aspect(text: str | None) -> tuple[str, bool]:
    """preserveAspectRatio="[defer] <align> [meet | slice]" (SVG 1.1, 7.8) as (align in lower
    case, slice); the default is ("xmidymid", False).

    Examples
    --------
    >>> parse_aspect("xMinYMax slice"), parse_aspect(None)
    (('xminymax', True), ('xmidymid', False))
    """
    if text is None:
        return "xmidymid", False
    words = text.split()
    if words and words[0] == "defer":
        words = words[1:]
    if not words or words[0].lower() not in _ALIGNS or len(words) > 2 \
            or (len(words) == 2 and words[1] not in ("meet", "slice")):
        raise BadValue("not an alignment (none, xMidYMid ...) with an optional meet or slice")
    return words[0].lower(), len(words) == 2 and words[1] == "slice"


def viewbox_transform(viewbox, viewport_rect, aspect=("xmidymid", False)):
    """The transform from viewBox coordinates into the viewport rectangle (x, y, w, h).

    Notes
    -----
    SVG 2, 8.2 (equivalent transform of a viewBox): sx = w / vb_w, sy = h / vb_h; unless the
    alignment is none, both become min(sx, sy) (meet) or max(sx, sy) (slice); then
    tx = x - vb_x sx, ty = y - vb_y sy, plus (w - vb_w sx) / 2 for xMid or the whole of it for
    xMax (likewise y).

    Examples
    --------
    >>> viewbox_transform((0, 0, 100, 50), (0, 0, 200, 200))
    (2.0, 0.0, 0.0, 2.0, 0.0, 50.0)
    """
    vx, vy, vw, vh = viewbox
    x, y, w, h = viewport_rect
    sx, sy = w / vw, h / vh
    align, slice_ = aspect
    if align != "none":
        sx = sy = max(sx, sy) if slice_ else min(sx, sy)
    tx, ty = x - vx * sx, y - vy * sy
    if align != "none":
        if "xmid" in align:
            tx += (w - vw * sx) / 2.0
        elif "xmax" in align:
            tx += w - vw * sx
        if "ymid" in align:
            ty += (h - vh * sy) / 2.0
        elif "ymax" in align:
            ty += h - vh * sy
    return (sx, 0.0, 0.0, sy, tx, ty)

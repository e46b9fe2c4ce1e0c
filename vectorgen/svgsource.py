"""SVG source: an SVG file to Strokes in screen millimetres.

svgpathtools turns every path, line, polyline, polygon, rect (rounded too), circle and ellipse
into path segments with all nested group transforms applied; geometry.py flattens them. Each
continuous sub-path becomes one stroke (an outline, whether the element is filled or not).

Placement (`fit`):
  "page"     the page (viewBox, else width x height) is fitted into the usable area, aspect kept,
             centred; with no page size given, the drawing's own bounds are used
  "content"  the drawing's own bounds are fitted
  "off"      one SVG user unit is one millimetre; the page centre (or the drawing's centre when
             there is no page) sits at the screen centre
SVG has +y down; the screen has +y up, so y is flipped in every mode.
"""

from __future__ import annotations

import os
import re
import warnings

import numpy as np

from .errors import InputError, VectorgenWarning
from .files import read_bytes
from .flatten import flatten_table, segment_table
from .screen import fit_transform
from .strokes import Strokes, check_finite, clean

__all__ = ["FIT_MODES", "page_box", "parse_length", "read_svg_tree", "svg_to_strokes"]

SVG_NS = "http://www.w3.org/2000/svg"
MAX_SVG_BYTES = 64 * 1024 * 1024
FIT_MODES = ("page", "content", "off")
UNDRAWN = ("use", "image")   # elements svgpathtools does not turn into paths (besides <text>)

# CSS absolute units in SVG user units (px), per the CSS Values spec: 1in = 96px = 2.54cm.
UNIT_PX = {"": 1.0, "px": 1.0, "in": 96.0, "cm": 96.0 / 2.54, "mm": 96.0 / 25.4,
           "q": 96.0 / 101.6, "pt": 96.0 / 72.0, "pc": 16.0}
_LENGTH = re.compile(r"^\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*([a-zA-Z%]*)\s*$")


def parse_length(text: str | None) -> float | None:
    """An SVG length in user units (px); None when absent or relative (%)."""
    if text is None:
        return None
    m = _LENGTH.match(text)
    if not m:
        return None
    unit = m.group(2).lower()
    if unit not in UNIT_PX:
        return None
    return float(m.group(1)) * UNIT_PX[unit]


def read_svg_tree(path: str):
    """Parse an SVG file safely; returns the root element (tags in the SVG namespace)."""
    import xml.etree.ElementTree as ET

    data = read_bytes(path, "SVG file", MAX_SVG_BYTES)
    if b"<!ENTITY" in data or b"<!entity" in data:
        raise InputError(f"{path}: refusing an SVG with XML entity declarations")
    try:
        root = ET.fromstring(data)
    except ET.ParseError as exc:
        raise InputError(f"{path}: not well-formed XML ({exc})") from None
    if _local(root.tag) != "svg":
        raise InputError(f"{path}: not an SVG file (root element is <{_local(root.tag)}>)")
    if not root.tag.startswith("{"):
        # No xmlns: put every element into the SVG namespace so svgpathtools finds them.
        for el in root.iter():
            if isinstance(el.tag, str) and not el.tag.startswith("{"):
                el.tag = f"{{{SVG_NS}}}{el.tag}"
    return root


def _local(tag) -> str:
    return tag.rsplit("}", 1)[-1] if isinstance(tag, str) else ""


def page_box(root) -> tuple[float, float, float, float] | None:
    """The page in user units (x0, y0, x1, y1), from viewBox or width/height; None if absent."""
    vb = root.get("viewBox")
    if vb:
        try:
            x, y, w, h = (float(v) for v in vb.replace(",", " ").split())
        except ValueError:
            raise InputError(f"SVG viewBox is not four numbers: {vb!r}") from None
        if not all(np.isfinite([x, y, w, h])) or w <= 0 or h <= 0:
            raise InputError(f"SVG viewBox must have a positive width and height: {vb!r}")
        return x, y, x + w, y + h
    w, h = parse_length(root.get("width")), parse_length(root.get("height"))
    if w and h and w > 0 and h > 0 and np.isfinite(w) and np.isfinite(h):
        return 0.0, 0.0, w, h
    return None


def _element_intensity(el) -> float:
    value = 1.0
    style = {}
    for part in (el.get("style") or "").split(";"):
        if ":" in part:
            k, v = part.split(":", 1)
            style[k.strip()] = v.strip()
    for key in ("opacity", "stroke-opacity"):
        raw = style.get(key, el.get(key))
        if raw is not None:
            try:
                value *= min(max(float(raw), 0.0), 1.0)
            except ValueError:
                pass
    return value


def _element_label(el, index: int) -> str:
    ident = el.get("id")
    tag = _local(el.tag)
    return f"<{tag} id={ident!r}>" if ident else f"<{tag}> #{index + 1}"


def svg_to_strokes(path: str, screen, fit: str = "page", tolerance_mm: float = 0.02) -> Strokes:
    """Read an SVG and return its strokes in screen mm.

    Parameters
    ----------
    path : str
    screen : Screen
        The usable area the page (or the drawing) is fitted into.
    fit : {"page", "content", "off"}
    tolerance_mm : float
        Chord tolerance of the flattened curves, on the screen.

    Returns
    -------
    Strokes

    Raises
    ------
    InputError
        The file cannot be read, is not SVG, or has nothing drawable.

    Warns
    -----
    VectorgenWarning
        For elements that are not drawn (<text>, <use>, <image>).
    """
    from svgpathtools.document import flattened_paths

    if fit not in FIT_MODES:
        raise InputError(f"unknown fit mode {fit!r}: use one of {', '.join(FIT_MODES)}")
    root = read_svg_tree(path)
    _rect_radii(root)
    _check_path_data(root, path)
    texts = sum(1 for el in root.iter() if _local(el.tag) == "text")
    others = sorted({_local(el.tag) for el in root.iter() if _local(el.tag) in UNDRAWN})
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            paths = flattened_paths(root)
    except (ValueError, TypeError, IndexError, KeyError, ZeroDivisionError, OverflowError) as exc:
        raise InputError(f"{path}: cannot read the SVG's shapes ({exc})") from None

    page = page_box(root)
    runs, inten, labels = [], [], []
    for index, p in enumerate(paths):
        el = getattr(p, "element", None)
        if el is not None and _hidden(el):
            continue
        p = _exact_arcs(p, el)
        intensity = _element_intensity(el) if el is not None else 1.0
        label = _element_label(el, index) if el is not None else f"path {index + 1}"
        # continuous sub-paths (as Path.continuous_subpaths splits them), as segment lists
        segs = list(p)
        begin = 0
        for i in range(len(segs)):
            if i == len(segs) - 1 or segs[i].end != segs[i + 1].start:
                runs.append(segs[begin:i + 1])
                inten.append(intensity)
                labels.append(label)
                begin = i + 1
    if not runs:
        hint = (f" ({texts} <text> element(s) found: convert text to paths, or draw it as text)"
                if texts else "")
        raise InputError(f"{path}: nothing drawable in this SVG{hint}")
    # every segment read out of svgpathtools once, for the bounds and for each flattening
    table = segment_table(runs)

    # Bounds from segment end and control points (a Bezier lies inside its control hull; an
    # arc's own bbox) give a first scale; the flattened drawing gives the exact bounds.
    ctrl = table.control_points()
    if table.arcs:
        ctrl = np.concatenate([ctrl, np.array([c for seg in table.arcs for c in _seg_pts(seg)],
                                              dtype=complex)])
    if not np.all(np.isfinite(ctrl)) or np.abs(ctrl).max() > 1e12:
        raise InputError(f"{path}: coordinates are not finite or are enormous")
    hull = (ctrl.real.min(), ctrl.imag.min(), ctrl.real.max(), ctrl.imag.max())

    def placement(content_box):
        box = page if (fit in ("page", "off") and page is not None) else content_box
        if fit == "off":
            cx, cy = (box[0] + box[2]) / 2.0, (box[1] + box[3]) / 2.0
            m = np.array([[1.0, 0.0], [0.0, -1.0]])
            return m, -m @ np.array([cx, cy])
        return fit_transform(box, screen, flip_y=True)

    inten = np.array(inten, dtype=float)

    def flatten(scale):
        pts, offsets = flatten_table(table, tolerance_mm / scale)
        out = clean(Strokes(pts, offsets, inten.copy(), list(labels)))
        check_finite(out, path)
        return out

    matrix, offset = placement(hull)
    scale = abs(matrix[0, 0]) or 1.0
    strokes = flatten(scale)
    matrix, offset = placement(strokes.bounds())
    if abs(matrix[0, 0]) > scale * (1 + 1e-9):      # tighter bounds, larger scale: re-flatten
        strokes = flatten(abs(matrix[0, 0]))
    strokes = strokes.transformed(matrix, offset)
    if texts:
        warnings.warn(f"{texts} <text> element(s) in {os.path.basename(path)} were skipped: "
                      "convert text to paths, or use a text source", VectorgenWarning,
                      stacklevel=2)
    if others:
        warnings.warn(f"{os.path.basename(path)}: " + ", ".join(f"<{t}>" for t in others)
                      + " element(s) are not drawn: convert them to paths", VectorgenWarning,
                      stacklevel=2)
    return strokes


# Characters the SVG path grammar allows (SVG 1.1, 8.3.9): command letters, numbers, separators.
_PATH_BAD_CHAR = re.compile(r"[^MmZzLlHhVvCcSsQqTtAa0-9eE+\-.,\s]")


def _check_path_data(root, path: str) -> None:
    """Refuse path data outside the SVG grammar (e.g. an unknown command letter), naming the
    element: svgpathtools skips an unknown command and draws on, a silently different drawing."""
    for index, el in enumerate(el for el in root.iter() if _local(el.tag) == "path"):
        d = el.get("d") or ""
        m = _PATH_BAD_CHAR.search(d)
        if m:
            raise InputError(f"{path}: {_element_label(el, index)} has {m.group()!r} at "
                                 f"character {m.start() + 1} of its path data, which SVG path "
                                 f"syntax does not allow")


def _rect_radii(root) -> None:
    """Corner radii of <rect> as the SVG spec resolves them (SVG 1.1, 9.2): a missing rx or ry
    takes the other's value, then rx is clamped to half the width and ry to half the height.
    svgpathtools uses the raw values, which draws a rounded rect wider radii than its sides."""
    for el in root.iter():
        if _local(el.tag) != "rect" or (el.get("rx") is None and el.get("ry") is None):
            continue
        try:
            w, h = float(el.get("width", 0)), float(el.get("height", 0))
            rx = float(el.get("rx")) if el.get("rx") is not None else None
            ry = float(el.get("ry")) if el.get("ry") is not None else None
        except ValueError:
            continue        # left for svgpathtools to refuse
        rx = ry if rx is None else rx
        ry = rx if ry is None else ry
        rx, ry = min(abs(rx), abs(w) / 2.0), min(abs(ry), abs(h) / 2.0)
        if rx > 0 and ry > 0:
            el.set("rx", repr(rx))
            el.set("ry", repr(ry))
        else:               # a zero radius on either axis: square corners
            el.attrib.pop("rx", None)
            el.attrib.pop("ry", None)


def _exact_arcs(p, el):
    """The path with its elliptical arcs mapped exactly through the element's transform.

    svgpathtools maps an arc's end points exactly but its ellipse only for rotation and uniform
    scale: under a non-uniform scale or a skew a rotated ellipse comes out with the wrong axes,
    and a mirroring transform can keep the wrong sweep. The image of the ellipse
    c + R(phi) diag(rx, ry) (cos t, sin t) under p -> A p + b has as semi-axes the singular
    values of K = A R(phi) diag(rx, ry) and its major axis along K's first left singular
    vector; the sweep turns over when det A < 0; the large-arc flag is kept."""
    from svgpathtools import Arc

    tf = getattr(p, "transform", None)
    if tf is None or el is None or not any(isinstance(seg, Arc) for seg in p):
        return p
    tf = np.asarray(tf, dtype=float)
    a = tf[:2, :2]
    if a[0, 0] == 1.0 and a[1, 1] == 1.0 and a[0, 1] == 0.0 and a[1, 0] == 0.0:
        return p            # a pure translation maps arcs exactly
    from svgpathtools import Line, parse_path
    from svgpathtools.document import CONVERSIONS
    from svgpathtools.path import transform, transform_segments_together

    convert = CONVERSIONS.get(_local(el.tag))
    if convert is None:
        return p

    def mapped(seg):
        if not isinstance(seg, Arc):
            return transform(seg, tf)
        ends = transform(Line(seg.start, seg.end), tf)   # same arithmetic as the other segments
        phi = np.radians(seg.rotation)
        rot = np.array([[np.cos(phi), -np.sin(phi)], [np.sin(phi), np.cos(phi)]])
        u, sv, _vt = np.linalg.svd(a @ rot @ np.diag([seg.radius.real, seg.radius.imag]))
        if sv[1] <= 1e-12 * max(sv[0], 1e-300):
            return Line(ends.start, ends.end)             # squashed flat
        sweep = seg.sweep if np.linalg.det(a) > 0 else not seg.sweep
        return Arc(ends.start, complex(sv[0], sv[1]), float(np.degrees(np.arctan2(u[1, 0], u[0, 0]))),
                   seg.large_arc, sweep, ends.end)

    out = transform_segments_together(parse_path(convert(el)), mapped)
    out.element, out.transform = el, p.transform
    return out


def _seg_pts(seg):
    """Points whose bounding box holds the segment: a Bezier's control points; an arc's end
    points and the extremes of its ellipse in x and y that lie on the arc (scalar math: much
    cheaper than svgpathtools' Arc.bbox, which dominated reading arc-heavy drawings)."""
    if hasattr(seg, "bpoints"):
        return list(seg.bpoints())
    import math

    phi = math.radians(seg.rotation)
    c, s = math.cos(phi), math.sin(phi)
    rx, ry = seg.radius.real, seg.radius.imag
    t0, d = math.radians(seg.theta), math.radians(seg.delta)
    out = [seg.start, seg.end]
    for a in (math.atan2(-ry * s, rx * c), math.atan2(ry * c, rx * s)):   # dx = 0, dy = 0
        for t in (a, a + math.pi):
            swept = (t - t0) % (2 * math.pi) if d >= 0 else (t0 - t) % (2 * math.pi)
            if swept <= abs(d):
                out.append(seg.center + complex(rx * c * math.cos(t) - ry * s * math.sin(t),
                                                rx * s * math.cos(t) + ry * c * math.sin(t)))
    return out


def _hidden(el) -> bool:
    style = (el.get("style") or "").replace(" ", "")
    return el.get("display") == "none" or "display:none" in style \
        or el.get("visibility") == "hidden" or "visibility:hidden" in style

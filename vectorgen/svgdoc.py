"""The resolved document: one walk over an SVG that hands the geometry stage plain shapes.

The walk applies what SVG and CSS say about an element before any geometry is made, so that
nothing after it knows about CSS, ``<use>`` or viewports:

* the cascade (`vectorgen.svgcss`) and inheritance along the rendered tree (a ``<use>``
  instance inherits from its ``<use>``);
* ``display: none`` removes an element and its subtree; ``visibility`` inherits and a child
  may set it back to visible; ``opacity`` multiplies down the tree and, with
  ``stroke-opacity`` (or ``fill-opacity`` for a shape that is only filled), becomes the
  stroke's brightness. A shape drawn by neither stroke nor fill is invisible; a filled shape
  without a stroke still gives its outline (a vector display draws outlines);
* ``<use>`` (``href`` or ``xlink:href``, x/y, nested, guarded against cycles and against
  instance explosions), ``<symbol>`` and nested ``<svg>`` viewports (x, y, width, height,
  viewBox, preserveAspectRatio, clipped to the viewport unless ``overflow`` is visible);
* lengths in every CSS absolute unit, % of the nearest viewport, em and ex of the font size;
* dashes, clip paths and masks as data for the geometry stage; ``<text>`` as positioned runs.

The result is a `Document`: `Shape` records (segments in the element's user units, the
transform to the root's user space, brightness, dash pattern, clip regions, labels) and
`TextBlock` records, plus the page and the root's physical size.

A value that cannot be read is an `InputError` naming the file, the element (tag, id, line)
and the attribute or property. What SVG defines as ignorable (an invalid transform, a negative
radius) is ignored as the specification says, with a warning naming the element. Kinds of
content that are not drawn (images, filters, markers ...) are reported once each.
"""

from __future__ import annotations

import os
import re
import warnings
from dataclasses import dataclass, field

import numpy as np

from .errors import InputError, VectorgenWarning
from .files import read_bytes
from .pathdata import PathTable, read_path_list
from .svgcss import INHERITED, PROPERTIES, Cascade, Declared
from .svgpathdata import PathData, ellipse_path, line_path, points_path, rect_path
from .svgvalues import (FONT_SIZE_KEYWORDS, IDENTITY, BadValue, Viewport, compose, is_singular,
                        parse_aspect, parse_length, parse_length_list, parse_number,
                        parse_number_list, parse_transform, parse_viewbox, resolve_length,
                        viewbox_transform)
from .svgxml import (SVG_NS, XLINK_NS, XML_NS, SvgTree, element_label, element_name,
                     parse_svg_bytes)

__all__ = ["BoxRef", "ClipItem", "ClipNode", "Dash", "Document", "MAX_INSTANCES",
           "MAX_SVG_BYTES", "PathRef", "Shape", "TextBlock", "TextRun", "read_document",
           "resolve"]

MAX_SVG_BYTES = 64 * 1024 * 1024
MAX_INSTANCES = 1_000_000       # elements drawn, <use> copies counted: a guard against bombs
MAX_DEPTH = 250                 # nesting of groups, viewports and <use>
DEFAULT_VIEWPORT_PX = (300.0, 150.0)    # CSS 2.1, 10.3.2: a replaced element of unknown size

_SVG = f"{{{SVG_NS}}}"
_XLINK_HREF = f"{{{XLINK_NS}}}href"
_XML_SPACE = f"{{{XML_NS}}}space"
SHAPE_TAGS = frozenset({"path", "rect", "circle", "ellipse", "line", "polyline", "polygon"})
# Never drawn where they stand: definitions, referenced resources, metadata.
NEVER_DRAWN = frozenset({
    "defs", "symbol", "clipPath", "mask", "marker", "pattern", "linearGradient",
    "radialGradient", "meshgradient", "stop", "style", "title", "desc", "metadata", "script",
    "filter", "font", "font-face", "glyph", "missing-glyph", "hkern", "vkern", "cursor", "view",
    "color-profile", "solidcolor", "hatch"})
NOT_DRAWN = frozenset({"image", "foreignObject", "video", "audio", "iframe", "canvas"})
ANIMATION = frozenset({"animate", "set", "animateMotion", "animateTransform", "animateColor",
                       "discard"})
# Every property's initial value, one shared record each (records are read, never changed).
_INITIAL = {prop: Declared(initial, "initial value") for prop, (_inh, initial) in
            PROPERTIES.items()}
_URL = re.compile(r"""^url\(\s*(['"]?)([^'")]*)\1\s*\)(?:\s+(.*))?$""", re.S)


class PathRef:
    """The segments of a ``<path>`` element: path string `index` of the document's path
    table (`vectorgen.pathdata.PathTable`, every ``d`` of the document read in one pass),
    which has `segments` segments."""

    __slots__ = ("table", "index", "segments")

    def __init__(self, table: PathTable, index: int, segments: int):
        self.table, self.index, self.segments = table, index, segments


@dataclass(eq=False)
class Dash:
    """A dash pattern in the shape's own user units: lengths alternately drawn and skipped
    (an even number of them), the offset into the pattern at the start of each sub-path, and
    the author's ``pathLength`` (None: the real length) the lengths are measured against."""

    pattern: tuple
    offset: float
    path_length: float | None = None


@dataclass(eq=False)
class BoxRef:
    """The element a clip or mask in ``objectBoundingBox`` units belongs to: its transform to
    the root's user space, and the range of shapes and text blocks drawn under it (whose
    bounding box, in its user space, the units refer to)."""

    matrix: tuple
    first_shape: int = 0
    last_shape: int = 0
    first_text: int = 0
    last_text: int = 0


@dataclass(eq=False)
class ClipItem:
    """One shape of a clip region: its area (by `rule`, "nonzero" or "evenodd"), mapped by
    `matrix` into the root's user space, or into the box's unit square when the node has a
    box; restricted by `clips` (a clip-path on the shape itself)."""

    path: PathData | PathRef
    matrix: tuple
    rule: str
    clips: tuple = ()


@dataclass(eq=False)
class ClipNode:
    """A clip region: the union of its items' areas, intersected with every node in
    `within`. `box` is set when the items are in ``objectBoundingBox`` units."""

    items: list
    box: BoxRef | None
    within: tuple
    name: str


@dataclass(eq=False)
class Shape:
    """A drawable shape: segments in its own user units and everything needed to draw it."""

    path: PathData | PathRef
    matrix: tuple               # the shape's user space -> the root's user space
    intensity: float            # 0 < intensity <= 1
    dash: Dash | None
    dots: bool                  # zero-length dashes and sub-paths are drawn as dots
    clips: tuple                # ClipNodes, all of which the strokes are cut to
    label: str                  # for the strokes: "<rect id='frame'>"
    element: object = field(repr=False)     # the element it comes from, and the source
    lines: dict = field(repr=False)         # lines, for messages (`name`)
    order: int                  # place in the document

    @property
    def name(self) -> str:
        """For messages: "<rect id='frame'> on line 4"."""
        return element_name(self.element, self.lines)


@dataclass(eq=False)
class TextRun:
    """Characters set in one style from one position. `x`, `y` are absolute positions given
    for the run's first character (None: carry on from the previous run); `dx`, `dy` shifts
    before it; `chunk` says an absolute position starts a new anchored chunk here."""

    text: str
    font_size: float
    anchor: str
    intensity: float
    visible: bool
    label: str
    x: float | None = None
    y: float | None = None
    dx: float = 0.0
    dy: float = 0.0
    chunk: bool = False


@dataclass(eq=False)
class TextBlock:
    """A ``<text>`` element: its runs in the element's user units."""

    runs: list
    matrix: tuple
    clips: tuple
    label: str
    name: str
    order: int


@dataclass(eq=False)
class Document:
    """The resolved document.

    Attributes
    ----------
    shapes, texts : list
        `Shape` and `TextBlock` records in document order (`order` interleaves them).
    page : (x0, y0, x1, y1) or None
        The page in the root's user units: its viewBox, else its width and height.
    user_to_px : 6-tuple or None
        The root's user units to CSS px of the page (its viewBox transform), when the root
        has a width and height in absolute units; None otherwise.
    viewport_px : (width, height) or None
        The page's physical size in px, when known.
    name : str
        The file, for messages.
    """

    shapes: list
    texts: list
    page: tuple | None
    user_to_px: tuple | None
    viewport_px: tuple | None
    name: str
    size_note: str = ""
    skipped: dict = field(default_factory=dict)


def read_document(path) -> Document:
    """Read, parse and resolve an SVG file.

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    Document

    Raises
    ------
    InputError
        The file cannot be read or parsed, or a value or reference in it cannot be used.

    Examples
    --------
    >>> import os, tempfile
    >>> name = os.path.join(tempfile.mkdtemp(), "a.svg")
    >>> _ = open(name, "w").write('<svg xmlns="http://www.w3.org/2000/svg" width="2in" '
    ...     'height="1in"><use href="#c" x="10"/><defs><circle id="c" r="5"/></defs></svg>')
    >>> doc = read_document(name)
    >>> doc.shapes[0].label, doc.shapes[0].matrix[4], doc.viewport_px
    ("<circle id='c'> in <use>", 10.0, (192.0, 96.0))
    """
    path = os.fspath(path)
    data = read_bytes(path, "SVG file", MAX_SVG_BYTES)
    return resolve(parse_svg_bytes(data, path))


def resolve(tree: SvgTree) -> Document:
    """The resolved document of a parsed SVG (see the module docstring).

    Examples
    --------
    >>> from vectorgen.svgxml import parse_svg_bytes
    >>> svg = (b'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 100 80">'
    ...        b'<style>.dim { stroke-opacity: .5 }</style>'
    ...        b'<g style="display:none"><line x2="5"/></g>'
    ...        b'<g opacity=".5"><rect class="dim" width="1cm" height="10"/></g></svg>')
    >>> doc = resolve(parse_svg_bytes(svg, "a.svg"))
    >>> [(s.label, s.intensity) for s in doc.shapes], doc.page
    ([('<rect> #1', 0.25)], (0.0, 0.0, 100.0, 80.0))
    """
    return _Walker(tree).run()


class _Ctx:
    """What an element's children inherit in the rendered tree."""

    __slots__ = ("matrix", "opacity", "viewport", "clips", "inherited", "chain", "depth", "via")

    def __init__(self, matrix, opacity, viewport, clips, inherited, chain, depth, via):
        self.matrix, self.opacity, self.viewport, self.clips = matrix, opacity, viewport, clips
        self.inherited, self.chain, self.depth, self.via = inherited, chain, depth, via

    def derive(self, **kw) -> "_Ctx":
        new = _Ctx(self.matrix, self.opacity, self.viewport, self.clips, self.inherited,
                   self.chain, self.depth, self.via)
        for k, v in kw.items():
            setattr(new, k, v)
        return new


class _Walker:
    def __init__(self, tree: SvgTree):
        self.tree = tree
        self.file = tree.name
        self.lines = tree.lines
        self.root = tree.root
        self.ids: dict = {}
        sheets = []
        mentioned: set = set()          # dash and marker properties anywhere in the file?
        path_tag, use_tag = f"{_SVG}path", f"{_SVG}use"
        self._path_index: dict = {}     # <path> element -> its place among the path strings
        path_data: list = []
        self._elements, self._uses = 0, False
        for el in self.root.iter():
            self._elements += 1
            if el.tag == use_tag:
                self._uses = True
            ident = el.get("id")
            if ident is not None and ident not in self.ids:
                self.ids[ident] = el
            if el.tag == path_tag:
                d = el.get("d")
                if d is not None:
                    self._path_index[el] = len(path_data)
                    path_data.append(d)
            if el.tag == f"{_SVG}style" and (el.get("type") or "text/css").strip() in (
                    "text/css", ""):
                sheets.append("".join(el.itertext()))
            for text in (el.get("style") or "", *el.attrib):
                if "dash" in text:
                    mentioned.add("dash")
                if "marker" in text:
                    mentioned.add("marker")
        for text in sheets:
            mentioned.update(w for w in ("dash", "marker") if w in text)
        self._dashes, self._markers = "dash" in mentioned, "marker" in mentioned
        self.warned: set = set()
        self._fractions: dict = {}
        self.cascade = Cascade(self.root, sheets, self._warn_once)
        self._declared_cache: dict = {}
        self._parents: dict | None = None
        self._clip_cache: dict = {}
        self._resolving: set = set()    # clip paths and masks being read (cycle guard)
        self.shapes: list[Shape] = []
        self.texts: list[TextBlock] = []
        self.order = 0
        self.instances = 0
        self.skipped: dict = {}
        self.families: set = set()
        self._path_data = path_data
        self._path_table: PathTable | None = None
        self._path_faults: dict = {}
        self._path_segments: list = []

    # --- messages ------------------------------------------------------------------------

    def _name(self, el) -> str:
        return element_name(el, self.lines)

    def _warn(self, message: str) -> None:
        warnings.warn(f"{os.path.basename(self.file)}: {message}", VectorgenWarning,
                      stacklevel=4)

    def _warn_once(self, message: str, key=None) -> None:
        key = message if key is None else key
        if key not in self.warned:
            self.warned.add(key)
            self._warn(message)

    def _skip(self, tag: str, why: str) -> None:
        self.skipped[tag] = self.skipped.get(tag, 0) + 1
        self._warn_once(f"<{tag}> elements are not drawn ({why})", key=("skip", tag))

    def _bad(self, el, attr: str, raw: str, exc, origin: str = "") -> InputError:
        where = f" (from the {origin})" if origin and not origin.startswith("attribute") else ""
        return InputError(f"{self.file}: {self._name(el)} has {attr}={raw!r}{where}: {exc}")

    # --- values --------------------------------------------------------------------------

    def _declared(self, el) -> dict:
        d = self._declared_cache.get(el)
        if d is None:
            d = self._declared_cache[el] = self.cascade.declared(el)
        return d

    @staticmethod
    def _value(decl: dict, ctx: _Ctx, prop: str) -> Declared:
        own = decl.get(prop)
        if own is not None:
            kw = own.value.lower()
            if kw == "initial" or (kw in ("unset", "revert", "revert-layer")
                                   and prop not in INHERITED):
                return _INITIAL[prop]
            if kw not in ("inherit", "unset", "revert", "revert-layer"):
                return own
        if prop in INHERITED:
            got = ctx.inherited.get(prop)
            if got is not None:
                return got
        return _INITIAL[prop]

    def _keyword(self, el, decl, ctx, prop: str, allowed: tuple) -> str:
        dec = self._value(decl, ctx, prop)
        v = dec.value.strip().lower()
        if v not in allowed:
            raise self._bad(el, prop, dec.value, f"use one of {', '.join(allowed)}", dec.origin)
        return v

    def _fraction(self, el, decl, ctx, prop: str) -> float:
        """An opacity: a number or a percentage, clamped to 0..1 (CSS Color 4, 4.2)."""
        dec = self._value(decl, ctx, prop)
        got = self._fractions.get(dec.value)
        if got is not None:
            return got
        try:
            value, unit = parse_length(dec.value)
            if unit not in ("", "%"):
                raise BadValue("an opacity is a number or a percentage")
        except BadValue as exc:
            raise self._bad(el, prop, dec.value, exc, dec.origin) from None
        value = value / 100.0 if unit == "%" else value
        got = self._fractions[dec.value] = min(max(value, 0.0), 1.0)
        return got

    def _length(self, el, attr: str, vp: Viewport, axis: str, default=None):
        raw = el.get(attr)
        if raw is None or (default is not None and raw.strip() == "auto"):
            return default
        try:
            return resolve_length(raw, vp, axis)
        except BadValue as exc:
            raise self._bad(el, attr, raw, exc) from None

    def _painted(self, decl, ctx, prop: str) -> bool:
        v = self._value(decl, ctx, prop).value.strip().lower()
        return v not in ("none", "transparent")

    def _transform(self, el):
        raw = el.get("transform")
        if raw is None:
            return None
        try:
            t = parse_transform(raw)
        except BadValue as exc:
            # SVG 2, 6.8 (and CSS Transforms 1): an invalid presentation attribute is
            # ignored, as if it were not there.
            self._warn(f"{self._name(el)} has transform={raw!r}: {exc}; drawn without it, as "
                       "SVG ignores an invalid transform")
            return None
        return None if t == IDENTITY else t

    def _font_size(self, el, dec: Declared, parent_px: float) -> float:
        v = dec.value.strip().lower()
        if v in FONT_SIZE_KEYWORDS:
            return FONT_SIZE_KEYWORDS[v]
        if v == "larger":
            return parent_px * 1.2          # CSS Fonts 3, 3.5: a ratio of about 1.2
        if v == "smaller":
            return parent_px / 1.2
        try:
            value, unit = parse_length(v)
        except BadValue as exc:
            raise self._bad(el, "font-size", dec.value, exc, dec.origin) from None
        if value < 0:
            self._warn(f"{self._name(el)} has font-size={dec.value!r}: a negative font size is "
                       "invalid and is ignored (CSS Fonts 3, 3.5)")
            return parent_px
        if unit == "em":
            return value * parent_px
        if unit == "ex":
            return value * parent_px * 0.5
        if unit == "%":
            return value / 100.0 * parent_px
        return resolve_length(v, None)

    def _url_target(self, el, prop: str, dec: Declared):
        """The element a ``url(#id)`` value refers to (None for none)."""
        v = dec.value.strip()
        if v.lower() == "none":
            return None
        m = _URL.match(v)
        if not m:
            raise self._bad(el, prop, dec.value, "not url(#id) or none", dec.origin)
        return self._ref(el, prop, dec.value, m.group(2).strip(), dec.origin)

    def _ref(self, el, attr: str, raw: str, ref: str, origin: str = ""):
        if not ref.startswith("#"):
            raise self._bad(el, attr, raw, "refers to another file: only references inside "
                            "the document are followed", origin)
        target = self.ids.get(ref[1:])
        if target is None:
            raise self._bad(el, attr, raw, f"there is no element with id {ref[1:]!r} in the "
                            "document", origin)
        return target

    def _parent_map(self) -> dict:
        if self._parents is None:
            self._parents = {child: parent for parent in self.root.iter() for child in parent}
        return self._parents

    # --- contexts ------------------------------------------------------------------------

    def _inherit(self, el, decl, ctx: _Ctx) -> tuple[dict, Viewport]:
        inherited, vp = ctx.inherited, ctx.viewport
        own = [(k, v) for k, v in decl.items() if k in INHERITED]
        if own:
            inherited = dict(inherited)
            for k, v in own:
                kw = v.value.strip().lower()
                if kw in ("inherit", "unset", "revert", "revert-layer"):
                    continue
                if kw == "initial":
                    inherited.pop(k, None)
                    if k == "font-size":
                        vp = vp.with_font(16.0)
                    continue
                inherited[k] = v
                if k == "font-size":
                    vp = vp.with_font(self._font_size(el, v, vp.font_size))
                elif k == "font-family":
                    self.families.add(v.value.strip())
        return inherited, vp

    def _element_ctx(self, el, decl, ctx: _Ctx, box_holder: list,
                     own_transform: bool = True) -> _Ctx | None:
        """The context of `el` itself: its transform, opacity, clips and inherited values.
        None when it draws nothing (opacity 0)."""
        if ctx.depth >= MAX_DEPTH:
            raise InputError(f"{self.file}: {self._name(el)} is nested more than {MAX_DEPTH} "
                             "levels deep")
        self.instances += 1
        if self.instances > MAX_INSTANCES:
            raise InputError(f"{self.file}: more than {MAX_INSTANCES} elements to draw, <use> "
                             f"copies counted (at {self._name(el)})")
        inherited, vp = self._inherit(el, decl, ctx)
        t = self._transform(el) if own_transform else None
        matrix = ctx.matrix if t is None else compose(ctx.matrix, t)
        opacity = ctx.opacity
        if "opacity" in decl:
            opacity *= self._fraction(el, decl, ctx, "opacity")
        if opacity <= 0.0:
            return None
        c = _Ctx(matrix, opacity, vp, ctx.clips, inherited, ctx.chain, ctx.depth + 1, ctx.via)
        clips = ctx.clips
        for prop in ("clip-path", "mask"):
            dec = decl.get(prop)
            if dec is None or dec.value.strip().lower() in ("none", "initial", "unset",
                                                             "inherit"):
                continue
            clips = clips + self._clip_nodes(el, prop, dec, matrix, None, c, box_holder)
        c.clips = clips
        if "filter" in decl and decl["filter"].value.strip().lower() != "none":
            self._warn_once("filter effects are not drawn: the elements are drawn without "
                            "them", key="filter")
        return c

    def _doc_ctx(self, el) -> _Ctx:
        """The inherited context of an element from its ancestors in the document (what a
        <clipPath> or <mask> inherits: SVG 1.1, 14.3.5)."""
        chain = []
        parents = self._parent_map()
        p = parents.get(el)
        while p is not None:
            chain.append(p)
            p = parents.get(p)
        ctx = self._root_ctx
        for anc in reversed(chain):
            inherited, vp = self._inherit(anc, self._declared(anc), ctx)
            ctx = ctx.derive(inherited=inherited, viewport=vp)
        return ctx

    # --- the walk ------------------------------------------------------------------------

    def _expanded_size(self) -> int:
        """How many elements the walk would visit, <use> copies counted, worked out without
        walking (each element's count once, depth first): a few kilobytes of nested <use>
        can ask for billions of copies, which are refused before any is made. A reference
        back into its own chain (a cycle, refused by the walk) counts nothing here."""
        if not self._uses:
            return self._elements       # no copies: every element once
        limit = MAX_INSTANCES + 1
        use_tag = f"{_SVG}use"

        def deps(el) -> list:
            out = list(el)
            if el.tag == use_tag:
                raw = (el.get("href") or el.get(_XLINK_HREF) or "").strip()
                target = self.ids.get(raw[1:]) if raw.startswith("#") else None
                if target is not None:
                    out.append(target)
            return out

        size: dict = {}
        state = {self.root: 1}
        first = deps(self.root)
        stack = [(self.root, first, iter(first))]
        while stack:
            el, ds, it = stack[-1]
            for d in it:
                if d not in state:
                    state[d] = 1
                    dd = deps(d)
                    stack.append((d, dd, iter(dd)))
                    break
            else:
                stack.pop()
                size[el] = min(1 + sum(size.get(d, 0) for d in ds), limit)
        return size[self.root]

    def run(self) -> Document:
        root = self.root
        if self._expanded_size() > MAX_INSTANCES:
            raise InputError(f"{self.file}: more than {MAX_INSTANCES} elements to draw, <use> "
                             "copies counted: refused before drawing any")
        page, user_to_px, viewport_px, vp, note = self._root_viewport(root)
        ctx = _Ctx(IDENTITY, 1.0, vp, (), {}, (), 0, "")
        self._root_ctx = ctx
        decl = self._declared(root)
        if self._value(decl, ctx, "display").value.strip().lower() != "none":
            box: list = []
            c = self._element_ctx(root, decl, ctx, box)
            if c is not None:
                self._open_boxes(box)
                self._children(root, c)
                self._close_boxes(box)
        self._report_families()
        return Document(self.shapes, self.texts, page, user_to_px, viewport_px, self.file,
                        note, dict(self.skipped))

    def _root_viewport(self, root):
        vb = None
        raw = root.get("viewBox")
        if raw is not None:
            try:
                vb = parse_viewbox(raw)
            except BadValue as exc:
                raise self._bad(root, "viewBox", raw, exc) from None
            if vb[2] <= 0 or vb[3] <= 0:
                raise InputError(f"{self.file}: the root <svg> has viewBox={raw!r}: a viewBox "
                                 "with zero width or height disables rendering (SVG 1.1, 7.7)")
        try:
            aspect = parse_aspect(root.get("preserveAspectRatio"))
        except BadValue as exc:
            raise self._bad(root, "preserveAspectRatio", root.get("preserveAspectRatio"),
                            exc) from None
        sizes = []
        for attr in ("width", "height"):
            raw_len = root.get(attr)
            size = None
            if raw_len is not None and raw_len.strip() not in ("auto", ""):
                try:
                    value, unit = parse_length(raw_len)
                except BadValue as exc:
                    raise self._bad(root, attr, raw_len, exc) from None
                if unit not in ("%", "em", "ex"):
                    size = resolve_length(raw_len, None)
                    if size <= 0:
                        self._warn(f"the root <svg> has {attr}={raw_len!r}: not a page size; "
                                   "left out")
                        size = None
            sizes.append(size)
        w, h = sizes
        if vb is not None:
            page = (vb[0], vb[1], vb[0] + vb[2], vb[1] + vb[3])
            if w is None and h is not None:
                w = h * vb[2] / vb[3]           # CSS sizing: the other side from the ratio
            elif h is None and w is not None:
                h = w * vb[3] / vb[2]
            vp = Viewport(vb[2], vb[3])
        else:
            page = (0.0, 0.0, w, h) if (w and h) else None
            vp = Viewport(w or DEFAULT_VIEWPORT_PX[0], h or DEFAULT_VIEWPORT_PX[1])
        if w and h:
            user_to_px = viewbox_transform(vb, (0.0, 0.0, w, h), aspect) if vb else IDENTITY
            return page, user_to_px, (w, h), vp, ""
        note = ("the root <svg> has no width and height in absolute units (mm, cm, in, pt, "
                "pc, px)")
        return page, None, None, vp, note

    def _open_boxes(self, box: list) -> None:
        for b in box:
            b.first_shape, b.first_text = len(self.shapes), len(self.texts)

    def _close_boxes(self, box: list) -> None:
        for b in box:
            b.last_shape, b.last_text = len(self.shapes), len(self.texts)

    def _children(self, el, ctx: _Ctx) -> None:
        for child in el:
            self._visit(child, ctx)

    def _visit(self, el, ctx: _Ctx) -> None:
        tag = el.tag
        if not isinstance(tag, str) or not tag.startswith(_SVG):
            return                      # comments, and other vocabularies (editor metadata)
        name = tag[len(_SVG):]
        if name in NEVER_DRAWN:
            return
        if name in ANIMATION:
            self._warn_once("animation elements are not played: the drawing is drawn as it "
                            "stands before any animation", key="animation")
            return
        if name in NOT_DRAWN:
            self._skip(name, "a vector display draws outlines only")
            return
        if name in ("tspan", "textPath", "tref"):
            return                      # only inside <text>
        if name not in SHAPE_TAGS and name not in ("g", "a", "switch", "svg", "use", "text"):
            self._skip(name, "not an SVG element that draws")
            return
        decl = self._declared(el)
        if "display" in decl and decl["display"].value.strip().lower() == "none":
            return                      # SVG 1.1, 11.5: the element and its subtree are gone
        box: list = []
        c = self._element_ctx(el, decl, ctx, box)
        if c is None:
            return
        self._open_boxes(box)
        if name in SHAPE_TAGS:
            self._shape(el, name, decl, c)
        elif name in ("g", "a"):
            self._children(el, c)
        elif name == "switch":
            child = self._switch_choice(el)
            if child is not None:
                self._visit(child, c)
        elif name == "svg":
            self._viewport(el, decl, c, None, None)
        elif name == "use":
            self._use(el, c)
        else:
            self._text(el, decl, c)
        self._close_boxes(box)

    def _switch_choice(self, el):
        """The child a <switch> draws: the first whose conditions hold (SVG 1.1, 5.8.2),
        taking no extensions as supported and the language as English (as resvg does)."""
        for child in el:
            if not isinstance(child.tag, str) or not child.tag.startswith(_SVG):
                continue
            if (child.get("requiredExtensions") or "").strip():
                continue
            langs = child.get("systemLanguage")
            if langs is not None and not any(x.strip().lower().split("-")[0] == "en"
                                             for x in langs.split(",")):
                continue
            return child
        return None

    # --- shapes --------------------------------------------------------------------------

    def _shape(self, el, name: str, decl, c: _Ctx) -> None:
        stroke, fill = self._painted(decl, c, "stroke"), self._painted(decl, c, "fill")
        if not (stroke or fill):
            return
        if self._keyword(el, decl, c, "visibility", ("visible", "hidden", "collapse")) \
                != "visible":
            return
        path = self._geometry(el, name, c.viewport)
        if path is None or not path.segments:
            return
        if is_singular(c.matrix):
            self._warn(f"{self._name(el)} is not drawn: its transform squashes it flat")
            return
        intensity = c.opacity * self._fraction(el, decl, c, "stroke-opacity")
        if not stroke:
            intensity *= self._fraction(el, decl, c, "fill-opacity")
        if intensity <= 0.0:
            return
        dash = self._dash(el, decl, c) if stroke and self._dashes else None
        dots = stroke and self._keyword(el, decl, c, "stroke-linecap",
                                        ("butt", "round", "square")) != "butt"
        if self._markers:
            for prop in ("marker-start", "marker-mid", "marker-end"):
                if self._value(decl, c, prop).value.strip().lower() != "none":
                    self._warn_once("markers are not drawn", key="marker")
        self.order += 1
        label = (element_label(el) if el.get("id") else f"<{name}> #{self.order}") + c.via
        self.shapes.append(Shape(path, c.matrix, intensity, dash, dots, c.clips, label, el,
                                 self.lines, self.order))

    def _geometry(self, el, name: str, vp: Viewport) -> PathData | None:
        """The element's segments in its user units (None: it draws nothing)."""
        L = self._length
        if name == "path":
            i = self._path_index.get(el)
            if i is None:
                return None
            table = self._paths()
            fault = self._path_faults.get(i)
            if fault is not None:
                raise self._bad(el, "d", _short(self._path_data[i]), fault)
            return PathRef(table, i, self._path_segments[i])
        if name == "rect":
            x, y = L(el, "x", vp, "x", 0.0), L(el, "y", vp, "y", 0.0)
            w, h = L(el, "width", vp, "x", 0.0), L(el, "height", vp, "y", 0.0)
            if not self._positive(el, ("width", w), ("height", h)):
                return None
            rx, ry = L(el, "rx", vp, "x", None), L(el, "ry", vp, "y", None)
            rx, ry = (self._auto_if_negative(el, "rx", rx), self._auto_if_negative(el, "ry", ry))
            # SVG 2, 10.2: an auto radius takes the other's value (0 when both are auto),
            # then rx is clamped to half the width and ry to half the height.
            rx = ry if rx is None else rx
            ry = rx if ry is None else ry
            rx, ry = min(rx or 0.0, w / 2.0), min(ry or 0.0, h / 2.0)
            return rect_path(x, y, w, h, rx, ry)
        if name == "circle":
            cx, cy = L(el, "cx", vp, "x", 0.0), L(el, "cy", vp, "y", 0.0)
            r = L(el, "r", vp, "xy", 0.0)
            if not self._positive(el, ("r", r)):
                return None
            return ellipse_path(cx, cy, r, r)
        if name == "ellipse":
            cx, cy = L(el, "cx", vp, "x", 0.0), L(el, "cy", vp, "y", 0.0)
            rx, ry = L(el, "rx", vp, "x", None), L(el, "ry", vp, "y", None)
            rx, ry = (self._auto_if_negative(el, "rx", rx), self._auto_if_negative(el, "ry", ry))
            rx = ry if rx is None else rx       # SVG 2, 10.4: auto takes the other radius
            ry = rx if ry is None else ry
            if not rx or not ry:
                return None
            return ellipse_path(cx, cy, rx, ry)
        if name == "line":
            return line_path(L(el, "x1", vp, "x", 0.0), L(el, "y1", vp, "y", 0.0),
                             L(el, "x2", vp, "x", 0.0), L(el, "y2", vp, "y", 0.0))
        raw = el.get("points")
        if raw is None:
            return None
        try:
            values = parse_number_list(raw)
        except BadValue as exc:
            raise self._bad(el, "points", _short(raw), exc) from None
        if len(values) % 2:
            # SVG 2, 10.6: an odd number of coordinates is an error rendered up to it.
            self._warn(f"{self._name(el)} has an odd number of coordinates in points: the "
                       "last one is left out")
            values = values[:-1]
        return points_path(values, closed=name == "polygon")

    def _paths(self) -> PathTable:
        """Every ``d`` of the document, read in one pass the first time a path is drawn
        (path data that is never drawn is read too: its faults are no error)."""
        if self._path_table is None:
            table, self._path_faults = read_path_list(self._path_data)
            counts = np.bincount(table.run_owner, weights=table.run_len,
                                 minlength=len(self._path_data))
            self._path_segments = counts.astype(np.int64).tolist()
            self._path_table = table
        return self._path_table

    def _positive(self, el, *pairs) -> bool:
        for attr, value in pairs:
            if value < 0:
                # SVG 2, 10.2-10.4: a negative size is invalid; the initial value 0 then
                # disables rendering of the element.
                self._warn(f"{self._name(el)} is not drawn: {attr} is negative ({value:g}), "
                           "which SVG treats as invalid")
                return False
            if value == 0:
                return False                # SVG: a zero size disables rendering
        return True

    def _auto_if_negative(self, el, attr: str, value):
        if value is not None and value < 0:
            self._warn(f"{self._name(el)} has a negative {attr} ({value:g}): taken as auto, as "
                       "SVG 2 treats an invalid radius")
            return None
        return value

    def _dash(self, el, decl, c: _Ctx) -> Dash | None:
        dec = self._value(decl, c, "stroke-dasharray")
        raw = dec.value.strip()
        if raw.lower() == "none":
            return None
        try:
            vals = parse_length_list(raw, c.viewport, "xy")
        except BadValue as exc:
            raise self._bad(el, "stroke-dasharray", raw, exc, dec.origin) from None
        if any(v < 0 for v in vals):
            # SVG 2, 13.5.5: a negative value makes the dash array invalid: solid.
            self._warn(f"{self._name(el)} has stroke-dasharray={raw!r}: a negative length "
                       "makes it invalid, so the stroke is drawn solid")
            return None
        if not vals or sum(vals) <= 0:
            return None                     # SVG 1.1, 11.4: a zero sum is solid
        if len(vals) % 2:
            vals = vals * 2                 # SVG 1.1, 11.4: an odd list is repeated
        off = self._value(decl, c, "stroke-dashoffset")
        try:
            offset = resolve_length(off.value, c.viewport, "xy")
        except BadValue as exc:
            raise self._bad(el, "stroke-dashoffset", off.value, exc, off.origin) from None
        path_length = None
        raw_pl = el.get("pathLength")
        if raw_pl is not None:
            try:
                path_length = parse_number(raw_pl)
            except BadValue as exc:
                raise self._bad(el, "pathLength", raw_pl, exc) from None
            if path_length <= 0:
                path_length = None
        return Dash(tuple(vals), offset, path_length)

    # --- instancing and viewports --------------------------------------------------------

    def _href(self, el):
        raw = el.get("href")
        attr = "href"
        if raw is None:
            raw, attr = el.get(_XLINK_HREF), "xlink:href"
        if raw is None or not raw.strip():
            return None, None, None
        return raw, attr, self._ref(el, attr, raw, raw.strip())

    def _use(self, el, c: _Ctx) -> None:
        raw, attr, target = self._href(el)
        if target is None:
            self._warn(f"{self._name(el)} refers to nothing (no href): nothing drawn")
            return
        if target in c.chain or target is el:
            # (a <use> inside what it refers to meets its target again one level down)
            raise self._bad(el, attr, raw, "refers back to itself (a <use> cycle)")
        x, y = self._length(el, "x", c.viewport, "x", 0.0), self._length(el, "y", c.viewport,
                                                                          "y", 0.0)
        matrix = compose(c.matrix, (1.0, 0.0, 0.0, 1.0, x, y)) if (x or y) else c.matrix
        via = c.via or f" in {element_label(el)}"
        cc = c.derive(matrix=matrix, chain=c.chain + (target,), via=via)
        tag = target.tag[len(_SVG):] if isinstance(target.tag, str) and \
            target.tag.startswith(_SVG) else ""
        if tag in ("symbol", "svg"):
            decl = self._declared(target)
            if "display" in decl and decl["display"].value.strip().lower() == "none":
                return
            box: list = []
            # (a <symbol> takes no transform: SVG 1.1, 5.5)
            tc = self._element_ctx(target, decl, cc, box, own_transform=tag == "svg")
            if tc is None:
                return
            self._open_boxes(box)
            w = self._length(el, "width", c.viewport, "x", None)
            h = self._length(el, "height", c.viewport, "y", None)
            self._viewport(target, decl, tc, w, h, symbol=tag == "symbol")
            self._close_boxes(box)
        elif tag in NEVER_DRAWN:
            self._warn(f"{self._name(el)} refers to a <{tag}>, which draws nothing")
        else:
            self._visit(target, cc)

    def _viewport(self, el, decl, c: _Ctx, use_w, use_h, symbol: bool = False) -> None:
        """A nested <svg> (or a <symbol> drawn by a <use>): a new viewport (SVG 1.1, 7.9;
        SVG 2, 5.6.4 for the <use> width and height that override the element's)."""
        vp = c.viewport
        if symbol:
            x = y = 0.0
        else:
            x, y = self._length(el, "x", vp, "x", 0.0), self._length(el, "y", vp, "y", 0.0)
        w = use_w if use_w is not None else self._length(el, "width", vp, "x", None)
        h = use_h if use_h is not None else self._length(el, "height", vp, "y", None)
        w = vp.width if w is None else w           # width and height default to 100%
        h = vp.height if h is None else h
        if not self._positive(el, ("width", w), ("height", h)):
            return
        raw = el.get("viewBox")
        if raw is not None:
            try:
                vb = parse_viewbox(raw)
            except BadValue as exc:
                raise self._bad(el, "viewBox", raw, exc) from None
            raw_aspect = el.get("preserveAspectRatio")
            try:
                aspect = parse_aspect(raw_aspect)
            except BadValue as exc:
                raise self._bad(el, "preserveAspectRatio", raw_aspect, exc) from None
            if vb[2] == 0 or vb[3] == 0:
                return                      # SVG 1.1, 7.7: zero disables rendering
            inner = viewbox_transform(vb, (x, y, w, h), aspect)
            new_vp = Viewport(vb[2], vb[3], vp.font_size)
        else:
            inner = (1.0, 0.0, 0.0, 1.0, x, y)
            new_vp = Viewport(w, h, vp.font_size)
        clips = c.clips
        overflow = decl.get("overflow")
        ov = overflow.value.strip().lower() if overflow is not None else "hidden"
        if ov not in ("visible", "auto", "initial"):
            # SVG 2, UA style sheet: svg:not(:root), symbol { overflow: hidden }: the content
            # is clipped to the viewport.
            clips = clips + (ClipNode([ClipItem(rect_path(x, y, w, h, 0.0, 0.0), c.matrix,
                                                "nonzero")], None, (), self._name(el)),)
        cc = c.derive(matrix=compose(c.matrix, inner), viewport=new_vp, clips=clips)
        self._children(el, cc)

    # --- clip paths and masks ------------------------------------------------------------

    def _clip_nodes(self, el, prop: str, dec: Declared, base, box_of, c: _Ctx,
                    box_holder: list) -> tuple:
        target = self._url_target(el, prop, dec)
        if target is None:
            return ()
        want = "clipPath" if prop == "clip-path" else "mask"
        if target.tag != f"{_SVG}{want}":
            raise self._bad(el, prop, dec.value, f"refers to {element_label(target)}, not a "
                            f"<{want}>", dec.origin)
        if target in self._resolving:
            raise self._bad(el, prop, dec.value, "refers back to itself (a reference cycle)",
                            dec.origin)
        self._resolving.add(target)
        try:
            if prop == "mask":
                return self._mask_nodes(el, target, base, box_of, box_holder)
            return self._clip_path_node(target, base, box_of, box_holder)
        finally:
            self._resolving.discard(target)

    def _clip_path_node(self, target, base, box_of, box_holder: list) -> tuple:
        units = (target.get("clipPathUnits") or "userSpaceOnUse").strip()
        if units not in ("userSpaceOnUse", "objectBoundingBox"):
            raise self._bad(target, "clipPathUnits", units, "use userSpaceOnUse or "
                            "objectBoundingBox")
        key = (target, base)
        cacheable = box_of is None and units == "userSpaceOnUse"
        if cacheable and key in self._clip_cache:
            return (self._clip_cache[key],)
        t = self._transform(target) or IDENTITY
        box = box_of
        if units == "objectBoundingBox" and box_of is None:
            box = self._new_box(base, box_holder)
            base = IDENTITY
        m = compose(base, t)
        tctx = self._doc_ctx(target)
        tdecl = self._declared(target)
        inherited, vp = self._inherit(target, tdecl, tctx)
        tctx = tctx.derive(inherited=inherited, viewport=vp)
        items = self._clip_items(target, m, box, tctx, box_holder, groups=False)
        within = ()
        own = tdecl.get("clip-path")
        if own is not None and own.value.strip().lower() != "none":
            within = self._clip_nodes(target, "clip-path", own, base, box, tctx, box_holder)
        node = ClipNode(items, box, within, self._name(target))
        if cacheable:
            self._clip_cache[key] = node
        return (node,)

    def _new_box(self, matrix, box_holder: list) -> BoxRef:
        b = BoxRef(matrix)
        box_holder.append(b)
        return b

    def _clip_items(self, container, base, box, ctx: _Ctx, box_holder: list,
                    groups: bool) -> list:
        """The shapes inside a <clipPath> (or, with `groups`, a <mask>) as clip items: their
        own transform, clip-rule (fill-rule in a mask), display and visibility apply
        (SVG 1.1, 14.3.5)."""
        items = []
        for child in container:
            tag = child.tag
            if not isinstance(tag, str) or not tag.startswith(_SVG):
                continue
            name = tag[len(_SVG):]
            if name in NEVER_DRAWN:
                continue
            decl = self._declared(child)
            if "display" in decl and decl["display"].value.strip().lower() == "none":
                continue
            inherited, vp = self._inherit(child, decl, ctx)
            cc = ctx.derive(inherited=inherited, viewport=vp)
            t = self._transform(child)
            m = base if t is None else compose(base, t)
            if name == "use":
                raw, attr, target = self._href(child)
                if target is None:
                    continue
                if target in ctx.chain or target is child:
                    raise self._bad(child, attr, raw, "refers back to itself (a <use> cycle)")
                x = self._length(child, "x", vp, "x", 0.0)
                y = self._length(child, "y", vp, "y", 0.0)
                wrapper = [target]
                items += self._clip_items(wrapper, compose(m, (1.0, 0.0, 0.0, 1.0, x, y)),
                                          box, cc.derive(chain=ctx.chain + (target,)),
                                          box_holder, groups)
                continue
            if name in SHAPE_TAGS:
                if self._keyword(child, decl, cc, "visibility",
                                 ("visible", "hidden", "collapse")) != "visible":
                    continue
                path = self._geometry(child, name, vp)
                if path is None or not path.segments:
                    continue
                rule_prop = "fill-rule" if groups else "clip-rule"
                rule = self._keyword(child, decl, cc, rule_prop, ("nonzero", "evenodd"))
                clips = ()
                own = decl.get("clip-path")
                if own is not None and own.value.strip().lower() != "none":
                    clips = self._clip_nodes(child, "clip-path", own, m, box, cc, box_holder)
                items.append(ClipItem(path, m, rule, clips))
            elif name in ("g", "a", "svg") and groups:
                items += self._clip_items(child, m, box, cc, box_holder, groups)
            elif name == "text":
                self._warn_once("text inside a clip path or mask is not used as a clip region",
                                key="clip-text")
            else:
                self._warn_once(f"<{name}> inside a <clipPath> does not clip: only shapes, "
                                "text and <use> do (SVG 1.1, 14.3.5)", key=("clip-child", name))
        return items

    def _mask_nodes(self, el, target, base, box_of, box_holder: list) -> tuple:
        self._warn_once("masks are treated as clips by the outline of their shapes (a vector "
                        "display cannot fade part of a stroke): the strokes are cut to the "
                        "mask's shapes and its region", key="mask")
        content_units = (target.get("maskContentUnits") or "userSpaceOnUse").strip()
        region_units = (target.get("maskUnits") or "objectBoundingBox").strip()
        for attr, v in (("maskContentUnits", content_units), ("maskUnits", region_units)):
            if v not in ("userSpaceOnUse", "objectBoundingBox"):
                raise self._bad(target, attr, v, "use userSpaceOnUse or objectBoundingBox")
        box = box_of
        need_box = "objectBoundingBox" in (content_units, region_units)
        if need_box and box is None:
            box = self._new_box(base, box_holder)
        tctx = self._doc_ctx(target)
        tdecl = self._declared(target)
        inherited, vp = self._inherit(target, tdecl, tctx)
        tctx = tctx.derive(inherited=inherited, viewport=vp)
        content_base = IDENTITY if content_units == "objectBoundingBox" else base
        content_box = box if content_units == "objectBoundingBox" or box_of is not None else None
        items = self._clip_items(target, content_base, content_box, tctx, box_holder,
                                 groups=True)
        content = ClipNode(items, content_box, (), self._name(target))
        # The mask's region (SVG 1.1, 14.4: x, y, width, height default to -10%, -10%, 120%,
        # 120% of the bounding box).
        if region_units == "objectBoundingBox":
            vals = [self._fraction_attr(target, a, d) for a, d in
                    (("x", -0.1), ("y", -0.1), ("width", 1.2), ("height", 1.2))]
            region_base, region_box = IDENTITY, box
        else:
            vals = [self._length(target, a, vp, ax, d) for a, ax, d in
                    (("x", "x", -0.1 * vp.width), ("y", "y", -0.1 * vp.height),
                     ("width", "x", 1.2 * vp.width), ("height", "y", 1.2 * vp.height))]
            region_base, region_box = base, box_of
        if vals[2] <= 0 or vals[3] <= 0:
            return (ClipNode([], None, (), self._name(target)),)
        region = ClipNode([ClipItem(rect_path(*vals, 0.0, 0.0), region_base, "nonzero")],
                          region_box, (), self._name(target))
        return (content, region)

    def _fraction_attr(self, el, attr: str, default: float) -> float:
        raw = el.get(attr)
        if raw is None:
            return default
        try:
            value, unit = parse_length(raw)
        except BadValue as exc:
            raise self._bad(el, attr, raw, exc) from None
        if unit not in ("", "%"):
            raise self._bad(el, attr, raw, "in objectBoundingBox units a value is a fraction "
                            "or a percentage")
        return value / 100.0 if unit == "%" else value

    # --- text ----------------------------------------------------------------------------

    def _text(self, el, decl, c: _Ctx) -> None:
        chars: list = []
        preserve = (el.get(_XML_SPACE) or self.root.get(_XML_SPACE) or "") == "preserve"
        self._text_chars(el, decl, c, [], chars)
        chars = _white_space(chars, preserve)
        if not chars:
            return
        runs: list[TextRun] = []
        prev_style = None
        for i, (ch, stack, style) in enumerate(chars):
            pos = {}
            for entry in reversed(stack):           # the innermost value for each attribute
                lists, k = entry
                for attr, vals in lists.items():
                    if attr not in pos and k < len(vals):
                        pos[attr] = vals[k]
            for entry in stack:
                entry[1] += 1
            if not runs or pos or style is not prev_style:
                size, anchor, intensity, visible, label = style
                runs.append(TextRun("", size, anchor, intensity, visible, label,
                                    pos.get("x"), pos.get("y"), pos.get("dx", 0.0),
                                    pos.get("dy", 0.0), chunk=not runs or "x" in pos
                                    or "y" in pos))
                prev_style = style
            runs[-1].text += ch
        if not any(r.visible and r.text.strip() for r in runs):
            return
        self.order += 1
        label = (element_label(el) if el.get("id") else f"<text> #{self.order}") + c.via
        for run in runs:
            run.label = label
        self.texts.append(TextBlock(runs, c.matrix, c.clips, label,
                                    self._name(el), self.order))

    def _text_chars(self, el, decl, c: _Ctx, stack: list, chars: list) -> None:
        vp = c.viewport
        lists = {}
        for attr, axis in (("x", "x"), ("y", "y"), ("dx", "x"), ("dy", "y")):
            raw = el.get(attr)
            if raw is not None:
                try:
                    lists[attr] = parse_length_list(raw, vp, axis)
                except BadValue as exc:
                    raise self._bad(el, attr, raw, exc) from None
        if el.get("rotate") is not None:
            self._warn_once("rotated characters (rotate on <text> or <tspan>) are drawn upright",
                            key="text-rotate")
        stack = stack + [[lists, 0]]
        stroke, fill = self._painted(decl, c, "stroke"), self._painted(decl, c, "fill")
        visible = (stroke or fill) and self._keyword(
            el, decl, c, "visibility", ("visible", "hidden", "collapse")) == "visible"
        intensity = c.opacity * self._fraction(el, decl, c, "stroke-opacity")
        if not stroke:
            intensity *= self._fraction(el, decl, c, "fill-opacity")
        anchor = self._keyword(el, decl, c, "text-anchor", ("start", "middle", "end"))
        family = self._value(decl, c, "font-family").value.strip()
        if family and visible:
            self.families.add(family)
        style = (vp.font_size, anchor, intensity, visible and intensity > 0,
                 element_label(el) + c.via)
        if el.text:
            chars.extend((ch, stack, style) for ch in el.text)
        for child in el:
            tag = child.tag if isinstance(child.tag, str) else ""
            name = tag[len(_SVG):] if tag.startswith(_SVG) else ""
            if name in ("tspan", "a"):
                cdecl = self._declared(child)
                if not ("display" in cdecl and cdecl["display"].value.strip().lower() == "none"):
                    inherited, cvp = self._inherit(child, cdecl, c)
                    opacity = c.opacity
                    if "opacity" in cdecl:
                        opacity *= self._fraction(child, cdecl, c, "opacity")
                    cc = c.derive(inherited=inherited, viewport=cvp, opacity=opacity)
                    self._text_chars(child, cdecl, cc, stack, chars)
            elif name in ("textPath", "tref"):
                self._skip(name, "text along a path or by reference is not supported")
            if child.tail:
                chars.extend((ch, stack, style) for ch in child.tail)

    def _report_families(self) -> None:
        named = sorted(f for f in self.families if f and f.lower() not in ("inherit",))
        if named and self.texts:
            self._warn_once(f"font-family {', '.join(named)} is not used: text is drawn in the "
                            "single-stroke font", key="font-family")


def _white_space(chars: list, preserve: bool) -> list:
    """SVG 1.1, 10.15 (white space handling): by default newlines are removed, tabs become
    spaces, leading and trailing spaces are stripped and runs of spaces collapse to one;
    with xml:space="preserve" newlines and tabs become spaces and nothing is removed."""
    out = []
    if preserve:
        for ch, stack, style in chars:
            out.append((" " if ch in "\n\r\t" else ch, stack, style))
        return out
    for ch, stack, style in chars:
        if ch in "\n\r":
            continue
        if ch == "\t":
            ch = " "
        if ch == " " and (not out or out[-1][0] == " "):
            continue
        out.append((ch, stack, style))
    while out and out[-1][0] == " ":
        out.pop()
    return out


def _short(text: str, limit: int = 60) -> str:
    return text if len(text) <= limit else text[:limit] + "..."

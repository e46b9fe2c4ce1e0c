"""SVG source: an SVG file to Strokes in screen millimetres.

Two steps. `vectorgen.svgdoc` resolves the document (CSS, visibility, opacity, ``<use>``,
viewports, units, references) into plain shapes, each with its segments, its transform to the
root's user space, its brightness, dash pattern and clip regions. This module is the geometry:

1. every shape's segments gathered into one table and mapped into the root's user space in
   whole-array operations (`vectorgen.pathdata.transform_table`: Bezier control points
   through the affine map; elliptical arcs, in centre form (SVG 1.1, F.6.5), mapped exactly:
   the image of an ellipse under p -> A p + b has as semi-axes the singular values of
   A R(phi) diag(rx, ry));
2. flattened (`vectorgen.flatten`) at the chord tolerance on the screen;
3. dashed along the arc length in each shape's own user units (stroke-dasharray,
   stroke-dashoffset, pathLength), each dash its own stroke;
4. cut to clip regions (shapely): the union of the clip shapes' areas by their clip-rule,
   intersected down the tree;
5. text set in the registered single-stroke font at its position, size and anchor;
6. placed on the screen (`fit`).

Each continuous sub-path becomes one stroke: an outline, whether the element is stroked or only
filled.

Placement (`fit`):
  "page"     the page (viewBox, else width x height) is fitted into the usable area, aspect
             kept, centred; with no page size given, the drawing's own bounds are used
  "content"  the drawing's own bounds are fitted
  "off"      one SVG user unit is one millimetre; the page centre (or the drawing's centre when
             there is no page) sits at the screen centre
  "true"     true size: the document's width and height in physical units (96 px per inch)
             give one millimetre on the page as one millimetre on the tube; the page's centre
             at the screen centre
SVG has +y down; the screen has +y up, so y is flipped in every mode.
"""

from __future__ import annotations

import math
import os
import warnings
from functools import lru_cache

import numpy as np

from .errors import InputError, VectorgenWarning
from .flatten import flatten_table
from .pathdata import (PathTable, concat_tables, hull_points, select_paths, select_runs,
                       transform_table)
from .screen import fit_transform
from .strokes import Strokes, check_finite, clean, repeated_points
from .runs import concat_ranges
from .svgdoc import Document, PathRef, read_document
from .svgpathdata import tables_of
from .svgvalues import IDENTITY, BadValue, compose, invert

__all__ = ["CAP_HEIGHT_PER_EM", "FIT_MODES", "MM_PER_PX", "document_strokes", "page_box",
           "read_svg_tree", "svg_to_strokes"]

FIT_MODES = ("page", "content", "off", "true")
MM_PER_PX = 25.4 / 96.0         # CSS Values and Units 3, 6.2: 96 px per inch
# Cap height of a text's font size: about 0.7 em in common sans-serif faces (common practice,
# no source); the single-stroke font is scaled to it.
CAP_HEIGHT_PER_EM = 0.7
COORD_LIMIT_USER = 1e12         # coordinates beyond this, in user units, are nonsense


def svg_to_strokes(path: str, screen, fit: str = "page", tolerance_mm: float = 0.02) -> Strokes:
    """Read an SVG and return its strokes in screen mm.

    Parameters
    ----------
    path : str
    screen : Screen
        The usable area the page (or the drawing) is fitted into.
    fit : {"page", "content", "off", "true"}
        Placement (see the module docstring).
    tolerance_mm : float
        Chord tolerance of the flattened curves, on the screen.

    Returns
    -------
    Strokes

    Raises
    ------
    InputError
        The file cannot be read, is not SVG, has a value or reference that cannot be used, or
        has nothing drawable.

    Warns
    -----
    VectorgenWarning
        For content that is not drawn (images, filters, markers ...), masks taken as clips,
        values SVG ignores (an invalid transform), an unused font-family, and true size
        without a physical page size.

    Examples
    --------
    >>> import os, tempfile
    >>> from vectorgen.screen import Screen
    >>> folder = tempfile.mkdtemp()
    >>> name = os.path.join(folder, "a.svg")
    >>> _ = open(name, "w").write('<svg xmlns="http://www.w3.org/2000/svg" width="100mm" '
    ...     'height="80mm" viewBox="0 0 100 80"><line x1="0" y1="40" x2="50" y2="40" '
    ...     'stroke="black" stroke-dasharray="10 15"/></svg>')
    >>> s = svg_to_strokes(name, Screen(width_mm=100.0, height_mm=80.0), fit="true")
    >>> s.count, s.stroke(0).tolist()
    (2, [[-50.0, 0.0], [-40.0, 0.0]])
    """
    if fit not in FIT_MODES:
        raise InputError(f"unknown fit mode {fit!r}: use one of {', '.join(FIT_MODES)} "
                         f"(fit={fit!r})", parameter="fit")
    if not (isinstance(tolerance_mm, (int, float)) and math.isfinite(tolerance_mm)
            and tolerance_mm > 0):
        raise InputError(f"the chord tolerance must be > 0 mm (tolerance_mm={tolerance_mm})",
                         parameter="tolerance_mm")
    return document_strokes(read_document(path), screen, fit, tolerance_mm)


def document_strokes(doc: Document, screen, fit: str = "page",
                     tolerance_mm: float = 0.02) -> Strokes:
    """The strokes of a resolved document, placed on the screen (see `svg_to_strokes`).

    Examples
    --------
    >>> from vectorgen.screen import Screen
    >>> from vectorgen.svgdoc import resolve
    >>> from vectorgen.svgxml import parse_svg_bytes
    >>> doc = resolve(parse_svg_bytes(b'<svg xmlns="http://www.w3.org/2000/svg" '
    ...     b'viewBox="0 0 100 80"><line x2="50" y1="40" y2="40"/></svg>', "a.svg"))
    >>> document_strokes(doc, Screen(width_mm=100.0, height_mm=80.0), "off").stroke(0).tolist()
    [[-50.0, 0.0], [0.0, 0.0]]
    """
    geo = _RootGeometry(doc)
    if geo.empty:
        raise InputError(f"{doc.name}: nothing drawable in this SVG{_empty_hint(doc, geo)}")
    place = _Placement(doc, fit, screen)
    matrix, offset = place(geo.hull() if place.uses_content else None)
    scale = _stretch(matrix)
    strokes = geo.strokes(tolerance_mm / scale)
    if not strokes.count:
        raise InputError(f"{doc.name}: nothing drawable in this SVG (everything is clipped "
                         "away or too small)")
    if place.uses_content:
        matrix, offset = place(strokes.bounds())
        if _stretch(matrix) > scale * (1 + 1e-9):   # tighter bounds, larger scale: again
            strokes = geo.strokes(tolerance_mm / _stretch(matrix))
    out = strokes.transformed(matrix, offset)
    check_finite(out, doc.name)
    return out


def read_svg_tree(path: str):
    """The parsed root element of an SVG file (ElementTree; tags in the SVG namespace).

    Examples
    --------
    >>> import os, tempfile
    >>> name = os.path.join(tempfile.mkdtemp(), "a.svg")
    >>> _ = open(name, "w").write('<svg><rect/></svg>')
    >>> read_svg_tree(name)[0].tag
    '{http://www.w3.org/2000/svg}rect'
    """
    from .files import read_bytes
    from .svgdoc import MAX_SVG_BYTES
    from .svgxml import parse_svg_bytes

    return parse_svg_bytes(read_bytes(path, "SVG file", MAX_SVG_BYTES), os.fspath(path)).root


def page_box(root) -> tuple[float, float, float, float] | None:
    """The page in user units (x0, y0, x1, y1), from viewBox or width/height; None if absent.

    Examples
    --------
    >>> import xml.etree.ElementTree as ET
    >>> page_box(ET.fromstring('<svg width="2in" height="1in"/>'))
    (0.0, 0.0, 192.0, 96.0)
    """
    from .svgvalues import parse_length, parse_viewbox, resolve_length

    vb = root.get("viewBox")
    if vb:
        try:
            x, y, w, h = parse_viewbox(vb)
        except BadValue as exc:
            raise InputError(f"SVG viewBox {vb!r}: {exc}") from None
        if w <= 0 or h <= 0:
            raise InputError(f"SVG viewBox must have a positive width and height: {vb!r}")
        return x, y, x + w, y + h
    sizes = []
    for attr in ("width", "height"):
        raw = root.get(attr)
        try:
            sizes.append(resolve_length(raw, None) if raw and parse_length(raw)[1] not in
                         ("%", "em", "ex") else None)
        except BadValue:
            sizes.append(None)
    w, h = sizes
    return (0.0, 0.0, w, h) if w and h and w > 0 and h > 0 else None


# --- placement -----------------------------------------------------------------------------

def _stretch(matrix) -> float:
    """The largest stretch of a 2 x 2 map (chords must stay within tolerance everywhere)."""
    return float(np.linalg.svd(np.asarray(matrix, dtype=float), compute_uv=False)[0]) or 1.0


class _Placement:
    """Root user units -> screen mm for one fit mode; `uses_content` when the drawing's own
    bounds decide (no page, or fit="content")."""

    def __init__(self, doc: Document, fit: str, screen):
        self.doc, self.fit, self.screen = doc, fit, screen
        self.uses_content = fit == "content" or (doc.page is None and not (
            fit == "true" and doc.viewport_px is not None))
        if fit == "true" and doc.user_to_px is None:
            warnings.warn(f"{os.path.basename(doc.name)}: {doc.size_note}: true size takes one "
                          f"user unit as 1 px ({MM_PER_PX:.4f} mm, CSS's 96 px per inch)",
                          VectorgenWarning, stacklevel=3)

    def __call__(self, content_box):
        doc, fit = self.doc, self.fit
        flip = np.array([[1.0, 0.0], [0.0, -1.0]])
        if fit == "true":
            a, b, c, d, e, f = doc.user_to_px or IDENTITY
            lin = MM_PER_PX * np.array([[a, c], [b, d]])
            shift = MM_PER_PX * np.array([e, f])
            if doc.viewport_px is not None:
                centre = MM_PER_PX * np.array(doc.viewport_px) / 2.0
            else:
                box = doc.page or content_box
                centre = lin @ [(box[0] + box[2]) / 2.0, (box[1] + box[3]) / 2.0] + shift
            return flip @ lin, flip @ (shift - centre)
        box = doc.page if (fit in ("page", "off") and doc.page is not None) else content_box
        if fit == "off":
            cx, cy = (box[0] + box[2]) / 2.0, (box[1] + box[3]) / 2.0
            return flip, -flip @ np.array([cx, cy])
        return fit_transform(box, self.screen, flip_y=True)


def _empty_hint(doc: Document, geo: "_RootGeometry") -> str:
    notes = []
    if geo.texts_undrawn:
        notes.append(f"{geo.texts_undrawn} <text> element(s) not drawn: no stroke font is "
                     "registered")
    for tag, n in sorted(doc.skipped.items()):
        notes.append(f"{n} <{tag}> element(s) not drawn")
    return f" ({'; '.join(notes)})" if notes else ""


# --- segments in the root's user space -------------------------------------------------------

def _root_table(pairs: list) -> PathTable:
    """The segments of (geometry, transform) pairs in the root's user units, as one
    `PathTable` whose run owners are the places of the pairs. A geometry is a `PathRef` (a
    string of the document's path table) or a `PathData` (a basic shape); arcs are mapped
    exactly (`vectorgen.pathdata.transform_table`)."""
    table = _gather([g for g, _m in pairs])
    if not table.segments:
        return table
    mats = np.array([m for _g, m in pairs], dtype=float).reshape(-1, 6)
    if (mats != np.array(IDENTITY)).any():
        table = transform_table(table, mats, table.run_owner)
    return table


def _gather(geoms: list) -> PathTable:
    """The segments of `geoms` (PathRef or PathData) in order, each run owned by the place
    of its geometry."""
    n = len(geoms)
    refs: dict = {}                     # path table -> ([places], [string indices])
    basic_at, basic = [], []
    for i, g in enumerate(geoms):
        if isinstance(g, PathRef):
            got = refs.setdefault(id(g.table), (g.table, [], []))
            got[1].append(i)
            got[2].append(g.index)
        else:
            basic_at.append(i)
            basic.append(g)
    pieces = [(select_paths(table, which), np.array(at, dtype=np.int64))
              for table, at, which in refs.values()]
    if basic:
        pieces.append((tables_of(basic), np.array(basic_at, dtype=np.int64)))
    if not pieces:
        return PathTable.empty(n)
    owner = np.concatenate([at[t.run_owner] for t, at in pieces])
    if len(pieces) == 1:
        t = pieces[0][0]
        joined = PathTable(t.run_len, t.kinds, t.data, t.starts, t.closed, owner, n)
    else:
        joined = concat_tables([t for t, _at in pieces])
    if len(owner) < 2 or (owner[1:] >= owner[:-1]).all():
        if joined.run_owner is not owner:
            joined.run_owner, joined.paths = owner, n
        return joined
    order = np.argsort(owner, kind="stable")
    return select_runs(joined, order, owner[order], n)


def _flatten(table: PathTable, tol: float) -> tuple[np.ndarray, np.ndarray]:
    if not table.segments:
        return np.zeros((0, 2)), np.zeros(1, dtype=np.int64)
    return flatten_table(table, tol)


def _surely_moderate(table: PathTable) -> bool:
    """Whether every hull point of the table is surely finite and within COORD_LIMIT_USER
    of the origin, from its rows alone: control and end points, and for an arc its centre's
    distance plus its larger radius (every point of its ellipse is within that)."""
    limit = COORD_LIMIT_USER * (1 - 1e-9)
    parts = [np.abs(table.starts).max(initial=0.0)]
    parts += [np.abs(table.data[k]).max(initial=0.0) for k in (1, 2, 3) if k in table.data]
    if 4 in table.data:
        a = table.data[4]
        parts.append((np.abs(a[:, 0]) + np.maximum(a[:, 1].real, a[:, 2].real)).max())
        parts.append(np.abs(a[:, 6]).max())
    worst = np.max(parts)                   # (NaN wins, as it must)
    return bool(np.isfinite(worst) and worst <= limit)


class _RootGeometry:
    """A document's shapes and texts in the root's user space, to be flattened at any
    tolerance."""

    def __init__(self, doc: Document):
        self.doc = doc
        self.shapes = doc.shapes
        self.table = _root_table([(s.path, s.matrix) for s in doc.shapes])
        self._hull_points = None
        if self.table.segments and not _surely_moderate(self.table):
            hull = self._hull()
            if not (np.all(np.isfinite(hull)) and np.abs(hull).max() <= COORD_LIMIT_USER):
                bad = int(np.argmax(~np.isfinite(hull) | (np.abs(hull) > COORD_LIMIT_USER)))
                raise InputError(f"{doc.name}: coordinates are not finite or are enormous "
                                 f"({hull[bad].real:g}, {hull[bad].imag:g})")
        self.texts_undrawn = 0
        self.text_lines = _set_texts(doc, self)          # [(order, points, intens, label, clips)]
        self.empty = not self.table.segments and not self.text_lines
        self._regions: dict = {}

    def _hull(self) -> np.ndarray:
        if self._hull_points is None:
            self._hull_points = (hull_points(self.table) if self.table.segments else
                                 np.zeros(0, dtype=complex))
        return self._hull_points

    def hull(self) -> tuple[float, float, float, float]:
        pts = [self._hull()]
        pts += [t[1][:, 0] + 1j * t[1][:, 1] for t in self.text_lines]
        z = np.concatenate(pts)
        return (float(z.real.min()), float(z.imag.min()), float(z.real.max()),
                float(z.imag.max()))

    def strokes(self, tol: float) -> Strokes:
        """Every stroke in root user units at chord tolerance `tol` (user units)."""
        shapes = self.shapes
        pts, offsets = _flatten(self.table, tol)
        owner = self.table.run_owner
        special = {i for i, s in enumerate(shapes) if s.dash or s.clips}
        # runs whose points all coincide (every point after the first repeats the one before)
        repeats = np.bincount(np.searchsorted(offsets, repeated_points(pts, offsets),
                                              side="right") - 1, minlength=len(offsets) - 1)
        zero = repeats == np.diff(offsets) - 1
        if not special and not self.text_lines and not (zero.any()):
            inten = np.array([shapes[i].intensity for i in owner.tolist()], dtype=float)
            labels = [shapes[i].label for i in owner.tolist()]
            return clean(Strokes(pts, offsets, inten, labels))
        self._regions = {}
        self._flat = (pts, offsets, tol)
        dashed = [r for r, i in enumerate(owner.tolist()) if shapes[i].dash is not None]
        dashes = _dash_runs(pts, offsets, np.array(dashed, dtype=np.int64), owner, shapes,
                            zero) if dashed else {}
        pieces = []                     # (order, sub-order, points, intensity, label)
        runs_of: dict = {}
        for r, i in enumerate(owner.tolist()):
            runs_of.setdefault(i, []).append(r)
        for i, runs in runs_of.items():
            s = shapes[i]
            if s.dash is not None:
                arrays = [a for r in runs for a in dashes.get(r, ())]
            else:
                arrays = [pts[offsets[r]:offsets[r] + 1] if zero[r] else
                          pts[offsets[r]:offsets[r + 1]] for r in runs if not zero[r] or s.dots]
            for node in s.clips:
                arrays = self._clip(arrays, node, tol)
            for k, a in enumerate(arrays):
                pieces.append((s.order, k, a, s.intensity, s.label))
        for order, line, intensity, label, clips in self.text_lines:
            arrays = [line]
            for node in clips:
                arrays = self._clip(arrays, node, tol)
            for k, a in enumerate(arrays):
                pieces.append((order, k, a, intensity, label))
        pieces.sort(key=lambda p: (p[0], p[1]))
        pieces = [p for p in pieces if len(p[2])]
        if not pieces:
            return Strokes.empty()
        counts = np.array([len(p[2]) for p in pieces], dtype=np.int64)
        return clean(Strokes(np.concatenate([p[2] for p in pieces]).astype(float, copy=False),
                             np.concatenate([[0], np.cumsum(counts)]).astype(np.int64),
                             np.array([p[3] for p in pieces], dtype=float),
                             [p[4] for p in pieces]))

    # --- clipping --------------------------------------------------------------------------

    def _clip(self, arrays: list, node, tol: float) -> list:
        if not arrays:
            return arrays
        region = self._region(node, tol)
        return _clip_to_region(arrays, region)

    def _region(self, node, tol: float):
        """The node's clip region in root user units (shapely), cached per node."""
        import shapely

        key = id(node)
        if key in self._regions:
            return self._regions[key][1]
        base = IDENTITY
        empty = shapely.Polygon()
        region = None
        if node.box is not None:
            box = self._bbox(node.box)
            if box is None:
                region = empty                 # no bounding box: nothing is drawn
            else:
                x0, y0, x1, y1 = box
                base = compose(node.box.matrix, (x1 - x0, 0.0, 0.0, y1 - y0, x0, y0))
        if region is None:
            areas = []
            for item in node.items:
                area = _fill_area(_root_table([(item.path, compose(base, item.matrix))]),
                                  tol, item.rule)
                for inner in item.clips:
                    area = shapely.intersection(area, self._region(inner, tol))
                areas.append(area)
            region = shapely.union_all(areas) if areas else empty
            for other in node.within:
                region = shapely.intersection(region, self._region(other, tol))
        self._regions[key] = (node, region)        # (the node kept alive: ids stay unique)
        return region

    def _bbox(self, box):
        """The bounding box, in the box owner's user space, of what is drawn under it."""
        pts, offsets, _tol = self._flat
        owner = self.table.run_owner
        runs = np.flatnonzero((owner >= box.first_shape) & (owner < box.last_shape))
        chunks = [pts[offsets[r]:offsets[r + 1]] for r in runs]
        orders = {t.order for t in self.doc.texts[box.first_text:box.last_text]}
        chunks += [line for order, line, _i, _l, _c in self.text_lines if order in orders]
        if not chunks:
            return None
        xy = np.concatenate(chunks)
        try:
            inv = invert(box.matrix)
        except BadValue:
            return None
        a, b, c, d, e, f = inv
        x = a * xy[:, 0] + c * xy[:, 1] + e
        y = b * xy[:, 0] + d * xy[:, 1] + f
        x0, y0, x1, y1 = x.min(), y.min(), x.max(), y.max()
        if x1 <= x0 or y1 <= y0:
            return None                         # SVG 1.1, 7.11: no area, no bounding box
        return float(x0), float(y0), float(x1), float(y1)


# --- dashes ----------------------------------------------------------------------------------

def _dash_runs(pts: np.ndarray, offsets: np.ndarray, runs: np.ndarray, owner: np.ndarray,
               shapes: list, zero: np.ndarray) -> dict:
    """Cut dashed runs into dashes: {run: [dash points, ...]} (root user units).

    Notes
    -----
    SVG 1.1, 11.4 and SVG 2, 13.5.5 (stroke dashing): the lengths alternate dash, gap; the
    pattern starts `stroke-dashoffset` into itself at the start of each sub-path and repeats
    along it; the lengths are in the element's user units, measured along the path (scaled by
    length / pathLength when pathLength is given). Lengths are measured on the polyline mapped
    back into the element's user space, so that a transformed shape is dashed before it is
    transformed; an affine map keeps the ratios along each chord, so the cut points map back
    exactly. A zero-length dash is a dot when the line cap is round or square (else nothing).
    All runs are cut in whole-array operations on one arc-length axis.
    """
    shape_of = owner[runs]
    counts = offsets[runs + 1] - offsets[runs]
    point = concat_ranges(offsets[runs], counts)
    xy = pts[point]
    inv = np.array([_inverse_or_nan(shapes[i].matrix) for i in shape_of.tolist()])
    a, b, c, d, e, f = (np.repeat(inv[:, k], counts) for k in range(6))
    lx, ly = a * xy[:, 0] + c * xy[:, 1] + e, b * xy[:, 0] + d * xy[:, 1] + f
    step = np.hypot(np.diff(lx, prepend=lx[:1]), np.diff(ly, prepend=ly[:1]))
    run_first = np.cumsum(counts) - counts
    step[run_first] = 0.0
    cum = np.cumsum(step)
    local = cum - np.repeat(cum[run_first], counts)             # arc length within each run
    lengths = local[run_first + counts - 1]
    totals: dict = {}
    for i, length in zip(shape_of.tolist(), lengths.tolist()):
        totals[i] = totals.get(i, 0.0) + length
    # one axis for all runs: run k occupies [base_k, base_k + L_k]
    base = np.concatenate([[0.0], np.cumsum(lengths + 1.0)[:-1]])
    axis = local + np.repeat(base, counts)
    # runs with the same pattern are cut together, in the pattern's own units (pathLength
    # scales each run's lengths by its shape's total / pathLength)
    groups: dict = {}
    for k, (r, i, length) in enumerate(zip(runs.tolist(), shape_of.tolist(), lengths.tolist())):
        shape = shapes[i]
        if not np.isfinite(length):
            continue
        dash = shape.dash
        scale = totals[i] / dash.path_length if dash.path_length else 1.0
        key = (dash.pattern, dash.offset, bool(shape.dots))
        groups.setdefault(key, ([], [], []))
        g = groups[key]
        g[0].append(k)
        g[1].append(length)
        g[2].append(scale if scale > 0 else 1.0)
    ks, t0s, t1s, dots = [], [], [], []
    for (pattern, offset, with_dots), (kk, ll, ss) in groups.items():
        k_arr, length, scale = np.array(kk), np.array(ll), np.array(ss)
        pat = np.asarray(pattern, dtype=float)
        period = float(pat.sum())
        on_start = np.concatenate([[0.0], np.cumsum(pat)])[0:-1:2]
        on_len = pat[0::2]
        phase = offset % period
        span = length / scale                              # run lengths in pattern units
        nq = np.ceil((span + phase) / period).astype(np.int64) + 2
        nq[(length == 0) | zero[runs[k_arr]]] = 0             # no length: no dashes
        run_q = np.repeat(np.arange(len(k_arr)), nq)
        q = np.arange(nq.sum()) - np.repeat(np.cumsum(nq) - nq, nq) - 1
        starts = (on_start[None, :] + (period * q - phase)[:, None]).ravel()
        lens = np.tile(on_len, len(q))
        which = np.repeat(run_q, len(on_len))
        ends = starts + lens
        keep = (ends >= 0) & (starts <= span[which])
        starts, lens, which = starts[keep], lens[keep], which[keep]
        lo = np.clip(starts, 0.0, span[which]) * scale[which]
        hi = np.clip(starts + lens, 0.0, span[which]) * scale[which]
        dot = (lens == 0) & with_dots
        real = (hi > lo) | dot
        ks.append(k_arr[which[real]])
        t0s.append(lo[real] + base[k_arr[which[real]]])
        t1s.append(hi[real] + base[k_arr[which[real]]])
        dots.append(dot[real])
        if with_dots:                   # a sub-path with no length is one dot
            flat = (length == 0) | zero[runs[k_arr]]
            ks.append(k_arr[flat])
            t0s.append(base[k_arr[flat]])
            t1s.append(base[k_arr[flat]])
            dots.append(np.ones(int(flat.sum()), dtype=bool))
    out: dict = {}
    if not ks:
        return out
    k = np.concatenate(ks)
    if not len(k):
        return out
    t0, t1, dot = np.concatenate(t0s), np.concatenate(t1s), np.concatenate(dots)
    order = np.lexsort((t0, k))
    k, t0, t1, dot = k[order], t0[order], t1[order], dot[order]
    x, y = xy[:, 0], xy[:, 1]
    i0 = np.searchsorted(axis, t0, side="right")
    i1 = np.searchsorted(axis, t1, side="left")
    inner = np.where(dot, 0, np.maximum(i1 - i0, 0))
    n = np.where(dot, 1, inner + 2)
    first_at = np.cumsum(n) - n
    res = np.empty((int(n.sum()), 2))
    res[first_at, 0], res[first_at, 1] = np.interp(t0, axis, x), np.interp(t0, axis, y)
    last = first_at + n - 1
    end = ~dot
    res[last[end], 0], res[last[end], 1] = np.interp(t1[end], axis, x), np.interp(t1[end],
                                                                                  axis, y)
    if inner.sum():
        shift = np.arange(inner.sum()) - np.repeat(np.cumsum(inner) - inner, inner)
        res[np.repeat(first_at + 1, inner) + shift] = xy[np.repeat(i0, inner) + shift]
    for run_k, piece in zip(k.tolist(), np.split(res, first_at[1:])):
        out.setdefault(int(runs[run_k]), []).append(piece)
    return out


def _inverse_or_nan(m) -> tuple:
    try:
        return invert(m)
    except BadValue:
        return (math.nan,) * 6


# --- clip regions ----------------------------------------------------------------------------

def _fill_area(table: PathTable, tol: float, rule: str):
    """The area a path fills by its fill (clip) rule, as a shapely geometry.

    Notes
    -----
    SVG 1.1, 11.3 (fill-rule): a point is inside under "nonzero" when the rings wind round it a
    non-zero number of times, under "evenodd" when they cross a ray from it an odd number of
    times. Every sub-path is closed for filling. The rings are noded and polygonised into
    faces; each face is kept by the winding number of a point inside it.
    """
    import shapely

    pts, offsets = _flatten(table, tol)
    rings = []
    for r in range(len(offsets) - 1):
        ring = pts[offsets[r]:offsets[r + 1]]
        if len(ring) >= 3:
            if not np.array_equal(ring[0], ring[-1]):
                ring = np.vstack([ring, ring[:1]])
            rings.append(ring)
    if not rings:
        return shapely.Polygon()
    if len(rings) == 1:
        poly = shapely.Polygon(rings[0])
        if poly.is_valid:
            return poly
    lines = shapely.union_all([shapely.LineString(r) for r in rings])   # noded
    faces = list(shapely.get_parts(shapely.polygonize(shapely.get_parts(lines))))
    if not faces:
        return shapely.Polygon()
    probes = shapely.get_coordinates(shapely.point_on_surface(np.array(faces, dtype=object)))
    wind = _winding_numbers(probes, rings)
    keep = wind != 0 if rule == "nonzero" else (wind % 2) == 1
    kept = [f for f, k in zip(faces, keep) if k]
    return shapely.union_all(kept) if kept else shapely.Polygon()


def _winding_numbers(points: np.ndarray, rings: list) -> np.ndarray:
    """Winding number of every point about the rings (the sum over rings), by signed upward
    and downward crossings of a ray to +x (common practice, no source)."""
    seg_a = np.concatenate([r[:-1] for r in rings])
    seg_b = np.concatenate([r[1:] for r in rings])
    px, py = points[:, 0][:, None], points[:, 1][:, None]
    ax, ay, bx, by = seg_a[:, 0][None], seg_a[:, 1][None], seg_b[:, 0][None], seg_b[:, 1][None]
    cross = (bx - ax) * (py - ay) - (px - ax) * (by - ay)
    up = (ay <= py) & (by > py) & (cross > 0)
    down = (ay > py) & (by <= py) & (cross < 0)
    return up.sum(axis=1) - down.sum(axis=1)


def _clip_to_region(arrays: list, region) -> list:
    """The parts of each polyline inside a region, in drawing order.

    Segment by segment (a polyline that doubles back keeps both passes): segments the region
    covers stay whole; the others are intersected with it in one vectorised shapely call, and
    the kept parts are joined back into runs where they meet. A closed polyline whose first and
    last parts meet at its start is joined round it.
    """
    import shapely

    if region.is_empty:
        return []
    shapely.prepare(region)
    out = []
    lines = [a for a in arrays if len(a) >= 2]
    for a in arrays:
        if len(a) == 1 and region.covers(shapely.Point(a[0])):
            out.append(a)
    if not lines:
        return out
    p0 = np.concatenate([a[:-1] for a in lines])
    p1 = np.concatenate([a[1:] for a in lines])
    sid = np.repeat(np.arange(len(lines)), [len(a) - 1 for a in lines])
    segs = shapely.linestrings(np.stack([p0, p1], 1))
    whole = shapely.covers(region, segs)
    piece_seg, piece_a, piece_b, piece_t = [np.flatnonzero(whole)], [p0[whole]], [p1[whole]], \
        [np.zeros(int(whole.sum()))]
    todo = np.flatnonzero(~whole)
    if todo.size:
        parts, idx = shapely.get_parts(shapely.intersection(segs[todo], region),
                                       return_index=True)
        parts, idx2 = shapely.get_parts(parts, return_index=True)   # collections' members
        idx = idx[idx2]
        ok = (shapely.get_type_id(parts) == 1) & (shapely.length(parts) > 0)
        parts, seg = parts[ok], todo[idx[ok]]
        first = shapely.get_coordinates(shapely.get_point(parts, 0))
        last = shapely.get_coordinates(shapely.get_point(parts, -1))
        d = p1[seg] - p0[seg]
        dd = np.maximum(np.einsum("ij,ij->i", d, d), 1e-300)
        t_first = np.einsum("ij,ij->i", first - p0[seg], d) / dd
        t_last = np.einsum("ij,ij->i", last - p0[seg], d) / dd
        back = t_last < t_first
        a = np.where(back[:, None], last, first)
        b = np.where(back[:, None], first, last)
        piece_seg.append(seg)
        piece_a.append(a)
        piece_b.append(b)
        piece_t.append(np.minimum(t_first, t_last))
    seg = np.concatenate(piece_seg)
    a, b, t = np.concatenate(piece_a), np.concatenate(piece_b), np.concatenate(piece_t)
    order = np.lexsort((t, seg))
    seg, a, b = seg[order], a[order], b[order]
    if not len(seg):
        return out
    span = max(float(np.abs(p0).max()), float(np.abs(p1).max()), 1.0)
    eps = 1e-9 * span
    same_line = np.concatenate([[False], sid[seg[1:]] == sid[seg[:-1]]])
    meets = np.concatenate([[False], np.abs(a[1:] - b[:-1]).max(axis=1) <= eps])
    start = ~(same_line & meets)
    bounds = np.concatenate([np.flatnonzero(start), [len(seg)]])
    runs: dict = {}
    for lo, hi in zip(bounds[:-1], bounds[1:]):
        runs.setdefault(int(sid[seg[lo]]), []).append(np.vstack([a[lo:lo + 1], b[lo:hi]]))
    for line_id, group in runs.items():
        src = lines[line_id]
        # a closed line cut open at its start: its last run carries on into its first
        if len(group) > 1 and len(src) > 2 and np.array_equal(src[0], src[-1]) \
                and np.abs(group[0][0] - src[0]).max() <= eps \
                and np.abs(group[-1][-1] - src[-1]).max() <= eps:
            group = [np.vstack([group[-1], group[0][1:]])] + group[1:-1]
        out.extend(group)
    return out


# --- text ------------------------------------------------------------------------------------

def _set_texts(doc: Document, geo: "_RootGeometry") -> list:
    """Every text block's strokes as polylines in root user units."""
    if not doc.texts:
        return []
    from .sources import STROKE_FONTS

    if not STROKE_FONTS.names():
        geo.texts_undrawn = len(doc.texts)
        warnings.warn(f"{os.path.basename(doc.name)}: {len(doc.texts)} <text> element(s) not "
                      "drawn: no stroke font is registered (import the shapes package)",
                      VectorgenWarning, stacklevel=4)
        return []
    out = []
    for block in doc.texts:
        out.extend(_set_block(block, doc))
    return out


def _set_block(block, doc: Document) -> list:
    """SVG 1.1, 10.4 and SVG 2, 11.10.1 (text chunks and text-anchor): each absolute position
    starts a chunk; the runs of a chunk are set one after another; the whole chunk is then
    shifted so that its start (start), middle (middle) or end (end) of the advance is at the
    chunk's position. The baseline sits at y."""
    chunks, pen_x, pen_y = [], 0.0, 0.0
    for run in block.runs:
        if run.x is not None:
            pen_x = run.x
        if run.y is not None:
            pen_y = run.y
        pen_x, pen_y = pen_x + run.dx, pen_y + run.dy
        width = _advance(block, run.text, doc) * run.font_size * CAP_HEIGHT_PER_EM
        if run.chunk or not chunks:
            chunks.append([])
        chunks[-1].append((run, pen_x, pen_y, width))
        pen_x += width
    a, b, c, d, e, f = block.matrix
    out = []
    for chunk in chunks:
        run0, x0 = chunk[0][0], chunk[0][1]
        total = chunk[-1][1] + chunk[-1][3] - x0
        shift = {"start": 0.0, "middle": -total / 2.0, "end": -total}[run0.anchor]
        for run, x, y, width in chunk:
            if not run.visible or not run.text.strip():
                continue
            cap = run.font_size * CAP_HEIGHT_PER_EM
            glyphs = _glyphs(block, run.text, cap, run.intensity, doc)
            if glyphs is None:
                continue
            for line in glyphs:
                # font frame (+y up, line centred, baseline at -cap/2) -> the text's user space
                lx = x + shift + line[:, 0] + width / 2.0
                ly = y - (line[:, 1] + cap / 2.0)
                pts = np.column_stack([a * lx + c * ly + e, b * lx + d * ly + f])
                out.append((block.order, pts, run.intensity, run.label, block.clips))
    return out


def _printable(text: str) -> str:
    return "".join(ch if " " <= ch <= "~" else "?" for ch in text.replace("\u00a0", " "))


def _font_call(block, text: str, cap: float, intensity: float, doc: Document):
    from .sources import stroke_text

    try:
        return stroke_text(text, cap, "left", (0.0, 0.0), intensity)
    except InputError as exc:
        simple = _printable(text)
        if simple != text:
            warnings.warn(f"{os.path.basename(doc.name)}: {block.name}: {exc}; such characters "
                          "are drawn as '?'", VectorgenWarning, stacklevel=6)
            return stroke_text(simple, cap, "left", (0.0, 0.0), intensity)
        raise InputError(f"{doc.name}: {block.name}: {exc}") from None


def _glyphs(block, text: str, cap: float, intensity: float, doc: Document):
    strokes = _font_call(block, text, cap, intensity, doc)
    return list(strokes) if strokes.count else None


def _advance(block, text: str, doc: Document) -> float:
    """The advance width of `text` at cap height 1, from the font itself."""
    from .sources import STROKE_FONTS

    font = STROKE_FONTS.names()[0]
    try:
        return _advance_of(text, font)
    except InputError:
        return _advance_of(_printable(text), font)


@lru_cache(maxsize=4096)
def _advance_of(text: str, font: str) -> float:
    """The font sets a line left-aligned in a block centred on its position, so a line's first
    ink moves by half the block's width when the block widens: set alone (block width w) and
    above a line twice as long (block width 2 w), the first glyph moves by w / 2. A leading
    '|' gives every text some ink; its own advance is taken off. (`font`, the registered
    font's name, keys the cache.)"""
    from .sources import stroke_text

    def width(t: str) -> float:
        alone = stroke_text(t, 1.0, "left", (0.0, 0.0), 1.0).points[0, 0]
        under = stroke_text(t + "\n" + t + t, 1.0, "left", (0.0, 0.0), 1.0).points[0, 0]
        return 2.0 * float(alone - under)

    return width("|" + text) - width("|") if text else 0.0

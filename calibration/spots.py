"""From a photo of the screen to a filled measurement sheet.

1. Dots. The photo is read with Pillow (EXIF orientation applied) as grey levels (the brightest
   colour channel, so any phosphor colour counts), smoothed a little (scipy.ndimage.gaussian_filter)
   and thresholded at `threshold` of the way from the background (the median grey) to the
   brightest spot; the bright regions are labelled (scipy.ndimage.label, 8-connected) and each
   region's intensity-weighted centroid (scipy.ndimage.center_of_mass) is a dot. When that
   finds many regions much closer together than the targets (a cross shows as bright ends and
   a bright centre joined by dimmer arms), a second pass smooths at about half the distance
   between a mark's pieces, at most an eighth of the target spacing, so each cross becomes one
   symmetric blob centred on its target. Specks (area
   below `min_area`, by default a fifth of the typical dot) are dropped; regions more than four
   times the typical dot (merged dots, reflections) are set aside, never split by guesswork, and
   so are lopsided ones (the centroid of the whole region and of its bright core disagree: a
   stray spot merged into a mark), since their centroid would not be the target's.
   Pixel positions are (x = column, y = row from the top), the top-left pixel's centre at (0, 0).

2. Matching dots to targets. Targets are known by their place in the pattern only (the drive of
   a fit sheet, the intended mm of a check sheet), so matching works in that space and needs no
   measured millimetres: the four extreme targets along the diagonals are paired with
   the four extreme dots (the photo taken upright, not mirrored), a homography from drive to the
   photo predicts every target, each target takes the one dot within 0.4 of its spacing, the
   prediction is refitted from all matches (a homography, or a polynomial of degree 2 or 3 in
   drive once there are enough matches, to follow the pincushion) and this repeats until the
   matches settle. A target with no dot there is *missing*, one with two or more is
   *ambiguous*: both are reported and left empty, never invented.

3. Pixels to millimetres. A homography (normalised direct linear transform, least squares
   over four or more marks) from reference marks whose mm positions the user gives: either
   `--ref PX,PY=X,Y` (a mark's pixel position read in an image viewer, and its position on the
   face, e.g. graticule corners), or, without --ref, the sheet's rows already measured with a
   ruler (at least four, e.g. the four corners), whose dots the matching found. A flat face is
   a plane, so one homography maps the whole photo (lens distortion is not modelled: use the
   middle of the frame of a normal lens).
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass, field

import numpy as np

from vectorgen.errors import VectorgenError

MATCH_RADIUS = 0.4          # of the local target spacing
CORE = 0.75                 # a region's core: above this fraction of its own peak
LOPSIDED = 0.1              # core and whole centroids further apart than this x the radius
LOPSIDED_MIN_PX = 0.75      # ... and than this many pixels: the region is not one clean mark
JOIN_SPACING = 0.12         # smoothing that joins a mark's pieces: at most this x spacing
JOIN_PIECES = 0.6           # ... and this x the distance between neighbouring pieces
OVERSIZE = 4.0              # x the typical dot area
SPECK = 0.2                 # x the typical dot area
MAX_PIXELS = 100_000_000
MAX_ITER = 10
SHOW = 8

_REF = re.compile(r"^\s*([^,=]+),([^,=]+)=([^,=]+),([^,=]+)\s*$")


# --- homography ---------------------------------------------------------------------------------

def _normaliser(pts: np.ndarray) -> np.ndarray:
    """Similarity moving the points' centroid to 0 and their mean distance to sqrt(2)."""
    c = pts.mean(axis=0)
    d = np.hypot(*(pts - c).T).mean()
    s = np.sqrt(2.0) / d if d > 0 else 1.0
    return np.array([[s, 0.0, -s * c[0]], [0.0, s, -s * c[1]], [0.0, 0.0, 1.0]])


def apply_h(H: np.ndarray, pts) -> np.ndarray:
    pts = np.asarray(pts, dtype=float).reshape(-1, 2)
    h = np.column_stack([pts, np.ones(len(pts))]) @ H.T
    return h[:, :2] / h[:, 2:3]


def homography(src, dst) -> np.ndarray:
    """The 3 x 3 homography H with dst ~ H src, by the normalised direct linear transform
    (least squares for more than four points; from memory: the normalised DLT of Hartley and
    Zisserman's Multiple View Geometry). Raises VectorgenError when the points are degenerate
    (fewer than four, or three in a line among four)."""
    src = np.asarray(src, dtype=float).reshape(-1, 2)
    dst = np.asarray(dst, dtype=float).reshape(-1, 2)
    if len(src) < 4 or len(src) != len(dst):
        raise VectorgenError("a homography needs four or more point pairs")
    Ts, Td = _normaliser(src), _normaliser(dst)
    s = apply_h(Ts, src)
    d = apply_h(Td, dst)
    n = len(s)
    A = np.zeros((2 * n, 9))
    A[0::2, 0:2], A[0::2, 2] = s, 1.0
    A[0::2, 6:8] = -d[:, :1] * s
    A[0::2, 8] = -d[:, 0]
    A[1::2, 3:5], A[1::2, 5] = s, 1.0
    A[1::2, 6:8] = -d[:, 1:2] * s
    A[1::2, 8] = -d[:, 1]
    _, sv, vt = np.linalg.svd(A)
    # Degenerate configurations leave a second (near) null vector.
    if len(sv) >= 8 and sv[7] < 1e-9 * sv[0]:
        raise VectorgenError("the reference points are degenerate (three of them in a line?)")
    Hn = vt[-1].reshape(3, 3)
    H = np.linalg.inv(Td) @ Hn @ Ts
    if abs(H[2, 2]) < 1e-15:
        raise VectorgenError("the reference points are degenerate")
    return H / H[2, 2]


def _spread_ok(pts: np.ndarray) -> bool:
    """Points spanning two dimensions, no three-point line only."""
    if len(pts) < 4:
        return False
    c = pts - pts.mean(axis=0)
    s = np.linalg.svd(c, compute_uv=False)
    return bool(s[1] > 1e-6 * s[0]) if s[0] > 0 else False


# --- reading the photo and finding dots ---------------------------------------------------------

def read_photo(path: str) -> np.ndarray:
    """Grey levels (h, w) float32, 0..255 scale: the brightest colour channel of each pixel."""
    from PIL import Image, ImageOps, UnidentifiedImageError

    path = os.fspath(path)
    if not os.path.exists(path):
        raise VectorgenError(f"photo not found: {path}")
    if os.path.isdir(path):
        raise VectorgenError(f"photo is a folder, not a file: {path}")
    try:
        with Image.open(path) as im:
            if im.width * im.height > MAX_PIXELS:
                raise VectorgenError(f"{path}: {im.width} x {im.height} pixels is too large: "
                                     f"scale the photo down")
            im = ImageOps.exif_transpose(im)
            if im.mode in ("I;16", "I;16B", "I;16L", "I", "F"):
                arr = np.asarray(im, dtype=np.float32)
                top = float(arr.max()) or 1.0
                gray = arr * (255.0 / top) if top > 255 else arr
            else:
                arr = np.asarray(im.convert("RGB"), dtype=np.float32)
                gray = arr.max(axis=2)
    except VectorgenError:
        raise
    except (UnidentifiedImageError, OSError, ValueError, SyntaxError) as exc:
        raise VectorgenError(f"cannot read the photo {path}: not an image Pillow can open "
                             f"({type(exc).__name__})") from None
    if gray.ndim != 2 or min(gray.shape) < 16:
        raise VectorgenError(f"{path}: the photo is too small ({gray.shape[1]} x "
                             f"{gray.shape[0]} pixels)")
    return gray


@dataclass
class Dots:
    xy: np.ndarray              # (k, 2) centroids, pixels (x = column, y = row)
    area: np.ndarray            # (k,) pixels
    oversized: np.ndarray       # (j, 2) centroids of regions set aside as too large
    specks: int                 # regions dropped as too small
    threshold: float            # grey level used
    lopsided: np.ndarray = None  # (i, 2) centroids of regions set aside as not symmetric

    @property
    def suspect(self) -> np.ndarray:
        """Regions set aside (too large or lopsided): a target near one is ambiguous."""
        parts = [a for a in (self.oversized, self.lopsided) if a is not None and len(a)]
        return np.concatenate(parts) if parts else np.zeros((0, 2))


def _regions(gray: np.ndarray, sigma: float, threshold: float):
    """Label the regions brighter than `threshold` of the way from the background to the peak
    after Gaussian smoothing: (centroids (k, 2) x/y, areas, lopsidedness (k,), level) or None if
    nothing stands out. Lopsidedness is the distance between a region's centroid and the
    centroid of its bright core (above 75 % of its own peak), over the region's radius: a
    symmetric mark gives a few hundredths, a mark with a stray spot merged into it far more."""
    from scipy import ndimage

    sm = ndimage.gaussian_filter(gray, sigma)
    bg = float(np.median(sm))
    peak = float(sm.max())
    if peak - bg < 10.0:          # out of 255: nothing stands out of the background
        return None
    level = bg + threshold * (peak - bg)
    mask = sm > level
    lab, n = ndimage.label(mask, structure=np.ones((3, 3), dtype=bool))
    if n > 200_000:
        raise VectorgenError("the photo is all speckle at this threshold: raise --threshold")
    if n == 0:
        return None
    idx = np.arange(1, n + 1)
    area = ndimage.sum_labels(mask, lab, idx).astype(float)
    weight = np.clip(sm - bg, 0.0, None)
    rc = np.array(ndimage.center_of_mass(weight, lab, idx), dtype=float).reshape(-1, 2)
    top = np.asarray(ndimage.maximum(sm, lab, idx), dtype=float)
    core_level = np.concatenate([[np.inf], bg + CORE * (top - bg)])
    core = mask & (sm >= core_level[lab])
    cc = np.array(ndimage.center_of_mass(weight * core, lab, idx), dtype=float).reshape(-1, 2)
    shift = np.hypot(*(rc - cc).T)
    radius = np.sqrt(area / np.pi)
    lopsided = shift / np.maximum(radius, 1.0)
    lopsided[shift <= LOPSIDED_MIN_PX] = 0.0
    return rc[:, ::-1], area, lopsided, level


def find_dots(gray: np.ndarray, threshold: float = 0.35, min_area: int | None = None,
              expected: int | None = None) -> Dots:
    """The pattern's marks as dots. A cross is drawn with bright ends and dimmer arms, so a
    first pass (light smoothing) may find only its pieces; when many pieces lie much closer
    together than the targets (spacing estimated from the pieces' spread and the number of
    targets `expected`), a second pass smooths at about half the distance between a mark's
    pieces, which joins each cross into one symmetric blob centred on its target (dots are left
    as they are; neighbouring targets stay apart)."""
    if not 0.02 <= threshold <= 0.98:
        raise VectorgenError(f"--threshold must be between 0.02 and 0.98 (got {threshold:g})")
    if min_area is not None and min_area < 1:
        raise VectorgenError(f"--min-area must be at least 1 pixel (got {min_area})")
    empty = Dots(np.zeros((0, 2)), np.zeros(0), np.zeros((0, 2)), 0, 0.0, np.zeros((0, 2)))
    found = _regions(gray, 1.0, threshold)
    if found is None:
        return empty
    pieces = found[0][found[1] >= 2.0]
    if expected and len(pieces) >= 2:
        from scipy.spatial import cKDTree

        # Marks drawn in parts (a cross shows bright ends and centre joined by dimmer arms)
        # give pieces much closer to each other than the targets are. Join them by smoothing at
        # about half the distance between a mark's pieces, at most an eighth of the target
        # spacing (estimated from the pieces' spread and the number of targets).
        lo, hi = np.percentile(pieces, 2, axis=0), np.percentile(pieces, 98, axis=0)
        spacing = float(np.sqrt(np.prod(np.maximum(hi - lo, 1.0)) / expected))
        near = cKDTree(pieces).query(pieces, k=2)[0][:, 1]
        within = near[near < 0.5 * spacing]
        if len(within) >= 0.25 * len(near):
            sigma = min(JOIN_SPACING * spacing, JOIN_PIECES * float(np.median(within)))
            if sigma > 1.0:
                joined = _regions(gray, sigma, threshold)
                if joined is not None:
                    found = joined
    xy, area, lopsided, level = found
    typical = float(np.median(area))
    small = area < (min_area if min_area is not None else max(2.0, SPECK * typical))
    keep = ~small
    if keep.any():
        typical = float(np.median(area[keep]))
    big = keep & (area > OVERSIZE * typical)
    keep &= ~big
    odd = keep & (lopsided > LOPSIDED)
    keep &= ~odd
    return Dots(xy[keep], area[keep], xy[big], int(small.sum()), level, xy[odd])


# --- matching -----------------------------------------------------------------------------------

def _poly_basis(u: np.ndarray, degree: int) -> np.ndarray:
    x, y = u[:, 0], u[:, 1]
    cols = [np.ones_like(x)]
    for d in range(1, degree + 1):
        for i in range(d + 1):
            cols.append(x ** (d - i) * y ** i)
    return np.column_stack(cols)


class _Predictor:
    """Drive -> photo frame, refitted from the matches: homography or polynomial."""

    def __init__(self, drive: np.ndarray):
        self.mu = drive.mean(axis=0)
        sd = drive.std(axis=0)
        self.sd = np.where(sd > 0, sd, 1.0)
        self.kind, self.H, self.W, self.degree = "h", None, None, 0

    def _n(self, u):
        return (u - self.mu) / self.sd

    def fit(self, u: np.ndarray, f: np.ndarray) -> None:
        n = len(u)
        for degree in (3, 2):
            terms = (degree + 1) * (degree + 2) // 2
            if n >= 3 * terms:
                B = _poly_basis(self._n(u), degree)
                W, *_ = np.linalg.lstsq(B, f, rcond=None)
                self.kind, self.W, self.degree = "p", W, degree
                return
        self.kind, self.H = "h", homography(self._n(u), f)

    def __call__(self, u: np.ndarray) -> np.ndarray:
        if self.kind == "p":
            return _poly_basis(self._n(u), self.degree) @ self.W
        return apply_h(self.H, self._n(u))


def _extremes(pts: np.ndarray) -> np.ndarray:
    """Indices of the extreme points along the four diagonals (axes scaled to unit spread)."""
    c = (pts - pts.mean(axis=0)) / np.where(pts.std(axis=0) > 0, pts.std(axis=0), 1.0)
    dirs = np.array([[1.0, 1.0], [-1.0, 1.0], [-1.0, -1.0], [1.0, -1.0]])
    return np.argmax(c @ dirs.T, axis=0)


def match_targets(drive: np.ndarray, frame: np.ndarray):
    """Match targets (drive (n, 2)) to dots (frame (k, 2), +y up). Returns (dot index per
    target or -1, status per target: "ok" | "missing" | "ambiguous", predicted (n, 2), match
    radius per target)."""
    from scipy.spatial import cKDTree

    n = len(drive)
    if not _spread_ok(drive):
        raise VectorgenError("the sheet's targets do not span two dimensions: the photo needs "
                             "a pattern of at least two rows and two columns")
    ct, cd = _extremes(drive), _extremes(frame)
    if len(set(ct.tolist())) < 4 or len(set(cd.tolist())) < 4:
        raise VectorgenError("cannot find the pattern's four outer corners among the dots: "
                             "photograph the whole pattern, upright")
    pred = _Predictor(drive)
    try:
        pred.fit(drive[ct], frame[cd])
    except VectorgenError:
        raise VectorgenError("the outermost dots are in a line: cannot orient the pattern in "
                             "the photo") from None
    tree = cKDTree(frame)
    match = np.full(n, -1)
    status = ["missing"] * n
    for _ in range(MAX_ITER):
        p = pred(drive)
        spacing = cKDTree(p).query(p, k=2)[0][:, 1]
        cands = tree.query_ball_point(p, MATCH_RADIUS * spacing)
        new = np.array([c[0] if len(c) == 1 else -1 for c in cands])
        status = ["ok" if len(c) == 1 else ("missing" if not c else "ambiguous") for c in cands]
        if np.array_equal(new, match):
            break
        match = new
        ok = match >= 0
        if ok.sum() < 4:
            break
        try:
            pred.fit(drive[ok], frame[match[ok]])
        except VectorgenError:
            break
    p = pred(drive)
    return match, status, p, MATCH_RADIUS * cKDTree(p).query(p, k=2)[0][:, 1]


# --- references ---------------------------------------------------------------------------------

def parse_refs(items) -> list:
    """--ref values "PX,PY=X_MM,Y_MM" -> [((px, py), (x, y)), ...]."""
    from .sheet import parse_number

    refs = []
    for item in items:
        m = _REF.match(item)
        vals = None
        if m:
            try:
                vals = [parse_number(g) for g in m.groups()]
            except ValueError:
                vals = None
        if not vals or any(v is None for v in vals):
            raise VectorgenError(f"--ref must be PX,PY=X_MM,Y_MM, e.g. 412.5,300=-40,30 "
                                 f"(got {item!r})")
        refs.append(((vals[0], vals[1]), (vals[2], vals[3])))
    if len(refs) < 4:
        raise VectorgenError(f"give --ref at least four times (got {len(refs)}): a photo's "
                             f"perspective needs four marks")
    if not _spread_ok(np.array([r[0] for r in refs])) or \
            not _spread_ok(np.array([r[1] for r in refs])):
        raise VectorgenError("the --ref marks must not lie in a line: use marks near the four "
                             "corners")
    return refs


# --- the whole job ------------------------------------------------------------------------------

@dataclass
class SpotsResult:
    measured: np.ndarray        # (n, 2) the sheet's measured columns after filling
    filled: list                # names filled from the photo
    status: list                # per target: ok / missing / ambiguous / reference / kept
    dots_px: np.ndarray
    match: np.ndarray
    predicted_px: np.ndarray
    names: list
    gray: np.ndarray
    summary: str
    notes: list = field(default_factory=list)
    ref_rms_mm: float | None = None

    def write_overlay(self, path: str) -> str | None:
        """The photo with every dot found (blue), matched targets (green, named), missing
        (red x) and ambiguous (orange) targets at their predicted places. An existing file at
        `path` is kept as a numbered backup; returns its path (None: nothing to keep)."""
        import matplotlib

        matplotlib.use("Agg")
        from matplotlib.figure import Figure

        import io

        from vectorgen.files import write_with_backup

        h, w = self.gray.shape
        fig = Figure(figsize=(10, 10 * h / w), dpi=max(100, int(w / 10)))
        ax = fig.add_axes([0, 0, 1, 1])
        ax.imshow(self.gray, cmap="gray", vmin=0, vmax=255, interpolation="nearest")
        if len(self.dots_px):
            ax.plot(self.dots_px[:, 0], self.dots_px[:, 1], "o", mfc="none", mec="tab:blue",
                    ms=9, mew=0.8)
        for i, (name, st) in enumerate(zip(self.names, self.status)):
            x, y = self.predicted_px[i]
            if self.match[i] >= 0 and st not in ("missing", "ambiguous"):
                x, y = self.dots_px[self.match[i]]
                ax.plot(x, y, "+", color="tab:green", ms=8)
                ax.annotate(name, (x, y), color="tab:green", fontsize=6, xytext=(5, 5),
                            textcoords="offset points")
            else:
                col = "tab:red" if st == "missing" else "tab:orange"
                ax.plot(x, y, "x", color=col, ms=10, mew=1.5)
                ax.annotate(f"{name} {st}", (x, y), color=col, fontsize=7, xytext=(5, 5),
                            textcoords="offset points")
        ax.set_xlim(-0.5, w - 0.5)
        ax.set_ylim(h - 0.5, -0.5)
        ax.axis("off")
        buf = io.BytesIO()
        fig.savefig(buf, format="png")
        return write_with_backup(path, buf.getvalue(), (".png",))


def _names(names: list) -> str:
    return ", ".join(names[:SHOW]) + (f" and {len(names) - SHOW} more" if len(names) > SHOW
                                      else "")


def spots_to_sheet(photo: str, sheet, refs=None, threshold: float = 0.35,
                   min_area: int | None = None, overwrite: bool = False) -> SpotsResult:
    """Find the sheet's targets in the photo and work out their mm positions. The sheet object
    is not changed; the result holds the new measured columns."""
    gray = read_photo(photo)
    dots = find_dots(gray, threshold, min_area, expected=sheet.count)
    notes = []
    if len(dots.xy) == 0:
        raise VectorgenError(f"no dots found in {photo} (threshold {threshold:g}): is the "
                             f"pattern lit and in the frame? try a lower --threshold")
    if len(dots.xy) > 20 * sheet.count + 50:
        raise VectorgenError(f"{len(dots.xy)} bright spots in {photo} for {sheet.count} "
                             f"targets: too much clutter; darken the room or raise --threshold")
    if len(dots.xy) < 4:
        raise VectorgenError(f"only {len(dots.xy)} dot(s) found in {photo}: the matching needs "
                             f"at least four (try a lower --threshold)")
    if dots.specks:
        notes.append(f"{dots.specks} speck(s) smaller than a dot ignored")
    if len(dots.oversized):
        notes.append(f"{len(dots.oversized)} bright region(s) much larger than a dot set aside "
                     f"(merged dots or reflections) at pixel "
                     + "; ".join(f"{x:.0f},{y:.0f}" for x, y in dots.oversized[:SHOW]))
    if len(dots.lopsided):
        notes.append(f"{len(dots.lopsided)} lopsided dot(s) set aside (a stray spot merged into "
                     f"a mark?) at pixel "
                     + "; ".join(f"{x:.0f},{y:.0f}" for x, y in dots.lopsided[:SHOW]))

    if refs is not None:
        H_ref = homography([r[0] for r in refs], [r[1] for r in refs])
        frame = apply_h(H_ref, dots.xy)                        # mm, +y up
    else:
        H_ref = None
        frame = dots.xy * np.array([1.0, -1.0])                # upright photo: +y up
    match, status, pred_frame, radius = match_targets(sheet.coords, frame)
    suspect = dots.suspect
    if len(suspect):
        from scipy.spatial import cKDTree

        sf = apply_h(H_ref, suspect) if H_ref is not None else suspect * np.array([1.0, -1.0])
        near = cKDTree(sf).query(pred_frame)[0] <= radius
        status = ["ambiguous" if s == "missing" and nr else s for s, nr in zip(status, near)]
    ok = np.array([s == "ok" for s in status])
    if ok.sum() < 4:
        raise VectorgenError(f"could match only {int(ok.sum())} of {sheet.count} targets to "
                             f"the {len(dots.xy)} dots in {photo}: is it a photo of this sheet's "
                             f"pattern, whole and upright?")
    names = sheet.names
    missing = [n for n, s in zip(names, status) if s == "missing"]
    ambiguous = [n for n, s in zip(names, status) if s == "ambiguous"]
    if missing:
        notes.append(f"{len(missing)} target(s) without a dot, left empty: {_names(missing)}")
    if ambiguous:
        notes.append(f"{len(ambiguous)} target(s) with more than one dot nearby (or a dot "
                     f"set aside), left empty: {_names(ambiguous)}")
    unused = np.setdiff1d(np.arange(len(dots.xy)), match[ok])
    if len(unused):
        notes.append(f"{len(unused)} dot(s) match no target (pixel "
                     + "; ".join(f"{x:.0f},{y:.0f}" for x, y in dots.xy[unused][:SHOW]) + ")")

    px = np.full((sheet.count, 2), np.nan)
    px[ok] = dots.xy[match[ok]]
    filled_before = sheet.filled
    ref_rms = None
    if H_ref is None:
        use = ok & filled_before
        if use.sum() < 4 or not _spread_ok(sheet.measured[use]):
            raise VectorgenError(
                f"no reference marks: give --ref PX,PY=X_MM,Y_MM four times, or measure at "
                f"least four targets spread over the pattern (e.g. the four corners) with a "
                f"ruler and enter them in the sheet ({int(use.sum())} found in the photo)")
        H = homography(px[use], sheet.measured[use])
        back = apply_h(H, px[use])
        err = np.hypot(*(back - sheet.measured[use]).T)
        ref_rms = float(np.sqrt(np.mean(err ** 2)))
        if use.sum() > 4:
            worst = int(np.argmax(err))
            notes.append(f"the {int(use.sum())} measured rows agree with the photo to "
                         f"{ref_rms:.3f} mm RMS (worst {err[worst]:.3f} mm at "
                         f"{sheet.names_where(use)[worst]})")
    else:
        H = H_ref
    mm = np.full((sheet.count, 2), np.nan)
    mm[ok] = apply_h(H, px[ok])

    measured = sheet.measured.copy()
    filled, final = [], list(status)
    for i, name in enumerate(names):
        if not ok[i]:
            continue
        if filled_before[i] and (H_ref is None or not overwrite):
            final[i] = "reference" if H_ref is None else "kept"
            continue
        measured[i] = mm[i]
        filled.append(name)
    kept = [n for n, s in zip(names, final) if s == "kept"]
    if kept:
        notes.append(f"{len(kept)} row(s) already measured kept (--overwrite replaces them)")
    if H_ref is not None:
        pred_px = apply_h(np.linalg.inv(H_ref), pred_frame)
    else:
        pred_px = pred_frame * np.array([1.0, -1.0])
    summary = (f"found {len(dots.xy)} dot(s) in {photo}, matched {int(ok.sum())} of "
               f"{sheet.count} targets")
    return SpotsResult(measured, filled, final, dots.xy, match, pred_px, list(names), gray,
                       summary, notes, ref_rms)

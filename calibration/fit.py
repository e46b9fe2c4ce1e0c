"""Fit the deflection model to a filled measurement sheet, by least squares.

The model is the engine's (vectorgen/deflection.py, `DeflectionModel.drive_to_mm`):
p = D(A u + c), from drive u (full scale +-1) to the spot's position p in mm, with A the 2 x 2
gain matrix (columns = drive x, drive y), c the centring offset and D the pincushion about the tube
axis (k_radial, k_x, k_y, dimensionless, normalised by the usable area's half-diagonal R). The
residual of every filled row is DeflectionModel(...).drive_to_mm(u) - measured, minimised with
scipy.optimize.least_squares; a linear least-squares fit gives the starting point.

Terms (what is fitted), from the fewest unknowns to the most:
  gains       c and per-axis gains, A diagonal, no pincushion: 4 unknowns, needs >= 3 rows
  affine      c and the full A (gains, rotation, skew), no pincushion: 6 unknowns, >= 4 rows
              (4 rows give 8 equations: two to spare, so a misread point shows in the residuals)
  full        affine plus k_radial, k_x, k_y: 9 unknowns, >= 8 rows (16 equations)
  gains-only  with a base profile: A = A_base diag(g_x, g_y) and c; the base's rotation, skew and
              pincushion are kept: 4 unknowns, >= 3 rows (the quick box trim)
"auto" fits the most terms the rows allow. Whatever is asked, a stage also needs rows spread
enough to pin its unknowns (checked on the Jacobian); with too few, fewer terms are fitted and
the result says so; with too few for any, it is an error.

Report definitions (all from the fitted model unless said otherwise):
  gain_x_mm_per_fs = |A[:, 0]|, gain_y_mm_per_fs = |A[:, 1]|: mm on the face per full-scale drive
      (and mm per volt = gain / volts_full_scale when the profile records volts at full scale).
  rotation_deg = atan2(A[1, 0], A[0, 0]): the angle of the drive-x axis on the face from +x,
      counter-clockwise positive.
  skew_deg = (angle of A[:, 1] - angle of A[:, 0]) - 90 deg, wrapped to (-180, 180]: how far the
      drive axes are from perpendicular; positive when the angle between them exceeds 90 deg.
      A mirrored picture (det A < 0) is flagged, and its skew taken against -90 deg.
  rms_residual_mm = sqrt(mean |p_fit - p_measured|^2) over the rows used; max_residual_mm the
      largest |p_fit - p_measured| (and which point).
  linearity_x_pct, linearity_y_pct: the measured positions are fitted with the best straight-line
      (affine-only) model p = A' u + c' by linear least squares; each row's deviation from it is
      expressed in drive units, e = A'^-1 (p_measured - A' u - c'), and the linearity error of an
      axis is max |e| on that axis as a percentage of full scale (full-scale drive = 100 %, i.e.
      of the deflection from the centre to full scale). Needs >= 4 rows (else null). It
      describes the tube before correction; the fitted profile corrects it.
Each figure says how many targets it rests on. The residual of n targets and k unknowns has
2n - k coordinates to spare: with few to spare the model bends to the points and the residual
understates the error elsewhere (warned below MIN_SPREAD_ROWS targets or fewer spare coordinates
than unknowns). Linearity needs targets between the centre and the edge on both axes: below
MIN_SPREAD_ROWS targets (a 3 x 3 grid) or 3 distinct drive values per axis it cannot show the
curvature and is not comparable with a grid's (warned). The remaining error of the calibrated
tube is measured by the check pattern (calibration.check).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from vectorgen.deflection import DeflectionModel
from vectorgen.errors import VectorgenError

__all__ = ["DEFINITIONS", "FitResult", "check_model", "choose_stage", "circle_aspect",
           "figure_warnings", "fit_sheet", "fitted_profile", "geometry", "linearity",
           "make_report", "report_lines", "rewired", "spread_enough", "warnings_for",
           "write_arrows_png", "write_residual_png"]

TERMS = ("auto", "gains", "affine", "full")
STAGES = ("gains", "affine", "full")
MIN_ROWS = {"gains": 3, "affine": 4, "full": 8, "gains-only": 3}
N_UNKNOWNS = {"gains": 4, "affine": 6, "full": 9, "gains-only": 4}
DESCRIBE = {
    "gains": "offset and per-axis gains",
    "affine": "offset, gains, rotation and skew",
    "full": "offset, gains, rotation, skew and pincushion",
    "gains-only": "gains and offset (rotation, skew and pincushion kept from the base)",
}
K_LIMIT = 1.0          # the profile schema's bound on |k|
MIN_SPREAD_ROWS = 9    # a 3 x 3 grid: fewer cannot show curvature or pin a residual

DEFINITIONS = {
    "gain_x_mm_per_fs": "mm on the face per full-scale drive x (|A[:, 0]|)",
    "gain_y_mm_per_fs": "mm on the face per full-scale drive y (|A[:, 1]|)",
    "rotation_deg": "angle of the drive-x axis on the face from +x, counter-clockwise",
    "skew_deg": "how far the drive axes are from perpendicular",
    "offset_x_mm": "where zero drive lands, x",
    "offset_y_mm": "where zero drive lands, y",
    "rms_residual_mm": "RMS of |measured - fitted position| over the targets used: how well the "
                       "fitted model matches them",
    "max_residual_mm": "the largest |measured - fitted position| (at worst_point)",
    "linearity_x_pct": "largest deviation of the uncorrected tube from its best straight-line "
                       "fit, x, as % of full scale (the profile corrects it)",
    "linearity_y_pct": "largest deviation of the uncorrected tube from its best straight-line "
                       "fit, y, as % of full scale (the profile corrects it)",
    "spare_coordinates": "measured coordinates beyond the unknowns fitted (2 per target less "
                         "the unknowns): the room the residual has to show errors",
    "max_drive_usable_area": "the largest drive the usable area needs with the fitted model",
}


@dataclass
class FitResult:
    model: DeflectionModel
    terms: str                      # stage fitted
    asked: str                      # stage asked for
    names: list                     # points used
    drive: np.ndarray               # (n, 2)
    measured: np.ndarray            # (n, 2) mm
    predicted: np.ndarray           # (n, 2) mm, the fitted model at the drive
    skipped: list                   # points left out (no or half measurements)
    report: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)

    @property
    def residuals(self) -> np.ndarray:
        return self.measured - self.predicted


# --- parameters <-> model -----------------------------------------------------------------------

def _model(stage: str, theta: np.ndarray, base: DeflectionModel) -> DeflectionModel:
    R = base.norm_radius
    if stage == "gains":
        a00, a11, c0, c1 = theta
        return DeflectionModel(np.array([[a00, 0.0], [0.0, a11]]), np.array([c0, c1]),
                               0.0, 0.0, 0.0, R)
    if stage == "affine":
        return DeflectionModel(theta[:4].reshape(2, 2), theta[4:6].copy(), 0.0, 0.0, 0.0, R)
    if stage == "full":
        kr, kx, ky = theta[6:9]
        return DeflectionModel(theta[:4].reshape(2, 2), theta[4:6].copy(), kr, kx, ky, R)
    if stage == "gains-only":
        gx, gy, c0, c1 = theta
        return DeflectionModel(base.matrix @ np.diag([gx, gy]), np.array([c0, c1]),
                               base.k_radial, base.k_x, base.k_y, R)
    raise ValueError(stage)


def _start(stage: str, u: np.ndarray, p: np.ndarray, base: DeflectionModel) -> np.ndarray:
    """A starting point: the linear least-squares answer with no pincushion."""
    if stage == "gains-only":
        return np.array([1.0, 1.0, *base.offset])
    ones = np.ones(len(u))
    if stage == "gains":
        (ax, cx), *_ = np.linalg.lstsq(np.column_stack([u[:, 0], ones]), p[:, 0], rcond=None)
        (ay, cy), *_ = np.linalg.lstsq(np.column_stack([u[:, 1], ones]), p[:, 1], rcond=None)
        return np.array([ax, ay, cx, cy])
    B, *_ = np.linalg.lstsq(np.column_stack([u, ones]), p, rcond=None)     # (3, 2)
    theta = np.concatenate([B[:2].T.ravel(), B[2]])
    return np.concatenate([theta, np.zeros(3)]) if stage == "full" else theta


def _residual_fn(stage, u, p, base):
    def fun(theta):
        return (_model(stage, theta, base).drive_to_mm(u) - p).ravel()
    return fun


def _jacobian(fun, theta: np.ndarray) -> np.ndarray:
    """Central differences, steps scaled to each parameter."""
    cols = []
    for j in range(len(theta)):
        h = 1e-6 * max(1.0, abs(theta[j]))
        tp, tm = theta.copy(), theta.copy()
        tp[j] += h
        tm[j] -= h
        cols.append((fun(tp) - fun(tm)) / (2 * h))
    return np.column_stack(cols)


def _pinned(fun, theta: np.ndarray) -> bool:
    """True when the rows pin every unknown: the column-normalised Jacobian has full rank."""
    J = _jacobian(fun, theta)
    norms = np.linalg.norm(J, axis=0)
    if np.any(norms == 0):
        return False
    s = np.linalg.svd(J / norms, compute_uv=False)
    return bool(s[-1] > 1e-6 * s[0])


# --- the report's quantities --------------------------------------------------------------------

def _wrap_deg(a: float) -> float:
    a = (a + 180.0) % 360.0 - 180.0
    return 180.0 if a == -180.0 else a


def geometry(A: np.ndarray) -> dict:
    """Gains, rotation and skew of a gain matrix A (see the module docstring)."""
    A = np.asarray(A, dtype=float)
    ang0 = math.degrees(math.atan2(A[1, 0], A[0, 0]))
    ang1 = math.degrees(math.atan2(A[1, 1], A[0, 1]))
    mirrored = bool(np.linalg.det(A) < 0)
    between = _wrap_deg(ang1 - ang0)
    skew = _wrap_deg(between + 90.0) if mirrored else _wrap_deg(between - 90.0)
    return {"gain_x_mm_per_fs": float(np.hypot(A[0, 0], A[1, 0])),
            "gain_y_mm_per_fs": float(np.hypot(A[0, 1], A[1, 1])),
            "rotation_deg": ang0, "skew_deg": skew, "mirrored": mirrored}


def linearity(u: np.ndarray, p: np.ndarray) -> tuple[float | None, float | None]:
    """Per-axis linearity error, % of full scale (see the module docstring)."""
    if len(u) < 4:
        return None, None
    X = np.column_stack([u, np.ones(len(u))])
    if np.linalg.matrix_rank(X) < 3:
        return None, None
    B, *_ = np.linalg.lstsq(X, p, rcond=None)
    A, c = B[:2].T, B[2]
    if abs(np.linalg.det(A)) < 1e-12:
        return None, None
    e = np.linalg.solve(A, (p - u @ A.T - c).T).T
    return float(100 * np.abs(e[:, 0]).max()), float(100 * np.abs(e[:, 1]).max())


def spread_enough(u: np.ndarray) -> bool:
    """Whether targets can show a tube's curvature: at least MIN_SPREAD_ROWS of them with 3 or
    more distinct drive values on each axis (a 3 x 3 grid does; the box's corners do not).

    Examples
    --------
    >>> g = np.linspace(-0.8, 0.8, 3)
    >>> spread_enough(np.column_stack([a.ravel() for a in np.meshgrid(g, g)]))
    True
    >>> spread_enough(np.array([[0, 0], [-1, 1], [1, 1], [-1, -1], [1, -1]]) * 0.8)
    False
    """
    u = np.asarray(u, dtype=float)
    distinct = [len(np.unique(np.round(u[:, j], 6))) for j in (0, 1)]
    return len(u) >= MIN_SPREAD_ROWS and min(distinct) >= 3


def circle_aspect(names: list, p: np.ndarray) -> float | None:
    """Horizontal over vertical diameter, from the circle pattern's E, W, N and S points."""
    at = {n: i for i, n in enumerate(names)}
    if not all(k in at for k in ("E", "W", "N", "S")):
        return None
    h = np.hypot(*(p[at["E"]] - p[at["W"]]))
    v = np.hypot(*(p[at["N"]] - p[at["S"]]))
    return float(h / v) if v > 0 else None


def area_samples(screen, n: int = 41) -> np.ndarray:
    """Points filling the usable area and its outline (mm)."""
    return screen.samples(n)


def check_model(model: DeflectionModel, screen) -> dict:
    """Invertibility over the usable area (an error if the picture folds), the largest drive
    the area needs and the inverse's worst round trip there."""
    pts = area_samples(screen)
    try:
        drive = model.mm_to_drive(pts)
    except VectorgenError as exc:
        raise VectorgenError(f"the fitted model cannot be inverted over the usable area ({exc}); "
                             f"check the measurements (mm from the centre, +x right, +y up)"
                             ) from None
    back = model.drive_to_mm(drive)
    return {"max_drive_usable_area": float(np.abs(drive).max()),
            "inverse_roundtrip_um": float(1000 * np.abs(back - pts).max())}


# --- the fit ------------------------------------------------------------------------------------

def choose_stage(asked: str, n_rows: int, u, p, base: DeflectionModel, gains_only: bool,
                 notes: list) -> str:
    if gains_only:
        fun = _residual_fn("gains-only", u, p, base)
        if n_rows < MIN_ROWS["gains-only"] or not _pinned(fun, _start("gains-only", u, p, base)):
            raise VectorgenError(f"too few measured targets for a gains trim: {n_rows} row(s); "
                                 f"it needs at least {MIN_ROWS['gains-only']} spread over both "
                                 f"axes (the box pattern's five)")
        return "gains-only"
    top = len(STAGES) - 1 if asked == "auto" else STAGES.index(asked)
    why = ""
    for i in range(top, -1, -1):
        stage = STAGES[i]
        if n_rows >= MIN_ROWS[stage] and _pinned(_residual_fn(stage, u, p, base),
                                                 _start(stage, u, p, base)):
            if i < top:
                wanted = "all terms" if asked == "auto" else f"{asked} terms"
                notes.append(f"fitted {stage} terms only, not {wanted}: {why}")
            return stage
        if not why:     # the reason the first choice failed
            why = (f"{n_rows} measured row(s), {stage} needs {MIN_ROWS[stage]}"
                   if n_rows < MIN_ROWS[stage] else
                   f"the {n_rows} measured targets are not spread enough to pin {stage} terms")
    raise VectorgenError(f"too few measured targets for any fit: {why} (measure at least "
                         f"{MIN_ROWS['gains']} targets spread over both axes, not in one line)")


def fit_sheet(sheet, base_profile, terms: str = "auto", gains_only: bool = False) -> FitResult:
    """Fit the model to the sheet's filled rows. `base_profile` gives the screen (and, with
    gains_only, the rotation, skew and pincushion that are kept)."""
    from scipy.optimize import least_squares

    if terms not in TERMS:
        raise VectorgenError(f"unknown terms {terms!r}: choose from " + ", ".join(TERMS))
    if gains_only and terms not in ("auto",):
        raise VectorgenError("--gains-only fits the gains and offset only: leave out --terms")
    filled = sheet.filled
    skipped = sheet.names_where(~filled)
    if not filled.any():
        raise VectorgenError(f"{sheet.path}: no measurements: fill measured_x_mm and "
                             f"measured_y_mm (mm from the centre of the face, +x right, +y up)")
    u = sheet.drive[filled]
    p = sheet.measured[filled]
    names = sheet.names_where(filled)
    base = DeflectionModel.from_profile(base_profile)
    notes: list = []
    asked = "gains-only" if gains_only else terms
    stage = choose_stage(terms, len(u), u, p, base, gains_only, notes)

    fun = _residual_fn(stage, u, p, base)
    theta0 = _start(stage, u, p, base)
    res = least_squares(fun, theta0, x_scale="jac", method="trf", xtol=1e-12, ftol=1e-12,
                        gtol=1e-12, max_nfev=2000)
    if not res.success or not np.all(np.isfinite(res.x)):
        raise VectorgenError(f"the fit did not converge ({res.message}); check the "
                             f"measurements")
    model = _model(stage, res.x, base)
    for key, k in (("k_radial", model.k_radial), ("k_x", model.k_x), ("k_y", model.k_y)):
        if not abs(k) < K_LIMIT:
            raise VectorgenError(f"the fit found {key} = {k:+.3f}, not a plausible tube: check "
                                 f"the measurements (in mm? signs +x right, +y up?) or fit "
                                 f"with --terms affine")
    if abs(np.linalg.det(model.matrix)) < 1e-9 * np.abs(model.matrix).max() ** 2:
        raise VectorgenError("the fitted gains are singular: the measurements do not move "
                             "with the drive")
    predicted = model.drive_to_mm(u)
    result = FitResult(model, stage, asked, names, u, p, predicted, skipped, notes=notes)
    result.report = make_report(result, base_profile, sheet)
    return result


def make_report(result: FitResult, profile, sheet=None) -> dict:
    m = result.model
    geo = geometry(m.matrix)
    dist = np.hypot(*result.residuals.T)
    worst = int(np.argmax(dist))
    lx, ly = linearity(result.drive, result.measured)
    n = len(result.names)
    unknowns = N_UNKNOWNS[result.terms]
    rep = {
        "terms_fitted": result.terms,
        "terms_asked": result.asked,
        "rows_used": n,
        "rows_skipped": list(result.skipped),
        "unknowns": unknowns,
        "spare_coordinates": 2 * n - unknowns,
        "linearity_rows": n if lx is not None else 0,
        "linearity_spread": bool(lx is not None and spread_enough(result.drive)),
        **geo,
        "offset_x_mm": float(m.offset[0]),
        "offset_y_mm": float(m.offset[1]),
        "k_radial": float(m.k_radial),
        "k_x": float(m.k_x),
        "k_y": float(m.k_y),
        "rms_residual_mm": float(np.sqrt(np.mean(dist ** 2))),
        "max_residual_mm": float(dist[worst]),
        "worst_point": result.names[worst],
        "linearity_x_pct": lx,
        "linearity_y_pct": ly,
        "matrix_mm": m.matrix.tolist(),
    }
    vfs = profile.output.volts_full_scale
    if vfs:
        rep["gain_x_mm_per_volt"] = geo["gain_x_mm_per_fs"] / vfs
        rep["gain_y_mm_per_volt"] = geo["gain_y_mm_per_fs"] / vfs
    rep.update(check_model(m, profile.screen))
    from .wiring import diagnose

    wiring = diagnose(m.matrix, profile.output.order, profile.output.invert)
    rep.update(wiring.report())
    rep["wiring_lines"] = list(wiring.lines)
    rep["definitions"] = dict(DEFINITIONS)
    aspect = circle_aspect(result.names, result.measured)
    if aspect is not None:
        rep["circle_aspect"] = aspect
    if sheet is not None:
        rep["sheet"] = sheet.path
    return rep


def fitted_profile(base_profile, result: FitResult, kind: str | None = None,
                   anode_kv: float | None = None, name: str | None = None):
    """A copy of the base profile with the fitted deflection model (screen, output and beam
    kept)."""
    from vectorgen.profile import profile_from_dict, profile_to_dict

    prof = base_profile.copy()
    d = prof.deflection
    m = result.model
    d.matrix_mm = [[float(v) for v in row] for row in m.matrix]
    d.offset_mm = [float(v) for v in m.offset]
    d.k_radial, d.k_x, d.k_y = float(m.k_radial), float(m.k_x), float(m.k_y)
    d.calibrated = True
    if kind is not None:
        d.kind = kind
    if anode_kv is not None:
        d.anode_kv = float(anode_kv)
    if name is not None:
        prof.name = name
    # It must load back exactly as it will be read.
    profile_from_dict(profile_to_dict(prof), "<fitted profile>")
    return prof


def _targets(n: int) -> str:
    return f"{n} target" + ("" if n == 1 else "s")


def report_lines(rep: dict) -> list[str]:
    """The report for the terminal, each figure defined where it is printed and with the number
    of targets it rests on."""
    n = rep["rows_used"]
    lines = [f"fitted {DESCRIBE[rep['terms_fitted']]}: {rep['unknowns']} unknowns from "
             f"{_targets(n)} ({2 * n} coordinates, {rep['spare_coordinates']} to spare)"
             + (f"; {len(rep['rows_skipped'])} left out" if rep["rows_skipped"] else "")]
    g = (f"gain x {rep['gain_x_mm_per_fs']:.3f} mm/FS"
         + (f" ({rep['gain_x_mm_per_volt']:.4f} mm/V)" if "gain_x_mm_per_volt" in rep else "")
         + f", y {rep['gain_y_mm_per_fs']:.3f} mm/FS"
         + (f" ({rep['gain_y_mm_per_volt']:.4f} mm/V)" if "gain_y_mm_per_volt" in rep else "")
         + " (mm on the face per full-scale drive); rotation of the drive-x axis from +x "
         + f"{rep['rotation_deg']:+.3f} deg, skew (drive axes off perpendicular) "
         + f"{rep['skew_deg']:+.3f} deg" + (" (mirrored)" if rep["mirrored"] else ""))
    lines.append(g)
    k = (f"pincushion k_radial {rep['k_radial']:+.4f}, k_x {rep['k_x']:+.4f}, "
         f"k_y {rep['k_y']:+.4f}")
    said = []
    if rep["terms_fitted"] == "gains-only":
        said.append("kept")
    if rep.get("area_changed"):
        said.append("normalised to the new usable area's half-diagonal")
    if said:
        k += f" ({'; '.join(said)})"
    if rep["terms_fitted"] in ("gains", "affine"):
        k = "pincushion not fitted (0)"
    lines.append(f"offset (where zero drive lands) {rep['offset_x_mm']:+.3f}, "
                 f"{rep['offset_y_mm']:+.3f} mm; {k}")
    lines.append(f"residual of the fitted model (|measured - fitted position| over the "
                 f"{_targets(n)}): RMS {rep['rms_residual_mm']:.3f} mm, worst "
                 f"{rep['max_residual_mm']:.3f} mm at {rep['worst_point']}")
    if rep["linearity_x_pct"] is None:
        lines.append("linearity of the uncorrected tube: not measured (it needs 4 targets or "
                     "more, spread over both axes)")
    else:
        few = ("" if rep["linearity_spread"] else
               f" (only {_targets(rep['linearity_rows'])}: not comparable with a grid's)")
        lines.append(f"linearity of the uncorrected tube (largest deviation of the measured "
                     f"positions from its best straight-line fit, % of full scale, "
                     f"{_targets(rep['linearity_rows'])}): x {rep['linearity_x_pct']:.2f} %, y "
                     f"{rep['linearity_y_pct']:.2f} %{few}")
    if "circle_aspect" in rep:
        lines.append(f"circle aspect (horizontal / vertical diameter) "
                     f"{rep['circle_aspect']:.4f}")
    return lines


def figure_warnings(rep: dict) -> list[str]:
    """Warnings for figures that rest on too few targets (see the module docstring).

    Examples
    --------
    >>> rep = {"rows_used": 5, "unknowns": 4, "spare_coordinates": 6, "linearity_x_pct": 0.1,
    ...        "linearity_rows": 5, "linearity_spread": False}
    >>> [w.split(",")[0].split(" (")[0] for w in figure_warnings(rep)]
    ['the residual rests on 5 targets', 'the linearity rests on 5 targets']
    """
    out = []
    n, k = rep["rows_used"], rep["unknowns"]
    spare = rep["spare_coordinates"]
    if n < MIN_SPREAD_ROWS or spare < k:
        out.append(f"the residual rests on {_targets(n)} ({spare} coordinates to spare for "
                   f"{k} unknowns): the model bends to these points, so it shows how well it "
                   f"fits them, not the error elsewhere on the face; measure that with `vectorgen "
                   f"pattern check` and `vectorgen check`")
    if rep["linearity_x_pct"] is not None and not rep["linearity_spread"]:
        out.append(f"the linearity rests on {_targets(rep['linearity_rows'])}, too few to show "
                   f"the tube's curvature (it needs a grid of at least 3 x 3 targets): do not "
                   f"compare it with a grid's figure")
    return out


def warnings_for(rep: dict) -> list[str]:
    """Every warning about a fit: figures on too few targets, and the wiring diagnosis."""
    return figure_warnings(rep) + list(rep.get("wiring_lines", []))


def rewired(result: FitResult, wiring) -> FitResult:
    """The fit written for the channel map that undoes a wiring mistake (`wiring.order`,
    `.invert`): the same tube and spots, drive in the new map's signals, u' = P^T u (P is a
    signed permutation) and A' = A P."""
    m = result.model
    P = wiring.permutation
    model = DeflectionModel(wiring.matrix.copy(), m.offset.copy(), m.k_radial, m.k_x, m.k_y,
                            m.norm_radius)
    return FitResult(model, result.terms, result.asked, list(result.names), result.drive @ P,
                     result.measured, result.predicted, list(result.skipped),
                     notes=list(result.notes))


# --- residual picture ---------------------------------------------------------------------------

def _nice(x: float) -> float:
    """The largest of 1, 2, 5 x 10^k not above x (at least 1)."""
    if not x > 1:
        return 1.0
    e = math.floor(math.log10(x))
    for m in (5, 2, 1):
        if m * 10 ** e <= x:
            return float(m * 10 ** e)
    return float(10 ** e)


def write_residual_png(path: str, result: FitResult, screen, title: str = ""
                       ) -> tuple[float, str | None]:
    """Arrows from each target's fitted position to its measured position, magnified so the
    longest is about a tenth of the width. An existing picture at `path` is kept as a numbered
    backup. Returns (the magnification, the backup's path or None)."""
    return write_arrows_png(path, result.predicted, result.residuals, result.names, screen,
                            "fitted position", title or _fit_title(result))


def _fit_title(result: FitResult) -> str:
    rep = result.report
    return (f"fit residuals ({result.terms}): RMS {rep.get('rms_residual_mm', 0):.3f} mm, "
            f"worst {rep.get('max_residual_mm', 0):.3f} mm")


def write_arrows_png(path: str, origins: np.ndarray, arrows: np.ndarray, names: list, screen,
                     origin_label: str, title: str) -> tuple[float, str | None]:
    """Arrows `arrows` (mm) from `origins` (mm) over the usable area, magnified so the longest
    is about a tenth of the width; the three longest are named. An existing picture at `path` is
    kept as a numbered backup. Returns (the magnification, the backup's path or None)."""
    import io

    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    from vectorgen.files import write_with_backup

    w, h = screen.half_extent
    r = np.asarray(arrows, dtype=float)
    longest = float(np.hypot(*r.T).max()) if len(r) else 0.0
    mag = _nice(0.2 * w / longest) if longest > 0 else 1.0
    fig = Figure(figsize=(7, 7 * h / w + 0.6), dpi=110)
    ax = fig.subplots()
    out = screen.outline(721)
    ax.plot(out[:, 0], out[:, 1], color="0.6", lw=0.8)
    pf = np.asarray(origins, dtype=float)
    ax.plot(pf[:, 0], pf[:, 1], "o", ms=3, color="tab:blue", label=origin_label)
    ax.quiver(pf[:, 0], pf[:, 1], r[:, 0] * mag, r[:, 1] * mag, angles="xy",
              scale_units="xy", scale=1.0, width=0.004, color="tab:red",
              label=f"to measured, magnified x{mag:g}")
    d = np.hypot(*r.T)
    for i in np.argsort(-d)[:3]:
        if d[i] > 0:
            ax.annotate(f"{names[i]} {d[i]:.2f} mm", pf[i], fontsize=7,
                        xytext=(4, 4), textcoords="offset points")
    ax.set_aspect("equal")
    ax.set_xlim(-1.15 * w, 1.15 * w)
    ax.set_ylim(-1.15 * h, 1.15 * h)
    ax.set_xlabel("x (mm)")
    ax.set_ylabel("y (mm)")
    ax.grid(alpha=0.25)
    ax.set_title(f"{title} (arrows x{mag:g})", fontsize=9)
    ax.legend(loc="lower right", fontsize=7)
    fig.tight_layout()
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    return mag, write_with_backup(path, buf.getvalue(), (".png",))

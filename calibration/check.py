"""The check step: the remaining error of a calibrated tube, from the check pattern's sheet.

The check pattern (`calibration.patterns`, kind "check") draws targets at known places in mm
through the calibrated profile; its sheet lists where each should land (target_x_mm,
target_y_mm). Measured where they do land, the differences e = measured - target are what is
left after calibration: the error a drawing on this tube really has. Unlike the fit's residual,
nothing is fitted to these points, so no figure here bends towards the measurements.

Figures, over the n targets measured (rows with both measured cells):
  rms_mm        sqrt(mean |e|^2), the RMS distance from target
  rms_x_mm      sqrt(mean e_x^2) (and y)
  worst_mm      max |e| (at worst_point), the figure the verdict uses
  worst_x_mm    max |e_x| (and y)
  mean_x_mm     mean e_x (and y): a shift of the whole picture (re-centre, or trim the offset)
  scale_x_pct   100 s_x from the least-squares line measured_x = (1 + s_x) target_x + b_x
                (and y): the picture drawn too wide (+) or too narrow (-), e.g. gains drifted
                (trim with the box pattern and `fit --gains-only`); needs 3 distinct targets
                on the axis
The verdict: within tolerance when worst_mm <= tolerance_mm.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from vectorgen.errors import InputError

__all__ = ["MIN_CHECK_ROWS", "CheckResult", "check_sheet"]

MIN_CHECK_ROWS = 9      # fewer cannot speak for the whole face (a 3 x 3 lattice)


@dataclass
class CheckResult:
    """The remaining error of a calibrated tube (see the module docstring for the figures).

    Attributes
    ----------
    names : list of str
        The targets measured.
    target, measured : (n, 2) ndarray
        mm.
    skipped : list of str
        Targets without both measurements.
    tolerance_mm : float
    figures : dict
        The figures of the module docstring, and `passed`, `beyond` (targets over tolerance).
    notes : list of str
        Warnings (figures on too few targets).
    """

    names: list
    target: np.ndarray
    measured: np.ndarray
    skipped: list
    tolerance_mm: float
    figures: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)

    @property
    def error(self) -> np.ndarray:
        return self.measured - self.target

    @property
    def passed(self) -> bool:
        return bool(self.figures["passed"])

    def lines(self) -> list[str]:
        """The result for the terminal, each figure defined where it is printed."""
        f = self.figures
        n = len(self.names)
        out = [f"remaining error of the calibrated tube (measured - target position, {n} "
               f"target{'s' if n != 1 else ''}, nothing fitted to them): RMS {f['rms_mm']:.3f} "
               f"mm (x {f['rms_x_mm']:.3f}, y {f['rms_y_mm']:.3f}); worst {f['worst_mm']:.3f} mm "
               f"at {f['worst_point']}; worst per axis x {f['worst_x_mm']:.3f}, y "
               f"{f['worst_y_mm']:.3f} mm"]
        scale = []
        for ax in "xy":
            s = f.get(f"scale_{ax}_pct")
            if s is not None:
                scale.append(f"{ax} {s:+.2f} %")
        out.append(f"shift of the whole picture (mean error) x {f['mean_x_mm']:+.3f}, y "
                   f"{f['mean_y_mm']:+.3f} mm"
                   + (f"; size against the targets (least-squares scale - 1) {', '.join(scale)}"
                      if scale else ""))
        if self.passed:
            out.append(f"within tolerance: worst {f['worst_mm']:.3f} mm <= {self.tolerance_mm:g}"
                       f" mm")
        else:
            b = f["beyond"]
            shown = ", ".join(b[:8]) + (f" and {len(b) - 8} more" if len(b) > 8 else "")
            out.append(f"NOT within tolerance: worst {f['worst_mm']:.3f} mm > "
                       f"{self.tolerance_mm:g} mm at {len(b)} of {n} targets ({shown})")
        return out

    def report(self) -> dict:
        return {**self.figures, "tolerance_mm": self.tolerance_mm, "rows_used": len(self.names),
                "rows_skipped": list(self.skipped), "points": list(self.names),
                "error_mm": self.error.tolist()}


def _scale_pct(target: np.ndarray, measured: np.ndarray) -> float | None:
    """100 s from the least-squares line measured = (1 + s) target + b; None without 3 distinct
    targets."""
    if len(np.unique(np.round(target, 6))) < 3:
        return None
    slope, _b = np.polyfit(target, measured, 1)
    return float(100.0 * (slope - 1.0))


def check_sheet(sheet, tolerance_mm: float) -> CheckResult:
    """The remaining error of the calibrated tube from a filled check sheet.

    Parameters
    ----------
    sheet : calibration.sheet.Sheet
        A check sheet (targets in mm) with measurements.
    tolerance_mm : float
        The largest distance from target the user accepts, mm.

    Returns
    -------
    CheckResult

    Raises
    ------
    InputError
        A fit sheet, no measurements, or a tolerance that is not a number > 0.

    Notes
    -----
    e = measured - target; RMS = sqrt(mean |e|^2), worst = max |e|; within tolerance when
    worst <= tolerance_mm.

    Examples
    --------
    >>> import numpy as np
    >>> from calibration.sheet import Sheet
    >>> t = np.array([[-10.0, 0.0], [0.0, 0.0], [10.0, 0.0], [0.0, 10.0]])
    >>> sh = Sheet("<s>", list("abcd"), None, t + [0.3, 0.4], [], "check", t)
    >>> r = check_sheet(sh, 0.4)
    >>> round(r.figures["rms_mm"], 9), round(r.figures["worst_mm"], 9), r.passed
    (0.5, 0.5, False)
    """
    if not (np.isfinite(tolerance_mm) and tolerance_mm > 0):
        raise InputError(f"the tolerance must be a distance > 0 mm (tolerance_mm="
                         f"{tolerance_mm})", "tolerance_mm")
    if sheet.kind != "check":
        raise InputError(f"{sheet.path}: a fit sheet (drive_x, drive_y): the check reads the "
                         f"check pattern's sheet (target_x_mm, target_y_mm)", "sheet")
    filled = sheet.filled
    if not filled.any():
        raise InputError(f"{sheet.path}: no measurements: fill measured_x_mm and measured_y_mm "
                         f"(mm from the centre of the face, +x right, +y up)", "sheet")
    names = sheet.names_where(filled)
    target = sheet.target_mm[filled]
    measured = sheet.measured[filled]
    e = measured - target
    dist = np.hypot(e[:, 0], e[:, 1])
    worst = int(np.argmax(dist))
    figures = {
        "rms_mm": float(np.sqrt(np.mean(dist ** 2))),
        "rms_x_mm": float(np.sqrt(np.mean(e[:, 0] ** 2))),
        "rms_y_mm": float(np.sqrt(np.mean(e[:, 1] ** 2))),
        "worst_mm": float(dist[worst]),
        "worst_point": names[worst],
        "worst_x_mm": float(np.abs(e[:, 0]).max()),
        "worst_y_mm": float(np.abs(e[:, 1]).max()),
        "mean_x_mm": float(e[:, 0].mean()),
        "mean_y_mm": float(e[:, 1].mean()),
        "scale_x_pct": _scale_pct(target[:, 0], measured[:, 0]),
        "scale_y_pct": _scale_pct(target[:, 1], measured[:, 1]),
        "passed": bool(dist[worst] <= tolerance_mm),
        "beyond": [n for n, d in zip(names, dist) if d > tolerance_mm],
    }
    notes = []
    if len(names) < MIN_CHECK_ROWS:
        notes.append(f"the check rests on {len(names)} measured target(s): too few to speak for "
                     f"the whole face (measure at least {MIN_CHECK_ROWS}, spread over it)")
    return CheckResult(names, target, measured, sheet.names_where(~filled), float(tolerance_mm),
                       figures, notes)

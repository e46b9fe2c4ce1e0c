"""Wiring diagnosis from a fitted gain matrix: mirrored axes, swapped X/Y, inverted polarity.

A pattern puts drive u (the "x" and "y" signals, before the profile's channel map) on the beam;
the fit finds A, whose column j is where the spot moves, in mm, per unit of signal j. On a tube
wired as the profile says, drive x moves the spot right (+x) and drive y moves it up (+y), apart
from a small rotation of the yoke. Anything else is a wiring (or channel map) mistake, and the
column directions say which one:

    drive x moves the spot   drive y moves it   finding
    right                    up                 as the profile says
    left                     up                 x inverted (mirrored)
    right                    down               y inverted (mirrored)
    left                     down               both inverted (the picture turned 180 deg)
    up or down               right or left      X and Y swapped (and maybe inverted)

Each interface channel reaches one coil (or plate pair) with some polarity. From the columns:
the channel that carries signal s reaches the coil of axis a_s = the axis column s points along,
with wiring polarity w = pol(s) * sign of column s on that axis, pol(s) = -1 when the profile
inverts s. The channel map that undoes the mistake sends signal t to the channel reaching coil t,
inverted when that channel's w = -1. Under it the same channel values need signals u' with
u = P u', P[s, a_s] = pol(s) pol'(a_s), so the fitted tube reads A' = A P: the same tube, the
same spots, with drive x moving right and drive y moving up.

Whether to change anything: a fitted matrix already contains the mistake, so drawings come out
right as they are. An inverted polarity can be left to the profile. Swapped axes should be
fixed, because everything per axis ([response], `pattern step --axis`, the report's gains)
names the interface channel, which then drives the other axis. Changing [output] by hand after
the fit applies the correction twice; `fit --fix-wiring` writes both the map and A' together.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

__all__ = ["AXIS_TOLERANCE_DEG", "Wiring", "diagnose"]

AXIS_TOLERANCE_DEG = 30.0       # a drive axis within this of a face axis is taken as along it
DIRECTIONS = ("right", "up", "left", "down")        # +x, +y, -x, -y


@dataclass
class Wiring:
    """What the fitted matrix says about the wiring.

    Attributes
    ----------
    finding : str
        "as-profile" (drive x right, drive y up), "x-inverted", "y-inverted", "both-inverted",
        "swapped" (possibly with inversions: see `inverted`), or "unclear" (a drive axis far
        from both face axes, or both along one).
    moves : tuple of str
        Where drive x and drive y move the spot ("right", "up", ...; "" when unclear).
    swapped : bool
    inverted : list of str
        The tube axes ("x", "y") whose polarity is the opposite of what the profile says.
    order, invert : list of str or None
        The [output] order and invert that fix it (None when nothing needs fixing).
    matrix : (2, 2) ndarray or None
        The fitted matrix under that order and invert (A' = A P).
    permutation : (2, 2) ndarray or None
        P: old signals u = P u'.
    rotation_deg : float or None
        The yoke's rotation left once the mistake is undone.
    lines : list of str
        The diagnosis for the terminal.
    """

    finding: str
    moves: tuple
    swapped: bool = False
    inverted: list = field(default_factory=list)
    order: list | None = None
    invert: list | None = None
    matrix: np.ndarray | None = None
    permutation: np.ndarray | None = None
    rotation_deg: float | None = None
    lines: list = field(default_factory=list)

    @property
    def needs_fix(self) -> bool:
        return self.order is not None

    def report(self) -> dict:
        return {"wiring": self.finding, "wiring_moves": list(self.moves),
                "wiring_swapped": self.swapped, "wiring_inverted": list(self.inverted),
                "wiring_fix_order": self.order, "wiring_fix_invert": self.invert,
                "wiring_text": " ".join(self.lines)}


def _nearest_axis(column: np.ndarray) -> tuple[int, float]:
    """The face direction a drive axis points along (0 +x, 1 +y, 2 -x, 3 -y) and how far off
    it is, degrees."""
    ang = math.degrees(math.atan2(column[1], column[0]))
    k = int(round(ang / 90.0)) % 4
    off = (ang - 90.0 * k + 180.0) % 360.0 - 180.0
    return k, off


def _toml_list(names) -> str:
    return "[" + ", ".join(f'"{n}"' for n in names) + "]"


def diagnose(matrix, order, invert) -> Wiring:
    """The wiring the fitted `matrix` shows, against the profile's [output] `order` and
    `invert` (what the pattern was drawn with).

    Parameters
    ----------
    matrix : (2, 2) array
        A, mm per full-scale drive, columns = drive x, drive y.
    order : list of str
        [output] order of the profile the pattern was drawn through.
    invert : list of str
        [output] invert of that profile.

    Returns
    -------
    Wiring

    Notes
    -----
    A' = A P with P[s, a_s] = pol(s) pol'(a_s) (see the module notes).

    Examples
    --------
    >>> w = diagnose([[0.0, 50.0], [40.0, 0.0]], ["x", "y", "z"], [])
    >>> w.finding, w.moves, w.order, w.invert, w.matrix.tolist()
    ('swapped', ('up', 'right'), ['y', 'x', 'z'], [], [[50.0, 0.0], [0.0, 40.0]])
    >>> diagnose([[-50.0, 0.0], [0.0, 40.0]], ["x", "y"], []).finding
    'x-inverted'
    """
    A = np.asarray(matrix, dtype=float)
    order = list(order)
    pol = {s: (-1.0 if s in invert else 1.0) for s in ("x", "y")}
    kx, offx = _nearest_axis(A[:, 0])
    ky, offy = _nearest_axis(A[:, 1])
    if max(abs(offx), abs(offy)) > AXIS_TOLERANCE_DEG or kx % 2 == ky % 2:
        ang = [math.degrees(math.atan2(A[1, j], A[0, j])) for j in (0, 1)]
        return Wiring("unclear", ("", ""), lines=[
            f"wiring: drive x moves the spot at {ang[0]:+.0f} deg and drive y at {ang[1]:+.0f} "
            f"deg from +x: not along the face's axes, so no wiring mistake can be named (is the "
            f"yoke turned on the neck? the profile corrects any rotation)"])
    moves = (DIRECTIONS[kx], DIRECTIONS[ky])
    coil = {"x": "xy"[kx % 2], "y": "xy"[ky % 2]}            # the coil signal s reaches
    wire = {"x": pol["x"] * (1.0 if kx < 2 else -1.0),        # that channel's wiring polarity
            "y": pol["y"] * (1.0 if ky < 2 else -1.0)}
    new_pol = {coil[s]: wire[s] for s in ("x", "y")}
    new_order = [coil[s] if s in coil else s for s in order]
    new_invert = [t for t in ("x", "y") if new_pol[t] < 0]
    P = np.zeros((2, 2))
    for i, s in enumerate("xy"):
        P[i, "xy".index(coil[s])] = pol[s] * new_pol[coil[s]]
    A2 = A @ P
    rotation = math.degrees(math.atan2(A2[1, 0], A2[0, 0]))
    swapped = coil["x"] == "y"
    inverted = [t for t in ("x", "y") if new_pol[t] != pol[t]]
    said = f"drive x moves the spot {moves[0]}, drive y moves it {moves[1]}"
    if not swapped and not inverted:
        return Wiring("as-profile", moves, rotation_deg=rotation)
    fix = f"[output] order = {_toml_list(new_order)}" if swapped else ""
    if new_invert != sorted(invert):
        fix += (", " if fix else "") + f"[output] invert = {_toml_list(new_invert)}"
    w = Wiring("swapped" if swapped else
               "both-inverted" if len(inverted) == 2 else f"{inverted[0]}-inverted",
               moves, swapped, inverted, new_order, new_invert, A2, P, rotation)
    if swapped:
        what = "X and Y are swapped" + (
            f", and the tube's {' and '.join(inverted)} inverted" if inverted else "")
        w.lines = [
            f"wiring: {what}: {said}",
            f"fix it (everything per axis, [response], pattern step --axis and the gains above, "
            f"names interface channels that drive the other axis): fit again with --fix-wiring, "
            f"which sets {fix} and turns the matrix to match (no new measurements), or swap the "
            f"X and Y cables and run the pattern and the fit again. Do not change [output] by "
            f"hand on top of this fit: that swaps the picture back"]
    else:
        what = ("both axes are inverted, the picture turned 180 deg" if len(inverted) == 2
                else f"the {inverted[0]} axis is inverted, the picture mirrored")
        hint = ("" if len(inverted) == 2 else
                f" (or the measurements were taken with "
                f"{'+x left' if inverted[0] == 'x' else '+y down'}: measure +x right, +y up)")
        leads = " and ".join(i.upper() for i in inverted)
        w.lines = [
            f"wiring: {what}: {said}{hint}",
            f"leave it to the profile: the fitted matrix already contains the inversion, so "
            f"drawings come out right; nothing to change. (--fix-wiring writes it as {fix} with "
            f"the matrix to match, so the gains read positive; swapping the {leads} deflection "
            f"leads fixes it at the source, then run the pattern and the fit again.) Do not set "
            f"[output] invert by hand on top of this fit: that "
            f"{'turns' if len(inverted) == 2 else 'mirrors'} the picture again"]
    return w

"""The usable area a fitted tube reaches within full scale.

A fit tells where full-scale drive puts the spot. When the tube has less gain than the usable
area declared in the profile, drawings near the edge of that area need more than full scale and
are refused; when it has more, part of the face is never used. `reach_scale` works out the
largest area of the declared shape that the tube reaches, and `with_area` writes it into a
profile without changing the model.

Notes
-----
The region the spot reaches with every channel within full scale is the image F(S) of the drive
square S = [-L, L]^2 under the forward model F(u) = D(A u + c). F is continuous and one-to-one
on S (checked: its Jacobian keeps one sign there), so F(S) is a closed region bounded by the
curve F(dS). A centred rectangle (half sizes s w, s h), or a centred disc (radius s r), that
contains the spot at zero deflection lies inside F(S) exactly when no point of that boundary
curve lies inside it. So the largest scale is

    s* = min over u on dS of  N(F(u)),   N(q) = max(|q_x| / w, |q_y| / h)   (rectangle)
                                         N(q) = |q| / r                      (round)

found by sampling dS densely and refining each local minimum with a bounded scalar search.

The pincushion terms are normalised by the usable area's half-diagonal R (its radius when
round): D scales x by 1 + k_r (x^2 + y^2) / R^2 + k_x y^2 / R^2. A new area with radius R'
describes the same tube with k' = k (R' / R)^2, which `with_area` applies.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from vectorgen.correction import TRUE_PEAK_SLACK
from vectorgen.errors import InputError, ProfileError
from vectorgen.screen import Screen

__all__ = ["AREA_DRIVE_LIMIT", "AREA_MODES", "AreaChoice", "choose_area", "reach_scale",
           "scaled_screen", "screen_text", "with_area"]

AREA_MODES = ("shrink", "reach", "keep")
# The area is reached with every channel within this much of full scale: strokes along its edge
# overshoot a little between samples (the true peak), and the render lets through no more than
# TRUE_PEAK_SLACK beyond full scale, so the same slack is kept inside it.
AREA_DRIVE_LIMIT = 1.0 - TRUE_PEAK_SLACK
SIDE_SAMPLES = 1024         # points per side of the drive square on the first pass
ROUND_MM = 0.01             # written sizes are rounded down to this (a hair inside full scale)
REFINE_CANDIDATES = 6       # local minima refined by the bounded search


def _square_edge(tau: np.ndarray, limit: float) -> np.ndarray:
    """Points on the edge of the drive square [-limit, limit]^2, tau in [0, 4) once round it
    counter-clockwise from (-limit, -limit)."""
    tau = np.asarray(tau, dtype=float) % 4.0
    side = np.minimum(np.floor(tau), 3).astype(int)
    f = 2.0 * (tau - side) - 1.0
    x = np.choose(side, [f, np.ones_like(f), -f, -np.ones_like(f)])
    y = np.choose(side, [-np.ones_like(f), f, np.ones_like(f), -f])
    return limit * np.column_stack([x, y])


def _norm(q: np.ndarray, screen: Screen) -> np.ndarray:
    """The scale of `screen` on whose edge each point q lies (the N(q) of the module notes)."""
    if screen.round:
        return np.hypot(q[:, 0], q[:, 1]) / screen.radius_mm
    w, h = screen.half_extent
    return np.maximum(np.abs(q[:, 0]) / w, np.abs(q[:, 1]) / h)


def _folds(model, limit: float, n: int = 41) -> bool:
    """Whether the forward map changes orientation within the drive square (central
    differences of drive_to_mm on an n x n lattice)."""
    g = np.linspace(-limit, limit, n)
    u = np.column_stack([a.ravel() for a in np.meshgrid(g, g)])
    h = 1e-6 * limit
    dx = (model.drive_to_mm(u + [h, 0.0]) - model.drive_to_mm(u - [h, 0.0])) / (2 * h)
    dy = (model.drive_to_mm(u + [0.0, h]) - model.drive_to_mm(u - [0.0, h])) / (2 * h)
    det = dx[:, 0] * dy[:, 1] - dx[:, 1] * dy[:, 0]
    return not (np.all(det > 0) or np.all(det < 0))


def reach_scale(model, screen: Screen, limit: float = 1.0) -> float:
    """The largest scale s at which `screen`, scaled by s about the face centre, lies wholly
    within reach of the model with every drive channel within +-limit.

    Parameters
    ----------
    model : vectorgen.deflection.DeflectionModel
        The tube: p = D(A u + c), u in full-scale units, p in mm.
    screen : vectorgen.screen.Screen
        Its shape and aspect ratio (rectangle) set the shape of the area; its size is the unit.
    limit : float
        Full scale, in drive units (1.0).

    Returns
    -------
    float
        s (1.0: the screen as given is just reached; below 1: it must shrink).

    Raises
    ------
    InputError
        The spot at the face centre is beyond full scale (no area is reached), or the model
        folds within full scale (the reached region has no simple edge).

    Notes
    -----
    s* = min over the edge u of the drive square of N(F(u)); see the module notes.

    Examples
    --------
    >>> import numpy as np
    >>> from vectorgen.deflection import DeflectionModel
    >>> m = DeflectionModel(np.diag([45.0, 40.0]), np.zeros(2))
    >>> round(reach_scale(m, Screen(width_mm=100.0, height_mm=80.0)), 9)
    0.9
    """
    from scipy.optimize import minimize_scalar

    centre = model.mm_to_drive(np.zeros((1, 2)))[0]
    if np.abs(centre).max() >= limit:
        raise InputError(f"the face centre needs drive ({centre[0]:+.3f}, {centre[1]:+.3f}): "
                         f"beyond full scale, so no usable area is reached (check offset_mm)",
                         "offset_mm")
    if _folds(model, limit):
        raise InputError("the model folds within full scale (check k_radial, k_x, k_y): the "
                         "area it reaches has no simple edge", "k_radial")
    n = 4 * SIDE_SAMPLES
    tau = np.arange(n) * (4.0 / n)

    def cost(t):
        return float(_norm(model.drive_to_mm(_square_edge(np.atleast_1d(t), limit)),
                           screen)[0])

    vals = _norm(model.drive_to_mm(_square_edge(tau, limit)), screen)
    best = float(vals.min())
    prev, nxt = np.roll(vals, 1), np.roll(vals, -1)
    minima = np.flatnonzero((vals <= prev) & (vals <= nxt))
    for i in minima[np.argsort(vals[minima])][:REFINE_CANDIDATES]:
        lo, hi = tau[i] - 4.0 / n, tau[i] + 4.0 / n
        res = minimize_scalar(cost, bounds=(lo, hi), method="bounded",
                              options={"xatol": 1e-10})
        best = min(best, float(res.fun))
    return best


def scaled_screen(screen: Screen, scale: float, round_mm: float = ROUND_MM) -> Screen:
    """`screen` scaled by `scale` about its centre, sizes rounded down to `round_mm`.

    Examples
    --------
    >>> scaled_screen(Screen(width_mm=100.0, height_mm=80.0), 0.987654)
    Screen(shape='rectangle', width_mm=98.76, height_mm=79.01, diameter_mm=0.0)
    """
    def down(v):
        return math.floor(v / round_mm + 1e-9) * round_mm

    if screen.round:
        return Screen("round", diameter_mm=round(down(scale * screen.diameter_mm), 6))
    return Screen("rectangle", width_mm=round(down(scale * screen.width_mm), 6),
                  height_mm=round(down(scale * screen.height_mm), 6))


def screen_text(screen: Screen) -> str:
    """'176.43 x 132.32 mm' or 'round, 98.5 mm across'.

    Examples
    --------
    >>> screen_text(Screen(width_mm=180.0, height_mm=135.0))
    '180 x 135 mm'
    """
    if screen.round:
        return f"round, {screen.diameter_mm:.6g} mm across"
    return f"{screen.width_mm:.6g} x {screen.height_mm:.6g} mm"


def with_area(profile, screen: Screen):
    """A copy of `profile` whose usable area is `screen`, describing the same tube: the
    pincushion terms are rescaled to the new area's normalising radius.

    Raises
    ------
    ProfileError
        A rescaled pincushion term would leave the profile's range (|k| < 1).

    Notes
    -----
    k' = k (R' / R)^2, R and R' the old and new half-diagonals (radii when round).

    Examples
    --------
    >>> from vectorgen.profile import Profile
    >>> p = Profile()
    >>> p.deflection.k_radial = 0.08
    >>> q = with_area(p, Screen(width_mm=50.0, height_mm=40.0))
    >>> round(q.deflection.k_radial, 12), q.screen.width_mm
    (0.02, 50.0)
    """
    out = profile.copy()
    factor = (screen.norm_radius / profile.screen.norm_radius) ** 2
    d = out.deflection
    for key in ("k_radial", "k_x", "k_y"):
        k = getattr(d, key) * factor
        if not abs(k) < 1.0:
            raise ProfileError(f"on a usable area of {screen_text(screen)} the tube's {key} "
                               f"would be {k:+.3f}, beyond the profile's range (|k| < 1)", key)
        setattr(d, key, float(k))
    out.screen = Screen(screen.shape, screen.width_mm, screen.height_mm, screen.diameter_mm)
    return out


@dataclass
class AreaChoice:
    """What the fit decided about the usable area.

    Attributes
    ----------
    mode : str
        "shrink", "reach" or "keep" (see `choose_area`).
    declared : Screen
        The area of the profile the fit started from.
    reached : Screen or None
        The largest area of its shape the fitted tube reaches within full scale (rounded down
        to 0.01 mm); None when it could not be worked out.
    written : Screen
        The area written into the fitted profile.
    scale : float or None
        reached / declared (unrounded).
    why : str
        Why it could not be worked out (when `reached` is None).
    limit : float
        The drive the reached area needs at most, full-scale units.
    """

    mode: str
    declared: Screen
    reached: Screen | None
    written: Screen
    scale: float | None
    why: str = ""
    limit: float = AREA_DRIVE_LIMIT

    @property
    def changed(self) -> bool:
        return self.written != self.declared

    def report(self) -> dict:
        def dims(s):
            if s is None:
                return None
            return ({"shape": "round", "diameter_mm": s.diameter_mm} if s.round else
                    {"shape": "rectangle", "width_mm": s.width_mm, "height_mm": s.height_mm})
        return {"area_mode": self.mode, "area_declared": dims(self.declared),
                "area_reached": dims(self.reached), "area_written": dims(self.written),
                "area_scale": self.scale, "area_changed": self.changed,
                "area_drive_limit": self.limit}

    def text(self) -> str:
        """One line for the terminal: what the tube reaches and what was written."""
        dec, wr = screen_text(self.declared), screen_text(self.written)
        if self.reached is None:
            return (f"usable area: [screen] kept at {dec} (the area the tube reaches could not "
                    f"be worked out: {self.why})")
        reach = (f"usable area (the largest of this shape the fitted tube reaches with both "
                 f"channels within {100 * self.limit:.4g} % of full scale): "
                 f"{screen_text(self.reached)}")
        if self.mode == "keep":
            return (f"{reach}; [screen] kept at {dec} as asked (--area keep)"
                    + ("" if self.scale >= 1 else ": drawings near its edge will be refused"))
        if self.changed:
            return f"{reach}; [screen] set to {wr}, was {dec} (--area keep keeps the old one)"
        if self.scale > 1:
            return (f"{reach}; [screen] kept at {dec}: the fit never enlarges it unless asked "
                    f"(--area reach, if the face is that large)")
        return f"{reach}; [screen] kept at {dec}"


def choose_area(model, declared: Screen, mode: str = "shrink",
                limit: float = AREA_DRIVE_LIMIT) -> AreaChoice:
    """The usable area to write for a fitted tube.

    Parameters
    ----------
    model : DeflectionModel
        The fitted tube.
    declared : Screen
        The area the fit started from (shape and aspect ratio kept).
    mode : {"shrink", "reach", "keep"}
        shrink: the largest area the tube reaches, but never larger than `declared`;
        reach: that area, larger or smaller; keep: `declared` as it is.
    limit : float
        The drive the area may need, full-scale units (AREA_DRIVE_LIMIT: 99.8 % of full scale).

    Returns
    -------
    AreaChoice

    Examples
    --------
    >>> import numpy as np
    >>> from vectorgen.deflection import DeflectionModel
    >>> m = DeflectionModel(np.diag([45.0, 40.0]), np.zeros(2))
    >>> choose_area(m, Screen(width_mm=100.0, height_mm=80.0), limit=1.0).written
    Screen(shape='rectangle', width_mm=90.0, height_mm=72.0, diameter_mm=0.0)
    """
    if mode not in AREA_MODES:
        raise InputError(f"area must be one of {', '.join(AREA_MODES)} (area={mode!r})", "area")
    try:
        s = reach_scale(model, declared, limit)
    except InputError as exc:
        return AreaChoice(mode, declared, None, declared, None, str(exc), limit)
    reached = scaled_screen(declared, s)
    if mode == "keep" or (mode == "shrink" and s >= 1.0):
        written = declared
    else:
        written = reached
    return AreaChoice(mode, declared, reached, written, s, "", limit)

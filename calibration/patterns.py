"""Calibration test patterns: targets at known drive positions, drawn through the current profile.

Every target is defined by its drive u (full-scale units), the value the beam gets there. The
strokes are made in drive units and mapped to mm with the *current* profile's forward model
p = D(A u + c); the renderer applies that profile's exact inverse, so at each target the beam
sits at exactly the recorded drive, whatever the profile says about the tube. Measuring where
the spots really land then tells the true forward model.

Patterns
  grid    rows x cols targets on a regular lattice in drive space, centred on zero drive, as
          large as fits in `extent` of the usable area (judged with the current profile). For the
          full fit and for linearity.
  box     five targets, the centre and the four corners of the same lattice: a quick gain trim.
  circle  a circle in the drawing (mm) with ticks at eight points every 45 degrees and a cross at
          the centre: an aspect check. The circle is defined in mm, not drive: a correct profile
          makes it land as a circle, and its horizontal and vertical diameters are equal. Its
          targets' drive values are the current profile's inverse at those points.
  check   rows x cols targets on a regular lattice in mm over `extent` of the usable area, drawn
          through a calibrated profile: where each should land is known in mm, so measuring
          where they do land gives the remaining error of the calibrated tube (its sheet lists
          target_x_mm, target_y_mm; see calibration.check).

Patterns without targets (no measurement sheet), read off a scope or the tube instead
  step     a slow square wave of jumps on one axis, straight to the channels with the beam
           blanked (`step_signal`): the scope captures the yoke current for
           `vectorgen fit-response`.
  ztiming  rows of dashes drawn alternately left to right and right to left over a scale of
           ticks (`ztiming_strokes`): where the dash ends land tells how early or late Z acts.

Targets are marked with a small cross (two short strokes through the target and a dot on it) or
with a dot alone (`mark="dot"`). A cross is easier to read with a ruler and spreads the beam's
dwell; its intensity centroid is the target, so a photo finds it as well as a dot. But a cross
costs a frame more than twice what a dot does, so the patterns with many targets (grid, check)
mark them with dots by default and the few-target ones (box, circle) with crosses
(`DEFAULT_MARK`): each refreshes at 40 Hz or more at 48 kHz at its defaults.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from vectorgen.channels import ChannelMap
from vectorgen.deflection import DeflectionModel
from vectorgen.errors import VectorgenError
from vectorgen.strokes import Strokes, strokes_from_polylines

__all__ = ["COLS", "DEFAULT_MARK", "MARKS", "PATTERNS", "ROWS", "SIGNAL_PATTERNS", "Pattern",
           "StepSignal", "lattice", "make_pattern", "step_signal", "ztiming_strokes"]

PATTERNS = ("grid", "box", "circle", "check")
SIGNAL_PATTERNS = ("step", "ztiming")      # no targets, no sheet
MARKS = ("cross", "dot")
MAX_SIDE = 40               # rows or columns of a grid
ARM_FRACTION = 0.18         # cross half-arm as a fraction of the target spacing
ARM_MAX_MM = 3.0
ARM_POINTS = 9              # points along each arm (follows the distortion in mm)
CIRCLE_NAMES = ("E", "NE", "N", "NW", "W", "SW", "S", "SE")
CHECK_STEP_MM = 0.5         # check targets are spaced by a multiple of this
# Defaults chosen so that every pattern refreshes at 40 Hz or more at 48 kHz with the built-in
# beam timing. A target costs its mark plus a jump and a settle: a dot about 21 samples at
# 48 kHz (250 us dwell), a cross about 46 (two arms, each dwelling at both ends, and its dot).
# 7 x 7 dots take about 1030 samples a frame (47 Hz); the 63 targets of a 7 x 9 grid would take
# 1325 as dots (36 Hz), 2900 as crosses (17 Hz). 49 targets still give the full fit (9
# unknowns) 98 coordinates, and the outer rows and columns sit at the edge of the area, where
# the pincushion shows.
ROWS, COLS = 7, 7
DEFAULT_MARK = {"grid": "dot", "check": "dot", "box": "cross", "circle": "cross"}


@dataclass
class Pattern:
    kind: str
    names: list                 # target names, one per sheet row
    drive: np.ndarray           # (n, 2) drive of every target
    nominal_mm: np.ndarray      # (n, 2) where the current profile says they land
    strokes: Strokes            # the drawing, mm
    notes: list = field(default_factory=list)


def _inside(points: np.ndarray, screen, extent: float) -> bool:
    return bool(screen.contains(points, extent, eps=0.0).all())


def lattice(rows: int, cols: int) -> tuple[list, np.ndarray]:
    """Names (r1c1 = top left, as one reads the screen) and unit lattice positions in [-1, 1]^2."""
    gx = np.linspace(-1.0, 1.0, cols)
    gy = np.linspace(1.0, -1.0, rows)
    xx, yy = np.meshgrid(gx, gy)
    names = [f"r{r + 1}c{c + 1}" for r in range(rows) for c in range(cols)]
    return names, np.column_stack([xx.ravel(), yy.ravel()])


def _arm_drive(model: DeflectionModel, spacing_drive: np.ndarray) -> np.ndarray:
    """Half-arm of a cross in drive units per axis: ARM_FRACTION of the spacing, at most
    ARM_MAX_MM on the face (judged by the gains of the current model)."""
    gains = np.hypot(model.matrix[0], model.matrix[1])      # |A[:, j]|, mm per full scale
    arm_mm = np.minimum(ARM_FRACTION * spacing_drive * gains, ARM_MAX_MM)
    return np.full(2, float(np.min(arm_mm / gains)))        # same length in mm on both axes


def _cross_polylines(model: DeflectionModel, u: np.ndarray, arm: np.ndarray) -> list:
    """Two arms (straight in drive space) and a centre dot, mapped to mm."""
    s = np.linspace(-1.0, 1.0, ARM_POINTS)[:, None]
    h = u + s * np.array([arm[0], 0.0])
    v = u + s * np.array([0.0, arm[1]])
    return [model.drive_to_mm(h), model.drive_to_mm(v), model.drive_to_mm(u[None, :])]


def _largest_scale(fits, hi: float = 1.0) -> float:
    """The largest t in (0, hi] with fits(t) true (fits is monotone), by bisection."""
    if fits(hi):
        return hi
    lo = 0.0
    for _ in range(50):
        mid = 0.5 * (lo + hi)
        if fits(mid):
            lo = mid
        else:
            hi = mid
    if lo <= 1e-6:
        raise VectorgenError("the pattern cannot be placed inside the usable area with this "
                             "profile (check its [deflection] matrix_mm and offset_mm)")
    return lo


def _lattice_pattern(kind: str, profile, rows: int, cols: int, extent: float,
                     mark: str) -> Pattern:
    model = DeflectionModel.from_profile(profile)
    names, unit = lattice(rows, cols)
    if kind == "box":
        corner = np.array([[-1.0, 1.0], [1.0, 1.0], [-1.0, -1.0], [1.0, -1.0]])
        unit = np.vstack([[0.0, 0.0], corner])
        names = ["centre", "top-left", "top-right", "bottom-left", "bottom-right"]
    # Spacing of the unit lattice per axis; a box spaces its targets by the half-width.
    unit_spacing = np.array([2.0 / max(cols - 1, 1), 2.0 / max(rows - 1, 1)])
    if kind == "box":
        unit_spacing = np.array([1.0, 1.0])

    def layout(t):
        u = t * unit
        arm = _arm_drive(model, t * unit_spacing) if mark == "cross" else np.zeros(2)
        return u, arm

    def fits(t):
        u, arm = layout(t)
        ends = np.concatenate([u, u + [arm[0], 0], u - [arm[0], 0], u + [0, arm[1]],
                               u - [0, arm[1]]])
        if np.abs(ends).max() > 1.0:
            return False
        try:
            pts = model.drive_to_mm(ends)
        except (FloatingPointError, ValueError):
            return False
        return np.all(np.isfinite(pts)) and _inside(pts, profile.screen, extent)

    t = _largest_scale(fits, 0.95)
    u, arm = layout(t)
    polys, labels = [], []
    for name, ui in zip(names, u):
        if mark == "cross":
            parts = _cross_polylines(model, ui, arm)
        else:
            parts = [model.drive_to_mm(ui[None, :])]
        polys.extend(parts)
        labels.extend([f"target {name}"] * len(parts))
    nominal = model.drive_to_mm(u)
    return Pattern(kind, names, u, nominal, strokes_from_polylines(polys, labels=labels),
                   [f"targets at drive up to +-{t * np.abs(unit).max():.3f} of full scale"])


def _circle_pattern(profile, extent: float, mark: str, tolerance_mm: float) -> Pattern:
    from shapes.basic import circle_points

    model = DeflectionModel.from_profile(profile)
    radius = extent * min(profile.screen.half_extent)
    ang = np.radians(np.arange(8) * 45.0)
    on_circle = radius * np.column_stack([np.cos(ang), np.sin(ang)])
    pts_mm = np.vstack([on_circle, [[0.0, 0.0]]])
    names = list(CIRCLE_NAMES) + ["centre"]
    tick = min(ARM_MAX_MM, 0.08 * radius)
    polys = [circle_points(radius, tolerance_mm=tolerance_mm)]
    labels = [f"circle r={radius:g} mm"]
    for name, a in zip(CIRCLE_NAMES, ang):
        d = np.array([np.cos(a), np.sin(a)])
        polys.append(np.array([(radius - tick) * d, (radius + tick) * d]))
        labels.append(f"circle tick {name}")
    polys += [np.array([[-tick, 0.0], [tick, 0.0]]), np.array([[0.0, -tick], [0.0, tick]])]
    labels += ["circle centre cross", "circle centre cross"]
    if mark == "dot":
        polys = polys[:1] + [p[None, :] for p in pts_mm]
        labels = labels[:1] + [f"target {n}" for n in names]
    # The outermost ticks must lie inside the usable area, with room to spare.
    if not _inside((radius + tick) * np.column_stack([np.cos(ang), np.sin(ang)]),
                   profile.screen, 1.0):
        raise VectorgenError(f"--extent {extent:g} puts the circle's ticks beyond the usable "
                             f"area: use a smaller extent")
    drive = model.mm_to_drive(pts_mm)
    if np.abs(drive).max() > 1.0:
        raise VectorgenError(f"a circle of radius {radius:.1f} mm needs drive "
                             f"{np.abs(drive).max():.3f}, beyond full scale: use a smaller "
                             f"--extent")
    diameter = 2 * radius
    return Pattern("circle", names, drive, pts_mm, strokes_from_polylines(polys, labels=labels),
                   [f"circle of diameter {diameter:.2f} mm: measure the horizontal (W-E) and "
                    f"vertical (S-N) diameters; on a correct profile both are {diameter:.2f} mm"])


def _check_pattern(profile, rows: int, cols: int, extent: float, mark: str) -> Pattern:
    """Targets on a lattice in mm over `extent` of the usable area, crosses straight in mm."""
    model = DeflectionModel.from_profile(profile)
    screen = profile.screen
    w, h = screen.half_extent
    names, unit = lattice(rows, cols)
    spacing = np.array([2.0 * w / max(cols - 1, 1), 2.0 * h / max(rows - 1, 1)])
    arm = min(ARM_MAX_MM, ARM_FRACTION * extent * float(spacing.min())) if mark == "cross" else 0.0

    def ends(t):
        pts = t * unit * np.array([w, h])
        return pts, np.concatenate([pts + [arm, 0.0], pts - [arm, 0.0], pts + [0.0, arm],
                                    pts - [0.0, arm]])

    t = _largest_scale(lambda t: _inside(ends(t)[1], screen, extent), 1.0)
    # spacing rounded down to CHECK_STEP_MM, so the targets sit at round numbers for a ruler
    step = np.floor(t * spacing / CHECK_STEP_MM + 1e-9) * CHECK_STEP_MM
    if np.any(step <= 0):
        raise VectorgenError("the check targets do not fit the usable area: use fewer --rows "
                             "or --cols, or a larger --extent")
    t_xy = step / spacing
    pts = unit * np.array([w, h]) * t_xy
    every = np.concatenate([pts + [arm, 0.0], pts - [arm, 0.0], pts + [0.0, arm],
                            pts - [0.0, arm]])
    drive = model.mm_to_drive(every)
    if np.abs(drive).max() > 1.0:
        raise VectorgenError(f"the check targets need drive up to {np.abs(drive).max():.3f} "
                             f"with this profile, beyond full scale: use a smaller --extent")
    polys, labels = [], []
    for name, p in zip(names, pts):
        if mark == "cross":
            polys += [np.array([p - [arm, 0.0], p + [arm, 0.0]]),
                      np.array([p - [0.0, arm], p + [0.0, arm]])]
            labels += [f"target {name}"] * 2
        polys.append(p[None, :])
        labels.append(f"target {name}")
    return Pattern("check", names, model.mm_to_drive(pts), pts,
                   strokes_from_polylines(polys, labels=labels),
                   [f"targets up to {np.abs(pts[:, 0]).max():.2f} mm from the centre in x and "
                    f"{np.abs(pts[:, 1]).max():.2f} mm in y, where the profile should put them"])


def make_pattern(kind: str, profile, rows: int = ROWS, cols: int = COLS, extent: float = 0.9,
                 mark: str | None = None) -> Pattern:
    """The targets and strokes of pattern `kind` for `profile` (the profile in use now); `mark`
    defaults to the pattern's own (`DEFAULT_MARK`)."""
    if kind not in PATTERNS:
        raise VectorgenError(f"unknown pattern {kind!r}: choose from " + ", ".join(PATTERNS))
    if mark is None:
        mark = DEFAULT_MARK[kind]
    if mark not in MARKS:
        raise VectorgenError(f"unknown mark {mark!r}: choose from " + ", ".join(MARKS))
    if not (np.isfinite(extent) and 0.1 <= extent <= 1.0):
        raise VectorgenError(f"--extent must be between 0.1 and 1 (a fraction of the usable "
                             f"area; got {extent:g})")
    if kind in ("grid", "check"):
        for what, n in (("--rows", rows), ("--cols", cols)):
            if not (isinstance(n, int) and 2 <= n <= MAX_SIDE):
                raise VectorgenError(f"{what} must be a whole number from 2 to {MAX_SIDE} "
                                     f"(got {n})")
    if kind == "circle":
        return _circle_pattern(profile, extent, mark, profile.beam.chord_tolerance_mm)
    if kind == "check":
        return _check_pattern(profile, rows, cols, extent, mark)
    return _lattice_pattern(kind, profile, rows, cols, extent, mark)


# --- patterns without targets -------------------------------------------------------------------

ZTIMING_DASH_MM = 20.0      # dash length on a screen wide enough for it
ZTIMING_TICKS = 8


@dataclass
class StepSignal:
    """The step pattern as channel samples.

    Attributes
    ----------
    signal : (n, channels) float32
        One period, in the profile's channel order and polarity; Z at the blank level.
    names : list of str
        The signal on each channel.
    drive : (n, 2) float64
        The X/Y drive before the channel map.
    half_samples : int
        Samples on each level (half a period).
    notes : list of str
        What the pattern is, for the terminal.
    """

    signal: np.ndarray
    names: list
    drive: np.ndarray
    half_samples: int
    notes: list


def step_signal(profile, rate: int, channels: int, axis: str, amplitude: float = 0.5,
                period_s: float = 0.02) -> StepSignal:
    """One period of the step pattern of `axis` through `profile`'s channel map, beam blanked.

    Parameters
    ----------
    profile : Profile
        Its ``[output]`` table gives the channel order, the inversions and the Z blank level.
    rate : int
        Sample rate, Hz.
    channels : int
        2 (X, Y) or 3 (X, Y, Z).
    axis : {'x', 'y'}
        The axis that jumps; the other is held at 0.
    amplitude : float
        The drive jumps between -amplitude and +amplitude (full scale units).
    period_s : float
        One period of the square wave, s (an even number of samples).

    Returns
    -------
    StepSignal

    Raises
    ------
    InputError
        From `calibration.response_fit.step_pattern`, naming the parameter.

    Notes
    -----
    The drive goes to the channels as it is: no deflection model and no stage, because the
    scope measures the yoke current the jump of drive makes, not the spot. Z stays at the blank
    level throughout: the beam need not be lit for the measurement.

    Examples
    --------
    >>> from vectorgen.profile import Profile
    >>> s = step_signal(Profile(), 1000, 3, "y", amplitude=0.25, period_s=0.008)
    >>> s.names, s.half_samples, s.signal[:, 1].tolist()
    (['x', 'y', 'z'], 4, [-0.25, -0.25, -0.25, -0.25, 0.25, 0.25, 0.25, 0.25])
    >>> float(abs(s.signal[:, [0, 2]]).max())
    0.0
    """
    from .response_fit import step_pattern

    drive = step_pattern(rate, axis, amplitude, period_s, cycles=1)
    n = len(drive)
    cmap = ChannelMap(profile.output, channels)
    signal = cmap.to_channels(drive, np.zeros(n), np.zeros(n, dtype=bool))
    half = n // 2
    notes = [f"{axis} jumps between {-amplitude:g} and +{amplitude:g} of full scale every "
             f"{1e3 * half / rate:.4g} ms (period {1e3 * n / rate:.4g} ms), "
             f"{'xy'.replace(axis, '')} held at 0"]
    if cmap.has_z:
        notes.append("Z is blanked throughout: the scope measures the yoke current, the beam "
                     "need not be lit")
    else:
        notes.append("there is no Z channel: the beam stays lit and dwells on two spots, so "
                     "turn the brightness right down (the scope measures the yoke current, the "
                     "beam need not be lit)")
    return StepSignal(signal, cmap.names, drive, half, notes)


def ztiming_strokes(profile, writing_speed_mm_per_s: float):
    """The Z timing pattern (`vectorgen.interface.z_timing_pattern`) for the profile's screen,
    as Strokes to render in the order given (rows alternate direction).

    Parameters
    ----------
    profile : Profile
        Its screen sets the dash length (at most ZTIMING_DASH_MM, 40 % of the width).
    writing_speed_mm_per_s : float
        The speed the dashes are drawn at, which sets the scale of the ticks.

    Returns
    -------
    (Strokes, ZTimingPattern)

    Raises
    ------
    InputError
        A speed at which not even one tick fits in half a dash.

    Examples
    --------
    >>> from vectorgen.profile import Profile
    >>> strokes, pat = ztiming_strokes(Profile(), 20000.0)
    >>> len(pat.dashes), pat.tick_us, len(pat.ticks)
    (6, 50.0, 18)
    """
    from vectorgen.interface import z_timing_pattern

    half_w = profile.screen.half_extent[0]
    dash = min(ZTIMING_DASH_MM, 0.8 * half_w)
    probe = z_timing_pattern(writing_speed_mm_per_s, dash_mm=dash, ticks=1)
    spacing = probe.tick_us * probe.mm_per_us
    ticks = min(ZTIMING_TICKS, int(np.floor(dash / 2 / spacing + 1e-9)))
    if ticks < 1:
        raise VectorgenError(f"at {writing_speed_mm_per_s:g} mm/s one tick of the Z timing "
                             f"scale is {spacing:.3g} mm, more than half a {dash:g} mm dash: "
                             f"write faster", "speed")
    pat = z_timing_pattern(writing_speed_mm_per_s, dash_mm=dash, ticks=ticks)
    labels = ([f"z timing row {i + 1}" for i in range(len(pat.dashes))]
              + [f"z timing tick {i + 1}" for i in range(len(pat.ticks))])
    return strokes_from_polylines(pat.polylines, labels=labels), pat

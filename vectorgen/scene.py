"""Scene scripts: a Python file that describes a drawing as a function of time.

A scene script is an ordinary Python file. It defines

    def draw(t, screen):
        ...                      # return the drawing at scene time t (seconds)

and, optionally, at module level:

    UPDATE_HZ = 1.0              # how often the drawing is re-made (default 1; 0 = draw once)
    LIVE_CLOCK = True            # live: t is the wall-clock time of day, in seconds since
                                 # local midnight (default False: t counts from START_TIME)
    START_TIME = "10:08:30"      # scene time of the first update, in seconds or "HH:MM[:SS]"
                                 # (default 0); files always use it, so they are reproducible

`screen` is the profile's usable area (`screen.half_extent` = half width and half height in
mm; `screen.shape` "rectangle" or "round"). Coordinates are millimetres on the tube face, the
origin at the centre, +y up. `draw` returns a `Strokes`, one polyline (an (n, 2) array-like),
or a list mixing both; a one-point polyline is a dot. It may also be written `draw(t)`.

Helpers (import them from here): `clock`, `text`, `polyline`, `circle`, `dot`, `strokes`,
`rotate`, `move`, `scaled`, `hms`.

A scene script is Python run with the user's rights, like any program: run only scripts you
trust. What it prints goes to standard error, so it never mixes with the tool's own output.

Timing: update k has scene time t_k = START_TIME + k / UPDATE_HZ and is due at sample
ceil(k * rate / UPDATE_HZ), counted from the start of the first frame. It goes on screen at
the first frame boundary at or after that sample (a frame is never cut). Files
(`vectorgen render scene.py --seconds S`) and live output (`vectorgen play scene.py`) follow the
same rule, so they give the same samples. With LIVE_CLOCK and live output, the updates fall
on whole multiples of 1 / UPDATE_HZ of the wall clock (a 1 Hz clock ticks with the second).
"""

from __future__ import annotations

import builtins
import inspect
import math
import os
import sys
import time
import traceback
from dataclasses import dataclass
from fractions import Fraction

import numpy as np

__all__ = ["FixedSchedule", "Scene", "WallClockSchedule", "as_strokes", "circle", "clock", "dot",
           "hms", "iter_scene_timeline", "load_scene", "move", "polyline", "rotate", "scaled",
           "scene_timeline", "schedule_for", "script_error", "strokes", "text", "time_of_day"]

from .clip import MAX_STROKES
from .clocktime import DAY_S, hms, parse_time_of_day
from .errors import InputError, VectorgenError
from .files import note_input
from .flatten import circle_points
from .sources import DrawingOptions, shape, stroke_text
from .strokes import Strokes, concat, strokes_from_polylines

MAX_UPDATE_HZ = 1000.0


# --- helpers for scripts -------------------------------------------------------------------------

def clock(screen, t: float, radius: float | None = None, center=(0.0, 0.0),
          second_hand: bool = True, numerals: bool = True) -> Strokes:
    """A clock face showing time of day `t` (seconds since midnight): ticks, numerals and
    hands; radius 90 % of the largest that fits unless given."""
    return shape("clock", screen, DrawingOptions(time_s=float(t) % DAY_S,
                                                 seconds_hand=second_hand, radius_mm=radius,
                                                 center=tuple(center), numerals=numerals))


def text(s: str, height: float = 8.0, center=(0.0, 0.0), align: str = "center",
         intensity: float = 1.0) -> Strokes:
    """Stroke-font text, cap height `height` mm, centred on `center`; "\\n" starts a line."""
    return stroke_text(str(s), height, align, center, intensity)


def polyline(points, closed: bool = False, intensity: float = 1.0,
             label: str | None = None) -> Strokes:
    """One stroke through `points` ((n, 2) mm); `closed` joins the end to the start."""
    pts = np.asarray(points, dtype=float).reshape(-1, 2)
    if closed and len(pts) > 1:
        pts = np.vstack([pts, pts[:1]])
    return strokes_from_polylines([pts], intensity, [label or "scene polyline"])


def dot(x: float, y: float, intensity: float = 1.0) -> Strokes:
    """A dot: the beam dwells at (x, y)."""
    return strokes_from_polylines([[(x, y)]], intensity, [f"scene dot ({x:g}, {y:g})"])


def circle(radius: float, center=(0.0, 0.0), intensity: float = 1.0,
           tolerance: float = 0.02) -> Strokes:
    """A circle of `radius` mm around `center`, chords within `tolerance` mm."""
    if not (math.isfinite(radius) and radius > 0):
        raise InputError(f"circle radius must be > 0 mm (radius={radius})", parameter="radius")
    return strokes_from_polylines([circle_points(radius, center, tolerance)], intensity,
                                  [f"scene circle r={radius:g}"])


def strokes(*parts) -> Strokes:
    """Join drawings: each part is a Strokes, a polyline ((n, 2) array-like) or a list of them."""
    return as_strokes(list(parts))


def rotate(drawing, degrees: float, center=(0.0, 0.0)) -> Strokes:
    """The drawing turned counter-clockwise by `degrees` about `center`."""
    d = as_strokes(drawing)
    a = math.radians(degrees)
    c, s = math.cos(a), math.sin(a)
    m = np.array([[c, -s], [s, c]])
    cx, cy = center
    return d.transformed(m, (cx - (c * cx - s * cy), cy - (s * cx + c * cy)))


def move(drawing, dx: float, dy: float) -> Strokes:
    """The drawing shifted by (dx, dy) mm."""
    return as_strokes(drawing).transformed(np.eye(2), (dx, dy))


def scaled(drawing, factor: float, center=(0.0, 0.0)) -> Strokes:
    """The drawing scaled by `factor` about `center`."""
    cx, cy = center
    return as_strokes(drawing).transformed(np.eye(2) * factor,
                                           (cx * (1 - factor), cy * (1 - factor)))


def as_strokes(value) -> Strokes:
    """Strokes from what a scene returns: Strokes, a polyline, or a (nested) list of them."""
    if isinstance(value, Strokes):
        return value
    if isinstance(value, np.ndarray) and value.ndim == 2 and value.shape[1] == 2 \
            and value.dtype != object:
        return strokes_from_polylines([value], labels=["scene polyline"])
    if isinstance(value, (list, tuple)):
        if value and _is_point_list(value):
            return strokes_from_polylines([np.asarray(value, dtype=float)],
                                          labels=["scene polyline"])
        return concat([as_strokes(v) for v in value])
    raise VectorgenError(f"a scene must return Strokes, a polyline or a list of them "
                         f"(got {type(value).__name__})")


def _is_point_list(value) -> bool:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        return False
    return arr.ndim == 2 and arr.shape[1] == 2


# --- loading a script ----------------------------------------------------------------------------

@dataclass
class Scene:
    path: str               # as the user gave it (for messages)
    draw: object
    update_hz: float        # 0: draw once
    live_clock: bool
    start_time: float
    takes_screen: bool

    def strokes(self, t: float, screen) -> Strokes:
        """The drawing at scene time t; a failure in the script names its file and line."""
        try:
            value = self.draw(t, screen) if self.takes_screen else self.draw(t)
        except KeyboardInterrupt:
            raise
        except BaseException as exc:
            raise VectorgenError(script_error(exc, self.path, f"in draw(t={t:.3f})")) from None
        if isinstance(value, (list, tuple)) and len(value) > MAX_STROKES:
            # refused before the list is converted (that alone would take long)
            raise InputError(f"scene {self.path}: draw(t={t:.3f}) returned {len(value)} "
                             f"strokes; one frame can draw at most {MAX_STROKES} (draw less, "
                             f"or join strokes into longer ones)")
        try:
            drawing = as_strokes(value)
        except KeyboardInterrupt:
            raise
        except BaseException as exc:
            raise VectorgenError(script_error(exc, self.path, f"in draw(t={t:.3f})")) from None
        if drawing.count == 0:
            raise VectorgenError(f"scene {self.path}: draw(t={t:.3f}) returned nothing to draw")
        return drawing

    def frame(self, renderer, t: float):
        """The rendered Frame at scene time t."""
        drawing = self.strokes(t, renderer.profile.screen)
        try:
            return renderer.frame(drawing)
        except VectorgenError as exc:
            raise VectorgenError(f"scene {self.path} at t={t:.3f}: {exc}") from None


def script_error(exc: BaseException, path: str, when: str) -> str:
    """One line: the script's own file:line where the error happened, and what it was."""
    target = os.path.abspath(path)
    line = None
    if isinstance(exc, SyntaxError) and exc.filename and \
            os.path.abspath(exc.filename) == target:
        line = exc.lineno
    else:
        for fr in traceback.extract_tb(exc.__traceback__):
            if os.path.abspath(fr.filename) == target:
                line = fr.lineno
    where = f"{path}:{line}" if line is not None else path
    if isinstance(exc, VectorgenError):
        what = str(exc)
    elif isinstance(exc, SyntaxError):
        what = f"SyntaxError: {exc.msg}"
    else:
        what = f"{type(exc).__name__}: {exc}" if str(exc) else type(exc).__name__
    return " ".join(f"scene script {where}: {what} ({when})".split())


_SCRIPT_PRINT = builtins.print      # the script's own messages; the engine itself never prints


def _to_stderr(*values, **options) -> None:
    """`print` for scene scripts: to standard error unless the script names a file, so that a
    script's messages never mix into the tool's output (a report line, a piped signal)."""
    options.setdefault("file", sys.stderr)
    _SCRIPT_PRINT(*values, **options)


def parse_start_time(value, path: str) -> float:
    """START_TIME as seconds: a number, or "HH:MM[:SS]"."""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        if not math.isfinite(value):
            raise InputError(f"{path}: START_TIME must be a finite number (got {value!r})")
        return float(value)
    if isinstance(value, str):
        try:
            return parse_time_of_day(value, "START_TIME")[0]
        except InputError:
            pass
    raise InputError(f"{path}: START_TIME must be seconds or \"HH:MM[:SS]\" (got {value!r})")


def load_scene(path: str) -> Scene:
    """Run the script and read its draw function and settings."""
    import runpy

    if not os.path.exists(path):
        raise VectorgenError(f"scene script not found: {path}")
    if os.path.isdir(path):
        raise VectorgenError(f"scene script is a folder, not a file: {path}")
    note_input(path, "scene script")
    folder = os.path.dirname(os.path.abspath(path))
    sys.path.insert(0, folder)          # the script may import modules beside it
    try:
        env = runpy.run_path(os.path.abspath(path), init_globals={"print": _to_stderr},
                             run_name="__vectorgen_scene__")
    except KeyboardInterrupt:
        raise
    except BaseException as exc:
        raise VectorgenError(script_error(exc, path, "while loading")) from None
    finally:
        try:
            sys.path.remove(folder)
        except ValueError:
            pass
    draw = env.get("draw")
    if not callable(draw):
        raise VectorgenError(f"{path}: a scene script must define draw(t, screen) returning "
                             f"the drawing at time t")
    try:
        params = [p for p in inspect.signature(draw).parameters.values()
                  if p.kind in (p.POSITIONAL_ONLY, p.POSITIONAL_OR_KEYWORD, p.VAR_POSITIONAL)]
    except (TypeError, ValueError):
        params = []
    takes_screen = len(params) != 1 or params[0].kind == params[0].VAR_POSITIONAL
    hz = env.get("UPDATE_HZ", 1.0)
    if isinstance(hz, bool) or not isinstance(hz, (int, float)) or not math.isfinite(hz) \
            or not 0 <= hz <= MAX_UPDATE_HZ:
        raise VectorgenError(f"{path}: UPDATE_HZ must be a number from 0 (draw once) to "
                             f"{MAX_UPDATE_HZ:g} (got {hz!r})")
    live = env.get("LIVE_CLOCK", False)
    if not isinstance(live, bool):
        raise VectorgenError(f"{path}: LIVE_CLOCK must be True or False (got {live!r})")
    start = parse_start_time(env.get("START_TIME", 0.0), path)
    return Scene(path, draw, float(hz), live, start, takes_screen)


# --- timing --------------------------------------------------------------------------------------

def _fraction(hz: float) -> Fraction:
    return Fraction(hz).limit_denominator(1_000_000)


class FixedSchedule:
    """Update k at scene time start + k / hz, due at sample ceil(k * rate / hz)."""

    def __init__(self, rate: int, hz: float, start: float = 0.0):
        self.rate = int(rate)
        self.hz = _fraction(hz)
        self.start = float(start)

    def due(self, k: int) -> int:
        num, den = self.hz.numerator, self.hz.denominator
        return -(-k * self.rate * den // num)

    def time(self, k: int) -> float:
        return self.start + k * self.hz.denominator / self.hz.numerator


def time_of_day(epoch: float) -> float:
    """Seconds since local midnight at the given wall-clock time."""
    lt = time.localtime(epoch)
    return lt.tm_hour * 3600 + lt.tm_min * 60 + lt.tm_sec + (epoch - math.floor(epoch))


class WallClockSchedule:
    """Live clock: update 0 shows the time at the first sample; update k >= 1 falls on the
    k-th whole multiple of 1 / hz of the wall clock after it. `origin` is the wall-clock time
    (epoch seconds) at which the first frame sample is heard; `resync` keeps it in step with
    the wall clock, so the audio clock's drift does not build up."""

    RESYNC_S = 0.05

    def __init__(self, rate: int, hz: float, origin: float):
        self.rate = int(rate)
        self.hz = _fraction(hz)
        self.origin = float(origin)
        self.n0 = math.floor(self.origin * self.hz)

    def epoch(self, k: int) -> float:
        if k == 0:
            return self.origin
        return float(Fraction(self.n0 + k) / self.hz)

    def due(self, k: int) -> int:
        if k == 0:
            return 0
        return max(1, math.ceil((self.epoch(k) - self.origin) * self.rate))

    def time(self, k: int) -> float:
        return time_of_day(self.epoch(k))

    def resync(self, position: int, latency: float) -> None:
        estimate = time.time() + latency - position / self.rate
        if abs(estimate - self.origin) > self.RESYNC_S:
            self.origin = estimate


def schedule_for(scene: Scene, rate: int, live_origin: float | None = None,
                 start: float | None = None):
    """The schedule of a scene: the wall clock when live with LIVE_CLOCK, else fixed."""
    if scene.live_clock and live_origin is not None:
        return WallClockSchedule(rate, scene.update_hz, live_origin)
    return FixedSchedule(rate, scene.update_hz, scene.start_time if start is None else start)


def scene_timeline(path: str, renderer, seconds: float | None,
                   start: float | None = None) -> list:
    """The frames of a scene for a file, as [(Frame, repeats), ...] (`iter_scene_timeline`
    as a list)."""
    return list(iter_scene_timeline(path, renderer, seconds, start))


def iter_scene_timeline(path: str, renderer, seconds: float | None,
                        start: float | None = None):
    """The frames of a scene for a file, one (Frame, repeats) at a time, on the scene's own
    clock (t from START_TIME, or `start`): update k goes on at the first frame boundary at or
    after its due sample, and the whole frames played fill at least `seconds` (one frame when
    None). The same input always gives the same frames. Each frame is made only when asked
    for, so a long render holds one frame at a time.

    Examples
    --------
    >>> import os, tempfile
    >>> from vectorgen.pipeline import Renderer, Settings
    >>> from vectorgen.profile import Profile
    >>> p = os.path.join(tempfile.mkdtemp(), "s.py")
    >>> _ = open(p, "w").write("UPDATE_HZ = 2\\ndef draw(t):\\n    return [(0, 0), (10 + t, 0)]\\n")
    >>> parts = list(iter_scene_timeline(p, Renderer(Profile(), Settings(rate=1000)), 1.0))
    >>> len(parts), sum(n * f.samples for f, n in parts) >= 1000     # t = 0 and t = 0.5
    (2, True)
    """
    scene = load_scene(path)
    sched = FixedSchedule(renderer.rate, scene.update_hz or 1.0,
                          scene.start_time if start is None else start)
    frame = scene.frame(renderer, sched.time(0))
    if seconds is None:
        yield frame, 1
        return
    total = max(1, math.ceil(seconds * renderer.rate))
    if scene.update_hz == 0:
        yield frame, max(1, math.ceil(total / frame.samples))
        return
    pos, k = 0, 0
    while True:
        L = frame.samples
        reps = max(1, -(-(sched.due(k + 1) - pos) // L))
        reps = min(reps, max(1, -(-(total - pos) // L)))
        yield frame, reps
        pos += reps * L
        if pos >= total:
            return
        while sched.due(k + 1) <= pos:
            k += 1
        frame = scene.frame(renderer, sched.time(k))

"""Tube profiles: the screen, the output channels, the deflection model and the beam timing.

A profile is a TOML file a person can read and edit. Every key is checked against the schema
below: an unknown key, a wrong type or an impossible value is a `ProfileError` naming the key.
With no profile the built-in default applies (uncalibrated, linear, full scale at the edges of
the usable area).
"""

from __future__ import annotations

import copy
import math
import os
from dataclasses import dataclass, field

from .errors import ProfileError
from .screen import SCREEN_SHAPES, Screen

__all__ = ["Beam", "Deflection", "Output", "Profile", "SCHEMA", "Screen", "default_for_screen",
           "load_profile", "profile_from_dict", "profile_text", "profile_to_dict", "save_profile"]

DEFLECTION_KINDS = ("magnetic", "electrostatic")
SIGNALS = ("x", "y", "z")
MAX_PROFILE_BYTES = 1 << 20


@dataclass
class Output:
    channels: int = 2
    order: list = field(default_factory=lambda: ["x", "y", "z"])
    invert: list = field(default_factory=list)
    z_polarity: str = "positive"
    z_blank_level: float = 0.0
    volts_full_scale: float = 0.0  # 0 = unknown
    band_limited: bool = True       # anti-imaging low-pass near Nyquist (audio interfaces)
    highpass_hz: float = 0.0        # first-order AC-coupling corner; 0 = DC-coupled
    z_delay_us: float = 0.0         # how much later the Z path acts than X/Y

    def channel_order(self, channels: int | None = None) -> list[str]:
        """Which signal each interface channel carries, for `channels` channels (2 or 3)."""
        n = self.channels if channels is None else channels
        order = [s for s in self.order if s in SIGNALS]
        if n == 2:
            order = [s for s in order if s != "z"]
        elif "z" not in order:
            order = order + ["z"]
        return order[:n]


@dataclass
class Deflection:
    """Forward model from drive u (full scale = +-1) to screen position p (mm):
    p = D(A u + c), D the pincushion distortion about the tube axis (see deflection.py)."""

    kind: str = "magnetic"
    anode_kv: float = 0.0  # 0 = not recorded
    calibrated: bool = False
    matrix_mm: list = field(default_factory=lambda: [[50.0, 0.0], [0.0, 40.0]])
    offset_mm: list = field(default_factory=lambda: [0.0, 0.0])
    k_radial: float = 0.0
    k_x: float = 0.0
    k_y: float = 0.0


@dataclass
class Beam:
    writing_speed_mm_per_s: float = 20000.0     # the slowest (brightest) speed drawn at
    max_writing_speed_mm_per_s: float = 100000.0    # the speed may rise to this (when above
                                                    # writing_speed_mm_per_s) ...
    refresh_target_hz: float = 40.0                 # ... to keep the refresh at least this
    jump_speed_mm_per_s: float = 0.0        # 0 = no limit: a blanked jump is one sample
    settle_us: float = 60.0
    end_dwell_us: float = 40.0
    corner_dwell_us: float = 40.0
    corner_angle_deg: float = 35.0
    dot_dwell_us: float = 250.0
    chord_tolerance_mm: float = 0.02
    flicker_hz: float = 30.0
    spot_mm: float = 0.3                    # spot size: how close a settle must come


@dataclass
class Profile:
    name: str = "built-in default (uncalibrated)"
    screen: Screen = field(default_factory=Screen)
    output: Output = field(default_factory=Output)
    deflection: Deflection = field(default_factory=Deflection)
    beam: Beam = field(default_factory=Beam)
    response: dict = field(default_factory=dict)    # [response]: see vectorgen.response
    drive: dict = field(default_factory=dict)       # [drive]: see vectorgen.response.Drive
    source: str = "<built-in>"

    def copy(self) -> "Profile":
        return copy.deepcopy(self)

    def response_model(self):
        """The deflection response of `[response]` (or of `[drive]`'s L / R for a yoke driven
        by a voltage amplifier): a `vectorgen.response.Response`, ideal when neither is given."""
        from .response import Drive, Response

        measured = Response.from_table(self.response) if self.response else None
        if self.drive:
            return Drive.from_table(self.drive).spot_response(measured)
        return measured if measured is not None else Response.from_table({})

    def drive_model(self):
        """The `[drive]` table as a `vectorgen.response.Drive`, or None when not given."""
        from .response import Drive

        return Drive.from_table(self.drive) if self.drive else None


# --- schema -------------------------------------------------------------------------------------
# Each entry: key -> (type, check, description). `check` returns an error text or None.

def _positive(v):
    return None if v > 0 and math.isfinite(v) else "must be a finite number > 0"


def _non_negative(v):
    return None if v >= 0 and math.isfinite(v) else "must be a finite number >= 0"


def _finite(v):
    return None if math.isfinite(v) else "must be a finite number"


def _one_of(*names):
    def check(v):
        return None if v in names else "must be one of " + ", ".join(repr(n) for n in names)
    return check


def _angle(v):
    return None if 0 < v < 180 else "must be between 0 and 180 degrees"


def _channels(v):
    return None if v in (2, 3) else "must be 2 or 3"


def _order(v):
    if not all(isinstance(s, str) for s in v):
        return "must be a list of names"
    if not 2 <= len(v) <= 3 or len(set(v)) != len(v) or not set(v) <= set(SIGNALS) \
            or not {"x", "y"} <= set(v):
        return 'must list "x", "y" and optionally "z", each once'
    return None


def _invert(v):
    if not all(isinstance(s, str) for s in v) or not set(v) <= {"x", "y"} or len(set(v)) != len(v):
        return 'may list "x" and/or "y" only'
    return None


def _matrix(v):
    try:
        ok = len(v) == 2 and all(len(r) == 2 for r in v) and \
            all(isinstance(e, (int, float)) and not isinstance(e, bool) and math.isfinite(e)
                for r in v for e in r)
    except TypeError:
        ok = False
    if not ok:
        return "must be a 2 x 2 array of finite numbers, e.g. [[50.0, 0.0], [0.0, 40.0]]"
    det = v[0][0] * v[1][1] - v[0][1] * v[1][0]
    scale = max(abs(e) for r in v for e in r)
    if scale == 0 or abs(det) < 1e-9 * scale * scale:
        return "is singular: the two drive axes must move the beam in different directions"
    return None


def _pair(v):
    if len(v) != 2 or not all(isinstance(e, (int, float)) and not isinstance(e, bool)
                              and math.isfinite(e) for e in v):
        return "must be two finite numbers [x, y]"
    return None


def _microseconds(v):
    return None if 0 <= v <= 1e6 and math.isfinite(v) else "must be between 0 and 1000000 us"


def _pincushion(v):
    return None if math.isfinite(v) and abs(v) < 1.0 else "must be a number between -1 and 1"


SCHEMA = {
    "screen": (Screen, {
        "shape": (str, _one_of(*SCREEN_SHAPES)),
        "width_mm": (float, _positive),
        "height_mm": (float, _positive),
        "diameter_mm": (float, _positive),
    }),
    "output": (Output, {
        "channels": (int, _channels),
        "order": (list, _order),
        "invert": (list, _invert),
        "z_polarity": (str, _one_of("positive", "negative")),
        "z_blank_level": (float, lambda v: None if -1 <= v <= 1 else "must be between -1 and 1"),
        "volts_full_scale": (float, _non_negative),
        "band_limited": (bool, None),
        "highpass_hz": (float, lambda v: None if 0 <= v <= 1000 and math.isfinite(v)
                        else "must be between 0 (DC-coupled) and 1000 Hz"),
        "z_delay_us": (float, lambda v: None if abs(v) <= 10000 and math.isfinite(v)
                       else "must be between -10000 and 10000 us"),
    }),
    "deflection": (Deflection, {
        "kind": (str, _one_of(*DEFLECTION_KINDS)),
        "anode_kv": (float, _non_negative),
        "calibrated": (bool, None),
        "matrix_mm": (list, _matrix),
        "offset_mm": (list, _pair),
        "k_radial": (float, _pincushion),
        "k_x": (float, _pincushion),
        "k_y": (float, _pincushion),
    }),
    "beam": (Beam, {
        "writing_speed_mm_per_s": (float, _positive),
        "max_writing_speed_mm_per_s": (float, _positive),
        "refresh_target_hz": (float, _non_negative),
        "jump_speed_mm_per_s": (float, _non_negative),
        "settle_us": (float, _microseconds),
        "end_dwell_us": (float, _microseconds),
        "corner_dwell_us": (float, _microseconds),
        "corner_angle_deg": (float, _angle),
        "dot_dwell_us": (float, _microseconds),
        "chord_tolerance_mm": (float, _positive),
        "flicker_hz": (float, _non_negative),
        "spot_mm": (float, _positive),
    }),
}


def _check_response(table: dict, where: str) -> None:
    from .response import Response

    Response.from_table(table, where)


def _check_drive(table: dict, where: str) -> None:
    from .response import Drive

    Drive.from_table(table, where)


# Tables checked by the model that reads them (values may be one number or [x, y] per axis).
FREE_TABLES = {"response": _check_response, "drive": _check_drive}


def _typed(where: str, value, kind):
    if kind is float:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ProfileError(f"{where} must be a number (got {value!r})")
        return float(value)
    if kind is int:
        if isinstance(value, bool) or not isinstance(value, int):
            raise ProfileError(f"{where} must be a whole number (got {value!r})")
        return value
    if not isinstance(value, kind):
        raise ProfileError(f"{where} must be a {kind.__name__} (got {value!r})")
    return value


def profile_from_dict(data: dict, source: str = "<dict>") -> Profile:
    """Build and validate a Profile from parsed TOML; errors name the file and the key."""
    prof = Profile(source=source)
    for key, value in data.items():
        if key == "name":
            prof.name = _typed(f"{source}: key 'name'", value, str)
            continue
        if key in FREE_TABLES:
            if not isinstance(value, dict):
                raise ProfileError(f"{source}: '{key}' must be a table [{key}]")
            FREE_TABLES[key](value, f"{source}: [{key}]")       # validates, naming the key
            setattr(prof, key, dict(value))
            continue
        if key not in SCHEMA:
            known = ", ".join(["name"] + [f"[{k}]" for k in [*SCHEMA, *FREE_TABLES]])
            raise ProfileError(f"{source}: unknown key '{key}' (known: {known})")
        cls, fields = SCHEMA[key]
        if not isinstance(value, dict):
            raise ProfileError(f"{source}: '{key}' must be a table [{key}]")
        section = getattr(prof, key)
        for sub, subvalue in value.items():
            where = f"{source}: [{key}] {sub}"
            if sub not in fields:
                raise ProfileError(f"{source}: unknown key '{sub}' in [{key}] "
                                     f"(known: {', '.join(fields)})")
            kind, check = fields[sub]
            subvalue = _typed(where, subvalue, kind)
            if check is not None:
                problem = check(subvalue)
                if problem:
                    raise ProfileError(f"{where} {problem} (got {subvalue!r})")
            if kind is list:
                subvalue = [[float(e) for e in r] if isinstance(r, list) else
                            (float(r) if isinstance(r, (int, float)) else r) for r in subvalue]
            setattr(section, sub, subvalue)
    _check_whole(prof, source)
    if "matrix_mm" not in data.get("deflection", {}):
        # No measured gains: full scale at the edges of the usable area (uncalibrated, linear).
        w, h = prof.screen.half_extent
        prof.deflection.matrix_mm = [[w, 0.0], [0.0, h]]
    return prof


def _check_whole(prof: Profile, source: str) -> None:
    s = prof.screen
    if s.shape == "round" and not s.diameter_mm > 0:
        raise ProfileError(f"{source}: [screen] diameter_mm is required when shape = 'round'")
    if prof.output.channels == 3 and "z" not in prof.output.channel_order(3):
        raise ProfileError(f"{source}: [output] order must include 'z' for 3 channels")


def load_profile(path: str | os.PathLike | None) -> Profile:
    """The profile at `path`, or the built-in default when `path` is None."""
    if path is None:
        return Profile()
    import tomllib      # only when a profile file is read

    from .files import read_bytes

    path = os.fspath(path)
    raw = read_bytes(path, "profile", MAX_PROFILE_BYTES)
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except tomllib.TOMLDecodeError as exc:
        raise ProfileError(f"{path}: not valid TOML: {exc}") from None
    except RecursionError:
        raise ProfileError(f"{path}: not valid TOML: nested too deeply") from None
    except UnicodeDecodeError:
        raise ProfileError(f"{path}: not a text file") from None
    return profile_from_dict(data, source=path)


def profile_to_dict(prof: Profile) -> dict:
    """The profile as plain TOML-ready data (zero 'unknown' values left out)."""
    out: dict = {"name": prof.name}
    for key, (_cls, fields) in SCHEMA.items():
        section = getattr(prof, key)
        table = {}
        for sub in fields:
            v = getattr(section, sub)
            if sub == "diameter_mm" and prof.screen.shape != "round":
                continue
            if sub in ("width_mm", "height_mm") and prof.screen.shape == "round":
                continue
            if sub in ("volts_full_scale", "anode_kv") and not v:
                continue
            table[sub] = v
        out[key] = table
    for key in FREE_TABLES:
        if getattr(prof, key):
            out[key] = dict(getattr(prof, key))
    return out


PROFILE_HEADER = """\
# vectorgen tube profile. Millimetres on the tube face, origin at the centre, +y up.
# Drive is in full-scale units: +-1.0 is the largest value each output channel can carry.
# [deflection] is the forward model  p = D(A u + c):  A = matrix_mm (mm per full-scale drive,
# columns = drive x, drive y), c = offset_mm, D = pincushion about the tube axis with
# x' = x (1 + k_radial r^2 + k_x y^2),  y' = y (1 + k_radial r^2 + k_y x^2), x, y, r divided
# by the usable area's half-diagonal (a round face: its radius).
"""


def profile_text(prof: Profile) -> str:
    """The profile as TOML, arrays written inline (a 2 x 2 matrix as rows)."""
    import tomli_w

    def inline(v):
        if isinstance(v, list):
            return "[" + ", ".join(inline(e) for e in v) + "]"
        return tomli_w.dumps({"v": v})[4:].strip()

    data = profile_to_dict(prof)
    lines = [PROFILE_HEADER, f"name = {inline(data.pop('name'))}"]
    for table, values in data.items():
        lines += ["", f"[{table}]"] + [f"{k} = {inline(v)}" for k, v in values.items()]
    return "\n".join(lines) + "\n"


def save_profile(prof: Profile, path: str | os.PathLike) -> str | None:
    """Write the profile atomically. An existing file at `path` is kept as a numbered backup
    (PATH.bak1, PATH.bak2, ...); returns the backup's path, or None if there was nothing to keep."""
    from .files import write_with_backup

    return write_with_backup(os.fspath(path), profile_text(prof).encode("utf-8"))


def default_for_screen(prof: Profile) -> Profile:
    """A copy whose linear deflection puts full scale at the edges of the usable area."""
    out = prof.copy()
    w, h = out.screen.half_extent
    out.deflection.matrix_mm = [[w, 0.0], [0.0, h]]
    out.deflection.offset_mm = [0.0, 0.0]
    out.deflection.k_radial = out.deflection.k_x = out.deflection.k_y = 0.0
    out.deflection.calibrated = False
    return out

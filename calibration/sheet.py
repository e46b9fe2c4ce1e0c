"""Measurement sheets: one CSV row per target of a calibration pattern.

Two kinds, told apart by their columns (exactly these, in this order when written; any order,
any letter case accepted on reading):

    fit sheet    point, drive_x, drive_y, measured_x_mm, measured_y_mm
    check sheet  point, target_x_mm, target_y_mm, measured_x_mm, measured_y_mm

`point` names the target. A fit sheet (grid, box and circle patterns) gives the drive
(full-scale units, +-1) the pattern put on the beam there, for `vectorgen fit`. A check sheet
(the check pattern, drawn through a calibrated profile) gives where the target should land on
the face, in mm, for `vectorgen check`. The measured columns are where the spot landed, in mm
from the centre of the face (+x right, +y up). The pattern writes them empty; the user fills
them in with a ruler, or `vectorgen spots` fills them from a photo.

Reading is strict where a guess could corrupt a calibration: a wrong header, text where a number
belongs, a drive beyond full scale or a duplicated point name is an error naming the line. An
empty (or half-filled) measurement is not an error: that row is reported and left out, never
guessed.
"""

from __future__ import annotations

import csv
import io
import os
import re
from dataclasses import dataclass

import numpy as np

from vectorgen.errors import VectorgenError
from vectorgen.files import read_bytes, write_with_backup

__all__ = ["CHECK_COLUMNS", "CHECK_HEADER", "COLUMNS", "HEADER", "Sheet", "parse_number",
           "read_sheet", "sheet_in_the_way", "sheet_text", "write_sheet"]

COLUMNS = ("point", "drive_x", "drive_y", "measured_x_mm", "measured_y_mm")
HEADER = ",".join(COLUMNS)
CHECK_COLUMNS = ("point", "target_x_mm", "target_y_mm", "measured_x_mm", "measured_y_mm")
CHECK_HEADER = ",".join(CHECK_COLUMNS)
KIND_COLUMNS = {"fit": COLUMNS, "check": CHECK_COLUMNS}
KIND_USE = {"fit": "vectorgen fit", "check": "vectorgen check"}

# A plain decimal number: no thousands separators, no underscores, no nan/inf.
_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")
MAX_ROWS = 100_000


@dataclass
class Sheet:
    path: str
    names: list                 # point names, one per row
    drive: np.ndarray | None    # (n, 2) drive, full-scale units (a fit sheet; None: check)
    measured: np.ndarray        # (n, 2) mm; NaN where a cell is empty
    lines: list                 # line number of each row in the file (for messages)
    kind: str = "fit"           # "fit" or "check"
    target_mm: np.ndarray | None = None     # (n, 2) mm, where each target should land (check)

    @property
    def coords(self) -> np.ndarray:
        """Each target's place in the pattern: its drive (fit sheet) or its mm (check)."""
        return self.drive if self.kind == "fit" else self.target_mm

    @property
    def holds_measurements(self) -> bool:
        """Whether any measured cell is filled."""
        return bool(np.isfinite(self.measured).any())

    @property
    def count(self) -> int:
        return len(self.names)

    @property
    def filled(self) -> np.ndarray:
        """Rows with both measured cells filled."""
        return np.isfinite(self.measured).all(axis=1)

    @property
    def partial(self) -> np.ndarray:
        """Rows with exactly one of the two measured cells filled."""
        f = np.isfinite(self.measured)
        return f.any(axis=1) & ~f.all(axis=1)

    def names_where(self, mask) -> list:
        return [n for n, m in zip(self.names, mask) if m]


def parse_number(text: str) -> float | None:
    """The number in a cell, None for an empty cell; raises ValueError for anything else."""
    t = text.strip()
    if not t:
        return None
    if not _NUMBER.match(t):
        raise ValueError(t)
    return float(t)


def _read_text(path: str) -> str:
    raw = read_bytes(path, "sheet", 64 * 1024 * 1024)
    try:
        return raw.decode("utf-8-sig")      # spreadsheets often write a byte-order mark
    except UnicodeDecodeError:
        raise VectorgenError(f"{path}: not a UTF-8 text file (save the sheet as CSV)") from None


def _kind_of(path: str, head_line: int, cols: list, kind: str | None) -> str:
    """The sheet's kind from its columns; an error naming what is wrong with them."""
    found = [k for k, want in KIND_COLUMNS.items() if want[1] in cols]
    found = found[0] if len(found) == 1 else None
    if kind is not None and found is not None and found != kind:
        raise VectorgenError(f"{path}: this is a {found} sheet ({', '.join(KIND_COLUMNS[found])}"
                             f"): {KIND_USE[found]} reads it, not {KIND_USE[kind]}")
    guessed = kind is None and found is None
    kind = kind or found or "fit"
    want = KIND_COLUMNS[kind]
    missing = [c for c in want if c not in cols]
    unknown = [c for c in cols if c not in want]
    dup = sorted({c for c in cols if cols.count(c) > 1})
    if missing or unknown or dup:
        what = []
        if missing:
            what.append("missing " + ", ".join(missing))
        if unknown:
            what.append("unknown " + ", ".join(repr(c) for c in unknown))
        if dup:
            what.append("repeated " + ", ".join(dup))
        expected = f"{HEADER} (or a check sheet's {CHECK_HEADER})" if guessed else ",".join(want)
        raise VectorgenError(f"{path}: line {head_line}: wrong columns ({'; '.join(what)}); "
                             f"expected {expected}")
    return kind


def read_sheet(path: str | os.PathLike, kind: str | None = None) -> Sheet:
    """Read and check a measurement sheet (a fit or a check sheet, told by its columns; `kind`
    insists on one). Errors name the file, the line and the cell."""
    path = os.fspath(path)
    text = _read_text(path)
    rows = [(i + 1, r) for i, r in enumerate(csv.reader(io.StringIO(text)))]
    rows = [(n, r) for n, r in rows if any(c.strip() for c in r)]     # blank lines, ",,,,"
    if not rows:
        raise VectorgenError(f"{path}: the sheet is empty (expected the header "
                             f"{','.join(KIND_COLUMNS[kind or 'fit'])})")
    head_line, head = rows[0]
    cols = [c.strip().lower() for c in head]
    while cols and not cols[-1]:
        cols.pop()
    if len(cols) == 1 and ";" in cols[0]:
        raise VectorgenError(f"{path}: columns are separated by ';': save the sheet with commas "
                             f"(expected the header {','.join(KIND_COLUMNS[kind or 'fit'])})")
    kind = _kind_of(path, head_line, cols, kind)
    want = KIND_COLUMNS[kind]
    header = ",".join(want)
    where = [cols.index(c) for c in want]
    body = rows[1:]
    if not body:
        raise VectorgenError(f"{path}: the sheet has a header but no targets")
    if len(body) > MAX_ROWS:
        raise VectorgenError(f"{path}: more than {MAX_ROWS} rows")
    names, place, measured, lines = [], [], [], []
    seen: dict = {}
    for line, r in body:
        extra = [c for c in r[len(cols):] if c.strip()]
        if len(r) < len(cols) or extra:
            raise VectorgenError(f"{path}: line {line}: expected {len(cols)} cells "
                                 f"({header}), found {len(r)}")
        cells = [r[j] for j in where]
        name = cells[0].strip()
        if not name:
            raise VectorgenError(f"{path}: line {line}: the point has no name")
        if name in seen:
            raise VectorgenError(f"{path}: line {line}: point '{name}' is listed twice "
                                 f"(also on line {seen[name]})")
        seen[name] = line
        vals = []
        for col, cell in zip(want[1:], cells[1:]):
            try:
                vals.append(parse_number(cell))
            except ValueError:
                raise VectorgenError(f"{path}: line {line}: point '{name}': {col} must be a "
                                     f"number in plain decimals (got {cell.strip()!r})") from None
        dx, dy, mx, my = vals
        if dx is None or dy is None:
            raise VectorgenError(f"{path}: line {line}: point '{name}': {want[1]} and {want[2]} "
                                 f"must both be given")
        if kind == "fit" and (abs(dx) > 1.0 or abs(dy) > 1.0):
            raise VectorgenError(f"{path}: line {line}: point '{name}': drive ({dx:g}, {dy:g}) "
                                 f"is beyond full scale (+-1)")
        if any(v is not None and abs(v) > 1e5 for v in (mx, my, *(() if kind == "fit"
                                                                  else (dx, dy)))):
            raise VectorgenError(f"{path}: line {line}: point '{name}': a position of more "
                                 f"than 100 m is not a position on a tube face (give mm)")
        names.append(name)
        place.append((dx, dy))
        measured.append((np.nan if mx is None else mx, np.nan if my is None else my))
        lines.append(line)
    place = np.array(place, dtype=float)
    measured = np.array(measured, dtype=float)
    if kind == "fit":
        return Sheet(path, names, place, measured, lines)
    return Sheet(path, names, None, measured, lines, "check", place)


def _fmt(v: float, decimals: int | None) -> str:
    """A cell: empty for NaN, fixed decimals, or 10 significant digits (no "-0")."""
    if not np.isfinite(v):
        return ""
    v = float(v) + 0.0
    if decimals is None:
        return f"{v:.10g}"
    s = f"{v:.{decimals}f}"
    return s[1:] if s.startswith("-") and not s.strip("-0.") else s


def sheet_text(names, drive, measured=None, kind: str = "fit") -> str:
    """The sheet as CSV text: a fit sheet's drive with 10 significant digits, a check sheet's
    targets and every measurement to 1 um."""
    drive = np.asarray(drive, dtype=float).reshape(-1, 2)
    if measured is None:
        measured = np.full(drive.shape, np.nan)
    places = None if kind == "fit" else 3
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(KIND_COLUMNS[kind])
    for name, (dx, dy), (mx, my) in zip(names, drive, np.asarray(measured, dtype=float)):
        w.writerow([name, _fmt(dx, places), _fmt(dy, places), _fmt(mx, 3), _fmt(my, 3)])
    return buf.getvalue()


def write_sheet(path: str, names, drive, measured=None, kind: str = "fit") -> str | None:
    """Write a sheet atomically (`drive` holds a check sheet's targets in mm); an existing file
    at `path` is kept as PATH.bakN first. Returns the backup's path (None when there was
    nothing to keep)."""
    return write_with_backup(os.fspath(path),
                             sheet_text(names, drive, measured, kind).encode("utf-8"), (".csv",))


def sheet_in_the_way(path: str) -> str | None:
    """Why a pattern must not replace the file at `path`, or None when it may: nothing is
    there, or an empty sheet is (no measurement in it). A sheet holding measurements, or a
    file that is not a sheet at all, must not be replaced without asking."""
    path = os.fspath(path)
    if not os.path.exists(path):
        return None
    try:
        old = read_sheet(path)
    except VectorgenError:
        return f"{path} is there and is not an empty measurement sheet"
    if not old.holds_measurements:
        return None
    n = int(np.isfinite(old.measured).any(axis=1).sum())
    return f"{path} holds measurements ({n} of {old.count} targets)"

"""Read a scope capture saved as CSV: a time column and one or more signal columns.

The layouts scopes commonly write are accepted, and what was understood is returned with the
numbers (`Capture.delimiter`, `.decimal`, `.time_unit`, `.header`, `.notes`):

  delimiter   ',' or ';'. With ';' a decimal comma is accepted (``0,0125;0,731``), as
              scopes set to a European locale write; with ',' the decimal mark is '.'.
  header      optional: one row naming the columns, the first being time with its unit,
              e.g. ``time_s``, ``Time (ms)``, ``t[us]``, ``s``, ``ms``, ``us``, ``µs``, ``ns``.
              A time column named without a unit (``TIME``, ``Time``, ``X``) is taken as
              seconds, and the notes say so. A unit row under the names (``Time,CH1`` then
              ``(ms),(V)``) is joined to them.
  no header   time in seconds is assumed, and the notes say so.
  metadata    lines some scopes write above the table (model, sample interval, ...) are
              skipped: the table starts at the first row of two or more numbers, and every
              line from there on must be a row of that table. Where that is not clear (a header
              with numbers above it) the reader refuses rather than guesses.
  columns     more than two: the first signal column is used unless `column=` names another.

Anything else is an `InputError` whose one line names the file and the line: a cell that is not
a number, time that does not increase, too few points, an unknown time unit, an empty file, a
single column, tab-separated columns.
"""

from __future__ import annotations

__all__ = ["Capture", "InputError", "read_capture", "MIN_POINTS", "MAX_CAPTURE_BYTES"]

import io
import math
import os
import re
from dataclasses import dataclass

import numpy as np

from vectorgen.errors import InputError
from vectorgen.files import read_bytes

MIN_POINTS = 20                         # fewer cannot show two levels and an edge between them
MAX_CAPTURE_BYTES = 256 * 1024 * 1024   # ~8 M rows of "time,value": more than any scope record
HEAD_LINES = 200                        # how far down the table may start

# A plain decimal number (no thousands separators, no nan/inf), with '.' or with ','.
_NUMBER_DOT = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")
_NUMBER_COMMA = re.compile(r"^[+-]?(\d+(,\d*)?|,\d+)([eE][+-]?\d+)?$")

_UNIT_SECONDS = {"s": 1.0, "ms": 1e-3, "us": 1e-6, "ns": 1e-9}
_UNIT_WORDS = {
    "s": "s", "sec": "s", "secs": "s", "second": "s", "seconds": "s",
    "ms": "ms", "msec": "ms", "millisecond": "ms", "milliseconds": "ms",
    "us": "us", "usec": "us", "microsecond": "us", "microseconds": "us",
    "ns": "ns", "nsec": "ns", "nanosecond": "ns", "nanoseconds": "ns",
}
_TIME_NAMES = {"time", "t", "x", "x-axis", "xaxis", "zeit", "temps", "tiempo", "tempo"}
_INDEX_NAMES = {"index", "idx", "sample", "samples", "point", "points", "no", "no.", "n", "#",
                "nr", "nr."}


@dataclass(frozen=True)
class Capture:
    """A scope capture: strictly increasing time in seconds and one signal, plus what the
    reader understood of the file (so a user can see an assumption was made)."""

    path: str
    time_s: np.ndarray          # (n,) s, strictly increasing
    signal: np.ndarray          # (n,) in the capture's own unit (V or A)
    line_numbers: np.ndarray    # (n,) the file line of each point, for messages
    delimiter: str              # ',' or ';'
    decimal: str                # '.' or ','
    time_unit: str              # 's', 'ms', 'us' or 'ns', as read (time_s is converted)
    header: tuple | None        # the column names as read, None without a header row
    header_line: int | None
    signal_column: int          # index of the signal column in the table (0 is time)
    signal_name: str
    metadata_lines: int         # lines skipped above the table (header excluded)
    notes: tuple                # assumptions made, in words

    @classmethod
    def from_arrays(cls, time_s, signal, path: str = "<arrays>") -> "Capture":
        """A capture from arrays already in memory (time in s), checked like a file's.

        Examples
        --------
        >>> try:
        ...     Capture.from_arrays([0.0, 1e-6, 2e-6], [0, 1, 1])
        ... except InputError as exc:
        ...     print(exc)
        <arrays>: only 3 points; a capture needs at least 20
        >>> Capture.from_arrays([i * 1e-6 for i in range(20)], [0.0] * 20).count
        20
        """
        t = np.asarray(time_s, dtype=float).ravel()
        y = np.asarray(signal, dtype=float).ravel()
        if t.size != y.size:
            raise InputError(f"{path}: {t.size} times but {y.size} signal values")
        if t.size < MIN_POINTS:
            raise InputError(f"{path}: only {t.size} points; a capture needs at least "
                             f"{MIN_POINTS}")
        if not (np.isfinite(t).all() and np.isfinite(y).all()):
            raise InputError(f"{path}: times and signal must be finite numbers")
        numbers = np.arange(1, t.size + 1)
        _check_increasing(path, t, numbers, "s")
        return cls(path, t, y, numbers, ",", ".", "s", None, None, 1, "signal", 0,
                   ("made from arrays: line numbers are sample numbers from 1",))

    @property
    def count(self) -> int:
        return int(self.time_s.size)

    @property
    def sample_interval_s(self) -> float:
        """The median time step (scopes sample evenly; the median ignores a glitch)."""
        return float(np.median(np.diff(self.time_s)))

    def describe(self) -> str:
        """One line: what was read and how."""
        head = "no header" if self.header is None else f"header on line {self.header_line}"
        dec = ", decimal comma" if self.decimal == "," else ""
        return (f"{self.path}: {self.count} points, '{self.delimiter}'-separated{dec}, {head}, "
                f"time in {self.time_unit}, signal '{self.signal_name}'"
                + (f", {self.metadata_lines} metadata line(s) skipped"
                   if self.metadata_lines else ""))


def read_capture(path, column: int | str | None = None) -> Capture:
    """Read a scope capture saved as CSV.

    Parameters
    ----------
    path : str or os.PathLike
        The CSV file.
    column : int or str, optional
        The signal column: an index into the table's columns (0 is time, so 1 is the first
        signal column, the default) or a header name (letter case ignored).

    Returns
    -------
    Capture
        Time in seconds, the signal, and what was understood (delimiter, decimal mark, time
        unit, header, skipped lines, notes on assumptions).

    Raises
    ------
    InputError
        One line naming the file and, where there is one, the line: empty file, no table of
        numbers, one column, a cell that is not a number, time not increasing, too few points,
        an unknown time unit, a `column` that is not in the table.

    Notes
    -----
    time_s = t * k with k = 1, 1e-3, 1e-6, 1e-9 for a header unit of s, ms, us (µs), ns; with
    no unit named, k = 1 (seconds assumed; `Capture.notes` says so).

    Examples
    --------
    >>> import os, tempfile
    >>> d = tempfile.mkdtemp()
    >>> p = os.path.join(d, "cap.csv")
    >>> with open(p, "w") as fh:
    ...     _ = fh.write("Time (us);CH1\\n" + "".join(f"{i};{i % 2},5\\n" for i in range(30)))
    >>> cap = read_capture(p)
    >>> cap.delimiter, cap.decimal, cap.time_unit, cap.count
    (';', ',', 'us', 30)
    >>> float(cap.time_s[3]), float(cap.signal[3])
    (3e-06, 1.5)
    """
    path = os.fspath(path)
    text = _decode(path, _read(path))
    lines = text.splitlines()
    nonblank = [i for i, s in enumerate(lines[:_head_span(lines)]) if s.strip()]
    if not any(s.strip() for s in lines):
        raise InputError(f"{path}: the capture is empty (expected rows of time and signal)")
    delim, start = _find_table(path, lines, nonblank)
    header, header_line, units_joined = _find_header(lines, nonblank, start, delim)
    metadata = sum(1 for i in nonblank if i < start) - (0 if header is None else
                                                        1 + units_joined)
    body, numbers = _table_text(lines, start, delim)
    decimal = "," if delim == ";" and "," in body else "."
    table = _parse_table(path, body, numbers, delim, decimal, header)
    ncols = table.shape[1]
    if header is not None and len(header) != ncols:
        raise InputError(f"{path}: line {header_line}: the header names {len(header)} "
                         f"columns but the table (from line {numbers[0]}) has {ncols}")
    notes = []
    if header is None:
        unit = "s"
        notes.append("no header row: time taken as seconds")
    else:
        unit = _time_unit(path, header[0], header_line, notes)
    j = _signal_column(path, column, header, ncols)
    if len(numbers) < MIN_POINTS:
        raise InputError(f"{path}: lines {numbers[0]}-{numbers[-1]}: only {len(numbers)} "
                         f"data rows; a capture needs at least {MIN_POINTS} points")
    time_s = table[:, 0] * _UNIT_SECONDS[unit]
    _check_increasing(path, time_s, numbers, unit)
    if ncols > 2 and column is None:
        notes.append(f"{ncols - 1} signal columns: the first used "
                     f"('{_column_name(header, 1)}'; choose another with column=)")
    return Capture(path=path, time_s=time_s, signal=table[:, j].copy(),
                   line_numbers=numbers, delimiter=delim, decimal=decimal,
                   time_unit=unit, header=header, header_line=header_line, signal_column=j,
                   signal_name=_column_name(header, j), metadata_lines=metadata,
                   notes=tuple(notes))


# --- reading ------------------------------------------------------------------------------------

def _read(path: str) -> bytes:
    return read_bytes(path, "capture", MAX_CAPTURE_BYTES)


def _decode(path: str, raw: bytes) -> str:
    if b"\x00" in raw[:65536]:
        raise InputError(f"{path}: not a text file (save the capture as CSV)")
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        # Older scopes write Latin-1 (a 'µs' header is byte 0xB5); every byte decodes.
        return raw.decode("latin-1")


def _head_span(lines: list) -> int:
    """How many lines to look through for the start of the table: HEAD_LINES non-blank ones."""
    seen = 0
    for i, s in enumerate(lines):
        if s.strip():
            seen += 1
            if seen > HEAD_LINES:
                return i
    return len(lines)


def _cells(line: str, delim: str) -> list:
    # Trailing delimiters (empty last cells) are common in scope exports; quotes too.
    return [c.strip().strip('"').strip() for c in line.rstrip().rstrip(delim).split(delim)]


def _is_number(cell: str, delim: str) -> bool:
    return bool(_NUMBER_DOT.match(cell) or (delim == ";" and _NUMBER_COMMA.match(cell)))


def _numeric_row(line: str, delim: str) -> bool:
    cells = _cells(line, delim)
    return len(cells) >= 2 and all(_is_number(c, delim) for c in cells)


def _find_table(path: str, lines: list, nonblank: list) -> tuple[str, int]:
    """The delimiter and the index of the table's first line."""
    counts = {d: sum(_numeric_row(lines[i], d) for i in nonblank) for d in (",", ";")}
    delim = max((",", ";"), key=lambda d: counts[d])        # a tie (0, 0) handled below
    if counts[delim] == 0:
        first = nonblank[0] if nonblank else 0
        single = [i for i in nonblank if _is_number(lines[i].strip().rstrip(",;").strip(), ";")]
        if single and len(single) >= len(nonblank) // 2:
            raise InputError(f"{path}: line {single[0] + 1}: only one column; a capture needs "
                             f"two (time, signal)")
        spaced = [i for i in nonblank if len(lines[i].split()) >= 2
                  and all(_is_number(c, ";") for c in lines[i].split())]
        if spaced:
            raise InputError(f"{path}: line {spaced[0] + 1}: columns separated by tabs or "
                             f"spaces; save the capture with ',' or ';' between columns")
        raise InputError(f"{path}: no table of numbers in the first {HEAD_LINES} lines "
                         f"(from line {first + 1}): expected time and signal columns "
                         f"separated by ',' or ';'")
    start = next(i for i in nonblank if _numeric_row(lines[i], delim))
    return delim, start


def _header_like(line: str, delim: str) -> list | None:
    cells = _cells(line, delim)
    if len(cells) >= 2 and cells[0] and not any(_is_number(c, delim) for c in cells if c):
        return cells
    return None


def _find_header(lines, nonblank, start, delim):
    """(names, line number, whether a unit row was joined) for the row above the table."""
    above = [i for i in nonblank if i < start]
    if not above:
        return None, None, False
    last = _header_like(lines[above[-1]], delim)
    if last is None:
        return None, None, False
    if len(above) >= 2:
        prev = _header_like(lines[above[-2]], delim)
        if (prev is not None and len(prev) == len(last)
                and all(re.fullmatch(r"[\(\[].*[\)\]]", c) for c in last if c)):
            joined = tuple(f"{a} {b}".strip() for a, b in zip(prev, last))
            return joined, above[-2] + 1, True
    return tuple(last), above[-1] + 1, False


def _table_text(lines: list, start: int, delim: str) -> tuple[str, np.ndarray]:
    """The table from line index `start` as one text, a row a line (blank lines, quotes,
    trailing delimiters and spaces removed), and the file line number of each row. Whole-text
    string operations, not a loop over rows: a million rows take about a second."""
    end = len(lines)
    while end > start and not lines[end - 1].strip():
        end -= 1
    text = "\n".join(lines[start:end])
    # Plain substring tests first: each regex below scans the whole text.
    spaced_end = " \n" in text or "\t\n" in text or text[-1:] in " \t"
    if "\n\n" in text or (spaced_end and re.search(r"(?m)^[ \t]*$", text)):
        keep = [i for i in range(start, end) if lines[i].strip()]
        text = "\n".join(lines[i] for i in keep)
        numbers = np.asarray(keep) + 1
    else:
        numbers = np.arange(start + 1, end + 1)
    if '"' in text:
        text = text.replace('"', "")
    if spaced_end or delim + "\n" in text or text.endswith(delim):
        text = re.sub(r"(?m)[ \t" + re.escape(delim) + r"]+$", "", text)
    return text, numbers


def _parse_table(path, body, numbers, delim, decimal, header) -> np.ndarray:
    """All rows as floats: numpy's C reader first, a line-by-line check only to name a bad
    line."""
    table = None
    # With a decimal comma a '.' is no decimal mark (it may be a thousands separator): only the
    # line-by-line check below can say where.
    if decimal == "." or "." not in body:
        text = body.replace(",", ".") if decimal == "," else body
        try:
            table = np.loadtxt(io.StringIO(text), delimiter=delim, dtype=float, ndmin=2,
                               comments=None)
        except ValueError:
            pass
    if table is not None:
        bad = np.flatnonzero(~np.isfinite(table).all(axis=1))
        if not bad.size:
            return table
    rows = body.split("\n")
    if table is not None:
        if _pattern_ok(rows[bad[0]], delim, decimal):       # e.g. 1e999: a float, not finite
            raise InputError(f"{path}: line {numbers[bad[0]]}: a number too large to be a "
                             f"sample ({rows[bad[0]].strip()!r})")
    width = len(_cells(rows[0], delim))
    pattern = _NUMBER_COMMA if decimal == "," else _NUMBER_DOT
    for n, r in zip(numbers, rows):
        cells = [c.strip() for c in r.split(delim)]
        if not any(_is_number(c, delim) for c in cells) and any(re.search(r"[^\W\d_]", c)
                                                                for c in cells):
            raise InputError(f"{path}: line {n}: a row of text inside the table (rows of "
                             f"numbers from line {numbers[0]} above it): if it is the header, "
                             f"delete the lines above it")
        if len(cells) != width:
            raise InputError(f"{path}: line {n}: {len(cells)} columns where the table (from "
                             f"line {numbers[0]}) has {width}")
        for j, c in enumerate(cells):
            if not pattern.match(c):
                what = "an empty cell" if not c else f"not a number ({c!r})"
                raise InputError(f"{path}: line {n}: {_column_name(header, j)}: {what}")
    raise InputError(f"{path}: line {numbers[0]}: the table could not be read as numbers")


def _pattern_ok(row: str, delim: str, decimal: str) -> bool:
    """Whether every cell of `row` is a plain decimal number (with the given decimal mark)."""
    pattern = _NUMBER_COMMA if decimal == "," else _NUMBER_DOT
    return all(pattern.match(c.strip()) for c in row.split(delim))


# --- what the columns mean ----------------------------------------------------------------------

def _normal(cell: str) -> str:
    return cell.strip().lower().replace("\u00b5", "u").replace("\u03bc", "u")


def _time_unit(path: str, cell: str, line: int, notes: list) -> str:
    """The time unit named in the first header cell ('s', 'ms', 'us' or 'ns')."""
    c = _normal(cell)
    m = re.fullmatch(r"(?P<name>.*?)\s*[\(\[](?P<unit>[^\)\]]*)[\)\]]", c)
    if m is None:
        m = re.fullmatch(r"(?P<name>[a-z][a-z\-]*)\s*[_/ ]\s*(?P<unit>[a-z]+)", c)
        if m is not None and m["name"] not in _TIME_NAMES:
            m = None
    if m is not None:
        unit = m["unit"].strip()
        if unit not in _UNIT_WORDS:
            raise InputError(f"{path}: line {line}: unknown time unit {unit!r} in the header "
                             f"cell {cell!r}: give the time in s, ms, us or ns")
        return _UNIT_WORDS[unit]
    if c in _UNIT_WORDS:
        return _UNIT_WORDS[c]
    if c in _TIME_NAMES:
        notes.append(f"the time column ({cell!r}) names no unit: taken as seconds")
        return "s"
    if c in _INDEX_NAMES:
        raise InputError(f"{path}: line {line}: the first column ({cell!r}) counts samples, "
                         f"not time: save the capture with a time column")
    raise InputError(f"{path}: line {line}: the first column ({cell!r}) is not time: name it "
                     f"with its unit, e.g. time_s, Time (ms), t[us]")


def _column_name(header, j: int) -> str:
    if header is not None and j < len(header) and header[j]:
        return header[j]
    return "time" if j == 0 else f"column {j + 1}"


def _signal_column(path: str, column, header, ncols: int) -> int:
    if ncols < 2:
        raise InputError(f"{path}: only one column; a capture needs two (time, signal)")
    if column is None:
        return 1
    if isinstance(column, str):
        names = [_normal(h) for h in header] if header is not None else []
        if _normal(column) not in names:
            have = ", ".join(repr(h) for h in header[1:]) if header else "no header"
            raise InputError(f"{path}: column={column!r} is not a signal column of the "
                             f"capture ({have})", "column")
        j = names.index(_normal(column))
        if j == 0:
            raise InputError(f"{path}: column={column!r} is the time column", "column")
        return j
    if isinstance(column, bool) or not isinstance(column, (int, np.integer)):
        raise InputError(f"column must be a column index or a header name (column={column!r})",
                         "column")
    if not 1 <= column < ncols:
        raise InputError(f"{path}: column={column} is not a signal column: the table has "
                         f"{ncols} columns, 0 is time, 1 to {ncols - 1} are signals", "column")
    return int(column)


def _check_increasing(path: str, time_s: np.ndarray, numbers: list, unit: str) -> None:
    bad = np.flatnonzero(~(np.diff(time_s) > 0))
    if bad.size:
        i = int(bad[0]) + 1
        k = _UNIT_SECONDS[unit]
        raise InputError(f"{path}: line {numbers[i]}: time does not increase "
                         f"({_g(time_s[i] / k)} {unit} after {_g(time_s[i - 1] / k)} {unit} on "
                         f"line {numbers[i - 1]})")


def _g(v: float) -> str:
    return f"{v:.6g}" if math.isfinite(v) else str(v)

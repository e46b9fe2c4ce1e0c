"""Measurement sheets: reading, writing, and bad sheets ending in one line with nothing changed."""

from __future__ import annotations

import csv
import io

import numpy as np
import pytest

from calib_helpers import bench_profile, default_tube, snapshot
from render_helpers import run_cli
from calibration.patterns import make_pattern
from calibration.sheet import COLUMNS, HEADER, read_sheet, sheet_text, write_sheet
from vectorgen.cli import main
from vectorgen.errors import VectorgenError


def filled_box_text() -> str:
    pat = make_pattern("box", bench_profile())
    return sheet_text(pat.names, pat.drive, default_tube().measure(pat.drive, 0.2, 1))


def test_written_sheet_reads_back_and_parses_as_plain_csv(tmp_path):
    pat = make_pattern("grid", bench_profile(), 3, 4)
    m = default_tube().measure(pat.drive, 0.2, 0)
    m[2] = np.nan
    assert write_sheet(str(tmp_path / "s.csv"), pat.names, pat.drive, m) is None
    sh = read_sheet(tmp_path / "s.csv")
    assert sh.names == pat.names
    assert np.allclose(sh.drive, pat.drive, rtol=1e-9, atol=0)
    assert np.allclose(sh.measured[sh.filled], np.round(m[sh.filled], 3))
    assert sh.names_where(~sh.filled) == [pat.names[2]]
    # Reference: the csv module sees exactly the five columns on every row.
    rows = list(csv.reader(io.StringIO((tmp_path / "s.csv").read_text())))
    assert tuple(rows[0]) == COLUMNS and all(len(r) == 5 for r in rows)


def test_reader_accepts_what_spreadsheets_write(tmp_path):
    text = ("\ufeffPoint, Measured_Y_mm ,drive_x,drive_y,measured_x_mm,\n"
            "a,1.5,0.5,-0.5,2,\n\n"
            "b,,-0.5,0.5,,\n"
            ",,,,\n"
            "c,-3e1,0,0,+4.25,\n")
    (tmp_path / "s.csv").write_text(text, encoding="utf-8")
    sh = read_sheet(tmp_path / "s.csv")
    assert sh.names == ["a", "b", "c"]
    assert sh.drive.tolist() == [[0.5, -0.5], [-0.5, 0.5], [0.0, 0.0]]
    assert sh.measured[0].tolist() == [2.0, 1.5] and sh.measured[2].tolist() == [4.25, -30.0]
    assert sh.filled.tolist() == [True, False, True]


def test_half_filled_rows_are_partial_not_guessed(tmp_path):
    (tmp_path / "s.csv").write_text(HEADER + "\na,0.1,0.1,5,\nb,0.2,0.2,,\n")
    sh = read_sheet(tmp_path / "s.csv")
    assert sh.partial.tolist() == [True, False]
    assert not sh.filled.any()


BAD_SHEETS = {
    "wrong columns": ("point,x,y,measured_x_mm,measured_y_mm\na,0,0,1,1\n", "wrong columns"),
    "text in numbers": (HEADER + "\na,0.1,0.1,12 mm,3\n", "plain decimals"),
    "duplicated points": (HEADER + "\na,0.1,0.1,1,1\nb,0.2,0.2,1,1\na,0.3,0.3,2,2\n",
                          "listed twice"),
    "all rows empty": (HEADER + "\na,0.1,0.1,,\nb,0.2,-0.2,,\nc,-0.3,0.3,,\n",
                       "no measurements"),
}

MORE_BAD_SHEETS = {
    "drive beyond full scale": (HEADER + "\na,1.2,0,1,1\n", "beyond full scale"),
    "semicolons": ("point;drive_x;drive_y;measured_x_mm;measured_y_mm\na;0;0;1;1\n", "';'"),
    "header only": (HEADER + "\n", "no targets"),
    "empty file": ("", "empty"),
    "not a number": (HEADER + "\na,0.1,0.1,nan,1\n", "plain decimals"),
    "missing cells": (HEADER + "\na,0.1,0.1\n", "expected 5 cells"),
    "unnamed point": (HEADER + "\n,0.1,0.1,1,1\n", "no name"),
    "thousands separator": (HEADER + '\na,0.1,0.1,"1,5",1\n', "plain decimals"),
}


@pytest.mark.parametrize("case", sorted(BAD_SHEETS))
def test_bad_sheets_end_in_one_line_exit_2_and_change_nothing(tmp_path, case):
    text, words = BAD_SHEETS[case]
    (tmp_path / "bad.csv").write_text(text)
    (tmp_path / "tube.toml").write_text("# the user's profile\n")
    before = snapshot(tmp_path)
    r = run_cli("fit", tmp_path / "bad.csv", "-o", tmp_path / "tube.toml")
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and words in lines[0] and "Traceback" not in r.stderr, r.stderr
    assert snapshot(tmp_path) == before


@pytest.mark.parametrize("case", sorted(MORE_BAD_SHEETS))
def test_more_bad_sheets_are_refused(tmp_path, capsys, case):
    text, words = MORE_BAD_SHEETS[case]
    (tmp_path / "bad.csv").write_text(text)
    before = snapshot(tmp_path)
    assert main(["fit", str(tmp_path / "bad.csv"), "-o", str(tmp_path / "t.toml")]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and words in err, err
    assert snapshot(tmp_path) == before


def test_unreadable_sheets(tmp_path):
    (tmp_path / "bin.csv").write_bytes(b"\xff\xfe\x00\x81 not text")
    with pytest.raises(VectorgenError, match="UTF-8"):
        read_sheet(tmp_path / "bin.csv")
    with pytest.raises(VectorgenError, match="not found"):
        read_sheet(tmp_path / "none.csv")
    with pytest.raises(VectorgenError, match="folder"):
        read_sheet(tmp_path)


def test_fit_output_in_a_missing_folder_is_refused_before_reading(tmp_path, capsys):
    (tmp_path / "s.csv").write_text(filled_box_text())
    assert main(["fit", str(tmp_path / "s.csv"), "-o", str(tmp_path / "no" / "t.toml")]) == 2
    assert "does not exist" in capsys.readouterr().err

"""Calibration patterns: targets at known drive, drawn through the profile in use."""

from __future__ import annotations

import csv

import numpy as np
import pytest
from scipy.io import wavfile

from calib_helpers import bench_profile, default_tube, fill_sheet, snapshot, write_profile
from calibration.fit import fit_sheet, fitted_profile
from calibration.patterns import make_pattern
from calibration.sheet import COLUMNS, read_sheet
from vectorgen.cli import main
from vectorgen.deflection import DeflectionModel
from vectorgen.profile import load_profile


def beam_reaches(signal: np.ndarray, drive: np.ndarray) -> np.ndarray:
    """For each target drive, the closest any output sample comes to it (full-scale units)."""
    d = signal[None, :, :2].astype(float) - drive[:, None, :]
    return np.abs(d).max(axis=2).min(axis=1)


def test_pattern_writes_a_signal_and_an_empty_sheet(tmp_path, capsys):
    out, sheet = tmp_path / "grid.wav", tmp_path / "grid.csv"
    assert main(["pattern", "grid", "-o", str(out), "--sheet", str(sheet), "--preview",
                 str(tmp_path / "grid.png")]) == 0
    assert "49 targets" in capsys.readouterr().out          # the default 7 x 7
    with open(sheet, newline="") as fh:
        rows = list(csv.reader(fh))
    assert tuple(rows[0]) == COLUMNS
    assert len(rows) == 1 + 49 and all(r[3] == r[4] == "" for r in rows[1:])
    # Reference reader: scipy.io.wavfile. The beam sits at every target's drive (float32).
    rate, sig = wavfile.read(out)
    assert rate == 48000 and sig.dtype == np.float32
    sh = read_sheet(sheet)
    assert beam_reaches(sig, sh.drive).max() < 1e-6
    assert (tmp_path / "grid.png").stat().st_size > 1000


def test_a_calibrated_profile_puts_the_beam_at_exactly_the_sheet_drive(tmp_path):
    # Through a fitted (distorted, rotated) profile the pattern's mm strokes come back through
    # the renderer's inverse to the very drive values in the sheet.
    base = bench_profile()
    pat = make_pattern("grid", base, 13, 17)
    from calibration.sheet import Sheet

    sh = Sheet("<s>", pat.names, pat.drive, default_tube().measure(pat.drive, 0.2, 2), [])
    prof = fitted_profile(base, fit_sheet(sh, base))
    path = write_profile(tmp_path / "tube.toml", prof)
    assert main(["pattern", "grid", "-o", str(tmp_path / "g.wav"), "--sheet",
                 str(tmp_path / "g.csv"), "--profile", path, "-q"]) == 0
    _, sig = wavfile.read(tmp_path / "g.wav")
    again = read_sheet(tmp_path / "g.csv")
    assert beam_reaches(sig, again.drive).max() < 1e-6
    # The targets' nominal positions (the fitted model) lie inside the usable area.
    p = DeflectionModel.from_profile(load_profile(path)).drive_to_mm(again.drive)
    w, h = prof.screen.half_extent
    assert np.all(np.abs(p[:, 0]) <= 0.9 * w) and np.all(np.abs(p[:, 1]) <= 0.9 * h)


def test_grid_targets_fill_the_usable_area_on_a_regular_drive_lattice():
    prof = bench_profile()
    pat = make_pattern("grid", prof, rows=5, cols=7, extent=0.8)
    assert len(pat.names) == 35 and pat.names[0] == "r1c1" and pat.names[-1] == "r5c7"
    xs, ys = np.unique(pat.drive[:, 0]), np.unique(pat.drive[:, 1])
    assert len(xs) == 7 and len(ys) == 5
    assert np.allclose(np.diff(xs), np.diff(xs)[0]) and np.allclose(np.diff(ys), np.diff(ys)[0])
    assert pat.drive[0, 0] < 0 < pat.drive[0, 1]            # r1c1 top left
    w, h = prof.screen.half_extent
    # Uncalibrated profile: nominal mm = drive x half extent; the largest target sits inside
    # 0.8 of the area, less the cross arm.
    assert np.abs(pat.nominal_mm[:, 0]).max() <= 0.8 * w
    assert np.abs(pat.nominal_mm[:, 1]).max() <= 0.8 * h
    assert np.abs(pat.nominal_mm).max(axis=0).max() > 0.6 * h


def point_counts(pattern) -> list:
    return [len(pattern.strokes.stroke(i)) for i in range(pattern.strokes.count)]


def test_grid_and_check_mark_their_targets_with_dots_and_box_and_circle_with_crosses():
    prof = bench_profile()
    for kind in ("grid", "check"):
        pat = make_pattern(kind, prof)
        # a dot is a one-point stroke: one per target, nothing else drawn
        assert point_counts(pat) == [1] * len(pat.names) == [1] * 49, kind
        crosses = make_pattern(kind, prof, mark="cross")              # still there when asked
        assert crosses.strokes.count == 3 * 49 and max(point_counts(crosses)) > 1, kind
    box = make_pattern("box", prof)
    assert box.strokes.count == 3 * 5 and sorted(set(point_counts(box))) == [1, 9]
    circle = make_pattern("circle", prof)
    # the circle, eight ticks and the two arms of the centre cross: strokes, no dots
    assert circle.strokes.count == 1 + 8 + 2 and min(point_counts(circle)) == 2
    assert make_pattern("circle", prof, mark="dot").strokes.count == 1 + 9


def test_a_pattern_report_that_cannot_be_written_is_refused_before_anything_is(tmp_path,
                                                                              capsys):
    before = snapshot(tmp_path)
    assert main(["pattern", "grid", "-o", str(tmp_path / "g.wav"), "--sheet",
                 str(tmp_path / "g.csv"), "--report", str(tmp_path / "g.txt")]) == 2
    err = capsys.readouterr().err
    assert ".json" in err and len(err.strip().splitlines()) == 1
    assert snapshot(tmp_path) == before


def test_box_has_the_centre_and_four_corners():
    pat = make_pattern("box", bench_profile())
    assert pat.names == ["centre", "top-left", "top-right", "bottom-left", "bottom-right"]
    assert np.array_equal(pat.drive[0], [0.0, 0.0])
    assert np.allclose(np.abs(pat.drive[1:]), np.abs(pat.drive[1]))


def test_circle_checks_aspect_only_on_a_right_profile(tmp_path):
    # Measured through the true tube with no noise, a circle drawn through a profile fitted to
    # that tube comes out round (aspect 1); through the uncalibrated profile it does not.
    tube = default_tube()
    base = bench_profile()
    grid = make_pattern("grid", base, 13, 17)
    from calibration.sheet import Sheet

    fitted = fitted_profile(base, fit_sheet(Sheet("<g>", grid.names, grid.drive,
                                                  tube.land(grid.drive), []), base))
    aspects = {}
    for label, prof in (("fitted", fitted), ("uncalibrated", base)):
        pat = make_pattern("circle", prof)
        land = tube.land(pat.drive)
        at = {n: i for i, n in enumerate(pat.names)}
        horiz = np.hypot(*(land[at["E"]] - land[at["W"]]))
        vert = np.hypot(*(land[at["N"]] - land[at["S"]]))
        aspects[label] = horiz / vert
        r = np.hypot(*pat.nominal_mm[:8].T)
        assert np.allclose(r, r[0])                  # the targets sit on one circle
    assert aspects["fitted"] == pytest.approx(1.0, abs=1e-6)
    assert abs(aspects["uncalibrated"] - 1.0) > 0.01
    # The fit reports the same aspect from a circle sheet.
    path = write_profile(tmp_path / "base.toml", base)
    assert main(["pattern", "circle", "-o", str(tmp_path / "c.wav"), "--sheet",
                 str(tmp_path / "c.csv"), "--profile", path, "-q"]) == 0
    fill_sheet(tmp_path / "c.csv", tube, noise_mm=0.0)
    res = fit_sheet(read_sheet(tmp_path / "c.csv"), base)
    # (the sheet keeps mm to 1 um, hence the tolerance)
    assert res.report["circle_aspect"] == pytest.approx(aspects["uncalibrated"], rel=1e-5)


def test_pattern_keeps_an_existing_empty_sheet_as_a_backup(tmp_path):
    sheet = tmp_path / "s.csv"
    assert main(["pattern", "grid", "--sheet", str(sheet), "-o", str(tmp_path / "g.wav"),
                 "-q"]) == 0
    empty = sheet.read_bytes()
    assert main(["pattern", "box", "-o", str(tmp_path / "b.wav"), "--sheet", str(sheet),
                 "-q"]) == 0
    assert (tmp_path / "s.csv.bak1").read_bytes() == empty
    assert read_sheet(sheet).count == 5


def test_pattern_replaces_a_file_that_is_not_a_sheet_only_when_asked(tmp_path, capsys):
    sheet = tmp_path / "s.csv"
    sheet.write_text("my measurements\n")
    before = snapshot(tmp_path)
    assert main(["pattern", "box", "-o", str(tmp_path / "b.wav"), "--sheet", str(sheet),
                 "-q"]) == 2
    err = capsys.readouterr().err
    assert "--replace-sheet" in err and len(err.strip().splitlines()) == 1
    assert snapshot(tmp_path) == before
    assert main(["pattern", "box", "-o", str(tmp_path / "b.wav"), "--sheet", str(sheet),
                 "--replace-sheet", "-q"]) == 0
    assert (tmp_path / "s.csv.bak1").read_text() == "my measurements\n"
    assert read_sheet(sheet).count == 5


@pytest.mark.parametrize("args, words", [
    (["grid", "--rows", "1"], "--rows"),
    (["grid", "--extent", "1.5"], "--extent"),
    (["box", "--extent", "nan"], "--extent"),
    (["grid", "--cols", "99"], "--cols"),
])
def test_bad_pattern_options_are_refused_before_writing(tmp_path, capsys, args, words):
    before = snapshot(tmp_path)
    assert main(["pattern", *args, "-o", str(tmp_path / "p.wav"), "--sheet",
                 str(tmp_path / "p.csv")]) == 2
    err = capsys.readouterr().err
    assert words in err and len(err.strip().splitlines()) == 1
    assert snapshot(tmp_path) == before


def test_signal_and_sheet_must_be_different_files(tmp_path, capsys):
    assert main(["pattern", "box", "-o", str(tmp_path / "x.csv"), "--sheet",
                 str(tmp_path / "x.csv")]) == 2
    assert "different" in capsys.readouterr().err
    assert not (tmp_path / "x.csv").exists()

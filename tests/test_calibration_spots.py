"""From a photo to a filled sheet: a synthetic photo of the grid drawn through a known tube,
warped by a known camera perspective."""

from __future__ import annotations

import numpy as np
import pytest

from calib_helpers import (TRUE_GAIN_X, TRUE_GAIN_Y, TRUE_K, TRUE_ROTATION_DEG, apply_homography,
                           bench_profile, camera_homography, default_tube, snapshot,
                           synthetic_photo, write_profile)
from render_helpers import run_cli
from calibration.fit import fit_sheet
from calibration.sheet import read_sheet, sheet_text
from calibration.spots import homography
from vectorgen.cli import main
from vectorgen.errors import VectorgenError
from vectorgen.sinks import read_signal

MARKS_MM = np.array([[-85.0, -64.0], [85.0, -64.0], [85.0, 64.0], [-85.0, 64.0]])
CORNERS = ("r1c1", "r1c17", "r13c1", "r13c17")


@pytest.fixture(scope="module")
def grid(tmp_path_factory):
    """A 13 x 17 grid pattern of crosses rendered with the uncalibrated bench profile, its empty
    sheet, and a photo of what the true tube shows."""
    folder = tmp_path_factory.mktemp("spots")
    base = write_profile(folder / "bench.toml", bench_profile())
    assert main(["pattern", "grid", "--rows", "13", "--cols", "17", "--mark", "cross", "-o",
                 str(folder / "grid.wav"), "--sheet", str(folder / "grid.csv"), "--profile",
                 base, "--channels", "3", "-q"]) == 0
    sig, _, _ = read_signal(str(folder / "grid.wav"))
    tube = default_tube()
    to_photo = synthetic_photo(sig, 3, None, tube, folder / "photo.png")
    return {"folder": folder, "base": base, "signal": sig, "tube": tube, "to_photo": to_photo,
            "sheet": folder / "grid.csv"}


def refs_args(to_photo):
    """--ref options for four marks on the face at MARKS_MM (e.g. graticule corners), their
    pixel positions known from the camera model."""
    px = to_photo(MARKS_MM)
    return [f"--ref={a:.3f},{b:.3f}={x:g},{y:g}" for (a, b), (x, y) in zip(px, MARKS_MM)]


def copy_sheet(grid, name, measured=None):
    sh = read_sheet(grid["sheet"])
    path = grid["folder"] / name
    path.write_text(sheet_text(sh.names, sh.drive, measured), encoding="utf-8")
    return path


def test_photo_fills_the_sheet_and_the_fit_recovers_the_tube(grid, capsys):
    out = grid["folder"] / "filled.csv"
    assert main(["spots", str(grid["folder"] / "photo.png"), "--sheet", str(grid["sheet"]),
                 "-o", str(out), *refs_args(grid["to_photo"])]) == 0
    assert "matched 221 of 221" in capsys.readouterr().out
    sh = read_sheet(out)
    assert sh.filled.all()
    err = np.hypot(*(sh.measured - grid["tube"].land(sh.drive)).T)
    # The photo gives 4.4 pixels per mm here; centroids come within a fraction of a pixel.
    assert np.sqrt(np.mean(err ** 2)) < 0.15 and err.max() < 0.4
    rep = fit_sheet(sh, bench_profile()).report
    assert rep["gain_x_mm_per_fs"] == pytest.approx(TRUE_GAIN_X, rel=0.005)
    assert rep["gain_y_mm_per_fs"] == pytest.approx(TRUE_GAIN_Y, rel=0.005)
    assert rep["rotation_deg"] == pytest.approx(TRUE_ROTATION_DEG, abs=0.1)
    for key, true in zip(("k_radial", "k_x", "k_y"), TRUE_K):
        assert rep[key] == pytest.approx(true, rel=0.10), key


def test_ruler_measured_corners_serve_as_the_reference_marks(grid):
    sh = read_sheet(grid["sheet"])
    m = np.full((sh.count, 2), np.nan)
    at = [sh.names.index(n) for n in CORNERS]
    m[at] = np.round(grid["tube"].land(sh.drive[at]), 1)        # a ruler read to 0.1 mm
    path = copy_sheet(grid, "corners.csv", m)
    corner_lines = [ln for ln in path.read_text().splitlines() if ln.split(",")[0] in CORNERS]
    assert main(["spots", str(grid["folder"] / "photo.png"), "--sheet", str(path), "-q"]) == 0
    assert (grid["folder"] / "corners.csv.bak1").exists()        # the previous sheet kept
    filled = read_sheet(path)
    assert filled.filled.all()
    # The ruler's rows are kept as they were written.
    assert [ln for ln in path.read_text().splitlines()
            if ln.split(",")[0] in CORNERS] == corner_lines
    err = np.hypot(*(filled.measured - grid["tube"].land(filled.drive)).T)
    assert np.sqrt(np.mean(err ** 2)) < 0.2


def test_missing_and_ambiguous_targets_are_reported_and_left_empty(grid, tmp_path, capsys):
    tube, sh = grid["tube"], read_sheet(grid["sheet"])
    land = tube.land(sh.drive)
    i_gone, i_stray = sh.names.index("r5c5"), sh.names.index("r9c9")
    to_photo = grid["to_photo"]
    gone = to_photo(land[[i_gone]])[0]
    stray = to_photo(land[[i_stray]] + [[3.5, 0.0]])[0]        # a speck of light 3.5 mm off
    spacing_px = np.hypot(*(to_photo(land[[i_gone]]) - to_photo(land[[i_gone + 1]]))[0])

    def spoil(photo):
        photo = photo.copy()
        yy, xx = np.mgrid[0:photo.shape[0], 0:photo.shape[1]]
        photo[np.hypot(xx - gone[0], yy - gone[1]) < 0.45 * spacing_px] = 0
        photo[np.hypot(xx - stray[0], yy - stray[1]) < 2.0] = (90, 255, 115)
        return photo

    synthetic_photo(grid["signal"], 3, None, tube, tmp_path / "spoilt.png", spoil=spoil)
    out = tmp_path / "out.csv"
    assert main(["spots", str(tmp_path / "spoilt.png"), "--sheet", str(grid["sheet"]), "-o",
                 str(out), "-q", *refs_args(to_photo)]) == 0
    err = capsys.readouterr().err
    assert "r5c5" in err and "without a dot" in err
    assert "r9c9" in err and "more than one dot" in err
    filled = read_sheet(out)
    assert not filled.filled[i_gone] and not filled.filled[i_stray]
    assert np.isnan(filled.measured[[i_gone, i_stray]]).all()
    assert filled.filled.sum() == sh.count - 2


def test_the_homography_is_recovered_from_four_and_from_many_points():
    H = camera_homography()
    src = np.array([[0.0, 0.0], [800.0, 30.0], [760.0, 600.0], [20.0, 640.0]])
    got = homography(src, apply_homography(H, src))
    assert np.allclose(got, H / H[2, 2], rtol=1e-9, atol=1e-12)
    rng = np.random.default_rng(1)
    many = rng.uniform(0, 800, (60, 2))
    noisy = apply_homography(H, many) + rng.normal(0, 0.05, (60, 2))
    test = rng.uniform(0, 800, (10, 2))
    assert np.abs(apply_homography(homography(many, noisy), test)
                  - apply_homography(H, test)).max() < 0.1
    with pytest.raises(VectorgenError, match="degenerate|line"):
        homography([[0, 0], [1, 1], [2, 2], [3, 0]], [[0, 0], [1, 1], [2, 2], [3, 0]])


def test_bad_photos_end_in_one_line_and_change_nothing(grid, tmp_path):
    from PIL import Image

    sheet = copy_sheet(grid, "bad.csv")
    (tmp_path / "note.png").write_text("not a picture")
    Image.fromarray(np.zeros((300, 400, 3), dtype=np.uint8)).save(tmp_path / "dark.png")
    refs = refs_args(grid["to_photo"])
    before = snapshot(grid["folder"])
    for photo, words in ((tmp_path / "note.png", "cannot read the photo"),
                         (tmp_path / "dark.png", "no dots"),
                         (tmp_path / "absent.png", "not found")):
        r = run_cli("spots", photo, "--sheet", sheet, *refs)
        assert r.returncode == 2, photo
        assert len(r.stderr.strip().splitlines()) == 1 and words in r.stderr, r.stderr
        assert "Traceback" not in r.stderr
    assert snapshot(grid["folder"]) == before


def test_no_reference_marks_at_all_is_an_error(grid):
    sheet = copy_sheet(grid, "none.csv")
    before = sheet.read_bytes()
    r = run_cli("spots", grid["folder"] / "photo.png", "--sheet", sheet)
    assert r.returncode == 2 and "--ref" in r.stderr and "ruler" in r.stderr
    r = run_cli("spots", grid["folder"] / "photo.png", "--sheet", sheet, "--ref", "1,2=3,4")
    assert r.returncode == 2 and "four" in r.stderr
    assert sheet.read_bytes() == before


def test_a_box_pattern_photo_fills_five_rows(tmp_path):
    base = write_profile(tmp_path / "bench.toml", bench_profile())
    assert main(["pattern", "box", "-o", str(tmp_path / "box.wav"), "--sheet",
                 str(tmp_path / "box.csv"), "--profile", base, "--channels", "3", "-q"]) == 0
    sig, _, _ = read_signal(str(tmp_path / "box.wav"))
    tube = default_tube()
    to_photo = synthetic_photo(sig, 3, None, tube, tmp_path / "box.png")
    assert main(["spots", str(tmp_path / "box.png"), "--sheet", str(tmp_path / "box.csv"),
                 "-q", *refs_args(to_photo)]) == 0
    sh = read_sheet(tmp_path / "box.csv")
    assert sh.count == 5 and sh.filled.all()
    assert np.hypot(*(sh.measured - tube.land(sh.drive)).T).max() < 0.3


def test_dot_marks_are_found_as_they_are(tmp_path):
    base = write_profile(tmp_path / "bench.toml", bench_profile())
    assert main(["pattern", "grid", "--rows", "7", "--cols", "9", "--mark", "dot", "-o",
                 str(tmp_path / "dots.wav"),
                 "--sheet", str(tmp_path / "dots.csv"), "--profile", base, "--channels", "3",
                 "-q"]) == 0
    sig, _, _ = read_signal(str(tmp_path / "dots.wav"))
    tube = default_tube()
    to_photo = synthetic_photo(sig, 3, None, tube, tmp_path / "dots.png")
    assert main(["spots", str(tmp_path / "dots.png"), "--sheet", str(tmp_path / "dots.csv"),
                 "-q", *refs_args(to_photo)]) == 0
    sh = read_sheet(tmp_path / "dots.csv")
    assert sh.count == 63 and sh.filled.all()
    assert np.hypot(*(sh.measured - tube.land(sh.drive)).T).max() < 0.3


def test_overwrite_replaces_measurements_only_when_asked(grid, capsys):
    sh = read_sheet(grid["sheet"])
    m = np.full((sh.count, 2), np.nan)
    m[0] = (1.0, 2.0)                              # a wrong reading in r1c1
    path = copy_sheet(grid, "over.csv", m)
    args = ["spots", str(grid["folder"] / "photo.png"), "--sheet", str(path), "-q",
            *refs_args(grid["to_photo"])]
    assert main(args) == 0
    assert "already measured kept" in capsys.readouterr().err
    assert read_sheet(path).measured[0].tolist() == [1.0, 2.0]
    assert main(args + ["--overwrite"]) == 0
    got = read_sheet(path).measured[0]
    assert np.hypot(*(got - grid["tube"].land(sh.drive[:1])[0])) < 0.3
    assert main(["spots", str(grid["folder"] / "photo.png"), "--sheet", str(path),
                 "--overwrite"]) == 2

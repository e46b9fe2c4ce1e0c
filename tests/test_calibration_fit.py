"""The fit: recovery of a synthetic tube, staged terms, report definitions, gains trim, CLI."""

from __future__ import annotations

import json

import numpy as np
import pytest

from calib_helpers import (TRUE_GAIN_X, TRUE_GAIN_Y, TRUE_K, TRUE_OFFSET, TRUE_ROTATION_DEG,
                           TRUE_SKEW_DEG, SyntheticTube, bench_profile, default_tube, fill_sheet,
                           gain_matrix, write_profile)
from calibration.fit import fit_sheet, geometry, linearity
from calibration.patterns import make_pattern
from calibration.sheet import Sheet, read_sheet
from vectorgen.cli import main
from vectorgen.deflection import DeflectionModel
from vectorgen.errors import VectorgenError
from vectorgen.profile import load_profile


def synthetic_sheet(pattern="grid", rows=13, cols=17, noise=0.2, seed=0, tube=None, base=None):
    tube = tube or default_tube()
    base = base or bench_profile()
    pat = make_pattern(pattern, base, rows=rows, cols=cols)
    return Sheet("<synthetic>", pat.names, pat.drive, tube.measure(pat.drive, noise, seed),
                 list(range(len(pat.names))))


# With 0.2 mm noise on this 13 x 17 grid a Monte Carlo over 300 seeds (run while writing the
# test) gave standard deviations of 0.07 % (gain x), 0.06 % (gain y), 0.014 deg (rotation) and
# 2.8 %, 3.2 %, 2.0 % (k_radial, k_x, k_y), worst cases 0.21 %, 0.27 %, 0.043 deg, 7.9 %, 9.4 %,
# 5.2 %: the tolerances below are 3 to 7 standard deviations wide.
@pytest.mark.parametrize("seed", range(6))
def test_fit_recovers_the_synthetic_tube(seed):
    res = fit_sheet(synthetic_sheet(seed=seed), bench_profile())
    rep = res.report
    assert res.terms == "full"
    assert rep["gain_x_mm_per_fs"] == pytest.approx(TRUE_GAIN_X, rel=0.005)
    assert rep["gain_y_mm_per_fs"] == pytest.approx(TRUE_GAIN_Y, rel=0.005)
    assert rep["rotation_deg"] == pytest.approx(TRUE_ROTATION_DEG, abs=0.1)
    assert rep["skew_deg"] == pytest.approx(TRUE_SKEW_DEG, abs=0.1)
    for key, true in zip(("k_radial", "k_x", "k_y"), TRUE_K):
        assert rep[key] == pytest.approx(true, rel=0.10), key
    assert rep["offset_x_mm"] == pytest.approx(TRUE_OFFSET[0], abs=0.1)
    assert rep["offset_y_mm"] == pytest.approx(TRUE_OFFSET[1], abs=0.1)
    # Residuals of a right model are the noise: RMS of a 2-D Gaussian with 0.2 mm per axis is
    # 0.2 sqrt(2) = 0.283 mm (less the fitted degrees of freedom).
    assert 0.22 < rep["rms_residual_mm"] < 0.32


def test_fit_without_noise_is_exact():
    res = fit_sheet(synthetic_sheet(noise=0.0), bench_profile())
    m, true = res.model, default_tube().model
    assert np.allclose(m.matrix, true.matrix, atol=1e-7)
    assert np.allclose(m.offset, true.offset, atol=1e-7)
    assert np.allclose([m.k_radial, m.k_x, m.k_y], TRUE_K, atol=1e-9)
    assert res.report["max_residual_mm"] < 1e-6


def test_report_geometry_matches_the_matrix_by_complex_angles():
    # Reference: the columns of A as complex numbers; np.angle and abs give the same angles
    # and lengths by a different route.
    A = gain_matrix(80.0, 60.0, -2.5, 1.25)
    g = geometry(A)
    z0, z1 = complex(A[0, 0], A[1, 0]), complex(A[0, 1], A[1, 1])
    assert g["gain_x_mm_per_fs"] == pytest.approx(abs(z0))
    assert g["gain_y_mm_per_fs"] == pytest.approx(abs(z1))
    assert g["rotation_deg"] == pytest.approx(np.degrees(np.angle(z0)))
    assert g["skew_deg"] == pytest.approx(np.degrees(np.angle(z1 / z0)) - 90.0)
    assert g["mirrored"] is False
    assert geometry(A @ np.diag([1.0, -1.0]))["mirrored"] is True


def test_linearity_against_numpy_polyfit():
    # A tube with a cubic law on x only and no rotation: x = 50 (u + 0.04 u^3), y = 40 u_y.
    # Reference: np.polyfit degree 1 of x against u_x gives the best straight line; the worst
    # deviation over 50 mm (full scale) is the linearity error.
    gx, gy = np.meshgrid(np.linspace(-0.9, 0.9, 9), np.linspace(-0.9, 0.9, 7))
    u = np.column_stack([gx.ravel(), gy.ravel()])
    p = np.column_stack([50.0 * (u[:, 0] + 0.04 * u[:, 0] ** 3), 40.0 * u[:, 1]])
    lx, ly = linearity(u, p)
    slope, icpt = np.polyfit(u[:, 0], p[:, 0], 1)
    ref = np.abs(p[:, 0] - (slope * u[:, 0] + icpt)).max() / slope * 100.0
    assert lx == pytest.approx(ref, rel=1e-9)
    assert ly == pytest.approx(0.0, abs=1e-9)
    assert lx > 0.5


def test_five_targets_fit_no_pincushion_and_say_so():
    res = fit_sheet(synthetic_sheet("box"), bench_profile())
    assert res.terms == "affine"
    assert res.report["k_radial"] == res.report["k_x"] == res.report["k_y"] == 0.0
    assert any("affine" in n and "8" in n for n in res.notes)


def test_asking_for_more_terms_than_the_rows_allow_fits_fewer():
    sh = synthetic_sheet("box")
    res = fit_sheet(sh, bench_profile(), terms="full")
    assert res.terms == "affine"
    assert res.asked == "full"
    assert any("not full" in n for n in res.notes)
    sh.measured[1:3] = np.nan                   # three rows left: gains only
    res = fit_sheet(sh, bench_profile(), terms="full")
    assert res.terms == "gains"
    assert res.report["rows_used"] == 3
    assert res.report["rows_skipped"] == [sh.names[1], sh.names[2]]
    assert res.model.matrix[0, 1] == res.model.matrix[1, 0] == 0.0


def test_too_few_rows_or_rows_in_a_line_are_an_error():
    sh = synthetic_sheet("box")
    sh.measured[2:] = np.nan
    with pytest.raises(VectorgenError, match="too few"):
        fit_sheet(sh, bench_profile())
    grid = synthetic_sheet("grid", rows=3, cols=5)
    in_a_row = np.array([n.startswith("r2") for n in grid.names])   # one horizontal line
    grid.measured[~in_a_row] = np.nan
    with pytest.raises(VectorgenError, match="spread|too few"):
        fit_sheet(grid, bench_profile())


def test_gains_only_trims_gains_and_offset_and_keeps_the_rest():
    # The true tube after an anode change: gains 3 % and 2 % lower, the spot moved; the base
    # profile is the true tube before the change, so only gains and offset need trimming.
    before = default_tube()
    after = SyntheticTube(before.matrix @ np.diag([0.97, 0.98]), np.array([0.4, 0.3]), TRUE_K)
    base = before.profile()
    base.output.channels = 2
    res = fit_sheet(synthetic_sheet("box", tube=after, base=base, noise=0.05), base,
                    gains_only=True)
    assert res.terms == "gains-only"
    g_after = geometry(after.matrix)
    assert res.report["gain_x_mm_per_fs"] == pytest.approx(g_after["gain_x_mm_per_fs"],
                                                           rel=0.002)
    assert res.report["gain_y_mm_per_fs"] == pytest.approx(g_after["gain_y_mm_per_fs"],
                                                           rel=0.002)
    assert res.report["offset_x_mm"] == pytest.approx(0.4, abs=0.1)
    # Rotation, skew and pincushion are the base's, exactly.
    g_base = geometry(before.matrix)
    assert res.report["rotation_deg"] == pytest.approx(g_base["rotation_deg"], abs=1e-12)
    assert res.report["skew_deg"] == pytest.approx(g_base["skew_deg"], abs=1e-12)
    assert (res.model.k_radial, res.model.k_x, res.model.k_y) == TRUE_K


# --- the command ---------------------------------------------------------------------------------

@pytest.fixture
def bench(tmp_path):
    base = write_profile(tmp_path / "bench.toml", bench_profile(output={"volts_full_scale": 2.0}))
    assert main(["pattern", "grid", "--rows", "13", "--cols", "17", "-o",
                 str(tmp_path / "grid.wav"), "--sheet", str(tmp_path / "grid.csv"),
                 "--profile", base, "-q"]) == 0
    fill_sheet(tmp_path / "grid.csv", default_tube(), 0.2, seed=4)
    return tmp_path, base


def test_fit_command_writes_profile_report_and_residual_picture(bench, capsys):
    from PIL import Image

    folder, base = bench
    out = folder / "tube.toml"
    assert main(["fit", str(folder / "grid.csv"), "-o", str(out), "--base", base, "--kv", "8.0",
                 "--report", str(folder / "fit.json")]) == 0
    text = capsys.readouterr().out
    assert "gain x" in text and "pincushion" in text and "linearity" in text
    rep = json.loads((folder / "fit.json").read_text())
    for key in ("gain_x_mm_per_fs", "gain_y_mm_per_fs", "rotation_deg", "skew_deg",
                "k_radial", "k_x", "k_y", "rms_residual_mm", "max_residual_mm",
                "linearity_x_pct", "linearity_y_pct", "terms_fitted", "rows_used",
                "rows_skipped"):
        assert key in rep, key
    # volts_full_scale = 2.0 in the base: mm per volt is half the mm per full scale.
    assert rep["gain_x_mm_per_volt"] == pytest.approx(rep["gain_x_mm_per_fs"] / 2.0)
    prof = load_profile(out)
    d = prof.deflection
    assert d.calibrated is True and d.kind == "magnetic" and d.anode_kv == 8.0
    assert np.allclose(d.matrix_mm, rep["matrix_mm"])
    assert d.k_y == pytest.approx(rep["k_y"])
    # Screen, channels and timing kept from the base.
    b = load_profile(base)
    assert (prof.screen, prof.output, prof.beam) == (b.screen, b.output, b.beam)
    with Image.open(folder / "tube-residuals.png") as im:
        assert im.format == "PNG" and im.width > 300


def test_fit_keeps_the_previous_profile_as_a_backup(bench):
    folder, base = bench
    out = folder / "tube.toml"
    assert main(["fit", str(folder / "grid.csv"), "-o", str(out), "--base", base, "-q"]) == 0
    first = out.read_bytes()
    fill_sheet(folder / "grid.csv", default_tube(), 0.2, seed=5)
    assert main(["fit", str(folder / "grid.csv"), "-o", str(out), "--base", base, "-q",
                 "--deflection", "electrostatic", "--kv", "2.5"]) == 0
    assert (folder / "tube.toml.bak1").read_bytes() == first
    assert load_profile(out).deflection.kind == "electrostatic"


def test_fit_skips_empty_rows_with_a_warning_naming_them(bench, capsys):
    folder, base = bench
    sh = read_sheet(folder / "grid.csv")
    lines = (folder / "grid.csv").read_text().splitlines()
    # Empty r1c1 entirely, and half of r1c2.
    lines[1] = ",".join(lines[1].split(",")[:3] + ["", ""])
    lines[2] = ",".join(lines[2].split(",")[:4] + [""])
    (folder / "grid.csv").write_text("\n".join(lines) + "\n")
    assert main(["fit", str(folder / "grid.csv"), "-o", str(folder / "t.toml"), "--base", base,
                 "-q", "--report", str(folder / "r.json")]) == 0
    err = capsys.readouterr().err
    assert "r1c1" in err and "r1c2" in err and "left out" in err
    rep = json.loads((folder / "r.json").read_text())
    assert rep["rows_skipped"] == ["r1c1", "r1c2"]
    assert rep["rows_used"] == sh.count - 2


def test_gains_only_needs_a_base(bench, capsys):
    folder, _ = bench
    assert main(["fit", "--gains-only", str(folder / "grid.csv"), "-o",
                 str(folder / "t.toml")]) == 2
    assert "--base" in capsys.readouterr().err
    assert not (folder / "t.toml").exists()


def test_fitted_model_is_the_engine_model():
    # The fit evaluates DeflectionModel.drive_to_mm itself: the fitted profile's model must
    # reproduce the fit's predicted positions exactly.
    from calibration.fit import fitted_profile

    sh = synthetic_sheet()
    res = fit_sheet(sh, bench_profile())
    prof = fitted_profile(bench_profile(), res)
    assert np.array_equal(DeflectionModel.from_profile(prof).drive_to_mm(res.drive),
                          res.predicted)


def test_the_bench_example_runs_end_to_end(tmp_path, capsys):
    # examples/bench7-*.csv were measured (invented data) on a fictional 7-inch magnetic tube:
    # gains 73.5 and 55.2 mm per full scale at 8 kV; after moving to 9 kV its gains fell by the
    # magnetic law and its amplifier drifted by +1 % (x) and -0.5 % (y). The momentum ratio is
    # computed here from E^2 = (pc)^2 + (mc^2)^2 (special relativity, from memory).
    import math

    from scipy import constants

    from calib_helpers import REPO

    def momentum(kv):
        mc2 = constants.m_e * constants.c ** 2
        E = mc2 + constants.e * kv * 1e3
        return math.sqrt(E * E - mc2 * mc2)

    ex = REPO / "examples"
    tube = tmp_path / "bench7.toml"
    assert main(["fit", str(ex / "bench7-grid.csv"), "--base", str(ex / "bench7-start.toml"),
                 "--kv", "8", "-o", str(tube), "-q"]) == 0
    assert "r9c11" in capsys.readouterr().err            # the one row left empty
    assert main(["anode", str(tube), "--kv", "9", "-q"]) == 0
    assert main(["pattern", "box", "-o", str(tmp_path / "box.wav"), "--sheet",
                 str(tmp_path / "box.csv"), "--profile", str(tube), "-q"]) == 0
    # The example's box sheet is this very pattern.
    assert np.allclose(read_sheet(tmp_path / "box.csv").drive,
                       read_sheet(ex / "bench7-box-9kv.csv").drive, atol=1e-9)
    assert main(["fit", "--gains-only", str(ex / "bench7-box-9kv.csv"), "--base", str(tube),
                 "-o", str(tube), "--report", str(tmp_path / "trim.json"), "-q"]) == 0
    rep = json.loads((tmp_path / "trim.json").read_text())
    f = momentum(8.0) / momentum(9.0)
    assert rep["gain_x_mm_per_fs"] == pytest.approx(73.5 * f * 1.01, rel=0.01)
    assert rep["gain_y_mm_per_fs"] == pytest.approx(55.2 * f * 0.995, rel=0.01)
    assert load_profile(tube).deflection.anode_kv == 9.0


def test_measurements_that_fold_the_picture_are_refused():
    # A barrel so strong the fitted model would fold inside the usable area.
    folding = SyntheticTube(gain_matrix(92.0, 70.0, 0.0, 0.0), np.zeros(2), (-0.45, 0.0, 0.0))
    with pytest.raises(VectorgenError, match="cannot be inverted over the usable area"):
        fit_sheet(synthetic_sheet(noise=0.0, tube=folding), bench_profile())


def test_a_mirrored_picture_and_centimetres_are_caught():
    from calibration.fit import warnings_for

    sh = synthetic_sheet(noise=0.0)
    sh.measured[:, 1] *= -1.0                      # y measured downwards
    rep = fit_sheet(sh, bench_profile()).report
    assert rep["mirrored"] is True
    assert any("mirrored" in w for w in warnings_for(rep))
    sh = synthetic_sheet(noise=0.0)
    sh.measured /= 10.0                            # centimetres for millimetres
    with pytest.raises(VectorgenError, match="not a plausible tube"):
        fit_sheet(sh, bench_profile())

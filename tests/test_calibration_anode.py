"""Anode rescaling against CODATA constants and the textbook deflection laws."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import constants

from calib_helpers import bench_profile, default_tube, snapshot, write_profile
from render_helpers import run_cli
from calibration.anode import gain_factor, rescale_profile, rest_voltage_kv
from vectorgen.cli import main
from vectorgen.deflection import DeflectionModel
from vectorgen.errors import VectorgenError
from vectorgen.profile import load_profile


def momentum(kv: float) -> float:
    """Electron momentum after acceleration through kv kilovolts, from the relativistic energy
    relation E^2 = (p c)^2 + (m c^2)^2 with E = m c^2 + e V (special relativity, from memory),
    CODATA constants from scipy.constants."""
    mc2 = constants.m_e * constants.c ** 2
    E = mc2 + constants.e * kv * 1e3
    return math.sqrt(E * E - mc2 * mc2) / constants.c


def test_rest_voltage_is_twice_the_electron_rest_energy():
    # CODATA: electron mass energy equivalent 0.51099895... MeV (scipy.constants carries it).
    mev = constants.physical_constants["electron mass energy equivalent in MeV"][0]
    assert rest_voltage_kv() == pytest.approx(2.0 * mev * 1e3, rel=1e-9)
    assert rest_voltage_kv() == pytest.approx(1021.998, abs=0.001)


@pytest.mark.parametrize("old, new", [(8.0, 9.0), (12.0, 7.5), (1.5, 25.0)])
def test_magnetic_gain_scales_as_one_over_momentum(old, new):
    # Textbook law (from memory): magnetic deflection ~ e B L l / p, so the gain ratio is the
    # inverse ratio of the electron momenta, computed here from the energy relation rather than
    # from the 1 / sqrt(V (1 + V / V0)) form the code uses.
    assert gain_factor("magnetic", old, new) == pytest.approx(momentum(old) / momentum(new),
                                                              rel=1e-12)


def test_magnetic_law_tends_to_the_square_root_law_at_low_voltage():
    # Non-relativistic limit (from memory): deflection ~ 1 / sqrt(V); at 10-40 V the
    # relativistic term still moves the ratio by 0.03 / 1022 / 2 = 1.5e-5.
    assert gain_factor("magnetic", 0.01, 0.04) == pytest.approx(0.5, rel=1e-4)
    # and the relativistic correction is visible at CRT voltages (~0.05 % at 8 -> 9 kV)
    assert abs(gain_factor("magnetic", 8.0, 9.0) - math.sqrt(8.0 / 9.0)) > 1e-4


def test_electrostatic_gain_scales_as_one_over_v():
    # Textbook law (from memory): D = L l V_d / (2 d V_a).
    assert gain_factor("electrostatic", 2.0, 2.5) == pytest.approx(0.8, rel=1e-15)


def test_rescale_keeps_pincushion_and_scales_offset():
    prof = default_tube().profile()
    prof.deflection.anode_kv = 8.0
    new, f, old = rescale_profile(prof, 9.0)
    assert old == 8.0 and new.deflection.anode_kv == 9.0
    assert np.allclose(new.deflection.matrix_mm, np.array(prof.deflection.matrix_mm) * f)
    assert np.allclose(new.deflection.offset_mm, np.array(prof.deflection.offset_mm) * f)
    d0, d1 = prof.deflection, new.deflection
    assert (d1.k_radial, d1.k_x, d1.k_y) == (d0.k_radial, d0.k_x, d0.k_y)


def test_rescale_refuses_an_unrecorded_voltage():
    with pytest.raises(VectorgenError, match="--from-kv"):
        rescale_profile(bench_profile(), 9.0)
    new, f, old = rescale_profile(bench_profile(), 9.0, kv_old=8.0)
    assert old == 8.0 and f == pytest.approx(momentum(8.0) / momentum(9.0), rel=1e-12)
    with pytest.raises(VectorgenError, match="kV"):
        rescale_profile(bench_profile(), 9000.0, kv_old=8.0)       # volts given for kilovolts


def test_anode_command_moves_8_to_9_kv_and_the_drive_scales_by_the_exact_factor(tmp_path):
    # A tube with its spot centred (offset 0): the same spot anywhere on the face needs the
    # drive scaled by p(9 kV) / p(8 kV), exactly, pincushion and all.
    tube = default_tube()
    tube.offset = np.zeros(2)
    prof = tube.profile()
    prof.deflection.anode_kv = 8.0
    prof.deflection.calibrated = True
    path = write_profile(tmp_path / "tube.toml", prof)
    before = (tmp_path / "tube.toml").read_bytes()
    assert main(["anode", path, "--kv", "9.0", "-q"]) == 0
    assert (tmp_path / "tube.toml.bak1").read_bytes() == before
    new = load_profile(path)
    assert new.deflection.anode_kv == 9.0
    factor = momentum(9.0) / momentum(8.0)
    pts = np.array([[10.0, -5.0], [60.0, 40.0], [-70.0, 30.0]])
    u8 = DeflectionModel.from_profile(prof).mm_to_drive(pts)
    u9 = DeflectionModel.from_profile(new).mm_to_drive(pts)
    assert np.allclose(u9 / u8, factor, rtol=1e-9)


def test_an_off_centre_spot_moves_with_the_field_and_deflections_scale_exactly(tmp_path):
    # With a centring offset (made by a field) the zero-drive spot moves by the same factor,
    # and the drive for the same deflection from that spot scales exactly.
    prof = default_tube().profile()
    prof.deflection.anode_kv = 8.0
    path = write_profile(tmp_path / "tube.toml", prof)
    assert main(["anode", path, "--kv", "9.0", "-q"]) == 0
    new = load_profile(path)
    g = momentum(8.0) / momentum(9.0)
    assert np.allclose(new.deflection.offset_mm, np.array(prof.deflection.offset_mm) * g)
    m8, m9 = DeflectionModel.from_profile(prof), DeflectionModel.from_profile(new)
    u = np.array([[0.3, -0.2], [-0.6, 0.5]])
    # Before the pincushion, q = A u + c: the deflection A u at 9 kV from drive u / g equals
    # the 8 kV one from drive u.
    dq8 = u @ m8.matrix.T
    dq9 = (u / g) @ m9.matrix.T
    assert np.allclose(dq9, dq8, rtol=1e-12)


def test_anode_command_without_a_recorded_voltage_changes_nothing(tmp_path):
    write_profile(tmp_path / "bench.toml", bench_profile())
    before = snapshot(tmp_path)
    r = run_cli("anode", tmp_path / "bench.toml", "--kv", "9")
    assert r.returncode == 2
    assert len(r.stderr.strip().splitlines()) == 1 and "--from-kv" in r.stderr
    assert snapshot(tmp_path) == before
    r = run_cli("anode", tmp_path / "bench.toml", "--kv", "9", "--from-kv", "8", "-o",
                tmp_path / "at9.toml")
    assert r.returncode == 0, r.stderr
    assert load_profile(tmp_path / "at9.toml").deflection.anode_kv == 9.0
    assert (tmp_path / "bench.toml").read_bytes() == before["bench.toml"]

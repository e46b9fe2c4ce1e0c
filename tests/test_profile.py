"""Profiles: the built-in default, init-profile output, validation errors that name the key,
numbered backups, and the deflection model's inverse against an independent root finder."""

from __future__ import annotations

import tomllib

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import fsolve

from render_helpers import files_in, run_cli
from vectorgen.deflection import DeflectionModel
from vectorgen.errors import VectorgenError
from vectorgen.profile import Profile, default_for_screen, load_profile, profile_from_dict, \
    profile_to_dict, save_profile


def test_default_profile_is_uncalibrated_linear_full_scale_at_the_edges():
    prof = Profile()
    assert prof.deflection.calibrated is False
    assert (prof.screen.width_mm, prof.screen.height_mm) == (100.0, 80.0)
    model = DeflectionModel.from_profile(prof)
    assert not model.has_distortion
    corners = np.array([[1, 1], [-1, 1], [-1, -1], [1, -1], [0, 0]], dtype=float)
    np.testing.assert_allclose(model.drive_to_mm(corners),
                               [[50, 40], [-50, 40], [-50, -40], [50, -40], [0, 0]])


def test_a_profile_without_gains_is_full_scale_at_its_own_edges():
    prof = profile_from_dict({"screen": {"width_mm": 120.0, "height_mm": 90.0}})
    np.testing.assert_allclose(DeflectionModel.from_profile(prof).drive_to_mm([[1.0, -1.0]]),
                               [[60.0, -45.0]])
    rnd = profile_from_dict({"screen": {"shape": "round", "diameter_mm": 70.0}})
    np.testing.assert_allclose(DeflectionModel.from_profile(rnd).drive_to_mm([[1.0, 1.0]]),
                               [[35.0, 35.0]])
    assert rnd.screen.norm_radius == 35.0


def test_init_profile_writes_the_default_and_it_loads_back(tmp_path):
    path = tmp_path / "tube.toml"
    out = run_cli("init-profile", "-o", path)
    assert out.returncode == 0, out.stderr
    with open(path, "rb") as fh:
        data = tomllib.load(fh)            # the standard library's TOML reader
    assert data == profile_to_dict(default_for_screen(Profile(name=data["name"])))
    prof = load_profile(path)
    assert profile_to_dict(prof) == data
    assert prof.deflection.calibrated is False


@pytest.mark.parametrize("args,check", [
    (["--size", "120x90", "--channels", "3"],
     lambda p: (p.screen.width_mm, p.screen.height_mm, p.output.channels,
                p.deflection.matrix_mm) == (120.0, 90.0, 3, [[60.0, 0.0], [0.0, 45.0]])),
    (["--round", "76"],
     lambda p: (p.screen.shape, p.screen.diameter_mm, p.deflection.matrix_mm)
     == ("round", 76.0, [[38.0, 0.0], [0.0, 38.0]])),
])
def test_init_profile_options(tmp_path, args, check):
    path = tmp_path / "tube.toml"
    out = run_cli("init-profile", "-o", path, *args)
    assert out.returncode == 0, out.stderr
    assert check(load_profile(path))


def test_init_profile_keeps_numbered_backups(tmp_path):
    path = tmp_path / "tube.toml"
    texts = []
    for size in ("100x80", "120x90", "60x60"):
        out = run_cli("init-profile", "-o", path, "--size", size)
        assert out.returncode == 0, out.stderr
        texts.append(path.read_bytes())
    assert files_in(tmp_path) == {"tube.toml", "tube.toml.bak1", "tube.toml.bak2"}
    assert (tmp_path / "tube.toml.bak1").read_bytes() == texts[0]
    assert (tmp_path / "tube.toml.bak2").read_bytes() == texts[1]
    assert "bak2" in out.stdout


def test_save_profile_backs_up_a_hand_edited_file(tmp_path):
    path = tmp_path / "t.toml"
    path.write_text("# my notes\n[screen]\nwidth_mm = 90.0\n")
    backup = save_profile(Profile(), path)
    assert backup == f"{path}.bak1"
    assert open(backup).read() == "# my notes\n[screen]\nwidth_mm = 90.0\n"
    assert save_profile(Profile(), tmp_path / "new.toml") is None


# --- validation: every error names the key ------------------------------------------------------

BAD = [
    ({"colour": 1}, "'colour'"),
    ({"beam": {"writing_speed": 3.0}}, "'writing_speed'"),
    ({"screen": {"widht_mm": 100.0}}, "'widht_mm'"),
    ({"beam": {"writing_speed_mm_per_s": "fast"}}, "writing_speed_mm_per_s"),
    ({"output": {"channels": 2.5}}, "channels"),
    ({"deflection": {"calibrated": "yes"}}, "calibrated"),
    ({"output": {"order": "xyz"}}, "order"),
    ({"screen": "big"}, "screen"),
    ({"screen": {"width_mm": -5.0}}, "width_mm"),
    ({"screen": {"height_mm": 0}}, "height_mm"),
    ({"screen": {"shape": "hexagon"}}, "shape"),
    ({"screen": {"shape": "round"}}, "diameter_mm"),
    ({"output": {"channels": 4}}, "channels"),
    ({"output": {"order": ["x", "x"]}}, "order"),
    ({"output": {"invert": ["z"]}}, "invert"),
    ({"output": {"z_polarity": "up"}}, "z_polarity"),
    ({"output": {"z_blank_level": 2.0}}, "z_blank_level"),
    ({"output": {"volts_full_scale": -1.0}}, "volts_full_scale"),
    ({"deflection": {"kind": "optical"}}, "kind"),
    ({"deflection": {"matrix_mm": [[1.0, 2.0], [2.0, 4.0]]}}, "matrix_mm"),
    ({"deflection": {"matrix_mm": [[1.0, 2.0]]}}, "matrix_mm"),
    ({"deflection": {"offset_mm": [0.0, float("inf")]}}, "offset_mm"),
    ({"deflection": {"k_radial": float("nan")}}, "k_radial"),
    ({"deflection": {"k_x": 3.0}}, "k_x"),
    ({"beam": {"corner_angle_deg": 200.0}}, "corner_angle_deg"),
    ({"beam": {"settle_us": -1.0}}, "settle_us"),
    ({"beam": {"chord_tolerance_mm": 0.0}}, "chord_tolerance_mm"),
    ({"beam": {"writing_speed_mm_per_s": float("inf")}}, "writing_speed_mm_per_s"),
]


@pytest.mark.parametrize("data,key", BAD, ids=[k for _d, k in BAD])
def test_bad_profile_values_name_the_key(data, key):
    with pytest.raises(VectorgenError, match=key.replace("[", r"\[")):
        profile_from_dict(data, source="t.toml")


@pytest.mark.parametrize("text,key", [
    ("[beam]\nwriting_speed = 3\n", "writing_speed"),
    ('[beam]\nwriting_speed_mm_per_s = "fast"\n', "writing_speed_mm_per_s"),
    ("[screen]\nwidth_mm = -5\n", "width_mm"),
    ("not toml [[[", "TOML"),
])
def test_cli_bad_profile_is_one_line_naming_the_key(tmp_path, text, key):
    prof = tmp_path / "bad.toml"
    prof.write_text(text)
    out = run_cli("render", "--shape", "grid", "--profile", prof, "-o", tmp_path / "x.wav")
    assert out.returncode == 2
    lines = out.stderr.strip().splitlines()
    assert len(lines) == 1 and key in lines[0] and "bad.toml" in lines[0]
    assert files_in(tmp_path) == {"bad.toml"}


def test_missing_profile_file(tmp_path):
    with pytest.raises(VectorgenError, match="not found"):
        load_profile(tmp_path / "nope.toml")


# --- the deflection model -----------------------------------------------------------------------

@st.composite
def random_profile(draw):
    w = draw(st.floats(40, 200))
    h = draw(st.floats(40, 200))
    # gains 0.6..1.4 x half the size, a rotation up to 10 degrees, a little cross-talk
    g = draw(st.lists(st.floats(0.6, 1.4), min_size=2, max_size=2))
    rot = np.radians(draw(st.floats(-10, 10)))
    skew = draw(st.floats(-0.1, 0.1))
    a = np.array([[np.cos(rot), -np.sin(rot)], [np.sin(rot), np.cos(rot)]]) @ \
        np.array([[g[0] * w / 2, skew * h / 2], [0.0, g[1] * h / 2]])
    k = draw(st.lists(st.floats(-0.15, 0.15), min_size=3, max_size=3))
    off = draw(st.lists(st.floats(-3, 3), min_size=2, max_size=2))
    return profile_from_dict({
        "screen": {"width_mm": w, "height_mm": h},
        "deflection": {"matrix_mm": a.tolist(), "offset_mm": off, "k_radial": k[0],
                       "k_x": k[1], "k_y": k[2], "calibrated": True}})


@settings(max_examples=60, deadline=None)
@given(prof=random_profile(), seed=st.integers(0, 2**31))
def test_random_profiles_round_trip_drive_and_mm(prof, seed):
    model = DeflectionModel.from_profile(prof)
    u = np.random.default_rng(seed).uniform(-1, 1, size=(200, 2))
    p = model.drive_to_mm(u)
    np.testing.assert_allclose(model.mm_to_drive(p), u, atol=1e-9)
    # Any point of the face back and forth, for distortion of a few per cent (real yokes):
    # with strong barrel the corners of the face lie beyond the fold of the image of the drive
    # square, where the engine rightly refuses (scipy's fsolve finds no root there either).
    d = prof.deflection
    if max(abs(d.k_radial), abs(d.k_x), abs(d.k_y)) <= 0.05:
        w, h = prof.screen.half_extent
        q = np.random.default_rng(seed + 1).uniform(-1, 1, size=(200, 2)) * [w, h]
        np.testing.assert_allclose(model.drive_to_mm(model.mm_to_drive(q)), q, atol=1e-7)


def test_inverse_matches_an_independent_root_finder():
    """mm_to_drive against scipy.optimize.fsolve (MINPACK hybrd) solving drive_to_mm(u) = p."""
    prof = profile_from_dict({"deflection": {
        "matrix_mm": [[48.0, 3.0], [-2.0, 41.0]], "offset_mm": [1.5, -0.7],
        "k_radial": 0.08, "k_x": -0.03, "k_y": 0.05}})
    model = DeflectionModel.from_profile(prof)
    targets = np.array([[45.0, 35.0], [-40.0, 20.0], [0.0, 0.0], [12.0, -38.0], [-49.0, -39.0]])
    got = model.mm_to_drive(targets)
    for p, u in zip(targets, got):
        ref = fsolve(lambda v: model.drive_to_mm(v[None, :])[0] - p, x0=[0.0, 0.0], xtol=1e-13)
        np.testing.assert_allclose(u, ref, atol=1e-9)


def test_pincushion_follows_the_documented_formula():
    """The forward model as written in the profile header: x' = x (1 + kr r^2 + kx y^2),
    y' = y (1 + kr r^2 + ky x^2), x, y, r divided by the half-diagonal (hand arithmetic)."""
    prof = profile_from_dict({"deflection": {"k_radial": 0.1, "k_x": 0.02, "k_y": -0.04}})
    model = DeflectionModel.from_profile(prof)
    R = np.hypot(100, 80) / 2
    x, y = 30.0, -25.0                      # = A u with u = (0.6, -0.625)
    xh, yh = x / R, y / R
    r2 = xh * xh + yh * yh
    expect = [x * (1 + 0.1 * r2 + 0.02 * yh * yh), y * (1 + 0.1 * r2 - 0.04 * xh * xh)]
    np.testing.assert_allclose(model.drive_to_mm([[0.6, -0.625]])[0], expect, rtol=1e-12)

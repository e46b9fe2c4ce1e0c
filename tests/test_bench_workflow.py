"""The bench workflow end to end: pattern, measure, fit, the usable area, the check, wiring
mistakes, and never losing what the user measured.

The tube on the bench is simulated here by an independent implementation of the published
model (the README's *Tube profiles*: p = D(A u + c), x' = x (1 + k_radial rho^2 + k_x yh^2),
y' = y (1 + k_radial rho^2 + k_y xh^2), normalised by the usable area's half-diagonal), written
in this file (`forward`), never the engine's DeflectionModel. Where the tube puts a target is
read from the pattern's own samples (scipy.io.wavfile reads the WAV): the dwell of the beam on
each target's centre dot. Profiles are read back with tomllib. Other references: a brute-force
scan of the forward map for the usable area; numpy statistics worked out here for the check.
"""

from __future__ import annotations

import json
import math
import tomllib

import numpy as np
import pytest
from scipy.io import wavfile

from calib_helpers import gain_matrix, snapshot
from calibration.sheet import read_sheet, sheet_text
from vectorgen.cli import main

FACE_MM = (180.0, 135.0)


def forward(A, c, k, R, u) -> np.ndarray:
    """The published model p = D(A u + c), written here (see the module docstring)."""
    q = np.asarray(u, dtype=float) @ np.asarray(A, dtype=float).T + np.asarray(c, dtype=float)
    x, y = q[:, 0], q[:, 1]
    xh2, yh2 = (x / R) ** 2, (y / R) ** 2
    r2 = xh2 + yh2
    return np.column_stack([x * (1 + k[0] * r2 + k[1] * yh2), y * (1 + k[0] * r2 + k[2] * xh2)])


class Tube:
    """A tube on the bench: its channel inputs (the interface's X/Y channels, in order) to mm,
    plus an optional error field added where the spot lands."""

    def __init__(self, A, c, k, face=FACE_MM, error=None):
        self.A, self.c, self.k = np.asarray(A, float), np.asarray(c, float), tuple(k)
        self.R = math.hypot(*face) / 2.0
        self.error = error

    def land(self, channels) -> np.ndarray:
        p = forward(self.A, self.c, self.k, self.R, channels)
        return p if self.error is None else p + self.error(p)

    def measure(self, channels, noise_mm=0.1, seed=0) -> np.ndarray:
        rng = np.random.default_rng(seed)
        p = self.land(channels)
        return p + rng.normal(0.0, noise_mm, p.shape)


# less gain than the face needs (84 and 62 mm per full scale for a 90 x 67.5 mm half face),
# turned 1.2 deg, skewed 0.5 deg, off centre, with a pincushion
WEAK = dict(A=gain_matrix(84.0, 62.0, 1.2, 0.5), c=(1.5, -0.8), k=(0.05, 0.08, 0.10))


def profile_tables(path) -> dict:
    with open(path, "rb") as fh:
        return tomllib.load(fh)


def tube_of_profile(path, error=None) -> Tube:
    """The tube a profile describes, by this file's own model (parameters read with tomllib)."""
    t = profile_tables(path)
    d, s = t["deflection"], t["screen"]
    face = (s["diameter_mm"], 0.0) if s.get("shape") == "round" else (s["width_mm"],
                                                                      s["height_mm"])
    return Tube(d["matrix_mm"], d["offset_mm"], (d["k_radial"], d["k_x"], d["k_y"]), face,
                error)


def write_base(folder, channels=3, **output) -> str:
    path = folder / "base.toml"
    order = ', '.join(f'"{n}"' for n in output.get("order", ["x", "y", "z"]))
    path.write_text(f'name = "bench"\n[screen]\nwidth_mm = {FACE_MM[0]}\nheight_mm = '
                    f'{FACE_MM[1]}\n[output]\nchannels = {channels}\norder = [{order}]\n')
    return str(path)


def fill(sheet_path, tube: Tube, noise_mm=0.1, seed=0, channel_drive=None) -> None:
    """Fill a fit sheet with the tube's readings at the sheet's drive (through the identity
    channel map of the base profile: channel values = drive)."""
    sh = read_sheet(sheet_path)
    drive = sh.drive if channel_drive is None else channel_drive(sh.drive)
    sheet_path.write_text(sheet_text(sh.names, sh.drive, tube.measure(drive, noise_mm, seed)))


def dwell_channels(wav_path, min_run: int = 9) -> np.ndarray:
    """The X/Y channel values (the first two channels) where the beam dwells for `min_run`
    samples or more: the centre dots of the targets (a dot dwells 250 us, 12 samples at 48 kHz;
    stroke ends only 40 us plus the settle)."""
    _rate, sig = wavfile.read(wav_path)
    xy = sig[:, :2].astype(float)
    same = np.all(np.diff(xy, axis=0) == 0, axis=1)
    edges = np.flatnonzero(np.diff(np.concatenate([[0], same.astype(int), [0]])))
    runs = [(a, b) for a, b in zip(edges[::2], edges[1::2]) if b - a + 1 >= min_run]
    return np.array([xy[a] for a, _b in runs])


def measure_check(folder, profile, tube: Tube, name="check", extra=()):
    """Draw the check pattern through `profile`, let `tube` show it, fill the sheet with where
    each target's dot lands; returns the sheet path."""
    wav, sheet = folder / f"{name}.wav", folder / f"{name}.csv"
    assert main(["pattern", "check", "--rows", "5", "--cols", "7", "-o", str(wav), "--sheet",
                 str(sheet), "--profile", str(profile), "-q", *extra]) == 0
    landed = tube.land(dwell_channels(wav))
    sh = read_sheet(sheet)
    d = np.hypot(*(landed[None, :, :] - sh.target_mm[:, None, :]).transpose(2, 0, 1))
    nearest = d.argmin(axis=1)
    assert len(set(nearest)) == sh.count, "a target's dot was not found in the samples"
    sheet.write_text(sheet_text(sh.names, sh.target_mm, landed[nearest], "check"))
    return sheet


@pytest.fixture(scope="module")
def bench(tmp_path_factory):
    """A grid measured on the weak tube and fitted (the usable area written as found)."""
    folder = tmp_path_factory.mktemp("bench")
    base = write_base(folder)
    assert main(["pattern", "grid", "--rows", "9", "--cols", "11", "-o",
                 str(folder / "grid.wav"), "--sheet", str(folder / "grid.csv"), "--profile",
                 base, "-q"]) == 0
    fill(folder / "grid.csv", Tube(**WEAK), noise_mm=0.1, seed=3)
    assert main(["fit", str(folder / "grid.csv"), "-o", str(folder / "tube.toml"), "--base",
                 base, "--kv", "8", "--report", str(folder / "fit.json"), "-q"]) == 0
    return folder, base


# --- 1. the usable area -------------------------------------------------------------------------

def brute_force_scale(tube: Tube, limit: float, half, round_face=False, step=4e-4,
                      ring=0.03) -> float:
    """The largest scale of the centred area (half sizes `half`, or radius half[0]) that no
    spot needing more than `limit` of full scale falls inside: every drive value on a lattice
    of `step` just beyond the limit (a ring `ring` wide) is mapped to mm and the closest to
    the centre, in the area's own measure, bounds the area."""
    g = np.arange(-(limit + ring), limit + ring + step / 2, step)
    band = np.arange(limit + step / 2, limit + ring, step)
    strips = []
    for b in (band, -band):
        gg, bb = np.meshgrid(g, b)
        strips += [np.column_stack([bb.ravel(), gg.ravel()]),
                   np.column_stack([gg.ravel(), bb.ravel()])]
    q = tube.land(np.vstack(strips))
    if round_face:
        return float(np.hypot(q[:, 0], q[:, 1]).min() / half[0])
    return float(np.maximum(np.abs(q[:, 0]) / half[0], np.abs(q[:, 1]) / half[1]).min())


def test_fit_writes_the_largest_area_the_fitted_tube_reaches_by_brute_force(bench, capsys):
    folder, _base = bench
    rep = json.loads((folder / "fit.json").read_text())
    limit = rep["area_drive_limit"]
    assert 0.99 <= limit <= 1.0                     # within full scale, a hair of it kept
    # The fitted model, as the report gives it before the area changed: the matrix and
    # offset, with the pincushion as written (normalised to the new area's half-diagonal).
    scr = profile_tables(folder / "tube.toml")["screen"]
    fitted = tube_of_profile(folder / "tube.toml")
    s = brute_force_scale(fitted, limit, (FACE_MM[0] / 2, FACE_MM[1] / 2))
    assert scr["width_mm"] == pytest.approx(s * FACE_MM[0], abs=0.1)
    assert scr["height_mm"] == pytest.approx(s * FACE_MM[1], abs=0.1)
    assert scr["width_mm"] < FACE_MM[0] - 5          # the weak tube really needed it
    assert rep["max_drive_usable_area"] <= 1.0
    # The same tube, read back: the area changed but the tube did not. Against the true tube
    # the written profile is as close as the 0.1 mm noise allows ...
    u = np.column_stack([a.ravel() for a in np.meshgrid(*[np.linspace(-1, 1, 15)] * 2)])
    true = Tube(**WEAK)
    assert np.abs(fitted.land(u) - true.land(u)).max() < 0.25
    # ... and the pincushion terms had to be rescaled for that: kept as they were, normalised
    # to the new half-diagonal, the corners would move by a millimetre (control).
    k_as_fitted = np.array(fitted.k) * (math.hypot(*FACE_MM) / 2 / fitted.R) ** 2
    stale = Tube(fitted.A, fitted.c, tuple(k_as_fitted), (scr["width_mm"], scr["height_mm"]))
    assert np.abs(stale.land(u) - true.land(u)).max() > 0.5


def test_after_the_fit_a_full_area_frame_previews_and_keeping_the_old_area_does_not(bench,
                                                                                     capsys):
    folder, base = bench
    # a rectangle round the whole page, fitted to the page: its edges lie on the usable area's
    edge = folder / "edge.svg"
    edge.write_text('<svg xmlns="http://www.w3.org/2000/svg" width="160" height="120" '
                    'viewBox="0 0 160 120"><rect x="0" y="0" width="160" height="120" '
                    'fill="none" stroke="black"/></svg>')
    assert main(["preview", str(edge), "--fit", "page", "--profile", str(folder / "tube.toml"),
                 "-o", str(folder / "edge.png"), "-q"]) == 0
    # control: the same fit with the old [screen] kept is refused beyond full scale
    assert main(["fit", str(folder / "grid.csv"), "-o", str(folder / "kept.toml"), "--base",
                 base, "--area", "keep", "-q"]) == 0
    err = capsys.readouterr().err
    assert "beyond full scale" in err
    assert main(["preview", str(edge), "--fit", "page", "--profile", str(folder / "kept.toml"),
                 "-o", str(folder / "kept.png"), "-q"]) == 2
    assert "beyond full scale" in capsys.readouterr().err
    assert profile_tables(folder / "kept.toml")["screen"]["width_mm"] == FACE_MM[0]


def test_the_fit_says_which_area_it_wrote(bench, capsys):
    folder, base = bench
    assert main(["fit", str(folder / "grid.csv"), "-o", str(folder / "said.toml"), "--base",
                 base]) == 0
    out = capsys.readouterr().out
    w = profile_tables(folder / "said.toml")["screen"]["width_mm"]
    assert f"[screen] set to {w:.6g} x" in out and "was 180 x 135 mm" in out
    assert "--area keep" in out


def test_a_strong_tube_keeps_the_face_unless_asked_to_reach_further(tmp_path, capsys):
    strong = dict(A=gain_matrix(100.0, 76.0, -0.8, 0.0), c=(0.0, 0.0), k=(0.04, 0.0, 0.0))
    base = write_base(tmp_path)
    assert main(["pattern", "grid", "--rows", "7", "--cols", "9", "-o", str(tmp_path / "g.wav"),
                 "--sheet", str(tmp_path / "g.csv"), "--profile", base, "-q"]) == 0
    fill(tmp_path / "g.csv", Tube(**strong), noise_mm=0.0)
    assert main(["fit", str(tmp_path / "g.csv"), "-o", str(tmp_path / "t.toml"), "--base", base,
                 "--report", str(tmp_path / "t.json")]) == 0
    out = capsys.readouterr().out
    assert profile_tables(tmp_path / "t.toml")["screen"]["width_mm"] == FACE_MM[0]
    assert "never enlarges" in out and "--area reach" in out
    assert main(["fit", str(tmp_path / "g.csv"), "-o", str(tmp_path / "r.toml"), "--base", base,
                 "--area", "reach", "--report", str(tmp_path / "r.json"), "-q"]) == 0
    scr = profile_tables(tmp_path / "r.toml")["screen"]
    limit = json.loads((tmp_path / "r.json").read_text())["area_drive_limit"]
    s = brute_force_scale(tube_of_profile(tmp_path / "r.toml"), limit,
                          (FACE_MM[0] / 2, FACE_MM[1] / 2))
    assert s > 1.05 and scr["width_mm"] == pytest.approx(s * FACE_MM[0], abs=0.1)


def test_a_round_face_shrinks_to_the_circle_the_tube_reaches():
    # library level, a round face: the largest centred circle against the brute-force scan
    from calibration.area import choose_area
    from vectorgen.deflection import DeflectionModel
    from vectorgen.screen import Screen

    tube = Tube(gain_matrix(60.0, 55.0, 3.0, 1.0), (2.0, 1.0), (0.05, 0.02, 0.0), (130.0, 0.0))
    screen = Screen("round", diameter_mm=130.0)
    model = DeflectionModel(tube.A, tube.c, *tube.k, norm_radius=tube.R)
    area = choose_area(model, screen)
    s = brute_force_scale(tube, area.limit, (65.0, 65.0), round_face=True)
    assert area.written.shape == "round"
    assert area.written.diameter_mm == pytest.approx(s * 130.0, abs=0.1)
    assert area.written.diameter_mm < 125.0


# --- 2. figures that explain themselves, and the check -------------------------------------------

def test_the_report_defines_each_figure_and_counts_what_it_rests_on(bench, capsys):
    folder, base = bench
    assert main(["fit", str(folder / "grid.csv"), "-o", str(folder / "again.toml"), "--base",
                 base]) == 0
    cap = capsys.readouterr()
    out, err = cap.out, cap.err
    assert "residual of the fitted model (|measured - fitted position| over the 99 targets)" \
        in out
    assert ("linearity of the uncorrected tube (largest deviation of the measured positions "
            "from its best straight-line fit, % of full scale, 99 targets)") in out
    assert "9 unknowns from 99 targets (198 coordinates, 189 to spare)" in out
    assert "too few" not in err and "rests on" not in err          # control: a grid is enough
    # the five-target trim: both figures rest on too few, and it says so
    box = folder / "box.csv"
    assert main(["pattern", "box", "-o", str(folder / "box.wav"), "--sheet", str(box),
                 "--profile", str(folder / "again.toml"), "-q"]) == 0
    sh = read_sheet(box)
    tube = Tube(**WEAK)
    box.write_text(sheet_text(sh.names, sh.drive, tube.measure(sh.drive, 0.05, 1)))
    assert main(["fit", "--gains-only", str(box), "--base", str(folder / "again.toml"), "-o",
                 str(folder / "trim.toml"), "--report", str(folder / "trim.json")]) == 0
    cap = capsys.readouterr()
    assert "the residual rests on 5 targets" in cap.err and "vectorgen check" in cap.err
    assert "the linearity rests on 5 targets" in cap.err
    assert "(only 5 targets: not comparable with a grid's)" in cap.out
    rep = json.loads((folder / "trim.json").read_text())
    assert rep["linearity_rows"] == 5 and rep["linearity_spread"] is False
    assert "linearity_x_pct" in rep["definitions"]


def test_the_check_reports_the_error_the_test_put_in(bench, capsys):
    folder, _base = bench
    tube_toml = folder / "tube.toml"

    def drift(p):                       # a shift and the picture 0.4 % too wide in x
        return np.column_stack([0.25 + 0.004 * p[:, 0], np.full(len(p), -0.15)])

    sheet = measure_check(folder, tube_toml, tube_of_profile(tube_toml, drift), "drift")
    sh = read_sheet(sheet)
    e = drift(sh.target_mm)                          # where the targets should land + error
    d = np.hypot(e[:, 0], e[:, 1])
    assert d.max() < 0.6
    assert main(["check", str(sheet), "--tolerance-mm", "0.6", "--report",
                 str(folder / "check.json")]) == 0
    rep = json.loads((folder / "check.json").read_text())
    # numpy over the error put in, at the sheet's targets (the sheet keeps 1 um)
    assert rep["rms_mm"] == pytest.approx(np.sqrt(np.mean(d ** 2)), abs=2e-3)
    assert rep["worst_mm"] == pytest.approx(d.max(), abs=2e-3)
    assert rep["rms_x_mm"] == pytest.approx(np.sqrt(np.mean(e[:, 0] ** 2)), abs=2e-3)
    assert rep["worst_y_mm"] == pytest.approx(0.15, abs=2e-3)
    assert rep["mean_x_mm"] == pytest.approx(e[:, 0].mean(), abs=2e-3)
    assert rep["mean_y_mm"] == pytest.approx(-0.15, abs=2e-3)
    assert rep["scale_x_pct"] == pytest.approx(0.4, abs=0.01)
    assert rep["scale_y_pct"] == pytest.approx(0.0, abs=0.01)
    assert rep["passed"] is True and rep["rows_used"] == 35
    out = capsys.readouterr().out
    assert "within tolerance" in out and "nothing fitted to them" in out
    # a tolerance below the worst error fails, naming the targets beyond it (exit status 1)
    assert main(["check", str(sheet), "--tolerance-mm", "0.5"]) == 1
    out = capsys.readouterr().out
    beyond = [n for n, v in zip(sh.names, d) if v > 0.5]
    assert f"NOT within tolerance: worst {d.max():.3f} mm > 0.5 mm at {len(beyond)} of 35" in out
    assert all(n in out for n in beyond)
    # control 1: the tube exactly as the profile says leaves nothing (the engine's inverse put
    # every target where it belongs)
    exact = measure_check(folder, tube_toml, tube_of_profile(tube_toml), "exact")
    assert main(["check", str(exact), "--tolerance-mm", "0.01", "--report",
                 str(folder / "exact.json")]) == 0
    assert json.loads((folder / "exact.json").read_text())["worst_mm"] < 2e-3
    # control 2: the check bites: drawn through the uncalibrated base, the weak tube is far off
    off = measure_check(folder, folder / "base.toml", Tube(**WEAK), "uncal")
    assert main(["check", str(off), "--tolerance-mm", "0.5", "--report",
                 str(folder / "off.json")]) == 1
    assert json.loads((folder / "off.json").read_text())["worst_mm"] > 3.0


def test_fit_refuses_a_check_sheet_and_check_refuses_a_fit_sheet(bench, capsys):
    folder, _ = bench
    assert main(["check", str(folder / "grid.csv"), "--tolerance-mm", "1"]) == 2
    assert "vectorgen fit reads it" in capsys.readouterr().err
    own = measure_check(folder, folder / "tube.toml", tube_of_profile(folder / "tube.toml"),
                        "own")
    assert main(["fit", str(own), "-o", str(folder / "x.toml")]) == 2
    assert "vectorgen check reads it" in capsys.readouterr().err
    assert not (folder / "x.toml").exists()


# --- 3. nothing the user measured is lost -------------------------------------------------------

def test_a_pattern_never_replaces_a_sheet_holding_measurements(bench, capsys):
    folder, base = bench
    before = snapshot(folder)
    assert main(["pattern", "grid", "--rows", "9", "--cols", "11", "-o",
                 str(folder / "grid.wav"), "--sheet", str(folder / "grid.csv"), "--profile",
                 base, "-q"]) == 2
    err = capsys.readouterr().err
    assert "holds measurements (99 of 99 targets)" in err and "--replace-sheet" in err
    assert len(err.strip().splitlines()) == 1
    assert snapshot(folder) == before                 # not the sheet, not the signal either


def test_replacing_a_filled_sheet_when_asked_keeps_it(tmp_path):
    base = write_base(tmp_path)
    sheet = tmp_path / "s.csv"
    assert main(["pattern", "box", "--sheet", str(sheet), "-o", str(tmp_path / "b.wav"),
                 "--profile", base, "-q"]) == 0
    fill(sheet, Tube(**WEAK))
    filled = sheet.read_bytes()
    assert main(["pattern", "box", "--sheet", str(sheet), "-o", str(tmp_path / "b.wav"),
                 "--profile", base, "--replace-sheet", "-q"]) == 0
    assert (tmp_path / "s.csv.bak1").read_bytes() == filled
    assert not read_sheet(sheet).holds_measurements
    assert (tmp_path / "b.wav.bak1").exists()          # the signal it replaced is kept too


def test_a_pattern_that_cannot_play_writes_no_sheet(tmp_path, capsys):
    # a device that does not exist (or no PortAudio at all): refused before any file
    assert main(["pattern", "box", "--sheet", str(tmp_path / "s.csv"), "--play", "--device",
                 "no such device 7f3a"]) == 2
    assert capsys.readouterr().err.count("\n") == 1
    assert list(tmp_path.iterdir()) == []


def test_fit_and_check_keep_every_file_they_rewrite(bench, capsys):
    folder, base = bench
    pic, rep = folder / "tube-residuals.png", folder / "fit.json"
    old_pic, old_rep, old_prof = pic.read_bytes(), rep.read_bytes(), \
        (folder / "tube.toml").read_bytes()
    assert main(["fit", str(folder / "grid.csv"), "-o", str(folder / "tube.toml"), "--base",
                 base, "--kv", "8", "--report", str(rep)]) == 0
    out = capsys.readouterr().out
    backups = {p.name: p.read_bytes() for p in folder.glob("*.bak*")}
    assert old_pic in [backups.get(f"tube-residuals.png.bak{i}") for i in (1, 2, 3)]
    assert old_rep in [backups.get(f"fit.json.bak{i}") for i in (1, 2, 3)]
    assert old_prof in [backups.get(f"tube.toml.bak{i}") for i in (1, 2, 3)]
    assert "tube-residuals.png.bak" in out and "fit.json.bak" in out
    png = folder / "cross.png"
    assert main(["preview", "--shape", "crosshair", "-o", str(png), "-q"]) == 0
    old = png.read_bytes()
    assert main(["preview", "--shape", "circle", "-o", str(png), "-q"]) == 0
    assert (folder / "cross.png.bak1").read_bytes() == old != png.read_bytes()
    sheet = measure_check(folder, folder / "tube.toml", tube_of_profile(folder / "tube.toml"),
                          "kept")
    for _ in range(2):
        assert main(["check", str(sheet), "--tolerance-mm", "1", "--report",
                     str(folder / "kept.json"), "--residuals", str(folder / "kept.png"),
                     "--profile", str(folder / "tube.toml"), "-q"]) == 0
    assert (folder / "kept.json.bak1").exists() and (folder / "kept.png.bak1").exists()


# --- 7. wiring mistakes -------------------------------------------------------------------------

def swapped_and_mirrored():
    A = np.asarray(WEAK["A"])
    return {"swapped": A[:, ::-1].copy(), "mirrored": A @ np.diag([-1.0, 1.0])}


@pytest.mark.parametrize("mistake", ["swapped", "mirrored"])
def test_wiring_mistakes_are_named_with_the_change_that_fixes_them(tmp_path, capsys, mistake):
    A = swapped_and_mirrored()[mistake]
    wired = Tube(A, WEAK["c"], WEAK["k"])
    base = write_base(tmp_path)
    assert main(["pattern", "grid", "--rows", "7", "--cols", "9", "-o", str(tmp_path / "g.wav"),
                 "--sheet", str(tmp_path / "g.csv"), "--profile", base, "-q"]) == 0
    fill(tmp_path / "g.csv", wired, noise_mm=0.05)
    assert main(["fit", str(tmp_path / "g.csv"), "-o", str(tmp_path / "as_is.toml"), "--base",
                 base, "-q"]) == 0
    err = capsys.readouterr().err
    if mistake == "swapped":
        assert "X and Y are swapped: drive x moves the spot up, drive y moves it right" in err
        assert '[output] order = ["y", "x", "z"]' in err and "--fix-wiring" in err
        assert "swap the X and Y cables" in err
    else:
        assert "the x axis is inverted, the picture mirrored: drive x moves the spot left" in err
        assert "leave it to the profile" in err and '[output] invert = ["x"]' in err
        assert "set [output] invert" not in err.replace("Do not set [output] invert", "")
    assert main(["fit", str(tmp_path / "g.csv"), "-o", str(tmp_path / "fixed.toml"), "--base",
                 base, "--fix-wiring", "--report", str(tmp_path / "fixed.json"), "-q"]) == 0
    capsys.readouterr()
    out = profile_tables(tmp_path / "fixed.toml")["output"]
    if mistake == "swapped":
        assert out["order"] == ["y", "x", "z"] and out["invert"] == []
    else:
        assert out["order"] == ["x", "y", "z"] and out["invert"] == ["x"]
    rep = json.loads((tmp_path / "fixed.json").read_text())
    assert rep["wiring"] == "as-profile" and rep["mirrored"] is False
    assert rep["rotation_deg"] == pytest.approx(1.2, abs=0.1)
    # Both profiles draw right on the miswired tube (the check's error is the fit's, ~0.1 mm)
    worst = {}
    for name in ("as_is", "fixed"):
        sheet = measure_check(tmp_path, tmp_path / f"{name}.toml", wired, f"c_{name}")
        assert main(["check", str(sheet), "--tolerance-mm", "0.3", "--report",
                     str(tmp_path / f"{name}.json"), "-q"]) == 0
        worst[name] = json.loads((tmp_path / f"{name}.json").read_text())["worst_mm"]
    # control: changing [output] by hand on top of the first fit (what the old advice said)
    # moves the picture far off
    import tomli_w

    hand = profile_tables(tmp_path / "as_is.toml")
    if mistake == "mirrored":
        hand["output"]["invert"] = ["x"]
    else:
        hand["output"]["order"] = ["y", "x", "z"]
    (tmp_path / "hand.toml").write_text(tomli_w.dumps(hand))
    wav = tmp_path / "c_hand.wav"
    assert main(["pattern", "check", "--rows", "5", "--cols", "7", "-o", str(wav), "--sheet",
                 str(tmp_path / "c_hand.csv"), "--profile", str(tmp_path / "hand.toml"),
                 "-q"]) == 0
    landed = wired.land(dwell_channels(wav))
    targets = read_sheet(tmp_path / "c_hand.csv").target_mm
    # (the picture is so far off that targets cannot be matched to dots: the distance from
    # each target to the nearest dot at all bounds its error from below)
    nearest = np.hypot(*(landed[None] - targets[:, None]).transpose(2, 0, 1)).min(axis=1)
    assert nearest.max() > 20 * max(worst.values()) and max(worst.values()) < 0.3

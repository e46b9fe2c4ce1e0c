"""The correction through a fitted profile: exact inverse, physical branch, squares stay square."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from calib_helpers import bench_profile, default_tube, gain_matrix
from calibration.fit import fit_sheet, fitted_profile
from calibration.patterns import make_pattern
from calibration.sheet import Sheet
from vectorgen.deflection import DeflectionModel
from vectorgen.errors import VectorgenError
from vectorgen.pipeline import Renderer, Settings
from vectorgen.strokes import strokes_from_polylines


def fitted_bench_profile(seed: int = 0):
    """Measure the synthetic tube on a 13 x 17 grid with 0.2 mm ruler noise and fit it."""
    tube = default_tube()
    base = bench_profile()
    pat = make_pattern("grid", base, rows=13, cols=17)
    sheet = Sheet("<synthetic>", pat.names, pat.drive, tube.measure(pat.drive, 0.2, seed),
                  list(range(len(pat.names))))
    result = fit_sheet(sheet, base)
    return fitted_profile(base, result, "magnetic", 8.0), tube


def usable_area_points(screen, n=201):
    w, h = screen.half_extent
    gx, gy = np.meshgrid(np.linspace(-w, w, n), np.linspace(-h, h, n))
    return np.column_stack([gx.ravel(), gy.ravel()])


def test_fitted_model_round_trip_within_one_micrometre_across_the_usable_area():
    prof, _ = fitted_bench_profile()
    model = DeflectionModel.from_profile(prof)
    assert model.has_distortion
    p = usable_area_points(prof.screen)
    back = model.drive_to_mm(model.mm_to_drive(p))
    # The requirement: round trip <= 1 um across the usable area.
    assert np.abs(back - p).max() <= 1e-3


def test_inverse_agrees_with_an_independent_root_finder():
    # Reference: scipy.optimize.root (MINPACK hybrd) solving D(A u + c) = p point by point,
    # with no use of the engine's Newton iteration.
    from scipy.optimize import root

    prof, _ = fitted_bench_profile()
    model = DeflectionModel.from_profile(prof)
    rng = np.random.default_rng(3)
    w, h = prof.screen.half_extent
    pts = rng.uniform([-w, -h], [w, h], (25, 2))
    ours = model.mm_to_drive(pts)
    for p, u in zip(pts, ours):
        ref = root(lambda v: model.drive_to_mm(v[None, :])[0] - p, np.zeros(2), tol=1e-13)
        assert ref.success
        assert np.allclose(u, ref.x, atol=1e-10)


@settings(max_examples=60, deadline=None)
@given(kr=st.floats(-0.08, 0.2), kx=st.floats(-0.1, 0.2), ky=st.floats(-0.1, 0.2),
       rot=st.floats(-5, 5), skew=st.floats(-3, 3), gx=st.floats(60, 110),
       gy=st.floats(45, 90), cx=st.floats(-5, 5), cy=st.floats(-5, 5))
def test_round_trip_holds_for_any_plausible_tube(kr, kx, ky, rot, skew, gx, gy, cx, cy):
    prof = bench_profile()
    model = DeflectionModel(gain_matrix(gx, gy, rot, skew), np.array([cx, cy]), kr, kx, ky,
                            prof.screen.norm_radius)
    p = usable_area_points(prof.screen, 41)
    assert np.abs(model.drive_to_mm(model.mm_to_drive(p)) - p).max() <= 1e-3


def test_inverse_refuses_a_point_beyond_a_fold_instead_of_a_far_solution():
    # A strong barrel (k_radial = -0.5) folds the picture: along a diagonal the radius maps as
    # r (1 - 0.5 r^2 / R^2), which peaks at r = R / sqrt(1.5) (calculus: d/dr = 0), i.e. at
    # R sqrt(2/3) (1 - 1/3) = 0.544 R. A point beyond that has no position near the axis; Newton
    # used to converge to a far solution on the other side of the fold and return it.
    R = 64.0
    model = DeflectionModel(np.diag([50.0, 40.0]), np.zeros(2), -0.5, 0.0, 0.0, R)
    beyond = 0.56 * R / np.sqrt(2.0)
    with pytest.raises(VectorgenError, match="fold|cannot be inverted"):
        model.undistort(np.array([[beyond, beyond]]))
    # Inside the peak it inverts onto the branch joined to the axis: r < R / sqrt(1.5).
    inside = 0.5 * R / np.sqrt(2.0)
    q = model.undistort(np.array([[inside, inside]]))
    assert np.hypot(*q[0]) < R / np.sqrt(1.5)
    assert np.allclose(model.distort(q), [[inside, inside]], atol=1e-9)


def square_landing(prof, tube, side=40.0, center=(10.0, -5.0)):
    """Render a square through `prof`, push the output drive through the true tube."""
    cx, cy = center
    s = side / 2
    corners = np.array([[cx - s, cy - s], [cx + s, cy - s], [cx + s, cy + s], [cx - s, cy + s],
                        [cx - s, cy - s]])
    frame = Renderer(prof, Settings(rate=192000)).frame(
        strokes_from_polylines([corners], labels=["square"]))
    landed = tube.land(frame.drive)
    lit = frame.plan.lit
    return corners, frame.plan.points[lit], landed[lit]


def test_a_40_mm_square_lands_as_a_40_mm_square():
    prof, tube = fitted_bench_profile()
    corners, planned, landed = square_landing(prof, tube)
    # Every lit sample lands within 0.3 mm of where the drawing put it.
    assert np.hypot(*(landed - planned).T).max() <= 0.3
    # Side lengths: the beam plan puts a sample exactly on each corner.
    idx = [int(np.argmin(np.hypot(*(planned - c).T))) for c in corners[:4]]
    assert all(np.hypot(*(planned[i] - c)) < 1e-9 for i, c in zip(idx, corners[:4]))
    got = landed[idx]
    sides = np.hypot(*(np.roll(got, -1, axis=0) - got).T)
    assert np.all(np.abs(sides - 40.0) <= 0.3)
    diagonals = [np.hypot(*(got[2] - got[0])), np.hypot(*(got[3] - got[1]))]
    assert np.allclose(diagonals, 40.0 * np.sqrt(2.0), atol=0.3)


def test_the_uncalibrated_profile_misses_the_square_by_far_more():
    # The same check with no calibration must fail: it is what makes the test above mean
    # something.
    _, tube = fitted_bench_profile()
    _, planned, landed = square_landing(bench_profile(), tube)
    assert np.hypot(*(landed - planned).T).max() > 1.5

"""Phosphor preview: PNG files decoded with Pillow; light where the strokes are, dark along
blanked jumps (with a Z channel; without one the beam never goes off, so every jump shows on the
tube as a faint line, and so in the preview: common practice, no source), the usable-area
outline present, made from the actual output samples."""

from __future__ import annotations

import numpy as np
import pytest
from PIL import Image

from render_helpers import make_profile, polylines, render, run_cli, write_svg
from vectorgen.preview import phosphor_image
from vectorgen.profile import Profile

PROF = Profile()


def outline_box(img):
    """Pixel columns of x = -50 / +50 mm and rows of y = +40 / -40 mm, found from the faint grey
    outline itself (grey: R = G = B, not black), so the tests do not borrow the engine's
    layout arithmetic."""
    grey = (img[..., 0] == img[..., 1]) & (img[..., 1] == img[..., 2]) & (img[..., 1] > 20)
    cols = np.flatnonzero(grey.sum(axis=0) > 0.5 * img.shape[0] * 0.8)
    rows = np.flatnonzero(grey.sum(axis=1) > 0.5 * img.shape[1] * 0.8)
    assert len(cols) >= 2 and len(rows) >= 2, "usable-area outline not found"
    return cols.min(), cols.max(), rows.min(), rows.max()


def to_px(img, x_mm, y_mm):
    c0, c1, r0, r1 = outline_box(img)
    col = c0 + (np.asarray(x_mm) + 50.0) / 100.0 * (c1 - c0)
    row = r0 + (40.0 - np.asarray(y_mm)) / 80.0 * (r1 - r0)
    return np.round(row).astype(int), np.round(col).astype(int)


def two_posts():
    # two vertical lines far apart: the blanked jumps between them cross empty space at
    # y = +30 and y = -30
    return polylines([(-40, -30), (-40, 30)], [(40, 30), (40, -30)])


@pytest.mark.parametrize("channels", [3, 2])
def test_strokes_are_bright_and_blanked_jumps_dark_or_faint_without_z(channels):
    frame = render(two_posts(), channels=channels)
    # the jumps really cross the middle: blanked samples on both sides of x = 0
    blank = frame.plan.points[~frame.plan.lit]
    assert (blank[:, 0] < -30).any() and (blank[:, 0] > 30).any()
    img = phosphor_image(frame.signal, PROF, channels, frame.plan.lit)
    green = img[..., 1].astype(int)
    ys = np.linspace(-25, 25, 26)
    for x in (-40, 40):
        r, c = to_px(img, np.full_like(ys, x), ys)
        assert green[r, c].min() > 150, "a drawn line is not lit"
    xs = np.linspace(-30, 30, 61)
    for y in (30.0, -30.0):
        r, c = to_px(img, xs, np.full_like(xs, y))
        if channels == 3:
            # Z blanks the beam: along the jump and a few pixels either side, black
            for dr in (-2, 0, 2):
                assert green[r + dr, c].max() <= 2, "light along a blanked jump"
        else:
            # no Z: the retrace is a faint line all along the jump, far dimmer than a stroke,
            # and dark a few pixels beside it
            along = np.max([green[r + dr, c] for dr in (-1, 0, 1)], axis=0)
            assert along.min() >= 15, "the retrace of a 2-channel tube is not shown"
            assert along.max() < 100, "the retrace is drawn as bright as a stroke"
            assert green[r + 6, c].max() <= 2 and green[r - 6, c].max() <= 2


def test_without_z_dimmed_strokes_are_drawn_at_full_brightness_and_warned_once():
    import warnings

    from vectorgen.errors import VectorgenWarning

    strokes = polylines([(-35, -20), (-5, -20)], [(5, -20), (35, -20)], intensity=[1.0, 0.3])
    pictures = {}
    for channels in (2, 3):
        frame = render(strokes, channels=channels)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            img = phosphor_image(frame.signal, PROF, channels, frame.plan.lit,
                                 intensity=frame.plan.intensity)
        said = [w for w in caught if issubclass(w.category, VectorgenWarning)]
        g = img[..., 1].astype(int)
        pictures[channels] = (int(g[to_px(img, -20, -20)]), int(g[to_px(img, 20, -20)]), said)
    full, dim, said = pictures[2]
    assert abs(full - dim) <= 12, "without Z both strokes are one brightness on the tube"
    assert len(said) == 1 and "without a Z channel" in str(said[0].message)
    assert "0.30" in str(said[0].message)
    # control: with Z the dimmed stroke is dimmer, and nothing is warned
    full, dim, said = pictures[3]
    assert dim < full - 30 and said == []


def test_the_usable_area_outline_is_drawn_faintly():
    frame = render(polylines([(-10, 0), (10, 0)]))
    img = phosphor_image(frame.signal, PROF, 2, frame.plan.lit)
    c0, c1, r0, r1 = outline_box(img)
    # the outline spans 100 x 80 mm: its aspect is the area's
    assert (c1 - c0) / (r1 - r0) == pytest.approx(100 / 80, rel=0.01)
    edge = img[r0, c0 + 5:c1 - 5]
    assert 20 < int(np.median(edge[:, 1])) < 100            # faint, not white
    assert img[:max(r0 - 2, 0), :, :].max() == 0             # nothing outside the area


def test_round_face_outline():
    prof = make_profile(screen={"shape": "round", "diameter_mm": 80.0})
    frame = render(polylines([(-10, 0), (10, 0)]), prof)
    img = phosphor_image(frame.signal, prof, 2, frame.plan.lit)
    grey = (img[..., 0] == img[..., 2]) & (img[..., 1] == img[..., 2]) & (img[..., 1] > 20)
    rows, cols = np.nonzero(grey)
    cy, cx = img.shape[0] / 2, img.shape[1] / 2
    rad = np.hypot(rows - cy, cols - cx)
    assert rad.std() / rad.mean() < 0.01                     # a circle about the centre


def test_brightness_grows_with_dwell_time_and_intensity():
    """Two dots (a dot dwells: brighter than a line), a full and a dimmed line."""
    strokes = polylines([(-30, 20)], [(-35, -20), (-5, -20)], [(5, -20), (35, -20)],
                        intensity=[1.0, 1.0, 0.3])
    frame = render(strokes, channels=3)
    img = phosphor_image(frame.signal, PROF, 3, frame.plan.lit)
    g = img[..., 1].astype(int)
    dot = g[to_px(img, -30, 20)]
    full = g[to_px(img, -20, -20)]
    dim = g[to_px(img, 20, -20)]
    assert dot > full > dim > 0


def test_preview_follows_the_output_samples_through_the_profile():
    """Channel order, inversion and a pincushion-corrected drive are undone from the samples:
    the picture of a distorted, inverted, reordered output matches the plain one."""
    strokes = polylines([(-40, -30), (40, -30), (40, 30), (-40, 30), (-40, -30)], [(0, 0)])
    plain = render(strokes, channels=3)
    twisted = make_profile(output={"channels": 3, "order": ["z", "y", "x"], "invert": ["y"],
                                   "z_polarity": "negative"},
                           deflection={"matrix_mm": [[55.0, 2.0], [-1.5, 44.0]],
                                       "offset_mm": [0.8, -0.6], "k_radial": 0.06})
    f2 = render(strokes, twisted)
    assert not np.allclose(f2.signal[:, 2], plain.signal[:, 0])   # the samples differ ...
    a = phosphor_image(plain.signal, PROF, 3).astype(int)
    b = phosphor_image(f2.signal, twisted, 3).astype(int)
    # ... the picture does not (up to float32 rounding moving a sample across a pixel edge:
    # every pixel is matched within its 3 x 3 neighbourhood, to 10 of 255 levels: the samples'
    # phase against the pixel grid beats along a line)
    from scipy.ndimage import maximum_filter

    near = (3, 3, 1)
    assert (a <= maximum_filter(b, size=near) + 10).all()
    assert (b <= maximum_filter(a, size=near) + 10).all()
    assert (a[..., 1] > 100).sum() == pytest.approx((b[..., 1] > 100).sum(), rel=0.02)


def test_cli_preview_png_decodes(tmp_path):
    png = tmp_path / "p.png"
    out = run_cli("preview", "--shape", "crosshair", "-o", png, "--width", 400)
    assert out.returncode == 0, out.stderr
    with Image.open(png) as im:                                   # Pillow as the decoder
        assert im.format == "PNG" and im.size[0] == 400
        img = np.asarray(im.convert("RGB"))
    assert img[..., 1].max() > 200
    # the crosshair's arms are lit, the quadrants between them dark
    assert img[to_px(img, 0.0, 15.0)][1] > 100 and img[to_px(img, 15.0, 0.0)][1] > 100
    assert img[to_px(img, 15.0, 15.0)][1] == 0


def test_render_writes_a_preview_beside_the_signal(tmp_path):
    svg = write_svg(tmp_path, '<circle cx="50" cy="40" r="30"/>')
    out = run_cli("render", svg, "-o", tmp_path / "c.wav", "--preview", tmp_path / "c.png",
                  "--channels", 3, "-q")
    assert out.returncode == 0, out.stderr
    with Image.open(tmp_path / "c.png") as im:
        img = np.asarray(im.convert("RGB"))
    # the circle (r = 30 user units fitted page -> 30 mm) is lit, its centre dark
    ang = np.linspace(0, 2 * np.pi, 24, endpoint=False)
    r, c = to_px(img, 30 * np.cos(ang), 30 * np.sin(ang))
    assert img[r, c, 1].min() > 100
    assert img[to_px(img, 0, 0)][1] == 0


def test_signal_plot(tmp_path):
    out = run_cli("preview", "--shape", "crosshair", "-o", tmp_path / "p.png", "--signals",
                  tmp_path / "s.png", "--channels", 3)
    assert out.returncode == 0, out.stderr
    with Image.open(tmp_path / "s.png") as im:
        assert im.format == "PNG" and im.size[0] > 100

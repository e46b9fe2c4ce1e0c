"""Helpers shared by the calibration tests (not a test module itself).

A synthetic tube is a forward model with known parameters standing in for a real yoke and face:
the tests measure it (with noise, like a ruler), photograph it (the engine's phosphor preview,
warped by a known camera perspective) and check that the fit finds those parameters again. The
helpers only produce data; the checks live in the test modules.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from vectorgen.deflection import DeflectionModel
from vectorgen.profile import Profile, profile_from_dict

REPO = Path(__file__).resolve().parent.parent

# A fictional 9-inch magnetic tube (180 x 135 mm usable) on a bench: the yoke sits rotated by
# 1.5 degrees with 0.6 degrees of skew, the gains differ per axis, the spot is off centre and the
# flat face shows a strong pincushion (about 8 % in x and 11 % in y at the grid's corners).
TRUE_WIDTH_MM, TRUE_HEIGHT_MM = 180.0, 135.0
TRUE_GAIN_X, TRUE_GAIN_Y = 92.0, 70.0          # mm per full-scale drive
TRUE_ROTATION_DEG, TRUE_SKEW_DEG = 1.5, 0.6
TRUE_OFFSET = (1.2, -0.7)                      # mm
TRUE_K = (0.06, 0.09, 0.12)                    # k_radial, k_x, k_y


def gain_matrix(gain_x, gain_y, rotation_deg, skew_deg) -> np.ndarray:
    """A whose columns have lengths gain_x, gain_y, the first at rotation_deg from +x and the
    second at rotation_deg + 90 + skew_deg (the fit report's definitions, built forwards)."""
    a0 = np.radians(rotation_deg)
    a1 = np.radians(rotation_deg + 90.0 + skew_deg)
    return np.array([[gain_x * np.cos(a0), gain_y * np.cos(a1)],
                     [gain_x * np.sin(a0), gain_y * np.sin(a1)]])


@dataclass
class SyntheticTube:
    matrix: np.ndarray
    offset: np.ndarray
    k: tuple
    width_mm: float = TRUE_WIDTH_MM
    height_mm: float = TRUE_HEIGHT_MM

    @property
    def norm_radius(self) -> float:
        return float(np.hypot(self.width_mm, self.height_mm) / 2.0)

    @property
    def model(self) -> DeflectionModel:
        return DeflectionModel(np.asarray(self.matrix, float), np.asarray(self.offset, float),
                               *self.k, self.norm_radius)

    def land(self, drive) -> np.ndarray:
        """Where the spot really lands (mm) for drive (n, 2)."""
        return self.model.drive_to_mm(np.asarray(drive, dtype=float))

    def measure(self, drive, noise_mm: float = 0.2, seed: int = 0) -> np.ndarray:
        """A ruler's reading: the landing position plus Gaussian noise on each axis."""
        rng = np.random.default_rng(seed)
        p = self.land(drive)
        return p + rng.normal(0.0, noise_mm, p.shape)

    def profile(self, **output) -> Profile:
        """A profile describing the true tube (as a preview of what it really shows)."""
        return profile_from_dict({
            "name": "synthetic true tube",
            "screen": {"width_mm": self.width_mm, "height_mm": self.height_mm},
            "output": {"channels": 3, **output},
            "deflection": {"matrix_mm": np.asarray(self.matrix).tolist(),
                           "offset_mm": list(map(float, self.offset)),
                           "k_radial": self.k[0], "k_x": self.k[1], "k_y": self.k[2]},
        }, source="<true tube>")


def default_tube() -> SyntheticTube:
    return SyntheticTube(gain_matrix(TRUE_GAIN_X, TRUE_GAIN_Y, TRUE_ROTATION_DEG, TRUE_SKEW_DEG),
                         np.array(TRUE_OFFSET), TRUE_K)


def bench_profile(**tables):
    """The uncalibrated starting profile for the synthetic tube's face (full scale at the edges
    of the usable area), with extra tables merged in."""
    data = {"name": "bench tube (uncalibrated)",
            "screen": {"width_mm": TRUE_WIDTH_MM, "height_mm": TRUE_HEIGHT_MM}}
    for k, v in tables.items():
        data.setdefault(k, {}).update(v)
    return profile_from_dict(data, source="<bench>")


def write_profile(path, profile) -> str:
    from vectorgen.profile import profile_text

    Path(path).write_text(profile_text(profile), encoding="utf-8")
    return str(path)


def fill_sheet(path, tube: SyntheticTube, noise_mm: float = 0.2, seed: int = 0,
               only=None) -> None:
    """Fill a pattern's sheet in place with the tube's (noisy) landing positions; `only` limits
    it to a set of point names."""
    from calibration.sheet import read_sheet, sheet_text

    sh = read_sheet(path)
    m = tube.measure(sh.drive, noise_mm, seed)
    if only is not None:
        keep = np.array([n in only for n in sh.names])
        m[~keep] = np.nan
    Path(path).write_text(sheet_text(sh.names, sh.drive, m), encoding="utf-8")


def snapshot(folder) -> dict:
    """{relative path: bytes} of every file under folder (to prove nothing changed)."""
    out = {}
    for p in sorted(Path(folder).rglob("*")):
        if p.is_file():
            out[str(p.relative_to(folder))] = p.read_bytes()
    return out


# --- synthetic photos ---------------------------------------------------------------------------

def preview_pixel_map(profile, width_px: int, margin: float = 0.06):
    """mm -> pixel (x = column, y = row, pixel centres at integers) of preview.phosphor_image:
    it bins col = (x + hw) * ppm and row = (hh - y) * ppm, so pixel i spans [i, i + 1)."""
    hw, hh = profile.screen.half_extent
    hw, hh = hw * (1 + margin), hh * (1 + margin)
    ppm = width_px / (2 * hw)

    def to_px(p):
        p = np.asarray(p, dtype=float)
        return np.column_stack([(p[:, 0] + hw) * ppm - 0.5, (hh - p[:, 1]) * ppm - 0.5])
    return to_px, ppm


def apply_homography(H, pts) -> np.ndarray:
    pts = np.asarray(pts, dtype=float)
    h = np.column_stack([pts, np.ones(len(pts))]) @ np.asarray(H).T
    return h[:, :2] / h[:, 2:3]


def camera_homography() -> np.ndarray:
    """A camera a little off-axis and turned: perspective, rotation, scale and shift (pixels of
    the preview -> pixels of the photo)."""
    c, s = np.cos(np.radians(4.0)), np.sin(np.radians(4.0))
    R = np.array([[c, -s, 0.0], [s, c, 0.0], [0.0, 0.0, 1.0]])
    S = np.array([[0.92, 0.03, 60.0], [-0.02, 0.95, 40.0], [0.0, 0.0, 1.0]])
    P = np.array([[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [1.2e-4, -0.8e-4, 1.0]])
    return P @ S @ R


def warp_image(img: np.ndarray, H: np.ndarray, out_shape) -> np.ndarray:
    """The photo a camera with homography H (source pixel -> photo pixel) takes of `img`:
    each photo pixel samples the source at H^-1 of its position (bilinear)."""
    from scipy.ndimage import map_coordinates

    h, w = out_shape
    yy, xx = np.mgrid[0:h, 0:w]
    src = apply_homography(np.linalg.inv(H), np.column_stack([xx.ravel(), yy.ravel()]))
    out = np.empty((h, w, img.shape[2]), dtype=np.uint8)
    for ch in range(img.shape[2]):
        v = map_coordinates(img[..., ch].astype(float), [src[:, 1], src[:, 0]], order=1,
                            mode="constant", cval=0.0)
        out[..., ch] = np.clip(np.round(v), 0, 255).reshape(h, w).astype(np.uint8)
    return out


def synthetic_photo(pattern_signal, channels: int, lit, tube: SyntheticTube, path,
                    width_px: int = 1200, H=None, out_shape=(1000, 1300), margin: float = 0.15,
                    spoil=None):
    """Render what the true tube shows for a pattern's signal (the preview with a margin wide
    enough for spots landing beyond the usable area), photograph it through camera homography
    H and save it as PNG. `spoil(photo)` may alter the photo first. Returns the mm -> photo
    pixel function."""
    from PIL import Image

    from vectorgen.preview import phosphor_image

    true = tube.profile()
    img = phosphor_image(pattern_signal, true, channels, lit, width_px=width_px, margin=margin)
    H = camera_homography() if H is None else H
    photo = warp_image(img, H, out_shape)
    if spoil is not None:
        photo = spoil(photo)
    Image.fromarray(photo).save(path)
    to_px, _ = preview_pixel_map(true, width_px, margin)

    def mm_to_photo(p):
        return apply_homography(H, to_px(p))
    return mm_to_photo

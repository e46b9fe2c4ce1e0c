"""Phosphor preview: a picture of what the tube will show, made from the actual output samples.

The channel signal is mapped back to drive through the channel map (order and polarity undone),
through the stage chain's model of the hardware after the jack (`StageChain.hardware`), and
through the profile's forward deflection model to millimetres on the face. Brightness is proportional to
the time the spot spends on each pixel (samples are joined by straight sweeps, as the beam
moves between them), spread by a Gaussian spot; blanked samples are dark; the usable area is
outlined faintly.
"""

from __future__ import annotations

import numpy as np

from .channels import ChannelMap
from .deflection import DeflectionModel
from .files import atomic_write

__all__ = ["phosphor_image", "spot_path", "write_png", "write_signal_plot"]

MAX_SWEEP_STEPS = 16


def phosphor_image(signal: np.ndarray, profile, channels: int, lit: np.ndarray | None = None,
                   width_px: int = 800, spot_mm: float = 0.35, margin: float = 0.06,
                   chain=None, rate: int | None = None) -> np.ndarray:
    """A picture of what the tube shows for a looping frame of channel samples.

    Parameters
    ----------
    signal : (n, channels) array
        The final samples, as written or played.
    profile : Profile
    channels : int
    lit : (n,) bool, optional
        Beam-on samples, where there is no Z channel.
    width_px, spot_mm, margin
        Picture width, spot size on the phosphor, margin around the usable area (fraction).
    chain : StageChain, optional
        The hardware after the jack, as stages: the preview runs the samples through their
        models (needs `rate`).
    rate : int, optional
        Sample rate; with it, a band-limited output (``[output] band_limited``) is shown as its
        reconstruction filter makes it (4x band-limited interpolation) and Z as delayed by
        ``z_delay_us``.

    Returns
    -------
    (h, w, 3) uint8 RGB array
    """
    from scipy.ndimage import gaussian_filter

    pts, weight = spot_path(signal, profile, channels, lit, chain, rate)

    hw, hh = profile.screen.half_extent
    hw, hh = hw * (1 + margin), hh * (1 + margin)
    px_per_mm = width_px / (2 * hw)
    height_px = max(1, int(round(2 * hh * px_per_mm)))

    # Sweeps between consecutive samples: lit only when both ends are lit.
    if len(pts) > 1:
        step_px = np.hypot(*np.diff(pts, axis=0).T) * px_per_mm
        k = int(np.clip(np.ceil(np.percentile(step_px, 99)), 1, MAX_SWEEP_STEPS))
        f = (np.arange(k) / k)[None, :, None]
        sweep = pts[:-1, None, :] + np.diff(pts, axis=0)[:, None, :] * f
        w = np.minimum(weight[:-1], weight[1:])[:, None] * np.ones((1, k)) / k
        xy = sweep.reshape(-1, 2)
        wt = w.ravel()
    else:
        xy, wt = pts, weight
    col = (xy[:, 0] + hw) * px_per_mm
    row = (hh - xy[:, 1]) * px_per_mm
    img, _, _ = np.histogram2d(row, col, bins=(height_px, width_px),
                               range=((0, height_px), (0, width_px)), weights=wt)
    img = gaussian_filter(img, sigma=max(spot_mm * px_per_mm / 2.0, 0.5))
    peak = np.percentile(img[img > 0], 99.5) if np.any(img > 0) else 1.0
    v = 1.0 - np.exp(-2.5 * img / peak)         # phosphor saturation
    rgb = np.stack([0.35 * v ** 2, v, 0.45 * v ** 2], axis=-1)

    # Usable-area outline, faint grey.
    out = profile.screen.outline(2000)
    dense = np.concatenate([np.linspace(out[i], out[i + 1], 400) for i in range(len(out) - 1)])
    oc = np.clip(((dense[:, 0] + hw) * px_per_mm).astype(int), 0, width_px - 1)
    orow = np.clip(((hh - dense[:, 1]) * px_per_mm).astype(int), 0, height_px - 1)
    rgb[orow, oc] = np.maximum(rgb[orow, oc], 0.22)
    return (np.clip(rgb, 0, 1) * 255).astype(np.uint8)


OVERSAMPLE = 4


def spot_path(signal: np.ndarray, profile, channels: int, lit: np.ndarray | None = None,
              chain=None, rate: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Where the spot is (mm) and how bright, for a looping frame of channel samples, as the
    hardware makes them: the channel map undone, the chain's hardware models (AC coupling, the
    deflection's lag), the interface's reconstruction (band-limited interpolation, or each
    sample held) and the Z path's delay, then the deflection model.

    Returns
    -------
    (pts (m, 2) mm, weight (m,) 0..1)
    """
    drive, z = ChannelMap(profile.output, channels).from_channels(signal)
    if chain:
        drive = chain.hardware(drive, rate)
    weight = z if z is not None else (np.ones(len(drive)) if lit is None else lit.astype(float))
    if rate is not None and len(drive) > 1:
        from .interface import fractional_delay, oversample_periodic

        out = profile.output
        if out.z_delay_us and z is not None:
            weight = fractional_delay(weight[:, None], out.z_delay_us * 1e-6 * rate)[:, 0]
        if out.band_limited:
            drive = oversample_periodic(drive, OVERSAMPLE)
            weight = oversample_periodic(weight[:, None], OVERSAMPLE)[:, 0]
        else:
            drive = np.repeat(drive, OVERSAMPLE, axis=0)
            weight = np.repeat(weight, OVERSAMPLE)
        weight = np.clip(weight, 0.0, 1.0)
    return DeflectionModel.from_profile(profile).drive_to_mm(drive), weight


def write_png(path: str, rgb: np.ndarray) -> None:
    from PIL import Image

    atomic_write(path, lambda fh: Image.fromarray(rgb).save(fh, format="PNG"))


def write_signal_plot(path: str, signal: np.ndarray, names: list, rate: int) -> None:
    """X, Y (and Z) against time for one frame, as PNG."""
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    t_ms = np.arange(len(signal)) / rate * 1e3
    fig = Figure(figsize=(9, 1.6 * len(names) + 0.6), dpi=100)
    axes = fig.subplots(len(names), 1, sharex=True, squeeze=False)[:, 0]
    for ax, j in zip(axes, range(len(names))):
        ax.plot(t_ms, signal[:, j], lw=0.8, drawstyle="steps-post")
        ax.set_ylabel(names[j].upper())
        ax.set_ylim(-1.05, 1.05)
        ax.grid(alpha=0.3)
    axes[-1].set_xlabel("time (ms)")
    fig.tight_layout()
    atomic_write(path, lambda fh: fig.savefig(fh, format="png"))

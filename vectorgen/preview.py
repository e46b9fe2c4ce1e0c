"""Phosphor preview: a picture of what the tube will show, made from the actual output samples.

The channel signal is mapped back to drive through the channel map (order and polarity undone),
through the stage chain's model of the hardware after the jack (`StageChain.hardware`), and
through the profile's forward deflection model to millimetres on the face. Brightness is
proportional to the time the spot spends on each pixel (samples are joined by straight sweeps,
as the beam moves between them, each sweep's light spread evenly along it), spread by a Gaussian
spot; the usable area is outlined faintly.

With a Z channel, blanked samples are dark and Z sets the brightness. Without one the beam is
never off: every blanked jump (the retrace) leaves a line, faint because the spot crosses it
fast, and dwells at jump ends light up. The eye and the phosphor see far fainter light than an
8-bit picture shows, so a retrace sweep is drawn at no less than RETRACE_LEVEL of full
brightness. Without Z every stroke is drawn at the beam's one brightness: stroke intensities
below 1 cannot be shown, and the preview warns so.

Several frames of a scene can be exposed into one picture (`exposure_image`), each weighted by
the time it is on screen, as a camera with a long exposure sees them.
"""

from __future__ import annotations

import io
import warnings

import numpy as np

from .channels import ChannelMap
from .deflection import DeflectionModel
from .errors import VectorgenWarning
from .files import write_with_backup

__all__ = ["RETRACE_LEVEL", "exposure_image", "phosphor_image", "spot_path", "write_png",
           "write_signal_plot"]

MAX_SWEEP_PX = 4096         # at most this many points along one sweep
RETRACE_LEVEL = 0.12        # the least brightness of a retrace line without Z (of full)
OVERSAMPLE = 4


def phosphor_image(signal: np.ndarray, profile, channels: int, lit: np.ndarray | None = None,
                   width_px: int = 800, spot_mm: float = 0.35, margin: float = 0.06,
                   chain=None, rate: int | None = None,
                   intensity: np.ndarray | None = None) -> np.ndarray:
    """A picture of what the tube shows for a looping frame of channel samples.

    Parameters
    ----------
    signal : (n, channels) array
        The final samples, as written or played.
    profile : Profile
    channels : int
    lit : (n,) bool, optional
        Where the plan meant the beam on. With no Z channel the beam is on throughout: the
        samples not lit are the retrace, drawn as a faint line.
    width_px, spot_mm, margin
        Picture width, spot size on the phosphor, margin around the usable area (fraction).
    chain : StageChain, optional
        The hardware after the jack, as stages: the preview runs the samples through their
        models (needs `rate`).
    rate : int, optional
        Sample rate; with it, a band-limited output (``[output] band_limited``) is shown as its
        reconstruction filter makes it (4x band-limited interpolation) and Z as delayed by
        ``z_delay_us``.
    intensity : (n,) array, optional
        The plan's stroke intensity per sample: without a Z channel, a lit intensity below 1
        cannot be shown, which is warned (once per run).

    Returns
    -------
    (h, w, 3) uint8 RGB array

    Examples
    --------
    >>> from vectorgen.profile import Profile
    >>> sig = np.array([[-0.5, 0.0], [0.5, 0.0]] * 8)
    >>> phosphor_image(sig, Profile(), 2, width_px=100).shape
    (80, 100, 3)
    """
    return exposure_image([(signal, lit, intensity, 1.0)], profile, channels, width_px, spot_mm,
                          margin, chain, rate)


def exposure_image(parts, profile, channels: int, width_px: int = 800, spot_mm: float = 0.35,
                   margin: float = 0.06, chain=None, rate: int | None = None) -> np.ndarray:
    """One picture of several looping frames, each weighted by how long it is on screen.

    Parameters
    ----------
    parts : sequence of (signal, lit, intensity, weight)
        Each frame's samples, lit flags and intensities (either may be None, as in
        `phosphor_image`) and its weight (e.g. the number of times it is played).
    profile, channels, width_px, spot_mm, margin, chain, rate
        As for `phosphor_image`.

    Returns
    -------
    (h, w, 3) uint8 RGB array

    Notes
    -----
    Light adds up on the phosphor: the picture is the sum of each frame's deposit times its
    weight, then the one saturation curve v = 1 - exp(-2.5 E / E_99.5) of the whole.

    Examples
    --------
    >>> from vectorgen.profile import Profile
    >>> a = np.array([[-0.5, 0.0], [0.5, 0.0]] * 8)
    >>> exposure_image([(a, None, None, 3.0), (-a[:, ::-1], None, None, 1.0)], Profile(), 2,
    ...                width_px=100).shape
    (80, 100, 3)
    """
    from scipy.ndimage import gaussian_filter

    hw, hh = profile.screen.half_extent
    hw, hh = hw * (1 + margin), hh * (1 + margin)
    px_per_mm = width_px / (2 * hw)
    height_px = max(1, int(round(2 * hh * px_per_mm)))
    shape = (height_px, width_px)
    light = np.zeros(shape)
    retrace = np.zeros(shape, dtype=bool)
    for signal, lit, intensity, weight in parts:
        _warn_intensity(profile, channels, lit, intensity)
        pts, wt, trace = _spot_samples(signal, profile, channels, lit, chain, rate)
        xy, w, on_trace = _sweeps(pts, wt, trace, px_per_mm)
        col = (xy[:, 0] + hw) * px_per_mm
        row = (hh - xy[:, 1]) * px_per_mm
        light += float(weight) * _bin(row, col, w, shape)
        if on_trace is not None and on_trace.any():
            retrace |= _bin(row[on_trace], col[on_trace], None, shape) > 0
    sigma = max(spot_mm * px_per_mm / 2.0, 0.5)
    light = gaussian_filter(light, sigma=sigma)
    peak = np.percentile(light[light > 0], 99.5) if np.any(light > 0) else 1.0
    v = 1.0 - np.exp(-2.5 * light / peak)         # phosphor saturation
    if retrace.any():
        v = np.maximum(v, RETRACE_LEVEL * _line_cover(retrace, sigma))
    rgb = np.stack([0.35 * v ** 2, v, 0.45 * v ** 2], axis=-1)

    # Usable-area outline, faint grey.
    out = profile.screen.outline(2000)
    dense = np.concatenate([np.linspace(out[i], out[i + 1], 400) for i in range(len(out) - 1)])
    oc = np.clip(((dense[:, 0] + hw) * px_per_mm).astype(int), 0, width_px - 1)
    orow = np.clip(((hh - dense[:, 1]) * px_per_mm).astype(int), 0, height_px - 1)
    rgb[orow, oc] = np.maximum(rgb[orow, oc], 0.22)
    return (np.clip(rgb, 0, 1) * 255).astype(np.uint8)


def _bin(row, col, weight, shape) -> np.ndarray:
    img, _, _ = np.histogram2d(row, col, bins=shape, range=((0, shape[0]), (0, shape[1])),
                               weights=weight)
    return img


def _line_cover(mask: np.ndarray, sigma: float) -> np.ndarray:
    """0..1: how much of a spot-wide line covers each pixel, 1 on a line's centre (the mask
    blurred like the light, divided by what the blur leaves of a one-pixel line)."""
    from scipy.ndimage import gaussian_filter

    probe = np.zeros((1, 8 * int(np.ceil(sigma)) + 9))
    probe[0, probe.shape[1] // 2] = 1.0
    centre = gaussian_filter(probe, sigma=sigma, mode="constant").max()
    return np.clip(gaussian_filter(mask.astype(float), sigma=sigma) / centre, 0.0, 1.0)


def _sweeps(pts: np.ndarray, weight: np.ndarray, trace: np.ndarray | None, px_per_mm: float):
    """Points along the straight sweeps between consecutive samples, about one per pixel, each
    sweep's light (the smaller of its ends' weights) shared evenly among its points; and which
    points lie on the retrace (None when there is none)."""
    if len(pts) < 2:
        return pts, weight, (None if trace is None else trace.copy())
    d = np.diff(pts, axis=0)
    steps = np.clip(np.ceil(np.hypot(d[:, 0], d[:, 1]) * px_per_mm), 1, MAX_SWEEP_PX)
    steps = steps.astype(int)
    seg = np.repeat(np.arange(len(d)), steps)
    first = np.cumsum(steps) - steps
    f = (np.arange(len(seg)) - first[seg]) / steps[seg]
    xy = pts[seg] + d[seg] * f[:, None]
    w = (np.minimum(weight[:-1], weight[1:]) / steps)[seg]
    on_trace = None
    if trace is not None:
        on_trace = (trace[:-1] | trace[1:])[seg]
    return xy, w, on_trace


def _warn_intensity(profile, channels: int, lit, intensity) -> None:
    """Without Z a stroke cannot be dimmed: say so when the plan asks for it."""
    if intensity is None or ChannelMap(profile.output, channels).has_z:
        return
    inten = np.asarray(intensity, dtype=float)
    on = np.ones(len(inten), dtype=bool) if lit is None else np.asarray(lit, dtype=bool)
    dim = on & (inten < 1.0 - 1e-9)
    if dim.any():
        warnings.warn(f"stroke intensities below 1 (down to {inten[dim].min():.2f}) cannot be "
                      f"shown without a Z channel: the tube and this preview draw them at full "
                      f"brightness (use 3 channels)", VectorgenWarning, stacklevel=3)


def spot_path(signal: np.ndarray, profile, channels: int, lit: np.ndarray | None = None,
              chain=None, rate: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Where the spot is (mm) and how bright, for a looping frame of channel samples, as the
    hardware makes them: the channel map undone, the chain's hardware models (AC coupling, the
    deflection's lag), the interface's reconstruction (band-limited interpolation, or each
    sample held) and the Z path's delay, then the deflection model.

    Parameters
    ----------
    signal, profile, channels, lit, chain, rate
        As for `phosphor_image`.

    Returns
    -------
    (pts (m, 2) mm, weight (m,) 0..1)
        Without a Z channel the beam is on throughout (weight 1).

    Examples
    --------
    >>> from vectorgen.profile import Profile
    >>> pts, w = spot_path(np.array([[0.5, -0.25, 1.0]]), Profile(), 3)
    >>> pts.tolist(), w.tolist()
    ([[25.0, -10.0]], [1.0])
    """
    pts, weight, _trace = _spot_samples(signal, profile, channels, lit, chain, rate)
    return pts, weight


def _spot_samples(signal, profile, channels, lit, chain, rate):
    """`spot_path`, and which samples are the retrace (beam on, not meant lit: no Z), or None."""
    drive, z = ChannelMap(profile.output, channels).from_channels(signal)
    if chain:
        drive = chain.hardware(drive, rate)
    weight = z if z is not None else np.ones(len(drive))
    trace = None if z is not None or lit is None else ~np.asarray(lit, dtype=bool)
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
        if trace is not None:
            trace = np.repeat(trace, OVERSAMPLE)
        weight = np.clip(weight, 0.0, 1.0)
    return DeflectionModel.from_profile(profile).drive_to_mm(drive), weight, trace


def write_png(path: str, rgb: np.ndarray) -> str | None:
    """Write an RGB picture as PNG; an existing file at `path` is kept as a numbered backup.
    Returns the backup's path (None when there was nothing to keep)."""
    from PIL import Image

    buf = io.BytesIO()
    Image.fromarray(rgb).save(buf, format="PNG")
    return write_with_backup(path, buf.getvalue(), (".png",))


def write_signal_plot(path: str, signal: np.ndarray, names: list, rate: int) -> str | None:
    """X, Y (and Z) against time for one frame, as PNG (an existing file is kept as a numbered
    backup, whose path is returned)."""
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
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    return write_with_backup(path, buf.getvalue(), (".png",))

"""The channel map: drive and Z to interface channels, and back. The one owner of channel order,
axis inversion, Z polarity and the blank level.

Drive is (n, 2) in full-scale units (x, y); Z is the beam intensity 0..1 (0 where blanked).
Channel j of the interface carries ``names[j]`` ("x", "y" or "z"); an inverted axis carries the
negated drive; Z carries the intensity where lit and ``z_blank_level`` where blanked, negated when
``z_polarity`` is negative.
"""

from __future__ import annotations

import numpy as np

__all__ = ["ChannelMap"]


class ChannelMap:
    """Channel layout of one output set-up.

    Parameters
    ----------
    output : profile.Output
        The profile's `[output]` table (order, invert, z_polarity, z_blank_level).
    channels : int
        2 (X, Y) or 3 (X, Y, Z).

    Examples
    --------
    >>> from vectorgen.profile import Output
    >>> cm = ChannelMap(Output(order=["y", "x", "z"], invert=["x"]), 3)
    >>> cm.names
    ['y', 'x', 'z']
    >>> cm.to_channels(np.array([[0.5, -0.25]]), np.array([1.0]), np.array([True])).tolist()
    [[-0.25, -0.5, 1.0]]
    >>> drive, z = cm.from_channels(np.array([[-0.25, -0.5, 1.0]]))
    >>> drive.tolist(), z.tolist()
    ([[0.5, -0.25]], [1.0])
    """

    def __init__(self, output, channels: int):
        self.output = output
        self.names = output.channel_order(channels)
        self.channels = len(self.names)
        self._sign = -1.0 if output.z_polarity == "negative" else 1.0
        self.blank_level = float(output.z_blank_level)
        # (channel, drive column, inverted) of the X/Y channels; the Z channels
        self._xy = [(j, 0 if name == "x" else 1, name in output.invert)
                    for j, name in enumerate(self.names) if name != "z"]
        self.z_channels = [j for j, name in enumerate(self.names) if name == "z"]

    @property
    def has_z(self) -> bool:
        return bool(self.z_channels)

    @property
    def zmask(self) -> np.ndarray:
        """(channels,) bool: which channels carry Z."""
        return np.array([n == "z" for n in self.names])

    def z_level(self, intensity: np.ndarray, lit: np.ndarray | None = None) -> np.ndarray:
        """Z channel values: the intensity where lit, the blank level where not, polarity
        applied (float64; 0.0 instead of -0.0)."""
        intensity = np.asarray(intensity, dtype=float)
        z = intensity if lit is None else np.where(lit, intensity, self.blank_level)
        return self._sign * z + 0.0

    def write_xy(self, out: np.ndarray, drive: np.ndarray) -> None:
        """Write the X/Y channels of `out` ((n, channels), any float type) from `drive`."""
        for j, k, inv in self._xy:
            if inv:
                np.negative(drive[:, k], out=out[:, j], casting="same_kind")
            else:
                out[:, j] = drive[:, k]

    def write_z(self, out: np.ndarray, z: np.ndarray) -> None:
        """Write every Z channel of `out` with already-mapped Z values (see `z_level`)."""
        for j in self.z_channels:
            out[:, j] = z

    def to_channels(self, drive: np.ndarray, intensity: np.ndarray,
                    lit: np.ndarray | None = None) -> np.ndarray:
        """(n, channels) float32 from drive (n, 2) and beam intensity (n,) (with `lit`, the
        blank level where not lit)."""
        sig = np.empty((len(drive), self.channels), dtype=np.float32)
        self.write_xy(sig, drive)
        if self.z_channels:
            self.write_z(sig, self.z_level(intensity, lit))
        return sig

    def from_channels(self, sig: np.ndarray):
        """Undo `to_channels`: (drive (n, 2), beam intensity (n,), or None without Z). Z at the
        blank level reads as 0 (beam off); other values are clipped to 0..1."""
        sig = np.asarray(sig, dtype=float)
        drive = np.zeros((len(sig), 2))
        for j, k, inv in self._xy:
            drive[:, k] = -sig[:, j] if inv else sig[:, j]
        if not self.z_channels:
            return drive, None
        z = self._sign * sig[:, self.z_channels[0]]
        z = np.where(np.isclose(z, self.blank_level), 0.0, np.clip(z, 0.0, 1.0))
        return drive, z

    def park(self, drive=(0.0, 0.0)) -> np.ndarray:
        """(channels,) float32: the channel values of the spot at `drive`, blanked."""
        return self.to_channels(np.asarray([drive], dtype=float), np.zeros(1),
                                np.zeros(1, dtype=bool))[0]

"""Beam timing in samples, worked out from the profile's `[beam]` table for one sample rate."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Timing"]


@dataclass(frozen=True)
class Timing:
    """Beam timing in samples for one sample rate.

    Attributes
    ----------
    rate : int
        Sample rate, Hz.
    spacing_mm : float
        Distance between lit samples along a stroke: writing speed / rate.
    jump_step_mm : float
        Longest blanked step per sample: jump speed / rate (inf: every jump is one sample).
    settle, end_dwell, corner_dwell, dot_dwell : int
        Samples of blanked settling after a jump, of dwell at a stroke's ends, at a sharp
        corner, and on a dot.
    corner_angle_deg : float
        A turn sharper than this is a corner.

    Examples
    --------
    >>> from vectorgen.profile import Beam
    >>> t = Timing.from_beam(Beam(), 48000)
    >>> round(t.spacing_mm, 4), t.settle, t.end_dwell
    (0.4167, 3, 2)
    """

    rate: int
    spacing_mm: float
    jump_step_mm: float
    settle: int
    end_dwell: int
    corner_dwell: int
    dot_dwell: int
    corner_angle_deg: float

    @classmethod
    def from_beam(cls, beam, rate: int, writing_speed: float | None = None) -> "Timing":
        """From a profile's `[beam]` table; `writing_speed` (mm/s) overrides the profile's."""
        def samples(us):
            return int(round(us * 1e-6 * rate))
        speed = beam.writing_speed_mm_per_s if writing_speed is None else writing_speed
        jump = beam.jump_speed_mm_per_s
        return cls(rate, speed / rate, jump / rate if jump > 0 else np.inf,
                   samples(beam.settle_us), max(1, samples(beam.end_dwell_us)),
                   samples(beam.corner_dwell_us), max(1, samples(beam.dot_dwell_us)),
                   beam.corner_angle_deg)

    @property
    def jumps(self):
        """The jump model these timings give (see `vectorgen.beamplan.jumps`)."""
        from .jumps import StraightJumps

        return StraightJumps(self.jump_step_mm, self.settle)

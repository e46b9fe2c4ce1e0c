"""The render path: Strokes (mm) -> clipped -> beam plan -> corrected drive -> channel signal.

`Renderer` holds what stays fixed while frames change (profile, rate, channels, timing) so
file output, live output and scenes all call the same `Renderer.frame(strokes)`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .beamplan import Plan, Timing, plan_frame
from .deflection import DeflectionModel
from .errors import VectorgenError
from .geometry import clip_parts
from .signal import correct, plan_channels
from .strokes import Strokes, check_finite

MAX_RATE = 10_000_000


@dataclass
class Settings:
    rate: int = 48000
    channels: int | None = None          # None: the profile's
    speed: float | None = None           # writing speed, mm/s (None: profile, unless refresh)
    refresh: float | None = None         # target refresh, Hz: frame time fixed, speed follows
    frame_samples: int | None = None     # fit each frame into exactly this many samples
    reorder: bool = True

    def check(self) -> None:
        if not isinstance(self.rate, int) or self.rate <= 0 or self.rate > MAX_RATE:
            raise VectorgenError(f"sample rate must be a whole number of Hz between 1 and "
                                 f"{MAX_RATE} (got {self.rate})")
        if self.channels not in (None, 2, 3):
            raise VectorgenError(f"channels must be 2 or 3 (got {self.channels})")
        given = [n for n, v in (("--speed", self.speed), ("--refresh", self.refresh),
                                ("--samples", self.frame_samples)) if v is not None]
        if len(given) > 1:
            raise VectorgenError(f"give only one of {', '.join(given)}: each sets the frame time")
        if self.speed is not None and not (np.isfinite(self.speed) and self.speed > 0):
            raise VectorgenError(f"writing speed must be > 0 mm/s (got {self.speed})")
        if self.refresh is not None and not (np.isfinite(self.refresh) and 0 < self.refresh
                                             <= self.rate / 2):
            raise VectorgenError(f"refresh must be > 0 Hz and at most half the sample rate "
                                 f"(got {self.refresh})")
        if self.frame_samples is not None and self.frame_samples < 1:
            raise VectorgenError(f"samples per frame must be >= 1 (got {self.frame_samples})")


class Frame:
    """One rendered frame: the channel signal and how it was made. `drive` (the corrected
    (n, 2) drive before channel mapping) may be given as a function that makes it: the render
    path writes the signal without keeping it, and it is worked out again when asked for."""

    def __init__(self, signal: np.ndarray, names: list, plan: Plan, drive, rate: int,
                 clipped_strokes: int = 0, notes: list | None = None,
                 peak_drive: float | None = None):
        self.signal = signal        # (n, channels) float32, full scale +-1
        self.names = names          # signal on each channel, e.g. ["x", "y", "z"]
        self.plan = plan
        self._drive = drive
        self.rate = rate
        self.clipped_strokes = clipped_strokes
        self.notes = [] if notes is None else notes
        self._peak = peak_drive     # max |drive|, when known without the drive

    @property
    def drive(self) -> np.ndarray:
        if callable(self._drive):
            self._drive = self._drive()
        return self._drive

    @property
    def samples(self) -> int:
        return len(self.signal)

    @property
    def refresh_hz(self) -> float:
        return self.rate / self.samples

    def report(self, profile) -> dict:
        p = self.plan
        lit_time = p.moving_samples / self.rate
        speed = p.drawn_length_mm / lit_time if lit_time > 0 else 0.0
        if self._peak is not None:
            peak = self._peak
        else:
            peak = float(np.abs(self.drive).max()) if self.samples else 0.0
        rep = {
            "sample_rate": self.rate,
            "samples_per_frame": self.samples,
            "refresh_hz": round(self.refresh_hz, 6),
            "frame_time_s": self.samples / self.rate,
            "drawn_length_mm": round(p.drawn_length_mm, 6),
            "blanked_moves": p.blanked_moves,
            "blanked_length_mm": round(p.blanked_length_mm, 6),
            "writing_speed_mm_per_s": round(speed, 6),
            "point_spacing_mm": round(speed / self.rate, 6),
            "strokes": p.stroke_count,
            "corners": p.corners,
            "lit_samples": int(p.lit.sum()),
            "blanked_samples": int((~p.lit).sum()),
            "channels": self.names,
            "peak_drive": round(peak, 6),
            "clipped_strokes": self.clipped_strokes,
            "flicker_warning": bool(self.refresh_hz < profile.beam.flicker_hz),
            "profile": profile.source,
            "calibrated": bool(profile.deflection.calibrated),
        }
        if profile.output.volts_full_scale:
            rep["peak_volts"] = round(peak * profile.output.volts_full_scale, 6)
        return rep


def report_line(rep: dict) -> str:
    return (f"{rep['samples_per_frame']} samples/frame at {rep['sample_rate']} Hz = "
            f"{rep['refresh_hz']:.1f} Hz refresh; {rep['strokes']} strokes, drawn "
            f"{rep['drawn_length_mm']:.1f} mm at {rep['writing_speed_mm_per_s'] / 1000:.2f} m/s "
            f"({rep['point_spacing_mm']:.3f} mm/sample); {rep['blanked_moves']} blanked moves "
            f"over {rep['blanked_length_mm']:.1f} mm; peak drive {rep['peak_drive']:.3f}")


class Renderer:
    """Turns drawings into frames for one profile and one output setup."""

    def __init__(self, profile, settings: Settings):
        settings.check()
        self.profile = profile
        self.settings = settings
        self.rate = settings.rate
        self.channels = settings.channels or profile.output.channels
        self.model = DeflectionModel.from_profile(profile)
        self.timing = Timing.from_beam(profile.beam, self.rate, settings.speed)
        if settings.refresh is not None:
            self.target = max(1, int(round(self.rate / settings.refresh)))
        else:
            self.target = settings.frame_samples

    def frame(self, strokes: Strokes) -> Frame:
        check_finite(strokes)
        clipped, n_clipped = clip_parts(strokes, self.profile.screen)
        if clipped.count == 0:
            raise VectorgenError("nothing to draw: the drawing lies wholly outside the usable "
                                 "area of the screen")
        plan = plan_frame(clipped, self.timing, self.target, self.settings.reorder)
        del clipped
        signal, names, peak, drive = plan_channels(plan, self.model, self.profile.output,
                                                   self.channels)
        if drive is None:           # made chunk by chunk: worked out again if asked for
            model = self.model
            drive = lambda: correct(plan, model)    # noqa: E731
        frame = Frame(signal, names, plan, drive, self.rate, n_clipped, peak_drive=peak)
        if n_clipped:
            frame.notes.append(f"{n_clipped} stroke(s) cut at the edge of the usable area")
        if plan.drawn_length_mm == 0:
            frame.notes.append("this frame is dots only: the beam stands still on them; keep the "
                               "brightness low, a stationary spot burns the phosphor")
        if frame.refresh_hz < self.profile.beam.flicker_hz:
            frame.notes.append(
                f"refresh {frame.refresh_hz:.1f} Hz is below the {self.profile.beam.flicker_hz:g}"
                f" Hz flicker threshold: draw less, raise --speed, or set --refresh")
        return frame

"""The render pipeline: Strokes (mm) -> clipped -> beam plan -> corrected drive -> stages ->
channel signal.

`Renderer` holds what stays fixed while frames change (profile, rate, channels, timing, stage
chain, channel map) so file output, live output, scenes and calibration patterns all call the
same `Renderer.frame(strokes)`; nothing else re-implements a stage.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from functools import cached_property

import numpy as np

from .beamplan import ORDERINGS, Plan, Timing, plan_frame
from .channels import ChannelMap
from .clip import clip_parts
from .correction import check_full_scale, plan_signal
from .deflection import DeflectionModel
from .errors import InputError, VectorgenWarning
from .stages import Stage, StageChain
from .strokes import Strokes, check_finite

__all__ = ["MAX_RATE", "Settings", "Frame", "Renderer", "report_line"]

MAX_RATE = 10_000_000


@dataclass
class Settings:
    """What the user chooses for one output set-up.

    Attributes
    ----------
    rate : int
        Sample rate, Hz.
    channels : int or None
        2 or 3; None takes the profile's.
    speed : float or None
        Writing speed, mm/s (None: the profile's, unless `refresh` or `frame_samples`).
    refresh : float or None
        Target refresh, Hz: the frame time is fixed and the speed follows.
    frame_samples : int or None
        Fit each frame into exactly this many samples (a waveform generator's memory).
    ordering : str
        Stroke ordering strategy by name (``"greedy"``, ``"input"``).
    """

    rate: int = 48000
    channels: int | None = None
    speed: float | None = None
    refresh: float | None = None
    frame_samples: int | None = None
    ordering: str = "greedy"

    def check(self) -> None:
        """Raise `InputError` (naming the parameter) for an impossible setting."""
        if not isinstance(self.rate, int) or self.rate <= 0 or self.rate > MAX_RATE:
            raise InputError(f"sample rate must be a whole number of Hz between 1 and "
                             f"{MAX_RATE} (rate={self.rate})", parameter="rate")
        if self.channels not in (None, 2, 3):
            raise InputError(f"channels must be 2 or 3 (channels={self.channels})",
                             parameter="channels")
        given = [n for n, v in (("speed", self.speed), ("refresh", self.refresh),
                                ("frame_samples", self.frame_samples)) if v is not None]
        if len(given) > 1:
            raise InputError(f"give only one of {', '.join(given)}: each sets the frame time",
                             parameter=tuple(given))
        if self.speed is not None and not (np.isfinite(self.speed) and self.speed > 0):
            raise InputError(f"writing speed must be > 0 mm/s (speed={self.speed})",
                             parameter="speed")
        if self.refresh is not None and not (np.isfinite(self.refresh) and 0 < self.refresh
                                             <= self.rate / 2):
            raise InputError(f"refresh must be > 0 Hz and at most half the sample rate "
                             f"(refresh={self.refresh})", parameter="refresh")
        if self.frame_samples is not None and self.frame_samples < 1:
            raise InputError(f"samples per frame must be >= 1 "
                             f"(frame_samples={self.frame_samples})", parameter="frame_samples")
        ORDERINGS[self.ordering]        # an unknown strategy names the known ones


class Frame:
    """One rendered frame: the channel signal and how it was made.

    Attributes
    ----------
    signal : (n, channels) float32
        The samples, full scale +-1, in the channel map's order.
    names : list of str
        The signal on each channel, e.g. ``["x", "y", "z"]``.
    plan : Plan
        The beam plan.
    rate : int
    clipped_strokes : int
        Strokes cut at the edge of the usable area.
    warnings : list of str
        What the render warned about (also issued through `warnings.warn`).
    """

    def __init__(self, signal: np.ndarray, names: list, plan: Plan, rate: int,
                 renderer: "Renderer", drive: np.ndarray | None, peak_drive: float,
                 clipped_strokes: int = 0):
        self.signal = signal
        self.names = names
        self.plan = plan
        self.rate = rate
        self.clipped_strokes = clipped_strokes
        self.warnings: list[str] = []
        self._renderer = renderer
        self._given_drive = drive
        self._peak = peak_drive

    @cached_property
    def corrected(self) -> np.ndarray:
        """(n, 2) drive that puts the spot on the plan's points, before the stages."""
        return self._renderer.model.drive_from_xy(self.plan.x, self.plan.y)

    @cached_property
    def drive(self) -> np.ndarray:
        """(n, 2) final drive: after the stages, what the X/Y channels carry (before the
        channel order and inversion)."""
        if self._given_drive is not None:
            return self._given_drive
        r = self._renderer
        return check_full_scale(r.chain.frame(self.corrected, self.rate), self.plan)

    @property
    def samples(self) -> int:
        return len(self.signal)

    @property
    def refresh_hz(self) -> float:
        return self.rate / self.samples

    def report(self, profile) -> dict:
        """The frame report (the JSON report's fields)."""
        p = self.plan
        lit_time = p.moving_samples / self.rate
        speed = p.drawn_length_mm / lit_time if lit_time > 0 else 0.0
        peak = self._peak
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
        stages = self._renderer.chain.report()
        if stages:
            rep["stages"] = stages
        if profile.output.volts_full_scale:
            rep["peak_volts"] = round(peak * profile.output.volts_full_scale, 6)
        return rep


def report_line(rep: dict) -> str:
    """The one-line summary of a frame report."""
    return (f"{rep['samples_per_frame']} samples/frame at {rep['sample_rate']} Hz = "
            f"{rep['refresh_hz']:.1f} Hz refresh; {rep['strokes']} strokes, drawn "
            f"{rep['drawn_length_mm']:.1f} mm at {rep['writing_speed_mm_per_s'] / 1000:.2f} m/s "
            f"({rep['point_spacing_mm']:.3f} mm/sample); {rep['blanked_moves']} blanked moves "
            f"over {rep['blanked_length_mm']:.1f} mm; peak drive {rep['peak_drive']:.3f}")


class Renderer:
    """Turns drawings into frames for one profile and one output set-up.

    Parameters
    ----------
    profile : Profile
    settings : Settings
    stages : sequence of Stage, optional
        The signal stages after correction, in order (default: none, the drive as corrected).

    Examples
    --------
    >>> from vectorgen.profile import Profile
    >>> from vectorgen.strokes import strokes_from_polylines
    >>> r = Renderer(Profile(), Settings(rate=48000, channels=3))
    >>> f = r.frame(strokes_from_polylines([[(-10.0, 0.0), (10.0, 0.0)]]))
    >>> f.names, f.signal.shape[1], bool(abs(f.signal[:, :2]).max() <= 1.0)
    (['x', 'y', 'z'], 3, True)
    """

    def __init__(self, profile, settings: Settings, stages=()):
        settings.check()
        self.profile = profile
        self.settings = settings
        self.rate = settings.rate
        self.channels = settings.channels or profile.output.channels
        self.model = DeflectionModel.from_profile(profile)
        self.timing = Timing.from_beam(profile.beam, self.rate, settings.speed)
        self.chain = StageChain(stages)
        self.cmap = ChannelMap(profile.output, self.channels)
        if settings.refresh is not None:
            self.target = max(1, int(round(self.rate / settings.refresh)))
        else:
            self.target = settings.frame_samples

    def frame(self, strokes: Strokes) -> Frame:
        """Render one frame of `strokes` (mm).

        Raises
        ------
        InputError
            Nothing to draw, or a frame that cannot be laid out.
        FullScaleError
            A sample beyond full scale.
        """
        check_finite(strokes)
        clipped, n_clipped = clip_parts(strokes, self.profile.screen)
        if clipped.count == 0:
            raise InputError("nothing to draw: the drawing lies wholly outside the usable "
                             "area of the screen")
        plan = plan_frame(clipped, self.timing, self.target, self.settings.ordering)
        del clipped
        signal, peak, drive = plan_signal(plan, self.model, self.chain, self.cmap, self.rate)
        frame = Frame(signal, self.cmap.names, plan, self.rate, self, drive, peak, n_clipped)
        if n_clipped:
            frame.warnings.append(f"{n_clipped} stroke(s) cut at the edge of the usable area")
        if plan.drawn_length_mm == 0:
            frame.warnings.append("this frame is dots only: the beam stands still on them; keep "
                                  "the brightness low, a stationary spot burns the phosphor")
        if frame.refresh_hz < self.profile.beam.flicker_hz:
            frame.warnings.append(
                f"refresh {frame.refresh_hz:.1f} Hz is below the {self.profile.beam.flicker_hz:g}"
                f" Hz flicker threshold: draw less, raise the writing speed, or set a refresh "
                f"rate")
        for w in frame.warnings:
            warnings.warn(w, VectorgenWarning, stacklevel=2)
        return frame

    @property
    def switches_matter(self) -> bool:
        """Whether any stage plays something special on a live frame switch."""
        return any(type(s).first_pass is not Stage.first_pass for s in self.chain)

    def first_pass(self, prev: Frame, nxt: Frame) -> np.ndarray | None:
        """The signal to play for the first pass of `nxt` when it follows a loop of `prev`
        live, or None when the steady frame plays as it is (see `Stage.first_pass`)."""
        if not self.switches_matter:
            return None
        drive = self.chain.first_pass(prev.corrected, nxt.corrected, self.rate)
        if drive is None:
            return None
        drive = check_full_scale(drive, nxt.plan)
        return self.cmap.to_channels(drive, nxt.plan.intensity, nxt.plan.lit)

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

from .beamplan import (ORDERINGS, LagJumps, Plan, ShapedJumps, Timing, check_frame_size,
                       order_frame, plan_frame)
from .channels import ChannelMap
from .clip import clip_parts
from .correction import CHUNK, check_full_scale, check_true_peak, plan_signal
from .deflection import DeflectionModel
from .errors import FullScaleError, InputError, VectorgenWarning
from .stages import Stage, StageChain
from .strokes import Strokes, check_finite

__all__ = ["MAX_RATE", "Settings", "Frame", "Renderer", "report_line", "stages_for"]

MAX_RATE = 10_000_000
JUMP_DRIVE_LIMIT = 0.95      # a lagging deflection's jumps leave headroom for the interface
LIT_DRIVE_LIMIT = 0.9        # strokes slow down where their compensated drive would pass this
                             # (the rest is headroom for the ringing of a sudden start or stop)
BALANCE_REACHES = (0.9, 0.7, 0.5, 0.35, 0.25)
MIN_CAP_FRACTION = 0.05      # the slowest a drive limit makes a stroke, of the writing speed
ACCEL_DRIVE_TOP = 0.85       # a second-order deflection's acceleration may use the drive up to
ACCEL_DRIVE_FLOOR = 0.02     # this (at least this much of it, where a stroke lies further out)


def stages_for(profile, response=None) -> list:
    """The signal stages a profile's hardware needs: AC-coupling compensation for
    `[output] highpass_hz`, lag compensation for `[response]` (or `[drive]`'s L / R)."""
    stages = []
    if profile.output.highpass_hz > 0:
        from .interface import ACCoupling

        stages.append(ACCoupling(profile.output.highpass_hz))
    response = profile.response_model() if response is None else response
    if response.order > 0:
        from .response import LagCompensation

        stages.append(LagCompensation(response))
    return stages


def merged(strokes, tol_mm: float):
    """Strokes whose ends meet (within `tol_mm`) and share an intensity joined into one, as
    shapely.ops.linemerge joins lines: each join removes a jump and two end dwells. Every
    point is kept; a joined stroke is labelled by its first part."""
    from .tour import merge_strokes

    if strokes.count < 2:
        return strokes
    s = strokes.packed()
    pts, offs, inten, groups = merge_strokes(s.points, s.offsets, s.intensity, tol_mm)
    if len(offs) - 1 == s.count:
        return s
    labels = [s.labels[int(g[0])] + (f" (+{len(g) - 1} joined)" if len(g) > 1 else "")
              for g in groups]
    return Strokes(pts, offs, inten, labels)


def _r(v):
    return [round(float(e), 6) for e in np.ravel(v)] if np.ndim(v) else round(float(v), 6)


def _drive_report(needs: dict, reach: dict) -> dict:
    out = {}
    for k, v in needs.items():
        if isinstance(v, np.ndarray) and v.ndim == 1 and len(v) == 2:
            out[k] = _r(v)
        elif isinstance(v, (int, float)):
            out[k] = _r(v)
    out["deflection_fraction"] = _r(reach["deflection_fraction"])
    out["speed_fraction"] = _r(reach["speed_fraction"])
    return out


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
        Stroke ordering strategy by name (``"tour"``, ``"greedy"``, ``"input"``).
    compensate : bool
        Make the picture right at the spot for the profile's interface and response: shaped
        jumps, the compensation stages, frame balancing. False renders as for ideal hardware
        (to see what compensation does).
    balance : bool
        With an AC-coupled output, balance every frame to zero mean by a blanked dwell (False:
        leave the picture to shift by the frame's mean).
    slow_to_fit : bool
        When `[drive]` cannot make the frame at this writing speed, slow down to fit instead
        of refusing.
    switch_ready : bool
        Frames that follow each other (a scene): balance their first moment too, so that an
        AC-coupled output switches from one to the next without a transient (costs longer
        balancing dwells).
    check_drive : bool
        With `[drive]`, refuse a frame the amplifier cannot make (False: render it anyway and
        report what it needs, to say what can be reached).
    """

    rate: int = 48000
    channels: int | None = None
    speed: float | None = None
    refresh: float | None = None
    frame_samples: int | None = None
    ordering: str = "tour"
    compensate: bool = True
    balance: bool = True
    slow_to_fit: bool = False
    switch_ready: bool = False
    check_drive: bool = True

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
        from .beamplan import MAX_FRAME_SAMPLES

        least = self.rate / MAX_FRAME_SAMPLES
        if self.refresh is not None and not (np.isfinite(self.refresh) and least <= self.refresh
                                             <= self.rate / 2):
            raise InputError(f"refresh must be at least {least:g} Hz and at most half the sample "
                             f"rate (refresh={self.refresh:g})", parameter="refresh")
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
        self.extra: dict = {}           # interface and drive figures for the report
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
        rep.update(self.extra)
        if self._renderer.chain and len(self.drive):
            c = float(np.abs(self.corrected).max())
            rep["compensation_peak_boost"] = _r(float(np.abs(self.drive).max()) / c if c else 1.0)
        rep["jump_samples"] = int(p.jump_samples)
        bound = self._renderer.lower_bound(p)
        rep["lower_bound_samples"] = bound
        rep["frame_time_ratio"] = round(self.samples / bound, 4) if bound else None
        rep["lit_duty_cycle"] = round(float(p.lit.sum()) / self.samples, 4)
        if profile.output.volts_full_scale:
            rep["peak_volts"] = round(peak * profile.output.volts_full_scale, 6)
        return rep


def _count(n: int, word: str) -> str:
    return f"{n} {word}{'' if n == 1 else 's'}"


def _hz(f: float) -> str:
    """A refresh for a warning: to 0.1 Hz, to two significant figures below 1 Hz (a frame of
    seconds is not "about 0 Hz", nor 0.155 Hz "0.2")."""
    return f"{f:.1f}" if f >= 0.995 else f"{f:.2g}"


def report_line(rep: dict) -> str:
    """The one-line summary of a frame report."""
    if rep["drawn_length_mm"] == 0:
        drawing = f"{_count(rep['strokes'], 'dot')}, nothing drawn between them"
    else:
        drawing = (f"{_count(rep['strokes'], 'stroke')}, drawn {rep['drawn_length_mm']:.1f} mm "
                   f"at {rep['writing_speed_mm_per_s'] / 1000:.2f} m/s "
                   f"({rep['point_spacing_mm']:.3f} mm/sample)")
    return (f"{rep['samples_per_frame']} samples/frame at {rep['sample_rate']} Hz = "
            f"{rep['refresh_hz']:.1f} Hz refresh; {drawing}; "
            f"{_count(rep['blanked_moves'], 'blanked move')} over "
            f"{rep['blanked_length_mm']:.1f} mm; peak drive {rep['peak_drive']:.3f}"
            + (f"; frame {rep['frame_time_ratio']:.2f} x its lower bound, lit "
               f"{100 * rep['lit_duty_cycle']:.0f} %" if rep.get("frame_time_ratio") else ""))


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

    def __init__(self, profile, settings: Settings, stages=None):
        settings.check()
        self.profile = profile
        self.settings = settings
        self.rate = settings.rate
        self.channels = settings.channels or profile.output.channels
        self.model = DeflectionModel.from_profile(profile)
        self.timing = Timing.from_beam(profile.beam, self.rate, settings.speed)
        self.response = profile.response_model()
        # the hardware after the jack, as stages (the preview runs samples through their
        # models); compensation applies them
        self.hardware_chain = StageChain(stages_for(profile, self.response) if stages is None
                                         else stages)
        self.chain = self.hardware_chain if settings.compensate else StageChain()
        self.cmap = ChannelMap(profile.output, self.channels)
        self.jumps = self._jump_model()
        self.speed_cap = self._speed_cap(self.rate) if settings.compensate else None
        self.accel = self._accel_limit(self.rate) if settings.compensate else None
        # without compensation the plan cannot square a corner: it waits for the lag
        self.settle = (self._corner_settle if self.response.order > 0
                       and not settings.compensate else None)
        if settings.refresh is not None:
            self.target = max(1, int(round(self.rate / settings.refresh)))
        else:
            self.target = settings.frame_samples

    def _jump_model(self):
        out = self.profile.output
        t = self.timing
        if not self.settings.compensate:
            return t.jumps
        if self.response.order > 0:
            return LagJumps(self.response, self.model, JUMP_DRIVE_LIMIT, self.rate,
                            self.profile.beam.spot_mm, t.settle)
        if out.band_limited:
            return ShapedJumps(t.jump_step_mm, t.settle)
        return t.jumps

    def _corner_settle(self, turn_deg, speed_mm_s):
        """Samples a lagging spot needs to follow a turn to within the spot size."""
        from .response import corner_dwell_samples

        return corner_dwell_samples(turn_deg, speed_mm_s, self.response, self.rate,
                                    self.profile.beam.spot_mm)

    def _accel_limit(self, rate: int):
        """For a second-order response: the largest change of the spot's speed per sample (mm
        per sample^2) at each vertex, accel(px, py) for the planner (None otherwise). The
        compensated drive of such a deflection is u + (2 zeta / wn) du/dt + (1 / wn^2)
        d^2u/dt^2, so an acceleration A asks for A / wn^2 of drive: it may take what is left
        below ACCEL_DRIVE_TOP at that place once the speed's share is taken (at least
        ACCEL_DRIVE_FLOOR), on the slower axis, in the weakest axis's mm."""
        if self.response.order != 2:
            return None
        wn2 = (2.0 * np.pi * np.asarray(self.response.natural_hz, dtype=float)) ** 2
        lag = np.asarray(self.response.lag_s, dtype=float)
        mm_per_fs = self.model.weakest_mm_per_fs
        model = self.model

        def accel(px, py, speed):
            u = np.abs(model.drive_from_xy(px, py))
            moving = lag * (np.asarray(speed)[:, None] * rate / mm_per_fs)   # FS, lag term
            room = np.maximum(ACCEL_DRIVE_TOP - u - moving, ACCEL_DRIVE_FLOOR)
            room *= wn2
            return np.minimum(room[:, 0], room[:, 1]) * mm_per_fs / float(rate) ** 2
        return accel

    def _speed_cap(self, rate: int):
        """The largest point spacing per piece for which a lagging deflection's compensated
        drive stays within LIT_DRIVE_LIMIT (None for an ideal response). A stroke that runs
        into full scale can only creep up to it (a lag reaches its limit in no finite time):
        it is drawn no slower than MIN_CAP_FRACTION of the writing speed, and the full-scale
        check says when even that is too fast."""
        if self.response.order == 0:
            return None
        floor = MIN_CAP_FRACTION * self.timing.spacing_mm * self.rate
        model, resp = self.model, self.response
        inv = np.linalg.inv(model.matrix)

        lag = np.asarray(resp.lag_s, dtype=float)

        def cap(px, py):
            # each segment's speed limit at both its ends, travelling along it: on axis a the
            # drive u + lag du/dt stays within the limit (LIT_DRIVE_LIMIT, or half-way from
            # |u| to full scale where a stroke lies further out already) while
            # room_a = limit - sign(du_a) u_a >= lag_a |du_a/dt|; a segment of norm mm whose
            # drive changes by f_a may so be drawn at room_a norm / (lag_a |f_a|) mm/s.
            # CHUNK segments at a time: the temporaries stay small (no fresh memory per op)
            out = np.empty(max(len(px) - 1, 0))
            for g0 in range(0, len(out), CHUNK):
                g1 = min(len(out), g0 + CHUNK)
                out[g0:g1] = chunk(px[g0:g1 + 1], py[g0:g1 + 1])
            np.maximum(out, floor, out=out)
            out /= rate
            return out

        def chunk(px, py):
            u = model.drive_from_xy(px, py)
            dx, dy = np.diff(px), np.diff(py)
            norm = np.sqrt(dx * dx + dy * dy)
            mm_s = np.full(len(dx), np.inf)
            with np.errstate(divide="ignore", invalid="ignore"):
                for a in (0, 1):
                    if not lag[a] > 0:
                        continue
                    f = inv[a, 0] * dx
                    f += inv[a, 1] * dy
                    ua = u[:, a]
                    limit = np.abs(ua)
                    limit *= 0.5
                    limit += 0.5
                    np.maximum(limit, LIT_DRIVE_LIMIT, out=limit)
                    sgn = np.sign(f)
                    room = limit[:-1] - sgn * ua[:-1]
                    np.minimum(room, limit[1:] - sgn * ua[1:], out=room)
                    np.maximum(room, 0.0, out=room)
                    room *= norm
                    np.abs(f, out=f)
                    f *= lag[a]
                    room /= f                       # inf where f is 0 and room > 0
                    room[f == 0] = np.inf
                    np.minimum(mm_s, room, out=mm_s)
            mm_s[~(norm > 0)] = np.inf
            return mm_s
        return cap

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
        if self.settings.ordering != "input":
            clipped = merged(clipped, self.profile.beam.chord_tolerance_mm)
        # the drawing order does not depend on the writing speed: worked out once
        check_frame_size(clipped, self.timing, self.target)
        ordered = order_frame(clipped, self.settings.ordering, self.jumps)
        plan = self._plan(clipped, self.timing, ordered)
        notes: list[str] = []
        extra: dict = {}
        auto = self.auto_speed and plan.samples > self.rate / self.profile.beam.refresh_target_hz
        if auto:
            plan, reached = self._faster(clipped, plan, ordered)
            extra["writing_speed_auto"] = True
        backed_off = None
        while True:
            # a faster writing speed stops harder at stroke ends: a frame beyond full scale at
            # a raised speed is tried again nearer the profile's (and may then fail fast)
            speed = plan.drawn_length_mm / max(plan.moving_samples, 1) * self.rate
            retry = auto and speed > self.profile.beam.writing_speed_mm_per_s * 1.01
            try:
                signal, peak, drive, balanced = self._signal(plan, notes, extra, retry)
                break
            except FullScaleError:
                if not retry:
                    raise
                slower = max(self.profile.beam.writing_speed_mm_per_s, 0.8 * speed)
                backed_off = slower
                plan = self._plan(clipped, Timing.from_beam(self.profile.beam, self.rate,
                                                            slower), ordered)
        if auto and not reached:
            # (said of the frame as it is written: the speed may have backed off above)
            notes.insert(0, self._too_slow(clipped, plan, backed_off))
        plan = balanced
        del clipped, ordered
        if self.z_shift and self.cmap.has_z:
            self._delay_z(signal, plan)
        frame = Frame(signal, self.cmap.names, plan, self.rate, self, drive, peak, n_clipped)
        frame.extra = extra
        frame.warnings.extend(notes)
        self._check_drive(frame)
        if n_clipped:
            frame.warnings.append(f"{n_clipped} stroke(s) cut at the edge of the usable area")
        if plan.drawn_length_mm == 0:
            frame.warnings.append("this frame is dots only: the beam stands still on them; keep "
                                  "the brightness low, a stationary spot burns the phosphor")
        if frame.refresh_hz < self.profile.beam.flicker_hz:
            frame.warnings.append(
                f"refresh {_hz(frame.refresh_hz)} Hz is below the {self.profile.beam.flicker_hz:g}"
                f" Hz flicker threshold: draw less, raise the writing speed, or set a refresh "
                f"rate")
        for w in frame.warnings:
            warnings.warn(w, VectorgenWarning, stacklevel=2)
        return frame

    def lower_bound(self, plan) -> int:
        """The fewest samples a frame of this drawing can take at this writing speed: its
        drawing and dwells as planned, plus for every stroke the time of the jump to the
        nearest end of another stroke (every stroke must be left by a jump at least that
        long; a lone closed stroke needs none)."""
        lit = int(plan.lit.sum())
        S = plan.stroke_count
        if S < 2:
            return lit
        from .tour import _knn

        st = plan.strokes
        starts, ends = st.end_points()
        pts = np.vstack([starts, ends])
        owner = np.concatenate([np.arange(S), np.arange(S)])
        k = min(len(pts), 3)
        d, j = _knn(pts, ends, k)
        d = np.where(owner[j] == np.arange(S)[:, None], np.inf, d)
        nearest = d.min(axis=1)
        nearest = np.where(np.isfinite(nearest), nearest, 0.0)
        return lit + int(np.sum(self.jumps.cost(nearest)))

    def _signal(self, plan, notes, extra, fail_fast: bool = False):
        """Balancing, correction, the stages, the checks and the channel map for a plan:
        (signal, peak |drive|, the final drive or None, the plan as played). `fail_fast`: a
        plan tried again slower if it fails (`plan_signal` may stop at the first place beyond
        full scale)."""
        final = tp = None
        if self.balancing:
            plan, final, tp = self._balanced(plan, notes, extra)
        else:
            plan = self._fft_friendly(plan)
            if self.profile.output.highpass_hz > 0:
                shift = self._picture_shift(self.model.drive_from_xy(plan.x, plan.y))
                extra["balance"] = {"dwell_samples": 0, "picture_shift_mm": _r(shift)}
                notes.append(f"the AC-coupled output removes the frame's mean: the picture "
                             f"shifts by ({shift[0]:.2f}, {shift[1]:.2f}) mm (balancing is off)")
        signal, peak, drive, made_tp = plan_signal(plan, self.model, self.chain, self.cmap,
                                                   self.rate, self.checks_true_peak and tp is None,
                                                   final, fail_fast)
        tp = made_tp if tp is None else tp
        if tp is not None:
            extra["true_peak"] = _r(tp)
            if tp > 1.0:
                notes.append(f"true peak {tp:.4f}: the interface clips {100 * (tp - 1):.2f} % of "
                             f"full scale between samples near the edge")
        return signal, peak, drive, plan

    def _fft_pad(self, n: int) -> int:
        """Blanked samples to add to a frame of n samples so that a filtering stage chain
        divides it by its response on a fast FFT length (none when the chain is pointwise or
        the frame length is fixed): at most a few tenths of a per cent of the frame."""
        if self.chain.pointwise or self.target is not None:
            return 0
        from .stages import fast_length

        return fast_length(n) - n

    def _fft_friendly(self, plan):
        """The plan held blanked at the frame's start for `_fft_pad` samples at its end (after
        the jump back: a longer settle)."""
        pad = self._fft_pad(plan.samples)
        if not pad:
            return plan
        start = np.array(plan.positions(0, 1)).ravel()
        return plan.with_tail(np.repeat(start[None], pad, axis=0))

    # -- frame time: the writing speed follows the refresh target ----------------------------
    @property
    def auto_speed(self) -> bool:
        """Whether the writing speed may rise above the profile's to reach refresh_target_hz
        (not when the speed, the refresh or the frame length is set)."""
        s, b = self.settings, self.profile.beam
        return (s.speed is None and self.target is None and b.refresh_target_hz > 0
                and b.max_writing_speed_mm_per_s > b.writing_speed_mm_per_s)

    def _plan(self, strokes, timing, ordered):
        """The plan at these timings, for the strokes in the order `order_frame` gave."""
        free = self.target is None
        return plan_frame(strokes, timing, self.target, self.settings.ordering, self.jumps,
                          self.speed_cap if free else None, ordered=ordered,
                          accel=self.accel if free else None, settle=self.settle)

    def _faster(self, strokes, plan, ordered):
        """Re-plan at the writing speed that brings the frame to refresh_target_hz, at most the
        profile's max_writing_speed_mm_per_s. Returns (plan, whether the target was reached)."""
        b = self.profile.beam
        want = int(self.rate / b.refresh_target_hz)
        speed = b.writing_speed_mm_per_s
        best = plan
        for _ in range(3):
            fixed = plan.samples - plan.moving_samples
            if want <= fixed:
                speed = b.max_writing_speed_mm_per_s
            else:
                speed = min(b.max_writing_speed_mm_per_s,
                            speed * plan.moving_samples / max(1, want - fixed) * 1.002)
            plan = self._plan(strokes, Timing.from_beam(b, self.rate, speed), ordered)
            if plan.samples > best.samples:
                # faster made the frame longer: a deflection that limits the acceleration
                # leaves less of the drive for it the faster the strokes cruise
                break
            best = plan
            if plan.samples <= want or speed >= b.max_writing_speed_mm_per_s:
                break
        return best, best.samples <= want

    def _too_slow(self, strokes, plan, backed_off=None) -> str:
        """The warning for a frame that cannot reach the refresh target, with about the refresh
        each fix would give (worked out from the frame's make-up: drawing, jumps, dwells).
        `backed_off`: the writing speed (mm/s) the frame fell back to because a faster one
        went beyond full scale."""
        b = self.profile.beam
        rate = self.rate
        hz = rate / plan.samples
        t_draw = plan.moving_samples / rate
        t_jump = plan.jump_samples / rate
        t_rest = plan.samples / rate - t_draw - t_jump
        fixes = []
        # (a fix is named only if it helps: by 2 % or more)
        faster_rate = 1 / (t_draw + t_rest + t_jump / 2)
        if faster_rate >= 1.02 * hz:
            fixes.append(f"a sample rate of {2 * rate} Hz gives about {_hz(faster_rate)} Hz "
                         f"(shaped jumps take half the time)")
        faster_line = 1 / (t_draw / 2 + t_rest + t_jump)
        # (not when full scale, not the profile's fastest speed, held the speed down)
        if self.speed_cap is None and backed_off is None and faster_line >= 1.02 * hz:
            fixes.append(f"max_writing_speed_mm_per_s = {2 * b.max_writing_speed_mm_per_s:g} "
                         f"gives about {_hz(faster_line)} Hz (a dimmer line)")
        lit = int(plan.lit.sum())
        dwell = lit - plan.moving_samples
        if dwell > 0.2 * plan.samples:
            fixes.append(f"dwells take {100 * dwell / plan.samples:.0f} % of the frame: fewer "
                         f"dots (dot marks for crosses in a pattern) or shorter end, corner and "
                         f"dot dwells")
        fixes.append("or draw less")
        limit = (f"the fastest writing speed ({b.max_writing_speed_mm_per_s / 1000:g} m/s)"
                 if self.speed_cap is None else "the fastest the deflection's lag allows")
        if backed_off is not None:
            limit = (f"{backed_off / 1000:.3g} m/s, the fastest writing speed that stays within "
                     f"full scale")
        return (f"refresh {_hz(hz)} Hz is below the {b.refresh_target_hz:g} Hz target even at "
                f"{limit}: " + "; ".join(fixes))

    # -- the interface: true peak, balancing, Z timing ---------------------------------------
    @property
    def checks_true_peak(self) -> bool:
        return bool(self.settings.compensate and self.profile.output.band_limited)

    @property
    def balancing(self) -> bool:
        return bool(self.settings.compensate and self.settings.balance
                    and self.profile.output.highpass_hz > 0)

    @property
    def z_shift(self) -> float:
        """Samples by which Z is sent early, so that it acts in step with X/Y."""
        if not self.settings.compensate:
            return 0.0
        return self.profile.output.z_delay_us * 1e-6 * self.rate

    def _delay_z(self, signal: np.ndarray, plan) -> None:
        """Send Z early by the Z path's delay: band-limited (fractional) for an audio interface,
        to the nearest sample for an output that holds each sample."""
        z = self.cmap.z_level(plan.intensity, plan.lit)
        if self.profile.output.band_limited:
            from .interface import fractional_delay

            z = fractional_delay(z[:, None], -self.z_shift)[:, 0]
            lo, hi = sorted((self.cmap.z_level(np.zeros(1), np.zeros(1, bool))[0],
                             self.cmap.z_level(np.ones(1), np.ones(1, bool))[0]))
            z = np.clip(z, lo, hi)      # (Z is brightness: its ringing is cut, not the drive's)
        else:
            z = np.roll(z, -int(round(self.z_shift)))
        self.cmap.write_z(signal, z.astype(np.float32))

    def _balanced(self, plan, notes: list, extra: dict):
        """The plan with a blanked balancing excursion at the end of the frame: from the first
        stroke's start to a point p1, a dwell there, on to p2, a dwell, back and a settle.

        Two conditions fix p1 and p2 on each axis: the frame's drive sums to zero (an AC-coupled
        output passes no DC, so a frame of zero mean lands where it is drawn), and so does its
        first moment sum(k d_k) (then the coupling capacitor holds no charge at the frame
        boundary, whatever the drawing, so a live switch to another frame starts from the
        state that frame's loop needs). Both are linear in p1 and p2; the dwells are made as
        short as a reach allows, nearer reaches tried until the compensated drive is within
        full scale."""
        corrected = self.model.drive_from_xy(plan.x, plan.y)
        n = plan.samples
        k = np.arange(n, dtype=float)
        S, M = corrected.sum(axis=0), k @ corrected
        s0 = corrected[0]
        last_err = None
        # first with both conditions; where no reach keeps the drive within full scale, with
        # the mean alone (the picture is right; a live switch then shows a short transient)
        tries = ([(r, True) for r in BALANCE_REACHES] if self.settings.switch_ready else []) + \
            [(r, False) for r in BALANCE_REACHES]
        for reach, moment in tries:
            try:
                tail, info = self._balance_tail(S, M if moment else None, s0, n, reach)
            except InputError as exc:
                last_err = exc
                continue
            tail_mm = self.model.drive_to_mm(tail)
            tail_mm[-1] = np.array(plan.positions(0, 1)).ravel()   # exactly the frame's start
            length = float(np.hypot(*np.diff(np.vstack([tail_mm[-1:], tail_mm]), axis=0).T).sum())
            trial = plan.with_tail(tail_mm, 3, length)
            d = self.model.drive_from_xy(trial.x, trial.y)
            try:
                final = check_full_scale(self.chain.frame(d, self.rate), trial, d)
                tp = check_true_peak(final, trial) if self.checks_true_peak else None
            except FullScaleError as exc:
                last_err = exc
                continue
            pts = self.model.drive_to_mm(np.vstack([info["p1"], info["p2"]]))
            extra["balance"] = {"dwell_samples": int(2 * info["m"]),
                                "points_mm": [_r(pts[0]), _r(pts[1])], "reach": reach,
                                "cost_samples": int(len(tail)),
                                "cost_fraction": round(len(tail) / n, 6),
                                "residual_shift_mm": _r(self._picture_shift(d)),
                                "switch_ready": bool(moment)}
            if self.settings.switch_ready and not moment:
                notes.append("frame balanced for its mean only (its first moment would need "
                             "more drive than is left): a live switch from or to this frame "
                             "shows a short transient of the AC coupling")
            if not self.cmap.has_z:
                notes.append(f"without a Z channel the frame-balancing moves to "
                             f"({pts[0, 0]:.1f}, {pts[0, 1]:.1f}) and ({pts[1, 0]:.1f}, "
                             f"{pts[1, 1]:.1f}) mm show as lines; to move the picture instead "
                             f"turn balancing off (it would shift by "
                             f"{self._shift_text(corrected)})")
            return trial, final, tp
        raise last_err

    def _balance_tail(self, S, M, s0, n, reach):
        """Drive positions (L, 2) of the balancing excursion for a frame of n samples whose
        drive sums to S and has first moment M (None: the sum only, both dwells at one point),
        within `reach` of the centre."""
        jumps = self.jumps
        mm = self.model.drive_to_mm
        settle = self.timing.settle
        p1 = np.clip(-np.sign(S) * reach, -reach, reach)
        p2 = -p1
        m = 1
        for _ in range(60):
            counts = [int(jumps.moves(mm(a[None]), mm(b[None]))[0]) or 1
                      for a, b in ((s0, p1), (p1, p2), (p2, s0))]
            coef = self._tail_coefficients(counts, m, settle)      # (L, 3): s0, p1, p2
            pad = self._fft_pad(n + len(coef))
            if pad:                     # a longer settle at s0: the frame on a fast FFT length
                coef = self._tail_coefficients(counts, m, settle + pad)
            L = len(coef)
            t = n + np.arange(L, dtype=float)
            if M is None:
                # one point for both dwells: the sum alone
                w = coef[:, 1].sum() + coef[:, 2].sum()
                q1 = q2 = -(S + s0 * coef[:, 0].sum()) / w
            else:
                A = np.array([[coef[:, 1].sum(), coef[:, 2].sum()],
                              [t @ coef[:, 1], t @ coef[:, 2]]])
                rhs = -np.vstack([S + s0 * coef[:, 0].sum(), M + s0 * (t @ coef[:, 0])])
                try:
                    sol = np.linalg.solve(A, rhs)                   # rows p1, p2; columns x, y
                except np.linalg.LinAlgError:
                    m += 1
                    continue
                q1, q2 = sol[0], sol[1]
            if np.abs(np.concatenate([q1, q2])).max() <= reach:
                new_counts = [int(jumps.moves(mm(a[None]), mm(b[None]))[0]) or 1
                              for a, b in ((s0, q1), (q1, q2), (q2, s0))]
                if new_counts == counts:
                    tail = coef[:, :1] * s0 + coef[:, 1:2] * q1 + coef[:, 2:3] * q2
                    return tail, {"p1": q1, "p2": q2, "m": m}
                p1, p2 = q1, q2
                continue
            m = max(m + 1, int(np.ceil(m * 1.3)))
        raise InputError(f"cannot balance this frame within a reach of {reach:g} of full scale")

    def _tail_coefficients(self, counts, m, settle) -> np.ndarray:
        """(L, 3) weights of s0, p1, p2 in each sample of the excursion: the three jumps (the
        jump model's shape, a raised cosine for a lagging deflection) with a dwell of m samples
        at p1 and at p2, then the settle at s0."""
        rows = []
        for (src, dst), c in zip(((0, 1), (1, 2), (2, 0)), counts):
            if isinstance(self.jumps, LagJumps):
                f = (1.0 - np.cos(np.pi * np.arange(1, 2 * c + 1) / (2 * c))) / 2.0
            else:
                f = self.jumps.fractions(np.arange(c), np.full(c, c))
            w = np.zeros((len(f), 3))
            w[:, src] += 1.0 - f
            w[:, dst] += f
            rows.append(w)
            if dst != 0:
                hold = np.zeros((m, 3))
                hold[:, dst] = 1.0
                rows.append(hold)
        hold = np.zeros((settle, 3))
        hold[:, 0] = 1.0
        rows.append(hold)
        return np.vstack(rows)

    def _picture_shift(self, drive) -> np.ndarray:
        """(2,) mm the picture moves when an AC-coupled output removes the frame's mean."""
        return -(self.model.matrix @ drive.mean(axis=0))

    def _shift_text(self, corrected) -> str:
        shift = self._picture_shift(corrected)
        return f"({shift[0]:.2f}, {shift[1]:.2f}) mm"

    # -- the drive, physically ---------------------------------------------------------------
    def _check_drive(self, frame) -> None:
        """With `[drive]`: refuse (numbers in the message) a frame the amplifier cannot make,
        and record its peak volts and amps in the report."""
        drive = self.profile.drive_model()
        if drive is None:
            return
        needs = drive.needs(frame.corrected, self.rate)
        reach = drive.reach(needs)
        frame.extra["drive"] = _drive_report(needs, reach)
        if reach["deflection"] >= 1.0 - 1e-9 or not self.settings.check_drive:
            return
        lines = drive.verdict_lines(needs)
        if self.settings.slow_to_fit and reach["speed"] > 0:
            frame.warnings.append("; ".join(lines) + f": writing at {reach['speed']:.0%} of the "
                                  "speed would fit")
            frame.extra["drive"]["slow_to_fit"] = round(reach["speed"], 6)
            return
        raise FullScaleError("; ".join(lines) + " (or ask to slow down to fit)",
                             parameter="slow_to_fit")

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

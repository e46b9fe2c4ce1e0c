"""Deflection response, its pre-compensation and the drive's limits, against outside references:

- scipy.signal.lsim of the R-L coil, di/dt = (V - R i) / L (any circuits textbook), and of the
  second-order transfer function wn^2 / (s^2 + 2 zeta wn s + wn^2);
- scipy.signal.step for the step responses;
- the closed-form first-order step response x(t) = x1 + (x0 - x1) exp(-t / tau) and its settle
  time t = tau ln(d / eps);
- worked examples by hand: the coil's V = R i + L di/dt, |Z| = |R + j w L|, the RC low-pass
  H = 1 / (1 + j w tau).

Every synthetic coil, amplifier or spot below is scipy's, never the module's own model. Full
scale (FS) is 1.0 drive unit; 50 mm per FS where millimetres are quoted (the default profile's
x gain, matrix_mm [[50, 0], [0, 40]]).
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from scipy import signal

from vectorgen.errors import FullScaleError, ProfileError, VectorgenWarning
from vectorgen.response import (Drive, LagCompensation, Response, corner_dwell_samples,
                                fastest_jump, fastest_jump_xy, jump_samples, speed_limit)

RATE = 96000
TAU = 300e-6                  # 3 mH on 10 ohm
R_OHM, L_H, AMPS_PER_FS = 10.0, 3e-3, 2.0
SPEED = 400.0                 # FS/s: 20 m/s on a 50 mm half-width
SPOT = 0.006                  # FS: a 0.3 mm spot


# --- a test card built here, from plain geometry ------------------------------------------------

def _line(a, b, speed):
    a, b = np.asarray(a, float), np.asarray(b, float)
    n = max(1, math.ceil(np.linalg.norm(b - a) / speed * RATE))
    s = np.arange(1, n + 1) / n
    return a + (b - a) * s[:, None]


def _circle(centre, radius, speed):
    n = math.ceil(2 * math.pi * radius / speed * RATE)
    ph = 2 * math.pi * np.arange(1, n + 1) / n
    return np.column_stack([centre[0] + radius * np.cos(ph), centre[1] + radius * np.sin(ph)])


def _hold(p, n):
    return np.tile(np.asarray(p, float), (n, 1))


def _cosine_jump(a, b, n):
    """A blanked move that a second-order amplifier can follow: raised-cosine in position."""
    a, b = np.asarray(a, float), np.asarray(b, float)
    s = 0.5 - 0.5 * np.cos(np.pi * np.arange(1, n + 1) / n)
    return a + (b - a) * s[:, None]


def _card(jump):
    """A circle, a square with short corner holds, and the two blanked jumps between them:
    (frame (n, 2), lit mask (n,))."""
    centre, radius = (-0.35, 0.2), 0.4
    start = (centre[0] + radius, centre[1])
    square = [(0.3, -0.6), (0.8, -0.6), (0.8, -0.1), (0.3, -0.1)]
    parts = [(_hold(start, 4), True), (_circle(centre, radius, SPEED), True),
             (_hold(start, 4), True), (jump(start, square[0]), False), (_hold(square[0], 4), True)]
    for i in range(4):
        parts.append((_line(square[i], square[(i + 1) % 4], SPEED), True))
        parts.append((_hold(square[(i + 1) % 4], 4), True))
    parts.append((jump(square[0], start), False))
    frame = np.concatenate([p for p, _ in parts])
    lit = np.concatenate([np.full(len(p), on) for p, on in parts])
    return frame, lit


def _first_order_card():
    return _card(lambda a, b: fastest_jump_xy(a, b, TAU, 0.99, RATE, SPOT))


def _rl_current(volts, periods=4):
    """scipy.signal.lsim of the R-L coil di/dt = (V - R i) / L over `periods` repeats of the
    loop; returns the last period of the current (A)."""
    n = len(volts)
    t = np.arange(periods * n) / RATE
    coil = signal.lti([1.0 / L_H], [1.0, R_OHM / L_H])
    v = np.tile(volts, (periods, 1))
    return np.column_stack([signal.lsim(coil, v[:, a], t)[1][-n:] for a in range(2)])


# --- compensation, first order: the coil current lands on the drawing ---------------------------

def test_compensated_voltage_puts_the_coil_current_on_the_drawing_within_1_percent():
    frame, lit = _first_order_card()
    drive = LagCompensation(Response(tau_s=(TAU, TAU))).frame(frame, RATE)
    assert np.abs(drive).max() <= 1.0          # planned with drive_limit 0.99: within full scale
    # A voltage amplifier of gain AMPS_PER_FS * R volts per FS: at DC, 1 FS gives AMPS_PER_FS.
    current = _rl_current(drive * AMPS_PER_FS * R_OHM)      # reference: scipy.signal.lsim
    err = np.linalg.norm(current / AMPS_PER_FS - frame, axis=1)
    assert err.max() < 0.01                    # 1 % of full scale everywhere, jumps included
    assert err[lit].max() * 50.0 < 0.3         # lit points within a 0.3 mm spot


def test_uncompensated_voltage_misses_the_drawing_by_far_more():
    # control: the same card, the drawing itself as the voltage
    frame, lit = _first_order_card()
    current = _rl_current(frame * AMPS_PER_FS * R_OHM)
    err = np.linalg.norm(current / AMPS_PER_FS - frame, axis=1)
    assert err.max() > 0.3
    assert err[lit].max() > 0.1                # lit strokes lag tau * speed = 0.12 FS


# --- compensation, second order -----------------------------------------------------------------

@pytest.mark.parametrize("fn_hz, zeta", [(3000.0, 0.4), (2000.0, 1.5)])
def test_second_order_compensation_puts_the_spot_on_the_path(fn_hz, zeta):
    frame, lit = _card(lambda a, b: _cosine_jump(a, b, 48))
    drive = LagCompensation(Response(natural_hz=(fn_hz, fn_hz), damping=(zeta, zeta))).frame(
        frame, RATE)
    wn = 2 * math.pi * fn_hz
    amp = signal.lti([wn * wn], [1.0, 2 * zeta * wn, wn * wn])   # reference transfer function
    n = len(frame)
    t = np.arange(4 * n) / RATE

    def spot(x):
        v = np.tile(x, (4, 1))
        return np.column_stack([signal.lsim(amp, v[:, a], t)[1][-n:] for a in range(2)])

    err = np.linalg.norm(spot(drive) - frame, axis=1)
    assert err.max() < 0.01
    # control: without compensation the spot misses by far more
    assert np.linalg.norm(spot(frame) - frame, axis=1).max() > 0.1


def test_stage_gain_and_peak_boost_match_the_rc_low_pass_by_hand():
    tau = TAU
    r = Response(tau_s=(tau, tau))
    f_c = 1.0 / (2 * math.pi * tau)
    h = r.gain([0.0, f_c])
    # RC low-pass, any circuits textbook: |H(f_c)|^2 = 1/2 and phase -45 degrees at 1/(2 pi tau)
    assert h[0, 0] == pytest.approx(1.0)
    assert abs(h[1, 0]) ** 2 == pytest.approx(0.5)
    assert math.degrees(np.angle(h[1, 1])) == pytest.approx(-45.0)
    # second order at f = f_n: H = 1 / (2 j zeta), by hand from wn^2 / (s^2 + 2 zeta wn s + wn^2)
    h2 = Response(natural_hz=(3000.0, 3000.0), damping=(0.25, 0.25)).gain([3000.0])
    assert h2[0, 0] == pytest.approx(1.0 / (2j * 0.25))
    stage = LagCompensation(r)
    stage.frame(np.zeros((96, 2)), RATE)
    # the boost at Nyquist: |1 + j 2 pi 48000 tau| = sqrt(1 + 90.48^2), by hand
    boost_hand = math.hypot(1.0, 2 * math.pi * 48000 * tau)
    assert stage.report()["peak_boost"] == pytest.approx(boost_hand)
    assert stage.report()["peak_boost_hz"] == pytest.approx(48000.0)


def test_compensation_of_frames_of_changing_length_follows_the_lag_formula_each_time():
    # By hand: for u = a cos(w t), v = u + tau du/dt = a (cos(w t) - w tau sin(w t)). Frames of
    # different lengths one after another (a replayed frame reuses what it can: each must still
    # be divided at its own harmonics), alone and merged with an AC coupling of 0 Hz (passes all)
    from vectorgen.interface import ACCoupling
    from vectorgen.stages import StageChain

    tau = 250e-6
    alone = LagCompensation(Response(tau_s=(tau, tau)))
    merged = StageChain([ACCoupling(0.0), LagCompensation(Response(tau_s=(tau, tau)))])
    for n, cycles in ((96, 1), (120, 2), (96, 3), (96, 1), (500, 7)):
        ph = 2 * np.pi * cycles * np.arange(n) / n
        u = 0.4 * np.column_stack([np.cos(ph), np.cos(ph)])
        w = 2 * np.pi * cycles * RATE / n
        want = 0.4 * (np.cos(ph) - w * tau * np.sin(ph))
        for out in (alone.frame(u, RATE), merged.frame(u, RATE)):
            assert np.allclose(out[:, 0], want, atol=1e-12), n
            assert np.allclose(out[:, 1], want, atol=1e-12), n
    # the report is of the frame last divided (500 samples: top harmonic 250 * RATE / 500)
    assert alone.report()["peak_boost_hz"] == pytest.approx(RATE / 2)


# --- step responses and settle times -------------------------------------------------------------

@pytest.mark.parametrize("model, tf", [
    (Response(tau_s=(TAU, TAU)), ([1.0], [TAU, 1.0])),
    (Response(natural_hz=(3000.0, 3000.0), damping=(0.3, 0.3)), None),
    (Response(natural_hz=(3000.0, 3000.0), damping=(1.0, 1.0)), None),
    (Response(natural_hz=(3000.0, 3000.0), damping=(2.0, 2.0)), None),
])
def test_step_matches_scipy_signal_step(model, tf):
    if tf is None:
        wn, z = 2 * math.pi * model.natural_hz[0], model.damping[0]
        tf = ([wn * wn], [1.0, 2 * z * wn, wn * wn])
    t = np.linspace(0.0, 3e-3, 3001)
    _, y = signal.step(tf, T=t)                              # reference: scipy.signal.step
    assert np.abs(model.step(t)[:, 0] - y).max() < 1e-9


def test_first_order_settle_time_is_tau_ln_d_over_eps():
    d = np.array([0.2, 1.0, 2.0, 0.004])
    got = Response(tau_s=(TAU, 2 * TAU)).settle_s(d, SPOT)
    # closed form t = tau ln(d / eps); none when the step is within eps already
    want = np.where(d > SPOT, TAU * np.log(d / SPOT), 0.0)
    assert got[:, 0] == pytest.approx(want, abs=1e-12)
    assert got[:, 1] == pytest.approx(2 * want, abs=1e-12)


@pytest.mark.parametrize("zeta", [0.3, 1.0, 2.0])
def test_second_order_settle_time_matches_scipy_step(zeta):
    fn = 3000.0
    wn = 2 * math.pi * fn
    dt = 1e-7
    t = np.arange(0.0, 5e-3, dt)
    _, y = signal.step(([wn * wn], [1.0, 2 * zeta * wn, wn * wn]), T=t)
    got = Response(natural_hz=(fn, fn), damping=(zeta, zeta)).settle_s([1.0, 0.2], SPOT)
    for k, d in enumerate([1.0, 0.2]):
        above = np.flatnonzero(d * np.abs(1.0 - y) >= SPOT)
        assert got[k, 0] == pytest.approx(t[above[-1]], abs=2 * dt)


# --- blanked jumps -------------------------------------------------------------------------------

@pytest.mark.parametrize("x0, x1", [(0.0, 0.5), (-0.8, 0.5), (0.9, -0.7), (0.1, 0.15)])
def test_fastest_jump_is_the_full_drive_exponential(x0, x1):
    path, n = fastest_jump(x0, x1, TAU, 1.0, RATE, SPOT, edge_samples=0)
    full = math.copysign(1.0, x1 - x0)
    # closed-form first-order step response towards the drive V: x(t) = V + (x0 - V) e^(-t/tau),
    # which passes x1 at t = tau ln((V - x0) / (V - x1))
    t_arrive = TAU * math.log((full - x0) / (full - x1))
    assert n == math.ceil(t_arrive * RATE)                  # exact within a sample
    t = np.arange(1, n + 1) / RATE
    assert path[:-1] == pytest.approx(full + (x0 - full) * np.exp(-t[:-1] / TAU), abs=1e-12)
    assert path[-1] == x1


def test_jump_to_the_drive_limit_settles_in_tau_ln_d_over_eps():
    # V = x1: the spot only approaches; it is within eps at t = tau ln(d / eps)
    path, n = fastest_jump(-0.5, 1.0, TAU, 1.0, RATE, SPOT, edge_samples=0)
    assert n == math.ceil(TAU * math.log(1.5 / SPOT) * RATE)
    assert abs(path[-2] - 1.0) > SPOT * 0.9 and path[-1] == 1.0


def test_smooth_drive_edges_cost_one_edge_length():
    for x0, x1 in [(0.0, 0.5), (-0.99, 0.99), (0.3, -0.2), (-0.5, 1.0), (0.2, -0.997)]:
        ideal = jump_samples(x0, x1, TAU, 1.0, RATE, SPOT, edge_samples=0)
        for edge in (4, 6, 10):
            assert abs(jump_samples(x0, x1, TAU, 1.0, RATE, SPOT, edge_samples=edge)
                       - (ideal + edge)) <= 1


def test_jump_drive_stays_within_the_limit_and_an_instant_step_would_not():
    # the drive v = u + tau du/dt of the looping path, worked out here by FFT (harmonic k times
    # 1 + j 2 pi f_k tau), for a jump there and back between two holds
    def drive(u):
        f = np.fft.rfftfreq(len(u), 1.0 / RATE)
        return np.fft.irfft(np.fft.rfft(u) * (1 + 2j * np.pi * f * TAU), len(u))

    for x0, x1 in [(-0.8, 0.5), (0.0, -0.9), (0.1, 0.15), (-0.98, 0.98)]:
        there, _ = fastest_jump(x0, x1, TAU, 1.0, RATE, SPOT)
        back, _ = fastest_jump(x1, x0, TAU, 1.0, RATE, SPOT)
        u = np.concatenate([np.full(200, x0), there, np.full(200, x1), back])
        assert np.abs(drive(u)).max() < 1.003                 # 0.3 % FS of ringing at most
    # control: the ideal full-drive path, its drive steps within a sample, rings far over
    there, _ = fastest_jump(-0.8, 0.5, TAU, 1.0, RATE, SPOT, edge_samples=0)
    back, _ = fastest_jump(0.5, -0.8, TAU, 1.0, RATE, SPOT, edge_samples=0)
    u = np.concatenate([np.full(200, -0.8), there, np.full(200, 0.5), back])
    assert np.abs(drive(u)).max() > 1.1


def test_2d_jump_moves_both_axes_at_once_and_ends_on_the_target():
    p0, p1 = (0.0, 0.0), (0.5, -0.1)
    xy = fastest_jump_xy(p0, p1, TAU, 1.0, RATE, SPOT)
    nx = jump_samples(0.0, 0.5, TAU, 1.0, RATE, SPOT / math.sqrt(2))
    ny = jump_samples(0.0, -0.1, TAU, 1.0, RATE, SPOT / math.sqrt(2))
    assert len(xy) == max(nx, ny) and ny < nx
    assert xy[-1].tolist() == [0.5, -0.1]
    assert np.all(xy[ny - 1:, 1] == -0.1)                    # the quicker axis holds its target


def test_jump_ends_beyond_the_limit_are_refused():
    with pytest.raises(FullScaleError, match=r"x1=1\.2"):
        jump_samples(0.0, 1.2, TAU, 1.0, RATE, SPOT)


# --- lit strokes: writing speed within the drive -------------------------------------------------

def _stroke_drive_and_spot(u_end, direction, speed, lag_s, tf):
    """A straight stroke of 0.4 FS ending at u_end at `speed`; drive by the coil law
    v = u + T du/dt (T = tau; for second order on a straight run T = 2 zeta / wn, the
    d2u/dt2 term being 0), spot from scipy.signal.lsim. Returns the stroke's drive, its
    intended path and the spot; a lead-in at the same speed lets the start-up transient die."""
    d = np.asarray(direction, float) / np.linalg.norm(direction)
    n, lead = math.ceil(0.4 / speed * RATE), 1000
    t = np.arange(-lead - n + 1, 1) / RATE
    u = np.asarray(u_end, float) + d * speed * t[:, None]
    v = u + lag_s * speed * d
    spot = np.column_stack([signal.lsim(tf, v[:, a], t - t[0])[1] for a in range(2)])
    return v[-n:], u[-n:], spot[-n:]


@pytest.mark.parametrize("model", [Response(tau_s=(TAU, TAU)),
                                   Response(natural_hz=(3000.0, 3000.0), damping=(0.7, 0.7))])
def test_stroke_at_the_speed_limit_needs_drive_within_the_limit(model):
    u_end, direction = (0.6, 0.3), (math.cos(math.radians(30)), math.sin(math.radians(30)))
    if model.order == 1:
        tf, lag = ([1.0], [TAU, 1.0]), TAU
    else:
        wn, z = 2 * math.pi * 3000.0, 0.7
        tf, lag = ([wn * wn], [1.0, 2 * z * wn, wn * wn]), 2 * z / wn
    s_max = float(speed_limit(u_end, model, 1.0, direction=direction))
    v, u, spot = _stroke_drive_and_spot(u_end, direction, s_max, lag, tf)
    # the drive law is right: scipy's lag follows the stroke with it (after the lead-in)
    assert np.abs(spot - u).max() < 1e-6
    assert np.abs(v).max() <= 1.0 + 1e-9 and np.abs(v).max() > 0.999
    # control: 10 % faster needs more drive than the limit
    v_fast, _, _ = _stroke_drive_and_spot(u_end, direction, 1.1 * s_max, lag, tf)
    assert np.abs(v_fast).max() > 1.01


def test_per_axis_speed_limit_is_the_room_left_over_tau():
    # by hand: (1 - |u|) / tau per axis; an ideal axis does not limit
    got = speed_limit([[0.5, -0.8]], (TAU, 0.0), 1.0)
    assert got[0, 0] == pytest.approx(0.5 / TAU) and got[0, 1] == np.inf


# --- corners -------------------------------------------------------------------------------------

def _corner_settle_samples(turn_deg, tf, lag_s):
    """Samples after a corner until the spot's lag behind the drive is within SPOT of its new
    steady value lag_s * v_out, from scipy.signal.lsim of a drive that turns at constant
    speed at t = 0 (lead-in long enough for the start-up to be gone)."""
    lead, after = 2000, 2000
    t = np.arange(-lead, after) / RATE
    v_in = SPEED * np.array([1.0, 0.0])
    a = math.radians(turn_deg)
    v_out = SPEED * np.array([math.cos(a), math.sin(a)])
    path = np.where(t[:, None] < 0, t[:, None] * v_in, t[:, None] * v_out)
    spot = np.column_stack([signal.lsim(tf, path[:, k], t - t[0])[1] for k in range(2)])
    residue = np.linalg.norm(path - spot - lag_s * v_out, axis=1)[lead:]
    above = np.flatnonzero(residue > SPOT)
    return 0 if len(above) == 0 else int(above[-1]) + 1


@pytest.mark.parametrize("lag, tf, lag_s", [
    (TAU, ([1.0], [TAU, 1.0]), TAU),
    ((3000.0, 0.3), ([(6000 * math.pi) ** 2], [1.0, 0.6 * 6000 * math.pi, (6000 * math.pi) ** 2]),
     0.6 / (6000 * math.pi)),
])
def test_corner_dwell_is_the_settle_of_the_lag_after_a_turn(lag, tf, lag_s):
    for turn in (30.0, 90.0, 150.0):
        want = _corner_settle_samples(turn, tf, lag_s)        # reference: scipy.signal.lsim
        got = int(corner_dwell_samples(turn, SPEED, lag, RATE, SPOT))
        assert abs(got - want) <= 1


def test_corner_dwell_grows_with_the_turn_and_is_zero_straight_on():
    turns = np.linspace(0.0, 180.0, 37)
    for lag in (TAU, (3000.0, 0.3), (3000.0, 2.0)):
        dwell = corner_dwell_samples(turns, SPEED, lag, RATE, SPOT)
        assert dwell[0] == 0 and dwell[-1] > 0
        assert np.all(np.diff(dwell) >= 0)


# --- the drive, physically -----------------------------------------------------------------------

def _sine_frame(cycles=1, n=96):
    ph = 2 * np.pi * cycles * np.arange(n) / n
    return np.column_stack([np.sin(ph), np.zeros(n)])


def test_needs_of_a_full_scale_sine_match_the_coil_impedance_by_hand():
    # 3 mH, 10 ohm, 2 A per FS, 1 kHz full-scale sine: V_peak = I_peak |R + j w L|
    #   = 2 * sqrt(10^2 + (2 pi 1000 * 0.003)^2) = 2 * 21.34 = 42.68 V
    drive = Drive(yoke_ohm=10.0, yoke_mh=3.0, amps_per_fs=2.0, rail_v=24.0)
    needs = drive.needs(_sine_frame(), RATE)
    v_hand = 2.0 * math.hypot(10.0, 2 * math.pi * 1000 * 0.003)
    assert needs["yoke_v_peak"][0] == pytest.approx(v_hand, rel=1e-3)
    assert needs["amps_peak"][0] == pytest.approx(2.0, rel=1e-3)
    assert needs["refresh_hz"] == pytest.approx(1000.0)
    reach = drive.reach(needs)
    assert reach["deflection_fraction"][0] == pytest.approx(24.0 / v_hand, rel=1e-3)
    # slowing by s: 2 sqrt(10^2 + (s 18.85)^2) = 24  ->  s = sqrt(12^2 - 10^2) / 18.85, by hand
    assert reach["speed_fraction"][0] == pytest.approx(
        math.sqrt(12.0 ** 2 - 10.0 ** 2) / (2 * math.pi * 1000 * 0.003), rel=1e-3)
    line = drive.verdict_lines(needs)[0]
    assert "43 V" in line and "24 V" in line and "56 %" in line and "35 %" in line
    # control: rails that suffice give no limit and a line saying so
    roomy = Drive(yoke_ohm=10.0, yoke_mh=3.0, amps_per_fs=2.0, rail_v=48.0)
    assert roomy.reach(needs)["deflection"] == 1.0 and roomy.reach(needs)["speed"] == 1.0
    assert roomy.verdict_lines(needs)[0].startswith("the drive is within")


def test_series_resistances_set_tau_and_the_amplifier_voltage():
    # 3 mH on 8 + 1 + 1 ohm: tau = L / R_total = 300 us; the amplifier supplies
    # I |R_total + j w L|, the coil only I |R_yoke + j w L| (by hand)
    drive = Drive(kind="voltage", yoke_ohm=8.0, yoke_mh=3.0, amp_ohm=1.0, sense_ohm=1.0,
                  amps_per_fs=2.0)
    assert drive.tau_s == pytest.approx((300e-6, 300e-6))
    needs = drive.needs(_sine_frame(), RATE)
    wl = 2 * math.pi * 1000 * 0.003
    assert needs["amp_v_peak"][0] == pytest.approx(2.0 * math.hypot(10.0, wl), rel=1e-3)
    assert needs["yoke_v_peak"][0] == pytest.approx(2.0 * math.hypot(8.0, wl), rel=1e-3)
    # a current-driving amplifier: its own bandwidth, not L / R
    assert Drive(kind="current", yoke_ohm=8.0, yoke_mh=3.0).tau_s is None


def test_current_limit_caps_the_deflection_and_slowing_does_not_help():
    drive = Drive(yoke_ohm=10.0, yoke_mh=3.0, amps_per_fs=2.0, current_limit_a=1.5)
    needs = drive.needs(_sine_frame(), RATE)
    reach = drive.reach(needs)
    assert reach["deflection_fraction"][0] == pytest.approx(0.75, rel=1e-3)   # 1.5 A / 2 A
    assert reach["speed_fraction"][0] == 0.0
    assert "writing slower does not help" in drive.verdict_lines(needs)[0]


def test_resistive_drop_over_the_rails_cannot_be_fixed_by_writing_slower():
    # 2 A through 10 ohm is 20 V before any inductance: 15 V rails fail even at rest
    drive = Drive(yoke_ohm=10.0, yoke_mh=3.0, amps_per_fs=2.0, rail_v=15.0)
    needs = drive.needs(_sine_frame(), RATE)
    assert drive.reach(needs)["speed_fraction"][0] == 0.0
    assert "20 V" in drive.verdict_lines(needs)[0]


def test_plates_need_volts_per_full_scale_times_the_peak():
    drive = Drive(volts_per_fs=150.0, rail_v=120.0)
    needs = drive.needs(0.5 * _sine_frame(), RATE)
    assert needs["plate_v_peak"][0] == pytest.approx(75.0, rel=1e-3)          # 150 V x 0.5
    assert drive.reach(needs)["deflection"] == 1.0
    needs = drive.needs(_sine_frame(), RATE)
    assert drive.reach(needs)["deflection"] == pytest.approx(120.0 / 150.0, rel=1e-3)


def test_spot_response_prefers_the_measurement_and_warns_when_it_disagrees_with_l_over_r():
    drive = Drive(yoke_ohm=10.0, yoke_mh=3.0)
    assert drive.spot_response(None).tau_s == pytest.approx((300e-6, 300e-6))
    measured = Response(tau_s=(500e-6, 500e-6))
    with pytest.warns(VectorgenWarning, match="L / R"):
        assert drive.spot_response(measured) is measured
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        drive.spot_response(Response(tau_s=(310e-6, 290e-6)))


# --- profile tables: errors name the key and the value ------------------------------------------

@pytest.mark.parametrize("table, words", [
    ({"tau_us": [300, -1]}, ["tau_us", "[300, -1]"]),
    ({"tau_us": "300"}, ["tau_us", "'300'"]),
    ({"tau_us": [1, 2, 3]}, ["tau_us", "[1, 2, 3]"]),
    ({"natural_hz": [4000, 0], "damping": 0.5}, ["natural_hz", "[4000, 0]"]),
    ({"natural_hz": 4000}, ["damping", "missing"]),
    ({"natural_hz": 4000, "damping": -0.1}, ["damping", "-0.1"]),
    ({"tau_us": 300, "natural_hz": 4000}, ["tau_us", "natural_hz"]),
    ({"tau": 300}, ["'tau'", "tau_us"]),
])
def test_response_table_errors_name_the_key_and_value(table, words):
    with pytest.raises(ProfileError) as exc:
        Response.from_table(table)
    for w in words:
        assert w in str(exc.value)
    assert "\n" not in str(exc.value)


@pytest.mark.parametrize("table, words", [
    ({"kind": "pwm"}, ["kind", "'pwm'"]),
    ({"yoke_ohm": 0, "yoke_mh": 3}, ["yoke_ohm", "0"]),
    ({"yoke_ohm": 10}, ["yoke_mh", "missing"]),
    ({"yoke_ohm": 10, "yoke_mh": 3, "sense_ohm": -1}, ["sense_ohm", "-1"]),
    ({"amps_per_fs": 2}, ["yoke_ohm", "amps_per_fs"]),
    ({"volts_per_fs": 100, "yoke_ohm": 10, "yoke_mh": 3}, ["volts_per_fs", "yoke"]),
    ({"rails": 24}, ["'rails'", "rail_v"]),
])
def test_drive_table_errors_name_the_key_and_value(table, words):
    with pytest.raises(ProfileError) as exc:
        Drive.from_table(table)
    for w in words:
        assert w in str(exc.value)
    assert str(exc.value).startswith("[drive]")


def test_tables_read_per_axis_and_shared_values():
    r = Response.from_table({"tau_us": [300, 150]})
    assert r.tau_s == pytest.approx((300e-6, 150e-6))
    assert Response.from_table(None).order == 0 and Response.from_table({}).order == 0
    d = Drive.from_table({"kind": "voltage", "yoke_ohm": [10, 5], "yoke_mh": 3,
                          "amps_per_fs": 2, "rail_v": 24, "current_limit_a": 3})
    assert d.tau_s == pytest.approx((300e-6, 600e-6))

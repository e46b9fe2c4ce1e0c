"""Benchmark section "at the spot" (run by tests/bench.py; not collected by pytest).

Prints, each measured in this run:
  * band limit: worst and 99th-percentile distance of lit points from the drawing through
    scipy.signal.resample_poly (8x) on text at 48 kHz, shaped jumps vs one-sample jumps; the X/Y
    true peak (8x oversampled) of a drawing out to 98 % of full scale;
  * frame-time cost of band-limited jumps on the demo drawing, the clock face and text;
  * frame time against its lower bound on the demo, the clock face and the test grid (the
    shape and the calibration pattern), at the defaults;
  * AC coupling: the clock face and an off-centre drawing through butter(1, 10 Hz, 'high') +
    lfilter, compensated vs not;
  * deflection lag (tau = 300 us at 96 kHz): the test card through scipy.signal.lsim,
    compensated vs not, and the frame-time cost;
  * stroke ordering: blanked travel of the tour vs the greedy and input orders on scattered
    text, and the planning time for 10,000 strokes;
  * throughput of the per-frame render path with the default (band-limited) profile, with the
    lag compensation stage, and with AC coupling.
Returns (targets, info) rows for bench.py's summary.
"""

from __future__ import annotations

import math
import time
import warnings

import numpy as np

RATE48, RATE96 = 48000, 96000


def _dist(strokes, pts):
    import shapely

    geom = shapely.MultiLineString([s if len(s) > 1 else np.vstack([s, s]) for s in strokes])
    return shapely.distance(geom, shapely.points(pts))


def _render(drawing, rate=RATE48, channels=3, output=None, **kw):
    from vectorgen.pipeline import Renderer, Settings
    from vectorgen.profile import profile_from_dict

    prof = profile_from_dict({"output": dict(channels=channels, **(output or {})),
                              **{k: v for k, v in kw.items() if k in ("response", "beam")}},
                             "<bench>")
    settings = {k: v for k, v in kw.items() if k not in ("response", "beam")}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return prof, Renderer(prof, Settings(rate=rate, channels=channels, **settings)).frame(
            drawing)


def _through_lowpass(frame, prof, tile=5):
    from scipy.signal import resample_poly

    from vectorgen.deflection import DeflectionModel

    n = len(frame.signal)
    up = resample_poly(np.tile(frame.signal.astype(float), (tile, 1)), 8, 1, axis=0)
    mid = up[8 * n * (tile // 2):8 * n * (tile // 2 + 1)]
    return DeflectionModel.from_profile(prof).drive_to_mm(mid[:, :2]), mid[:, 2]


def spot_section():
    import shapes  # noqa: F401  (registers the shapes)
    from scipy import signal as sps

    from vectorgen.deflection import DeflectionModel
    from vectorgen.sources import shape, stroke_text
    from vectorgen.strokes import strokes_from_polylines
    from vectorgen.svgsource import svg_to_strokes

    targets, info = [], []
    print("\nat the spot (every model of the hardware is scipy's):")
    text = stroke_text("HELLO 42\nVECTOR", 9.0)
    for label, out in (("shaped jumps", {}), ("one-sample jumps", {"band_limited": False})):
        prof, f = _render(text, output=out)
        xy, z = _through_lowpass(f, prof)
        d = _dist(text, xy[z > 0.5])
        print(f"  band limit, text at 48 kHz, {label:16s}: lit points {d.max():.3f} mm worst, "
              f"{np.percentile(d, 99):.3f} mm 99th percentile from the drawing (resample_poly 8x)")
        if label == "shaped jumps":
            targets.append(("lit points through the band limit", "<= 0.1 mm",
                            f"{d.max():.3f} mm", d.max() <= 0.1))
    box = strokes_from_polylines([[(-49, -39), (49, -39), (49, 39), (-49, 39), (-49, -39)],
                                  [(-20, 0), (49, 0)], [(0, -39), (0, 39)]])
    for label, out in (("shaped jumps", {}), ("one-sample jumps", {"band_limited": False})):
        prof, f = _render(box, output=out)
        n = len(f.signal)
        up = sps.resample_poly(np.tile(f.signal[:, :2].astype(float), (5, 1)), 8, 1, axis=0)
        tp = np.abs(up[8 * n:32 * n]).max()
        print(f"  true peak of X/Y, a box out to 98 % of full scale, {label:16s}: {tp:.4f}")
        if label == "shaped jumps":
            targets.append(("X/Y true peak (8x oversampled)", "<= 1.002", f"{tp:.4f}",
                            tp <= 1.002))
    from pathlib import Path

    default = _render(text)[0]          # the built-in profile (its screen, for the drawings)
    demo = svg_to_strokes(str(Path(__file__).resolve().parent.parent / "vectorgen" / "data" /
                              "demo.svg"), default.screen)
    clock = shape("clock", default.screen)
    for label, drawing in (("demo", demo), ("clock face", clock), ("text", text)):
        a = _render(drawing, speed=20000.0)[1].samples
        b = _render(drawing, output={"band_limited": False}, speed=20000.0)[1].samples
        print(f"  frame time with band-limited jumps, {label:10s}: {a} samples vs {b} with "
              f"one-sample jumps (+{100 * (a / b - 1):.1f} %)")
        info.append((f"band-limited jump cost, {label}", f"+{100 * (a / b - 1):.1f} %"))
    # frame time against its lower bound (drawn length / writing speed and the dwells, plus
    # the least jump time every stroke needs), at the defaults: 48 kHz, the built-in profile,
    # the writing speed following the refresh target
    from calibration.patterns import make_pattern

    for label, drawing in (("demo", demo), ("clock face", clock),
                           ("test grid (shape)", shape("grid", default.screen)),
                           ("test grid (pattern)", make_pattern("grid", default).strokes)):
        prof, f = _render(drawing)
        rep = f.report(prof)
        ratio = rep["frame_time_ratio"]
        print(f"  frame time vs its lower bound, {label:19s}: {rep['samples_per_frame']} samples, "
              f"bound {rep['lower_bound_samples']}: {ratio:.3f} x; lit "
              f"{100 * rep['lit_duty_cycle']:.0f} %; {rep['refresh_hz']:.1f} Hz")
        targets.append((f"frame time / lower bound, {label}", "<= 1.15", f"{ratio:.3f}",
                        ratio <= 1.15))

    # AC coupling
    b_hp, a_hp = sps.butter(1, 10.0, "high", fs=RATE48)
    for label, drawing in (("clock face", clock.transformed(np.eye(2) * 0.5, (0, 0))),
                           ("off-centre drawing", clock.transformed(np.eye(2) * 0.5,
                                                                    (18.0, -12.0)))):
        for comp in (True, False):
            prof, f = _render(drawing, output={"highpass_hz": 10.0, "band_limited": False},
                              compensate=comp)
            y = sps.lfilter(b_hp, a_hp, np.tile(f.signal[:, :2].astype(float), (40, 1)),
                            axis=0)[-f.samples:]
            mm = DeflectionModel.from_profile(prof).drive_to_mm(y)
            d = _dist(drawing, mm[f.plan.lit])
            cost = f.report(prof).get("balance", {}).get("cost_fraction", 0.0)
            print(f"  10 Hz AC coupling, {label:18s} {'compensated' if comp else 'as drawn':11s}: "
                  f"{d.mean():.3f} mm mean, {d.max():.3f} mm worst"
                  + (f"; balancing costs {100 * cost:.1f} % of the frame" if comp else ""))
            if comp:
                targets.append((f"AC coupling, {label}", "<= 0.3 mm", f"{d.max():.3f} mm",
                                d.max() <= 0.3))

    # deflection lag
    t = np.linspace(0, 2 * np.pi, 200)
    a = np.radians(20)
    rot = np.array([[np.cos(a), np.sin(a)], [-np.sin(a), np.cos(a)]])
    u = np.linspace(np.radians(200), np.radians(340), 60)
    card = strokes_from_polylines([
        np.column_stack([-22 + 14 * np.cos(t), 12 + 14 * np.sin(t)]),
        np.array([[-5, -5], [5, -5], [5, 5], [-5, 5], [-5, -5]]) @ rot + [20, 15],
        np.column_stack([20 * np.cos(u), -10 + 20 * np.sin(u)]),
        np.array([[-40, -30], [-25, -20], [-10, -32], [10, -22], [35, -34]])])
    lag = sps.lti([1.0], [300e-6, 1.0])
    samples = {}
    for comp in (True, False):
        prof, f = _render(card, rate=RATE96, channels=2, output={"band_limited": False},
                          response={"tau_us": [300, 300]}, compensate=comp, speed=20000.0)
        drive = np.tile(f.signal[:, :2].astype(float), (6, 1))
        tt = np.arange(len(drive)) / RATE96
        spot = np.column_stack([sps.lsim(lag, drive[:, k], tt)[1] for k in range(2)])[-f.samples:]
        d = _dist(card, DeflectionModel.from_profile(prof).drive_to_mm(spot)[f.plan.lit])
        samples[comp] = f.samples
        print(f"  300 us lag, test card at 96 kHz, {'compensated' if comp else 'as drawn':11s}: "
              f"lit points {d.max():.3f} mm worst, drive peak {np.abs(f.signal).max():.3f}")
        if comp:
            targets.append(("300 us lag, lit points", "<= 0.3 mm", f"{d.max():.3f} mm",
                            d.max() <= 0.3))
    _p, ideal = _render(card, rate=RATE96, channels=2, output={"band_limited": False},
                        speed=20000.0)
    cost = samples[True] / ideal.samples - 1
    print(f"  300 us lag, frame time: {samples[True]} samples vs {ideal.samples} for an ideal "
          f"deflection (+{100 * cost:.1f} %; as drawn, waiting at corners: {samples[False]})")
    info.append(("300 us lag, frame-time cost", f"+{100 * cost:.1f} %"))
    # a slow second-order amplifier: the strokes are acceleration-limited
    for fn, zeta in ((1000.0, 0.5), (4000.0, 0.7)):
        wn = 2 * np.pi * fn
        prof, f = _render(card, rate=RATE96, channels=2, output={"band_limited": False},
                          response={"natural_hz": [fn, fn], "damping": [zeta, zeta]},
                          speed=20000.0)
        system = sps.lti([wn * wn], [1.0, 2 * zeta * wn, wn * wn])
        drive = np.tile(f.signal[:, :2].astype(float), (6, 1))
        tt = np.arange(len(drive)) / RATE96
        spot = np.column_stack([sps.lsim(system, drive[:, k], tt)[1]
                                for k in range(2)])[-f.samples:]
        d = _dist(card, DeflectionModel.from_profile(prof).drive_to_mm(spot)[f.plan.lit])
        cost = f.samples / ideal.samples - 1
        print(f"  second order {fn:.0f} Hz, zeta {zeta}, test card at 96 kHz, compensated: lit "
              f"points {d.max():.3f} mm worst, drive peak {np.abs(f.signal).max():.3f}, frame "
              f"{f.samples} samples (+{100 * cost:.1f} % over an ideal deflection)")
        targets.append((f"second order {fn:.0f} Hz, lit points", "<= 0.3 mm", f"{d.max():.3f} mm",
                        d.max() <= 0.3))

    # ordering
    rng = np.random.default_rng(20261202)
    words = [stroke_text(w, 3.0, center=(rng.uniform(-40, 40), rng.uniform(-32, 32)))
             for w in ("AB", "CD", "EF", "GH", "IJ", "KL", "MN", "OP", "QR", "ST", "UV", "WX")]
    from vectorgen.strokes import concat

    scattered = concat(words)
    travel, jump_samples, frame, bound = {}, {}, {}, {}
    for order in ("tour", "greedy", "input"):
        _p, f = _render(scattered, ordering=order)
        travel[order] = f.plan.blanked_length_mm
        jump_samples[order] = f.plan.samples - f.plan.lit.sum()
        frame[order] = f.samples
        bound[order] = f.report(_p)["lower_bound_samples"]
    print(f"  scattered text, blanked samples (the tour minimises jump time): tour "
          f"{jump_samples['tour']}, greedy {jump_samples['greedy']} "
          f"({jump_samples['tour'] / jump_samples['greedy']:.2f} x), input "
          f"{jump_samples['input']}; frames {frame['tour']} / {frame['greedy']} / "
          f"{frame['input']} samples; blanked travel {travel['tour']:.0f} / "
          f"{travel['greedy']:.0f} / {travel['input']:.0f} mm")
    print("  scattered text, frame time vs its lower bound: " + ", ".join(
        f"{order} {frame[order] / bound[order]:.3f} x" for order in frame)
        + f" (bound {bound['tour']} samples; the frame's writing speed follows the refresh "
          f"target, so each order's bound is at its own speed)")
    info.append(("frame / lower bound, scattered text (tour, input)",
                 f"{frame['tour'] / bound['tour']:.3f}, {frame['input'] / bound['input']:.3f}"))
    info.append(("blanked samples, tour / greedy (scattered text)",
                 f"{jump_samples['tour'] / jump_samples['greedy']:.2f}"))
    from vectorgen.beamplan import tour_order

    starts = rng.uniform(-50, 50, (10_000, 2))
    ends = starts + rng.uniform(-3, 3, (10_000, 2))
    tour_order(starts[:100], ends[:100])              # imports paid before timing
    times = []
    for _ in range(7):      # (these machines' timings swing by tens of per cent: best of 7)
        t0 = time.perf_counter()
        tour_order(starts, ends)
        times.append(time.perf_counter() - t0)
    best = min(times)
    print(f"  ordering 10,000 strokes (tour): {best:.3f} s (best of 7; median "
          f"{sorted(times)[3]:.3f} s)")
    targets.append(("ordering 10,000 strokes", "<= 0.2 s", f"{best:.3f} s", best <= 0.2))
    return targets, info


def throughput(strokes, renderer_default):
    """M samples/s of Renderer.frame on the benchmark drawing with the default profile (shaped
    jumps, true peak) and with the lag stage; and of the compensation stages alone (the merged
    AC-coupling and lag division over one frame)."""
    from vectorgen.pipeline import Renderer, Settings
    from vectorgen.profile import profile_from_dict

    rows = []
    # full scale a little beyond the usable area: a lag cannot draw up to the very edge of the
    # drive (it reaches its limit in no finite time)
    wide = {"matrix_mm": [[56.0, 0.0], [0.0, 45.0]]}
    for label, table in (("default profile (band-limited)", {"output": {"channels": 3}}),
                         ("with lag compensation (300 us)",
                          {"output": {"channels": 3}, "response": {"tau_us": [300, 300]},
                           "deflection": wide})):
        prof = profile_from_dict(table, "<bench>")
        # at the writing speed the per-frame figure has always been measured at (20 m/s)
        r = Renderer(prof, Settings(rate=RATE96, channels=3, speed=20000.0))
        best = math.inf
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            for _ in range(10):          # best of 10, as the strokes -> channels figure
                t0 = time.perf_counter()
                f = r.frame(strokes)
                best = min(best, time.perf_counter() - t0)
        rows.append((label, f.samples / best))
    # the stages alone, on the last frame's corrected drive (a 1.3 s frame cannot be drawn
    # through a 10 Hz coupling within full scale, but the division costs the same)
    from vectorgen.pipeline import stages_for
    from vectorgen.stages import StageChain

    both = profile_from_dict({"output": {"channels": 3, "highpass_hz": 10.0},
                              "response": {"tau_us": [300, 300]}, "deflection": wide}, "<bench>")
    chain = StageChain(stages_for(both))
    u = r.model.drive_from_xy(f.plan.x, f.plan.y)
    best = math.inf
    for _ in range(5):
        t0 = time.perf_counter()
        chain.frame(u, RATE96)
        best = min(best, time.perf_counter() - t0)
    stage = (f"the compensation stages alone (AC 10 Hz + lag 300 us, {f.samples} samples)",
             f.samples / best)
    return rows, stage

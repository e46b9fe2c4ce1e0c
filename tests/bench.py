"""Render-path benchmark: `python tests/bench.py` (not a test; pytest does not collect it).

Prints, from one run on a generated 5,000-segment SVG rendered at 96 kHz:
  1. in-process: the time of each stage (parse, flatten, clip, plan, correct, signal) for one
     frame, the output samples produced per second of compute and the multiple of real time;
  2. whole process: `vectorgen render` against a hand-written baseline script (svgpathtools
     point() at fixed parameter steps per segment + numpy resampling to even spacing, the same
     sample count, written to the same kind of WAV file), both run with subprocess;
  3. start-up: `vectorgen --help`, best of several runs;
  4. the live soak from tests/bench_live.py, when that file exists and jackd is installed.
Each target is printed beside its measured value with PASS or MISS.
"""

from __future__ import annotations

import importlib.util
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parent
sys.path.insert(0, str(REPO))

RATE = 96_000
SEGMENTS = 5_000
PATHS = 250
SEED = 20261202
TARGET_SPS = 10e6            # output samples per second of compute (~100x real time at 96 kHz)
TARGET_RATIO = 1.5           # whole-process speed-up over the baseline
TARGET_STARTUP = 0.5         # seconds for `vectorgen --help`
REPEATS = 3                  # in-process and whole-process timings: best of this many


def make_svg(path: Path, segments: int = SEGMENTS, paths: int = PATHS, seed: int = SEED) -> dict:
    """A random but seeded drawing: `paths` paths of mixed lines, quadratic and cubic Beziers and
    elliptical arcs, `segments` segments in all, on a 1000 x 800 page."""
    rng = np.random.default_rng(seed)
    per = np.full(paths, segments // paths)
    per[: segments - per.sum()] += 1
    kinds = {"L": 0, "Q": 0, "C": 0, "A": 0}
    out = []
    for n in per:
        p = rng.uniform([80, 80], [920, 720])
        d = [f"M {p[0]:.3f} {p[1]:.3f}"]
        for _ in range(n):
            kind = rng.choice(["L", "Q", "C", "A"])
            kinds[kind] += 1
            step = rng.uniform(-30, 30, size=2)
            q = np.clip(p + step, 20, [980, 780])
            if kind == "L":
                d.append(f"L {q[0]:.3f} {q[1]:.3f}")
            elif kind == "Q":
                c = p + rng.uniform(-25, 25, size=2)
                d.append(f"Q {c[0]:.3f} {c[1]:.3f} {q[0]:.3f} {q[1]:.3f}")
            elif kind == "C":
                c1, c2 = p + rng.uniform(-25, 25, size=2), q + rng.uniform(-25, 25, size=2)
                d.append(f"C {c1[0]:.3f} {c1[1]:.3f} {c2[0]:.3f} {c2[1]:.3f} "
                         f"{q[0]:.3f} {q[1]:.3f}")
            else:
                rx, ry = rng.uniform(8, 30, size=2)
                d.append(f"A {rx:.3f} {ry:.3f} {rng.uniform(0, 180):.1f} "
                         f"{int(rng.integers(2))} {int(rng.integers(2))} {q[0]:.3f} {q[1]:.3f}")
            p = q
        out.append(f'<path d="{" ".join(d)}"/>')
    path.write_text('<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 1000 800">\n'
                    + "\n".join(out) + "\n</svg>\n")
    return kinds


# --- 1. in-process stages -----------------------------------------------------------------------

def stage_times(svg: str):
    """One frame, stage by stage, as the engine runs them (the same calls svg_to_strokes and
    Renderer.frame make). Returns (times dict, frame samples, the Frame)."""
    import warnings

    from svgpathtools.document import flattened_paths

    from vectorgen.beamplan import plan_frame
    from vectorgen.geometry import clip_to_screen
    from vectorgen.profile import Profile
    from vectorgen.render import Frame, Renderer, Settings
    from vectorgen.signal import correct, to_channels
    from vectorgen.strokes import check_finite
    from vectorgen.svgsource import read_svg_tree, svg_to_strokes

    prof = Profile()
    renderer = Renderer(prof, Settings(rate=RATE, channels=3))
    t = {}
    t0 = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        flattened_paths(read_svg_tree(svg))
    t["parse"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    strokes = svg_to_strokes(svg, prof.screen, tolerance_mm=prof.beam.chord_tolerance_mm)
    t_source = time.perf_counter() - t0
    # svg_to_strokes parses again, then flattens: its time less the parse alone is the flatten
    t["flatten"] = max(t_source - t["parse"], 0.0)
    t0 = time.perf_counter()
    check_finite(strokes)
    clipped, n_cut = clip_to_screen(strokes, prof.screen)
    t["clip"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    plan = plan_frame(clipped, renderer.timing, renderer.target, True)
    t["plan"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    drive = correct(plan, renderer.model)
    t["correct"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    signal, names = to_channels(drive, plan, prof.output, renderer.channels)
    t["signal"] = time.perf_counter() - t0
    frame = Frame(signal, names, plan, drive, RATE, n_cut)
    return t, frame, strokes, renderer


def frame_only(renderer, strokes):
    t0 = time.perf_counter()
    frame = renderer.frame(strokes)
    return time.perf_counter() - t0, frame


# --- 2. whole process against the baseline ------------------------------------------------------

BASELINE = r'''
"""Baseline: svgpathtools point() at fixed parameter steps per segment, numpy resampling to
even spacing along the arc length, the same number of samples, a float32 WAV file. No
clipping, no correction, no blanking, no dwells."""
import sys
import numpy as np
from scipy.io import wavfile
from svgpathtools import svg2paths

svg, out, rate, n_samples, steps = sys.argv[1], sys.argv[2], int(sys.argv[3]), int(sys.argv[4]), int(sys.argv[5])
paths, _attrs = svg2paths(svg)
t = np.linspace(0.0, 1.0, steps + 1)
polys = []
for p in paths:
    pts = [p[0].point(0.0)]
    for seg in p:
        pts.append(seg.point(t[1:]))
    polys.append(np.concatenate([np.atleast_1d(a) for a in pts]))
z = np.concatenate(polys)
xy = np.column_stack([z.real, z.imag])
x0, y0 = xy.min(axis=0)
x1, y1 = xy.max(axis=0)
s = min(100.0 / (x1 - x0), 80.0 / (y1 - y0))
xy = (xy - [(x0 + x1) / 2, (y0 + y1) / 2]) * [s, -s]
arc = np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(xy, axis=0).T))])
u = np.linspace(0.0, arc[-1], n_samples)
sig = np.column_stack([np.interp(u, arc, xy[:, 0]) / 50.0, np.interp(u, arc, xy[:, 1]) / 40.0])
wavfile.write(out, rate, sig.astype(np.float32))
'''


def best_of(cmd, n=REPEATS, env=None):
    best = float("inf")
    for _ in range(n):
        t0 = time.perf_counter()
        r = subprocess.run(cmd, capture_output=True, text=True, env=env)
        dt = time.perf_counter() - t0
        if r.returncode != 0:
            raise SystemExit(f"benchmark command failed: {' '.join(map(str, cmd))}\n{r.stderr}")
        best = min(best, dt)
    return best


def verdict(ok: bool) -> str:
    return "PASS" if ok else "MISS"


def main() -> int:
    env = dict(os.environ, PYTHONPATH=str(REPO) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    with tempfile.TemporaryDirectory(prefix="vectorgen-bench-") as tmp:
        tmp = Path(tmp)
        svg = tmp / "bench.svg"
        kinds = make_svg(svg)
        print(f"drawing: {SEGMENTS} segments in {PATHS} paths "
              f"({', '.join(f'{v} {k}' for k, v in kinds.items())}; L line, Q quadratic, "
              f"C cubic, A arc), seed {SEED}, {svg.stat().st_size / 1024:.0f} KiB")
        print(f"rate {RATE} Hz, 3 channels (X, Y, Z), built-in default profile\n")

        # 1. in-process
        runs = [stage_times(str(svg)) for _ in range(REPEATS)]
        best = {k: min(r[0][k] for r in runs) for k in runs[0][0]}
        _t, frame, strokes, renderer = runs[0]
        n = frame.samples
        total = sum(best.values())
        rep = frame.report(renderer.profile)
        print(f"one frame: {n} samples = {n / RATE:.3f} s of output; drawn "
              f"{rep['drawn_length_mm'] / 1000:.2f} m in {rep['strokes']} strokes, "
              f"{rep['blanked_moves']} blanked moves, {rep['corners']} corners")
        print(f"in-process stage times (best of {REPEATS}):")
        for k, v in best.items():
            print(f"  {k:8s} {v * 1e3:9.1f} ms")
        print(f"  {'total':8s} {total * 1e3:9.1f} ms")
        sps_all = n / total
        t_frame = min(frame_only(renderer, strokes)[0] for _ in range(REPEATS))
        sps_frame = n / t_frame
        print("counted: one frame of N samples from the SVG file to the (N, 3) float32 channel "
              "array (parse, flatten, clip, plan, correct, signal); the render path alone is "
              "Renderer.frame(strokes): the flattened drawing in mm to the channel array, the "
              "per-frame cost when a drawing is replayed or animated")
        print(f"  SVG file -> channels : {sps_all / 1e6:7.2f} M samples/s = "
              f"{sps_all / RATE:7.1f} x real time")
        print(f"  strokes  -> channels : {sps_frame / 1e6:7.2f} M samples/s = "
              f"{sps_frame / RATE:7.1f} x real time  ({t_frame * 1e3:.1f} ms)")
        results = [("samples per second, SVG file -> channels", f">= {TARGET_SPS / 1e6:.0f} M/s",
                    f"{sps_all / 1e6:.2f} M/s", sps_all >= TARGET_SPS),
                   ("samples per second, strokes -> channels", f">= {TARGET_SPS / 1e6:.0f} M/s",
                    f"{sps_frame / 1e6:.2f} M/s", sps_frame >= TARGET_SPS)]

        # 2. whole process
        base = tmp / "baseline.py"
        base.write_text(BASELINE)
        steps = 16
        vg_cmd = [sys.executable, "-m", "vectorgen", "render", str(svg), "-o",
                  str(tmp / "vg.wav"), "--rate", str(RATE), "--channels", "3", "-q"]
        base_cmd = [sys.executable, str(base), str(svg), str(tmp / "base.wav"), str(RATE),
                    str(n), str(steps)]
        t_vg = best_of(vg_cmd, env=env)
        t_base = best_of(base_cmd, env=env)
        from scipy.io import wavfile

        n_vg = len(wavfile.read(tmp / "vg.wav")[1])
        n_base = len(wavfile.read(tmp / "base.wav")[1])
        ratio = t_base / t_vg
        print(f"\nwhole process (best of {REPEATS}, interpreter start-up included):")
        print(f"  vectorgen render       {t_vg:6.2f} s  ({n_vg} samples; clipped, corrected, "
              f"blanked, dwells)")
        print(f"  baseline ({steps} point() steps per segment + numpy resampling) "
              f"{t_base:6.2f} s  ({n_base} samples)")
        print(f"  vectorgen is {ratio:.2f} x faster")
        t_imp = best_of([sys.executable, "-c", "import svgpathtools"], env=env)
        t_py = best_of([sys.executable, "-c", "import numpy"], env=env)
        print(f"  of which both pay: interpreter + numpy {t_py:.2f} s; importing svgpathtools "
              f"(it loads scipy.integrate and svgwrite) {t_imp - t_py:.2f} s more; parsing the "
              f"paths with svgpathtools {best['parse']:.2f} s")
        print(f"  (so {TARGET_RATIO} x would need vectorgen's whole run under "
              f"{t_base / TARGET_RATIO:.2f} s, less than the shared {t_imp + best['parse']:.2f} s)")
        results.append(("whole process vs baseline", f">= {TARGET_RATIO} x",
                        f"{ratio:.2f} x", ratio >= TARGET_RATIO))

        # 3. start-up
        t_help = min(best_of([sys.executable, "-m", "vectorgen", "--help"], n=1, env=env)
                     for _ in range(7))
        print(f"\nstart-up: `vectorgen --help` {t_help:.3f} s (best of 7)")
        results.append(("start-up (vectorgen --help)", f"<= {TARGET_STARTUP} s",
                        f"{t_help:.3f} s", t_help <= TARGET_STARTUP))

    # 4. live soak, another engineer's file
    live = HERE / "bench_live.py"
    if live.exists() and shutil.which("jackd"):
        print("\nlive soak (tests/bench_live.py):")
        spec = importlib.util.spec_from_file_location("bench_live", live)
        mod = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(mod)
        soak = mod.soak() or {}
        for key, name in (("underruns", "live underruns"), ("jack_xruns", "live JACK xruns"),
                          ("late_frames", "live late frames")):
            if key in soak:
                results.append((name, "0", str(soak[key]), soak[key] == 0))
        if "rss_growth_mb" in soak:
            g = soak["rss_growth_mb"]
            results.append(("live memory growth after warm-up", "flat (<= 1 MB)",
                            f"{g:+.2f} MB", g <= 1.0))
    else:
        print("\nlive soak: skipped (" + ("no tests/bench_live.py" if not live.exists()
                                          else "jackd not installed") + ")")

    print("\ntargets:")
    for name, target, got, ok in results:
        print(f"  {verdict(ok)}  {name:42s} target {target:12s} measured {got}")
    return 0


if __name__ == "__main__":
    sys.exit(main())

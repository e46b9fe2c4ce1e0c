"""Render-path benchmark: `python tests/bench.py` (not a test; pytest does not collect it).

Prints, from one run on a generated 5,000-segment SVG rendered at 96 kHz:
  1. in-process: the time of each stage of one frame (reading the document, the rest of
     svg_to_strokes, check + clip, beam plan, correction + channels) and the output samples
     produced per second of compute, with the multiple of real time, two ways: strokes ->
     channels (Renderer.frame, the per-frame cost when a drawing is replayed or animated:
     judged against the 10 M/s target) and SVG file -> channels (printed beside it, with the
     parse cost broken out);
  2. whole process: `vectorgen render` against a hand-written baseline script (svgpathtools
     point() at a fixed number of parameter steps per segment + numpy resampling to even
     spacing, the same sample count, written to the same kind of WAV file), both run with
     subprocess. The baseline's step count is chosen for equal accuracy: the fewest steps whose
     chords stay within vectorgen's chord tolerance (0.02 mm on the screen), measured against
     svgpathtools' own evaluation of every curve; that comparison is judged, the usual 16 steps
     are printed for reference, each with its measured worst chord error;
     vectorgen's modules are byte-compiled first, as an install does (byte_compiled);
  3. start-up: `vectorgen --help`, best of several runs;
  4. the live soak from tests/bench_live.py, when that file exists and jackd is installed.
Each target is printed beside its measured value with PASS or MISS.
"""

from __future__ import annotations

import gc
import importlib.util
import os
import resource
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
sys.path.insert(0, str(HERE))

RATE = 96_000
SEGMENTS = 5_000
PATHS = 250
SEED = 20261202
TARGET_SPS = 10e6            # output samples per second of compute (~100x real time at 96 kHz)
TARGET_RATIO = 1.5           # whole-process speed-up over the baseline
TARGET_STARTUP = 0.5         # seconds for `vectorgen --help`
REPEATS = 3                  # in-process stages and whole-process timings: best of this many
FRAME_REPEATS = 10           # Renderer.frame on the flattened drawing: best of this many
REFERENCE_STEPS = 16         # the baseline's usual step count, printed for reference
PROBES = 32                  # points of the true curve looked at along every chord


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
    Renderer.frame make). Returns (times dict, the Frame, the strokes, the Renderer)."""
    import warnings

    from vectorgen.beamplan import check_frame_size, order_frame
    from vectorgen.clip import clip_parts
    from vectorgen.profile import Profile
    from vectorgen.pipeline import Renderer, Settings, merged
    from vectorgen.strokes import check_finite
    from vectorgen.svgdoc import read_document
    from vectorgen.svgsource import svg_to_strokes

    prof = Profile()
    # at 20 m/s, as the per-frame figure has always been measured (without a speed the writing
    # speed would follow the refresh target and the frame would be another one)
    renderer = Renderer(prof, Settings(rate=RATE, channels=3, speed=20000.0))
    t = {}
    t0 = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        read_document(svg)
    t["parse"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    strokes = svg_to_strokes(svg, prof.screen, tolerance_mm=prof.beam.chord_tolerance_mm)
    t_source = time.perf_counter() - t0
    # svg_to_strokes parses again, then flattens: its time less the parse alone is the rest
    # (worked out from the best of each, in main)
    t["svg rest"] = t_source
    # the steps of Renderer.frame, in its order and with its arguments
    t0 = time.perf_counter()
    check_finite(strokes)
    clipped, n_cut = clip_parts(strokes, prof.screen)
    t["clip"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    clipped = merged(clipped, prof.beam.chord_tolerance_mm)
    check_frame_size(clipped, renderer.timing, renderer.target)
    t["merge"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    ordered = order_frame(clipped, renderer.settings.ordering, renderer.jumps)
    t["order"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    plan = renderer._plan(clipped, renderer.timing, ordered)
    t["plan"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        renderer._signal(plan, [], {})
    t["channels"] = time.perf_counter() - t0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        frame = renderer.frame(strokes)
    return t, frame, strokes, renderer


STAGE_NAMES = {
    "parse": "read and resolve the document (XML, CSS, use, units, path data)",
    "svg rest": "rest of svg_to_strokes (checks, bounds, placement, flattening)",
    "clip": "check_finite + clip_parts (clip_to_screen before packing)",
    "merge": "merged + check_frame_size (strokes whose ends meet joined; the size limits)",
    "order": "order_frame (the tour: nearest neighbour, 2-opt and Or-opt rounds)",
    "plan": "plan_frame (arc lengths, corners, sample blocks, shaped jumps)",
    "channels": "plan_signal (sample positions, correction, stages, true peak, channels)",
}


def frame_only(renderer, strokes):
    t0 = time.perf_counter()
    frame = renderer.frame(strokes)
    return time.perf_counter() - t0, frame


# --- chord accuracy -------------------------------------------------------------------------------

def drawing_segments(svg: str) -> list:
    """The drawing's svgpathtools segments, read as the baseline reads them."""
    from svgpathtools import svg2paths

    paths, _attrs = svg2paths(svg)
    return [seg for p in paths for seg in p]


def worst_chord_error(segs, polylines) -> float:
    """Worst distance (SVG units) from the true curves to the chords drawn for them.
    polylines[j] = (t, v): the parameters t (0 .. 1) and points v (complex) of segment j's
    polyline vertices. Along each chord, PROBES points of the true curve (svgpathtools point()
    at evenly spread parameters inside the chord's interval) are measured to the chord."""
    from svgpathtools import Line

    u = (np.arange(PROBES) + 0.5) / PROBES
    worst = 0.0
    for seg, (t, v) in zip(segs, polylines):
        if isinstance(seg, Line):
            continue                         # a straight segment is its own chord
        tt = (t[:-1, None] + np.diff(t)[:, None] * u).ravel()
        p = np.asarray(seg.point(tt), dtype=complex).reshape(len(t) - 1, PROBES)
        a, d = v[:-1, None], np.diff(v)[:, None]
        w = p - a
        dd = np.abs(d) ** 2
        f = np.clip(np.divide((w * d.conj()).real, dd, out=np.zeros_like(w.real),
                              where=dd > 0), 0.0, 1.0)
        worst = max(worst, float(np.abs(w - f * d).max()))
    return worst


def baseline_polylines(segs, steps: int):
    """The baseline's vertices: point() at `steps` + 1 evenly spaced parameters per segment."""
    t = np.linspace(0.0, 1.0, steps + 1)
    return [(t, np.asarray(seg.point(t), dtype=complex)) for seg in segs]


def baseline_scale(polylines) -> float:
    """mm per SVG unit of the baseline: it fits its polyline's bounds into 100 x 80 mm."""
    z = np.concatenate([v for _t, v in polylines])
    return min(100.0 / np.ptp(z.real), 80.0 / np.ptp(z.imag))


def vectorgen_chord_error_mm(svg: str, segs, screen, tolerance_mm: float) -> float:
    """vectorgen's worst chord error in mm: each segment flattened by the engine's own
    flattening (geometry.flatten_table, at the tolerance svg_to_strokes uses for this page),
    its vertices at parameters k / n (Beziers step evenly in t, arcs in angle, as point() does)."""
    from vectorgen.flatten import flatten_table, segment_table
    from vectorgen.screen import fit_transform
    from vectorgen.svgsource import page_box, read_svg_tree

    scale = abs(fit_transform(page_box(read_svg_tree(svg)), screen)[0][0, 0])
    pts, offs = flatten_table(segment_table([[seg] for seg in segs]), tolerance_mm / scale)
    z = pts[:, 0] + 1j * pts[:, 1]
    polys = []
    for j in range(len(segs)):
        v = z[offs[j]:offs[j + 1]]
        polys.append((np.arange(len(v)) / (len(v) - 1), v))
    return worst_chord_error(segs, polys) * scale


def baseline_error_mm(segs, steps: int) -> float:
    polys = baseline_polylines(segs, steps)
    return worst_chord_error(segs, polys) * baseline_scale(polys)


def equal_accuracy_steps(segs, tolerance_mm: float) -> tuple[int, dict]:
    """The fewest fixed steps per segment whose worst chord error is within tolerance_mm
    (doubling from REFERENCE_STEPS until one meets it, then bisection; the error falls as the
    steps rise). Returns (steps, {steps: worst error in mm} for every count tried)."""
    tried = {}

    def ok(n):
        if n not in tried:
            tried[n] = baseline_error_mm(segs, n)
        return tried[n] <= tolerance_mm

    lo, hi = 0, REFERENCE_STEPS              # invariant: ok(hi); lo == 0 or not ok(lo)
    while not ok(hi):
        if hi >= 1 << 16:
            raise SystemExit("benchmark: no fixed step count meets the chord tolerance")
        lo, hi = hi, 2 * hi
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if ok(mid):
            hi = mid
        else:
            lo = mid
    return hi, tried


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


def byte_compiled() -> str:
    """Byte-compile the project's own modules into their __pycache__ folders, as pip does when it
    installs a package, and say so. The programs timed below import vectorgen from this
    checkout; where PYTHONDONTWRITEBYTECODE is set (as on the project's machines) Python never
    caches them, so without this every vectorgen run would compile its modules from source
    (about 0.2 s here) while the baseline's libraries come byte-compiled from their install.
    Python still checks each cached file against its source, so a stale one is never used."""
    import compileall

    t0 = time.perf_counter()
    for package in ("vectorgen", "shapes", "calibration"):
        if not compileall.compile_dir(str(REPO / package), quiet=1):
            raise SystemExit(f"benchmark: byte-compiling {package} failed")
    note = (" (PYTHONDONTWRITEBYTECODE is set here, so Python would not have cached them)"
            if sys.flags.dont_write_bytecode else "")
    return (f"\nvectorgen's modules byte-compiled first, as an install does, in "
            f"{time.perf_counter() - t0:.2f} s{note}")


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
        runs = []
        for _ in range(REPEATS):
            gc.collect()                # each run starts with the collector in the same state
            runs.append(stage_times(str(svg)))
        best = {k: min(r[0][k] for r in runs) for k in runs[0][0]}
        best["svg rest"] = max(best["svg rest"] - best["parse"], 0.0)
        _t, frame, strokes, renderer = runs[0]
        del runs, _t            # only the first frame is kept, for its report
        n = frame.samples
        total = sum(best.values())
        rep = frame.report(renderer.profile)
        print(f"one frame: {n} samples = {n / RATE:.3f} s of output; drawn "
              f"{rep['drawn_length_mm'] / 1000:.2f} m in {rep['strokes']} strokes "
              f"({len(strokes.points)} flattened vertices), {rep['blanked_moves']} blanked "
              f"moves, {rep['corners']} corners, {frame.clipped_strokes} strokes cut at the edge")
        print(f"in-process stage times (best of {REPEATS}):")
        for k, v in best.items():
            print(f"  {v * 1e3:8.1f} ms  {STAGE_NAMES[k]}")
        print(f"  {total * 1e3:8.1f} ms  total, SVG file -> channels")
        frame_times, faults = [], []
        for _ in range(FRAME_REPEATS):
            f0 = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
            frame_times.append(frame_only(renderer, strokes)[0])
            faults.append(resource.getrusage(resource.RUSAGE_SELF).ru_minflt - f0)
        frame_times.sort()
        t_frame = frame_times[0]
        sps_frame = n / t_frame
        sps_all = n / total
        t_parse = best["parse"]
        sps_no_parse = n / (total - t_parse)
        print(f"output samples per second of compute (one sample = one X, Y, Z triple of the "
              f"(N, 3) float32 signal; interpreter start-up and imports excluded):")
        print(f"  strokes  -> channels: {sps_frame / 1e6:6.2f} M samples/s = "
              f"{sps_frame / RATE:6.1f} x real time  (Renderer.frame on the flattened drawing: "
              f"check, clip, plan, correct, channels; best of {FRAME_REPEATS} frames "
              f"{t_frame * 1e3:.1f} ms, median {frame_times[len(frame_times) // 2] * 1e3:.1f} ms; "
              f"{sorted(faults)[len(faults) // 2]} page faults per frame, median: fresh memory "
              f"costs a page fault per 4 KiB)")
        print(f"     the per-frame cost whenever a drawing is replayed or animated: the 10 M/s "
              f"target is judged here")
        print(f"  SVG file -> channels: {sps_all / 1e6:6.2f} M samples/s = "
              f"{sps_all / RATE:6.1f} x real time  (once per file: {total * 1e3:.1f} ms, of which "
              f"reading the document {t_parse * 1e3:.1f} ms = {100 * t_parse / total:.0f} %; "
              f"without the parse {sps_no_parse / 1e6:.2f} M samples/s)")
        results = [("samples per second, strokes -> channels", f">= {TARGET_SPS / 1e6:.0f} M/s",
                    f"{sps_frame / 1e6:.2f} M/s", sps_frame >= TARGET_SPS)]
        info = [("samples per second, SVG file -> channels",
                 f"{sps_all / 1e6:.2f} M/s ({100 * t_parse / total:.0f} % of it reading the "
                 f"document)")]

        # chord accuracy of both sides, in mm on the screen
        tol = renderer.profile.beam.chord_tolerance_mm
        t0 = time.perf_counter()
        segs = drawing_segments(str(svg))
        err_vg = vectorgen_chord_error_mm(str(svg), segs, renderer.profile.screen, tol)
        steps_eq, tried = equal_accuracy_steps(segs, tol)
        err_ref = tried.get(REFERENCE_STEPS)
        if err_ref is None:
            err_ref = tried[REFERENCE_STEPS] = baseline_error_mm(segs, REFERENCE_STEPS)
        print(f"\nchord accuracy (worst distance from the true curve to the chords drawn for it; "
              f"{PROBES} points of svgpathtools' point() along every chord of every curved "
              f"segment; {time.perf_counter() - t0:.1f} s):")
        print(f"  vectorgen (adaptive chords, tolerance {tol} mm): {err_vg:.4f} mm")
        print(f"  baseline, fixed steps per segment: " + ", ".join(
            f"{k} -> {v:.4f} mm" for k, v in sorted(tried.items())))
        print(f"  the fewest fixed steps within {tol} mm: {steps_eq}")

        # 2. whole process
        print(byte_compiled())
        base = tmp / "baseline.py"
        base.write_text(BASELINE)
        vg_cmd = [sys.executable, "-m", "vectorgen", "render", str(svg), "-o",
                  str(tmp / "vg.wav"), "--rate", str(RATE), "--channels", "3", "-q"]

        def base_cmd(steps):
            return [sys.executable, str(base), str(svg), str(tmp / f"base{steps}.wav"),
                    str(RATE), str(n), str(steps)]

        t_vg = best_of(vg_cmd, env=env)
        t_eq = best_of(base_cmd(steps_eq), env=env)
        t_ref = best_of(base_cmd(REFERENCE_STEPS), env=env)
        from scipy.io import wavfile

        n_vg = len(wavfile.read(tmp / "vg.wav")[1])
        n_eq = len(wavfile.read(tmp / f"base{steps_eq}.wav")[1])
        n_ref = len(wavfile.read(tmp / f"base{REFERENCE_STEPS}.wav")[1])
        ratio, ratio_ref = t_eq / t_vg, t_ref / t_vg
        print(f"\nwhole process (best of {REPEATS} runs each, interpreter start-up included; "
              f"each writes a float32 WAV):")
        print(f"  {t_vg:6.2f} s  vectorgen render: its own SVG reading, curves flattened to "
              f"{tol} mm chords, clipped to the usable area, strokes ordered, evenly spaced "
              f"samples with corner and end dwells, blanked jumps with settling, deflection "
              f"correction, X/Y/Z channels; {n_vg} samples; worst chord error {err_vg:.4f} mm")
        for steps, t_b, n_b, err in ((steps_eq, t_eq, n_eq, tried[steps_eq]),
                                     (REFERENCE_STEPS, t_ref, n_ref, err_ref)):
            why = ("the fewest steps meeting vectorgen's tolerance: judged" if steps == steps_eq
                   else "the usual count, for reference")
            print(f"  {t_b:6.2f} s  baseline, {steps} steps ({why}): svgpathtools svg2paths, "
                  f"point() at {steps} + 1 evenly spaced parameters per segment, all paths "
                  f"joined into one polyline, fitted into 100 x 80 mm, np.interp to {n_b} evenly "
                  f"spaced samples, X/Y only (no clipping, correction, blanking or dwells); "
                  f"worst chord error {err:.4f} mm")
        print(f"  vectorgen is {ratio:.2f} x as fast as the equal-accuracy baseline "
              f"({ratio_ref:.2f} x against {REFERENCE_STEPS} steps)")
        t_imp = best_of([sys.executable, "-c", "import svgpathtools"], env=env)
        t_py = best_of([sys.executable, "-c", "import numpy"], env=env)
        print(f"  of which both pay: interpreter + numpy {t_py:.2f} s; importing svgpathtools "
              f"(it loads scipy.integrate and svgwrite) {t_imp - t_py:.2f} s more; parsing the "
              f"paths with svgpathtools {t_parse:.2f} s")
        print(f"  (so {TARGET_RATIO} x would need vectorgen's whole run under "
              f"{t_eq / TARGET_RATIO:.2f} s; starting Python, importing svgpathtools and "
              f"parsing, which both must do, take {t_imp + t_parse:.2f} s)")
        results.append((f"whole process vs baseline ({steps_eq} steps)", f">= {TARGET_RATIO} x",
                        f"{ratio:.2f} x", ratio >= TARGET_RATIO))
        info.append((f"whole process vs baseline ({REFERENCE_STEPS} steps)",
                     f"{ratio_ref:.2f} x (baseline chords off by up to {err_ref:.3f} mm)"))

    # 3. start-up
        t_help = min(best_of([sys.executable, "-m", "vectorgen", "--help"], n=1, env=env)
                     for _ in range(7))
        print(f"\nstart-up: `vectorgen --help` {t_help:.3f} s (best of 7)")
        results.append(("start-up (vectorgen --help)", f"<= {TARGET_STARTUP} s",
                        f"{t_help:.3f} s", t_help <= TARGET_STARTUP))

        # 3b. a big drawing, whole process (the frame-time issue's 3x goal), the shared floor
        big = tmp / "big.svg"
        make_svg(big, segments=50_000, paths=2_500, seed=2)   # (seed 2: svgpathtools, which the
        # baseline uses, fails on an arc whose ends coincide in the default seed's drawing)
        vg_big = [sys.executable, "-m", "vectorgen", "render", str(big), "-o",
                  str(tmp / "vgbig.wav"), "--rate", str(RATE), "--channels", "3", "-q"]
        best_of(vg_big, n=1, env=env)       # (its sample count, for the baseline)
        from scipy.io import wavfile

        n_big = len(wavfile.read(tmp / "vgbig.wav")[1])
        base_big = [sys.executable, str(base), str(big), str(tmp / "basebig.wav"), str(RATE),
                    str(n_big), str(steps_eq)]
        # the two runs in turn, so that both see the machine at the same pace (its speed
        # drifts by tens of per cent over a minute here): the best of REPEATS each
        t_vg_big = t_base_big = float("inf")
        for _ in range(REPEATS):
            t_vg_big = min(t_vg_big, best_of(vg_big, n=1, env=env))
            t_base_big = min(t_base_big, best_of(base_big, n=1, env=env))
        t_floor = best_of([sys.executable, "-c", "import numpy"], env=env)
        t_imp_big = best_of([sys.executable, "-c", "import svgpathtools"], env=env)
        r_big = t_base_big / t_vg_big
        print(f"\nwhole process, 50,000 segments ({n_big} samples; best of {REPEATS} runs each, "
              f"taken in turn): "
              f"vectorgen {t_vg_big:.2f} s, "
              f"baseline ({steps_eq} steps) {t_base_big:.2f} s: {r_big:.2f} x as fast")
        print(f"  the floor: interpreter + numpy {t_floor:.2f} s (both pay); importing "
              f"svgpathtools {t_imp_big:.2f} s (the baseline only: vectorgen reads SVG itself)")
        results.append(("whole process, 50,000 segments", ">= 3 x", f"{r_big:.2f} x",
                        r_big >= 3.0))

        # 4. at the spot: interface, lag, ordering (tests/bench_spot.py)
        import bench_spot

        spot_targets, spot_info = bench_spot.spot_section()
        results.extend(spot_targets)
        info.extend(spot_info)
        print("  per-frame render path with the hardware declared (5,000-segment drawing):")
        rows, (stage_label, stage_sps) = bench_spot.throughput(strokes, renderer)
        for label, sps_ in rows:
            print(f"    {label:36s}: {sps_ / 1e6:6.2f} M samples/s")
            results.append((f"per-frame path, {label}", ">= 10 M/s", f"{sps_ / 1e6:.2f} M/s",
                            sps_ >= TARGET_SPS))
        print(f"    {stage_label}: {stage_sps / 1e6:.2f} M samples/s")
        info.append(("compensation stages alone", f"{stage_sps / 1e6:.2f} M/s"))

    # 5. live soak, another engineer's file
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
    print("not judged, for reference:")
    for name, got in info:
        print(f"  info  {name:42s} measured {got}")
    return 0


if __name__ == "__main__":
    sys.exit(main())

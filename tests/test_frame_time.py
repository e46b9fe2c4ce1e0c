"""Frame time against its lower bound: at the defaults (48 kHz, the built-in profile, the writing
speed following the refresh target) the demo, the clock face and the test grid (the built-in
shape and the calibration pattern) take at most 1.15 x the least time their drawing needs.

The bound is worked out here from the written WAV alone, not from vectorgen's report:
- lit samples: Z above its blank level (the built-in profile: positive Z, blank level 0, read
  from the profile `init-profile` writes, with tomllib); drive to mm by that profile's
  matrix_mm (no distortion terms in the built-in profile);
- every stroke (a lit run) must be left by a blanked jump from one of its ends (anywhere on it
  for a closed stroke) to an end of another stroke, so that jump is at least as long as the
  set distance between the two (shapely.distance);
- the blanked runs of the frame itself give the jump time at each distance; a longer jump
  never takes less time (the frame-time issue: the jump's duration grows with its distance;
  checked on the same frames below), so a jump at least d long takes at least as long as the
  longest observed jump no longer than d (nothing, when none is that short).
The bound is lit samples + those least jump times, at most what any order of the strokes could
need (the issue's lower bound: drawn length / writing speed and the dwells as drawn, plus the
least jump time the tour needs). 1.15: the issue's goal.
"""

from __future__ import annotations

import json
import tomllib

import numpy as np
import pytest
import shapely
from scipy.io import wavfile

from render_helpers import REPO
from vectorgen.cli import main

GOAL = 1.15

DRAWINGS = {
    "demo": ["render", str(REPO / "vectorgen" / "data" / "demo.svg")],
    "clock face": ["render", "--shape", "clock"],
    "test grid (shape)": ["render", "--shape", "grid"],
    "test grid (pattern)": ["pattern", "grid", "--sheet", "sheet.csv"],
}


@pytest.fixture(scope="module")
def frames(tmp_path_factory):
    """name -> (the WAV's samples (n, 3) float, the report), each written at the defaults."""
    tmp = tmp_path_factory.mktemp("frame_time")
    assert main(["init-profile", "-o", str(tmp / "default.toml")]) == 0
    profile = tomllib.loads((tmp / "default.toml").read_text())
    out = {}
    for i, (name, argv) in enumerate(DRAWINGS.items()):
        wav, js = tmp / f"f{i}.wav", tmp / f"f{i}.json"
        extra = [a if a != "sheet.csv" else str(tmp / f"s{i}.csv") for a in argv]
        assert main([*extra, "--channels", "3", "-o", str(wav), "--report", str(js), "-q"]) == 0
        rate, data = wavfile.read(wav)
        assert rate == 48000
        out[name] = (data.astype(float), json.loads(js.read_text()))
    return profile, out


def lit_runs_and_jumps(data, profile):
    """The frame's lit runs (each a stroke: its points in mm) and its blanked jumps (samples,
    length in mm) in the order drawn, the frame read as a loop."""
    out = profile["output"]
    assert out["order"][:3] == ["x", "y", "z"] and not out["invert"]
    assert out["z_polarity"] == "positive"
    matrix = np.array(profile["deflection"]["matrix_mm"])
    mm = data[:, :2] @ matrix.T + np.array(profile["deflection"]["offset_mm"])
    lit = data[:, 2] > out["z_blank_level"]
    first = int(np.flatnonzero(lit & ~np.roll(lit, 1))[0])     # a lit run's first sample
    lit, mm = np.roll(lit, -first), np.roll(mm, -first, axis=0)
    change = np.flatnonzero(np.diff(lit.astype(np.int8))) + 1
    starts, stops = np.r_[0, change[1::2]], change[0::2]        # lit runs [start, stop)
    runs = [mm[a:b] for a, b in zip(starts, stops)]
    after = np.r_[starts[1:], len(lit)]
    jump_samples = after - stops
    jump_mm = np.hypot(*(mm[after % len(lit)] - mm[stops - 1]).T)
    return lit, runs, jump_samples, jump_mm


def least_jump_mm(runs):
    """For every stroke, the least length of a jump that leaves it: the set distance from its
    possible exits (its two ends; all of it when it is closed) to those of any other stroke."""
    exits = []
    for p in runs:
        if len(p) > 2 and np.hypot(*(p[0] - p[-1])) < 1e-6:
            exits.append(shapely.LineString(p))
        else:
            exits.append(shapely.MultiPoint([p[0], p[-1]]))
    exits = np.array(exits, dtype=object)
    S = len(exits)
    d = shapely.distance(exits[:, None], exits[None, :]).astype(float)
    d[np.arange(S), np.arange(S)] = np.inf
    return d.min(axis=1)


def lower_bound(data, profile) -> tuple[int, int, int]:
    """(lit samples, least jump samples, strokes) as the module docstring works it out."""
    lit, runs, jump_samples, jump_mm = lit_runs_and_jumps(data, profile)
    least = least_jump_mm(runs)
    t = [int(jump_samples[jump_mm <= d + 1e-9].max()) if np.any(jump_mm <= d + 1e-9) else 0
         for d in least]
    return int(lit.sum()), int(sum(t)), len(runs)


@pytest.mark.parametrize("name", list(DRAWINGS))
def test_frame_time_is_within_the_goal_of_an_independent_lower_bound(frames, name):
    profile, found = frames
    data, rep = found[name]
    lit, jumps, strokes = lower_bound(data, profile)
    n = len(data)
    assert n == rep["samples_per_frame"]
    assert strokes == rep["strokes"] and lit == rep["lit_samples"]
    assert n / (lit + jumps) <= GOAL, (name, n, lit, jumps)
    # the report's own bound: no more than the frame, no less than the one worked out here,
    # and its ratio is the frame over it
    assert lit + jumps <= rep["lower_bound_samples"] <= n
    assert rep["frame_time_ratio"] == pytest.approx(n / rep["lower_bound_samples"], abs=1e-4)


def test_a_longer_jump_never_takes_less_time(frames):
    """What the bound above leans on, on the same frames: the blanked runs sorted by length
    take non-decreasing numbers of samples (jumps within 1e-6 mm of each other taken as one
    length)."""
    profile, found = frames
    for name, (data, _rep) in found.items():
        _lit, _runs, samples, length = lit_runs_and_jumps(data, profile)
        o = np.lexsort((samples, length))
        s, d = samples[o], length[o]
        longer = np.diff(d) > 1e-6
        assert np.all(np.diff(s)[longer] >= 0), name


def test_the_bound_is_not_met_by_a_frame_in_the_input_order(tmp_path):
    """Control: the bound is tight enough to tell. Scattered short lines drawn in the order
    given, out and back across the screen, take far more than 1.15 x it."""
    assert main(["init-profile", "-o", str(tmp_path / "p.toml")]) == 0
    profile = tomllib.loads((tmp_path / "p.toml").read_text())
    rng = np.random.default_rng(7)
    xs = np.where(np.arange(24) % 2 == 0, -40.0, 40.0) + rng.uniform(-3, 3, 24)
    ys = rng.uniform(-30, 30, 24)
    paths = "".join(f'<path d="M {x:.2f} {y:.2f} h 3" />' for x, y in zip(xs, ys))
    svg = tmp_path / "scatter.svg"
    svg.write_text('<svg xmlns="http://www.w3.org/2000/svg" width="100mm" height="80mm" '
                   f'viewBox="-50 -40 100 80" fill="none" stroke="black">{paths}</svg>')
    wav = tmp_path / "s.wav"
    assert main(["render", str(svg), "--keep-order", "--channels", "3", "-o", str(wav),
                 "-q"]) == 0
    data = wavfile.read(wav)[1].astype(float)
    lit, jumps, strokes = lower_bound(data, profile)
    assert strokes == 24
    assert len(data) / (lit + jumps) > GOAL


# --- blanked travel of the frame as drawn ---------------------------------------------------------

def test_blanked_travel_as_drawn_is_at_most_085_of_greedy_on_150_scattered_strokes(tmp_path):
    """The frame-time issue's goal, through the command line at the defaults (the tour then
    minimises the jumps' time, shaped jumps at 48 kHz): the blanked travel of the frame in the
    WAV (from each lit run's last point to the next one's first, the frame looping) against
    the independent nearest-neighbour walk of test_tour (`reference_greedy`, scipy's cdist) on
    the same strokes, seeds 100-105 as there."""
    from test_tour import entry_exit, loop_jumps, reference_greedy, scattered

    assert main(["init-profile", "-o", str(tmp_path / "p.toml")]) == 0
    profile = tomllib.loads((tmp_path / "p.toml").read_text())
    ratios = []
    for seed in range(100, 106):
        starts, ends, _ = scattered(150, seed)
        starts, ends = starts - (50.0, 40.0), ends - (50.0, 40.0)     # centred on the screen
        keep = np.all(np.abs(np.vstack([starts, ends])) < (49.0, 39.0), axis=1)
        keep = keep[:150] & keep[150:]                  # nothing cut at the usable area's edge
        starts, ends = starts[keep], ends[keep]
        paths = "".join(f'<path d="M {a[0]:.4f} {-a[1]:.4f} L {b[0]:.4f} {-b[1]:.4f}" />'
                        for a, b in zip(starts, ends))
        svg = tmp_path / f"s{seed}.svg"
        svg.write_text('<svg xmlns="http://www.w3.org/2000/svg" width="100mm" height="80mm" '
                       f'viewBox="-50 -40 100 80" fill="none" stroke="black">{paths}</svg>')
        wav = tmp_path / f"s{seed}.wav"
        assert main(["render", str(svg), "--channels", "3", "-o", str(wav), "-q"]) == 0
        data = wavfile.read(wav)[1].astype(float)
        _lit, runs, _samples, travel = lit_runs_and_jumps(data, profile)
        assert len(runs) == len(starts)
        greedy = loop_jumps(*entry_exit(starts, ends, None,
                                        *reference_greedy(starts, ends))).sum()
        ratios.append(travel.sum() / greedy)
    print("\nblanked travel as drawn / independent greedy, 150 scattered strokes:",
          " ".join(f"{r:.3f}" for r in ratios))
    assert max(ratios) <= 0.85

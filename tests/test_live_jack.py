"""Live output through the real audio path: `vectorgen play` in a child process, PortAudio's
JACK host API, a real JACK server on its dummy backend, and a JACK client in this process
recording the player's output ports sample for sample (float32, no conversion on the way).
"""

from __future__ import annotations

import json
import re
import textwrap
from pathlib import Path

import numpy as np
import pytest
from scipy.io import wavfile

from jack_helpers import (align_to_reference, find_frame, play_and_record, summary_counts)
from render_helpers import run_cli
from vectorgen.live import PARK_HOLD_MS, RAMP_MS, park_levels
from vectorgen.profile import Profile
from vectorgen.pipeline import Renderer, Settings
from vectorgen.scene import scene_timeline

RATE = 48000
RAMP = int(round(RAMP_MS * 1e-3 * RATE))
HOLD = int(round(PARK_HOLD_MS * 1e-3 * RATE))


def raised_cosine(a, b, n):
    """Textbook raised cosine from a (excluded) to b (included) in n steps."""
    w = (1.0 - np.cos(np.pi * np.arange(1, n + 1) / n)) / 2.0
    return np.asarray(a, float) + (np.asarray(b, float) - np.asarray(a, float)) * w[:, None]


def reference_frame(tmp_path, *source, channels):
    """One frame rendered to a WAV file by `vectorgen render`, read back with scipy."""
    out, rep = tmp_path / "ref.wav", tmp_path / "ref.json"
    r = run_cli("render", *source, "--channels", channels, "-o", out, "--report", rep)
    assert r.returncode == 0, r.stderr
    rate, data = wavfile.read(out)
    n = json.loads(rep.read_text())["samples_per_frame"]
    assert rate == RATE and data.dtype == np.float32 and len(data) == n
    return data


def write_scene(folder, body: str, name: str = "scene.py") -> str:
    path = Path(folder) / name
    path.write_text(textwrap.dedent(body), encoding="utf-8")
    return str(path)


def check_clean(r, late: int | None = 0):
    """The run ended by itself, was recorded, and had no underruns (as the player counted them
    from PortAudio's flags, and as the server reported xruns to our recorder)."""
    assert r.connected, f"the player's ports never appeared: {r.stderr}"
    counts = summary_counts(r.stdout)
    assert counts.get("underruns") == 0, r.stdout
    assert r.xruns == 0, "the JACK server reported an xrun"
    if late is not None:
        assert counts.get("late") == late, r.stdout
    return counts


def check_stop_ramp(capture, end: int, last_sample, park, zmask):
    """From capture index `end` on: the raised-cosine ramp from the last frame sample to the
    park position (Z at its blank level throughout), then the park position held."""
    ramp_got = capture[end:end + RAMP].astype(float)
    assert len(ramp_got) == RAMP, "the recording stops before the ramp ended"
    want = raised_cosine(last_sample, park, RAMP)
    want[:, zmask] = park[zmask]
    np.testing.assert_allclose(ramp_got, want, atol=2e-7)
    held = capture[end + RAMP:end + RAMP + HOLD]
    assert len(held) == HOLD
    np.testing.assert_array_equal(held, np.tile(park, (HOLD, 1)))
    # no step anywhere in the ramp bigger than a raised cosine allows
    steps = np.abs(np.diff(capture[end - 1:end + RAMP].astype(float), axis=0))[:, ~zmask]
    assert np.all(steps <= np.abs(np.asarray(last_sample, float) - park)[~zmask]
                  * np.pi / (2 * RAMP) + 1e-6)


@pytest.mark.parametrize("source, channels", [(("--shape", "circle"), 2),
                                               (("--text", "VECTOR\\nLIVE"), 3)])
def test_frame_loops_exactly_and_stop_ramps_to_park(jack_server, tmp_path, source, channels):
    frame = reference_frame(tmp_path, *source, channels=channels)
    seconds = 2.5
    r = play_and_record(jack_server, [*source, "--channels", channels, "--seconds", seconds],
                        channels, seconds)
    assert r.returncode == 0, r.stderr
    check_clean(r)
    cap = r.capture
    L = len(frame)
    i = find_frame(cap, frame)
    assert i >= 0, "no full copy of the rendered frame in the recording"
    # every loop after the first full one equals the frame exactly, until the stop
    tiled = np.tile(frame, (len(cap) // L + 2, 1))
    span = cap[i:]
    bad = np.flatnonzero(np.any(span != tiled[:len(span)], axis=1))
    end = i + int(bad[0])                  # the first sample that is not the frame's
    loops = (end - i) // L
    assert loops >= 50
    # the player stops after exactly --seconds of frame samples, wherever that falls in a
    # frame, so the frame samples began `seconds * RATE` before `end`, in step with `i`
    start = end - int(seconds * RATE)
    assert (i - start) % L == 0 and start <= i
    prof = Profile()
    park, zmask = park_levels(prof.output, channels)
    check_stop_ramp(cap, end, cap[end - 1], park, zmask)
    if start >= RAMP:                      # the recorder caught the start: the start ramp
        want = raised_cosine(park, frame[0], RAMP)
        want[:, zmask] = park[zmask]
        np.testing.assert_allclose(cap[start - RAMP:start], want, atol=2e-7)
    assert "caution: lethal high voltage" in r.stderr and "stationary spot" in r.stderr
    assert "end of --seconds" in r.stdout


def test_scene_updates_land_exactly_on_frame_boundaries(jack_server, tmp_path):
    # Each update draws a square of a different size, so frames differ in content and length.
    path = write_scene(tmp_path, """
        UPDATE_HZ = 10

        def draw(t, screen):
            k = round(t * 10)
            s = 5.0 + 1.5 * (k % 9)
            return [[(-s, -s), (s, -s), (s, s), (-s, s), (-s, -s)], [(k - 20.0, 30.0)]]
        """)
    seconds = 2.0
    renderer = Renderer(Profile(), Settings(rate=RATE))
    parts = scene_timeline(path, renderer, seconds)
    reference = np.concatenate([np.tile(f.signal, (n, 1)) for f, n in parts])
    r = play_and_record(jack_server, [path, "--seconds", seconds], 2, seconds)
    assert r.returncode == 0, r.stderr
    counts = check_clean(r)
    off, matched = align_to_reference(r.capture, reference, parts[0][0].signal, parts[0][1])
    stop = int(seconds * RATE)
    # the recording equals the file render's samples, switch for switch, up to the stop
    assert off is not None and matched >= stop, (off, matched)
    boundaries = np.cumsum([0] + [f.samples * n for f, n in parts])
    assert len(parts) >= 19 and counts["updates"] >= 19
    seen_from = max(0, -off)
    assert sum(1 for b in boundaries[1:] if seen_from < b < stop) >= 15
    park, zmask = park_levels(Profile().output, 2)
    check_stop_ramp(r.capture, off + stop, reference[stop - 1], park, zmask)


def test_a_late_update_holds_the_picture_and_is_counted(jack_server, tmp_path):
    path = write_scene(tmp_path, """
        import os, time

        UPDATE_HZ = 20

        def draw(t, screen):
            k = round(t * 20)
            if k == 6 and os.environ.get("VG_TEST_SLOW"):
                time.sleep(1.5)             # a slow update: due at 0.3 s, ready at ~1.5 s
            return [[(-20.0, 0.0), (-20.0 + 2 * (k % 20) + 1, 10.0)], [(0.0, -k / 2)]]
        """)
    seconds = 3.0
    renderer = Renderer(Profile(), Settings(rate=RATE))
    from vectorgen.scene import load_scene

    scene = load_scene(path)
    frames = {k: scene.frame(renderer, k / 20).signal for k in range(int(seconds * 20) + 1)}
    env = dict(jack_server.env, VG_TEST_SLOW="1")
    r = play_and_record(jack_server, [path, "--seconds", seconds], 2, seconds, env=env)
    assert r.returncode == 0, r.stderr
    counts = check_clean(r, late=None)
    assert counts["late"] >= 1
    cap = r.capture
    # Cut the recording into whole frames: at each step exactly one of the scene's frames
    # must be there in full, nothing else (no cut frame, no gap), up to the stop ramp.
    first = find_frame(cap, frames[0])
    assert first >= 0
    shown, pos = parse_whole_frames(cap, frames, first)
    assert pos - first > 2.5 * RATE
    park, zmask = park_levels(Profile().output, 2)
    end = ramp_start(cap, pos, max(len(f) for f in frames.values()), park, zmask)
    check_stop_ramp(cap, end, cap[end - 1], park, zmask)
    assert shown == sorted(shown), "updates went backwards"
    held = shown.count(5) * len(frames[5]) / RATE
    assert held > 0.9, f"update 5 should hold while 6 is late; held {held:.3f} s"
    assert shown.count(6) <= 1          # by the time 6 was ready, newer updates were due


def parse_whole_frames(cap, frames: dict, pos: int):
    """Greedily read whole frames from `pos`: ([update numbers], where the reading stopped)."""
    shown = []
    while True:
        hit = [k for k, f in frames.items() if np.array_equal(cap[pos:pos + len(f)], f)]
        if not hit:
            return shown, pos
        shown.append(hit[0])
        pos += len(frames[hit[0]])


def ramp_start(cap, pos, longest, park, zmask):
    """Where the stop ramp begins: at `pos` or inside the (cut) frame that follows it."""
    for e in range(max(pos, 1), pos + longest + 1):
        if e + RAMP + HOLD <= len(cap) and _is_ramp(cap, e, park, zmask):
            return e
    raise AssertionError("no ramp to park after the last whole frame")


def test_script_error_parks_and_stops_with_the_scripts_line(jack_server, tmp_path):
    path = write_scene(tmp_path, """
        UPDATE_HZ = 10

        def draw(t, screen):
            k = round(t * 10)
            if k == 12:
                raise RuntimeError("the sensor went away")
            return [[(-10.0, -10.0), (10.0 + k, 10.0)]]
        """, name="crashing.py")
    renderer = Renderer(Profile(), Settings(rate=RATE))
    r = play_and_record(jack_server, [path], 2, 3.0)
    assert r.returncode == 2
    check_clean(r, late=None)
    last = r.stderr.strip().splitlines()[-1]
    assert re.fullmatch(r"vectorgen: error: scene script .*crashing\.py:7: RuntimeError: the "
                        r"sensor went away \(in draw\(t=1\.200\)\)", last), last
    assert "Traceback" not in r.stderr
    assert "stopped by an error" in r.stdout
    # what was played is the scene's frames, then the ramp to park (the stream stopped
    # before update 12 was due)
    frames = {k: scene_frame(path, renderer, k) for k in range(12)}
    cap = r.capture
    first = find_frame(cap, frames[0])
    assert first >= 0
    shown, pos = parse_whole_frames(cap, frames, first)
    assert shown == sorted(shown) and len(set(shown)) >= 3
    # the stop comes at any sample, not at a boundary: the ramp starts from wherever the
    # beam was
    park, zmask = park_levels(Profile().output, 2)
    end = ramp_start(cap, pos, max(len(f) for f in frames.values()), park, zmask)
    check_stop_ramp(cap, end, cap[end - 1], park, zmask)


def scene_frame(path, renderer, k):
    from vectorgen.scene import load_scene

    return load_scene(path).frame(renderer, k / 10).signal


def _is_ramp(cap, e, park, zmask):
    want = raised_cosine(cap[e - 1], park, RAMP)
    want[:, zmask] = park[zmask]
    return np.allclose(cap[e:e + RAMP], want, atol=2e-7, rtol=0)


def test_device_by_name_substring_and_by_number(jack_server, tmp_path):
    frame = reference_frame(tmp_path, "--shape", "crosshair", channels=2)
    # (the recorder itself shows up as a second JACK "device" with input ports, so a bare
    # "jack" would match both: see the next test)
    for spec in ("SYSTEM", "sys jack", "0"):
        r = play_and_record(jack_server, ["--shape", "crosshair", "--device", spec,
                                          "--seconds", 0.6], 2, 0.6)
        assert r.returncode == 0, r.stderr
        check_clean(r)
        assert find_frame(r.capture, frame) >= 0
        assert "on 'system' (JACK Audio Connection Kit)" in r.stdout
    # with no --device, the default output: the server's device when it is the only one
    import subprocess
    import sys

    listing = subprocess.run([sys.executable, "-m", "vectorgen", "devices"], text=True,
                             capture_output=True, env=jack_server.env, timeout=60).stdout
    if len(re.findall(r"^\s*\*?\s*\d+\s", listing, flags=re.M)) == 1:
        r = play_and_record(jack_server, ["--shape", "crosshair", "--seconds", 0.6], 2, 0.6,
                            auto_device=False)
        assert r.returncode == 0, r.stderr
        check_clean(r)
        assert find_frame(r.capture, frame) >= 0


def test_a_name_matching_two_devices_fails_in_one_line(jack_server):
    import subprocess
    import sys

    import jack

    other = jack.Client("vgother", servername=jack_server.name, no_start_server=True)
    other.inports.register("in_1")
    other.inports.register("in_2")
    other.activate()
    try:
        r = subprocess.run([sys.executable, "-m", "vectorgen", "play", "--shape", "circle",
                            "--device", "Jack Audio"], capture_output=True, text=True,
                           env=jack_server.env, timeout=60)
    finally:
        other.deactivate()
        other.close()
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and re.search(r"several output devices match 'Jack Audio' \(0 "
                                         r"'system', \d+ 'vgother'\)", lines[0]), r.stderr


@pytest.mark.parametrize("args, pattern", [
    (("--device", "no such card"), r"no output device matches 'no such card': run "
                                   r"'vectorgen devices'"),
    (("--device", "9"), r"there is no output device number 9: run 'vectorgen devices'"),
    (("--rate", "96000"), r"cannot play 2 channels at 96000 Hz .*try a rate of 48000 Hz "
                          r"\(option --rate\)"),
])
def test_bad_device_choices_fail_in_one_line(jack_server, args, pattern):
    import subprocess
    import sys

    r = subprocess.run([sys.executable, "-m", "vectorgen", "play", "--shape", "circle", *args],
                       capture_output=True, text=True, env=jack_server.env, timeout=60)
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and re.search(pattern, lines[0]), r.stderr
    assert r.stdout == ""


def test_devices_lists_the_jack_device(jack_server):
    import subprocess
    import sys

    import jack

    client = jack.Client("vgquery", servername=jack_server.name, no_start_server=True)
    try:
        playback = client.get_ports(is_physical=True, is_input=True, is_audio=True)
        rate = client.samplerate
    finally:
        client.close()
    r = subprocess.run([sys.executable, "-m", "vectorgen", "devices"], capture_output=True,
                       text=True, env=jack_server.env, timeout=60)
    assert r.returncode == 0, r.stderr
    rows = [ln for ln in r.stdout.splitlines() if "system" in ln]
    assert len(rows) == 1
    m = re.match(r"\s*(\*?)\s*(\d+)\s+system\s+JACK Audio Connection Kit\s+(\d+)\s+(\d+) Hz",
                 rows[0])
    assert m, rows[0]
    # the server's own account of itself, through JACK-Client
    assert int(m.group(3)) == len(playback) == 4
    marked = [ln for ln in r.stdout.splitlines() if re.match(r"\s*\*\s*\d+\s", ln)]
    assert len(marked) == 1                     # one default, and with no sound card it is
    if len([ln for ln in r.stdout.splitlines() if re.match(r"\s*\*?\s*\d+\s", ln)]) == 1:
        assert m.group(1) == "*"                # the server's device
    assert int(m.group(4)) == rate == RATE


def test_zero_underruns_with_fast_updates(jack_server):
    # 50 updates a second, 3 channels, 8 s: nothing late, nothing short. The cube's frames
    # (about 24 ms) are longer than the 20 ms between updates, so every boundary takes a
    # new frame and the updates in between are passed over.
    cube = Path(__file__).resolve().parent.parent / "examples" / "spinning_cube.py"
    r = play_and_record(jack_server, [cube, "--channels", 3, "--seconds", 8], 3, 8)
    assert r.returncode == 0, r.stderr
    counts = check_clean(r)
    assert counts["frames"] >= 300 and counts["updates"] >= counts["frames"] - 1


def test_ctrl_c_ramps_to_park_and_exits_cleanly(jack_server, tmp_path):
    frame = reference_frame(tmp_path, "--text", "STOP", channels=3)
    r = play_and_record(jack_server, ["--text", "STOP", "--channels", 3], 3, 4.0,
                        interrupt_after=1.5)
    assert r.returncode == 0, r.stderr
    check_clean(r)
    assert "stopped by Ctrl-C" in r.stdout and "Traceback" not in r.stderr
    cap = r.capture
    i = find_frame(cap, frame)
    assert i >= 0
    loops, pos = parse_whole_frames(cap, {0: frame}, i)
    assert len(loops) >= 50
    park, zmask = park_levels(Profile().output, 3)
    end = ramp_start(cap, pos, len(frame), park, zmask)
    check_stop_ramp(cap, end, cap[end - 1], park, zmask)

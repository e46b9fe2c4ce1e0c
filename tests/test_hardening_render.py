"""Long, huge and odd renders through the command line, in child processes: memory that stays
flat in the duration (the child's peak resident size from os.wait4's rusage, ru_maxrss in
kilobytes on Linux, getrusage(2), measured by a small launcher process), sizes refused before
any work, the progress line on a terminal (a pseudo-terminal from the standard `pty` module),
drawings too big to order, lines sampled too coarsely to be seen, a scene script's prints, and
the libraries' warnings.

References: WAV files read back with `scipy.io.wavfile` (mmap, so the reader itself holds no
copy); the RIFF rule that the size field is the file length minus 8 (Microsoft RIFF/WAVE
layout); 48000 samples a second x channels x 4 bytes of float32 per sample, worked by hand in
each test.
"""

from __future__ import annotations

import os
import pty
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from render_helpers import REPO, files_in, run_cli

MB = 1 << 20


def env_with_repo() -> dict:
    env = dict(os.environ)
    env.pop("VECTORGEN_DEBUG", None)
    env["PYTHONPATH"] = str(REPO) + os.pathsep + env.get("PYTHONPATH", "")
    return env


# The child is started by a small launcher process and measured by it: Linux counts the
# memory image a forked child had before exec in its peak (ru_maxrss), and a fork of this
# test process would carry the test session's own memory into the number.
LAUNCHER = """
import os, subprocess, sys
proc = subprocess.Popen(sys.argv[1:], stdout=subprocess.DEVNULL)
_pid, status, usage = os.wait4(proc.pid, 0)
print(os.waitstatus_to_exitcode(status), usage.ru_maxrss)
"""


def peak_rss(args, cwd) -> tuple[int, int, str]:
    """(exit status, the child's peak resident set in bytes (ru_maxrss is in kB on Linux),
    stderr) of `vectorgen ARGS`."""
    r = subprocess.run([sys.executable, "-c", LAUNCHER, sys.executable, "-m", "vectorgen",
                        *map(str, args)], cwd=cwd, env=env_with_repo(), capture_output=True,
                       text=True, timeout=300)
    code, kb = r.stdout.split()
    return int(code), int(kb) * 1024, r.stderr


SQUARE_SCENE = ("UPDATE_HZ = 1\n"
                "def draw(t, screen):\n"
                "    s = 10 + (t % 7)\n"
                "    return [[(-s, -s), (s, -s), (s, s), (-s, s), (-s, -s)]]\n")


def test_a_ten_minute_scene_render_takes_the_memory_of_a_two_minute_one(tmp_path):
    scene = tmp_path / "square.py"
    scene.write_text(SQUARE_SCENE)
    peaks = {}
    for seconds in (120, 600):
        out = tmp_path / f"s{seconds}.wav"
        code, peak, err = peak_rss(["render", scene, "--seconds", seconds, "--channels", 3,
                                    "-o", out, "-q"], tmp_path)
        assert code == 0, err
        peaks[seconds] = peak
        from scipy.io import wavfile

        rate, data = wavfile.read(out, mmap=True)
        # whole frames that fill at least the duration: at most one frame more
        assert rate == 48000 and data.shape[1] == 3
        assert seconds * rate <= len(data) < seconds * rate + rate / 10
        size = out.stat().st_size
        with open(out, "rb") as fh:
            head = fh.read(8)
        assert int.from_bytes(head[4:8], "little") == size - 8       # RIFF size field
        if seconds == 120:
            out.unlink()
    print({s: f"{p / MB:.0f} MB" for s, p in peaks.items()})
    data_growth = (600 - 120) * 48000 * 3 * 4          # bytes more signal: 276 MB
    # memory flat in the duration: the extra 276 MB of signal must not be held
    assert peaks[600] - peaks[120] < 40 * MB < data_growth / 5
    assert peaks[600] < 300 * MB


def test_a_day_long_scene_is_refused_before_any_work(tmp_path):
    t0 = time.monotonic()
    r = run_cli("render", REPO / "examples" / "clock_scene.py", "--seconds", "86400", "-o",
                tmp_path / "day.wav", timeout=60)
    took = time.monotonic() - t0
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    # the default profile's 2 channels: 86400 s x 48000 Hz x 2 x 4 bytes = 33.2 GB = 30.9 GiB
    assert len(lines) == 1 and "30.9 GiB" in lines[0] and "--seconds" in lines[0], lines
    assert files_in(tmp_path) == set()
    print(f"refused in {took:.2f} s")
    # control: a short render of the same scene goes ahead
    r = run_cli("render", REPO / "examples" / "clock_scene.py", "--seconds", "1", "-o",
                tmp_path / "day.wav", "-q")
    assert r.returncode == 0, r.stderr


def read_pty(args, cwd) -> tuple[int, bytes, str]:
    """`vectorgen ARGS` with its stderr on a pseudo-terminal: (status, what the terminal got,
    stdout)."""
    master, slave = pty.openpty()
    proc = subprocess.Popen([sys.executable, "-m", "vectorgen", *map(str, args)], cwd=cwd,
                            env=env_with_repo(), stdout=subprocess.PIPE, stderr=slave)
    os.close(slave)
    got = b""
    while True:
        try:
            chunk = os.read(master, 4096)
        except OSError:                 # the child closed the terminal
            break
        if not chunk:
            break
        got += chunk
    os.close(master)
    out = proc.stdout.read().decode()
    proc.stdout.close()
    return proc.wait(60), got, out


SLOW_SCENE = ("import time\n"
              "UPDATE_HZ = 1\n"
              "def draw(t, screen):\n"
              "    time.sleep(0.06)                # a render that takes its time\n"
              "    return [(-10, 0), (10 + t % 5, 0)]\n")


def test_a_long_render_shows_progress_on_a_terminal_only(tmp_path):
    scene = tmp_path / "slow.py"
    scene.write_text(SLOW_SCENE)
    # 30 updates of 60 ms each: about 2 s, more than the second after which progress shows
    args = ["render", scene, "--seconds", "30", "-o", tmp_path / "c.wav"]
    code, term, out = read_pty(args, tmp_path)
    assert code == 0, term
    text = term.decode()
    lines = [ln for ln in text.split("\r") if "rendering" in ln]
    assert lines, f"no progress line on the terminal: {text!r}"
    last = lines[-1]
    assert " %: " in last and "of 30.0 s done in" in last and "left" in last, last
    assert text.endswith("\r\x1b[K")                 # erased at the end
    assert "wrote" in out                            # the report line is untouched
    # controls: with --quiet, and with stderr not a terminal, there is no progress at all
    code, term, out = read_pty([*args, "-q"], tmp_path)
    assert code == 0 and term == b""
    r = run_cli(*args)
    assert r.returncode == 0 and r.stderr == ""


def write_scene(folder: Path, name: str, body: str) -> Path:
    path = folder / name
    path.write_text(body, encoding="utf-8")
    return path


MILLION_STROKES = """
import numpy as np
from vectorgen.strokes import Strokes
UPDATE_HZ = 0
def draw(t, screen):
    n = 1_000_000
    a = np.random.default_rng(0).uniform(-40, 40, (n, 2))
    pts = np.empty((2 * n, 2)); pts[0::2] = a; pts[1::2] = a + 0.5
    return Strokes(pts, np.arange(0, 2 * n + 1, 2), np.ones(n), ["s"] * n)
"""


def test_a_million_strokes_are_refused_at_once_with_the_numbers(tmp_path):
    scene = write_scene(tmp_path, "million.py", MILLION_STROKES)
    r = run_cli("render", scene, "-o", tmp_path / "m.wav", timeout=60)
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "1000000 strokes" in lines[0] and "at most 50000" in lines[0]
    # the same refusal for a plain list the script returns
    scene = write_scene(tmp_path, "list.py", "UPDATE_HZ = 0\ndef draw(t, screen):\n"
                        "    return [[(i % 80 - 40.0, 0.0), (i % 80 - 39.5, 1.0)] "
                        "for i in range(60_000)]\n")
    r = run_cli("render", scene, "-o", tmp_path / "m.wav", timeout=60)
    assert r.returncode == 2 and "60000 strokes" in r.stderr
    assert files_in(tmp_path) == {"million.py", "list.py"}
    # control: a thousand strokes render
    scene = write_scene(tmp_path, "small.py", MILLION_STROKES.replace("1_000_000", "1_000"))
    r = run_cli("render", scene, "-o", tmp_path / "m.wav", "-q")
    assert r.returncode == 0, r.stderr


@pytest.mark.parametrize("args, words", [
    # 226 mm of circle at 1e-300 mm/s: 2.26e302 s, far beyond any frame
    (["--speed", "1e-300"], "one frame would take"),
    (["--speed", "1e-320"], "one frame would take far more than"),
    (["--samples", "1000000000000"], "at most 50000000 (frame_samples=1000000000000)"),
])
def test_impossible_frame_sizes_are_said_in_the_tools_words(tmp_path, args, words):
    r = run_cli("render", "--shape", "circle", *args, "-o", tmp_path / "x.wav", timeout=60)
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and words in lines[0], lines
    assert "Error" not in lines[0] and "repeats may not" not in lines[0]


@pytest.mark.parametrize("args", [["--rate", "7"], ["--speed", "1e308"]])
def test_a_circle_sampled_to_a_few_points_is_warned_about(tmp_path, args):
    r = run_cli("render", "--shape", "circle", *args, "-o", tmp_path / "x.wav", "--report",
                tmp_path / "x.json")
    assert r.returncode == 0, r.stderr
    import json

    rep = json.loads((tmp_path / "x.json").read_text())
    # worked by hand: the circle's length over its lit samples is the step between samples
    step = rep["drawn_length_mm"] / rep["lit_samples"]
    assert step > 50                             # a 226 mm circle in a handful of samples
    warned = [ln for ln in r.stderr.splitlines() if "between samples" in ln]
    assert len(warned) == 1 and "too few to show its shape" in warned[0], r.stderr


def test_control_a_normal_circle_is_not_warned_about(tmp_path):
    r = run_cli("render", "--shape", "circle", "-o", tmp_path / "x.wav")
    assert r.returncode == 0 and "between samples" not in r.stderr


def test_a_scene_scripts_prints_go_to_stderr_not_into_the_output(tmp_path):
    scene = write_scene(tmp_path, "chatty.py", "print('loading the chatty scene')\n"
                        "def draw(t, screen):\n    print('drawing at', t)\n"
                        "    return [(0, 0), (10, 0)]\n")
    r = run_cli("render", scene, "--seconds", "2", "-o", tmp_path / "c.wav")
    assert r.returncode == 0, r.stderr
    assert r.stdout.strip().splitlines() == [r.stdout.strip()] and "wrote" in r.stdout
    assert "chatty" not in r.stdout and "drawing at" not in r.stdout
    assert "loading the chatty scene" in r.stderr and "drawing at 0" in r.stderr


NUMPY_WARNS = ("import numpy as np\n"
               "def draw(t, screen):\n"
               "    k = np.log(np.zeros(1))[0]          # numpy: divide by zero -> -inf\n"
               "    {fail}\n"
               "    return [(0, 0), (10, 0)]\n")


def test_a_library_warning_is_said_once_in_the_tools_words(tmp_path):
    scene = write_scene(tmp_path, "warns.py", NUMPY_WARNS.format(fail="pass"))
    r = run_cli("render", scene, "--seconds", "1", "-o", tmp_path / "w.wav", "-q")
    assert r.returncode == 0
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1, lines
    assert lines[0].startswith("vectorgen: warning: a calculation went out of range")
    assert "RuntimeWarning: divide by zero" in lines[0]
    # after a failure the one error line is all
    scene = write_scene(tmp_path, "warns_fails.py",
                        NUMPY_WARNS.format(fail="raise ValueError('no data')"))
    r = run_cli("render", scene, "-o", tmp_path / "w2.wav")
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "ValueError: no data" in lines[0], lines
    # control: the scene without the warning says nothing
    scene = write_scene(tmp_path, "quiet.py", NUMPY_WARNS.replace(
        "np.log(np.zeros(1))[0]", "np.log(np.ones(1))[0]").format(fail="pass"))
    r = run_cli("render", scene, "--seconds", "1", "-o", tmp_path / "w3.wav", "-q")
    assert r.returncode == 0 and r.stderr == ""


def test_a_deeply_nested_profile_is_one_line(tmp_path):
    deep = tmp_path / "deep.toml"
    deep.write_text("a = " + "[" * 5000 + "]" * 5000 + "\n")
    r = run_cli("render", "--shape", "circle", "--profile", deep, "-o", tmp_path / "x.wav")
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "nested too deeply" in lines[0], lines
    assert "RecursionError" not in lines[0]


def test_every_streamed_sample_equals_the_one_frame_repeated(tmp_path):
    """The streamed file of a static drawing is the frame's samples repeated, whole frames,
    exactly: the frame as one render, read back with scipy, tiled by numpy."""
    from scipy.io import wavfile

    one, many = tmp_path / "one.wav", tmp_path / "many.wav"
    assert run_cli("render", "--text", "AB", "-o", one, "-q").returncode == 0
    assert run_cli("render", "--text", "AB", "--seconds", "30", "-o", many, "-q",
                   "--pcm16").returncode == 0
    _r, frame = wavfile.read(one)
    _r, data = wavfile.read(many)
    reps = -(-30 * 48000 // len(frame))                # whole frames to fill 30 s
    assert len(data) == reps * len(frame)
    want = np.round(np.clip(frame, -1, 1) * 32767).astype(np.int16)   # 16-bit: x 32767
    np.testing.assert_array_equal(data, np.tile(want, (reps, 1)))

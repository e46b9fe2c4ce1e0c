"""The engine's seams: isolation from the command line, calibration and shapes; one new file
and one registration line for a stage, a source, a sink and an ordering strategy; the stage
chain end to end (file, live loop, preview) with a trivial stage.

Outside references: the gain stage is checked against plain arithmetic on the drive (a gain of
g multiplies every X/Y sample by g: definition); the WAV round trip against scipy's WAV reader;
the live loop against the samples a real JACK dummy server records; the preview against an
independent re-rendering of the same frame without the stage (common practice, no source: a
compensating stage must be invisible at the spot).
"""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap

import numpy as np
import pytest

from render_helpers import REPO, polylines

ENGINE = sorted(
    ".".join(p.relative_to(REPO).with_suffix("").parts).replace(".__init__", "")
    for p in (REPO / "vectorgen").rglob("*.py")
    if "cli" not in p.relative_to(REPO / "vectorgen").parts and p.name != "__main__.py")


def test_the_engine_modules_are_all_listed():
    # a control for the isolation test below: it must see the engine's real modules
    for name in ("vectorgen.pipeline", "vectorgen.beamplan", "vectorgen.beamplan.ordering",
                 "vectorgen.channels", "vectorgen.stages", "vectorgen.live", "vectorgen.scene",
                 "vectorgen.svgsource", "vectorgen.preview", "vectorgen.sources"):
        assert name in ENGINE
    assert not any(n == "vectorgen.cli" or n.startswith("vectorgen.cli.") for n in ENGINE)


def test_the_engine_never_imports_the_command_line_calibration_or_shapes():
    code = textwrap.dedent(f"""
        import importlib, importlib.abc, sys
        BLOCKED = ("vectorgen.cli", "calibration", "shapes")
        class Block(importlib.abc.MetaPathFinder):
            def find_spec(self, name, path=None, target=None):
                if any(name == b or name.startswith(b + ".") for b in BLOCKED):
                    raise ImportError("blocked: " + name)
        sys.meta_path.insert(0, Block())
        for name in {ENGINE!r}:
            importlib.import_module(name)
        loaded = [m for m in sys.modules if any(m == b or m.startswith(b + ".") for b in BLOCKED)]
        print("LOADED", loaded)
    """)
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=REPO,
                       timeout=120)
    assert r.returncode == 0, r.stderr
    assert "LOADED []" in r.stdout, r.stdout


def test_the_blocker_bites():
    # control: the same blocker stops an import of a blocked package
    code = textwrap.dedent("""
        import importlib.abc, sys
        class Block(importlib.abc.MetaPathFinder):
            def find_spec(self, name, path=None, target=None):
                if name == "shapes" or name.startswith("shapes."):
                    raise ImportError("blocked: " + name)
        sys.meta_path.insert(0, Block())
        import vectorgen.cli.source_options as so
        so.load_builtin_sources()
    """)
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=REPO,
                       timeout=60)
    assert r.returncode != 0 and "blocked: shapes" in r.stderr


def test_nothing_in_the_engine_prints():
    # the engine's modules never write to the terminal: no print( outside the command line
    offenders = []
    for p in (REPO / "vectorgen").rglob("*.py"):
        if "cli" in p.relative_to(REPO / "vectorgen").parts or p.name == "__main__.py":
            continue
        for i, line in enumerate(p.read_text().splitlines(), 1):
            code = line.split("#")[0]
            if "print(" in code and ">>>" not in line:
                offenders.append(f"{p.name}:{i}")
    assert offenders == []


def test_every_public_engine_module_declares_its_api():
    missing = []
    for name in ENGINE:
        if name.rsplit(".", 1)[-1].startswith("_") or name == "vectorgen":
            continue
        mod = __import__(name, fromlist=["_"])
        if not hasattr(mod, "__all__"):
            missing.append(name)
    assert missing == []


def test_engine_docstring_examples_run():
    import doctest
    import importlib

    failed = {}
    for name in ENGINE:
        mod = importlib.import_module(name)
        res = doctest.testmod(mod, optionflags=doctest.NORMALIZE_WHITESPACE)
        if res.failed:
            failed[name] = res.failed
    assert failed == {}


# --- the stage chain end to end, with a trivial stage ----------------------------------------

def _square():
    return polylines([(-20, -15), (20, -15), (20, 15), (-20, 15), (-20, -15)],
                     [(-5, 0), (5, 0)])


def test_a_gain_stage_scales_the_file_samples_and_the_full_scale_check_runs_after_it(tmp_path):
    from scipy.io import wavfile

    from vectorgen.errors import FullScaleError
    from vectorgen.pipeline import Renderer, Settings
    from vectorgen.profile import Profile
    from vectorgen.sinks import write_signal
    from vectorgen.stages import Gain

    prof = Profile()
    plain = Renderer(prof, Settings(rate=48000, channels=3)).frame(_square())
    halved = Renderer(prof, Settings(rate=48000, channels=3), [Gain(0.5)]).frame(_square())
    write_signal(tmp_path / "h.wav", halved.signal, 48000, halved.names)
    rate, data = wavfile.read(tmp_path / "h.wav")         # scipy's reader, not ours
    assert rate == 48000
    # definition of a gain: every X/Y sample times 0.5, Z untouched
    assert np.allclose(data[:, :2], 0.5 * plain.signal[:, :2], atol=1e-7)
    assert np.array_equal(data[:, 2], plain.signal[:, 2])
    # the check runs on the final drive: a gain of 3 takes the 40 mm wide square's +-0.4
    # drive to +-1.2, beyond full scale, and the message names the place in the drawing
    with pytest.raises(FullScaleError, match=r"beyond full scale at .* mm in stroke 1"):
        Renderer(prof, Settings(rate=48000), [Gain(3.0)]).frame(_square())


def test_a_gain_stage_is_invisible_in_the_preview():
    from vectorgen.pipeline import Renderer, Settings
    from vectorgen.preview import phosphor_image
    from vectorgen.profile import Profile
    from vectorgen.stages import Gain

    prof = Profile()
    plain = Renderer(prof, Settings(rate=48000, channels=3)).frame(_square())
    r = Renderer(prof, Settings(rate=48000, channels=3), [Gain(0.5)])
    halved = r.frame(_square())
    ref = phosphor_image(plain.signal, prof, 3, rate=48000)
    through_chain = phosphor_image(halved.signal, prof, 3, chain=r.chain, rate=48000)
    ignoring_chain = phosphor_image(halved.signal, prof, 3, rate=48000)
    assert np.array_equal(through_chain, ref)
    # control: read without the chain's hardware model the picture is half the size
    assert not np.array_equal(ignoring_chain, ref)


from vectorgen.stages import Stage  # noqa: E402


class _Marker(Stage):
    """A toy stage written in the test: an identity whose first pass after a switch puts the
    spot at drive (0.125, -0.125) for the whole first pass (a recognisable marker)."""
    name = "marker"
    pointwise = True

    def frame(self, drive, rate):
        return drive

    def hardware(self, drive, rate):
        return drive

    def first_pass(self, prev, nxt, rate):
        out = np.empty_like(nxt)
        out[:] = (0.125, -0.125)
        return out

    def report(self):
        return {}


def test_a_stage_sees_the_live_frame_switch_and_carries_it_to_the_player():
    from vectorgen.live import Player
    from vectorgen.pipeline import Renderer, Settings
    from vectorgen.profile import Profile
    prof = Profile()
    r = Renderer(prof, Settings(rate=48000, channels=2), [_Marker()])
    a = r.frame(polylines([(-10, 0), (10, 0)]))
    b = r.frame(polylines([(0, -10), (0, 10)]))
    first = r.first_pass(a, b)
    assert first is not None and np.allclose(first, [0.125, -0.125])
    # the player plays the first pass once at the switch, then the steady loop of b
    p = Player(a.signal, 48000, np.zeros(2, np.float32), np.zeros(2, bool),
               stop_after=len(a.signal) + 3 * len(b.signal))
    p.submit(0, b.signal, 1, first)
    out = np.zeros((p.ramp_samples + len(a.signal) + 3 * len(b.signal), 2), np.float32)
    p._fill(out, len(out))
    body = out[p.ramp_samples:]
    assert np.array_equal(body[:len(a.signal)], a.signal)
    n = len(b.signal)
    assert np.allclose(body[len(a.signal):len(a.signal) + n], [0.125, -0.125])
    assert np.array_equal(body[len(a.signal) + n:len(a.signal) + 3 * n],
                          np.tile(b.signal, (2, 1)))
    # control: a first pass made for another predecessor is not played
    q = Player(a.signal, 48000, np.zeros(2, np.float32), np.zeros(2, bool),
               stop_after=len(a.signal) + n)
    q.submit(0, b.signal, 2, first)          # update 2 does not follow update 0 directly
    out2 = np.zeros((q.ramp_samples + len(a.signal) + n, 2), np.float32)
    q._fill(out2, len(out2))
    assert np.array_equal(out2[q.ramp_samples + len(a.signal):], b.signal)


def test_a_gain_stage_plays_live_through_jack(jack_server, tmp_path):
    """The live loop through a real JACK server carries the gain-scaled samples."""
    from jack_helpers import play_and_record

    script = tmp_path / "gainplay.py"
    script.write_text(textwrap.dedent("""
        import sys
        from vectorgen.cli import main
        from vectorgen.cli import render as r
        from vectorgen.stages import Gain
        setup = r.load_setup
        r.load_setup = lambda args, stages=(): setup(args, [Gain(0.5)])
        sys.exit(main(sys.argv[1:]))
    """))
    ref = tmp_path / "ref.wav"
    subprocess.run([sys.executable, "-m", "vectorgen", "render", "--shape", "crosshair",
                    "--channels", "2", "-o", str(ref)], check=True, cwd=REPO, timeout=60)
    from scipy.io import wavfile

    _rate, frame = wavfile.read(ref)
    res = play_and_record(jack_server, ["--shape", "crosshair", "--channels", "2",
                                        "--seconds", "1.0", "-q"],
                          channels=2, seconds=1.0, entry=str(script))
    rec = res.capture
    assert res.returncode == 0, res.stderr
    # find whole frames of the expected (gain-scaled) loop in the recording
    expect = 0.5 * frame
    hits = _count_frames(rec, expect)
    assert hits >= 5
    assert _count_frames(rec, frame) == 0          # control: the unscaled loop is not there


def _count_frames(rec: np.ndarray, frame: np.ndarray) -> int:
    n = len(frame)
    idx = np.flatnonzero(np.all(np.abs(rec - frame[0]) < 1e-6, axis=1))
    count, last = 0, -n
    for i in idx:
        if i >= last + n and i + n <= len(rec) and np.allclose(rec[i:i + n], frame, atol=1e-6):
            count += 1
            last = i
    return count


# --- one file plus one line: toy source, sink, ordering ---------------------------------------

TOY_PLUGINS = '''
import numpy as np
from vectorgen.sources import register_file_source
from vectorgen.sinks import register_sink
from vectorgen.beamplan import register_ordering
from vectorgen.strokes import strokes_from_polylines

def read_toy(path, screen, options):
    """A toy drawing format: one polyline per line, 'x,y x,y ...' in mm."""
    lines = [l.split() for l in open(path).read().splitlines() if l.strip()]
    return strokes_from_polylines([[tuple(map(float, p.split(","))) for p in l] for l in lines])

def write_toy(fh, signal, rate, names, pcm16):
    """A toy signal format: a text header and the samples as hex float32."""
    fh.write(f"TOY {rate} {' '.join(names)} {len(signal)}\\n".encode())
    fh.write(signal.astype("<f4").tobytes().hex().encode())

def reversed_order(starts, ends, jump_cost=None, strokes=None):
    """A toy ordering: stroke 0 first, then the rest backwards, each forwards."""
    S = len(starts)
    return np.array([0] + list(range(S - 1, 0, -1)), dtype=np.int64), np.zeros(S, dtype=bool)

register_file_source(".toy", read_toy)
register_sink(".toysig", write_toy)
register_ordering("backwards", reversed_order)
'''


def test_a_toy_source_sink_and_ordering_are_one_file_and_one_line_each(tmp_path):
    (tmp_path / "toyplugins.py").write_text(TOY_PLUGINS)
    (tmp_path / "drawing.toy").write_text("-10,0 10,0\n0,-10 0,10\n-5,5 5,5\n")
    runner = tmp_path / "run.py"
    runner.write_text("import sys, toyplugins\nfrom vectorgen.cli import main\n"
                      "sys.exit(main(sys.argv[1:]))\n")
    r = subprocess.run([sys.executable, str(runner), "render", "drawing.toy", "--order",
                        "backwards", "-o", "out.toysig", "--report", "rep.json"],
                       capture_output=True, text=True, cwd=tmp_path, timeout=60,
                       env={**__import__("os").environ, "PYTHONPATH": f"{tmp_path}:{REPO}"})
    assert r.returncode == 0, r.stderr
    head, body = (tmp_path / "out.toysig").read_text().split("\n", 1)
    tag, rate, x, y, n = head.split()
    samples = np.frombuffer(bytes.fromhex(body), dtype="<f4").reshape(int(n), 2)
    rep = json.loads((tmp_path / "rep.json").read_text())
    assert (tag, rate, x, y) == ("TOY", "48000", "x", "y")
    assert rep["strokes"] == 3 and rep["samples_per_frame"] == int(n)
    # the toy ordering drew stroke 3 (y = 5 mm: drive y = 5 / 40) before stroke 2 (the
    # vertical line, x = 0): the first lit sample after stroke 1 is on y = 0.125
    drive_y = samples[:, 1]
    after_first = np.flatnonzero(np.abs(samples[:, 0] - 0.2) < 1e-6)[-1] + 1
    ys = drive_y[after_first:]
    first_on_3 = np.flatnonzero(np.isclose(ys, 0.125))[0]
    first_on_2 = np.flatnonzero(np.isclose(samples[after_first:, 0], 0.0) & (np.abs(ys) > 0.2))[0]
    assert first_on_3 < first_on_2
    # control: without the plug-ins the same command refuses the format
    r2 = subprocess.run([sys.executable, "-m", "vectorgen", "render", "drawing.toy", "-o",
                         "out.toysig"], capture_output=True, text=True, cwd=tmp_path, timeout=60,
                        env={**__import__("os").environ, "PYTHONPATH": str(REPO)})
    assert r2.returncode == 2 and len(r2.stderr.strip().splitlines()) == 1

"""Live output when the audio server goes away: `vectorgen play` in a child process on a private
JACK server (dummy backend, its own name, started here and not the shared fixture's, because
these tests kill it), and the server killed (SIGKILL) or frozen (SIGSTOP) under the stream.

What is expected (the issue's words): the player notices the dead stream and ends within a
second or two, with one line naming the device and what happened, exit status 2; Ctrl-C always
works; nothing waits on a close without a bound. Closing a JACK client whose server is gone can
block for ever (see /work/shared/NOTES.md), so this process closes its own probe client before
it kills the server. No time is asserted beyond a generous bound that a hang cannot meet.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time

import pytest

from jack_helpers import JACKD, PORTAUDIO_OUT, REPO, JackServer

# a hang today never ends by itself; a working player ends within a second or two
EXIT_BOUND_S = 15.0
CAUTION_PREFIX = "vectorgen: caution: "


# A server killed with SIGKILL never unregisters: its slot in JACK's server registry (eight
# slots for the whole machine) stays taken until a server of the same name registers again.
# So the killed servers take their names from a small pool, and each is started and stopped
# cleanly once more after the test, which frees its slot for everyone else.
NAME_POOL = tuple(f"vgdie{os.getuid()}k{i}" for i in range(4))


def _start_from_pool() -> JackServer:
    last = None
    for name in NAME_POOL:
        try:
            return JackServer(rate=48000, period=1024, playback=2, name=name).start()
        except RuntimeError as exc:         # that name is running (another test run)
            last = exc
    raise RuntimeError(f"no free name for a private JACK server: {last}")


@pytest.fixture
def private_server():
    if JACKD is None:
        if os.environ.get("CI"):
            pytest.fail("jackd is not installed, but CI must run the live-output tests")
        pytest.skip("jackd is not installed (apt-get install jackd2)")
    server = _start_from_pool()
    yield server
    proc = server.proc
    if proc is not None and proc.poll() is None:
        os.kill(proc.pid, signal.SIGCONT)
        server.stop()
    else:                                   # killed: register the name again, cleanly
        server.proc = None
        JackServer(rate=48000, period=1024, playback=2, name=server.name).start().stop()


def start_player(server, *source):
    """`vectorgen play SOURCE` on the server's device; returns once its output ports exist
    (seen by a probe client that is closed again before anything happens to the server)."""
    import jack

    proc = subprocess.Popen([sys.executable, "-m", "vectorgen", "play", *map(str, source),
                             "--device", "system"], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, env=server.env,
                            stdin=subprocess.DEVNULL, cwd=REPO)
    probe = jack.Client(f"vgprobe{os.getpid()}", servername=server.name, no_start_server=True)
    try:
        deadline = time.monotonic() + 30
        while time.monotonic() < deadline and proc.poll() is None:
            ports = [p.name for p in probe.get_ports(is_output=True, is_audio=True)
                     if PORTAUDIO_OUT.match(p.name)]
            if ports:
                break
            time.sleep(0.01)
        else:
            out, err = proc.communicate(timeout=10) if proc.poll() is not None else ("", "")
            proc.kill()
            pytest.fail(f"the player's ports never appeared: {err}")
    finally:
        probe.deactivate()
        probe.close()
    time.sleep(0.8)                     # well into the loop
    assert proc.poll() is None, proc.communicate()
    return proc


def wait_for_exit(proc):
    """(exit status, stdout, stderr, seconds it took); a hang is killed and fails the test."""
    t0 = time.monotonic()
    try:
        out, err = proc.communicate(timeout=EXIT_BOUND_S)
    except subprocess.TimeoutExpired:
        proc.kill()
        out, err = proc.communicate()
        pytest.fail(f"the player did not end within {EXIT_BOUND_S} s after the server went "
                    f"away; it printed {out!r} {err!r}")
    return proc.returncode, out, err, time.monotonic() - t0


def check_one_device_error(err: str, what: str):
    """stderr: the cautions, then exactly one error line naming the device and `what`."""
    lines = [ln for ln in err.strip().splitlines() if not ln.startswith(CAUTION_PREFIX)]
    assert len(lines) == 1, err
    line = lines[0]
    assert line.startswith("vectorgen: error: audio output on device "), line
    assert "'system' (JACK Audio Connection Kit)" in line and what in line, line
    assert "Traceback" not in err


@pytest.mark.parametrize("source", [("--shape", "circle"),
                                    (REPO / "examples" / "spinning_cube.py",)],
                         ids=["drawing", "scene"])
def test_killing_the_server_ends_play_with_one_line_naming_the_device(private_server, source):
    proc = start_player(private_server, *source)
    private_server.proc.kill()              # SIGKILL: the server is gone at once
    private_server.proc.wait()
    code, out, err, took = wait_for_exit(proc)
    print(f"ended {took:.2f} s after the server was killed")
    assert code == 2, (code, err)
    check_one_device_error(err, "the audio stream stopped by itself")
    assert "the audio output failed, not parked" in out


def test_a_frozen_server_is_noticed_by_the_stalled_callback(private_server):
    proc = start_player(private_server, "--shape", "crosshair")
    os.kill(private_server.proc.pid, signal.SIGSTOP)     # alive, but never calls back
    code, out, err, took = wait_for_exit(proc)
    print(f"ended {took:.2f} s after the server was frozen")
    assert code == 2, (code, err)
    check_one_device_error(err, "stopped asking for samples")


def test_ctrl_c_works_while_the_server_is_frozen(private_server):
    proc = start_player(private_server, "--text", "HOLD")
    os.kill(private_server.proc.pid, signal.SIGSTOP)
    time.sleep(0.2)
    proc.send_signal(signal.SIGINT)
    code, out, err, took = wait_for_exit(proc)
    print(f"ended {took:.2f} s after Ctrl-C")
    assert "Traceback" not in err
    # the stop could not be played (the server is frozen): one line says so
    assert code == 2, (code, err)
    check_one_device_error(err, "stopped asking for samples")


def test_control_a_running_server_plays_to_the_end(private_server):
    """Control: with the server left alone the same player ends normally, so the failures
    above come from the server going away and not from the set-up."""
    r = subprocess.run([sys.executable, "-m", "vectorgen", "play", "--shape", "circle",
                        "--device", "system", "--seconds", "1.0"], capture_output=True,
                       text=True, env=private_server.env, timeout=60, cwd=REPO)
    assert r.returncode == 0, r.stderr
    assert "end of --seconds, parked" in r.stdout
    assert [ln for ln in r.stderr.splitlines() if not ln.startswith(CAUTION_PREFIX)] == []

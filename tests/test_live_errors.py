"""Live output without the things it needs: no PortAudio library, no output device, bad
options. These need no JACK server."""

from __future__ import annotations

import os
import subprocess
import sys

import pytest

from render_helpers import REPO

MISSING = ("vectorgen: error: PortAudio library not found: install the system package "
           "libportaudio2 (Debian/Ubuntu: apt-get install libportaudio2)")


def run_vectorgen(args, env_extra=None, hide_portaudio=False):
    """The command line in a child process. With `hide_portaudio`, the system library lookup
    finds nothing, exactly as on a machine without libportaudio2: sounddevice's own import
    then fails with its own OSError (the library code itself is not replaced)."""
    pre = ("import ctypes.util; ctypes.util.find_library = lambda name: None; "
           if hide_portaudio else "")
    code = pre + "import sys; from vectorgen.cli import main; sys.exit(main(sys.argv[1:]))"
    env = dict(os.environ)
    env.pop("VECTORGEN_DEBUG", None)
    env["PYTHONPATH"] = str(REPO) + os.pathsep + env.get("PYTHONPATH", "")
    env.update(env_extra or {})
    return subprocess.run([sys.executable, "-c", code, *args], capture_output=True, text=True,
                          env=env, timeout=60)


@pytest.mark.parametrize("args", [["play", "--shape", "circle"], ["devices"]])
def test_without_portaudio_one_line_names_the_package(args):
    r = run_vectorgen(args, hide_portaudio=True)
    assert r.returncode == 2
    assert r.stderr.strip() == MISSING
    assert r.stdout == ""


def _no_devices_env():
    # A JACK server name nobody runs, and no starting one: PortAudio's JACK host API then
    # has no devices; ALSA and OSS have none on a machine without a sound card.
    return {"JACK_DEFAULT_SERVER": f"vgnone{os.getpid()}", "JACK_NO_START_SERVER": "1"}


def test_without_any_output_device_play_fails_in_one_line():
    probe = run_vectorgen(["devices"], _no_devices_env())
    if "no output devices" not in probe.stdout:
        pytest.skip("this machine has audio output devices of its own")
    assert probe.returncode == 0
    r = run_vectorgen(["play", "--shape", "circle"], _no_devices_env())
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert lines == ["vectorgen: error: no audio output device found (PortAudio sees none): "
                     "run 'vectorgen devices' to list the output devices"]


@pytest.mark.parametrize("args, text", [
    (["play"], "no source"),
    (["play", "--shape", "circle", "--seconds", "0"], "--seconds must be > 0"),
    (["play", "--shape", "circle", "--seconds", "nan"], "--seconds must be > 0"),
    (["play", "nope.py"], "scene script not found"),
    (["play", "--shape", "circle", "--channels", "4"], "invalid choice"),
])
def test_bad_play_options_fail_in_one_line(args, text):
    r = run_vectorgen(args, _no_devices_env())
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and text in lines[0], r.stderr


def test_help_stays_fast_without_importing_sounddevice():
    code = ("import sys; from vectorgen.cli import build_parser; build_parser(); "
            "print('sounddevice' in sys.modules, 'shapes' in sys.modules)")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                       cwd=REPO, timeout=60)
    assert r.stdout.split() == ["False", "False"], r.stderr

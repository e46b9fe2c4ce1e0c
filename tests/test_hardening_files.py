"""Outputs under faults, in real child processes: stop signals (SIGTERM, SIGHUP, SIGQUIT and
SIGINT sent during a long render), a full disk (RLIMIT_FSIZE: the kernel refuses writes past a
size, as a full file system does, with EFBIG), standard output on /dev/full, twelve processes
saving one file at the same moment, and outputs that would replace inputs or files of another
kind.

References: POSIX signal numbers from the standard library's `signal` module and the shell
convention that a command ended by signal N exits with 128 + N (common practice, no source);
WAV files read back with `scipy.io.wavfile`; PNG files recognised by their 8-byte signature
(PNG specification, section 5.2).
"""

from __future__ import annotations

import os
import re
import resource
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from render_helpers import REPO, files_in, run_cli

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"        # PNG specification, 5.2


def env_with_repo() -> dict:
    env = dict(os.environ)
    env.pop("VECTORGEN_DEBUG", None)
    env["PYTHONPATH"] = str(REPO) + os.pathsep + env.get("PYTHONPATH", "")
    return env


def write_scene(folder: Path, name: str, body: str) -> Path:
    path = folder / name
    path.write_text(body, encoding="utf-8")
    return path


# a scene of many quick updates: a long render that writes for seconds
BUSY_SCENE = ("UPDATE_HZ = 50\n"
              "def draw(t, screen):\n"
              "    s = 5 + (t * 50) % 20\n"
              "    return [[(-s, -s), (s, -s), (s, s), (-s, s), (-s, -s)], [(0, 0), (s, 1)]]\n")


# --- stop signals during a long render -----------------------------------------------------------

@pytest.mark.parametrize("signame", ["SIGTERM", "SIGHUP", "SIGQUIT", "SIGINT"])
def test_a_stop_signal_during_a_render_leaves_nothing_and_exits_with_its_status(tmp_path,
                                                                              signame):
    scene = write_scene(tmp_path, "busy.py", BUSY_SCENE)
    before = files_in(tmp_path)
    proc = subprocess.Popen([sys.executable, "-m", "vectorgen", "render", str(scene),
                             "--seconds", "3000", "--rate", "8000", "-o", "long.wav",
                             "--preview", "long.png", "--report", "long.json"],
                            cwd=tmp_path, env=env_with_repo(), stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    # wait until the render is writing: its hidden temporary file is there
    deadline = time.monotonic() + 60
    while not any(n.endswith(".part") for n in files_in(tmp_path)):
        assert proc.poll() is None, proc.communicate()
        assert time.monotonic() < deadline, "the render never started writing"
        time.sleep(0.002)
    time.sleep(0.2)
    signum = getattr(signal, signame)
    proc.send_signal(signum)
    out, err = proc.communicate(timeout=60)
    # the shell's convention: a command stopped by signal N exits with 128 + N
    assert proc.returncode == 128 + signum, (proc.returncode, err)
    word = "Ctrl-C" if signame == "SIGINT" else signame
    assert err.strip().splitlines() == [f"vectorgen: stopped by {word}"], err
    assert files_in(tmp_path) == before        # no temporary file, no partial output


def test_control_the_same_render_unsignalled_writes_all_three_outputs(tmp_path):
    scene = write_scene(tmp_path, "busy.py", BUSY_SCENE)
    r = run_cli("render", scene, "--seconds", "0.5", "--rate", "8000", "-o", "long.wav",
                "--preview", "long.png", "--report", "long.json", "-q", cwd=tmp_path)
    assert r.returncode == 0, r.stderr
    assert files_in(tmp_path) == {"busy.py", "long.wav", "long.png", "long.json"}


# --- a full disk, standard output that fails -----------------------------------------------------

def _small_file_limit(limit_bytes: int):
    def apply():
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)     # EFBIG instead of being killed
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit_bytes, limit_bytes))
    return apply


def test_a_preview_that_cannot_be_written_leaves_no_signal_file_either(tmp_path):
    # one frame of a circle is a few kB of WAV; its preview PNG is tens of kB: with files
    # limited to 20 kB the signal fits and the preview does not
    args = [sys.executable, "-m", "vectorgen", "render", "--shape", "circle", "-o", "a.wav",
            "--preview", "a.png", "--report", "a.json"]
    r = subprocess.run(args, cwd=tmp_path, env=env_with_repo(), capture_output=True, text=True,
                       timeout=120, preexec_fn=_small_file_limit(20_000))
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("vectorgen: error: cannot write a.png"), lines
    assert files_in(tmp_path) == set()
    # control: without the limit all three are written, and the signal alone fits the limit
    r = subprocess.run(args, cwd=tmp_path, env=env_with_repo(), capture_output=True, text=True,
                       timeout=120)
    assert r.returncode == 0, r.stderr
    assert (tmp_path / "a.wav").stat().st_size < 20_000 < (tmp_path / "a.png").stat().st_size
    assert (tmp_path / "a.png").read_bytes()[:8] == PNG_SIGNATURE


def test_standard_output_on_a_full_device_writes_nothing_and_says_so(tmp_path):
    cmd = [sys.executable, "-m", "vectorgen", "render", "--shape", "circle", "-o", "b.wav"]
    with open("/dev/full", "w") as full:
        r = subprocess.run(cmd, cwd=tmp_path, env=env_with_repo(), stdout=full,
                           stderr=subprocess.PIPE, text=True, timeout=120)
    assert r.returncode == 2
    assert r.stderr.strip().splitlines() == [
        "vectorgen: error: cannot write to standard output (No space left on device): "
        "nothing was written"], r.stderr
    assert files_in(tmp_path) == set()
    # control: the same command with a working standard output writes the file
    r = subprocess.run(cmd, cwd=tmp_path, env=env_with_repo(), capture_output=True, text=True,
                       timeout=120)
    assert r.returncode == 0 and "wrote" in r.stdout
    from scipy.io import wavfile

    rate, data = wavfile.read(tmp_path / "b.wav")
    assert rate == 48000 and len(data) > 0


# --- twelve saves at the same moment -------------------------------------------------------------

SAVER = """
import os, select, sys
from vectorgen.files import write_with_backup
data = ('version = "%s"\\n' % sys.argv[3]).encode()
gate = os.open(sys.argv[1], os.O_RDWR)      # a FIFO: readable only once the test writes to it
print("ready", flush=True)
select.select([gate], [], [])
write_with_backup(sys.argv[2], data)
"""


def test_twelve_saves_at_once_keep_every_version(tmp_path):
    """Twelve real processes wait at one gate (a FIFO) and save the same file the moment it
    opens; each save keeps the version it replaces as a numbered backup. Every one of the 13
    versions (the first and the twelve saved) must be somewhere: in the file or a backup. (The
    saving function is the one every profile and sheet save goes through.)"""
    target = tmp_path / "p.toml"
    target.write_text('version = "v0"\n')
    gate = tmp_path / "gate"
    os.mkfifo(gate)
    procs = [subprocess.Popen([sys.executable, "-c", SAVER, str(gate), str(target), f"v{k}"],
                              env=env_with_repo(), stdout=subprocess.PIPE,
                              stderr=subprocess.PIPE, text=True) for k in range(1, 13)]
    try:
        for p in procs:
            assert p.stdout.readline().strip() == "ready", p.stderr.read()
        fd = os.open(gate, os.O_WRONLY | os.O_NONBLOCK)
        os.write(fd, b"x")
        os.close(fd)
        for p in procs:
            assert p.wait(60) == 0, p.stderr.read()
    finally:
        for p in procs:
            if p.poll() is None:
                p.kill()
    saved = [f for f in tmp_path.iterdir() if f.name.startswith("p.toml")]
    versions = sorted(re.search(r'"(v\d+)"', f.read_text()).group(1) for f in saved)
    print(f"versions kept: {len(set(versions))} of 13 in {len(saved)} files")
    assert sorted(set(versions)) == sorted(f"v{k}" for k in range(13))
    assert len(saved) == 13 and len(versions) == 13          # each exactly once
    assert not any(n.endswith(".part") for n in files_in(tmp_path))


# --- outputs over inputs and over files of another kind ------------------------------------------

SVG = ('<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 100 80">'
       '<line x1="10" y1="10" x2="90" y2="70"/></svg>\n')


def test_init_profile_does_not_write_toml_over_a_drawing_unless_told_to(tmp_path):
    drawing = tmp_path / "d.svg"
    drawing.write_text(SVG)
    r = run_cli("init-profile", "-o", drawing, cwd=tmp_path)
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "holds an SVG drawing" in lines[0] and "--clobber" in lines[0]
    assert drawing.read_text() == SVG and files_in(tmp_path) == {"d.svg"}
    # told to: replaced, and the drawing kept as the numbered backup
    r = run_cli("init-profile", "-o", drawing, "--clobber", cwd=tmp_path)
    assert r.returncode == 0, r.stderr
    import tomllib

    assert "screen" in tomllib.loads(drawing.read_text())
    assert (tmp_path / "d.svg.bak1").read_text() == SVG


def test_a_signal_output_does_not_replace_a_file_of_another_kind(tmp_path):
    not_a_wav = tmp_path / "take.wav"
    not_a_wav.write_text(SVG)                         # a drawing under a .wav name
    r = run_cli("render", "--shape", "circle", "-o", not_a_wav, cwd=tmp_path)
    assert r.returncode == 2 and "holds an SVG drawing" in r.stderr
    assert not_a_wav.read_text() == SVG
    # control: over an earlier WAV file the render goes ahead
    good = tmp_path / "good.wav"
    assert run_cli("render", "--shape", "circle", "-o", good, "-q").returncode == 0
    r = run_cli("render", "--shape", "crosshair", "-o", good, "-q")
    assert r.returncode == 0, r.stderr


def test_two_outputs_to_one_path_are_refused(tmp_path):
    r = run_cli("preview", "--shape", "circle", "-o", tmp_path / "a.png", "--signals",
                tmp_path / "a.png", cwd=tmp_path)
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "a.png" in lines[0] and "own name" in lines[0], lines
    # render checks before any work
    r = run_cli("render", "--shape", "circle", "-o", tmp_path / "b.wav", "--report",
                tmp_path / "r.json", "--preview", tmp_path / "b.wav", cwd=tmp_path)
    assert r.returncode == 2 and not (tmp_path / "b.wav").exists()


def test_in_a_session_an_input_is_never_written_over():
    import tempfile

    from vectorgen import files
    from vectorgen.errors import InputError

    folder = tempfile.mkdtemp()
    src = os.path.join(folder, "in.svg")
    Path(src).write_text(SVG)
    with files.session():
        files.read_bytes(src, "SVG file", 1 << 20)
        with pytest.raises(InputError, match="in.svg is the SVG file this command reads"):
            files.atomic_write_bytes(src, b"<svg/>")
        # a command that means to rewrite its input (a profile updated in place) may
        files.write_with_backup(src, SVG.replace("90", "80").encode())
    assert "80" in Path(src).read_text() and os.path.exists(src + ".bak1")
    # control: outside a session (a library caller) nothing is remembered
    files.atomic_write_bytes(src, SVG.encode())
    assert Path(src).read_text() == SVG


def test_outputs_get_the_permissions_of_an_ordinary_new_file(tmp_path):
    """A temporary file is created private (0600); the output must end with what the umask
    gives a new file (POSIX: creat() mode 0666 & ~umask), or keep the replaced file's."""
    out = tmp_path / "c.wav"
    assert run_cli("render", "--shape", "circle", "-o", out, "-q").returncode == 0
    mask = os.umask(0o022)
    os.umask(mask)
    assert out.stat().st_mode & 0o777 == 0o666 & ~mask
    out.chmod(0o640)
    assert run_cli("render", "--shape", "circle", "-o", out, "-q").returncode == 0
    assert out.stat().st_mode & 0o777 == 0o640


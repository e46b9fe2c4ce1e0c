"""A real JACK server on its dummy backend and a JACK client that records what is played.

Plumbing for the live-output tests and the soak benchmark (not a test module itself):
* `JackServer`: `jackd -n NAME -d dummy -r RATE`, a unique NAME per run, no audio hardware.
* `Recorder`: a JACK-Client client with input ports; it connects to the output ports of the
  PortAudio client that appears (the program under test) and keeps every sample, float32.
* `play_and_record`: runs `vectorgen play ...` in a child process against the server and
  returns what it printed together with the recording.
* Alignment helpers that find whole frames in a recording.
"""

from __future__ import annotations

import os
import re
import shutil
import signal
import subprocess
import sys
import threading
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parent.parent
JACKD = shutil.which("jackd")
PORTAUDIO_OUT = re.compile(r"^PortAudio[^:]*:out_(\d+)$")


class JackServer:
    """jackd on the dummy backend; `env` is what a child process needs to use it."""

    def __init__(self, rate: int = 48000, period: int = 512, playback: int = 4,
                 name: str | None = None):
        self.rate, self.period, self.playback = rate, period, playback
        self.name = name or f"vgtest{os.getpid()}r{rate}"
        self.proc = None
        self.log = Path(os.environ.get("TMPDIR", "/tmp")) / f"{self.name}.log"

    @property
    def env(self) -> dict:
        env = dict(os.environ)
        env.update(JACK_DEFAULT_SERVER=self.name, JACK_NO_START_SERVER="1",
                   JACK_NO_AUDIO_RESERVATION="1")
        env.pop("VECTORGEN_DEBUG", None)
        env["PYTHONPATH"] = str(REPO) + os.pathsep + env.get("PYTHONPATH", "")
        return env

    def start(self, timeout: float = 20.0) -> "JackServer":
        import jack

        if JACKD is None:
            raise RuntimeError("jackd is not installed")
        with open(self.log, "wb") as log:
            self.proc = subprocess.Popen(
                [JACKD, "-n", self.name, "-d", "dummy", "-r", str(self.rate), "-p",
                 str(self.period), "-C", "2", "-P", str(self.playback)],
                stdout=log, stderr=subprocess.STDOUT, stdin=subprocess.DEVNULL,
                env=self.env)
        deadline = time.monotonic() + timeout
        while True:
            if self.proc.poll() is not None:
                raise RuntimeError(f"jackd exited with {self.proc.returncode}: "
                                   f"{self.log.read_text(errors='replace')[-2000:]}")
            try:
                probe = jack.Client("vgprobe", servername=self.name, no_start_server=True)
            except jack.JackError:
                if time.monotonic() > deadline:
                    self.stop()
                    raise RuntimeError(f"jackd did not come up within {timeout} s")
                time.sleep(0.05)
                continue
            probe.close()
            return self

    def stop(self) -> None:
        if self.proc is not None and self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(10)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait(5)
        self.proc = None

    def use_in_this_process(self) -> None:
        """Point this process's PortAudio at the server (PortAudio enumerates at start-up)."""
        os.environ["JACK_DEFAULT_SERVER"] = self.name
        os.environ["JACK_NO_START_SERVER"] = "1"
        if "sounddevice" in sys.modules:
            sd = sys.modules["sounddevice"]
            sd._terminate()
            sd._initialize()


class Recorder:
    """Records the output ports of the next PortAudio client to appear on the server."""

    _count = 0

    def __init__(self, server: JackServer, channels: int, seconds: float):
        import jack

        self.server = server
        Recorder._count += 1
        self.client = jack.Client(f"vgrec{os.getpid()}n{Recorder._count}",
                                  servername=server.name, no_start_server=True)
        self.rate = self.client.samplerate
        self.channels = channels
        self.ports = [self.client.inports.register(f"in_{j + 1}") for j in range(channels)]
        self.buf = np.zeros((int(seconds * self.rate) + self.client.blocksize, channels),
                            dtype=np.float32)
        self.n = 0
        self.xruns = 0
        self.recording = False
        self.before = {p.name for p in self.client.get_ports(is_output=True)}
        self.sources: list[str] = []
        self.client.set_process_callback(self._process)
        self.client.set_xrun_callback(self._xrun)
        self.client.activate()

    def _xrun(self, delay):
        self.xruns += 1

    def _process(self, frames):
        if not self.recording:
            return
        n = min(frames, len(self.buf) - self.n)
        for j, port in enumerate(self.ports):
            self.buf[self.n:self.n + n, j] = port.get_array()[:n]
        self.n += n

    def new_player_ports(self) -> list[str]:
        found = []
        for p in self.client.get_ports(is_output=True, is_audio=True):
            m = PORTAUDIO_OUT.match(p.name)
            if m and p.name not in self.before:
                found.append((int(m.group(1)), p.name))
        return [name for _i, name in sorted(found)]

    def connect_when_ready(self, timeout: float = 20.0, proc=None) -> bool:
        """Poll (1 ms) for the player's output ports and connect them to ours; start
        recording once all are connected. False if they never appear."""
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            names = self.new_player_ports()
            if len(names) >= self.channels:
                for src, dst in zip(names, self.ports):
                    self.client.connect(src, dst)
                self.sources = names[:self.channels]
                self.recording = True
                return True
            if proc is not None and proc.poll() is not None:
                return False
            time.sleep(0.001)
        return False

    def data(self) -> np.ndarray:
        return self.buf[:self.n].copy()

    def close(self) -> None:
        self.recording = False
        try:
            self.client.deactivate()
        finally:
            self.client.close()


@dataclass
class PlayResult:
    returncode: int
    stdout: str
    stderr: str
    capture: np.ndarray
    xruns: int
    connected: bool


def play_and_record(server: JackServer, args, channels: int, seconds: float,
                    timeout: float = 120.0, env: dict | None = None,
                    interrupt_after: float | None = None, auto_device: bool = True,
                    command=("play",), entry: str | None = None) -> PlayResult:
    """Run `python -m vectorgen play ARGS` (or another live `command`) against the server and
    record its output
    (for about `seconds`); `interrupt_after` sends SIGINT (Ctrl-C) that long after the
    player's ports appeared. `entry`: a script run instead of `-m vectorgen`."""
    args = [str(a) for a in args]
    if auto_device and "--device" not in args:
        # the server's device by name, so that a machine with a sound card of its own (whose
        # device would be PortAudio's default) still plays into the server under test
        args += ["--device", "system JACK Audio"]
    rec = Recorder(server, channels, seconds + 5.0)
    launcher = [entry] if entry is not None else ["-m", "vectorgen"]    # a script may wrap main
    proc = subprocess.Popen([sys.executable, *launcher, *command, *args],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            env=env or server.env, stdin=subprocess.DEVNULL)
    out = {}
    reader = threading.Thread(target=lambda: out.update(zip(("stdout", "stderr"),
                                                            proc.communicate(timeout=timeout))))
    reader.start()
    try:
        connected = rec.connect_when_ready(timeout=min(30.0, timeout), proc=proc)
        if interrupt_after is not None and connected:
            time.sleep(interrupt_after)
            proc.send_signal(signal.SIGINT)
        reader.join(timeout)
        time.sleep(2 * server.period / server.rate)
    finally:
        rec.close()
        if proc.poll() is None:
            proc.kill()
            reader.join(10)
    return PlayResult(proc.returncode, out.get("stdout", ""), out.get("stderr", ""),
                      rec.data(), rec.xruns, connected)


def summary_counts(stdout: str) -> dict:
    """The counts in `vectorgen play`'s summary line."""
    found = {}
    for key, pat in (("frames", r"frames (\d+)"), ("updates", r"updates (\d+)"),
                     ("late", r"late frames (\d+)"), ("underruns", r"underruns (\d+)")):
        m = re.search(pat, stdout)
        if m:
            found[key] = int(m.group(1))
    return found


# --- alignment -----------------------------------------------------------------------------------

def find_frame(capture: np.ndarray, frame: np.ndarray, start: int = 0) -> int:
    """Index of the first exact copy of `frame` in `capture` at or after `start`, or -1."""
    L = len(frame)
    if len(capture) - start < L:
        return -1
    head = np.all(capture[start:len(capture) - L + 1] == frame[0], axis=1)
    for i in np.flatnonzero(head) + start:
        if np.array_equal(capture[i:i + L], frame):
            return int(i)
    return -1


def align_to_reference(capture: np.ndarray, reference: np.ndarray, first_frame: np.ndarray,
                       loops_of_first: int):
    """Where the reference stream starts in the capture: the capture's first full copy of the
    first frame is one of its first `loops_of_first` loops; the one under which the rest of
    the capture matches the reference longest wins. Returns (offset, matched samples)."""
    i = find_frame(capture, first_frame)
    if i < 0:
        return None, 0
    L = len(first_frame)
    best = (None, 0)
    for m in range(loops_of_first):
        off = i - m * L                 # capture index of reference sample 0
        lo = max(0, -off)               # reference samples before the capture began
        a = capture[off + lo:] if off + lo >= 0 else capture
        b = reference[lo:lo + len(a)]
        a = a[:len(b)]
        bad = np.flatnonzero(np.any(a != b, axis=1))
        good = int(bad[0]) if bad.size else len(b)
        if lo + good > best[1]:
            best = (off, lo + good)
    return best

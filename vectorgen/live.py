"""Live output: frames played through an audio interface with sounddevice's callback API.

Threads and hand-over
    The audio callback (`Player._fill`) only copies samples: it keeps a read position inside
    the current frame and, each time the frame ends, looks at the queue of prepared frames.
    Frames are rendered ahead on a producer thread (`Producer`) and handed over in a deque
    (append / popleft are atomic), each tagged with its *due* sample: the position, counted
    in frame samples from the start of the first frame, from which it should be on screen.

Frame boundaries
    The callback switches frames only where the current frame ends, never inside it: at each
    boundary P it takes the latest queued frame whose due sample is <= P (older ones it passes
    over are counted as superseded). If the frame the producer is working on is already due
    and not ready, the current frame simply repeats (the picture holds) and the update is
    counted once as late. This is the same rule `scene.scene_timeline` follows for files, so
    a scene played live without late frames gives exactly the samples a file render gives.

Start and stop
    The stream starts with a short raised-cosine ramp from the park position to the first
    sample of the first frame (blanked where there is a Z channel) and ends, on Ctrl-C, at the
    end of --seconds or on an error, with a ramp from wherever the beam is to the park position
    (Z blanked at once), a short hold there, then the stream stops. The park position is drive
    (0, 0), the tube's centre: when the stream closes, a DC-coupled interface outputs 0, which
    is also (0, 0), so parking anywhere else would only add a second jump. With two channels
    (no blanking) the spot then rests at the centre: turn the brightness down before stopping.
    With a Z channel, 0 must mean "beam off" at the amplifier (z_blank_level = 0) for the spot
    to stay dark after the stream closes.

Counting
    Underruns are the callbacks that PortAudio flags with output_underflow; late frames are
    scene updates that missed the frame boundary they were due at.

When the audio server or the device goes away
    A stream whose server died goes inactive without finishing, and one whose server hangs
    stops calling back: `Player.check_alive` tells either from a normal end, so the player
    can stop within a second or two and say so. Nothing then waits on the audio library
    without a bound: closing a stream whose server is gone can block for ever inside it, so a
    dead stream is not closed at all, and any other close runs on a daemon thread for at most
    CLOSE_WAIT_S. A stream left unclosed is *abandoned* (`abandon_audio`): PortAudio's exit
    handler (which would close it and block, or abort) is dropped, and the library's own
    messages on standard error are muted, so the process ends with its one line.
"""

from __future__ import annotations

import os
import sys
import threading
import time
from collections import deque
from dataclasses import dataclass

import numpy as np

from .channels import ChannelMap
from .errors import DeviceError, InputError

__all__ = ["Device", "Player", "Producer", "abandon_audio", "check_device", "find_device",
           "output_devices", "park_levels", "ramp", "ramp_weights", "run_bounded", "sounddevice"]

PORTAUDIO_MISSING = ("PortAudio library not found: install the system package libportaudio2 "
                     "(Debian/Ubuntu: apt-get install libportaudio2)")
SEE_DEVICES = "run 'vectorgen devices' to list the output devices"
PARK_DRIVE = (0.0, 0.0)
RAMP_MS = 5.0           # start and stop ramps
PARK_HOLD_MS = 20.0     # hold at the park position before the stream stops
MAX_PENDING = 64        # prepared frames waiting in the queue at most
LOOKAHEAD_S = 0.5       # render scene updates up to this long before they are due
PRIME_S = 0.25          # updates due this soon after the start are made before it
STALL_S = 1.5           # no callback for this long (at least) while playing: the stream stalled
CLOSE_WAIT_S = 1.0      # a close that takes longer is left to itself
START_WAIT_S = 10.0     # a stream that takes longer to start is given up


def sounddevice():
    """The sounddevice module, or a one-line error naming the system package to install."""
    try:
        import sounddevice as sd
    except OSError:
        raise DeviceError(PORTAUDIO_MISSING) from None
    return sd


# --- devices ------------------------------------------------------------------------------------

@dataclass
class Device:
    index: int
    name: str
    hostapi: str
    channels: int           # output channels
    rate: float             # default sample rate
    default: bool

    def describe(self) -> str:
        return f"device {self.index} '{self.name}' ({self.hostapi})"


def output_devices() -> list[Device]:
    """Every output device PortAudio sees, in PortAudio's order."""
    sd = sounddevice()
    apis = sd.query_hostapis()
    default = sd.default.device[1]
    if default is None or (isinstance(default, int) and default < 0):
        default = -1
    elif not isinstance(default, int):
        try:
            default = sd.query_devices(default, "output")["index"]
        except (ValueError, sd.PortAudioError):
            default = -1
    out = []
    for info in sd.query_devices():
        if info["max_output_channels"] > 0:
            out.append(Device(int(info["index"]), info["name"], apis[info["hostapi"]]["name"],
                              int(info["max_output_channels"]),
                              float(info["default_samplerate"]), info["index"] == default))
    return out


def find_device(spec: str | int | None) -> Device:
    """The output device given by `spec`: None (the default), an index, or a case-insensitive
    part of the name (several space-separated parts match in order, as sounddevice does)."""
    sd = sounddevice()
    devices = output_devices()
    if not devices:
        raise DeviceError(f"no audio output device found (PortAudio sees none): {SEE_DEVICES}")
    if spec is None:
        chosen = [d for d in devices if d.default]
        if not chosen:
            raise DeviceError(f"there is no default output device: choose one by number or name "
                                 f"({SEE_DEVICES})")
        return chosen[0]
    text = str(spec).strip()
    if text.lstrip("-").isdigit():
        index = int(text)
        for d in devices:
            if d.index == index:
                return d
        raise DeviceError(f"there is no output device number {index}: {SEE_DEVICES}")
    try:
        index = sd.query_devices(text, "output")["index"]
    except ValueError as exc:
        if str(exc).startswith("Multiple"):
            names = [f"{d.index} '{d.name}'" for d in devices if _matches(d, text)]
            raise DeviceError(f"several output devices match '{text}' ({', '.join(names)}): "
                                 f"give more of the name or the number ({SEE_DEVICES})") from None
        raise DeviceError(f"no output device matches '{text}': {SEE_DEVICES}") from None
    except sd.PortAudioError as exc:
        raise DeviceError(f"cannot query device '{text}': {exc}: {SEE_DEVICES}") from None
    return next(d for d in devices if d.index == index)


def _matches(d: Device, text: str) -> bool:
    full, pos = f"{d.name}, {d.hostapi}".lower(), 0
    for part in text.lower().split():
        pos = full.find(part, pos)
        if pos < 0:
            return False
        pos += len(part)
    return True


def check_device(device: Device, channels: int, rate: int) -> None:
    """A one-line error unless the device can play `channels` float32 channels at `rate`."""
    sd = sounddevice()
    if channels > device.channels:
        raise DeviceError(f"{device.describe()} has {device.channels} output channel(s); "
                          f"the signal needs {channels} (use 2 channels, or another device)",
                          parameter="channels")
    try:
        sd.check_output_settings(device=device.index, channels=channels, dtype="float32",
                                 samplerate=rate)
    except (sd.PortAudioError, ValueError) as exc:
        hint = "" if int(device.rate) == rate else (f"; its default rate is {device.rate:g} Hz, "
                                                    f"try a rate of {device.rate:g} Hz")
        raise DeviceError(f"{device.describe()} cannot play {channels} channels at {rate} Hz "
                          f"({_one_line(exc)}){hint}", parameter="rate") from None


def _one_line(exc) -> str:
    return " ".join(str(exc).split())


# --- calls into the audio library that may never return -----------------------------------------

def run_bounded(fn, wait_s: float, give_up=None, name: str = "vectorgen-audio"):
    """Call `fn()` on a daemon thread and wait at most `wait_s` for it (less once `give_up()`
    is true, checked every 50 ms). Returns (finished, result, exception); a call that has not
    finished is left to itself (the process can still end: the thread is a daemon).

    Examples
    --------
    >>> run_bounded(lambda: 6 * 7, 1.0)
    (True, 42, None)
    >>> run_bounded(lambda: time.sleep(5), 0.1)[0]
    False
    """
    box: dict = {}

    def call():
        try:
            box["result"] = fn()
        except BaseException as exc:        # handed to the caller
            box["error"] = exc

    t = threading.Thread(target=call, name=name, daemon=True)
    t.start()
    deadline = time.monotonic() + wait_s
    while t.is_alive():
        left = deadline - time.monotonic()
        if left <= 0 or (give_up is not None and give_up()):
            break
        t.join(min(0.05, left))
    if t.is_alive():
        return False, None, None
    return True, box.get("result"), box.get("error")


_ABANDONED = []


def abandon_audio() -> None:
    """Let the process end with a stream that cannot be closed: drop sounddevice's exit handler
    (it would stop and close the stream and terminate PortAudio, which blocks or aborts once
    the audio server is gone) and mute what the audio libraries print on file descriptor 2
    from now on (Python's own standard error moves to a copy of the descriptor)."""
    if _ABANDONED:
        return
    _ABANDONED.append(True)
    sd = sys.modules.get("sounddevice")
    handler = getattr(sd, "_exit_handler", None)
    if handler is not None:
        import atexit

        atexit.unregister(handler)
    try:
        sys.stderr.flush()
        keep = os.dup(2)
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, 2)
        os.close(devnull)
        sys.stderr = os.fdopen(keep, "w", buffering=1, encoding=getattr(
            sys.stderr, "encoding", None) or "utf-8", errors="backslashreplace")
    except (OSError, ValueError):
        pass


# --- park position and ramps ---------------------------------------------------------------------

def park_levels(output, channels: int, drive=PARK_DRIVE) -> tuple[np.ndarray, np.ndarray]:
    """Channel values of the park position (drive `drive`, beam blanked) and a mask of the
    Z channels, both (channels,)."""
    cmap = ChannelMap(output, channels)
    return cmap.park(drive), cmap.zmask


def ramp_weights(n: int) -> np.ndarray:
    """Raised-cosine weights w_i = (1 - cos(pi i / n)) / 2, i = 1..n: from just after the start
    value to exactly the end value."""
    i = np.arange(1, n + 1, dtype=float)
    return (1.0 - np.cos(np.pi * i / n)) / 2.0


def ramp(start: np.ndarray, end: np.ndarray, n: int, zmask: np.ndarray,
         zvalue: np.ndarray) -> np.ndarray:
    """(n, ch) float32 samples moving from `start` (excluded) to `end` (included) on a raised
    cosine, with every Z channel held at `zvalue` (blanked) throughout."""
    start = np.asarray(start, dtype=float)
    end = np.asarray(end, dtype=float)
    out = start + (end - start) * ramp_weights(n)[:, None]
    out[:, zmask] = np.asarray(zvalue, dtype=float)[zmask]
    return out.astype(np.float32)


# --- the player ----------------------------------------------------------------------------------

@dataclass
class Pending:
    due: int                # frame samples from the start of the first frame
    signal: np.ndarray      # (n, ch) float32: the frame as it loops
    index: int              # scene update number
    first: np.ndarray | None = None     # its first pass when it follows update index - 1


_START, _PLAY, _STOP, _HOLD, _DONE = range(5)


class Player:
    """Plays a first frame and whatever frames are submitted after it, switching only at frame
    boundaries. `stop_after` (frame samples) ends the output after exactly that much."""

    def __init__(self, first: np.ndarray, rate: int, park: np.ndarray, zmask: np.ndarray,
                 stop_after: int | None = None, ramp_ms: float = RAMP_MS,
                 hold_ms: float = PARK_HOLD_MS):
        first = np.ascontiguousarray(first, dtype=np.float32)
        if first.ndim != 2 or len(first) == 0:
            raise InputError("nothing to play: the first frame is empty")
        self.rate = int(rate)
        self.channels = first.shape[1]
        self.park = np.asarray(park, dtype=np.float32)
        self.zmask = np.asarray(zmask, dtype=bool)
        self.ramp_samples = max(2, int(round(ramp_ms * 1e-3 * self.rate)))
        self.hold_samples = max(1, int(round(hold_ms * 1e-3 * self.rate)))
        self.stop_after = stop_after
        self.pending: deque = deque()
        self.awaiting: int | None = None    # due sample of the update being prepared
        # callback state
        self._cur = first
        self._pos = 0
        self._phase = _START
        self._ramp = ramp(self.park, first[0], self.ramp_samples, self.zmask, self.park)
        self._rpos = 0
        self._hold_left = self.hold_samples
        self._last = self.park.copy()
        self._stop_flag = False
        self._late_flag: int | None = None
        self._shown_due = 0
        self._steady: np.ndarray | None = None   # the loop to go on with after a first pass
        # counters (each written by one thread only)
        self.position = 0               # frame samples played
        self.samples_out = 0            # every sample written, ramps included
        self.loops = 0                  # frames played to their end
        self.switches = 0               # new frames taken at a boundary
        self.shown = 0                  # index of the update on screen
        self.superseded = 0             # frames passed over at a boundary (a newer one was due)
        self.late_callback = 0          # updates not ready at their boundary
        self.late_producer = 0          # updates the producer dropped because their time passed
        self.underruns = 0
        self.underrun_at: list = []     # samples written before each underrun (first few)
        self.last_boundary = 0
        self.stop_reason: str | None = None
        self.callback_error: BaseException | None = None
        self.finished = threading.Event()
        self.stream = None
        # liveness: when the callback last ran, and what went wrong with the stream
        self.last_callback: float | None = None
        self.started_at: float | None = None
        self.stall_s = STALL_S
        self.failure: str | None = None
        self.abandoned = False

    # -- producer side -----------------------------------------------------------------------
    def submit(self, due: int, signal: np.ndarray, index: int,
               first: np.ndarray | None = None) -> None:
        """Queue update `index`, due at frame sample `due`. `first` is what to play for its
        first pass when it follows update index - 1 directly (a stage's frame-switch
        output, the same length as `signal`); otherwise `signal` plays from the start."""
        sig = np.ascontiguousarray(signal, dtype=np.float32)
        if sig.ndim != 2 or sig.shape[1] != self.channels or len(sig) == 0:
            raise InputError(f"frame {index} has shape {sig.shape}; expected (n, "
                             f"{self.channels})")
        if first is not None:
            first = np.ascontiguousarray(first, dtype=np.float32)
            if first.shape != sig.shape:
                raise InputError(f"frame {index}: its first pass has shape {first.shape}, the "
                                 f"frame {sig.shape}")
        self.pending.append(Pending(int(due), sig, int(index), first))

    def request_stop(self, reason: str) -> None:
        if self.stop_reason is None:
            self.stop_reason = reason
        self._stop_flag = True

    @property
    def stopping(self) -> bool:
        return self._stop_flag or self._phase >= _STOP

    @property
    def late(self) -> int:
        return self.late_callback + self.late_producer

    # -- callback side -----------------------------------------------------------------------
    def _boundary(self) -> None:
        """At the end of a frame: take the latest due frame, or repeat; count lateness."""
        P = self.position
        q = self.pending
        take = None
        while q and q[0].due <= P:
            if take is not None:
                self.superseded += 1
            take = q.popleft()
        if take is not None:
            if take.first is not None and self.shown == take.index - 1:
                self._cur, self._steady = take.first, take.signal
            else:
                self._cur, self._steady = take.signal, None
            self.shown = take.index
            self._shown_due = take.due
            self.switches += 1
        elif self._steady is not None:      # the first pass is over: loop the steady frame
            self._cur, self._steady = self._steady, None
        aw = self.awaiting
        if aw is not None and self._shown_due < aw <= P and aw != self._late_flag:
            self.late_callback += 1
            self._late_flag = aw
        self.last_boundary = P

    def _begin_stop(self) -> None:
        if self.stop_reason is None:
            self.stop_reason = "end"
        self._ramp = ramp(self._last, self.park, self.ramp_samples, self.zmask, self.park)
        self._rpos = 0
        self._phase = _STOP

    def _fill(self, out: np.ndarray, frames: int) -> bool:
        """Write `frames` samples into `out` ((frames, ch) float32). True once finished."""
        o = 0
        while o < frames:
            ph = self._phase
            if ph == _PLAY:
                if self._stop_flag or (self.stop_after is not None
                                       and self.position >= self.stop_after):
                    self._begin_stop()
                    continue
                cur, pos = self._cur, self._pos
                n = min(frames - o, len(cur) - pos)
                if self.stop_after is not None:
                    n = min(n, self.stop_after - self.position)
                out[o:o + n] = cur[pos:pos + n]
                o += n
                pos += n
                self.position += n
                self._last[:] = cur[pos - 1]
                if pos == len(cur):
                    pos = 0
                    self.loops += 1
                    self._boundary()
                self._pos = pos
            elif ph == _START or ph == _STOP:
                if ph == _START and self._stop_flag:
                    self._begin_stop()
                    continue
                r = self._ramp
                n = min(frames - o, len(r) - self._rpos)
                out[o:o + n] = r[self._rpos:self._rpos + n]
                o += n
                self._rpos += n
                self._last[:] = r[self._rpos - 1]
                if self._rpos == len(r):
                    self._phase = _PLAY if ph == _START else _HOLD
            elif ph == _HOLD:
                n = min(frames - o, self._hold_left)
                out[o:o + n] = self.park
                o += n
                self._hold_left -= n
                if self._hold_left == 0:
                    self._phase = _DONE
            else:
                out[o:] = self.park
                o = frames
        self.samples_out += frames
        return self._phase == _DONE

    def _callback(self, outdata, frames, time_info, status) -> None:
        self.last_callback = time.monotonic()
        if status.output_underflow:
            self.underruns += 1
            if len(self.underrun_at) < 100:
                self.underrun_at.append(self.samples_out)
        try:
            done = self._fill(outdata, frames)
        except BaseException as exc:      # never leave the beam on a half-written block
            outdata[:] = self.park
            self.callback_error = exc
            self.request_stop("error")
            done = True
        if done:
            raise self._sd.CallbackStop

    # -- stream --------------------------------------------------------------------------------
    def start(self, device: int | None, give_up=None) -> None:
        """Open and start the stream on `device` (waiting at most START_WAIT_S, less once
        `give_up()` is true).

        Raises
        ------
        DeviceError
            The stream cannot be opened or started, or does not start in time.
        """
        sd = sounddevice()
        self._sd = sd

        def open_and_start():
            self.stream = sd.OutputStream(samplerate=self.rate, channels=self.channels,
                                          dtype="float32", device=device, latency="high",
                                          callback=self._callback,
                                          finished_callback=self.finished.set)
            self.stream.start()

        done, _result, exc = run_bounded(open_and_start, START_WAIT_S, give_up)
        if not done:
            self.abandon()
            if give_up is not None and give_up():
                raise DeviceError("stopped while the audio stream was starting")
            raise DeviceError(f"cannot start the audio stream: it did not start within "
                              f"{START_WAIT_S:g} s (is the audio server running and "
                              f"responding?)")
        if isinstance(exc, sd.PortAudioError):
            self.close()
            raise DeviceError(f"cannot start the audio stream: {_one_line(exc)}") from None
        if exc is not None:
            self.close()
            raise exc
        self.started_at = time.monotonic()
        latency = float(self.stream.latency or 0.0)
        self.stall_s = max(STALL_S, 4 * latency)

    def check_alive(self) -> str | None:
        """None while the stream runs, or once it has ended as it should; otherwise (and from
        then on) what went wrong, in words: the stream went inactive without finishing (its
        server or device went away), or no callback came for `stall_s` (it stopped
        responding)."""
        st = self.stream
        if self.failure is not None or st is None:
            return self.failure
        if self._phase == _DONE or self.callback_error is not None or self.finished.is_set():
            return None
        try:
            active = bool(st.active)
        except Exception:
            active = False
        if not active:
            if self._phase == _DONE or self.finished.is_set():     # it ended meanwhile
                return None
            self.failure = ("the audio stream stopped by itself (the audio server or the "
                            "device went away)")
            return self.failure
        last = self.last_callback if self.last_callback is not None else self.started_at
        if last is not None:
            quiet_s = time.monotonic() - last
            if quiet_s > self.stall_s:
                self.failure = (f"the audio stream stopped asking for samples (no callback "
                                f"for {quiet_s:.1f} s: the audio server or the device stopped "
                                f"responding)")
        return self.failure

    @property
    def parked(self) -> bool:
        """Whether the stop ramp and the hold at the park position have been played."""
        return self._phase == _DONE

    def excuse(self) -> None:
        """The caller itself did not run for a while (the process was paused, or starved):
        a quiet callback since then is no sign of a dead stream."""
        if self.last_callback is not None or self.started_at is not None:
            self.last_callback = time.monotonic()

    @property
    def latency(self) -> float:
        return float(self.stream.latency) if self.stream is not None else 0.0

    def wait(self, timeout: float) -> bool:
        """True once the stream has finished (or is no longer running)."""
        if self.finished.wait(timeout):
            return True
        return self.stream is None or not self.stream.active

    def close(self, wait_s: float = CLOSE_WAIT_S) -> bool:
        """Close the stream, never waiting more than `wait_s`: a stream that failed
        (`check_alive`) is not closed at all, and a close that does not return in time is
        left on its daemon thread; either way the audio library is abandoned
        (`abandon_audio`). True when the stream was closed."""
        st = self.stream
        if st is None:
            return True
        self.stream = None
        if self.failure is not None:
            self.abandon()
            return False
        done, _r, _e = run_bounded(st.close, wait_s)
        if not done:
            self.abandon()
        return done

    def abandon(self) -> None:
        self.abandoned = True
        self.stream = None
        abandon_audio()

    def stats(self) -> dict:
        return {"frames": self.loops, "updates": self.switches, "late": self.late,
                "superseded": self.superseded, "underruns": self.underruns,
                "seconds": self.position / self.rate}


# --- the producer --------------------------------------------------------------------------------

class Producer(threading.Thread):
    """Renders scene updates 1, 2, ... ahead of time and submits them to the player.

    `render(k) -> (signal, first)` makes update k: its (n, ch) float32 loop and what to play
    for its first pass after update k - 1 (or None); `schedule.due(k)` gives its due sample.
    An update is rendered once it is due within LOOKAHEAD_S and the queue has room. If the
    producer falls so far behind that the next update is due too, the hopeless one is dropped
    (and counted late if a frame boundary passed after its due sample)."""

    def __init__(self, player: Player, render, schedule, lookahead_s: float = LOOKAHEAD_S,
                 first: int = 1):
        super().__init__(name="vectorgen-frames", daemon=True)
        self.player = player
        self.render = render
        self.schedule = schedule
        self.lookahead = int(lookahead_s * player.rate)
        self.k = first
        self.error: BaseException | None = None
        self.rendered = 0
        self._halt = threading.Event()

    def halt(self) -> None:
        self._halt.set()

    def prime(self, seconds: float = PRIME_S) -> None:
        """Before the stream starts: make the updates due within `seconds` (in this thread),
        so a slow first render, or a slow start of the thread, cannot make them late."""
        p, sched = self.player, self.schedule
        limit = int(seconds * p.rate)
        while len(p.pending) < MAX_PENDING:
            due = sched.due(self.k)
            if due > limit or (p.stop_after is not None and due >= p.stop_after):
                return
            signal, first = self.render(self.k)
            p.submit(due, signal, self.k, first)
            self.rendered += 1
            self.k += 1

    def _wait_for_room(self, due: int) -> bool:
        p = self.player
        while not (self._halt.is_set() or p.stopping):
            ahead = due - p.position
            if len(p.pending) < MAX_PENDING and ahead <= self.lookahead:
                return True
            self._halt.wait(min(0.05, max(0.001, (ahead - self.lookahead) / p.rate)))
        return False

    def run(self) -> None:
        p, sched = self.player, self.schedule
        try:
            while True:
                k = self.k
                if hasattr(sched, "resync"):
                    sched.resync(p.position, p.latency)
                due = sched.due(k)
                if p.stop_after is not None and due >= p.stop_after:
                    return
                p.awaiting = due
                if not self._wait_for_room(due):
                    return
                pos = p.position
                while sched.due(k + 1) <= pos:          # hopeless: its successor is due too
                    if p.last_boundary >= due and p._late_flag != due:
                        p.late_producer += 1
                    k += 1
                    due = sched.due(k)
                    p.awaiting = due
                signal, first = self.render(k)
                self.rendered += 1
                self.k = k + 1
                if sched.due(k + 1) <= p.position:      # went stale while being made
                    if p.last_boundary >= due and p._late_flag != due:
                        p.late_producer += 1
                    continue
                p.submit(due, signal, k, first)
        except BaseException as exc:
            self.error = exc
            p.request_stop("error")

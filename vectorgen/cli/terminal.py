"""Terminal text of the command line: warnings (the engine's, and the libraries' in the tool's
words), the flag hint on engine errors, the live status line, the progress line of a long
render, durations, the cautions, standard output that may fail, and the stop signals."""

from __future__ import annotations

import os
import re
import signal as _signal
import sys
import time
import warnings

from ..errors import VectorgenError, VectorgenWarning

__all__ = ["PROG", "CAUTIONS", "PARAM_FLAGS", "STOP_SIGNALS", "GuardedStdout", "Progress",
           "Stopped", "Stopper", "WarningPrinter", "fmt_duration", "flush_stdout",
           "install_stop_handlers", "library_warning_text", "say", "signal_name", "status_line",
           "wait_interval", "warn", "with_flag_hint"]

PROG = "vectorgen"

CAUTIONS = (
    "caution: lethal high voltage in the tube's anode and deflection circuits: covers on; "
    "follow local electrical codes and qualified practice.",
    "caution: a bright stationary spot burns the phosphor: keep brightness low until the "
    "picture is confirmed.",
)

# engine parameter -> the option that sets it
PARAM_FLAGS = {
    "rate": "--rate", "channels": "--channels", "speed": "--speed", "refresh": "--refresh",
    "frame_samples": "--samples", "tolerance_mm": "--tolerance", "radius_mm": "--radius",
    "radius": "--radius", "text_height_mm": "--text-height", "grid_step_mm": "--grid-step",
    "ordering": "--order", "time": "--time", "slow_to_fit": "--slow-to-fit",
    "balance": "--no-balance", "compensate": "--no-compensation", "seconds": "--seconds",
}

# the signals that stop a command cleanly, as Ctrl-C does
STOP_SIGNALS = tuple(getattr(_signal, n) for n in ("SIGINT", "SIGTERM", "SIGHUP", "SIGQUIT")
                     if hasattr(_signal, n))


def signal_name(signum: int) -> str:
    """'Ctrl-C' for SIGINT, else the signal's name ('SIGTERM')."""
    if signum == _signal.SIGINT:
        return "Ctrl-C"
    try:
        return _signal.Signals(signum).name
    except ValueError:
        return f"signal {signum}"


def with_flag_hint(message: str, parameter) -> str:
    """The engine's message with the option(s) that set its parameter(s), unless named."""
    params = parameter if isinstance(parameter, tuple) else (parameter,)
    flags = [PARAM_FLAGS[p] for p in params if p in PARAM_FLAGS]
    flags = [f for f in flags if f not in message]
    if not flags:
        return message
    return f"{message} (option{'s' if len(flags) > 1 else ''} {', '.join(flags)})"


def warn(message: str) -> None:
    print(f"{PROG}: warning: {message}", file=sys.stderr)


# --- standard output -----------------------------------------------------------------------------

def _silence_stdout() -> None:
    """Point file descriptor 1 at the null device, so that what is still buffered for a
    standard output that failed goes nowhere at exit instead of failing again there."""
    try:
        fd = os.open(os.devnull, os.O_WRONLY)
        os.dup2(fd, 1)
        os.close(fd)
    except OSError:
        pass


def _stdout_failed(exc, nothing_written: bool = False) -> VectorgenError:
    _silence_stdout()
    why = getattr(exc, "strerror", None) or str(exc)
    return VectorgenError(f"cannot write to standard output ({why})"
                          + (": nothing was written" if nothing_written else ""))


class GuardedStdout:
    """Standard output whose failures (a full disk, a closed pipe) are one line in the tool's
    words (`VectorgenError`) wherever a command prints; everything else is the stream's."""

    def __init__(self, stream):
        self._stream = stream

    def write(self, text):
        try:
            return self._stream.write(text)
        except (OSError, ValueError) as exc:
            raise _stdout_failed(exc) from None

    def flush(self):
        try:
            return self._stream.flush()
        except (OSError, ValueError) as exc:
            raise _stdout_failed(exc) from None

    def __getattr__(self, name):
        return getattr(self._stream, name)


def flush_stdout(nothing_written: bool = False) -> None:
    """Flush standard output; a failure (a full disk, a closed pipe) is one line.

    Raises
    ------
    VectorgenError
        "cannot write to standard output (...)", saying that nothing was written when the
        caller's files are not in place yet.
    """
    stream = getattr(sys.stdout, "_stream", sys.stdout)
    try:
        stream.flush()
    except (OSError, ValueError) as exc:
        raise _stdout_failed(exc, nothing_written) from None


def say(line: str, nothing_written: bool = False) -> None:
    """Print a line on standard output at once (see `flush_stdout` for a failure)."""
    stream = getattr(sys.stdout, "_stream", sys.stdout)
    try:
        stream.write(line + "\n")
    except (OSError, ValueError) as exc:
        raise _stdout_failed(exc, nothing_written) from None
    flush_stdout(nothing_written)


# --- warnings ------------------------------------------------------------------------------------

LIBRARY_WORDS = (
    # (pattern in the library's message, what it means in the tool's words)
    (r"encountered in|divide by zero|overflow|underflow|invalid value",
     "a calculation went out of range, so a result may be wrong: check the output"),
    (r"decompression bomb|exceeds limit of",
     "the picture is very large (it takes much memory to read)"),
    (r"tight_layout|constrained_layout|glyph|font",
     "the plot may not look right"),
)


def library_warning_text(message: str, category: type) -> str:
    """One line in the tool's words for a warning from a library (numpy, matplotlib, Pillow),
    with the library's own words after it.

    Examples
    --------
    >>> library_warning_text("overflow encountered in multiply", RuntimeWarning)[:28]
    'a calculation went out of ra'
    """
    text = " ".join(str(message).split())
    for pattern, words in LIBRARY_WORDS:
        if re.search(pattern, text, flags=re.I):
            return f"{words} ({category.__name__}: {text})"
    return f"a library the tool uses warned: {category.__name__}: {text}"


class WarningPrinter:
    """Shows the engine's warnings (`VectorgenWarning`) as 'vectorgen: warning: ...' lines on
    stderr as they happen, each kind once per run (frames of a scene differ only in the numbers
    they quote). Other warnings (numpy, matplotlib, Pillow) are caught, and said once, in the
    tool's words, when the command ends well (`report`); after a failure its one error line
    is all."""

    def __init__(self):
        self._kinds: set = set()
        self._library: dict = {}        # kind -> text
        self._ctx = None

    def show(self, message) -> None:
        text = str(message)
        kind = re.sub(r"[-+0-9.]+", "#", text)
        if kind not in self._kinds:
            self._kinds.add(kind)
            warn(text)

    def _library_warning(self, message, category) -> None:
        text = library_warning_text(str(message), category)
        self._library.setdefault(re.sub(r"[-+0-9.]+", "#", text), text)

    def report(self) -> None:
        """Say the libraries' warnings: one line, the first kind in full and how many more."""
        if not self._library:
            return
        texts = list(self._library.values())
        more = len(texts) - 1
        warn(texts[0] + (f" (and {more} other library warning{'s' if more > 1 else ''})"
                         if more else ""))
        self._library.clear()

    def __enter__(self):
        self._ctx = warnings.catch_warnings()
        self._ctx.__enter__()
        warnings.simplefilter("always", VectorgenWarning)

        def showwarning(message, category, filename, lineno, file=None, line=None):
            if issubclass(category, VectorgenWarning):
                self.show(message)
            else:
                self._library_warning(message, category)
        warnings.showwarning = showwarning
        return self

    def __exit__(self, *exc):
        self._ctx.__exit__(*exc)
        return False


# --- durations, the status line and the progress line -------------------------------------------

def fmt_duration(seconds: float) -> str:
    """'12.345 s' below two minutes, else '3 min 4.5 s'.

    Examples
    --------
    >>> fmt_duration(12.3456), fmt_duration(184.5)
    ('12.346 s', '3 min 4.5 s')
    """
    if seconds < 120:
        return f"{seconds:.3f} s"
    m, s = divmod(seconds, 60)
    return f"{int(m)} min {s:.1f} s"


def _short(seconds: float) -> str:
    if seconds < 10:
        return f"{seconds:.1f} s"
    if seconds < 60:
        return f"{seconds:.0f} s"
    m, s = divmod(int(round(seconds)), 60)
    if m < 60:
        return f"{m} min {s:02d} s"
    h, m = divmod(m, 60)
    return f"{h} h {m:02d} min"


def status_line(player, device, elapsed: float) -> str:
    s = player.stats()
    return (f"playing {elapsed:7.1f} s on '{device.name}': frames {s['frames']}, updates "
            f"{s['updates']}, late frames {s['late']}, underruns {s['underruns']}")


def wait_interval(seconds: float | None) -> float:
    return 0.25 if seconds is None else min(0.25, max(0.02, seconds / 10))


class Progress:
    """A progress line on a terminal (stderr) for a job of `total` units of signal seconds:
    how far, how long it has run, about how long is left. Nothing shows for a job that ends
    within `after_s`; the line is updated at most every `every_s` and erased at `close`."""

    def __init__(self, total_s: float, verb: str = "rendering", stream=None,
                 after_s: float = 1.0, every_s: float = 0.2):
        self.total = max(float(total_s), 1e-9)
        self.verb = verb
        self.stream = stream if stream is not None else sys.stderr
        self.after_s, self.every_s = after_s, every_s
        self.started = time.monotonic()
        self._last = None
        self.shown = False

    @staticmethod
    def text(verb: str, done_s: float, total_s: float, elapsed_s: float) -> str:
        """The line: 'rendering  42 %: 25.2 s of 60.0 s done in 3 s, about 4 s left'.

        Examples
        --------
        >>> Progress.text("rendering", 30.0, 120.0, 2.0)
        'rendering  25 %: 30.0 s of 120.0 s done in 2.0 s, about 6.0 s left'
        """
        frac = min(1.0, done_s / total_s) if total_s > 0 else 1.0
        left = elapsed_s * (1 - frac) / frac if frac > 0 else float("inf")
        eta = _short(left) if left != float("inf") else "?"
        return (f"{verb} {100 * frac:3.0f} %: {done_s:.1f} s of {total_s:.1f} s done in "
                f"{_short(elapsed_s)}, about {eta} left")

    def update(self, done_s: float) -> None:
        now = time.monotonic()
        elapsed = now - self.started
        if elapsed < self.after_s or (self._last is not None and now - self._last < self.every_s):
            return
        self._last = now
        try:
            self.stream.write("\r" + self.text(self.verb, done_s, self.total, elapsed) + "\033[K")
            self.stream.flush()
            self.shown = True
        except (OSError, ValueError):
            pass

    def close(self) -> None:
        if self.shown:
            try:
                self.stream.write("\r\033[K")
                self.stream.flush()
            except (OSError, ValueError):
                pass
            self.shown = False


# --- stop signals --------------------------------------------------------------------------------

class Stopped(KeyboardInterrupt):
    """A stop signal (SIGTERM, SIGHUP, SIGQUIT; SIGINT too) raised as Ctrl-C is: every cleanup
    that Ctrl-C runs (temporary files removed) runs for it. `signum` says which."""

    def __init__(self, signum: int):
        super().__init__(signal_name(signum))
        self.signum = signum


def install_stop_handlers():
    """Make SIGINT, SIGTERM, SIGHUP and SIGQUIT raise `Stopped` in the main thread (once: a
    second signal during the cleanup is ignored; while files are put in place, the signal
    waits for that to end). Returns a function that restores the old handlers."""
    from ..files import defer_stop

    raised = []

    def act(signum):
        if not raised:
            raised.append(signum)
            raise Stopped(signum)

    def handle(signum, frame):
        if not defer_stop(signum, act):
            act(signum)

    old = {}
    for sig in STOP_SIGNALS:
        try:
            old[sig] = _signal.signal(sig, handle)
        except (ValueError, OSError):       # not the main thread
            pass

    def restore():
        for sig, handler in old.items():
            try:
                _signal.signal(sig, handler)
            except (ValueError, OSError):
                pass
    return restore


class Stopper:
    """Turns Ctrl-C, SIGTERM, SIGHUP and SIGQUIT into a clean stop request while the stream
    runs (`reason`); a second one sets `urgent` (stop waiting for anything)."""

    def __init__(self):
        self.reason = None
        self.urgent = False
        self._old = {}

    def __enter__(self):
        for sig in STOP_SIGNALS:
            try:
                self._old[sig] = _signal.signal(sig, self._handle)
            except (ValueError, OSError):       # not the main thread
                pass
        return self

    def _handle(self, signum, frame):
        if self.reason is not None:
            self.urgent = True
        else:
            self.reason = signal_name(signum)

    def __exit__(self, *exc):
        for sig, old in self._old.items():
            _signal.signal(sig, old)
        return False

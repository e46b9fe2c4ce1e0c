"""Terminal text of the command line: warnings, the flag hint on engine errors, the live status
line, durations, the cautions and the stop handler."""

from __future__ import annotations

import re
import signal as _signal
import sys
import warnings

from ..errors import VectorgenWarning

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
    "balance": "--no-balance", "compensate": "--no-compensation",
}


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


class WarningPrinter:
    """Shows the engine's warnings (`VectorgenWarning`) as 'vectorgen: warning: ...' lines on
    stderr as they happen, each kind once per run (frames of a scene differ only in the numbers
    they quote)."""

    def __init__(self):
        self._kinds: set = set()
        self._old = None
        self._ctx = None

    def show(self, message) -> None:
        text = str(message)
        kind = re.sub(r"[-+0-9.]+", "#", text)
        if kind not in self._kinds:
            self._kinds.add(kind)
            warn(text)

    def __enter__(self):
        self._ctx = warnings.catch_warnings()
        self._ctx.__enter__()
        warnings.simplefilter("always", VectorgenWarning)
        old = warnings.showwarning

        def showwarning(message, category, filename, lineno, file=None, line=None):
            if issubclass(category, VectorgenWarning):
                self.show(message)
            else:
                old(message, category, filename, lineno, file, line)
        warnings.showwarning = showwarning
        return self

    def __exit__(self, *exc):
        self._ctx.__exit__(*exc)
        return False


def fmt_duration(seconds: float) -> str:
    """'12.345 s' below two minutes, else '3 min 4.5 s'."""
    if seconds < 120:
        return f"{seconds:.3f} s"
    m, s = divmod(seconds, 60)
    return f"{int(m)} min {s:.1f} s"


def status_line(player, device, elapsed: float) -> str:
    s = player.stats()
    return (f"playing {elapsed:7.1f} s on '{device.name}': frames {s['frames']}, updates "
            f"{s['updates']}, late frames {s['late']}, underruns {s['underruns']}")


def wait_interval(seconds: float | None) -> float:
    return 0.25 if seconds is None else min(0.25, max(0.02, seconds / 10))


class Stopper:
    """Turns Ctrl-C and SIGTERM into a clean stop request while the stream runs."""

    def __init__(self):
        self.reason = None
        self._old = {}

    def __enter__(self):
        for sig in (_signal.SIGINT, _signal.SIGTERM):
            try:
                self._old[sig] = _signal.signal(sig, self._handle)
            except (ValueError, OSError):       # not the main thread
                pass
        return self

    def _handle(self, signum, frame):
        self.reason = "Ctrl-C" if signum == _signal.SIGINT else "SIGTERM"

    def __exit__(self, *exc):
        for sig, old in self._old.items():
            _signal.signal(sig, old)
        return False

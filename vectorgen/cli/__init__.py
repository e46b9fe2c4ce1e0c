"""Command line: `vectorgen COMMAND ...`.

Each command lives in a module listed in COMMAND_MODULES with a `register(subparsers)` function
that adds its parser and sets `func(args) -> int`. Modules import their heavy dependencies inside
the functions, so `vectorgen --help` starts fast. Bad input is a `VectorgenError`: one line on
stderr (with the option that sets the parameter it names) and exit status 2, never a traceback.
The engine's warnings are printed as they happen, each kind once; the libraries' warnings are
said once, in the tool's words, when the command ends well.

Every command runs in a `files.session`: no output is written over one of the command's inputs
or twice to one path, and an existing file holding another kind of content (a drawing, a
picture) is not replaced unless `--clobber` is given. SIGTERM, SIGHUP and SIGQUIT stop a command
as Ctrl-C does: temporary files are removed, no partial output is left, and the exit status is
128 + the signal's number.
"""

from __future__ import annotations

import argparse
import importlib
import os
import signal
import sys

from ..errors import VectorgenError
from .terminal import (PROG, GuardedStdout, WarningPrinter, flush_stdout, install_stop_handlers,
                       signal_name, warn, with_flag_hint)

__all__ = ["COMMAND_MODULES", "CLOBBER_OPTION", "build_parser", "main", "warn"]

COMMAND_MODULES = (
    "vectorgen.cli.render",
    "vectorgen.cli.demo",
    "vectorgen.cli.calibrate",
    "vectorgen.cli.live",
    "vectorgen.cli.measure",
)

CLOBBER_OPTION = "--clobber"
# a command with one of these options writes files (and so takes --clobber)
OUTPUT_DESTS = {"output", "report", "preview", "sheet", "signals", "overlay", "residuals"}


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit status 2
        raise VectorgenError(f"{self.prog}: {message} (see '{self.prog} --help')")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog=PROG, description="Drive XY vector displays: drawings, text and scenes "
                     "to blanked, evenly spaced, corrected X/Y(/Z) deflection signals.")
    from .. import __version__

    parser.add_argument("--version", action="version", version=f"{PROG} {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name in COMMAND_MODULES:
        importlib.import_module(name).register(sub)
    for command in sub.choices.values():
        dests = {a.dest for a in command._actions}
        if dests & OUTPUT_DESTS and "clobber" not in dests:
            command.add_argument(CLOBBER_OPTION, action="store_true",
                                 help="replace an existing output file even when it holds "
                                      "another kind of content (a drawing, a picture, a "
                                      "signal): by default that is refused")
    return parser


def main(argv=None) -> int:
    from .. import files

    restore = install_stop_handlers()
    printer = WarningPrinter()
    stdout = sys.stdout
    sys.stdout = GuardedStdout(stdout)
    try:
        with printer:
            parser = build_parser()
            args = parser.parse_args(argv)
            if not getattr(args, "func", None):
                parser.print_help()
                return 2
            with files.session(overwrite=getattr(args, "clobber", False),
                               overwrite_hint=f"give {CLOBBER_OPTION}"):
                code = int(args.func(args) or 0)
            flush_stdout()
        printer.report()
        return code
    except VectorgenError as exc:
        print(f"{PROG}: error: {with_flag_hint(str(exc), exc.parameter)}", file=sys.stderr)
        return 2
    except KeyboardInterrupt as exc:        # Ctrl-C, or SIGTERM / SIGHUP / SIGQUIT (Stopped)
        files.remove_leftovers()
        signum = getattr(exc, "signum", signal.SIGINT)
        print(f"{PROG}: stopped by {signal_name(signum)}", file=sys.stderr)
        return 128 + int(signum)
    except MemoryError:
        print(f"{PROG}: error: out of memory: the job is too large for this machine",
              file=sys.stderr)
        return 2
    except RecursionError:
        print(f"{PROG}: error: an input is nested too deeply to be read (a file of lists "
              f"inside lists, thousands deep?)", file=sys.stderr)
        return 2
    except Exception as exc:  # an unforeseen failure still ends in one line
        if os.environ.get("VECTORGEN_DEBUG"):
            raise
        text = " ".join(str(exc).split())
        print(f"{PROG}: error: {type(exc).__name__}: {text} (set VECTORGEN_DEBUG=1 for details)",
              file=sys.stderr)
        return 2
    finally:
        files.remove_leftovers()
        restore()
        sys.stdout = stdout


if __name__ == "__main__":
    sys.exit(main())

"""Command line: `vectorgen COMMAND ...`.

Each command lives in a module listed in COMMAND_MODULES with a `register(subparsers)` function
that adds its parser and sets `func(args) -> int`. Modules import their heavy dependencies inside
the functions, so `vectorgen --help` starts fast. Bad input is a `VectorgenError`: one line on
stderr and exit status 2, never a traceback.
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys

from .errors import VectorgenError

COMMAND_MODULES = (
    "vectorgen.cmd_render",
    "vectorgen.cmd_demo",
    "vectorgen.cmd_calibrate",
    "vectorgen.cmd_live",
)

PROG = "vectorgen"


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit status 2
        raise VectorgenError(f"{self.prog}: {message} (see '{self.prog} --help')")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog=PROG, description="Drive XY vector displays: drawings, text and scenes "
                     "to blanked, evenly spaced, corrected X/Y(/Z) deflection signals.")
    from . import __version__

    parser.add_argument("--version", action="version", version=f"{PROG} {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name in COMMAND_MODULES:
        importlib.import_module(name).register(sub)
    return parser


def warn(message: str) -> None:
    print(f"{PROG}: warning: {message}", file=sys.stderr)


def warn_notes(notes) -> None:
    """Each distinct note once, in order, as a warning line."""
    for n in dict.fromkeys(notes):
        warn(n)


def main(argv=None) -> int:
    try:
        parser = build_parser()
        args = parser.parse_args(argv)
        if not getattr(args, "func", None):
            parser.print_help()
            return 2
        return int(args.func(args) or 0)
    except VectorgenError as exc:
        print(f"{PROG}: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"{PROG}: stopped", file=sys.stderr)
        return 130
    except MemoryError:
        print(f"{PROG}: error: out of memory: the job is too large for this machine",
              file=sys.stderr)
        return 2
    except Exception as exc:  # an unforeseen failure still ends in one line
        if os.environ.get("VECTORGEN_DEBUG"):
            raise
        print(f"{PROG}: error: {type(exc).__name__}: {exc} (set VECTORGEN_DEBUG=1 for details)",
              file=sys.stderr)
        return 2


if __name__ == "__main__":
    sys.exit(main())

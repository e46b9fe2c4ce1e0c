"""Command line: `vectorgen COMMAND ...`.

Each command lives in a module listed in COMMAND_MODULES with a `register(subparsers)` function
that adds its parser and sets `func(args) -> int`. Modules import their heavy dependencies inside
the functions, so `vectorgen --help` starts fast. Bad input is a `VectorgenError`: one line on
stderr (with the option that sets the parameter it names) and exit status 2, never a traceback.
The engine's warnings are printed as they happen, each kind once.
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys

from ..errors import VectorgenError
from .terminal import PROG, WarningPrinter, warn, with_flag_hint

__all__ = ["COMMAND_MODULES", "build_parser", "main", "warn"]

COMMAND_MODULES = (
    "vectorgen.cli.render",
    "vectorgen.cli.demo",
    "vectorgen.cli.calibrate",
    "vectorgen.cli.live",
    "vectorgen.cli.measure",
)


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
    return parser


def main(argv=None) -> int:
    try:
        with WarningPrinter():
            parser = build_parser()
            args = parser.parse_args(argv)
            if not getattr(args, "func", None):
                parser.print_help()
                return 2
            return int(args.func(args) or 0)
    except VectorgenError as exc:
        print(f"{PROG}: error: {with_flag_hint(str(exc), exc.parameter)}", file=sys.stderr)
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

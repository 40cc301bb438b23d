"""The ``ptype`` command line.

Each command lives in its own module of this package and exposes
``register(subparsers)``, which adds its parser and sets ``func`` to a callable
taking the parsed arguments and returning an exit status.  Bad input prints
one line on stderr and exits with status 2; there is never a traceback
(set ``PTYPE_DEBUG=1`` to see one for an unexpected failure).
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys

from ptype import __version__

#: Command modules, in the order ``ptype --help`` lists them.
COMMAND_MODULES = ["show", "diagnose", "serve", "timeline", "alerts", "keys", "grid", "verify",
                   "calibrate"]

EXIT_BAD_INPUT = 2


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, status 2, like every other bad input
        self.exit(EXIT_BAD_INPUT, f"{self.prog}: error: {message}\n")


def build_parser() -> argparse.ArgumentParser:
    """The ``ptype`` parser with every command module that is present registered."""
    parser = _Parser(prog="ptype", description=(
        "Diagnose precipitation type at the ground from vertical profiles. "
        "Output is guidance only; official warnings, local codes and licensed practice take "
        "precedence."))
    parser.add_argument("--version", action="version", version=f"ptype {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name in COMMAND_MODULES:
        try:
            module = importlib.import_module(f"{__name__}.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"{__name__}.{name}":
                continue  # command not built yet
            raise
        module.register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Run the command line; the exit status (2 for bad input, with one line on
    stderr)."""
    from ptype.errors import OptionError, ProfileError
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return EXIT_BAD_INPUT
    try:
        return int(args.func(args) or 0)
    except (ProfileError, OptionError) as exc:
        print(f"ptype {args.command}: error: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except (FileNotFoundError, IsADirectoryError, PermissionError) as exc:
        print(f"ptype {args.command}: error: {exc.filename}: {exc.strerror}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        return 130
    except BrokenPipeError:
        return 0
    except Exception as exc:  # last resort: one line, no traceback
        if os.environ.get("PTYPE_DEBUG"):
            raise
        print(f"ptype {args.command}: internal error: {type(exc).__name__}: {exc} "
              "(set PTYPE_DEBUG=1 for details)", file=sys.stderr)
        return 1


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())

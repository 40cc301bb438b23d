"""The ``ptype`` command line.

Each command lives in its own module of this package and exposes
``register(subparsers)``, which adds its parser and sets ``func`` to a callable
taking the parsed arguments and returning an exit status.  Bad input prints
one line on stderr and exits with status 2; there is never a traceback
(set ``PTYPE_DEBUG=1`` to see one for an unexpected failure).

A plain ``pip install ptype`` holds the commands that need no server (``show``,
``diagnose``, ``timeline``, ``grid``, ``verify``).  A command, or an option, that needs an
optional part of the install (an *extra*, see :data:`EXTRA_MODULES`) says which one to
install, on one line, with exit status 2.
"""

from __future__ import annotations

import argparse
import importlib
import importlib.util
import os
import sys

from ptype import __version__

#: Command modules, in the order ``ptype --help`` lists them.
COMMAND_MODULES = ["show", "diagnose", "serve", "timeline", "alerts", "keys", "grid", "verify",
                   "calibrate", "ingest", "watch"]

EXIT_BAD_INPUT = 2

#: The top-level modules each extra of ``pyproject.toml`` installs, by extra.
EXTRA_MODULES: dict[str, tuple[str, ...]] = {
    "plot": ("matplotlib", "metpy", "jinja2"),
    "formats": ("eccodes",),
    "service": ("flask", "gunicorn", "sqlalchemy"),
    "grid": ("distributed",),
    "postgres": ("psycopg",),
    "calibrate": ("sklearn",),
}

#: What a command needs beyond the core install: ``(command, when, extra, modules)``.
#: ``when`` is None (always), an option name (when it is given) or ``option=value``.
NEEDS: tuple[tuple[str, str | None, str, tuple[str, ...]], ...] = (
    ("serve", None, "service", ("flask", "gunicorn", "sqlalchemy", "matplotlib", "metpy")),
    ("keys", None, "service", ("sqlalchemy",)),
    ("alerts", None, "service", ("sqlalchemy",)),
    ("ingest", None, "service", ("sqlalchemy",)),
    ("watch", None, "service", ("sqlalchemy",)),
    ("grid", "scheduler", "grid", ("distributed",)),
    ("grid", "plot", "plot", ("matplotlib",)),
    ("verify", "format=html", "plot", ("matplotlib", "jinja2")),
    ("calibrate", None, "calibrate", ("sklearn",)),
)


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, status 2, like every other bad input
        self.exit(EXIT_BAD_INPUT, f"{self.prog}: error: {message}\n")


def extra_for_module(module: str | None) -> str | None:
    """The extra that installs the top-level module of ``module`` (a dotted name), or None."""
    top = (module or "").partition(".")[0]
    for extra, modules in EXTRA_MODULES.items():
        if top in modules:
            return extra
    return None


def missing_extra_message(command: str, extra: str, missing: list[str] | tuple[str, ...]) -> str:
    """The one line that says which extra a command needs."""
    return (f"ptype {command}: needs the optional '{extra}' part of ptype "
            f"({', '.join(missing)} not installed): pip install 'ptype[{extra}]'")


def _installed(module: str) -> bool:
    try:
        return importlib.util.find_spec(module) is not None
    except (ImportError, ValueError):
        return False


def _applies(args: argparse.Namespace, when: str | None) -> bool:
    if when is None:
        return True
    name, _, value = when.partition("=")
    given = getattr(args, name, None)
    return given == value if value else bool(given)


def missing_extra(args: argparse.Namespace) -> tuple[str, list[str]] | None:
    """``(extra, missing modules)`` when the parsed command needs an extra not installed."""
    for command, when, extra, modules in NEEDS:
        if args.command == command and _applies(args, when):
            missing = [m for m in modules if not _installed(m)]
            if missing:
                return extra, missing
    return None


def _register_unavailable(sub, name: str, extra: str, module: str) -> None:
    """A command whose module cannot be imported without ``extra``: it says so when run."""
    p = sub.add_parser(name, help=f"(needs pip install 'ptype[{extra}]')", add_help=False)
    p.add_argument("rest", nargs=argparse.REMAINDER, help=argparse.SUPPRESS)
    p.set_defaults(func=lambda args: _refuse(name, extra, [module]))


def _refuse(command: str, extra: str, missing: list[str]) -> int:
    print(missing_extra_message(command, extra, missing), file=sys.stderr)
    return EXIT_BAD_INPUT


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
            extra = extra_for_module(exc.name)
            if extra is None:
                raise
            _register_unavailable(sub, name, extra, exc.name.partition(".")[0])
            continue
        module.register(sub)
    return parser


#: Library hints that name a Python argument, and what a terminal user types instead.
LIBRARY_HINTS = {"pass format= explicitly": "name it with --input-format json|csv|temp|netcdf"}


def cli_words(message: str, args: argparse.Namespace, field: str | None = None) -> str:
    """``message`` in terms of the command's options: a library's ``members = -1: ...``
    becomes ``--members -1: ...`` when the command has that option, and hints about Python
    arguments name the option to use instead."""
    if field and hasattr(args, field) and message.startswith(f"{field} = "):
        message = f"--{field.replace('_', '-')} {message[len(field) + 3:]}"
    for hint, option in LIBRARY_HINTS.items():
        if hint in message:
            flag = option.split()[3]
            usable = hasattr(args, flag.lstrip("-").replace("-", "_"))
            message = message.replace(hint, option if usable else
                                      "give the file a .json, .csv or .txt (TEMP) name")
    return message


def main(argv: list[str] | None = None) -> int:
    """Run the command line; the exit status (2 for bad input, with one line on
    stderr)."""
    from ptype.errors import OptionError, ProfileError
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return EXIT_BAD_INPUT
    needed = missing_extra(args)
    if needed is not None:
        return _refuse(args.command, *needed)
    try:
        return int(args.func(args) or 0)
    except (ProfileError, OptionError) as exc:
        message = cli_words(str(exc), args, getattr(exc, "field", None))
        print(f"ptype {args.command}: error: {message}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except (FileNotFoundError, IsADirectoryError, PermissionError) as exc:
        print(f"ptype {args.command}: error: {exc.filename}: {exc.strerror}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        return 130
    except BrokenPipeError:
        return 0
    except Exception as exc:  # last resort: one line, no traceback
        # An optional part found missing only while running still names its extra.
        extra = extra_for_module(exc.name) if isinstance(exc, ModuleNotFoundError) else None
        if extra is not None:
            return _refuse(args.command, extra, [exc.name.partition(".")[0]])
        if os.environ.get("PTYPE_DEBUG"):
            raise
        print(f"ptype {args.command}: internal error: {type(exc).__name__}: {exc} "
              "(set PTYPE_DEBUG=1 for details)", file=sys.stderr)
        return 1


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())

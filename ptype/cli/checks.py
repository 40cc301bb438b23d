"""Checks of output paths, run by a command before any work starts.

A command that computes for minutes must not fail at the end because its output folder is
missing or read-only: every path it will write is checked first, and a problem is an
:class:`~ptype.errors.OptionError` naming the option (one line, exit status 2).
"""

from __future__ import annotations

import os
from pathlib import Path

from ptype.errors import OptionError

#: File kinds matplotlib writes for ``--plot`` (by suffix).
FIGURE_SUFFIXES = (".png", ".svg", ".pdf")


def _field(option: str) -> str:
    return option.lstrip("-").replace("-", "_")


def writable_file(path: str | os.PathLike, option: str) -> Path:
    """``path`` as a file the command can create or replace: its folder exists and is
    writable, and it is not a folder itself."""
    target = Path(path)
    folder = target.parent if str(target.parent) else Path(".")
    if target.is_dir():
        raise OptionError(f"{option} {path}: is a folder, expected a file name",
                          field=_field(option))
    if not folder.is_dir():
        raise OptionError(f"{option} {path}: the folder {folder} does not exist",
                          field=_field(option))
    if not os.access(folder, os.W_OK | os.X_OK) or (target.exists()
                                                    and not os.access(target, os.W_OK)):
        raise OptionError(f"{option} {path}: no permission to write there",
                          field=_field(option))
    return target


def figure_file(path: str | os.PathLike, option: str) -> Path:
    """``path`` as a figure to write: a writable file with a suffix we can draw."""
    target = writable_file(path, option)
    if target.suffix.lower() not in FIGURE_SUFFIXES:
        raise OptionError(f"{option} {path}: expected a file ending in "
                          f"{', '.join(FIGURE_SUFFIXES)}", field=_field(option))
    return target


def writable_folder(path: str | os.PathLike, option: str) -> Path:
    """``path`` as a folder to write into: an existing writable folder, or one that can be
    made (its nearest existing parent is a writable folder).  Nothing is created here."""
    target = Path(path)
    if target.exists() and not target.is_dir():
        raise OptionError(f"{option} {path}: exists and is not a folder", field=_field(option))
    existing = target
    while not existing.exists():
        existing = existing.parent
    if not existing.is_dir():
        raise OptionError(f"{option} {path}: {existing} is not a folder", field=_field(option))
    if not os.access(existing, os.W_OK | os.X_OK):
        raise OptionError(f"{option} {path}: no permission to write in {existing}",
                          field=_field(option))
    return target


def distinct(paths: dict[str, str | os.PathLike | None], inputs: list[str]) -> None:
    """Refuse two outputs on one file, or an output on an input."""
    seen: dict[str, str] = {os.path.abspath(p): "an input file" for p in inputs}
    for option, path in paths.items():
        if path is None:
            continue
        key = os.path.abspath(path)
        if key in seen:
            raise OptionError(f"{option} {path}: would overwrite {seen[key]}",
                              field=_field(option))
        seen[key] = option

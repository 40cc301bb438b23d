"""Readers: turn files or text in any supported format into a :class:`~ptype.profile.Profile`.

``read_profile(path_or_text, format=None)`` detects the format from the file
extension or, for text, from its content.  Each format lives in its own module
and returns a profile *document* (dict); validation is shared.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

from ptype.errors import ReaderError
from ptype.profile import Profile
from ptype.readers import csv_format, json_format

FORMATS = ("json", "csv", "temp", "netcdf", "bufr")
_EXTENSIONS = {".json": "json", ".csv": "csv", ".txt": "temp", ".temp": "temp", ".tmp": "temp",
               ".nc": "netcdf", ".nc4": "netcdf", ".cdf": "netcdf", ".bufr": "bufr",
               ".bfr": "bufr", ".bufr4": "bufr"}


def detect_format(text: str) -> str:
    """Guess the format of a text: JSON object, CSV with a header, or WMO TEMP."""
    stripped = text.lstrip()
    if stripped.startswith(("{", "[")):
        return "json"
    upper = stripped.upper()
    if "TTAA" in upper or "TTBB" in upper:
        return "temp"
    for line in stripped.splitlines():
        line = line.strip()
        if not line or line.startswith("#"):
            continue
        if "," in line and "pressure_hpa" in line.lower():
            return "csv"
        break
    raise ReaderError("could not tell the format: expected a JSON object, a CSV header naming "
                      "pressure_hpa, or a WMO TEMP message (TTAA/TTBB); pass format= explicitly")


def _is_path(source: Any) -> bool:
    if isinstance(source, Path):
        return True
    if isinstance(source, str) and "\n" not in source and len(source) < 4096:
        s = source.strip()
        if s.startswith("{") or s.upper().startswith("TT"):
            return False
        return os.path.exists(s) or s.endswith(tuple(_EXTENSIONS))
    return False


def read_document(source: str | os.PathLike | bytes,
                  format: str | None = None) -> tuple[dict, str]:
    """Read ``source`` into a profile document.

    Parameters
    ----------
    source : str, os.PathLike or bytes
        A file path, or the content itself (text or bytes).
    format : {"json", "csv", "temp", "netcdf"}, optional
        Skip detection from the extension or the content.

    Returns
    -------
    (dict, str)
        The document and a name for the source in messages (the file name, or ``<text>``).

    Raises
    ------
    ptype.errors.ReaderError
        The source cannot be read; the message names it and what was expected.
    """
    if format is not None and format not in FORMATS:
        raise ReaderError(f"format {format!r} is not supported; expected one of "
                          f"{', '.join(FORMATS)}")
    if _is_path(source):
        return _read_path(Path(source), format)
    if isinstance(source, bytes):
        from ptype.readers import bufr_format
        if format == "bufr" or (format is None and bufr_format.is_bufr(source)):
            return _single(bufr_format.read_bufr_documents(source), "<bytes>"), "<bytes>"
        if format == "netcdf" or source[:3] == b"CDF" or source[:4] == b"\x89HDF":
            from ptype.readers import netcdf_format
            return netcdf_format.read_netcdf_document(source), "<text>"
        try:
            text = source.decode("utf-8-sig")
        except UnicodeDecodeError:
            raise ReaderError("<text>: not UTF-8 text") from None
    elif isinstance(source, str):
        text = source.removeprefix("\ufeff")
    else:
        raise ReaderError(f"expected a path, text or bytes, got {type(source).__name__}")
    return _read_text(text, format, "<text>"), "<text>"


def _read_path(path: Path, format: str | None) -> tuple[dict, str]:
    """A file, by the format given or its extension (NetCDF is read from the file itself)."""
    name = str(path)
    if not path.exists():
        raise ReaderError(f"{name}: no such file")
    fmt = format or _EXTENSIONS.get(path.suffix.lower())
    if fmt is None and _starts_with(path, b"BUFR"):
        fmt = "bufr"
    if fmt == "bufr":
        from ptype.readers import bufr_format
        return _single(bufr_format.read_bufr_documents(path), name), name
    if fmt == "netcdf":
        from ptype.readers import netcdf_format
        return netcdf_format.read_netcdf_document(path), name
    try:
        text = path.read_text(encoding="utf-8-sig")  # tolerate a byte-order mark
    except UnicodeDecodeError:
        raise ReaderError(f"{name}: not a UTF-8 text file") from None
    except OSError as exc:
        raise ReaderError(f"{name}: cannot be read ({exc.strerror})") from None
    return _read_text(text, fmt, name), name


def _starts_with(path: Path, magic: bytes) -> bool:
    try:
        with path.open("rb") as f:
            return f.read(len(magic)) == magic
    except OSError:
        return False


def _single(documents: list[dict], name: str) -> dict:
    """The one profile of a source that may hold several (BUFR)."""
    if len(documents) != 1:
        raise ReaderError(f"{name}: holds {len(documents)} profiles; expected one here "
                          "(ptype.read_profiles reads them all)")
    return documents[0]


def read_documents(source: str | os.PathLike | bytes,
                   format: str | None = None) -> tuple[list[dict], str]:
    """Every profile document of ``source``: several for a BUFR file with several subsets or
    messages or a TEMP text with several ascents, else the one of :func:`read_document`."""
    from ptype.readers import bufr_format
    if isinstance(source, bytes) and (format == "bufr" or (
            format is None and bufr_format.is_bufr(source))):
        return bufr_format.read_bufr_documents(source), "<bytes>"
    if _is_path(source):
        path = Path(source)
        fmt = format or _EXTENSIONS.get(path.suffix.lower())
        if path.exists() and (fmt == "bufr" or (fmt is None and _starts_with(path, b"BUFR"))):
            return bufr_format.read_bufr_documents(path), str(path)
        if path.exists() and fmt == "temp":
            from ptype.readers import temp_format
            try:
                text = path.read_text(encoding="utf-8-sig")
            except (UnicodeDecodeError, OSError):
                text = None
            if text is not None:
                return temp_format.read_temp_documents(text, str(path)), str(path)
    document, name = read_document(source, format)
    return [document], name


def read_profiles(path_or_bytes: str | os.PathLike | bytes,
                  format: str | None = None) -> list[Profile]:
    """Every profile of a file or byte string (see :func:`read_documents`), validated."""
    documents, name = read_documents(path_or_bytes, format)
    return [_validated(document, name) for document in documents]


def _read_text(text: str, fmt: str | None, name: str) -> dict:
    """Text in ``fmt`` (detected from the content when None) as a profile document."""
    if fmt is None:
        fmt = detect_format(text)
    if fmt == "json":
        return json_format.read_json_document(text, name)
    if fmt == "csv":
        return csv_format.read_csv_document(text, name)
    if fmt == "temp":
        from ptype.readers import temp_format
        return temp_format.read_temp_document(text, name)
    if fmt == "netcdf":
        raise ReaderError(f"{name}: NetCDF must be given as a file path or bytes")
    raise ReaderError(f"{name}: format {fmt!r} is not supported")


def read_profile(path_or_text: str | os.PathLike | bytes, format: str | None = None) -> Profile:
    """Read one profile from a file path, text or bytes.

    Parameters
    ----------
    path_or_text : str, os.PathLike or bytes
        A path to a ``.json``, ``.csv``, ``.txt``/``.temp`` (WMO TEMP), ``.nc`` or ``.bufr``
        (WMO BUFR radiosonde report) file, or the content itself (BUFR and NetCDF as bytes).
    format : {"json", "csv", "temp", "netcdf", "bufr"}, optional
        Skip detection.

    Raises
    ------
    ptype.errors.ReaderError
        The source cannot be read; the message names it and the line or group.
    ptype.errors.ProfileError
        The content was read but is not a valid profile.
    """
    document, name = read_document(path_or_text, format)
    return _validated(document, name)


def _validated(document: dict, name: str) -> Profile:
    """A document as a validated profile; problems name the source."""
    from ptype.errors import ProfileError
    from ptype.profile.document import parse_document
    try:
        return Profile.from_document(parse_document(document))
    except ReaderError:
        raise
    except ProfileError as exc:
        if name != "<text>":
            raise ProfileError(f"{name}: {exc.message}", field=exc.field) from None
        raise

"""One error boundary per input path: every failure while reading a file becomes an InputError.

Readers check what they know how to check and raise
:class:`~basiswise.data_adapters.errors.InputError` with the row, column or key. Whatever else
goes wrong inside a reader — a library's parse error, a file that is not what its suffix says, an
over-long path, recursion, a time-zone clash, an overflow — is caught here at the edge of the
reader and reported as one line naming the file, so the command line never shows a traceback for
bad input. Interrupts (``KeyboardInterrupt``, ``SystemExit``) pass through untouched.
"""

from __future__ import annotations

import contextlib
import errno
import sqlite3
import zipfile
from collections.abc import Iterator, Mapping
from pathlib import Path
from typing import Any

from basiswise.data_adapters.errors import InputError

__all__ = ["MAX_DEPTH", "check_depth", "input_boundary", "plain_reason", "safe_exists"]

#: Deepest nesting of tables and arrays accepted in a TOML file (books nest three levels).
MAX_DEPTH = 16


def plain_reason(exc: BaseException, what: str = "file") -> str:
    """What went wrong, in plain words, for an exception raised while reading ``what``."""
    if isinstance(exc, RecursionError):
        return f"the {what} is nested too deeply to read"
    if isinstance(exc, MemoryError):
        return f"the {what} is too large to read into memory"
    if isinstance(exc, OSError):
        if exc.errno == errno.ENAMETOOLONG:
            return "the path is too long for the file system"
        if exc.errno in (errno.EACCES, errno.EPERM):
            return "permission denied"
        if exc.errno == errno.ENOENT:
            return f"{what} not found"
        if exc.errno == errno.EISDIR:
            return f"is a folder, not a {what}"
        return f"cannot use the {what}: {exc.strerror or exc}"
    if isinstance(exc, zipfile.BadZipFile | KeyError) and what.endswith("workbook"):
        return "not a readable Excel workbook (an .xlsx file is a zip archive; this one is " \
               "empty, truncated or of another kind — save it again, or as CSV)"
    if isinstance(exc, zipfile.BadZipFile):
        return "not a readable Excel workbook (empty, truncated or of another kind)"
    if isinstance(exc, sqlite3.DatabaseError):
        return f"not a readable SQLite database ({exc}); the file may be truncated or of " \
               "another kind"
    if isinstance(exc, UnicodeError):
        return "not UTF-8 text"
    text = str(exc)
    if "timezone" in text.lower() or "tz-aware" in text.lower() or "tz-naive" in text.lower():
        return "dates mix time zones (or zoned and plain dates); write plain dates like " \
               "2024-03-15"
    if isinstance(exc, OverflowError):
        return f"a number in the {what} is too large ({text})"
    name = type(exc).__name__
    return f"cannot read the {what}: {name}: {text}"


@contextlib.contextmanager
def input_boundary(source: str | Path, what: str = "file", **where: Any) -> Iterator[None]:
    """Re-raise any failure inside the block as an :class:`InputError` naming ``source``.

    ``InputError`` passes through unchanged; ``KeyboardInterrupt`` and ``SystemExit`` are not
    caught. ``where`` (``key=``, ``row=``, ``column=``) adds a location to the new error.
    """
    try:
        yield
    except InputError:
        raise
    except Exception as exc:  # the boundary's whole point: nothing escapes as a traceback
        raise InputError(plain_reason(exc, what), file=str(source), **where) from None


def check_depth(data: Any, source: str, limit: int = MAX_DEPTH) -> None:
    """Refuse parsed documents nested deeper than ``limit`` (iteratively: no recursion)."""
    stack: list[tuple[Any, int]] = [(data, 0)]
    while stack:
        item, depth = stack.pop()
        if depth > limit:
            raise InputError(f"tables or arrays are nested more than {limit} levels deep",
                             file=source)
        if isinstance(item, Mapping):
            stack.extend((v, depth + 1) for v in item.values())
        elif isinstance(item, list):
            stack.extend((v, depth + 1) for v in item)


def safe_exists(path: Path) -> bool:
    """``path.exists()`` that treats an unusable path (too long, NUL) as not there."""
    try:
        return path.exists()
    except (OSError, ValueError):
        return False

"""Atomic output: a file is either fully written or not touched.

Writers write to a temporary file in the target's folder and rename it over the target only when
writing succeeded (:func:`os.replace` is atomic on POSIX and Windows within one file system). On
any error — or an interrupt — the temporary file is removed and an existing target is left as it
was. :func:`check_target` is called before any work starts: the folder must exist and take a
new file, and the target must not be one of the run's input files. CSV text cells that a
spreadsheet would run as a formula are neutralised (:func:`neutralise_cells`).

References
----------
OWASP Foundation, "CSV Injection" (community page): prefix cells beginning with ``=``, ``+``,
``-``, ``@``, tab or carriage return with a single quote.
"""

from __future__ import annotations

import contextlib
import errno
import os
import re
import tempfile
from collections.abc import Callable, Iterator
from pathlib import Path

import pandas as pd

from basiswise.data_adapters.boundary import plain_reason
from basiswise.data_adapters.errors import InputError

__all__ = ["atomic_path", "atomic_write", "check_target", "neutralise_cells", "write_csv_atomic",
           "write_text_atomic"]

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_CONTROL = re.compile(r"[\x00-\x1f\x7f-\x9f]")
_NUMBER = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")

_UMASK = os.umask(0)
os.umask(_UMASK)


@contextlib.contextmanager
def atomic_path(path: str | Path) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success it replaces ``path``.

    Raises
    ------
    InputError
        If the target's folder does not exist or the target is a folder.
    """
    target = Path(path)
    folder = target.parent
    if not folder.is_dir():
        raise InputError(f"folder {str(folder)!r} does not exist", file=str(path))
    if target.is_dir():
        raise InputError("is a folder, not a file", file=str(path))
    fd, tmp_name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=folder)
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        yield tmp
        mode = (target.stat().st_mode & 0o777) if target.exists() else (0o666 & ~_UMASK)
        os.chmod(tmp, mode)
        with open(tmp, "rb") as fh:
            os.fsync(fh.fileno())
        os.replace(tmp, target)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        raise


def _same_file(a: Path, b: Path) -> bool:
    try:
        if a.exists() and b.exists():
            return os.path.samefile(a, b)
        return a.resolve() == b.resolve()
    except (OSError, ValueError):
        return False


def check_target(path: str | Path, *, inputs: list[str | Path] = (), option: str = "") -> Path:
    """Refuse an output path before any work starts; returns it as a Path.

    Refused: a folder that does not exist or will not take a new file (permissions, read-only
    file system), a target that is a folder, and a target that is one of ``inputs`` (the book,
    its price or expiries file, the scenario file): a result is never written over its input.

    Raises
    ------
    InputError
        Naming the path (and ``option``, e.g. ``--trades``, as its key).
    """
    target = Path(path)
    key = option or None
    try:
        folder = target.parent
        if not folder.is_dir():
            raise InputError(f"folder {str(folder)!r} does not exist", file=str(path), key=key)
        if target.is_dir():
            raise InputError("is a folder, not a file", file=str(path), key=key)
        for item in inputs:
            if item is not None and _same_file(target, Path(item)):
                raise InputError(f"is an input file of this run ({Path(item).name}); choose "
                                 "another output path", file=str(path), key=key)
        if target.exists() and not os.access(target, os.W_OK):
            raise InputError("the existing file is not writable", file=str(path), key=key)
        fd, probe = tempfile.mkstemp(prefix=f".{target.name[:40]}.", suffix=".check",
                                     dir=folder)
        os.close(fd)
        os.unlink(probe)
    except InputError:
        raise
    except OSError as exc:
        reason = "permission denied" if exc.errno in (errno.EACCES, errno.EPERM, errno.EROFS) \
            else plain_reason(exc, "output folder")
        raise InputError(f"cannot create a file in this folder: {reason}", file=str(path),
                         key=key) from None
    return target


def neutralise_cells(df: pd.DataFrame) -> pd.DataFrame:
    """A copy safe to open in a spreadsheet: text cells never start a formula.

    In text cells, control characters (newline, escape, …) become spaces, and a cell starting
    with ``=``, ``+``, ``-``, ``@``, tab or carriage return gets a leading single quote, unless
    it is a plain number (``-12.5`` stays a number). Numeric columns are left as they are.
    """
    out = df.copy()
    out.columns = [_neutral(str(c)) for c in out.columns]
    for col in out.columns:
        if out[col].dtype == object or pd.api.types.is_string_dtype(out[col]):
            out[col] = out[col].map(lambda v: _neutral(v) if isinstance(v, str) else v)
    return out


def _neutral(text: str) -> str:
    lead = text[:1]
    clean = _CONTROL.sub(" ", text)
    if lead in _FORMULA_START and not _NUMBER.match(text.strip()):
        return "'" + clean
    return clean


def atomic_write(path: str | Path, write_fn: Callable[[Path], object]) -> Path:
    """Call ``write_fn(tmp_path)`` and move the result onto ``path``; returns ``path``."""
    with atomic_path(path) as tmp:
        write_fn(tmp)
    return Path(path)


def write_csv_atomic(df: pd.DataFrame, path: str | Path, *, index: bool = False, **kw) -> Path:
    """Write a DataFrame as CSV atomically (``index`` off by default; ``kw`` to ``to_csv``).

    Text cells are passed through :func:`neutralise_cells` first.
    """
    safe = neutralise_cells(df)
    return atomic_write(path, lambda tmp: safe.to_csv(tmp, index=index, **kw))


def write_text_atomic(text: str, path: str | Path, *, encoding: str = "utf-8") -> Path:
    """Write text atomically."""
    return atomic_write(path, lambda tmp: tmp.write_text(text, encoding=encoding))

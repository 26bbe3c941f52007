"""Atomic output: a file is either fully written or not touched.

Writers write to a temporary file in the target's folder and rename it over the target only when
writing succeeded (:func:`os.replace` is atomic on POSIX and Windows within one file system). On
any error the temporary file is removed and an existing target is left as it was.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Callable, Iterator
from pathlib import Path

import pandas as pd

from basiswise.data_adapters.errors import InputError

__all__ = ["atomic_path", "atomic_write", "write_csv_atomic", "write_text_atomic"]

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


def atomic_write(path: str | Path, write_fn: Callable[[Path], object]) -> Path:
    """Call ``write_fn(tmp_path)`` and move the result onto ``path``; returns ``path``."""
    with atomic_path(path) as tmp:
        write_fn(tmp)
    return Path(path)


def write_csv_atomic(df: pd.DataFrame, path: str | Path, *, index: bool = False, **kw) -> Path:
    """Write a DataFrame as CSV atomically (``index`` off by default; ``kw`` to ``to_csv``)."""
    return atomic_write(path, lambda tmp: df.to_csv(tmp, index=index, **kw))


def write_text_atomic(text: str, path: str | Path, *, encoding: str = "utf-8") -> Path:
    """Write text atomically."""
    return atomic_write(path, lambda tmp: tmp.write_text(text, encoding=encoding))

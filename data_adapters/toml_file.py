"""Read a TOML file with one clear error for each way it can fail."""

from __future__ import annotations

import tomllib
from pathlib import Path

from .boundary import check_depth, input_boundary
from .errors import InputError


def read_toml(path: str | Path, what: str = "file") -> dict:
    """Parse ``path`` as TOML; ``what`` names the kind of file in messages ("book file", …).

    Every failure is an :class:`InputError` naming the file: missing, a folder, unreadable, not
    UTF-8, a syntax error (with its line), or nesting deeper than
    :data:`~data_adapters.boundary.MAX_DEPTH` (which would otherwise exhaust recursion).
    """
    p, source = Path(path), str(path)
    with input_boundary(source, what):
        if not p.exists():
            raise InputError(f"{what} not found", file=source)
        if p.is_dir():
            raise InputError(f"is a folder, not a {what}", file=source)
        try:
            with p.open("rb") as fh:
                data = tomllib.load(fh)
        except tomllib.TOMLDecodeError as err:
            raise InputError(f"TOML syntax error: {err}", file=source) from None
        except UnicodeDecodeError as err:
            raise InputError(f"not UTF-8 text: {err.reason}", file=source) from None
        except OSError as err:
            raise InputError(f"cannot read: {err.strerror}", file=source) from None
        check_depth(data, source)
        return data

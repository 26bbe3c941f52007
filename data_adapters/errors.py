"""The one exception type for bad input.

Every problem with a file the user wrote (book, price history, scenario file) is raised as
:class:`InputError`. The message names the place at fault so that the command line can print
``str(err)`` once and exit, and a notebook user sees the same one line.
:func:`from_validation_error` turns a pydantic validation failure of a structured file into one
such error naming the key.
"""

from __future__ import annotations

import re
import types
import typing
from collections.abc import Iterable, Mapping
from pathlib import Path
from typing import Any

from pydantic import BaseModel, ValidationError

__all__ = ["MAX_MESSAGE", "InputError", "from_validation_error", "shorten", "summarise"]

#: Longest message line (characters) an :class:`InputError` prints; longer ones are cut.
MAX_MESSAGE = 300
_CONTROL = re.compile(r"[\x00-\x1f\x7f-\x9f]")


def _clean(text: str) -> str:
    """One line of plain text: control characters (newline, escape, …) become spaces."""
    return _CONTROL.sub(" ", text)


def shorten(value: Any, limit: int = 60) -> str:
    """``repr(value)`` cut to ``limit`` characters (``…`` marks the cut), one line.

    Examples
    --------
    >>> shorten("x" * 100, 12)
    "'xxxxxxxxxx…"
    """
    text = _clean(repr(value))
    return text if len(text) <= limit else text[: limit - 1] + "…"


def summarise(items: Iterable[Any], limit: int = 5, *, quote: bool = True) -> str:
    """The first ``limit`` items, comma-separated, then ``and N more``.

    Examples
    --------
    >>> summarise(["a", "b", "c"], 2)
    "'a', 'b' and 1 more"
    """
    items = list(items)
    shown = ", ".join(shorten(x, 40) if quote else _clean(str(x))[:40] for x in items[:limit])
    more = len(items) - limit
    return f"{shown} and {more} more" if more > 0 else shown


class InputError(ValueError):
    """Bad input, with the place at fault.

    Parameters
    ----------
    message : str
        What is wrong, in plain words (no location; that is added from the keywords).
    file : str or Path, optional
        The file at fault, shown as given.
    row : int, optional
        Row as a person sees it in the file: 1-based, the header line is row 1, so the first data
        row is row 2.
    column : str, optional
        Column (series) name.
    key : str, optional
        Key inside a structured file, e.g. ``exposure[3].series`` or
        ``instrument 'CRD-M1'.contract_size``.

    Examples
    --------
    >>> str(InputError("must be > 0", file="book.toml", key="instrument[2].contract_size"))
    "book.toml, key 'instrument[2].contract_size': must be > 0"
    >>> str(InputError("price must be positive", file="prices.csv", row=14, column="diesel_m1"))
    "prices.csv, row 14, column 'diesel_m1': price must be positive"
    """

    def __init__(
        self,
        message: str,
        *,
        file: str | Path | None = None,
        row: int | None = None,
        column: str | None = None,
        key: str | None = None,
    ) -> None:
        self.message = str(message)
        self.file = None if file is None else str(file)
        self.row = None if row is None else int(row)
        self.column = None if column is None else str(column)
        self.key = None if key is None else str(key)
        super().__init__(self.message)

    def where(self) -> str:
        """The location part of the message (may be empty)."""
        parts: list[str] = []
        if self.file is not None:
            parts.append(self.file)
        if self.row is not None:
            parts.append(f"row {self.row}")
        if self.column is not None:
            parts.append(f"column {self.column!r}")
        if self.key is not None:
            parts.append(f"key {self.key!r}")
        return ", ".join(parts)

    def __str__(self) -> str:
        """One line of at most :data:`MAX_MESSAGE` characters (long paths and values cut)."""
        where = self.where()
        if len(where) > MAX_MESSAGE // 2:  # a very long path: keep its end, the file name
            where = "…" + where[-(MAX_MESSAGE // 2 - 1):]
        text = _clean(f"{where}: {self.message}" if where else self.message)
        text = " ".join(text.split())
        return text if len(text) <= MAX_MESSAGE else text[: MAX_MESSAGE - 1] + "…"

    def __repr__(self) -> str:
        return f"InputError({str(self)!r})"

    def __reduce__(self):  # keep keywords when pickled (e.g. across dask workers)
        return (_rebuild, (self.message, self.file, self.row, self.column, self.key))


def _rebuild(message, file, row, column, key) -> InputError:
    return InputError(message, file=file, row=row, column=column, key=key)


# --------------------------------------------------------------------------- pydantic errors


def _entry_key(table: str, index: int, raw: Any) -> str:
    """``instrument 'CRD-M1'`` if the entry has a usable id, else ``instrument[2]`` (1-based)."""
    entry_id = raw.get("id") if isinstance(raw, dict) else None
    if isinstance(entry_id, str) and entry_id:
        return f"{table} {entry_id!r}"
    return f"{table}[{index + 1}]"


def _format_loc(loc: tuple, data: Mapping, id_tables: Iterable[str]) -> str:
    parts: list[str] = []
    i = 0
    while i < len(loc):
        elem = loc[i]
        if (
            i == 0
            and elem in id_tables
            and len(loc) > 1
            and isinstance(loc[1], int)
            and isinstance(data.get(elem), list)
        ):
            raw = data[elem][loc[1]] if loc[1] < len(data[elem]) else None
            parts.append(_entry_key(str(elem), loc[1], raw))
            i += 2
            continue
        if isinstance(elem, int):
            if parts:
                parts[-1] += f"[{elem + 1}]"
            else:
                parts.append(f"[{elem + 1}]")
        else:
            parts.append(str(elem))
        i += 1
    return ".".join(parts)


def _unwrap(ann: Any) -> Any:
    origin = typing.get_origin(ann)
    if origin in (typing.Union, types.UnionType):
        args = [a for a in typing.get_args(ann) if a is not type(None)]
        return args[0] if len(args) == 1 else ann
    return ann


def _model_at(root: type[BaseModel], loc: Iterable) -> type[BaseModel] | None:
    """The model class that validates the table at ``loc`` (None if not a table)."""
    ann: Any = root
    for elem in loc:
        ann = _unwrap(ann)
        origin = typing.get_origin(ann)
        if isinstance(ann, type) and issubclass(ann, BaseModel) and isinstance(elem, str):
            match = [f for n, f in ann.model_fields.items() if (f.alias or n) == elem]
            if not match:
                return None
            ann = match[0].annotation
        elif origin is list and isinstance(elem, int):
            ann = typing.get_args(ann)[0]
        elif origin is dict and isinstance(elem, str):
            ann = typing.get_args(ann)[1]
        else:
            return None
    ann = _unwrap(ann)
    return ann if isinstance(ann, type) and issubclass(ann, BaseModel) else None


def from_validation_error(
    err: ValidationError,
    data: Mapping,
    *,
    source: str,
    root: type[BaseModel],
    id_tables: Iterable[str] = (),
    words: Mapping[str, str] | None = None,
) -> InputError:
    """The first pydantic error of a structured file as one :class:`InputError`.

    Parameters
    ----------
    err : pydantic.ValidationError
        Raised while validating ``data`` with ``root``.
    data : mapping
        The parsed file, used to name array entries by their ``id``.
    source : str
        The file, as named in the message.
    root : pydantic model class
        The top-level model (used to list the allowed keys next to an unknown one).
    id_tables : iterable of str
        Top-level arrays of tables whose entries are named by id (``instrument 'X'``) rather than
        by 1-based position (``instrument[2]``).
    words : mapping, optional
        Plain-words messages for pattern mismatches, by field name.
    """
    id_tables = tuple(id_tables)
    first = err.errors()[0]
    loc = tuple(first["loc"])
    key = _format_loc(loc, data, id_tables) or None
    kind = first["type"]
    value = first.get("input")
    words = words or {}
    if kind == "missing":
        message = "required key is missing"
    elif kind == "extra_forbidden":
        model = _model_at(root, loc[:-1])
        allowed = ""
        if model is not None:
            names = ", ".join((f.alias or n) for n, f in model.model_fields.items())
            allowed = f" (allowed here: {names})"
        message = f"unknown key; check the spelling{allowed}"
    elif kind == "literal_error":
        expected = first.get("ctx", {}).get("expected", "")
        message = f"{shorten(value)} is not valid; use one of: {expected}"
    elif kind == "model_type":
        message = f"must be a table of keys, got {shorten(value)}"
    elif kind == "string_pattern_mismatch" and loc and loc[-1] in words:
        message = f"{words[loc[-1]]} (got {shorten(value)})"
    else:
        text = str(first["msg"]).removeprefix("Value error, ")
        text = text.replace("Input should be", "must be", 1)
        message = f"{text[:1].lower()}{text[1:]} (got {shorten(value)})"
    return InputError(message, file=source, key=key)

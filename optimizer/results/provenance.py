"""Where a trade list comes from: as-of date, content hashes of the inputs, tool version."""

from __future__ import annotations

import hashlib
from importlib import metadata
from pathlib import Path

__all__ = ["provenance", "sha256_of"]


def sha256_of(path: Path) -> str | None:
    """SHA-256 of a file's bytes (hex), or None when it cannot be read."""
    try:
        h = hashlib.sha256()
        with open(path, "rb") as f:
            for chunk in iter(lambda: f.read(1 << 20), b""):
                h.update(chunk)
        return h.hexdigest()
    except OSError:
        return None


def tool_version() -> str:
    try:
        return metadata.version("basiswise")
    except metadata.PackageNotFoundError:
        return "unknown"


def provenance(book, last_price_date=None) -> dict:
    """``as_of`` (the book's, else the last price date), hashes of book and prices, version."""
    as_of = book.book.as_of or (None if last_price_date is None else last_price_date.date())
    return {"as_of": None if as_of is None else str(as_of),
            "book_sha256": sha256_of(book.path),
            "prices_sha256": sha256_of(book.prices_path),
            "tool_version": tool_version()}

"""The demo book and its invented price history (see :mod:`basiswise.scenarios.generate_demo`)."""

from __future__ import annotations

from pathlib import Path

__all__ = ["demo_book_path"]


def demo_book_path() -> Path:
    """Path of the committed demo book ``scenarios/demo/book.toml`` (prices beside it).

    Returns
    -------
    pathlib.Path
        Absolute path; regenerate the files with ``python -m basiswise.scenarios.generate_demo``.
    """
    return Path(__file__).resolve().parent / "demo" / "book.toml"

"""Shared pieces of the command line: consoles, exit codes, the input-error guard."""

from __future__ import annotations

import functools

import typer
from rich.console import Console

from basiswise.data_adapters.errors import InputError

# piped output gets a width that fits the widest table instead of rich's default 80
out = Console() if Console().is_terminal else Console(width=130)
err = Console(stderr=True, soft_wrap=True)  # an error stays on one line

EXIT_INPUT = 2
EXIT_NO_HEDGE = 3


def fail(message: str, code: int = EXIT_INPUT) -> None:
    """Print one clear error line on stderr and exit non-zero."""
    err.print(f"[bold red]error:[/] {message}", highlight=False)
    raise typer.Exit(code)


def guarded(fn):
    """Turn input errors into one clear message and a non-zero exit."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        try:
            return fn(*args, **kwargs)
        except InputError as exc:
            fail(str(exc))

    return wrapper

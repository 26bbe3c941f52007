"""Shared pieces of the command line: consoles, exit codes, the input-error guard."""

from __future__ import annotations

import functools

import typer
from rich.console import Console
from rich.text import Text

from basiswise.data_adapters.errors import InputError

# width: COLUMNS when set, else the terminal's, else 80; tables split to fit (render.fit)
out = Console()
err = Console(stderr=True, soft_wrap=True)  # an error stays on one line

EXIT_INPUT = 2
EXIT_NO_HEDGE = 3


def fail(message: str, code: int = EXIT_INPUT) -> None:
    """Print one clear error line on stderr and exit non-zero."""
    err.print(Text.assemble(("error:", "bold red"), " ", str(message)), highlight=False)
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


# one spelling for the options every command shares
BookArg = typer.Argument(..., help="Book file (TOML).", show_default=False, metavar="BOOK")
METHODS = ("exact", "round", "continuous")


def workers_option(default: int, help: str):
    """``--workers/-w``, the same on every command that runs work in parallel."""
    return typer.Option(default, "--workers", "-w", help=help)


def check_ranges(**values) -> None:
    """Refuse out-of-range option values at the door: ``name=(value, low, open_low)``.

    ``open_low`` True means the value must be above ``low``, False at least ``low``; ``None``
    values (option not given) pass.
    """
    for name, (value, low, open_low) in values.items():
        if value is None:
            continue
        flag = "--" + name.replace("_", "-")
        if (value <= low) if open_low else (value < low):
            need = f"above {low:g}" if open_low else f"at least {low:g}"
            fail(f"{flag} must be {need}, got {value:g}")

"""Shared pieces of the command line: consoles, exit codes, the one guard around every command.

Exit codes: 0 done; 1 an internal error (one line; ``BASISWISE_DEBUG=1`` shows the traceback);
2 bad input (one line naming file, row, column or key; nothing written); 3 the limits admit no
hedge; 4 a solver failed; 130 / 143 stopped by SIGINT / SIGTERM (nothing half-written).
"""

from __future__ import annotations

import functools
import os
from pathlib import Path

import typer
from rich.console import Console
from rich.text import Text

from basiswise.data_adapters.choices import METHODS as _METHODS
from basiswise.data_adapters.errors import InputError

# width: COLUMNS when set, else the terminal's, else 80; tables split to fit (render.fit)
out = Console()
err = Console(stderr=True, soft_wrap=True)  # an error stays on one line

EXIT_INTERNAL = 1
EXIT_INPUT = 2
EXIT_NO_HEDGE = 3
EXIT_SOLVER = 4


def fail(message: str, code: int = EXIT_INPUT) -> None:
    """Print one clear error line on stderr and exit non-zero."""
    err.print(Text.assemble(("error:", "bold red"), " ", " ".join(str(message).split())),
              highlight=False)
    raise typer.Exit(code)


def check_outputs(targets: dict[str, Path | None], inputs: list[Path | str]) -> None:
    """Refuse unusable output paths before any work starts (``{option: path}``)."""
    from basiswise.data_adapters.output import check_target

    seen: dict[Path, str] = {}
    for option, path in targets.items():
        if path is None:
            continue
        check_target(path, inputs=inputs, option=option)
        key = Path(path).resolve()
        if key in seen:
            raise InputError(f"is also the {seen[key]} output; give each output its own file",
                             file=str(path), key=option)
        seen[key] = option


def book_inputs(book: Path, *more: Path | None) -> list[Path]:
    """The book file, the files it reads (if it loads) and ``more``: never written over."""
    files: list[Path] = [Path(book), *(Path(m) for m in more if m is not None)]
    try:
        from basiswise.data_adapters.book import load_book

        files += load_book(book).input_files()
    except InputError:
        pass  # reported, with its place, when the command loads the book
    return files


def guarded(fn):
    """One boundary per command: one line and an exit code for every way a run can end early."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        from basiswise.optimizer.interrupts import exit_code, handle_signals

        try:
            with handle_signals():
                return fn(*args, **kwargs)
        except InputError as exc:
            fail(str(exc))
        except KeyboardInterrupt as exc:
            code = exit_code(exc)
            what = "SIGTERM" if code == 143 else "SIGINT"
            fail(f"interrupted by {what}: stopped; no output file was written or changed", code)
        except (typer.Exit, typer.Abort, SystemExit):
            raise
        except Exception as exc:
            if os.environ.get("BASISWISE_DEBUG"):
                raise
            from basiswise.optimizer.solvers.dispatch import SolverFailure

            if isinstance(exc, SolverFailure):
                fail(str(exc), EXIT_SOLVER)
            fail(f"internal error ({type(exc).__name__}: {str(exc)[:200]}); no output file was "
                 "written; set BASISWISE_DEBUG=1 for the traceback", EXIT_INTERNAL)

    return wrapper


# one spelling for the options every command shares
BookArg = typer.Argument(..., help="Book file (TOML).", show_default=False, metavar="BOOK")
METHODS = _METHODS  # defined once, in data_adapters.choices


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

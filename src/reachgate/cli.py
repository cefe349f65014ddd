"""The ``reachgate`` command line: parse arguments, call one library function, render.

Every command turns a ReachgateError into one line on stderr and exit code 2.
"""

from __future__ import annotations

import os
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Annotated, TypeVar

import typer

from reachgate.errors import ReachgateError

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
    help="Check, before anything moves, whether an arm can follow a commanded TCP path.",
)

T = TypeVar("T")

EXIT_PASS, EXIT_FAIL, EXIT_BAD_INPUT = 0, 1, 2


def _fail_bad_input(message: str) -> None:
    print(f"reachgate: error: {message}", file=sys.stderr)
    raise typer.Exit(EXIT_BAD_INPUT)


def _guarded(call: Callable[[], T]) -> T:
    """Run a library call; bad input becomes one stderr line and exit code 2."""
    try:
        return call()
    except ReachgateError as error:
        _fail_bad_input(str(error))
    except OSError as error:  # unreadable output paths and the like
        _fail_bad_input(f"{getattr(error, 'filename', '') or ''}: {error.strerror or error}")
    raise AssertionError("unreachable")


def _write_or_print(text: str, out: Path | None) -> None:
    if out is None:
        sys.stdout.write(text if text.endswith("\n") else text + "\n")
    else:
        _guarded(lambda: out.write_text(text if text.endswith("\n") else text + "\n"))


# --- commands are registered below, one section each --------------------------------------


def main() -> None:
    """Console-script entry point."""
    os.environ.setdefault("NO_COLOR", "1")
    app(prog_name="reachgate")


# Keep typer imports used in the sections below visible to linters.
__all__ = ["Annotated", "app", "main"]

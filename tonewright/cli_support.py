"""Shared plumbing for commands: one-line errors with exit code 2 and atomic writes."""

from __future__ import annotations

import functools
import os
import re
import tempfile
from collections.abc import Callable
from pathlib import Path
from typing import Any, TypeVar

import numpy as np
import typer
from threadpoolctl import threadpool_limits

from tonewright.errors import InputError

__all__ = [
    "atomic_write_bytes",
    "atomic_write_text",
    "fail",
    "guarded",
    "parse_partials",
    "prepare_out_dir",
]

F = TypeVar("F", bound=Callable[..., Any])


def fail(message: str) -> typer.Exit:
    """Print ``error: message`` on stderr and return the exit to raise (code 2)."""
    typer.echo(f"error: {message}", err=True)
    return typer.Exit(code=2)


def guarded(func: F) -> F:
    """Turn InputError (and unreadable files) into one line on stderr and exit code 2."""

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        try:
            # the eigenproblems here are small: one BLAS thread is fastest and repeatable
            with threadpool_limits(limits=1, user_api="blas"):
                return func(*args, **kwargs)
        except InputError as exc:
            raise fail(str(exc)) from None
        except FileNotFoundError as exc:
            raise fail(f"file not found: {exc.filename}") from None
        except IsADirectoryError as exc:
            raise fail(f"expected a file, got a folder: {exc.filename}") from None
        except PermissionError as exc:
            raise fail(f"permission denied: {exc.filename}") from None

    return wrapper  # type: ignore[return-value]


def atomic_write_bytes(path: Path, data: bytes, *, overwrite: bool = False) -> None:
    """Write via a temporary file in the same folder and rename, so no half file is left."""
    path = Path(path)
    if path.exists() and not overwrite:
        raise InputError(f"{path} exists already; pass --force to replace it")
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def atomic_write_text(path: Path, text: str, *, overwrite: bool = False) -> None:
    atomic_write_bytes(path, text.encode("utf-8"), overwrite=overwrite)


def prepare_out_dir(out: Path, names: list[str], *, force: bool) -> Path:
    """Create ``out`` and refuse to replace any of ``names`` in it unless ``force``."""
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise InputError(f"--out {out} is a file; give a folder")
    if not force:
        taken = [n for n in names if (out / n).exists()]
        if taken:
            raise InputError(
                f"--out {out} already holds {', '.join(taken)}; "
                "choose another folder or pass --force"
            )
    out.mkdir(parents=True, exist_ok=True)
    return out


def parse_partials(text: str) -> np.ndarray:
    """Frequencies in Hz from ``"262.1, 1049.5, 2617"``: numbers separated by single commas,
    spaces allowed around each comma. Anything else (doubled or trailing commas, semicolons,
    spaces alone between numbers, units) is refused with one line naming the value."""
    number = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"
    if not re.fullmatch(rf"\s*{number}(?:\s*,\s*{number})*\s*", text):
        raise InputError(
            f"--partials {text!r}: give frequencies in Hz separated by single commas, "
            'e.g. "262.1, 1049.5, 2617"'
        )
    values = np.array([float(t) for t in text.split(",")])
    if not np.all(np.isfinite(values)) or np.any(values <= 0):
        raise InputError(f"--partials {text!r}: give one or more positive frequencies in Hz")
    return values

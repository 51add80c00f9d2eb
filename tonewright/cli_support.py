"""Shared plumbing for commands: one-line errors with exit code 2 and safe, atomic writes."""

from __future__ import annotations

import errno
import functools
import os
import re
import secrets
import stat
from collections.abc import Callable
from pathlib import Path
from typing import Any, TypeVar

import numpy as np
import typer
from threadpoolctl import threadpool_limits

from tonewright.errors import InputError

__all__ = [
    "A4_RANGE_HZ",
    "atomic_write_bytes",
    "atomic_write_text",
    "check_a4",
    "check_folder_possible",
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


_PACKAGE_DIR = Path(__file__).resolve().parent


def _on_user_path(exc: OSError) -> bool:
    """An OS error about a file the user named: it carries a file name, and not one of the
    package's own files (a missing data file is a bug, not bad input)."""
    if exc.filename is None:
        return False
    try:
        Path(os.fsdecode(exc.filename)).resolve().relative_to(_PACKAGE_DIR)
    except (ValueError, OSError, TypeError):
        return True
    return False


def _os_error_line(exc: OSError) -> str:
    name = os.fsdecode(exc.filename)
    if isinstance(exc, FileNotFoundError):
        return f"file not found: {name}"
    if isinstance(exc, IsADirectoryError):
        return f"expected a file, got a folder: {name}"
    if isinstance(exc, NotADirectoryError):
        return f"not a folder: a part of {name} is a file"
    if isinstance(exc, FileExistsError):
        return f"exists already: {name}"
    if isinstance(exc, PermissionError):
        return f"permission denied: {name}"
    reason = (exc.strerror or type(exc).__name__).lower()
    return f"{name}: {reason}"


def guarded(func: F) -> F:
    """Turn bad input into one line on stderr and exit code 2: InputError, and OS errors on the
    user's files (missing, a folder, under a file, unreadable, ...). Other exceptions are
    programming errors and keep their traceback."""

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        try:
            # the eigenproblems here are small: one BLAS thread is fastest and repeatable
            with threadpool_limits(limits=1, user_api="blas"):
                return func(*args, **kwargs)
        except InputError as exc:
            raise fail(str(exc)) from None
        except OSError as exc:
            if not _on_user_path(exc):
                raise
            raise fail(_os_error_line(exc)) from None
        except UnicodeDecodeError as exc:  # the readers name the file; this is the backstop
            reason = f"{exc.reason} at byte {exc.start}"
            raise fail(f"a file is not UTF-8 text ({reason}); save it as UTF-8") from None

    return wrapper  # type: ignore[return-value]


def _check_replaceable(path: Path, overwrite: bool) -> None:
    """Refuse to write over anything but a regular file, and over that only with --force."""
    try:
        mode = path.lstat().st_mode  # lstat: a symlink is judged itself, not its target
    except (FileNotFoundError, NotADirectoryError):  # a folder under a file: _make_folder says
        return
    except OSError as exc:
        raise InputError(f"cannot write {path}: {(exc.strerror or '').lower()}") from None
    if stat.S_ISLNK(mode):
        raise InputError(f"{path} is a symbolic link; remove it or write elsewhere")
    if stat.S_ISDIR(mode):
        raise InputError(f"{path} is a folder; give a file name")
    if not stat.S_ISREG(mode):
        raise InputError(f"{path} is not a regular file (a device or pipe); write elsewhere")
    if not overwrite:
        raise InputError(f"{path} exists already; pass --force to replace it")


def _missing_folders(folder: Path, prefix: str) -> list[Path]:
    """The folders to create for ``folder``, innermost first; refuses, in one line after
    ``prefix``, a parent that is a file."""
    missing = []
    for parent in (folder, *folder.parents):
        if parent.is_symlink() or parent.exists():
            if not parent.is_dir():
                raise InputError(f"{prefix}: {parent} is a file, not a folder")
            break
        missing.append(parent)
    return missing


def _create(folder: Path, prefix: str) -> None:
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        reason = (exc.strerror or type(exc).__name__).lower()
        raise InputError(f"{prefix}: cannot create the folder {folder} ({reason})") from None


def check_folder_possible(folder: Path, prefix: str) -> None:
    """Refuse, in one line after ``prefix``, a ``folder`` that could not be created (one of
    its parents is a file, or the place is not writable). Leaves nothing behind: a missing
    folder is made and removed again, so a long job learns this before it starts."""
    missing = _missing_folders(folder, prefix)
    if not missing:
        return
    _create(folder, prefix)
    for made in missing:  # innermost first
        made.rmdir()


def _make_folder(folder: Path, prefix: str) -> None:
    """Create ``folder`` (and its parents) or say in one line, after ``prefix``, why not."""
    _missing_folders(folder, prefix)
    _create(folder, prefix)


def _temporary_beside(path: Path) -> tuple[int, Path]:
    """A new file next to ``path``, created like ``open(path, "x")``: mode 0666 less the umask
    (``mkstemp`` would give 0600)."""
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0)
    for _ in range(100):
        tmp = path.with_name(f".{path.name}.{secrets.token_hex(4)}.tmp")
        try:
            return os.open(tmp, flags, 0o666), tmp
        except FileExistsError:
            continue
    raise FileExistsError(errno.EEXIST, "no free temporary name", str(path))


def atomic_write_bytes(path: Path, data: bytes, *, overwrite: bool = False) -> None:
    """Write via a temporary file in the same folder and rename, so no half file is left.

    Only a regular file is ever replaced (and only with ``overwrite``): never a symbolic link
    (nor, through it, its target), a folder or a device. Errors name ``path``, never the
    temporary file.
    """
    path = Path(path)
    _check_replaceable(path, overwrite)
    _make_folder(path.parent, f"cannot write {path}")
    tmp: Path | None = None
    try:
        fd, tmp = _temporary_beside(path)
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
        os.replace(tmp, path)
    except OSError as exc:
        reason = (exc.strerror or type(exc).__name__).lower()
        raise InputError(f"cannot write {path}: {reason}") from None
    finally:
        if tmp is not None:
            tmp.unlink(missing_ok=True)


def atomic_write_text(path: Path, text: str, *, overwrite: bool = False) -> None:
    """:func:`atomic_write_bytes` of ``text`` in UTF-8."""
    atomic_write_bytes(path, text.encode("utf-8"), overwrite=overwrite)


def prepare_out_dir(out: Path, names: list[str], *, force: bool) -> Path:
    """Create ``out`` and refuse to replace any of ``names`` in it unless ``force``; never
    replace one that is not a regular file (a symbolic link, folder or device)."""
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise InputError(f"--out {out} is a file; give a folder")
    taken = []
    for name in names:
        target = out / name
        if target.is_symlink() or target.exists():
            _check_replaceable(target, overwrite=True)
            taken.append(name)
    if taken and not force:
        raise InputError(
            f"--out {out} already holds {', '.join(taken)}; choose another folder or pass --force"
        )
    _make_folder(out, f"--out {out}")
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


A4_RANGE_HZ = (380.0, 500.0)  # the range a [target] table's a4_hz accepts


def check_a4(a4_hz: float) -> float:
    """``--a4`` within the range a part file's ``a4_hz`` accepts, else a one-line error."""
    lo, hi = A4_RANGE_HZ
    if not lo <= a4_hz <= hi:
        raise InputError(f"--a4 {a4_hz:g}: give the pitch reference A4 in Hz, {lo:g} to {hi:g}")
    return a4_hz

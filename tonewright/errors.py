"""The one exception type that the command line turns into a one-line message and exit code 2."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # the numerics import this module: it must not pull in pydantic
    from pydantic import ValidationError

__all__ = ["InputError", "from_validation_error", "read_text_input", "union_tag"]


class InputError(ValueError):
    """Bad user input: the message names the field, the value and what is allowed."""


def union_tag(name: str) -> str:
    """A pydantic ``Tag`` for one member of a tagged union that error messages leave out: the
    user wrote ``material.E``, not ``material.<table>.E``."""
    return f"<{name}>"


def _is_union_tag(part: object) -> bool:
    return isinstance(part, str) and part.startswith("<") and part.endswith(">")


def from_validation_error(exc: ValidationError, where: str) -> InputError:
    """One line naming each bad field, its value and what is wrong."""
    parts = []
    for err in exc.errors():
        loc = ".".join(str(p) for p in err["loc"] if not _is_union_tag(p))
        joiner = ": " if where.endswith((".toml", ".json")) else "."
        field_name = f"{where}{joiner}{loc}" if loc else where
        msg = err["msg"].removeprefix("Value error, ")
        shown = repr(err["input"])
        shown = shown if len(shown) <= 60 else shown[:57] + "..."
        # a whole table as the value says nothing the message does not
        table = isinstance(err["input"], dict)
        got = "" if err["type"] == "missing" or not loc or table else f" (got {shown})"
        parts.append(f"{field_name}: {msg}{got}")
    return InputError("; ".join(parts))


def read_text_input(path: str | Path) -> str:
    """A user's text file as UTF-8; a file in another encoding (or binary) is bad input."""
    path = Path(path)
    data = path.read_bytes()
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise InputError(
            f"{path}: not UTF-8 text (byte 0x{data[exc.start]:02x} on line {line}); "
            "save the file as UTF-8"
        ) from None

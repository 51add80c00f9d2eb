"""The one exception type that the command line turns into a one-line message and exit code 2."""

from __future__ import annotations

from pydantic import ValidationError

__all__ = ["InputError", "from_validation_error"]


class InputError(ValueError):
    """Bad user input: the message names the field, the value and what is allowed."""


def from_validation_error(exc: ValidationError, where: str) -> InputError:
    """One line naming each bad field, its value and what is wrong."""
    parts = []
    for err in exc.errors():
        loc = ".".join(str(p) for p in err["loc"])
        joiner = ": " if where.endswith((".toml", ".json")) else "."
        field_name = f"{where}{joiner}{loc}" if loc else where
        msg = err["msg"].removeprefix("Value error, ")
        shown = repr(err["input"])
        shown = shown if len(shown) <= 60 else shown[:57] + "..."
        got = "" if err["type"] == "missing" or not loc else f" (got {shown})"
        parts.append(f"{field_name}: {msg}{got}")
    return InputError("; ".join(parts))

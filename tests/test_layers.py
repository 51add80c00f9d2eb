"""The numerics never reach up into the application layer (house style, no source).

Every module of ``tonewright.forward``, ``tonewright.optimizer``, ``tonewright.acoustics`` and
``tonewright.targets`` is imported (so a module that cannot even load fails here) and its own
source is parsed with ``ast``. Every import statement counts, also those inside functions or
``TYPE_CHECKING`` blocks, and so do ``importlib.import_module("...")`` / ``__import__("...")``
calls with a literal name. Allowed from ``tonewright``: the four numeric packages and
``tonewright.errors`` (the shared ``InputError``). Refused: any other ``tonewright`` module,
and the I/O and interface libraries ``typer``, ``rich``, ``pydantic``, ``matplotlib``,
``soundfile`` and ``ezdxf``. On top of that, ``forward`` imports nothing from ``optimizer``.

Only direct imports are checked: what ``tonewright.errors`` itself imports is its own business.
"""

from __future__ import annotations

import ast
import importlib
import inspect
import pkgutil

import pytest

NUMERIC_PACKAGES = (
    "tonewright.forward",
    "tonewright.optimizer",
    "tonewright.acoustics",
    "tonewright.targets",
)
ALLOWED_APPLICATION = ("tonewright.errors",)
FORBIDDEN_LIBRARIES = ("typer", "rich", "pydantic", "matplotlib", "soundfile", "ezdxf")


def _modules(package: str) -> list[str]:
    pkg = importlib.import_module(package)
    found = [package]
    for info in pkgutil.walk_packages(pkg.__path__, prefix=f"{package}."):
        found.append(info.name)
    return sorted(found)


ALL_MODULES = [name for package in NUMERIC_PACKAGES for name in _modules(package)]


def _within(name: str, package: str) -> bool:
    return name == package or name.startswith(package + ".")


def _resolve_relative(module: str, is_package: bool, level: int, target: str | None) -> str:
    parts = module.split(".")
    base = parts if is_package else parts[:-1]
    base = base[: len(base) - (level - 1)] if level > 1 else base
    return ".".join([*base, target] if target else base)


def imported_names(source: str, module: str, is_package: bool) -> list[tuple[int, str]]:
    """``(line, absolute module name)`` of everything ``source`` imports.

    ``from pkg import name`` yields ``pkg.name`` (the name may be a submodule); relative
    imports are resolved against ``module``.
    """
    out: list[tuple[int, str]] = []
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Import):
            out += [(node.lineno, alias.name) for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                base = _resolve_relative(module, is_package, node.level, node.module)
            out += [(node.lineno, f"{base}.{alias.name}") for alias in node.names]
        elif isinstance(node, ast.Call) and node.args:
            func = node.func
            called = func.attr if isinstance(func, ast.Attribute) else getattr(func, "id", None)
            first = node.args[0]
            if called in ("import_module", "__import__") and isinstance(first, ast.Constant):
                if isinstance(first.value, str):
                    out.append((node.lineno, first.value))
    return out


def layer_violations(source: str, module: str, is_package: bool = False) -> list[str]:
    """What ``source`` (the code of ``module``) imports against the layering rules."""
    bad = []
    for line, name in imported_names(source, module, is_package):
        top = name.split(".")[0]
        if top in FORBIDDEN_LIBRARIES:
            bad.append(f"{module}:{line} imports {name} (an I/O or interface library)")
        elif top == "tonewright":
            allowed = NUMERIC_PACKAGES + ALLOWED_APPLICATION
            if not any(_within(name, p) for p in allowed):
                bad.append(f"{module}:{line} imports {name} (the application layer)")
        if _within(module, "tonewright.forward") and _within(name, "tonewright.optimizer"):
            bad.append(f"{module}:{line} imports {name} (forward must not use the optimizer)")
    return bad


def test_the_walk_finds_the_numerics():
    # The test must not pass on an empty list: the packages and their known modules are there.
    for package in NUMERIC_PACKAGES:
        assert package in ALL_MODULES
    for known in (
        "tonewright.forward.modal",
        "tonewright.forward.solid",
        "tonewright.optimizer.search",
        "tonewright.acoustics.pitch",
    ):
        assert known in ALL_MODULES


@pytest.mark.parametrize("name", ALL_MODULES)
def test_numerics_import_no_application_layer(name):
    mod = importlib.import_module(name)
    is_package = hasattr(mod, "__path__")
    assert layer_violations(inspect.getsource(mod), name, is_package) == []


@pytest.mark.parametrize(
    ("source", "module", "fragment"),
    [
        ("from tonewright.tuning import load_target\n", "tonewright.forward.modal", "tuning"),
        ("import tonewright.shop.dxf\n", "tonewright.acoustics.pitch", "shop"),
        ("from tonewright import partfile\n", "tonewright.optimizer.search", "partfile"),
        ("import tonewright\n", "tonewright.targets", "tonewright"),
        ("from ..commands import design\n", "tonewright.optimizer.search", "commands"),
        (
            "def f():\n    import matplotlib.pyplot as plt\n",
            "tonewright.forward.solid",
            "matplotlib",
        ),
        ("from pydantic import BaseModel\n", "tonewright.targets", "pydantic"),
        ("import rich.progress\n", "tonewright.optimizer.search", "rich"),
        ("import typer\n", "tonewright.acoustics.pitch", "typer"),
        ("import soundfile as sf\n", "tonewright.acoustics.pitch", "soundfile"),
        ("import ezdxf\n", "tonewright.forward.geometry", "ezdxf"),
        (
            "from typing import TYPE_CHECKING\n"
            "if TYPE_CHECKING:\n"
            "    from tonewright.cli import app\n",
            "tonewright.forward.modal",
            "cli",
        ),
        ("importlib.import_module('tonewright.plots')\n", "tonewright.forward.modal", "plots"),
        (
            "from tonewright.optimizer.spaces import Space\n",
            "tonewright.forward.modal",
            "optimizer",
        ),
        ("from ..optimizer import search\n", "tonewright.forward.modal", "optimizer"),
    ],
)
def test_the_rules_catch_forbidden_imports(source, module, fragment):
    bad = layer_violations(source, module)
    assert bad and fragment in " ".join(bad)


@pytest.mark.parametrize(
    ("source", "module", "is_package"),
    [
        ("from tonewright.errors import InputError\n", "tonewright.forward.modal", False),
        ("from tonewright import errors\n", "tonewright.acoustics.pitch", False),
        ("from tonewright.forward.geometry import Bar\n", "tonewright.optimizer.search", False),
        ("from tonewright.acoustics.pitch import cents\n", "tonewright.forward.solid", False),
        ("from . import geometry\n", "tonewright.forward.modal", False),
        ("from .pitch import cents\n", "tonewright.acoustics", True),
        ("import numpy as np\nimport scipy.sparse\nimport cma\n", "tonewright.optimizer", True),
    ],
)
def test_the_rules_allow_numerics_and_errors(source, module, is_package):
    assert layer_violations(source, module, is_package) == []

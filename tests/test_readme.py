"""The README is the user manual: every example in it runs as written, every file in it is
valid, and every command's --help keeps its words (square brackets included)."""

from __future__ import annotations

import re
import shlex
import shutil
import tomllib
from pathlib import Path

import pytest
from typer.testing import CliRunner

from tonewright.cli import _COMMAND_MODULES, app
from tonewright.instrument import parse_instrument
from tonewright.materials import MaterialFile
from tonewright.partfile import parse_part

ROOT = Path(__file__).resolve().parents[1]
README = (ROOT / "README.md").read_text(encoding="utf-8")
BLOCKS = re.findall(r"```(\w+)\n(.*?)```", README, flags=re.S)
# blocks that design or draw a bar at full fidelity, or run the 3D model or a whole instrument
SLOW_WORDS = ("verify", "instrument", "workshop-marimba-c4.toml", "shop bar-out")


def commands(block: str) -> list[list[str]]:
    """The tonewright invocations of a shell block (set-up steps such as venv and pip are the
    reader's, not the test's)."""
    out = []
    for line in block.splitlines():
        for part in line.split("&&"):
            words = shlex.split(part)
            if words and words[0].endswith("tonewright"):
                out.append(words[1:])
    return out


SHELL = [b for kind, b in BLOCKS if kind == "sh" and commands(b)]
TOML = [b for kind, b in BLOCKS if kind == "toml"]


def _param(block: str):
    # the chime and string blocks repeat tests/test_chime_string_workflow.py's runs, so the
    # quick subset leaves them to it; the full suite runs every block
    slow = any(w in block for w in SLOW_WORDS) or "chime-out" in block or "string-out" in block
    return pytest.param(block, marks=pytest.mark.slow if slow else (), id=commands(block)[0][0])


def test_the_readme_has_examples_of_every_file_kind_and_command():
    assert len(SHELL) >= 5 and len(TOML) >= 6
    run = {words[0] for b in SHELL for words in commands(b)}
    # every command has an example; the workbench serves until stopped, so its example is
    # run by tests/test_workbench_browser.py (a real server and browser) instead
    assert set(_COMMAND_MODULES) - {"workbench"} <= run
    text = " ".join(TOML)
    for table in ("[bar]", "[tube]", "[string]", "[target]", "[design]", "[[support]]"):
        assert table in text
    assert "lowest" in text and "base = " in text  # an instrument file and a material file


@pytest.mark.parametrize("block", [_param(b) for b in SHELL])
def test_every_readme_example_runs(block, tmp_path, monkeypatch):
    shutil.copytree(ROOT / "examples", tmp_path / "examples")
    monkeypatch.chdir(tmp_path)
    runner = CliRunner()
    for args in commands(block):
        result = runner.invoke(app, args)
        assert result.exit_code == 0, f"tonewright {shlex.join(args)}:\n{result.output}"
        assert "Traceback" not in result.output


@pytest.mark.parametrize("block", TOML)
def test_every_readme_file_is_valid(block):
    raw = tomllib.loads(block)
    if "lowest" in raw:
        parse_instrument(raw)
    elif "name" in raw:
        MaterialFile.model_validate(raw)
    elif set(raw) == {"stock"}:  # a fragment: the stock table of an instrument file
        stub = {"title": "stub", "lowest": "F4", "highest": "F5", "material": "padauk"}
        parse_instrument(
            stub | {"profile": [{"from": "F4", "to": "F5", "profile": "fundamental"}]} | raw
        )
    elif set(raw) == {"support"}:  # a fragment: supports of the demo bar
        parse_part(
            {"material": "honduras-rosewood", "bar": {"length": 400, "width": 60, "thickness": 22}}
            | raw
        )
    else:
        parse_part(raw)


def test_the_readme_part_file_is_the_demo():
    demo = tomllib.loads((ROOT / "examples" / "workshop-marimba-c4.toml").read_text())
    shown = next(tomllib.loads(b) for b in TOML if "Workshop marimba, C4" in b)
    assert shown == demo  # the prose's demo is 60 mm wide, and so is the file shown


@pytest.mark.parametrize("command", _COMMAND_MODULES)
def test_help_keeps_square_brackets(command):
    result = CliRunner().invoke(app, [command, "--help"])
    assert result.exit_code == 0
    assert "  (and ) " not in result.output and "with  (" not in result.output
    if command == "design":
        assert "[target] (and [design]) tables" in result.output

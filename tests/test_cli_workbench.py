"""``tonewright workbench``: options checked at the door; serving starts only when they pass."""

from __future__ import annotations

import pytest
from typer.testing import CliRunner

import tonewright.commands.workbench as command
from tonewright.cli import app

runner = CliRunner()


@pytest.fixture
def served(monkeypatch):
    """Record what would be served instead of serving it."""
    calls = []
    monkeypatch.setattr("uvicorn.run", lambda application, **kw: calls.append((application, kw)))
    monkeypatch.setattr(command.webbrowser, "open", lambda url: calls.append(url))
    return calls


def test_serves_the_folder_on_loopback(tmp_path, served):
    result = runner.invoke(app, ["workbench", str(tmp_path), "--no-browser", "--port", "9001"])
    assert result.exit_code == 0, result.output
    ((application, kw),) = served
    assert kw["host"] == "127.0.0.1" and kw["port"] == 9001
    assert application.state.workshop.root == tmp_path.resolve()
    assert "http://127.0.0.1:9001/" in result.stderr


def test_other_hosts_need_the_explicit_flag(tmp_path, served):
    refused = runner.invoke(app, ["workbench", str(tmp_path), "--host", "0.0.0.0"])
    assert refused.exit_code == 2 and "--allow-remote" in refused.stderr and not served
    shared = runner.invoke(
        app, ["workbench", str(tmp_path), "--host", "0.0.0.0", "--allow-remote", "--no-browser"]
    )
    assert shared.exit_code == 0 and "warning: --allow-remote" in shared.stderr


@pytest.mark.parametrize(
    "args, fragment",
    [
        (["--port", "0"], "--port 0"),
        (["--port", "70000"], "--port 70000"),
    ],
)
def test_bad_options(tmp_path, served, args, fragment):
    result = runner.invoke(app, ["workbench", str(tmp_path), *args])
    assert result.exit_code == 2 and fragment in result.stderr and not served


def test_folder_must_exist(tmp_path, served):
    result = runner.invoke(app, ["workbench", str(tmp_path / "nowhere")])
    assert result.exit_code == 2 and "not a folder" in result.stderr
    lines = [line for line in result.stderr.splitlines() if line.startswith("error:")]
    assert len(lines) == 1 and "Traceback" not in result.output

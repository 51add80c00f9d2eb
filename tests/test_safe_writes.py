"""Safe writes (``cli_support``): only regular files are replaced, files get the permissions
``open()`` would give, errors are one line that names the user's path (never a temporary file),
and ``guarded`` turns OS errors on user paths into exit code 2 without hiding bugs."""

from __future__ import annotations

import errno
import os
import stat
from pathlib import Path

import pytest
import typer
from typer.testing import CliRunner

from tonewright.cli_support import atomic_write_bytes, atomic_write_text, guarded, prepare_out_dir
from tonewright.errors import InputError

runner = CliRunner()


def test_force_does_not_follow_a_symlink(tmp_path):
    target = tmp_path / "precious.toml"
    target.write_text("keep me\n", encoding="utf-8")
    link = tmp_path / "part.toml"
    link.symlink_to(target)
    with pytest.raises(InputError, match="symbolic link") as exc:
        atomic_write_text(link, "new\n", overwrite=True)
    assert "\n" not in str(exc.value)
    assert target.read_text(encoding="utf-8") == "keep me\n"
    assert link.is_symlink() and link.resolve() == target


def test_a_dangling_symlink_is_not_replaced_either(tmp_path):
    link = tmp_path / "part.toml"
    link.symlink_to(tmp_path / "nowhere.toml")
    with pytest.raises(InputError, match="symbolic link"):
        atomic_write_text(link, "new\n", overwrite=True)
    assert link.is_symlink() and not (tmp_path / "nowhere.toml").exists()


def test_force_does_not_replace_a_device_node():
    before = os.stat("/dev/null")
    with pytest.raises(InputError, match="not a regular file"):
        atomic_write_bytes(Path("/dev/null"), b"x", overwrite=True)
    after = os.stat("/dev/null")
    assert stat.S_ISCHR(after.st_mode) and after.st_ino == before.st_ino


def test_a_folder_is_not_replaced(tmp_path):
    (tmp_path / "result.json").mkdir()
    with pytest.raises(InputError, match="is a folder"):
        atomic_write_text(tmp_path / "result.json", "{}", overwrite=True)
    assert (tmp_path / "result.json").is_dir()


def test_prepare_out_dir_refuses_a_symlinked_output_even_with_force(tmp_path):
    target = tmp_path / "elsewhere.png"
    target.write_bytes(b"picture")
    out = tmp_path / "out"
    out.mkdir()
    (out / "profile.png").symlink_to(target)
    with pytest.raises(InputError, match="symbolic link"):
        prepare_out_dir(out, ["part.toml", "profile.png"], force=True)
    assert target.read_bytes() == b"picture"


def test_prepare_out_dir_still_asks_for_force_on_regular_files(tmp_path):
    (tmp_path / "part.toml").write_text("old", encoding="utf-8")
    with pytest.raises(InputError, match="--force"):
        prepare_out_dir(tmp_path, ["part.toml"], force=False)
    assert prepare_out_dir(tmp_path, ["part.toml"], force=True) == tmp_path


def test_existing_regular_file_needs_overwrite(tmp_path):
    path = tmp_path / "part.toml"
    path.write_text("old", encoding="utf-8")
    with pytest.raises(InputError, match="--force"):
        atomic_write_text(path, "new")
    atomic_write_text(path, "new", overwrite=True)
    assert path.read_text(encoding="utf-8") == "new"


@pytest.mark.parametrize("umask", [0o022, 0o077, 0o002])
def test_written_files_get_the_permissions_open_gives(tmp_path, umask):
    old = os.umask(umask)
    try:
        with open(tmp_path / "reference.txt", "w", encoding="utf-8") as handle:
            handle.write("x")
        atomic_write_text(tmp_path / "written.txt", "x")
    finally:
        os.umask(old)
    mode = stat.S_IMODE((tmp_path / "written.txt").stat().st_mode)
    assert mode == 0o666 & ~umask
    assert mode == stat.S_IMODE((tmp_path / "reference.txt").stat().st_mode)


def test_output_under_a_file_is_one_line(tmp_path):
    blocker = tmp_path / "notes.txt"
    blocker.write_text("x", encoding="utf-8")
    with pytest.raises(InputError) as exc:
        atomic_write_text(blocker / "sub" / "part.toml", "x")
    assert "notes.txt is a file" in str(exc.value) and "\n" not in str(exc.value)
    with pytest.raises(InputError, match=r"notes\.txt is a file"):
        prepare_out_dir(blocker / "out", ["part.toml"], force=False)


def test_output_in_an_unwritable_place_is_one_line_without_temporary_names():
    # /proc takes no new files, even from root
    with pytest.raises(InputError) as exc:
        atomic_write_text(Path("/proc/part.toml"), "x")
    message = str(exc.value)
    assert message.startswith("cannot write /proc/part.toml")
    assert ".tmp" not in message and "\n" not in message
    with pytest.raises(InputError, match="cannot create the folder"):
        prepare_out_dir(Path("/proc/tonewright-out"), ["part.toml"], force=False)


def test_a_failed_rename_names_the_output_and_leaves_no_temporary_file(tmp_path, monkeypatch):
    def refuse(src, dst):
        raise OSError(errno.ENOSPC, "No space left on device", str(src))

    monkeypatch.setattr(os, "replace", refuse)
    with pytest.raises(InputError) as exc:
        atomic_write_bytes(tmp_path / "strike.wav", b"RIFF")
    assert str(exc.value) == f"cannot write {tmp_path / 'strike.wav'}: no space left on device"
    assert list(tmp_path.iterdir()) == []


# -- guarded ----------------------------------------------------------------------------------


def _app(func) -> typer.Typer:
    app = typer.Typer()
    app.command()(guarded(func))
    app.command("other")(lambda: None)  # two commands, so the first is addressed by name
    return app


@pytest.mark.parametrize(
    ("make_error", "needle"),
    [
        (lambda p: p.joinpath("x").read_text(), "not a folder"),  # NotADirectoryError
        (lambda p: open(p.parent, "rb"), "expected a file, got a folder"),  # IsADirectoryError
        (lambda p: p.parent.joinpath("missing.toml").read_text(), "file not found"),
        (lambda p: os.mkdir(p), "exists already"),  # FileExistsError
        (lambda p: p.read_text(encoding="utf-8"), "not UTF-8"),  # UnicodeDecodeError
    ],
    ids=["not-a-directory", "is-a-directory", "not-found", "exists", "decode"],
)
def test_guarded_turns_user_path_errors_into_one_line(tmp_path, make_error, needle):
    path = tmp_path / "part.toml"
    path.write_bytes(b"title = '\xe9'\n")

    def command() -> None:
        make_error(path)

    result = runner.invoke(_app(command), ["command"])
    assert result.exit_code == 2
    lines = result.stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ") and needle in lines[0]
    assert "Traceback" not in result.stderr


@pytest.mark.parametrize(
    "error",
    [
        KeyError("bending"),
        TypeError("unsupported operand"),
        OSError(errno.EIO, "I/O error"),  # no file name: not about a user's path
    ],
)
def test_guarded_does_not_hide_programming_errors(error):
    def command() -> None:
        raise error

    result = runner.invoke(_app(command), ["command"])
    assert result.exit_code == 1
    assert result.exception is error


def test_guarded_does_not_hide_a_missing_package_file():
    import tonewright

    missing = Path(tonewright.__file__).parent / "data" / "no-such-table.toml"

    def command() -> None:
        missing.read_text(encoding="utf-8")

    result = runner.invoke(_app(command), ["command"])
    assert result.exit_code == 1
    assert isinstance(result.exception, FileNotFoundError)

"""``tonewright workbench [FOLDER]``: the local web page over a workshop folder.

The server binds to 127.0.0.1 and answers this computer only. ``--allow-remote`` (with
``--host``) shares it on the network, with a warning: anyone who can reach it can read and
write the workshop folder's part files.
"""

from __future__ import annotations

import threading
import webbrowser
from pathlib import Path
from typing import Annotated

import typer

from tonewright.cli_support import guarded
from tonewright.errors import InputError

__all__ = ["register"]

LOOPBACK = ("127.0.0.1", "::1", "localhost")


def register(app: typer.Typer) -> None:
    @app.command("workbench")
    @guarded
    def workbench_cmd(
        folder: Annotated[
            Path, typer.Argument(help="Workshop folder: part files, designs, the bench history.")
        ] = Path("."),
        port: Annotated[int, typer.Option(help="Port on this computer.")] = 8765,
        host: Annotated[str, typer.Option(help="Address to listen on.")] = "127.0.0.1",
        allow_remote: Annotated[
            bool,
            typer.Option(
                "--allow-remote",
                help="Answer other computers too (needs a --host other than 127.0.0.1).",
            ),
        ] = False,
        no_browser: Annotated[
            bool, typer.Option("--no-browser", help="Do not open the page in a browser.")
        ] = False,
    ) -> None:
        """Open the workbench: design bars, follow an instrument, tune at the bench."""
        import uvicorn

        from tonewright.workbench import create_app

        if not 1 <= port <= 65535:
            raise InputError(f"--port {port}: give 1 to 65535")
        if host not in LOOPBACK and not allow_remote:
            raise InputError(
                f"--host {host}: the workbench answers this computer only; add --allow-remote "
                "to share it on the network"
            )
        application = create_app(folder, allow_remote=allow_remote)
        if allow_remote:
            typer.echo(
                "warning: --allow-remote: anyone who can reach this computer can read and write "
                "the workshop folder's part files; use it on a trusted workshop network only",
                err=True,
            )
        url = f"http://{'127.0.0.1' if host in ('0.0.0.0', '::') else host}:{port}/"
        typer.echo(
            f"workbench on {url} (folder {Path(folder).resolve()}); Ctrl+C stops it", err=True
        )
        if not no_browser:
            threading.Timer(1.0, webbrowser.open, args=(url,)).start()
        uvicorn.run(application, host=host, port=port, log_level="warning")

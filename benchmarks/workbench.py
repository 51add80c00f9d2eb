"""How long the bench page waits for a tap's partials and next cut.

Measures, in one run: a 3 s tap posted to a real workbench server (uvicorn on 127.0.0.1,
as the page posts it) against the same workflows called in-process (``listen_to_tap`` and
``advise_bar``, what ``tonewright advise --wav`` runs). The ratio is the server's overhead;
the absolute time is what the maker waits after the recording ends (goal: under 1.5 s).

    .venv/bin/python benchmarks/workbench.py
"""

from __future__ import annotations

import socket
import statistics
import subprocess
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

import numpy as np
import soundfile as sf
from threadpoolctl import threadpool_limits
from tonewright.acoustics.synth import modal_strike

from tonewright.bench import AdviseRequest, advise_bar, listen_to_tap, min_thickness_of
from tonewright.partfile import load_part

ROOT = Path(__file__).resolve().parents[1]
PART = ROOT / "examples" / "workshop-half-finished.toml"
TAP_HZ = [307.47, 482.82, 1221.78, 2983.25]  # the example's tap (invented demo values)
REPEATS = 5


def _tap(path: Path) -> bytes:
    y = modal_strike(TAP_HZ, [1.0, 0.2, 0.5, 0.3], [0.9, 0.5, 0.35, 0.15], 48000, 3.0, 5e-4)
    y = y + 1e-4 * np.random.default_rng(1).standard_normal(y.size)
    sf.write(path, y, 48000, subtype="PCM_16")
    return path.read_bytes()


def _in_process(wav: Path) -> float:
    start = time.perf_counter()
    part_file, base = load_part(PART)
    listen_to_tap(wav)
    advise_bar(AdviseRequest(part_file, base, "bench", min_thickness_of(part_file), wav=wav))
    return time.perf_counter() - start


def _through_server(url: str, data: bytes) -> float:
    start = time.perf_counter()
    request = urllib.request.Request(
        url + "api/bench/tap?bar=half.toml",
        data=data,
        method="POST",
        headers={"Content-Type": "application/octet-stream"},
    )
    urllib.request.urlopen(request, timeout=120).read()
    return time.perf_counter() - start


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        (folder / "half.toml").write_text(PART.read_text(encoding="utf-8"), encoding="utf-8")
        wav = folder / "tap.wav"
        data = _tap(wav)
        with socket.socket() as s:
            s.bind(("127.0.0.1", 0))
            port = s.getsockname()[1]
        server = subprocess.Popen(
            [
                sys.executable,
                "-m",
                "tonewright",
                "workbench",
                str(folder),
                "--port",
                str(port),
                "--no-browser",
            ],
        )
        url = f"http://127.0.0.1:{port}/"
        try:
            for _ in range(200):
                try:
                    urllib.request.urlopen(url + "api/workshop", timeout=1).read()
                    break
                except OSError:
                    time.sleep(0.1)
            _through_server(url, data)  # first call imports the numerics
            served = [_through_server(url, data) for _ in range(REPEATS)]
            with threadpool_limits(limits=1, user_api="blas"):  # as the CLI and server run
                direct = [_in_process(wav) for _ in range(REPEATS)]
        finally:
            server.terminate()
            server.wait(10)
    s, d = statistics.median(served), statistics.median(direct)
    print(f"3 s tap, 48 kHz, {REPEATS} repeats (medians)")
    print(f"  through the workbench server : {s:6.2f} s  (goal: under 1.5 s)")
    print(f"  in-process workflows (CLI)   : {d:6.2f} s")
    print(f"  server / in-process          : {s / d:6.2f}")


if __name__ == "__main__":
    main()

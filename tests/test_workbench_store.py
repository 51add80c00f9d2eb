"""The workshop database: versioned schema, transactions that survive a killed server, and
two writers (two browser tabs, two servers) at once."""

from __future__ import annotations

import signal
import sqlite3
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

from tonewright.workbench.store import SCHEMA_VERSION, Store

WRITER = textwrap.dedent(
    """
    import sys
    from tonewright.workbench.store import Store
    store = Store(sys.argv[1])
    big = "x" * 20000  # a tap with many partials: a write that takes a while
    for i in range(100000):
        entry = store.add(sys.argv[2], "tap", {"i": i, "partials": big})
        print(entry.id, flush=True)  # acknowledged only once committed
    """
)


def test_new_store_has_the_current_schema(tmp_path):
    store = Store(tmp_path / "w.sqlite")
    assert store.schema_version() == SCHEMA_VERSION
    again = Store(tmp_path / "w.sqlite")  # reopening keeps it
    assert again.schema_version() == SCHEMA_VERSION


def test_newer_schema_is_refused(tmp_path):
    path = tmp_path / "w.sqlite"
    Store(path)
    with sqlite3.connect(path) as conn:
        conn.execute("UPDATE meta SET value = ? WHERE key = 'schema_version'", (str(99),))
    with pytest.raises(RuntimeError, match="newer tonewright"):
        Store(path)


def test_history_keeps_order_and_kinds(tmp_path):
    store = Store(tmp_path / "w.sqlite")
    store.add("c4.toml", "tap", {"f": [261.6]})
    store.add("c4.toml", "cut", {"depth_mm": 0.5})
    store.add("d4.toml", "tap", {"f": [293.7]})
    assert [e.kind for e in store.history("c4.toml")] == ["tap", "cut"]
    summary = store.bars_with_history()
    assert summary["c4.toml"] == {"taps": 1, "cuts": 1, "last_tap": {"f": [261.6]}}
    with pytest.raises(sqlite3.IntegrityError):
        store.add("c4.toml", "sanding", {})  # only taps and cuts


def test_killed_mid_write_loses_nothing_acknowledged(tmp_path):
    path = tmp_path / "w.sqlite"
    Store(path)
    proc = subprocess.Popen(
        [sys.executable, "-c", WRITER, str(path), "c4.toml"], stdout=subprocess.PIPE, text=True
    )
    acknowledged = [int(proc.stdout.readline()) for _ in range(150)]
    proc.send_signal(signal.SIGKILL)  # no clean-up, in the middle of the next write
    proc.wait(10)
    acknowledged += [int(line) for line in proc.stdout.read().split()]
    store = Store(path)
    assert store.integrity() == "ok"
    kept = {e.id: e for e in store.history("c4.toml")}
    assert set(acknowledged) <= set(kept)
    assert all(e.data["partials"] == "x" * 20000 for e in kept.values())  # no torn entry
    store.add("c4.toml", "cut", {"after": "restart"})  # and it goes on working
    assert store.history("c4.toml")[-1].kind == "cut"


def test_two_writers_at_once(tmp_path):
    path = tmp_path / "w.sqlite"
    Store(path)
    script = WRITER.replace("range(100000)", "range(60)")
    procs = [
        subprocess.Popen([sys.executable, "-c", script, str(path), bar], stdout=subprocess.PIPE)
        for bar in ("c4.toml", "d4.toml")
    ]
    for p in procs:
        p.communicate(timeout=120)
        assert p.returncode == 0
    store = Store(path)
    assert len(store.history("c4.toml")) == len(store.history("d4.toml")) == 60
    assert store.integrity() == "ok"


def test_state_lives_in_the_workshop_folder(tmp_path):
    from tonewright.workbench.folder import Workshop

    shop = Workshop.open(tmp_path)
    assert shop.state == Path(tmp_path).resolve() / ".tonewright"

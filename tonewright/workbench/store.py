"""The workshop's state: bar histories (taps and cuts) and design runs, in one SQLite file.

The database lives in the workshop folder (``.tonewright/workshop.sqlite``). Every write is a
single transaction in WAL mode, so a server killed mid-write leaves the last committed
history intact, and two browser tabs (two connections) never see half an entry. Part and
result files stay the interchange format; the database only remembers what happened.
"""

from __future__ import annotations

import json
import sqlite3
import time
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any

__all__ = ["SCHEMA_VERSION", "HistoryEntry", "Store"]

SCHEMA_VERSION = 1

_SCHEMA = """
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS history (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    bar TEXT NOT NULL,
    kind TEXT NOT NULL CHECK (kind IN ('tap', 'cut')),
    at REAL NOT NULL,
    data TEXT NOT NULL
);
CREATE INDEX IF NOT EXISTS history_bar ON history (bar, id);
CREATE TABLE IF NOT EXISTS runs (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    kind TEXT NOT NULL,
    name TEXT NOT NULL,
    started REAL NOT NULL,
    finished REAL,
    status TEXT NOT NULL,
    message TEXT NOT NULL DEFAULT ''
);
"""


@dataclass(frozen=True)
class HistoryEntry:
    """One event in a bar's life: a tap (its partials and the advice) or a cut done."""

    id: int
    bar: str
    kind: str
    at: float
    data: dict[str, Any]


class Store:
    """The workshop database. Open one per process; each call opens its own short connection
    so that threads of the web server never share one."""

    def __init__(self, path: Path) -> None:
        self.path = Path(path)
        self.path.parent.mkdir(parents=True, exist_ok=True)
        with self._connect() as conn:
            conn.execute("PRAGMA journal_mode=WAL")
            found = self._version(conn)
            if found is None:
                with conn:
                    conn.executescript(_SCHEMA)
                    conn.execute(
                        "INSERT OR REPLACE INTO meta VALUES ('schema_version', ?)",
                        (str(SCHEMA_VERSION),),
                    )
            elif found > SCHEMA_VERSION:
                raise RuntimeError(
                    f"{self.path}: written by a newer tonewright (schema {found}); update"
                )

    @staticmethod
    def _version(conn: sqlite3.Connection) -> int | None:
        has_meta = conn.execute(
            "SELECT 1 FROM sqlite_master WHERE type='table' AND name='meta'"
        ).fetchone()
        if not has_meta:
            return None
        row = conn.execute("SELECT value FROM meta WHERE key='schema_version'").fetchone()
        return None if row is None else int(row[0])

    @contextmanager
    def _connect(self) -> Iterator[sqlite3.Connection]:
        conn = sqlite3.connect(self.path, timeout=10.0, isolation_level=None)
        try:
            conn.execute("PRAGMA busy_timeout=10000")
            conn.execute("PRAGMA synchronous=FULL")  # a committed tap survives a power cut
            yield conn
        finally:
            conn.close()

    @contextmanager
    def _transaction(self) -> Iterator[sqlite3.Connection]:
        with self._connect() as conn:
            conn.execute("BEGIN IMMEDIATE")
            try:
                yield conn
            except BaseException:
                conn.execute("ROLLBACK")
                raise
            conn.execute("COMMIT")

    def schema_version(self) -> int:
        with self._connect() as conn:
            return self._version(conn) or 0

    def add(self, bar: str, kind: str, data: dict[str, Any]) -> HistoryEntry:
        """Append a tap or a cut to ``bar``'s history (one transaction)."""
        at = time.time()
        text = json.dumps(data, sort_keys=True)
        with self._transaction() as conn:
            cur = conn.execute(
                "INSERT INTO history (bar, kind, at, data) VALUES (?, ?, ?, ?)",
                (bar, kind, at, text),
            )
            entry_id = int(cur.lastrowid or 0)
        return HistoryEntry(entry_id, bar, kind, at, data)

    def history(self, bar: str) -> list[HistoryEntry]:
        with self._connect() as conn:
            rows = conn.execute(
                "SELECT id, bar, kind, at, data FROM history WHERE bar = ? ORDER BY id", (bar,)
            ).fetchall()
        return [HistoryEntry(r[0], r[1], r[2], r[3], json.loads(r[4])) for r in rows]

    def bars_with_history(self) -> dict[str, dict[str, Any]]:
        """Per bar: how many taps and cuts, and the last tap's data."""
        with self._connect() as conn:
            rows = conn.execute(
                "SELECT bar, kind, COUNT(*), MAX(id) FROM history GROUP BY bar, kind"
            ).fetchall()
            out: dict[str, dict[str, Any]] = {}
            for bar, kind, count, last_id in rows:
                entry = out.setdefault(bar, {"taps": 0, "cuts": 0, "last_tap": None})
                entry[f"{kind}s"] = count
                if kind == "tap":
                    (data,) = conn.execute(
                        "SELECT data FROM history WHERE id = ?", (last_id,)
                    ).fetchone()
                    entry["last_tap"] = json.loads(data)
        return out

    def start_run(self, kind: str, name: str) -> int:
        with self._transaction() as conn:
            cur = conn.execute(
                "INSERT INTO runs (kind, name, started, status) VALUES (?, ?, ?, 'running')",
                (kind, name, time.time()),
            )
            return int(cur.lastrowid or 0)

    def finish_run(self, run_id: int, status: str, message: str) -> None:
        with self._transaction() as conn:
            conn.execute(
                "UPDATE runs SET finished = ?, status = ?, message = ? WHERE id = ?",
                (time.time(), status, message, run_id),
            )

    def runs(self, kind: str | None = None) -> list[dict[str, Any]]:
        query = "SELECT id, kind, name, started, finished, status, message FROM runs"
        args: tuple[Any, ...] = ()
        if kind is not None:
            query += " WHERE kind = ?"
            args = (kind,)
        with self._connect() as conn:
            rows = conn.execute(query + " ORDER BY id", args).fetchall()
        keys = ("id", "kind", "name", "started", "finished", "status", "message")
        return [dict(zip(keys, r, strict=True)) for r in rows]

    def integrity(self) -> str:
        with self._connect() as conn:
            return str(conn.execute("PRAGMA integrity_check").fetchone()[0])

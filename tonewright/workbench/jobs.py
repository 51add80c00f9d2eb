"""Long work (a design, an instrument run) in a background thread, with its progress as a list
of events that any number of browser tabs can follow (server-sent events).

One job runs at a time: the eigenproblems keep one core busy, and a second design would only
slow the first. Events are plain dicts; the last one of a job has ``"type"`` ``done`` or
``error``.
"""

from __future__ import annotations

import itertools
import threading
import traceback
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from typing import Any

from threadpoolctl import threadpool_limits

from tonewright.errors import InputError

__all__ = ["Job", "JobBoard"]

Emit = Callable[[dict[str, Any]], None]


@dataclass
class Job:
    id: int
    kind: str
    name: str
    events: list[dict[str, Any]] = field(default_factory=list)
    finished: bool = False
    result: dict[str, Any] | None = None


class JobBoard:
    def __init__(self) -> None:
        self._jobs: dict[int, Job] = {}
        self._ids = itertools.count(1)
        self._changed = threading.Condition()
        self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="tonewright-job")

    def submit(self, kind: str, name: str, work: Callable[[Emit], dict[str, Any]]) -> Job:
        """Queue ``work(emit)``; it returns the result dict, or raises InputError (reported as
        a one-line error event) or anything else (reported with its type, and logged)."""
        job = Job(next(self._ids), kind, name)
        with self._changed:
            self._jobs[job.id] = job
        self._emit(job, {"type": "queued"})
        self._pool.submit(self._run, job, work)
        return job

    def get(self, job_id: int) -> Job | None:
        return self._jobs.get(job_id)

    def running(self) -> list[Job]:
        return [j for j in self._jobs.values() if not j.finished]

    def wait_events(self, job: Job, start: int, timeout: float) -> list[dict[str, Any]]:
        """Events from index ``start`` on, waiting up to ``timeout`` s for the first new one."""
        with self._changed:
            if len(job.events) <= start and not job.finished:
                self._changed.wait(timeout)
            return job.events[start:]

    def _emit(self, job: Job, event: dict[str, Any]) -> None:
        with self._changed:
            job.events.append(event)
            self._changed.notify_all()

    def _run(self, job: Job, work: Callable[[Emit], dict[str, Any]]) -> None:
        self._emit(job, {"type": "started"})
        try:
            with threadpool_limits(limits=1, user_api="blas"):
                result = work(lambda event: self._emit(job, {"type": "progress", **event}))
        except InputError as exc:
            final: dict[str, Any] = {"type": "error", "error": str(exc)}
        except Exception as exc:  # a bug: say so in the page, keep the traceback in the log
            traceback.print_exc()
            final = {"type": "error", "error": f"internal error ({type(exc).__name__}): {exc}"}
        else:
            job.result = result
            final = {"type": "done", "result": result}
        with self._changed:
            job.finished = True
            job.events.append(final)
            self._changed.notify_all()

    def shutdown(self) -> None:
        self._pool.shutdown(wait=False, cancel_futures=True)

"""Designing a range of bars in neighbour order: each bar starts from its neighbour's design.

Neighbouring bars of an instrument differ by a semitone (6 % in pitch, a few % in size), so in
the scaled design variables their undercuts are close: a least-squares polish from the
neighbour's design meets the target in about ten forward solves, where a global search from
scratch needs hundreds. The range is cut into blocks of ``block`` notes; the middle bar of each
block (its *head*) is searched from scratch and every other bar is started from the bar next to
it on the side of its head, so the designs grow outward from the heads along chains.

The parent of each bar is fixed by the range alone (not by timing or the number of workers),
so which design a bar starts from never depends on the pool size. A bar whose parent misses
its target falls back to the global search.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from concurrent.futures import FIRST_COMPLETED, Executor, Future, wait
from typing import Any

__all__ = ["neighbour_parents", "run_in_parent_order"]

BLOCK_NOTES = 24  # two octaves per head


def neighbour_parents(n: int, block: int = BLOCK_NOTES) -> list[int | None]:
    """For bars 0..n-1 in pitch order: the index of the bar each one starts from (None for
    the heads). Heads sit in the middle of ``round(n / block)`` (at least one) equal blocks."""
    if n <= 0:
        return []
    blocks = max(1, round(n / block))
    bounds = [round(k * n / blocks) for k in range(blocks + 1)]
    parents: list[int | None] = []
    for k in range(blocks):
        lo, hi = bounds[k], bounds[k + 1]
        head = (lo + hi - 1) // 2
        for i in range(lo, hi):
            parents.append(None if i == head else (i + 1 if i < head else i - 1))
    return parents


def run_in_parent_order(
    pool: Executor,
    fn: Callable[[Any, Any], Any],
    items: Sequence[Any],
    parents: Sequence[int | None],
    on_done: Callable[[int, Any], None] | None = None,
) -> list[Any]:
    """Run ``fn(items[i], output of its parent)`` on ``pool``, each item once its parent has
    finished (the parent's output is None for heads and for parents outside ``items``, marked
    by a parent index of None). Returns the outputs in item order; ``on_done(i, output)`` is
    called as each finishes. On an exception or interrupt the unstarted items are cancelled."""
    n = len(items)
    if len(parents) != n:
        raise ValueError("one parent (or None) per item")
    children: dict[int, list[int]] = {i: [] for i in range(n)}
    for i, p in enumerate(parents):
        if p is not None:
            if not 0 <= p < n or p == i:
                raise ValueError(f"item {i}: parent {p} is not another item")
            children[p].append(i)
    outputs: list[Any] = [None] * n
    running: dict[Future, int] = {}

    def start(i: int, parent_output: Any) -> None:
        running[pool.submit(fn, items[i], parent_output)] = i

    for i, p in enumerate(parents):
        if p is None:
            start(i, None)
    if not running and n:
        raise ValueError("the parents form a cycle: no item can start")
    finished = 0
    try:
        while running:
            done, _ = wait(list(running), return_when=FIRST_COMPLETED)
            for fut in done:
                i = running.pop(fut)
                outputs[i] = fut.result()
                finished += 1
                if on_done:
                    on_done(i, outputs[i])
                for c in children[i]:
                    start(c, outputs[i])
    except BaseException:
        for fut in running:
            fut.cancel()
        raise
    if finished != n:
        raise ValueError("the parents form a cycle: some items never started")
    return outputs

"""Neighbour order for an instrument's bars: which bar starts from which, and the scheduler
that runs each bar only after the bar it starts from (pure logic, no physics)."""

from __future__ import annotations

import threading
import time
from concurrent.futures import ThreadPoolExecutor

import pytest

from tonewright.scheduling import neighbour_parents, run_in_parent_order


def _head_of(parents: list[int | None], i: int) -> int:
    seen = 0
    while parents[i] is not None:
        assert abs(parents[i] - i) == 1  # always the bar next to it
        i = parents[i]
        seen += 1
        assert seen <= len(parents)
    return i


@pytest.mark.parametrize("n", [1, 2, 5, 24, 25, 36, 52, 61])
def test_every_bar_reaches_a_head_through_its_neighbours(n):
    parents = neighbour_parents(n)
    heads = [i for i, p in enumerate(parents) if p is None]
    assert len(heads) == max(1, round(n / 24))
    for i in range(n):
        assert _head_of(parents, i) in heads


def test_52_bars_grow_from_two_heads_in_the_middle_of_their_halves():
    parents = neighbour_parents(52)
    assert [i for i, p in enumerate(parents) if p is None] == [12, 38]
    assert parents[0] == 1 and parents[25] == 24 and parents[26] == 27 and parents[51] == 50
    assert neighbour_parents(0) == [] and neighbour_parents(1) == [None]


def test_each_item_runs_after_its_parent_with_its_parents_output():
    parents = neighbour_parents(30, block=10)
    log: list[tuple[str, int]] = []
    lock = threading.Lock()

    def fn(i: int, parent_output):
        with lock:
            log.append(("start", i))
        time.sleep(0.002 * (i % 3))
        expected = None if parents[i] is None else 10 * parents[i]
        assert parent_output == expected
        with lock:
            log.append(("end", i))
        return 10 * i

    finished = []
    with ThreadPoolExecutor(3) as pool:
        out = run_in_parent_order(
            pool, fn, list(range(30)), parents, lambda i, o: finished.append(i)
        )
    assert out == [10 * i for i in range(30)]
    assert sorted(finished) == list(range(30))
    position = {event: k for k, event in enumerate(log)}
    for i, p in enumerate(parents):
        if p is not None:
            assert position[("end", p)] < position[("start", i)]


def test_parents_outside_the_items_start_at_once():
    # an item whose neighbour was reused from an earlier run has no parent here
    with ThreadPoolExecutor(2) as pool:
        out = run_in_parent_order(pool, lambda i, p: (i, p), ["a", "b"], [None, None])
    assert out == [("a", None), ("b", None)]


def test_cycles_and_bad_parents_are_refused():
    with ThreadPoolExecutor(1) as pool:
        with pytest.raises(ValueError, match="cycle"):
            run_in_parent_order(pool, lambda i, p: i, [0, 1], [1, 0])
        with pytest.raises(ValueError, match="cycle"):
            run_in_parent_order(pool, lambda i, p: i, [0, 1, 2], [None, 2, 1])
        with pytest.raises(ValueError, match="not another item"):
            run_in_parent_order(pool, lambda i, p: i, [0, 1], [None, 1])
        with pytest.raises(ValueError, match="one parent"):
            run_in_parent_order(pool, lambda i, p: i, [0, 1], [None])


def test_a_failure_stops_the_unstarted_items():
    started = []

    def fn(i, p):
        started.append(i)
        if i == 0:
            raise RuntimeError("bar 0 failed")
        return i

    with ThreadPoolExecutor(1) as pool:
        with pytest.raises(RuntimeError, match="bar 0 failed"):
            run_in_parent_order(pool, fn, [0, 1, 2], [None, 0, 1])
    assert started == [0]

"""The collector held by long reads (store/base/collector.py) is one switch for the whole
process: reads in several threads, nested or ending in any order, leave it as they found it
(issue 25, item 4). Why it is held at all is measured by tests/benchmarks/speed.py."""

from __future__ import annotations

import gc
import threading
import weakref

import pytest

from store.base.collector import (
    FORCE_TIMES,
    IDLE_S,
    collector_held,
    full_pass_due,
    held_full_pass,
    hold_collector,
    hold_full_passes,
)


@pytest.fixture(autouse=True)
def _collector_on():
    gc.enable()
    yield
    gc.enable()


def test_nested_holds_let_the_collector_run_again_only_when_the_outer_one_ends():
    with collector_held():
        with collector_held():
            assert not gc.isenabled()
        assert not gc.isenabled()  # the outer read is still building
    assert gc.isenabled()


def test_two_threads_ending_in_the_other_order_keep_it_held_until_the_last_one_ends():
    a_in, b_in, a_out, b_checked = (threading.Event() for _ in range(4))
    seen: dict[str, bool] = {}

    def a() -> None:
        with collector_held():
            a_in.set()
            b_in.wait(5)
        a_out.set()  # A ends first, B is still reading

    def b() -> None:
        a_in.wait(5)
        with collector_held():
            b_in.set()
            a_out.wait(5)
            seen["during B after A"] = gc.isenabled()
        b_checked.set()

    threads = [threading.Thread(target=a), threading.Thread(target=b)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(10)
    assert b_checked.is_set()
    assert seen["during B after A"] is False  # the first version switched it on here
    assert gc.isenabled()


def test_a_collector_switched_off_by_its_owner_stays_off_and_an_error_lets_it_go():
    gc.disable()
    with collector_held():
        pass
    assert not gc.isenabled()
    gc.enable()
    with pytest.raises(ValueError), collector_held():
        raise ValueError("a row that cannot be read")
    assert gc.isenabled()


def test_the_watch_list_now_is_built_with_the_collector_held_and_as_of_without(
    monkeypatch, demo_file, tmp_path
):
    """views.watch holds it while it builds the list now (as journal.read does), not for an
    as-of list, which computes every status for seconds; either way it is left running."""
    import shutil

    from store import views
    from store.db.book import open_book
    from store.health import watchlist

    path = tmp_path / "demo.db"
    shutil.copy(demo_file, path)
    seen: list[bool] = []
    real = watchlist.watch_list

    def spy(*args, **kwargs):  # noqa: ANN002, ANN003
        seen.append(gc.isenabled())
        return real(*args, **kwargs)

    monkeypatch.setattr(views, "watch_list", spy)
    with open_book(path, create=False) as book:
        views.watch(book)
        views.watch(book, as_of=book.now())
    assert seen == [False, True]
    assert gc.isenabled()


def test_a_hold_let_go_twice_counts_once_and_spans_the_blocks_inside_it():
    """The app's start holds it across callbacks (`hold_collector`) while its workers' reads
    hold it in blocks: letting the app's hold go again (the paint, then the timer, then the
    end) must not let a read's hold go."""
    let_go = hold_collector()
    with collector_held():
        assert not gc.isenabled()
    assert not gc.isenabled()  # the outer hold is still on
    let_go()
    assert gc.isenabled()
    with collector_held():
        let_go()  # a second call: nothing
        assert not gc.isenabled()
    assert gc.isenabled()


# ---- the full passes held for an idle moment --------------------------------------------------
# What a threshold means is CPython's, as its gc module documents it (gc.set_threshold: the
# third is how many passes of the middle generation come before a full one; gc.get_count:
# the counts so far) and the interpreter shows it (`gc.callbacks` names the generation of
# each pass). The tests set small thresholds and freeze what the process holds already, so
# that a few thousand objects drive the counts (Python's defaults, 700/10/10, from memory,
# would need hundreds of thousands here, and a full pass unheld waits until the objects
# added since the last one are a quarter of those it kept).


@pytest.fixture
def passes():
    """The generation of every pass the collector starts, in order, with small thresholds
    and the process's objects frozen meanwhile (all as they were afterwards)."""
    seen: list[int] = []

    def note(phase: str, info: dict) -> None:
        if phase == "start":
            seen.append(info["generation"])

    before = gc.get_threshold()
    gc.collect()
    gc.freeze()
    gc.set_threshold(100, 2, 3)
    gc.callbacks.append(note)
    yield seen
    gc.callbacks.remove(note)
    gc.set_threshold(*before)
    gc.unfreeze()


def _young_passes(count: int) -> list[list[int]]:
    """Objects kept alive until `count` passes of the middle generation have run since the
    last full pass (each new container object counts towards the young passes)."""
    kept: list[list[int]] = []
    while gc.get_count()[2] < count:
        kept.extend([i] for i in range(50))
    return kept


def test_held_full_passes_leave_the_young_ones_and_the_thresholds_come_back(passes):
    before = gc.get_threshold()
    let_go = hold_full_passes()
    try:
        gc.collect()
        passes.clear()
        kept = _young_passes(3 * before[2])  # three times what starts a full pass unheld
        assert 2 not in passes and 1 in passes  # young passes ran, no full one
        assert len(kept) > 0
    finally:
        let_go()
    assert gc.get_threshold() == before
    gc.collect()
    passes.clear()
    kept = []
    while 2 not in passes and len(kept) < 200_000:  # unheld, Python starts its own again
        kept.extend([i] for i in range(50))
    assert 2 in passes


def test_nested_holds_of_the_full_passes_put_the_thresholds_back_once_the_last_goes():
    before = gc.get_threshold()
    first, second = hold_full_passes(), hold_full_passes()
    first()
    assert gc.get_threshold()[2] != before[2]  # the second hold is still on
    first()  # a second call: nothing
    assert gc.get_threshold()[2] != before[2]
    second()
    assert gc.get_threshold() == before


def test_a_held_full_pass_runs_when_idle_or_when_too_many_are_due_and_frees_the_cycles(passes):
    every = gc.get_threshold()[2]

    class Node:
        def __init__(self) -> None:
            self.me = self  # a cycle: only a pass of the collector frees it

    let_go = hold_full_passes()
    try:
        gc.collect()
        node = Node()
        gone = weakref.ref(node)
        kept = _young_passes(every + 1)  # the node, older than these, reaches the oldest gen
        del node
        passes.clear()
        assert not held_full_pass(idle_s=0.0)  # due, but somebody is typing
        assert 2 not in passes and gone() is not None
        assert held_full_pass(idle_s=IDLE_S)  # a pause: it runs
        assert passes.count(2) == 1 and gone() is None
        assert gc.get_count()[2] == 0
        assert not held_full_pass(idle_s=60.0)  # nothing due after it
        kept += _young_passes(FORCE_TIMES * every)
        passes.clear()
        assert held_full_pass(idle_s=0.0)  # typing without a pause: run all the same
        assert passes == [2]
    finally:
        let_go()
    assert not held_full_pass(idle_s=60.0)  # no hold taken: never run from here


def test_full_pass_due_follows_the_interpreters_own_threshold():
    # common practice, no source: move the work, keep its cadence (the interpreter's count)
    assert not full_pass_due(9, 10, 5.0)
    assert not full_pass_due(10, 10, IDLE_S / 2)
    assert full_pass_due(10, 10, IDLE_S)
    assert full_pass_due(10 * FORCE_TIMES, 10, 0.0)
    assert full_pass_due(3, 3, IDLE_S) and not full_pass_due(3, 4, IDLE_S)
    assert full_pass_due(1, 0, IDLE_S)  # a threshold of 0 is taken as 1, not as "always"

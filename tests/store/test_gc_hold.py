"""The collector held by long reads (store/base/collector.py) is one switch for the whole
process: reads in several threads, nested or ending in any order, leave it as they found it
(issue 25, item 4). Why it is held at all is measured by tests/benchmarks/speed.py."""

from __future__ import annotations

import gc
import threading

import pytest

from store.base.collector import collector_held, hold_collector


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

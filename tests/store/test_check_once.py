"""The whole-file quick check runs once per file and process: a save that comes while the
check behind the app's first paint runs waits for it rather than reading the file again."""

from __future__ import annotations

import threading

from store.db import book as book_module
from store.db.book import deep_check, open_book
from store.db.connection import forget_check


def test_a_first_write_during_the_background_check_waits_for_it(tmp_path, monkeypatch):
    path = tmp_path / "b.db"
    open_book(path).close()
    forget_check(path)  # as a new process would find it
    started, release = threading.Event(), threading.Event()
    runs: list[str] = []
    check = book_module._quick_check_now

    def held(conn, where):
        runs.append(threading.current_thread().name)
        started.set()
        assert release.wait(10)
        check(conn, where)

    monkeypatch.setattr(book_module, "_quick_check_now", held)
    background = threading.Thread(target=deep_check, args=(path,), name="background")
    background.start()
    assert started.wait(10)
    wrote = threading.Event()

    def save() -> None:
        with open_book(path, create=False) as book, book.atomic():
            book.set_setting("name", "check once")
        wrote.set()

    saver = threading.Thread(target=save, name="save")
    saver.start()  # it waits for the check under way (were it to check again, `runs` says so)
    release.set()
    background.join(10)
    saver.join(10)
    assert wrote.is_set() and runs == ["background"]  # one check, not two

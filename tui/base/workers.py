"""Reading the book off the screen's thread, and showing a book or file problem as a
notification instead of a traceback."""

from __future__ import annotations

import functools
import sqlite3
import threading
from collections.abc import Callable
from concurrent.futures import Future
from pathlib import Path
from typing import Any, TypeVar

from store import Book, open_book
from store.base.errors import BookError
from store.base.session import Clock
from store.ledger.journal import unreadable_report

F = TypeVar("F", bound=Callable[..., Any])
PROBLEMS = (BookError, sqlite3.Error, OSError)


def guarded(method: F) -> F:
    """Show a book or file problem as a notification instead of stopping the app."""

    @functools.wraps(method)
    def wrapper(self: Any, *args: Any, **kwargs: Any) -> Any:
        try:
            return method(self, *args, **kwargs)
        except PROBLEMS as exc:
            self.app.notify(str(exc) or type(exc).__name__, severity="error", timeout=8)
            return None

    return wrapper  # type: ignore[return-value]


def read_early(path: Path, read: Callable[[Book], Any], clock: Clock) -> Future[Any]:
    """Start `read` on a connection of its own in a thread now (the app calls it while
    Textual is still starting, so the first list is read meanwhile); the screen's worker
    then waits for the result with `read_in_thread(..., early=...)`.

    A thread, not a forked process: the fork did not bring the app's start to its target on
    2 cores either (1.8-2.2x the bare screens against 1.5x), and a plain thread leaves no
    process behind and needs no read-only second opening of the book."""
    future: Future[Any] = Future()

    def in_thread() -> None:
        try:
            with open_book(path, create=False, clock=clock) as book:
                result = read(book)
                future.left_out = unreadable_report(book)  # type: ignore[attr-defined]
                future.set_result(result)
        except BaseException as exc:  # noqa: BLE001 - handed to the screen's worker
            future.set_exception(exc)

    threading.Thread(target=in_thread, name="early-read", daemon=True).start()
    return future


def write_behind(
    widget: Any,
    path: Path,
    clock: Clock,
    job: Callable[[Book], Any],
    done: Callable[[Any], None],
    failed: Callable[[BaseException], None],
) -> Any:
    """Run `job(book)` in a thread on a connection of its own and hand its result to `done`
    (or what it raised to `failed`) on the UI loop. A save does its writing here: the first
    write of a process runs the whole-file quick check (seconds on a big book), and the
    screen keeps taking keys meanwhile. Returns the worker; never exclusive: a save is
    never dropped for a later one (the form refuses a second save while one runs)."""

    def run() -> None:
        try:
            with open_book(path, create=False, clock=clock) as book:
                result = job(book)
        except Exception as exc:  # noqa: BLE001 - the screen says it, its input kept
            widget.app.call_from_thread(failed, exc)
            return
        widget.app.call_from_thread(done, result)

    return widget.run_worker(run, thread=True, group="save", exit_on_error=False)

"""What the app's full screens share: reading the book in a worker thread, and the entry keys."""

from __future__ import annotations

import functools
import sqlite3
import threading
import time
from collections.abc import Callable
from concurrent.futures import Future
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, TypeVar

from textual.binding import Binding
from textual.screen import Screen
from textual.worker import get_current_worker

from store.base.errors import BookError
from store.db.book import Book, open_book
from store.db.connection import damaged_read

from ..keys import bind

if TYPE_CHECKING:
    from ..app import SumpbookApp


F = TypeVar("F", bound=Callable[..., Any])
PROBLEMS = (BookError, sqlite3.Error, OSError)
RESHOW_AFTER_S = 300.0  # a screen shown again after this long reads the book again anyway


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


def read_early(path: Path, read: Callable[[Book], Any]) -> Future[Any]:
    """Start `read` on a connection of its own in a thread now (the app calls it while
    Textual is still starting, so the first list is read meanwhile); the screen's worker
    then waits for the result with `read_in_thread(..., early=...)`.

    A thread, not a forked process: the fork did not bring the app's start to its target on
    2 cores either (1.8-2.2x the bare screens against 1.5x), and a plain thread leaves no
    process behind and needs no read-only second opening of the book."""
    future: Future[Any] = Future()

    def in_thread() -> None:
        try:
            with open_book(path, create=False) as book:
                future.set_result(read(book))
        except BaseException as exc:  # noqa: BLE001 - handed to the screen's worker
            future.set_exception(exc)

    threading.Thread(target=in_thread, name="early-read", daemon=True).start()
    return future


@dataclass(frozen=True)
class Target:
    """What the cursor is on: a filter, breather or unit tag, and its unit."""

    what: str
    tag: str
    unit: str


ENTRY_BINDINGS = [
    bind("r", "entry('reading')", "log-reading"),
    bind("c", "entry('change')", "log-change"),
    bind("b", "entry('breather')", "log-breather"),
    bind("o", "entry('topup')", "log-topup"),
    bind("s", "entry('sample')", "log-sample"),
    bind("n", "entry('note')", "log-note"),
]


def long_name(binding: Binding) -> str:
    """The name of an action for the help screen and the command palette."""
    return binding.tooltip or binding.description


class BookScreen(Screen):
    """A screen that shows the book; it reloads whenever it comes back to the top."""

    loaded = False  # set once the first load has been shown (tests wait on it)
    shown_stamp: tuple[object, ...] | None = None  # the app's book_stamp at the last read
    shown_at = 0.0  # time.monotonic() then

    @property
    def sb(self) -> SumpbookApp:
        return self.app  # type: ignore[return-value]

    def on_screen_resume(self) -> None:
        """Back on top: read again if the book may show something else now (a save, another
        program's write, or simply time: due dates and ages move on)."""
        stamp, now = self.sb.book_stamp(), time.monotonic()
        if self.shown_stamp == stamp and now - self.shown_at < RESHOW_AFTER_S:
            return
        self.shown_stamp, self.shown_at = stamp, now
        self.reload()

    def reload(self) -> None:
        """Start reading; subclasses override."""

    def read_in_thread(
        self,
        read: Callable[[Book], Any],
        show: Callable[[Any], None],
        group: str,
        early: Future[Any] | None = None,
    ) -> None:
        """Run `read` on a connection of its own in a worker thread, then `show` the result;
        with `early`, a read already under way (see `read_early`), wait for it instead.

        A failure is shown as a notification, never as a traceback.
        """
        path = self.sb.book.path

        def job() -> None:
            worker = get_current_worker()
            try:
                if early is not None:
                    result = early.result()
                else:
                    with open_book(path, create=False) as book:
                        result = read(book)
            except Exception as exc:  # noqa: BLE001 - shown to the user, not raised
                if not worker.is_cancelled:
                    self.app.call_from_thread(self.failed, exc)
                return
            if not worker.is_cancelled:
                self.app.call_from_thread(show, result)

        self.run_worker(job, thread=True, exclusive=True, group=group, exit_on_error=False)

    def failed(self, exc: BaseException) -> None:
        self.loaded = True
        if isinstance(exc, sqlite3.DatabaseError):
            exc = damaged_read(exc, self.sb.book.path)
        self.notify(f"Could not read the logbook: {exc}", severity="error", timeout=8)

    # ---- entry keys (screens that mix these in define `target()`) ----

    def target(self) -> Target | None:
        return None

    def action_entry(self, kind: str) -> None:
        t = self.target()
        tag = ""
        if t is not None:
            if kind in ("reading", "change") and t.what == "filter":
                tag = t.tag
            elif kind == "breather" and t.what == "breather":
                tag = t.tag
            elif kind in ("topup", "sample", "note"):
                tag = t.unit
        self.sb.open_form(kind, tag)

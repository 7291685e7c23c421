"""What the app's full screens share: the book screen (reading in a worker thread) and the
entry keys."""

from __future__ import annotations

import sqlite3
import time
from collections.abc import Callable
from concurrent.futures import Future
from dataclasses import dataclass
from typing import Any

from textual.binding import Binding
from textual.screen import Screen
from textual.worker import get_current_worker

from store import Book, damaged_read, open_book
from store.ledger.journal import unreadable_report
from tui.base.host import Host
from tui.base.keys import bind

RESHOW_AFTER_S = 300.0  # a screen shown again after this long reads the book again anyway


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
    def sb(self) -> Host:
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

        The worker is exclusive in `group`: a newer read of the group cancels this one, and a
        cancelled read's result is dropped on the UI loop, where it would be shown (a check in
        the thread could pass just before the cancel). `drop_reads` cancels without a newer
        read. A failure is shown as a notification, never as a traceback.
        """
        path, clock = self.sb.book.path, self.sb.book.clock

        def job() -> None:
            worker = get_current_worker()

            def unless_cancelled(then: Callable[..., None], *args: Any) -> None:
                if not worker.is_cancelled:
                    then(*args)

            try:
                if early is not None:
                    result = early.result()
                    left_out = getattr(early, "left_out", None)
                else:
                    with open_book(path, create=False, clock=clock) as book:
                        result = read(book)
                        left_out = unreadable_report(book)
            except Exception as exc:  # noqa: BLE001 - shown to the user, not raised
                self.app.call_from_thread(unless_cancelled, self.failed, exc)
                return
            self.app.call_from_thread(unless_cancelled, show, result)
            if left_out:
                self.app.call_from_thread(unless_cancelled, self.name_left_out, left_out)

        self.run_worker(job, thread=True, exclusive=True, group=group, exit_on_error=False)

    def drop_reads(self, group: str) -> None:
        """Cancel this screen's reads of `group` under way: their results are not shown."""
        self.workers.cancel_group(self, group)

    def name_left_out(self, report: str) -> None:
        """Say once per app which entry rows a read left out (they could not be read: made
        outside sumpbook); the same line again stays unsaid."""
        told: set[str] = self.app.__dict__.setdefault("_told_left_out", set())
        if report not in told:
            told.add(report)
            self.notify(report, severity="warning", timeout=12)

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

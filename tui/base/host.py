"""The app as its screens and forms see it: a Protocol, so they can name what they use of it
without importing the app (which imports them)."""

from __future__ import annotations

from concurrent.futures import Future
from typing import Any, Protocol

from store import Book
from store.base.prefs import Prefs
from store.base.session import Session


class Host(Protocol):
    book: Book
    prefs: Prefs
    session: Session
    cursor_blink: bool
    early_watch: Future[Any] | None

    @property
    def tech(self) -> str: ...

    def remember_rows(self, rows: list[Any]) -> None: ...

    def change_prefs(self, **changes: str) -> None: ...

    def book_changed(self) -> None: ...

    def book_stamp(self) -> tuple[object, ...]: ...

    def open_sheet(self, what: str, tag: str, unit: str) -> None: ...

    def open_form(self, kind: str, tag: str = "", **preset: str) -> None: ...

    def first_paint_done(self) -> None: ...

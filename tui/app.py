"""The Textual app: bindings and screen routing only."""

from __future__ import annotations

from pathlib import Path

from textual.app import App, ComposeResult
from textual.widgets import Footer, Header, Static

from store.book import Book, default_path, open_book
from store.demo import create_demo, demo_path


class SumpbookApp(App[None]):
    TITLE = "sumpbook"
    BINDINGS = [("q", "quit", "Quit")]

    def __init__(self, book: Book, demo: bool = False) -> None:
        super().__init__()
        self.book = book
        self.demo = demo

    def compose(self) -> ComposeResult:
        yield Header()
        yield Static(f"Logbook: {self.book.path}")
        yield Footer()


def open_for_app(db: Path | None) -> tuple[Book, bool]:
    """The named logbook, or the demo plant when no logbook exists yet."""
    path = db or default_path()
    if path.exists() and path.stat().st_size > 0:
        return open_book(path), False
    demo = demo_path()
    if demo.exists() and demo.stat().st_size > 0:
        return open_book(demo), True
    return create_demo(demo), True


def run_app(db: Path | None) -> int:
    book, demo = open_for_app(db)
    try:
        SumpbookApp(book, demo=demo).run()
    finally:
        book.close()
    return 0

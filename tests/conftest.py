"""Shared fixtures: every test runs against files in its own temporary folder."""

from __future__ import annotations

import shutil

import pytest

from store.db.book import open_book
from store.exchange.demo import create_demo
from tests.kit.plant import app_for, fill_register, write_prefs


@pytest.fixture(autouse=True)
def _isolated(tmp_path, monkeypatch):
    """Never touch the user's logbook or prefs; fix nothing else."""
    monkeypatch.setenv("SUMPBOOK_DB", str(tmp_path / "default.db"))
    monkeypatch.setenv("SUMPBOOK_CONFIG", str(tmp_path / "prefs.json"))
    monkeypatch.delenv("SUMPBOOK_NOW", raising=False)
    monkeypatch.setenv("TZ", "UTC")


@pytest.fixture
def book(tmp_path):
    with open_book(tmp_path / "book.db") as b:
        fill_register(b)
        yield b


@pytest.fixture(scope="session")
def demo_file(tmp_path_factory):
    """The demo plant written once per test process; tests copy it."""
    path = tmp_path_factory.mktemp("demo") / "demo.db"
    create_demo(path).close()
    return path


@pytest.fixture
def live(demo_file, tmp_path):
    """A fresh copy of the demo plant as the live logbook of a test (`b.db`)."""
    path = tmp_path / "b.db"
    shutil.copy(demo_file, path)
    return path


@pytest.fixture
def demo_app(demo_file, tmp_path, monkeypatch):
    """A maker of apps on a fresh copy of the demo plant (frozen in time), prefs as given;
    `demo_app.path` is the copy."""
    from tui.app import SumpbookApp  # the app only for the app tests

    path = tmp_path / "demo.db"
    shutil.copy(demo_file, path)
    with open_book(path, create=False) as book:
        monkeypatch.setenv("SUMPBOOK_NOW", book.now().isoformat())

    def make(**prefs: str) -> SumpbookApp:
        monkeypatch.setenv("SUMPBOOK_CONFIG", str(write_prefs(tmp_path, tech="AK", **prefs)))
        return app_for(path)

    make.path = path  # type: ignore[attr-defined]
    return make

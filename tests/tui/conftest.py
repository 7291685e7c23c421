"""Fixtures of the app tests."""

from __future__ import annotations

import pytest

from store.db.book import open_book
from tests.kit.plant import CLOCK, build_plant, write_prefs


@pytest.fixture
def plant(tmp_path, monkeypatch):
    """A path to the invented plant's logbook, with this laptop's prefs fixed."""
    monkeypatch.setenv("SUMPBOOK_CONFIG", str(write_prefs(tmp_path)))
    monkeypatch.setenv("SUMPBOOK_NOW", CLOCK.isoformat())
    path = tmp_path / "plant.db"
    with open_book(path) as book:
        build_plant(book)
    return path

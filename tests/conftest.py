"""Shared fixtures: every test runs against files in its own temporary folder."""

from __future__ import annotations

import json
import os
import shutil
from pathlib import Path

import pytest

from store.db.book import Book, open_book
from store.exchange.demo import create_demo
from store.ledger import register
from store.ledger.register import Breather, FilterPosition, Fluid, Technician, Unit


@pytest.fixture(autouse=True)
def _isolated(tmp_path, monkeypatch):
    """Never touch the user's logbook or prefs; fix nothing else."""
    monkeypatch.setenv("SUMPBOOK_DB", str(tmp_path / "default.db"))
    monkeypatch.setenv("SUMPBOOK_CONFIG", str(tmp_path / "prefs.json"))
    monkeypatch.delenv("SUMPBOOK_NOW", raising=False)
    monkeypatch.setenv("TZ", "UTC")


def fill_register(book: Book) -> None:
    """A tiny invented plant: one unit, two filters, one breather, two technicians."""
    register.add(book, Technician(tag="AB", name="A.B."))
    register.add(book, Technician(tag="CD"))
    # ISO VG 46 oil; ν40 and ν100 typical of a VI ~100 mineral oil (invented test fluid)
    register.add(
        book, Fluid(tag="HV46", name="test oil 46", iso_vg=46, nu40_cst=46.0, nu100_cst=6.8)
    )
    register.add(
        book,
        Unit(
            tag="P1",
            name="Press 1",
            area="Hall A",
            reservoir_l=400,
            fluid="HV46",
            normal_temp_c=50,
            coldest_start_c=10,
            target_code="17/15/12",
        ),
    )
    register.add(
        book,
        FilterPosition(
            tag="P1-RF",
            unit="P1",
            kind="return",
            element="RX-10",
            rating_um=10,
            bypass_bar=3.5,
            limit_bar=2.5,
            clean_bar=0.4,
            normal_flow_lpm=120,
        ),
    )
    register.add(
        book,
        FilterPosition(
            tag="P1-PF",
            unit="P1",
            kind="pressure",
            rating_um=3,
            bypass_bar=7.0,
            limit_bar=5.0,
            clean_bar=0.8,
            gauge=False,
        ),
    )
    register.add(book, Breather(tag="P1-BR", unit="P1", kind="desiccant", swap_interval_d=90))
    register.set_shifts(book, [("early", "06:00"), ("late", "14:00"), ("night", "22:00")])


@pytest.fixture
def book(tmp_path):
    with open_book(tmp_path / "book.db") as b:
        fill_register(b)
        yield b


def write_prefs(tmp_path: Path, **prefs: str) -> Path:
    """This laptop's preferences as a file: technician AB, bar, °C, L, dark, unless given."""
    path = tmp_path / "prefs.json"
    data = {"tech": "AB", "pressure": "bar", "temperature": "C", "volume": "L", "theme": "dark"}
    data.update(prefs)
    path.write_text(json.dumps(data), encoding="utf-8")
    return path


@pytest.fixture(scope="session")
def demo_file(tmp_path_factory):
    """The demo plant written once per test process; tests copy it."""
    path = tmp_path_factory.mktemp("demo") / "demo.db"
    create_demo(path).close()
    return path


def app_for(path: Path, **options):
    """The app on the logbook at `path`, with the session the command line would read from
    the environment the test set up (clock, prefs file)."""
    from store.base.session import from_environ
    from tui.app import SumpbookApp

    session = from_environ(os.environ)
    book = open_book(path, clock=session.clock)
    return SumpbookApp(book, cursor_blink=False, session=session, **options)


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

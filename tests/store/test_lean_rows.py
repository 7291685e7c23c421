"""The kept filter rows read by their columns (`statuscache.lean_filters`, what the watch list
reads now) give what the whole row gives (`data`, decoded as before) and what a computation
from the entries gives, at several clocks on the demo: field by field, and as `status
--json`, `status` and the app's list show them.

The reference is sumpbook's own full computation (`statuscache.live_status`, from the
entries since the last element change and the element cache), not an outside source: what is
checked is that reading fewer columns changes no answer (common practice, no source).
"""

from __future__ import annotations

import sqlite3
from collections.abc import Iterator
from dataclasses import fields, replace
from datetime import timedelta
from pathlib import Path

import pytest

from store import sheets, views
from store.db import schema
from store.db.book import open_book
from store.derived import statuscache
from store.health import status_json
from store.health.conditions import contexts
from store.health.status_model import FilterStatus
from store.health.watchlist import watch_list
from store.ledger.register import FilterPosition, Unit, list_all
from tests.kit.kept_demo import kept_demo, moved
from tests.kit.schema_steps import drop_tables_after

LATER = [
    timedelta(0),
    timedelta(hours=5),
    timedelta(days=1, hours=3),
    timedelta(weeks=1),
    timedelta(days=40),
    timedelta(days=365),
]
IDS = ["now", "5-hours", "next-day", "a-week", "40-days", "a-year"]


@pytest.fixture(scope="module")
def kept(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Path]:
    yield kept_demo(tmp_path_factory.mktemp("lean"))


def test_every_demo_row_is_kept_with_its_columns(kept: Path) -> None:
    # Otherwise the comparisons below would hold the whole-row path against itself.
    with open_book(kept, create=False) as book:
        count, lean = book.conn.execute("SELECT count(*), sum(lean) FROM status_cache").fetchone()
        filters = book.conn.execute("SELECT count(*) FROM filters").fetchone()[0]
    assert count == lean == filters > 0


@pytest.mark.parametrize("later", LATER, ids=IDS)
def test_columns_give_the_whole_row_and_the_computation(
    kept: Path, tmp_path: Path, later: timedelta
) -> None:
    with open_book(moved(kept, tmp_path, later), create=False) as book:
        now = book.now()
        ctxs = contexts(book)
        tags = [tag.upper() for tag in ctxs]
        lean = statuscache.lean_filters(book, tags, now)
        whole = statuscache.kept_filters(book, tags, now)
        live = {tag.upper(): statuscache.live_status(book, c, now)[0] for tag, c in ctxs.items()}
        quick = views.watch(book)
    assert sorted(lean) == sorted(whole) == sorted(tags)  # every row holds, and is read
    for tag in tags:
        computed = replace(live[tag], history=())  # no kept row has the history
        assert lean[tag] == whole[tag], tag
        assert lean[tag] == computed, tag
        assert whole[tag] == lean[tag], tag  # (either way round)
        for name in ("notes", "flags", "state", "due", "bypass_due", "element_age_h",
                     "note_codes", "spark", "cold", "life", "clock"):  # fmt: skip
            assert getattr(lean[tag], name) == getattr(computed, name), (tag, name)
        assert statuscache._encode(lean[tag]) == statuscache._encode(computed), tag
    full = watch_list(now, list(live.values()), list(quick.breathers), list(quick.units))
    assert [f.filter for f in quick.filters] == [f.filter for f in full.filters]
    assert status_json.to_json(quick) == status_json.to_json(full)
    assert sheets.watch_rows(quick) == sheets.watch_rows(full)


def test_the_clock_moves_the_columns_read(kept: Path, tmp_path: Path) -> None:
    # The comparisons above are worth something only if what moves with the clock does
    # move between the clocks compared: ages, overdue readings, states, notes.
    with open_book(kept, create=False) as book:
        then = {f.filter: f for f in views.watch(book).filters}
    with open_book(moved(kept, tmp_path, timedelta(days=40)), create=False) as book:
        later = {f.filter: f for f in views.watch(book).filters}
    assert all(later[t].element_age_h > then[t].element_age_h for t in then if then[t].changed_at)
    assert any(later[t].flags != then[t].flags for t in then)
    assert any(later[t].state != then[t].state for t in then)
    assert any(later[t].notes != then[t].notes for t in then)


def test_a_row_without_columns_is_read_whole(kept: Path, tmp_path: Path) -> None:
    path = moved(kept, tmp_path, timedelta(weeks=1))
    with open_book(path, create=False) as book:
        before = status_json.to_json(views.watch(book))
        tag = book.conn.execute("SELECT filter FROM status_cache LIMIT 1").fetchone()[0]
        with book.atomic():
            book.conn.execute(
                "UPDATE status_cache SET lean = 0, words = 'not these', flags = 'hot' "
                "WHERE filter = ?",
                [tag],
            )
        now, key = book.now(), tag.upper()
        lean = statuscache.lean_filters(book, [key], now)
        whole = statuscache.kept_filters(book, [key], now)
        assert status_json.to_json(views.watch(book)) == before
    assert lean[key] == whole[key]
    assert "hot" not in lean[key].flags or "hot" in whole[key].flags


def test_the_sparkline_and_note_codes_are_read_when_asked(kept: Path) -> None:
    # Decoded on first use, then kept: the same values each time.
    with open_book(kept, create=False) as book:
        now = book.now()
        tags = [tag.upper() for tag in contexts(book)]
        lean = statuscache.lean_filters(book, tags, now)
        whole = statuscache.kept_filters(book, tags, now)
    assert not any("spark" in vars(s) or "note_codes" in vars(s) for s in lean.values())
    every = {f.name for f in fields(FilterStatus)}  # a field added must be read too
    assert all(every - {"spark", "note_codes"} <= set(vars(s)) for s in lean.values())
    assert any(lean[t].spark for t in tags) and any(lean[t].note_codes for t in tags)
    for t in tags:
        assert lean[t].spark == whole[t].spark == lean[t].spark
        assert lean[t].note_codes == whole[t].note_codes
        assert replace(lean[t], notes=()) == replace(whole[t], notes=())


def test_the_upgrade_to_schema_7_empties_the_filter_rows_alone(kept: Path, tmp_path: Path) -> None:
    # A book of schema 6 with its rows kept (the table as version 6 made it, its rows
    # copied): the upgrade leaves the filters' rows to a rebuild or a refresh and keeps the
    # units'; the list read from it is the same, computed; a rebuild keeps them with columns.
    path = tmp_path / "v6.db"
    path.write_bytes(kept.read_bytes())
    conn = sqlite3.connect(path)
    units = conn.execute("SELECT * FROM unit_cache ORDER BY unit").fetchall()
    seen = conn.execute("SELECT * FROM kept_seen WHERE what = 'unit' ORDER BY tag").fetchall()
    conn.executescript(
        "BEGIN; "
        + drop_tables_after(7)
        + "ALTER TABLE status_cache RENAME TO v7_rows;"
        + schema.V6.split("DROP TABLE unit_cache;")[1].split("CREATE TABLE unit_cache")[0]
        + "INSERT INTO status_cache SELECT filter, key, computed_utc, newest_utc, data "
        "FROM v7_rows; DROP TABLE v7_rows; PRAGMA user_version = 6; COMMIT;"
    )
    assert conn.execute("SELECT count(*) FROM status_cache").fetchone()[0] > 0
    conn.close()
    with open_book(kept, create=False) as book:
        before = status_json.to_json(views.watch(book))
    with open_book(path, create=False) as book:
        conn = book.conn
        assert conn.execute("PRAGMA user_version").fetchone()[0] == schema.SCHEMA_VERSION >= 7
        assert conn.execute("SELECT count(*) FROM status_cache").fetchone()[0] == 0
        assert (
            conn.execute("SELECT count(*) FROM kept_seen WHERE what = 'filter'").fetchone()[0] == 0
        )
        assert conn.execute("SELECT * FROM unit_cache ORDER BY unit").fetchall() == units
        assert (
            conn.execute("SELECT * FROM kept_seen WHERE what = 'unit' ORDER BY tag").fetchall()
            == seen
        )
        assert status_json.to_json(views.watch(book)) == before
        statuscache.rebuild(book)
        count, lean = conn.execute("SELECT count(*), sum(lean) FROM status_cache").fetchone()
        assert count == lean > 0
        assert status_json.to_json(views.watch(book)) == before


def test_the_list_s_positions_and_units_are_the_register_s(kept: Path) -> None:
    # The list makes its positions and units from the rows its key check read
    # (Register.positions, Register.units), not from a second read of the tables: they must
    # be list_all's, field for field and in the same order (common practice, no source).
    with open_book(kept, create=False) as book:
        reg = statuscache.register(book)
        assert reg.positions() == list_all(book, FilterPosition)
        assert reg.units() == list_all(book, Unit)

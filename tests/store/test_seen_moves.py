"""A save moves the kept rows on without reading them all, and keeps the register between saves.

After a save, `statuscache.move_seen_on` moves every kept row whose inputs the entries
written since it was checked left as they were, and leaves every other row where it was. It
works out the few rows the new entries touch and moves the rest with one statement; these
tests hold every row it moved or left against the rule written out plainly below (from the
entries themselves, row by row), after saves of every kind and after entries written behind
the save hooks. The register rows the keys are made of are kept on the book between saves:
an edit by this connection, by another one, outside sumpbook or rolled back must be seen by
the next save. The demo plant, its caches filled as `sumpbook rebuild` leaves them.
"""

from __future__ import annotations

import sqlite3
from collections.abc import Iterator
from datetime import timedelta
from pathlib import Path

import pytest

from store import record
from store.base.errors import BookError
from store.base.timeutil import format_utc, parse_utc
from store.db.book import open_book
from store.derived import statuscache
from store.exchange.demo import create_demo
from store.health import watchlist
from store.ledger import register
from store.ledger.entries import ElementChange, Reading, TopUp, Void
from store.ledger.register import FilterPosition
from tests.kit.kept_demo import behind_the_hooks, pooling

DEMO_CLOCK = "2026-11-27T12:30:00Z"  # where the demo's story ends (demo.db.sql)


@pytest.fixture(scope="module")
def kept(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Path]:
    path = tmp_path_factory.mktemp("seen") / "demo.db"
    with create_demo(path) as book:
        statuscache.rebuild(book)
        book.set_setting("clock", format_utc(parse_utc(DEMO_CLOCK) + timedelta(hours=2)))
        book.conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    yield path


@pytest.fixture
def path(kept: Path, tmp_path: Path) -> Path:
    copy = tmp_path / "book.db"
    copy.write_bytes(kept.read_bytes())
    return copy


# ---- the rule, row by row, from the entries ------------------------------------------------------


def inputs_moved(conn: sqlite3.Connection, what: str, tag: str, seen: int) -> bool:
    """Whether an entry written after rowid `seen` (a void: by what it voids) touches the
    inputs of the kept row (`what`, `tag`): a position's own entries, and where its row leans
    on like positions' lives, their element changes; a unit's top-ups and samples, its
    readings above its temperature limit, and any of its entries dated at or before the
    first one its row holds. (The rule of store/derived/statuscache.py's docstring, written
    out again here without its helpers.)"""
    rows = conn.execute(
        "SELECT upper(coalesce(t.filter, e.filter, '')), upper(coalesce(t.unit, e.unit, '')), "
        "coalesce(t.kind, e.kind), coalesce(t.at_utc, e.at_utc), coalesce(t.temp_c, e.temp_c) "
        "FROM entries e LEFT JOIN entries t ON t.id = e.voids WHERE e.rowid > ?",
        [seen],
    ).fetchall()
    if what == "filter":
        key = conn.execute("SELECT key FROM status_cache WHERE filter = ?", [tag]).fetchone()
        element = conn.execute("SELECT element FROM filters WHERE tag = ?", [tag]).fetchone()
        like = set()
        if (key is None or not key[0].endswith(".own")) and element and element[0]:
            like = {
                t.upper()
                for (t,) in conn.execute(
                    "SELECT tag FROM filters WHERE lower(element) = lower(?)", [element[0]]
                )
            }
        return any(f == tag or (kind == "change" and f in like) for f, _, kind, _, _ in rows)
    limit = conn.execute("SELECT max_temp_c FROM units WHERE tag = ?", [tag]).fetchone()
    first = conn.execute(
        "SELECT json_extract(data, '$.first_at') FROM unit_cache WHERE unit = ?", [tag]
    ).fetchone()
    first_at = first[0] if first else None
    for _, unit, kind, at, temp in rows:
        if unit != tag:
            continue
        if kind in ("topup", "sample"):
            return True
        if kind == "reading" and temp is not None and (limit is None or temp > limit[0]):
            return True
        if first_at is None or at <= first_at:
            return True
    return False


def off_key(book) -> set[tuple[str, str]]:
    """The kept rows whose key does not match the register as it is now (read afresh): no
    reader uses them, and a save must leave them where they are (what touched their inputs
    is judged by the register as their key has it, which an undone edit brings back)."""
    reg = statuscache._read_register(book)
    out = set()
    for tag, key in book.conn.execute("SELECT upper(filter), key FROM status_cache"):
        if key != reg.filter_key(tag, not key.endswith(".own")):
            out.add(("filter", tag))
    for tag, key in book.conn.execute("SELECT upper(unit), key FROM unit_cache"):
        if key != reg.unit_key(tag):
            out.add(("unit", tag))
    return out


@pytest.fixture
def checked(monkeypatch: pytest.MonkeyPatch) -> list[dict[tuple[str, str], bool]]:
    """Every save's move step held against the rule: before it runs, which rows behind the
    newest entry should move; after it, each must stand at the newest entry exactly when it
    should. Returns what each step was expected to do ((what, tag) -> moved)."""
    steps: list[dict[tuple[str, str], bool]] = []
    real = statuscache.move_seen_on

    def move_seen_on(book, reg=None) -> None:
        conn = book.conn
        newest = conn.execute("SELECT max(rowid) FROM entries").fetchone()[0]
        before = conn.execute("SELECT what, upper(tag), seen_rowid FROM kept_seen").fetchall()
        keys = off_key(book)
        expect = {
            (what, tag): (what, tag) not in keys and not inputs_moved(conn, what, tag, seen)
            for what, tag, seen in before
            if seen < newest
        }
        real(book, reg)
        after = dict(
            ((what, tag), seen)
            for what, tag, seen in conn.execute(
                "SELECT what, upper(tag), seen_rowid FROM kept_seen"
            )
        )
        for what, tag, seen in before:
            should = expect.get((what, tag), False)
            assert after[what, tag] == (newest if should else seen), (what, tag, should)
        steps.append(expect)

    monkeypatch.setattr(statuscache, "move_seen_on", move_seen_on)
    return steps


def unrelated(book, *away: str) -> str:
    """A gauged position on another unit than `away`'s, not in their like groups."""
    reg = statuscache.register(book)
    near = {t for tag in away for t in reg.like.get(tag, (tag,))}
    units = {reg.filter_units[tag] for tag in away}
    for tag in reg.filter_rows:
        if tag not in near and reg.filter_units[tag] not in units:
            return tag
    raise AssertionError("the demo has no unrelated position")


def seen(book, what: str, tag: str) -> int:
    return book.conn.execute(
        "SELECT seen_rowid FROM kept_seen WHERE what = ? AND tag = ?", [what, tag]
    ).fetchone()[0]


def newest(book) -> int:
    return book.conn.execute("SELECT max(rowid) FROM entries").fetchone()[0]


def reading(book, tag: str, minutes: int = 0) -> Reading:
    limit = book.conn.execute("SELECT limit_bar FROM filters WHERE tag = ?", [tag]).fetchone()
    return Reading(filter=tag, dp_bar=round(0.5 * limit[0], 2), temp_c=40.0, by="BM",
                   at=book.now() - timedelta(minutes=minutes))  # fmt: skip


def held_rows_are_the_computation(book) -> int:
    """Every kept row a reader would use equals the status computed from the entries alone.
    Returns how many were used."""
    now = book.now()
    fresh = {
        f.filter.upper(): statuscache._encode(f) for f in watchlist.watch_as_of(book, now).filters
    }
    held = statuscache.kept_filters(book, list(fresh), now)
    for tag, status in held.items():
        assert statuscache._encode(status) == fresh[tag], tag
    return len(held)


# ---- the moves ----------------------------------------------------------------------------------


def test_a_reading_moves_every_row_but_its_own_filter_s_and_unit_s(path: Path, checked) -> None:
    with open_book(path, create=False) as book:
        tag = pooling(book)[0]
        unit = statuscache.register(book).filter_units[tag]
        record.log(book, reading(book, tag))
        assert seen(book, "filter", tag) == newest(book)  # kept again by the save
        moved = [k for k, should in checked[-1].items() if should]
        assert len(moved) >= len(checked[-1]) - 2  # all but the saved filter (and its unit)
        assert ("unit", unit) in checked[-1]
        assert held_rows_are_the_computation(book) > 0


def test_a_saved_element_change_leaves_the_positions_leaning_on_it(path: Path, checked) -> None:
    # A change on a like position ends a life the pooled rows' forecast is made of: those rows
    # must stay where they were (a reader computes them); rows of their group with enough
    # lives of their own, and every other row, move on.
    with open_book(path, create=False) as book:
        tag, like = pooling(book)
        before = seen(book, "filter", tag)
        record.log(book, ElementChange(filter=like, by="BM", at=book.now(), reason="limit"))
        assert seen(book, "filter", tag) == before
        assert checked[-1][("filter", tag)] is False
        assert tag in statuscache.stale_filters(book)
        held_rows_are_the_computation(book)


def test_a_saved_void_moves_nothing_it_touches(path: Path, checked) -> None:
    with open_book(path, create=False) as book:
        tag = pooling(book)[0]
        last = book.conn.execute(
            "SELECT id FROM entries WHERE kind = 'reading' AND filter = ? "
            "ORDER BY at_utc DESC, rowid DESC LIMIT 1",
            [tag],
        ).fetchone()[0]
        record.log(book, Void(voids=last, by="BM", at=book.now(), note="wrong gauge"))
        assert seen(book, "filter", tag) == newest(book)  # kept again by the save itself
        assert checked
        held_rows_are_the_computation(book)


WRITES = ["reading", "void", "like-change", "topup"]


@pytest.mark.parametrize("write", WRITES)
def test_an_entry_behind_the_hooks_holds_its_rows_back_through_later_saves(
    path: Path, checked, write: str
) -> None:
    # An entry written without the save hooks (a bulk load, another program), then saves of
    # readings elsewhere: the rows it touched must never move on (the first save meets them
    # at the newest rowid before it, later saves further behind), the others do.
    with open_book(path, create=False) as book:
        tag, like = pooling(book)
        unit = statuscache.register(book).filter_units[tag]
        if write == "reading":
            behind_the_hooks(book, reading(book, tag))
        elif write == "void":
            last = book.conn.execute(
                "SELECT id FROM entries WHERE kind = 'reading' AND filter = ? "
                "ORDER BY at_utc DESC, rowid DESC LIMIT 1",
                [tag],
            ).fetchone()[0]
            behind_the_hooks(book, Void(voids=last, by="BM", at=book.now(), note="wrong"))
        elif write == "like-change":
            behind_the_hooks(book, ElementChange(filter=like, by="BM", at=book.now()))
        else:
            behind_the_hooks(book, TopUp(unit=unit, volume_l=20.0, by="BM", at=book.now()))
        what, held = ("unit", unit) if write == "topup" else ("filter", tag)
        stuck = seen(book, what, held)
        other = unrelated(book, tag, like)
        for minutes in (3, 2, 1):
            record.log(book, reading(book, other, minutes))
            assert seen(book, what, held) == stuck
        assert [step[what, held] for step in checked] == [False, False, False]
        group = set(statuscache.register(book).like.get(tag, ())) | {tag, like, other}
        assert all(should for step in checked[1:] for (w, t), should in step.items()
                   if w == "filter" and t not in group)  # the rows far from it move on  # fmt: skip
        held_rows_are_the_computation(book)


def test_a_row_behind_whose_inputs_stayed_moves_on(path: Path, checked) -> None:
    # A row left a few entries back though none of them touches it (as a refresh keeps it
    # while another save lands) is checked against what came after its own rowid and moves.
    with open_book(path, create=False) as book:
        tag, like = pooling(book)
        other = unrelated(book, tag, like)
        record.log(book, reading(book, other, 5))
        record.log(book, reading(book, other, 4))
        back = newest(book) - 2
        assert not inputs_moved(book.conn, "filter", like, back)
        with book.atomic():
            book.conn.execute(
                "UPDATE kept_seen SET seen_rowid = ? WHERE what = 'filter' AND tag = ?",
                [back, like],
            )
        record.log(book, reading(book, other, 3))
        assert checked[-1][("filter", like)] is True
        assert seen(book, "filter", like) == newest(book)


def test_a_batch_of_entries_on_many_positions(path: Path, checked) -> None:
    with open_book(path, create=False) as book:
        tags = list(statuscache.register(book).filter_rows)[:5]
        record.log_many(book, [reading(book, t, 10 - i) for i, t in enumerate(tags)])
        for t in tags:
            assert seen(book, "filter", t) == newest(book)
        assert checked
        held_rows_are_the_computation(book)


# ---- the register kept on the book --------------------------------------------------------------


def limit_of(book, tag: str) -> float:
    row = statuscache.register(book).filter_rows[tag]
    cols = [d[0] for d in book.conn.execute("SELECT * FROM filters LIMIT 0").description]
    return row[cols.index("limit_bar")]


def test_the_register_is_read_once_for_saves_one_after_another(path: Path) -> None:
    with open_book(path, create=False) as book:
        first = statuscache.register(book)
        tag = pooling(book)[0]
        record.log(book, reading(book, tag))
        assert statuscache.register(book) is first


def test_a_register_edit_on_the_same_book_is_seen_by_the_next_save(path: Path) -> None:
    with open_book(path, create=False) as book:
        tag = pooling(book)[0]
        old = limit_of(book, tag)
        register.update(book, FilterPosition, tag, {"limit_bar": round(0.9 * old, 3)}, by="BM")
        assert limit_of(book, tag) == round(0.9 * old, 3)
        record.log(book, reading(book, tag))
        key = book.conn.execute("SELECT key FROM status_cache WHERE filter = ?", [tag])
        fresh = statuscache._read_register(book)
        assert key.fetchone()[0].split(".")[1] == fresh.filter_digest(tag)
        assert tag in statuscache.kept_filters(book, [tag], book.now())
        held_rows_are_the_computation(book)


def test_a_register_edit_by_another_connection_is_seen(path: Path) -> None:
    # Two programs on one book: the register kept by the first must not outlive an edit by
    # the second, through sumpbook or straight into the file (no history line).
    with open_book(path, create=False) as book, open_book(path, create=False) as other:
        tag = pooling(book)[0]
        old = limit_of(book, tag)
        record.log(book, reading(book, tag, 2))
        register.update(other, FilterPosition, tag, {"limit_bar": round(0.8 * old, 3)}, by="AK")
        assert limit_of(book, tag) == round(0.8 * old, 3)
        record.log(book, reading(book, tag, 1))
        key = book.conn.execute("SELECT key FROM status_cache WHERE filter = ?", [tag])
        fresh = statuscache._read_register(book)
        assert key.fetchone()[0].split(".")[1] == fresh.filter_digest(tag)
        held_rows_are_the_computation(book)
        outside = sqlite3.connect(path)
        with outside:
            outside.execute("PRAGMA foreign_keys = OFF")
            outside.execute(
                "INSERT INTO filters(tag, unit, kind, element, limit_bar, bypass_bar) "
                "SELECT 'ZZ-NEW', unit, kind, element, limit_bar, bypass_bar FROM filters "
                "WHERE tag = ?",
                [tag],
            )
        outside.close()
        reg = statuscache.register(book)
        assert "ZZ-NEW" in reg.filter_rows
        assert "ZZ-NEW" in reg.like[tag]  # a new like position: the pooled keys move


def test_a_register_edit_rolled_back_is_not_kept(path: Path) -> None:
    # Read inside a transaction that is then undone, the register must be read again; and an
    # edit written afterwards at the same place in the history is seen.
    with open_book(path, create=False) as book:
        tag = pooling(book)[0]
        old = limit_of(book, tag)
        with pytest.raises(BookError), book.atomic():
            register.update(book, FilterPosition, tag, {"limit_bar": round(0.7 * old, 3)})
            assert limit_of(book, tag) == round(0.7 * old, 3)
            raise BookError("changed my mind")
        assert limit_of(book, tag) == old
        register.update(book, FilterPosition, tag, {"limit_bar": round(0.6 * old, 3)})
        assert limit_of(book, tag) == round(0.6 * old, 3)


def test_a_void_by_another_connection_dates_the_next_kept_row(path: Path) -> None:
    # The voids' dates are kept on the book between saves: a void written by another
    # program must still count among a row's inputs (its date the newest), as the join of
    # every void with what it voids gives it.
    def joined(book, tag: str) -> str | None:
        return book.conn.execute(
            "SELECT max(v.at_utc) FROM entries v JOIN entries e ON e.id = v.voids "
            "WHERE e.filter = ?",
            [tag],
        ).fetchone()[0]

    with open_book(path, create=False) as book, open_book(path, create=False) as other:
        tag = pooling(book)[0]
        record.log(book, reading(book, tag, 30))
        assert statuscache._newest_input(book, tag, ()) >= (joined(book, tag) or "")
        last = other.conn.execute(
            "SELECT id FROM entries WHERE filter = ? ORDER BY rowid DESC LIMIT 1", [tag]
        ).fetchone()[0]
        behind_the_hooks(other, Void(voids=last, by="AK", at=other.now(), note="wrong"))
        void_at = joined(book, tag)
        assert void_at is not None
        own = book.conn.execute("SELECT max(at_utc) FROM entries WHERE filter = ?", [tag])
        assert statuscache._newest_input(book, tag, ()) == max(void_at, own.fetchone()[0])


# ---- an edit undone --------------------------------------------------------------------------------


def test_an_element_change_while_a_position_took_another_element_is_seen_when_it_takes_it_again(
    path: Path, checked
) -> None:
    # A row that leans on like positions' lives, its position moved to another part number
    # (its key no longer matches), an element change saved on a former like position, the
    # part number set back (the key matches again): the row must not have been moved past
    # that change, which its lives now include.
    with open_book(path, create=False) as book:
        tag, other = pooling(book)
        element = book.conn.execute("SELECT element FROM filters WHERE tag = ?", [tag])
        part = element.fetchone()[0]
        register.update(book, FilterPosition, tag, {"element": "ZZ-UNLIKE-1"}, by="BM")
        record.log(book, ElementChange(filter=other, reason="limit", by="BM", at=book.now()))
        assert ("filter", tag) in checked[-1] and not checked[-1]["filter", tag]
        register.update(book, FilterPosition, tag, {"element": part}, by="BM")
        assert tag not in statuscache.kept_filters(book, [tag], book.now())
        held_rows_are_the_computation(book)


def test_a_hot_reading_while_a_unit_s_limit_was_raised_is_seen_when_it_is_lowered_again(
    path: Path, checked
) -> None:
    # The same for a unit: its temperature limit raised (the key no longer matches), a
    # reading between the two limits saved, the limit set back: the row must not have been
    # moved past that reading, hot again under the old limit.
    from store.ledger.register import Unit, list_all

    with open_book(path, create=False) as book:
        tag = pooling(book)[0]
        unit = book.conn.execute("SELECT unit FROM filters WHERE tag = ?", [tag]).fetchone()[0]
        old = book.conn.execute("SELECT max_temp_c FROM units WHERE tag = ?", [unit])
        limit = old.fetchone()[0]
        register.update(book, Unit, unit, {"max_temp_c": limit + 10}, by="BM")
        hot = Reading(filter=tag, dp_bar=0.5 * limit_of(book, tag), temp_c=limit + 5, by="BM",
                      at=book.now())  # fmt: skip
        record.log(book, hot)
        assert not checked[-1]["unit", unit.upper()]
        register.update(book, Unit, unit, {"max_temp_c": limit}, by="BM")
        now = book.now()
        fresh = {u.unit.upper(): u for u in watchlist.watch_as_of(book, now).units}
        by_unit = watchlist.plant(book).positions_by_unit
        kept = statuscache.kept_units(book, list_all(book, Unit), by_unit, now)
        assert all(status == fresh[u] for u, status in kept.items())
        assert "hot" in fresh[unit.upper()].flags

"""The server as one more door, and the secrets kept: what the server refuses (ranges,
append-only by triggers and by the laptop role's grants), what a laptop refuses from the
server (merge's row checks), and a password that never reaches the book, the prefs or a
message."""

from __future__ import annotations

import json
import uuid

import psycopg  # in the test extra: a missing driver fails the tests, never skips them
import pytest

from store import record
from store.db.book import open_book
from store.ledger import journal
from store.ledger.entries import Reading
from store.server import sync as syncing
from tests.kit import pgserver
from tests.kit.plant import fill_register
from tui.cli import main


def _book(path):
    book = open_book(path)
    book.conn.execute("PRAGMA synchronous = OFF")  # test speed only
    return book


def _row(conn, plant="NORTH", **values):
    row = {
        "id": str(uuid.uuid4()),
        "at_utc": "2026-03-02T08:00:00Z",
        "logged_utc": "2026-03-02T08:00:00Z",
        "kind": "reading",
        "by": "AB",
        "filter": "P1-RF",
        "dp_bar": 1.0,
        "note": "",
        **values,
    }
    names = ", ".join(f'"{k}"' for k in row)
    conn.execute(
        f"INSERT INTO entries (plant, {names}) VALUES (%s, {', '.join('%s' for _ in row)})",
        [plant, *row.values()],
    )
    return row["id"]


def _synced_plant(tmp_path, server):
    path = tmp_path / "a.db"
    with _book(path) as book:
        fill_register(book)
        record.log(book, Reading(filter="P1-RF", dp_bar=0.7, temp_c=45, by="AB"))
        syncing.sync(book, server.url, plant="NORTH")
    return path


def test_the_server_refuses_what_the_book_refuses(tmp_path, server):
    _synced_plant(tmp_path, server)
    with psycopg.connect(server.url, autocommit=True) as laptop:
        # RANGES["dp_bar"] is 0 … 100 bar (store/base/validate.py); NaN and infinity fail it
        for bad in (100.5, -0.1, float("nan"), float("inf")):
            with pytest.raises(psycopg.errors.CheckViolation):
                _row(laptop, dp_bar=bad)
        with pytest.raises(psycopg.errors.CheckViolation):  # a stamp the book never writes
            _row(laptop, at_utc="2026-03-02 08:00:00")
        with pytest.raises(psycopg.errors.ForeignKeyViolation):  # another plant's tag
            _row(laptop, plant="NORTH", filter="S9-RF")
        # the laptop role: read and add, never change or take away
        for sql in ("UPDATE entries SET dp_bar = 0", "DELETE FROM entries", "TRUNCATE entries",
                    "UPDATE filters SET limit_bar = 9"):  # fmt: skip
            with pytest.raises(psycopg.errors.InsufficientPrivilege):
                laptop.execute(sql)
    with psycopg.connect(server.admin, autocommit=True) as owner:  # the triggers hold even so
        for sql in ("UPDATE entries SET dp_bar = 0", "DELETE FROM register_log",
                    "TRUNCATE entries CASCADE"):  # fmt: skip
            with pytest.raises(psycopg.errors.InsufficientPrivilege, match="append-only"):
                owner.execute(sql)


def test_rows_from_the_server_pass_merges_door(tmp_path, server):
    """Rows another tool wrote into the server, which its CHECKs let through but no one
    could have typed into a book, stay out of the laptop's book and are reported."""
    path = _synced_plant(tmp_path, server)
    with psycopg.connect(server.admin, autocommit=True) as owner:
        padded = _row(owner, note="  spaces around  ")  # merge: not as sumpbook stores notes
        ahead = _row(owner, at_utc="2099-01-01T00:00:00Z")  # more than a day ahead
        good = _row(owner, dp_bar=1.2)
        no_day = _row(owner, at_utc="2026-02-30T08:00:00Z")  # the book's CHECK: a real date
    with _book(path) as book:
        report = syncing.sync(book, server.url)
        ids = {e.id for e in journal.read(book)}
    assert good in ids and padded not in ids and ahead not in ids and no_day not in ids
    assert any("file's own checks" in line for line in report.conflicts), report.conflicts
    assert report.pulled_entries == 1 and report.left_out == 3
    assert any("notes" in line for line in report.conflicts)
    assert any("ahead" in line for line in report.conflicts)


def test_the_password_never_reaches_the_book_the_prefs_or_a_message(tmp_path, server, capsys):
    secret = pgserver.LAPTOP_PASSWORD
    path = tmp_path / "a.db"
    with _book(path) as book:
        fill_register(book)
        record.log(book, Reading(filter="P1-RF", dp_bar=0.7, temp_c=45, by="AB"))
    prefs = tmp_path / "prefs.json"
    # pointing the laptop at the server with a password in the address is refused ...
    assert main(["--db", str(path), "server", "use", server.url, "--plant", "NORTH"]) == 2
    # ... without it, the address is kept in the prefs and the plant in the book
    bare = server.url.replace(f":{secret}@", "@")
    assert main(["--db", str(path), "server", "use", bare, "--plant", "NORTH"]) == 0
    assert json.loads(prefs.read_text())["server"] == bare
    # a password given for one run is used and not shown
    assert main(["--db", str(path), "sync", "--server", server.url]) == 0
    assert (
        main(["--db", str(path), "export", "--from", "2000-01-01", "-o", str(tmp_path / "x.csv")])
        == 0
    )
    wrong = server.url.replace(server.database, "nosuchdb")
    assert main(["--db", str(path), "sync", "--server", wrong]) == 2
    wrong_pw = server.url.replace(secret, secret[::-1])  # a wrong password is not shown either
    assert main(["--db", str(path), "sync", "--server", wrong_pw]) == 2
    bad_url = server.url.replace("postgresql://", "postgresql:/").replace("?", "??=&")
    main(["--db", str(path), "sync", "--server", bad_url + "&bogus"])
    out = capsys.readouterr()
    text = out.out + out.err
    assert "entries sent" in text and "no server reached" in text
    for word in (secret, secret[::-1]):
        assert word not in text
        for file in tmp_path.iterdir():
            if file.is_file():
                assert word.encode() not in file.read_bytes(), file.name


def test_sslmode_is_honoured(tmp_path, server):
    """The test server speaks no TLS: sslmode=require must then refuse, not fall back."""
    path = _synced_plant(tmp_path, server)
    before = path.read_bytes()
    with _book(path) as book, pytest.raises(Exception, match="SSL") as caught:
        syncing.sync(book, server.url.replace("sslmode=disable", "sslmode=require"))
    assert pgserver.LAPTOP_PASSWORD not in str(caught.value)
    assert path.read_bytes() == before


def test_the_servers_ranges_are_the_books(tmp_path, server):
    """Every entry number at and just beyond each end of its range (store/base/validate.py
    RANGES): the server takes exactly what validate.number takes."""
    from store.base import validate
    from store.base.errors import BookError

    _synced_plant(tmp_path, server)
    with psycopg.connect(server.url) as laptop:
        for field in validate.ENTRY_NUMBERS:
            spec = validate.RANGES[field]
            step = max(abs(spec.high), 1.0) * 1e-9
            for value in (spec.low, spec.low - step, spec.low + step, spec.high, spec.high + step):
                try:
                    validate.number(field, value)
                    book_takes = True
                except BookError:
                    book_takes = False
                try:
                    with laptop.transaction():
                        values = {"kind": "note", "filter": None, "dp_bar": None, "unit": "P1"}
                        _row(laptop, **{**values, field: value})
                    server_takes = True
                except psycopg.errors.CheckViolation:
                    server_takes = False
                assert server_takes == book_takes, (field, value)

"""Every write of an entry: the entry itself (store.ledger.journal) and the derived rows kept
beside it (store.derived: element summaries, status cache), in one transaction, so the two
never disagree on disk. The screens, the command line, CSV import and merge write through
here; nothing else writes derived rows except an explicit refresh or rebuild."""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import replace
from datetime import datetime

from store.base.records import frozen_record
from store.db.book import Book
from store.derived import breathercache, statuscache
from store.health.status_model import FilterStatus
from store.ledger import journal
from store.ledger.entries import Entry


def preload() -> None:
    """Import the fitting maths now (numpy and scipy are slow to import, and other writers
    would wait while this process holds the write lock)."""
    statuscache.preload()


def after_write(book: Book, entries: Sequence[Entry]) -> dict[str, FilterStatus]:
    """Inside the caller's write transaction: bring the derived rows up to date for the
    entries it wrote, once per filter, breather or unit touched (each refresh reads all the
    entries of its target, so its newest entry is enough); then every other kept row whose
    inputs they left as they were is checked up to them. Returns the filter statuses kept,
    by upper-case tag."""
    last: dict[tuple[str, str], Entry] = {}
    for entry in entries:  # per kind too: what a refresh looks at beside its target differs
        last[(_target(book, entry), entry.kind)] = entry
    reg = statuscache.register(book)  # entries do not move the register: read it once
    kept: dict[str, FilterStatus] = {}
    for entry in last.values():
        status = statuscache.after_entry(book, entry, reg)
        if status is not None:
            kept[status.filter.upper()] = status
    statuscache.move_seen_on(book, reg)
    if entries:  # a write that added nothing leaves the file as it was
        breathercache.keep_touched(book)
    return kept


def _target(book: Book, entry: Entry) -> str:
    """What an entry's refresh recomputes: its filter, breather or unit; a void's is the
    voided entry's (a hundred voids on one filter refresh it once)."""
    voids = getattr(entry, "voids", None)
    if voids:
        row = book.conn.execute(
            "SELECT coalesce(filter, breather, unit) FROM entries WHERE id = ?", [voids]
        ).fetchone()
        return (row[0] or "").upper() if row else voids
    return (entry.target or entry.unit or "").upper()


@frozen_record
class Logged:
    """One saved entry as the book holds it (id and times filled in), and the status its save
    kept for the entry's filter in the same transaction (None for an entry on no filter):
    what a screen shows after the save without computing it again."""

    entry: Entry
    status: FilterStatus | None = None


def log(book: Book, entry: Entry) -> Entry:
    """Validate and append one entry; returns it with id and times filled in."""
    return save(book, entry).entry


def save(book: Book, entry: Entry) -> Logged:
    """Validate and append one entry and bring its derived rows up to date, in one
    transaction; returns the entry and the filter status kept for it."""
    now = book.now()
    preload()
    with book.atomic():
        entry = _append(book, entry, now)
        kept = after_write(book, [entry])
    return Logged(entry, next(iter(kept.values()), None))


def log_many(book: Book, entries: Iterable[Entry]) -> list[Entry]:
    """All or nothing: every entry is validated and written, and the derived rows follow,
    in one transaction."""
    now = book.now()
    preload()
    with book.atomic():
        done = [_append(book, entry, now) for entry in entries]
        after_write(book, done)
    return done


def _append(book: Book, entry: Entry, now: datetime) -> Entry:
    import uuid  # only a save makes an id: kept off the lean path (`status`, `list`)

    entry = journal.validate(book, entry, now)
    entry = replace(entry, id=entry.id or str(uuid.uuid4()), logged=entry.logged or now)
    journal.insert(book, entry)
    return entry


def refresh_stale(book: Book, limit: int | None = None) -> list[str]:
    """The explicit refresh behind a watch list: recompute and keep the derived rows that do
    not hold now (at most `limit` filters; every unit and breather). Returns the filters'
    tags."""
    done = statuscache.refresh_stale(book, limit)
    breathercache.refresh(book)
    return done


def rebuild(book: Book) -> int:
    """Drop and recompute every derived row from the entries (`sumpbook rebuild`); returns
    how many filters were done."""
    count = statuscache.rebuild(book)
    breathercache.rebuild(book)
    return count

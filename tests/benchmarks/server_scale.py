"""The server tier at scale: prints ratios against their targets, never fails on time.

Usage:  python tests/benchmarks/server_scale.py [--units 200] [--years 5] [--book PATH]
        e.g. --units 20 for a tenth of the full scale (about 0.45 million entries a plant)

What it measures, on a PostgreSQL started for the run (PostgreSQL's durable defaults: fsync,
synchronous commit, full-page writes on; shared_buffers 256 MB):

1. First sync of the benchmark book (make_big_logbook.py: 200 units, 5 years is the 4.5-million
   entry book) into an empty server, against a plain COPY of the same rows into the same
   tables of another empty database. Target: sync <= 2x COPY.
2. The book's plant plus four more (the same register and entries under new plant codes and
   new ids, made in SQL on the server; voids left out): the full scale holds 5 x 4.5 million
   = 22 million entries. One shift of 800 new entries logged on the laptop, then timed:
   `sync` (push 800, pull nothing). Target: < 1 s.
3. The fleet watch list and the element-life query over every plant, best of three, with
   their EXPLAIN (ANALYZE, BUFFERS) plans. Target: < 2 s each.

The server is stopped and its folder removed at the end.
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
import time
from datetime import timedelta
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
if str(ROOT) not in sys.path:  # run as a script from anywhere
    sys.path.insert(0, str(ROOT))

import psycopg  # noqa: E402

from store import record  # noqa: E402
from store.db.book import open_book  # noqa: E402
from store.ledger.entries import Reading  # noqa: E402
from store.server import fleet  # noqa: E402
from store.server.schema import ENTRY_NAMES, LOG_NAMES, REGISTER_COLUMNS  # noqa: E402
from store.server.setup import initialise  # noqa: E402
from store.server.sync import sync  # noqa: E402
from tests.benchmarks import make_big_logbook  # noqa: E402
from tests.kit import pgserver  # noqa: E402

DURABLE = "-c shared_buffers=256MB -c max_wal_size=4GB -c maintenance_work_mem=256MB"
PLANT = "PLANT1"
OTHERS = ("PLANT2", "PLANT3", "PLANT4", "PLANT5")
SHIFT_ENTRIES = 800


def _names(names) -> str:
    return ", ".join(f'"{n}"' for n in names)


def _database(server: pgserver.PgServer, name: str) -> tuple[str, str]:
    with psycopg.connect(server.admin(), autocommit=True) as conn:
        conn.execute(f"CREATE DATABASE {name}")
    initialise(server.admin(name))
    return server.admin(name), server.url(name)


def plain_copy(book_path: Path, admin: str) -> float:
    """The same rows as a first sync sends, by COPY straight into the same tables."""
    import sqlite3

    src = sqlite3.connect(book_path)
    started = time.perf_counter()
    with psycopg.connect(admin) as conn, conn.cursor() as cur:
        cur.execute("INSERT INTO plants (plant) VALUES (%s)", [PLANT])
        tables = [(t, [c for c, _ in cols]) for t, cols in REGISTER_COLUMNS.items()]
        tables += [("register_log", LOG_NAMES), ("entries", ENTRY_NAMES)]
        for table, names in tables:
            with cur.copy(f"COPY {table} (plant, {_names(names)}) FROM STDIN") as copy:
                rows = src.execute(f"SELECT {_names(names)} FROM {table} ORDER BY rowid")
                for row in rows:
                    copy.write_row((PLANT, *row))
    src.close()
    return time.perf_counter() - started


def more_plants(admin: str) -> int:
    """Four more plants made on the server from the first: the same register and entries
    (voids left out) under new plant codes and new ids."""
    with psycopg.connect(admin) as conn:
        for plant in OTHERS:
            conn.execute("INSERT INTO plants (plant) VALUES (%s)", [plant])
            for table, cols in REGISTER_COLUMNS.items():
                names = _names(c for c, _ in cols)
                conn.execute(
                    f"INSERT INTO {table} (plant, {names}) SELECT %s, {names} FROM {table} "
                    "WHERE plant = %s",
                    [plant, PLANT],
                )
            rest = _names(n for n in ENTRY_NAMES if n != "id")
            conn.execute(
                f"INSERT INTO entries (plant, id, {rest}) SELECT %s, gen_random_uuid(), {rest} "
                "FROM entries WHERE plant = %s AND kind <> 'void' ORDER BY seq",
                [plant, PLANT],
            )
            conn.commit()
            print(f"  {plant} made", flush=True)
        conn.autocommit = True
        conn.execute("VACUUM ANALYZE")
        return conn.execute("SELECT count(*) FROM entries").fetchone()[0]


def one_shift(book_path: Path) -> None:
    """800 readings of the next shift, logged as a technician would (record.log_many)."""
    with open_book(book_path, create=False) as book:
        now = book.now()
        tags = [r[0] for r in book.conn.execute("SELECT tag FROM filters WHERE gauge = 1")]
        entries = [
            Reading(
                filter=tags[i % len(tags)],
                dp_bar=0.5 + (i % 7) * 0.1,
                temp_c=45.0,
                at=now - timedelta(minutes=SHIFT_ENTRIES - i),
                by=book.conn.execute("SELECT tag FROM technicians LIMIT 1").fetchone()[0],
            )
            for i in range(SHIFT_ENTRIES)
        ]
        record.log_many(book, entries)


def best_of(n: int, run) -> float:
    times = []
    for _ in range(n):
        started = time.perf_counter()
        run()
        times.append(time.perf_counter() - started)
    return min(times)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--units", type=int, default=200, help="units of the book (200: full)")
    parser.add_argument("--years", type=float, default=5)
    parser.add_argument("--book", type=Path, help="a book made by make_big_logbook.py already")
    args = parser.parse_args(argv)
    folder = Path(tempfile.mkdtemp(prefix="sumpbook-bench-"))
    server = None
    try:
        source = args.book
        if source is None or not source.exists():
            source = source or folder / "big.db"
            make_big_logbook.main([str(args.units), str(args.years), str(source)])
        book_path = folder / "laptop.db"
        shutil.copy(source, book_path)
        with open_book(book_path, create=False) as book:
            n_entries = book.conn.execute("SELECT count(*) FROM entries").fetchone()[0]
        print(f"book: {n_entries:,} entries ({args.units} units, {args.years:g} years)")
        server = pgserver.start(DURABLE)
        with psycopg.connect(server.admin(), autocommit=True) as conn:
            conn.execute("CREATE ROLE sumpbook_laptop NOLOGIN")
            conn.execute(
                f"CREATE ROLE {pgserver.LAPTOP_USER} LOGIN PASSWORD "
                f"'{pgserver.LAPTOP_PASSWORD}' IN ROLE sumpbook_laptop"
            )
        copy_admin, _ = _database(server, "plaincopy")
        copy_s = plain_copy(book_path, copy_admin)
        print(f"plain COPY of the book's rows: {copy_s:.1f} s", flush=True)
        admin, url = _database(server, "fleet")
        with open_book(book_path, create=False) as book:
            started = time.perf_counter()
            report = sync(book, url, plant=PLANT)
            sync_s = time.perf_counter() - started
        print(f"first sync: {sync_s:.1f} s ({report.summary()})")
        print(f"  first sync / plain COPY = {sync_s / copy_s:.2f} (target <= 2)", flush=True)
        total = more_plants(admin)
        print(f"server: {total:,} entries of {1 + len(OTHERS)} plants")
        one_shift(book_path)
        with open_book(book_path, create=False) as book:
            started = time.perf_counter()
            report = sync(book, url)
            shift_s = time.perf_counter() - started
            started = time.perf_counter()
            sync(book, url)
            idle_s = time.perf_counter() - started
        print(f"incremental sync of one shift: {shift_s:.2f} s ({report.summary()})")
        print(
            f"  / 1 s target = {shift_s:.2f} (target < 1); a sync with nothing new: {idle_s:.2f} s"
        )
        with open_book(book_path, create=False) as book:
            now = book.now()
        watch_s = best_of(3, lambda: fleet.watch(url, now))
        rows = fleet.watch(url, now)
        lives_s = best_of(3, lambda: fleet.element_lives(url))
        lives = fleet.element_lives(url)
        print(f"fleet watch list: {watch_s:.2f} s for {len(rows)} rows; / 2 s target = "
              f"{watch_s / 2:.2f}")  # fmt: skip
        print(f"element lives: {lives_s:.2f} s for {len(lives)} part/plant rows; / 2 s target = "
              f"{lives_s / 2:.2f}")  # fmt: skip
        with psycopg.connect(url) as conn:
            for title, sql, params in (
                ("watch list", fleet.WATCH_SQL, fleet.watch_params(now, None)),
                ("element lives", fleet.LIVES_SQL, fleet.lives_params(None, None)),
            ):
                print(f"\nEXPLAIN (ANALYZE, BUFFERS) of the {title}:")
                for (line,) in conn.execute("EXPLAIN (ANALYZE, BUFFERS) " + sql, params):
                    print("  " + line)
    finally:
        if server is not None:
            server.stop()
        shutil.rmtree(folder, ignore_errors=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

"""The list as of a past shift's end (the shift log of an earlier shift, `status --as-of`):
with each filter's earlier kept rows (schema 8, `statuscache.kept_as_of`) against the same
book with them emptied, which computes every filter read since from its entries, as before.

    python tests/benchmarks/past_shift.py BOOK [--shifts 2] [--runs 3]

BOOK is never written: a copy is upgraded, then every filter is read once a shift for
`--shifts` shifts after its end through the save path (`record.log`, as the app and the
command line save), the clock moved on with them. The list as of the end of the first of
those shifts is then read on a fresh connection, in turns with a copy whose earlier rows are
emptied, and the two answers compared (`status_json.to_json`). Prints the times and their
ratio; no target, never fails on time.
"""

from __future__ import annotations

import argparse
import shutil
import sqlite3
import statistics
import sys
import tempfile
import time
from datetime import timedelta
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
if str(ROOT) not in sys.path:  # run as a script from anywhere
    sys.path.insert(0, str(ROOT))

from store import record, views  # noqa: E402
from store.base.timeutil import format_utc  # noqa: E402
from store.db.book import Book, open_book  # noqa: E402
from store.health import status_json  # noqa: E402
from store.ledger.entries import Reading  # noqa: E402

SHIFT = timedelta(hours=8)


def read_every_filter(path: Path, shifts: int) -> tuple[list, float]:
    """Every filter read once at the start of each shift after the book's end; the shifts'
    start times and the median save time (s)."""
    saves = []
    with open_book(path, create=False) as book:
        tech = book.conn.execute("SELECT tag FROM technicians ORDER BY tag").fetchone()[0]
        last = dict(
            book.conn.execute(
                "SELECT filter, dp_bar FROM status_cache WHERE dp_bar IS NOT NULL"
            ).fetchall()
        )
        start, starts = book.now(), []
        for i in range(shifts):
            at = start + SHIFT * (i + 1)
            book.set_setting("clock", format_utc(at + timedelta(hours=1)))
            for j, (tag, dp) in enumerate(sorted(last.items())):
                began = time.perf_counter()
                record.log(
                    book,
                    Reading(
                        filter=tag,
                        dp_bar=round(dp * 1.01 + 0.01, 2),
                        temp_c=45,
                        by=tech,
                        at=at + timedelta(seconds=3 * j),
                    ),
                )
                saves.append(time.perf_counter() - began)
            starts.append(at)
        book.conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    return starts, statistics.median(saves)


def list_as_of(path: Path, at) -> tuple[float, dict]:
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True, isolation_level=None)
    book = Book(conn=conn, path=path, readonly=True)
    began = time.perf_counter()
    watch = views.watch(book, as_of=at)
    took = time.perf_counter() - began
    answer = status_json.to_json(watch, book.local_zone())
    conn.close()
    return took, answer


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("book", type=Path)
    parser.add_argument("--shifts", type=int, default=2)
    parser.add_argument("--runs", type=int, default=3)
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "book.db"
        shutil.copyfile(args.book, path)
        began = time.perf_counter()
        with open_book(path, create=False) as book:  # the upgrade to this version
            filters = book.conn.execute("SELECT count(*) FROM filters").fetchone()[0]
        print(f"copy opened (and upgraded) in {time.perf_counter() - began:.1f} s", flush=True)
        began = time.perf_counter()
        starts, save_s = read_every_filter(path, args.shifts)
        print(
            f"{filters} filters read in each of {args.shifts} shifts in "
            f"{time.perf_counter() - began:.0f} s (median save {1000 * save_s:.0f} ms)",
            flush=True,
        )
        bare = Path(folder) / "without.db"
        shutil.copyfile(path, bare)
        with sqlite3.connect(bare) as conn:
            conn.execute("DELETE FROM status_earlier")
        at = starts[0] + SHIFT - timedelta(seconds=1)  # the end of the first shift read
        with_rows, without = [], []
        answers = set()
        for _ in range(args.runs):  # in turns
            took, answer = list_as_of(path, at)
            with_rows.append(took)
            answers.add(repr(answer))
            took, answer = list_as_of(bare, at)
            without.append(took)
            answers.add(repr(answer))
    a, b = statistics.median(with_rows), statistics.median(without)
    print(f"list as of {format_utc(at)} (the end of the first shift read):")
    print(
        f"  with the earlier kept rows: {a:.2f} s (runs: {', '.join(f'{x:.2f}' for x in with_rows)})"
    )
    print(f"  without them (every filter read since computed): {b:.2f} s "
          f"(runs: {', '.join(f'{x:.2f}' for x in without)})")  # fmt: skip
    print(f"  ratio {a / b:.3f}; the same answer: {'yes' if len(answers) == 1 else 'NO'}")
    return 0 if len(answers) == 1 else 1


if __name__ == "__main__":
    sys.exit(main())

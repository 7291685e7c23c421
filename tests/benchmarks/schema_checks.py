"""What schema 4's CHECKs and insert trigger cost a write, as a ratio to schema 3.

Run from the repository top:  python tests/benchmarks/schema_checks.py [ROWS]

Inserts the same readings into a schema-3 and a schema-4 file (one transaction, raw SQL, so
the figure is the checks' own cost) and prints the time per row and the ratio. A save through
`journal.log` costs milliseconds (the fsync, the status refresh); the checks add microseconds.
"""

from __future__ import annotations

import sqlite3
import sys
import tempfile
import time
import uuid
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from store.db.schema import MIGRATIONS  # noqa: E402


def insert_seconds(steps: int, rows: int) -> float:
    with tempfile.TemporaryDirectory() as folder:
        conn = sqlite3.connect(Path(folder) / "b.db", isolation_level=None)
        conn.executescript("\n".join(MIGRATIONS[:steps]))
        conn.execute("INSERT INTO technicians(tag) VALUES ('AB')")
        conn.execute("INSERT INTO units(tag) VALUES ('P1')")
        conn.execute("INSERT INTO filters(tag, unit, kind) VALUES ('P1-RF', 'P1', 'return')")
        values = [
            (
                str(uuid.uuid4()),
                f"2026-{1 + i % 12:02d}-{1 + i % 28:02d}T08:00:00Z",
                1.0 + (i % 100) / 100,
                "a short note",
            )
            for i in range(rows)
        ]
        start = time.perf_counter()
        conn.execute("BEGIN")
        conn.executemany(
            "INSERT INTO entries(id, at_utc, logged_utc, kind, by, filter, unit, dp_bar, temp_c,"
            " note) VALUES (?, ?, '2026-11-20T08:00:00Z', 'reading', 'AB', 'P1-RF', 'P1', ?, 40,"
            " ?)",
            values,
        )
        conn.execute("COMMIT")
        seconds = time.perf_counter() - start
        conn.close()
        return seconds


def main() -> int:
    rows = int(sys.argv[1]) if len(sys.argv) > 1 else 50_000
    old = min(insert_seconds(3, rows) for _ in range(3))
    new = min(insert_seconds(4, rows) for _ in range(3))
    print(f"{rows} readings inserted: schema 3 {1e6 * old / rows:.1f} µs/row, "
          f"schema 4 {1e6 * new / rows:.1f} µs/row, ratio {new / old:.2f}")  # fmt: skip
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

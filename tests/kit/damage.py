"""Damaging a logbook file on purpose, for the tests of what the book does with damage."""

from __future__ import annotations

import random
import sqlite3
from pathlib import Path


def root_page(path: Path, table: str) -> tuple[int, int]:
    """(byte offset, size) of the root b-tree page of `table`."""
    conn = sqlite3.connect(path)
    try:
        size = conn.execute("PRAGMA page_size").fetchone()[0]
        root = conn.execute("SELECT rootpage FROM sqlite_master WHERE name = ?", [table])
        return (root.fetchone()[0] - 1) * size, size
    finally:
        conn.close()


def overwrite(path: Path, offset: int, data: bytes) -> None:
    with path.open("r+b") as f:
        f.seek(offset)
        f.write(data)


def noise(n: int, seed: int = 4406) -> bytes:
    return random.Random(seed).randbytes(n)

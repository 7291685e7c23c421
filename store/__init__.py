"""Everything of sumpbook that is not screen, in layers (DEVELOPERS.md draws them):

    sheets, exchange       what the screens show beyond the list; CSV, merge, demo
    views                  the watch list and each filter's status (now, or as of a time)
    record                 every save: entries and the derived rows kept with them
    derived                the kept rows (element summaries, status cache)
    health                 the state of each filter, breather and unit, from the ledger
    ledger, forecast       entries and the register; the due-date maths
    db, physics            the SQLite file; viscosity, ΔP normalisation, ISO 4406
    base                   errors, time, units, value checks, preferences

A module imports only from its own layer's lower neighbours (checked by import-linter, see
pyproject.toml). The screens and the command line reach the book file and the kept rows
only through the names below; everything else they take from the upper layers directly.
"""

from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from store.db.backup import carried_in, copy_holding_lock, restore, rolling_backup
    from store.db.book import Book, deep_check, full_check, open_book
    from store.db.connection import damaged_read
    from store.db.targets import refuse_input_as_output

# Each name of the door is imported when first asked for: importing any part of store (the
# command line's errors, its session) loads none of the file's code, so that `--version` and
# `--help` start with no book code at all, and a command line answer that only reads (status,
# list) never loads store.db.backup.
_DOOR = {
    "Book": "store.db.book",
    "deep_check": "store.db.book",
    "full_check": "store.db.book",
    "open_book": "store.db.book",
    "damaged_read": "store.db.connection",
    "refuse_input_as_output": "store.db.targets",
    "copy_holding_lock": "store.db.backup",
    "carried_in": "store.db.backup",
    "restore": "store.db.backup",
    "rolling_backup": "store.db.backup",
}


def __getattr__(name: str) -> Any:
    """A name of the door, from its module (imported now if it was not)."""
    module = _DOOR.get(name)
    if module is None:
        raise AttributeError(f"module 'store' has no attribute {name!r}")
    # The import statement's own door (not importlib.import_module, which `python -X
    # importtime` does not see: tests/cli/test_lean_path.py reads what a run loaded from it).
    return getattr(__import__(module, fromlist=[name]), name)


__all__ = [
    "refuse_input_as_output",
    "Book",
    "carried_in",
    "copy_holding_lock",
    "damaged_read",
    "deep_check",
    "full_check",
    "open_book",
    "restore",
    "rolling_backup",
]

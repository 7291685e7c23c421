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

from store.db.book import Book, deep_check, full_check, open_book
from store.db.connection import damaged_read
from store.db.targets import refuse_input_as_output

if TYPE_CHECKING:
    from store.db.backup import copy_holding_lock, restore, rolling_backup

_BACKUP = ("copy_holding_lock", "restore", "rolling_backup")


def __getattr__(name: str) -> Any:
    """The backup door, imported when first asked for: a command line answer that only
    reads (status, list) never loads store.db.backup."""
    if name in _BACKUP:
        from store.db import backup

        return getattr(backup, name)
    raise AttributeError(f"module 'store' has no attribute {name!r}")


__all__ = [
    "refuse_input_as_output",
    "Book",
    "copy_holding_lock",
    "damaged_read",
    "deep_check",
    "full_check",
    "open_book",
    "restore",
    "rolling_backup",
]

"""A book taken back to an earlier schema by hand, for the tests of an upgrade: the tables each
later step added, dropped (a step that changed a table is undone by its own test)."""

from __future__ import annotations

ADDED_TABLES = {  # schema version: the tables its step added (store/db/schema.py)
    8: ("status_earlier",),
    9: ("breather_cache", "breather_seen"),
}


def drop_tables_after(version: int) -> str:
    """SQL that drops the tables the steps after `version` added (not the version number)."""
    return "".join(
        f"DROP TABLE {table}; "
        for step, tables in sorted(ADDED_TABLES.items())
        if step > version
        for table in tables
    )

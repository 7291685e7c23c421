"""The logbook's SQLite schema and its forward migrations.

The schema is part of the interface (README: "The logbook file"). Each script in
MIGRATIONS moves the file from version N-1 to N; `PRAGMA user_version` holds N. All pending
steps run in one transaction on open, so a failed migration leaves the file as it was.

We keep our own small runner on `user_version` instead of sqlite-utils' Migrations
because the file must refuse a newer version before anything is written, and the
version must be readable by any SQLite tool without a bookkeeping table.
"""

from __future__ import annotations

# "SUMP" in ASCII: marks the file as a sumpbook logbook in its header.
APPLICATION_ID = 0x53554D50

TAG_CHECK = "length(tag) BETWEEN 1 AND 16"

FILTER_KINDS = ("suction-strainer", "suction", "pressure", "return", "offline")
INDICATOR_STATES = ("clean", "dirty", "bypass")
ENTRY_KINDS = ("reading", "change", "topup", "breather", "sample", "note", "void")


def _in(values: tuple[str, ...]) -> str:
    return "(" + ", ".join(f"'{v}'" for v in values) + ")"


V1 = f"""
CREATE TABLE settings (
    key TEXT PRIMARY KEY,
    value TEXT NOT NULL
);
CREATE TABLE technicians (
    tag TEXT PRIMARY KEY COLLATE NOCASE CHECK ({TAG_CHECK}),
    name TEXT NOT NULL DEFAULT '',
    active INTEGER NOT NULL DEFAULT 1
);
CREATE TABLE fluids (
    tag TEXT PRIMARY KEY COLLATE NOCASE CHECK ({TAG_CHECK}),
    name TEXT NOT NULL DEFAULT '',
    iso_vg INTEGER,
    nu40_cst REAL CHECK (nu40_cst > 0),
    nu100_cst REAL CHECK (nu100_cst > 0),
    vi REAL,
    density_kg_l REAL CHECK (density_kg_l > 0)
);
CREATE TABLE units (
    tag TEXT PRIMARY KEY COLLATE NOCASE CHECK ({TAG_CHECK}),
    name TEXT NOT NULL DEFAULT '',
    area TEXT NOT NULL DEFAULT '',
    reservoir_l REAL CHECK (reservoir_l > 0),
    fluid TEXT COLLATE NOCASE REFERENCES fluids(tag),
    normal_temp_c REAL NOT NULL DEFAULT 50,
    max_temp_c REAL NOT NULL DEFAULT 60,
    coldest_start_c REAL NOT NULL DEFAULT 15,
    hour_meter INTEGER NOT NULL DEFAULT 0,
    target_code TEXT
);
CREATE TABLE filters (
    tag TEXT PRIMARY KEY COLLATE NOCASE CHECK ({TAG_CHECK}),
    unit TEXT NOT NULL COLLATE NOCASE REFERENCES units(tag),
    kind TEXT NOT NULL CHECK (kind IN {_in(FILTER_KINDS)}),
    element TEXT NOT NULL DEFAULT '',
    rating_um REAL CHECK (rating_um > 0),
    rating_basis TEXT NOT NULL DEFAULT 'absolute'
        CHECK (rating_basis IN ('absolute', 'nominal')),
    beta_ratio REAL CHECK (beta_ratio >= 1),
    bypass_bar REAL CHECK (bypass_bar > 0),
    limit_bar REAL CHECK (limit_bar > 0),
    clean_bar REAL CHECK (clean_bar >= 0),
    rated_flow_lpm REAL CHECK (rated_flow_lpm > 0),
    normal_flow_lpm REAL CHECK (normal_flow_lpm > 0),
    gauge INTEGER NOT NULL DEFAULT 1,
    reading_interval_h REAL NOT NULL DEFAULT 168 CHECK (reading_interval_h > 0)
);
CREATE INDEX filters_by_unit ON filters(unit);
CREATE TABLE breathers (
    tag TEXT PRIMARY KEY COLLATE NOCASE CHECK ({TAG_CHECK}),
    unit TEXT NOT NULL COLLATE NOCASE REFERENCES units(tag),
    kind TEXT NOT NULL DEFAULT 'desiccant' CHECK (kind IN ('desiccant', 'plain')),
    rating_um REAL CHECK (rating_um > 0),
    swap_interval_d REAL NOT NULL DEFAULT 90 CHECK (swap_interval_d > 0)
);
CREATE TABLE shifts (
    name TEXT PRIMARY KEY COLLATE NOCASE CHECK (length(name) BETWEEN 1 AND 12),
    starts TEXT NOT NULL CHECK (starts GLOB '[0-2][0-9]:[0-5][0-9]'),
    position INTEGER NOT NULL
);
CREATE TABLE entries (
    id TEXT PRIMARY KEY CHECK (length(id) = 36),
    at_utc TEXT NOT NULL,
    logged_utc TEXT NOT NULL,
    kind TEXT NOT NULL CHECK (kind IN {_in(ENTRY_KINDS)}),
    by TEXT NOT NULL COLLATE NOCASE REFERENCES technicians(tag),
    unit TEXT COLLATE NOCASE REFERENCES units(tag),
    filter TEXT COLLATE NOCASE REFERENCES filters(tag),
    breather TEXT COLLATE NOCASE REFERENCES breathers(tag),
    dp_bar REAL CHECK (dp_bar >= 0),
    indicator TEXT CHECK (indicator IN {_in(INDICATOR_STATES)}),
    temp_c REAL,
    flow_lpm REAL CHECK (flow_lpm > 0),
    hours REAL CHECK (hours >= 0),
    reason TEXT,
    condition TEXT,
    batch TEXT,
    volume_l REAL CHECK (volume_l > 0),
    fluid TEXT COLLATE NOCASE REFERENCES fluids(tag),
    filtered_um REAL CHECK (filtered_um > 0),
    c4_per_ml REAL CHECK (c4_per_ml >= 0),
    c6_per_ml REAL CHECK (c6_per_ml >= 0),
    c14_per_ml REAL CHECK (c14_per_ml >= 0),
    code TEXT,
    water_ppm REAL CHECK (water_ppm >= 0),
    voids TEXT REFERENCES entries(id),
    note TEXT NOT NULL DEFAULT ''
);
CREATE INDEX entries_by_time ON entries(at_utc);
CREATE INDEX entries_by_filter ON entries(filter, at_utc) WHERE filter IS NOT NULL;
CREATE INDEX entries_by_unit ON entries(unit, at_utc);
CREATE INDEX entries_by_breather ON entries(breather, at_utc) WHERE breather IS NOT NULL;
CREATE UNIQUE INDEX one_void_per_entry ON entries(voids) WHERE voids IS NOT NULL;
CREATE TABLE register_log (
    id TEXT PRIMARY KEY CHECK (length(id) = 36),
    at_utc TEXT NOT NULL,
    by TEXT NOT NULL DEFAULT '',
    tbl TEXT NOT NULL,
    tag TEXT NOT NULL COLLATE NOCASE,
    field TEXT NOT NULL,
    old TEXT,
    new TEXT
);
CREATE INDEX register_log_by_tag ON register_log(tbl, tag, at_utc);
CREATE VIEW live_entries AS
    SELECT * FROM entries e
    WHERE NOT EXISTS (SELECT 1 FROM entries v WHERE v.voids = e.id);
-- Append-only: the book refuses to edit or delete an entry in place.
CREATE TRIGGER entries_no_update BEFORE UPDATE ON entries
    BEGIN SELECT RAISE(ABORT, 'entries are append-only: void an entry instead'); END;
CREATE TRIGGER entries_no_delete BEFORE DELETE ON entries
    BEGIN SELECT RAISE(ABORT, 'entries are append-only: void an entry instead'); END;
"""

# Version 2: a derived cache of each filter's status, kept fresh on every write and
# always rebuildable from the entries (`sumpbook rebuild`).
V2 = """
CREATE TABLE status_cache (
    filter TEXT PRIMARY KEY COLLATE NOCASE REFERENCES filters(tag) ON DELETE CASCADE,
    computed_utc TEXT NOT NULL,
    format INTEGER NOT NULL,
    data TEXT NOT NULL
);
"""

# Version 3: what a plant-sized book (millions of entries) needs to answer at once. All derived
# or indexes: `sumpbook rebuild` recomputes the tables from the entries.
# - partial indexes for the few entries that are not readings: element changes by position
#   (element lives, the last change; with reason and id, so like positions' lives come from
#   the index alone) and events by unit (top-ups, samples, notes);
# - element_cache: one row per removed element of a position (its life, why it came out, and
#   its readings' ages and reference ΔP as float64 for the earlier-curve forecast);
#   element_state: per position, what the cache was computed from (the normalising context,
#   the entries seen up to a rowid, the change that ended the last cached element);
# - status_cache.pools: the status leans on like positions' lives (a change there stales it);
#   status_cache.stale: the row is known to be out of date (shown only while it is redone);
# - unit_cache: each unit's fluid-care status (top-ups, samples, hot readings), with the
#   register rows it was computed from.
V3 = """
CREATE INDEX entries_filter_changes ON entries(filter, at_utc, reason, id) WHERE kind = 'change';
CREATE INDEX entries_unit_events ON entries(unit, kind, at_utc) WHERE kind <> 'reading';
CREATE TABLE element_cache (
    filter TEXT NOT NULL COLLATE NOCASE REFERENCES filters(tag) ON DELETE CASCADE,
    seq INTEGER NOT NULL,
    removal_id TEXT NOT NULL,
    data TEXT NOT NULL,
    curve BLOB NOT NULL,
    PRIMARY KEY (filter, seq)
) WITHOUT ROWID;
CREATE TABLE element_state (
    filter TEXT PRIMARY KEY COLLATE NOCASE REFERENCES filters(tag) ON DELETE CASCADE,
    context TEXT NOT NULL,
    seen_rowid INTEGER NOT NULL,
    last_change TEXT,
    last_change_utc TEXT,
    elements INTEGER NOT NULL
);
ALTER TABLE status_cache ADD COLUMN pools INTEGER NOT NULL DEFAULT 1;
ALTER TABLE status_cache ADD COLUMN stale INTEGER NOT NULL DEFAULT 0;
CREATE TABLE unit_cache (
    unit TEXT PRIMARY KEY COLLATE NOCASE REFERENCES units(tag) ON DELETE CASCADE,
    computed_utc TEXT NOT NULL,
    register TEXT NOT NULL,
    data TEXT NOT NULL
);
"""

# One SQL script per schema version, in order. Never edit a released step: add one.
MIGRATIONS: list[str] = [V1, V2, V3]
SCHEMA_VERSION = len(MIGRATIONS)

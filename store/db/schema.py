"""The logbook's SQLite schema and its forward migrations.

The schema is part of the interface (README: "The logbook file"). Each script in
MIGRATIONS moves the file from version N-1 to N; `PRAGMA user_version` holds N. All pending
steps run in one transaction on open, so a failed migration leaves the file as it was.

We keep our own small runner on `user_version` instead of sqlite-utils' Migrations
because the file must refuse a newer version before anything is written, and the
version must be readable by any SQLite tool without a bookkeeping table.
"""

from __future__ import annotations

from store.base.validate import (
    BREATHER_REASONS,
    CHANGE_REASONS,
    ENTRY_KINDS,
    FILTER_KINDS,
    INDICATOR_STATES,
    RANGES,
    TEXT_LIMITS,
)

# "SUMP" in ASCII: marks the file as a sumpbook logbook in its header.
APPLICATION_ID = 0x53554D50

TAG_CHECK = "length(tag) BETWEEN 1 AND 16"


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


# ---- version 4: the schema as the last line ------------------------------------------------------
# Every value a person could not have typed is refused by the file itself (a hand-made SQL edit,
# another program): types, finite ranges (an infinity fails every BETWEEN; SQLite stores NaN as
# NULL), tags, text without control characters, UTC stamps 'YYYY-MM-DDTHH:MM:SS(.ffffff)?Z' of
# real dates from 1970 on, what each entry kind needs. An insert that names an existing entry id
# (or voids an entry voided already) is refused, so INSERT OR REPLACE cannot rewrite history
# (REPLACE deletes without firing a delete trigger). The ranges are store/base/validate.py's RANGES.
#
# Existing books are carried over table by table: rows that meet the checks are copied, the
# others kept whole (as JSON) in `quarantine` with the table and key, and the open says so.
# The copy runs with foreign keys off (book.migrate), as SQLite's table-rebuild recipe asks.

_HEX = "[0-9a-f]"
_UUID_GLOB = "-".join(_HEX * n for n in (8, 4, 4, 4, 12))
_CONTROLS = (
    "char(1) || '-' || char(8) || char(11) || '-' || char(31) || char(127) || '-' || char(159)"
)
_CONTROLS_ONE_LINE = "char(1) || '-' || char(31) || char(127) || '-' || char(159)"


def _tag(c: str, null: bool = True) -> str:
    check = (
        f"typeof({c}) = 'text' AND length({c}) BETWEEN 1 AND 16 AND {c} GLOB '[A-Z0-9]*' "
        f"AND {c} NOT GLOB '*[^A-Z0-9._/-]*'"
    )
    return f"({c} IS NULL OR ({check}))" if null else f"({check})"


def _text(c: str, limit: int, lines: bool = False) -> str:
    controls = _CONTROLS if lines else _CONTROLS_ONE_LINE
    return (
        f"({c} IS NULL OR (typeof({c}) = 'text' AND length({c}) <= {limit} "
        f"AND {c} NOT GLOB '*[' || {controls} || ']*'))"
    )


def _num(c: str, low: float, high: float, open_low: bool = False, integer: bool = False) -> str:
    types = "('integer')" if integer else "('integer', 'real')"
    low_check = f"{c} > {low!r}" if open_low else f"{c} >= {low!r}"
    return f"({c} IS NULL OR (typeof({c}) IN {types} AND {low_check} AND {c} <= {high!r}))"


def _range(c: str, integer: bool = False) -> str:
    r = RANGES[c]
    return _num(c, r.low, r.high, r.open_low, integer)


def _stamp(c: str) -> str:
    digits = "[0-9][0-9][0-9][0-9]-[0-9][0-9]-[0-9][0-9]T[0-9][0-9]:[0-9][0-9]:[0-9][0-9]"
    return (
        f"(typeof({c}) = 'text' AND ({c} GLOB '{digits}Z' OR {c} GLOB '{digits}.{'[0-9]' * 6}Z')"
        f" AND {c} >= '1970' AND strftime('%Y-%m-%dT%H:%M:%S', julianday({c})) = substr({c}, 1, 19))"
    )


def _bool(c: str) -> str:
    return f"({c} IN (0, 1))"


def _v4_register_tables() -> dict[str, tuple[list[str], str, str]]:
    """The register tables as version 4 makes them: columns, column SQL, the rows carried."""
    return {
        "technicians": (
            ["tag", "name", "active"],
            f"""tag TEXT PRIMARY KEY COLLATE NOCASE CHECK {_tag("tag", False)},
    name TEXT NOT NULL DEFAULT '' CHECK {_text("name", 80)},
    active INTEGER NOT NULL DEFAULT 1 CHECK {_bool("active")}""",
            "",
        ),
        "fluids": (
            ["tag", "name", "iso_vg", "nu40_cst", "nu100_cst", "vi", "density_kg_l"],
            f"""tag TEXT PRIMARY KEY COLLATE NOCASE CHECK {_tag("tag", False)},
    name TEXT NOT NULL DEFAULT '' CHECK {_text("name", 80)},
    iso_vg INTEGER CHECK {_range("iso_vg", integer=True)},
    nu40_cst REAL CHECK {_range("nu40_cst")},
    nu100_cst REAL CHECK {_range("nu100_cst")},
    vi REAL CHECK {_range("vi")},
    density_kg_l REAL CHECK {_range("density_kg_l")},
    CHECK (nu40_cst IS NULL OR nu100_cst IS NULL OR nu100_cst < nu40_cst)""",
            "",
        ),
        "units": (
            [
                "tag",
                "name",
                "area",
                "reservoir_l",
                "fluid",
                "normal_temp_c",
                "max_temp_c",
                "coldest_start_c",
                "hour_meter",
                "target_code",
            ],  # fmt: skip
            f"""tag TEXT PRIMARY KEY COLLATE NOCASE CHECK {_tag("tag", False)},
    name TEXT NOT NULL DEFAULT '' CHECK {_text("name", 80)},
    area TEXT NOT NULL DEFAULT '' CHECK {_text("area", 80)},
    reservoir_l REAL CHECK {_range("reservoir_l")},
    fluid TEXT COLLATE NOCASE REFERENCES fluids(tag) CHECK {_tag("fluid")},
    normal_temp_c REAL NOT NULL DEFAULT 50 CHECK {_range("normal_temp_c")},
    max_temp_c REAL NOT NULL DEFAULT 60 CHECK {_range("max_temp_c")},
    coldest_start_c REAL NOT NULL DEFAULT 15 CHECK {_range("coldest_start_c")},
    hour_meter INTEGER NOT NULL DEFAULT 0 CHECK {_bool("hour_meter")},
    target_code TEXT CHECK {_text("target_code", 20)},
    CHECK (coldest_start_c <= normal_temp_c AND normal_temp_c <= max_temp_c)""",
            "(fluid IS NULL OR fluid IN (SELECT tag FROM fluids_v4))",
        ),
        "filters": (
            [
                "tag",
                "unit",
                "kind",
                "element",
                "rating_um",
                "rating_basis",
                "beta_ratio",
                "bypass_bar",
                "limit_bar",
                "clean_bar",
                "rated_flow_lpm",
                "normal_flow_lpm",
                "gauge",
                "reading_interval_h",
            ],  # fmt: skip
            f"""tag TEXT PRIMARY KEY COLLATE NOCASE CHECK {_tag("tag", False)},
    unit TEXT NOT NULL COLLATE NOCASE REFERENCES units(tag) CHECK {_tag("unit", False)},
    kind TEXT NOT NULL CHECK (kind IN {_in(FILTER_KINDS)}),
    element TEXT NOT NULL DEFAULT '' CHECK {_text("element", 60)},
    rating_um REAL CHECK {_range("rating_um")},
    rating_basis TEXT NOT NULL DEFAULT 'absolute'
        CHECK (rating_basis IN ('absolute', 'nominal')),
    beta_ratio REAL CHECK {_range("beta_ratio")},
    bypass_bar REAL CHECK {_range("bypass_bar")},
    limit_bar REAL CHECK {_range("limit_bar")},
    clean_bar REAL CHECK {_range("clean_bar")},
    rated_flow_lpm REAL CHECK {_range("rated_flow_lpm")},
    normal_flow_lpm REAL CHECK {_range("normal_flow_lpm")},
    gauge INTEGER NOT NULL DEFAULT 1 CHECK {_bool("gauge")},
    reading_interval_h REAL NOT NULL DEFAULT 168 CHECK {_range("reading_interval_h")},
    CHECK (limit_bar IS NULL OR bypass_bar IS NULL OR limit_bar < bypass_bar),
    CHECK (clean_bar IS NULL OR limit_bar IS NULL OR clean_bar < limit_bar),
    CHECK (clean_bar IS NULL OR bypass_bar IS NULL OR clean_bar < bypass_bar)""",
            "unit IN (SELECT tag FROM units_v4)",
        ),
        "breathers": (
            ["tag", "unit", "kind", "rating_um", "swap_interval_d"],
            f"""tag TEXT PRIMARY KEY COLLATE NOCASE CHECK {_tag("tag", False)},
    unit TEXT NOT NULL COLLATE NOCASE REFERENCES units(tag) CHECK {_tag("unit", False)},
    kind TEXT NOT NULL DEFAULT 'desiccant' CHECK (kind IN ('desiccant', 'plain')),
    rating_um REAL CHECK {_range("rating_um")},
    swap_interval_d REAL NOT NULL DEFAULT 90 CHECK {_range("swap_interval_d")}""",
            "unit IN (SELECT tag FROM units_v4)",
        ),
    }


def _v4() -> str:
    tables = _v4_register_tables()
    entry_columns = [
        "id", "at_utc", "logged_utc", "kind", "by", "unit", "filter", "breather", "dp_bar",
        "indicator", "temp_c", "flow_lpm", "hours", "reason", "condition", "batch", "volume_l",
        "fluid", "filtered_um", "c4_per_ml", "c6_per_ml", "c14_per_ml", "code", "water_ppm",
        "voids", "note",
    ]  # fmt: skip
    tables["entries"] = (
        entry_columns,
        f"""id TEXT PRIMARY KEY CHECK (typeof(id) = 'text' AND id GLOB '{_UUID_GLOB}'),
    at_utc TEXT NOT NULL CHECK {_stamp("at_utc")},
    logged_utc TEXT NOT NULL CHECK {_stamp("logged_utc")},
    kind TEXT NOT NULL CHECK (kind IN {_in(ENTRY_KINDS)}),
    by TEXT NOT NULL COLLATE NOCASE REFERENCES technicians(tag) CHECK {_tag("by", False)},
    unit TEXT COLLATE NOCASE REFERENCES units(tag) CHECK {_tag("unit")},
    filter TEXT COLLATE NOCASE REFERENCES filters(tag) CHECK {_tag("filter")},
    breather TEXT COLLATE NOCASE REFERENCES breathers(tag) CHECK {_tag("breather")},
    dp_bar REAL CHECK {_range("dp_bar")},
    indicator TEXT CHECK (indicator IS NULL OR indicator IN {_in(INDICATOR_STATES)}),
    temp_c REAL CHECK {_range("temp_c")},
    flow_lpm REAL CHECK {_range("flow_lpm")},
    hours REAL CHECK {_range("hours")},
    reason TEXT CHECK {_text("reason", TEXT_LIMITS["reason"])},
    condition TEXT CHECK {_text("condition", TEXT_LIMITS["condition"])},
    batch TEXT CHECK {_text("batch", TEXT_LIMITS["batch"])},
    volume_l REAL CHECK {_range("volume_l")},
    fluid TEXT COLLATE NOCASE REFERENCES fluids(tag) CHECK {_tag("fluid")},
    filtered_um REAL CHECK {_range("filtered_um")},
    c4_per_ml REAL CHECK {_range("c4_per_ml")},
    c6_per_ml REAL CHECK {_range("c6_per_ml")},
    c14_per_ml REAL CHECK {_range("c14_per_ml")},
    code TEXT CHECK {_text("code", TEXT_LIMITS["code"])},
    water_ppm REAL CHECK {_range("water_ppm")},
    voids TEXT REFERENCES entries(id) CHECK (voids IS NULL OR voids GLOB '{_UUID_GLOB}'),
    note TEXT NOT NULL DEFAULT '' CHECK {_text("note", TEXT_LIMITS["note"], lines=True)},
    CHECK (kind NOT IN ('reading', 'change') OR filter IS NOT NULL),
    CHECK (kind <> 'reading' OR dp_bar IS NOT NULL OR indicator IS NOT NULL),
    CHECK (kind <> 'change' OR reason IN {_in(CHANGE_REASONS)}),
    CHECK (kind <> 'breather' OR (breather IS NOT NULL AND reason IN {_in(BREATHER_REASONS)})),
    CHECK (kind <> 'topup' OR (unit IS NOT NULL AND volume_l IS NOT NULL)),
    CHECK (kind <> 'sample' OR unit IS NOT NULL),
    CHECK (kind <> 'void' OR (voids IS NOT NULL AND note <> ''))""",
        "(by IN (SELECT tag FROM technicians_v4))"
        " AND (unit IS NULL OR unit IN (SELECT tag FROM units_v4))"
        " AND (filter IS NULL OR filter IN (SELECT tag FROM filters_v4))"
        " AND (breather IS NULL OR breather IN (SELECT tag FROM breathers_v4))"
        " AND (fluid IS NULL OR fluid IN (SELECT tag FROM fluids_v4))",
    )
    parts = [
        "DROP VIEW IF EXISTS live_entries;",
        "DROP TRIGGER IF EXISTS entries_no_update;",
        "DROP TRIGGER IF EXISTS entries_no_delete;",
        """CREATE TABLE quarantine (
    seq INTEGER PRIMARY KEY,
    tbl TEXT NOT NULL,
    key TEXT,
    found_utc TEXT NOT NULL,
    why TEXT NOT NULL,
    row TEXT NOT NULL
);""",
    ]
    for table, (columns, body, refs) in tables.items():
        cols = ", ".join(columns)
        key = "id" if table == "entries" else "tag"
        where = f" WHERE {refs}" if refs else ""
        json_row = "json_object(" + ", ".join(f"'{c}', {c}" for c in columns) + ")"
        parts.append(f"CREATE TABLE {table}_v4 (\n    {body}\n);")
        parts.append(
            f"INSERT OR IGNORE INTO {table}_v4 ({cols}) SELECT {cols} FROM {table}{where};"
        )
        if table == "entries":
            # a void of an entry that stayed behind stays behind too
            parts.append(
                "DELETE FROM entries_v4 WHERE voids IS NOT NULL "
                "AND voids NOT IN (SELECT id FROM entries_v4);"
            )
        parts.append(
            f"INSERT INTO quarantine (tbl, key, found_utc, why, row) "
            f"SELECT '{table}', {key}, strftime('%Y-%m-%dT%H:%M:%SZ', 'now'), "
            f"'it does not meet the checks of schema version 4, or names a row that does not', "
            f"{json_row} FROM {table} WHERE {key} NOT IN (SELECT {key} FROM {table}_v4);"
        )
    # drop children first, rename parents first
    for table in reversed(list(tables)):
        parts.append(f"DROP TABLE {table};")
    for table in tables:
        parts.append(f"ALTER TABLE {table}_v4 RENAME TO {table};")
    parts.append(
        """CREATE INDEX filters_by_unit ON filters(unit);
CREATE INDEX entries_by_time ON entries(at_utc);
CREATE INDEX entries_by_filter ON entries(filter, at_utc) WHERE filter IS NOT NULL;
CREATE INDEX entries_by_unit ON entries(unit, at_utc);
CREATE INDEX entries_by_breather ON entries(breather, at_utc) WHERE breather IS NOT NULL;
CREATE UNIQUE INDEX one_void_per_entry ON entries(voids) WHERE voids IS NOT NULL;
CREATE INDEX entries_filter_changes ON entries(filter, at_utc, reason, id) WHERE kind = 'change';
CREATE INDEX entries_unit_events ON entries(unit, kind, at_utc) WHERE kind <> 'reading';
CREATE VIEW live_entries AS
    SELECT * FROM entries e
    WHERE NOT EXISTS (SELECT 1 FROM entries v WHERE v.voids = e.id);
CREATE TRIGGER entries_no_update BEFORE UPDATE ON entries
    BEGIN SELECT RAISE(ABORT, 'entries are append-only: void an entry instead'); END;
CREATE TRIGGER entries_no_delete BEFORE DELETE ON entries
    BEGIN SELECT RAISE(ABORT, 'entries are append-only: void an entry instead'); END;
CREATE TRIGGER entries_no_replace BEFORE INSERT ON entries
    WHEN EXISTS (SELECT 1 FROM entries WHERE id = NEW.id)
      OR (NEW.voids IS NOT NULL AND EXISTS (SELECT 1 FROM entries WHERE voids = NEW.voids))
    BEGIN SELECT RAISE(ABORT, 'an entry with this id (or a void of that entry) exists: entries are append-only'); END;
DELETE FROM status_cache WHERE filter NOT IN (SELECT tag FROM filters);
DELETE FROM element_cache WHERE filter NOT IN (SELECT tag FROM filters);
DELETE FROM element_state WHERE filter NOT IN (SELECT tag FROM filters);
DELETE FROM unit_cache WHERE unit NOT IN (SELECT tag FROM units);
UPDATE status_cache SET stale = 1 WHERE (SELECT count(*) FROM quarantine) > 0;"""
    )
    return "\n".join(parts)


V4 = _v4()

# ---- version 5: the register history kept by the file ----------------------------------------
# A change of a register row is written to `register_log` by the file itself (a trigger per
# register table, one history row per field that moved), so a change made by any program
# leaves its line; the history refuses UPDATE, DELETE and an insert over an existing id
# (INSERT OR REPLACE deletes without firing a delete trigger). Who changed it and when come
# from `register_editor`, the one row sumpbook writes inside the change's transaction (its
# clock, its technician) and removes again; a change made outside sumpbook is logged at
# SQLite's clock, by '(outside sumpbook)'. Adding a record and the shift pattern stay logged
# by sumpbook (merge copies another book's history whole).
REGISTER_FIELDS = {  # every column of a register table but its tag, as version 4 made them
    table: tuple(columns[1:]) for table, (columns, _, _) in _v4_register_tables().items()
}
OUTSIDE = "(outside sumpbook)"
_NEW_UUID = (
    "lower(hex(randomblob(4)) || '-' || hex(randomblob(2)) || '-4' || "
    "substr(hex(randomblob(2)), 2) || '-' || substr('89ab', 1 + abs(random() % 4), 1) || "
    "substr(hex(randomblob(2)), 2) || '-' || hex(randomblob(6)))"
)


def _as_text(row: str, column: str) -> str:
    """A value as sumpbook wrote it into the history before schema 5 (Python's str())."""
    if column == "active":
        return f"CASE {row}.{column} WHEN 1 THEN 'True' WHEN 0 THEN 'False' END"
    return f"CAST({row}.{column} AS TEXT)"


def _v5() -> str:
    parts = [
        """CREATE TABLE register_editor (
    one INTEGER PRIMARY KEY CHECK (one = 1),
    by TEXT NOT NULL,
    at_utc TEXT NOT NULL
);
CREATE TRIGGER register_log_no_update BEFORE UPDATE ON register_log
    BEGIN SELECT RAISE(ABORT, 'the register history is append-only'); END;
CREATE TRIGGER register_log_no_delete BEFORE DELETE ON register_log
    BEGIN SELECT RAISE(ABORT, 'the register history is append-only'); END;
CREATE TRIGGER register_log_no_replace BEFORE INSERT ON register_log
    WHEN EXISTS (SELECT 1 FROM register_log WHERE id = NEW.id)
    BEGIN SELECT RAISE(ABORT, 'a history line with this id exists: the history is append-only'); END;"""
    ]
    for table, columns in REGISTER_FIELDS.items():
        moved = "\n        UNION ALL ".join(
            f"SELECT '{c}' AS field, {_as_text('OLD', c)} AS old, {_as_text('NEW', c)} AS new "
            f"WHERE OLD.{c} IS NOT NEW.{c}"
            for c in columns
        )
        parts.append(
            f"""CREATE TRIGGER {table}_history AFTER UPDATE ON {table}
BEGIN
    INSERT INTO register_log (id, at_utc, by, tbl, tag, field, old, new)
    SELECT {_NEW_UUID},
        coalesce((SELECT at_utc FROM register_editor),
                 strftime('%Y-%m-%dT%H:%M:%SZ', 'now')),
        coalesce((SELECT by FROM register_editor), '{OUTSIDE}'),
        '{table}', NEW.tag, moved.field, moved.old, moved.new
    FROM (
        {moved}
    ) AS moved;
END;"""
        )
    return "\n".join(parts)


V5 = _v5()

# ---- version 6: one validity key per kept status ---------------------------------------------
# The status caches are derived (recomputed by `sumpbook rebuild` or a refresh), so they are
# made again empty. Each row carries the key of what it was computed from (`key`: its row
# format, a digest of the register rows it reads, and whether like positions' element changes
# count), the time it was computed at, and the entries it saw (`kept_seen.seen_rowid`: no later
# entry touches its inputs; a narrow table of its own, so that moving it on after a save does
# not rewrite the rows). `newest_utc` (a filter): the newest input's date, from which on an
# audit may use the row; `until_utc` (a unit): the first input dated after it was computed,
# before which it holds. The stale and pools columns are gone: a row that does not match its
# key is computed, whoever reads it (store/derived/statuscache.py).
V6 = """
DROP TABLE status_cache;
DROP TABLE unit_cache;
CREATE TABLE status_cache (
    filter TEXT PRIMARY KEY COLLATE NOCASE REFERENCES filters(tag) ON DELETE CASCADE,
    key TEXT NOT NULL,
    computed_utc TEXT NOT NULL,
    newest_utc TEXT,
    data TEXT NOT NULL
);
CREATE TABLE unit_cache (
    unit TEXT PRIMARY KEY COLLATE NOCASE REFERENCES units(tag) ON DELETE CASCADE,
    key TEXT NOT NULL,
    computed_utc TEXT NOT NULL,
    until_utc TEXT,
    data TEXT NOT NULL
);
CREATE TABLE kept_seen (
    what TEXT NOT NULL CHECK (what IN ('filter', 'unit')),
    tag TEXT NOT NULL COLLATE NOCASE,
    seen_rowid INTEGER NOT NULL,
    PRIMARY KEY (what, tag)
) WITHOUT ROWID;
"""

# ---- version 7: the kept filter rows' watch-list fields as columns ------------------------------
# What the watch list, `status`, `status --json` and the app's list read of a kept filter row,
# as plain columns ahead of `data` (which keeps the whole row, FilterStatus.to_row, for the
# readers that need all of it): one query gives them without decoding JSON, and what moves
# with the clock is worked out from the `clock_*` columns (store/derived/statuscache.py
# `lean_filters`). Times as format_utc writes them; `flags` the codes joined by spaces;
# `spark` the packed float64s; `cold_*`, `life_*`, `clock_*` the fields of `data`'s `cold`,
# `life` and `clock` (`note_codes`, `clock_due_ages`, `clock_hot` as JSON); `words`,
# `words_check`: the notes' words, apart by U+001F (the second where a check-now status
# says more, else NULL). `lean` 0: read the row through `data` alone. The
# cache is derived, so it is made again empty (`sumpbook rebuild` or a refresh fills it); the
# kept units and the element cache stay.
V7 = """
DROP TABLE status_cache;
DELETE FROM kept_seen WHERE what = 'filter';
CREATE TABLE status_cache (
    filter TEXT PRIMARY KEY COLLATE NOCASE REFERENCES filters(tag) ON DELETE CASCADE,
    key TEXT NOT NULL,
    computed_utc TEXT NOT NULL,
    newest_utc TEXT,
    lean INTEGER NOT NULL DEFAULT 0,
    unit, kind, gauge, dp_bar, dp_ref_bar, temp_c, indicator, reading_at, limit_bar,
    bypass_bar, clean_bar, percent_of_limit, due_earliest, due_likely, due_latest,
    bypass_earliest, bypass_likely, bypass_latest, basis, flags, readings_since_change,
    changed_at, reference, cold_start_temp_c, cold_dp_at_start_bar, cold_bypass_bar,
    cold_bypasses, cold_bypass_below_c, life_b10_h, life_b50_h, life_n_failed,
    life_n_censored, life_pooled, spark, overdue_at, pace, next_reading, next_rule,
    note_codes, words, words_check, clock_valid_from, clock_origin, clock_meter_at,
    clock_meter_age_h, clock_meter_rate, clock_due_ages, clock_last_age_h, clock_state,
    clock_check_after_h, clock_life_shape, clock_life_scale_h, clock_hot, clock_max_temp_c,
    data TEXT NOT NULL
);
"""

# ---- version 8: each filter's last few kept rows before the one kept now ------------------------
# When a save (or a refresh) keeps a filter's status again, the row it replaces is kept here
# with the rowid it was checked up to (`seen_rowid`, from kept_seen), the last EARLIER_KEPT of
# each filter (store/derived/statuscache.py). An audit of a past time (the shift log of an
# earlier shift, `status --as-of`) uses one where its key holds now and every entry written
# after it that touches its inputs is dated after that time; otherwise it computes the status
# from the entries, as before. Derived, like the caches: a rebuild empties it.
V8 = """
CREATE TABLE status_earlier (
    filter TEXT NOT NULL COLLATE NOCASE REFERENCES filters(tag) ON DELETE CASCADE,
    seen_rowid INTEGER NOT NULL,
    key TEXT NOT NULL,
    computed_utc TEXT NOT NULL,
    newest_utc TEXT,
    data TEXT NOT NULL,
    PRIMARY KEY (filter, seen_rowid)
) WITHOUT ROWID;
"""

# ---- version 9: what each breather's swaps come to --------------------------------------------
# A breather's next swap is read from every live swap it ever had (the lives its desiccant
# told), so the watch list read them all, more with every year. `breather_cache` keeps, per
# breather, what its forecast takes of them: the median life in days (NULL: no swap told
# one), the last live swap's time and condition; and the span of the clock it holds for: the
# swaps dated before `bound_utc` were read, and none of its swaps or their voids is dated
# from `bound_utc` to before `until_utc` (NULL: none later). `breather_seen` (one row): every
# kept row holds for the entries up to `seen_rowid`, in the row format `format`; the entries
# written after it name the breathers a reader computes (store/derived/breathercache.py).
# Derived: created empty, filled by the next save, refresh or `sumpbook rebuild`; until then
# the list reads the swaps as before.
V9 = """
CREATE TABLE breather_cache (
    breather TEXT PRIMARY KEY COLLATE NOCASE REFERENCES breathers(tag) ON DELETE CASCADE,
    bound_utc TEXT NOT NULL,
    until_utc TEXT,
    median_life_d REAL,
    last_at TEXT,
    last_condition TEXT NOT NULL
);
CREATE TABLE breather_seen (
    one INTEGER PRIMARY KEY CHECK (one = 1),
    seen_rowid INTEGER NOT NULL,
    format TEXT NOT NULL
);
"""

# One SQL script per schema version, in order. Never edit a released step: add one.
MIGRATIONS: list[str] = [V1, V2, V3, V4, V5, V6, V7, V8, V9]
SCHEMA_VERSION = len(MIGRATIONS)

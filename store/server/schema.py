"""The server's PostgreSQL schema and its forward steps (`sumpbook server init URL`).

Every plant's rows live in the same tables keyed by (plant, tag) and (plant, id), so two
plants' tags never meet. The server refuses what the book file refuses: the same value ranges
(store/base/validate.py's RANGES) as CHECKs, the same tags, stamps and kinds, append-only
entries and register changes (triggers, and grants: the laptop role may only read and insert
them). A register record (a filter's settings, ...) may be replaced, as in a book, but only by
a newer change of it (`changed_utc`, its book's newest register change, then `changes`, how
many it has had: a trigger refuses anything else, and every delete).
The version is kept in `sumpbook_meta`; each script moves it from N-1 to N and a released
script is never edited.
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

LAPTOP_ROLE = "sumpbook_laptop"  # a group role: grant it to each laptop's login
_CONTROLS_ONE_LINE = r"[\x01-\x1f\x7f-\u009f]"
_CONTROLS = r"[\x01-\x08\x0b-\x1f\x7f-\u009f]"
_TAG_RE = r"^[A-Z0-9][A-Z0-9._/-]{0,15}$"
_STAMP_RE = r"^[0-9]{4}-[0-9]{2}-[0-9]{2}T[0-9]{2}:[0-9]{2}:[0-9]{2}(\.[0-9]{6})?Z$"


def _in(values: tuple[str, ...]) -> str:
    return "(" + ", ".join(f"'{v}'" for v in values) + ")"


def _tag(c: str, null: bool = True) -> str:
    check = f"{c} ~ '{_TAG_RE}'"
    return f"CHECK ({c} IS NULL OR {check})" if null else f"CHECK ({check})"


def _text(c: str, limit: int, lines: bool = False) -> str:
    controls = _CONTROLS if lines else _CONTROLS_ONE_LINE
    return f"CHECK ({c} IS NULL OR (length({c}) <= {limit} AND {c} !~ E'{controls}'))"


def _range(c: str) -> str:
    """The range of validate.RANGES; NaN (above every number in PostgreSQL) and the
    infinities fail it as they fail the book's."""
    r = RANGES[c]
    low = f"{c} > {r.low!r}" if r.open_low else f"{c} >= {r.low!r}"
    return f"CHECK ({c} IS NULL OR ({low} AND {c} <= {r.high!r}))"


def _stamp(c: str) -> str:
    # the same text as the book's; a real date from 1970 on (the cast fails on 2026-02-30)
    return f"CHECK ({c} ~ '{_STAMP_RE}' AND {c} >= '1970')"


def _bool(c: str) -> str:
    return f"CHECK ({c} IN (0, 1))"


PLANT = f"plant text NOT NULL REFERENCES plants(plant) {_tag('plant', False)}"

# table -> its columns as the book names them (the order of a COPY), and the column text
REGISTER_COLUMNS: dict[str, list[tuple[str, str]]] = {
    "technicians": [
        ("tag", f"text NOT NULL {_tag('tag', False)}"),
        ("name", f"text NOT NULL DEFAULT '' {_text('name', 80)}"),
        ("active", f"smallint NOT NULL DEFAULT 1 {_bool('active')}"),
    ],
    "fluids": [
        ("tag", f"text NOT NULL {_tag('tag', False)}"),
        ("name", f"text NOT NULL DEFAULT '' {_text('name', 80)}"),
        ("iso_vg", f"integer {_range('iso_vg')}"),
        ("nu40_cst", f"double precision {_range('nu40_cst')}"),
        ("nu100_cst", f"double precision {_range('nu100_cst')}"),
        ("vi", f"double precision {_range('vi')}"),
        ("density_kg_l", f"double precision {_range('density_kg_l')}"),
    ],
    "units": [
        ("tag", f"text NOT NULL {_tag('tag', False)}"),
        ("name", f"text NOT NULL DEFAULT '' {_text('name', 80)}"),
        ("area", f"text NOT NULL DEFAULT '' {_text('area', 80)}"),
        ("reservoir_l", f"double precision {_range('reservoir_l')}"),
        ("fluid", f"text {_tag('fluid')}"),
        ("normal_temp_c", f"double precision NOT NULL DEFAULT 50 {_range('normal_temp_c')}"),
        ("max_temp_c", f"double precision NOT NULL DEFAULT 60 {_range('max_temp_c')}"),
        ("coldest_start_c", f"double precision NOT NULL DEFAULT 15 {_range('coldest_start_c')}"),
        ("hour_meter", f"smallint NOT NULL DEFAULT 0 {_bool('hour_meter')}"),
        ("target_code", f"text {_text('target_code', 20)}"),
    ],
    "filters": [
        ("tag", f"text NOT NULL {_tag('tag', False)}"),
        ("unit", f"text NOT NULL {_tag('unit', False)}"),
        ("kind", f"text NOT NULL CHECK (kind IN {_in(FILTER_KINDS)})"),
        ("element", f"text NOT NULL DEFAULT '' {_text('element', 60)}"),
        ("rating_um", f"double precision {_range('rating_um')}"),
        (
            "rating_basis",
            "text NOT NULL DEFAULT 'absolute' CHECK (rating_basis IN ('absolute', 'nominal'))",
        ),
        ("beta_ratio", f"double precision {_range('beta_ratio')}"),
        ("bypass_bar", f"double precision {_range('bypass_bar')}"),
        ("limit_bar", f"double precision {_range('limit_bar')}"),
        ("clean_bar", f"double precision {_range('clean_bar')}"),
        ("rated_flow_lpm", f"double precision {_range('rated_flow_lpm')}"),
        ("normal_flow_lpm", f"double precision {_range('normal_flow_lpm')}"),
        ("gauge", f"smallint NOT NULL DEFAULT 1 {_bool('gauge')}"),
        (
            "reading_interval_h",
            f"double precision NOT NULL DEFAULT 168 {_range('reading_interval_h')}",
        ),
    ],
    "breathers": [
        ("tag", f"text NOT NULL {_tag('tag', False)}"),
        ("unit", f"text NOT NULL {_tag('unit', False)}"),
        ("kind", "text NOT NULL DEFAULT 'desiccant' CHECK (kind IN ('desiccant', 'plain'))"),
        ("rating_um", f"double precision {_range('rating_um')}"),
        ("swap_interval_d", f"double precision NOT NULL DEFAULT 90 {_range('swap_interval_d')}"),
    ],
}
REGISTER_EXTRA = {
    "fluids": ["CHECK (nu40_cst IS NULL OR nu100_cst IS NULL OR nu100_cst < nu40_cst)"],
    "units": [
        "CHECK (coldest_start_c <= normal_temp_c AND normal_temp_c <= max_temp_c)",
        "FOREIGN KEY (plant, fluid) REFERENCES fluids(plant, tag)",
    ],
    "filters": [
        "CHECK (limit_bar IS NULL OR bypass_bar IS NULL OR limit_bar < bypass_bar)",
        "CHECK (clean_bar IS NULL OR limit_bar IS NULL OR clean_bar < limit_bar)",
        "CHECK (clean_bar IS NULL OR bypass_bar IS NULL OR clean_bar < bypass_bar)",
        "FOREIGN KEY (plant, unit) REFERENCES units(plant, tag)",
    ],
    "breathers": ["FOREIGN KEY (plant, unit) REFERENCES units(plant, tag)"],
}
REGISTER_TABLES = tuple(REGISTER_COLUMNS)  # in the order foreign keys need them

ENTRY_COLUMNS: list[tuple[str, str]] = [
    ("id", "uuid NOT NULL"),
    ("at_utc", f"text NOT NULL {_stamp('at_utc')}"),
    ("logged_utc", f"text NOT NULL {_stamp('logged_utc')}"),
    ("kind", f"text NOT NULL CHECK (kind IN {_in(ENTRY_KINDS)})"),
    ("by", f"text NOT NULL {_tag('by', False)}"),
    ("unit", f"text {_tag('unit')}"),
    ("filter", f"text {_tag('filter')}"),
    ("breather", f"text {_tag('breather')}"),
    ("dp_bar", f"double precision {_range('dp_bar')}"),
    ("indicator", f"text CHECK (indicator IS NULL OR indicator IN {_in(INDICATOR_STATES)})"),
    ("temp_c", f"double precision {_range('temp_c')}"),
    ("flow_lpm", f"double precision {_range('flow_lpm')}"),
    ("hours", f"double precision {_range('hours')}"),
    ("reason", f"text {_text('reason', TEXT_LIMITS['reason'])}"),
    ("condition", f"text {_text('condition', TEXT_LIMITS['condition'])}"),
    ("batch", f"text {_text('batch', TEXT_LIMITS['batch'])}"),
    ("volume_l", f"double precision {_range('volume_l')}"),
    ("fluid", f"text {_tag('fluid')}"),
    ("filtered_um", f"double precision {_range('filtered_um')}"),
    ("c4_per_ml", f"double precision {_range('c4_per_ml')}"),
    ("c6_per_ml", f"double precision {_range('c6_per_ml')}"),
    ("c14_per_ml", f"double precision {_range('c14_per_ml')}"),
    ("code", f"text {_text('code', TEXT_LIMITS['code'])}"),
    ("water_ppm", f"double precision {_range('water_ppm')}"),
    ("voids", "uuid"),
    ("note", f"text NOT NULL DEFAULT '' {_text('note', TEXT_LIMITS['note'], lines=True)}"),
]
ENTRY_NAMES = [name for name, _ in ENTRY_COLUMNS]
LOG_COLUMNS: list[tuple[str, str]] = [  # validate.register_log_problem's limits
    ("id", "uuid NOT NULL"),
    ("at_utc", f"text NOT NULL {_stamp('at_utc')}"),
    ("by", f"text NOT NULL DEFAULT '' {_text('by', 40)}"),
    ("tbl", f"text NOT NULL {_text('tbl', 40)}"),
    ("tag", f"text NOT NULL {_text('tag', 40)}"),
    ("field", f"text NOT NULL {_text('field', 40)}"),
    ("old", f"text {_text('old', 400)}"),
    ("new", f"text {_text('new', 400)}"),
]
LOG_NAMES = [name for name, _ in LOG_COLUMNS]


def _quoted(name: str) -> str:
    return f'"{name}"'


def _v1() -> str:
    parts = [
        f"""CREATE TABLE plants (
    plant text PRIMARY KEY CHECK (plant ~ '{_TAG_RE}'),
    name text NOT NULL DEFAULT '' {_text("name", 80)},
    joined timestamptz NOT NULL DEFAULT now()
);"""
    ]
    for table, columns in REGISTER_COLUMNS.items():
        body = ",\n    ".join(
            [PLANT]
            + [f"{_quoted(c)} {t}" for c, t in columns]
            + [
                f"changed_utc text NOT NULL DEFAULT '1970-01-01T00:00:00Z' {_stamp('changed_utc')}",
                "changes integer NOT NULL DEFAULT 0 CHECK (changes >= 0)",
            ]
        )
        extra = "".join(f",\n    {x}" for x in REGISTER_EXTRA.get(table, []))
        parts.append(
            f"CREATE TABLE {table} (\n    {body},\n    PRIMARY KEY (plant, tag){extra}\n);"
        )
    body = ",\n    ".join(
        [PLANT, "seq bigint GENERATED ALWAYS AS IDENTITY"]
        + [f"{_quoted(c)} {t}" for c, t in ENTRY_COLUMNS]
    )
    parts.append(
        f"""CREATE TABLE entries (
    {body},
    PRIMARY KEY (plant, id),
    UNIQUE (plant, voids),
    FOREIGN KEY (plant, "by") REFERENCES technicians(plant, tag),
    FOREIGN KEY (plant, unit) REFERENCES units(plant, tag),
    FOREIGN KEY (plant, filter) REFERENCES filters(plant, tag),
    FOREIGN KEY (plant, breather) REFERENCES breathers(plant, tag),
    FOREIGN KEY (plant, fluid) REFERENCES fluids(plant, tag),
    FOREIGN KEY (plant, voids) REFERENCES entries(plant, id),
    CHECK (kind NOT IN ('reading', 'change') OR filter IS NOT NULL),
    CHECK (kind <> 'reading' OR dp_bar IS NOT NULL OR indicator IS NOT NULL),
    CHECK (kind <> 'change' OR reason IN {_in(CHANGE_REASONS)}),
    CHECK (kind <> 'breather' OR (breather IS NOT NULL AND reason IN {_in(BREATHER_REASONS)})),
    CHECK (kind <> 'topup' OR (unit IS NOT NULL AND volume_l IS NOT NULL)),
    CHECK (kind <> 'sample' OR unit IS NOT NULL),
    CHECK (kind <> 'void' OR (voids IS NOT NULL AND note <> ''))
);"""
    )
    body = ",\n    ".join(
        [PLANT, "seq bigint GENERATED ALWAYS AS IDENTITY"]
        + [f"{_quoted(c)} {t}" for c, t in LOG_COLUMNS]
    )
    parts.append(f"CREATE TABLE register_log (\n    {body},\n    PRIMARY KEY (plant, id)\n);")
    parts.append(
        """-- A pull walks one plant's rows in the order the server took them.
CREATE UNIQUE INDEX entries_by_plant_seq ON entries (plant, seq);
CREATE UNIQUE INDEX register_log_by_plant_seq ON register_log (plant, seq);
-- The fleet views: a position's newest reading; its element changes (covering).
CREATE INDEX entries_readings ON entries (plant, filter, at_utc DESC)
    WHERE kind = 'reading';
CREATE INDEX entries_changes ON entries (plant, filter, at_utc) INCLUDE (reason, id)
    WHERE kind = 'change';
CREATE INDEX entries_breather_swaps ON entries (plant, breather, at_utc DESC)
    WHERE kind = 'breather';
CREATE FUNCTION sumpbook_append_only() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    RAISE EXCEPTION '% is append-only on the server: void an entry instead', TG_TABLE_NAME
        USING ERRCODE = 'insufficient_privilege';
END $$;
CREATE TRIGGER entries_append_only BEFORE UPDATE OR DELETE ON entries
    FOR EACH ROW EXECUTE FUNCTION sumpbook_append_only();
CREATE TRIGGER entries_no_truncate BEFORE TRUNCATE ON entries
    FOR EACH STATEMENT EXECUTE FUNCTION sumpbook_append_only();
CREATE TRIGGER register_log_append_only BEFORE UPDATE OR DELETE ON register_log
    FOR EACH ROW EXECUTE FUNCTION sumpbook_append_only();
CREATE TRIGGER register_log_no_truncate BEFORE TRUNCATE ON register_log
    FOR EACH STATEMENT EXECUTE FUNCTION sumpbook_append_only();
-- A register record is replaced only by a newer change of the same plant's same tag (its
-- book's newest register change); never deleted.
CREATE FUNCTION sumpbook_register_newer() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    IF TG_OP = 'DELETE' OR NEW.plant <> OLD.plant OR NEW.tag <> OLD.tag
       OR (NEW.changed_utc, NEW.changes) <= (OLD.changed_utc, OLD.changes) THEN
        RAISE EXCEPTION 'a % record is replaced only by a newer change of it', TG_TABLE_NAME
            USING ERRCODE = 'insufficient_privilege';
    END IF;
    RETURN NEW;
END $$;"""
    )
    for table in REGISTER_TABLES:
        parts.append(
            f"""CREATE TRIGGER {table}_newer_only BEFORE UPDATE OR DELETE ON {table}
    FOR EACH ROW EXECUTE FUNCTION sumpbook_register_newer();
CREATE TRIGGER {table}_no_truncate BEFORE TRUNCATE ON {table}
    FOR EACH STATEMENT EXECUTE FUNCTION sumpbook_append_only();"""
        )
    tables = ["plants", *REGISTER_TABLES, "entries", "register_log"]
    parts.append(
        f"""DO $$ BEGIN
    IF NOT EXISTS (SELECT 1 FROM pg_roles WHERE rolname = '{LAPTOP_ROLE}') THEN
        CREATE ROLE {LAPTOP_ROLE} NOLOGIN;
    END IF;
END $$;
REVOKE ALL ON {", ".join(tables)} FROM PUBLIC;
GRANT SELECT, INSERT ON {", ".join(tables)} TO {LAPTOP_ROLE};
GRANT UPDATE ON {", ".join(REGISTER_TABLES)} TO {LAPTOP_ROLE};
GRANT SELECT ON sumpbook_meta TO {LAPTOP_ROLE};"""
    )
    return "\n".join(parts)


# One script per server schema version, in order. Never edit a released step: add one.
MIGRATIONS: list[str] = [_v1()]
SERVER_VERSION = len(MIGRATIONS)

META = """CREATE TABLE IF NOT EXISTS sumpbook_meta (
    key text PRIMARY KEY,
    value text NOT NULL
);
INSERT INTO sumpbook_meta (key, value) VALUES ('version', '0'), ('server_id', gen_random_uuid()::text)
    ON CONFLICT (key) DO NOTHING;"""

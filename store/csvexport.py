"""The shift log of a span of time as CSV, fast enough for a year of a plant-sized book.

`write_span` writes byte for byte what `csvio.write_csv` writes for the entries
`journal.read(book, since=start, until=end)` returns (tests/test_csvexport.py holds it to
that), without an entry object, a dict or a `csv` call per row: one query of plain tuples
in time order (the columns a reading needs; see below for the rest); each cell made ready for
the file once per distinct value (neutralised as `csvio.neutralise` does, quoted as
`csv.writer` does); the shift and the UTC offset kept while they hold; each filter's reference
condition worked out once. Anything unusual (a stamp not in the book's own form, an hour
holding a change of offset, a reading the normalising maths would refuse) is done the slow,
plain way for that row.
"""

from __future__ import annotations

import csv
import io
import multiprocessing
import os
import re
import shutil
import sqlite3
import sys
import tempfile
import threading
from collections.abc import Callable, Iterable, Iterator, Sequence
from concurrent.futures import ProcessPoolExecutor
from contextlib import contextmanager
from dataclasses import dataclass, fields
from datetime import UTC, datetime, timedelta, tzinfo
from itertools import islice
from pathlib import Path
from typing import IO, Any

from .book import Book
from .conditions import FilterContext, contexts, normalise
from .csvio import FORMULA_START, NUMBER_COLUMNS, Prefs, _num
from .entries import KINDS, TARGET_COLUMN, Reading
from .errors import BookError
from .journal import parse_stamp
from .timeutil import format_utc, iso_local, shift_at
from .units import from_bar, from_c, from_l, pressure_key, temperature_key, to_bar, volume_key

# Reading a column costs even when it is NULL, and the later in the table row the more, so
# the span query reads only what a reading needs (readings are nearly every entry); the columns
# only other kinds use are read for those entries one by one, and which entries are voided is
# read once (a handful in a book, against an index probe per entry for a join). All of it is
# read in one read transaction: the book as it stood at one moment, as one query would see it.
_READING_COLUMNS = (
    "id",
    "at_utc",
    "kind",
    "by",
    "unit",
    "note",
    "filter",
    "dp_bar",
    "indicator",
    "temp_c",
    "flow_lpm",
    "hours",
)
_OTHER_COLUMNS = (
    "breather",
    "reason",
    "condition",
    "batch",
    "volume_l",
    "fluid",
    "filtered_um",
    "c4_per_ml",
    "c6_per_ml",
    "c14_per_ml",
    "code",
    "water_ppm",
    "voids",
)
# column -> its place in a row: the span query's row, then the other columns
_COL = {name: i for i, name in enumerate((*_READING_COLUMNS, *_OTHER_COLUMNS))}
# Range and order both from the index entries_by_time (no sort).
_SELECT = "SELECT " + ", ".join(f"e.{c}" for c in _READING_COLUMNS) + " FROM entries e"
_SELECT_OTHER = "SELECT " + ", ".join(_OTHER_COLUMNS) + " FROM entries WHERE id = ?"
# From the partial index one_void_per_entry.
_SELECT_VOIDS = "SELECT voids, id FROM entries WHERE voids IS NOT NULL"
_ID, _AT, _KIND, _FILTER, _DP, _TEMP, _FLOW = (
    _COL[c] for c in ("id", "at_utc", "kind", "filter", "dp_bar", "temp_c", "flow_lpm")
)
_is_stamp = re.compile(r"[0-9]{4}-[0-9]{2}-[0-9]{2}T[0-9]{2}:[0-9]{2}:[0-9]{2}Z").fullmatch
_TEXT_FIELDS = ("indicator", "reason", "condition", "batch", "code", "voids", "fluid")
_UNSEEN = object()
_MEMO_SIZE = 50_000  # distinct values remembered per column
_INF = float("inf")
_BATCH = 4096  # lines written to the file at a time


def _span_sql(
    start: str | None, end: str | None, upto: int | None = None, select: str = _SELECT
) -> tuple[str, list[Any]]:
    """The SQL and parameters for every entry in [start, end) (stored stamps; None leaves
    that end open), ordered as `journal.read` orders them (time, then the order they were
    written); `upto`: entries written up to that rowid only (what the other process of the
    same export saw when it began)."""
    where: list[str] = []
    params: list[Any] = []
    for bound, test in ((start, "e.at_utc >= ?"), (end, "e.at_utc < ?"), (upto, "+e.rowid <= ?")):
        if bound is not None:
            where.append(test)
            params.append(bound)
    sql = select + (" WHERE " + " AND ".join(where) if where else "")
    if select is _SELECT:
        sql += " ORDER BY e.at_utc, e.rowid"
    return sql, params


def canonical_stamp(text: str) -> str:
    """A stored UTC stamp in the book's own 'YYYY-MM-DDTHH:MM:SSZ' form, in which text
    compares as the times do (any other form `journal` reads is rewritten in it)."""
    return text if _is_stamp(text) else format_utc(parse_stamp(text))


def csv_line(cells: Sequence[str]) -> str:
    """One row as `csv.writer` (excel dialect, CR LF) writes it."""
    buffer = io.StringIO()
    csv.writer(buffer, lineterminator="\r\n").writerow(cells)
    return buffer.getvalue()


def csv_field(text: str) -> str:
    """A text cell ready for the line: `csvio.neutralise`, then quoted when it holds a comma,
    a quote or a line break (what `csv.writer` quotes; it then does the quoting itself)."""
    if text.startswith(FORMULA_START):
        text = "'" + text
    if '"' in text or "," in text or "\n" in text or "\r" in text:
        return csv_line([text, ""])[:-3]  # a second, empty cell: a lone "" is written quoted
    return text


def text_cell(value: Any) -> str:
    """An optional text column's cell (csvio writes str() of the value)."""
    return csv_field(value if type(value) is str else str(value))


def remember(memo: dict[Any, Any], key: Any, value: Any) -> Any:
    """memo[key] = value, the memo emptied first when it is full; returns value."""
    if len(memo) >= _MEMO_SIZE:
        memo.clear()
    memo[key] = value
    return value


class LocalClock:
    """UTC stamps as `iso_local` writes them, with the offset worked out once per UTC hour.

    An hour whose two ends have different offsets (a zone that changes its clocks at a half
    hour of UTC) is written stamp by stamp through `iso_local`. The text needs no quoting or
    neutralising: it starts with the year's digits and holds only digits, '-', ':', 'T', '+'.
    """

    def __init__(self, local: tzinfo) -> None:
        self.local = local
        self.hour = ""
        self.prefix: str | None = None  # the local 'YYYY-MM-DDTHH' when the offset is whole hours
        self.delta: timedelta | None = None  # local wall time minus UTC, when one holds all hour
        self.suffix = ""  # the offset as isoformat writes it

    def text(self, stamp: str) -> str:
        if stamp[:13] != self.hour:
            self._learn(stamp[:13])
        if self.prefix is not None:
            return self.prefix + stamp[13:19] + self.suffix
        if self.delta is not None:
            return (datetime.fromisoformat(stamp[:19]) + self.delta).isoformat() + self.suffix
        return iso_local(parse_stamp(stamp), self.local)

    def _learn(self, hour: str) -> None:
        self.hour = hour
        first = datetime.fromisoformat(hour + ":00:00").replace(tzinfo=UTC)
        begins = first.astimezone(self.local)
        ends = (first + timedelta(seconds=3599)).astimezone(self.local)
        self.prefix = self.delta = None
        if begins.utcoffset() != ends.utcoffset():
            return
        self.delta = begins.replace(tzinfo=None) - first.replace(tzinfo=None)
        self.suffix = begins.isoformat(timespec="seconds")[19:]
        if self.delta % timedelta(hours=1) == timedelta(0):
            self.prefix = begins.isoformat()[:13]


class ShiftNames:
    """The shift cell for each stamp. Entries come in time order, so a shift is kept while it
    holds: the rule of `csvio.export_rows`, on UTC text instead of datetimes."""

    def __init__(self, pattern: Sequence[tuple[str, str]], local: tzinfo) -> None:
        self.pattern, self.local = pattern, local
        self.start = self.end = ""
        self.cell = ""

    def name(self, stamp: str) -> str:
        if not self.start <= stamp < self.end:
            span = shift_at(parse_stamp(stamp), self.pattern, self.local)
            self.start, self.end = format_utc(span.start), format_utc(span.end)
            self.cell = csv_field(span.name)
        return self.cell


class FilterReference:
    """One filter position's reference ΔP cells: the sums of `conditions.normalise` (ΔP times
    ν_ref/ν, over Q/Q_ref when both flows are known), with the position's constants taken
    once and ν_ref/ν remembered per temperature."""

    def __init__(self, tag: str, ctx: FilterContext, pressure: str) -> None:
        self.tag, self.ctx, self.pressure = tag, ctx, pressure
        self.bar_per_unit = to_bar(1.0, pressure)  # the number from_bar divides by
        self.ratios: dict[float, float | str | None] = {}
        self.memo: dict[tuple[float, float | None, float | None], tuple[str, str]] = {}
        self.problem = ""
        if ctx.curve is None or ctx.reference is None:
            self.problem = csv_field(f"not normalised: {ctx.problem}")
            return
        self.normal_temp_c = ctx.unit.normal_temp_c
        self.nu_ref_cst = ctx.reference.nu_ref_cst
        self.flow_ref_lpm = ctx.reference.flow_ref_lpm
        self.labels = {
            (temp, flow): csv_field(reference_text(ctx, temp, flow))
            for temp in (False, True)
            for flow in (False, True)
        }

    def cells(self, dp_bar: float, temp_c: float | None, flow_lpm: float | None) -> tuple[str, str]:
        """(dp_ref cell, reference cell) for a reading with a ΔP value, remembered per values
        (a position's readings repeat a few hundred ΔP and temperature pairs)."""
        key = (dp_bar, temp_c, flow_lpm)
        found = self.memo.get(key)
        if found is None:
            found = remember(self.memo, key, self._cells(dp_bar, temp_c, flow_lpm))
        return found

    def _cells(
        self, dp_bar: float, temp_c: float | None, flow_lpm: float | None
    ) -> tuple[str, str]:
        if self.problem:
            return "", self.problem
        ratio = self._nu_ratio(self.normal_temp_c if temp_c is None else temp_c)
        if isinstance(ratio, str):
            return "", ratio
        if ratio is None or not 0.0 <= dp_bar < _INF:
            return self._slow(dp_bar, temp_c, flow_lpm)
        flow_ratio = 1.0
        if flow_lpm is not None:
            if not 0.0 < flow_lpm < _INF:
                return self._slow(dp_bar, temp_c, flow_lpm)
            if self.flow_ref_lpm is not None:
                flow_ratio = flow_lpm / self.flow_ref_lpm
                if not 1e-100 < flow_ratio < 1e100:  # flow_ratio**2 in normalise_dp_bar
                    return self._slow(dp_bar, temp_c, flow_lpm)
        # normalise_dp_bar with no housing part (the element's ΔP is the whole ΔP), in its order
        dp_ref_bar = dp_bar * ratio / flow_ratio
        flow_assumed = flow_lpm is None or self.flow_ref_lpm is None
        return _num(dp_ref_bar / self.bar_per_unit), self.labels[temp_c is None, flow_assumed]

    def _nu_ratio(self, temp_c: float) -> float | str | None:
        """ν_ref/ν at temp_c; the reference cell when the curve has no ν there; None when ν is
        not a positive number (normalise_dp_bar words that)."""
        if temp_c in self.ratios:
            return self.ratios[temp_c]
        found: float | str | None = None
        try:
            nu_cst = self.ctx.curve.nu_cst(temp_c)  # type: ignore[union-attr]
        except BookError as exc:
            found = csv_field(f"not normalised: {exc}")
        else:
            if 0.0 < nu_cst < _INF:
                found = self.nu_ref_cst / nu_cst
        return remember(self.ratios, temp_c, found)

    def _slow(self, dp_bar: float, temp_c: float | None, flow_lpm: float | None) -> tuple[str, str]:
        """Through `conditions.normalise` itself, for the values its checks refuse."""
        reading = Reading(filter=self.tag, dp_bar=dp_bar, temp_c=temp_c, flow_lpm=flow_lpm)
        n = normalise(self.ctx, reading)
        if n.dp_ref_bar is None:
            return "", csv_field(f"not normalised: {n.problem}")
        cell = _num(from_bar(n.dp_ref_bar, self.pressure))
        return cell, self.labels[n.temp_assumed, n.flow_assumed]


def reference_text(ctx: FilterContext, temp_assumed: bool, flow_assumed: bool) -> str:
    """The reference cell as `csvio.export_rows` words it."""
    assumed = [w for w, a in (("temp", temp_assumed), ("flow", flow_assumed)) if a]
    return ctx.reference.label + (  # type: ignore[union-attr]
        f"; {' and '.join(assumed)} assumed normal" if assumed else ""
    )


@dataclass(frozen=True)
class KindPlan:
    """How a row of one entry kind fills the CSV cells."""

    blank: list[str]  # the cells before the row's values: the kind filled in, the rest empty
    id: int  # the id's cell
    # (cell, column, memo, the cell's text from the column's value)
    cells: tuple[tuple[int, int, dict[Any, str], Callable[[Any], str]], ...]
    reading: bool  # a reading: its ΔP gets a reference value
    other: bool  # needs columns the span query does not read

    def fill(self, row: Sequence[Any]) -> list[str]:
        """The row's cells, but for those worked out beyond its own columns (time, shift,
        reference, voided_by)."""
        cells = self.blank.copy()
        cells[self.id] = csv_field(row[_ID])  # never repeats: not remembered
        for cell, column, memo, make in self.cells:
            value = row[column]
            if value is not None:  # most are, in a reading: NULL stays the empty cell
                text = memo.get(value)
                cells[cell] = remember(memo, value, make(value)) if text is None else text
        return cells


def kind_plans(prefs: Prefs) -> dict[str, KindPlan]:
    """A plan per entry kind, from its dataclass fields: the cells `csvio.export_rows` fills.
    Columns with few distinct values (tags, words, gauge steps) remember their cells; a
    column has one memo however many kinds use it."""
    p, t, v = (
        pressure_key(prefs.pressure),
        temperature_key(prefs.temperature),
        volume_key(prefs.volume),
    )
    values: dict[str, tuple[str, Callable[[Any], str]]] = {  # field -> (cell, its text)
        "dp_bar": (f"dp_{p}", lambda x: _num(from_bar(x, p))),
        "temp_c": (f"temp_{t}", lambda x: _num(from_c(x, t), 2)),
        "volume_l": (f"volume_{v}", lambda x: _num(from_l(x, v), 3)),
    }
    values |= {name: (name, _num) for name in NUMBER_COLUMNS}
    values |= {name: (name, text_cell) for name in _TEXT_FIELDS}
    memos: dict[str, dict[Any, str]] = {name: {} for name in _COL}
    index = {name: i for i, name in enumerate(prefs.columns())}
    plans = {}
    for kind, cls in KINDS.items():
        # csvio neutralises these as they are, not through str(): a value that is not text
        # fails here as it fails there
        cells = [(name, name, csv_field) for name in ("by", "unit", "note")]
        target = TARGET_COLUMN.get(cls.target_table or "")
        if target is not None:
            cells.append(("target", target, csv_field))
        names = {f.name for f in fields(cls)}
        cells += [(cell, name, make) for name, (cell, make) in values.items() if name in names]
        blank = [""] * len(index)
        blank[index["kind"]] = csv_field(kind)
        plan = tuple((index[cell], _COL[name], memos[name], make) for cell, name, make in cells)
        other = any(column >= len(_READING_COLUMNS) for _, column, _, _ in plan)
        plans[kind] = KindPlan(blank, index["id"], plan, issubclass(cls, Reading), other)
    return plans


class SpanLines:
    """Rows of the span query -> CSV lines."""

    def __init__(
        self,
        book: Book,
        prefs: Prefs,
        local: tzinfo,
        pattern: list[tuple[str, str]],
        upto: int | None = None,
    ) -> None:
        columns = prefs.columns()
        self.header = csv_line(columns)
        self.plans = kind_plans(prefs)
        self.clock, self.shifts = LocalClock(local), ShiftNames(pattern, local)
        self.pressure = pressure_key(prefs.pressure)
        self.contexts = contexts(book)
        self.conn = book.conn
        voids = _SELECT_VOIDS if upto is None else f"{_SELECT_VOIDS} AND rowid <= {int(upto)}"
        self.voided_by = dict(book.conn.execute(voids).fetchall())
        self.references: dict[str, FilterReference | None] = {}
        self.time, self.shift = columns.index("time"), columns.index("shift")
        self.void = columns.index("voided_by")
        self.dp_ref = columns.index(f"dp_ref_{self.pressure}")
        self.reference = columns.index("reference")

    def lines(self, rows: Iterable[Sequence[Any]]) -> Iterator[str]:
        """Each row's CSV line, without its CR LF. One loop with its lookups bound once: it
        runs for every entry of the span."""
        plans, voided_by, references = self.plans, self.voided_by, self.references
        clock, shifts, conn = self.clock, self.shifts, self.conn
        time_cell, shift_cell, void_cell = self.time, self.shift, self.void
        dp_ref_cell, reference_cell = self.dp_ref, self.reference
        for row in rows:
            stamp = row[_AT]
            if not _is_stamp(stamp):
                stamp = canonical_stamp(stamp)
            plan = plans[row[_KIND]]
            if plan.other:
                row = (*row, *conn.execute(_SELECT_OTHER, [row[_ID]]).fetchone())
            cells = plan.fill(row)
            if row[_ID] in voided_by:
                cells[void_cell] = csv_field(voided_by[row[_ID]])
            if stamp[:13] == clock.hour and clock.prefix is not None:  # clock.text, inlined
                cells[time_cell] = clock.prefix + stamp[13:19] + clock.suffix
            else:
                cells[time_cell] = clock.text(stamp)
            cells[shift_cell] = (
                shifts.cell if shifts.start <= stamp < shifts.end else shifts.name(stamp)
            )
            if plan.reading and row[_DP] is not None:
                reference = references.get(row[_FILTER], _UNSEEN)
                if reference is _UNSEEN:
                    reference = self._reference(row[_FILTER])
                if reference is not None:
                    cells[dp_ref_cell], cells[reference_cell] = reference.cells(
                        row[_DP], row[_TEMP], row[_FLOW]
                    )
            yield ",".join(cells)

    def _reference(self, tag: str) -> FilterReference | None:
        """The filter's reference; None when the register has no such filter (as csvio)."""
        ctx = self.contexts.get(tag)
        self.references[tag] = None if ctx is None else FilterReference(tag, ctx, self.pressure)
        return self.references[tag]


# A span of at least this many entries is written by two processes (on a machine with two
# cores or more): the first half here, the second half in a child process, joined in order.
# Below it, starting the child (a new interpreter) costs more than it saves.
SECOND_PROCESS_FROM = 150_000
SECOND_SHARE = 0.46  # of the entries: the child opens the book and reads the register first


def write_span(
    out: IO[str],
    book: Book,
    start: datetime | None,
    end: datetime | None,
    prefs: Prefs,
    local: tzinfo,
    pattern: list[tuple[str, str]],
    processes: int | None = None,
) -> int:
    """Write the entries logged in [start, end) as the shift-log CSV; returns how many.

    The same text as `csvio.write_csv(out, book, journal.read(book, since=start,
    until=end), prefs, local, pattern)`; None leaves that end of the span open.
    `processes`: at most this many (default: 2 where the machine has two cores).
    """
    start_text = None if start is None else format_utc(start)
    end_text = None if end is None else format_utc(end)
    if processes is None:
        processes = min(2, os.cpu_count() or 1)
    if not _can_fork():
        processes = 1
    with read_snapshot(book.conn):
        span_lines = SpanLines(book, prefs, local, pattern)
        out.write(span_lines.header)
        cut = _halfway(book, start_text, end_text) if processes > 1 else None
        if cut is None:
            sql, params = _span_sql(start_text, end_text)
            return _write_lines(out, span_lines.lines(book.conn.execute(sql, params)))
        upto = book.conn.execute("SELECT max(rowid) FROM entries").fetchone()[0]
        context = multiprocessing.get_context("fork")  # the child needs no imports again
        with tempfile.TemporaryDirectory(prefix="sumpbook-export-") as folder:
            part = Path(folder) / "second-half.csv"
            with ProcessPoolExecutor(1, mp_context=context) as pool:
                later = pool.submit(
                    _write_part, str(book.path), cut, end_text, upto, prefs, local, pattern,
                    str(part),
                )  # fmt: skip
                sql, params = _span_sql(start_text, cut)
                count = _write_lines(out, span_lines.lines(book.conn.execute(sql, params)))
                count += later.result()
            with part.open(encoding="utf-8", newline="") as second:
                shutil.copyfileobj(second, out, 1 << 20)
    return count


def _can_fork() -> bool:
    """A second process by fork: only on Linux (macOS has fork, but its system libraries are
    not safe across one; Windows has none), and only from a process with no other thread (a
    fork copies one thread and whatever locks the others held: the app's exports, which run
    in a worker thread, stay in one process)."""
    return sys.platform.startswith("linux") and threading.active_count() == 1


def _write_lines(out: IO[str], lines: Iterator[str]) -> int:
    count = 0
    while batch := list(islice(lines, _BATCH)):
        out.write("\r\n".join(batch) + "\r\n")
        count += len(batch)
    return count


def _halfway(book: Book, start: str | None, end: str | None) -> str | None:
    """The stored stamp that splits the span in two, SECOND_SHARE of its entries in the
    second part (which begins with it), or None when the span is too small to share out."""
    sql, params = _span_sql(start, end, select="SELECT count(*) FROM entries e")
    count = book.conn.execute(sql, params).fetchone()[0]
    if count < SECOND_PROCESS_FROM:
        return None
    sql, params = _span_sql(start, end)
    sql = sql.replace(_SELECT, "SELECT e.at_utc FROM entries e", 1) + " LIMIT 1 OFFSET ?"
    cut = book.conn.execute(sql, [*params, round(count * (1 - SECOND_SHARE))]).fetchone()[0]
    return None if start is not None and cut <= start else cut


def _write_part(
    path: str,
    start: str,
    end: str | None,
    upto: int,
    prefs: Prefs,
    local: tzinfo,
    pattern: list[tuple[str, str]],
    dest: str,
) -> int:
    """In the child process: the lines of [start, end) as they stood at rowid `upto`, without
    the header, into the file `dest`."""
    from .book import open_book

    # Read-only: a forked child must never write. This process keeps its read transaction
    # open until the child is done, so the file cannot be checkpointed past what both read.
    with open_book(path, create=False, readonly=True) as book, read_snapshot(book.conn):
        span_lines = SpanLines(book, prefs, local, pattern, upto)
        sql, params = _span_sql(start, end, upto)
        with open(dest, "w", encoding="utf-8", newline="") as out:
            return _write_lines(out, span_lines.lines(book.conn.execute(sql, params)))


@contextmanager
def read_snapshot(conn: sqlite3.Connection) -> Iterator[None]:
    """Every read inside sees the book as it stood at the first one (a deferred transaction;
    inside the caller's transaction when there is one)."""
    if conn.in_transaction:
        yield
        return
    conn.execute("BEGIN")
    try:
        yield
    finally:
        if conn.in_transaction:
            conn.execute("ROLLBACK")  # nothing was written: ending it is all

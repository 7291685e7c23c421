"""The one shift-log exporter: the CSV of a span of time, fast enough for a year of a
plant-sized book.

The columns, how each value becomes a cell and how import reads it back are the table of
`store/exchange/csvcolumns.py`; this module writes that table's cells without an entry object, a dict
or a `csv` call per row: one query of plain tuples in time order (the columns a reading
needs; see below for the rest); each cell made ready for the file once per distinct value
(quoted as `csv.writer` does); the shift and the UTC offset kept while they hold; each
filter's reference condition worked out once. Anything unusual (a stamp not in the book's own
form, an hour holding a change of offset, a reading the normalising maths would refuse) is
done the slow, plain way for that row. tests/store/test_csvexport.py holds it byte for byte to the
plain entry-by-entry writer kept in tests/kit/csv_oracle.py.

A reading's line (`SpanLines.span`) is put together from a few remembered pieces rather than
cell by cell, and the reference cells are remembered across positions whose reference comes
from the same constants (`FilterReference.signature`), not per position: on the year of a
200-unit plant that cut the reference work from about 212,000 computations to a few hundred.
Lines built by SQLite itself (printf, strftime and the quoting rules in SQL, with a check per
cell for what SQLite would write otherwise than Python) were tried and measured slower
(about 7 µs a row in SQLite alone against about 6 µs a row for this whole path, December
2026): every cell is formatted per row there, where a remembered piece costs one lookup.
SQLite does the span and the order. A stamp's form is tested in Python, once per hour by
`_is_stamp` and for its minutes and seconds by one lookup (`_MINUTE_SECOND`); the GLOB in SQL
that did it before cost more per row than the lookup. The rows come a batch at a time
(`fetchmany`) and leave as one write per batch. An id is its own cell unless it needs quotes
or the formula guard: that is tested for a batch's ids at once (`_plain_ids`), and id by id
only in a batch holding such an id. Making a batch's lines a column at a time instead (memo
lookups through `map`, the hour's runs found by `bisect`) was tried and counted under
cachegrind: as many instructions as this loop, half again the (simulated) cache misses (December
2026). Most of what is left lies below Python: SQLite's calls per column, the interpreter
lock let go per row, the text encoded to UTF-8. The few entries of other kinds take their
other columns from a second query over the same span (`OtherColumns`), not one query each.

After the entries, when asked (`status=True`, what `sumpbook export` and the shift-log
screen do unless told `--entries-only`), come the status rows of the handover
(`status_rows`): as of the end of the span, read through `views.watch(as_of=...)`.

One process: a span once shared with a forked second process measured 0.8x (slower) on a busy
2-core machine, so the fork went.
"""

from __future__ import annotations

import csv
import io
import os
import re
import sqlite3
import stat
from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass, fields
from datetime import UTC, datetime, timedelta, tzinfo
from operator import itemgetter
from pathlib import Path
from typing import IO, Any

from store.base.collector import collector_held
from store.base.errors import BookError
from store.base.prefs import Prefs
from store.base.timeutil import format_utc, iso_local, next_shift, shift_at
from store.base.units import from_bar, pressure_key, temperature_key, to_bar
from store.db.book import Book
from store.db.connection import read_snapshot
from store.db.targets import refuse_input_as_output
from store.exchange.csvcolumns import (
    COLUMNS,
    FORMULA_START,
    STATUS_COLUMNS,
    STATUS_KIND,
    VALUE_COLUMNS,
    header,
    reference_cell,
)
from store.exchange.csvcolumns import number_text as _num
from store.health import urgency
from store.health.conditions import FilterContext, contexts, normalise
from store.health.status_model import FLAG_WORDS, Watch
from store.ledger.entries import KINDS, TARGET_COLUMN, Reading, entry_columns
from store.ledger.journal import ROW_ERRORS, note_unreadable, parse_stamp
from store.views import watch

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
# every other column of `entries` an entry kind has (from the kinds' dataclasses)
_OTHER_COLUMNS = tuple(
    sorted(
        {name for cls in KINDS.values() for name in entry_columns(cls)}
        - {*_READING_COLUMNS, "logged"}
    )
)
# column -> its place in a row: the span query's row, then the other columns
_COL = {name: i for i, name in enumerate((*_READING_COLUMNS, *_OTHER_COLUMNS))}
# Range and order both from the index entries_by_time (no sort).
_SELECT = "SELECT " + ", ".join(f"e.{c}" for c in _READING_COLUMNS) + " FROM entries e"
_NAMES = {i: name for name, i in _COL.items()}
# What a reading's cells are made from in `SpanLines.span` (the pieces' keys, id and time)
_READING_LAYOUT = (
    *("id", "time", "shift", "kind", "target", "unit", "by"),
    *("dp", "indicator", "temp", "dp_ref", "reference", "flow_lpm", "hours"),
)
_READING_PIECES = {
    "filter",
    "unit",
    "by",
    "dp_bar",
    "indicator",
    "temp_c",
    "flow_lpm",
    "hours",
    "note",
}


class _Whole(Exception):
    """A row `SpanLines.span` writes through `SpanLines.cells` whole."""


_SELECT_OTHER = "SELECT " + ", ".join(_OTHER_COLUMNS) + " FROM entries WHERE id = ?"
# ... and for every entry of the span that is not a reading, in the span's order (`OtherColumns`)
_SELECT_OTHERS = (
    "SELECT " + ", ".join(f"e.{c}" for c in ("id", *_OTHER_COLUMNS)) + " FROM entries e"
)
# From the partial index one_void_per_entry.
_SELECT_VOIDS = "SELECT voids, id FROM entries WHERE voids IS NOT NULL"
_ID, _AT, _KIND, _FILTER, _DP, _TEMP, _FLOW = (
    _COL[c] for c in ("id", "at_utc", "kind", "filter", "dp_bar", "temp_c", "flow_lpm")
)
# A text that is its own cell: `csv_field` changes nothing (no formula start, nothing to quote).
_plain_cell = re.compile(
    '[^",\r\n' + re.escape("".join(FORMULA_START)) + '][^",\r\n]*', re.DOTALL
).fullmatch
_FIRST = itemgetter(0)
_FORMULA_SET = frozenset(FORMULA_START)


def _plain_ids(batch: Sequence[Sequence[Any]]) -> bool:
    """Whether every row's id (its first column) is its own cell (`_plain_cell`), found for
    the batch at once: no quote, comma or line break in the ids joined, and no id starting
    as a formula does."""
    try:
        ids = list(map(_FIRST, batch))
        joined = "\n".join(ids)
        starts = set(map(_FIRST, ids))  # IndexError for an empty id
    except (TypeError, IndexError):  # an id that is not text, or empty: row by row
        return False
    return (
        '"' not in joined
        and "," not in joined
        and "\r" not in joined
        and joined.count("\n") == len(ids) - 1
        and starts.isdisjoint(_FORMULA_SET)
    )


_is_stamp = re.compile(r"[0-9]{4}-[0-9]{2}-[0-9]{2}T[0-9]{2}:[0-9]{2}:[0-9]{2}Z").fullmatch
# A stamp's ':MM:SSZ' as `_is_stamp` allows it -> its ':MM:SS' (the minute and second cell text)
_TWO_DIGITS = [f":{n:02}" for n in range(100)]
_MINUTE_SECOND = {m + s + "Z": m + s for m in _TWO_DIGITS for s in _TWO_DIGITS}
_UNSEEN = object()
_MEMO_SIZE = 200_000  # distinct values remembered per memo
_INF = float("inf")
_ZERO = timedelta(0)
_BATCH = 4096  # rows read and lines written to the file at a time
_OTHER_BATCH = 256  # rows `OtherColumns` reads at a time


def _span_sql(
    start: str | None, end: str | None, select: str = _SELECT, where: Sequence[str] = ()
) -> tuple[str, list[Any]]:
    """The SQL and parameters for every entry in [start, end) (stored stamps; None leaves
    that end open) that meets `where`, ordered as `journal.read` orders them (time, then the
    order they were written)."""
    where = list(where)
    params: list[Any] = []
    for bound, test in ((start, "e.at_utc >= ?"), (end, "e.at_utc < ?")):
        if bound is not None:
            where.append(test)
            params.append(bound)
    sql = select + (" WHERE " + " AND ".join(where) if where else "")
    return sql + " ORDER BY e.at_utc, e.rowid", params


def canonical_stamp(text: str) -> str:
    """A stored UTC stamp in the book's own 'YYYY-MM-DDTHH:MM:SSZ' form, in which text
    compares as the times do (any other form `journal` reads is rewritten in it)."""
    return text if _is_stamp(text) else format_utc(parse_stamp(text))


def csv_line(cells: Sequence[str]) -> str:
    """One row as `csv.writer` (excel dialect, CR LF) writes it."""
    buffer = io.StringIO()
    csv.writer(buffer, lineterminator="\r\n").writerow(cells)
    return buffer.getvalue()


def quote(text: str) -> str:
    """A cell as `csv.writer` puts it in the line: quoted when it holds a comma, a quote or a
    line break."""
    if '"' in text or "," in text or "\n" in text or "\r" in text:
        return csv_line([text, ""])[:-3]  # a second, empty cell: a lone "" is written quoted
    return text


def csv_field(text: str) -> str:
    """A text cell ready for the line: neutralised (`csvcolumns.neutralise`), then quoted."""
    if text.startswith(FORMULA_START):
        text = "'" + text
    return quote(text)


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
        # utcoffset -> (delta, suffix, whether whole hours): the same for every hour it holds
        self.offsets: dict[timedelta | None, tuple[timedelta, str, bool]] = {}

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
        offset = begins.utcoffset()
        self.prefix = self.delta = None
        if offset != (first + timedelta(seconds=3599)).astimezone(self.local).utcoffset():
            return
        known = self.offsets.get(offset)
        if known is None:
            delta = begins.replace(tzinfo=None) - first.replace(tzinfo=None)
            suffix = begins.isoformat(timespec="seconds")[19:]
            known = self.offsets[offset] = (delta, suffix, delta % timedelta(hours=1) == _ZERO)
        self.delta, self.suffix, whole = known
        if whole:
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

    def __init__(self, tag: str, ctx: FilterContext, pressure: str, temperature: str = "C") -> None:
        self.tag, self.ctx, self.pressure = tag, ctx, pressure
        self.bar_per_unit = to_bar(1.0, pressure)  # the number from_bar divides by
        self.ratios: dict[float, float | str | None] = {}
        self.memo: dict[tuple[float, float | None, float | None], tuple[str, str]] = {}
        self.problem = ""
        if ctx.curve is None or ctx.reference is None:
            self.problem = csv_field(f"not normalised: {ctx.problem}")
            self.signature: tuple[Any, ...] = (self.problem,)
            return
        self.normal_temp_c = ctx.unit.normal_temp_c
        self.nu_ref_cst = ctx.reference.nu_ref_cst
        self.flow_ref_lpm = ctx.reference.flow_ref_lpm
        self.labels = {
            (temp, flow): csv_field(reference_text(ctx, temp, flow, temperature))
            for temp in (False, True)
            for flow in (False, True)
        }
        # what `fast_cells` depends on: positions alike in it give the same cells
        self.signature = (
            ctx.curve.nu40_cst,
            ctx.curve.nu100_cst,
            self.nu_ref_cst,
            self.flow_ref_lpm,
            self.normal_temp_c,
            self.bar_per_unit,
            tuple(sorted(self.labels.items())),
        )

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
        found = self.fast_cells(dp_bar, temp_c, flow_lpm)
        return self._slow(dp_bar, temp_c, flow_lpm) if found is None else found

    def fast_cells(
        self, dp_bar: float, temp_c: float | None, flow_lpm: float | None
    ) -> tuple[str, str] | None:
        """The cells from the position's constants alone (its `signature`); None for the
        values only `conditions.normalise` words (the `_slow` path, which reads the whole
        context)."""
        if self.problem:
            return "", self.problem
        ratio = self._nu_ratio(self.normal_temp_c if temp_c is None else temp_c)
        if isinstance(ratio, str):
            return "", ratio
        if ratio is None or not 0.0 <= dp_bar < _INF:
            return None
        flow_ratio = 1.0
        if flow_lpm is not None:
            if not 0.0 < flow_lpm < _INF:
                return None
            if self.flow_ref_lpm is not None:
                flow_ratio = flow_lpm / self.flow_ref_lpm
                if not 1e-100 < flow_ratio < 1e100:  # flow_ratio**2 in normalise_dp_bar
                    return None
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


def reference_text(
    ctx: FilterContext, temp_assumed: bool, flow_assumed: bool, temperature: str = "C"
) -> str:
    """The reference cell: the condition (its temperature in the user's unit) and what was
    assumed."""
    assumed = [w for w, a in (("temp", temp_assumed), ("flow", flow_assumed)) if a]
    label = reference_cell(ctx.reference.label, ctx.unit.normal_temp_c, temperature)  # type: ignore[union-attr]
    return label + (f"; {' and '.join(assumed)} assumed normal" if assumed else "")


@dataclass(frozen=True)
class KindPlan:
    """How a row of one entry kind fills the CSV cells."""

    blank: list[str]  # the cells before the row's values: the kind filled in, the rest empty
    id: int  # the id's cell
    # (cell, column, memo, the cell's text from the column's value)
    cells: tuple[tuple[int, int, dict[Any, str], Callable[[Any], str]], ...]
    reading: bool  # a reading: its ΔP gets a reference value
    other: bool  # needs columns the span query does not read

    def memo(self, column: str) -> dict[Any, str]:
        """The memo of a column's cells (value -> cell)."""
        return next(memo for _, at, memo, _ in self.cells if at == _COL[column])

    def piece(self, row: Sequence[Any], lo: int, hi: int) -> list[str]:
        """The cells lo to hi - 1 of the row, as `fill` makes them."""
        cells = self.blank[lo:hi]
        for cell, column, memo, make in self.cells:
            if lo <= cell < hi:
                value = row[column]
                if value is not None:
                    text = memo.get(value)
                    cells[cell - lo] = remember(memo, value, make(value)) if text is None else text
        return cells

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
    """A plan per entry kind: the cells of the column table (`csvcolumns.COLUMNS`) its
    dataclass has fields for. Columns with few distinct values (tags, words, gauge steps)
    remember their cells; a column has one memo however many kinds use it."""
    keys = prefs.unit_keys()
    memos: dict[str, dict[Any, str]] = {name: {} for name in _COL}
    index = {name: i for i, name in enumerate(header(prefs))}
    headers = {c.name: c.header(keys) for c in COLUMNS}
    plans = {}
    for kind, cls in KINDS.items():
        names = {f.name for f in fields(cls)}
        blank = [""] * len(index)
        blank[index["kind"]] = csv_field(kind)
        cells = []
        target = TARGET_COLUMN.get(cls.target_table or "")
        if target is not None:
            cells.append((index["target"], _COL[target], memos[target], csv_field))
        for column in VALUE_COLUMNS:
            if column.field in names:
                cell = index[headers[column.name]]
                blank[cell] = quote(column.empty(kind))
                write = column.writer(keys)
                cells.append(
                    (cell, _COL[column.field], memos[column.field], lambda x, w=write: quote(w(x)))
                )
        other = any(column >= len(_READING_COLUMNS) for _, column, _, _ in cells)
        plans[kind] = KindPlan(blank, index["id"], tuple(cells), issubclass(cls, Reading), other)
    return plans


class SpanLines:
    """Rows of the span query -> CSV lines."""

    def __init__(
        self, book: Book, prefs: Prefs, local: tzinfo, pattern: list[tuple[str, str]]
    ) -> None:
        columns = header(prefs)
        self.header = csv_line(columns)
        self.plans = kind_plans(prefs)
        self.clock, self.shifts = LocalClock(local), ShiftNames(pattern, local)
        self.pressure = pressure_key(prefs.pressure)
        self.temperature = temperature_key(prefs.temperature)
        self.contexts = contexts(book)
        self.book, self.conn = book, book.conn
        self.voided_by = dict(book.conn.execute(_SELECT_VOIDS).fetchall())
        self.others = OtherColumns(book.conn)
        self.references: dict[str, FilterReference | None] = {}
        self.time, self.shift = columns.index("time"), columns.index("shift")
        self.void = columns.index("voided_by")
        self.dp_ref = columns.index(f"dp_ref_{self.pressure}")
        self.reference = columns.index("reference")
        # `span`'s pieces of a reading: the cells up to the hour meter's, and from it on
        self.split = columns.index("hours")
        reading = self.plans["reading"]
        used = {_NAMES[column] for _, column, _, _ in reading.cells}
        self.fast = [c.name for c in COLUMNS[:14]] == list(
            _READING_LAYOUT
        ) and used <= _READING_PIECES

    def lines(self, rows: Iterable[Sequence[Any]]) -> Iterator[str]:
        """Each row's CSV line, without its CR LF (rows as the span query reads them)."""
        for row in rows:
            try:
                cells = self.cells(row)
            except ROW_ERRORS as exc:  # a row planted past the checks: skipped, reported
                note_unreadable(self.book, row[_ID], f"{type(exc).__name__}: {exc}")
                continue
            yield ",".join(cells)

    def cells(self, row: Sequence[Any]) -> list[str]:
        """One row's cells, ready for the line; a row planted past the checks raises one of
        ROW_ERRORS."""
        clock, shifts = self.clock, self.shifts
        stamp = row[_AT]
        if not _is_stamp(stamp):
            stamp = canonical_stamp(stamp)
        plan = self.plans[row[_KIND]]
        if plan.other:
            row = (*row, *self.others.of(row[_ID]))
        cells = plan.fill(row)
        if row[_ID] in self.voided_by:
            cells[self.void] = csv_field(self.voided_by[row[_ID]])
        if stamp[:13] == clock.hour and clock.prefix is not None:  # clock.text, inlined
            cells[self.time] = clock.prefix + stamp[13:19] + clock.suffix
        else:
            cells[self.time] = clock.text(stamp)
        cells[self.shift] = (
            shifts.cell if shifts.start <= stamp < shifts.end else shifts.name(stamp)
        )
        if plan.reading and row[_DP] is not None:
            reference = self.references.get(row[_FILTER], _UNSEEN)
            if reference is _UNSEEN:
                reference = self._reference(row[_FILTER])
            if reference is not None:
                cells[self.dp_ref], cells[self.reference] = reference.cells(
                    row[_DP], row[_TEMP], row[_FLOW]
                )
        return cells

    def span(self, start_text: str | None, end_text: str | None) -> Iterator[list[str]]:
        """Every line of the entries in [start_text, end_text), in the export's order.

        A reading (nearly every entry) is put together from remembered text after its id,
        time and shift: the filter, unit and who cells (the plan's memos); the ΔP, indicator
        and temperature cells as one piece; the reference cells, remembered across positions
        alike in what they come from (`FilterReference.signature`: the fluid's curve, the
        reference condition) by ΔP, temperature and flow; the flow cell; the cells from the
        hour meter on. A piece is made once, from the first row that needs it, as `cells`
        makes it; a row that is voided, has a stamp in another form or is of another kind
        goes through `cells` whole, and so does one whose values only
        `conditions.normalise` words. Yields the lines a batch of rows (`_BATCH`) at a time."""
        sql, params = _span_sql(start_text, end_text)
        rows = self.conn.execute(sql, params)
        self.others = OtherColumns(self.conn, (start_text, end_text))
        if not self.fast:
            while batch := rows.fetchmany(_BATCH):
                yield list(self.lines(batch))
            return
        clock, shifts, voided_by = self.clock, self.shifts, self.voided_by
        plan = self.plans["reading"]
        kind_cell = plan.blank[3]
        whos: dict[tuple[Any, ...], tuple[str, int | None]] = {}  # -> (cells, signature)
        values: dict[tuple[Any, ...], str] = {}  # (signature, ΔP ... flow) -> cells
        tails: dict[tuple[Any, ...], str] = {}  # (hour meter, note) -> cells
        pieces = _Pieces(self, plan)
        split, end = self.split, len(plan.blank)
        minute_second = _MINUTE_SECOND
        hour = prefix = shift_from = shift_to = after_shift = ""
        while batch := rows.fetchmany(_BATCH):
            lines: list[str] = []
            line = lines.append
            check_ids = not _plain_ids(batch)
            for row in batch:
                entry_id, stamp, kind, by, unit, note, tag, dp, indicator, temp, flow, hours = row
                try:
                    if kind != "reading" or entry_id in voided_by:
                        raise _Whole
                    if stamp[:13] != hour:  # the hour's local text and offset (LocalClock)
                        if not _is_stamp(stamp):
                            raise _Whole
                        clock.text(stamp)
                        if clock.prefix is None:  # an offset of part hours, or a change in it
                            raise _Whole
                        hour, prefix = clock.hour, clock.prefix
                        shift_to = ""  # the offset's text may have changed: made again below
                    # the rest of the stamp, when in the book's own form (its hour is: above)
                    minute = minute_second.get(stamp[13:])
                    if minute is None:
                        raise _Whole
                    who = whos.get((tag, unit, by))
                    if who is None:
                        who = remember(whos, (tag, unit, by), pieces.who(row, tag))
                    value = values.get((who[1], dp, indicator, temp, flow))
                    if value is None:
                        value, shared = pieces.value(row, tag, who[1], dp, temp, flow)
                        if shared:
                            remember(values, (who[1], dp, indicator, temp, flow), value)
                    tail = tails.get((hours, note))
                    if tail is None:
                        tail = remember(tails, (hours, note), ",".join(plan.piece(row, split, end)))
                    if not shift_from <= stamp < shift_to:
                        shifts.name(stamp)
                        shift_from, shift_to = shifts.start, shifts.end
                        after_shift = f"{clock.suffix},{shifts.cell},{kind_cell},"
                    if check_ids and not _plain_cell(entry_id):
                        entry_id = csv_field(entry_id)
                    line(f"{entry_id},{prefix}{minute}{after_shift}{who[0]},{value},{tail}")
                except (_Whole, *ROW_ERRORS):  # `lines` writes it (or reports it and leaves it out)
                    lines.extend(self.lines([row]))
            yield lines

    def _reference(self, tag: str) -> FilterReference | None:
        """The filter's reference; None when the register has no such filter (as csvio)."""
        ctx = self.contexts.get(tag)
        self.references[tag] = (
            None if ctx is None else FilterReference(tag, ctx, self.pressure, self.temperature)
        )
        return self.references[tag]


class OtherColumns:
    """The columns beyond the span query's (`_OTHER_COLUMNS`) that an entry of another kind
    than a reading needs. Given the span, they are read for all of its entries that are not
    readings by one second query in the span's order, a window of rows at a time: the span's
    rows ask for them in that order, so a window is left once an id is not in it. An id that
    is not text, or not found that way, is read by itself (as without a span)."""

    def __init__(
        self, conn: sqlite3.Connection, span: tuple[str | None, str | None] | None = None
    ) -> None:
        self.conn = conn
        self.rows: sqlite3.Cursor | None = None
        self.window: dict[str, tuple[Any, ...]] = {}
        if span is not None:
            sql, params = _span_sql(*span, _SELECT_OTHERS, ["e.kind <> 'reading'"])
            self.rows = conn.execute(sql, params)

    def of(self, entry_id: Any) -> Any:
        """The entry's other columns; None for an id that no entry has."""
        if type(entry_id) is str:
            found = self.window.pop(entry_id, None)
            while found is None and self.rows is not None:
                batch = self.rows.fetchmany(_OTHER_BATCH)
                if not batch:
                    self.rows = None
                self.window = {row[0]: row[1:] for row in batch}
                found = self.window.pop(entry_id, None)
            if found is not None:
                return found
        return self.conn.execute(_SELECT_OTHER, [entry_id]).fetchone()


class _Pieces:
    """The pieces of a reading's line that `SpanLines.span` remembers, made as
    `SpanLines.cells` makes those cells (plan.piece, FilterReference)."""

    def __init__(self, lines: SpanLines, plan: KindPlan) -> None:
        self.lines, self.plan = lines, plan
        self.readings: dict[tuple[Any, ...], str] = {}  # (ΔP, indicator, temperature)
        self.pairs: dict[tuple[Any, ...], str] = {}  # (signature, ΔP, temperature, flow)
        self.signatures: dict[tuple[Any, ...], int] = {}  # signature -> its number
        self.flow = lines.split - 1  # the flow cell, just before the hour meter's
        self.flows: dict[Any, str] = {}  # flow -> its cell

    def who(self, row: Sequence[Any], tag: str) -> tuple[str, int | None]:
        """The kind, filter, unit and who cells, and the number of the filter's signature
        (None: no such filter in the register, so no reference cells)."""
        reference = self.lines.references.get(tag, _UNSEEN)
        if reference is _UNSEEN:
            reference = self.lines._reference(tag)
        signature = (
            None
            if reference is None
            else self.signatures.setdefault(reference.signature, len(self.signatures))
        )
        return ",".join(self.plan.piece(row, 4, 7)), signature

    def value(
        self, row: Sequence[Any], tag: str, signature: int | None, dp: Any, temp: Any, flow: Any
    ) -> tuple[str, bool]:
        """The ΔP to the flow cells, and whether they hold for every filter of the signature
        (not when `conditions.normalise` worded the reference cells from the filter's own
        context)."""
        key = (dp, row[_COL["indicator"]], temp)
        reading = self.readings.get(key)
        if reading is None:
            reading = remember(self.readings, key, ",".join(self.plan.piece(row, 7, 10)))
        pair, shared = ",", True  # no ΔP, or a filter the register does not hold
        if dp is not None and signature is not None:
            pair = self.pairs.get((signature, dp, temp, flow))
            if pair is None:
                reference = self.lines.references[tag]
                found = reference.fast_cells(dp, temp, flow)  # type: ignore[union-attr]
                if found is None:  # through the filter's own context: not shared
                    pair = ",".join(reference.cells(dp, temp, flow))  # type: ignore[union-attr]
                    shared = False
                else:
                    pair = remember(self.pairs, (signature, dp, temp, flow), ",".join(found))
        flow_cell = self.flows.get(flow)
        if flow_cell is None:
            (flow_cell,) = self.plan.piece(row, self.flow, self.flow + 1)
            remember(self.flows, flow, flow_cell)
        return f"{reading},{pair},{flow_cell}", shared


def write_span(
    out: IO[str],
    book: Book,
    start: datetime | None,
    end: datetime | None,
    prefs: Prefs,
    local: tzinfo,
    pattern: list[tuple[str, str]],
    status: bool = False,
) -> int:
    """Write the entries logged in [start, end) as the shift-log CSV (header first); returns
    how many. None leaves that end of the span open. With `status`, the status rows of the
    handover follow the entries (`status_rows`) and the header has their columns."""
    start_text = None if start is None else format_utc(start)
    end_text = None if end is None else format_utc(end)
    # the cyclic collector held as journal.read holds it: its passes would find no cycles
    with read_snapshot(book.conn), collector_held():
        span_lines = SpanLines(book, prefs, local, pattern)
        batches = span_lines.span(start_text, end_text)
        if not status:
            out.write(span_lines.header)
            return _write_batches(out, batches)
        out.write(csv_line(header(prefs, status=True)))
        pad = "," * len(STATUS_COLUMNS)  # an entry leaves the status columns empty
        count = _write_batches(out, batches, pad)
        as_of = status_as_at(start, end, book.now())
        if as_of is not None:
            _write_batches(out, iter([status_rows(book, as_of, prefs, local, pattern)]))
        return count


# ---- the status rows ------------------------------------------------------------------------------


def status_as_at(start: datetime | None, end: datetime | None, now: datetime) -> datetime | None:
    """The moment the status rows describe: the span's last second, or now for a span that
    has not ended (the current shift); None for a span that has not begun."""
    as_of = now if end is None else min(end - timedelta(seconds=1), now)
    return None if start is not None and as_of < start else as_of


def status_rows(
    book: Book, as_of: datetime, prefs: Prefs, local: tzinfo, pattern: list[tuple[str, str]]
) -> list[str]:
    """The handover as CSV lines (no line ends), most urgent first (store/health/urgency.py):
    every filter and breather that is flagged, or whose change or swap window opens (earliest
    date), or whose next reading falls, before the end of the shift after the one holding
    `as_of` (`handover_end`); and every unit with a flag. Read as of that moment
    (`views.watch(as_of=...)`, from the entries as they stood then), so the same span
    exported again later gives the same rows."""
    return [
        _status_line(row, prefs, local, pattern, as_of)
        for row in handover(book, as_of, pattern, local)
    ]


def handover_end(as_of: datetime, pattern: list[tuple[str, str]], local: tzinfo) -> datetime:
    """The horizon of the handover: the end of the shift after the one holding `as_of`."""
    return next_shift(shift_at(as_of, pattern, local), pattern, local).end


@dataclass(frozen=True)
class StatusRow:
    """One position (or unit) of the handover, as the status rows write it."""

    tag: str
    unit: str
    flags: tuple[str, ...]
    earliest: datetime | None
    due: datetime | None  # the likely date of a change or swap
    next_reading: datetime | None
    dp_ref_bar: float | None
    notes: tuple[str, ...]
    key: tuple  # its place in the one order (urgency.order_key)


def handover(
    book: Book, as_of: datetime, pattern: list[tuple[str, str]], local: tzinfo
) -> list[StatusRow]:
    """What the status rows hold, in the one order (see `status_rows`), overdue by the watch
    list's own rule (`urgency.filter_overdue`)."""
    horizon = handover_end(as_of, pattern, local)
    w: Watch = watch(book, as_of=as_of)
    rows = []
    for f in w.filters:
        earliest, likely = (f.due.earliest, f.due.likely) if f.due else (None, None)
        soon = [t for t in (earliest, f.next_reading) if t is not None and t < horizon]
        if not (f.flags or soon):
            continue
        overdue = urgency.filter_overdue(f.state, likely, as_of)
        key = urgency.order_key(f.flags, overdue, likely, f.percent_of_limit, f.filter)
        rows.append(
            StatusRow(
                f.filter,
                f.unit,
                f.flags,
                earliest,
                likely,
                f.next_reading,
                f.dp_ref_bar,
                f.notes,
                key,
            )  # fmt: skip
        )
    for b in w.breathers:
        due = b.forecast.due
        if not (b.flags or (due is not None and due < horizon)):
            continue
        key = urgency.order_key(b.flags, b.forecast.overdue, due, None, b.breather)
        rows.append(StatusRow(b.breather, b.unit, b.flags, due, due, None, None, (), key))
    for u in w.units:
        if u.flags:
            key = urgency.order_key(u.flags, False, None, None, u.unit)
            rows.append(StatusRow(u.unit, u.unit, u.flags, None, None, None, None, u.notes, key))
    rows.sort(key=lambda r: r.key)
    return rows


def _status_line(
    row: StatusRow, prefs: Prefs, local: tzinfo, pattern: list[tuple[str, str]], as_of: datetime
) -> str:
    names = header(prefs, status=True)
    cells = dict.fromkeys(names, "")

    def when(moment: datetime | None) -> str:
        return "" if moment is None else iso_local(moment, local)

    pressure = pressure_key(prefs.pressure)
    cells |= {
        "time": iso_local(as_of, local),
        "shift": csv_field(shift_at(as_of, pattern, local).name),
        "kind": STATUS_KIND,
        "target": csv_field(row.tag),
        "unit": csv_field(row.unit),
        "flags": csv_field("; ".join(FLAG_WORDS.get(f, f) for f in row.flags)),
        "due_earliest": when(row.earliest),
        "due": when(row.due),
        "next_reading": when(row.next_reading),
        "note": csv_field("; ".join(row.notes)),
    }
    if row.dp_ref_bar is not None:
        cells[f"dp_ref_{pressure}"] = _num(from_bar(row.dp_ref_bar, pressure))
    return ",".join(cells[name] for name in names)


BOM = "\ufeff"  # UTF-8's byte-order mark: an office spreadsheet then reads ν, °C, µm as written


def export_file(
    book: Book,
    dest: Path,
    start: datetime | None,
    end: datetime | None,
    prefs: Prefs,
    local: tzinfo,
    pattern: list[tuple[str, str]],
    bom: bool = True,
    status: bool = False,
) -> int:
    """`write_span` into the regular file `dest` (made or replaced); returns the count.

    The lines go to `<dest>.part` beside it, which then replaces `dest` in one rename: a
    reader of `dest` sees the old file or the whole new one. A symlink, pipe, device or
    folder at `dest` is refused with one line and left as it is. Any failure seen here
    removes the `.part`; a `.part` left by an export that was killed is replaced by the next
    export to the same file.
    """
    dest = Path(dest)
    refuse_odd_destination(dest)
    refuse_input_as_output(dest, book.path, "the export")
    part = dest.with_name(dest.name + ".part")
    try:
        refuse_odd_destination(part)
        part.unlink(missing_ok=True)  # a stale one of a killed export
        flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_NOFOLLOW", 0)
        with open(os.open(part, flags, 0o666), "w", encoding="utf-8", newline="") as out:
            if bom:
                out.write(BOM)
            count = write_span(out, book, start, end, prefs, local, pattern, status)
            out.flush()
            os.fsync(out.fileno())
        refuse_odd_destination(dest)  # nothing was put there meanwhile
        os.replace(part, dest)
    except OSError as exc:
        _remove(part)
        raise BookError(f"cannot write {dest}: {exc.strerror or exc}") from exc
    except BaseException:
        _remove(part)  # a read that failed half-way leaves no file
        raise
    return count


def refuse_odd_destination(path: Path) -> None:
    """Only a regular file (or nothing yet) may be written over."""
    try:
        mode = os.lstat(path).st_mode
    except FileNotFoundError:
        return
    except OSError as exc:
        raise BookError(f"cannot write {path}: {exc.strerror or exc}") from exc
    if stat.S_ISREG(mode):
        return
    what = (
        "a symbolic link"
        if stat.S_ISLNK(mode)
        else "a folder"
        if stat.S_ISDIR(mode)
        else "a pipe"
        if stat.S_ISFIFO(mode)
        else "a device or socket"
    )
    raise BookError(
        f"{path} is {what}, not a regular file: nothing was written; export writes only to a "
        "regular file (give a new file name or the file's own path)"
    )


def _remove(path: Path) -> None:
    try:
        if stat.S_ISREG(os.lstat(path).st_mode):
            os.unlink(path)
    except OSError:
        pass


def _write_batches(out: IO[str], batches: Iterator[list[str]], pad: str = "") -> int:
    """Each batch's lines, each with `pad` and CR LF after it, in one write a batch; returns
    how many lines."""
    count = 0
    end = pad + "\r\n"
    for batch in batches:
        if batch:
            count += len(batch)
            batch.append("")  # the last line's end
            out.write(end.join(batch))
    return count

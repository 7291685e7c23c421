"""What the screens and the command line show beyond the watch list itself, as dataclasses:
the watch rows and their summary, tag search, the unit and filter sheets, the shift log.
Read-only, like store.views, whose watch list and statuses they are built from."""

from __future__ import annotations

import difflib
import re
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime, timedelta

from store.base.timeutil import ShiftSpan, format_utc, next_shift
from store.db.book import Book
from store.db.connection import read_snapshot
from store.derived.statuscache import (
    filter_view,
)
from store.health import urgency
from store.health.conditions import contexts
from store.health.elements import Element, ElementSummary, meter_at, split_elements
from store.health.fluidcare import Consumption, sample_verdict
from store.health.status_model import (
    FLAG_WORDS,
    URGENT_FLAGS,
    BreatherStatus,
    Due,
    FilterStatus,
    UnitStatus,
    Watch,
)
from store.health.watchlist import status_as_of
from store.ledger.entries import BreatherSwap, Entry, Reading, Sample, TopUp
from store.ledger.journal import MAX_DP_BAR, find_entry, read
from store.ledger.register import (
    Breather,
    FilterPosition,
    Fluid,
    Technician,
    Unit,
    find,
    get,
    list_all,
    list_shifts,
)
from store.record import Logged
from store.views import status_of, watch

WEEK = timedelta(days=7)
TREND_POINTS = 16  # readings kept for a one-line trend
TOPUP_WEEKS = 12
RECENT_ENTRIES = 30
TEMPERATURE_READINGS = 30

# ---- the watch list ------------------------------------------------------------------------------


@dataclass(frozen=True)
class WatchRow:
    """One line of the watch list: a filter, a breather, or a unit that carries a flag."""

    tag: str
    what: str  # "filter", "breather" or "unit"
    unit: str
    area: str
    kind: str  # filter kind, breather kind, or "unit"
    dp_ref_bar: float | None
    limit_bar: float | None
    percent_of_limit: float | None
    trend_bar: tuple[float, ...]  # normalised ΔP of the current element, oldest first
    due: Due | None
    state: str
    basis: str
    flags: tuple[str, ...]
    notes: tuple[str, ...]
    overdue: bool
    gauge: bool = True  # False: the filter has only a visual indicator
    next_reading: datetime | None = None  # a filter's next-reading time (readplan)

    @property
    def urgent(self) -> bool:
        return any(f in URGENT_FLAGS for f in self.flags)

    @property
    def tier(self) -> int:
        """Its group in the one order (store/health/urgency.py): 0 inspect now, 1 overdue or
        over the limit, 2 another flag, 3 nothing pressing."""
        return urgency.tier(self.flags, self.overdue)

    def sort_key(self) -> tuple:
        due = self.due.likely if self.due else None
        return urgency.order_key(self.flags, self.overdue, due, self.percent_of_limit, self.tag)


OVERDUE_STATES = urgency.OVERDUE_STATES
BYPASSING_NOW = urgency.URGENT_FLAGS


def filter_row(f: FilterStatus, area: str, now: datetime) -> WatchRow:
    spark = f.spark or tuple(p.dp_ref_bar for p in f.history if p.dp_ref_bar is not None)
    trend = tuple(spark)[-TREND_POINTS:]
    overdue = urgency.filter_overdue(f.state, f.due.likely if f.due else None, now)
    return WatchRow(
        tag=f.filter,
        what="filter",
        unit=f.unit,
        area=area,
        kind=f.kind,
        dp_ref_bar=f.dp_ref_bar,
        limit_bar=f.limit_bar,
        percent_of_limit=f.percent_of_limit,
        trend_bar=trend,
        due=f.due,
        state=f.state,
        basis=f.basis,
        flags=f.flags,
        notes=f.notes,
        overdue=overdue,
        gauge=f.gauge,
        next_reading=f.next_reading,
    )


def breather_row(b: BreatherStatus, area: str) -> WatchRow:
    fc = b.forecast
    due = Due(fc.due, fc.due, fc.due) if fc.due else None
    notes = [f"swap every {fc.interval_d:.0f} d ({fc.basis})"]
    if fc.last_condition:
        notes.append(f"last cartridge: {fc.last_condition}")
    if fc.last_swap is None:
        notes.append("no swap logged yet")
    return WatchRow(
        tag=b.breather,
        what="breather",
        unit=b.unit,
        area=area,
        kind=b.kind,
        dp_ref_bar=None,
        limit_bar=None,
        percent_of_limit=None,
        trend_bar=(),
        due=due,
        state="overdue" if fc.overdue else ("ok" if fc.due else "no-swaps"),
        basis=fc.basis,
        flags=b.flags,
        notes=tuple(notes),
        overdue=fc.overdue,
    )


def unit_row(u: UnitStatus) -> WatchRow:
    return WatchRow(
        tag=u.unit,
        what="unit",
        unit=u.unit,
        area=u.area,
        kind="unit",
        dp_ref_bar=None,
        limit_bar=None,
        percent_of_limit=None,
        trend_bar=(),
        due=None,
        state="flagged",
        basis="",
        flags=u.flags,
        notes=u.notes,
        overdue=False,
    )


def watch_rows(w: Watch) -> list[WatchRow]:
    """Every filter and breather, and every unit with a flag, most urgent first."""
    areas = {u.unit: u.area for u in w.units}
    rows = [filter_row(f, areas.get(f.unit, ""), w.as_of) for f in w.filters]
    rows += [breather_row(b, areas.get(b.unit, "")) for b in w.breathers]
    rows += [unit_row(u) for u in w.units if u.flags]
    rows.sort(key=WatchRow.sort_key)
    return rows


@dataclass(frozen=True)
class Summary:
    overdue: int
    due_this_shift: int
    due_this_week: int  # within seven days from now, this shift included
    urgent: int


def summarise(rows: Sequence[WatchRow], now: datetime, shift_end: datetime) -> Summary:
    overdue = sum(1 for r in rows if r.overdue)
    pending = [r for r in rows if not r.overdue and r.due is not None]
    return Summary(
        overdue=overdue,
        due_this_shift=sum(1 for r in pending if r.due.likely < shift_end),  # type: ignore[union-attr]
        due_this_week=sum(1 for r in pending if r.due.likely < now + WEEK),  # type: ignore[union-attr]
        urgent=sum(1 for r in rows if r.urgent),
    )


def row_matches(row: WatchRow, text: str) -> bool:
    """Free-text filter: every word must appear in the row's tag, unit, area, kind or flags."""
    hay = " ".join(
        [row.tag, row.unit, row.area, row.kind, row.what, row.state, *row.flags]
        + [FLAG_WORDS.get(f, f) for f in row.flags]
    ).lower()
    return all(word in hay for word in text.lower().split())


# ---- tags ----------------------------------------------------------------------------------------


@dataclass(frozen=True)
class TagHit:
    tag: str
    what: str  # "filter", "breather" or "unit"
    unit: str
    label: str  # a few words to show beside the tag


def tag_index(book: Book) -> list[TagHit]:
    """Every tag a technician can scan or type: filters, breathers, units."""
    hits = [
        TagHit(f.tag, "filter", f.unit, f"{f.kind} filter on {f.unit}")
        for f in list_all(book, FilterPosition)
    ]
    hits += [
        TagHit(b.tag, "breather", b.unit, f"{b.kind} breather on {b.unit}")
        for b in list_all(book, Breather)
    ]
    hits += [TagHit(u.tag, "unit", u.tag, u.name or "unit") for u in list_all(book, Unit)]
    return hits


def _squash(text: str) -> str:
    return re.sub(r"[^0-9a-z]", "", text.lower())


def match_tags(text: str, hits: Sequence[TagHit], limit: int = 8) -> list[TagHit]:
    """Tags for what was typed or scanned: exact first, then the same letters and digits
    without punctuation, then by prefix, then close spellings."""
    typed = text.strip().upper()
    if not typed:
        return list(hits[:limit])
    exact = [h for h in hits if h.tag.upper() == typed]
    if exact:
        return exact
    squashed = _squash(typed)
    same = [h for h in hits if _squash(h.tag) == squashed]
    if same:
        return same[:limit]
    prefix = [h for h in hits if _squash(h.tag).startswith(squashed)] if squashed else []
    if prefix:
        return prefix[:limit]
    by_tag = {h.tag: h for h in hits}
    close = difflib.get_close_matches(typed, list(by_tag), n=limit, cutoff=0.5)
    return [by_tag[t] for t in close]


# ---- form defaults -------------------------------------------------------------------------------


def last_temp_c(book: Book, unit: str) -> float | None:
    """The fluid temperature of the unit's latest reading that has one."""
    for e in read(book, unit=unit, kinds=["reading"], newest_first=True, limit=50):
        if isinstance(e, Reading) and e.temp_c is not None and not e.voided:
            return e.temp_c
    return None


METER_LOOKBACK = 200  # the unit's latest entries that carry the hour meter, for the rate


def meter_estimate_h(book: Book, unit: str, at: datetime) -> float | None:
    """The unit's hour meter at `at`, estimated from its logged meter values: between two of
    them in proportion to calendar time, after the last at the unit's observed running rate
    (operating hours per calendar day over its latest meter values, at most 24). None when the
    unit has no hour meter or fewer than two values a day or more apart."""
    found = find(book, Unit, unit)
    if found is None or not found.hour_meter:
        return None
    pairs: list[tuple[datetime, float]] = []
    for e in read(
        book, unit=unit, kinds=["reading", "change"], newest_first=True, until=at, limit=1000
    ):
        hours = getattr(e, "hours", None)
        if hours is not None and not e.voided:
            pairs.append((e.at, float(hours)))
            if len(pairs) == METER_LOOKBACK:
                break
    return meter_at(pairs, at)


def unit_fluid(book: Book, unit: str) -> str | None:
    found = find(book, Unit, unit)
    return found.fluid if found else None


# ---- the unit sheet ------------------------------------------------------------------------------


@dataclass(frozen=True)
class TempReading:
    at: datetime
    filter: str
    temp_c: float


@dataclass(frozen=True)
class UnitSheet:
    unit: Unit
    fluid: Fluid | None
    as_of: datetime
    status: UnitStatus | None
    filters: tuple[FilterStatus, ...]
    breathers: tuple[BreatherStatus, ...]
    recent: tuple[Entry, ...]  # newest first, voided ones included
    topups: tuple[TopUp, ...]  # live, newest first
    consumption: Consumption | None
    topup_weeks_l: tuple[float, ...]  # litres added per week, oldest week first
    temperatures: tuple[TempReading, ...]  # oldest first
    sample: Sample | None
    sample_text: str
    sample_meets: bool | None


def weekly_totals_l(
    topups: Sequence[TopUp], now: datetime, weeks: int = TOPUP_WEEKS
) -> tuple[float, ...]:
    """Litres added in each of the last `weeks` weeks (oldest first)."""
    totals = [0.0] * weeks
    for t in topups:
        if t.at is None or t.voided:
            continue
        back = int((now - t.at).total_seconds() // WEEK.total_seconds())
        if 0 <= back < weeks:
            totals[weeks - 1 - back] += t.volume_l
    return tuple(totals)


def unit_sheet(book: Book, tag: str, as_of: datetime | None = None) -> UnitSheet:
    unit = get(book, Unit, tag)
    w = watch(book, as_of=as_of, unit=unit.tag)
    entries = read(book, unit=unit.tag, until=w.as_of + timedelta(seconds=1))
    live = [e for e in entries if not e.voided]
    topups = [e for e in live if isinstance(e, TopUp)]
    temps = [
        TempReading(e.at, e.filter, e.temp_c)  # type: ignore[arg-type]
        for e in live
        if isinstance(e, Reading) and e.temp_c is not None
    ][-TEMPERATURE_READINGS:]
    samples = [e for e in live if isinstance(e, Sample)]
    sample = samples[-1] if samples else None
    text, meets = "no sample logged", None
    if sample is not None:
        verdict = sample_verdict(unit, sample)
        text, meets = verdict.text, verdict.meets
        if sample.water_ppm is not None:
            text += f"; water {sample.water_ppm:g} ppm"
    ustatus = w.units[0] if w.units else None
    return UnitSheet(
        unit=unit,
        fluid=find(book, Fluid, unit.fluid) if unit.fluid else None,
        as_of=w.as_of,
        status=ustatus,
        filters=w.filters,
        breathers=w.breathers,
        recent=tuple(reversed(entries[-RECENT_ENTRIES:])),
        topups=tuple(reversed(topups)),
        consumption=ustatus.consumption if ustatus else None,
        topup_weeks_l=weekly_totals_l(topups, w.as_of),
        temperatures=tuple(temps),
        sample=sample,
        sample_text=text,
        sample_meets=meets,
    )


# ---- the filter sheet ----------------------------------------------------------------------------


@dataclass(frozen=True)
class ElementRow:
    """One element's life on the housing, for the history table."""

    fitted_at: datetime | None  # None: fitted before the book began
    removed_at: datetime | None  # None: still in service
    life_h: float | None
    reason: str  # why it came out, or "in service"
    condition: str
    batch: str  # batch of the element that replaced it
    reached_limit: bool
    readings: int
    peak_dp_ref_bar: float | None


@dataclass(frozen=True)
class FilterSheet:
    position: FilterPosition
    unit: Unit
    as_of: datetime
    status: FilterStatus
    elements: tuple[ElementRow, ...]  # newest first
    uses_hours: bool  # ages are operating hours (hour meter), else calendar hours


def element_rows(elements: Sequence[Element], limit_bar: float | None) -> list[ElementRow]:
    rows = []
    for el in elements:
        dps = [p.dp_ref_bar for p in el.points if p.dp_ref_bar is not None]
        removal = el.removal
        rows.append(
            ElementRow(
                fitted_at=el.fitted_at,
                removed_at=el.removed_at,
                life_h=el.life_h(),
                reason=removal.reason if removal else "in service",
                condition=removal.condition if removal else "",
                batch=removal.batch if removal else "",
                reached_limit=el.reached_limit(limit_bar),
                readings=len(el.points),
                peak_dp_ref_bar=max(dps) if dps else None,
            )
        )
    rows.reverse()
    return rows


def summary_rows(
    past: Sequence[ElementSummary], current: Element, limit_bar: float | None
) -> list[ElementRow]:
    """`element_rows` from the element cache's summaries of the removed elements and the
    element in service (the same rows, without rereading the housing's history)."""
    rows = [
        ElementRow(
            fitted_at=s.fitted_at,
            removed_at=s.removed_at,
            life_h=s.life_h(),
            reason=s.reason,
            condition=s.condition,
            batch=s.batch,
            reached_limit=s.reached_limit(limit_bar),
            readings=s.readings,
            peak_dp_ref_bar=s.peak_dp_ref_bar,
        )
        for s in past
    ]
    rows.reverse()
    return element_rows([current], limit_bar) + rows


def filter_sheet(book: Book, tag: str, as_of: datetime | None = None) -> FilterSheet:
    """Everything the filter sheet shows, computed in full (with the fitted curve). Now: from
    the element cache and the readings of the element in service (`statuscache.filter_view`);
    as of a past time: from the entries as they stood then."""
    if as_of is None:
        with read_snapshot(book.conn):  # the register rows and the status of one moment
            position = get(book, FilterPosition, tag)
            now = book.now()  # the sheet's time and its status's
            full, els = filter_view(book, position.tag, now)
            ctx_unit = get(book, Unit, position.unit)
        return FilterSheet(
            position=position,
            unit=ctx_unit,
            as_of=now,
            status=full,
            elements=tuple(summary_rows(els.past, els.current, position.limit_bar)),
            uses_hours=ctx_unit.hour_meter
            and (els.current.uses_hours or any(s.uses_hours for s in els.past)),
        )
    position = get(book, FilterPosition, tag)
    ctx = contexts(book)[position.tag]
    now = as_of or book.now()
    full = status_as_of(book, ctx, now)  # in full: the chart needs the fitted curve
    until = now + timedelta(seconds=1) if as_of else None
    entries = [e for e in read(book, filter=position.tag, until=until) if not e.voided]
    elements = split_elements(ctx, entries)
    return FilterSheet(
        position=position,
        unit=ctx.unit,
        as_of=now,
        status=full,
        elements=tuple(element_rows(elements, position.limit_bar)),
        uses_hours=ctx.unit.hour_meter and any(el.uses_hours for el in elements),
    )


def filter_status_of(book: Book, tag: str) -> FilterStatus | None:
    """The current status of one filter position (None for an unknown tag)."""
    position = find(book, FilterPosition, tag)
    if position is None:
        return None
    return status_of(book, contexts(book)[position.tag])


SETUP_ORDER = ("techs", "fluids", "units", "filters", "shifts")  # the first-run guide's order


def next_setup_step(book: Book) -> str:
    """The first register step of the first-run guide's order that the book still lacks
    (yourself, the fluids, the units, their filters, the shift pattern), "" when none: the
    register screen opens there, so the guide and the screen agree."""
    have = {
        "techs": bool(list_all(book, Technician)),
        "fluids": bool(list_all(book, Fluid)),
        "units": bool(list_all(book, Unit)),
        "filters": bool(list_all(book, FilterPosition)),
        "shifts": bool(list_shifts(book)),
    }
    return next((step for step in SETUP_ORDER if not have[step]), "")


# A ΔP this many times the bypass setting cannot have passed a working bypass valve, which
# opens at its setting: far likelier a slipped decimal point (24 for 2.4). # common practice,
# no source
SLIP_TIMES = 5.0


def reading_doubts(book: Book, reading: Reading) -> tuple[str, ...]:
    """Why a reading about to be saved may be one nobody made, each a sentence (ΔP in bar);
    empty when nothing looks wrong. The forms ask before saving; the CLI refuses without
    --as-read. Two readings on one filter in the same minute moved a due date by two days."""
    position = find(book, FilterPosition, reading.filter)
    if position is None:
        return ()
    doubts = []
    dp, bypass = reading.dp_bar, position.bypass_bar
    if dp is not None and bypass and SLIP_TIMES * bypass <= dp <= MAX_DP_BAR:
        doubts.append(
            f"ΔP {dp:g} bar is {dp / bypass:.0f} times the bypass setting ({bypass:g} bar): "
            f"a slipped decimal point ({dp / 10:g} bar)?"
        )
    minute = (reading.at or book.now()).replace(second=0, microsecond=0)
    same = read(
        book,
        filter=position.tag,
        since=minute,
        until=minute + timedelta(minutes=1),
        kinds=["reading"],
        include_voided=False,
    )
    if same:
        e = same[-1]
        what = f"ΔP {e.dp_bar:g} bar" if e.dp_bar is not None else f"indicator {e.indicator}"
        doubts.append(
            f"{position.tag} has a reading in this minute already ({what} by {e.by}): "
            "the same reading twice?"
        )
    return tuple(doubts)


# Near the limit a change counts as "at the change limit"; further below, the form does not
# guess why the element came out. 80 % of the limit # common practice, no source
LIMIT_REASON_SHARE = 0.8


def likely_change_reason(f: FilterStatus | None) -> str:
    """The reason an element change form offers for a filter in state `f`: "bypass" when it
    was bypassing, "limit" from LIMIT_REASON_SHARE of the change limit on, "indicator" when
    the indicator showed dirty; "" (the technician chooses) otherwise: at 46 % of the limit
    the element came out for some other reason."""
    if f is None:
        return ""
    if f.indicator == "bypass" or "at-bypass" in f.flags:
        return "bypass"
    percent = f.percent_of_limit
    if percent is not None and percent >= 100 * LIMIT_REASON_SHARE:
        return "limit"
    if f.indicator == "dirty":
        return "indicator"
    return ""


def saved_row(book: Book, logged: Logged) -> WatchRow | None:
    """The watch-list row a save changed, from what the save returned: its filter's status
    as the save kept it (not computed again), or a breather's status after a swap (breather
    statuses are not kept: read from the swaps); None for an entry on neither."""
    if logged.status is not None:
        return filter_row(logged.status, "", book.now())
    entry = logged.entry
    if isinstance(entry, BreatherSwap):
        found = breather_status_of(book, entry.breather)
        return breather_row(found, "") if found is not None else None
    return None


def breather_status_of(book: Book, tag: str) -> BreatherStatus | None:
    breather = find(book, Breather, tag)
    if breather is None:
        return None
    for b in watch(book, unit=breather.unit).breathers:
        if b.breather == breather.tag:
            return b
    return None


# ---- the shift log -------------------------------------------------------------------------------


@dataclass(frozen=True)
class ShiftLog:
    span: ShiftSpan
    next_span: ShiftSpan
    as_of: datetime  # the handover is as the book stood then (end of the shift, or now)
    entries: tuple[Entry, ...]  # time order, voided ones included
    done: tuple[Entry, ...]  # the live entries (not voided, not voids)
    due_next: tuple[WatchRow, ...]  # due before the next shift ends, overdue ones first
    open_flags: tuple[WatchRow, ...]
    # logged in this shift but dated before it (a change written up late): live ones
    logged_late: tuple[Entry, ...] = ()


LATE_LOOKBACK = timedelta(days=31)  # how far back a late write-up is looked for


def logged_late(book: Book, span: ShiftSpan) -> list[Entry]:
    """Live entries written during `span` but dated before it (up to LATE_LOOKBACK before):
    an element change logged today for yesterday belongs in today's handover too, or the
    next shift never hears of it. The time index bounds the scan."""
    rows = book.conn.execute(
        "SELECT id FROM entries WHERE at_utc >= ? AND at_utc < ? AND logged_utc >= ? "
        "AND logged_utc < ? AND kind != 'void' ORDER BY at_utc, rowid",
        [
            format_utc(span.start - LATE_LOOKBACK),
            format_utc(span.start),
            format_utc(span.start),
            format_utc(span.end),
        ],
    ).fetchall()
    late = [find_entry(book, entry_id) for (entry_id,) in rows]
    return [e for e in late if not e.voided]


def shift_log(book: Book, span: ShiftSpan) -> ShiftLog:
    pattern, local = book.shift_pattern(), book.local_zone()
    now = book.now()
    as_of = min(span.end - timedelta(seconds=1), now)
    entries = read(book, since=span.start, until=span.end)
    done = [e for e in entries if not e.voided and e.kind != "void"]
    following = next_shift(span, pattern, local)
    rows = watch_rows(watch(book, as_of=as_of)) if as_of >= span.start else []
    due_next = [r for r in rows if r.due is not None and r.due.likely < following.end]
    flagged = [r for r in rows if r.flags]
    return ShiftLog(
        span=span,
        next_span=following,
        as_of=as_of,
        entries=tuple(entries),
        done=tuple(done),
        due_next=tuple(due_next),
        open_flags=tuple(flagged),
        logged_late=tuple(logged_late(book, span)),
    )


def kind_counts(entries: Sequence[Entry]) -> dict[str, int]:
    counts: dict[str, int] = {}
    for e in entries:
        counts[e.kind] = counts.get(e.kind, 0) + 1
    return counts

"""Filter sheet: the chart of this element, what is predicted and why, the cold-start check,
and the history of every element the housing has had."""

from __future__ import annotations

import math
import time

from rich.text import Text
from textual.app import ComposeResult
from textual.containers import VerticalScroll
from textual.widgets import Header, Static

from store.sheets import FilterSheet, filter_sheet
from tui.base.keys import bind
from tui.screens.common import ENTRY_BINDINGS, BookScreen, Target
from tui.widgets import fmt
from tui.widgets.banner import DemoBanner
from tui.widgets.keystrip import KeyStrip
from tui.widgets.plot import LEGEND, FilterPlot
from tui.widgets.rowtable import RowTable
from tui.widgets.wrapped import Wrapped

BASIS_WORDS = {
    "trend": "the trend of this element's readings",
    "earlier-curves": "this element's readings against earlier elements' curves",
    "service-life": "how long earlier elements lasted (Weibull)",
    "interval": "the reading interval only",
    "none": "no basis yet",
}
READ_GROUP = "filter-sheet"  # the sheet's own reads: one at a time, the newest shown


class FilterSheetScreen(BookScreen):
    HELP_NAME = "the filter sheet"
    AUTO_FOCUS = "#filter-body"
    BINDINGS = [
        bind("escape", "back", "back"),
        *ENTRY_BINDINGS,
        bind("u", "unit_sheet", "unit-sheet"),
    ]

    def __init__(self, tag: str) -> None:
        super().__init__()
        self.tag = tag
        self.sheet: FilterSheet | None = None

    def compose(self) -> ComposeResult:
        yield Header(icon="≋")
        yield DemoBanner()
        yield Wrapped(f"FILTER {self.tag}", id="sheet-title", classes="sheet-title")
        yield Wrapped(id="reference")
        with VerticalScroll(id="filter-body"):
            yield FilterPlot(id="plot")
            yield Static(LEGEND, id="legend", markup=False)
            yield Wrapped(id="forecast")
            yield Wrapped(id="cold")
            yield Wrapped(id="life")
            yield Wrapped(id="notes")
            yield Static("Element history (newest first)", classes="section", markup=False)
            yield RowTable(id="elements")
        yield KeyStrip()

    def on_mount(self) -> None:
        self.query_one("#filter-body").focus()
        if self.sheet is not None:  # read before the screen was first shown (show_filled)
            self.show_sheet(self.sheet)

    def show_tag(self, tag: str) -> None:
        """Make this (kept) sheet show another filter: nothing of the one before stays on show
        while the new one is read, and no read of the one before shows when it ends."""
        self.drop_reads(READ_GROUP)
        self.tag, self.sheet, self.loaded, self.shown_stamp = tag, None, False, None
        if not self.is_mounted:
            return
        self.query_one("#sheet-title", Wrapped).show(f"FILTER {tag}")
        for part in ("#reference", "#cold", "#life", "#notes"):
            self.query_one(part, Wrapped).show()
        self.query_one("#forecast", Wrapped).show("reading the book…")
        self.query_one("#elements", RowTable).clear()
        self.query_one(FilterPlot).show(None, self.sb.prefs)
        self.query_one("#filter-body", VerticalScroll).scroll_home(animate=False)

    def show_filled(self, tag: str, sheet: FilterSheet, stamp: tuple[object, ...]) -> None:
        """Make this (kept) sheet show another filter, read already (as the book stood at
        `stamp`): shown again, it reads again only if the book has changed since. Not
        mounted yet (its first showing), it is drawn once as it is mounted. A read of its
        own still under way (of the filter before) is dropped."""
        self.drop_reads(READ_GROUP)
        self.tag = tag
        self.shown_stamp, self.shown_at = stamp, time.monotonic()
        if not self.is_mounted:
            self.sheet = sheet
            return
        self.show_sheet(sheet)
        self.query_one("#filter-body", VerticalScroll).scroll_home(animate=False)

    def reload(self) -> None:
        tag = self.tag
        self.read_in_thread(lambda b: filter_sheet(b, tag), self.show_sheet, READ_GROUP)

    def action_reload(self) -> None:
        self.reload()

    def action_back(self) -> None:
        self.app.pop_screen()

    def action_unit_sheet(self) -> None:
        if self.sheet is not None:
            self.sb.open_sheet("unit", self.sheet.unit.tag, self.sheet.unit.tag)

    def target(self) -> Target | None:
        unit = self.sheet.unit.tag if self.sheet else ""
        return Target("filter", self.tag, unit)

    @staticmethod
    def element_age(sheet: FilterSheet) -> str:
        """On an hour-meter unit the age is hours run, and the calendar days since the element
        went in are said beside it (issue 24: "31 d (747 h)" was hours run ÷ 24)."""
        st = sheet.status
        if not sheet.uses_hours:
            return fmt.age_text(st.element_age_h)
        text = fmt.age_text(st.element_age_h, operating=True)
        if st.changed_at is not None:
            days = (sheet.as_of - st.changed_at).total_seconds() / 86400
            text += f" (fitted {days:.0f} d ago)"
        return text

    def show_sheet(self, sheet: FilterSheet) -> None:
        self.sheet = sheet
        prefs, local = self.sb.prefs, self.sb.book.local_zone()
        pos, st = sheet.position, sheet.status
        rating = ""
        if pos.rating_um:
            rating = f" · {pos.rating_um:g} µm {pos.rating_basis}"
            if pos.beta_ratio:
                rating += f", β {pos.beta_ratio:g}"
        self.query_one("#sheet-title", Wrapped).show(
            (
                f"FILTER {pos.tag}",
                f"{pos.kind} on {pos.unit}",
                f"element {pos.element}" if pos.element else "",
                rating.removeprefix(" · "),
                "" if pos.gauge else "indicator only",
            )
        )
        self.query_one("#reference", Wrapped).show(
            (
                f"Ref {fmt.in_units(st.reference, prefs)}",
                "limit/bypass/clean "
                + "/".join(
                    fmt.pressure(v, prefs, unit=False)
                    for v in (st.limit_bar, st.bypass_bar, st.clean_bar)
                )
                + f" {fmt.p_unit(prefs)}",
            )
        )
        self.query_one(FilterPlot).show(sheet, prefs)

        lines: list[tuple[str, ...] | str] = []
        if st.dp_ref_bar is None and st.dp_bar is None:
            ref = "Now: no ΔP read on this element yet"
        else:
            ref = f"Now: {fmt.pressure(st.dp_ref_bar, prefs)} at reference" + (
                f" ({st.percent_of_limit:.0f} % of limit)"
                if st.percent_of_limit is not None
                else ""
            )
        gauge = ""
        if st.dp_bar is not None:
            gauge = f"gauge {fmt.pressure(st.dp_bar, prefs)}"
            if st.temp_c is not None:
                gauge += f" at {fmt.temperature(st.temp_c, prefs)}"
        readings = f"{st.readings_since_change} reading" + (
            "" if st.readings_since_change == 1 else "s"
        )
        lines.append(
            (
                ref,
                gauge,
                f"indicator {st.indicator}" if st.indicator else "",
                f"element age {self.element_age(sheet)}, {readings}",
            )
        )
        if st.due is not None:
            lines.append(f"Change due {fmt.due_text(st.due, local)}")
        else:
            lines.append(f"Change due: {fmt.STATE_WORDS.get(st.state, st.state)}")
        if st.next_reading is not None:
            text = fmt.read_again_text(st.next_reading, st.next_rule, local)
            lines.append(text[0].upper() + text[1:])
        if st.bypass_due is not None:
            lines.append(f"Bypass would open {fmt.due_text(st.bypass_due, local)}")
        basis = BASIS_WORDS.get(st.basis, st.basis)
        model = st.forecast.model if st.forecast and st.forecast.model else ""
        if model and model.lower() not in basis.lower():
            basis += f" (model: {model})"
        lines.append(f"Basis: {basis}")
        self.query_one("#forecast", Wrapped).show(*lines)

        cold = st.cold
        if cold is None:
            cold_text = "Cold start: not computed (needs a reading, the fluid and the bypass)"
        else:
            cold_text = (
                f"Cold start at {fmt.temperature(cold.start_temp_c, prefs)}: ΔP would be "
                f"{fmt.pressure(cold.dp_at_start_bar, prefs)} against a "
                f"{fmt.pressure(cold.bypass_bar, prefs)} bypass: "
            )
            if cold.bypasses:
                below = (
                    f" below {fmt.temperature(cold.bypass_below_c, prefs)}"
                    if cold.bypass_below_c is not None
                    else ""
                )
                cold_text += f"BYPASS OPENS{below}, unfiltered oil on every cold start"
            else:
                cold_text += "stays shut"
                if cold.bypass_below_c is not None and math.isfinite(cold.bypass_below_c):
                    cold_text += (
                        f" (it would open below {fmt.temperature(cold.bypass_below_c, prefs)})"
                    )
        self.query_one("#cold", Wrapped).show(cold_text)

        life = st.life
        if life is None:
            life_text = "Service life: not enough finished elements yet"
        else:
            pooled = " with like positions" if life.pooled else ""
            life_text = (
                f"Service life ({life.n_failed} reached the limit, {life.n_censored} taken out "
                f"early{pooled}): 10 % reach the limit by {fmt.age_text(life.b10_h, sheet.uses_hours)}, half by "
                f"{fmt.age_text(life.b50_h, sheet.uses_hours)}"
            )
        self.query_one("#life", Wrapped).show(life_text)

        notes: list[Text | str] = []
        if st.flags:
            notes.append(Text("Flags: ") + fmt.flag_text(st.flags))
        notes += [fmt.in_units(n, prefs) for n in st.notes]
        self.query_one("#notes", Wrapped).show(*notes)

        rows = []
        for i, el in enumerate(sheet.elements):
            cells = (
                Text(fmt.day(el.fitted_at, local) if el.fitted_at else "before book"),
                Text(fmt.day(el.removed_at, local) if el.removed_at else "in service"),
                Text(fmt.age_text(el.life_h, sheet.uses_hours)),
                Text(el.reason),
                Text("yes" if el.reached_limit else ("–" if el.removed_at is None else "no")),
                Text(fmt.pressure(el.peak_dp_ref_bar, prefs, unit=False)),
                Text(str(el.readings)),
                Text(el.condition),
                Text(el.batch),
            )
            rows.append((str(i), cells))
        self.query_one("#elements", RowTable).show(
            [
                ("Fitted", "fitted"),
                ("Out", "out"),
                ("Life", "life"),
                ("Why out", "why"),
                ("At limit", "limit"),
                (f"Peak ref {fmt.p_unit(prefs)}", "peak"),
                ("Readings", "readings"),
                ("Found", "found"),
                ("Next batch", "batch"),
            ],
            rows,
        )
        self.loaded = True

"""Reading: a ΔP off the gauge and/or the indicator's state, with the fluid temperature."""

from __future__ import annotations

from store.ledger.entries import Entry, Reading
from store.ledger.journal import BYPASS_OPEN, BYPASS_STEPS, bypass_head
from store.ledger.register import FilterPosition, find
from store.sheets import last_temp_c, meter_estimate_h, reading_doubts
from tui.forms.base import EntryForm
from tui.forms.validators import DpValidator, RangeValidator, TemperatureValidator
from tui.widgets import fmt
from tui.widgets.field import Spec

INDICATOR_CHOICES = [("clean", "clean"), ("dirty", "dirty"), ("in bypass", "bypass")]


class ReadingForm(EntryForm):
    kind = "reading"
    heading = "Reading: ΔP and temperature"
    clues = {**EntryForm.clues, "filter": "filter", "δp": "dp", "indicator": "indicator"}

    def specs(self) -> list[Spec]:
        book, prefs = self.sb.book, self.sb.prefs
        position = find(book, FilterPosition, self.target) if self.target else None
        temp_hint, temp_text = "blank: not read", ""
        hours_hint = ""
        if position is not None:
            meter = meter_estimate_h(book, position.unit, book.now())
            if meter is not None:
                hours_hint = f"about {meter:.0f} (running rate)"
            # Never pre-filled: a temperature nobody read must not be stored as measured. Left
            # blank, the reading is stored without one and normalised at the unit's normal
            # temperature, which the sheets and the export say was assumed.
            last = last_temp_c(book, position.unit)
            if last is not None:
                shown = f"{fmt.input_temperature(last, prefs)} {fmt.t_unit(prefs)}"
                temp_hint = f"blank: not read (last {shown})"
            self.heading = f"Reading on {position.tag} ({position.kind}, unit {position.unit})"
        if not self.target:
            self.first = "filter"
        elif position is not None and not position.gauge:
            self.first = "indicator"
        else:
            self.first = "dp"
        return [
            self.tag_spec(
                "filter", FilterPosition, "filter", position.tag if position else self.target
            ),
            Spec(
                "dp",
                f"ΔP {fmt.p_unit(prefs)}",
                self.preset.get("dp", ""),
                [DpValidator(prefs.pressure)],
                hint="as read off the gauge",
            ),
            Spec(
                "temp",
                f"Temp {fmt.t_unit(prefs)}",
                self.preset.get("temp", temp_text),
                [TemperatureValidator(prefs.temperature)],
                hint=temp_hint,
            ),
            Spec("indicator", "Indicator", "", options=INDICATOR_CHOICES),
            Spec(
                "flow",
                "Flow L/min",
                "",
                [RangeValidator("flow_lpm")],
                hint="blank: normal flow",
            ),
            Spec(
                "hours",
                "Hour meter h",
                self.preset.get("hours", ""),
                [RangeValidator("hours")],
                hint=hours_hint,
            ),
            *self.common_specs(),
        ]

    def question(self, entry: Entry) -> tuple[str, str] | None:
        if not isinstance(entry, Reading):
            return None
        position = find(self.sb.book, FilterPosition, entry.filter)
        if position is None:
            return None
        prefs = self.sb.prefs
        doubts = [f"• {fmt.in_units(d, prefs)}" for d in reading_doubts(self.sb.book, entry)]
        what = bypass_head(
            position, entry.dp_bar, entry.indicator, lambda bar: fmt.pressure(bar, prefs)
        )
        if what is None and not doubts:
            return None
        parts = ["\n".join(doubts)] if doubts else []
        if what is not None:
            parts.append(
                f"{what}: {BYPASS_OPEN.upper()}.\n" + "\n".join(f"• {s}" for s in BYPASS_STEPS)
            )
        return f"Save this reading on {position.tag}?", "\n".join(parts)

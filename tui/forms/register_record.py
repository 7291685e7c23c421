"""Add or edit one register row: technician, fluid, unit, filter position or breather.

Quantities are typed in the user's units and stored canonical. Every change goes through
`store.ledger.register.add/update`, which records who changed what, old -> new.
"""

from __future__ import annotations

import sqlite3
from dataclasses import MISSING, fields, replace
from typing import Any

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Button, Input, Static

from store.base import validate as validate_value
from store.base.errors import BookError
from store.base.units import parse_pressure_bar, parse_temperature_c, parse_volume_l
from store.base.validate import FILTER_KINDS
from store.ledger import register
from store.ledger.register import Breather, FilterPosition, Fluid, Technician, Unit
from tui.base.workers import write_behind
from tui.forms.base import FIELD_KEYS, SAVE_KEYS, SavesAtKey, fault_field, write_problem
from tui.forms.confirm import ConfirmScreen
from tui.forms.validators import (
    CodeValidator,
    DpValidator,
    NewTagValidator,
    RangeValidator,
    TemperatureValidator,
    VolumeValidator,
)
from tui.widgets import fmt
from tui.widgets.field import FieldRow, Spec

WHAT = {
    Technician: "technician",
    Fluid: "fluid",
    Unit: "unit",
    FilterPosition: "filter position",
    Breather: "breather",
}

# words in a refusal -> the field it is about (see fault_field)
CLUES = {
    "bypass": "bypass_bar",
    "limit": "limit_bar",
    "clean": "clean_bar",
    "coldest": "coldest_start_c",
    "temperature": "normal_temp_c",
    "ν100": "nu100_cst",
    "ν40": "nu40_cst",
    "iso vg": "iso_vg",
    "kind": "kind",
    "code": "target_code",
    "time zone": "tag",
    "tag": "tag",
    "unit": "unit",
    "fluid": "fluid",
    "rating": "rating_um",
    "flow": "normal_flow_lpm",
}

LABELS = {
    "tag": "Tag",
    "name": "Name",
    "active": "Active",
    "iso_vg": "ISO VG",
    "nu40_cst": "ν40 mm²/s",
    "nu100_cst": "ν100 mm²/s",
    "vi": "Visc. index",
    "density_kg_l": "Density kg/L",
    "area": "Area / line",
    "fluid": "Fluid",
    "hour_meter": "Hour meter",
    "target_code": "Target code",
    "unit": "Unit",
    "kind": "Kind",
    "element": "Element part",
    "rating_um": "Rating µm",
    "rating_basis": "Rating basis",
    "beta_ratio": "β ratio",
    "rated_flow_lpm": "Rated L/min",
    "normal_flow_lpm": "Normal L/min",
    "gauge": "Has ΔP gauge",
    "reading_interval_h": "Read every h",
    "swap_interval_d": "Swap every d",
}
HINTS = {
    "limit_bar": "change the element at this ΔP",
    "bypass_bar": "bypass cracking ΔP",
    "clean_bar": "new element at reference",
    "coldest_start_c": "coldest expected start",
    "target_code": "ISO 4406, e.g. 17/15/12",
    "normal_flow_lpm": "blank: no flow correction",
    "iso_vg": "ISO 3448 grade",
}


class RegisterForm(SavesAtKey, ModalScreen[Any]):
    """Dismisses with the saved record (or None on Esc)."""

    BINDINGS = [
        *SAVE_KEYS,
        Binding("escape", "cancel", "Cancel", id="form-cancel"),
        # Tab moves on at the moment it is typed, before the keys after it are routed: typed
        # fast ("4.1", Tab, "52"), or sent by a scanner, the next keys land in the next field.
        *FIELD_KEYS,
    ]

    def __init__(self, cls: type, record: Any = None) -> None:
        super().__init__()
        self.cls = cls
        self.record = record

    @property
    def sb(self) -> Any:
        return self.app

    def specs(self) -> list[Spec]:
        book, prefs = self.sb.book, self.sb.prefs
        rec = self.record
        out = []
        for f in fields(self.cls):
            name = f.name
            if rec is not None:
                current = getattr(rec, name)
            else:
                current = None if f.default is MISSING else f.default
            label = LABELS.get(name, name)
            spec = Spec(
                name, label, "" if current is None else str(current), hint=HINTS.get(name, "")
            )
            if name == "tag":
                spec.required = True
                spec.disabled = rec is not None
                if rec is None:
                    spec.validators = [
                        NewTagValidator(
                            lambda: register.tags(book, register.TABLES[self.cls]),
                            WHAT[self.cls],
                        )
                    ]
                    if self.cls in (FilterPosition, Breather):
                        other = "breathers" if self.cls is FilterPosition else "filters"
                        mine = register.TABLES[self.cls]
                        spec.validators = [
                            NewTagValidator(
                                lambda m=mine, o=other: (
                                    register.tags(book, m) + register.tags(book, o)
                                ),
                                WHAT[self.cls],
                            )
                        ]
            elif name in register.BOOL_FIELDS:
                spec.check = bool(current)
            elif name.endswith("_bar"):
                spec.label = f"{name.removesuffix('_bar').capitalize()} {fmt.p_unit(prefs)}"
                spec.value = fmt.input_pressure(current, prefs)
                spec.validators = [DpValidator(prefs.pressure)]
            elif name.endswith("_temp_c") or name == "coldest_start_c":
                base = {
                    "normal_temp_c": "Normal",
                    "max_temp_c": "Limit",
                    "coldest_start_c": "Cold start",
                }
                spec.label = f"{base[name]} {fmt.t_unit(prefs)}"
                spec.value = fmt.input_temperature(current, prefs)
                spec.validators = [TemperatureValidator(prefs.temperature)]
                spec.required = True
            elif name == "reservoir_l":
                spec.label = f"Reservoir {fmt.v_unit(prefs)}"
                spec.value = fmt.input_volume(current, prefs)
                spec.validators = [VolumeValidator(prefs.volume, "reservoir_l")]
            elif name == "target_code":
                spec.validators = [CodeValidator()]
            elif name in ("unit",):
                spec.options = [
                    (f"{u.tag} {u.name}".strip(), u.tag) for u in register.list_all(book, Unit)
                ]
                spec.required = True
            elif name == "fluid":
                spec.options = [
                    (f"{x.tag} {x.name}".strip(), x.tag) for x in register.list_all(book, Fluid)
                ]
            elif name == "kind" and self.cls is FilterPosition:
                spec.options = [(k, k) for k in FILTER_KINDS]
                spec.required = True
            elif name == "kind" and self.cls is Breather:
                spec.options = [("desiccant", "desiccant"), ("plain", "plain")]
                spec.required = True
            elif name == "rating_basis":
                spec.options = [("absolute", "absolute"), ("nominal", "nominal")]
                spec.required = True
            elif name in validate_value.RANGES:
                spec.validators = [RangeValidator(name)]
                if name in ("reading_interval_h", "swap_interval_d"):
                    spec.required = True
            out.append(spec)
        return out

    def compose(self) -> ComposeResult:
        verb = "Edit" if self.record is not None else "Add"
        heading = f"{verb} {WHAT[self.cls]}" + (f" {self.record.tag}" if self.record else "")
        with Vertical(id="form-box", classes="form-box"):
            yield Static(heading, id="form-title", classes="form-title", markup=False)
            with VerticalScroll(id="form-fields"):
                for spec in self.specs():
                    yield FieldRow(spec)
            yield Static("", id="form-msg", classes="form-msg", markup=False)
            with Horizontal(classes="form-buttons"):
                yield Button("Save  ctrl+s", id="save", variant="primary", compact=True)
                yield Button("Cancel  esc", id="cancel", compact=True)

    def on_mount(self) -> None:
        for inp in self.query(Input):
            inp.cursor_blink = self.sb.cursor_blink
        rows = [r for r in self.query(FieldRow) if not r.spec.disabled]
        if rows:
            rows[0].control.focus()

    def say(self, text: str, bad: bool = True) -> None:
        msg = self.query_one("#form-msg", Static)
        msg.update(text)
        msg.set_class(bad, "-bad")

    def on_button_pressed(self, event: Button.Pressed) -> None:
        event.stop()
        self.action_save() if event.button.id == "save" else self.action_cancel()

    def action_cancel(self) -> None:
        if self.saving:  # a save under way cannot be called back: it lands, then the form goes
            self.say("Saving… (it cannot be called back; the form closes once it is saved)")
            return
        self.dismiss(None)

    def parsed(self, typed: dict[str, Any]) -> dict[str, Any]:
        """Field texts -> stored values (canonical units)."""
        prefs = self.sb.prefs
        out: dict[str, Any] = {}
        for row in self.query(FieldRow):
            name, value = row.spec.name, typed[row.spec.name]
            if isinstance(value, bool):
                out[name] = value
            elif value in (None, ""):
                out[name] = None if name not in ("name", "area", "element") else ""
            elif name.endswith("_bar"):
                out[name] = parse_pressure_bar(value, prefs.pressure)
            elif name.endswith("_temp_c") or name == "coldest_start_c":
                out[name] = parse_temperature_c(value, prefs.temperature)
            elif name == "reservoir_l":
                out[name] = parse_volume_l(value, prefs.volume)
            else:
                out[name] = register.parse_field(self.cls, name, value)
        return out

    def save_now(self, typed: dict[str, Any]) -> None:
        """Check and save the fields as they stood at the save key."""
        self.saving = False
        rows = list(self.query(FieldRow))
        bad = [(r, p) for r in rows if (p := r.check_value(force=True, value=typed[r.spec.name]))]
        if bad:
            bad[0][0].control.focus()
            self.say("Not saved: check " + ", ".join(r.spec.label for r, _ in bad) + ".")
            return
        try:
            values = self.parsed(typed)
            if self.record is not None:
                changes = {
                    k: v for k, v in values.items() if k != "tag" and getattr(self.record, k) != v
                }
                if not changes:
                    self.dismiss(None)
                    return
                values = changes
            doubt = self.doubt(values)
        except (BookError, sqlite3.Error, OSError) as exc:
            self.refused(exc)
            return
        if doubt is None:
            self.write(values)
            return

        def answered(yes: bool | None) -> None:
            if yes:
                self.write(values)
            else:
                self.say("Not saved yet: change what is wrong, or save again to confirm.")

        self.app.push_screen(ConfirmScreen(f"Save {self.cls.__name__} as it is?", doubt), answered)

    def doubt(self, values: dict[str, Any]) -> str | None:
        """Settings that can be true but look mistyped: asked about before saving."""
        if self.cls is not FilterPosition:
            return None
        record = self.cls(**values) if self.record is None else replace(self.record, **values)
        return register.sizing_doubt(record)

    def write(self, wanted: dict[str, Any]) -> None:
        """Save in a thread (tui/base/workers.py write_behind); a second save meanwhile is
        refused."""
        by, cls, record = self.sb.tech, self.cls, self.record

        def job(book: Any) -> Any:
            if record is None:
                return register.add(book, cls(**wanted), by=by)
            return register.update(book, cls, record.tag, wanted, by=by)

        self.saving = True
        self.say("Saving…", bad=False)
        write_behind(
            self, self.sb.book.path, self.sb.session.clock, job, self.written, self.refused
        )

    def written(self, saved: Any) -> None:
        self.saving = False
        self.dismiss(saved)

    def refused(self, exc: BaseException) -> None:
        self.saving = False
        problem = write_problem(exc)
        self.say("Not saved: " + problem)
        rows = {row.spec.name: row for row in self.query(FieldRow) if not row.spec.disabled}
        name = fault_field(problem, CLUES) if isinstance(exc, BookError) else None
        if name in rows:  # the cursor goes to the field at fault
            rows[name].control.focus()
            rows[name].show("see below")

"""Register: the plant's units, fluids, filters, breathers, technicians and shift pattern,
and this laptop's preferences (units of measure, theme)."""

from __future__ import annotations

from typing import Any

from rich.text import Text
from textual.app import ComposeResult
from textual.containers import Vertical
from textual.widgets import DataTable, Header, Select, Static, TabbedContent, TabPane

from store.base.errors import BookError
from store.base.prefs import THEMES
from store.base.timeutil import local_text
from store.base.units import PRESSURE_UNITS, TEMPERATURE_UNITS, VOLUME_UNITS
from store.ledger import register
from store.ledger.register import TABLES, WHAT, Breather, FilterPosition, Fluid, Technician, Unit
from store.sheets import SETUP_ORDER, next_setup_step
from tui.base.keys import bind
from tui.base.render import change_text
from tui.base.workers import guarded
from tui.forms.register_record import RegisterForm
from tui.screens.ask import AskScreen
from tui.screens.common import BookScreen
from tui.widgets import fmt
from tui.widgets.banner import DemoBanner
from tui.widgets.keystrip import KeyStrip
from tui.widgets.rowtable import RowTable

TABS = {
    "units": Unit,
    "filters": FilterPosition,
    "breathers": Breather,
    "fluids": Fluid,
    "techs": Technician,
}
HISTORY_LINES = 4  # the newest changes shown under the table; the CLI shows them all
THEME_WORDS = {"dark": "dark", "light": "light", "contrast": "high contrast (sunlight)"}


def columns(cls: type, prefs: Any) -> list[tuple[str, Any]]:
    """(heading, value-of-record) pairs for one register table."""
    p, t, v = fmt.p_unit(prefs), fmt.t_unit(prefs), fmt.v_unit(prefs)
    if cls is Unit:
        return [
            ("Tag", lambda r: r.tag),
            ("Name", lambda r: r.name),
            ("Area", lambda r: r.area),
            ("Fluid", lambda r: r.fluid or "–"),
            (f"Tank {v}", lambda r: fmt.volume(r.reservoir_l, prefs, unit=False)),
            (f"Normal {t}", lambda r: fmt.temperature(r.normal_temp_c, prefs, unit=False)),
            (f"Limit {t}", lambda r: fmt.temperature(r.max_temp_c, prefs, unit=False)),
            (f"Cold {t}", lambda r: fmt.temperature(r.coldest_start_c, prefs, unit=False)),
            ("Hour meter", lambda r: "yes" if r.hour_meter else "no"),
            ("Target", lambda r: r.target_code or "–"),
        ]
    if cls is FilterPosition:
        return [
            ("Tag", lambda r: r.tag),
            ("Unit", lambda r: r.unit),
            ("Kind", lambda r: r.kind),
            (f"Limit {p}", lambda r: fmt.pressure(r.limit_bar, prefs, unit=False)),
            (f"Bypass {p}", lambda r: fmt.pressure(r.bypass_bar, prefs, unit=False)),
            (f"Clean {p}", lambda r: fmt.pressure(r.clean_bar, prefs, unit=False)),
            (
                "Rating",
                lambda r: f"{r.rating_um:g} µm {r.rating_basis[:3]}" if r.rating_um else "–",
            ),
            ("Element", lambda r: r.element),
            ("L/min", lambda r: f"{r.normal_flow_lpm:g}" if r.normal_flow_lpm else "–"),
            ("Gauge", lambda r: "gauge" if r.gauge else "indicator"),
            ("Every h", lambda r: f"{r.reading_interval_h:g}"),
        ]
    if cls is Breather:
        return [
            ("Tag", lambda r: r.tag),
            ("Unit", lambda r: r.unit),
            ("Kind", lambda r: r.kind),
            ("Rating", lambda r: f"{r.rating_um:g} µm" if r.rating_um else "–"),
            ("Swap every", lambda r: f"{r.swap_interval_d:g} d"),
        ]
    if cls is Fluid:
        return [
            ("Tag", lambda r: r.tag),
            ("Name", lambda r: r.name),
            ("ISO VG", lambda r: r.iso_vg or "–"),
            ("ν40 mm²/s", lambda r: f"{r.nu40_cst:g}" if r.nu40_cst else "–"),
            ("ν100 mm²/s", lambda r: f"{r.nu100_cst:g}" if r.nu100_cst else "–"),
            ("VI", lambda r: f"{r.vi:g}" if r.vi else "–"),
            ("kg/L", lambda r: f"{r.density_kg_l:g}" if r.density_kg_l else "–"),
        ]
    return [
        ("Initials", lambda r: r.tag),
        ("Name", lambda r: r.name),
        ("Active", lambda r: "yes" if r.active else "no"),
    ]


class RegisterScreen(BookScreen):
    HELP_NAME = "the register"
    AUTO_FOCUS = "#table-units"
    BINDINGS = [
        bind("a", "add", "reg-add"),
        bind("e", "edit", "reg-edit"),
        bind("left_square_bracket", "tab(-1)", "reg-prev"),
        bind("right_square_bracket", "tab(1)", "reg-next"),
    ]

    def __init__(self) -> None:
        super().__init__(id="register")

    def compose(self) -> ComposeResult:
        yield Header(icon="≋")
        yield DemoBanner()
        with TabbedContent(id="reg-tabs"):
            for name, label in (
                ("units", "Units"),
                ("filters", "Filters"),
                ("breathers", "Breathers"),
                ("fluids", "Fluids"),
                ("techs", "Techs"),
                ("shifts", "Shifts"),
                ("prefs", "Prefs"),
            ):
                with TabPane(label, id=f"tab-{name}"):
                    if name == "prefs":
                        yield from self.compose_prefs()
                    elif name == "shifts":
                        yield Static("", id="shift-help", markup=False)
                        yield DataTable(id="table-shifts", cursor_type="row")
                    else:
                        # a long name or note gives room to the columns after it
                        yield RowTable(id=f"table-{name}", flexible="Name", flex_min=20)
        yield Static("", id="reg-history", markup=False)
        yield KeyStrip()

    def compose_prefs(self) -> ComposeResult:
        prefs = self.sb.prefs
        with Vertical(id="prefs-box"):
            for name, label, choices, value in (
                ("pressure", "Pressure", [(u, u) for u in PRESSURE_UNITS], prefs.pressure),
                (
                    "temperature",
                    "Temperature",
                    [(f"°{u}", u) for u in TEMPERATURE_UNITS],
                    prefs.temperature,
                ),
                ("volume", "Volume", [(u, u) for u in VOLUME_UNITS], prefs.volume),
                ("theme", "Theme", [(THEME_WORDS[t], t) for t in THEMES], prefs.theme),
            ):
                values = [v for _, v in choices]
                match = next((v for v in values if v.lower() == value.lower()), values[0])
                yield Static(label, classes="pref-label", markup=False)
                yield Select(
                    choices, value=match, allow_blank=False, compact=True, id=f"pref-{name}"
                )
            yield Static("", id="pref-who", markup=False)

    def on_mount(self) -> None:
        # A register still being set up opens at the first-run guide's next step (yourself,
        # the fluids, the units, ...), not at the units tab whatever is missing; reload moves
        # on to the next step once the one on show is done.
        self.guiding = bool(next_setup_step(self.sb.book))
        if self.guiding:
            self.call_after_refresh(self.follow_guide)
        else:
            self.query_one("#table-units", DataTable).focus()

    def follow_guide(self) -> None:
        step = next_setup_step(self.sb.book)
        if not step:
            self.guiding = False
            return
        active = self.active()
        done = active in SETUP_ORDER and SETUP_ORDER.index(active) < SETUP_ORDER.index(step)
        if active != step and (done or active not in SETUP_ORDER or not self.loaded):
            self.show_tab(step)

    @guarded
    def reload(self) -> None:
        """The register is small and read on the main thread (no maths)."""
        prefs = self.sb.prefs
        for name, cls in TABS.items():
            cols = columns(cls, prefs)
            self.query_one(f"#table-{name}", RowTable).show(
                [(h, h) for h, _ in cols],
                [
                    (record.tag, [Text(str(get(record))) for _, get in cols])
                    for record in register.list_all(self.sb.book, cls)
                ],
            )
        shifts = self.query_one("#table-shifts", DataTable)
        shifts.clear(columns=True)
        shifts.add_columns("Shift", "Starts")
        for s in register.list_shifts(self.sb.book):
            shifts.add_row(Text(s.name), Text(s.starts), key=s.name)
        self.query_one("#shift-help", Static).update(
            "A shift runs until the next one starts. e: edit the pattern."
        )
        who = self.sb.tech or "nobody"
        self.query_one("#pref-who", Static).update(
            f"Signed in on this laptop: {who}  (i: change)\nLogbook: {self.sb.book.path}"
        )
        self.show_history()
        if getattr(self, "guiding", False):
            self.follow_guide()
        self.loaded = True

    # ---- the highlighted record's history ----

    def highlighted(self) -> tuple[str, str] | None:
        """(tag, what) of the record the cursor is on, or the shift pattern."""
        name = self.active()
        if name == "shifts":
            return "PATTERN", "shifts"
        if name not in TABS:
            return None
        table = self.query_one(f"#table-{name}", DataTable)
        if not table.row_count:
            return None
        key = table.coordinate_to_cell_key(table.cursor_coordinate).row_key.value
        return str(key), WHAT[TABLES[TABS[name]]]

    @guarded
    def show_history(self) -> None:
        pane = self.query_one("#reg-history", Static)
        record = self.highlighted()
        pane.display = record is not None
        if record is None:
            return
        tag, what = record
        changes = register.history(self.sb.book, tag, what)
        name = "The shift pattern" if what == "shifts" else f"{tag}"
        if not changes:
            pane.update(f"{name}: no changes recorded")
            return
        shown = changes[-HISTORY_LINES:]
        head = f"{name} history, " + (
            f"last {len(shown)} of {len(changes)} (all: sumpbook register history {tag})"
            if len(shown) < len(changes)
            else f"{len(changes)} change{'s' if len(changes) > 1 else ''}"
        )
        local = self.sb.book.local_zone()
        lines = [
            f"{local_text(c.at, local)}  {c.by or '–':<4} "
            f"{'(new record)' if c.field == '*' else c.field}  {change_text(c)}"
            for c in shown
        ]
        pane.update("\n".join([head, *lines]))

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        self.show_history()

    # ---- tabs ----

    def active(self) -> str:
        return (self.query_one(TabbedContent).active or "tab-units").removeprefix("tab-")

    def action_tab(self, step: int) -> None:
        names = ["units", "filters", "breathers", "fluids", "techs", "shifts", "prefs"]
        i = (names.index(self.active()) + step) % len(names)
        self.show_tab(names[i])

    def show_tab(self, name: str) -> None:
        tabs = self.query_one(TabbedContent)
        tabs.active = f"tab-{name}"
        target = f"#table-{name}" if name != "prefs" else "#pref-pressure"
        self.query_one(target).focus()

    def on_tabbed_content_tab_activated(self, event: TabbedContent.TabActivated) -> None:
        name = self.active()
        if name != "prefs" and self.query(f"#table-{name}"):
            self.query_one(f"#table-{name}").focus()
        self.show_history()

    # ---- add and edit ----

    @guarded
    def action_add(self) -> None:
        name = self.active()
        if name == "shifts":
            self.action_edit()
        elif name in TABS:
            self.app.push_screen(RegisterForm(TABS[name]), self.saved)

    @guarded
    def action_edit(self) -> None:
        name = self.active()
        if name == "shifts":
            self.edit_shifts()
            return
        if name not in TABS:
            return
        table = self.query_one(f"#table-{name}", DataTable)
        if not table.row_count:
            self.action_add()
            return
        tag = str(table.coordinate_to_cell_key(table.cursor_coordinate).row_key.value)
        record = register.get(self.sb.book, TABS[name], tag)
        self.app.push_screen(RegisterForm(TABS[name], record), self.saved)

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        self.action_edit()

    def saved(self, record: Any) -> None:
        if record is not None:
            self.notify(f"Register: {record.tag} saved (the change is recorded with who and when)")
            self.sb.book_changed()
        self.reload()

    @guarded
    def edit_shifts(self) -> None:
        current = " ".join(f"{s.name}={s.starts}" for s in register.list_shifts(self.sb.book))

        def accept(text: str) -> str | None:
            pairs = []
            for item in text.split():
                name, sep, starts = item.partition("=")
                if not sep:
                    return f"'{item}' is not NAME=HH:MM"
                pairs.append((name, starts))
            register.set_shifts(self.sb.book, pairs, by=self.sb.tech)
            return None

        self.app.push_screen(
            AskScreen(
                "Shift pattern (NAME=HH:MM, in the order they run):",
                current or "early=06:00 late=14:00 night=22:00",
                accept,
                blink=self.sb.cursor_blink,
            ),
            lambda _: self.reload(),
        )

    # ---- preferences ----

    def on_select_changed(self, event: Select.Changed) -> None:
        sid = event.select.id or ""
        if not sid.startswith("pref-") or event.value is Select.NULL:
            return
        key = sid.removeprefix("pref-")
        if str(getattr(self.sb.prefs, key)).lower() == str(event.value).lower():
            return
        try:
            self.sb.change_prefs(**{key: str(event.value)})
        except (BookError, OSError) as exc:
            self.notify(f"Preference not saved: {exc}", severity="error")
            return
        self.reload()

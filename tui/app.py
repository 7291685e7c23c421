"""The Textual app: bindings and screen routing. Screens, forms and widgets live beside it."""

from __future__ import annotations

import asyncio
import gc
import os
import sqlite3
import sys
import time
from collections.abc import Callable, Sequence
from concurrent.futures import Future
from dataclasses import replace
from importlib import import_module
from pathlib import Path
from typing import TYPE_CHECKING, Any

from textual import events, work
from textual.app import App, SystemCommand
from textual.binding import Binding
from textual.filter import LineFilter
from textual.reactive import reactive
from textual.screen import ModalScreen, Screen
from textual.theme import Theme

from store import Book, deep_check, open_book, record
from store.base import prefs as laptop
from store.base.collector import held_full_pass, hold_collector, hold_full_passes
from store.base.errors import BookError
from store.base.session import Session, from_environ
from store.base.text import inert_line
from store.base.timeutil import parse_utc
from store.ledger import register
from store.ledger.register import Technician, Unit
from store.sheets import (
    TagHit,
    WatchRow,
    filter_sheet,
    tag_index,
)
from tui.base.keys import KEYS, bind
from tui.base.workers import guarded, read_early
from tui.screens.common import long_name
from tui.screens.watch import WatchData, WatchScreen, read_watch
from tui.widgets import fmt
from tui.widgets.inert import INERT_LINES

if TYPE_CHECKING:
    from tui.forms.base import EntrySaved

# Screens and forms beyond the watch list (the first-run guide, sign-in and help too) and the
# command palette's provider are imported when first opened, the backups and the throw-away
# books (store.db.backup, store.exchange.demo) when first used: the app's start (to a painted
# watch list) loads only what that list needs (tests/tui/test_app_lean_start.py).

FORMS = {  # entry kind -> (module under tui.forms, class)
    "reading": ("reading", "ReadingForm"),
    "change": ("change", "ChangeForm"),
    "breather": ("breather", "BreatherForm"),
    "topup": ("topup", "TopUpForm"),
    "sample": ("sample", "SampleForm"),
    "note": ("note", "NoteForm"),
    "void": ("void", "VoidForm"),
}


def _lazy(module: str, name: str) -> Any:
    return getattr(import_module(f"tui.{module}"), name)


def book_commands() -> Any:
    """The palette's provider of the book's commands (Textual takes a callable in COMMANDS)."""
    return _lazy("widgets.palette", "BookCommands")


def first_run_screen(new_path: Path | None = None) -> Screen:
    return _lazy("screens.first_run", "FirstRunScreen")(new_path)


def shift_log_screen() -> Screen:
    return _lazy("screens.shift_log", "ShiftLogScreen")()


def register_screen() -> Screen:
    return _lazy("screens.register", "RegisterScreen")()


def round_screen() -> Screen:
    return _lazy("screens.round_sheet", "RoundScreen")()


THEMES = {
    "dark": Theme(
        name="sumpbook-dark",
        primary="#7fb2c4",
        secondary="#b9a66e",
        accent="#e2b45a",
        warning="#e6a23c",
        error="#f07060",
        success="#86c08a",
        foreground="#e6e3dc",
        background="#15181b",
        surface="#1d2125",
        panel="#283037",
        dark=True,
    ),
    "light": Theme(
        name="sumpbook-light",
        primary="#1f5d78",
        secondary="#6d5a1e",
        accent="#8a5a00",
        warning="#9a5400",
        error="#b3261e",
        success="#2d6a31",
        foreground="#1b1b1b",
        background="#f2efe8",
        surface="#fbfaf7",
        panel="#dedad0",
        dark=False,
    ),
    "contrast": Theme(  # black on white, for sunlight on the screen
        name="sumpbook-contrast",
        primary="#000000",
        secondary="#000000",
        accent="#0000b0",
        warning="#7a3d00",
        error="#b00000",
        success="#005a00",
        foreground="#000000",
        background="#ffffff",
        surface="#ffffff",
        panel="#d8d8d8",
        boost="#000000",
        dark=False,
    ),
}
SHEET_WAIT_S = 0.15  # a filter sheet read by then is shown filled, see open_kept_sheet
IDLE_CHECK_S = 0.5  # how often the app looks whether a held full pass is due, see idle_pass
LET_COLLECTOR_RUN_S = 10.0  # the cyclic collector held at start at most this long, see on_load
HELP_SCREENS = (  # every full screen, for the help's "keys on other screens"
    ("screens.watch", "WatchScreen"),
    ("screens.unit_sheet", "UnitSheetScreen"),
    ("screens.filter_sheet", "FilterSheetScreen"),
    ("screens.shift_log", "ShiftLogScreen"),
    ("screens.register", "RegisterScreen"),
    ("screens.round_sheet", "RoundScreen"),
)
NAV = ("go", "quick_tag", "sign_in", "quit", "entry")


class SumpbookApp(App[None]):
    TITLE = "sumpbook"
    CSS_PATH = "app.tcss"
    COMMANDS = App.COMMANDS | {book_commands}
    MODES = {
        "watch": WatchScreen,
        "shift": shift_log_screen,
        "register": register_screen,
        "round": round_screen,
    }
    DEFAULT_MODE = "watch"
    BINDINGS = [
        bind("t,f2", "quick_tag", "quick-tag"),
        bind("1", "go('watch')", "go-watch"),
        bind("2", "go('shift')", "go-shift"),
        bind("3", "go('register')", "go-register"),
        bind("4", "go('round')", "go-round"),
        bind("i", "sign_in", "sign-in"),
        bind("question_mark,f1", "help", "help"),
        bind("ctrl+p", "command_palette", "palette"),
        bind("q", "quit", "quit"),
        bind("ctrl+q", "quit_now", "quit-now", show=False, priority=True),
    ]

    demo: reactive[bool] = reactive(False)

    def __init__(
        self,
        book: Book,
        demo: bool = False,
        cursor_blink: bool = True,
        new_path: Path | None = None,
        session: Session | None = None,
    ) -> None:
        super().__init__()
        self.book = book
        # Handed down by the command line; read here when the app is started without it.
        self.session = session or from_environ(os.environ)
        self.new_path = new_path  # a logbook asked for that does not exist yet: offer it
        fmt.clock = plant_clock(book)  # a date in another year than today shows its year
        self.set_reactive(SumpbookApp.demo, demo)
        self.cursor_blink = cursor_blink
        self.prefs = laptop.load(self.session.config_path)
        self.statuses: dict[str, WatchRow] = {}
        self.last_message = ""
        self.backup_tried = False
        self.quitting = False  # set on the way out: no key opens anything after it
        self.book_checked = False  # the background whole-file check has finished
        self.changes = 0  # counted by book_changed
        self.check_seconds = 0.0  # how long the last whole-file check (and preload) took
        self.kept_filter_sheet: Any = None  # see filter_sheet_for
        self.early_watch: Future[WatchData] | None = None  # the first list, read at load
        self.let_collector_run: Callable[[], None] = lambda: None  # on_load holds it
        self.let_full_passes: Callable[[], None] | None = None  # first_paint_done holds them
        self.last_input = time.monotonic()  # the last key or mouse event (see idle_pass)
        for theme in THEMES.values():
            self.register_theme(theme)
        self.start_theme(THEMES.get(self.prefs.theme, THEMES["dark"]))

    def start_theme(self, theme: Theme) -> None:
        """The laptop's theme, set before the app runs. Not through the `theme` reactive:
        its watcher queues a refresh of the whole CSS, on top of the one Textual runs when
        the first screen (a mode's) is mounted, which reads the stylesheet again with the
        theme's variables anyway. Here only what that watcher sets besides: the theme's
        classes and the ANSI colours' filter (Textual's own method, as the watcher calls it).
        A theme chosen later goes through the reactive (`change_prefs`);
        tests/tui/test_app_start_theme.py checks that both draw the same."""
        self.set_reactive(SumpbookApp.theme, theme.name)
        self.update_classes(
            {f"-theme-{theme.name}": True, "-dark-mode": theme.dark, "-light-mode": not theme.dark},
            update=False,
        )
        self._refresh_truecolor_filter(self.ansi_theme)

    # ---- who and what ----

    @property
    def tech(self) -> str:
        """The signed-in technician, if the book knows them."""
        tag = self.prefs.tech
        if tag and register.find(self.book, Technician, tag) is not None:
            return tag.upper()
        return ""

    def on_load(self) -> None:
        # Before the terminal and the screens are set up: read the first watch list meanwhile.
        self.early_watch = read_early(self.book.path, read_watch, self.session.clock)
        # Textual setting up, the list read and the table filled make a few hundred thousand
        # objects that outlive the start: the cyclic collector's passes over them on the way
        # are paid for nothing (about a tenth of the start's CPU on a big plant). It is held
        # until the list is painted (`first_paint_done`), or LET_COLLECTOR_RUN_S at the
        # latest, or the app's end, whichever comes first.
        self.let_collector_run = hold_collector()
        self.set_timer(LET_COLLECTOR_RUN_S, self.let_collector_run)

    def on_unmount(self) -> None:
        self.let_collector_run()
        if self.let_full_passes is not None:
            self.let_full_passes()

    async def on_event(self, event: events.Event) -> None:
        if isinstance(event, events.InputEvent) and not event.is_forwarded:
            self.last_input = time.monotonic()
        await super().on_event(event)

    def idle_pass(self) -> None:
        """The collector's full pass, held since the list was painted, run once it is due and
        nobody has typed for a while (store/base/collector.py)."""
        held_full_pass(time.monotonic() - self.last_input)

    def on_mount(self) -> None:
        self.update_subtitle()
        if self.demo:
            self.say_demo()
        if self.new_path is not None:
            self.push_screen(first_run_screen(self.new_path), self.first_run_choice)
        elif not register.list_all(self.book, Unit):
            self.push_screen(first_run_screen(), self.first_run_choice)
        elif not self.tech:
            self.action_sign_in()

    def get_line_filters(self) -> Sequence[LineFilter]:
        """Textual's filters, then ours: no control character of any text reaches the
        terminal (tui/widgets/inert.py)."""
        return [*super().get_line_filters(), INERT_LINES]

    def update_subtitle(self) -> None:
        parts = []
        if self.demo:
            parts.append("demo plant")
        elif self.book.setting("name"):
            parts.append(inert_line(str(self.book.setting("name"))))
        parts.append(f"by {self.tech or 'nobody (press i)'}")  # the shift: on the watch list
        if self.prefs.server and not self.demo:  # only where a server is configured
            parts.append(self.synced_text())
        self.sub_title = " · ".join(parts)

    def synced_text(self) -> str:
        """When this book last synced with the server, in plant-local time."""
        stamp = self.book.setting("server_synced_utc")
        if not stamp:
            return "not synced yet"
        when = parse_utc(stamp).astimezone(self.book.local_zone())
        return f"synced {when:%Y-%m-%d %H:%M}"

    def remember_rows(self, rows: list[WatchRow]) -> None:
        self.statuses = {r.tag.upper(): r for r in rows}

    @guarded
    def change_prefs(self, **changes: str) -> None:
        self.prefs = laptop.save(self.prefs, self.session.config_path, **changes)
        if "theme" in changes:
            self.theme = THEMES[self.prefs.theme].name
        self.book_changed()

    def book_changed(self) -> None:
        """Something the other screens show has changed: they reload when shown again."""
        self.changes += 1
        self.update_subtitle()

    def book_stamp(self) -> tuple[object, ...]:
        """Differs from an earlier stamp when the book may show something else since: a change
        made here (`book_changed`) or in the file by any program."""
        try:
            return self.changes, *self.book.content_stamp()
        except sqlite3.Error:
            return self.changes, None

    # ---- routing ----

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if self.quitting:
            return False  # keys typed after q (a fast typist, a scanner) open nothing
        if action in NAV and isinstance(self.screen, ModalScreen):
            return False
        if action == "help" and self.showing_help():
            return False
        return True

    def showing_help(self) -> bool:
        shown = sys.modules.get("tui.screens.help")  # not imported yet: never shown
        return shown is not None and isinstance(self.screen, shown.HelpScreen)

    @guarded
    def action_go(self, mode: str) -> None:
        """1, 2, 3: that list itself, never a sheet left open on top of it in its mode (`1`
        from the shift log landed on a unit sheet opened earlier from the watch list)."""
        if self.current_mode != mode:
            self.switch_mode(mode)
            self.call_after_refresh(self.to_base_of, mode)
        else:
            self.to_base_of(mode)

    def to_base_of(self, mode: str) -> None:
        if self.current_mode != mode:
            return
        while len(self.screen_stack) > 1 and not isinstance(self.screen, ModalScreen):
            self.pop_screen()

    @guarded
    def open_sheet(self, what: str, tag: str, unit: str) -> None:
        if self.quitting:
            return
        if what != "filter":
            self.push_screen(_lazy("screens.unit_sheet", "UnitSheetScreen")(unit or tag))
        elif self.kept_filter_sheet is None or self.kept_sheet_free():
            self.open_kept_sheet(tag)
        else:
            self.push_screen(self.filter_sheet_for(tag))

    def open_kept_sheet(self, tag: str) -> None:
        """Read first, then show the kept sheet filled: drawn once instead of emptied and then
        filled. A read that takes longer than SHEET_WAIT_S shows the sheet at once, emptied,
        and it fills in when its own read is done."""
        self.read_kept_sheet(tag, self.screen, self.book_stamp())

    @work(exclusive=True, group="sheet-read", exit_on_error=False)
    async def read_kept_sheet(self, tag: str, origin: Screen, stamp: tuple[object, ...]) -> None:
        """One opening of the kept sheet. Exclusive: a newer opening cancels this one, waiting
        or not, so only the newest is shown; and nothing is shown once another screen is on
        top of the one it was asked from."""
        path, clock = self.book.path, self.session.clock

        def read() -> Any:
            with open_book(path, create=False, clock=clock) as book:
                return filter_sheet(book, tag)

        reading = asyncio.ensure_future(asyncio.to_thread(read))  # runs on if this is cancelled
        reading.add_done_callback(_retrieved)
        try:
            sheet = await asyncio.wait_for(asyncio.shield(reading), SHEET_WAIT_S)
        except TimeoutError:
            sheet = None  # slow: shown at once, emptied, and the sheet reads itself
        except Exception:  # noqa: BLE001 - the sheet reads again and says what is wrong
            sheet = None
        if self.screen is not origin:
            return
        if sheet is None:
            self.push_screen(self.filter_sheet_for(tag))
            return
        kept = self.kept_sheet(tag)
        kept.show_filled(tag, sheet, stamp)  # the first time: shown as it is mounted
        self.push_screen(kept)

    def filter_sheet_for(self, tag: str) -> Screen:
        """One filter sheet is made once and kept (installed): building a screen of a dozen
        widgets costs Textual more than reading the sheet, so a sheet opened again only
        changes its content. A second sheet open at the same time (from the unit sheet on
        top of one) is a new screen."""
        if self.kept_filter_sheet is not None and not self.kept_sheet_free():
            return _lazy("screens.filter_sheet", "FilterSheetScreen")(tag)
        kept = self.kept_sheet(tag)
        kept.show_tag(tag)
        return kept

    def kept_sheet(self, tag: str) -> Any:
        """The kept filter sheet, made (for `tag`) and installed the first time."""
        if self.kept_filter_sheet is None:
            kept = _lazy("screens.filter_sheet", "FilterSheetScreen")(tag)
            self.install_screen(kept, name="filter-sheet")
            self.kept_filter_sheet = kept
        return self.kept_filter_sheet

    def kept_sheet_free(self) -> bool:
        """The kept filter sheet exists and is not on show (in no mode's stack)."""
        kept = self.kept_filter_sheet
        return kept is not None and not any(kept in st for st in self._screen_stacks.values())

    @guarded
    def open_form(self, kind: str, tag: str = "", **preset: str) -> None:
        if self.quitting or isinstance(self.screen, ModalScreen):
            return
        before = self.statuses.get(tag.upper()) if tag else None
        form = _lazy(f"forms.{FORMS[kind][0]}", FORMS[kind][1])
        self.push_screen(form(tag, before=before, **preset))  # a save comes as EntrySaved

    @guarded
    def route_tag(self, action: str, hit: TagHit) -> None:
        """Where a tag leads: from the tag prompt ('quick') or a palette command."""
        if action == "quick":
            action = {"filter": "reading", "breather": "breather", "unit": "unit-sheet"}[hit.what]
        if action == "filter-sheet":
            self.open_sheet("filter", hit.tag, hit.unit)
        elif action in ("unit-sheet", "breather-unit"):
            self.open_sheet("unit", hit.unit, hit.unit)
        else:
            self.open_form(action, hit.tag)

    def action_quick_tag(self) -> None:
        try:
            hits = tag_index(self.book)
        except BookError as exc:
            self.notify(str(exc), severity="error")
            return
        prompt = _lazy("screens.tag_prompt", "TagPrompt")
        self.push_screen(
            prompt(hits, self.cursor_blink),
            lambda hit: self.route_tag("quick", hit) if hit else None,
        )

    @guarded
    def action_sign_in(self) -> None:
        sign_in = _lazy("screens.sign_in", "SignInScreen")
        self.push_screen(sign_in(self.tech, self.cursor_blink), self.signed_in)

    def signed_in(self, tag: str | None) -> None:
        if tag:
            try:
                self.prefs = laptop.save(self.prefs, self.session.config_path, tech=tag)
            except (BookError, OSError) as exc:
                self.notify(f"Signed in for now, but not remembered: {exc}", severity="warning")
                self.prefs = replace(self.prefs, tech=tag)
            self.notify(f"Signed in: {tag}")
        self.update_subtitle()

    def action_help(self) -> None:
        screen = self.screen
        here = [b for b in getattr(type(screen), "BINDINGS", []) if isinstance(b, Binding)]
        name = getattr(screen, "HELP_NAME", "this screen")
        anywhere = [b for b in self.BINDINGS if isinstance(b, Binding)]
        elsewhere = {}
        for module, cls in HELP_SCREENS:
            other = _lazy(module, cls)
            elsewhere[other.HELP_NAME] = [b for b in other.BINDINGS if isinstance(b, Binding)]
        self.push_screen(_lazy("screens.help", "HelpScreen")(name, here, anywhere, elsewhere))

    def get_system_commands(self, screen: Screen) -> Any:
        """Every action of the app and of the screen, by name, in the command palette: ours
        only (the framework's own theme picker, key panel, maximise and screenshot are not
        this app's), each with its key as the help screen writes it ("/", "?")."""
        seen = set()
        for node, bindings in ((self, self.BINDINGS), (screen, type(screen).BINDINGS)):
            for b in bindings:
                if not isinstance(b, Binding) or not b.description or b.action in seen:
                    continue
                if b.action in ("quit_now", "command_palette"):
                    continue
                seen.add(b.action)
                shown = KEYS[b.id].shown if b.id in KEYS else b.key.split(",")[0]
                yield SystemCommand(
                    long_name(b),
                    f"key {shown}",
                    lambda n=node, a=b.action: self.run_action(a, n),
                )
        if self.prefs.server and not self.demo:
            yield SystemCommand(
                "Sync with the server",
                f"send this book's new rows, bring the plant's in ({self.synced_text()})",
                self.sync_now,
            )
        for name in THEMES:
            yield SystemCommand(
                f"Theme: {name}", "switch and remember", lambda n=name: self.change_prefs(theme=n)
            )
        for unit in ("bar", "psi", "kPa"):
            yield SystemCommand(
                f"Pressure in {unit}",
                "show and type ΔP in this unit",
                lambda u=unit: self.change_prefs(pressure=u),
            )

    # ---- after a save ----

    def on_entry_saved(self, message: EntrySaved) -> None:
        """Say what the save did, from the row the store returned with it (no second read)."""
        self.book_changed()
        entry, before, after = message.entry, message.before, message.after
        text = saved_text(entry)
        if after is not None:
            self.statuses[after.tag.upper()] = after
            text += " " + due_change(after, before, self.book.local_zone())
        self.last_message = text
        self.notify(text, timeout=8)

    @work(thread=True, exit_on_error=False, group="sync", exclusive=True)
    def sync_now(self) -> None:
        """`sumpbook sync` behind the screen, on its own connection to the book."""
        from store.server.sync import sync  # deferred: psycopg only when asked for

        self.call_from_thread(self.notify, "Syncing with the server…")
        try:
            with open_book(self.book.path, create=False, clock=self.session.clock) as book:
                report = sync(book, self.prefs.server)
        except BookError as exc:  # no server, no plant code: one line, nothing changed
            self.call_from_thread(self.notify, str(exc), severity="warning", timeout=12)
            return
        text = report.summary()
        self.call_from_thread(self.notify, text, timeout=12)
        self.call_from_thread(self.book_changed)

    # ---- behind the first paint ----

    def first_paint_done(self) -> None:
        """The watch list shows: check the whole file and load the fitting maths behind it,
        so that neither the first save nor the first filter sheet waits for them."""
        self.book_checked = False
        self.check_book(self.book.path)
        # What is loaded now (Textual, the list's rows) lives as long as the app: keep it out
        # of the garbage collector's full passes, each of which would otherwise walk it all
        # (about 0.1 s on a plant of a thousand rows, felt as a stall on the next key).
        gc.freeze()
        self.let_collector_run()
        # From now on a full pass waits for a pause in the typing: one that fell on a save
        # or a key held the screen 20–50 ms on a big plant (the young passes run as always).
        if self.let_full_passes is None:
            self.let_full_passes = hold_full_passes()
            self.set_interval(IDLE_CHECK_S, self.idle_pass)

    @work(thread=True, exit_on_error=False, group="book-check", exclusive=True)
    def check_book(self, path: Path) -> None:
        started = time.perf_counter()
        try:
            deep_check(path)  # damage found here is recorded: every save refuses the book
        except BookError as exc:
            self.call_from_thread(
                self.notify,
                f"{exc}. Saving is refused until it is restored; copy down what you record "
                "meanwhile.",
                title="Logbook file damaged",
                severity="error",
                timeout=60,
            )
        except Exception as exc:  # noqa: BLE001 - the first save checks again and says why
            self.call_from_thread(
                self.notify, f"The logbook could not be checked: {exc}", severity="warning"
            )
        record.preload()
        # The filter sheet's screen and its chart library too (about 20 ms of imports): the
        # first Enter on a filter opens as quickly as the ones after it.
        _lazy("screens.filter_sheet", "FilterSheetScreen")
        # What was just loaded (numpy, scipy, the sheet's screen: some 35,000 objects) lives as
        # long as the app too: out of the collector's full passes with the rest. A full pass
        # over it stalled the app for 45–50 ms at whatever key it fell on.
        gc.freeze()
        self.check_seconds = time.perf_counter() - started  # the speed benchmark reports it
        self.call_from_thread(setattr, self, "book_checked", True)

    # ---- first run, demo ----

    def say_demo(self) -> None:
        self.notify(
            "This is the demo plant, a fresh copy each time it opens: what you log here is "
            "not kept.",
            title="Demo",
            timeout=12,
        )

    def first_run_choice(self, what: str | None) -> None:
        if what == "quit":
            self.exit()
        elif what == "demo":
            self.open_demo()
        elif what == "register":
            if self.new_path is not None and not self.create_new_book():
                return
            self.action_go("register")
            if not self.tech:
                self.action_sign_in()

    def create_new_book(self) -> bool:
        """Create the logbook asked for (--db NEW.db) and move onto it."""
        path = self.new_path
        assert path is not None
        try:
            open_book(path, clock=self.session.clock).close()
        except (BookError, OSError, sqlite3.Error) as exc:
            self.notify(f"No logbook at {path}: {exc}", severity="error", timeout=15)
            self.push_screen(first_run_screen(path), self.first_run_choice)
            return False
        self.new_path = None
        self.switch_book(path, False, sign_in=False)
        self.notify(f"New logbook: {path}")
        return True

    @work(thread=True, exit_on_error=False, group="demo")
    def open_demo(self) -> None:
        self.call_from_thread(self.notify, "Opening the demo plant…")
        try:
            from store.exchange.demo import throwaway_demo

            book = throwaway_demo(self.session.clock)
        except Exception as exc:  # noqa: BLE001 - shown to the user
            self.call_from_thread(self.notify, f"No demo: {exc}", severity="error")
            return
        path = book.path
        book.close()
        self.call_from_thread(self.switch_book, path, True)

    def switch_book(self, path: Path, demo: bool, sign_in: bool = True) -> None:
        try:
            book = open_book(path, create=False, clock=self.session.clock)
        except BookError as exc:
            self.notify(str(exc), severity="error")
            return
        old, self.book = self.book, book
        fmt.clock = plant_clock(book)
        old.close()
        from store.exchange.demo import discard, is_throwaway

        if is_throwaway(old.path) and old.path != path:
            discard(old.path)  # a throw-away demo or empty book left behind is gone
        self.demo = demo
        if demo:
            self.say_demo()
        self.statuses = {}
        self.first_paint_done()
        for mode in ("shift", "register"):
            if mode in self._screen_stacks:
                self.remove_mode(mode)
                self.add_mode(mode, self.MODES[mode])
        self.update_subtitle()
        if self.current_mode == "watch":
            while len(self.screen_stack) > 1:
                self.pop_screen()
            base = self.screen_stack[0]
            if isinstance(base, WatchScreen):
                base.reload()
        else:
            self.switch_mode("watch")
        if sign_in and not self.tech:
            self.action_sign_in()

    # ---- closing ----

    def action_quit(self) -> None:  # type: ignore[override]
        if not self.backup_tried:
            self.backup_tried = True
            problem = backup_on_close(self.book)
            if problem:
                self.notify(
                    f"Backup on close failed: {problem}. Press q again to quit anyway.",
                    severity="warning",
                    timeout=15,
                )
                return
        self.quitting = True
        self.exit()

    def action_quit_now(self) -> None:
        if not self.backup_tried:
            self.backup_tried = True
            backup_on_close(self.book)
        self.quitting = True
        self.exit()


def saved_text(entry: Any) -> str:
    """'Saved reading 1a2b3c4d on P1-RF.', 'Voided entry 1a2b3c4d (void 5e6f7a8b).'"""
    voids = getattr(entry, "voids", None)
    if voids:
        return f"Voided entry {voids[:8]} (the void is {entry.id[:8]})."
    where = entry.target or entry.unit
    return f"Saved {entry.kind} {entry.id[:8]}" + (f" on {where}." if where else ".")


def due_change(after: WatchRow, before: Any, local: Any) -> str:
    """'P1-RF: change due moved from 14 May to 11 May' and the like."""
    word = "change" if after.what == "filter" else "swap"
    new = after.due.likely if after.due else None
    old = before.due.likely if before is not None and before.due is not None else None
    if new is not None and old is not None:
        a, b = fmt.day(new, local), fmt.day(old, local)
        text = (
            f"{after.tag}: {word} due moved from {b} to {a}"
            if a != b
            else (f"{after.tag}: {word} still due {a}")
        )
    elif new is not None:
        text = f"{after.tag}: {word} now due {fmt.due_text(after.due, local)}"
    else:
        state = fmt.STATE_WORDS.get(after.state, after.state)
        text = f"{after.tag}: no due date ({state})"
        if old is not None:
            text += f"; it was {fmt.day(old, local)}"
    gained = [f for f in after.flags if before is None or f not in before.flags]
    if gained:
        text += ". New flag: " + fmt.flag_text(gained).plain
    return text


def _retrieved(done: asyncio.Future[Any]) -> None:
    """Take a finished read's outcome, so that the read of an opening given up (cancelled
    or shown without it) ends without asyncio's "exception was never retrieved"."""
    if not done.cancelled():
        done.exception()


def plant_clock(book: Book) -> Any:
    """The book's today without asking the book again (fmt is used from worker threads,
    and the book's connection belongs to this one): a frozen book stays frozen."""
    frozen = book.now() if book.setting("clock") else None
    return (lambda: frozen) if frozen is not None else book.clock


def rolling_backup(conn: sqlite3.Connection, path: Path, why: str) -> Path:
    """store.rolling_backup, its module (and what it takes) imported on first use: not on
    the way to the painted list."""
    from store import rolling_backup as backup

    return backup(conn, path, why)


def backup_on_close(book: Book) -> str | None:
    """A rolling copy beside the logbook; returns the problem instead of raising."""
    try:
        rolling_backup(book.conn, book.path, "on-close")
    except Exception as exc:  # noqa: BLE001 - a failed backup only warns
        return str(exc) or type(exc).__name__
    return None


def _upgrading(text: str) -> None:
    """Before the screen is taken: an older book's upgrade can take minutes."""
    print(f"sumpbook: {inert_line(text)}", file=sys.stderr, flush=True)


def open_for_app(db: Path | None, session: Session) -> tuple[Book, bool, Path | None]:
    """(book, demo, new path). The logbook when it exists. One named (--db or SUMPBOOK_DB)
    that does not exist yet: an empty throw-away book to stand on while the app offers to
    create it. Neither: a fresh throw-away copy of the demo plant, nothing of it kept."""
    path = db or session.db_path
    if path.exists() and path.stat().st_size > 0:
        return open_book(path, clock=session.clock, on_upgrade=_upgrading), False, None
    from store.exchange.demo import throwaway_demo, throwaway_empty

    if db is not None or session.db_named:
        return throwaway_empty(session.clock), False, path
    return throwaway_demo(session.clock), True, None


def run_app(db: Path | None, session: Session) -> int:
    book, demo, new_path = open_for_app(db, session)
    app = SumpbookApp(book, demo=demo, new_path=new_path, session=session)
    try:
        app.run()
    finally:
        app.book.close()
        from store.exchange.demo import discard

        discard(app.book.path)  # only a throw-away book's folder is removed
    return 0

"""What each `sumpbook` command does: parse the edges (units, times), call `store`, print."""

from __future__ import annotations

import argparse
import functools
import json
import math
import sys
from pathlib import Path
from typing import TYPE_CHECKING, Any

import store
from store import (
    Book,
    full_check,
    open_book,
    record,
    refuse_input_as_output,
    views,
)
from store.base import prefs as laptop
from store.base.errors import BookError
from store.base.text import inert, json_inert
from store.base.timeutil import parse_time, previous_shift, shift_at, shift_named
from store.base.units import (
    parse_pressure_bar,
    parse_temperature_c,
    parse_volume_l,
)
from store.base.validate import plant_setting
from store.health import status_json
from store.ledger import journal, register
from store.ledger.entries import Reading
from store.ledger.register import Breather, FilterPosition, Fluid, Technician, Unit
from tui.base.quantities import pressure

if TYPE_CHECKING:
    from rich.console import Console


@functools.cache
def console(stderr: bool = False) -> Console:
    """Rich, imported on first use: `status --json` and the exports print no tables.
    Piped output (grep, files, tests) is never wrapped: a message stays one line however long
    the path in it, and tables get wide lines instead of wrapped cells."""
    from rich.console import Console

    stream = sys.stderr if stderr else sys.stdout
    piped = not stream.isatty()
    if stderr:
        return Console(stderr=True, soft_wrap=piped)
    return Console(highlight=False, width=200 if piped else None, soft_wrap=piped)


def say(text: str, stderr: bool = False) -> None:
    """Print one line as written: no markup read, control and escape characters of stored
    text made visible (`store.base.text.inert`)."""
    from rich.text import Text

    console(stderr).print(Text(inert(text)))


def _render() -> Any:
    from tui.base import render

    return render


# Books opened by this command: after it, main() reports rows they could not read.
OPENED: list[Book] = []


def _upgrading(text: str) -> None:
    say(f"note: {text}", stderr=True)


def _book(args: argparse.Namespace, create: bool = False) -> Book:
    path = Path(args.db or args.session.db_path)
    new = create and not (path.exists() and path.stat().st_size > 0)
    book = open_book(path, create=create, clock=args.session.clock, on_upgrade=_upgrading)
    if new:  # a mistyped path must not become a second logbook without a word
        say(f"note: there was no logbook at {path}: a new, empty one was created", stderr=True)
    for notice in book.notices:  # e.g. rows an upgrade could not carry over
        console(stderr=True).print(f"note: {notice}", markup=False)
    OPENED.append(book)
    return book


def report_unreadable() -> None:
    """One line on stderr per book for entry rows a read had to leave out."""
    while OPENED:
        line = journal.unreadable_report(OPENED.pop())
        if line:
            console(stderr=True).print(f"note: {line}", markup=False)


def _pairs(items: list[str]) -> dict[str, str]:
    result = {}
    for item in items:
        key, sep, value = item.partition("=")
        if not sep or not key.strip():
            raise BookError(f"'{item}' is not KEY=VALUE")
        result[key.strip().lower()] = value.strip()
    return result


def _by(args: argparse.Namespace) -> str:
    who = getattr(args, "by", None) or laptop.load(args.session.config_path).tech
    if not who:
        raise BookError("who is logging? add --by INITIALS or sign in: sumpbook prefs tech=JK")
    return who


def _time(book: Book, text: str, allow_future: bool = False):  # noqa: ANN202 - datetime
    """A typed time; a local time that happens twice is taken at its first passing, and the
    offset chosen is said on stderr."""
    notes: list[str] = []
    moment = parse_time(
        text, book.local_zone(), now=book.now(), allow_future=allow_future, notes=notes
    )
    for note in notes:
        console(stderr=True).print(f"note: {note}", markup=False)
    return moment


def _at(book: Book, args: argparse.Namespace):  # noqa: ANN202 - datetime | None
    text = getattr(args, "at", None)
    return _time(book, text) if text else None


def cmd_demo(args: argparse.Namespace) -> int:
    from store.exchange.demo import (
        create_demo,  # deferred: off the start path of status and the app
    )

    path = args.db or args.session.db_path
    with create_demo(path, force=args.force, clock=args.session.clock) as book:
        units = len(register.list_all(book, Unit))
        entries = journal.count(book)
        notices = list(book.notices)
    say(f"demo plant written to {path}: {units} units, {entries} entries")
    for notice in notices:
        say(notice)
    return 0


# ---- register ------------------------------------------------------------------------------------


def _opt_bar(text: str | None, unit: str) -> float | None:
    return parse_pressure_bar(text, unit) if text else None


def cmd_register(args: argparse.Namespace) -> int:
    if args.what == "history":
        return _register_history(args)
    prefs = laptop.load(args.session.config_path)
    with _book(args, create=True) as book:
        by = getattr(args, "by", None) or prefs.tech
        what = args.what
        if what == "shifts":
            pattern = [tuple(s.split("=", 1)) for s in args.shifts]
            if any(len(p) != 2 for p in pattern):
                raise BookError("give shifts as NAME=HH:MM, e.g. early=06:00")
            shifts = register.set_shifts(book, pattern, by)  # type: ignore[arg-type]
            say("shifts: " + ", ".join(f"{s.name} from {s.starts}" for s in shifts))
            return 0
        if what == "change":
            return _register_change(book, args, by)
        record: Any
        if what == "tech":
            record = Technician(tag=args.tag, name=args.name)
        elif what == "fluid":
            record = Fluid(
                tag=args.tag,
                name=args.name,
                iso_vg=args.vg,
                nu40_cst=args.nu40,
                nu100_cst=args.nu100,
                vi=args.vi,
                density_kg_l=args.density,
            )
        elif what == "unit":
            record = Unit(
                tag=args.tag,
                name=args.name,
                area=args.area,
                reservoir_l=parse_volume_l(args.reservoir, prefs.volume)
                if args.reservoir
                else None,
                fluid=args.fluid,
                normal_temp_c=parse_temperature_c(args.normal_temp, prefs.temperature),
                max_temp_c=parse_temperature_c(args.max_temp, prefs.temperature),
                coldest_start_c=parse_temperature_c(args.coldest_start, prefs.temperature),
                hour_meter=args.hour_meter,
                target_code=args.target_code,
            )
        elif what == "filter":
            record = FilterPosition(
                tag=args.tag,
                unit=args.unit,
                kind=args.kind,
                element=args.element,
                rating_um=args.rating,
                rating_basis="nominal" if args.nominal else "absolute",
                beta_ratio=args.beta,
                bypass_bar=_opt_bar(args.bypass, prefs.pressure),
                limit_bar=_opt_bar(args.limit, prefs.pressure),
                clean_bar=_opt_bar(args.clean, prefs.pressure),
                rated_flow_lpm=args.rated_flow,
                normal_flow_lpm=args.flow,
                gauge=not args.indicator_only,
                reading_interval_h=args.every,
            )
        else:
            record = Breather(
                tag=args.tag,
                unit=args.unit,
                kind=args.kind,
                rating_um=args.rating,
                swap_interval_d=args.every,
            )
        added = register.add(book, record, by)
        say(f"registered {what} {added.tag}")
        _say_sizing_doubt(added)
    return 0


def _say_sizing_doubt(record: Any) -> None:
    """Settings that can be true but look mistyped are saved, and said (not silently)."""
    if isinstance(record, FilterPosition) and (doubt := register.sizing_doubt(record)):
        say(f"CHECK: {doubt}")


_CHANGE_TABLES = {
    "tech": Technician,
    "fluid": Fluid,
    "unit": Unit,
    "filter": FilterPosition,
    "breather": Breather,
}


def _register_change(book: Book, args: argparse.Namespace, by: str) -> int:
    cls = _CHANGE_TABLES[args.table]
    current = register.get(book, cls, args.tag)
    changes: dict[str, Any] = {}
    prefs = laptop.load(args.session.config_path)
    for key, text in _pairs(args.fields).items():
        name = _field_name(current, key)
        if name.endswith("_bar") and text.strip().lower() not in ("", "none", "-"):
            changes[name] = parse_pressure_bar(text, prefs.pressure)
        elif name.endswith("_c"):
            changes[name] = parse_temperature_c(text, prefs.temperature)
        else:
            changes[name] = register.parse_field(cls, name, text)
    updated = register.update(book, cls, args.tag, changes, by)
    for key in changes:
        say(f"{updated.tag} {key}: {getattr(current, key)} -> {getattr(updated, key)}")
    _say_sizing_doubt(updated)
    return 0


def _register_history(args: argparse.Namespace) -> int:
    from tui.base.render import history_table

    if args.limit is not None and args.limit < 1:
        raise BookError("--limit must be 1 or more")
    with _book(args) as book:
        tag = args.tag
        if tag is not None:
            tag = register.normalise_tag(tag)
            changes = register.history(book, tag, limit=args.limit)
            if not changes:
                raise BookError(f"no register record '{tag}' has a recorded change")
        else:
            changes = register.history(book, limit=args.limit)
        console().print(history_table(book, changes, tag))
    return 0


def _field_name(record: Any, key: str) -> str:
    """'limit' -> 'limit_bar', 'normal_temp' -> 'normal_temp_c': the unit suffix may be left off."""
    key = key.replace("-", "_")
    for name in [key] + [key + s for s in ("_bar", "_c", "_l", "_um", "_lpm", "_h", "_d", "_cst")]:
        if name != "tag" and hasattr(record, name):
            return name
    fields = ", ".join(n for n in record.__dataclass_fields__ if n != "tag")
    raise BookError(f"no field '{key}': use one of {fields}")


# ---- list ----------------------------------------------------------------------------------------


def cmd_list(args: argparse.Namespace) -> int:
    prefs = laptop.load(args.session.config_path)
    with _book(args) as book:
        if args.unit:
            args.unit = register.get(book, Unit, args.unit).tag
        if args.what == "entries":
            since = _time(book, args.since) if args.since else None
            entries = journal.read(
                book, since=since, unit=args.unit, newest_first=True, limit=args.limit
            )
            console().print(_render().entries_table(book, list(reversed(entries)), prefs))
        else:
            console().print(_render().register_table(book, args.what, args.unit, prefs))
    return 0


# ---- log -----------------------------------------------------------------------------------------


def cmd_log(args: argparse.Namespace) -> int:
    from store.ledger import entry_input  # deferred: only `log` builds entries

    prefs = laptop.load(args.session.config_path)
    with _book(args) as book:
        kind = args.kind
        # the options as typed, by the field names of the one entry builder (the forms' too)
        typed = {name: getattr(args, name, None) for name in entry_input.FIELDS[kind]}
        if kind in _TARGET:
            typed[_TARGET[kind]] = args.tag
        if kind == "topup":
            typed["how"] = "unfiltered" if args.unfiltered else None
        elif kind == "void":
            typed["entry"] = args.id
        text = args.text if kind == "note" else getattr(args, "note", "") or ""
        try:
            entry: Any = entry_input.build(
                kind, typed, prefs, at=_at(book, args), by=_by(args), note=text
            )
        except entry_input.FieldError as exc:
            option = _OPTIONS.get(exc.field, f"--{exc.field}")
            raise BookError(f"{option}: {exc}" if option else str(exc)) from exc
        if isinstance(entry, Reading) and not args.as_read:
            from store.sheets import reading_doubts  # deferred: off the start path of status

            journal.validate(book, entry)  # a value refused outright is said before a doubt
            doubts = reading_doubts(book, entry)
            if doubts:
                raise BookError(
                    " ".join(doubts) + " Nothing was saved: check it, or add --as-read to save "
                    "it as typed"
                )
        saved = record.log(book, entry)
        say(_render().saved_line(book, saved, prefs))
        if isinstance(saved, Reading):
            caution = journal.reading_over_bypass(
                book, saved.filter, saved.dp_bar, saved.indicator, lambda b: pressure(b, prefs)
            )
            if caution:
                say(f"CAUTION: {caution}")
        if kind in ("change", "breather"):
            say(_render().CAUTION_SHORT)
        elif kind == "topup":
            say(_render().TOPUP_CAUTION_SHORT)
    return 0


_TARGET = {  # the field a kind's TAG argument fills
    "reading": "filter",
    "change": "filter",
    "breather": "breather",
    "topup": "unit",
    "sample": "unit",
}
# a builder's field as `log` names it in a message ("": the message says it all)
_OPTIONS = {"dp": "--dp (or --indicator)", "how": "--unfiltered", "entry": "ID", "note": ""}


# ---- status, export, import ----------------------------------------------------------------------


def _finite_only(value: Any) -> Any:
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {k: _finite_only(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_finite_only(v) for v in value]
    return value


def strict_json(data: Any) -> str:
    """JSON that every parser takes: a number that is not finite (a fit gone wild) becomes
    null instead of the non-standard NaN or Infinity."""
    try:
        return json.dumps(data, ensure_ascii=False, allow_nan=False)
    except ValueError:
        return json.dumps(_finite_only(data), ensure_ascii=False, allow_nan=False)


def cmd_status(args: argparse.Namespace) -> int:
    with _book(args) as book:
        as_of = _time(book, args.as_of) if args.as_of else None
        unit = register.get(book, Unit, args.unit).tag if args.unit else None
        watch = views.watch(book, as_of=as_of, unit=unit)
        if args.json:
            # One line, no indent: json's C encoder does it (an indent means the pure-Python
            # one, ten times slower on a big plant); pipe it to a pretty-printer to read it.
            sys.stdout.write(json_inert(strict_json(status_json.to_json(watch, book.local_zone()))))
            sys.stdout.write("\n")
        else:
            out, prefs = console(), laptop.load(args.session.config_path)
            out.print(_render().watch_table(book, watch, prefs, out.width))
    return 0


def cmd_round(args: argparse.Namespace) -> int:
    from store import rounds

    with _book(args) as book:
        unit = register.get(book, Unit, args.unit).tag if args.unit else None
        if args.skip or args.why:
            if not (args.skip and args.why):
                raise BookError("--skip TAG needs --why TEXT (and --why needs --skip)")
            plan = rounds.plan_round(book, unit)
            tag = args.skip.strip().upper()
            stop = next((s for s in plan.stops if s.filter.upper() == tag), None)
            if stop is None:
                raise BookError(f"{args.skip} is not on this shift's round")
            entry = record.log(book, rounds.skip_note(stop, args.why, _by(args)))
            say(f"saved: {entry.note}")
            return 0
        plan = rounds.plan_round(book, unit, following=args.next)
        if args.csv:
            sys.stdout.write(inert_csv(rounds.round_csv(plan, book.local_zone())))
        else:
            console().print(_render().round_table(book, plan))
    return 0


def inert_csv(text: str) -> str:
    """CSV text for a terminal or a pipe: control characters of stored text made visible, the
    line ends kept."""
    return "\r\n".join(inert(line) for line in text.split("\r\n"))


def cmd_export(args: argparse.Namespace) -> int:
    from store.exchange.csvexport import (  # deferred: off the start path of status and the app
        BOM,
        export_file,
        write_span,
    )

    prefs = laptop.load(args.session.config_path)
    with _book(args) as book:
        local, pattern = book.local_zone(), book.shift_pattern()
        now = book.now()
        if args.from_:
            start = _time(book, args.from_)
            end = _time(book, args.to) if args.to else None
            if end is not None and end <= start:
                raise BookError("--to must be after --from")
        else:
            if args.to:
                raise BookError("--to goes with --from")
            choice = (args.shift or "current").strip().lower()
            if choice == "current":
                span = shift_at(now, pattern, local)
            elif choice == "previous":
                span = previous_shift(shift_at(now, pattern, local), pattern, local)
            else:
                span = shift_named(args.shift, pattern, local)
            start, end = span.start, span.end
        csv_prefs = prefs
        status = not args.entries_only  # the handover's status rows after the entries
        if args.output:
            _may_overwrite(args.output, book.path, args.force)
            count = export_file(
                book,
                args.output,
                start,
                end,
                csv_prefs,
                local,
                pattern,
                bom=args.bom is not False,
                status=status,
            )
            what = f"{count} {'entry' if count == 1 else 'entries'}"
            say(
                stderr=True,
                text=f"{what}{' and the status rows' if status else ''} written to {args.output}",
            )
        else:
            out: Any = _OnScreen(sys.stdout) if sys.stdout.isatty() else sys.stdout
            if args.bom:
                out.write(BOM)
            write_span(out, book, start, end, csv_prefs, local, pattern, status)
    return 0


SQLITE_HEADER = b"SQLite format 3\x00"


def _may_overwrite(path: Path, book_path: Path, force: bool) -> None:
    """An existing file is overwritten by `export -o` only when the user says so: asked on a
    terminal, `--force` otherwise. (A SQLite file, a logbook perhaps, is the exporter's to
    refuse whatever is said here.)"""
    if force or not path.is_file():
        return
    refuse_input_as_output(path, book_path, "the export")  # the logbook's own files first
    with open(path, "rb") as fh:
        if fh.read(len(SQLITE_HEADER)) == SQLITE_HEADER:
            return
    if sys.stdin.isatty() and sys.stderr.isatty():
        sys.stderr.write(f"{inert(str(path))} exists: overwrite it? [y/N] ")
        sys.stderr.flush()
        if sys.stdin.readline().strip().lower() in ("y", "yes"):
            return
        raise BookError("nothing was written")
    raise BookError(
        f"{path} exists: nothing was written; add --force to overwrite it, or give another name"
    )


class _OnScreen:
    """CSV text written to a terminal: a person reads it, so stored text is shown inert
    (`store.base.text.inert`; line ends as plain line breaks). A file or a pipe gets the exact
    bytes, so that import gives back what was exported."""

    def __init__(self, out: Any) -> None:
        self.out = out

    def write(self, text: str) -> int:
        return self.out.write(inert(text.replace("\r\n", "\n")))


def cmd_import(args: argparse.Namespace) -> int:
    from store.exchange.csvio import (
        import_csv,  # deferred: off the start path of status and the app
    )

    try:
        data = Path(args.file).read_bytes()
    except OSError as exc:
        raise BookError(f"cannot read {args.file}: {exc.strerror}") from exc
    with _book(args) as book:
        result = import_csv(book, data, book.local_zone())
    say(
        f"imported {result.added} entries"
        + (f"; {result.skipped} were in the book already" if result.skipped else "")
        + (
            f"; {result.status_rows} status rows passed over (a shift log's handover, not entries)"
            if result.status_rows
            else ""
        )
    )
    return 0


# ---- settings ------------------------------------------------------------------------------------


def cmd_prefs(args: argparse.Namespace) -> int:
    current = laptop.load(args.session.config_path)
    if args.settings:
        changes = _pairs(args.settings)
        aliases = {"temp": "temperature", "initials": "tech"}
        changes = {aliases.get(k, k): v for k, v in changes.items()}
        unknown = set(changes) - set(laptop.Prefs.__dataclass_fields__)
        if unknown:
            raise BookError(f"unknown setting {', '.join(sorted(unknown))}")
        if "tech" in changes:
            with _book(args) as book:
                changes["tech"] = register.get(book, Technician, changes["tech"]).tag
        current = laptop.save(current, args.session.config_path, **changes)
    for key, value in current.__dict__.items():
        say(f"{key} = {value}")
    return 0


def cmd_plant(args: argparse.Namespace) -> int:
    with _book(args, create=True) as book:
        if args.settings:
            # every value checked before the first is written
            checked = {k: plant_setting(k, v) for k, v in _pairs(args.settings).items()}
            for key, value in checked.items():
                book.set_setting(key, value)
        for key in ("name", "timezone", "backup_keep"):
            say(f"{key} = {book.setting(key, '') or '(this computer' + chr(39) + 's)'}")
    return 0


# ---- files ---------------------------------------------------------------------------------------


def cmd_backup(args: argparse.Namespace) -> int:
    with _book(args) as book:
        dest = store.copy_holding_lock(book.conn, book.path, args.dest)
    say(f"backup written to {dest}")
    carried = [
        f"{table} row {key}" for table, keys in store.carried_in(dest).items() for key in keys
    ]
    if carried:
        say(
            f"it carries {len(carried)} {'row' if len(carried) == 1 else 'rows'} breaking the "
            f"book's checks, as the book holds them ({', '.join(carried[:5])}"
            + (f" and {len(carried) - 5} more" if len(carried) > 5 else "")
            + "): 'sumpbook check' says what to do about them"
        )
    return 0


def cmd_restore(args: argparse.Namespace) -> int:
    path = args.db or args.session.db_path
    kept = store.restore(Path(args.file), path)
    say(
        f"restored {args.file} into {path}"
        + (f"; the previous logbook is kept as {kept}" if kept else "")
    )
    return 0


def cmd_merge(args: argparse.Namespace) -> int:
    from store.exchange.merge import merge  # deferred: off the start path of status and the app

    with _book(args) as book:
        report = merge(book, Path(args.other))
    say(report.summary())
    for conflict in report.conflicts:
        say(f"  conflict: {conflict}")
    return 0 if not report.conflicts else 1


def cmd_check(args: argparse.Namespace) -> int:
    path = Path(args.db or args.session.db_path)
    # damage: one line naming the latest backup, and writes refuse the book
    for note in full_check(path):
        say(f"note: {note}")
    say(f"ok: {path} passed the full integrity check")
    return 0


def cmd_rebuild(args: argparse.Namespace) -> int:
    with _book(args) as book:
        count = record.rebuild(book)
    say(f"status rebuilt for {count} filters")
    return 0


# ---- the central server ---------------------------------------------------------------------------


def _server(args: argparse.Namespace) -> str:
    """The server's address: --server, else this laptop's pref, else libpq's own (PG*
    variables, service and password files). Never printed as given: see store.server.address."""
    return args.server or laptop.load(args.session.config_path).server


def cmd_server(args: argparse.Namespace) -> int:
    if args.action == "init":
        from store.server.address import shown
        from store.server.setup import initialise, laptop_role_hint

        before, now = initialise(args.url)
        if before == now:
            say(f"the server schema on {shown(args.url)} is at version {now} already")
        else:
            say(f"the server schema on {shown(args.url)} is now version {now} (was {before})")
        say(laptop_role_hint())
        return 0
    from store.server.address import shown
    from store.server.sync import PLANT_KEY

    url = args.url
    if laptop.has_password(url):
        raise BookError(
            "give the address without its password (postgresql://user@host/db): a password is "
            "never kept here; put it in ~/.pgpass or PGPASSWORD"
        )
    with _book(args) as book:
        code = plant_tag(args.plant)
        laptop.save(laptop.load(args.session.config_path), args.session.config_path, server=url)
        book.set_setting(PLANT_KEY, code)
    say(f"this laptop syncs with {shown(url)}; this book is plant {code}: 'sumpbook sync'")
    return 0


def plant_tag(text: str) -> str:
    from store.base.validate import tag

    return tag(text, "plant code")


def cmd_sync(args: argparse.Namespace) -> int:
    from store.server.sync import sync  # deferred: psycopg only for the server commands

    with _book(args) as book:
        report = sync(book, _server(args), plant=args.plant, full=args.full)
    say(report.summary())
    for conflict in report.conflicts:
        say(f"  conflict: {conflict}")
    return 0 if not report.conflicts else 1


def cmd_fleet(args: argparse.Namespace) -> int:
    from store.server import fleet

    plant = plant_tag(args.plant) if args.plant else None
    if args.view == "due":
        rows = fleet.watch(_server(args), args.session.clock(), plant)
        if args.json:
            print(strict_json([{**r.__dict__, "due": r.due.isoformat() if r.due else None}
                               for r in rows]))  # fmt: skip
            return 0
        if not rows:
            say("nothing flagged or due this week on the server")
        for r in rows:
            reading = f" ΔP {r.dp_bar:g} bar" if r.dp_bar is not None else ""
            state = f" {r.indicator}" if r.indicator else ""
            due = f"due {r.due:%Y-%m-%d %H:%M} UTC" if r.due else ""
            say(f"{r.plant:<10} {r.what:<8} {r.tag:<16} {r.flag:<15} {due}{reading}{state}")
        return 0
    lives = fleet.element_lives(_server(args), plant, args.element)
    if args.json:
        print(strict_json([e.__dict__ for e in lives]))
        return 0
    if not lives:
        say("no element lives on the server yet (two changes of a position make one)")
    for e in lives:
        fit = (
            f"B10 {e.b10_h:.0f} h, median {e.median_h:.0f} h, shape {e.shape:.2f}"
            if e.shape is not None
            else "too few lives at the limit for a fit"
        )
        plant_name = "all plants" if e.plant == "*" else e.plant
        say(f"{e.part:<20} {plant_name:<10} {e.lives} lives, {e.reached} at the limit: {fit}")
    return 0

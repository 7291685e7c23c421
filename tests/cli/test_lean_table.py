"""LeanTable (tui/base/tables.py) draws what rich's own Table draws, segment for segment.

The oracle in every check is rich's Table itself: the same table (columns, rows, options) is
drawn by `rich.table.Table` and by `LeanTable` on the same console, and the two lists of
segments (text and style of each piece) and the printed characters with their colour codes
must be equal. Widths go from a console too narrow for the table (rich collapses and wraps
it) to one wider than it needs.
"""

from __future__ import annotations

import copy
import io
import shutil

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from rich import box
from rich.console import Console
from rich.table import Table
from rich.text import Text

from store.base.prefs import Prefs
from store.db.book import open_book
from store.views import watch
from tui.base import render
from tui.base.tables import LeanTable

WIDTHS = (12, 20, 40, 60, 80, 100, 120, 160, 200, 250)


class _AsciiFile(io.StringIO):
    encoding = "ascii"  # a console that cannot show box characters gets rich's ASCII box


def _console(width: int, ascii_only: bool = False) -> Console:
    return Console(
        width=width,
        file=_AsciiFile() if ascii_only else io.StringIO(),
        force_terminal=True,
        color_system="truecolor",
        highlight=False,
        legacy_windows=False,
    )


def as_rich(table: Table) -> Table:
    """The same table, drawn by rich's own Table class."""
    plain = copy.copy(table)
    plain.__class__ = Table
    return plain


def assert_same_drawing(table: LeanTable, width: int, ascii_only: bool = False) -> None:
    expected_console, lean_console = _console(width, ascii_only), _console(width, ascii_only)
    oracle = as_rich(table)
    # oracle: rich's own Table drawing of the same table on the same console
    assert list(lean_console.render(table)) == list(expected_console.render(oracle)), width
    expected_console.print(oracle)
    lean_console.print(table)
    assert lean_console.file.getvalue() == expected_console.file.getvalue(), width


def _flags(words: str, urgent: bool = False) -> Text:
    text = Text(words)
    if urgent:
        text.stylize("bold reverse")
    return text


def watch_like(rows: int = 6, **options: object) -> LeanTable:
    """A table shaped like the wide watch list, with the texts a plant writes in it."""
    table = LeanTable(title="Watch list as of 2026-06-01 06:00", title_justify="left", **options)
    for name in ("tag", "unit", "kind", "ΔP ref (bar)", "% limit", "due", "read by", "basis"):
        table.add_column(name)
    table.add_column("flags", min_width=12)
    samples = [
        (
            "U005-BR",
            "U005",
            "breather (desiccant)",
            "",
            "",
            Text.assemble(("OVERDUE", "bold"), " 09 May 2026"),
        ),
        ("U001-PF", "U001", "pressure", "0.82", "41 %", "14 Jun–02 Aug (likely 07 Jul)"),
        ("P-3 ν40 46", "PR-3", "return, 25 °C", "1.10", "104 %", Text("CHANGE NOW", style="bold")),
        ("測定-1", "ユニット", "全幅", "0.05", "3 %", "–"),
        ("  lead", "trail  ", "   ", "", "", ""),
        ("U138-RF", "U138", "return", "2.40", "96 %", "open"),
    ]
    flag_texts = [
        _flags("SWAP DUE, SPENT", urgent=True),
        _flags(""),
        _flags(
            "BYPASS RISK, ΔP DROP, STEP UP, TEMPERATURE ABOVE LIMIT, READING OVERDUE", urgent=True
        ),
        _flags("COLD START"),
        _flags("   "),
        _flags("a-very-long-flag-word-with-no-space-in-it-at-all-to-fold"),
    ]
    for i in range(rows):
        tag, unit, kind, dp, pct, due = samples[i % len(samples)]
        cells = [Text(tag), Text(unit), Text(kind), Text(dp), Text(pct)]
        cells.append(due if isinstance(due, Text) else Text(due))
        cells += [Text("2026-06-02 14:00"), Text("fit, 12 points"), flag_texts[i % len(flag_texts)]]
        table.add_row(*cells, style="strike dim" if i % 4 == 3 else "")
    return table


@pytest.mark.parametrize("width", WIDTHS)
def test_a_watch_like_table_is_drawn_as_rich_draws_it(width):
    assert_same_drawing(watch_like(), width)  # type: ignore[arg-type]
    # the same texts again and again, in rows of another style: a wrapped cell drawn once
    # for all its like must still take each row's style
    assert_same_drawing(watch_like(rows=26), width)  # type: ignore[arg-type]


@pytest.mark.parametrize("width", (40, 80, 120, 250))
def test_narrow_layout_simple_box_no_wrap_columns_and_an_ascii_console(width):
    table = LeanTable(title="Watch list", title_justify="left", box=box.SIMPLE_HEAD)
    for c in ("tag", "ΔP bar", "%", "due"):
        table.add_column(c, no_wrap=True)
    table.add_column("flags", min_width=12)
    table.add_row(
        Text("M1-R"),
        Text("0.18"),
        Text("9 %"),
        Text("INSPECT NOW", style="bold"),
        _flags("ΔP DROP", True),
    )
    table.add_row(
        Text("D2-BR"),
        Text(""),
        Text(""),
        Text("16 Dec (10 Dec–11 Jan)"),
        _flags("SWAP DUE"),
        style="strike dim",
    )
    table.add_row(
        Text("HPU-7"),
        Text("1.25"),
        Text("88 %"),
        Text("–"),
        _flags("BYPASS RISK, STEP UP, COLD START"),
    )
    assert_same_drawing(table, width)
    assert_same_drawing(table, width, ascii_only=True)


@pytest.mark.parametrize("width", (20, 80, 200))
def test_empty_tables(width):
    no_rows = LeanTable(title="Filters (0)", title_justify="left")
    for c in ("tag", "unit", "kind"):
        no_rows.add_column(c)
    assert_same_drawing(no_rows, width)
    assert_same_drawing(LeanTable(title="no columns"), width)
    one_row = LeanTable()
    one_row.add_column("only")
    one_row.add_row(Text(""))
    assert_same_drawing(one_row, width)


@pytest.mark.parametrize("width", (16, 30, 60, 120))
def test_cells_and_columns_drawn_by_rich_mixed_with_the_quick_ones(width):
    # cells rich draws itself: several lines, a tab, a str with markup, a right-justified
    # column, a fixed-width column, a cell aligned in the middle of a tall row
    table = LeanTable(title="mixed", caption="a caption under it")
    table.add_column("plain")
    table.add_column("right", justify="right")
    table.add_column("fixed", width=7)
    table.add_column("fold", overflow="fold", vertical="middle")
    table.add_column("capped", max_width=10)
    table.add_column("ignore", overflow="ignore")
    table.add_row(
        Text("two\nlines"),
        Text("12.5 %"),
        Text("0.82 bar"),
        Text("x"),
        Text("capped text here"),
        Text("∞"),
    )
    table.add_row(
        "[bold]markup[/bold] str",
        Text("ν40"),
        Text("tab\there"),
        Text("µm"),
        Text("°C"),
        Text("ignore me"),
    )
    table.add_row(
        Text("ΔP", justify="center"),
        Text(""),
        Text("a\u2028b"),
        Text("x" * 30),
        Text("y"),
        Text("z"),
    )
    assert_same_drawing(table, width)


@pytest.mark.parametrize("width", (12, 14, 16, 20, 80))
def test_accents_and_trailing_spaces_in_a_tight_column(width):
    # more characters than cells ("0" + a combining acute), ending in a no-break space: rich's
    # wrapping trims the trailing space by its count of characters, not of cells; a joiner
    # and an emoji selector, whose widths rich does not add up character by character
    table = LeanTable()
    table.add_column("a", no_wrap=False)
    table.add_column("b", no_wrap=True)
    table.add_column("ccccccc")
    for cell in (
        "0\u0301\u00a0",
        "e\u0301e\u0301 ",
        "測 ",
        "ab  ",
        "\u200d",
        "👍\ufe0f",
        "a\u200db",
    ):
        table.add_row(Text(cell), Text(cell), Text("x"), style="bold")
    assert_same_drawing(table, width)


@pytest.mark.parametrize(
    "options",
    [
        {"show_lines": True},
        {"show_edge": False},
        {"box": None},
        {"padding": 0},
        {"padding": (0, 2)},
        {"collapse_padding": True},
        {"pad_edge": False},
        {"expand": True},
        {"min_width": 150},
        {"show_header": False},
        {"show_footer": True},
        {"row_styles": ["", "on grey23"]},
        {"border_style": "blue", "header_style": "bold magenta", "style": "on black"},
        {"box": box.MINIMAL},
        {"box": box.ROUNDED, "safe_box": True},
    ],
    ids=lambda options: ",".join(options),
)
@pytest.mark.parametrize("width", (40, 120, 250))
def test_other_table_options_are_drawn_as_rich_draws_them(options, width):
    assert_same_drawing(watch_like(**options), width)  # type: ignore[arg-type]


def test_a_section_end_is_drawn_as_rich_draws_it():
    table = watch_like(rows=3)
    table.add_section()
    table.add_row(*(Text(str(i)) for i in range(9)))
    for width in (60, 250):
        assert_same_drawing(table, width)  # type: ignore[arg-type]


TEXTS = st.lists(
    st.sampled_from(
        [*"ab Z0-,.%()ΔPν°µ²–→測ç\u0301\u00a0é\u200d\ufe0f\u3000👍", "  ", "\n", "\t", "\r"]
    ),
    max_size=30,
).map("".join)
STYLES = st.sampled_from(["", "bold", "dim strike", "reverse", "italic red", "on blue"])


@st.composite
def tables(draw: st.DrawFn) -> tuple[LeanTable, int]:
    columns = draw(st.integers(1, 6))
    table = LeanTable(
        title=draw(st.sampled_from([None, "Watch list", "ΔP"])),
        box=draw(st.sampled_from([box.HEAVY_HEAD, box.SIMPLE_HEAD, box.SQUARE])),
    )
    for i in range(columns):
        table.add_column(
            draw(TEXTS.filter(lambda t: "[" not in t)) or f"c{i}",
            no_wrap=draw(st.booleans()),
            min_width=draw(st.sampled_from([None, None, 4, 12])),
            overflow=draw(st.sampled_from(["ellipsis", "fold", "crop"])),
        )
    for _ in range(draw(st.integers(0, 6))):
        cells = []
        for _ in range(columns):
            text = Text(draw(TEXTS), style=draw(STYLES))
            if text.plain and draw(st.booleans()):
                start = draw(st.integers(0, len(text.plain) - 1))
                text.stylize(
                    draw(STYLES) or "bold", start, draw(st.integers(start, len(text.plain)))
                )
            cells.append(text)
        table.add_row(*cells, style=draw(STYLES))
    return table, draw(st.sampled_from(WIDTHS))


@settings(max_examples=150, deadline=None, database=None, derandomize=True)
@given(tables())
def test_generated_tables_are_drawn_as_rich_draws_them(case):
    table, width = case
    assert_same_drawing(table, width)


@pytest.fixture
def demo_book(demo_file, tmp_path):
    path = tmp_path / "demo.db"
    shutil.copy(demo_file, path)
    with open_book(path, create=False) as book:
        yield book


@pytest.mark.parametrize("pressure", ["bar", "psi"])
def test_the_demo_tables_are_drawn_as_rich_draws_them(demo_book, pressure):
    prefs = Prefs(pressure=pressure)
    now = watch(demo_book)
    for width in (60, 80, 100, 119, 120, 160, 200, 250):
        assert_same_drawing(render.watch_table(demo_book, now, prefs, width), width)
        for what in ("units", "filters", "breathers", "fluids", "techs", "shifts"):
            assert_same_drawing(render.register_table(demo_book, what, None, prefs), width)


def test_the_installed_rich_is_the_one_lean_table_knows():
    """The segment-for-segment tests above exercise the quick drawing only while the installed
    rich has the private parts it reaches into; a rich without them is caught here (and every
    table is then rich's own drawing)."""
    from tui.base import tables

    assert tables.RICH_AS_KNOWN


def test_a_rich_it_does_not_know_gets_rich_s_own_drawing(monkeypatch):
    from tui.base import tables

    monkeypatch.setattr(tables, "RICH_AS_KNOWN", False)
    table = watch_like(rows=12)
    drawn_by = []
    real = Table._render

    def spy(self, console, options, widths):  # noqa: ANN001
        drawn_by.append(type(self).__name__)
        return real(self, console, options, widths)

    monkeypatch.setattr(Table, "_render", spy)
    for width in (40, 120, 200):
        assert_same_drawing(table, width)
    assert "LeanTable" in drawn_by  # the lean table went through rich's own drawing

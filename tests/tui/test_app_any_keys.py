"""Any keys, in any order: the app on the demo plant driven by random key sequences (the
bindings of every screen, form keys, digits and letters, the arrows, Enter, Escape; not the
keys that quit or open the command palette, which can quit).

Whatever is pressed, the app must not fail (an unhandled error ends `run_test` with it), and
the book must come out whole: its file passes SQLite's integrity check, no entry is lost,
every entry reads back whole (a form saves all of an entry or nothing), and the watch list
read from its kept rows is still the list computed from the entries alone (what a save made
through a random form must leave behind too).
"""

from __future__ import annotations

import asyncio
import os
import shutil
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from store import views
from store.db.book import open_book
from store.health import watchlist
from store.ledger import journal
from tests.kit.agree import same_list
from tests.kit.plant import app_for, settle, write_prefs

# SUMPBOOK_KEYS_EXAMPLES=100 explores further (then with fresh random sequences).
EXAMPLES = int(os.environ.get("SUMPBOOK_KEYS_EXAMPLES", "10"))

KEYS = (
    # moving and choosing
    "up", "down", "left", "right", "pageup", "pagedown", "home", "end", "tab", "shift+tab",
    "enter", "escape", "backspace", "space",
    # the screens' and forms' keys (tui/base/keys.py), but q, ctrl+q and ctrl+p
    "r", "c", "b", "o", "s", "n", "t", "v", "u", "a", "g", "e", "x", "i", "y",
    "1", "2", "3", "4", "f1", "f2", "f5", "ctrl+o", "ctrl+n", "ctrl+s",
    "slash", "question_mark", "full_stop", "left_square_bracket", "right_square_bracket",
    # what a form is typed with
    "0", "5", "7", "9", "minus", "A", "K", "D", "R",
)  # fmt: skip


# Whole entries among the random keys (a random key alone seldom fills a form): a reading on
# the filter under the cursor, its doubts answered yes; a note; a sample code.
PHRASES = (
    ("r", "1", "full_stop", "5", "ctrl+s", "y"),
    ("r", "9", "ctrl+s", "y"),
    ("n", "A", "K", "space", "D", "ctrl+s"),
    ("s", "1", "7", "slash", "1", "5", "slash", "1", "2", "ctrl+s", "y"),
)
TYPED = st.lists(
    st.one_of(st.sampled_from(KEYS).map(lambda key: (key,)), st.sampled_from(PHRASES)),
    min_size=3,
    max_size=25,
).map(lambda parts: [key for part in parts for key in part])


def _entries(path: Path) -> set[str]:
    with open_book(path, create=False) as book:
        return {row[0] for row in book.conn.execute("SELECT id FROM entries")}


@settings(
    max_examples=EXAMPLES,
    deadline=None,
    database=None,
    derandomize="SUMPBOOK_KEYS_EXAMPLES" not in os.environ,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)
@given(keys=TYPED)
def test_any_keys_leave_the_app_running_and_the_book_whole(
    demo_file, tmp_path_factory, monkeypatch, keys
) -> None:
    folder = tmp_path_factory.mktemp("keys")
    monkeypatch.chdir(folder)  # an export lands here
    path = folder / "demo.db"
    shutil.copy(demo_file, path)
    with open_book(path, create=False) as book:
        monkeypatch.setenv("SUMPBOOK_NOW", book.now().isoformat())
    monkeypatch.setenv("SUMPBOOK_CONFIG", str(write_prefs(folder, tech="AK")))
    before = _entries(path)

    async def drive() -> None:
        app = app_for(path)
        async with app.run_test(size=(100, 32)) as pilot:
            await settle(pilot)
            for key in keys:
                await pilot.press(key)
            await settle(pilot)

    asyncio.run(drive())
    with open_book(path, create=False) as book:
        assert book.conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        assert before <= {row[0] for row in book.conn.execute("SELECT id FROM entries")}
        journal.read(book)  # every entry reads back as a whole entry
        assert journal.unreadable_report(book) is None
        same_list(views.watch(book), watchlist.watch_as_of(book, book.now()))

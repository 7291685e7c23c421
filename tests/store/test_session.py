"""The environment is read once, where a run starts (store.base.session.from_environ), and
handed down: the store never reads it itself."""

from __future__ import annotations

import ast
from datetime import UTC, datetime
from pathlib import Path

import pytest

from store.base.errors import BookError
from store.base.session import from_environ, user_book_path, user_config_path

ROOT = Path(__file__).resolve().parents[2]


def test_a_session_takes_what_the_environment_names(tmp_path):
    session = from_environ(
        {
            "SUMPBOOK_DB": str(tmp_path / "plant.db"),
            "SUMPBOOK_CONFIG": str(tmp_path / "prefs.json"),
            "SUMPBOOK_NOW": "2026-03-29T03:30:00+02:00",
            "SUMPBOOK_DEBUG": "1",
        }
    )
    assert session.db_path == tmp_path / "plant.db" and session.db_named
    assert session.config_path == tmp_path / "prefs.json"
    assert session.clock() == datetime(2026, 3, 29, 1, 30, tzinfo=UTC)  # +02:00 is CEST
    assert session.debug


def test_without_the_environment_a_session_uses_the_users_folders_and_clock():
    session = from_environ({})
    assert session.db_path == user_book_path() and not session.db_named
    assert session.config_path == user_config_path()
    before = datetime.now(UTC).replace(microsecond=0)
    assert before <= session.clock() <= datetime.now(UTC)
    assert not session.debug


def test_the_store_never_reads_the_environment():
    readers = []
    for path in sorted((ROOT / "store").rglob("*.py")):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            os_attr = (
                isinstance(node, ast.Attribute)
                and isinstance(node.value, ast.Name)
                and node.value.id == "os"
                and node.attr in ("environ", "environb", "getenv")
            )
            from_os = isinstance(node, ast.ImportFrom) and node.module == "os"
            if os_attr or from_os:
                readers.append(f"{path.relative_to(ROOT)}:{node.lineno}")
    assert readers == []


def test_a_clock_that_is_not_a_time_is_refused_in_one_line():
    with pytest.raises(BookError, match="SUMPBOOK_NOW='garbage' is not a time"):
        from_environ({"SUMPBOOK_NOW": "garbage"})

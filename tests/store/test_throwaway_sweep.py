"""Throw-away books (the demo the app opens when no logbook exists yet) left behind by an
app that never closed are removed by the next one, and nothing else is
(store/exchange/demo.py, `sweep_left_behind`)."""

from __future__ import annotations

import os
import tempfile
import time
from pathlib import Path

import pytest

from store.exchange import demo
from store.exchange.demo import LEFT_BEHIND_S, THROWAWAY_PREFIX, sweep_left_behind


@pytest.fixture()
def temp_root(tmp_path, monkeypatch) -> Path:
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))
    return tmp_path


def folder(root: Path, name: str, age_s: float, files: tuple[str, ...] = ("demo.db",)) -> Path:
    made = root / name
    made.mkdir()
    then = time.time() - age_s
    for file in files:
        (made / file).write_text("x", encoding="utf-8")
        os.utime(made / file, (then, then))
    os.utime(made, (then, then))
    return made


def test_an_old_throwaway_folder_goes_and_everything_else_stays(temp_root):
    day = 24 * 3600
    old = folder(temp_root, f"{THROWAWAY_PREFIX}old", LEFT_BEHIND_S + day)
    fresh = folder(temp_root, f"{THROWAWAY_PREFIX}fresh", LEFT_BEHIND_S - day)
    # an old folder with one file written lately: an app still at work in it
    busy = folder(temp_root, f"{THROWAWAY_PREFIX}busy", LEFT_BEHIND_S + day, ("demo.db",))
    (busy / "demo.db-wal").write_text("x", encoding="utf-8")
    other = folder(temp_root, "sumpbook-backups", LEFT_BEHIND_S + day)  # not ours to remove
    plain_file = temp_root / f"{THROWAWAY_PREFIX}file"
    plain_file.write_text("x", encoding="utf-8")
    os.utime(plain_file, (0, 0))

    assert sweep_left_behind() == [old]
    assert not old.exists()
    assert fresh.exists() and busy.exists() and other.exists() and plain_file.exists()


def test_a_link_named_like_a_throwaway_folder_is_not_followed(temp_root, tmp_path_factory):
    elsewhere = tmp_path_factory.mktemp("elsewhere")
    kept = folder(elsewhere, "a-logbook-folder", LEFT_BEHIND_S * 3)
    link = temp_root / f"{THROWAWAY_PREFIX}link"
    link.symlink_to(kept, target_is_directory=True)

    assert sweep_left_behind() == []
    assert (kept / "demo.db").exists() and link.is_symlink()


def test_a_new_demo_copy_sweeps_first(temp_root):
    old = folder(temp_root, f"{THROWAWAY_PREFIX}old", LEFT_BEHIND_S * 2)
    book = demo.throwaway_demo()
    try:
        assert not old.exists()
        assert demo.is_throwaway(book.path) and book.path.exists()
    finally:
        book.close()
        demo.discard(book.path)

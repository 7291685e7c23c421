"""Issue 20, item 9: every command that writes, handed crafted and damaged inputs.

For restore, merge, import, export, backup, rebuild, demo and upgrade: empty, truncated and
flipped-byte files, foreign schema objects, wrong versions, a recursive view, rows that
break the book's checks, hostile CSV and outputs aimed at the book's own files. After each
run the live logbook is either byte for byte as it was (the command refused, exit 2) or
changed exactly as the command reported; and the listing, the status and the export still
work on it. The counts are printed (`pytest -s`) and quoted in the README's "Your data".
"""

from __future__ import annotations

import re
import shutil
import sqlite3
from collections import Counter
from pathlib import Path

from store.db.book import open_book
from store.db.schema import APPLICATION_ID, MIGRATIONS
from tests.kit.plant import build_plant
from tui.cli import main


def _flip(data: bytes, offset: int) -> bytes:
    out = bytearray(data)
    out[offset] ^= 0xFF
    return bytes(out)


def _edited(good: Path, dest: Path, *sql: str) -> Path:
    shutil.copy(good, dest)
    conn = sqlite3.connect(dest, isolation_level=None)
    conn.execute("PRAGMA ignore_check_constraints = ON")
    for statement in sql:
        conn.execute(statement)
    conn.close()
    return dest


def _written(dest: Path, data: bytes) -> Path:
    dest.write_bytes(data)
    return dest


def _count(path: Path) -> int:
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        return conn.execute("SELECT count(*) FROM entries").fetchone()[0]
    except sqlite3.Error:
        return -1  # not a logbook at all
    finally:
        conn.close()


def _crafted_files(good: Path, folder: Path) -> dict[str, Path]:
    data = good.read_bytes()
    files = {
        "empty": _written(folder / "empty.db", b""),
        "one newline": _written(folder / "nl.db", b"\n"),
        "truncated": _written(folder / "half.db", data[: len(data) // 2]),
        "flipped middle byte": _written(folder / "mid.db", _flip(data, len(data) // 2)),
        "flipped last byte": _written(folder / "last.db", _flip(data, len(data) - 1)),
        "flipped byte 60": _written(folder / "b60.db", _flip(data, 60)),
        "text file": _written(folder / "text.db", b"time,kind\n2026-01-01,note\n"),
    }
    entry_id = "00000000-0000-4000-8000-00000000abcd"
    files.update(
        {
            "foreign trigger": _edited(
                good,
                folder / "trig.db",
                "CREATE TRIGGER zz AFTER INSERT ON entries "
                "BEGIN DELETE FROM entries WHERE id = NEW.id; END",
            ),
            "dropped trigger": _edited(good, folder / "drop.db", "DROP TRIGGER entries_no_update"),
            "version 0": _edited(good, folder / "v0.db", "PRAGMA user_version = 0"),
            "version 3": _edited(good, folder / "v3.db", "PRAGMA user_version = 3"),
            "version 99": _edited(good, folder / "v99.db", "PRAGMA user_version = 99"),
            "our id, no tables": _edited(
                folder / "nl.db",
                folder / "bare.db",
                f"PRAGMA application_id = {APPLICATION_ID}",
                "PRAGMA user_version = 5",
                "CREATE TABLE t (a)",
            ),
            "foreign SQLite file": _edited(
                folder / "nl.db", folder / "other.db", "CREATE TABLE t (a)"
            ),
            "recursive view": _edited(
                good,
                folder / "view.db",
                "ALTER TABLE entries RENAME TO kept",
                "CREATE VIEW entries AS WITH RECURSIVE n(i) AS "
                "(SELECT 1 UNION ALL SELECT i + 1 FROM n) SELECT * FROM kept, n",
            ),
            "bad row": _edited(
                good,
                folder / "badrow.db",
                "INSERT INTO entries (id, at_utc, logged_utc, kind, by, unit, filter, dp_bar) "
                f"VALUES ('{entry_id}', '2026-05-01T08:00:00Z', '2026-05-01T08:00:00Z', "
                "'reading', 'AB', 'P1', 'P1-RF', 'abc')",
            ),
            "lower-case tag row": _edited(
                good,
                folder / "lower.db",
                "INSERT INTO entries (id, at_utc, logged_utc, kind, by, unit, note) VALUES "
                "('00000000-0000-4000-8000-00000000abce', '2026-05-01T08:00:00Z', "
                "'2026-05-01T08:00:00Z', 'note', 'ab', 'P1', 'x')",
            ),
        }
    )
    return files


def _crafted_csv(folder: Path) -> dict[str, Path]:
    head = "time,kind,target,by,dp,dp_unit,temp,temp_unit,note\n"
    return {
        "empty CSV": _written(folder / "empty.csv", b""),
        "binary junk": _written(folder / "junk.csv", bytes(range(256)) * 4),
        "unknown columns": _written(folder / "cols.csv", b"a,b,c\n1,2,3\n"),
        "ΔP out of range": _written(
            folder / "range.csv",
            (head + "2026-05-01T10:00:00Z,reading,P1-RF,AB,999,bar,40,C,\n").encode(),
        ),
        "pressure unit for temperature": _written(
            folder / "unit.csv",
            (head + "2026-05-01T10:00:00Z,reading,P1-RF,AB,1,bar,100,kPa,\n").encode(),
        ),
        "good CSV": _written(
            folder / "good.csv",
            (head + "2026-05-01T10:00:00Z,reading,P1-RF,AB,1.1,bar,40,C,ok\n").encode(),
        ),
    }


class Chaos:
    def __init__(self, live: Path, capsys) -> None:
        self.live = live
        self.capsys = capsys
        self.tally: Counter[str] = Counter()

    def run(self, command: str, *args: str, book: Path | None = None) -> tuple[int, str]:
        code = main(["--db", str(book or self.live), *args])
        out, err = self.capsys.readouterr()
        assert "unexpected error" not in err and "Traceback" not in err, (command, args, err)
        return code, out + err

    def still_works(self, book: Path | None = None, after: object = None) -> None:
        for args in (
            ["list", "entries"],
            ["status", "--json"],
            ["export", "--from", "2020-01-01T00:00"],
        ):
            code, text = self.run("read", *args, book=book)
            assert code == 0, (after, args, text[-700:])

    def case(
        self, command: str, *args: str, changed=None, book: Path | None = None, readable=True
    ) -> None:
        """Run one crafted case; `changed(before_count, after_count, text)` says whether a
        reported change is the change that happened (None: the command must not write)."""
        path = book or self.live
        before, count = path.read_bytes(), _count(path)
        code, text = self.run(command, *args, book=book)
        self.tally[f"{command} tried"] += 1
        if path.read_bytes() == before:
            self.tally[f"{command} unchanged"] += 1
            if code != 0:
                self.tally[f"{command} refused"] += 1
        else:
            assert code in (0, 1) and changed is not None, (command, args, code, text)
            assert changed(count, _count(path), text), (command, args, text)
            self.tally[f"{command} changed as reported"] += 1
        if readable or code == 0:  # a refused file of another version stays unreadable
            self.still_works(book, (command, args))


def _added(pattern: str):
    def check(before: int, after: int, text: str) -> bool:
        found = re.search(pattern, " ".join(text.split()))
        return found is not None and after - before == int(found.group(1))

    return check


def _restored(source: Path):
    def check(before: int, after: int, text: str) -> bool:
        return "restored" in text and "kept" in text and after == _count(source)

    return check


def test_every_writing_command_survives_crafted_inputs(tmp_path, capsys):
    live = tmp_path / "live.db"
    with open_book(live) as book:
        build_plant(book)
    crafted = tmp_path / "crafted"
    crafted.mkdir()
    good = tmp_path / "good.db"
    assert main(["--db", str(live), "backup", str(good)]) == 0
    files = _crafted_files(good, crafted)
    csvs = _crafted_csv(crafted)
    chaos = Chaos(live, capsys)
    capsys.readouterr()

    for path in files.values():
        # a flip in unused space leaves a sound book: then it is restored, as reported
        chaos.case("restore", "restore", str(path), changed=_restored(path))
        chaos.case("merge", "merge", str(path), changed=_added(r"(\d+) entries added"))
    for path in {
        **csvs,
        **{k: files[k] for k in ("empty", "bad row", "flipped last byte")},
    }.values():
        chaos.case("import", "import", str(path), changed=_added(r"imported (\d+) entr"))
    chaos.case("import", "import", str(csvs["good CSV"]), changed=_added(r"imported (\d+) entr"))

    kept = next((tmp_path / "live-backups").glob("*.db"), None) or good
    targets = [
        live,
        Path(f"{live}-wal"),
        Path(f"{live}-journal"),
        Path(f"{live}-shm"),
        kept,
        files["bad row"],
        tmp_path / "new-export.csv",
    ]
    for target in targets:
        chaos.case("export", "export", "--from", "2020-01-01T00:00", "-o", str(target))
        assert not Path(f"{live}-journal").exists()
    for target in [*targets[:-1], tmp_path / "new-backup.db"]:
        chaos.case("backup", "backup", str(target))
        assert not Path(f"{live}-journal").exists()

    # restore of the good copy: the book becomes it, and the book it was is kept
    chaos.case(
        "restore", "restore", str(good), changed=lambda b, a, t: a == _count(good) and "kept" in t
    )

    # rebuild and the readers on a book holding a row that breaks its checks
    damaged = tmp_path / "with-bad-row.db"
    shutil.copy(files["bad row"], damaged)
    chaos.case("rebuild", "rebuild", book=damaged, changed=lambda b, a, t: a == b)

    # upgrade: a file whose objects do not match its version, and a genuine older book
    for name in ("version 3", "version 0", "version 99", "our id, no tables"):
        copy = tmp_path / f"up-{name.replace(' ', '-')}.db"
        shutil.copy(files[name], copy)
        chaos.case("upgrade", "status", book=copy, readable=False)
    older = tmp_path / "v4.db"
    conn = sqlite3.connect(older, isolation_level=None)
    conn.executescript("\n".join(MIGRATIONS[:4]))
    conn.execute(f"PRAGMA application_id = {APPLICATION_ID}")
    conn.execute("PRAGMA user_version = 4")
    conn.execute("INSERT INTO technicians (tag) VALUES ('AB')")
    conn.close()
    chaos.case(
        "upgrade", "list", "techs", book=older,
        changed=lambda b, a, t: a == b and len(list((tmp_path / "v4-backups").glob("v4-before-v4-upgrade-*.db"))) == 1,
    )  # fmt: skip

    # demo over an existing book: refused without --force; with it, the book is kept first
    other = tmp_path / "other-live.db"
    shutil.copy(good, other)
    chaos.case("demo", "demo", book=other)
    chaos.case(
        "demo", "demo", "--force", book=other,
        changed=lambda b, a, t: "kept" in t and len(list((tmp_path / "other-live-backups").glob("*before-demo*"))) == 1,
    )  # fmt: skip

    totals = Counter()
    for key, n in chaos.tally.items():
        totals[key.split(" ", 1)[1]] += n
    lines = [f"{key}: {n}" for key, n in sorted(chaos.tally.items())]
    print("\nchaos: " + "; ".join(lines))
    print(f"chaos totals: {dict(totals)}")
    assert totals["tried"] == totals["unchanged"] + totals["changed as reported"]
    assert totals["tried"] >= 60

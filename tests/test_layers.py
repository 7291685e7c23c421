"""The layers drawn in DEVELOPERS.md "Layout" hold: import-linter checks the contracts kept in
pyproject.toml (store's layers, no screen library in store, the screens reach the book file
and the kept rows only through store's public names, no import circles at any depth)."""

from __future__ import annotations

import subprocess
import sys
import tomllib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def _contracts() -> dict[str, dict]:
    config = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    return {c["id"]: c for c in config["tool"]["importlinter"]["contracts"]}


def test_the_import_contracts_hold() -> None:
    lint = Path(sys.executable).parent / "lint-imports"
    done = subprocess.run(
        [str(lint), "--no-cache"], cwd=ROOT, capture_output=True, text=True, timeout=180
    )
    assert done.returncode == 0, done.stdout[-4000:] + done.stderr[-2000:]
    assert "0 broken" in done.stdout


@pytest.mark.parametrize("root", ["store", "tui"])
def test_every_package_sits_in_a_layer(root: str) -> None:
    # A new sub-package or top module left out of the layers would be checked by nothing.
    layers = _contracts()[f"{root}-layers"]["layers"]
    named = {name.strip() for layer in layers for name in layer.split("|")}
    folder = ROOT / root
    packages = {f"{root}.{p.parent.name}" for p in folder.glob("*/__init__.py")}
    modules = {f"{root}.{p.stem}" for p in folder.glob("*.py")} - {
        f"{root}.__init__",
        f"{root}.__main__",
    }
    assert packages | modules == named

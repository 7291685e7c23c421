"""The `sumpbook` command as installed (and `python -m tui`): the command line is imported
with the cyclic garbage collector held, and a short read-only answer (`status`, `list`) is
given with it held to the end.

Loading the command line and building a big plant's watch list make some hundred thousand
objects that hold no cycles; the collector's passes over the growing heap are paid for
nothing. Whatever is garbage when such an answer ends goes with the process. Every other
command (the app, the writes, the long exports and imports) lets the collector run again as
soon as the command line knows which command it is. tests/benchmarks/speed.py measures
`status --json` through this door."""

from __future__ import annotations

import gc
from collections.abc import Sequence

# The answers given with the collector held to the end: read-only, a bounded size (the
# plant's list), done in well under a second.
HELD_TO_THE_END = frozenset({"status", "list"})


def main(argv: Sequence[str] | None = None) -> int:
    was_on = gc.isenabled()
    gc.disable()
    try:
        from tui import cli

        return cli.main(argv, loaded=_loaded if was_on else None)
    finally:
        if was_on:
            gc.enable()


def _loaded(command: str | None) -> None:
    """Called by the command line once it knows the command: lets the collector run again
    unless the command is one of HELD_TO_THE_END."""
    if command not in HELD_TO_THE_END:
        gc.enable()

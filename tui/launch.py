"""The `sumpbook` command as installed (and `python -m tui`): the command line is imported
with the cyclic garbage collector held, and a short read-only answer (`status`, `list`) is
given with it held to the end, and the process ends as soon as that answer is out.

Loading the command line and building a big plant's watch list make some hundred thousand
objects that hold no cycles; the collector's passes over the growing heap are paid for
nothing. Whatever is garbage when such an answer ends goes with the process. Every other
command (the app, the writes, the long exports and imports) lets the collector run again as
soon as the command line knows which command it is. tests/benchmarks/speed.py measures
`status --json` through this door.

Such an answer then leaves without the interpreter's teardown (`os._exit` once the output is
flushed): freeing the plant's objects one by one and tearing the modules down took about a
sixth of `status --json` on the year's book, for nothing that outlives the process. Nothing
of it is left to do: the book is closed by the command, no thread runs, nothing is registered
to run at exit (`tests/cli/test_launch.py` runs the door as a process and checks the answer and
the exit code, in a pipe that closes early too)."""

from __future__ import annotations

import os
import sys
from collections.abc import Sequence

from store.base.collector import hold_collector

# The answers given with the collector held to the end: read-only, a bounded size (the
# plant's list), done in well under a second.
HELD_TO_THE_END = frozenset({"status", "list"})


def run() -> None:
    """The process: the command line's answer, then out, at once after a held answer."""
    code, command = _answer(None)
    if command in HELD_TO_THE_END:
        os._exit(_flushed(code))
    sys.exit(code)


def main(argv: Sequence[str] | None = None) -> int:
    """The command line with the collector held as above; leaves it as it found it."""
    return _answer(argv)[0]


def _answer(argv: Sequence[str] | None) -> tuple[int, str | None]:
    """The command line's exit code, and the command it ran (None: the app)."""
    let_go = hold_collector()
    named: list[str | None] = [None]

    def loaded(command: str | None) -> None:  # the words are parsed
        named[0] = command
        if command not in HELD_TO_THE_END:
            let_go()

    try:
        from tui import cli

        return cli.main(argv, loaded=loaded), named[0]
    finally:
        let_go()


def _flushed(code: int) -> int:
    """Write out what the answer left buffered (the interpreter's teardown would have); the
    exit code, 1 where the answer could not be written out (a full disk), as the command
    line says of a write that fails before."""
    try:
        if sys.stdout is not None:  # None: started with stdout closed (said already)
            sys.stdout.flush()
    except BrokenPipeError:  # the reader left early (`| head`): as the command line does
        from tui.cli import reader_gone

        reader_gone()
    except (OSError, ValueError) as exc:
        why = getattr(exc, "strerror", None) or str(exc)
        print(f"sumpbook: the answer could not be written out ({why})", file=sys.stderr)
        code = code or 1
    try:
        if sys.stderr is not None:
            sys.stderr.flush()
    except (OSError, ValueError):  # nowhere left to say anything
        pass
    return code

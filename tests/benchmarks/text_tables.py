"""Speed of the command line's text tables (`status`, `list filters`, `list units`) on a book,
in turns with older code, and whether both print the same bytes.

Usage:  python tests/benchmarks/text_tables.py PATH [--compare DIR] [--runs N] [--widths 80,160]
        (PATH: a book, e.g. from make_big_logbook.py; DIR: a checkout of older code, run with
        its own .venv if it has one, else with this interpreter)

speed.py times `status --json`, the watch list without a table; this script times the tables
printed on it. Each command runs in a fresh process, piped (as a script or a file gets it: 200
columns, no colour) and in a pseudo-terminal of each width in --widths (colour on, the width
given by COLUMNS; a watch list too wide for it is wrapped). The codes take turns run by run,
each on its own copy of the book. Printed per command and output: the median wall time and the
median CPU of the child process (user + system), each code's ratio to the first, and whether
the outputs of every code are byte for byte the first's. `status --json` is timed alongside as
the cost of the data alone. The machine's load average is printed before and after.
"""

from __future__ import annotations

import argparse
import json
import os
import pty
import resource
import select
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
if str(ROOT) not in sys.path:  # run as a script from anywhere
    sys.path.insert(0, str(ROOT))

from tests.benchmarks.speed import python  # noqa: E402  (the interpreter of a code folder)

COMMANDS = (["status"], ["list", "filters"], ["list", "units"], ["status", "--json"])


def run_piped(cmd: list[str], env: dict[str, str], cwd: Path) -> tuple[float, float, bytes]:
    """Wall seconds, child CPU seconds and stdout of one run, its output a pipe."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    done = subprocess.run(cmd, env=env, cwd=cwd, capture_output=True)
    wall = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)  # this child alone: runs one by one
    if done.returncode:
        raise SystemExit(f"{' '.join(cmd)} failed: {done.stderr.decode()[-500:]}")
    cpu = after.ru_utime - before.ru_utime + after.ru_stime - before.ru_stime
    return wall, cpu, done.stdout


def run_terminal(cmd: list[str], env: dict[str, str], cwd: Path) -> tuple[float, float, bytes]:
    """The same with stdin, stdout and stderr a pseudo-terminal (COLUMNS in env sets the width)."""
    master, slave = pty.openpty()
    start = time.perf_counter()
    pid = os.fork()
    if pid == 0:  # the child: the terminal's end as its standard streams
        os.chdir(cwd)
        for fd in (0, 1, 2):
            os.dup2(slave, fd)
        os.close(master)
        os.execve(cmd[0], cmd, env)
    os.close(slave)
    chunks = []
    while True:
        ready, _, _ = select.select([master], [], [], 60)
        if not ready:
            break
        try:
            chunk = os.read(master, 65536)
        except OSError:  # the child closed its end
            break
        if not chunk:
            break
        chunks.append(chunk)
    _, status, usage = os.wait4(pid, 0)
    wall = time.perf_counter() - start
    os.close(master)
    if os.waitstatus_to_exitcode(status):
        raise SystemExit(f"{' '.join(cmd)} failed in a terminal")
    return wall, usage.ru_utime + usage.ru_stime, b"".join(chunks)


# Run in a child under each code: the tables built and printed in the process, timed apart
# from the start-up and the reading of the book (the same calls as `status` and `list`).
IN_PROCESS = """
import io, json, sys, time
from rich.console import Console
from store.base.prefs import Prefs
from store.db.book import open_book
from store.views import watch
from tui.base import render
book = open_book(sys.argv[1], create=False)
now, prefs, times = watch(book), Prefs(), {}
for width in [int(w) for w in sys.argv[2].split(",") for _ in (1, 2)]:  # the second one kept
    for name in ("status", "list filters", "list units"):
        console = Console(highlight=False, width=width, soft_wrap=True, file=io.StringIO())
        start = time.process_time()
        if name == "status":
            table = render.watch_table(book, now, prefs, width)
        else:
            table = render.register_table(book, name.split()[1], None, prefs)
        built = time.process_time()
        console.print(table)
        times[f"{name}|{width}"] = [built - start, time.process_time() - built]
print(json.dumps(times))
"""


def in_process(roots: dict[str, Path], books: dict[str, Path], env: dict[str, str],
               runs: int, widths: str) -> None:  # fmt: skip
    """The tables' CPU in the process: building the rows, printing them (rich's part)."""
    times: dict[str, list[dict[str, list[float]]]] = {name: [] for name in roots}
    for _ in range(runs):
        for name, root in roots.items():  # in turns
            cmd = [python(root), "-c", IN_PROCESS, str(books[name]), widths]
            done = subprocess.run(cmd, env={**env, "PYTHONPATH": str(root)}, cwd=root,
                                  capture_output=True, check=True)  # fmt: skip
            times[name].append(json.loads(done.stdout))
    first = next(iter(roots))
    print("| table | width | code | build (median) | print (median) | print ÷ this code's |")
    print("|---|---|---|---|---|---|")
    for key in times[first][0]:
        table, width = key.split("|")
        base = statistics.median(run[key][1] for run in times[first])
        for name in roots:
            build = statistics.median(run[key][0] for run in times[name])
            printing = statistics.median(run[key][1] for run in times[name])
            print(f"| {table} | {width} | {name} | {build * 1000:.0f} ms "
                  f"| {printing * 1000:.0f} ms | {printing / base:.2f} |")  # fmt: skip


def outputs_widths(outputs: list[tuple[str, int | None]]) -> list[str]:
    return [str(width) for _, width in outputs if width is not None]


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("path", type=Path)
    parser.add_argument("--compare", type=Path, metavar="DIR", help="older code, in turns")
    parser.add_argument("--runs", type=int, default=9)
    parser.add_argument("--widths", default="80,160", help="terminal widths ('' for none)")
    args = parser.parse_args()

    roots = {"this code": ROOT}
    if args.compare:
        roots[f"{args.compare.name} (compared)"] = args.compare.resolve()
    work = Path(tempfile.mkdtemp(prefix="text-tables-"))
    books = {}
    for i, name in enumerate(roots):
        books[name] = work / f"book{i}.db"
        shutil.copyfile(args.path, books[name])
    prefs = work / "prefs.json"
    prefs.write_text("{}")
    env = {k: v for k, v in os.environ.items() if k not in ("COLUMNS", "FORCE_COLOR", "NO_COLOR")}
    env |= {"SUMPBOOK_CONFIG": str(prefs), "TERM": "xterm-256color"}
    outputs = [("piped", None)] + [
        (f"terminal {w}", int(w)) for w in args.widths.split(",") if w.strip()
    ]

    print(f"book: {args.path} ({args.path.stat().st_size / 1e6:.0f} MB), {args.runs} runs each")
    print(f"load average before: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    print()
    print(
        "| command | output | code | wall (median) | CPU (median) | wall ÷ this code's "
        "| CPU ÷ this code's | same bytes as this code's |"
    )
    print("|---|---|---|---|---|---|---|---|")
    for command in COMMANDS:
        for label, width in outputs:
            if width is not None and "--json" in command:
                continue
            walls: dict[str, list[float]] = {name: [] for name in roots}
            cpus: dict[str, list[float]] = {name: [] for name in roots}
            printed: dict[str, set[bytes]] = {name: set() for name in roots}
            for _ in range(args.runs):
                for name, root in roots.items():  # in turns
                    cmd = [python(root), "-m", "tui", "--db", str(books[name]), *command]
                    run_env = {**env, "PYTHONPATH": str(root)}
                    if width is None:
                        wall, cpu, out = run_piped(cmd, run_env, root)
                    else:
                        run_env["COLUMNS"] = str(width)
                        wall, cpu, out = run_terminal(cmd, run_env, root)
                    walls[name].append(wall)
                    cpus[name].append(cpu)
                    printed[name].add(out)
            first = next(iter(roots))
            for name in roots:
                wall, cpu = statistics.median(walls[name]), statistics.median(cpus[name])
                same = (
                    "yes" if printed[name] == printed[first] and len(printed[first]) == 1 else "NO"
                )
                print(
                    f"| {' '.join(command)} | {label} | {name} | {wall:.3f} s | {cpu:.3f} s "
                    f"| {wall / statistics.median(walls[first]):.2f} "
                    f"| {cpu / statistics.median(cpus[first]):.2f} | {same} |"
                )
    print()
    print("CPU of the tables in the process, each made a second time (book and watch read before):")
    print()
    in_process(roots, books, env, args.runs, ",".join(["200", *outputs_widths(outputs)]))
    print()
    print(f"load average after: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    shutil.rmtree(work)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

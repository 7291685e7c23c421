"""The cyclic garbage collector held while code builds many objects that hold no cycles (a
plant's entries, its watch list, the command line and the app loading): each is an instance
the collector tracks, so its passes over the growing heap are paid for nothing.

The collector is one switch for the whole process, and holds come from several threads at once
(the app's workers) and span callbacks (the app's start, until its list is painted). One count
under one lock: the first hold to come in switches it off (if it was running), the last to be
let go switches it on again, whatever the order in which they end; code that had switched it
off itself finds it off after them. tests/store/test_gc_hold.py holds it to that;
tests/benchmarks/speed.py measures the long reads with and without (figure 8).

The app also holds the collector's full passes (not the young ones) once its list is painted,
and runs them itself when nobody is typing (`hold_full_passes`, `held_full_pass`).
"""

from __future__ import annotations

import gc
import threading
from collections.abc import Callable, Iterator
from contextlib import contextmanager

_lock = threading.Lock()
_holders = 0
_was_on = False


def hold_collector() -> Callable[[], None]:
    """Hold the collector from now until the returned function is called (the first call lets
    this hold go; later ones do nothing)."""
    global _holders, _was_on
    with _lock:
        if _holders == 0:
            _was_on = gc.isenabled()
            gc.disable()
        _holders += 1
    held = [True]

    def let_go() -> None:
        global _holders
        with _lock:
            if not held[0]:
                return
            held[0] = False
            _holders -= 1
            if _holders == 0 and _was_on:
                gc.enable()

    return let_go


@contextmanager
def collector_held() -> Iterator[None]:
    """The collector held for the block (see `hold_collector`); safe to nest."""
    let_go = hold_collector()
    try:
        yield
    finally:
        let_go()


# ---- full passes at idle moments ------------------------------------------------------------------
# A full pass walks every object the collector tracks that is not frozen: in the app after a
# few saves on a big plant that is 40,000–60,000 objects (the list's rows and cells, Textual's
# caches), 20–50 ms with the UI waiting, and Python runs one about every save there (a save
# and the list read again allocate enough). Held, the full passes wait for a moment nobody
# types (`full_pass_due`); the young passes run as always, and so do full passes asked for.

IDLE_S = 1.0  # no key or mouse event for this long: the app is idle
FORCE_TIMES = 10  # a full pass runs anyway, idle or not, once this many are due at once
_NEVER = 2**31 - 1  # a threshold the count of young passes never reaches

_full_lock = threading.Lock()
_full_holders = 0
_thresholds: tuple[int, int, int] | None = None


def hold_full_passes() -> Callable[[], None]:
    """Keep the collector from starting full passes on its own until the returned function
    is called (the first call lets this hold go; later ones do nothing). Holds nest, across
    threads and in any order: the last one let go puts the thresholds back as the first one
    found them. Young passes are not held."""
    global _full_holders, _thresholds
    with _full_lock:
        if _full_holders == 0:
            _thresholds = gc.get_threshold()
            gc.set_threshold(_thresholds[0], _thresholds[1], _NEVER)
        _full_holders += 1
    held = [True]

    def let_go() -> None:
        global _full_holders, _thresholds
        with _full_lock:
            if not held[0]:
                return
            held[0] = False
            _full_holders -= 1
            if _full_holders == 0 and _thresholds is not None:
                gc.set_threshold(*_thresholds)
                _thresholds = None

    return let_go


def full_pass_due(young_passes: int, every: int, idle_s: float) -> bool:
    """Whether a held full pass should run now: `young_passes` passes of the middle generation
    since the last full one, where Python's own threshold (`every`, 10 unless changed) would
    have started one after `every`; when the app has been idle `idle_s` seconds. Due once
    `every` are counted and nobody has typed for IDLE_S, or at once when FORCE_TIMES as many
    are counted (typing without a pause must not let garbage in cycles pile up)."""
    every = max(every, 1)
    if young_passes >= FORCE_TIMES * every:
        return True
    return young_passes >= every and idle_s >= IDLE_S


def held_full_pass(idle_s: float) -> bool:
    """Run the full pass a hold keeps waiting (`hold_full_passes`) if it is due now, the app
    idle for `idle_s` seconds; True if one ran. Nothing while no hold is taken or while the
    collector itself is held (`hold_collector`)."""
    with _full_lock:
        thresholds = _thresholds
    if thresholds is None or not gc.isenabled():
        return False
    if not full_pass_due(gc.get_count()[2], thresholds[2], idle_s):
        return False
    gc.collect()
    return True

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


class _CountedHold:
    """A process-wide setting held by a count under one lock: the first hold to come in
    calls `take` (which may note what it found), the last one let go calls `give_back`,
    whatever the order in which holds end and whichever threads they are in."""

    def __init__(self, take: Callable[[], None], give_back: Callable[[], None]) -> None:
        self._lock = threading.Lock()
        self._holders = 0
        self._take, self._give_back = take, give_back

    def hold(self) -> Callable[[], None]:
        """Hold from now until the returned function is called (the first call lets this
        hold go; later ones do nothing)."""
        with self._lock:
            if self._holders == 0:
                self._take()
            self._holders += 1
        held = [True]

        def let_go() -> None:
            with self._lock:
                if not held[0]:
                    return
                held[0] = False
                self._holders -= 1
                if self._holders == 0:
                    self._give_back()

        return let_go


_was_on = False


def _switch_off() -> None:
    global _was_on
    _was_on = gc.isenabled()
    gc.disable()


def _switch_back() -> None:
    if _was_on:
        gc.enable()


_collector = _CountedHold(_switch_off, _switch_back)


def hold_collector() -> Callable[[], None]:
    """Hold the collector from now until the returned function is called (the first call lets
    this hold go; later ones do nothing)."""
    return _collector.hold()


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

_thresholds: tuple[int, int, int] | None = None  # as the first hold of the full passes found them


def _full_passes_off() -> None:
    global _thresholds
    _thresholds = gc.get_threshold()
    gc.set_threshold(_thresholds[0], _thresholds[1], _NEVER)


def _full_passes_back() -> None:
    global _thresholds
    if _thresholds is not None:
        gc.set_threshold(*_thresholds)
        _thresholds = None


_full_passes = _CountedHold(_full_passes_off, _full_passes_back)


def hold_full_passes() -> Callable[[], None]:
    """Keep the collector from starting full passes on its own until the returned function
    is called (the first call lets this hold go; later ones do nothing). Holds nest, across
    threads and in any order: the last one let go puts the thresholds back as the first one
    found them. Young passes are not held."""
    return _full_passes.hold()


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
    thresholds = _thresholds
    if thresholds is None or not gc.isenabled():
        return False
    if not full_pass_due(gc.get_count()[2], thresholds[2], idle_s):
        return False
    gc.collect()
    return True

"""The cyclic garbage collector held while code builds many objects that hold no cycles (a
plant's entries, its watch list, the command line and the app loading): each is an instance
the collector tracks, so its passes over the growing heap are paid for nothing.

The collector is one switch for the whole process, and holds come from several threads at once
(the app's workers) and span callbacks (the app's start, until its list is painted). One count
under one lock: the first hold to come in switches it off (if it was running), the last to be
let go switches it on again, whatever the order in which they end; code that had switched it
off itself finds it off after them. tests/store/test_gc_hold.py holds it to that;
tests/benchmarks/speed.py measures the long reads with and without (figure 8).
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

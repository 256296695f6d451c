"""Pausing Python's cyclic garbage collector while a large batch builds its objects.

Building a 100,000-row batch allocates millions of objects (cells, floats, row dicts); every 700 of them the
collector runs, and its older generations pass over everything built so far again, which cost about a third
of a large batch's time. None of these objects form reference cycles, so reference counting frees them all:
the collector is paused while a batch reads, parses and writes, and resumes after. Threads of one worker
share the collector, so it resumes only when the last batch in progress is done.
"""

from __future__ import annotations

import gc
import threading
from collections.abc import Iterator
from contextlib import contextmanager


class _State:
    lock = threading.Lock()
    paused = 0  # pauses in progress in this process
    resume = True  # whether the collector ran before the first of them


@contextmanager
def paused_gc() -> Iterator[None]:
    with _State.lock:
        if _State.paused == 0:
            _State.resume = gc.isenabled()
            gc.disable()
        _State.paused += 1
    try:
        yield
    finally:
        with _State.lock:
            _State.paused -= 1
            if _State.paused == 0 and _State.resume:
                gc.enable()

"""A large batch's memory: the cyclic garbage collector paused while it builds its objects, and the memory it
freed given back to the operating system once it is answered.

Building a 100,000-row batch allocates millions of objects (cells, floats, row dicts); every 700 of them the
collector runs, and its older generations pass over everything built so far again, which cost about a third
of a large batch's time. None of these objects form reference cycles, so reference counting frees them all:
the collector is paused while a batch reads, parses and writes, and resumes after. Threads of one worker
share the collector, so it resumes only when the last batch in progress is done.

The C library keeps memory that was freed for reuse, so a worker would otherwise stay at the size of its
largest batch and start the next one from there; ``return_free_memory`` hands it back (glibc's
``malloc_trim``; elsewhere it does nothing).
"""

from __future__ import annotations

import ctypes
import ctypes.util
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


def _trim() -> object | None:
    library = ctypes.util.find_library("c")
    try:
        return getattr(ctypes.CDLL(library), "malloc_trim", None) if library else None
    except OSError:
        return None


_MALLOC_TRIM = _trim()


def return_free_memory() -> None:
    """Give the memory freed since to the operating system, where the C library allows it."""
    if callable(_MALLOC_TRIM):
        _MALLOC_TRIM(0)

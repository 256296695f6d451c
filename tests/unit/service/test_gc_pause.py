"""The cyclic collector waits while a batch builds its objects, and runs again once the last batch is done."""

from __future__ import annotations

import gc

from calcsvc.service.gc_pause import paused_gc


def test_pauses_nest_and_restore_the_collector() -> None:
    assert gc.isenabled()
    with paused_gc():
        assert not gc.isenabled()
        with paused_gc():  # a second batch on another thread of the same worker
            assert not gc.isenabled()
        assert not gc.isenabled()  # the first is still building
    assert gc.isenabled()


def test_a_collector_switched_off_stays_off() -> None:
    gc.disable()
    try:
        with paused_gc():
            pass
        assert not gc.isenabled()
    finally:
        gc.enable()


def test_resumes_after_an_error() -> None:
    try:
        with paused_gc():
            raise ValueError("a refused batch")
    except ValueError:
        pass
    assert gc.isenabled()

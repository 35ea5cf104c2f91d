"""Small helpers for the hot paths (bulk reads and writes of many short-lived rows)."""

from __future__ import annotations

import gc
from collections.abc import Iterator
from contextlib import contextmanager


@contextmanager
def gc_paused() -> Iterator[None]:
    """Pause the cyclic garbage collector while many short-lived objects are made.

    Rows, tuples and records built in bulk hold no reference cycles and are freed by
    reference counting, but their number starts full collections that walk every live
    object; those passes cost more than building tens of thousands of rows.
    """
    enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if enabled:
            gc.enable()

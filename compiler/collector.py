"""A pause of Python's cycle collector while a stage builds large acyclic structures.

A big program becomes millions of small frozen records (tree nodes, resolved bits, IR drives)
that never form reference cycles; the cyclic collector would rescan them over and over as they
accumulate, which costs more than the work itself. Reference counting still frees everything.
"""

from __future__ import annotations

import gc
from contextlib import contextmanager
from typing import Iterator

__all__ = ["collector_paused"]


@contextmanager
def collector_paused() -> Iterator[None]:
    """Pause cycle collection for the duration; restores the previous setting, nests safely."""
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()

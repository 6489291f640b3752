"""Frozen records made many at a time: the members of large groups, their resolved bits, the
IR's drives and expectations.

A board of tens of thousands of nets gives programs with groups of thousands of members, and
each member becomes a few small frozen slots records (its span, its signal, its resolved bit);
a step of such a program drives and expects as many bits.
A dataclass's generated `__init__` stores one field at a time in Python; `frozen_records`
stores a whole column of values through the field's slot descriptor with builtins instead,
which makes the same records in about half the time.
"""

from __future__ import annotations

import dataclasses
from collections import deque
from itertools import repeat
from typing import Any, Iterable

__all__ = ["frozen_records"]


def frozen_records(kind: type, count: int, *columns: Iterable[Any]) -> list:
    """`count` records of the frozen slots dataclass `kind`, its fields given column by column
    in declaration order: record i gets item i of every column, exactly as `kind(...)` would.

    Only for plain records: every field given, no `__post_init__` (nothing else would run).
    """
    names = tuple(field.name for field in dataclasses.fields(kind))
    if len(columns) != len(names) or hasattr(kind, "__post_init__") or \
            kind.__dict__.get("__slots__") != names:
        raise TypeError(f"{kind.__name__} records cannot be made column by column")
    made = list(map(object.__new__, repeat(kind, count)))
    for name, values in zip(names, columns):
        deque(map(kind.__dict__[name].__set__, made, values), maxlen=0)
    return made

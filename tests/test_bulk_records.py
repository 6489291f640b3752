"""Records made a column at a time are the records the constructor makes.

`frozen_records` stores each field of many frozen slots records through the slot's descriptor;
the records must equal, field for field, what calling the class gives, and a class the shortcut
cannot make faithfully (no slots, a __post_init__, missing fields) must be refused.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import repeat

import pytest
from hypothesis import given
from hypothesis import strategies as st

from scanloom.diagnostics import SourceSpan
from scanloom.lang import ast
from scanloom.bulk_records import frozen_records
from scanloom.lang.resolve import BitRef

_FIELDS = ("file", "line", "column", "end_line", "end_column")


@given(st.lists(st.tuples(st.text(max_size=5), st.integers(), st.integers(), st.integers(),
                          st.integers()), max_size=30))
def test_spans_equal_the_constructed_ones(rows: list[tuple]) -> None:
    made = frozen_records(SourceSpan, len(rows), *(list(column) for column in zip(*rows)) if rows
                          else ((),) * 5)
    expected = [SourceSpan(*row) for row in rows]
    assert made == expected
    assert [tuple(getattr(m, f) for f in _FIELDS) for m in made] == rows
    assert all(type(m) is SourceSpan for m in made)


def test_signals_and_bits_equal_the_constructed_ones() -> None:
    span = SourceSpan("t.loom", 3, 5, 3, 9)
    (signal,) = frozen_records(ast.PinSignal, 1, ["U1"], ["Q(0)"], [span])
    assert signal == ast.PinSignal("U1", "Q(0)", span) and signal.span is span  # spans: compare=False
    bits = frozen_records(BitRef, 2, ["N0", "U1.Q(0)"], [False, True], ["N0", None])
    assert bits == [BitRef("N0", False, "N0"), BitRef("U1.Q(0)", True, None)]
    assert [b.key for b in bits] == ["N0", "U1.Q(0)"]
    with pytest.raises(AttributeError):
        bits[0].target = "N1"  # type: ignore[misc]  # still frozen


@dataclass(frozen=True)
class _NoSlots:
    a: int


@dataclass(frozen=True, slots=True)
class _Checked:
    a: int

    def __post_init__(self) -> None:
        if self.a < 0:
            raise ValueError("negative")


def test_classes_it_cannot_make_faithfully_are_refused() -> None:
    with pytest.raises(TypeError):
        frozen_records(_NoSlots, 1, [1])
    with pytest.raises(TypeError):
        frozen_records(_Checked, 1, [-1])
    with pytest.raises(TypeError):
        frozen_records(BitRef, 1, ["N0"], [False])  # a field missing
    assert frozen_records(BitRef, 0, repeat("x"), repeat(False), repeat(None)) == []

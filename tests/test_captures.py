"""compare_expectations: the scatter of pin entries gives what setting bit by bit gives.

Where no two pin entries of an expectation table share a scan position, the expected bits and
the compare mask are scattered in one step; otherwise each compared position is set on its
own. A random table is applied both ways (the second by clearing `pins_apart`) to the same
scan, and the two scans must agree bit for bit.
"""

from __future__ import annotations

from dataclasses import replace

from bitarray import bitarray, frozenbitarray
from hypothesis import given
from hypothesis import strategies as st

from scanloom.backend.captures import ExpectationTable, compare_expectations


@st.composite
def _tables(draw):
    length = draw(st.integers(1, 60))
    targets = [f"N{i}" for i in range(draw(st.integers(1, 20)))]
    positions = draw(st.lists(st.integers(0, length - 1), unique=True, max_size=length))
    owners = [draw(st.integers(0, len(targets) - 1)) for _ in positions]
    latches = draw(st.lists(st.integers(0, length - 1), unique=True, max_size=5))
    table = ExpectationTable(
        modes=("EXTEST",), targets=targets, pin_position=positions, pin_owner=owners,
        pins_one_each=owners == list(range(len(targets))),
        pins_apart=True,
        latch_position=latches, latch_owner=[draw(st.integers(0, len(targets) - 1)) for _ in latches],
        dyn_position=[], dyn_owner=[], dyn_control=[], dyn_disable=frozenbitarray(),
        dyn_pin_driving=frozenbitarray(), dyn_pin_idle=frozenbitarray(),
        dyn_latch_driving=frozenbitarray(), dyn_latch_idle=frozenbitarray(),
        unobservable=(), dynamic_only=())
    values = "".join(draw(st.sampled_from("01X")) for _ in targets)
    tdi = bitarray([draw(st.booleans()) for _ in range(length)])
    start_mask = bitarray([draw(st.booleans()) for _ in range(length)])
    return table, values, tdi, start_mask


@given(_tables())
def test_scattered_pins_equal_pins_set_one_by_one(case) -> None:
    table, values, tdi, start_mask = case
    results = []
    for variant in (table, replace(table, pins_apart=False)):
        tdo, mask = bitarray(len(tdi)), bitarray(start_mask)
        tdo.setall(0)
        compare_expectations(variant, values, bitarray(len(tdi)), tdi, tdo, mask)
        results.append((tdo, mask))
    assert results[0] == results[1]
    # and each compared pin entry reads its expectation's value (0/1), X ones not compared
    tdo, mask = results[0]
    latched = set(table.latch_position)
    for position, owner in zip(table.pin_position, table.pin_owner):
        if position in latched:
            continue
        if values[owner] != "X":
            assert mask[position] and tdo[position] == (values[owner] == "1")
        elif not start_mask[position]:
            assert not mask[position]

"""Shift records -> TAP cycles: a program worked out by hand, and properties over random programs."""

from __future__ import annotations

import random

import pytest
from bitarray import bitarray
from hypothesis import given, settings
from hypothesis import strategies as st

from handbuilt import (
    dr_scan,
    two_device_program,
    idle_record,
    ir_scan,
    make_device_map,
    make_program,
    random_chain,
    random_program,
    reset_record,
)
from scanloom.backend.cycle_stream import tap_states_from_tms
from scanloom.backend.cycles import lay_out_cycles, scan_sequence_lower_bound
from scanloom.backend.records import DR_SCAN, IR_SCAN, ChainMap, ShiftRecord
from scanloom.backend.tap import UNKNOWN_STATE_CODE, TapState, walk

S = TapState


def test_two_device_program_cycle_by_cycle() -> None:
    # Worked out by hand from the state diagram (IEEE Std 1149.1, clause 6.1, from memory):
    #  0-4   reset: TMS 1,1,1,1,1 from an unknown state
    #  5-9   TLR -0-> RTI -1-> Select-DR -1-> Select-IR -0-> Capture-IR -0-> Shift-IR
    # 10-14  Shift-IR, 5 bits, TMS 0,0,0,0,1
    # 15     Exit1-IR -1-> Update-IR
    # 16-18  Update-IR -1-> Select-DR -0-> Capture-DR -0-> Shift-DR (back to back: no RTI)
    # 19-23  Shift-DR, 5 bits, TMS 0,0,0,0,1
    # 24     Exit1-DR -1-> Update-DR
    # 25     Update-DR -0-> RTI
    # 26-27  two idle clocks in RTI, TMS 0
    # 28-32  reset: TMS 1 x5 (RTI, Select-DR, Select-IR, TLR, TLR)
    stream = lay_out_cycles(two_device_program())
    assert stream.count == 33 == stream.lower_bound
    assert stream.tms == bitarray("11111" "01100" "00001" "1" "100" "00001" "1" "0" "00" "11111")
    assert stream.tdi == bitarray("00000" "00000" "00010" "0" "000" "01011" "0" "0" "00" "00000")
    assert stream.mask == bitarray("00000" "00000" "11011" "0" "000" "10001" "0" "0" "00" "00000")
    assert stream.tdo == bitarray("00000" "00000" "10010" "0" "000" "10000" "0" "0" "00" "00000")
    expected_states = (
        [None] * 5
        + [S.TEST_LOGIC_RESET, S.RUN_TEST_IDLE, S.SELECT_DR_SCAN, S.SELECT_IR_SCAN, S.CAPTURE_IR]
        + [S.SHIFT_IR] * 5 + [S.EXIT1_IR, S.UPDATE_IR, S.SELECT_DR_SCAN, S.CAPTURE_DR]
        + [S.SHIFT_DR] * 5 + [S.EXIT1_DR, S.UPDATE_DR, S.RUN_TEST_IDLE, S.RUN_TEST_IDLE]
        + [S.RUN_TEST_IDLE, S.SELECT_DR_SCAN, S.SELECT_IR_SCAN, S.TEST_LOGIC_RESET, S.TEST_LOGIC_RESET]
    )
    codes = [UNKNOWN_STATE_CODE if s is None else int(s) for s in expected_states]
    assert list(stream.state_names) == codes
    assert stream.state_name(0) == "unknown" and stream.state_name(12) == "Shift-IR"
    assert stream.record_starts == (0, 5, 16, 28)
    assert stream.shift_starts == (10, 19)


def test_reset_with_trst_is_still_five_tms_ones() -> None:
    # The cycle table has no TRST column: a player with TRST asserts it as well (README).
    u1 = make_device_map("U1", 0, 4)
    chain = ChainMap((u1,))
    program = make_program(chain, [reset_record(use_trst=True), idle_record(3)])
    stream = lay_out_cycles(program)
    # 5 x TMS=1, then TLR -0-> RTI and three clocks in RTI; it rests there.
    assert stream.tms == bitarray("11111" "0" "000")
    assert stream.count == stream.lower_bound == 9
    assert stream.state_name(8) == "Run-Test/Idle"


def test_a_scan_resting_in_test_logic_reset_goes_there_before_the_next_scan() -> None:
    u1 = make_device_map("U1", 0, 2)
    chain = ChainMap((u1,))
    scan = ir_scan(chain, {"U1": "SAMPLE"})
    resting = ShiftRecord(**{**{f: getattr(scan, f) for f in scan.__dataclass_fields__},
                             "end_state": "TEST_LOGIC_RESET"})
    program = make_program(chain, [reset_record(), resting, ir_scan(chain, {"U1": "EXTEST"})])
    stream = lay_out_cycles(program)
    states = [stream.state_name(c) for c in range(stream.count)]
    # After the first Update-IR: Select-DR, Select-IR, Test-Logic-Reset (TMS 1,1,1), then the path
    # TLR -0-> RTI -1-> ... to the second Shift-IR.
    first_update = states.index("Update-IR")
    assert states[first_update + 1:first_update + 4] == ["Select-DR-Scan", "Select-IR-Scan", "Test-Logic-Reset"]
    assert stream.count == stream.lower_bound


def _scans(program):
    return [r for r in program.records if r.kind in (IR_SCAN, DR_SCAN)]


@settings(max_examples=60, deadline=None)
@given(st.integers(min_value=0, max_value=2**32 - 1))
def test_random_programs_lay_out_at_the_lower_bound_and_follow_the_diagram(seed: int) -> None:
    rng = random.Random(seed)
    program = random_program(rng, random_chain(rng, boundary=(1, 60)), operations=10)
    stream = lay_out_cycles(program)
    assert stream.count == stream.lower_bound == scan_sequence_lower_bound(program.records)
    # The recorded states are what the TMS bits walk through (IEEE Std 1149.1 diagram).
    assert tap_states_from_tms(stream.tms) == stream.state_names
    states = walk(S.TEST_LOGIC_RESET, stream.tms[5:])
    assert bytes(int(s) for s in states[:-1]) == stream.state_names[5:]
    # Each scan's bits sit in Shift-xR from its shift start; the last shift edge has TMS=1.
    inside = bitarray(stream.count)
    inside.setall(0)
    for record, start in zip(_scans(program), stream.shift_starts):
        stop = start + record.length
        shift = S.SHIFT_IR if record.kind == IR_SCAN else S.SHIFT_DR
        assert set(stream.state_names[start:stop]) == {int(shift)}
        assert stream.tdi[start:stop] == record.tdi
        assert stream.mask[start:stop] == record.mask
        assert stream.tdo[start:stop] == record.tdo & record.mask
        assert stream.tms[start:stop] == bitarray("0" * (record.length - 1) + "1")
        inside[start:stop] = 1
    # TDI is 0 and nothing is compared outside shifts.
    assert not (stream.tdi & ~inside).any()
    assert not (stream.mask & ~inside).any()
    # Idle clocks: each record with idle clocks n is followed by n TMS=0 edges in RTI.
    idle_edges = sum(1 for c in range(stream.count)
                     if stream.state_names[c] == S.RUN_TEST_IDLE and not stream.tms[c])
    assert idle_edges == sum(r.idle_clocks for r in program.records)
    # The program ends at rest in its last record's state.
    final = walk(S(stream.state_names[-1]), [stream.tms[-1]])[-1]
    assert final.name == program.records[-1].end_state


def test_first_record_must_be_a_reset() -> None:
    u1 = make_device_map("U1", 0, 2)
    chain = ChainMap((u1,))
    with pytest.raises(ValueError, match=r"^a program's first record must be a reset"):
        lay_out_cycles(make_program(chain, [ir_scan(chain, {"U1": "BYPASS"})]))


@pytest.mark.parametrize("change, message", [
    ({"length": 0, "tdi": bitarray(), "tdo": bitarray(), "mask": bitarray()},
     r"^record 1: a ir scan needs at least one bit$"),
    ({"tdo": bitarray("1")}, r"^record 1: tdo has 1 bits, length is 2$"),
    ({"end_state": "SHIFT_DR"}, r"^record 1: cannot rest in Shift-DR"),
    ({"idle_clocks": -1}, r"^record 1: negative idle clocks$"),
    ({"kind": "pause"}, r"^record 1: unknown kind 'pause'$"),
])
def test_records_the_layout_cannot_honour(change: dict, message: str) -> None:
    u1 = make_device_map("U1", 0, 2)
    chain = ChainMap((u1,))
    scan = ir_scan(chain, {"U1": "BYPASS"})
    fields = {f: getattr(scan, f) for f in scan.__dataclass_fields__}
    bad = ShiftRecord(**{**fields, **change})
    with pytest.raises(ValueError, match=message):
        lay_out_cycles(make_program(chain, [reset_record(), bad]))


def test_a_long_program_is_laid_out_in_slices() -> None:
    # 64 devices x 1,500 boundary cells, 12 DR scans: over a million TCKs, bit-exact.
    chain = ChainMap(tuple(make_device_map(f"U{i}", i, 8, boundary_length=1500) for i in range(64)))
    rng = random.Random(7)
    records = [reset_record(), ir_scan(chain, {d.ref: "SAMPLE" for d in chain.devices})]
    for _ in range(12):
        shifted = {d.ref: "".join(rng.choice("01") for _ in range(1500)) for d in chain.devices}
        records.append(dr_scan(chain, {d.ref: "BOUNDARY" for d in chain.devices}, shifted,
                               {d.ref: "X" * 1500 for d in chain.devices}))
    program = make_program(chain, records + [reset_record()])
    stream = lay_out_cycles(program)
    assert stream.count == stream.lower_bound > 12 * 96_000
    for record, start in zip(_scans(program), stream.shift_starts):
        assert stream.tdi[start:start + record.length] == record.tdi

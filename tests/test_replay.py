"""The independent replay: its own TAP controller, the chained registers, and what it catches."""

from __future__ import annotations

import dataclasses
import random
import subprocess
import sys
from pathlib import Path

import pytest
from bitarray import bitarray
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from chainfactory import drive, expect, idcode_for, make_board, make_device, make_step, make_test, modes_for
from chainfactory import make_program as make_ir_program
from handbuilt import (
    dr_scan,
    idle_record,
    ir_scan,
    make_device_map,
    make_program,
    random_chain,
    random_program,
    reset_record,
    two_device_program,
)
from scanloom.backend.chainmap import build_chain_map
from scanloom.backend.cycles import lay_out_cycles
from scanloom.backend.records import ChainMap
from scanloom.backend.schedule import schedule
from scanloom.backend.shiftfile import read_shift_file
from scanloom.backend.writers.json_writer import shift_file_data, write_shift_file
from scanloom.sim.replay import replay
from scanloom.sim.tap_controller import ALL_STATES, RESET, TapController, following_state
from test_tap import DIAGRAM


def test_replay_imports_neither_the_scheduler_nor_the_cycle_layout() -> None:
    # DEVELOPERS.md: sim never imports backend.schedule or backend.cycles; its TAP is its own.
    code = ("import sys, scanloom.sim.replay, scanloom.sim.tap_controller;"
            "print(sorted(m for m in sys.modules if m in ('scanloom.backend.schedule',"
            "'scanloom.backend.cycles')))")
    assert subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          check=True).stdout.strip() == "[]"
    alone = "import sys, scanloom.sim.tap_controller; print('scanloom.backend.tap' in sys.modules)"
    assert subprocess.run([sys.executable, "-c", alone], capture_output=True, text=True,
                          check=True).stdout.strip() == "False"


@pytest.mark.parametrize("state, tms", sorted(DIAGRAM))
def test_replay_controller_follows_the_standards_diagram(state: str, tms: int) -> None:
    # IEEE Std 1149.1, clause 6.1, Figure 6-1 (from memory), the same transcription as test_tap.
    assert following_state(state, tms) == DIAGRAM[(state, tms)]
    assert len(ALL_STATES) == 16


def test_replay_controller_is_unknown_until_five_tms_ones() -> None:
    tap = TapController()
    assert tap.state is None
    for _ in range(4):
        assert tap.clock(1) is None  # e.g. from Shift-DR four ones only reach Select-IR-Scan
    assert tap.clock(1) == RESET
    assert tap.clock_run(0, 1000) == "Run-Test/Idle"


def test_the_two_device_program_replays_cleanly() -> None:
    program = two_device_program()
    report = replay(program, lay_out_cycles(program))
    assert report.ok, report.render()
    # Two instructions and two images checked; the known TDO bits are the four compared IR
    # capture bits (U2 "X01": bits 0 and 1; U1 "01": both). The compared boundary bits are not
    # known to the replay: a boundary cell captures pins it does not model.
    assert (report.instructions_checked, report.images_checked, report.known_tdo_bits) == (2, 2, 4)
    assert report.summary() == ("replay agrees: 33 TCK, 2 scans; 2 instructions, 2 register images "
                                "and 4 known TDO bits checked")


def _with_record(program, index: int, **changes):
    records = list(program.records)
    records[index] = dataclasses.replace(records[index], **changes)
    return dataclasses.replace(program, records=tuple(records))


def _messages(program, stream=None) -> list[str]:
    report = replay(program, stream if stream is not None else lay_out_cycles(program))
    return [str(m) for m in report.mismatches]


def test_a_wrong_intended_instruction_is_reported() -> None:
    program = two_device_program()
    bad = _with_record(program, 1, intent={"U1": "EXTEST", "U2": "EXTEST"})
    assert _messages(bad) == [
        "record 1, U1 IR, cycle 16: after Update-IR the device holds SAMPLE (opcode 01), intended EXTEST"]


def test_a_wrong_intended_image_is_reported_bit_by_bit() -> None:
    program = two_device_program()
    bad = _with_record(program, 2, intent={"U1": "111", "U2": "01"})
    # U1 shifted "110" (bit 0 = 0); U2 shifted "10": bits 0 and 1 differ from "01".
    assert _messages(bad) == [
        "record 2, U1 BOUNDARY bit 0, cycle 25: after Update-DR the update stage holds 0, intended 1",
        "record 2, U2 BOUNDARY bit 0, cycle 25: after Update-DR the update stage holds 0, intended 1",
        "record 2, U2 BOUNDARY bit 1, cycle 25: after Update-DR the update stage holds 1, intended 0",
    ]


def test_an_expected_ir_capture_bit_the_model_knows_is_checked() -> None:
    # IEEE Std 1149.1 (clause 7.1, from memory): Capture-IR loads INSTRUCTION_CAPTURE, whose
    # two lowest bits are 01. Expecting 0 in U2's bit 0 (scan bit 0) must fail.
    u1 = make_device_map("U1", 0, 2, ir_capture="01")
    u2 = make_device_map("U2", 1, 3, ir_capture="X01")
    chain = ChainMap((u1, u2))
    scan = ir_scan(chain, {"U1": "SAMPLE", "U2": "EXTEST"})
    tdo = scan.tdo.copy()
    tdo[0] = 0
    program = make_program(chain, [reset_record(), dataclasses.replace(scan, tdo=tdo), reset_record()])
    assert _messages(program) == [
        "record 1, U2 IR bit 0, cycle 10: scan bit 0: the model knows TDO is 1, the file expects 0"]


def _bypass_and_idcode_program(expected_u2: str, expected_u1: str = "0"):
    u1 = make_device_map("U1", 0, 3)
    u2 = make_device_map("U2", 1, 4, idcode="1010" + "X" * 12 + "0000" + "01101110000" + "1")
    chain = ChainMap((u1, u2))
    # After Test-Logic-Reset U2 holds IDCODE (it has an identification register), U1 BYPASS
    # (IEEE Std 1149.1, clauses 7.2 and 8.13, from memory): a DR scan needs no IR scan first.
    scan = dr_scan(chain, {"U1": "BYPASS", "U2": "DEVICE_ID"}, {"U1": "0", "U2": "0" * 32},
                   {"U1": expected_u1, "U2": expected_u2}, purpose="read")
    return make_program(chain, [reset_record(), scan, reset_record()])


def test_idcode_and_bypass_captures_are_known_and_x_bits_are_not_compared() -> None:
    pattern = "1010" + "X" * 12 + "0000" + "01101110000" + "1"
    program = _bypass_and_idcode_program(pattern)
    report = replay(program, lay_out_cycles(program))
    # 32 - 12 X bits of the IDCODE plus the BYPASS bit (captures 0, IEEE Std 1149.1 clause 10).
    assert report.ok and report.known_tdo_bits == 21


def test_a_wrong_idcode_or_bypass_expectation_is_reported() -> None:
    wrong_id = "1011" + "X" * 12 + "0000" + "01101110000" + "1"
    assert _messages(_bypass_and_idcode_program(wrong_id)) == [
        "record 1, U2 DEVICE_ID bit 28, cycle 37: scan bit 28: the model knows TDO is 0, "
        "the file expects 1"]
    pattern = "1010" + "X" * 12 + "0000" + "01101110000" + "1"
    assert _messages(_bypass_and_idcode_program(pattern, expected_u1="1")) == [
        "record 1, U1 BYPASS bit 0, cycle 41: scan bit 32: the model knows TDO is 0, the file expects 1"]


def test_tdi_bits_pass_through_the_chained_devices() -> None:
    # Two devices in BYPASS form a 2-bit chain: device i's TDO feeds device i+1's TDI, so in a
    # 4-bit scan TDO shows U2's bypass 0, U1's bypass 0, then TDI bits 0 and 1 (common practice:
    # this is how chain length is measured).
    u1, u2 = make_device_map("U1", 0, 2), make_device_map("U2", 1, 2)
    chain = ChainMap((u1, u2))
    scan = dr_scan(chain, {"U1": "BYPASS", "U2": "BYPASS"}, {"U1": "0", "U2": "0"}, {"U1": "0", "U2": "0"})
    longer = dataclasses.replace(scan, length=4, tdi=bitarray("0010"), tdo=bitarray("0001"),
                                 mask=bitarray("1111"))
    program = make_program(chain, [reset_record(), longer, reset_record()])
    # TDI bit 0 (0) is expected in scan bit 2 and matches; TDI bit 1 is 0 but 1 is expected.
    assert _messages(program) == [
        "record 1, cycle 12: TDO should be 0, the TDI bit 1 passing through the chain, but 1 is expected"]


def test_stream_and_record_disagreeing_is_reported() -> None:
    program = two_device_program()
    stream = lay_out_cycles(program)
    flipped = stream.tdi.copy()
    flipped[13] ^= 1  # the IR scan's bit 3: U1's opcode bit 0
    messages = _messages(program, dataclasses.replace(stream, tdi=flipped))
    assert messages[0] == "record 1, cycle 13: TDI bit 3 is 0 in the cycles, 1 in the record"
    assert "record 1, U1 IR, cycle 16: after Update-IR the device holds EXTEST (opcode 00), intended SAMPLE" in messages


def test_idle_clocks_resets_and_shift_starts_are_held_to_the_records() -> None:
    program = two_device_program()
    stream = lay_out_cycles(program)
    assert _messages(_with_record(program, 2, idle_clocks=5), stream) == [
        "record 2: the records ask for 5 clocks in Run-Test/Idle here, the stream spends 2"]
    moved = dataclasses.replace(stream, shift_starts=(10, 20))
    assert _messages(program, moved) == [
        "record 2, cycle 25: the file says the shift starts at cycle 20, the stream shifts from cycle 19"]
    no_final_reset = dataclasses.replace(program, records=program.records[:3] + (idle_record(1),))
    assert _messages(no_final_reset, stream) == [
        "record 2: the records ask for 3 clocks in Run-Test/Idle here, the stream spends 2",
        "the stream passes Test-Logic-Reset where no record asks for it",
        "record 3, cycle 33: the stream ends in Test-Logic-Reset, the last record rests in Run-Test/Idle"]


def test_segments_must_match_the_chain() -> None:
    program = two_device_program()
    record = program.records[2]
    swapped = tuple(dataclasses.replace(s, register="BYPASS") if s.device == "U2" else s
                    for s in record.segments)
    assert _messages(_with_record(program, 2, segments=swapped), lay_out_cycles(program)) == [
        "record 2, U2, cycle 25: the record places BYPASS at scan bits 0-1; the chain has BOUNDARY "
        "at scan bits 0-1"]


def test_a_stream_that_does_not_begin_with_a_reset_compares_blind() -> None:
    program = two_device_program()
    stream = lay_out_cycles(program)
    # Cut the five reset clocks: the controller's state is never known, so nothing can be checked.
    cut = dataclasses.replace(stream, tms=stream.tms[5:], tdi=stream.tdi[5:], tdo=stream.tdo[5:],
                              mask=stream.mask[5:], state_names=stream.state_names[5:])
    messages = _messages(program, cut)
    assert messages[0] == ("cycle 5: TDO is compared while the TAP state is not yet known; the stream "
                           "must first force Test-Logic-Reset")
    assert "record 1: the stream never makes this record's scan" in messages


def test_every_flipped_tms_bit_that_changes_the_program_breaks_the_replay() -> None:
    program = two_device_program()
    stream = lay_out_cycles(program)
    unnoticed = []
    for cycle in range(stream.count):
        tms = stream.tms.copy()
        tms[cycle] ^= 1
        if replay(program, dataclasses.replace(stream, tms=tms)).ok:
            unnoticed.append(cycle)
    # Only the first clock of the final reset: it starts in Run-Test/Idle, from where three TMS=1
    # clocks already reach Test-Logic-Reset (IEEE Std 1149.1 diagram), so with that bit at 0 the
    # stream idles one more clock and still resets -- the same program.
    assert unnoticed == [28]


def test_replay_reads_shift_file_data_directly(tmp_path: Path) -> None:
    program = two_device_program()
    stream = lay_out_cycles(program)
    assert replay(shift_file_data(program, stream, tmp_path)).ok
    path = write_shift_file(program, stream, tmp_path / "p.json")
    assert replay(*read_shift_file(path)).ok


@settings(max_examples=40, deadline=None)
@given(st.integers(min_value=0, max_value=2**32 - 1))
def test_random_hand_built_programs_replay_cleanly(seed: int) -> None:
    rng = random.Random(seed)
    program = random_program(rng, random_chain(rng), operations=10)
    stream = lay_out_cycles(program)
    report = replay(program, stream)
    assert report.ok, report.render(10)
    assert stream.count == stream.lower_bound


# -- the scheduler's programs on random chains -------------------------------------------------

@st.composite
def scheduled_programs(draw):
    """Random chains (1-8 devices, IR 2-12 bits, boundary 1-300 cells) and random programs."""
    devices = []
    for index in range(draw(st.integers(1, 8))):
        ir_length = draw(st.integers(2, 12))
        roomy = ir_length >= 3
        cells_total = draw(st.integers(1, 300))
        pins = draw(st.integers(0, min(cells_total // 2, 12)))
        specs = []
        for i in range(pins):
            specs.append((2 * i, draw(st.sampled_from(["BC_7", "BC_1"])), f"IO({i})", "BIDIR", "X",
                          2 * i + 1, 0, "Z"))
            specs.append((2 * i + 1, "BC_1", "*", "CONTROL", "0"))
        for j in range(cells_total - 2 * pins):
            specs.append((2 * pins + j, "BC_1", f"IN({j})", "INPUT", "X"))
        device = make_device(f"D{index}", ir_length, specs,
                             idcode=idcode_for(index + 1) if roomy and draw(st.booleans()) else None,
                             preload=roomy and draw(st.booleans()), clamp=roomy and draw(st.booleans()))
        devices.append((f"U{index + 1}", device, pins, cells_total - 2 * pins))
    nets: dict[str, list[str]] = {}
    inputs = [(ref, f"IN({j})") for ref, _, _, count in devices for j in range(count)]
    for ref, _, pins, _ in devices:
        for i in range(pins):
            pins_of_net = [f"{ref}.IO({i})"]
            if inputs and draw(st.booleans()):
                other, port = inputs.pop(draw(st.integers(0, len(inputs) - 1)))
                pins_of_net.append(f"{other}.{port}")
            nets[f"N_{ref}_{i}"] = pins_of_net
    board = make_board([(ref, device) for ref, device, _, _ in devices], nets, trst=draw(st.booleans()))
    tests = []
    for t in range(draw(st.integers(1, 3))):
        modes = {ref: draw(st.sampled_from(["EXTEST", "SAMPLE", "BYPASS"])) for ref, _, _, _ in devices}
        steps = []
        for s in range(draw(st.integers(1, 3))):
            drives, expects = [], []
            for net, members in nets.items():
                owner = members[0].split(".")[0]
                if modes[owner] == "EXTEST" and draw(st.booleans()):
                    drives.append(drive(net, draw(st.sampled_from("01Z")), members[0]))
                    expects.append(expect(net, draw(st.sampled_from("01X"))))
            steps.append(make_step(f"s{s}", modes_for(board, modes), drives, expects,
                                   wait_clocks=draw(st.sampled_from([0, 0, 3]))))
        tests.append(make_test(f"t{t}", steps))
    end = draw(st.sampled_from(["TEST_LOGIC_RESET", "RUN_TEST_IDLE"]))
    return make_ir_program(tests, end_state=end, tck_hz=draw(st.sampled_from([None, 1e6, 4e6]))), board


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                 HealthCheck.function_scoped_fixture])
@given(scheduled_programs())
def test_scheduled_programs_on_random_chains_replay_at_the_lower_bound(tmp_path: Path, case) -> None:
    program, board = case
    scanned = schedule(program, board)
    stream = lay_out_cycles(scanned)
    assert stream.count == stream.lower_bound
    report = replay(scanned, stream)
    assert report.ok, report.render(10)
    # ... and again from the file the compile writes.
    path = write_shift_file(scanned, stream, tmp_path / "prog.json")
    assert replay(*read_shift_file(path)).ok
    assert build_chain_map(board).devices[0].ref == "U1"

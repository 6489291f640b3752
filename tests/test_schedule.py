"""The scheduler: instruction scans, preload, pipelining and flush, registers, waits, notes.

Records are decoded here independently of the scheduler (opcodes looked up in the device
model with X as a wildcard, images read back from the TDI bits) so that the checks do not
simply repeat what the scheduler wrote into `intent`.
"""

from __future__ import annotations

from chainfactory import (
    drive, expect, idcode_for, make_board, make_device, make_io_device, make_program, make_step,
    make_test, make_wait, modes_for,
)
from hypothesis import given, settings
from hypothesis import strategies as st

from scanloom.backend.chainmap import build_chain_map
from scanloom.backend.records import DR_SCAN, IDLE, IR_SCAN, RESET, CheckRange, ShiftRecord
from scanloom.backend.schedule import schedule
from scanloom.ir import COMPUTED, RegisterRead, RegisterWrite
from scanloom.models.board import Board

# ------------------------------------------------------------------------------ decoding


def _decode_opcode(device, code: str) -> str:
    """The instruction an opcode (BSDL order) selects, X in the BSDL opcode matching anything."""
    for name, opcodes in device.instructions.items():
        for op in opcodes:
            if len(op) == len(code) and all(o in "Xx" or o == c for o, c in zip(op, code)):
                return name
    return "BYPASS"  # IEEE 1149.1: an unused opcode behaves as BYPASS


def _segment_bits(record: ShiftRecord, ref: str):
    for seg in record.segments:
        if seg.device == ref:
            return record.tdi[seg.offset:seg.offset + seg.length], seg
    raise KeyError(ref)


class Shadow:
    """Follows every device's instruction and boundary update stage through the TDI bits."""

    def __init__(self, board: Board) -> None:
        self.board = board
        self.devices = {entry.ref: entry.device for entry in board.chain}
        # IEEE 1149.1 Test-Logic-Reset: IDCODE where it exists, else BYPASS.
        self.instr = {ref: ("IDCODE" if "IDCODE" in d.instructions else "BYPASS")
                      for ref, d in self.devices.items()}
        self.held: dict[str, str | None] = {ref: None for ref in self.devices}
        self.entries: list[tuple[int, str, str, str | None]] = []  # record, ref, instr, held

    def follow(self, records: tuple[ShiftRecord, ...]) -> None:
        for number, rec in enumerate(records):
            assert rec.length == len(rec.tdi) == len(rec.tdo) == len(rec.mask)
            if rec.kind in (IR_SCAN, DR_SCAN):
                # Segments tile the scan exactly, the device nearest TDO at offset 0.
                spans = sorted((s.offset, s.length) for s in rec.segments)
                assert [o for o, _ in spans] == [sum(n for _, n in spans[:i]) for i in range(len(spans))]
                assert sum(n for _, n in spans) == rec.length
                offsets = {s.device: s.offset for s in rec.segments}
                refs = [e.ref for e in self.board.chain]
                assert [offsets[r] for r in refs] == sorted((offsets[r] for r in refs), reverse=True)
            if rec.kind == IR_SCAN:
                changed = False
                for ref, device in self.devices.items():
                    bits, _ = _segment_bits(rec, ref)
                    name = _decode_opcode(device, bits[::-1].to01())
                    assert rec.intent[ref] == name
                    if name != self.instr[ref]:
                        changed = True
                        self.entries.append((number, ref, name, self.held[ref]))
                    self.instr[ref] = name
                assert changed, f"record {number}: IR scan that changes no instruction"
            elif rec.kind == DR_SCAN:
                for ref, device in self.devices.items():
                    bits, seg = _segment_bits(rec, ref)
                    assert seg.register == device.selects.get(self.instr[ref], "BYPASS")
                    if seg.register == "BYPASS":
                        # IEEE 1149.1 bypass register: captures 0, compared in every DR scan.
                        assert not rec.tdo[seg.offset] and rec.mask[seg.offset]
                    if seg.register == "BOUNDARY":
                        self.held[ref] = bits[::-1].to01()
                        assert rec.intent[ref] == self.held[ref]

    def entered_driving_unloaded(self) -> list[tuple[int, str, str]]:
        """Entries into EXTEST or CLAMP with an undefined update stage (must never happen)."""
        return [(n, ref, name) for n, ref, name, held in self.entries
                if name in ("EXTEST", "CLAMP") and held is None]


def _scan(program, board, computed=None):
    result = schedule(program, board, computed)
    shadow = Shadow(board)
    shadow.follow(result.records)
    assert shadow.entered_driving_unloaded() == []
    return result


def _dr(records, purpose=None):
    return [r for r in records if r.kind == DR_SCAN and (purpose is None or r.purpose == purpose)]


def _compared(record: ShiftRecord, ref: str) -> dict[int, int]:
    """Compared bits of one device's segment: register bit -> expected value."""
    seg = next(s for s in record.segments if s.device == ref)
    return {i: record.tdo[seg.offset + i] for i in range(seg.length) if record.mask[seg.offset + i]}


# ------------------------------------------------------------------------------ a small board
# U1 drives, U2 observes. U1: 2001 style (separate PRELOAD), IO(0..2) each with its own
# control; U2: 1990 style (SAMPLE is SAMPLE/PRELOAD), BC_1 inputs.
U1 = make_io_device("DRV", 4, 3, preload=True, clamp=True, idcode=idcode_for(0x11))
U2 = make_device("RCV", 3, cells=[(i, "BC_1", f"IN({i})", "INPUT", "X") for i in range(3)])
BOARD = make_board([("U1", U1), ("U2", U2)],
                   {f"D{i}": [f"U1.IO({i})", f"U2.IN({i})"] for i in range(3)})
EXT = modes_for(BOARD, {"U1": "EXTEST", "U2": "SAMPLE"})


def _step(name, values: str, expected: str | None = None, modes=EXT, **kw):
    """A step driving D0..D2 from U1 with `values` ("01Z" per net) and expecting `expected`."""
    drives = [drive(f"D{i}", v, f"U1.IO({i})") for i, v in enumerate(values)]
    expects = [expect(f"D{i}", v) for i, v in enumerate(expected or "")]
    return make_step(name, modes, drives, expects, **kw)


def test_reset_first_and_back_to_test_logic_reset_at_the_end() -> None:
    board = make_board([("U1", U1), ("U2", U2)], {}, trst=True)
    records = schedule(make_program([]), board).records
    assert [r.kind for r in records] == [RESET, RESET]
    assert all(r.use_trst and r.end_state == "TEST_LOGIC_RESET" for r in records)
    idle_end = schedule(make_program([], end_state="RUN_TEST_IDLE"), BOARD).records
    assert idle_end[-1].kind == IDLE and idle_end[-1].idle_clocks == 1
    assert idle_end[-1].end_state == "RUN_TEST_IDLE"
    assert idle_end[0].use_trst is False  # no TRST on this board: five TMS=1 clocks


def test_preload_comes_before_extest_with_the_first_image() -> None:
    program = make_program([make_test("t", [_step("s1", "101", "101")])])
    result = _scan(program, BOARD)
    kinds = [(r.kind, r.purpose) for r in result.records]
    assert kinds == [(RESET, "reset"), (IR_SCAN, "instruction"), (DR_SCAN, "preload"),
                     (IR_SCAN, "instruction"), (DR_SCAN, "flush"), (RESET, "end")]
    # U1 goes to PRELOAD (the 2001 instruction); U2 keeps BYPASS (it has no IDCODE).
    assert result.records[1].intent == {"U1": "PRELOAD", "U2": "BYPASS"}
    # The preload puts s1's image in U1: IO(i) data cells 0, 2, 4 = 1, 0, 1 and their
    # controls 1, 3, 5 at the enable value 1 (disable value 0): bits 0..5 = 1,1,0,1,1,1,
    # written MSB first.
    assert result.records[2].intent == {"U1": "111011"}
    assert result.records[3].intent == {"U1": "EXTEST", "U2": "SAMPLE"}


def test_1990_device_preloads_with_sample() -> None:
    u3 = make_io_device("OLD", 3, 1)
    board = make_board([("U3", u3)], {})
    program = make_program([make_test("t", [make_step("s", modes_for(board, {"U3": "EXTEST"}),
                                                      [drive("U3.IO(0)", "1")])])])
    records = _scan(program, board).records
    assert records[1].intent == {"U3": "SAMPLE"} and records[2].purpose == "preload"


def test_pipelining_each_response_in_the_next_scan_and_a_final_flush() -> None:
    program = make_program([make_test("t", [
        _step("s1", "000", "000"), _step("s2", "111", "111"), _step("s3", "010", "010")])])
    records = _scan(program, BOARD).records
    drs = _dr(records)
    assert [r.purpose for r in drs] == ["preload", "drive", "drive", "flush"]
    # s1's apply scan is elided (preloaded); s2's apply compares s1, s3's compares s2, the
    # flush compares s3 (DESIGN.md: a scan captures the response to the update before it).
    assert [(r.step, _compared(r, "U2")) for r in drs[1:]] == [
        ("s2", {0: 0, 1: 0, 2: 0}), ("s3", {0: 1, 1: 1, 2: 1}), ("s3", {0: 0, 1: 1, 2: 0})]
    assert [c for r in drs[1:] for c in r.checks if c.device == "U2"] == [
        CheckRange("U2", "BOUNDARY", "t", "s1"), CheckRange("U2", "BOUNDARY", "t", "s2"),
        CheckRange("U2", "BOUNDARY", "t", "s3")]
    # The flush re-shifts what is in force, so its update changes nothing.
    assert drs[3].tdi == drs[2].tdi
    # BC_7 reads its own pin back while driving (IEEE 1149.1-2001 Annex B BC_7, from memory):
    # U1's data cells are compared too.
    assert _compared(drs[3], "U1") == {0: 0, 2: 1, 4: 0}


def test_first_apply_scan_is_kept_when_the_image_is_not_in_force() -> None:
    # Test 2 starts in the same instructions, with other drives: no IR scan, but a drive scan.
    program = make_program([make_test("a", [_step("s", "111")]),
                            make_test("b", [_step("s", "000", "000")])])
    records = _scan(program, BOARD).records
    assert [(r.kind, r.purpose, r.test) for r in records[1:-1]] == [
        (IR_SCAN, "instruction", "a"), (DR_SCAN, "preload", "a"), (IR_SCAN, "instruction", "a"),
        (DR_SCAN, "drive", "b"), (DR_SCAN, "flush", "b")]


def test_release_disables_the_control_and_x_is_not_compared() -> None:
    program = make_program([make_test("t", [_step("s1", "11Z", "11X"), _step("s2", "ZZZ", "XXX")])])
    records = _scan(program, BOARD).records
    drs = _dr(records)
    # s1: IO(2) released: its control cell 5 holds the disable value 0 and its data cell 4
    # the safe value (X, taken as 0): bits 0..5 = 1,1,1,1,0,0, written MSB first.
    assert drs[0].intent["U1"] == "001111"
    # s2 releases everything: all controls at 0, data cells keep the safe value 0.
    assert drs[1].intent["U1"] == "000000"
    assert _compared(drs[1], "U2") == {0: 1, 1: 1}  # s1's response: D2 expected X, masked
    # s2 expects nothing but X: nothing is pending, so no flush scan follows.
    assert [r.purpose for r in drs] == ["preload", "drive"]


def test_shared_control_cell_enables_its_undriven_sibling_at_its_safe_value() -> None:
    dev = make_device("PAIR", 3, cells=[
        (0, "BC_1", "Y(0)", "OUTPUT3", "X", 2, 1, "Z"),
        (1, "BC_1", "Y(1)", "OUTPUT3", "1", 2, 1, "Z"),
        (2, "BC_1", "*", "CONTROL", "1"),
    ], preload=True)
    board = make_board([("U1", dev)], {"A": ["U1.Y(0)"], "B": ["U1.Y(1)"]})
    program = make_program([make_test("t", [make_step(
        "s", modes_for(board, {"U1": "EXTEST"}), [drive("A", "0", "U1.Y(0)")])])])
    result = _scan(program, board)
    # Control 2 at the enable value 0 (NOT disable 1); Y(1) drives its safe value 1.
    assert _dr(result.records, "preload")[0].intent == {"U1": "010"}


def test_bypass_bits_shift_zero_and_are_compared_in_every_dr_scan() -> None:
    u3 = make_device("BYP", 5)
    board = make_board([("U3", u3), ("U1", U1), ("U2", U2)],
                       {f"D{i}": [f"U1.IO({i})", f"U2.IN({i})"] for i in range(3)})
    modes = modes_for(board, {"U1": "EXTEST", "U2": "SAMPLE"})
    program = make_program([make_test("t", [_step("s1", "101", "101", modes=modes),
                                            _step("s2", "010", "010", modes=modes)])])
    records = _scan(program, board).records
    for rec in _dr(records):
        seg = next(s for s in rec.segments if s.device == "U3")
        assert seg.register == "BYPASS" and seg.length == 1
        # U3 is nearest TDI, so its single bit is shifted last.
        assert seg.offset == rec.length - 1
        assert rec.tdi[seg.offset] == 0 and rec.tdo[seg.offset] == 0 and rec.mask[seg.offset] == 1
        assert CheckRange("U3", "BYPASS", "t", rec.step) in rec.checks


def test_bypass_prefers_the_all_ones_opcode_and_x_opcode_bits_go_as_zero() -> None:
    dev = make_device("ODD", 3, instructions={"EXTEST": "000", "SAMPLE": "0X1",
                                              "BYPASS": ("011", "111")},
                      ir_capture="101")
    board = make_board([("U1", dev)], {})
    program = make_program([make_test("t", [
        make_step("a", modes_for(board, {"U1": "SAMPLE"})),
        make_step("b", modes_for(board, {"U1": "BYPASS"}), reads=[RegisterRead("U1", "BYPASS", "0")]),
    ])])
    records = _scan(program, board).records
    irs = [r for r in records if r.kind == IR_SCAN]
    assert irs[0].tdi.to01() == "100"  # SAMPLE "0X1": bit 0 = 1, X as 0, bit 2 = 0
    assert irs[1].tdi.to01() == "111"  # BYPASS: the all-ones opcode (IEEE 1149.1 BYPASS)
    # IR capture "101" is fully compared (no X): bits 1,0,1 from bit 0.
    assert irs[0].tdo.to01() == "101" and irs[0].mask.to01() == "111"


def test_ir_scan_only_where_an_instruction_changes() -> None:
    program = make_program([make_test("a", [_step("s1", "111", "111")]),
                            make_test("b", [_step("s1", "111", "111"), _step("s2", "000")])])
    records = _scan(program, BOARD).records
    assert sum(r.kind == IR_SCAN for r in records) == 2  # to PRELOAD, then to EXTEST/SAMPLE


def test_idcode_read_with_x_bits_masked_and_explicit_pattern() -> None:
    dev = make_device("IDD", 4, idcode="1X10" + "0000000000000011" + "00000101010" + "1")
    board = make_board([("U1", dev), ("U2", U2)], {})
    ids = modes_for(board, {"U1": "IDCODE"})
    pattern = "XXXX" + "0000000000000011" + "000001010X0" + "1"
    program = make_program([make_test("t", [
        make_step("a", ids, reads=[RegisterRead("U1", "DEVICE_ID", "")]),
        make_step("b", ids, reads=[RegisterRead("U1", "DEVICE_ID", pattern)]),
    ])])
    records = _scan(program, board).records
    # After Test-Logic-Reset U1 already holds IDCODE and U2 BYPASS: no IR scan at all.
    assert [r.kind for r in records] == [RESET, DR_SCAN, DR_SCAN, RESET]
    first, second = _dr(records)
    # Read a (the BSDL pattern, IEEE 1149.1 IDCODE: bit 0 = 1): bit 30 is X in the BSDL.
    bits_a = _compared(first, "U1")
    assert 30 not in bits_a and bits_a[0] == 1 and bits_a[31] == 1 and bits_a[29] == 1
    assert len(bits_a) == 31
    bits_b = _compared(second, "U1")
    assert set(range(28, 32)).isdisjoint(bits_b) and 2 not in bits_b and len(bits_b) == 27
    assert second.checks == (CheckRange("U1", "DEVICE_ID", "t", "b"),
                             CheckRange("U2", "BYPASS", "t", "b"))
    assert first.purpose == second.purpose == "read"


def test_user_register_write_then_read_and_the_written_value_stays() -> None:
    dev = make_device("CFGD", 3, user_registers={"CFG": 4})
    board = make_board([("U1", dev)], {})
    cfg = modes_for(board, {"U1": "CFG"})
    program = make_program([make_test("t", [
        make_step("w", cfg, writes=[RegisterWrite("U1", "CFG", "1010")],
                  reads=[RegisterRead("U1", "CFG", "1X10")]),
        make_step("again", cfg, reads=[RegisterRead("U1", "CFG", "1010")]),
    ])])
    records = _scan(program, board).records
    drs = _dr(records)
    assert [r.purpose for r in drs] == ["drive", "drive", "flush"]
    # The write shifts "1010" (bit 0 first: 0,1,0,1); the read of step w is compared by the
    # next scan; step "again" re-shifts the written value so the register stays unchanged.
    assert [r.tdi.to01() for r in drs] == ["0101", "0101", "0101"]
    assert [r.intent for r in drs] == [{"U1": "1010"}] * 3
    assert _compared(drs[0], "U1") == {}
    assert _compared(drs[1], "U1") == {0: 0, 1: 1, 3: 1}  # bit 2 is X
    assert drs[1].checks == (CheckRange("U1", "CFG", "t", "w"),)
    assert _compared(drs[2], "U1") == {0: 0, 1: 1, 2: 0, 3: 1}


def test_wait_clocks_after_the_apply_scan_or_as_an_idle_record() -> None:
    program = make_program([make_test("t", [
        _step("s1", "111", "111", wait_clocks=7),  # apply elided: an idle record
        _step("s2", "000", "000", wait_clocks=5),  # apply scan carries the idle clocks
    ])])
    records = _scan(program, BOARD).records
    tail = [(r.kind, r.purpose, r.idle_clocks) for r in records[4:]]
    assert tail == [(IDLE, "wait", 7), (DR_SCAN, "drive", 5), (DR_SCAN, "flush", 0), (RESET, "end", 0)]


def test_wait_item_flushes_before_changing_instructions() -> None:
    bist = modes_for(BOARD, {"U1": "IDCODE"})
    program = make_program([make_test("t", [
        _step("s1", "111", "111"), make_wait(3, EXT), make_wait(100, bist)])])
    records = _scan(program, BOARD).records
    tail = [(r.kind, r.purpose) for r in records[4:]]
    # The first wait keeps the instructions: s1's response is still pending after it; the
    # second changes them, so the response is flushed before the IR scan.
    assert tail == [(IDLE, "wait"), (DR_SCAN, "flush"), (IR_SCAN, "instruction"), (IDLE, "wait"),
                    (RESET, "end")]
    assert records[-2].idle_clocks == 100


def test_clamp_is_preloaded_and_reloaded_when_its_image_changes() -> None:
    clamp = modes_for(BOARD, {"U1": "CLAMP", "U2": "SAMPLE"})
    program = make_program([make_test("t", [
        _step("s1", "111", "111", modes=clamp), _step("s2", "000", "000", modes=clamp)])])
    records = _scan(program, BOARD).records
    sequence = [(r.kind, r.purpose, r.intent.get("U1")) for r in records[1:-1]]
    assert sequence == [
        (IR_SCAN, "instruction", "PRELOAD"), (DR_SCAN, "preload", "111111"),
        (IR_SCAN, "instruction", "CLAMP"),
        # CLAMP selects BYPASS, so s2's image cannot be shifted under it: s1's response is
        # flushed, then U1 goes back to PRELOAD for the new image and returns to CLAMP.
        (DR_SCAN, "flush", None), (IR_SCAN, "instruction", "PRELOAD"),
        (DR_SCAN, "preload", "101010"), (IR_SCAN, "instruction", "CLAMP"),
        (DR_SCAN, "flush", None)]
    assert _compared(records[4], "U2") == {0: 1, 1: 1, 2: 1}
    assert next(s for s in records[4].segments if s.device == "U1").register == "BYPASS"


def test_computed_expectations_use_the_supplied_value_or_leave_a_note() -> None:
    program = make_program([make_test("t", [make_step(
        "s", EXT, [drive("D0", "1", "U1.IO(0)")], [expect("D0", COMPUTED), expect("D1", COMPUTED)])])])
    result = _scan(program, BOARD, {("t", "s", "D0"): "1"})
    assert _compared(_dr(result.records, "flush")[0], "U2") == {0: 1}
    assert "test t step s: computed expectation on D1 has no value; not compared" in result.notes


def test_expectation_no_cell_can_capture_is_a_note_not_a_crash() -> None:
    program = make_program([make_test("t", [make_step(
        "s", modes_for(BOARD, {"U1": "EXTEST"}), [drive("D0", "1", "U1.IO(0)")],
        [expect("U2.IN(0)", "1"), expect("NO_SUCH_NET", "0")])])])
    result = _scan(program, BOARD)
    assert any("can observe U2.IN(0)" in n for n in result.notes)  # U2 is in BYPASS
    assert any("can observe NO_SUCH_NET" in n for n in result.notes)


def test_bad_input_becomes_notes() -> None:
    program = make_program([make_test("t", [
        make_step("s", modes_for(BOARD, {"U1": "EXTSET"}), [drive("D0", "1", "U2.IN(0)")],
                  writes=[RegisterWrite("U1", "CFG", "1")])])])
    result = _scan(program, BOARD)
    assert any("instruction EXTSET is not described" in n for n in result.notes)
    assert any("does not drive; drive on D0 not applied" in n for n in result.notes)
    assert any("write to U1.CFG" in n for n in result.notes)


def test_scheduling_is_deterministic() -> None:
    program = make_program([make_test("t", [_step("s1", "101", "101"), _step("s2", "Z10", "X10")])])
    one, two = schedule(program, BOARD), schedule(program, BOARD)
    fields = lambda r: (r.kind, r.tdi, r.tdo, r.mask, r.segments, r.checks, r.test, r.step,  # noqa: E731
                        r.purpose, r.intent, r.idle_clocks, r.end_state, r.use_trst)
    assert [fields(r) for r in one.records] == [fields(r) for r in two.records]
    assert one.notes == two.notes


def test_chain_map_names_every_cell_with_its_net() -> None:
    chain = build_chain_map(BOARD)
    assert [d.ref for d in chain.devices] == ["U1", "U2"] and chain.device("U2").position == 1
    u1 = chain.device("U1")
    assert u1.registers["DEVICE_ID"] == 32 and u1.registers["BYPASS"] == 1
    assert [(c.number, c.port, c.net) for c in u1.cells[:2]] == [(0, "IO(0)", "D0"), (1, None, None)]
    assert u1.opcodes["BYPASS"] == ("1111",) and u1.selects["PRELOAD"] == "BOUNDARY"


def test_bc1_bidir_is_compared_only_while_released() -> None:
    # IEEE 1149.1-2001 Annex B (from memory): a BC_1 bidir captures PI; while its output is
    # enabled PI is the system logic (unknown), while released PI is the pin.
    u1 = make_io_device("B1", 3, 2, cell_type="BC_1", preload=True)
    board = make_board([("U1", u1)], {"A": ["U1.IO(0)"], "B": ["U1.IO(1)"]})
    ext = modes_for(board, {"U1": "EXTEST"})
    program = make_program([make_test("t", [make_step(
        "s", ext, [drive("A", "1", "U1.IO(0)"), drive("B", "Z", "U1.IO(1)")],
        [expect("A", "1"), expect("B", "0")])])])
    result = _scan(program, board)
    assert _compared(_dr(result.records, "flush")[0], "U1") == {2: 0}  # only B's cell 2
    assert "test t step s: A is observed only by cells that capture system logic while they " \
        "drive; not compared" in result.notes


def test_bc2_output_compares_its_update_latch() -> None:
    # IEEE 1149.1-2001 Annex B (from memory): BC_2 OUTPUT2 captures its update latch in EXTEST.
    dev = make_device("L2", 3, [(0, "BC_2", "K", "OUTPUT2", "0"), (1, "BC_2", "M", "OUTPUT2", "1")],
                      preload=True)
    board = make_board([("U1", dev)], {"K": ["U1.K"], "M": ["U1.M"]})
    ext = modes_for(board, {"U1": "EXTEST"})
    program = make_program([make_test("t", [make_step(
        "s", ext, [drive("K", "1", "U1.K")], [expect("K", "1"), expect("M", "0")])])])
    flush = _dr(_scan(program, board).records, "flush")[0]
    # Expected: each latch holds what was shifted (K driven 1, M its safe 1), whatever the
    # expectation's value; the mismatching expectation on M is the checks' business.
    assert _compared(flush, "U1") == {0: 1, 1: 1}


def test_boundary_write_replaces_the_image() -> None:
    board = make_board([("U2", U2)], {})
    program = make_program([make_test("t", [make_step(
        "s", modes_for(board, {"U2": "SAMPLE"}), writes=[RegisterWrite("U2", "BOUNDARY", "101")])])])
    drs = _dr(_scan(program, board).records)
    assert [r.purpose for r in drs] == ["drive"] and drs[0].intent == {"U2": "101"}


def test_expectation_on_a_part_pin_is_observed_on_its_net() -> None:
    board = make_board([("U1", U1), ("U2", U2)],
                       {"D0": ["U1.IO(0)", "R1.2", "U2.IN(0)"]}, parts={"R1": ["1", "2"]})
    modes = modes_for(board, {"U1": "EXTEST", "U2": "SAMPLE"})
    program = make_program([make_test("t", [make_step(
        "s", modes, [drive("D0", "0", "U1.IO(0)")], [expect("R1.2", "0")])])])
    flush = _dr(_scan(program, board).records, "flush")[0]
    assert _compared(flush, "U2") == {0: 0} and _compared(flush, "U1") == {0: 0}


def test_intest_drives_core_inputs_after_a_preload() -> None:
    dev = make_device("CORE", 3, [(0, "BC_1", "A", "INPUT", "X"), (1, "BC_1", "Y", "OUTPUT2", "0")],
                      extra_instructions={"INTEST": "011"}, selects={"INTEST": "BOUNDARY"})
    board = make_board([("U1", dev)], {})
    program = make_program([make_test("t", [make_step(
        "s", modes_for(board, {"U1": "INTEST"}), [drive("U1.A", "1")])])])
    records = _scan(program, board).records
    assert [(r.kind, r.purpose) for r in records[1:4]] == [
        (IR_SCAN, "instruction"), (DR_SCAN, "preload"), (IR_SCAN, "instruction")]
    assert records[2].intent == {"U1": "01"}  # input cell 0 set to 1, output safe 0


def test_usercode_read_with_an_empty_pattern_expects_the_bsdl_usercode() -> None:
    dev = make_device("UC", 3, idcode=idcode_for(3), usercode="X" * 28 + "0110")
    board = make_board([("U1", dev)], {})
    program = make_program([make_test("t", [make_step(
        "s", modes_for(board, {"U1": "USERCODE"}), reads=[RegisterRead("U1", "DEVICE_ID", "")])])])
    read = _dr(_scan(program, board).records)[0]
    assert _compared(read, "U1") == {0: 0, 1: 1, 2: 1, 3: 0}


# ------------------------------------------------------------------------------ random programs

@st.composite
def _chains(draw):
    count = draw(st.integers(1, 4))
    devices = []
    for i in range(count):
        pins = draw(st.integers(1, 5))
        style_2001 = draw(st.booleans())
        with_id = draw(st.booleans())
        ir_length = draw(st.integers(3, 8))
        dev = make_io_device(f"R{i}", ir_length, pins, preload=style_2001, clamp=True,
                             idcode=idcode_for(i + 1) if with_id else None,
                             cell_type=draw(st.sampled_from(["BC_7", "BC_1", "BC_6"])))
        devices.append((f"U{i + 1}", dev))
    nets: dict[str, list[str]] = {}
    for ref, dev in devices:
        for port in dev.ports:
            if port == "IO":
                for bit in dev.ports[port].bits:
                    nets[f"N_{ref}_{bit[3:-1]}"] = [f"{ref}.{bit}"]
    return make_board(devices, nets)


@st.composite
def _programs(draw):
    board = draw(_chains())
    tests = []
    for t in range(draw(st.integers(1, 3))):
        items = []
        for s in range(draw(st.integers(1, 4))):
            modes = {}
            for entry in board.chain:
                choices = ["BYPASS", "EXTEST", "SAMPLE", "CLAMP"]
                if "IDCODE" in entry.device.instructions:
                    choices.append("IDCODE")
                modes[entry.ref] = draw(st.sampled_from(choices))
            chosen = modes_for(board, modes)
            if draw(st.integers(0, 5)) == 0:
                items.append(make_wait(draw(st.integers(0, 20)), chosen))
                continue
            drives, expects = [], []
            for net in board.nets.values():
                pin = net.pins[0]
                if modes[pin.ref] in ("EXTEST", "CLAMP"):
                    drives.append(drive(net.name, draw(st.sampled_from("01Z")), str(pin)))
                if draw(st.booleans()):
                    expects.append(expect(net.name, draw(st.sampled_from("01X"))))
            items.append(make_step(f"s{s}", chosen, drives, expects,
                                   wait_clocks=draw(st.integers(0, 3))))
        tests.append(make_test(f"t{t}", items))
    return board, make_program(tests, end_state=draw(st.sampled_from(
        ["TEST_LOGIC_RESET", "RUN_TEST_IDLE"])))


@settings(max_examples=60, deadline=None)
@given(_programs())
def test_random_programs_keep_the_invariants(case) -> None:
    board, program = case
    result = _scan(program, board)  # shadow decoding: tiling, BYPASS zeros, EXTEST preloaded
    records = result.records
    assert records[0].kind == RESET and records[-1].kind in (RESET, IDLE)
    # Every IR scan compares each device's INSTRUCTION_CAPTURE low bits "01" (IEEE 1149.1).
    for rec in records:
        if rec.kind == IR_SCAN:
            for seg in rec.segments:
                assert rec.tdo[seg.offset:seg.offset + 2].to01() == "10"
                assert rec.mask[seg.offset:seg.offset + 2].to01() == "11"
    again = schedule(program, board)
    assert [(r.kind, r.tdi, r.tdo, r.mask) for r in again.records] == \
        [(r.kind, r.tdi, r.tdo, r.mask) for r in records]


def test_a_cell_type_without_capture_description_is_noted_for_every_device_that_has_it() -> None:
    # IEEE 1149.1-2001 Annex B: what a cell captures comes from its CELL_INFO; a cell type
    # with none is not compared. Two devices of one part type each get their own note, the
    # first device's first: the expectation table works a part type's cells out only once.
    part = make_device("QUIRK", 2, cells=[(0, "XC_9", "A", "INPUT", "X"),
                                          (1, "BC_4", "B", "INPUT", "X")])
    driver = make_device("SRC", 2, cells=[(0, "BC_1", "Y", "OUTPUT2", "0"),
                                          (1, "BC_1", "W", "OUTPUT2", "0")])
    board = make_board([("U1", driver), ("U2", part), ("U3", part)],
                       {"N1": ["U1.Y", "U2.A", "U3.A"], "N2": ["U1.W", "U2.B", "U3.B"]})
    modes = modes_for(board, {"U1": "EXTEST", "U2": "EXTEST", "U3": "EXTEST"})
    step = make_step("s", modes, [drive("N1", "1"), drive("N2", "0")],
                     [expect("N1", "1"), expect("N2", "0")])
    program = schedule(make_program([make_test("t", [step])]), board)
    unknown = [n for n in program.notes if "no capture description" in n]
    assert unknown == [
        "U2: cell type XC_9 has no capture description; its cells capture X and are not compared",
        "U3: cell type XC_9 has no capture description; its cells capture X and are not compared",
    ]
    # N2 is still compared on both BC_4 cells: the response scan masks them in.
    response = next(r for r in program.records if r.kind == DR_SCAN and r.purpose == "flush")
    assert response.mask.count() >= 2

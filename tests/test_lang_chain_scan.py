"""Raw chain scans (`scan chain N bits in V expect W`) and `reset tap`, through the pipeline.

Parser, checks, lowering to the IR, the scheduler bit for bit on a two-device chain worked by
hand, the independent replay, and the formatter. Bit order (DESIGN.md): bit 0 of a literal is
its rightmost digit and the first bit shifted; the first bit out of TDO is bit 0 of the
register nearest TDO.
"""

from __future__ import annotations

import re

import pytest
from chainfactory import idcode_for, make_board, make_device
from lang_boards import U1_IDCODE, U2_IDCODE, diagnose, one, run

from scanloom.backend.cycles import lay_out_cycles
from scanloom.backend.records import DR_SCAN, IR_SCAN, RESET
from scanloom.backend.schedule import schedule
from scanloom.diagnostics import Diagnostics, ScanloomError
from scanloom.ir import ChainScan, TapReset, dump_ir
from scanloom.lang import ast
from scanloom.lang.fmt import format_text
from scanloom.lang.frontend import compile_source
from scanloom.lang.parser import parse_text
from scanloom.sim.replay import replay

# ------------------------------------------------------------------------------------ parser


def test_parser_builds_chain_scan_and_reset_nodes():
    program = parse_text('test t "t" {\n    scan chain 12 bits in 0x0A5 expect 0b1010_0101_XXXX\n'
                         '    reset tap\n    scan chain 3 bits in 5\n}\n')
    scan, reset, short = program.items[0].items
    assert isinstance(scan, ast.ChainScan) and isinstance(reset, ast.TapReset)
    assert (scan.length, scan.shifted.radix, scan.shifted.digits) == ("12", 16, "0A5")
    assert (scan.expected.radix, scan.expected.digits) == (2, "1010_0101_XXXX")
    assert short.expected is None and short.shifted.digits == "5"
    assert (scan.span.line, scan.span.column) == (2, 5)
    assert (scan.length_span.line, scan.length_span.column) == (2, 16)


def test_syntax_errors_say_what_the_scan_needs():
    with pytest.raises(ScanloomError) as caught:
        parse_text('test t "t" {\n    scan chain bits in 0x1\n}\n', "t.loom")
    rendered = caught.value.render()
    assert re.match(r"t\.loom:2:16: error: syntax error: unexpected 'bits'", rendered)
    assert "expected: a number" in rendered
    with pytest.raises(ScanloomError) as caught:
        parse_text('test t "t" {\n    reset\n}\n', "t.loom")
    assert "expected: 'tap'" in caught.value.render()


def test_a_value_before_a_line_end_does_not_invite_expect():
    # The scan's shifted value has its own rule, so `expect` is offered only after it.
    with pytest.raises(ScanloomError) as caught:
        parse_text('test t "t" {\n    step s {\n        drive A = 0 1\n    }\n}\n', "t.loom")
    assert "expected: ',' or the end of the line" in caught.value.render()

# ------------------------------------------------------------------------------------ checks


def test_values_must_fit_the_stated_length():
    found = diagnose('test t "t" {\n    scan chain 4 bits in 0b101 expect 0x1F\n}\n')
    one(found, "error", 2, 26, r"0b101 has 3 bits but the chain scan is 4 bits wide")
    one(found, "error", 2, 39, r"0x1F does not fit in the chain scan \(4 bits\)")


def test_shifted_bits_cannot_be_x_and_the_length_must_be_a_count():
    found = diagnose('test t "t" {\n    scan chain 4 bits in 0b10X1\n    scan chain 0 bits in 0\n}\n')
    one(found, "error", 2, 26, r"0b10X1 has X bits, which cannot be written")
    one(found, "error", 3, 16, r"a chain scan needs a whole number of bits, not 0")


def test_warnings_for_a_short_scan_and_for_driving_modes():
    # The small board's chain in BYPASS is 3 bits (one bypass cell per device).
    found = diagnose('test t "t" {\n    scan chain 2 bits in 0\n    U1 EXTEST\n'
                     '    scan chain 20 bits in 0\n}\n')
    one(found, "warning", 2, 16, r"the chain scan shifts 2 bits, but the chain is 3 bits long "
                                 r"in these modes: registers keep part of what they captured")
    one(found, "warning", 4, 5, r"U1 drives pins from the boundary register: after this scan "
                                r"they drive what it leaves there")

# ------------------------------------------------------------------------------------ lowering


def test_lowering_keeps_bit_strings_most_significant_first_and_resets_the_modes():
    program, _ = run('test t "t" {\n    U1, U2, U3 SAMPLE\n    scan chain 8 bits in 0x5 expect 0xXA\n'
                     '    reset tap\n    scan chain 70 bits in 0\n}\n')
    first, reset, second = program.tests[0].items
    assert isinstance(first, ChainScan) and isinstance(reset, TapReset)
    assert (first.name, first.tdi, first.expected) == ("chain_scan", "00000101", "XXXX1010")
    assert dict(first.modes) == {"U1": "SAMPLE", "U2": "SAMPLE", "U3": "SAMPLE"}
    # IEEE 1149.1 Test-Logic-Reset: IDCODE where the device has one, else BYPASS.
    assert dict(second.modes) == {"U1": "IDCODE", "U2": "IDCODE", "U3": "BYPASS"}
    assert second.name == "chain_scan_2" and second.expected == "X" * 70
    dump = dump_ir(program)
    assert '"kind": "ChainScan"' in dump and '"kind": "TapReset"' in dump
    assert '"tdi": "00000101"' in dump

# ------------------------------------------------------------------------------------ schedule


def _two_devices():
    """A (IR 3, IDCODE, boundary: output Y with control, input K) then B (IR 2, no IDCODE)."""
    a = make_device("A", 3, [(0, "BC_1", "Y", "OUTPUT3", "0", 1, 0, "Z"),
                             (1, "BC_1", "*", "CONTROL", "0"),
                             (2, "BC_1", "K", "INPUT", "X")], idcode=idcode_for(0x77))
    b = make_device("B", 2, [(0, "BC_1", "IN", "INPUT", "X")])
    return make_board([("A", a), ("B", b)], {"N": ["A.Y", "B.IN"]})


def _schedule(text: str):
    board = _two_devices()
    program = compile_source('board "b.yaml"\n' + text, "t.loom", board, Diagnostics())
    scan = schedule(program, board)
    return board, scan


def test_bypass_scan_bit_for_bit():
    # Chain TDI -> A -> B -> TDO, both in BYPASS: two bypass bits, B's first out.
    _, scan = _schedule('test t "t" {\n    A, B BYPASS\n    scan chain 6 bits in 0b001011 expect 0b10_1100\n}\n')
    kinds = [(r.kind, r.purpose) for r in scan.records]
    assert kinds == [(RESET, "reset"), (IR_SCAN, "instruction"), (DR_SCAN, "chain"), (RESET, "end")]
    record = scan.records[2]
    assert record.tdi.to01() == "110100"  # bit 0 first: the rightmost digit of 0b001011
    assert record.tdo.to01() == "001101"  # IEEE 1149.1 BYPASS captures 0; then TDI bits 0..3
    assert record.mask.to01() == "111111"
    assert [(s.device, s.register, s.offset, s.length) for s in record.segments] == [
        ("A", "BYPASS", 1, 1), ("B", "BYPASS", 0, 1)]
    assert record.intent == {}  # no update stage in the chain
    assert (record.test, record.step) == ("t", "chain_scan")


def test_reset_then_default_instructions_without_an_instruction_scan():
    board, scan = _schedule('test t "t" {\n    A, B SAMPLE\n    scan chain 4 bits in 0\n'
                            '    reset tap\n    scan chain 34 bits in 0b1' + "0" * 33
                            + ' expect 0b' + "X" + idcode_for(0x77) + "0" + '\n}\n')
    kinds = [(r.kind, r.purpose) for r in scan.records]
    assert kinds == [(RESET, "reset"), (IR_SCAN, "instruction"), (DR_SCAN, "chain"),
                     (RESET, "reset"), (DR_SCAN, "chain"), (RESET, "end")]
    after = scan.records[4]
    # After Test-Logic-Reset A selects its identification register (32 bits), B its bypass bit.
    assert [(s.device, s.register, s.offset, s.length) for s in after.segments] == [
        ("A", "DEVICE_ID", 1, 32), ("B", "BYPASS", 0, 1)]
    assert after.tdo[1:33].to01() == idcode_for(0x77)[::-1]
    assert after.mask.to01() == "1" * 33 + "0"
    cycles = lay_out_cycles(scan)
    assert replay(scan, cycles).ok


def test_an_image_is_unknown_after_a_raw_scan_so_extest_is_preloaded_again():
    _, scan = _schedule('test t "t" {\n    A EXTEST\n    step one {\n        drive N = 1\n    }\n'
                        '    A SAMPLE\n    scan chain 4 bits in 0\n    A EXTEST\n'
                        '    step two {\n        drive N = 1\n    }\n}\n')
    purposes = [r.purpose for r in scan.records]
    assert purposes.count("preload") == 2
    chain = next(r for r in scan.records if r.purpose == "chain")
    assert chain.intent == {}
    second_preload = [i for i, r in enumerate(scan.records) if r.purpose == "preload"][1]
    assert second_preload > scan.records.index(chain)
    assert replay(scan, lay_out_cycles(scan)).ok


def test_pending_responses_are_flushed_before_the_raw_scan():
    _, scan = _schedule('test t "t" {\n    A EXTEST\n    B SAMPLE\n    step one {\n        drive N = 1\n'
                        '        expect N = 1\n    }\n    scan chain 4 bits in 0\n}\n')
    purposes = [r.purpose for r in scan.records]
    chain = purposes.index("chain")
    assert "flush" in purposes[:chain]
    assert replay(scan, lay_out_cycles(scan)).ok

def test_a_scan_shorter_than_the_chain_is_listed_as_far_as_it_shifts(tmp_path):
    from scanloom.backend.writers.listing import render_listing

    # After reset: A's 32-bit identification register (nearest TDI) and B's bypass bit. Four
    # bits out: B's bypass 0, then A's IDCODE bits 0..2 (bit 0 of an IDCODE is always 1).
    _, scan = _schedule('test t "t" {\n    reset tap\n    scan chain 4 bits in 0 expect 0bXX10\n}\n')
    record = next(r for r in scan.records if r.purpose == "chain")
    assert record.length == 4 and record.mask.to01() == "1100"
    listing = render_listing(scan, lay_out_cycles(scan), tmp_path)
    assert "      scan bit 0: expect 0  B BYPASS bit 0" in listing
    assert "      scan bit 1: expect 1  A DEVICE_ID bit 0" in listing
    assert "scan bit 4" not in listing


# ------------------------------------------------------------------------------------ formatter


def test_formatter_round_trip():
    text = ('board "b.yaml"\n\ntest t "t" {\n    scan   chain 12   bits in 0x0A5   expect 0xA50  # out\n'
            '    reset    tap\n}\n')
    formatted = format_text(text)
    assert formatted == ('board "b.yaml"\n\ntest t "t" {\n    scan chain 12 bits in 0x0A5 expect 0xA50  # out\n'
                         '    reset tap\n}\n')
    assert parse_text(formatted) == parse_text(text)
    assert format_text(formatted) == formatted


def test_idcodes_of_the_small_board_read_back_through_a_raw_scan():
    # U1 and U2 have IDCODE, U3 not: after reset the chain is 32 + 32 + 1 bits.
    expected = U1_IDCODE + U2_IDCODE + "0"
    program, _ = run('test t "t" {\n    reset tap\n    scan chain 65 bits in 0 expect 0b' + expected + '\n}\n')
    scan = program.tests[0].items[1]
    assert scan.expected == expected

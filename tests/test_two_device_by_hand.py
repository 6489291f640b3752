"""A two-device chain scheduled by hand, bit by bit, with the reasoning beside every bit.

The chain (TDI -> TDO): U1 = ALPHA (3-bit IR, 1990-style combined SAMPLE/PRELOAD, no IDCODE),
then U2 = BRAVO (4-bit IR, 2001-style separate PRELOAD, IDCODE). Sources of the rules used:

- DESIGN.md bit order: bit i of a record is the i-th bit shifted. The first bit shifted ends
  in the device nearest TDO (U2 here), and within a register bit 0 is shifted first. So every
  scan is U2's register bits 0..n-1 followed by U1's register bits 0..n-1.
- BSDL strings (opcodes, captures, IDCODE, intent images) are MSB first: bit 0 is the
  rightmost character (IEEE 1149.1-2001 Annex B, BSDL: the string's last character is the
  bit nearest TDO).
- IEEE 1149.1 Capture-IR: the two low bits capture 01; our INSTRUCTION_CAPTURE strings say
  which other bits are fixed; X bits are not compared.
- IEEE 1149.1 Test-Logic-Reset: IDCODE is loaded where it exists, BYPASS otherwise.
- IEEE 1149.1 BYPASS register: captures 0.
- IEEE 1149.1-2001 EXTEST (from memory clause 8.8): the boundary register must be preloaded
  (SAMPLE/PRELOAD, or PRELOAD) before EXTEST drives the pins.
- Cell captures, IEEE 1149.1-2001 Annex B CELL_INFO (from memory): BC_1 INPUT captures the
  pin in SAMPLE; BC_1 OUTPUT3 captures system logic (unknown) in EXTEST; BC_7 BIDIR captures
  the pin even while driving in EXTEST.
"""

from __future__ import annotations

from chainfactory import drive, expect, make_board, make_device, make_program, make_step, \
    make_test, make_wait, modes_for

from scanloom.backend.records import DR_SCAN, IDLE, IR_SCAN, RESET, CheckRange, Segment
from scanloom.backend.schedule import schedule
from scanloom.ir import RegisterRead

ALPHA = make_device(
    "ALPHA", 3,
    cells=[
        (0, "BC_1", "Y", "OUTPUT3", "X", 1, 0, "Z"),  # output Y, enabled by cell 1 = 1
        (1, "BC_1", "*", "CONTROL", "0"),  # control of Y, disable value 0
        (2, "BC_1", "A", "INPUT", "X"),  # input A
    ],
    instructions={"EXTEST": "000", "SAMPLE": "010", "BYPASS": "111"},
    ir_capture="X01",
)
# IDCODE (BSDL order): version XXXX, part 0x0005, maker 0x02A, fixed bit 0 = 1.
BRAVO_IDCODE = "XXXX" + "0000000000000101" + "00000101010" + "1"
BRAVO = make_device(
    "BRAVO", 4,
    cells=[
        (0, "BC_1", "P", "INPUT", "X"),  # input P
        (1, "BC_7", "Q", "BIDIR", "X", 2, 1, "Z"),  # bidirectional Q, disabled by cell 2 = 1
        (2, "BC_1", "*", "CONTROL", "1"),  # control of Q, disable value 1
        (3, "BC_2", "R", "OUTPUT2", "1"),  # two-state output R, safe 1
    ],
    instructions={"EXTEST": "0000", "SAMPLE": "0001", "PRELOAD": "0010", "IDCODE": "1000",
                  "BYPASS": "1111"},
    idcode=BRAVO_IDCODE,
    ir_capture="0X01",
)
BOARD = make_board([("U1", ALPHA), ("U2", BRAVO)],
                   {"N1": ["U1.Y", "U2.P"], "N2": ["U2.Q", "U1.A"], "N3": ["U2.R"]})


def _program():
    t1 = make_test("t1", [
        make_step("s1", modes_for(BOARD, {"U1": "EXTEST", "U2": "SAMPLE"}),
                  [drive("N1", "1", "U1.Y")], [expect("N1", "1")]),
    ])
    t2 = make_test("t2", [
        make_step("s1", modes_for(BOARD, {"U2": "EXTEST"}),
                  [drive("N2", "0", "U2.Q")], [expect("N2", "0")]),
        make_step("s2", modes_for(BOARD, {"U2": "EXTEST"}),
                  [drive("N2", "1", "U2.Q")], [expect("N2", "1")]),
    ])
    ids = modes_for(BOARD, {"U2": "IDCODE"})
    t3 = make_test("t3", [
        make_step("r1", ids, reads=[RegisterRead("U2", "DEVICE_ID", "")]),
        make_wait(10, ids),
    ])
    return make_program([t1, t2, t3])


def _bits(record) -> tuple[str, str, str]:
    return record.tdi.to01(), record.tdo.to01(), record.mask.to01()


def test_two_device_chain_bit_by_bit() -> None:
    records = schedule(_program(), BOARD).records
    assert [r.kind for r in records] == [
        RESET, IR_SCAN, DR_SCAN, IR_SCAN, DR_SCAN,  # t1: IR to PRELOAD, preload, IR, flush
        DR_SCAN, IR_SCAN, DR_SCAN, DR_SCAN,  # t2: preload, IR, s2 apply = s1 response, flush
        IR_SCAN, IDLE, DR_SCAN,  # t3: IR to IDCODE, wait, read
        RESET,  # back to Test-Logic-Reset
    ]

    # 0. Reset: the board has no TRST, so five TMS=1 clocks; the TAP rests in Test-Logic-Reset.
    assert records[0].use_trst is False and records[0].end_state == "TEST_LOGIC_RESET"

    # After reset U1 holds BYPASS (no IDCODE) and U2 holds IDCODE.
    # t1 s1: U1 EXTEST drives N1 = 1; U2 SAMPLE observes it on P.
    # U1's image: cell 0 (Y) = 1; cell 1 (control) = 1, the enable value (NOT disable 0);
    # cell 2 (input A) = safe X taken as 0. Bits 0..2 = 1,1,0; BSDL order "011".
    # U1 enters EXTEST with an unknown update stage, so it is preloaded first: ALPHA has no
    # PRELOAD, so the combined SAMPLE; U2 keeps IDCODE.
    ir = records[1]
    assert ir.intent == {"U1": "SAMPLE", "U2": "IDCODE"}
    # TDI: U2's IDCODE "1000" bit 0 first = 0,0,0,1; then U1's SAMPLE "010" = 0,1,0.
    # TDO: U2's capture "0X01" bit 0 first = 1,0,X,0 (X sent as 0, mask 0);
    #      U1's capture "X01" = 1,0,X.
    assert _bits(ir) == ("0001" "010", "1000" "100", "1101" "110")
    assert ir.segments == (Segment("U1", "IR", 4, 3), Segment("U2", "IR", 0, 4))

    pre = records[2]
    assert pre.purpose == "preload" and pre.length == 32 + 3
    # U2 in IDCODE shifts 32 zeros, not compared; U1's boundary gets its image 1,1,0.
    assert _bits(pre) == ("0" * 32 + "110", "0" * 35, "0" * 35)
    assert pre.intent == {"U1": "011"}  # DEVICE_ID has no update stage: no intent for U2
    assert pre.segments == (Segment("U1", "BOUNDARY", 32, 3), Segment("U2", "DEVICE_ID", 0, 32))

    ir = records[3]
    assert ir.intent == {"U1": "EXTEST", "U2": "SAMPLE"}
    # TDI: U2's SAMPLE "0001" bit 0 first = 1,0,0,0; U1's EXTEST "000" = 0,0,0.
    assert _bits(ir) == ("1000" "000", "1000" "100", "1101" "110")

    # The apply scan of s1 is elided: U1's update stage already holds s1's image.
    # The flush collects s1's response, re-shifting the images in force:
    # U2 SAMPLE shifts its safe image: P X->0, Q X->0, control 1, R 1 = 0,0,1,1 ("1100");
    # U1 shifts 1,1,0 again. Expected: U2 cell 0 (P, BC_1 INPUT in SAMPLE captures the pin)
    # = 1 from N1; U1 cell 0 (BC_1 OUTPUT3 in EXTEST captures system logic) is unknown: mask 0.
    flush = records[4]
    assert flush.purpose == "flush" and (flush.test, flush.step) == ("t1", "s1")
    assert _bits(flush) == ("0011" "110", "1000" "000", "1000" "000")
    assert flush.intent == {"U1": "011", "U2": "1100"}
    assert flush.checks == (CheckRange("U2", "BOUNDARY", "t1", "s1"),)

    # t2 s1: U1 BYPASS, U2 EXTEST drives N2 = 0 through Q.
    # U2's image: P safe 0; Q = 0; control cell 2 = 0, the enable value (NOT disable 1);
    # R safe 1. Bits 0..3 = 0,0,0,1 ("1000"). U2 is already in SAMPLE, which loads the boundary
    # register without driving, so no IR scan before the preload; U1 stays in EXTEST and
    # shifts its held image 1,1,0 so that it keeps driving what it drives.
    pre = records[5]
    assert pre.purpose == "preload" and (pre.test, pre.step) == ("t2", "s1")
    assert _bits(pre) == ("0001" "110", "0000" "000", "0000" "000")
    assert pre.intent == {"U1": "011", "U2": "1000"}

    ir = records[6]
    # TDI: U2's EXTEST "0000"; U1's BYPASS "111".
    assert _bits(ir) == ("0000" "111", "1000" "100", "1101" "110")
    assert ir.intent == {"U1": "BYPASS", "U2": "EXTEST"}

    # s1's apply scan is elided (preloaded). s2 drives N2 = 1: U2's image 0,1,0,1 ("1010").
    # Its apply scan is s1's response scan: U2 cell 1 (Q, BC_7 BIDIR driving in EXTEST,
    # captures the pin) expects 0; U1's BYPASS bit shifts 0 and expects 0.
    apply = records[7]
    assert apply.purpose == "drive" and (apply.test, apply.step) == ("t2", "s2")
    assert _bits(apply) == ("0101" "0", "0000" "0", "0100" "1")
    assert apply.intent == {"U2": "1010"}
    assert apply.segments == (Segment("U1", "BYPASS", 4, 1), Segment("U2", "BOUNDARY", 0, 4))
    assert apply.checks == (CheckRange("U1", "BYPASS", "t2", "s2"),
                            CheckRange("U2", "BOUNDARY", "t2", "s1"))

    # The flush collects s2's response: Q expects 1; the same image is shifted again.
    flush = records[8]
    assert flush.purpose == "flush" and (flush.test, flush.step) == ("t2", "s2")
    assert _bits(flush) == ("0101" "0", "0100" "0", "0100" "1")

    # t3: U2 IDCODE (an IR scan: U2 is in EXTEST), U1 BYPASS.
    ir = records[9]
    assert _bits(ir) == ("0001" "111", "1000" "100", "1101" "110")
    # The read is the first step's response; its apply scan is elided (nothing to load),
    # and the wait with the same instructions does not collect it: it is still pending.
    assert records[10].idle_clocks == 10 and records[10].purpose == "wait"
    read = records[11]
    assert read.purpose == "read" and read.intent == {}
    # U2's DEVICE_ID expected bit 0 first: fixed bit 0 = 1; maker "00000101010" reversed;
    # part "0000000000000101" reversed; version XXXX not compared. Then U1's BYPASS 0.
    idcode_tdo = "1" + "01010100000" + "1010000000000000" + "0000"
    assert _bits(read) == ("0" * 33, idcode_tdo + "0", "1" * 28 + "0000" + "1")
    assert read.checks == (CheckRange("U1", "BYPASS", "t3", "r1"),
                           CheckRange("U2", "DEVICE_ID", "t3", "r1"))

    assert records[12].kind == RESET and records[12].end_state == "TEST_LOGIC_RESET"

"""Hand-built shift programs for the output-side tests, assembled without the scheduler.

Each record follows DESIGN.md literally, so a test can say where every bit comes from: a scan
is the concatenation, from the device nearest TDO back to the device nearest TDI, of each
device's register bits 0..n-1; BSDL strings (opcodes, captures, IDCODE, images) are written
most significant bit first, so bit 0 is the rightmost character.

`random_program` builds a whole program for a random chain from a `random.Random`, tracking
each device's instruction the way IEEE Std 1149.1 defines it (Test-Logic-Reset puts IDCODE,
or BYPASS, in force), for the property tests.
"""

from __future__ import annotations

import random
from typing import Mapping, Sequence

from bitarray import bitarray

from scanloom.backend.records import (
    DR_SCAN,
    IDLE,
    IR_SCAN,
    RESET,
    CellMeaning,
    ChainMap,
    CheckRange,
    DeviceMap,
    ScanProgram,
    Segment,
    ShiftRecord,
)

NO_UPDATE_STAGE = ("BYPASS", "DEVICE_ID")  # IEEE Std 1149.1: these registers have no update stage


def standard_opcodes(ir_length: int, *, idcode: bool, user: bool) -> dict[str, tuple[str, ...]]:
    """Opcodes for a synthetic device: BYPASS all ones and EXTEST all zeros (IEEE Std 1149.1
    requires both codes, from memory), SAMPLE 0..01, then IDCODE, CLAMP (with X bits) and a
    user instruction where the IR length leaves room."""
    n = ir_length
    opcodes = {"BYPASS": ("1" * n,), "EXTEST": ("0" * n,), "SAMPLE": ("0" * (n - 1) + "1",)}
    if idcode:
        opcodes["IDCODE"] = ("0" * (n - 2) + "10",)
    if n >= 3:
        opcodes["CLAMP"] = ("1" + "X" * (n - 2) + "0",)
    if user and n >= 4:
        opcodes["USER1"] = ("0" * (n - 3) + "100",)
    return opcodes


def make_device_map(ref: str, position: int, ir_length: int, *, boundary_length: int = 4,
                    ir_capture: str | None = None, idcode: str | None = None,
                    user_length: int | None = None,
                    opcodes: Mapping[str, tuple[str, ...]] | None = None) -> DeviceMap:
    codes = dict(opcodes) if opcodes is not None else standard_opcodes(
        ir_length, idcode=idcode is not None, user=user_length is not None)
    selects = {"BYPASS": "BYPASS", "EXTEST": "BOUNDARY", "SAMPLE": "BOUNDARY", "IDCODE": "DEVICE_ID",
               "CLAMP": "BYPASS", "USER1": "USERREG"}
    registers = {"BYPASS": 1, "BOUNDARY": boundary_length}
    if idcode is not None:
        registers["DEVICE_ID"] = 32
    if user_length is not None:
        registers["USERREG"] = user_length
    cells = tuple(CellMeaning(k, "BC_1", "INPUT" if k % 2 else "OUTPUT2", f"P{k}", f"{ref}_NET{k}")
                  for k in range(boundary_length))
    return DeviceMap(
        ref=ref, entity=f"ENTITY_{ref}", position=position, ir_length=ir_length,
        ir_capture=ir_capture or ("X" * (ir_length - 2) + "01"), idcode=idcode,
        opcodes=codes, selects={k: v for k, v in selects.items() if k in codes},
        registers=registers, boundary_length=boundary_length, cells=cells,
    )


def lowest_first(pattern: str) -> str:
    """A BSDL-order string (leftmost = highest bit) turned into shift order (bit 0 first)."""
    return pattern[::-1]


def _pieces(pattern: str) -> tuple[str, str]:
    """Expected bits (X as 0) and mask (X not compared) of a BSDL-order expectation, bit 0 first."""
    low = lowest_first(pattern)
    return low.replace("X", "0"), "".join("0" if ch == "X" else "1" for ch in low)


def ir_scan(chain: ChainMap, instructions: Mapping[str, str], *, test: str | None = None,
            step: str | None = None, idle_clocks: int = 0) -> ShiftRecord:
    """An IR scan loading `instructions` (every device), expecting each INSTRUCTION_CAPTURE."""
    tdi = tdo = mask = ""
    segments = []
    for device in reversed(chain.devices):  # nearest TDO first
        opcode = device.opcodes[instructions[device.ref]][0].replace("X", "0")
        segments.append(Segment(device.ref, "IR", len(tdi), device.ir_length))
        expected, compared = _pieces(device.ir_capture)
        tdi += lowest_first(opcode)
        tdo += expected
        mask += compared
    return ShiftRecord(
        kind=IR_SCAN, length=len(tdi), tdi=bitarray(tdi), tdo=bitarray(tdo), mask=bitarray(mask),
        segments=tuple(segments), test=test, step=step, purpose="instruction",
        intent=dict(instructions), idle_clocks=idle_clocks,
    )


def dr_scan(chain: ChainMap, selected: Mapping[str, str], shifted: Mapping[str, str],
            expected: Mapping[str, str], *, test: str | None = None, step: str | None = None,
            purpose: str = "drive", idle_clocks: int = 0) -> ShiftRecord:
    """A DR scan: per device the selected register, the bits shifted in and the expectation
    (BSDL order, X = not compared). Devices with an update stage get their shifted bits as intent."""
    tdi = tdo = mask = ""
    segments, checks = [], []
    intent = {}
    for device in reversed(chain.devices):
        register = selected[device.ref]
        bits = shifted[device.ref]
        segments.append(Segment(device.ref, register, len(tdi), len(bits)))
        want, compared = _pieces(expected[device.ref])
        if "1" in compared and test is not None and step is not None:
            checks.append(CheckRange(device.ref, register, test, step))
        tdi += lowest_first(bits)
        tdo += want
        mask += compared
        if register not in NO_UPDATE_STAGE:
            intent[device.ref] = bits
    return ShiftRecord(
        kind=DR_SCAN, length=len(tdi), tdi=bitarray(tdi), tdo=bitarray(tdo), mask=bitarray(mask),
        segments=tuple(segments), checks=tuple(checks), test=test, step=step, purpose=purpose,
        intent=intent, idle_clocks=idle_clocks,
    )


def reset_record(*, use_trst: bool = False) -> ShiftRecord:
    return ShiftRecord(kind=RESET, end_state="TEST_LOGIC_RESET", use_trst=use_trst, purpose="reset")


def idle_record(clocks: int, *, test: str | None = None, step: str | None = None) -> ShiftRecord:
    return ShiftRecord(kind=IDLE, idle_clocks=clocks, test=test, step=step, purpose="wait")


def make_program(chain: ChainMap, records: Sequence[ShiftRecord], *, tck_hz: float | None = None,
                 source: str = "/boards/demo/program.loom", board: str = "/boards/demo/board.yaml",
                 notes: Sequence[str] = ()) -> ScanProgram:
    return ScanProgram(source=source, board=board, tck_hz=tck_hz, chain=chain,
                       records=tuple(records), notes=tuple(notes))


# -- random chains and programs ----------------------------------------------------------------

def random_chain(rng: random.Random, *, devices: tuple[int, int] = (1, 8),
                 ir_lengths: tuple[int, int] = (2, 12), boundary: tuple[int, int] = (1, 300)) -> ChainMap:
    maps = []
    for position in range(rng.randint(*devices)):
        n = rng.randint(*ir_lengths)
        capture = "".join(rng.choice("01X") for _ in range(n - 2)) + "01"
        idcode = None
        if rng.random() < 0.6:
            idcode = "".join(rng.choice("0101X") for _ in range(31)) + "1"
        user = rng.randint(1, 40) if rng.random() < 0.5 else None
        maps.append(make_device_map(f"U{position + 1}", position, n, boundary_length=rng.randint(*boundary),
                                    ir_capture=capture, idcode=idcode, user_length=user))
    return ChainMap(tuple(maps))


def reset_instruction(device: DeviceMap) -> str:
    """IEEE Std 1149.1: Test-Logic-Reset loads IDCODE when present, else BYPASS (from memory)."""
    return "IDCODE" if device.idcode is not None else "BYPASS"


def random_program(rng: random.Random, chain: ChainMap, *, operations: int = 12,
                   end_in_idle: bool | None = None) -> ScanProgram:
    """A random but well-formed program: reset first, then IR/DR scans, idles and resets."""
    current = {d.ref: reset_instruction(d) for d in chain.devices}
    records = [reset_record(use_trst=rng.random() < 0.3)]
    for number in range(operations):
        choice = rng.random()
        test, step = f"t{number // 4}", f"s{number}"
        idle = rng.choice((0, 0, 0, 1, 7))
        if choice < 0.35:
            current = {d.ref: rng.choice(list(d.opcodes)) for d in chain.devices}
            records.append(ir_scan(chain, current, test=test, step=step, idle_clocks=idle))
        elif choice < 0.85:
            selected, shifted, expected = {}, {}, {}
            for device in chain.devices:
                register = device.selects[current[device.ref]]
                length = device.boundary_length if register == "BOUNDARY" else device.registers[register]
                selected[device.ref] = register
                shifted[device.ref] = "".join(rng.choice("01") for _ in range(length))
                if register == "BYPASS":
                    expected[device.ref] = "0"
                elif register == "DEVICE_ID" and current[device.ref] == "IDCODE":
                    expected[device.ref] = device.idcode or "X" * 32
                else:
                    expected[device.ref] = "X" * length
            records.append(dr_scan(chain, selected, shifted, expected, test=test, step=step,
                                   idle_clocks=idle))
        elif choice < 0.95:
            records.append(idle_record(rng.randint(1, 20), test=test, step=step))
        else:
            records.append(reset_record())
            current = {d.ref: reset_instruction(d) for d in chain.devices}
    if end_in_idle if end_in_idle is not None else rng.random() < 0.5:
        records.append(idle_record(1))
    else:
        records.append(reset_record())
    return make_program(chain, records, tck_hz=rng.choice((None, 1e6, 2.5e6, 10e6)))


def two_device_program(**program_options) -> ScanProgram:
    """U1 (nearest TDI, IR 2 bits, boundary 3 cells) and U2 (nearest TDO, IR 3, boundary 2).

    IR scan: U1 SAMPLE "01", U2 EXTEST "000". Scan order is nearest TDO first, each register
    bit 0 first: U2's "000" reversed = 0,0,0 then U1's "01" reversed = 1,0 -> TDI 0,0,0,1,0.
    Expected: U2 capture "X01" reversed = 1,0,X and U1 "01" reversed = 1,0 -> TDO 1,0,X,1,0.
    DR scan (both select BOUNDARY): U2 image "10" reversed = 0,1; U1 "110" reversed = 0,1,1
    -> TDI 0,1,0,1,1. Expected U2 "X1" -> 1,X; U1 "0XX" -> X,X,0 -> TDO 1,X,X,X,0. Then two
    idle clocks, and a reset at the end.
    """
    u1 = make_device_map("U1", 0, 2, boundary_length=3, ir_capture="01")
    u2 = make_device_map("U2", 1, 3, boundary_length=2, ir_capture="X01")
    chain = ChainMap((u1, u2))
    records = [
        reset_record(),
        ir_scan(chain, {"U1": "SAMPLE", "U2": "EXTEST"}, test="links", step="first"),
        dr_scan(chain, {"U1": "BOUNDARY", "U2": "BOUNDARY"}, {"U1": "110", "U2": "10"},
                {"U1": "0XX", "U2": "X1"}, test="links", step="first", idle_clocks=2),
        reset_record(),
    ]
    return make_program(chain, records, **program_options)

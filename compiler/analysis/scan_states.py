"""The board states a shift program goes through, read from its records, one bit per state.

The fast fault grader does not play cycles: it reads the records in order and notes what
every update leaves behind. A reset puts every device's reset instruction in force (IDCODE
when it has an identification register, else BYPASS) and leaves the boundary update stages
unknown; an instruction scan decodes each device's opcode from the bits shifted into its
instruction register; a data scan loads each device's selected register, and the boundary
register's bits become its update stage. Each of these starts a new state (state 0 is
power-up, which the standard makes Test-Logic-Reset).

A data scan's capture sees the state before its own update. Everything per state is kept
as bit columns: bit s of an int is state s, so that a whole program's states are one
Python int per cell.
"""

from __future__ import annotations

from dataclasses import dataclass

from bitarray import bitarray

from ..backend.cycle_stream import CycleStream
from ..backend.records import DR_SCAN, IR_SCAN, RESET, DeviceMap, ScanProgram
from ..diagnostics import Diagnostic, ScanloomError
from ..models.board import Board
from ..models.cells import instruction_class
from ..sim.board_device import DRIVE, pins_driven

__all__ = ["DeviceStates", "CaptureEvent", "ScanStates", "scan_states", "column", "decode_instruction"]

_TAP_STATE_CAPTURE_DR = "Capture-DR"


def _little(bits: bitarray) -> bitarray:
    return bits if bits.endian == "little" else bitarray(bits, endian="little")


def column(rows: bitarray, width: int, index: int) -> int:
    """Bit `index` of every `width`-bit row of `rows` (little-endian), as an int: bit s = row s."""
    return int.from_bytes(rows[index::width].tobytes(), "little")


def decode_instruction(device: DeviceMap, bits: bitarray) -> str | None:
    """The instruction whose opcode matches the register bits (bit 0 first); None if none does.

    Opcodes are in BSDL order (leftmost = highest bit) with X bits matching anything; the first
    instruction in BSDL order that matches wins. An opcode no instruction decodes to behaves as
    BYPASS (IEEE 1149.1, instruction register clause).
    """
    code = int(bits[::-1].to01() or "0", 2)
    for name, opcodes in device.opcodes.items():
        for opcode in opcodes:
            if not opcode:
                continue
            care = int(opcode.replace("0", "1").replace("X", "0"), 2)
            value = int(opcode.replace("X", "0"), 2)
            if code & care == value:
                return name
    return None


@dataclass(frozen=True, eq=False)
class DeviceStates:
    """One device across the program's states."""

    ref: str
    position: int
    instructions: tuple[str | None, ...]  # per state; None: an opcode no instruction decodes to
    drive: int  # states whose instruction drives the pins from the update stage
    update_known: int  # states whose boundary update stage holds defined bits
    update_rows: bitarray  # row s: the boundary update stage in state s (zeros where unknown)
    classes: dict[str, int]  # capture class -> states captured under it (EXTEST, SAMPLE, INTEST)
    compare_rows: bitarray  # row s: the compare mask of this device's boundary bits, capture of s
    expected_rows: bitarray  # row s: their expected values
    length: int  # boundary register length


@dataclass(frozen=True, slots=True)
class CaptureEvent:
    """A data scan's capture: the record, the state it sees, and where it sits in the cycles."""

    record: int
    state: int
    cycle: int  # the Capture-DR edge
    shift_start: int  # the first Shift-DR edge: scan bit i comes out at shift_start + i
    layout: tuple[tuple[int, str, int, int], ...]  # (device, register, offset, length)


@dataclass(frozen=True, eq=False)
class ScanStates:
    count: int  # number of states
    devices: tuple[DeviceStates, ...]
    captures: tuple[CaptureEvent, ...]
    capture_of_state: dict[int, CaptureEvent]

    @property
    def full(self) -> int:
        return (1 << self.count) - 1


def _error(message: str) -> ScanloomError:
    return ScanloomError([Diagnostic("error", message, None,
                                     hint="grade a shift file compiled by scanloom for this board")])


def scan_states(program: ScanProgram, cycles: CycleStream, board: Board) -> ScanStates:
    """Every state of `program` (records in order) on `board`'s chain."""
    maps = program.chain.devices
    models = [entry.device for entry in board.chain]
    count_devices = len(maps)
    reset_instruction = ["IDCODE" if device.idcode is not None else "BYPASS" for device in maps]
    instruction: list[str | None] = list(reset_instruction)
    update: list[bitarray | None] = [None] * count_devices
    history_instr: list[list[str | None]] = [[] for _ in maps]
    history_update: list[list[bitarray | None]] = [[] for _ in maps]

    def note_state() -> None:
        for d in range(count_devices):
            history_instr[d].append(instruction[d])
            history_update[d].append(update[d])

    note_state()  # state 0: power-up in Test-Logic-Reset
    captures: list[CaptureEvent] = []
    scan_index = 0
    for index, record in enumerate(program.records):
        if record.kind == RESET:
            instruction = list(reset_instruction)
            update = [None] * count_devices
            note_state()
            continue
        if record.kind not in (IR_SCAN, DR_SCAN):
            continue
        start = cycles.shift_starts[scan_index]
        scan_index += 1
        bits = _little(record.tdi)
        layout: list[tuple[int, str, int, int]] = []
        offset = 0
        for d in range(count_devices - 1, -1, -1):  # nearest TDO first: bit 0 of the scan
            device = maps[d]
            if record.kind == IR_SCAN:
                register, length = "IR", device.ir_length
            else:
                name = instruction[d]
                register = device.selects.get(name, "BYPASS") if name is not None else "BYPASS"
                if register is None:  # pragma: no cover - selects values are strings
                    raise _error(f"record {index}: {device.ref} selects no register")
                length = device.boundary_length if register == "BOUNDARY" else device.registers.get(register)
                if length is None:
                    raise _error(f"record {index}: {device.ref} selects {register}, "
                                 "whose length the chain map does not give")
            layout.append((d, register, offset, length))
            offset += length
        # A raw chain scan may be longer than the chain (its last bits pass through) or
        # shorter (registers keep part of what they captured): register bit `at + i` then
        # holds the TDI bit `at + i + extra`, unknown where that is before the scan's start.
        extra = record.length - offset
        if extra and record.kind == IR_SCAN:
            raise _error(f"record {index} shifts {record.length} bits, but the registers its "
                         f"instructions select hold {offset}")
        if record.kind == IR_SCAN:
            for d, _, at, length in layout:
                instruction[d] = decode_instruction(maps[d], bits[at:at + length])
        else:
            state = len(history_instr[0]) - 1
            captures.append(CaptureEvent(index, state, start - 1, start, tuple(layout)))
            for d, register, at, length in layout:
                if register == "BOUNDARY":
                    update[d] = bits[at + extra:at + extra + length] if at + extra >= 0 else None
        note_state()
    states = len(history_instr[0])
    capture_of_state = {event.state: event for event in captures}
    devices: list[DeviceStates] = []
    for d, device in enumerate(maps):
        model = models[d]
        length = device.boundary_length
        drive = known = 0
        classes = {"EXTEST": 0, "SAMPLE": 0, "INTEST": 0}
        rows = bitarray(states * length, endian="little")
        rows.setall(0)
        for s in range(states):
            name = history_instr[d][s]
            if name is not None and pins_driven(model, name) == DRIVE:
                drive |= 1 << s
            image = history_update[d][s]
            if image is not None and len(image) == length:
                known |= 1 << s
                rows[s * length:(s + 1) * length] = image
        compare = bitarray(states * length, endian="little")
        compare.setall(0)
        expected = compare.copy()
        for event in captures:
            name = history_instr[d][event.state]
            for dev, register, at, size in event.layout:
                if dev != d or register != "BOUNDARY":
                    continue
                cls = instruction_class(name or "", "BOUNDARY") or "SAMPLE"
                classes[cls] |= 1 << event.state
                record = program.records[event.record]
                row = event.state * length
                shown = max(0, min(size, record.length - at))  # a short scan shows only part
                compare[row:row + shown] = _little(record.mask)[at:at + shown]
                expected[row:row + shown] = _little(record.tdo)[at:at + shown]
        devices.append(DeviceStates(device.ref, d, tuple(history_instr[d]), drive, known, rows,
                                    classes, compare, expected, length))
    return ScanStates(states, tuple(devices), tuple(captures), capture_of_state)

"""Failing bits: the captured TDO against the shift file's expectations, and what each bit is.

The comparison is bit-parallel over the whole cycle stream (XOR of expected and returned TDO,
AND the compare mask; a compared cycle where the capture says X fails too). Each failing
cycle is then named the way the engineer wrote the test and the repair bench needs it: the
record, the test and step whose response it checks, the device and register, the boundary
cell with its BSDL port, package pin and board net, or the TDI bit passing through the chain.
"""

from __future__ import annotations

from bisect import bisect_right
from dataclasses import dataclass

from bitarray import bitarray

from ..backend.cycle_stream import CycleStream
from ..backend.records import DR_SCAN, IR_SCAN, ScanProgram, Segment
from ..models.board import Board
from .bit_meaning import cell_ports_and_nets
from .capture_log import CaptureLog

__all__ = ["FailingBit", "Comparison", "compare_capture", "PASS_THROUGH"]

PASS_THROUGH = "TDI"  # the register of a bit that passed through the whole chain


@dataclass(frozen=True, slots=True)
class FailingBit:
    cycle: int
    expected: int
    got: str  # "0", "1" or "X"
    record: int | None
    scan_bit: int | None
    purpose: str = ""
    test: str | None = None
    step: str | None = None
    device: str | None = None
    position: int | None = None  # chain position of the device, 0 nearest TDI
    register: str | None = None  # IR, BYPASS, BOUNDARY, DEVICE_ID, a user register, or TDI
    bit: int | None = None  # register bit (the cell number in BOUNDARY); TDI bit when passing
    port: str | None = None
    pins: tuple[str, ...] = ()  # package pins of the port (the BSDL's selected pin map)
    net: str | None = None

    def where(self) -> str:
        parts = []
        if self.device is not None:
            text = f"{self.device} {self.register}"
            if self.register == "BOUNDARY":
                text += f" cell {self.bit}"
            elif self.bit is not None:
                text += f" bit {self.bit}"
            parts.append(text)
        elif self.register == PASS_THROUGH:
            parts.append(f"TDI bit {self.bit} through the whole chain")
        if self.port:
            pin = f" (pin {', '.join(self.pins)})" if self.pins else ""
            parts.append(f"port {self.port}{pin}")
        if self.net:
            parts.append(f"net {self.net}")
        return ", ".join(parts)

    def describe(self) -> str:
        head = f"cycle {self.cycle}: expected {self.expected}, board gave {self.got}"
        scope = []
        if self.test:
            scope.append(f"test {self.test}" + (f" step {self.step}" if self.step else ""))
        if self.record is not None:
            scope.append(f"record {self.record} bit {self.scan_bit}")
        where = self.where()
        return head + (": " + ", ".join(scope) if scope else "") + (f"; {where}" if where else "")

    def as_data(self) -> dict[str, object]:
        return {"cycle": self.cycle, "expected": self.expected, "got": self.got,
                "record": self.record, "scan_bit": self.scan_bit, "purpose": self.purpose,
                "test": self.test, "step": self.step, "device": self.device,
                "position": self.position, "register": self.register, "bit": self.bit,
                "port": self.port, "pins": list(self.pins), "net": self.net}


@dataclass(frozen=True, eq=False)
class Comparison:
    """The whole stream compared: which cycles fail, and the capture it came from."""

    failing: bitarray  # 1 on every compared cycle whose TDO differs or is X
    compared: int
    capture: CaptureLog
    bits: tuple[FailingBit, ...]

    @property
    def passed(self) -> bool:
        return not self.bits


def _big(bits: bitarray) -> bitarray:
    return bits if bits.endian == "big" else bitarray(bits, endian="big")


def compare_capture(program: ScanProgram, cycles: CycleStream, capture: CaptureLog,
                    board: Board | None = None) -> Comparison:
    mask, tdo = _big(cycles.mask), _big(cycles.tdo)
    failing = mask & (~capture.known | (capture.values ^ tdo))
    namer = _BitNamer(program, cycles, board)
    bits = tuple(namer.name(cycle, tdo[cycle], capture) for cycle in failing.search(1))
    return Comparison(failing, mask.count(), capture, bits)


class _BitNamer:
    def __init__(self, program: ScanProgram, cycles: CycleStream, board: Board | None) -> None:
        self.program = program
        self.scans = [i for i, r in enumerate(program.records) if r.kind in (IR_SCAN, DR_SCAN)]
        self.starts = list(cycles.shift_starts)
        self.positions = {device.ref: device.position for device in program.chain.devices}
        self.cells = cell_ports_and_nets(program)
        self.board = board
        self._segments: dict[int, tuple[list[int], list[Segment]]] = {}

    def segments(self, record: int) -> tuple[list[int], list[Segment]]:
        found = self._segments.get(record)
        if found is None:
            ordered = sorted(self.program.records[record].segments, key=lambda s: s.offset)
            found = ([s.offset for s in ordered], ordered)
            self._segments[record] = found
        return found

    def pins_of(self, ref: str, port: str) -> tuple[str, ...]:
        if self.board is None or ref not in self.board.devices:
            return ()
        return tuple(str(p) for p in self.board.devices[ref].device.pins_of(port))

    def name(self, cycle: int, expected: int, capture: CaptureLog) -> FailingBit:
        got = str(capture.values[cycle]) if capture.known[cycle] else "X"
        where = bisect_right(self.starts, cycle) - 1
        if where < 0 or where >= len(self.scans):
            return FailingBit(cycle, expected, got, None, None)
        index = self.scans[where]
        record = self.program.records[index]
        scan_bit = cycle - self.starts[where]
        if scan_bit >= record.length:
            return FailingBit(cycle, expected, got, None, None)
        offsets, ordered = self.segments(index)
        at = bisect_right(offsets, scan_bit) - 1
        segment = ordered[at] if at >= 0 else None
        if segment is None or scan_bit >= segment.offset + segment.length:
            chain = max((s.offset + s.length for s in ordered), default=0)
            return FailingBit(cycle, expected, got, index, scan_bit, record.purpose, record.test,
                              record.step, register=PASS_THROUGH, bit=scan_bit - chain)
        bit = scan_bit - segment.offset
        test, step = record.test, record.step
        for check in record.checks:
            if check.device == segment.device and check.register == segment.register:
                test, step = check.test, check.step or None
                break
        port = net = None
        pins: tuple[str, ...] = ()
        if segment.register == "BOUNDARY":
            port, net = self.cells.get(segment.device, {}).get(bit, (None, None))
            if port is not None:
                pins = self.pins_of(segment.device, port)
        return FailingBit(cycle, expected, got, index, scan_bit, record.purpose, test, step,
                          segment.device, self.positions.get(segment.device), segment.register,
                          bit, port, pins, net)

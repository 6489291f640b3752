"""What a TDO bit means: the scan, the device and register, the cell, its port and net, the test.

Taken from the shift file itself (the chain map and each record's segments and checks), so a
failing bit of `scanloom simulate` or a detection of `scanloom faults` is named the way the
engineer wrote the test.
"""

from __future__ import annotations

from bisect import bisect_right
from dataclasses import dataclass

from ..backend.cycle_stream import CycleStream
from ..backend.records import DR_SCAN, IR_SCAN, ScanProgram

__all__ = ["BitMeaning", "CellPlaces", "ScanIndex", "cell_ports_and_nets"]



CellPlaces = dict[str, dict[int, tuple[str | None, str | None]]]


def cell_ports_and_nets(program: ScanProgram) -> CellPlaces:
    """Device ref -> boundary cell number -> (port, net) of the cell, from the chain map; of a
    merged cell's entries (one number, two functions) the one on a port."""
    cells: CellPlaces = {}
    for device in program.chain.devices:
        table: dict[int, tuple[str | None, str | None]] = {}
        for meaning in device.cells:
            held = table.get(meaning.number)
            if held is None or (held[0] is None and meaning.port is not None):
                table[meaning.number] = (meaning.port, meaning.net)
        cells[device.ref] = table
    return cells

@dataclass(frozen=True, slots=True)
class BitMeaning:
    cycle: int
    record: int | None
    scan_bit: int | None
    device: str | None = None
    register: str | None = None
    bit: int | None = None  # bit of the register (bit 0 nearest TDO)
    port: str | None = None
    net: str | None = None
    test: str | None = None
    step: str | None = None

    def describe(self) -> str:
        parts = []
        if self.test:
            parts.append(f"test {self.test}" + (f" step {self.step}" if self.step else ""))
        if self.record is not None:
            parts.append(f"record {self.record} bit {self.scan_bit}")
        if self.device:
            where = f"{self.device} {self.register}"
            if self.bit is not None:
                where += f" {'cell' if self.register == 'BOUNDARY' else 'bit'} {self.bit}"
            parts.append(where)
        if self.port:
            parts.append(f"port {self.port}")
        if self.net:
            parts.append(f"net {self.net}")
        return ", ".join(parts)

    def as_data(self) -> dict[str, object]:
        return {"cycle": self.cycle, "record": self.record, "scan_bit": self.scan_bit,
                "device": self.device, "register": self.register, "bit": self.bit,
                "port": self.port, "net": self.net, "test": self.test, "step": self.step}


class ScanIndex:
    """Finds the scan record a cycle belongs to (built once per program)."""

    def __init__(self, program: ScanProgram, cycles: CycleStream) -> None:
        self.program = program
        self.scans = [i for i, r in enumerate(program.records) if r.kind in (IR_SCAN, DR_SCAN)]
        self.starts = list(cycles.shift_starts)
        self._layouts: dict[int, tuple[list[int], list]] = {}  # type: ignore[type-arg]
        self._checks: dict[int, dict[tuple[str, str], tuple[str | None, str | None]]] = {}
        self._cells = cell_ports_and_nets(program)

    def meaning(self, cycle: int) -> BitMeaning:
        position = bisect_right(self.starts, cycle) - 1
        if position < 0 or position >= len(self.scans):
            return BitMeaning(cycle, None, None)
        record_index = self.scans[position]
        record = self.program.records[record_index]
        scan_bit = cycle - self.starts[position]
        if scan_bit >= record.length:
            return BitMeaning(cycle, None, None)
        return self.scan_meaning(record_index, scan_bit, cycle)

    def _checked_by(self, record_index: int) -> dict[tuple[str, str], tuple[str | None, str | None]]:
        """(device, register) -> the test and step whose expectations a record compares there
        (the first check of that register; a scan compares earlier steps' responses)."""
        found = self._checks.get(record_index)
        if found is None:
            found = {}
            for check in self.program.records[record_index].checks:
                found.setdefault((check.device, check.register), (check.test, check.step))
            self._checks[record_index] = found
        return found

    def scan_meaning(self, record_index: int, scan_bit: int, cycle: int | None = None) -> BitMeaning:
        record = self.program.records[record_index]
        if cycle is None:
            position = self.scans.index(record_index)
            cycle = self.starts[position] + scan_bit
        layout = self._layouts.get(record_index)
        if layout is None:
            ordered = sorted(record.segments, key=lambda segment: segment.offset)
            layout = self._layouts[record_index] = ([segment.offset for segment in ordered], ordered)
        position = bisect_right(layout[0], scan_bit) - 1
        for segment in layout[1][max(position, 0):max(position, 0) + 1]:
            if segment.offset <= scan_bit < segment.offset + segment.length:
                bit = scan_bit - segment.offset
                port = net = None
                if segment.register == "BOUNDARY":
                    port, net = self._cells.get(segment.device, {}).get(bit, (None, None))
                test, step = self._checked_by(record_index).get(
                    (segment.device, segment.register), (record.test, record.step))
                return BitMeaning(cycle, record_index, scan_bit, segment.device, segment.register, bit,
                                  port, net, test, step or None)
        return BitMeaning(cycle, record_index, scan_bit, test=record.test, step=record.step)

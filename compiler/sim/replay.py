"""Independent replay of a shift program: every device's TAP and registers, from the cycles alone.

The replay reads the chain map and the cycle stream (TMS, TDI, expected TDO, mask) and plays
them into a model of every device: its own TAP controller (`tap_controller`, not the back
end's table), instruction register, and BYPASS, identification, boundary and user registers
with their capture, shift and update stages (`replay_device`). Devices are chained: device
i's TDO feeds device i+1's TDI. It never calls the scheduler or the cycle layout.

It then holds the result against what the records say they do:
- after each Update-IR every device holds the record's intended instruction;
- after each Update-DR every device's update stage holds the record's intended image;
- every compared TDO bit the model knows by itself (IR capture, BYPASS 0, IDCODE, bits that
  came in on TDI) matches the expected value;
- the stream carries each record: the same bits shifted, expected and masked, the same chain
  segments, its shift starting where the file says, the idle clocks and resets the records
  ask for, and the rest state at the end; nothing is compared outside Shift-xR.

Shifting is done a whole run at a time: from a Shift-xR edge the replay finds the next TMS=1
with a bitarray search and moves every register's bits in one slice operation.
"""

from __future__ import annotations

from bisect import bisect_right
from dataclasses import dataclass, field
from typing import Any, Mapping

from bitarray import bitarray
from bitarray.util import ones

from ..backend.cycle_stream import CycleStream
from ..backend.records import DR_SCAN, IR_SCAN, RESET as RESET_RECORD, ScanProgram
from ..backend.shiftfile import shift_file_from_data
from .replay_device import NO_UPDATE_STAGE, ReplayDevice, Stage
from .tap_controller import IDLE, RESET, TapController, column_of, is_shift, phase_of

__all__ = ["Mismatch", "ReplayReport", "replay"]

_REST_NAMES = {"RUN_TEST_IDLE": IDLE, "TEST_LOGIC_RESET": RESET}


@dataclass(frozen=True, slots=True)
class Mismatch:
    """One way the cycle stream fails to do what a record says."""

    message: str
    record: int | None = None
    device: str | None = None
    register: str | None = None
    bit: int | None = None
    cycle: int | None = None

    def __str__(self) -> str:
        where = []
        if self.record is not None:
            where.append(f"record {self.record}")
        if self.device is not None:
            part = self.device
            if self.register is not None:
                part += f" {self.register}"
            if self.bit is not None:
                part += f" bit {self.bit}"
            where.append(part)
        if self.cycle is not None:
            where.append(f"cycle {self.cycle}")
        return (", ".join(where) + ": " if where else "") + self.message


@dataclass(frozen=True)
class ReplayReport:
    """What the replay checked and every mismatch it found."""

    mismatches: tuple[Mismatch, ...]
    cycles: int
    scans: int
    instructions_checked: int
    images_checked: int
    known_tdo_bits: int

    @property
    def ok(self) -> bool:
        return not self.mismatches

    def summary(self) -> str:
        checked = (f"{self.cycles} TCK, {_count(self.scans, 'scan')}; "
                   f"{_count(self.instructions_checked, 'instruction')}, "
                   f"{_count(self.images_checked, 'register image')} and "
                   f"{_count(self.known_tdo_bits, 'known TDO bit')} checked")
        if self.ok:
            return f"replay agrees: {checked}"
        return f"replay found {_count(len(self.mismatches), 'mismatch')}: {checked}"

    def render(self, limit: int | None = None) -> str:
        shown = self.mismatches if limit is None else self.mismatches[:limit]
        lines = [str(mismatch) for mismatch in shown]
        if len(shown) < len(self.mismatches):
            lines.append(f"... and {_count(len(self.mismatches) - len(shown), 'more mismatch')}")
        lines.append(self.summary())
        return "\n".join(lines)


def _count(number: int, noun: str) -> str:
    """`1 scan`, `2 scans`, `1 mismatch`, `3 mismatches`."""
    if number == 1:
        return f"1 {noun}"
    return f"{number} {noun}{'es' if noun.endswith('ch') else 's'}"


@dataclass
class _Scan:
    """A scan in progress: from its Capture-xR edge to its Update-xR edge."""

    column: str
    record: int | None
    capture_cycle: int
    layout: list[tuple[ReplayDevice, str | None, int, int]]  # device, register, offset, length
    broken: bool
    tdi: bitarray = field(default_factory=bitarray)
    tdo: bitarray = field(default_factory=bitarray)
    mask: bitarray = field(default_factory=bitarray)
    first_shift: int | None = None


def _big(bits: bitarray) -> bitarray:
    return bits if bits.endian == "big" else bitarray(bits, endian="big")


class _Replay:
    def __init__(self, program: ScanProgram, cycles: CycleStream) -> None:
        self.program = program
        self.records = program.records
        self.tms, self.tdi = _big(cycles.tms), _big(cycles.tdi)
        self.tdo, self.mask = _big(cycles.tdo), _big(cycles.mask)
        self.shift_starts = cycles.shift_starts
        self.devices = [ReplayDevice(device) for device in program.chain.devices]
        # One controller per device; TMS and TCK are bussed to all of them (a chain of no
        # devices still has the player's view of the TAP).
        self.taps = [TapController() for _ in self.devices] or [TapController()]
        self.scan_records = [i for i, r in enumerate(self.records) if r.kind in (IR_SCAN, DR_SCAN)]
        self.scan_number = {record: number for number, record in enumerate(self.scan_records)}
        self.scans_seen = 0
        self.scan: _Scan | None = None
        self.gap_idle = 0
        self.gap_reset = False
        self.mismatches: list[Mismatch] = []
        self.instructions_checked = 0
        self.images_checked = 0
        self.known_tdo_bits = 0
        self.shift_runs: list[tuple[int, int]] = []
        self.compared_in_shifts = 0
        self.tdi_ones_in_shifts = 0

    def miss(self, message: str, **where: Any) -> None:
        self.mismatches.append(Mismatch(message, **where))

    # -- the clock --------------------------------------------------------------------------

    def state(self) -> str | None:
        return self.taps[0].state

    def clock(self, tms: int, count: int = 1) -> None:
        before = self.state()
        for tap in self.taps:
            if count == 1:
                tap.clock(tms)
            else:
                tap.clock_run(tms, count)
        after = self.state()
        if after == RESET and before != RESET:
            for device in self.devices:
                device.test_logic_reset()
            self.gap_reset = True

    def run(self) -> None:
        count = len(self.tms)
        cycle = 0
        while cycle < count:
            state = self.state()
            tms = self.tms[cycle]
            if is_shift(state):
                stop = self.tms.find(1, cycle)
                last = count - 1 if stop < 0 else stop
                self.shift_run(cycle, last)
                self.clock(0, last - cycle)
                self.clock(self.tms[last])
                cycle = last + 1
                continue
            if all(tap.holds(tms) for tap in self.taps):
                stop = self.tms.find(1 - tms, cycle)
                stop = count if stop < 0 else stop
                if state is None and self.mask[cycle:stop].any():
                    self.miss("TDO is compared while the TAP state is not yet known; the stream "
                              "must first force Test-Logic-Reset", cycle=cycle)
                if state == IDLE and tms == 0:
                    self.gap_idle += stop - cycle
                cycle = stop
                continue
            if state is None:
                if self.mask[cycle]:
                    self.miss("TDO is compared while the TAP state is not yet known", cycle=cycle)
            elif phase_of(state) == "Capture":
                self.capture(column_of(state) or "DR", cycle)
            elif phase_of(state) == "Update":
                self.update(column_of(state) or "DR", cycle)
            self.clock(tms)
            cycle += 1
        self.finish(count)

    # -- scans ------------------------------------------------------------------------------

    def capture(self, column: str, cycle: int) -> None:
        if len({tap.state for tap in self.taps}) != 1:
            self.miss("the devices' TAP controllers disagree", cycle=cycle)
        index = self.scans_seen
        self.scans_seen += 1
        record = self.scan_records[index] if index < len(self.scan_records) else None
        self.close_gap(index)
        if record is None:
            self.miss(f"a {column} scan the records do not have", cycle=cycle)
        layout: list[tuple[ReplayDevice, str | None, int, int]] = []
        offset = 0
        broken = False
        for device in reversed(self.devices):  # nearest TDO first: bit 0 of the scan
            register, length = self.capture_device(device, column)
            if length is None:
                broken = True
                reason = ("its instruction is not known" if device.instruction is None and register is None
                          else f"{device.instruction} selects {register}, whose length is not known")
                self.miss(f"cannot tell which data register is in the chain: {reason}",
                          record=record, device=device.ref, cycle=cycle)
                length = 0
            layout.append((device, register, offset, length))
            offset += length
        self.scan = _Scan(column, record, cycle, layout, broken)

    @staticmethod
    def capture_device(device: ReplayDevice, column: str) -> tuple[str | None, int | None]:
        """Capture into one device's register; its name and length (None when not known)."""
        if column == "IR":
            device.capture_ir()
            return "IR", device.map.ir_length
        register = device.selected
        return register, device.capture_dr()

    def shift_run(self, start: int, last: int) -> None:
        stop = last + 1
        scan = self.scan
        if scan is None:
            self.miss("shifting without a capture", cycle=start)
            scan = self.scan = _Scan("DR", None, start, [], True)
        tdi, tdo, mask = self.tdi[start:stop], self.tdo[start:stop], self.mask[start:stop]
        before = len(scan.tdi)
        if scan.first_shift is None:
            scan.first_shift = start
        scan.tdi += tdi
        scan.tdo += tdo
        scan.mask += mask
        self.shift_runs.append((start, stop))
        self.compared_in_shifts += mask.count()
        self.tdi_ones_in_shifts += tdi.count()
        if scan.broken:
            return
        stages = [self.stage(device, scan.column) for device, _, _, _ in scan.layout]
        values, known = bitarray(), bitarray()
        for stage in stages:
            values += stage.values
            known += stage.known
        chain_length = len(values)
        run = stop - start
        values += tdi
        known += ones(run)
        out_values, out_known = values[:run], known[:run]
        values, known = values[run:run + chain_length], known[run:run + chain_length]
        for (device, _, offset, length), stage in zip(scan.layout, stages):
            stage.values = values[offset:offset + length]
            stage.known = known[offset:offset + length]
        checked = mask & out_known
        self.known_tdo_bits += checked.count()
        for position in ((out_values ^ tdo) & checked).search(1):
            self.report_tdo(scan, before + position, chain_length, start + position, out_values[position])

    @staticmethod
    def stage(device: ReplayDevice, column: str) -> Stage:
        if column == "IR":
            return device.ir_shift
        assert device.dr_shift is not None
        return device.dr_shift

    def report_tdo(self, scan: _Scan, scan_bit: int, chain_length: int, cycle: int, value: int) -> None:
        """A known TDO bit differs from the expected one: say where in the chain it came from."""
        expected = 1 - value
        if scan_bit >= chain_length:
            self.miss(f"TDO should be {value}, the TDI bit {scan_bit - chain_length} passing through "
                      f"the chain, but {expected} is expected", record=scan.record, bit=scan_bit, cycle=cycle)
            return
        starts = [offset for _, _, offset, _ in scan.layout]
        device, register, offset, _ = scan.layout[bisect_right(starts, scan_bit) - 1]
        self.miss(f"scan bit {scan_bit}: the model knows TDO is {value}, the file expects {expected}",
                  record=scan.record, device=device.ref, register=register, bit=scan_bit - offset, cycle=cycle)

    def update(self, column: str, cycle: int) -> None:
        scan, self.scan = self.scan, None
        for device in self.devices:
            if column == "IR":
                device.update_ir()
            else:
                device.update_dr()
        if scan is None or scan.record is None:
            return
        record = self.records[scan.record]
        if record.kind != column.lower():
            self.miss(f"the stream makes a {column} scan where the record is a {record.kind} scan",
                      record=scan.record, cycle=cycle)
            return
        self.check_bits(scan, cycle)
        self.check_segments(scan, cycle)
        if column == "IR":
            self.check_instructions(scan.record, cycle)
        else:
            self.check_images(scan.record, cycle)

    # -- checks against the records ---------------------------------------------------------

    def check_bits(self, scan: _Scan, cycle: int) -> None:
        index = scan.record
        assert index is not None
        record = self.records[index]
        scan_number = self.scan_number[index]
        if scan_number < len(self.shift_starts) and scan.first_shift != self.shift_starts[scan_number]:
            self.miss(f"the file says the shift starts at cycle {self.shift_starts[scan_number]}, "
                      f"the stream shifts from cycle {scan.first_shift}", record=index, cycle=cycle)
        if len(scan.tdi) != record.length:
            self.miss(f"the stream shifts {len(scan.tdi)} bits, the record has {record.length}",
                      record=index, cycle=scan.capture_cycle)
            return
        stream_mask = scan.mask
        pairs = (("TDI", scan.tdi, _big(record.tdi)),
                 ("compare mask", stream_mask, _big(record.mask)),
                 ("expected TDO", scan.tdo & stream_mask, _big(record.tdo) & _big(record.mask)))
        for name, stream_bits, record_bits in pairs:
            for position in (stream_bits ^ record_bits).search(1):
                self.miss(f"{name} bit {position} is {stream_bits[position]} in the cycles, "
                          f"{record_bits[position]} in the record", record=index,
                          cycle=(scan.first_shift or 0) + position)

    def check_segments(self, scan: _Scan, cycle: int) -> None:
        index = scan.record
        record = self.records[index] if index is not None else None
        if record is None or scan.broken:
            return
        said = {segment.device: segment for segment in record.segments}
        for device, register, offset, length in scan.layout:
            segment = said.pop(device.ref, None)
            actual = f"{register} at scan bits {offset}-{offset + length - 1}"
            if segment is None:
                self.miss(f"the record has no segment for this device; the chain has its {actual}",
                          record=index, device=device.ref, cycle=cycle)
            elif (segment.register, segment.offset, segment.length) != (register, offset, length):
                self.miss(f"the record places {segment.register} at scan bits {segment.offset}-"
                          f"{segment.offset + segment.length - 1}; the chain has {actual}",
                          record=index, device=device.ref, cycle=cycle)
        for ref in said:
            self.miss("the record has a segment for a device that is not in the chain",
                      record=index, device=ref, cycle=cycle)

    def check_instructions(self, index: int, cycle: int) -> None:
        intent = self.records[index].intent
        for device in self.devices:
            wanted = intent.get(device.ref)
            if wanted is None:
                continue
            self.instructions_checked += 1
            if device.instruction is None or device.instruction.upper() != wanted.upper():
                held = device.instruction or "no known instruction"
                self.miss(f"after Update-IR the device holds {held} (opcode {device.opcode}), "
                          f"intended {wanted}", record=index, device=device.ref, register="IR",
                          cycle=cycle)

    def check_images(self, index: int, cycle: int) -> None:
        intent = self.records[index].intent
        for device in self.devices:
            image = intent.get(device.ref)
            if image is None:
                continue
            self.images_checked += 1
            register = device.selected
            if register is None or register in NO_UPDATE_STAGE:
                self.miss(f"an image is intended, but {device.instruction} selects {register}, "
                          f"which has no update stage", record=index, device=device.ref, cycle=cycle)
                continue
            stage = device.update.get(register)
            if stage is None or len(stage.values) != len(image):
                length = len(stage.values) if stage is not None else device.register_length(register)
                self.miss(f"the intended image has {len(image)} bits, the register {length}",
                          record=index, device=device.ref, register=register, cycle=cycle)
                continue
            wanted = Stage.from_pattern(image)
            wrong = ((stage.values ^ wanted.values) | ~stage.known) & wanted.known
            for bit in wrong.search(1):
                held = str(stage.values[bit]) if stage.known[bit] else "unknown"
                self.miss(f"after Update-DR the update stage holds {held}, intended {wanted.values[bit]}",
                          record=index, device=device.ref, register=register, bit=bit, cycle=cycle)

    def close_gap(self, next_scan: int) -> None:
        """Between two scans: the idle clocks and resets of the records in between happened."""
        previous = self.scan_records[next_scan - 1] if 0 < next_scan <= len(self.scan_records) else -1
        following = (self.scan_records[next_scan] if next_scan < len(self.scan_records)
                     else len(self.records))
        between = range(previous + 1, following)
        idle = sum(self.records[i].idle_clocks for i in between)
        if previous >= 0:
            idle += self.records[previous].idle_clocks
        resets = [i for i in between if self.records[i].kind == RESET_RECORD]
        rests = [i for i in range(max(previous, 0), following)
                 if self.records[i].end_state == "TEST_LOGIC_RESET"]
        place = following if following < len(self.records) else None
        idlers = [i for i in range(max(previous, 0), following) if self.records[i].idle_clocks]
        if self.gap_idle < idle:
            self.miss(f"the records ask for {idle} clocks in Run-Test/Idle here, the stream spends "
                      f"{self.gap_idle}", record=idlers[0] if idlers else place)
        if resets and not self.gap_reset:
            self.miss("the record asks for a reset, the stream does not reach Test-Logic-Reset",
                      record=resets[0])
        if self.gap_reset and not resets and not rests:
            self.miss("the stream passes Test-Logic-Reset where no record asks for it", record=place)
        self.gap_idle = 0
        self.gap_reset = False

    def finish(self, count: int) -> None:
        if self.scan is not None:
            self.miss("the stream ends inside a scan", record=self.scan.record, cycle=count)
        missing = self.scan_records[self.scans_seen:]
        for index in missing:
            self.miss("the stream never makes this record's scan", record=index)
        if self.scans_seen == len(self.scan_records):
            self.close_gap(self.scans_seen)
        if self.records:
            wanted = _REST_NAMES.get(self.records[-1].end_state)
            final = self.state()
            if final != wanted:
                self.miss(f"the stream ends in {final or 'an unknown state'}, the last record rests "
                          f"in {wanted or self.records[-1].end_state}", record=len(self.records) - 1,
                          cycle=count)
        if self.compared_in_shifts != self.mask.count():
            for cycle in self.outside_shifts(self.mask):
                self.miss("TDO is compared outside Shift-IR and Shift-DR", cycle=cycle)
        if self.tdi_ones_in_shifts != self.tdi.count():
            for cycle in self.outside_shifts(self.tdi):
                self.miss("TDI is 1 outside Shift-IR and Shift-DR, where the cycle stream keeps it 0",
                          cycle=cycle)
        for cycle in (self.tdo & ~self.mask).search(1):
            self.miss("expected TDO is 1 where it is not compared, where the cycle stream keeps it 0",
                      cycle=cycle)

    def outside_shifts(self, bits: bitarray) -> list[int]:
        """The cycles where `bits` is 1 but the TAP is not in Shift-xR."""
        starts = [start for start, _ in self.shift_runs]
        outside = []
        for cycle in bits.search(1):
            run = bisect_right(starts, cycle) - 1
            if run < 0 or cycle >= self.shift_runs[run][1]:
                outside.append(cycle)
        return outside

    def report(self) -> ReplayReport:
        return ReplayReport(tuple(self.mismatches), len(self.tms), self.scans_seen,
                            self.instructions_checked, self.images_checked, self.known_tdo_bits)


def replay(source: ScanProgram | Mapping[str, Any], cycles: CycleStream | None = None) -> ReplayReport:
    """Replay a program: a ScanProgram with its CycleStream, or decoded shift-file data."""
    if isinstance(source, ScanProgram):
        if cycles is None:
            raise TypeError("replay(program, cycles): the cycle stream is needed with a ScanProgram")
        program = source
    else:
        program, cycles = shift_file_from_data(source)
    engine = _Replay(program, cycles)
    engine.run()
    return engine.report()

"""The listing `DIR/<stem>.txt`: the program's scans for a person to read, per test and step.

For every record: what it is for, its cycles, its TDI, expected TDO and mask in hex (bit 0 =
first bit shifted = least significant bit, as in the shift file), what it leaves in each
device (instruction or register image), and every compared bit by device, register, cell,
port and net. The head states the TCK count against the lower bound for the scan sequence.
"""

from __future__ import annotations

from itertools import compress
from pathlib import Path
from typing import Iterator, Sequence

from bitarray import bitarray

from ..cycle_stream import CycleStream
from ..hexbits import bits_to_hex
from ..records import DR_SCAN, IDLE, IR_SCAN, RESET, DeviceMap, ScanProgram, Segment, ShiftRecord
from ..tap import UNKNOWN_STATE_CODE, TapState, next_state, state_code_name, state_from_name
from .atomic import atomic_output
from .json_writer import relative_posix

__all__ = ["render_listing", "write_listing"]

_WRAP = 64  # hex digits or image characters per line
_KIND_WORDS = {RESET: "reset", IR_SCAN: "instruction scan", DR_SCAN: "data scan", IDLE: "idle"}


def _frequency(hz: float | None) -> str:
    if hz is None:
        return "not declared (waveform drawn at 1 MHz)"
    for scale, unit in ((1e6, "MHz"), (1e3, "kHz")):
        if hz >= scale:
            return f"{hz / scale:g} {unit}"
    return f"{hz:g} Hz"


def _wrapped(label: str, text: str, indent: str) -> list[str]:
    """`label text`, the text cut into lines of _WRAP characters under one another."""
    if not text:
        return [f"{indent}{label}(none)"]
    pad = " " * len(label)
    chunks = [text[i:i + _WRAP] for i in range(0, len(text), _WRAP)]
    return [f"{indent}{label if n == 0 else pad}{chunk}" for n, chunk in enumerate(chunks)]


def _span(first: int, count: int) -> str:
    if count <= 0:
        return f"no cycles (at cycle {first})"
    if count == 1:
        return f"cycle {first}"
    return f"cycles {first}-{first + count - 1}"


_FILLED_KEPT = 4  # masks whose compared-bit lines are kept (about 100 bytes per compared bit)
_MASKS_REMEMBERED = 64  # masks seen once, waiting to be seen again


class _FilledLines:
    """The compared-bit lines of one layout and mask as one UTF-8 text expecting 0 everywhere,
    and the bit of each line's value digit ("0" and "1" differ in their lowest bit): a scan's
    lines are that text with its expected 1s set, one scatter instead of a pick per bit."""

    def __init__(self, layout_lines: list[str], compared: list[int]):
        zeros = [layout_lines[2 * bit] for bit in compared]
        encoded = [line.encode() for line in zeros]
        self.text = b"\n".join(encoded)
        self.compared = compared
        self.count = len(compared)
        digits: list[int] = []
        start = 0
        for line, bit in zip(encoded, compared):
            # "      scan bit {bit}: expect 0  ...": an ASCII head, the digit after it
            digits.append(8 * (start + len(f"      scan bit {bit}: expect ")) + 7)
            start += len(line) + 1
        self.digits = digits

    def fill(self, tdo: bitarray) -> str:
        """The lines for a scan expecting `tdo` (big-endian bits, like the mask)."""
        text = bitarray(endian="big")
        text.frombytes(self.text)
        text[self.digits] = tdo[self.compared]
        return text.tobytes().decode()


class _ChainLabels:
    """What each device bit is called; a register's labels are built once, on first use."""

    def __init__(self, devices: Sequence[DeviceMap]) -> None:
        self.devices = {device.ref: device for device in devices}
        self._labels: dict[tuple[str, str], list[str]] = {}
        self._lines: dict[tuple[str, str, int, int], list[str]] = {}
        self._layouts: dict[tuple[Segment, ...], list[str] | None] = {}
        self._masks_seen: set[tuple] = set()
        self._filled: dict[tuple, _FilledLines] = {}

    def compared_lines(self, ref: str, register: str, offset: int, length: int) -> list[str]:
        """For a segment, the two possible lines of each bit, interleaved: bit b expecting 0 at
        2b, expecting 1 at 2b+1. Built once per segment place, since scans repeat their layout."""
        key = (ref, register, offset, length)
        lines = self._lines.get(key)
        if lines is None:
            names = self.labels(ref, register, length)[:length]
            places = range(offset, offset + len(names))
            lines = [""] * (2 * len(names))
            lines[0::2] = [f"      scan bit {place}: expect 0  {name}" for place, name in zip(places, names)]
            lines[1::2] = [f"      scan bit {place}: expect 1  {name}" for place, name in zip(places, names)]
            self._lines[key] = lines
        return lines

    def layout_lines(self, segments: tuple[Segment, ...]) -> list[str] | None:
        """`compared_lines` of every bit of a record's segments in offset order, as one list;
        None unless the segments tile the scan from bit 0 (as every scheduled scan's do)."""
        if segments in self._layouts:
            return self._layouts[segments]
        lines: list[str] | None = []
        at = 0
        for segment in segments:
            if segment.offset != at or segment.length <= 0:
                lines = None
                break
            lines += self.compared_lines(segment.device, segment.register,  # type: ignore[operator]
                                         segment.offset, segment.length)
            at += segment.length
        self._layouts[segments] = lines
        return lines

    def filled_lines(self, segments: tuple[Segment, ...], mask: bitarray) -> _FilledLines | None:
        """The compared-bit lines of scans with this layout and mask, once a second scan has
        shown that the mask repeats (the vectors of a test compare the same bits); None before,
        or when the segments do not tile the scan."""
        key = (segments, len(mask), mask.tobytes())
        found = self._filled.get(key)
        if found is not None:
            return found
        if key not in self._masks_seen:
            if len(self._masks_seen) >= _MASKS_REMEMBERED:
                self._masks_seen.clear()
            self._masks_seen.add(key)
            return None
        lines = self.layout_lines(segments)
        if lines is None:
            return None
        if len(self._filled) >= _FILLED_KEPT:
            self._filled.clear()
        found = self._filled[key] = _FilledLines(lines, list(mask.search(1)))
        return found

    def labels(self, ref: str, register: str, length: int) -> list[str]:
        key = (ref, register)
        known = self._labels.get(key)
        if known is None or len(known) < length:
            known = self._labels[key] = self._build(ref, register, length)
        return known

    def _build(self, ref: str, register: str, length: int) -> list[str]:
        if register != "BOUNDARY" or ref not in self.devices:
            return [f"{ref} {register} bit {bit}" for bit in range(length)]
        roles: list[str] = [""] * length
        for cell in self.devices[ref].cells:
            if 0 <= cell.number < length:
                role = f"{cell.cell_type} {cell.function}" \
                    + (f" port {cell.port}" if cell.port else " internal") \
                    + (f" net {cell.net}" if cell.net else "")
                known = roles[cell.number]
                roles[cell.number] = f"{known}; {role}" if known else role
        head = f"{ref} BOUNDARY cell "
        return [f"{head}{bit} ({role})" if role else f"{head}{bit}" for bit, role in enumerate(roles)]


def _where_it_ends(record: ShiftRecord, end: int, cycles: CycleStream) -> str:
    """Where the record leaves the TAP: its rest state, or the state the next record starts from."""
    rest = state_from_name(record.end_state)
    if end < cycles.count:
        code = cycles.state_names[end]
    elif cycles.count and cycles.state_names[-1] != UNKNOWN_STATE_CODE:
        code = int(next_state(TapState(cycles.state_names[-1]), cycles.tms[-1]))
    else:
        code = UNKNOWN_STATE_CODE
    if code == rest:
        return f"rests in {rest.standard_name}"
    return f"goes on from {state_code_name(code)} to the next record (rest state {rest.standard_name})"


def _record_lines(index: int, record: ShiftRecord, start: int, end: int, shift_start: int | None,
                  labels: _ChainLabels, chain: Sequence[DeviceMap], cycles: CycleStream) -> list[str]:
    words = _KIND_WORDS.get(record.kind, record.kind)
    head = f"  record {index}: {words}"
    if record.purpose:
        head += f" ({record.purpose})"
    if record.kind in (IR_SCAN, DR_SCAN):
        head += f", {record.length} bits"
    head += f", {_span(start, end - start)}"
    lines = [head]
    if record.kind == RESET:
        trst = " with TRST asserted by the player as well" if record.use_trst else ""
        lines.append(f"    five clocks with TMS=1 to Test-Logic-Reset{trst}")
    if shift_start is not None:
        state = "Shift-IR" if record.kind == IR_SCAN else "Shift-DR"
        lines.append(f"    {state} from cycle {shift_start} to {shift_start + record.length - 1}")
    if record.idle_clocks:
        lines.append(f"    then {record.idle_clocks} clocks in Run-Test/Idle")
    lines.append(f"    {_where_it_ends(record, end, cycles)}")
    if record.kind not in (IR_SCAN, DR_SCAN):
        return lines
    lines += _wrapped("TDI   ", bits_to_hex(record.tdi), "    ")
    lines += _wrapped("TDO   ", bits_to_hex(record.tdo), "    ")
    lines += _wrapped("mask  ", bits_to_hex(record.mask), "    ")
    segments = {segment.device: segment for segment in record.segments}
    checks: dict[str, list[str]] = {}
    for check in record.checks:
        checks.setdefault(check.device, []).append(f"{check.test}/{check.step}")
    for device in chain:
        segment = segments.get(device.ref)
        if segment is None:
            continue
        last = segment.offset + segment.length - 1
        place = f"bits {segment.offset}-{last}" if segment.length > 1 else f"bit {segment.offset}"
        line = f"    {device.ref}: {segment.register}, scan {place}"
        intent = record.intent.get(device.ref)
        if record.kind == IR_SCAN and intent is not None:
            line += f", instruction {intent}"
        if device.ref in checks:
            line += ", checks " + ", ".join(checks[device.ref])
        lines.append(line)
        if record.kind == DR_SCAN and intent is not None:
            lines += _wrapped("image ", intent, "      ")
    count, compared = _compared_bits(record, labels)
    if count:
        lines.append(f"    compared bits ({count}):")
        lines.append(compared)
    return lines


def _compared_bits(record: ShiftRecord, labels: _ChainLabels) -> tuple[int, str]:
    """How many bits the record compares, and their lines as one text.

    The lines are picked from the segments' prepared lines by a selector (compared and
    expecting 0 at 2b, compared and expecting 1 at 2b+1), not formatted per bit; when the
    mask repeats an earlier scan's, they are that mask's lines with the expected 1s set.
    """
    tdo, mask = bitarray(record.tdo, endian="big"), bitarray(record.mask, endian="big")
    if not mask.any():
        return 0, ""
    segments = tuple(sorted(record.segments, key=lambda s: s.offset))
    chain_length = max((s.offset + s.length for s in segments), default=0)
    if chain_length == record.length:
        filled = labels.filled_lines(segments, mask)
        if filled is not None:
            return filled.count, filled.fill(tdo)
    lines: list[str] = []
    for segment in segments:
        # A raw chain scan shorter than the chain shows only the first registers' bits.
        start, stop = segment.offset, min(segment.offset + segment.length, record.length)
        if stop <= start:
            continue
        window, expected = mask[start:stop], tdo[start:stop]
        selector = bitarray(2 * (stop - start), endian="big")
        selector[0::2] = window & ~expected
        selector[1::2] = window & expected
        prepared = labels.compared_lines(segment.device, segment.register, start, segment.length)
        lines.extend(compress(prepared, selector))  # (compress stops at the selector's end)
    # A raw chain scan longer than the chain: the bits past it are TDI bits passing through.
    for bit in mask.search(1, chain_length):
        lines.append(f"      scan bit {bit}: expect {tdo[bit]}  TDI bit {bit - chain_length} "
                     "through the whole chain")
    return len(lines), "\n".join(lines)


def listing_parts(program: ScanProgram, cycles: CycleStream, out_dir: Path) -> Iterator[str]:
    """The listing's text piece by piece (the head, then each record), paths relative to
    `out_dir`: a large program's listing is written without holding all of it at once."""
    chain = program.chain.devices
    labels = _ChainLabels(chain)
    excess = cycles.count - cycles.lower_bound
    if excess == 0:
        verdict = f"equal to the lower bound for this scan sequence ({cycles.lower_bound})"
    else:
        verdict = f"{excess} more than the lower bound for this scan sequence ({cycles.lower_bound})"
    lines = [
        "scanloom listing: shift records and TAP cycles",
        f"program     {relative_posix(program.source, out_dir) or '(none)'}",
        f"board       {relative_posix(program.board, out_dir) or '(none)'}",
        f"TCK         {_frequency(program.tck_hz)}",
        f"TCK count   {cycles.count}, {verdict}",
        "bit order   hex with bit 0 = first bit shifted = least significant bit;",
        "            images and instructions as in BSDL, leftmost bit nearest TDI",
        "",
        "chain, from TDI to TDO:",
    ]
    for device in chain:
        idcode = f", IDCODE {device.idcode}" if device.idcode else ""
        lines.append(f"  {device.position}: {device.ref} ({device.entity}), IR {device.ir_length} bits, "
                     f"capture {device.ir_capture}, boundary {device.boundary_length} cells{idcode}")
    lines += [f"note: {note}" for note in program.notes]
    shift_starts = iter(cycles.shift_starts)
    ends = list(cycles.record_starts[1:]) + [cycles.count]
    place: tuple[str | None, str | None] | None = None
    for index, record in enumerate(program.records):
        if place is None or record.test != place[0]:
            lines += ["", f"test {record.test}" if record.test else "outside any test"]
            place = (record.test, None)
        if record.step and record.step != place[1]:
            lines.append(f" step {record.step}")
        place = (record.test, record.step or place[1])
        shift_start = next(shift_starts) if record.kind in (IR_SCAN, DR_SCAN) else None
        lines += _record_lines(index, record, cycles.record_starts[index], ends[index], shift_start,
                               labels, chain, cycles)
        lines.append("")
        yield "\n".join(lines)
        lines = []
    lines += ["", f"end: {cycles.count} TCK, {verdict}", ""]
    yield "\n".join(lines)


def render_listing(program: ScanProgram, cycles: CycleStream, out_dir: Path) -> str:
    """The listing's text (paths relative to `out_dir`)."""
    return "".join(listing_parts(program, cycles, out_dir))


def write_listing(program: ScanProgram, cycles: CycleStream, path: Path) -> Path:
    """Write the listing to `path` atomically, record by record."""
    path = Path(path)
    with atomic_output(path) as handle:
        for part in listing_parts(program, cycles, path.parent):
            handle.write(part)
    return path

"""Read a shift file (`DIR/<stem>.json`, schema "scanloom.shifts") back into records and cycles.

The reader restores the ScanProgram and the CycleStream bit for bit; the per-cycle TAP states
(not stored in the file) are recomputed from TMS. A file that is not JSON, is some other
tool's JSON, has another schema version or breaks the schema is refused with a diagnostic
that points at the offending value (`file:line:col`, the line and a caret), never a traceback.
Only the structure is checked here; whether the bits do what the records intend is the
independent replay's job (`scanloom verify`).
"""

from __future__ import annotations

import json
import os
import re
from pathlib import Path
from typing import Any, Callable, Mapping, NoReturn, Sequence

from bitarray import bitarray

from ..diagnostics import Diagnostic, ScanloomError, SourceSpan, nearest, read_source
from ..file_kinds import SHIFT_FILE, misplaced_kind_error
from ..models.device import MAX_REGISTER_LENGTH, STANDARD_LENGTHS
from .cycle_stream import CycleStream, tap_states_from_tms
from .hexbits import hex_digits, hex_to_bits
from .records import (
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

__all__ = ["SCHEMA", "SCHEMA_VERSION", "read_shift_file", "shift_file_from_data", "locate_json_value"]

SCHEMA = "scanloom.shifts"
SCHEMA_VERSION = 1

_KINDS = (RESET, IR_SCAN, DR_SCAN, IDLE)
_REST_STATES = ("RUN_TEST_IDLE", "TEST_LOGIC_RESET")
_PATTERN = re.compile("[01X]*")
_WHITESPACE = re.compile(r"[ \t\n\r]*")
_DECODER = json.JSONDecoder()

JsonPath = tuple[str | int, ...]
# A cell is [number, type, function, port, net]; port and net are null for internal cells.
_CELL_TYPES = frozenset((int, str, str, port, net) for port in (str, type(None)) for net in (str, type(None)))


def locate_json_value(text: str, path: Sequence[str | int]) -> int:
    """The character offset of the value at `path` in JSON `text` (as deep as it exists).

    Values that are not on the way are skipped with the C decoder, so even a file of many
    megabytes is located quickly.
    """
    index = _WHITESPACE.match(text, 0).end()  # type: ignore[union-attr]
    for step in path:
        opener = "{" if isinstance(step, str) else "["
        if not text.startswith(opener, index):
            return index
        position = index + 1
        member = 0
        while True:
            position = _WHITESPACE.match(text, position).end()  # type: ignore[union-attr]
            if text.startswith("}" if opener == "{" else "]", position):
                return index
            try:
                if opener == "{":
                    key, position = _DECODER.raw_decode(text, position)
                    position = _WHITESPACE.match(text, position).end() + 1  # type: ignore[union-attr]
                    position = _WHITESPACE.match(text, position).end()  # type: ignore[union-attr]
                    found = key == step
                else:
                    found = member == step
                if found:
                    index = position
                    break
                _, position = _DECODER.raw_decode(text, position)
            except (json.JSONDecodeError, IndexError):
                return index
            position = _WHITESPACE.match(text, position).end()  # type: ignore[union-attr]
            if text.startswith(",", position):
                position += 1
            member += 1
    return index


def _path_text(path: JsonPath) -> str:
    text = ""
    for step in path:
        text += f"[{step}]" if isinstance(step, int) else (f".{step}" if text else step)
    return text or "the file"


class _SchemaReader:
    """Checks one decoded shift file; the first violation raises ScanloomError."""

    def __init__(self, origin: str, text: str | None) -> None:
        self.origin = origin
        self.text = text

    def fail(self, path: JsonPath, message: str, *, expected: str | None = None,
             suggestions: Sequence[str] = ()) -> NoReturn:
        span = None
        if self.text is not None:
            offset = locate_json_value(self.text, path)
            span = SourceSpan.at_offset(self.origin, self.text, offset)
        where = _path_text(path)
        sources = {self.origin: self.text} if self.text is not None else {}
        raise ScanloomError([Diagnostic("error", f"{where}: {message}", span, expected,
                                        tuple(suggestions))], sources)

    def field(self, obj: Mapping[str, Any], key: str, path: JsonPath, kinds: tuple[type, ...],
              what: str) -> Any:
        if key not in obj:
            self.fail(path, f"missing field \"{key}\"", expected=what,
                      suggestions=nearest(key, [k for k in obj if isinstance(k, str)]))
        value = obj[key]
        if not isinstance(value, kinds) or (isinstance(value, bool) and bool not in kinds):
            self.fail(path + (key,), f"expected {what}, found {_describe(value)}")
        return value

    def integer(self, obj: Mapping[str, Any], key: str, path: JsonPath, minimum: int = 0) -> int:
        value = self.field(obj, key, path, (int,), f"a whole number >= {minimum}")
        if value < minimum:
            self.fail(path + (key,), f"expected a whole number >= {minimum}, found {value}")
        return value

    def optional_text(self, obj: Mapping[str, Any], key: str, path: JsonPath) -> str | None:
        return self.field(obj, key, path, (str, type(None)), "a string or null")

    def text_field(self, obj: Mapping[str, Any], key: str, path: JsonPath) -> str:
        return self.field(obj, key, path, (str,), "a string")

    def obj(self, value: Any, path: JsonPath, what: str) -> dict[str, Any]:
        if not isinstance(value, dict):
            self.fail(path, f"expected {what}, found {_describe(value)}")
        return value

    def items(self, obj: Mapping[str, Any], key: str, path: JsonPath, what: str) -> list[Any]:
        return self.field(obj, key, path, (list,), f"a list of {what}")

    def pattern(self, value: Any, path: JsonPath, length: int, what: str) -> str:
        if not isinstance(value, str) or _PATTERN.fullmatch(value) is None or len(value) != length:
            self.fail(path, f"expected {what}: {length} characters 0, 1 or X, found {_describe(value)}")
        return value

    def bits(self, obj: Mapping[str, Any], key: str, path: JsonPath, length: int) -> bitarray:
        text = self.field(obj, key, path, (str,), f"{hex_digits(length)} hex digits")
        try:
            return hex_to_bits(text, length)
        except ValueError as error:
            self.fail(path + (key,), f"bad bit string: {error}",
                      expected="hex, bit 0 least significant, lower case, zero-padded")

    def string_map(self, obj: Mapping[str, Any], key: str, path: JsonPath,
                   check: Callable[[Any, JsonPath], Any], what: str) -> dict[str, Any]:
        mapping = self.obj(self.field(obj, key, path, (dict,), f"an object of {what}"),
                           path + (key,), f"an object of {what}")
        return {name: check(value, path + (key, name)) for name, value in mapping.items()}


def _describe(value: Any) -> str:
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return f"a string of {len(value)} characters" if len(value) > 40 else json.dumps(value)
    if isinstance(value, (int, float)):
        return f"the number {value}"
    return "a list" if isinstance(value, list) else "an object"


def _read_device(reader: _SchemaReader, value: Any, path: JsonPath) -> DeviceMap:
    data = reader.obj(value, path, "a device object")
    ir_length = reader.integer(data, "ir_length", path, 1)

    def opcodes(codes: Any, at: JsonPath) -> tuple[str, ...]:
        if not isinstance(codes, list) or not codes:
            reader.fail(at, f"expected a list of opcodes, found {_describe(codes)}")
        return tuple(reader.pattern(code, at + (n,), ir_length, "an opcode")
                     for n, code in enumerate(codes))

    def register_length(length: Any, at: JsonPath) -> int:
        if not isinstance(length, int) or isinstance(length, bool) or not 1 <= length <= MAX_REGISTER_LENGTH:
            reader.fail(at, f"expected a register length from 1 to {MAX_REGISTER_LENGTH:,}, "
                            f"found {_describe(length)}")
        standard = STANDARD_LENGTHS.get(str(at[-1]))
        if standard is not None and length != standard:
            reader.fail(at, f"the {at[-1]} register is {standard} bit{'s' * (standard != 1)} long "
                            f"(IEEE 1149.1), not {length}")
        return length

    def register_name(name: Any, at: JsonPath) -> str:
        if not isinstance(name, str):
            reader.fail(at, f"expected a register name, found {_describe(name)}")
        return name

    idcode = reader.optional_text(data, "idcode", path)
    if idcode is not None:
        reader.pattern(idcode, path + ("idcode",), 32, "an IDCODE pattern")
    cells = []
    for n, cell in enumerate(reader.items(data, "cells", path, "cells")):
        at = path + ("cells", n)
        if not isinstance(cell, list) or tuple(map(type, cell)) not in _CELL_TYPES:
            reader.fail(at, f"expected a cell [number, type, function, port, net], found {_describe(cell)}")
        cells.append(CellMeaning(cell[0], cell[1], cell[2], cell[3], cell[4]))
    registers = reader.string_map(data, "registers", path, register_length, "register lengths")
    boundary_length = reader.integer(data, "boundary_length", path)
    if boundary_length > MAX_REGISTER_LENGTH:
        reader.fail(path + ("boundary_length",), f"expected a register length from 0 to "
                    f"{MAX_REGISTER_LENGTH:,}, found {boundary_length}")
    if registers.get("BOUNDARY", boundary_length) != boundary_length:
        reader.fail(path + ("boundary_length",), f"the boundary register is {registers['BOUNDARY']} "
                    f"bits long in \"registers\", {boundary_length} here")
    return DeviceMap(
        ref=reader.text_field(data, "ref", path),
        entity=reader.text_field(data, "entity", path),
        position=reader.integer(data, "position", path),
        ir_length=ir_length,
        ir_capture=reader.pattern(reader.field(data, "ir_capture", path, (str,), "a string"),
                                  path + ("ir_capture",), ir_length, "an IR capture pattern"),
        idcode=idcode,
        opcodes=reader.string_map(data, "opcodes", path, opcodes, "opcode lists"),
        selects=reader.string_map(data, "selects", path, register_name, "register names"),
        registers=registers,
        boundary_length=boundary_length,
        cells=tuple(cells),
    )


def _read_record(reader: _SchemaReader, value: Any, index: int) -> ShiftRecord:
    path: JsonPath = ("records", index)
    data = reader.obj(value, path, "a record object")
    if reader.integer(data, "index", path) != index:
        reader.fail(path + ("index",), f"record {index} carries index {data['index']}",
                    expected=f"the record's position in the list, {index}")
    kind = reader.text_field(data, "kind", path)
    if kind not in _KINDS:
        reader.fail(path + ("kind",), f"unknown record kind {json.dumps(kind)}",
                    expected=", ".join(_KINDS), suggestions=nearest(kind, _KINDS))
    length = reader.integer(data, "length", path)
    if kind in (IR_SCAN, DR_SCAN) and length < 1:
        reader.fail(path + ("length",), f"a {kind} scan of {length} bits", expected="at least one bit")
    if kind in (RESET, IDLE) and length != 0:
        reader.fail(path + ("length",), f"a {kind} record of {length} bits", expected="0 bits")
    end_state = reader.text_field(data, "end_state", path)
    if end_state not in _REST_STATES:
        reader.fail(path + ("end_state",), f"a record cannot rest in {json.dumps(end_state)}",
                    expected=" or ".join(_REST_STATES), suggestions=nearest(end_state, _REST_STATES))
    segments = []
    for n, segment in enumerate(reader.items(data, "segments", path, "segments")):
        at = path + ("segments", n)
        seg = reader.obj(segment, at, "a segment object")
        segments.append(Segment(reader.text_field(seg, "device", at), reader.text_field(seg, "register", at),
                                reader.integer(seg, "offset", at), reader.integer(seg, "length", at)))
    checks = []
    for n, check in enumerate(reader.items(data, "checks", path, "checks")):
        at = path + ("checks", n)
        item = reader.obj(check, at, "a check object")
        checks.append(CheckRange(*(reader.text_field(item, key, at)
                                   for key in ("device", "register", "test", "step"))))

    def intent_text(text: Any, at: JsonPath) -> str:
        if kind == DR_SCAN:
            if not isinstance(text, str) or _PATTERN.fullmatch(text) is None:
                reader.fail(at, f"expected a register image of 0, 1 and X, found {_describe(text)}")
        elif not isinstance(text, str):
            reader.fail(at, f"expected an instruction name, found {_describe(text)}")
        return text

    return ShiftRecord(
        kind=kind,
        length=length,
        tdi=reader.bits(data, "tdi", path, length),
        tdo=reader.bits(data, "tdo", path, length),
        mask=reader.bits(data, "mask", path, length),
        segments=tuple(segments),
        checks=tuple(checks),
        test=reader.optional_text(data, "test", path),
        step=reader.optional_text(data, "step", path),
        purpose=reader.text_field(data, "purpose", path),
        intent=reader.string_map(data, "intent", path, intent_text, "instructions or images"),
        idle_clocks=reader.integer(data, "idle_clocks", path),
        end_state=end_state,
        use_trst=reader.field(data, "use_trst", path, (bool,), "true or false"),
    )


def _read_cycles(reader: _SchemaReader, value: Any, records: Sequence[ShiftRecord]) -> CycleStream:
    path: JsonPath = ("cycles",)
    data = reader.obj(value, path, "the cycles object")
    count = reader.integer(data, "count", path)
    bits = {name: reader.bits(data, name, path, count) for name in ("tms", "tdi", "tdo", "mask")}

    def cycle_list(key: str, expected_length: int, what: str, limit: int) -> tuple[int, ...]:
        values = reader.items(data, key, path, "cycle numbers")
        if len(values) != expected_length:
            reader.fail(path + (key,), f"{len(values)} entries for {expected_length} {what}")
        previous = 0
        for n, cycle in enumerate(values):
            if not isinstance(cycle, int) or isinstance(cycle, bool) or not previous <= cycle <= limit:
                reader.fail(path + (key, n), f"expected a cycle number from {previous} to {limit}, "
                                             f"found {_describe(cycle)}")
            previous = cycle
        return tuple(values)

    scans = sum(1 for record in records if record.kind in (IR_SCAN, DR_SCAN))
    return CycleStream(
        tms=bits["tms"], tdi=bits["tdi"], tdo=bits["tdo"], mask=bits["mask"],
        state_names=tap_states_from_tms(bits["tms"]),
        record_starts=cycle_list("record_starts", len(records), "records", count),
        shift_starts=cycle_list("shift_starts", scans, "scan records", max(count - 1, 0)),
        lower_bound=reader.integer(data, "lower_bound", path),
    )


def _check_device_names(reader: _SchemaReader, records: Sequence[ShiftRecord],
                        refs: Sequence[str]) -> None:
    """Every device a record names must be in the chain."""
    known = set(refs)
    for index, record in enumerate(records):
        named = [(("segments", n, "device"), s.device) for n, s in enumerate(record.segments)]
        named += [(("checks", n, "device"), c.device) for n, c in enumerate(record.checks)]
        named += [(("intent", ref), ref) for ref in record.intent]
        for at, ref in named:
            if ref not in known:
                reader.fail(("records", index) + at, f"device {json.dumps(ref)} is not in the chain",
                            expected="one of " + ", ".join(refs), suggestions=nearest(ref, refs))


def _resolve(path: str, base_dir: str | None) -> str:
    if not path or base_dir is None:
        return path
    return os.path.normpath(os.path.join(base_dir, path))


def shift_file_from_data(data: Any, *, origin: str = "<shift data>", text: str | None = None,
                         base_dir: str | None = None) -> tuple[ScanProgram, CycleStream]:
    """Program and cycles from decoded shift-file data; paths resolved against `base_dir`."""
    reader = _SchemaReader(origin, text)
    root = reader.obj(data, (), "a shift file object")
    if root.get("schema") != SCHEMA:
        reader.fail(("schema",) if "schema" in root else (),
                    "not a scanloom shift file", expected=f"\"schema\": \"{SCHEMA}\"")
    version = root.get("version")
    if version != SCHEMA_VERSION or isinstance(version, bool):
        reader.fail(("version",), f"shift file version {json.dumps(version)} is not supported",
                    expected=f"version {SCHEMA_VERSION}; write the file again with this scanloom")
    tck_hz = reader.field(root, "tck_hz", (), (int, float, type(None)), "a frequency in Hz or null")
    if tck_hz is not None and not tck_hz > 0:
        reader.fail(("tck_hz",), f"TCK frequency {tck_hz} is not positive")
    devices = tuple(_read_device(reader, device, ("chain", n))
                    for n, device in enumerate(reader.items(root, "chain", (), "devices")))
    if not devices:
        reader.fail(("chain",), "the chain has no devices", expected="at least one scan device")
    for n, device in enumerate(devices):
        if device.position != n:
            reader.fail(("chain", n, "position"), f"device {device.ref} is listed at {n} "
                        f"but says position {device.position}", expected=f"position {n}")
    records = tuple(_read_record(reader, record, n)
                    for n, record in enumerate(reader.items(root, "records", (), "records")))
    _check_device_names(reader, records, [device.ref for device in devices])
    if not records or records[0].kind != RESET:
        reader.fail(("records",), "the first record must be a reset",
                    expected="a program that starts in Test-Logic-Reset")
    notes = reader.items(root, "notes", (), "notes")
    if not all(isinstance(note, str) for note in notes):
        reader.fail(("notes",), "expected a list of strings")
    cycles = _read_cycles(reader, reader.field(root, "cycles", (), (dict,), "the cycles object"), records)
    program = ScanProgram(
        source=_resolve(reader.text_field(root, "source", ()), base_dir),
        board=_resolve(reader.text_field(root, "board", ()), base_dir),
        tck_hz=float(tck_hz) if tck_hz is not None else None,
        chain=ChainMap(devices),
        records=records,
        notes=tuple(notes),
    )
    return program, cycles


def read_shift_file(path: str | Path) -> tuple[ScanProgram, CycleStream]:
    """Read `DIR/<stem>.json`; paths inside are resolved against DIR."""
    origin = str(path)
    try:
        text = read_source(path)
    except OSError as error:
        reason = error.strerror or str(error)
        raise ScanloomError([Diagnostic("error", f"cannot read shift file {origin}: {reason}",
                                        expected="a shift file written by scanloom compile")]) from None
    try:
        data = json.loads(text)
    except json.JSONDecodeError as error:
        misplaced = misplaced_kind_error(origin, text, SHIFT_FILE)
        if misplaced is not None:
            raise ScanloomError([misplaced], {origin: text}) from None
        span = SourceSpan(origin, error.lineno, error.colno, error.lineno, error.colno + 1)
        reason = error.msg.removesuffix(" at").removesuffix(" starting")  # the caret shows where
        raise ScanloomError([Diagnostic("error", f"not valid JSON: {reason}", span,
                                        expected="a shift file written by scanloom compile")],
                            {origin: text}) from None
    except RecursionError:
        raise ScanloomError([Diagnostic("error", f"{origin}: JSON nested too deeply",
                                        expected="a shift file written by scanloom compile")]) from None
    return shift_file_from_data(data, origin=origin, text=text,
                                base_dir=os.path.dirname(os.path.abspath(origin)))

"""Shift records: the bit-exact scans a program becomes, before TAP cycles are laid out.

Bit order (DESIGN.md, never to drift): index i of `tdi`, `tdo` and `mask` is the i-th bit
shifted. The first bit shifted in ends up in the device nearest TDO; within a register bit 0
is nearest TDO and is shifted out first. So a DR scan is the concatenation, from the device
nearest TDO back to the device nearest TDI, of each device's register bits 0..n-1.

What each bit means is kept compactly: a record lists `segments` (device, register, offset,
length); bit k of a BOUNDARY segment is boundary cell k of that device, and the chain's
cell → port → net map lives beside the records (`ChainMap`). Compared bits carry the test and
step whose response they check through `checks`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import NamedTuple

from bitarray import bitarray

__all__ = [
    "RESET",
    "IR_SCAN",
    "DR_SCAN",
    "IDLE",
    "Segment",
    "CheckRange",
    "ShiftRecord",
    "CellMeaning",
    "DeviceMap",
    "ChainMap",
    "ScanProgram",
]

RESET = "reset"
IR_SCAN = "ir"
DR_SCAN = "dr"
IDLE = "idle"


@dataclass(frozen=True, slots=True)
class Segment:
    """The bits of one device's register inside a scan: scan bits offset .. offset+length-1."""

    device: str
    register: str  # IR, BYPASS, BOUNDARY, DEVICE_ID or a user register name
    offset: int
    length: int


@dataclass(frozen=True, slots=True)
class CheckRange:
    """Compared bits of one segment that check the response of (test, step)."""

    device: str
    register: str
    test: str
    step: str


@dataclass(frozen=True, eq=False)
class ShiftRecord:
    """One reset, IR scan, DR scan or idle period.

    For scans, `tdi`, `tdo` (expected) and `mask` (1 = compare) have `length` bits. `intent`
    holds what the scan must leave behind, for the independent replay to verify: for an IR
    scan the instruction per device, for a DR scan the update image per device and register
    (BSDL order strings: leftmost = highest bit). `idle_clocks` are spent in Run-Test/Idle after
    the record (for an idle record, that is the whole record). `end_state` is the stable state
    the TAP rests in after the record.
    """

    kind: str
    length: int = 0
    tdi: bitarray = field(default_factory=bitarray)
    tdo: bitarray = field(default_factory=bitarray)
    mask: bitarray = field(default_factory=bitarray)
    segments: tuple[Segment, ...] = ()
    checks: tuple[CheckRange, ...] = ()
    test: str | None = None
    step: str | None = None
    purpose: str = ""  # e.g. "preload", "drive", "flush", "read", "instruction"
    intent: dict[str, str] = field(default_factory=dict)  # device -> instruction or image
    idle_clocks: int = 0
    end_state: str = "RUN_TEST_IDLE"
    use_trst: bool = False


class CellMeaning(NamedTuple):
    """One boundary cell as the records see it. A named tuple: a large chain has a hundred
    thousand of them, made every time a program is scheduled or a shift file read."""

    number: int
    cell_type: str
    function: str
    port: str | None
    net: str | None


@dataclass(frozen=True, eq=False)
class DeviceMap:
    """One device's fixed facts the records refer to."""

    ref: str
    entity: str
    position: int  # 0 = nearest TDI
    ir_length: int
    ir_capture: str  # BSDL order, X bits not compared
    idcode: str | None  # BSDL order (32 characters 0/1/X)
    opcodes: dict[str, tuple[str, ...]]  # instruction -> every opcode (BSDL order, X allowed)
    selects: dict[str, str]  # instruction -> register it selects
    registers: dict[str, int]  # register -> length
    boundary_length: int
    cells: tuple[CellMeaning, ...]  # one per boundary cell entry, merged cells both listed


@dataclass(frozen=True, eq=False)
class ChainMap:
    """The chain, TDI -> TDO, with what every boundary cell is connected to."""

    devices: tuple[DeviceMap, ...]

    def device(self, ref: str) -> DeviceMap:
        for dev in self.devices:
            if dev.ref == ref:
                return dev
        raise KeyError(ref)


@dataclass(frozen=True, eq=False)
class ScanProgram:
    """The back end's product: the chain map and the records in order."""

    source: str
    board: str
    tck_hz: float | None
    chain: ChainMap
    records: tuple[ShiftRecord, ...]
    notes: tuple[str, ...] = ()

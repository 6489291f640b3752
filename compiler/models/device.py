"""The device model: what one scan device's BSDL says, in plain frozen dataclasses.

Bit strings copied from BSDL (opcodes, captures, IDCODE) keep BSDL's order: the leftmost
character is the bit nearest TDI (the most significant bit). Port bits are named as in BSDL,
with vector bits written `NAME(3)`. All names are upper case (BSDL is case-insensitive).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

from ..diagnostics import SourceSpan

__all__ = [
    "Port",
    "BoundaryCell",
    "CellCapture",
    "CellInfo",
    "TapPins",
    "CompliancePattern",
    "ExecutionRequirement",
    "RawAttribute",
    "DeviceModel",
    "DRIVER_FUNCTIONS",
    "RECEIVER_FUNCTIONS",
    "CONTROL_FUNCTIONS",
    "MAX_REGISTER_LENGTH",
    "STANDARD_LENGTHS",
]

# Cell functions of IEEE Std 1149.1 BSDL (the <function> field of BOUNDARY_REGISTER).
DRIVER_FUNCTIONS = frozenset({"OUTPUT2", "OUTPUT3", "BIDIR"})
RECEIVER_FUNCTIONS = frozenset({"INPUT", "CLOCK", "BIDIR", "OBSERVE_ONLY"})
CONTROL_FUNCTIONS = frozenset({"CONTROL", "CONTROLR"})

MAX_REGISTER_LENGTH = 1_000_000  # a sanity limit far above any device, for every data register
STANDARD_LENGTHS = {"BYPASS": 1, "DEVICE_ID": 32}  # 10.1.1 and 12.1.1 (from memory)


def _by_fields(record: Any) -> tuple[type, tuple[Any, ...]]:
    """Pickle a frozen slots record as a call with its fields: a board cache holds tens of
    thousands of cells and ports, and the generic way restores each slot by name."""
    return type(record), tuple(getattr(record, name) for name in record.__slots__)


@dataclass(frozen=True, slots=True)
class Port:
    """A port of the entity; `bits` lists the BSDL bit names, e.g. ("D(0)", "D(1)")."""

    name: str
    direction: str  # IN, OUT, INOUT, BUFFER, LINKAGE
    bits: tuple[str, ...]
    span: SourceSpan | None = field(default=None, compare=False)

    @property
    def width(self) -> int:
        return len(self.bits)

    def __reduce__(self) -> tuple[type, tuple[Any, ...]]:
        return _by_fields(self)


@dataclass(frozen=True, slots=True)
class BoundaryCell:
    """One entry of BOUNDARY_REGISTER; a merged cell has two entries with one number."""

    number: int
    cell_type: str  # BC_1, BC_2, BC_7, ... (upper case)
    port: str | None  # a port bit name, or None for "*" (internal)
    function: str  # INPUT, OUTPUT2, OUTPUT3, CONTROL, CONTROLR, BIDIR, CLOCK, INTERNAL, OBSERVE_ONLY
    safe: str  # "0", "1" or "X"
    control_cell: int | None = None
    disable_value: int | None = None
    disable_result: str | None = None  # Z, WEAK0, WEAK1, PULL0, PULL1, KEEPER
    span: SourceSpan | None = field(default=None, compare=False)

    def __reduce__(self) -> tuple[type, tuple[Any, ...]]:
        return _by_fields(self)

    @property
    def drives_pin(self) -> bool:
        return self.function in DRIVER_FUNCTIONS

    @property
    def is_control(self) -> bool:
        return self.function in CONTROL_FUNCTIONS


@dataclass(frozen=True, slots=True)
class CellCapture:
    """One line of a CELL_INFO description: what a cell captures for a function and instruction."""

    function: str  # INPUT, OUTPUT2, ...
    instruction: str  # EXTEST, SAMPLE, INTEST
    source: str  # PI, PO, UPD, CAP, X, ZERO, ONE


@dataclass(frozen=True, slots=True)
class CellInfo:
    """A cell type: its name and capture descriptions (from the standard or a package in the file)."""

    name: str
    captures: tuple[CellCapture, ...]
    known: bool = True


@dataclass(frozen=True, slots=True)
class TapPins:
    tdi: str
    tdo: str
    tms: str
    tck: str
    trst: str | None = None
    max_tck_hz: float | None = None
    tck_stop: str | None = None  # BOTH or LOW


@dataclass(frozen=True, slots=True)
class CompliancePattern:
    """COMPLIANCE_PATTERNS: the pins that enable compliance and the pattern they must hold."""

    ports: tuple[str, ...]
    patterns: tuple[str, ...]


@dataclass(frozen=True, slots=True)
class ExecutionRequirement:
    """RUNBIST_EXECUTION / INTEST_EXECUTION: the idle clocks and time the instruction needs."""

    instruction: str
    clocks: int | None
    seconds: float | None
    raw: str


@dataclass(frozen=True, slots=True)
class RawAttribute:
    """An attribute scanloom keeps as text but does not use."""

    name: str
    text: str
    span: SourceSpan | None = field(default=None, compare=False)


@dataclass(frozen=True, eq=False)
class DeviceModel:
    """Everything scanloom uses from one BSDL file."""

    entity: str
    path: str
    standard: str | None  # e.g. STD_1149_1_2001
    ports: dict[str, Port]
    pin_maps: dict[str, dict[str, tuple[str, ...]]]  # map name -> port name -> package pins
    pin_map_name: str | None  # the map PHYSICAL_PIN_MAP selects
    tap: TapPins
    ir_length: int
    ir_capture: str
    instructions: dict[str, tuple[str, ...]]  # name -> opcodes (BSDL order)
    private: tuple[str, ...]
    registers: dict[str, int]  # BYPASS, BOUNDARY, DEVICE_ID, user registers -> length
    selects: dict[str, str]  # instruction -> register
    idcode: str | None
    usercode: str | None
    boundary_length: int
    cells: tuple[BoundaryCell, ...]  # ordered by number, merged cells adjacent
    cell_info: dict[str, CellInfo] = field(default_factory=dict)
    compliance: tuple[CompliancePattern, ...] = ()
    executions: dict[str, ExecutionRequirement] = field(default_factory=dict)
    port_groups: tuple[tuple[str, ...], ...] = ()  # differential pairs from PORT_GROUPING
    design_warning: str | None = None
    unused: tuple[RawAttribute, ...] = ()
    spans: dict[str, SourceSpan] = field(default_factory=dict)  # attribute name -> span

    @property
    def public_instructions(self) -> tuple[str, ...]:
        return tuple(name for name in self.instructions if name not in self.private)

    @cached_property
    def port_bit_set(self) -> frozenset[str]:
        return frozenset(bit for port in self.ports.values() for bit in port.bits)

    def port_bits(self) -> tuple[str, ...]:
        return tuple(bit for port in self.ports.values() for bit in port.bits)

    def pins_of(self, port_bit: str) -> tuple[str, ...]:
        """Package pins of a port bit in the selected pin map."""
        if self.pin_map_name is None:
            return ()
        return self.pin_maps.get(self.pin_map_name, {}).get(port_bit, ())

    @cached_property
    def cells_by_port(self) -> dict[str, tuple[BoundaryCell, ...]]:
        """Boundary cells per port bit (an index: devices have thousands of cells)."""
        index: dict[str, list[BoundaryCell]] = {}
        for cell in self.cells:
            if cell.port is not None:
                index.setdefault(cell.port, []).append(cell)
        return {port: tuple(cells) for port, cells in index.items()}

    @cached_property
    def driver_cells_by_port(self) -> dict[str, tuple[BoundaryCell, ...]]:
        """The cells that can drive each port bit (OUTPUT2, OUTPUT3, BIDIR)."""
        index = {port: tuple(c for c in cells if c.function in DRIVER_FUNCTIONS)
                 for port, cells in self.cells_by_port.items()}
        return {port: cells for port, cells in index.items() if cells}

    def cells_of(self, port_bit: str) -> tuple[BoundaryCell, ...]:
        return self.cells_by_port.get(port_bit, ())

    def cell(self, number: int, function: str | None = None) -> BoundaryCell:
        """The cell with `number` (and `function`, for a merged cell)."""
        for cell in self.cells:
            if cell.number == number and (function is None or cell.function == function):
                return cell
        raise KeyError(number)

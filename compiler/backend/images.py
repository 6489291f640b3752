"""Register images and captures: what each device shifts into its register, and what it can see.

An image is a bitarray indexed by cell number (bit i = boundary cell i, cell 0 nearest TDO),
which is also the order the bits are shifted. Strings in BSDL order (leftmost = highest bit)
appear only at the edges (`to_msb_string`, `from_msb_string`).

Per device the tables below are computed once (the safe image, the image with every output
disabled, and per-port cell indexes) so that a step only touches the cells it drives: boards
have tens of thousands of cells and programs tens of scans.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Iterable, Mapping

from bitarray import bitarray, frozenbitarray

from ..models.cells import PIN, STANDARD_CELLS, UPDATE, instruction_class, resolve_capture
from ..models.device import CONTROL_FUNCTIONS, DRIVER_FUNCTIONS, CellInfo, DeviceModel

__all__ = [
    "DRIVE",
    "CLAMP",
    "INTEST",
    "OBSERVE",
    "BYPASS",
    "DEVICE_ID",
    "USER",
    "PRELOAD_KINDS",
    "BOUNDARY_KINDS",
    "DriverCell",
    "ObservingCell",
    "DeviceTables",
    "ImageResult",
    "CaptureResolver",
    "selected_register",
    "mode_kind",
    "preload_instruction",
    "device_tables",
    "build_image",
    "to_msb_string",
    "from_msb_string",
    "mask_from_msb_string",
    "zeros",
    "is_comparable",
]

# What an instruction makes a device do, as far as scheduling is concerned.
DRIVE = "drive"  # EXTEST family: boundary register selected, update stage drives the pins
CLAMP = "clamp"  # CLAMP: update stage drives the pins, BYPASS selected
INTEST = "intest"  # INTEST: boundary register selected, update stage drives the core side
OBSERVE = "observe"  # SAMPLE/PRELOAD and makers' boundary instructions: no pin driven
BYPASS = "bypass"
DEVICE_ID = "device_id"
USER = "user"  # a user (design-specific) data register

# Kinds whose update stage drives pins (or the core): they are entered only after a preload
# (IEEE 1149.1-2001, EXTEST and CLAMP clauses, from memory clauses 8.8 and 8.11: the
# boundary register must first hold defined values, loaded under SAMPLE/PRELOAD or PRELOAD).
PRELOAD_KINDS = frozenset({DRIVE, CLAMP, INTEST})
# Kinds that place the boundary register between TDI and TDO.
BOUNDARY_KINDS = frozenset({DRIVE, INTEST, OBSERVE})

_CLAMP_NAMES = frozenset({"CLAMP"})
_CORE_INPUT_FUNCTIONS = ("INPUT", "CLOCK", "BIDIR")


def selected_register(device: DeviceModel, instruction: str) -> str:
    """The register an instruction places between TDI and TDO.

    An instruction BSDL does not describe selects BYPASS (IEEE 1149.1, instruction register
    clause: unused opcodes behave as BYPASS).
    """
    return device.selects.get(instruction, "BYPASS")


def mode_kind(device: DeviceModel, instruction: str) -> str:
    """Classify an instruction of a device: DRIVE, CLAMP, INTEST, OBSERVE, BYPASS, DEVICE_ID, USER."""
    register = selected_register(device, instruction)
    name = instruction.upper()
    if name in _CLAMP_NAMES and register != "BOUNDARY":
        return CLAMP
    if register == "BOUNDARY":
        cls = instruction_class(name, register)
        if cls == "EXTEST":
            return DRIVE
        if cls == "INTEST":
            return INTEST
        return OBSERVE
    if register == "BYPASS":
        return BYPASS
    if register == "DEVICE_ID":
        return DEVICE_ID
    return USER


def preload_instruction(device: DeviceModel) -> str | None:
    """The instruction that loads the boundary register without driving.

    IEEE 1149.1-2001 splits PRELOAD from SAMPLE (prefer it); IEEE 1149.1-1990 has the combined
    SAMPLE/PRELOAD, named SAMPLE in BSDL. Failing both, a maker's instruction that selects the
    boundary register without driving.
    """
    for name in ("PRELOAD", "SAMPLE"):
        if name in device.instructions and selected_register(device, name) == "BOUNDARY":
            return name
    for name in sorted(device.instructions):
        if mode_kind(device, name) == OBSERVE:
            return name
    return None


@dataclass(frozen=True, slots=True)
class DriverCell:
    """The cell that drives a port in EXTEST, with its control cell (None for OUTPUT2)."""

    number: int
    function: str
    control: int | None
    disable_value: int | None

    @property
    def enable_value(self) -> int | None:
        return None if self.disable_value is None else 1 - self.disable_value


@dataclass(frozen=True, slots=True)
class ObservingCell:
    """A cell entry on a port, with what is needed to decide what it captures."""

    number: int
    cell_type: str
    function: str
    info: CellInfo | None
    control: int | None
    disable_value: int | None


@dataclass(frozen=True, eq=False)
class DeviceTables:
    """One device's precomputed images and per-port cell indexes."""

    ref: str
    device: DeviceModel
    length: int
    safe: frozenbitarray  # BSDL safe values, X taken as 0
    disabled: frozenbitarray  # safe values with every control cell at its disable value
    drivers: Mapping[str, DriverCell]  # port bit -> cell that drives it
    core_inputs: Mapping[str, int]  # port bit -> cell that feeds the core in INTEST
    observers: Mapping[str, tuple[ObservingCell, ...]]  # port bit -> cells on it
    disable_of: Mapping[int, int] = field(default_factory=dict)  # control cell -> disable value


def zeros(length: int) -> frozenbitarray:
    bits = bitarray(length)
    bits.setall(0)
    return frozenbitarray(bits)


def to_msb_string(bits: bitarray) -> str:
    """BSDL order: leftmost character is the highest bit (nearest TDI)."""
    return bits[::-1].to01()


_TO_BITS = str.maketrans({"X": "0", "x": "0"})
_TO_MASK = str.maketrans({"0": "1", "X": "0", "x": "0"})


def from_msb_string(text: str) -> frozenbitarray:
    """Bits of a BSDL-order string, bit 0 first; X counts as 0."""
    return frozenbitarray(text.translate(_TO_BITS)[::-1])


def mask_from_msb_string(text: str) -> frozenbitarray:
    """Compare mask of a BSDL-order string: 0 where the character is X, 1 elsewhere."""
    return frozenbitarray(text.translate(_TO_MASK)[::-1])


def _cell_info(device: DeviceModel, cell_type: str) -> CellInfo | None:
    info = device.cell_info.get(cell_type)
    if info is None:
        info = STANDARD_CELLS.get(cell_type)
    return info


def device_tables(ref: str, device: DeviceModel) -> DeviceTables:
    """Precompute a device's safe image, its all-disabled image and its per-port cell tables.

    A merged cell (two entries, one number) carries one bit; its output or control role sets
    the safe value (IEEE 1149.1-2001 BSDL, BOUNDARY_REGISTER: merged cells share a number).
    """
    length = device.boundary_length
    safe = bitarray(length)
    safe.setall(0)
    safe_from_role: set[int] = set()
    drivers: dict[str, DriverCell] = {}
    core_inputs: dict[str, int] = {}
    observers: dict[str, list[ObservingCell]] = {}
    disable_of: dict[int, int] = {}
    for cell in device.cells:
        if not 0 <= cell.number < length:
            continue
        role = cell.function in DRIVER_FUNCTIONS or cell.function in CONTROL_FUNCTIONS
        if role or cell.number not in safe_from_role:
            safe[cell.number] = cell.safe == "1"
            if role:
                safe_from_role.add(cell.number)
        if cell.control_cell is not None and cell.disable_value is not None:
            disable_of.setdefault(cell.control_cell, cell.disable_value)
        if cell.port is None or cell.function == "INTERNAL":
            continue
        if cell.function in DRIVER_FUNCTIONS:
            drivers.setdefault(cell.port, DriverCell(
                cell.number, cell.function, cell.control_cell, cell.disable_value))
        if cell.function in _CORE_INPUT_FUNCTIONS and (
                cell.port not in core_inputs or cell.function != "BIDIR"):
            core_inputs[cell.port] = cell.number
        observers.setdefault(cell.port, []).append(ObservingCell(
            cell.number, cell.cell_type, cell.function, _cell_info(device, cell.cell_type),
            cell.control_cell, cell.disable_value))
    disabled = bitarray(safe)
    for control, value in disable_of.items():
        if 0 <= control < length:
            disabled[control] = value
    return DeviceTables(
        ref=ref,
        device=device,
        length=length,
        safe=frozenbitarray(safe),
        disabled=frozenbitarray(disabled),
        drivers=drivers,
        core_inputs=core_inputs,
        observers={port: tuple(cells) for port, cells in observers.items()},
        disable_of=disable_of,
    )


@dataclass(frozen=True, slots=True)
class ImageResult:
    """A boundary image and the drives that could not be honoured (as messages)."""

    image: frozenbitarray
    problems: tuple[str, ...] = ()


def build_image(tables: DeviceTables, kind: str, drives: Iterable[tuple[str, str]]) -> ImageResult:
    """The boundary image a device holds for a step, given its drives as (port bit, value).

    EXTEST and CLAMP (IEEE 1149.1, boundary-register rules for output and control cells): start
    from the safe values with every control cell at its disable value; a 0/1 drive sets the
    output cell and enables its control cell; a Z drive leaves the control disabled. A control
    cell shared by several outputs is enabled when any of them is driven, and its undriven
    siblings then drive their safe values. INTEST sets the core-side input cells. SAMPLE and
    PRELOAD shift the safe image, which sets up the update stage without driving anything.
    """
    if kind == OBSERVE:
        return ImageResult(tables.safe)
    if kind not in PRELOAD_KINDS:
        raise ValueError(f"no boundary image for mode kind {kind!r}")
    image = bitarray(tables.disabled)
    problems: list[str] = []
    enabled: dict[int, int] = {}
    released: list[tuple[str, int]] = []
    ref = tables.ref
    if kind == INTEST:
        for port, value in drives:
            number = tables.core_inputs.get(port)
            if number is None:
                problems.append(f"{ref}.{port} has no input cell to drive in INTEST; drive not applied")
            elif value in ("0", "1"):
                image[number] = value == "1"
        return ImageResult(frozenbitarray(image), tuple(problems))
    for port, value in drives:
        cell = tables.drivers.get(port)
        if cell is None:
            problems.append(f"{ref}.{port} has no output cell; drive not applied")
            continue
        if value in ("0", "1"):
            image[cell.number] = value == "1"
            if cell.control is not None and cell.enable_value is not None:
                enabled[cell.control] = cell.enable_value
        elif value == "Z":
            if cell.control is None or cell.disable_value is None:
                problems.append(f"{ref}.{port} is a two-state output ({cell.function}); "
                                "it cannot release, it drives its safe value")
            else:
                released.append((port, cell.control))
    for control, value in enabled.items():
        if 0 <= control < tables.length:
            image[control] = value
    for port, control in released:
        if control in enabled:
            problems.append(f"{ref}.{port} cannot release: its control cell {control} is shared "
                            "with a driven output and stays enabled")
    return ImageResult(frozenbitarray(image), tuple(problems))


class CaptureResolver:
    """What a cell captures at Capture-DR, memoised per device, cell type, function and mode.

    The answer comes from scanloom.models.cells.resolve_capture (the standard's CELL_INFO
    descriptions); only PIN and UPDATE carry a value the scheduler can expect.
    """

    def __init__(self) -> None:
        self._memo: dict[tuple[int, str, str, str, bool], str] = {}
        self.unknown_types: list[tuple[str, str]] = []  # (device ref, cell type), first seen order

    def capture(self, index: int, tables: DeviceTables, cell: ObservingCell, kind: str,
                instruction: str, image: bitarray) -> str:
        """PIN, UPDATE, HOLD, X, "0" or "1" for one cell of a device in a boundary mode."""
        cls = instruction_class(instruction, "BOUNDARY") or "SAMPLE"
        driving = False
        if kind == DRIVE and cell.function in DRIVER_FUNCTIONS:
            if cell.control is None or cell.disable_value is None:
                driving = True
            elif 0 <= cell.control < len(image):
                driving = image[cell.control] != cell.disable_value
        key = (index, cell.cell_type, cell.function, cls, driving)
        found = self._memo.get(key)
        if found is None:
            if cell.info is None or not cell.info.known:
                pair = (tables.ref, cell.cell_type)
                if pair not in self.unknown_types:
                    self.unknown_types.append(pair)
            found = resolve_capture(cell.info, cell.function, cls, driving)
            self._memo[key] = found
        return found


def is_comparable(capture: str) -> bool:
    """Only the pin value and the cell's own update latch are known to the scheduler."""
    return capture in (PIN, UPDATE)

"""Captures: which scan bits observe an expectation, and what they are expected to read.

What a cell loads at Capture-DR comes from the standard's CELL_INFO descriptions through
scanloom.models.cells.resolve_capture. Only two answers carry a value the compiler knows:
the pin (an input's parallel input, an observing output's parallel output) and the cell's own
update latch. Everything else (system logic, unknown cell types) is not compared.

A test step on a large board has tens of thousands of expectations, and the steps of a run
usually expect the same targets with other values. So where each target is observed is worked
out once per instructions and target list (`ExpectationTable`); a step then only selects the
positions by value, with bitarray operations.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import compress
from typing import Callable, Iterable, Sequence

from bitarray import bitarray, frozenbitarray

from ..models.cells import PIN, UPDATE, instruction_class, resolve_capture
from ..models.device import DRIVER_FUNCTIONS, BoundaryCell
from .images import BOUNDARY_KINDS, DRIVE, DeviceTables

__all__ = [
    "CaptureResolver",
    "ExpectationTable",
    "build_expectation_table",
    "compare_expectations",
    "can_drive",
    "is_driving",
    "is_comparable",
    "values_as_bits",
]

# The scan pins a target sits on: (chain index, port) for a pin, or for every scan pin of a net.
ScanPins = Callable[[str, bool], Iterable[tuple[int, str]]]

_ONES = str.maketrans("01XZ", "0100")
_ZEROS = str.maketrans("01XZ", "1000")


def is_comparable(capture: str) -> bool:
    """Only the pin value and the cell's own update latch are known to the compiler."""
    return capture in (PIN, UPDATE)


def can_drive(cell: BoundaryCell, kind: str) -> bool:
    """Whether the cell's output may be enabled: an output or bidir cell of an EXTEST device."""
    return kind == DRIVE and cell.function in DRIVER_FUNCTIONS


def is_driving(cell: BoundaryCell, kind: str, image: bitarray) -> bool:
    """Whether the cell's output is enabled by `image` (OUTPUT2 always drives in EXTEST)."""
    if not can_drive(cell, kind):
        return False
    if cell.control_cell is None or cell.disable_value is None:
        return True
    if 0 <= cell.control_cell < len(image):
        return image[cell.control_cell] != cell.disable_value
    return True


class CaptureResolver:
    """What a cell captures at Capture-DR, memoised per device, cell type, function and mode."""

    def __init__(self) -> None:
        self._memo: dict[tuple[int, str, str, str, bool], str] = {}
        self.unknown_types: list[tuple[str, str]] = []  # (device ref, cell type), first seen order

    def resolve(self, index: int, tables: DeviceTables, cell: BoundaryCell, instruction: str,
                driving: bool) -> str:
        """PIN, UPDATE, HOLD, X, "0" or "1" for one cell, given whether its output is enabled."""
        cls = instruction_class(instruction, "BOUNDARY") or "SAMPLE"
        key = (index, cell.cell_type, cell.function, cls, driving)
        found = self._memo.get(key)
        if found is None:
            info = tables.info(cell)
            if info is None or not info.known:
                pair = (tables.ref, cell.cell_type)
                if pair not in self.unknown_types:
                    self.unknown_types.append(pair)
            found = resolve_capture(info, cell.function, cls, driving)
            self._memo[key] = found
        return found

    def capture(self, index: int, tables: DeviceTables, cell: BoundaryCell, kind: str,
                instruction: str, image: bitarray) -> str:
        """What the cell captures for a device in a boundary mode holding `image`."""
        return self.resolve(index, tables, cell, instruction, is_driving(cell, kind, image))


@dataclass(frozen=True, eq=False)
class ExpectationTable:
    """Where each expectation of a target list is compared, under one set of instructions.

    Positions are scan positions (segment offset + cell number). Static entries capture the
    pin or their update latch whatever the drives; dynamic ones (e.g. a BC_1 bidir: the pin
    when released, system logic while driving) depend on their control cell, read from the
    chain-wide image at `dyn_control`.
    """

    modes: tuple[str, ...]
    targets: Sequence[str]
    pin_position: list[int]
    pin_owner: list[int]  # index of the expectation
    pins_one_each: bool  # pin_owner is 0, 1, 2 ...: exactly one pin per expectation, in order
    pins_apart: bool  # no two pin entries share a position: their bits can be scattered at once
    latch_position: list[int]
    latch_owner: list[int]
    dyn_position: list[int]
    dyn_owner: list[int]
    dyn_control: list[int]  # chain-image position of the control cell
    dyn_disable: frozenbitarray
    dyn_pin_driving: frozenbitarray
    dyn_pin_idle: frozenbitarray
    dyn_latch_driving: frozenbitarray
    dyn_latch_idle: frozenbitarray
    unobservable: tuple[int, ...]  # expectations no cell can observe
    dynamic_only: tuple[int, ...]  # expectations observed by dynamic entries alone


_NONE, _PIN, _LATCH, _DYNAMIC = range(4)


def _how_observed(resolver: CaptureResolver, idx: int, tables: DeviceTables, cell: BoundaryCell,
                  instruction: str, kind: str) -> tuple[int, str, str, bool]:
    """Whether a cell captures its pin, its own update latch, one of the two depending on its
    control cell (dynamic), or nothing the compiler knows; see build_expectation_table."""
    info = tables.info(cell)
    unknown = info is None or not info.known
    idle = resolver.resolve(idx, tables, cell, instruction, False)
    driving = idle
    if can_drive(cell, kind):
        driving = resolver.resolve(idx, tables, cell, instruction, True)
        if cell.control_cell is None or cell.disable_value is None:
            idle = driving  # a two-state output always drives in EXTEST
        elif driving != idle:
            comparable = is_comparable(driving) or is_comparable(idle)
            return (_DYNAMIC if comparable else _NONE), driving, idle, unknown
    code = _PIN if idle == PIN else _LATCH if idle == UPDATE else _NONE
    return code, driving, idle, unknown


def build_expectation_table(modes: tuple[str, ...], kinds: Sequence[str], targets: Sequence[str],
                            is_pin: Sequence[bool], scan_pins: ScanPins,
                            tables: Sequence[DeviceTables], offsets: Sequence[int],
                            chain_starts: Sequence[int],
                            resolver: CaptureResolver) -> ExpectationTable:
    """Work out every cell observing each target (IEEE 1149.1-2001 Annex B CELL_INFO)."""
    pin_position: list[int] = []
    pin_owner: list[int] = []
    latch_position: list[int] = []
    latch_owner: list[int] = []
    dyn: list[tuple[int, int, int, bool, str, str]] = []
    unobservable: list[int] = []
    dynamic_only: list[int] = []
    # How the cells of a port observe it under a device's mode and kind, worked out once per
    # port of a device model (boards repeat parts): (cell, _NONE | _PIN | _LATCH | _DYNAMIC,
    # captured while driving, captured while idle, whether its cell type has no description).
    how_of: dict[tuple[int, str, str, str], tuple[tuple[BoundaryCell, int, str, str, bool], ...]] = {}
    unknown_types = resolver.unknown_types
    for owner, (target, pin) in enumerate(zip(targets, is_pin)):
        observed = False
        static = False
        for idx, port in scan_pins(target, pin):
            kind = kinds[idx]
            if kind not in BOUNDARY_KINDS:
                continue
            device_tables = tables[idx]
            key = (id(device_tables.observers), modes[idx], kind, port)
            hows = how_of.get(key)
            if hows is None:
                hows = how_of[key] = tuple(
                    (cell, *_how_observed(resolver, idx, device_tables, cell, modes[idx], kind))
                    for cell in device_tables.observers.get(port, ()))
            for cell, code, driving, idle, unknown in hows:
                if unknown and (device_tables.ref, cell.cell_type) not in unknown_types:
                    unknown_types.append((device_tables.ref, cell.cell_type))
                if code == _PIN:
                    pin_position.append(offsets[idx] + cell.number)
                    pin_owner.append(owner)
                    observed = static = True
                elif code == _LATCH:
                    latch_position.append(offsets[idx] + cell.number)
                    latch_owner.append(owner)
                    observed = static = True
                elif code == _DYNAMIC:
                    dyn.append((offsets[idx] + cell.number, owner,
                                chain_starts[idx] + cell.control_cell,  # type: ignore[operator]
                                bool(cell.disable_value), driving, idle))
                    observed = True
        if not observed:
            unobservable.append(owner)
        elif not static:
            dynamic_only.append(owner)

    def bits(values: list[bool]) -> frozenbitarray:
        return frozenbitarray(values) if values else frozenbitarray()

    return ExpectationTable(
        modes=modes,
        targets=targets,
        pin_position=pin_position,
        pin_owner=pin_owner,
        pins_one_each=pin_owner == list(range(len(targets))),
        pins_apart=len(set(pin_position)) == len(pin_position),
        latch_position=latch_position,
        latch_owner=latch_owner,
        dyn_position=[d[0] for d in dyn],
        dyn_owner=[d[1] for d in dyn],
        dyn_control=[d[2] for d in dyn],
        dyn_disable=bits([d[3] for d in dyn]),
        dyn_pin_driving=bits([d[4] == PIN for d in dyn]),
        dyn_pin_idle=bits([d[5] == PIN for d in dyn]),
        dyn_latch_driving=bits([d[4] == UPDATE for d in dyn]),
        dyn_latch_idle=bits([d[5] == UPDATE for d in dyn]),
        unobservable=tuple(unobservable),
        dynamic_only=tuple(dynamic_only),
    )


def values_as_bits(values: str) -> tuple[bitarray, bitarray]:
    """(is 1, is 0 or 1) per expectation, from a string of 0/1/X characters."""
    ones = bitarray(values.translate(_ONES))
    compared = bitarray(values.translate(_ZEROS))
    compared |= ones
    return ones, compared


def compare_expectations(table: ExpectationTable, values: str, chain_image: bitarray,
                         tdi: bitarray, tdo: bitarray, mask: bitarray) -> list[int]:
    """Set the expected bits and the compare mask of a scan for one step's expectations.

    `values` holds 0/1/X per expectation of `table.targets`; `chain_image` is the step's
    chain-wide image (for the control cells of dynamic entries); `tdi` is what the step
    shifted (the content of every update latch). Returns the expectations (0/1) that only
    dynamic entries observe and that none of them can capture in this step.
    """
    ones, compared = values_as_bits(values)
    if table.pins_one_each:
        owner_compared, owner_one = compared, ones
    else:
        owner_compared = compared[table.pin_owner]
        owner_one = ones[table.pin_owner]
    if table.pins_apart and table.pin_position:
        scatter = bitarray(len(mask))
        for bits, target in ((owner_compared, mask), (owner_one, tdo)):
            scatter.setall(0)
            scatter[table.pin_position] = bits
            target |= scatter
    else:
        mask[list(compress(table.pin_position, owner_compared))] = 1
        tdo[list(compress(table.pin_position, owner_one))] = 1
    latches = list(compress(table.latch_position,
                            compared[table.latch_owner]))
    unobserved: list[int] = []
    if table.dyn_position:
        driving = bitarray(chain_image[table.dyn_control])
        driving ^= table.dyn_disable  # enabled where the control cell differs from its disable value
        idle = ~driving
        as_pin = (driving & table.dyn_pin_driving) | (idle & table.dyn_pin_idle)
        as_latch = (driving & table.dyn_latch_driving) | (idle & table.dyn_latch_idle)
        dyn_compared = compared[table.dyn_owner]
        dyn_one = ones[table.dyn_owner]
        mask[list(compress(table.dyn_position, dyn_compared & as_pin))] = 1
        tdo[list(compress(table.dyn_position, dyn_one & as_pin))] = 1
        latches.extend(compress(table.dyn_position, dyn_compared & as_latch))
        if table.dynamic_only:
            seen = set(compress(table.dyn_owner, as_pin | as_latch))
            unobserved = [owner for owner in table.dynamic_only
                          if compared[owner] and owner not in seen]
    if latches:
        # A cell that captures its own update latch reads back what this step shifted.
        latch = bitarray(len(mask))
        latch.setall(0)
        latch[latches] = 1
        mask |= latch
        tdo &= ~latch
        tdo |= tdi & latch
    return unobserved

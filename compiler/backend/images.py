"""Register images: what each device shifts into its boundary register for a step.

An image is a bitarray indexed by cell number (bit i = boundary cell i, cell 0 nearest TDO),
which is also the order the bits are shifted. Strings in BSDL order (leftmost = highest bit)
appear only at the edges (`to_msb_string`, `from_msb_string`).

Per device the tables below are computed once (the safe image, the image with every output
disabled, and per-port cell indexes) so that a step only touches the cells it drives: boards
have tens of thousands of cells and programs tens of scans.
"""

from __future__ import annotations

import weakref
from dataclasses import dataclass, field, replace
from itertools import compress
from typing import Iterable, Mapping, NamedTuple, Sequence

from bitarray import bitarray, frozenbitarray

from ..ir import Drive, DriveColumns
from ..models.board import Board
from ..models.cells import STANDARD_CELLS, instruction_class
from ..models.device import CONTROL_FUNCTIONS, DRIVER_FUNCTIONS, BoundaryCell, CellInfo, DeviceModel

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
    "enable_value",
    "DeviceTables",
    "ImageResult",
    "ChainDriver",
    "ChainImages",
    "chain_images",
    "StepImages",
    "selected_register",
    "mode_kind",
    "preload_instruction",
    "device_tables",
    "build_image",
    "to_msb_string",
    "from_msb_string",
    "mask_from_msb_string",
    "zeros",
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


@dataclass(frozen=True, eq=False)
class DeviceTables:
    """One device's precomputed images and per-port cell indexes."""

    ref: str
    device: DeviceModel
    length: int
    safe: frozenbitarray  # BSDL safe values, X taken as 0
    disabled: frozenbitarray  # safe values with every control cell at its disable value
    drivers: Mapping[str, BoundaryCell]  # port bit -> cell that drives it
    core_inputs: Mapping[str, int]  # port bit -> cell that feeds the core in INTEST
    observers: Mapping[str, Sequence[BoundaryCell]]  # port bit -> every cell entry on it
    cell_infos: Mapping[str, CellInfo | None] = field(default_factory=dict)  # cell type -> info
    disable_of: Mapping[int, int] = field(default_factory=dict)  # control cell -> disable value

    def info(self, cell: BoundaryCell) -> CellInfo | None:
        """The capture description of a cell's type (None when the type is undescribed)."""
        return self.cell_infos.get(cell.cell_type)


def enable_value(cell: BoundaryCell) -> int | None:
    """The control value that enables a cell's output: NOT its disable value."""
    return None if cell.disable_value is None else 1 - cell.disable_value


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


# Tables depend only on the device model; boards repeat part types and several stages ask for
# them, so they are kept per model for as long as the model lives (weakly: no run leaks).
_TABLES_OF_MODEL: "weakref.WeakKeyDictionary[DeviceModel, DeviceTables]" = weakref.WeakKeyDictionary()
_IMAGES_OF_BOARD: "weakref.WeakKeyDictionary[Board, ChainImages]" = weakref.WeakKeyDictionary()


def device_tables(ref: str, device: DeviceModel) -> DeviceTables:
    """A device's safe image, its all-disabled image and its per-port cell tables (computed once
    per device model; `ref` names the instance)."""
    known = _TABLES_OF_MODEL.get(device)
    if known is None:
        known = _compute_tables(ref, device)
        _TABLES_OF_MODEL[device] = known
    return known if known.ref == ref else replace(known, ref=ref)


def _compute_tables(ref: str, device: DeviceModel) -> DeviceTables:
    """Precompute a device's safe image, its all-disabled image and its per-port cell tables.

    A merged cell (two entries, one number) carries one bit; its output or control role sets
    the safe value (IEEE 1149.1-2001 BSDL, BOUNDARY_REGISTER: merged cells share a number).
    """
    length = device.boundary_length
    safe = bitarray(length)
    safe.setall(0)
    safe_from_role: set[int] = set()
    drivers: dict[str, BoundaryCell] = {}
    core_inputs: dict[str, int] = {}
    observers: dict[str, list[BoundaryCell]] = {}
    disable_of: dict[int, int] = {}
    infos: dict[str, CellInfo | None] = {}
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
            drivers.setdefault(cell.port, cell)
        if cell.function in _CORE_INPUT_FUNCTIONS and (
                cell.port not in core_inputs or cell.function != "BIDIR"):
            core_inputs[cell.port] = cell.number
        if cell.cell_type not in infos:
            infos[cell.cell_type] = _cell_info(device, cell.cell_type)
        observers.setdefault(cell.port, []).append(cell)
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
        observers=observers,
        cell_infos=infos,
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
            enable = enable_value(cell)
            if cell.control_cell is not None and enable is not None:
                enabled[cell.control_cell] = enable
        elif value == "Z":
            if cell.control_cell is None or cell.disable_value is None:
                problems.append(f"{ref}.{port} is a two-state output ({cell.function}); "
                                "it cannot release, it drives its safe value")
            else:
                released.append((port, cell.control_cell))
    for control, value in enabled.items():
        if 0 <= control < tables.length:
            image[control] = value
    for port, control in released:
        if control in enabled:
            problems.append(f"{ref}.{port} cannot release: its control cell {control} is shared "
                            "with a driven output and stays enabled")
    return ImageResult(frozenbitarray(image), tuple(problems))


class ChainDriver(NamedTuple):
    """A driver port placed in the chain-wide image (positions, not cell numbers); a named
    tuple, as a board has one per driving pin."""

    device: int
    port: str
    function: str
    data: int
    control: int  # -1 for a two-state output
    enable_value: int


@dataclass(frozen=True, eq=False)
class _DriveTable:
    """A step's list of driver pins placed in the chain image; reused while it stays the same."""

    kinds: tuple[str, ...]
    drivers: tuple[str | None, ...]
    data: list[int]  # chain position of each drive's data cell (0 where not regular)
    control: list[int]  # chain position of its control cell (0 where none)
    regular: frozenbitarray  # drives of EXTEST/CLAMP devices with an output cell
    enable_one: frozenbitarray  # regular drives whose control enables at 1
    enable_zero: frozenbitarray  # regular drives whose control enables at 0
    two_state: frozenbitarray  # regular drives without a control cell
    odd: tuple[int, ...]  # every other drive: INTEST, or not applicable (with a reason)
    # The chain image with every drive's output enabled, when all drives are regular and no
    # cell is both a data cell twice or a data and a control cell: a step that drives every
    # output to 0 or 1 is then this image with the data cells set, one scatter.
    all_driven: frozenbitarray | None = None


@dataclass(frozen=True, eq=False)
class StepImages:
    """Every device's image for a step, the chain-wide image behind them, and problems."""

    images: tuple[frozenbitarray | None, ...]  # None outside boundary and clamp modes
    chain_image: frozenbitarray  # EXTEST and CLAMP images side by side (others: unused)
    problems: tuple[str, ...]


_DRIVE_VALUES = frozenset({"0", "1", "Z"})
_DROP_DRIVE_VALUES = str.maketrans("", "", "01Z")  # what is left is not a drive value
_ONES = str.maketrans("01Z", "010")
_ZEROS = str.maketrans("01Z", "100")


_BUILT_LIMIT = 256  # steps whose images one ChainImages keeps (about 25 kB each on a large board)


def chain_images(board: Board) -> ChainImages:
    """The board's ChainImages, one per board object: the scheduler and the pre-hardware
    checks build the same steps' images, and a large board's tables take a while to set up."""
    found = _IMAGES_OF_BOARD.get(board)
    if found is None:
        found = _IMAGES_OF_BOARD[board] = ChainImages(
            [device_tables(entry.ref, entry.device) for entry in board.chain])
    return found


class ChainImages:
    """Every device's boundary register side by side, so a step's images are built at once.

    A step with tens of thousands of drives becomes a handful of bitarray selections instead
    of a Python loop per cell; `build_image` is the per-device reference it must agree with.
    The last drive table is kept, as consecutive steps usually drive the same pins.
    """

    def __init__(self, tables: Sequence[DeviceTables]) -> None:
        self.tables = tuple(tables)
        starts: list[int] = []
        disabled = bitarray()
        drivers: dict[str, ChainDriver] = {}
        for idx, table in enumerate(self.tables):
            start = len(disabled)
            starts.append(start)
            disabled += table.disabled
            for port, cell in table.drivers.items():
                control, enable = -1, 0
                on = enable_value(cell)
                if cell.control_cell is not None and on is not None \
                        and 0 <= cell.control_cell < table.length:
                    control, enable = start + cell.control_cell, on
                drivers[f"{table.ref}.{port}"] = ChainDriver(
                    idx, port, cell.function, start + cell.number, control, enable)
        self.starts = tuple(starts)
        self.disabled = frozenbitarray(disabled)
        self.drivers = drivers
        self.index = {table.ref: idx for idx, table in enumerate(self.tables)}
        self._last: _DriveTable | None = None
        # (kinds, id(drives)) -> (drives, images): the scheduler and the checks build the same
        # steps; holding the drives keeps their id from being reused while the entry lives.
        self._built: dict[tuple[tuple[str, ...], int], tuple[Sequence[Drive], StepImages]] = {}

    def _table(self, kinds: tuple[str, ...], drivers: tuple[str | None, ...]) -> _DriveTable:
        direct = [kind == DRIVE or kind == CLAMP for kind in kinds]
        data: list[int] = []
        control: list[int] = []
        regular: list[bool] = []
        enable_one: list[bool] = []
        enable_zero: list[bool] = []
        two_state: list[bool] = []
        odd: list[int] = []
        for number, driver in enumerate(drivers):
            found = self.drivers.get(driver) if driver else None
            if found is None or not direct[found.device]:
                odd.append(number)
                found = None
            has_control = found is not None and found.control >= 0
            data.append(found.data if found is not None else 0)
            control.append(found.control if found is not None and has_control else 0)
            regular.append(found is not None)
            enable_one.append(has_control and found is not None and found.enable_value == 1)
            enable_zero.append(has_control and found is not None and found.enable_value == 0)
            two_state.append(found is not None and not has_control)
        all_driven = None
        if data and not odd and len(set(data)) == len(data):
            zero_controls = list(compress(control, enable_zero))
            one_controls = list(compress(control, enable_one))
            if set(data).isdisjoint(zero_controls) and set(data).isdisjoint(one_controls):
                image = bitarray(self.disabled)
                image[zero_controls] = 0  # in the order of the general path: ones win
                image[one_controls] = 1
                all_driven = frozenbitarray(image)
        return _DriveTable(kinds, drivers, data, control, frozenbitarray(regular),
                           frozenbitarray(enable_one), frozenbitarray(enable_zero),
                           frozenbitarray(two_state), tuple(odd), all_driven)

    def build(self, kinds: tuple[str, ...], drives: Sequence[Drive]) -> StepImages:
        """Each device's image for a step (IEEE 1149.1 boundary-register rules, see build_image)."""
        key = (kinds, id(drives))
        found = self._built.get(key)
        if found is not None and found[0] is drives:
            return found[1]
        built = self._build(kinds, drives)
        if len(self._built) >= _BUILT_LIMIT:
            self._built.clear()
        self._built[key] = (drives, built)
        return built

    def _build(self, kinds: tuple[str, ...], given: Sequence[Drive]) -> StepImages:
        problems: list[str] = []
        drives = DriveColumns.of(given)  # steps of the IR hold them so already
        drivers = drives.drivers
        table = self._last
        if table is None or table.kinds != kinds or \
                (table.drivers is not drivers and table.drivers != drivers):
            table = self._table(kinds, drivers)
            self._last = table
        text = drives.values
        if text.translate(_DROP_DRIVE_VALUES):
            for target, value in zip(drives.targets, text):
                if value not in _DRIVE_VALUES:
                    problems.append(f"drive on {target}: value {value!r} is not 0, 1 "
                                    "or Z; released instead")
            text = "".join(v if v in _DRIVE_VALUES else "Z" for v in text)
        if table.all_driven is not None and "Z" not in text:
            image = bitarray(table.all_driven)
            image[table.data] = bitarray(text.translate(_ONES))
        elif drives:
            image = bitarray(self.disabled)
            ones = bitarray(text.translate(_ONES)) & table.regular
            zeros_ = bitarray(text.translate(_ZEROS)) & table.regular
            driven = ones | zeros_
            image[list(compress(table.data, zeros_))] = 0
            image[list(compress(table.data, ones))] = 1
            # Each driven output enables its control cell (NOT its disable value).
            image[list(compress(table.control, driven & table.enable_zero))] = 0
            image[list(compress(table.control, driven & table.enable_one))] = 1
            released = table.regular & ~driven
            if released.any():
                self._check_releases(table, released, image, problems)
        else:
            image = bitarray(self.disabled)
        intest: dict[int, list[tuple[str, str]]] = {}
        for number in table.odd:
            self._odd_drive(drives[number], text[number], kinds, intest, problems)
        images: list[frozenbitarray | None] = []
        for idx, kind in enumerate(kinds):
            device_table = self.tables[idx]
            if kind == DRIVE or kind == CLAMP:
                start = self.starts[idx]
                images.append(frozenbitarray(image[start:start + device_table.length]))
            elif kind == INTEST:
                result = build_image(device_table, INTEST, intest.get(idx, ()))
                problems.extend(result.problems)
                images.append(result.image)
            elif kind == OBSERVE:
                images.append(device_table.safe)
            else:
                images.append(None)
        return StepImages(tuple(images), frozenbitarray(image), tuple(problems))

    def _check_releases(self, table: _DriveTable, released: bitarray, image: bitarray,
                        problems: list[str]) -> None:
        """A Z drive must leave its output disabled; say so where that cannot happen."""
        for number in released.search(1):
            found = self.drivers[table.drivers[number]]  # type: ignore[index]
            ref = self.tables[found.device].ref
            if table.two_state[number]:
                problems.append(f"{ref}.{found.port} is a two-state output ({found.function}); "
                                "it cannot release, it drives its safe value")
            elif image[found.control] == found.enable_value:
                problems.append(f"{ref}.{found.port} cannot release: its control cell "
                                f"{found.control - self.starts[found.device]} is shared with a "
                                "driven output and stays enabled")

    def _odd_drive(self, drive: Drive, value: str, kinds: Sequence[str],
                   intest: dict[int, list[tuple[str, str]]], problems: list[str]) -> None:
        """A drive the fast path does not place: INTEST core inputs, or why it is not applied."""
        if not drive.driver:
            problems.append(f"drive on {drive.target} has no scan driver; not applied")
            return
        ref, _, port = drive.driver.partition(".")
        idx = self.index.get(ref)
        if idx is None:
            problems.append(f"drive on {drive.target}: {drive.driver} is not a scan pin; "
                            "not applied")
        elif kinds[idx] == INTEST:
            intest.setdefault(idx, []).append((port, value))
        elif kinds[idx] not in (DRIVE, CLAMP):
            problems.append(f"{ref} is in a mode that does not drive; "
                            f"drive on {drive.target} not applied")
        else:
            problems.append(f"{ref}.{port} has no output cell; drive not applied")

"""A chain device on the virtual board: the replay's register model plus what the pins say.

`BoardDevice` extends the replay's `ReplayDevice` (instruction register, BYPASS,
identification, boundary and user registers with their stages) with the board side: at
Capture-DR each boundary cell loads what the standard's cell description says it captures
(`scanloom.models.cells.resolve_capture`): the pin as its receiver reads it, its own update
latch, its capture flip-flop's old content, a constant, or X. Under USERCODE the
identification register captures the BSDL USERCODE pattern. What design-specific (user)
registers capture is the silicon's business, not the board's: unknown here.

What the instruction makes the pins do is classified here too, independently of the back
end: EXTEST-like, CLAMP, INTEST and RUNBIST drive the pins from the update stage (IEEE
1149.1-2001, the EXTEST, CLAMP and INTEST clauses: system outputs are controlled by the
boundary register; from memory), every other instruction leaves them released.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Protocol, Sequence

from bitarray import bitarray
from bitarray.util import zeros

from ..backend.records import DeviceMap
from ..models.cells import HOLD, PIN, UNKNOWN, UPDATE, instruction_class, resolve_capture
from ..models.device import CONTROL_FUNCTIONS, DRIVER_FUNCTIONS, BoundaryCell, DeviceModel
from .electrical import INPUT_SIDE_FUNCTIONS, cell_info_of
from .replay_device import ReplayDevice, Stage

__all__ = ["BoardDevice", "CapturePlan", "PinReader", "pins_driven", "capture_plans", "RELEASE", "DRIVE",
           "UNKNOWN_MODE"]

DRIVE = "drive"  # the update stage drives the pins
RELEASE = "release"  # the pins are released (outputs at their disable result)
UNKNOWN_MODE = "unknown"  # the instruction is not known: the pins may do anything
_CLASSES = ("EXTEST", "SAMPLE", "INTEST")


def pins_driven(device: DeviceModel, instruction: str | None) -> str:
    """DRIVE, RELEASE or UNKNOWN_MODE for a device holding `instruction` (None: not known)."""
    if instruction is None:
        return UNKNOWN_MODE
    name = instruction.upper()
    if name == "CLAMP":
        return DRIVE
    register = device.selects.get(name, "BYPASS")
    if register != "BOUNDARY":
        return RELEASE
    return DRIVE if instruction_class(name, register) in ("EXTEST", "INTEST") else RELEASE


@dataclass(frozen=True, slots=True)
class CapturePlan:
    """Per capture class (EXTEST, SAMPLE, INTEST): which cells load what.

    `pin` lists (cell, port bit) capturing the pin; `depends` lists BIDIR cells whose source
    depends on whether their own output is on: (cell, port bit, source if off, source if on).
    Cells in no list capture X.
    """

    update: tuple[int, ...]
    hold: tuple[int, ...]
    zero: tuple[int, ...]
    one: tuple[int, ...]
    pin: tuple[tuple[int, str], ...]
    depends: tuple[tuple[int, str, str, str], ...]


def _governing_entries(device: DeviceModel) -> dict[int, BoundaryCell]:
    """One entry per cell number: a merged cell captures as its input-side entry."""
    chosen: dict[int, BoundaryCell] = {}
    for cell in device.cells:
        held = chosen.get(cell.number)
        if held is None or (held.function not in INPUT_SIDE_FUNCTIONS
                            and cell.function in INPUT_SIDE_FUNCTIONS):
            chosen[cell.number] = cell
    return chosen


_LIST_OF_SOURCE = {UPDATE: "update", HOLD: "hold", "0": "zero", "1": "one"}


def capture_plans(device: DeviceModel) -> dict[str, CapturePlan]:
    """The capture plan of every class; cells with no description capture X."""
    plans: dict[str, CapturePlan] = {}
    entries = _governing_entries(device)
    memo: dict[tuple[str, str, str, bool], str] = {}

    def source(cell: BoundaryCell, cls: str, driving: bool) -> str:
        key = (cell.cell_type, cell.function, cls, driving)
        found = memo.get(key)
        if found is None:
            found = memo[key] = resolve_capture(cell_info_of(device, cell.cell_type), cell.function, cls, driving)
        return found

    for cls in _CLASSES:
        lists: dict[str, list[int]] = {name: [] for name in _LIST_OF_SOURCE.values()}
        pins: list[tuple[int, str]] = []
        depends: list[tuple[int, str, str, str]] = []
        for number, cell in sorted(entries.items()):
            if not 0 <= number < device.boundary_length:
                continue
            released = source(cell, cls, False)
            driving = source(cell, cls, True)
            if cell.port is None and PIN in (released, driving):
                released = driving = UNKNOWN  # an internal cell has no pin to read
            if released != driving and cell.port is not None:
                depends.append((number, cell.port, released, driving))
            elif released == PIN and cell.port is not None:
                pins.append((number, cell.port))
            elif released in _LIST_OF_SOURCE:
                lists[_LIST_OF_SOURCE[released]].append(number)
        plans[cls] = CapturePlan(tuple(lists["update"]), tuple(lists["hold"]), tuple(lists["zero"]),
                                 tuple(lists["one"]), tuple(pins), tuple(depends))
    return plans


class PinReader(Protocol):
    """How a device's capture learns its pins: the virtual board reads its resolved nodes."""

    def read(self, device: int, ports: Sequence[str]) -> tuple[bitarray, bitarray]:
        """Values and known flags of `ports` of chain device `device`, as its receivers read them."""
        ...


class BoardDevice(ReplayDevice):
    """A chain device whose boundary register sees the board's pins."""

    def __init__(self, device_map: DeviceMap, model: DeviceModel, position: int) -> None:
        super().__init__(device_map)
        self.model = model
        self.position = position
        self.plans = capture_plans(model)
        self._boundary_last = Stage.unknown(model.boundary_length)  # the capture flip-flops
        self._usercode = Stage.from_pattern(model.usercode) if model.usercode else None
        self.driver_cells = {cell.port: cell for cell in model.cells
                             if cell.port is not None and cell.function in DRIVER_FUNCTIONS}
        self.controls = {cell.number for cell in model.cells if cell.function in CONTROL_FUNCTIONS}
        self.lost = False  # the TAP state could not be followed: every register unknown

    @property
    def pin_mode(self) -> str:
        if self.lost:
            return UNKNOWN_MODE
        if self.instruction is None and self.selected == "BYPASS":
            return RELEASE  # an opcode no instruction decodes to acts as BYPASS (IEEE 1149.1)
        return pins_driven(self.model, self.instruction)

    def forget(self) -> None:
        """The TAP state is no longer known: nothing the registers hold can be trusted."""
        self.lost = True
        self.instruction = None
        self.selected = None
        self.ir_shift = Stage.unknown(self.map.ir_length)
        self.dr_shift = None
        self.update = {register: Stage.unknown(len(stage.values)) for register, stage in self.update.items()}
        self._boundary_last = Stage.unknown(self.model.boundary_length)

    def test_logic_reset(self) -> None:
        self.lost = False
        super().test_logic_reset()

    def output_enabled(self, port: str) -> int | None:
        """1 / 0 when the output of `port` is known to be on / off under the current state, else None."""
        if self.pin_mode != DRIVE:
            return 0 if self.pin_mode == RELEASE else None
        cell = self.driver_cells.get(port)
        if cell is None:
            return 0
        if cell.control_cell is None or cell.disable_value is None:
            return 1
        stage = self.update.get("BOUNDARY")
        if stage is None or not 0 <= cell.control_cell < len(stage.values) or not stage.known[cell.control_cell]:
            return None
        return int(stage.values[cell.control_cell] != cell.disable_value)

    def capture_dr(self, reader: PinReader | None = None) -> int | None:  # type: ignore[override]
        """Load the selected register; the boundary register reads its cells' sources."""
        register = self.selected
        if self.lost:
            self.dr_shift = None
            return None
        if register == "BOUNDARY" and reader is not None:
            self.dr_shift = self._capture_boundary(reader)
            self._boundary_last = self.dr_shift
            return len(self.dr_shift.values)
        length = super().capture_dr()
        if register == "DEVICE_ID" and self.instruction == "USERCODE" and self._usercode is not None:
            self.dr_shift = self._usercode.copy()
        return length

    def _capture_boundary(self, reader: PinReader) -> Stage:
        length = self.model.boundary_length
        cls = instruction_class(self.instruction or "", "BOUNDARY") or "SAMPLE"
        plan = self.plans[cls]
        lists: dict[str, list[int]] = {name: list(getattr(plan, name)) for name in _LIST_OF_SOURCE.values()}
        pins = list(plan.pin)
        for number, port, released, driving in plan.depends:
            on = self.output_enabled(port)
            if on is None:
                continue  # whether the output is on is not known: X
            source = driving if on else released
            if source == PIN:
                pins.append((number, port))
            elif source in _LIST_OF_SOURCE:
                lists[_LIST_OF_SOURCE[source]].append(number)
        values, known = zeros(length), zeros(length)
        update = self.update.get("BOUNDARY")
        if lists["update"] and update is not None and len(update.values) == length:
            values[lists["update"]] = update.values[lists["update"]]
            known[lists["update"]] = update.known[lists["update"]]
        if lists["hold"]:
            values[lists["hold"]] = self._boundary_last.values[lists["hold"]]
            known[lists["hold"]] = self._boundary_last.known[lists["hold"]]
        if lists["one"]:
            values[lists["one"]] = 1
            known[lists["one"]] = 1
        if lists["zero"]:
            known[lists["zero"]] = 1
        if pins:
            cells = [number for number, _ in pins]
            read_values, read_known = reader.read(self.position, [port for _, port in pins])
            values[cells] = read_values
            known[cells] = read_known
        return Stage(values, known)

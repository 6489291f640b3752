"""The scan pins of a board as the generator and the diagnosis need them, built in one pass.

For every pin on a net: the output cell that can drive it (with its control cell, disable
value and result, and its BSDL safe value), and the cells that capture the pin under EXTEST
while the pin is released and while it drives (IEEE Std 1149.1-2001 Annex B, CELL_INFO via
`scanloom.models.cells`). Nets joined through series parts are one electrical node; a node
that a logic part drives (an output with an equation) is marked, since a scan driver there
would fight it.

Boards have tens of thousands of nets, so everything is a dictionary lookup per pin over
per-device tables computed once (`backend.images.device_tables`).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

from ..backend.images import DeviceTables, device_tables
from ..collector import collector_paused
from ..models.board import Board, PinRef
from ..models.cells import PIN, resolve_capture
from ..models.connectivity import series_groups
from ..models.device import DRIVER_FUNCTIONS, BoundaryCell

__all__ = ["OutputPin", "ObservingCell", "BoardPins", "board_pins", "ALWAYS_ON"]

ALWAYS_ON = "always"  # the enable group of a two-state output: on whenever its device drives pins


@dataclass(frozen=True, slots=True)
class OutputPin:
    """A scan pin that can drive its net: its output cell and what enables it."""

    pin: PinRef
    device: int  # chain position, 0 nearest TDI
    cell: int
    function: str  # OUTPUT2, OUTPUT3 or BIDIR
    control: int | None
    disable_value: int | None
    disable_result: str
    safe: str  # "0" or "1" (a BSDL X taken as 0, as the images do)
    node: tuple[str, ...] | None = field(default=None, compare=False)  # its electrical node

    @property
    def two_state(self) -> bool:
        return self.control is None or self.disable_value is None

    @property
    def enable_group(self) -> tuple[int, int | str]:
        """Outputs that one control cell enables together; a two-state output is alone."""
        if self.two_state:
            return (self.device, f"{ALWAYS_ON}:{self.pin.port}")
        assert self.control is not None
        return (self.device, self.control)


@dataclass(frozen=True, slots=True)
class ObservingCell:
    """A boundary cell that captures its pin under EXTEST, released or driving."""

    pin: PinRef
    device: int
    number: int
    function: str
    when_released: bool  # captures the pin while the pin's own output is disabled
    when_driving: bool  # captures the pin while the pin's own output drives


class BoardPins:
    """Drivers, observers and electrical nodes of every net of a board."""

    def __init__(self, board: Board) -> None:
        with collector_paused():  # tens of thousands of small acyclic records
            self._build(board)

    def _build(self, board: Board) -> None:
        self.board = board
        self.refs = tuple(entry.ref for entry in board.chain)
        self.index = {ref: i for i, ref in enumerate(self.refs)}
        self.tables: tuple[DeviceTables, ...] = tuple(
            device_tables(entry.ref, entry.device) for entry in board.chain)
        groups = series_groups(board)
        self.node_of_net: dict[str, tuple[str, ...]] = {
            net: groups.get(net, (net,)) for net in board.nets}
        self.nodes: tuple[tuple[str, ...], ...] = tuple(dict.fromkeys(self.node_of_net.values()))
        self.outputs: dict[PinRef, OutputPin] = {}
        self.observers: dict[PinRef, tuple[ObservingCell, ...]] = {}
        self._node_outputs: dict[tuple[str, ...], list[OutputPin]] = {}
        self._node_observers: dict[tuple[str, ...], list[ObservingCell]] = {}
        memo: dict[tuple[int, str, str, bool], bool] = {}
        for net in board.nets.values():
            node = self.node_of_net[net.name]
            for pin in net.pins:
                idx = self.index.get(pin.ref)
                if idx is None:  # a part's pin; the board loader puts a pin on one net only
                    continue
                tables = self.tables[idx]
                driver = tables.drivers.get(pin.port)
                if driver is not None:
                    output = _output(pin, idx, driver, node)
                    self.outputs[pin] = output
                    self._node_outputs.setdefault(node, []).append(output)
                cells = []
                for cell in tables.observers.get(pin.port, ()):
                    released = _captures(memo, idx, tables, cell, False)
                    driving = _captures(memo, idx, tables, cell, True) \
                        if cell.function in DRIVER_FUNCTIONS else released
                    if released or driving:
                        cells.append(ObservingCell(pin, idx, cell.number, cell.function,
                                                   released, driving))
                if cells:
                    self.observers[pin] = tuple(cells)
                    self._node_observers.setdefault(node, []).extend(cells)
        driven: set[tuple[str, ...]] = set()
        touched: set[tuple[str, ...]] = set()
        net_of_pin = board.net_of_pin if any(part.is_logic for part in board.parts.values()) else {}
        for part in board.parts.values():
            if not part.is_logic:
                continue
            outputs = set(part.logic) | set(part.enables)
            for name in part.pins:
                net = net_of_pin.get(PinRef(part.ref, name))
                if net is not None:
                    touched.add(self.node_of_net[net])
                    if name in outputs:
                        driven.add(self.node_of_net[net])
        self.logic_driven: frozenset[tuple[str, ...]] = frozenset(driven)  # a logic output on it
        self.logic_touched: frozenset[tuple[str, ...]] = frozenset(touched)  # any logic pin on it

    @cached_property
    def node_pins(self) -> dict[tuple[str, ...], tuple[PinRef, ...]]:
        """Every pin of every node, nets in node order."""
        nets = self.board.nets
        return {node: tuple(pin for net in node for pin in nets[net].pins) for node in self.nodes}

    def node_outputs(self, node: tuple[str, ...]) -> tuple[OutputPin, ...]:
        return tuple(self._node_outputs.get(node, ()))

    def node_observers(self, node: tuple[str, ...]) -> tuple[ObservingCell, ...]:
        return tuple(self._node_observers.get(node, ()))

    @cached_property
    def group_members(self) -> dict[tuple[int, int | str], tuple[OutputPin, ...]]:
        """Every enable group's outputs on board pins, in board order."""
        members: dict[tuple[int, int | str], list[OutputPin]] = {}
        for output in self.outputs.values():
            members.setdefault(output.enable_group, []).append(output)
        return {key: tuple(found) for key, found in members.items()}

    def pulls_of(self, node: tuple[str, ...]) -> set[str]:
        """"up" and/or "down": the board's pull resistors on the node's nets."""
        return {self.board.pulls[net] for net in node if net in self.board.pulls}


def board_pins(board: Board) -> BoardPins:
    return BoardPins(board)


def _output(pin: PinRef, idx: int, cell: BoundaryCell, node: tuple[str, ...]) -> OutputPin:
    control = cell.control_cell if cell.disable_value is not None else None
    return OutputPin(pin, idx, cell.number, cell.function, control,
                     cell.disable_value if control is not None else None,
                     cell.disable_result or "Z", "1" if cell.safe == "1" else "0", node)


def _captures(memo: dict[tuple[int, str, str, bool], bool], idx: int, tables: DeviceTables,
              cell: BoundaryCell, driving: bool) -> bool:
    key = (idx, cell.cell_type, cell.function, driving)
    found = memo.get(key)
    if found is None:
        found = resolve_capture(tables.info(cell), cell.function, "EXTEST", driving) == PIN
        memo[key] = found
    return found

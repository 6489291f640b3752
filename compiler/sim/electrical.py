"""The board as electrical nodes: who drives and who receives every node, and in what order.

A node is a set of nets joined through series parts (resistor packs, jumpers: plain
connections for a logic test). Its drivers are the scan outputs on it (an OUTPUT2, OUTPUT3 or
BIDIR cell, with the control cell that enables it and the BSDL disable result that applies
when it is disabled), the outputs of logic parts (an equation and, for tri-state outputs, an
enable) and the board's pull resistors. Its receivers are the scan pins whose cells can
capture the pin and the logic-part inputs that an equation reads, each with the receiver
technology that decides how it reads a floating node.

Logic parts make the nodes depend on each other; the order in which their outputs can be
evaluated is computed here once, and a combinational loop is an error naming the loop.
Scan pins and part pins that are in no net still get a node of their own (an input there
floats; a bidirectional pin there reads its own output).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterable, Mapping

from ..diagnostics import Diagnostics
from ..models.board import Board, PinRef
from ..models.cells import PIN, STANDARD_CELLS, resolve_capture
from ..models.device import DRIVER_FUNCTIONS, CellInfo, DeviceModel
from ..models.model_memo import per_model
from .logic import PartLogic, parse_part_logic

__all__ = [
    "DISABLE_RESULTS",
    "INPUT_SIDE_FUNCTIONS",
    "ScanDriver",
    "CaptureCell",
    "ScanReceiver",
    "LogicReceiver",
    "ElectricalNode",
    "ElectricalBoard",
    "build_electrical",
    "cell_info_of",
    "capture_cells",
    "strongly_connected",
]

# BSDL disable results (IEEE Std 1149.1-2001, BOUNDARY_REGISTER <disable result>).
DISABLE_RESULTS = ("Z", "WEAK0", "WEAK1", "PULL0", "PULL1", "KEEPER")
# Functions whose cell sits on the pin side of an input: the pin is their parallel input.
INPUT_SIDE_FUNCTIONS = frozenset({"INPUT", "CLOCK", "OBSERVE_ONLY", "BIDIR"})
_CLASSES = ("EXTEST", "SAMPLE", "INTEST")


@dataclass(frozen=True, slots=True)
class ScanDriver:
    """The output cell of a scan pin, its control cell and what the pin does when disabled."""

    pin: PinRef
    device: int  # chain position, 0 nearest TDI
    cell: int
    function: str  # OUTPUT2, OUTPUT3 or BIDIR
    control: int | None
    disable_value: int | None
    disable_result: str  # one of DISABLE_RESULTS ("Z" when the BSDL gives none)


@dataclass(frozen=True, slots=True)
class CaptureCell:
    """A boundary cell on a pin that captures the pin for some instruction."""

    number: int
    cell_type: str
    function: str
    info: CellInfo | None


@dataclass(frozen=True, slots=True)
class ScanReceiver:
    """A scan pin whose cells can capture it, and the technology of its input buffer."""

    pin: PinRef
    device: int
    cells: tuple[CaptureCell, ...]
    technology: str


@dataclass(frozen=True, slots=True)
class LogicReceiver:
    """A logic-part input that some equation or enable of the part reads."""

    pin: PinRef
    technology: str


@dataclass(frozen=True, slots=True)
class ElectricalNode:
    """Nets joined through series parts, with every pin on them and the pulls they carry."""

    index: int
    name: str  # the first net in board order, or REF.PORT for a pin in no net
    nets: tuple[str, ...]
    pins: tuple[PinRef, ...]
    pulls: tuple[str, ...]  # "up" / "down" per pulled net
    tap: bool = False  # a net declared as carrying a TAP signal

    @property
    def label(self) -> str:
        if len(self.nets) > 1:
            return "+".join(self.nets)
        return self.name


@dataclass(frozen=True, eq=False)
class ElectricalBoard:
    """The electrical view of a board that the virtual board and the fault grader share."""

    board: Board
    nodes: tuple[ElectricalNode, ...]
    node_of_net: Mapping[str, int]
    node_of_pin: Mapping[PinRef, int]
    net_of_pin: Mapping[PinRef, str]
    drivers: Mapping[PinRef, ScanDriver]
    receivers: Mapping[PinRef, ScanReceiver]
    logic: tuple[PartLogic, ...]  # in evaluation order: every input before the outputs it feeds
    logic_of_pin: Mapping[PinRef, PartLogic]  # output pin -> its logic
    logic_receivers: Mapping[PinRef, LogicReceiver]
    readers_of_pin: Mapping[PinRef, tuple[int, ...]]  # input pin -> indexes into `logic`
    series: tuple[tuple[PinRef, PinRef], ...]
    series_of_node: Mapping[int, tuple[tuple[PinRef, PinRef], ...]]  # the series links inside a node
    devices: tuple[DeviceModel, ...]
    refs: tuple[str, ...]

    def node_of(self, pin: PinRef) -> ElectricalNode:
        return self.nodes[self.node_of_pin[pin]]

    def is_receiver(self, pin: PinRef) -> bool:
        return pin in self.receivers or pin in self.logic_receivers


def cell_info_of(device: DeviceModel, cell_type: str) -> CellInfo | None:
    """The capture description of a cell type: the BSDL file's own package, else the standard's."""
    info = device.cell_info.get(cell_type)
    return info if info is not None else STANDARD_CELLS.get(cell_type)


def capture_cells(device: DeviceModel, port: str) -> tuple[CaptureCell, ...]:
    """Cells of `port` that capture the pin under some instruction, one per cell number.

    A merged cell (two entries, one number) captures as its input-side entry: the pin is that
    entry's parallel input (IEEE 1149.1-2001 BSDL, merged cells; from memory). Worked out
    once per device model and port: a board repeats its parts.
    """
    known = _capture_cells_by_port(device)
    found = known.get(port)
    if found is None:
        found = known[port] = _capture_cells(device, port)
    return found


@per_model
def _capture_cells_by_port(device: DeviceModel) -> dict[str, tuple[CaptureCell, ...]]:
    return {}  # filled port by port as they are asked for


def _capture_cells(device: DeviceModel, port: str) -> tuple[CaptureCell, ...]:
    by_number: dict[int, CaptureCell] = {}
    for cell in device.cells_of(port):
        info = cell_info_of(device, cell.cell_type)
        captures_pin = any(resolve_capture(info, cell.function, cls, driving) == PIN
                           for cls in _CLASSES for driving in (False, True))
        if not captures_pin:
            continue
        entry = CaptureCell(cell.number, cell.cell_type, cell.function, info)
        held = by_number.get(cell.number)
        if held is None or (held.function not in INPUT_SIDE_FUNCTIONS
                            and cell.function in INPUT_SIDE_FUNCTIONS):
            by_number[cell.number] = entry
    return tuple(by_number[number] for number in sorted(by_number))


_DriverCell = tuple[int, str, "int | None", "int | None", str]  # ScanDriver's fields after pin, device


def _driver_cell(device: DeviceModel, port: str) -> _DriverCell | None:
    """The output cell of a port: number, function, control cell, disable value and result."""
    for cell in device.cells_of(port):
        if cell.function in DRIVER_FUNCTIONS:
            result = (cell.disable_result or "Z").upper()
            if result not in DISABLE_RESULTS:
                result = "Z"
            control = cell.control_cell if cell.disable_value is not None else None
            return (cell.number, cell.function, control,
                    cell.disable_value if control is not None else None, result)
    return None


@per_model
def _scan_ports(device: DeviceModel) -> tuple[tuple[str, _DriverCell | None, tuple[CaptureCell, ...]], ...]:
    """The ports that drive or capture their pins, in register order, with their output cell
    and capturing cells: worked out once per device model, since a board repeats its parts."""
    found = []
    for port in device.cells_by_port:
        driver = _driver_cell(device, port)
        cells = capture_cells(device, port)
        if driver is not None or cells:
            found.append((port, driver, cells))
    return tuple(found)


class _UnionFind:
    def __init__(self, items: Iterable[str]) -> None:
        self.parent = {item: item for item in items}

    def find(self, item: str) -> str:
        root = item
        while self.parent[root] != root:
            root = self.parent[root]
        while self.parent[item] != root:
            self.parent[item], item = root, self.parent[item]
        return root

    def union(self, a: str, b: str) -> None:
        ra, rb = self.find(a), self.find(b)
        if ra != rb:
            self.parent[rb] = ra


def build_electrical(board: Board, diagnostics: Diagnostics,
                     sources: Mapping[str, str] | None = None) -> ElectricalBoard:
    """The electrical nodes of `board`; raises ScanloomError for bad logic or a combinational loop."""
    sources = dict(diagnostics.sources) if sources is None else sources
    logic: list[PartLogic] = []
    for part in board.parts.values():
        logic.extend(parse_part_logic(board, part, diagnostics, sources))
    diagnostics.raise_if_errors()

    net_of_pin = dict(board.net_of_pin)
    nets = list(board.nets)
    joins = _UnionFind(nets)
    series: list[tuple[PinRef, PinRef]] = []
    for part in board.parts.values():
        for a, b in part.series:
            pa, pb = PinRef(part.ref, a), PinRef(part.ref, b)
            series.append((pa, pb))
            na, nb = net_of_pin.get(pa), net_of_pin.get(pb)
            if na is not None and nb is not None:
                joins.union(na, nb)
    members: dict[str, list[str]] = {}
    for net in nets:
        members.setdefault(joins.find(net), []).append(net)

    nodes: list[ElectricalNode] = []
    node_of_net: dict[str, int] = {}
    node_of_pin: dict[PinRef, int] = {}
    pulled = board.pulls
    for net in nets:
        if net in node_of_net:
            continue
        group = members[joins.find(net)]
        index = len(nodes)
        if len(group) == 1:  # a net joined to no other: the common case, made directly
            spec = board.nets[net]
            pins = tuple(spec.pins)
            nodes.append(ElectricalNode(index, net, (net,), pins, (pulled[net],) if net in pulled else (),
                                        bool(spec.tap)))
        else:
            pins = tuple(pin for name in group for pin in board.nets[name].pins)
            pulls = tuple(pulled[name] for name in group if name in pulled)
            nodes.append(ElectricalNode(index, group[0], tuple(group), pins, pulls,
                                        any(board.nets[name].tap for name in group)))
        for name in group:
            node_of_net[name] = index
        node_of_pin.update(dict.fromkeys(pins, index))

    def lone_node(pin: PinRef) -> None:
        if pin not in node_of_pin:
            index = len(nodes)
            nodes.append(ElectricalNode(index, str(pin), (), (pin,), ()))
            node_of_pin[pin] = index

    drivers: dict[PinRef, ScanDriver] = {}
    receivers: dict[PinRef, ScanReceiver] = {}
    devices: list[DeviceModel] = []
    for entry in board.chain:
        device = entry.device
        devices.append(device)
        technology = board.technology_of(entry.ref)
        ref, position = entry.ref, entry.position
        for port, driver_cell, cells in _scan_ports(device):
            pin = PinRef(ref, port)
            if driver_cell is not None:
                drivers[pin] = ScanDriver(pin, position, *driver_cell)
            if cells:
                receivers[pin] = ScanReceiver(pin, position, cells, technology)
            if pin not in node_of_pin:
                lone_node(pin)

    logic_of_pin: dict[PinRef, PartLogic] = {}
    logic_receivers: dict[PinRef, LogicReceiver] = {}
    for item in logic:
        out = PinRef(item.part, item.pin)
        logic_of_pin[out] = item
        lone_node(out)
        technology = board.technology_of(item.part)
        for name in item.reads:
            pin = PinRef(item.part, name)
            logic_receivers.setdefault(pin, LogicReceiver(pin, technology))
            lone_node(pin)

    ordered = _evaluation_order(board, logic, logic_of_pin, node_of_pin, nodes, diagnostics)
    diagnostics.raise_if_errors()
    series_of_node: dict[int, list[tuple[PinRef, PinRef]]] = {}
    for a, b in series:
        if a in node_of_pin and node_of_pin.get(b) == node_of_pin[a]:
            series_of_node.setdefault(node_of_pin[a], []).append((a, b))
    readers: dict[PinRef, list[int]] = {}
    for index, item in enumerate(ordered):
        for name in item.reads:
            readers.setdefault(PinRef(item.part, name), []).append(index)
    return ElectricalBoard(
        board=board, nodes=tuple(nodes), node_of_net=node_of_net, node_of_pin=node_of_pin,
        net_of_pin=net_of_pin, drivers=drivers, receivers=receivers, logic=tuple(ordered),
        logic_of_pin=logic_of_pin, logic_receivers=logic_receivers,
        readers_of_pin={pin: tuple(found) for pin, found in readers.items()},
        series=tuple(series), series_of_node={n: tuple(links) for n, links in series_of_node.items()},
        devices=tuple(devices), refs=tuple(e.ref for e in board.chain),
    )


def _evaluation_order(board: Board, logic: list[PartLogic], logic_of_pin: Mapping[PinRef, PartLogic],
                      node_of_pin: Mapping[PinRef, int], nodes: list[ElectricalNode],
                      diagnostics: Diagnostics) -> list[PartLogic]:
    """Logic outputs ordered so that every node is complete before an equation reads it.

    An output depends on the outputs that drive the nodes its equation reads. A cycle of such
    dependencies is a combinational loop: reported once per loop, naming every output and node
    on it, at the first equation's position.
    """
    drivers_of_node: dict[int, list[int]] = {}
    for index, item in enumerate(logic):
        drivers_of_node.setdefault(node_of_pin[PinRef(item.part, item.pin)], []).append(index)
    depends: list[list[int]] = []
    for item in logic:
        found: dict[int, None] = {}
        for name in item.reads:
            for other in drivers_of_node.get(node_of_pin[PinRef(item.part, name)], ()):
                found[other] = None
        depends.append(list(found))
    components = strongly_connected(depends)
    order: list[PartLogic] = []
    for component in components:
        looped = len(component) > 1 or component[0] in depends[component[0]]
        if looped:
            _report_loop(component, logic, depends, node_of_pin, nodes, diagnostics)
            continue
        order.append(logic[component[0]])
    return order


def strongly_connected(depends: list[list[int]]) -> list[list[int]]:
    """Tarjan's strongly connected components (iterative), dependencies first."""
    count = len(depends)
    index_of = [-1] * count
    low = [0] * count
    on_stack = [False] * count
    stack: list[int] = []
    components: list[list[int]] = []
    counter = 0
    for root in range(count):
        if index_of[root] >= 0:
            continue
        work = [(root, 0)]
        while work:
            vertex, position = work.pop()
            if position == 0:
                index_of[vertex] = low[vertex] = counter
                counter += 1
                stack.append(vertex)
                on_stack[vertex] = True
            recurse = False
            edges = depends[vertex]
            while position < len(edges):
                other = edges[position]
                position += 1
                if index_of[other] < 0:
                    work.append((vertex, position))
                    work.append((other, 0))
                    recurse = True
                    break
                if on_stack[other]:
                    low[vertex] = min(low[vertex], index_of[other])
            if recurse:
                continue
            if low[vertex] == index_of[vertex]:
                component = []
                while True:
                    member = stack.pop()
                    on_stack[member] = False
                    component.append(member)
                    if member == vertex:
                        break
                components.append(sorted(component))
            if work:
                parent = work[-1][0]
                low[parent] = min(low[parent], low[vertex])
    return components


def _report_loop(component: list[int], logic: list[PartLogic], depends: list[list[int]],
                 node_of_pin: Mapping[PinRef, int], nodes: list[ElectricalNode],
                 diagnostics: Diagnostics) -> None:
    members = set(component)
    feeds: dict[int, list[int]] = {member: [] for member in component}
    for member in component:
        for dep in depends[member]:
            if dep in members:
                feeds[dep].append(member)  # dep's output is read by member
    start = component[0]
    came_from: dict[int, int] = {}
    frontier = [start]
    while frontier and start not in came_from:
        following: list[int] = []
        for vertex in frontier:
            for reader in feeds[vertex]:
                if reader not in came_from:
                    came_from[reader] = vertex
                    following.append(reader)
        frontier = following
    path = [start]
    vertex = came_from[start]
    while vertex != start:
        path.append(vertex)
        vertex = came_from[vertex]
    path.reverse()
    path = [start] + path[:-1]
    steps = []
    for position, index in enumerate(path):
        item = logic[index]
        node = nodes[node_of_pin[PinRef(item.part, item.pin)]]
        reader = logic[path[(position + 1) % len(path)]]
        read_pins = [name for name in reader.reads
                     if node_of_pin[PinRef(reader.part, name)] == node.index]
        steps.append(f"{item.part}.{item.pin} drives {node.label}, read by "
                     f"{reader.part}.{read_pins[0] if read_pins else '?'}")
    first = logic[start]
    diagnostics.error("combinational loop: " + "; ".join(steps), first.span,
                      hint="logic parts must not feed their own inputs; break the loop in the board file")

"""Who can drive and who can observe each net: the facts `inspect`, the language and the
generator share.

A scan pin *drives* when one of its boundary cells is an OUTPUT2, OUTPUT3 or BIDIR cell, and
*receives* when one of its cells captures the pin in EXTEST or SAMPLE (INPUT, CLOCK, BIDIR,
OBSERVE_ONLY, or an output cell whose type observes its pin, e.g. BC_9/BC_10 per the standard's
cell descriptions). Nets joined through series parts (resistor packs, jumpers) are one node.
"""

from __future__ import annotations

from dataclasses import dataclass

from .board import Board, Net, PinRef
from .cells import PIN, resolve_capture
from .device import DRIVER_FUNCTIONS, RECEIVER_FUNCTIONS, BoundaryCell, DeviceModel
from .model_memo import per_model

__all__ = ["NetRoles", "net_roles", "series_groups", "receiver_cells", "driver_cells", "first_driver_cells",
           "NET_KINDS"]

NET_KINDS = ("scan-to-scan", "cluster", "drive-only", "observe-only", "untestable")


@dataclass(frozen=True, slots=True)
class NetRoles:
    name: str
    pins: tuple[PinRef, ...]
    drivers: tuple[PinRef, ...]  # scan pins that can drive the net
    receivers: tuple[PinRef, ...]  # scan pins that can capture the net
    part_pins: tuple[PinRef, ...]  # pins of parts without boundary scan
    kind: str


def driver_cells(device: DeviceModel, port: str) -> tuple[BoundaryCell, ...]:
    return device.driver_cells_by_port.get(port, ())


def first_driver_cells(device: DeviceModel) -> dict[str, BoundaryCell]:
    """Each driving port's first output cell: the one the checks take for the pin's driver."""
    return _first_driver_cells(device)


@per_model
def _first_driver_cells(device: DeviceModel) -> dict[str, BoundaryCell]:
    return {port: cells[0] for port, cells in device.driver_cells_by_port.items() if cells}


def receiver_cells(device: DeviceModel, port: str) -> tuple[BoundaryCell, ...]:
    """Cells of `port` that capture the pin under EXTEST or SAMPLE."""
    return _receivers_by_port(device).get(port, ())


@per_model
def _receivers_by_port(device: DeviceModel) -> dict[str, tuple[BoundaryCell, ...]]:
    return {port: _receiver_cells(device, port) for port in device.cells_by_port}


def _receiver_cells(device: DeviceModel, port: str) -> tuple[BoundaryCell, ...]:
    out = []
    for cell in device.cells_of(port):
        if cell.function in RECEIVER_FUNCTIONS:
            out.append(cell)
            continue
        info = device.cell_info.get(cell.cell_type)
        if cell.function in DRIVER_FUNCTIONS and any(
                resolve_capture(info, cell.function, instr, True) == PIN for instr in ("EXTEST", "SAMPLE")):
            out.append(cell)
    return tuple(out)


def net_roles(board: Board) -> dict[str, NetRoles]:
    """Roles of every net, in board order, with the kind of its electrical node."""
    groups = series_groups(board)
    logic_refs = {ref for ref, part in board.parts.items() if part.is_logic}
    per_net: dict[str, tuple[tuple[PinRef, ...], tuple[PinRef, ...], tuple[PinRef, ...]]] = {}
    for net in board.nets.values():
        drivers, receivers, part_pins = [], [], []
        for pin in net.pins:
            entry = board.devices.get(pin.ref)
            if entry is None:
                part_pins.append(pin)
                continue
            can_drive, can_receive = _pin_roles(entry.device, pin.port)
            if can_drive:
                drivers.append(pin)
            if can_receive:
                receivers.append(pin)
        per_net[net.name] = (tuple(drivers), tuple(receivers), tuple(part_pins))
    out: dict[str, NetRoles] = {}
    for net in board.nets.values():
        drivers, receivers, part_pins = per_net[net.name]
        node = groups.get(net.name, (net.name,))
        node_drivers = [p for n in node for p in per_net[n][0]]
        node_receivers = [p for n in node for p in per_net[n][1]]
        node_parts = [p for n in node for p in per_net[n][2]]
        out[net.name] = NetRoles(net.name, net.pins, drivers, receivers, part_pins,
                                 _kind(net, node_drivers, node_receivers, node_parts, logic_refs))
    return out


def _kind(net: Net, drivers: list[PinRef], receivers: list[PinRef], part_pins: list[PinRef],
          logic_refs: set[str]) -> str:
    if any(p.ref in logic_refs for p in part_pins):
        return "cluster"
    if drivers and receivers and len(set(drivers) | set(receivers)) >= 2:
        return "scan-to-scan"
    if drivers and receivers:
        return "drive-only"  # a single bidirectional pin: it can only test itself
    if drivers:
        return "drive-only"
    if receivers:
        return "observe-only"
    return "untestable"


def _pin_roles(device: DeviceModel, port: str) -> tuple[bool, bool]:
    return bool(driver_cells(device, port)), bool(receiver_cells(device, port))


def series_groups(board: Board) -> dict[str, tuple[str, ...]]:
    """Nets joined through series parts, as groups (only nets that are joined appear)."""
    parent: dict[str, str] = {}

    def find(x: str) -> str:
        while parent.get(x, x) != x:
            parent[x] = parent.get(parent[x], parent[x])
            x = parent[x]
        return x

    for part in board.parts.values():
        for a, b in part.series:
            na = board.net_of_pin.get(PinRef(part.ref, a))
            nb = board.net_of_pin.get(PinRef(part.ref, b))
            if na and nb and na != nb:
                parent[find(na)] = find(nb)
    groups: dict[str, list[str]] = {}
    for net in board.nets:
        if net in parent:
            groups.setdefault(find(net), []).append(net)
    for net in list(parent):
        root = find(net)
        members = groups.setdefault(root, [])
        for member in (net, root):  # the root is never a key of `parent`: add it too
            if member not in members:
                members.append(member)
    out: dict[str, tuple[str, ...]] = {}
    for members in groups.values():
        ordered = tuple(n for n in board.nets if n in members)
        for n in ordered:
            out[n] = ordered
    return out

"""What a fault does to the board's electrical nodes and TAP signals.

A fault replaces some fault-free nodes by new groups of pins (`FaultEffect.replaced` ->
`groups`): an open splits a node (a cut pin becomes a group of its own, and nets joined only
through a cut series pin come apart), a short merges two nodes under a resolution rule, a
stuck-at forces a node. A fault on a TAP signal also changes what the devices' TAP inputs
read (`TapEffect`): TDI, TMS, TCK or TRST of some devices, or the link between two devices.
The fast grader works from the replaced nodes only; the cycle-level simulator builds the
whole faulted board from them (`faulted_groups`).
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass

from ..models.board import PinRef
from .electrical import ElectricalBoard, ElectricalNode
from .faults import OPEN_NET, OPEN_PIN, SHORT, STUCK_AT, TAP_SHORT, Fault, tap_port, tap_signal_of_port
from .resolve import COMBINE_AND, COMBINE_OR, COMBINE_WIRE, Group

__all__ = [
    "TapLine",
    "TapEffect",
    "FaultEffect",
    "fault_effect",
    "split_members",
    "faulted_groups",
    "good_groups",
    "tap_lines_of_pin",
    "PULLED_UP_INPUTS",
]

# TAP inputs that read 1 when undriven: the standard requires TDI, TMS and TRST* to behave as
# if driven high when left open (IEEE Std 1149.1-2001, clauses 4.3.1, 4.4.1, 4.6.1; from memory).
PULLED_UP_INPUTS = frozenset({"TDI", "TMS", "TRST"})

# A TAP line: (signal, position). ("TDI", k) is the link into chain device k, driven by
# device k-1's TDO (k = 0: the player's TDI; k = chain length: the board's TDO to the player).
TapLine = tuple[str, int]


@dataclass(frozen=True, slots=True)
class TapEffect:
    """How a fault changes TAP lines: shorted to a net, stuck at a value, or floating."""

    lines: tuple[TapLine, ...]
    how: str  # "short", "stuck" or "float"
    mode: str = COMBINE_AND  # for "short": how the line and the net resolve
    group: int | None = None  # for "short": index into FaultEffect.groups of the net's group
    value: str | None = None  # for "stuck"


@dataclass(frozen=True)
class FaultEffect:
    """The nodes a fault replaces, the groups that replace them, and its TAP effect."""

    fault: Fault
    replaced: tuple[int, ...]
    groups: tuple[Group, ...]
    tap: TapEffect | None = None
    note: str | None = None  # why the fault cannot change anything, when it cannot


def good_groups(electrical: ElectricalBoard) -> tuple[Group, ...]:
    """The fault-free nodes as groups (index i is node i)."""
    return tuple(Group(node.label, node.pins, node.pulls, nets=node.nets) for node in electrical.nodes)


def faulted_groups(electrical: ElectricalBoard, effect: FaultEffect
                   ) -> tuple[tuple[Group, ...], dict[PinRef, int], tuple[int, ...]]:
    """The whole faulted board: its groups, the group of every pin, and the new groups' indexes."""
    replaced = set(effect.replaced)
    groups: list[Group] = []
    group_of_pin: dict[PinRef, int] = {}
    for node, group in zip(electrical.nodes, good_groups(electrical)):
        if node.index in replaced:
            continue
        index = len(groups)
        groups.append(group)
        for pin in node.pins:
            group_of_pin[pin] = index
    new: list[int] = []
    for group in effect.groups:
        index = len(groups)
        new.append(index)
        groups.append(group)
        for pin in group.pins:
            group_of_pin[pin] = index
    return tuple(groups), group_of_pin, tuple(new)


def _tap_signal(electrical: ElectricalBoard, pin: PinRef) -> str | None:
    entry = electrical.board.devices.get(pin.ref)
    if entry is None:
        return None
    return tap_signal_of_port(entry.device, pin.port)


def _line_of(electrical: ElectricalBoard, pin: PinRef) -> TapLine | None:
    signal = _tap_signal(electrical, pin)
    if signal is None:
        return None
    position = electrical.board.devices[pin.ref].position
    if signal == "TDO":
        return ("TDI", position + 1)
    return (signal, position)


def tap_lines_of_pin(electrical: ElectricalBoard, pin: PinRef) -> tuple[TapLine, ...]:
    """The TAP lines a TAP pin is wired to.

    In a net declared as a TAP net: every TAP pin of that net. Otherwise TDI and TDO are the
    point-to-point link of the daisy chain, and TMS, TCK and TRST are bussed to every chain
    device not wired otherwise (the usual IEEE 1149.1 ring: common practice).
    """
    board = electrical.board
    net = electrical.net_of_pin.get(pin)
    if net is not None and board.nets[net].tap:
        lines = [_line_of(electrical, p) for p in board.nets[net].pins]
        return tuple(sorted({line for line in lines if line is not None}))
    line = _line_of(electrical, pin)
    if line is None:
        return ()
    signal = line[0]
    if signal == "TDI":
        return (line,)
    bussed: list[TapLine] = []
    for entry in board.chain:
        port = tap_port(entry.device, signal)
        if port is None:
            continue
        other = electrical.net_of_pin.get(PinRef(entry.ref, port))
        if other is not None and board.nets[other].tap:
            continue
        bussed.append((signal, entry.position))
    return tuple(bussed)


def _net_tap_lines(electrical: ElectricalBoard, net: str) -> tuple[TapLine, ...]:
    lines = {_line_of(electrical, pin) for pin in electrical.board.nets[net].pins}
    return tuple(sorted(line for line in lines if line is not None))


def split_members(nets: Iterable[str], cut: set[PinRef], dropped: set[str],
                  series: Iterable[tuple[PinRef, PinRef]], net_of_pin: Mapping[PinRef, str]) -> list[list[object]]:
    """What a node falls into when the pins in `cut` leave their nets: its nets (str) and cut
    pins (PinRef) grouped by what still connects them, through the node's series pairs (a cut
    series-part pin still passes through its part)."""
    parent: dict[object, object] = {}

    def find(item: object) -> object:
        parent.setdefault(item, item)
        while parent[item] != item:
            parent[item] = parent[parent[item]]
            item = parent[item]
        return item

    def vertex(pin: PinRef) -> object:
        return pin if pin in cut else net_of_pin.get(pin, pin)

    for net in nets:
        if net not in dropped:
            find(net)
    for pin in cut:
        find(pin)
    for a, b in series:
        ra, rb = find(vertex(a)), find(vertex(b))
        if ra != rb:
            parent[rb] = ra
    members: dict[object, list[object]] = {}
    for item in list(parent):
        members.setdefault(find(item), []).append(item)
    return list(members.values())


def _split(electrical: ElectricalBoard, node: ElectricalNode, cut: set[PinRef],
           dropped_nets: set[str]) -> tuple[Group, ...]:
    """The groups a node falls into when the pins in `cut` are isolated from their nets."""
    board = electrical.board
    if node.index not in electrical.series_of_node and len(node.nets) <= 1:
        # No series part inside the node: the rest of the net stays together, each cut pin alone.
        rest = tuple(pin for pin in node.pins if pin not in cut)
        groups = [Group(node.label, rest, node.pulls if node.nets and node.nets[0] not in dropped_nets else (),
                        nets=node.nets)] if rest else []
        groups += [Group(f"{pin} (open)", (pin,)) for pin in node.pins if pin in cut]
        return tuple(groups)
    members = split_members(node.nets, cut, dropped_nets, electrical.series_of_node.get(node.index, ()),
                            electrical.net_of_pin)
    groups: list[Group] = []
    order = {net: i for i, net in enumerate(node.nets)}
    for items in sorted(members, key=lambda its: min(
            order.get(i, len(order)) if isinstance(i, str) else len(order) for i in its)):
        nets = tuple(sorted((i for i in items if isinstance(i, str)), key=order.__getitem__))
        pins = [pin for net in nets for pin in board.nets[net].pins if pin not in cut]
        pins += [i for i in items if isinstance(i, PinRef)]
        if not pins:
            continue
        pulls = tuple(board.pulls[net] for net in nets if net in board.pulls)
        cut_pins = [i for i in items if isinstance(i, PinRef)]
        label = "+".join(nets) if nets else f"{cut_pins[0]} (open)"
        groups.append(Group(label, tuple(pins), pulls, nets=nets))
    return tuple(groups)


def fault_effect(electrical: ElectricalBoard, fault: Fault) -> FaultEffect:
    """The effect of one parsed fault on `electrical` (the fault names only existing things)."""
    board = electrical.board
    node_of_net = electrical.node_of_net
    if fault.kind == STUCK_AT:
        node = electrical.nodes[node_of_net[fault.nets[0]]]
        group = Group(node.label, node.pins, node.pulls, forced=fault.value, nets=node.nets)
        tap = None
        if node.tap:
            lines = tuple(sorted({line for net in node.nets for line in _net_tap_lines(electrical, net)}))
            tap = TapEffect(lines, "stuck", value=fault.value)
        return FaultEffect(fault, (node.index,), (group,), tap)
    if fault.kind == OPEN_PIN:
        assert fault.pin is not None
        line = _line_of(electrical, fault.pin)
        tap = TapEffect((line,), "float") if line is not None else None
        if not fault.nets:
            return FaultEffect(fault, (), (), tap)
        node = electrical.node_of(fault.pin)
        return FaultEffect(fault, (node.index,), _split(electrical, node, {fault.pin}, set()), tap)
    if fault.kind == OPEN_NET:
        net = board.nets[fault.nets[0]]
        node = electrical.nodes[node_of_net[net.name]]
        tap = None
        if net.tap:
            tap = TapEffect(_net_tap_lines(electrical, net.name), "float")
        return FaultEffect(fault, (node.index,), _split(electrical, node, set(net.pins), {net.name}), tap)
    if fault.kind == TAP_SHORT:
        assert fault.pin is not None
        node = electrical.nodes[node_of_net[fault.nets[0]]]
        group = Group(node.label, node.pins, node.pulls, nets=node.nets)
        lines = tap_lines_of_pin(electrical, fault.pin)
        mode = COMBINE_OR if fault.mode == "or" else COMBINE_AND
        return FaultEffect(fault, (node.index,), (group,), TapEffect(lines, "short", mode, group=0))
    if fault.kind == SHORT:
        a = electrical.nodes[node_of_net[fault.nets[0]]]
        b = electrical.nodes[node_of_net[fault.nets[1]]]
        if a.index == b.index:
            return FaultEffect(fault, (), (), None,
                               note=f"{fault.nets[0]} and {fault.nets[1]} are already one node "
                                    "(joined through a series part)")
        combine = {"and": COMBINE_AND, "or": COMBINE_OR}.get(fault.mode, COMBINE_WIRE)
        first, second = (a, b) if a.index < b.index else (b, a)
        group = Group(f"{first.label}+{second.label}", first.pins + second.pins,
                      first.pulls + second.pulls, combine, fault.dominant, nets=first.nets + second.nets)
        tap = None
        if a.tap or b.tap:
            tap_node, other = (a, b) if a.tap else (b, a)
            lines = tuple(sorted({line for net in tap_node.nets for line in _net_tap_lines(electrical, net)}))
            tap = TapEffect(lines, "short", combine if combine != COMBINE_WIRE else COMBINE_AND, group=0)
        return FaultEffect(fault, tuple(sorted((a.index, b.index))), (group,), tap)
    raise ValueError(f"unknown fault kind {fault.kind!r}")

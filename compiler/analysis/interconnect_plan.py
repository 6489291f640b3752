"""Which pin drives which net in each round of an interconnect test, and what stays constant.

A net with several scan drivers is tested once per driver, never with two drivers enabled
at once. One control cell often enables several outputs (a bus enable, a group enable): the
whole group is on or off together, so a round is a set of enable groups no two of which put
a driver on the same electrical node. Rounds are chosen greedily until every (net, driver)
pair has driven once; every round codes every testable node it can, so each round is a
complete interconnect test on its own.

Besides the coded nets, a round drives constants: nets the board holds (`hold`, and
compliance-enable pins at their pattern) at their value, nets into logic without boundary
scan (cluster nets) at a safe value (the hold value, else the pull's value, else the BSDL
safe value), and the other outputs of every enabled group at a safe value. Nets the board
marks `never_drive` are never driven: an enable group with an output on one is never used,
and a device whose two-state output sits on one is kept out of EXTEST altogether.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from ..models.board import PinRef
from .scan_pins import BoardPins, ObservingCell, OutputPin

__all__ = ["Node", "Round", "InterconnectPlan", "plan_interconnect"]

Node = tuple[str, ...]  # the nets of one electrical node, the first in board order names it
Group = tuple[int, "int | str"]


@dataclass(frozen=True)
class Round:
    """One round: the driver of every coded node, and the constants driven beside them."""

    number: int
    drivers: dict[Node, OutputPin]  # coded nodes (observed this round), in board order
    observed: dict[Node, tuple[str, ...]]  # coded node -> its nets with an observing cell
    constants: tuple[tuple[OutputPin, str, str], ...]  # (pin, value, why), in chain order
    checks: tuple[tuple[str, str, str], ...]  # (net, value, why): constant expectations
    new_pairs: int  # (node, driver) pairs this round tests for the first time


@dataclass(frozen=True)
class InterconnectPlan:
    rounds: tuple[Round, ...]
    extest: tuple[str, ...]  # devices in EXTEST, chain order
    testable: tuple[Node, ...]  # nodes that get a code in some round
    skipped: dict[str, list[str]] = field(default_factory=dict)  # reason -> nets or pins
    held: dict[Node, str] = field(default_factory=dict)


def plan_interconnect(pins: BoardPins) -> InterconnectPlan:
    """Rounds of enable groups covering every (node, driver) pair that can drive alone."""
    return _Planner(pins).plan()


class _Planner:
    def __init__(self, pins: BoardPins) -> None:
        self.pins = pins
        board = pins.board
        self.board = board
        self.node_of = pins.node_of_net
        self.held: dict[Node, str] = {}
        for net, value in board.hold.items():
            if net in self.node_of:
                self.held.setdefault(self.node_of[net], value)
        for entry in board.chain:  # compliance-enable pins are held at their pattern too
            for pattern in entry.device.compliance:
                for port, value in zip(pattern.ports, pattern.patterns[0] if pattern.patterns else ""):
                    net = board.net_of_pin.get(PinRef(entry.ref, port))
                    if net is not None and value in "01":
                        self.held.setdefault(self.node_of[net], value)
        self.never = {self.node_of[net] for net in board.never_drive if net in self.node_of}
        self.skipped: dict[str, list[str]] = {}

    def skip(self, reason: str, what: str) -> None:
        self.skipped.setdefault(reason, []).append(what)

    # ---- who takes part -----------------------------------------------------------------------
    def node_of_pin(self, pin: PinRef) -> Node | None:
        net = self.board.net_of_pin.get(pin)
        return self.node_of[net] if net is not None else None

    def excluded_devices(self) -> set[int]:
        """Devices that cannot enter EXTEST: a two-state output is on whenever its device drives
        pins, so it must not reach a never_drive net, nor a net where another device's output
        follows that device's own logic (another two-state output, or a device kept out)."""
        out: set[int] = set()
        two_state: dict[Node, set[int]] = {}
        drivers: dict[Node, set[int]] = {}
        for output in self.pins.outputs.values():
            node = output.node
            if node is None:
                continue
            drivers.setdefault(node, set()).add(output.device)
            if output.two_state:
                two_state.setdefault(node, set()).add(output.device)
                if node in self.never:
                    out.add(output.device)
        changed = True
        while changed:
            changed = False
            for node, devices in two_state.items():
                if len(devices) >= 2 or drivers[node] & out:
                    if not devices <= out:
                        out |= devices
                        changed = True
        for idx in sorted(out):
            self.skip("kept out of EXTEST: a two-state output of it would drive a never_drive net "
                      "or fight another device's output", self.pins.refs[idx])
        return out

    def candidates(self, excluded: set[int]) -> list[Node]:
        """Nodes with a scan driver and a scan receiver on two different pins, not guarded."""
        found = []
        for node in self.pins.nodes:
            outputs = [o for o in self.pins.node_outputs(node) if o.device not in excluded]
            observers = [c for c in self.pins.node_observers(node) if c.device not in excluded]
            if not outputs or not observers:
                continue
            if len({o.pin for o in outputs} | {c.pin for c in observers}) < 2:
                continue
            name = node[0]
            if node in self.pins.logic_touched:
                continue  # a cluster net: held at a safe value, not coded
            if node in self.never:
                self.skip("never_drive: not driven", name)
                continue
            if node in self.held:
                continue  # driven at its held value in every round, read back as a check
            if any(o.device in excluded for o in self.pins.node_outputs(node)):
                self.skip("a device kept out of EXTEST could drive it", name)
                continue
            found.append(node)
        return found

    def plan(self) -> InterconnectPlan:
        excluded = self.excluded_devices()
        nodes = self.candidates(excluded)
        extest = set()
        for node in nodes:
            extest |= {o.device for o in self.pins.node_outputs(node)}
            extest |= {c.device for c in self.pins.node_observers(node)}
        extest -= excluded
        while True:
            rounds, driven = self.rounds(nodes, extest, excluded)
            # Every device with an output on a node that some round drives must be in EXTEST, or
            # its own logic could fight the scan driver; adding one may add two-state outputs.
            needed = set(extest)
            for node in driven:
                needed |= {o.device for o in self.pins.node_outputs(node) if o.device not in excluded}
            if needed == extest:
                break
            extest = needed
        testable = tuple(node for node in nodes if any(node in r.drivers for r in rounds))
        tested = set(testable)
        for node in nodes:
            if node not in tested:
                self.skip("no round can drive it alone without fighting another driver", node[0])
        refs = tuple(ref for idx, ref in enumerate(self.pins.refs) if idx in extest)
        return InterconnectPlan(tuple(rounds), refs, testable, self.skipped, self.held)

    # ---- rounds ------------------------------------------------------------------------------
    def rounds(self, nodes: list[Node], extest: set[int], excluded: set[int]
               ) -> tuple[list[Round], set[Node]]:
        pins = self.pins
        candidate = set(nodes)
        # (node, driver) pairs still to drive, keyed by the outputs' identities: boards have
        # tens of thousands, and a pin's own hash is a Python-level call.
        pending: dict[int, OutputPin] = {}
        for node in nodes:
            for output in pins.node_outputs(node):
                if output.device in extest:
                    pending[id(output)] = output
        used: dict[Node, OutputPin] = {}
        rounds: list[Round] = []
        driven_any: set[Node] = set()
        while pending:
            state = _RoundState(self, extest)
            state.always_on()
            for node, value in self.held.items():
                state.drive_constant(node, value)
            covered = [key for key, output in pending.items() if state.try_pin(output, candidate)]
            if not covered:
                # The first pair can never drive alone this way: give it up and say so.
                key = next(iter(pending))
                self.skip("no round can drive it alone without fighting another driver",
                          str(pending.pop(key).pin))
                continue
            for node in nodes:
                if node not in state.node_driver:
                    previous = used.get(node)
                    order = ([previous] if previous is not None else []) + list(pins.node_outputs(node))
                    for output in order:
                        if output.device in extest and state.try_pin(output, candidate):
                            break
            for node in pins.nodes:  # cluster nets held at a safe value where a driver is free
                if node in pins.logic_touched and node not in state.node_driver \
                        and node not in pins.logic_driven and node not in self.never:
                    for output in pins.node_outputs(node):
                        if output.device in extest and state.try_pin(output, candidate):
                            break
            for key in covered:
                pending.pop(key, None)
            finished = state.finish(len(rounds) + 1, candidate, len(covered))
            for node, output in finished.drivers.items():
                used[node] = output
            driven_any |= set(state.node_driver)
            rounds.append(finished)
        return rounds, driven_any


class _RoundState:
    """The enable groups chosen so far in one round and the node each output then drives."""

    def __init__(self, planner: _Planner, extest: set[int]) -> None:
        self.planner = planner
        self.pins = planner.pins
        self.extest = extest
        self.groups: dict[Group, None] = {}
        self.node_driver: dict[Node, OutputPin] = {}
        self.constant: dict[Node, str] = {}  # nodes driven at a constant, and the value

    def can_enable(self, group: Group) -> bool:
        for member in self.pins.group_members.get(group, ()):
            node = member.node
            if node is None:
                continue
            if node in self.planner.never:
                return False
            other = self.node_driver.get(node)
            if other is not None and other is not member:
                return False
            if node in self.pins.logic_driven:
                return False  # a logic output drives it: a scan driver would fight
        return True

    def enable(self, group: Group) -> None:
        self.groups[group] = None
        for member in self.pins.group_members.get(group, ()):
            node = member.node
            if node is not None:
                self.node_driver[node] = member

    def always_on(self) -> None:
        """Two-state outputs of devices in EXTEST drive whatever happens: they come first."""
        for output in self.pins.outputs.values():
            if output.two_state and output.device in self.extest:
                group = output.enable_group
                if group not in self.groups:
                    if self.can_enable(group):
                        self.enable(group)
                    else:
                        self.planner.skip("two two-state outputs share a net", str(output.pin))

    def drive_constant(self, node: Node, value: str) -> None:
        self.constant[node] = value
        if node in self.node_driver:
            return
        for output in self.pins.node_outputs(node):
            if output.device in self.extest and self.can_enable(output.enable_group):
                self.enable(output.enable_group)
                return

    def try_pin(self, output: OutputPin, candidate: set[Node]) -> bool:
        """Enable the output's group if nothing fights; True when the output drives its node."""
        node = output.node
        if node is None or output.device not in self.extest:
            return False
        current = self.node_driver.get(node)
        if current is not None:
            return current is output
        group = output.enable_group
        if group in self.groups or not self.can_enable(group):
            return False
        self.enable(group)
        return True

    def finish(self, number: int, candidate: set[Node], new_pairs: int) -> Round:
        pins = self.pins
        planner = self.planner
        drivers: dict[Node, OutputPin] = {}
        observed: dict[Node, tuple[str, ...]] = {}
        constants: list[tuple[OutputPin, str, str]] = []
        checks: list[tuple[str, str, str]] = []
        for node in pins.nodes:
            output = self.node_driver.get(node)
            if node in candidate and output is not None:
                nets = self.observing_nets(node, output)
                if nets:
                    drivers[node] = output
                    observed[node] = nets
                    continue
            if output is None:
                if node in candidate:
                    pulls = pins.pulls_of(node)
                    if len(pulls) == 1:
                        value = "1" if "up" in pulls else "0"
                        for net in self.observing_nets(node, None):
                            checks.append((net, value, f"no driver this round: the pull-{next(iter(pulls))} holds it"))
                continue
            value, why = self.constant_value(node, output)
            constants.append((output, value, why))
            if node in planner.held:
                for net in self.observing_nets(node, output):
                    checks.append((net, value, "held by the board file"))
        constants.sort(key=lambda c: (c[0].device, c[0].cell))
        return Round(number, drivers, observed, tuple(constants), tuple(checks), new_pairs)

    def constant_value(self, node: Node, output: OutputPin) -> tuple[str, str]:
        planner = self.planner
        if node in planner.held:
            return planner.held[node], "held by the board file"
        pulls = self.pins.pulls_of(node)
        if node in self.pins.logic_touched:
            if len(pulls) == 1:
                return ("1" if "up" in pulls else "0"), "into logic without boundary scan: its pull's value"
            return output.safe, "into logic without boundary scan: the BSDL safe value"
        why = "a two-state output, on in EXTEST" if output.two_state else "enabled with its group"
        if len(pulls) == 1:
            return ("1" if "up" in pulls else "0"), f"{why}: its pull's value"
        return output.safe, f"{why}: the BSDL safe value"

    def observing_nets(self, node: Node, driver: OutputPin | None) -> tuple[str, ...]:
        """The node's nets on which some cell captures the pin, with `driver` the one enabled."""
        board = self.planner.board
        nets = []
        for net in node:
            for pin in board.nets[net].pins:
                cells: tuple[ObservingCell, ...] = self.pins.observers.get(pin, ())
                if any(cell.device in self.extest and
                       (cell.when_driving if driver is not None and pin == driver.pin
                        and cell.function in ("OUTPUT2", "OUTPUT3", "BIDIR") else cell.when_released)
                       for cell in cells):
                    nets.append(net)
                    break
        return tuple(nets)

"""Explanations of failing pin captures: which single faults reproduce what the board returned.

Effect-cause diagnosis: the failing bits name the nodes that read wrong; the candidates are
the faults that could touch those nodes: each net stuck at 0 or 1, each pin and each net open,
and shorts with the nodes that could be on the other side: other failing nodes, nodes whose
own code a failing node read (the other net won or was AND/OR-ed into it), and the nets on
neighbouring package pins (`sim.faults.adjacent_pin_pairs`). A candidate fits when nothing
the board returned contradicts it; it explains the failing bits it reproduces.

The most complete explanation comes first; candidates that explain the same bits equally
well form its ambiguity group (a CMOS receiver that reads 0 may be open or its net stuck at
0; with counting codes, a wired-AND short may read like a dominated one). What the model
cannot predict (logic without boundary scan, fighting drivers) only ranks a candidate lower.
"""

from __future__ import annotations

from dataclasses import dataclass

from bitarray import bitarray

from ..models.board import PinRef
from ..sim.faults import adjacent_pin_pairs
from .fault_model import Candidate, Predictor, open_net, open_pin, short, stuck_at
from .interconnect_plan import Node
from .observations import CellObservation, StateObservations
from .scan_pins import BoardPins

__all__ = ["Explanation", "explain_pin_failures", "KIND_ORDER"]

# Within one ambiguity group: opens first (the commonest assembly fault), then shorts, then
# stuck nets (common practice of repair benches).
KIND_ORDER = {"open": 0, "short": 1, "stuck-at": 2}


@dataclass(frozen=True)
class Explanation:
    """Failing bits explained equally well by every candidate of `group`, most likely first."""

    group: tuple[Candidate, ...]
    covered: int  # failing bits explained
    unknown: int  # of them, only because the model cannot say
    nodes: tuple[Node, ...]  # the failing nodes it accounts for
    states: frozenset[int] = frozenset()  # the states whose captures show it


def explain_pin_failures(observations: StateObservations,
                         failing: list[CellObservation]) -> tuple[list[Explanation], int]:
    """Explanations for the failing cells, and how many failing bits stay unexplained."""
    return _Explainer(observations, failing).run()


class _Explainer:
    def __init__(self, observations: StateObservations, failing: list[CellObservation]) -> None:
        self.obs = observations
        self.pins: BoardPins = observations.pins
        self.board = observations.board
        self.predictor = Predictor(observations)
        self.failing = failing
        self.total: set[tuple[int, int, int]] = set()
        for cell in failing:
            mask, state = cell.failing, 0
            while mask:
                if mask & 1:
                    self.total.add((cell.device, cell.number, state))
                mask >>= 1
                state += 1
        self.failing_pins = {cell.pin for cell in failing if cell.failing}
        self.net_order = {name: i for i, name in enumerate(self.board.nets)}
        self._adjacent: dict[int, dict[str, set[str]]] = {}
        self._cell_pins: dict[int, dict[int, tuple[PinRef, ...]]] = {}

    # ---- partners ------------------------------------------------------------------------
    def node_of_pin(self, pin: PinRef) -> Node | None:
        net = self.board.net_of_pin.get(pin)
        return self.pins.node_of_net[net] if net is not None else None

    def adjacent_nodes(self, node: Node) -> list[Node]:
        """Nodes on package pins next to a pin of `node` (the shorts a solder bridge makes)."""
        found: dict[Node, None] = {}
        for pin in self.pins.node_pins[node]:
            idx = self.pins.index.get(pin.ref)
            if idx is None:
                continue
            table = self._adjacent.get(idx)
            if table is None:
                table = {}
                for a, b in adjacent_pin_pairs(self.pins.tables[idx].device):
                    table.setdefault(a, set()).add(b)
                    table.setdefault(b, set()).add(a)
                self._adjacent[idx] = table
            for port in table.get(pin.port, ()):
                other = self.node_of_pin(PinRef(pin.ref, port))
                if other is not None and other != node:
                    found[other] = None
        return list(found)

    def code_partners(self, cell: CellObservation) -> list[Node]:
        """Nodes whose cells were expected to read what this cell read, in the same captures
        (the other net of a short that won, or was AND/OR-ed into this one).

        Searched bit-parallel per device: each capture's row of compared and expected bits
        narrows the cells that match in every state at once.
        """
        if cell.known != cell.compared:
            return []
        found: dict[Node, None] = {}
        states = self.obs.states
        for idx, device in enumerate(states.devices):
            length = device.length
            if not length:
                continue
            match = bitarray(length, endian="little")
            match.setall(1)
            for state in range(states.count):
                row = slice(state * length, (state + 1) * length)
                compared = device.compare_rows[row]
                if (cell.compared >> state) & 1:
                    match &= compared
                    match &= device.expected_rows[row] if (cell.value >> state) & 1 \
                        else ~device.expected_rows[row]
                else:
                    match &= ~compared
                if not match.any():
                    break
            for number in match.search(1):
                for pin in self.cell_pins(idx).get(number, ()):
                    node = self.node_of_pin(pin)
                    if node is not None:
                        found[node] = None
        return list(found)

    def cell_pins(self, idx: int) -> dict[int, tuple[PinRef, ...]]:
        table = self._cell_pins.get(idx)
        if table is None:
            ref = self.pins.refs[idx]
            collected: dict[int, list[PinRef]] = {}
            for cell in self.pins.tables[idx].device.cells:
                if cell.port is not None:
                    collected.setdefault(cell.number, []).append(PinRef(ref, cell.port))
            table = {number: tuple(found) for number, found in collected.items()}
            self._cell_pins[idx] = table
        return table

    # ---- candidates ----------------------------------------------------------------------
    def candidates(self) -> list[Candidate]:
        failing_nodes: dict[Node, list[CellObservation]] = {}
        for cell in self.failing:
            node = self.node_of_pin(cell.pin)
            if node is not None:
                failing_nodes.setdefault(node, []).append(cell)
        found: dict[str, Candidate] = {}

        def add(candidate: Candidate | None) -> None:
            if candidate is not None:
                found.setdefault(candidate.spec, candidate)

        for node, cells in failing_nodes.items():
            add(stuck_at(self.pins, node, "0"))
            add(stuck_at(self.pins, node, "1"))
            for net in node:
                add(open_net(self.pins, net))
            for pin in self.pins.node_pins[node]:
                add(open_pin(self.pins, pin))
            partners: dict[Node, None] = {}
            for other in failing_nodes:
                if other != node:
                    partners[other] = None
            for cell in cells:
                for other in self.code_partners(cell):
                    if other != node:
                        partners[other] = None
            for other in self.adjacent_nodes(node):
                partners[other] = None
            for other in partners:
                for candidate in self.shorts((node, other)):
                    add(candidate)
        # Several failing nodes that read the very same thing: one short among all of them.
        by_reading: dict[tuple[int, int], list[Node]] = {}
        for node, cells in failing_nodes.items():
            cell = cells[0]
            by_reading.setdefault((cell.compared, cell.value), []).append(node)
        for nodes in by_reading.values():
            if len(nodes) >= 3:
                for candidate in self.shorts(tuple(nodes)):
                    add(candidate)
        return list(found.values())

    def shorts(self, nodes: tuple[Node, ...]) -> list[Candidate]:
        """Wired-AND, wired-OR and each driver dominating, for every choice of named nets."""
        out = []
        order = self.net_order.__getitem__
        if len(nodes) == 2:
            choices = [tuple(sorted((a, b), key=order)) for a in nodes[0] for b in nodes[1]]
        else:
            choices = [tuple(sorted((node[0] for node in nodes), key=order))]
        first, others = choices[0], tuple(choices[1:])
        drivers = [pin for node in nodes for pin in self.pins.node_pins[node]
                   if pin in self.pins.outputs or pin in self.predictor.logic_outputs]
        out.append(short(self.pins, first, "and", also=others))
        out.append(short(self.pins, first, "or", also=others))
        if len(nodes) == 2:
            for pin in drivers:
                out.append(short(self.pins, first, "dominant", pin, also=others))
        return out

    # ---- choosing ------------------------------------------------------------------------
    def run(self) -> tuple[list[Explanation], int]:
        fits = [fit for fit in map(self.predictor.fit, self.candidates()) if fit.fits]
        remaining = set(self.total)
        explanations: list[Explanation] = []
        while remaining and fits:
            scored = [(len(fit.covered & remaining), fit) for fit in fits]
            best_count = max(count for count, _ in scored)
            if best_count == 0:
                break
            best = [fit for count, fit in scored if count == best_count]
            least_unknown = min(fit.unknown for fit in best)
            best = [fit for fit in best if fit.unknown == least_unknown]
            # Candidates explaining exactly the same bits are one ambiguity group.
            anchor = best[0].covered & remaining
            group = [fit for fit in best if fit.covered & remaining == anchor]
            # Equal fits: by kind, then those at a pin whose own cells read wrong (where the
            # bench sees the symptom), then by name.
            group.sort(key=lambda f: (KIND_ORDER.get(f.candidate.kind, 9),
                                      not set(f.candidate.pins) & self.failing_pins, f.candidate.spec))
            nodes = tuple(dict.fromkeys(
                node for fit in group[:1] for net in fit.candidate.nets
                for node in [self.pins.node_of_net[net]]))
            explanations.append(Explanation(tuple(f.candidate for f in group), len(anchor),
                                            least_unknown, nodes,
                                            frozenset(state for _, _, state in anchor)))
            remaining -= anchor
            fits = [fit for fit in fits if fit not in group]
        return explanations, len(remaining)

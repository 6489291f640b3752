"""Faults that stay on their own nodes, graded straight from per-node tables.

Most faults of a board's universe are of one shape: a stuck-at net, a wired-AND or wired-OR
short between two nets, an open receiver pin, on nodes that no logic part reads and that
carry no TAP signal. Such a fault changes only the nodes it touches, and what the program
sees of it is fixed by their levels alone. The general grader (`grading.FaultGrader`) works
such a fault out through its fault effect, its groups and a propagation that finds nothing
to propagate; here each node's summed drives and the compared cells on its pins are kept
once, and a fault costs one resolution and one pass over the cells on its nodes. A node
piece whose level is the fault-free one is only counted as observed: its cells read what
the fault-free board reads, which on every gradable bit is what the program expects.

Any other fault (logic readers, TAP signals, series parts, dominant drivers, opens of a
whole net) is left to the general grader; `tests/test_node_faults.py` holds the two to the
same verdicts.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Iterable

from ..models.board import PinRef
from ..sim.faults import OPEN_PIN, SHORT, STUCK_AT, Fault, tap_ports
from ..sim.resolve import (
    COMBINE_AND, COMBINE_OR, DriveSum, Level, drive_sum, level_of_constant, resolve_joined, resolve_level,
)
from .fault_verdicts import FaultVerdict

if TYPE_CHECKING:
    from .grading import FaultGrader

__all__ = ["NodeFaults"]

# One compared cell on a pin: (reads floating as 1 (TTL), gradable states, gradable states
# expecting 1, gradable states expecting 0, device position, cell number).
_Cell = tuple[bool, int, int, int, int, int]
_COMBINE = {"and": COMBINE_AND, "or": COMBINE_OR}


class NodeFaults:
    """The per-node tables of one grader's fault-free board, and the faults graded from them."""

    def __init__(self, grader: FaultGrader) -> None:
        self.grader = grader
        electrical = grader.electrical
        self.electrical = electrical
        self.full = grader.full
        self.good_levels = grader.good_levels
        self.drives = grader._drives
        self.offset = grader._segment_offset
        node_of_pin = electrical.node_of_pin
        read = {node_of_pin[pin] for pin in electrical.readers_of_pin}
        # Nodes whose faults go the general way: read by logic, or carrying a TAP signal.
        self.blocked = frozenset(read | {node.index for node in electrical.nodes if node.tap})
        self.tap_pins = frozenset(PinRef(entry.ref, port) for entry in electrical.board.chain
                                  for port in tap_ports(entry.device))
        self.pin_cells: dict[PinRef, tuple[_Cell, ...]] = {}
        node_cells: dict[int, list[_Cell]] = {}
        node_seen: dict[int, int] = {}
        full = self.full
        for pin, observers in grader.observers.items():
            ttl = grader.technology(pin.ref) == "ttl"
            cells = tuple((ttl, o.gradable, o.gradable & o.expect1, o.gradable & ~o.expect1 & full,
                           o.device, o.number) for o in observers)
            self.pin_cells[pin] = cells
            node = node_of_pin[pin]
            node_cells.setdefault(node, []).extend(cells)
            seen = node_seen.get(node, 0)
            for cell in cells:
                seen |= cell[1]
            node_seen[node] = seen
        self.node_cells = {node: tuple(cells) for node, cells in node_cells.items()}
        self.node_seen = node_seen
        self._totals: dict[int, DriveSum] = {}
        self._floating = resolve_level(DriveSum(), full)
        self._constants = {value: level_of_constant(value, full) for value in "01"}

    # -- the tables -------------------------------------------------------------------------
    def _total(self, node: int) -> DriveSum:
        """The node's drives and pulls summed as the general grader sums a group of its pins."""
        found = self._totals.get(node)
        if found is None:
            spec = self.electrical.nodes[node]
            drives = self.drives
            found = drive_sum([drives[pin] for pin in spec.pins if pin in drives], spec.pulls, self.full)
            self._totals[node] = found
        return found

    # -- one fault --------------------------------------------------------------------------
    def grade(self, fault: Fault) -> FaultVerdict | None:
        """The verdict, when the fault stays on its own nodes; None leaves it to the general way."""
        kind = fault.kind
        if kind == STUCK_AT:
            return self._stuck(fault)
        if kind == SHORT:
            return self._short(fault)
        if kind == OPEN_PIN:
            return self._open_pin(fault)
        return None

    def _stuck(self, fault: Fault) -> FaultVerdict | None:
        node = self.electrical.node_of_net[fault.nets[0]]
        level = self._constants.get(fault.value)  # type: ignore[arg-type]
        if node in self.blocked or level is None:
            return None
        cells = self.node_cells.get(node)
        return self._findings(fault, ((cells, level),) if cells else (), self.node_seen.get(node, 0))

    def _short(self, fault: Fault) -> FaultVerdict | None:
        combine = _COMBINE.get(fault.mode)
        node_of_net = self.electrical.node_of_net
        a, b = node_of_net[fault.nets[0]], node_of_net[fault.nets[1]]
        blocked = self.blocked
        if combine is None or a == b or a in blocked or b in blocked:
            return None
        level = resolve_joined(self._total(a), self._total(b), self.full, combine)
        node_cells, node_seen = self.node_cells, self.node_seen
        pieces = [(cells, level) for cells in (node_cells.get(a), node_cells.get(b)) if cells]
        return self._findings(fault, pieces, node_seen.get(a, 0) | node_seen.get(b, 0))

    def _open_pin(self, fault: Fault) -> FaultVerdict | None:
        pin = fault.pin
        if pin is None or not fault.nets or pin in self.tap_pins:
            return None
        electrical = self.electrical
        node = electrical.node_of_pin[pin]
        spec = electrical.nodes[node]
        if node in self.blocked or node in electrical.series_of_node or len(spec.nets) > 1:
            return None
        cut = self.drives.get(pin)
        pin_cells = self.pin_cells
        cells = pin_cells.get(pin)
        if cut is None:
            # A receiver only: the rest of the node keeps every drive and pull, so its level
            # is the fault-free one (the sum the fault-free board resolved) and it only counts
            # as observed; the cut pin floats.
            pieces = [(cells, self._floating)] if cells else []
            return self._findings(fault, pieces, self.node_seen.get(node, 0))
        full = self.full
        drives = self.drives
        pieces = [(cells, resolve_level(drive_sum((cut,), (), full), full))] if cells else []
        rest_level = resolve_level(drive_sum([drives[p] for p in spec.pins if p != pin and p in drives],
                                             spec.pulls, full), full)
        if rest_level != self.good_levels[node]:
            pieces.extend((pin_cells[p], rest_level) for p in spec.pins if p != pin and p in pin_cells)
        return self._findings(fault, pieces, self.node_seen.get(node, 0))

    # -- comparing ----------------------------------------------------------------------------
    def _findings(self, fault: Fault, pieces: Iterable[tuple[tuple[_Cell, ...], Level]],
                  seen: int) -> FaultVerdict:
        """The earliest detecting bit, else the earliest bit made X, over the cells read at a level."""
        offset = self.offset
        first_detect: tuple[int, int] | None = None  # (state, scan bit)
        first_possible: tuple[int, int] | None = None
        for cells, level in pieces:
            v0, v1, floating = level.v0, level.v1, level.fl
            r1 = v1 | floating
            cmos0 = v0 | floating
            for ttl, gradable, want1, want0, device, number in cells:
                r0 = v0 if ttl else cmos0
                detect = (want1 & ~r1) | (want0 & ~r0)
                if detect:
                    state = (detect & -detect).bit_length() - 1
                    candidate = (state, offset[(state, device)] + number)
                    if first_detect is None or candidate < first_detect:
                        first_detect = candidate
                elif first_detect is None:
                    possible = gradable & r0 & r1
                    if possible:
                        state = (possible & -possible).bit_length() - 1
                        candidate = (state, offset[(state, device)] + number)
                        if first_possible is None or candidate < first_possible:
                            first_possible = candidate
        return self.grader._verdict(fault, first_detect, first_possible, seen)

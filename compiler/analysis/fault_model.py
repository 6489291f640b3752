"""Candidate faults of the diagnosis and what each makes the receiving cells read.

A candidate replaces some electrical nodes by groups of pins, as the virtual board's faults do
(`sim.fault_effects`): a stuck-at forces a node, an open cuts pins out of their nets (a cut
series-part pin still passes through its part), a short merges two or more nodes under
wired-AND (0 dominates), wired-OR (1 dominates) or one driver dominating. Each group's level is
resolved per state with the virtual board's rules (`sim.resolve`): strong drivers over pulls
and disable results, disagreement X, a node nothing drives floating, which a TTL input reads
as 1 and a CMOS input as undefined (common practice).

A cell then reads, per state, 0, 1, "floating" (a CMOS input that may read anything: a real
board's undefined level, which `simulate --capture` writes as 0) or "unknown" (the model
cannot say: logic without boundary scan, an update stage not known, drivers fighting).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Iterable

from ..models.board import PinRef
from ..sim.fault_effects import split_members
from ..sim.resolve import COMBINE_AND, COMBINE_OR, COMBINE_WIRE, Level, PinDrive, drive_sum, resolve_level
from .interconnect_plan import Node
from .observations import CellObservation, StateObservations
from .scan_pins import BoardPins

__all__ = ["FaultGroup", "Candidate", "Reading", "Fit", "Predictor", "stuck_at", "open_pin",
           "open_net", "short"]


@dataclass(frozen=True, slots=True)
class FaultGroup:
    pins: tuple[PinRef, ...]
    pulls: tuple[str, ...] = ()
    combine: str = COMBINE_WIRE
    forced: str | None = None
    dominant: PinRef | None = None


@dataclass(frozen=True, slots=True)
class Candidate:
    """One fault that might explain what the board returned."""

    kind: str  # "open", "stuck-at" or "short"
    spec: str  # as `scanloom simulate --fault` writes it
    nets: tuple[str, ...]
    pins: tuple[PinRef, ...] = ()  # the pin an open cuts, or the dominating driver
    mode: str = ""  # "and", "or" or "dominant" for shorts
    groups: tuple[FaultGroup, ...] = field(default=(), compare=False)
    value: str | None = None
    also: tuple[str, ...] = ()  # specs of the same electrical fault (nets joined in series)

    @property
    def specs(self) -> tuple[str, ...]:
        return (self.spec, *self.also)


@dataclass(frozen=True, slots=True)
class Reading:
    """What a cell reads per state under a candidate: definite 0 or 1, floating, unknown."""

    zero: int
    one: int
    floating: int
    unknown: int


@dataclass(frozen=True, slots=True)
class Fit:
    """How a candidate meets the observations of the cells it touches."""

    candidate: Candidate
    contradicted: int  # compared bits whose returned value the candidate says cannot be
    covered: frozenset[tuple[int, int, int]]  # (device, cell, state) of failing bits explained
    unknown: int  # of them, explained only because the model cannot say (weaker)

    @property
    def fits(self) -> bool:
        return self.contradicted == 0 and bool(self.covered)


class Predictor:
    """Resolves candidate groups per state and holds them against the returned bits."""

    def __init__(self, observations: StateObservations) -> None:
        self.obs = observations
        self.pins: BoardPins = observations.pins
        self.board = observations.board
        self.full = observations.full
        logic = set()
        for part in self.board.parts.values():
            for out in (*part.logic, *part.enables):
                logic.add(PinRef(part.ref, out))
        self.logic_outputs = frozenset(logic)

    def drive(self, pin: PinRef) -> PinDrive | None:
        output = self.pins.outputs.get(pin)
        if output is not None:
            return self.obs.drive_of(output)
        if pin in self.logic_outputs:
            return PinDrive(self.full, self.full)  # logic without boundary scan: not modelled here
        return None

    def level(self, group: FaultGroup) -> Level:
        drives = [d for d in map(self.drive, group.pins) if d is not None]
        total = drive_sum(drives, group.pulls, self.full)
        dominant = self.drive(group.dominant) if group.dominant is not None else None
        return resolve_level(total, self.full, combine=group.combine, dominant=dominant,
                             forced=group.forced)

    def readings(self, candidate: Candidate) -> list[tuple[CellObservation, Reading]]:
        out = []
        for group in candidate.groups:
            level = self.level(group)
            for pin in group.pins:
                cells = self.obs.cells_of(pin)
                if not cells:
                    continue
                ttl = self.board.technology_of(pin.ref) == "ttl"
                floating = 0 if ttl else level.fl
                may0 = level.v0 | (0 if ttl else level.fl)
                may1 = level.v1 | level.fl
                both = may0 & may1
                reading = Reading(may0 & ~may1, may1 & ~may0, floating, both & ~floating)
                for cell in cells:
                    out.append((cell, reading))
        return out

    def fit(self, candidate: Candidate) -> Fit:
        contradicted = 0
        covered: set[tuple[int, int, int]] = set()
        unknown = 0
        for cell, reading in self.readings(candidate):
            seen = cell.compared & cell.known
            bad = seen & ((reading.zero & cell.value) | (reading.one & ~cell.value))
            contradicted += bin(bad).count("1")
            failing = cell.failing & ~bad
            if failing:
                unknown += bin(failing & reading.unknown).count("1")
                covered.update(_states(cell, failing))
        return Fit(candidate, contradicted, frozenset(covered), unknown)


def _states(cell: CellObservation, mask: int) -> list[tuple[int, int, int]]:
    out = []
    state = 0
    while mask:
        if mask & 1:
            out.append((cell.device, cell.number, state))
        mask >>= 1
        state += 1
    return out

# ---- candidates ---------------------------------------------------------------------------


def _pulls(pins: BoardPins, nets: Iterable[str]) -> tuple[str, ...]:
    return tuple(pins.board.pulls[net] for net in nets if net in pins.board.pulls)


def stuck_at(pins: BoardPins, node: Node, value: str) -> Candidate:
    """The node forced to `value`; naming any of its nets is the same fault."""
    group = FaultGroup(pins.node_pins[node], _pulls(pins, node), forced=value)
    specs = [f"stuck-at-{value}:{net}" for net in node]
    return Candidate("stuck-at", specs[0], node, groups=(group,), value=value, also=tuple(specs[1:]))


def _split(pins: BoardPins, node: Node, cut: set[PinRef], dropped: set[str]) -> tuple[FaultGroup, ...]:
    """The groups a node falls into when the pins in `cut` leave their nets (as the virtual
    board splits it: a cut series-part pin still connects through its part)."""
    board = pins.board
    series = [(PinRef(part.ref, a), PinRef(part.ref, b)) for part in board.parts.values()
              for a, b in part.series
              if board.net_of_pin.get(PinRef(part.ref, a)) in node
              or board.net_of_pin.get(PinRef(part.ref, b)) in node]
    members = split_members(node, cut, dropped, series, board.net_of_pin)
    groups = []
    for items in members:
        nets = tuple(n for n in node if n in items)
        group_pins = [pin for net in nets for pin in board.nets[net].pins if pin not in cut]
        group_pins += [i for i in items if isinstance(i, PinRef)]
        if group_pins:
            groups.append(FaultGroup(tuple(group_pins), _pulls(pins, nets)))
    return tuple(groups)


def open_pin(pins: BoardPins, pin: PinRef) -> Candidate | None:
    net = pins.board.net_of_pin.get(pin)
    if net is None:
        return None
    node = pins.node_of_net[net]
    return Candidate("open", f"open:{pin}", (net,), (pin,), groups=_split(pins, node, {pin}, set()))


def open_net(pins: BoardPins, net: str) -> Candidate:
    node = pins.node_of_net[net]
    cut = set(pins.board.nets[net].pins)
    return Candidate("open", f"open:{net}", (net,), groups=_split(pins, node, cut, {net}))


def short(pins: BoardPins, nets: tuple[str, ...], mode: str, dominant: PinRef | None = None,
          also: tuple[tuple[str, ...], ...] = ()) -> Candidate:
    """A short of several nets' nodes; `nets` in board order, `also` other ways of naming the
    same nodes (a node of nets joined in series)."""
    nodes = list(dict.fromkeys(pins.node_of_net[n] for n in nets))
    all_pins = tuple(p for node in nodes for p in pins.node_pins[node])
    pulls = tuple(x for node in nodes for x in _pulls(pins, node))
    combine = {"and": COMBINE_AND, "or": COMBINE_OR}.get(mode, COMBINE_WIRE)
    suffix = {"and": "", "or": ":or"}.get(mode, f":{dominant}")
    group = FaultGroup(all_pins, pulls, combine, dominant=dominant)
    return Candidate("short", f"short:{','.join(nets)}{suffix}", nets,
                     (dominant,) if dominant is not None else (), mode, (group,),
                     also=tuple(f"short:{','.join(other)}{suffix}" for other in also))

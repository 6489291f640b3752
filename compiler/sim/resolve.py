"""Net resolution, bit-parallel across vectors: Python ints with one bit per vector.

What each pin puts on its node is a `PinDrive`: strong rails (an enabled output), resistive
rails (a WEAK0/WEAK1 or PULL0/PULL1 disable result, or a board pull resistor) and a keeper
(a KEEPER disable result, which holds the node's last value). Rails say whether the drive may
be 0 and may be 1 in each vector, so an unknown drive (X) has both. Summing the drives of a
node and resolving them gives a `Level`: may-be-0, may-be-1 and floating masks.

The rules (common practice for digital board simulation):
- the strongest drive present wins: strong over resistive over the keeper;
- two strong drivers that disagree give X, and the vector is recorded as contention;
  likewise two opposite resistive drives give X;
- a short can resolve disagreement instead: wired-AND (0 dominates, the default for shorts),
  wired-OR (1 dominates) or one named driver dominating;
- a node nothing drives floats; a receiver reads a floating node by its technology: a
  bipolar (TTL) input floats high and reads 1, a CMOS input is undefined (X).

`GroupSolver` resolves a whole (possibly faulted) board: groups of pins are evaluated in
dependency order through the logic parts; a loop that a fault creates is settled by
iterating from X until nothing changes (the least defined fixed point).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable, Iterable, Mapping, Sequence

from ..models.board import PinRef
from .electrical import ElectricalBoard, ScanDriver, strongly_connected
from .logic import PartLogic, Rails, evaluate

__all__ = [
    "PinDrive",
    "NO_DRIVE",
    "DriveSum",
    "Level",
    "Group",
    "GroupSolver",
    "drive_sum",
    "resolve_level",
    "resolve_joined",
    "read_level",
    "scan_pin_drive",
    "logic_drive",
    "pull_drive",
    "contention_mask",
    "level_of_constant",
    "COMBINE_WIRE",
    "COMBINE_AND",
    "COMBINE_OR",
]

COMBINE_WIRE = "wire"  # an ordinary node: disagreement is X
COMBINE_AND = "and"  # wired-AND short: 0 dominates
COMBINE_OR = "or"  # wired-OR short: 1 dominates


@dataclass(frozen=True, slots=True)
class PinDrive:
    """One pin's contribution to its node, per vector (bit v = vector v)."""

    s0: int = 0  # strong, may be 0
    s1: int = 0  # strong, may be 1
    r0: int = 0  # resistive, may be 0
    r1: int = 0  # resistive, may be 1
    keep: int = 0  # a bus keeper holds the node

    @property
    def strong(self) -> int:
        return self.s0 | self.s1


NO_DRIVE = PinDrive()


@dataclass(frozen=True, slots=True)
class DriveSum:
    """The drives of a node, summed: rails ORed, plus who drives a definite 0 or 1."""

    s0: int = 0
    s1: int = 0
    d0: int = 0  # some strong driver is definitely 0
    d1: int = 0  # some strong driver is definitely 1
    r0: int = 0
    r1: int = 0
    e0: int = 0  # some resistive drive is definitely 0
    e1: int = 0
    keep: int = 0

    def plus(self, drive: PinDrive) -> "DriveSum":
        return DriveSum(
            self.s0 | drive.s0, self.s1 | drive.s1,
            self.d0 | (drive.s0 & ~drive.s1), self.d1 | (drive.s1 & ~drive.s0),
            self.r0 | drive.r0, self.r1 | drive.r1,
            self.e0 | (drive.r0 & ~drive.r1), self.e1 | (drive.r1 & ~drive.r0),
            self.keep | drive.keep)


@dataclass(frozen=True, slots=True)
class Level:
    """A resolved node per vector: may be 0, may be 1, floating (then neither)."""

    v0: int
    v1: int
    fl: int

    def rails(self) -> Rails:
        return (self.v0, self.v1)


def level_of_constant(value: str, full: int) -> Level:
    if value == "0":
        return Level(full, 0, 0)
    if value == "1":
        return Level(0, full, 0)
    return Level(full, full, 0)


def pull_drive(direction: str, full: int) -> PinDrive:
    """A board pull resistor: a resistive 1 ("up") or 0 ("down") in every vector."""
    return PinDrive(r1=full) if direction == "up" else PinDrive(r0=full)


def drive_sum(drives: Iterable[PinDrive], pulls: Iterable[str] = (), full: int = 0) -> DriveSum:
    """The sum of many drives (and board pulls), accumulated in plain ints: the hot path."""
    s0 = s1 = d0 = d1 = r0 = r1 = e0 = e1 = keep = 0
    for drive in drives:
        a, b = drive.s0, drive.s1
        s0 |= a
        s1 |= b
        d0 |= a & ~b
        d1 |= b & ~a
        a, b = drive.r0, drive.r1
        r0 |= a
        r1 |= b
        e0 |= a & ~b
        e1 |= b & ~a
        keep |= drive.keep
    for direction in pulls:
        if direction == "up":
            r1 |= full
            e1 |= full
        else:
            r0 |= full
            e0 |= full
    return DriveSum(s0, s1, d0, d1, r0, r1, e0, e1, keep)


def contention_mask(total: DriveSum) -> int:
    """Vectors where two strong drivers definitely disagree (an ordinary node)."""
    return total.d0 & total.d1


def _combined(may0: int, may1: int, def0: int, def1: int, present: int, combine: str) -> Rails:
    if combine == COMBINE_AND:
        return (may0, present & ~def0)
    if combine == COMBINE_OR:
        return (present & ~def1, may1)
    return (may0, may1)


def resolve_level(total: DriveSum, full: int, *, combine: str = COMBINE_WIRE,
                  dominant: PinDrive | None = None, forced: str | None = None,
                  previous: Level | None = None) -> Level:
    """The level of a node from its summed drives, for every vector at once.

    A keeper holds the node's value from before: `previous` gives it per vector (when vectors
    come one at a time, the level the node had); without it, vector v holds the value of the
    most recent earlier vector in which the keeper did not decide (X before any), so the
    answer is the same whether vectors come one by one or all at once.
    """
    if forced is not None:
        return level_of_constant(forced, full)
    return _resolve(total.s0, total.s1, total.d0, total.d1, total.r0, total.r1, total.e0, total.e1,
                    total.keep, full, combine, dominant, previous)


def resolve_joined(first: DriveSum, second: DriveSum, full: int, combine: str) -> Level:
    """The level of two nodes joined into one (a short): both nodes' drives summed, resolved
    under `combine`, exactly as `resolve_level` resolves the sum of all their drives."""
    return _resolve(first.s0 | second.s0, first.s1 | second.s1, first.d0 | second.d0,
                    first.d1 | second.d1, first.r0 | second.r0, first.r1 | second.r1,
                    first.e0 | second.e0, first.e1 | second.e1, first.keep | second.keep,
                    full, combine, None, None)


def _resolve(s0: int, s1: int, d0: int, d1: int, r0: int, r1: int, e0: int, e1: int, keep: int,
             full: int, combine: str, dominant: PinDrive | None, previous: Level | None) -> Level:
    strong = s0 | s1
    v0, v1 = _combined(s0, s1, d0, d1, strong, combine)
    if dominant is not None:
        wins = dominant.s0 | dominant.s1
        v0 = (v0 & ~wins) | dominant.s0
        v1 = (v1 & ~wins) | dominant.s1
    resistive = (r0 | r1) & ~strong
    w0, w1 = _combined(r0, r1, e0, e1, r0 | r1, combine)
    v0 |= w0 & resistive
    v1 |= w1 & resistive
    kept = keep & ~strong & ~resistive & full
    floating = full & ~(strong | resistive | kept)
    if kept:
        if previous is not None:
            # The keeper holds what the node was: `previous` gives it for the same vectors.
            # A floating previous node gives the keeper nothing to hold: X.
            v0 |= kept & (previous.v0 | previous.fl)
            v1 |= kept & (previous.v1 | previous.fl)
        else:
            h0, h1 = _hold_forward(v0 | floating, v1 | floating, full & ~kept, full)
            v0 |= h0 & kept
            v1 |= h1 & kept
    return Level(v0 & full, v1 & full, floating)


def _hold_forward(values0: int, values1: int, known: int, full: int) -> Rails:
    """For every vector, the value of the nearest earlier-or-same vector in `known` (X if none).

    Doubling steps: after the step of distance d every vector carries the nearest known
    value within distance 2d, so a run of n vectors takes log2(n) steps.
    """
    have = known
    h0, h1 = values0 & known, values1 & known
    distance = 1
    width = full.bit_length()
    while distance < width and have != full:
        take = ~have & (have << distance) & full
        h0 |= (h0 << distance) & take
        h1 |= (h1 << distance) & take
        have |= take
        distance <<= 1
    missing = full & ~have
    return (h0 | missing, h1 | missing)


def read_level(level: Level, technology: str) -> Rails:
    """What a receiver reads: a floating node reads 1 on TTL, X on CMOS (common practice)."""
    if technology == "ttl":
        return (level.v0, level.v1 | level.fl)
    return (level.v0 | level.fl, level.v1 | level.fl)


def scan_pin_drive(driver: ScanDriver, data: Rails, control: Rails | None, driving: int,
                   unknown: int, full: int) -> PinDrive:
    """A scan output: its update latch (`data`) where the instruction drives the pins.

    `driving` marks vectors whose instruction drives pins from the boundary register (EXTEST,
    CLAMP, INTEST ...); `unknown` marks vectors whose instruction is not known (the pin may do
    anything: strong X). The control cell enables the output unless it holds the disable
    value; elsewhere the pin shows its disable result, also outside the driving instructions
    (the virtual board does not model core logic: a pin it does not drive is released).
    """
    if control is None or driver.disable_value is None:
        en0, en1 = 0, full
    elif driver.disable_value == 0:
        en0, en1 = control
    else:
        en1, en0 = control
    d0, d1 = data
    on = driving & en1
    s0 = (on & (d0 | en0)) | unknown
    s1 = (on & (d1 | en0)) | unknown
    disabled = full & ~unknown & ~(driving & en1)
    result = driver.disable_result
    if result == "Z" or not disabled:
        return PinDrive(s0, s1)
    if result in ("WEAK0", "PULL0"):
        return PinDrive(s0, s1, r0=disabled)
    if result in ("WEAK1", "PULL1"):
        return PinDrive(s0, s1, r1=disabled)
    return PinDrive(s0, s1, keep=disabled)  # KEEPER


def logic_drive(value: Rails, enable: Rails | None) -> PinDrive:
    """A logic output: strong where enabled, absent where disabled, X where the enable is X."""
    if enable is None:
        return PinDrive(value[0], value[1])
    en0, en1 = enable
    return PinDrive(en1 & (value[0] | en0), en1 & (value[1] | en0))


@dataclass(frozen=True, slots=True)
class Group:
    """Pins that form one electrical node on a (possibly faulted) board."""

    label: str
    pins: tuple[PinRef, ...]
    pulls: tuple[str, ...] = ()
    combine: str = COMBINE_WIRE
    dominant: PinRef | None = None
    forced: str | None = None
    nets: tuple[str, ...] = field(default=(), compare=False)


ExtraDrive = Callable[[int], PinDrive | None]


class GroupSolver:
    """Resolves every group of a board, through its logic, in dependency order.

    Built once per topology (the fault-free nodes, or a faulted set of groups); `solve` is
    then called per vector set. A dependency loop among groups (only a fault can create one:
    the fault-free board is checked to be loop-free) is settled by iterating from X.
    """

    def __init__(self, electrical: ElectricalBoard, groups: Sequence[Group],
                 group_of_pin: Mapping[PinRef, int], solve_only: Iterable[int] | None = None) -> None:
        self.electrical = electrical
        self.groups = tuple(groups)
        self.group_of_pin = group_of_pin
        self.scan_pins: list[tuple[PinRef, ...]] = []
        self.logic_pins: list[tuple[PartLogic, ...]] = []
        for group in self.groups:
            self.scan_pins.append(tuple(p for p in group.pins if p in electrical.drivers))
            self.logic_pins.append(tuple(electrical.logic_of_pin[p] for p in group.pins
                                         if p in electrical.logic_of_pin))
        members = list(range(len(self.groups))) if solve_only is None else sorted(set(solve_only))
        self.units = self._order(members)

    def _order(self, members: list[int]) -> list[tuple[int, ...]]:
        """Groups in dependency order; a tuple of several groups is a loop to settle."""
        if not any(self.logic_pins[group] for group in members):
            return [(group,) for group in members]  # nothing depends on anything: as listed
        inside = set(members)
        position = {group: i for i, group in enumerate(members)}
        depends: list[list[int]] = []
        for group in members:
            found: dict[int, None] = {}
            for item in self.logic_pins[group]:
                for name in item.reads:
                    source = self.group_of_pin[PinRef(item.part, name)]
                    if source in inside:
                        found[position[source]] = None
            depends.append(list(found))
        units: list[tuple[int, ...]] = []
        for component in strongly_connected(depends):
            units.append(tuple(members[i] for i in component))
            if len(component) == 1 and component[0] not in depends[component[0]]:
                units[-1] = (members[component[0]],)
            else:
                units[-1] = units[-1] + (-1,)  # marks a loop
        return units

    def total_of(self, group: int, scan_drive: Callable[[PinRef], PinDrive], full: int,
                 level_of: Callable[[int], Level]) -> tuple[DriveSum, PinDrive | None]:
        """The summed drives of a group (scan outputs, logic outputs, pulls) and its dominant drive."""
        spec = self.groups[group]
        technology = self.electrical.board.technology_of
        drives: list[PinDrive] = []
        dominant = None
        for pin in self.scan_pins[group]:
            drive = scan_drive(pin)
            drives.append(drive)
            if pin == spec.dominant:
                dominant = drive
        for item in self.logic_pins[group]:
            inputs = {name: read_level(level_of(self.group_of_pin[PinRef(item.part, name)]),
                                       technology(item.part)) for name in item.reads}
            value = evaluate(item.expression, inputs, full)
            enable = evaluate(item.enable, inputs, full) if item.enable is not None else None
            drive = logic_drive(value, enable)
            drives.append(drive)
            if PinRef(item.part, item.pin) == spec.dominant:
                dominant = drive
        return drive_sum(drives, spec.pulls, full), dominant

    def solve(self, scan_drive: Callable[[PinRef], PinDrive], full: int,
              outside: Callable[[int], Level] | None = None,
              previous: Sequence[Level] | None = None,
              extra: ExtraDrive | None = None,
              totals: dict[int, DriveSum] | None = None) -> dict[int, Level]:
        """Levels of the solved groups; groups outside come from `outside`.

        `extra` adds a drive to a group (a TAP signal shorted onto it); `totals`, when given,
        receives every solved group's summed drives (for contention reports).
        """
        levels: dict[int, Level] = {}

        def level_of(group: int) -> Level:
            found = levels.get(group)
            if found is None:
                assert outside is not None, f"group {group} is neither solved nor given"
                found = outside(group)
            return found

        def resolve(group: int) -> Level:
            spec = self.groups[group]
            if spec.forced is not None:
                return level_of_constant(spec.forced, full)
            total, dominant = self.total_of(group, scan_drive, full, level_of)
            if extra is not None:
                added = extra(group)
                if added is not None:
                    total = total.plus(added)
            if totals is not None:
                totals[group] = total
            before = previous[group] if previous is not None else None
            return resolve_level(total, full, combine=spec.combine, dominant=dominant,
                                 previous=before)

        for unit in self.units:
            if unit[-1] != -1:
                levels[unit[0]] = resolve(unit[0])
                continue
            loop = unit[:-1]
            for group in loop:
                levels[group] = Level(full, full, 0)
            for _ in range(4 * len(loop) + 4):
                changed = False
                for group in loop:
                    level = resolve(group)
                    if level != levels[group]:
                        levels[group] = level
                        changed = True
                if not changed:
                    break
        return levels

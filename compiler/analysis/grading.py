"""The fast fault grader: what a program really detects, bit-parallel across all its scans.

The fault-free board is worked out once, for every state of the program at once (one bit per
state in Python ints): each scan output's drive, each node's level, each logic output, and
for every receiving cell the states in which a compared bit captures its pin. A fault then
costs one pass over the few nodes it touches: the groups that replace them are resolved
from the precomputed drives, changes travel through the logic parts, and each receiver
on a changed node compares what it would read with what the program expects:

- detected: some compared bit has a known value that differs from the expected one;
- possibly detected: no bit differs for sure, but some compared bit becomes X (an open CMOS
  input, a fight between drivers) where the fault-free board gives the expected value;
- not detected: every compared bit reads as the fault-free board does; a reason says why.

Only compared bits on which the fault-free board itself agrees with the expectations take
part. A fault on a TAP signal is graded the same way as long as it cannot change what any
TAP input reads; once it can, the scans themselves change, and the cycle-level virtual
board plays the program with that fault (stopping at its first detection).
"""

from __future__ import annotations

import heapq
from dataclasses import dataclass, field
from typing import Callable, Iterable, Mapping, Sequence

from ..backend.cycle_stream import CycleStream
from ..backend.records import ScanProgram
from ..models.board import PinRef
from ..models.cells import PIN, resolve_capture
from ..sim.electrical import CaptureCell, ElectricalBoard
from ..sim.fault_effects import FaultEffect, fault_effect, faulted_groups, good_groups
from ..sim.faults import OPEN_NET, OPEN_PIN, SHORT, STUCK_AT, TAP_SHORT, Fault
from ..sim.logic import evaluate
from ..sim.resolve import (
    DriveSum, Group, GroupSolver, Level, PinDrive, drive_sum, logic_drive, read_level,
    resolve_level, scan_pin_drive,
)
from ..sim.tap_lines import EDGE, LineMap, clock_activity, line_map, tap_driver_drive
from ..sim.virtual_board import SimulationResult, VirtualBoard, check_chain
from .bit_meaning import ScanIndex
from .fault_verdicts import (
    DETECTED, NOT_DETECTED, POSSIBLY_DETECTED, ClassCoverage, Detection, FaultVerdict, GradingReport,
    verdict_from_simulation,
)
from .node_faults import NodeFaults
from .scan_states import ScanStates, column, scan_states

__all__ = [
    "DETECTED",
    "POSSIBLY_DETECTED",
    "NOT_DETECTED",
    "Detection",
    "FaultVerdict",
    "ClassCoverage",
    "GradingReport",
    "FaultGrader",
    "grade_faults",
    "verdict_from_simulation",
]

@dataclass(frozen=True, slots=True)
class _Observer:
    """A receiving cell: the states in which a gradable compared bit captures its pin."""

    device: int
    number: int
    gradable: int
    expect1: int
    compared: int


@dataclass
class _Pass:
    """The work of one fault: the changed groups and logic drives."""

    effect: FaultEffect
    pin_key: dict[PinRef, int]
    levels: dict[int, Level] = field(default_factory=dict)
    logic: dict[PinRef, PinDrive] = field(default_factory=dict)
    extra: dict[int, PinDrive] = field(default_factory=dict)
    previous_good: bool = False


def _rails(value: int, known: int, full: int) -> tuple[int, int]:
    value &= known
    return (full & ~value, value | (full & ~known))


def _capture_masks(cell: CaptureCell, classes: Mapping[str, int]) -> tuple[int, int, int]:
    """The states (by capture class) in which `cell` captures its pin: always, only with the
    pin's output released, only with it driving (BIDIR cells capture per direction)."""
    always = released = driving = 0
    for cls, mask in classes.items():
        if not mask:
            continue
        when_released = resolve_capture(cell.info, cell.function, cls, False) == PIN
        when_driving = resolve_capture(cell.info, cell.function, cls, True) == PIN
        if when_released and when_driving:
            always |= mask
        elif when_released:
            released |= mask
        elif when_driving:
            driving |= mask
    return always, released, driving


class FaultGrader:
    """Grades faults of one program on one board; the fault-free work is done once."""

    def __init__(self, electrical: ElectricalBoard, program: ScanProgram, cycles: CycleStream,
                 *, fast: bool = True) -> None:
        """`fast=False` grades every fault the general way (the reference for the fast path)."""
        check_chain(electrical, program)
        self.electrical = electrical
        self.program = program
        self.cycles = cycles
        self.index = ScanIndex(program, cycles)
        self.states: ScanStates = scan_states(program, cycles, electrical.board)
        self.full = self.states.full
        technologies = {ref: electrical.board.technology_of(ref)
                        for ref in list(electrical.refs) + list(electrical.board.parts)}
        self.technology = technologies.__getitem__
        self._pin_drive = self._scan_drives()
        self.good_groups = good_groups(electrical)
        solver = GroupSolver(electrical, self.good_groups, electrical.node_of_pin)
        solved = solver.solve(self._pin_drive.__getitem__, self.full)
        self.good_levels = [solved[i] for i in range(len(electrical.nodes))]
        self.good_logic: dict[PinRef, PinDrive] = {}
        for item in electrical.logic:
            inputs = {name: self._good_read(PinRef(item.part, name)) for name in item.reads}
            value = evaluate(item.expression, inputs, self.full)
            enable = evaluate(item.enable, inputs, self.full) if item.enable is not None else None
            self.good_logic[PinRef(item.part, item.pin)] = logic_drive(value, enable)
        self.observers, self.excluded_bits = self._observers()
        self._segment_offset = {(event.state, d): at for event in self.states.captures
                                for d, register, at, _ in event.layout if register == "BOUNDARY"}
        self._drives: dict[PinRef, PinDrive] = {**self.good_logic, **self._pin_drive}
        self._successors: dict[int, set[int]] | None = None
        self._good_simulation: SimulationResult | None = None
        self._detections: dict[tuple[int, int], Detection] = {}
        self._node_faults = NodeFaults(self) if fast else None
        self.simulated = 0

    # -- the fault-free board ------------------------------------------------------------------
    def _scan_drives(self) -> dict[PinRef, PinDrive]:
        full = self.full
        drives: dict[PinRef, PinDrive] = {}
        for pin, driver in self.electrical.drivers.items():
            states = self.states.devices[driver.device]
            width = states.length
            known = states.update_known

            def rails(cell: int | None) -> tuple[int, int] | None:
                if cell is None or not 0 <= cell < width:
                    return None if cell is None else (full, full)
                return _rails(column(states.update_rows, width, cell), known, full)

            data = rails(driver.cell) or (full, full)
            control = rails(driver.control) if driver.control is not None else None
            drives[pin] = scan_pin_drive(driver, data, control, states.drive, 0, full)
        return drives

    def _good_read(self, pin: PinRef) -> tuple[int, int]:
        return read_level(self.good_levels[self.electrical.node_of_pin[pin]], self.technology(pin.ref))

    def _enabled(self, pin: PinRef) -> tuple[int, int]:
        """States in which the pin's own output is surely off, surely on (for BIDIR captures)."""
        full = self.full
        driver = self.electrical.drivers.get(pin)
        if driver is None:
            return (full, 0)
        states = self.states.devices[driver.device]
        drive = states.drive
        if driver.control is None or driver.disable_value is None:
            return (full & ~drive, drive)
        known = states.update_known & drive
        bits = column(states.update_rows, states.length, driver.control) if 0 <= driver.control < states.length else 0
        on = (bits if driver.disable_value == 0 else ~bits) & known & full
        off = (full & ~drive) | (known & ~on & full)
        return (off, on)

    def _observers(self) -> tuple[dict[PinRef, tuple[_Observer, ...]], int]:
        full = self.full
        observers: dict[PinRef, tuple[_Observer, ...]] = {}
        excluded = 0
        # Per device, cell description and function: the states in which the cell captures its
        # pin whatever the pin's own output does, only while it is released, only while it
        # drives (boards repeat a few cell types; every state's capture class is known).
        captures: dict[tuple[int, int, str], tuple[int, int, int]] = {}
        for pin, receiver in self.electrical.receivers.items():
            states = self.states.devices[receiver.device]
            off, on = self._enabled(pin)
            g0, g1 = self._good_read(pin)
            good_known = (g0 ^ g1) & full
            found: list[_Observer] = []
            for cell in receiver.cells:
                if not 0 <= cell.number < states.length:
                    continue
                key = (receiver.device, id(cell.info), cell.function)
                masks = captures.get(key)
                if masks is None:
                    masks = captures[key] = _capture_masks(cell, states.classes)
                always, released, driving = masks
                pin_mask = always | (released & off) | (driving & on)
                compared = column(states.compare_rows, states.length, cell.number) & pin_mask
                if not compared:
                    continue
                expect1 = column(states.expected_rows, states.length, cell.number) & compared
                gradable = compared & good_known & ~((g1 & ~g0) ^ expect1)
                excluded += bin(compared & ~gradable).count("1")
                found.append(_Observer(receiver.device, cell.number, gradable, expect1, compared))
            if found:
                observers[pin] = tuple(found)
        return observers, excluded

    # -- one fault -----------------------------------------------------------------------------
    def grade(self, fault: Fault) -> FaultVerdict:
        if self._node_faults is not None:
            verdict = self._node_faults.grade(fault)
            if verdict is not None:
                return verdict
        effect = fault_effect(self.electrical, fault)
        if effect.note is not None:
            return FaultVerdict(fault, NOT_DETECTED, reason=effect.note)
        if effect.tap is not None:
            return self._grade_tap(effect)
        return self._grade_masks(effect)

    def _grade_masks(self, effect: FaultEffect, extra: Mapping[int, PinDrive] | None = None) -> FaultVerdict:
        if self._closes_loop(effect):
            pins, pin_level = self._settle_loop(effect, extra)
        else:
            work = self._propagate(effect, extra)
            touched: dict[PinRef, None] = {}
            for group in effect.groups:
                touched.update(dict.fromkeys(group.pins))
            for key in work.levels:
                if key < 0:
                    touched.update(dict.fromkeys(self.good_groups[-1 - key].pins))
            pins, pin_level = list(touched), self._pin_level_of(work)
        return self._compare(effect, pins, pin_level)

    def _pin_level_of(self, work: _Pass) -> Callable[[PinRef], Level | None]:
        node_of_pin = self.electrical.node_of_pin

        def pin_level(pin: PinRef) -> Level | None:
            key = work.pin_key.get(pin)
            if key is None:
                key = -1 - node_of_pin[pin]
            return work.levels.get(key)

        return pin_level

    def _group_of(self, work: _Pass, key: int) -> Group:
        if key >= 0:
            return work.effect.groups[key]
        return self.good_groups[-1 - key]

    def _level(self, work: _Pass, key: int) -> Level:
        found = work.levels.get(key)
        if found is not None:
            return found
        if key >= 0:
            raise KeyError(key)
        return self.good_levels[-1 - key]

    def _key(self, work: _Pass, pin: PinRef) -> int:
        key = work.pin_key.get(pin)
        return key if key is not None else -1 - self.electrical.node_of_pin[pin]

    def _resolve(self, work: _Pass, key: int) -> Level:
        group = self._group_of(work, key)
        full = self.full
        if group.forced is not None:
            return resolve_level(DriveSum(), full, forced=group.forced)
        dominant = None
        changed = work.logic
        drives = self._drives
        present: list[PinDrive] = []
        for pin in group.pins:
            drive = changed.get(pin) if changed else None
            if drive is None:
                drive = drives.get(pin)
                if drive is None:
                    continue
            present.append(drive)
            if pin == group.dominant:
                dominant = drive
        total = drive_sum(present, group.pulls, full)
        added = work.extra.get(key)
        if added is not None:
            total = total.plus(added)
        previous = None
        if work.previous_good:
            previous = self._previous_good(work, key)
        return resolve_level(total, full, combine=group.combine, dominant=dominant, previous=previous)

    def _previous_good(self, work: _Pass, key: int) -> Level:
        group = self._group_of(work, key)
        node = self.electrical.node_of_pin[group.pins[0]]
        return self.good_levels[node]

    def _propagate(self, effect: FaultEffect, extra: Mapping[int, PinDrive] | None) -> _Pass:
        """Resolve the fault's groups, then carry changes through the logic parts in order."""
        pin_key = {pin: i for i, group in enumerate(effect.groups) for pin in group.pins}
        work = _Pass(effect, pin_key, extra=dict(extra or {}), previous_good=extra is not None)
        readers = self.electrical.readers_of_pin
        queue: list[int] = []
        queued: set[int] = set()

        def push_readers(key: int) -> None:
            for pin in self._group_of(work, key).pins:
                for index in readers.get(pin, ()):
                    if index not in queued:
                        queued.add(index)
                        heapq.heappush(queue, index)

        source = effect.replaced[0] if len(effect.replaced) == 1 else None
        for key, group in enumerate(effect.groups):
            level = self._resolve(work, key)
            work.levels[key] = level
            if source is not None and key not in work.extra and level == self.good_levels[source]:
                continue  # this piece of the one node the fault touches reads as before
            push_readers(key)
        logic = self.electrical.logic
        while queue:
            index = heapq.heappop(queue)
            queued.discard(index)
            item = logic[index]
            out = PinRef(item.part, item.pin)
            technology = self.technology(item.part)
            inputs = {name: read_level(self._level(work, self._key(work, PinRef(item.part, name))), technology)
                      for name in item.reads}
            value = evaluate(item.expression, inputs, self.full)
            enable = evaluate(item.enable, inputs, self.full) if item.enable is not None else None
            drive = logic_drive(value, enable)
            if drive == work.logic.get(out, self.good_logic[out]):
                continue
            work.logic[out] = drive
            key = self._key(work, out)
            level = self._resolve(work, key)
            if level != self._level(work, key):
                work.levels[key] = level
                push_readers(key)
        return work

    # -- loops a short closes ------------------------------------------------------------------
    def _logic_successors(self) -> dict[int, set[int]]:
        if self._successors is None:
            successors: dict[int, set[int]] = {}
            node_of_pin = self.electrical.node_of_pin
            for item in self.electrical.logic:
                out = node_of_pin[PinRef(item.part, item.pin)]
                for name in item.reads:
                    successors.setdefault(node_of_pin[PinRef(item.part, name)], set()).add(out)
            self._successors = successors
        return self._successors

    def _reaches(self, start: int, goal: int) -> bool:
        successors = self._logic_successors()
        seen = {start}
        frontier = [start]
        while frontier:
            node = frontier.pop()
            for following in successors.get(node, ()):
                if following == goal:
                    return True
                if following not in seen:
                    seen.add(following)
                    frontier.append(following)
        return False

    def _closes_loop(self, effect: FaultEffect) -> bool:
        if effect.fault.kind != SHORT or len(effect.replaced) != 2:
            return False
        a, b = effect.replaced
        successors = self._logic_successors()
        if a not in successors and b not in successors:
            return False
        return self._reaches(a, b) or self._reaches(b, a)

    def _settle_loop(self, effect: FaultEffect, extra: Mapping[int, PinDrive] | None
                     ) -> tuple[list[PinRef], Callable[[PinRef], Level | None]]:
        """A short that closes a loop through logic: settle the faulted cone from X."""
        groups, group_of_pin, new = faulted_groups(self.electrical, effect)
        replaced = set(effect.replaced)
        good_index = [node.index for node in self.electrical.nodes if node.index not in replaced]
        readers = self.electrical.readers_of_pin
        cone = set(new)
        frontier = list(new)
        while frontier:
            following = []
            for g in frontier:
                for pin in groups[g].pins:
                    for index in readers.get(pin, ()):
                        item = self.electrical.logic[index]
                        out = group_of_pin[PinRef(item.part, item.pin)]
                        if out not in cone:
                            cone.add(out)
                            following.append(out)
            frontier = following
        solver = GroupSolver(self.electrical, groups, group_of_pin, solve_only=cone)

        def outside(g: int) -> Level:
            return self.good_levels[good_index[g]]

        added = None
        if extra:
            by_group = {new[key]: drive for key, drive in extra.items()}
            added = by_group.get
        solved = solver.solve(self._pin_drive.__getitem__, self.full, outside=outside, extra=added)
        changed = {g: level for g, level in solved.items()
                   if g >= len(good_index) or level != self.good_levels[good_index[g]]}

        def pin_level(pin: PinRef) -> Level | None:
            return changed.get(group_of_pin[pin])

        return [pin for g in changed for pin in groups[g].pins], pin_level

    # -- comparing -----------------------------------------------------------------------------
    def _compare(self, effect: FaultEffect, pins: Iterable[PinRef],
                 pin_level: Callable[[PinRef], Level | None]) -> FaultVerdict:
        full = self.full
        first_detect: tuple[int, int] | None = None  # (state, scan bit)
        first_possible: tuple[int, int] | None = None
        seen_observed = 0
        for pin in pins:
            observers = self.observers.get(pin)
            if not observers:
                continue
            level = pin_level(pin)
            if level is None:
                continue
            r0, r1 = read_level(level, self.technology(pin.ref))
            for obs in observers:
                seen_observed |= obs.gradable
                detect = obs.gradable & ((obs.expect1 & ~r1) | (~obs.expect1 & full & ~r0))
                if detect:
                    first_detect = self._earlier(first_detect, detect, obs)
                elif first_detect is None:
                    possible = obs.gradable & r0 & r1
                    if possible:
                        first_possible = self._earlier(first_possible, possible, obs)
        return self._verdict(effect.fault, first_detect, first_possible, seen_observed)

    def _verdict(self, fault: Fault, first_detect: tuple[int, int] | None,
                 first_possible: tuple[int, int] | None, seen: int) -> FaultVerdict:
        """Detected at the first detecting (state, bit), else possibly detected at the first
        possible one, else not detected, with the reason."""
        if first_detect is not None:
            return FaultVerdict(fault, DETECTED, self._detection(*first_detect))
        if first_possible is not None:
            return FaultVerdict(fault, POSSIBLY_DETECTED, self._detection(*first_possible))
        return FaultVerdict(fault, NOT_DETECTED, reason=self._reason(fault, seen))

    def _earlier(self, best: tuple[int, int] | None, mask: int, obs: _Observer) -> tuple[int, int]:
        state = (mask & -mask).bit_length() - 1
        candidate = (state, self._segment_offset[(state, obs.device)] + obs.number)
        return candidate if best is None or candidate < best else best

    def _detection(self, state: int, scan_bit: int) -> Detection:
        """The bit as a detection; kept per bit, since many faults first show on one bit."""
        key = (state, scan_bit)
        found = self._detections.get(key)
        if found is None:
            event = self.states.capture_of_state[state]
            cycle = event.shift_start + scan_bit
            found = Detection(event.record, scan_bit, cycle,
                              self.index.scan_meaning(event.record, scan_bit, cycle))
            self._detections[key] = found
        return found

    # -- reasons -------------------------------------------------------------------------------
    def _reason(self, fault: Fault, observed: int) -> str:
        target = str(fault.pin) if fault.kind == OPEN_PIN and fault.pin is not None else " and ".join(fault.nets)
        if not observed:
            return f"no compared bit captures {target}"
        full = self.full
        if fault.kind == STUCK_AT:
            return f"{fault.nets[0]} is {fault.value} in every compared step that observes it"
        if fault.kind in (OPEN_PIN, OPEN_NET):
            pin = fault.pin
            if pin is not None and pin in self.observers:
                technology = self.technology(pin.ref)
                if technology == "ttl":
                    return (f"{fault.nets[0] if fault.nets else pin} is driven 1 in every compared step "
                            "and an open TTL input also reads 1")
            return f"every compared receiver still reads {target} as without the open"
        if fault.kind == SHORT:
            a = self.good_levels[self.electrical.node_of_net[fault.nets[0]]]
            b = self.good_levels[self.electrical.node_of_net[fault.nets[1]]]
            opposite = ((a.v0 & ~a.v1 & b.v1 & ~b.v0) | (a.v1 & ~a.v0 & b.v0 & ~b.v1)) & observed & full
            if not opposite:
                return "the two nets are never driven to opposite values in a compared step"
            if fault.mode == "dominant":
                return f"where the nets differ, {fault.dominant} drives the value every compared bit expects"
            winner = "0" if fault.mode == "and" else "1"
            return (f"where the nets are driven to opposite values, the net that wins ({winner}) "
                    "is the only one observed")
        if fault.kind == TAP_SHORT:
            return f"{fault.nets[0]} never pulls the TAP signal away, and no compared bit sees the net change"
        return "no compared bit sees a different value"

    # -- TAP signals ---------------------------------------------------------------------------
    def _grade_tap(self, effect: FaultEffect) -> FaultVerdict:
        tap = effect.tap
        assert tap is not None
        if self._tap_disturbed(effect):
            return self._grade_cycles(effect)
        extra: dict[int, PinDrive] = {}
        if tap.how == "short" and tap.group is not None:
            extra[tap.group] = self._tap_drive_at_captures(effect)
        return self._grade_masks(effect, extra if extra else None)

    def _net_total(self, effect: FaultEffect) -> DriveSum | None:
        tap = effect.tap
        if tap is None or tap.group is None:
            return None
        group = effect.groups[tap.group]
        present = [drive for drive in (self._drives.get(pin) for pin in group.pins) if drive is not None]
        return drive_sum(present, group.pulls, self.full)

    def _tap_disturbed(self, effect: FaultEffect) -> bool:
        """True when, in some state, some TAP input could read other than on the fault-free board."""
        tap = effect.tap
        assert tap is not None
        count = len(self.electrical.refs)
        total = self._net_total(effect)
        if tap.how != "short":
            return not all(self._line_healthy(line, line_map(line, tap, None, count, self._tech(line)))
                           for line in tap.lines)
        assert total is not None
        fields = ("s0", "s1", "d0", "d1", "r0", "r1", "e0", "e1", "keep")
        seen: set[tuple[int, ...]] = set()
        for state in range(self.states.count):
            bits = tuple((getattr(total, name) >> state) & 1 for name in fields)
            if bits in seen:
                continue
            seen.add(bits)
            single = DriveSum(*bits)
            for line in tap.lines:
                if not self._line_healthy(line, line_map(line, tap, single, count, self._tech(line))):
                    return True
        return False

    def _tech(self, line: tuple[str, int]) -> str:
        refs = self.electrical.refs
        return self.technology(refs[min(line[1], len(refs) - 1)])

    def _line_healthy(self, line: tuple[str, int], mapping: LineMap) -> bool:
        signal, _ = line
        if signal == "TCK":
            return clock_activity(mapping) == EDGE
        if signal == "TRST":
            return (mapping.on1 if self.electrical.board.trst else mapping.onz) == "1"
        if signal == "TMS":
            return mapping.on0 == "0" and mapping.on1 == "1"
        return mapping.on0 == "0" and mapping.on1 == "1" and mapping.onx == "X"

    def _tap_drive_at_captures(self, effect: FaultEffect) -> PinDrive:
        """The TAP signal as a drive on the net at every capture (what the net's cells see)."""
        tap = effect.tap
        assert tap is not None and tap.lines
        signal, position = tap.lines[0]
        count = len(self.electrical.refs)
        s0 = s1 = r1 = 0
        tms, tdi = self.cycles.tms, self.cycles.tdi
        for event in self.states.captures:
            bit = 1 << event.state
            if signal == "TMS":
                value = str(tms[event.cycle])
            elif signal == "TCK":
                value = "X"
            elif signal == "TRST":
                value = "1" if self.electrical.board.trst else "Z"
            elif position == 0:
                value = str(tdi[event.cycle])
            else:
                value = "Z"  # the device before it is in Capture-DR: its TDO is released
            drive = tap_driver_drive(value)
            if drive.s0:
                s0 |= bit
            if drive.s1:
                s1 |= bit
            pulled = any(sig in ("TDI", "TMS", "TRST") and not (sig == "TDI" and pos == count)
                         for sig, pos in tap.lines)
            if pulled:
                r1 |= bit
        return PinDrive(s0, s1, 0, r1)

    def _good_run(self) -> SimulationResult:
        if self._good_simulation is None:
            self._good_simulation = VirtualBoard(self.electrical, self.program, self.cycles).run()
        return self._good_simulation

    def _grade_cycles(self, effect: FaultEffect) -> FaultVerdict:
        good = self._good_run()
        gradable = good.cycles.mask & good.known & ~(good.tdo ^ good.cycles.tdo)
        result = VirtualBoard(self.electrical, self.program, self.cycles, effect).run(stop_mask=gradable)
        self.simulated += 1
        return verdict_from_simulation(effect.fault, result, gradable, self.index)


def grade_faults(electrical: ElectricalBoard, program: ScanProgram, cycles: CycleStream,
                 faults: Sequence[Fault], progress: Callable[[int], None] | None = None) -> GradingReport:
    """Grade every fault; `progress` is told how many faults are done after each one."""
    grader = FaultGrader(electrical, program, cycles)
    verdicts = []
    for done, fault in enumerate(faults, 1):
        verdicts.append(grader.grade(fault))
        if progress is not None:
            progress(done)
    return GradingReport(tuple(verdicts), grader.excluded_bits, grader.simulated)

"""The virtual board: the cycle stream played through every device's TAP and registers and the nets.

This is what `scanloom simulate` runs. Each chain device has its own TAP controller (the
replay's state rules, tracking every state it could be in) and registers (`BoardDevice`, the
replay's register model plus the pins). The nets are re-resolved whenever something that
drives them changes (an Update-IR, an Update-DR, Test-Logic-Reset) and read at every
Capture-DR: each boundary cell loads what its cell description says it captures. Devices
are chained TDO -> TDI; the board's TDO is what the player would record.

Faults come in as a `FaultEffect`: the nodes they change, and for a fault on a TAP signal
what the TAP inputs read, so such a short or open really corrupts shifting.

Runs of edges in which no controller changes state are played in one step per device (a
shift of n bits is one slice operation), so even a board of tens of thousands of cells is
simulated in a few Python steps per scan.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

from bitarray import bitarray
from bitarray.util import zeros

from ..backend.cycle_stream import CycleStream
from ..backend.records import DR_SCAN, IR_SCAN, ScanProgram
from ..diagnostics import Diagnostic, ScanloomError
from ..models.board import PinRef
from .board_device import BoardDevice
from .electrical import ElectricalBoard
from .fault_effects import PULLED_UP_INPUTS, FaultEffect, TapLine, faulted_groups, good_groups
from .replay_device import Stage
from .board_levels import BoardLevels
from .resolve import GroupSolver, PinDrive
from .tap_controller import ALL_STATES, RESET, following_state, is_shift
from .tap_lines import (
    EDGE, HELD, MAYBE, LineMap, apply_map, clock_activity, identity_map, line_map, mapped_bit,
    tap_driver_drive,
)

__all__ = ["Contention", "SimulationResult", "VirtualBoard", "simulate", "check_chain", "unmodelled_cycles"]

_RESET_ONLY = frozenset({RESET})
_HOLDS_ON = {RESET: 1, "Run-Test/Idle": 0, "Pause-DR": 0, "Pause-IR": 0}


@dataclass(frozen=True, slots=True)
class Contention:
    """Two strong drivers disagreeing on a node after an update."""

    cycle: int
    node: str
    drivers: tuple[str, ...]


@dataclass(frozen=True)
class SimulationResult:
    """The TDO the board returned at every TCK, and how it compares with the expectations."""

    tdo: bitarray  # X recorded as 0
    known: bitarray
    cycles: CycleStream
    unmodelled: bitarray  # compared cycles whose bits come from design-specific registers
    contentions: tuple[Contention, ...] = ()
    stopped_at: int | None = None  # the cycle an early stop came at

    @property
    def differing(self) -> bitarray:
        """Compared cycles whose TDO is known and not the expected value."""
        return self.cycles.mask & self.known & (self.tdo ^ self.cycles.tdo)

    @property
    def undefined(self) -> bitarray:
        """Compared cycles whose TDO the board leaves undefined (X), design-specific bits aside."""
        return self.cycles.mask & ~self.known & ~self.unmodelled

    @property
    def passed(self) -> bool:
        return not self.differing.any() and not self.undefined.any()


def _big(bits: bitarray) -> bitarray:
    return bits if bits.endian == "big" else bitarray(bits, endian="big")


@dataclass
class _DeviceRun:
    """How one device spends the next run of edges."""

    kind: str  # "shift", "hold", "frozen" or "step"
    length: int
    state: str | None = None


@dataclass
class _Tap:
    """What one device's TAP inputs read in the current board state."""

    tms: LineMap
    tck: str
    trst: str
    tdi: LineMap


class VirtualBoard:
    """One run of a program's cycles on the board, fault-free or with one fault."""

    def __init__(self, electrical: ElectricalBoard, program: ScanProgram, cycles: CycleStream,
                 effect: FaultEffect | None = None) -> None:
        self.electrical = electrical
        self.board = electrical.board
        self.program = program
        self.cycles = cycles
        self.effect = effect
        check_chain(electrical, program)
        if effect is None:
            self.groups, self.group_of_pin, self.new_groups = good_groups(electrical), dict(
                electrical.node_of_pin), ()
        else:
            self.groups, self.group_of_pin, self.new_groups = faulted_groups(electrical, effect)
        self.devices = [BoardDevice(device_map, entry.device, entry.position)
                        for device_map, entry in zip(program.chain.devices, self.board.chain)]
        for device in self.devices:
            device.test_logic_reset()  # power-up: the TAP starts in Test-Logic-Reset
        self.possible: list[frozenset[str]] = [frozenset({RESET}) for _ in self.devices]
        self.technology = [self.board.technology_of(ref) for ref in electrical.refs]
        self.tap_group: int | None = None
        cone: list[int] = []
        if effect is not None and effect.tap is not None and effect.tap.group is not None:
            self.tap_group = self.new_groups[effect.tap.group]
            cone = self._cone(self.tap_group)
        self.nets = BoardLevels(electrical, self.groups, self.group_of_pin, self.devices, self.technology,
                                force_general=cone)
        self.tap_cone = (GroupSolver(electrical, self.groups, self.group_of_pin, solve_only=cone)
                         if cone else None)
        self.dirty = True
        self.contentions: list[Contention] = []
        self._fighting: set[int] = set()
        self.tms = _big(cycles.tms)
        self.tdi = _big(cycles.tdi)
        count = len(self.devices)
        self.taps = [_Tap(identity_map(("TMS", k), count), EDGE, "1", identity_map(("TDI", k), count))
                     for k in range(count)]
        self.board_tdo = identity_map(("TDI", count), count)
        self.cycle = 0

    # -- the electrical side ------------------------------------------------------------------
    def _cone(self, group: int) -> list[int]:
        """A group and every group its level reaches through logic parts."""
        readers = self.electrical.readers_of_pin
        found = {group}
        frontier = [group]
        while frontier:
            following = []
            for g in frontier:
                for pin in self.groups[g].pins:
                    for index in readers.get(pin, ()):
                        item = self.electrical.logic[index]
                        out = self.group_of_pin[PinRef(item.part, item.pin)]
                        if out not in found:
                            found.add(out)
                            following.append(out)
            frontier = following
        return sorted(found)

    def ensure_levels(self) -> None:
        if not self.dirty:
            return
        self.dirty = False
        fighting = set(self.nets.resolve())
        for group in sorted(fighting - self._fighting):
            self._contention(group)  # reported when a fight starts, not at every update it lasts
        self._fighting = fighting
        if self.effect is not None and self.effect.tap is not None:
            self._update_taps()

    def _contention(self, group: int) -> None:
        names = []
        for pin in self.groups[group].pins:
            if pin not in self.electrical.drivers:
                continue
            drive = self.nets.scan_drive(pin)
            if drive.s0 ^ drive.s1:
                names.append(f"{pin}={'1' if drive.s1 else '0'}")
        self.contentions.append(Contention(self.cycle, self.groups[group].label, tuple(names)))

    def read(self, device: int, ports: Sequence[str]) -> tuple[bitarray, bitarray]:
        """The PinReader of the devices' captures."""
        return self.nets.read(device, self.technology[device], ports)

    # -- TAP lines -----------------------------------------------------------------------------
    def _update_taps(self) -> None:
        effect = self.effect
        assert effect is not None and effect.tap is not None
        total = self.nets.total_of(self.tap_group) if self.tap_group is not None else None
        count = len(self.devices)
        for line in effect.tap.lines:
            signal, position = line
            technology = self.technology[min(position, count - 1)]
            mapping = line_map(line, effect.tap, total, count, technology)
            if signal == "TDI" and position == count:
                self.board_tdo = mapping
                continue
            tap = self.taps[position]
            if signal == "TMS":
                tap.tms = mapping
            elif signal == "TDI":
                tap.tdi = mapping
            elif signal == "TCK":
                tap.tck = clock_activity(mapping)
            elif signal == "TRST":
                tap.trst = mapping.onz if not self.board.trst else mapping.on1

    def _tap_driver(self, line: TapLine, cycle: int) -> str:
        """What drives a TAP line at `cycle` on the fault-free side: player or upstream TDO."""
        signal, position = line
        if signal == "TMS":
            return str(self.tms[cycle])
        if signal == "TCK":
            return "X"  # the clock is changing at the edge a capture samples
        if signal == "TRST":
            return "1" if self.board.trst else "Z"
        if position == 0:
            return str(self.tdi[cycle])
        return self._tdo_now(position - 1)

    def _tdo_now(self, device: int) -> str:
        possible = self.possible[device]
        if len(possible) != 1:
            return "X" if any(is_shift(s) for s in possible) else "Z"
        state = next(iter(possible))
        if not is_shift(state):
            return "Z"
        stage = self._stage(device, state)
        if stage is None or not len(stage.values):
            return "X"
        return str(stage.values[0]) if stage.known[0] else "X"

    def _capture_levels(self, cycle: int) -> None:
        """Levels at a capture edge when a TAP signal is shorted onto a net: it joins the net."""
        if self.tap_cone is None or self.effect is None or self.effect.tap is None:
            return
        tap = self.effect.tap
        driver = tap_driver_drive(self._tap_driver(tap.lines[0], cycle)) if tap.lines else PinDrive()
        count = len(self.devices)
        if any(signal in PULLED_UP_INPUTS and not (signal == "TDI" and pos == count)
               for signal, pos in tap.lines):
            driver = PinDrive(driver.s0, driver.s1, driver.r0, driver.r1 | 1, driver.keep)
        group = self.tap_group

        def extra(g: int) -> PinDrive | None:
            return driver if g == group else None

        self.nets.override(self.nets.solve_cone(self.tap_cone, extra))

    def _end_capture(self) -> None:
        if self.tap_cone is not None:
            self.nets.override(None)

    # -- registers -----------------------------------------------------------------------------
    @staticmethod
    def _stage_of(device: BoardDevice, state: str) -> Stage | None:
        return device.ir_shift if state.endswith("-IR") else device.dr_shift

    def _stage(self, index: int, state: str) -> Stage | None:
        return self._stage_of(self.devices[index], state)

    # -- the clock -----------------------------------------------------------------------------
    def _plan(self, cycle: int, count: int) -> list[_DeviceRun]:
        runs = []
        for k, tap in enumerate(self.taps):
            possible = self.possible[k]
            if tap.tck == HELD or (tap.trst == "0" and possible == _RESET_ONLY) or (
                    tap.tck == MAYBE and possible == ALL_STATES):
                runs.append(_DeviceRun("frozen", count - cycle))
                continue
            if tap.tck == MAYBE or tap.trst != "1":
                runs.append(_DeviceRun("step", 1))
                continue
            if len(possible) != 1:
                value = mapped_bit(tap.tms, self.tms[cycle])
                if value != "X" and all(following_state(s, int(value)) == s for s in possible):
                    stop = _find_not(self.tms, tap.tms, value, cycle)
                    runs.append(_DeviceRun("hold", (stop - cycle) if stop >= 0 else count - cycle))
                else:
                    runs.append(_DeviceRun("step", 1))
                continue
            state = next(iter(possible))
            mapping = tap.tms
            if is_shift(state):
                stop = _find_not(self.tms, mapping, "0", cycle)
                length = (stop - cycle + 1) if stop >= 0 else count - cycle
                runs.append(_DeviceRun("shift", length, state))
                continue
            holds_on = _HOLDS_ON.get(state)
            if holds_on is not None:
                stop = _find_not(self.tms, mapping, str(holds_on), cycle)
                length = (stop - cycle) if stop >= 0 else count - cycle
                if length > 0:
                    runs.append(_DeviceRun("hold", length, state))
                    continue
            runs.append(_DeviceRun("step", 1, state))
        return runs

    def run(self, stop_on_difference: bool = False, stop_mask: bitarray | None = None) -> SimulationResult:
        """Play every cycle. With `stop_on_difference` (or a `stop_mask` of the cycles that
        count), stop after the first run of edges in which such a compared TDO bit is known
        and differs from the expected value."""
        count = len(self.tms)
        out_values, out_known = zeros(count), zeros(count)
        expected = _big(self.cycles.tdo)
        mask = _big(stop_mask) if stop_mask is not None else _big(self.cycles.mask)
        stopping = stop_on_difference or stop_mask is not None
        cycle = 0
        stopped = None
        while cycle < count:
            self.cycle = cycle
            if self.effect is not None and self.effect.tap is not None:
                self.ensure_levels()
            runs = self._plan(cycle, count)
            n = max(1, min(run.length for run in runs))
            n = min(n, count - cycle)
            if any(run.kind == "step" for run in runs):
                n = 1
            tdo_values, tdo_known = self._shift(cycle, n, runs)
            out_values[cycle:cycle + n] = tdo_values
            out_known[cycle:cycle + n] = tdo_known
            self._edges(cycle, n, runs)
            if self.dirty:
                self.ensure_levels()  # every change of what drives the nets, as it happens
            cycle += n
            if stopping and (mask[cycle - n:cycle] & tdo_known & (tdo_values ^ expected[cycle - n:cycle])).any():
                stopped = cycle - 1
                break
        return SimulationResult(out_values, out_known, _big_stream(self.cycles),
                                unmodelled_cycles(self.program, self.cycles), tuple(self.contentions), stopped)

    def _shift(self, cycle: int, n: int, runs: list[_DeviceRun]) -> tuple[bitarray, bitarray]:
        """Shift every shifting device by n edges; returns the board's TDO over those edges.

        A device in Shift-xR presents bit 0 of its register on TDO and takes in what its TDI
        reads; a device anywhere else releases TDO (the next TDI then reads its pull-up).
        """
        stream = apply_map(self.taps[0].tdi, self.tdi[cycle:cycle + n], None)
        for k, run in enumerate(runs):
            tdo = self._device_tdo(k, run, n, stream)
            following = self.taps[k + 1].tdi if k + 1 < len(self.devices) else self.board_tdo
            stream = _drive_line(following, tdo, n)
        return stream

    def _device_tdo(self, k: int, run: _DeviceRun, n: int,
                    stream: tuple[bitarray, bitarray]) -> tuple[bitarray, bitarray] | str:
        device = self.devices[k]
        possible = self.possible[k]
        tap = self.taps[k]
        if len(possible) != 1:
            return "X" if any(is_shift(state) for state in possible) else "Z"
        state = next(iter(possible))
        if not is_shift(state):
            return "Z"
        stage = self._stage_of(device, state)
        if stage is None:
            return "X"  # the register in the chain is not known
        shifts = run.kind == "shift" or (run.kind == "step" and tap.tck == EDGE and tap.trst == "1")
        if not shifts:
            if not len(stage.values):
                return "X"
            return (_fill(n, stage.values[0]), _fill(n, stage.known[0]))
        length = len(stage.values)
        values = stage.values + stream[0]
        known = stage.known + stream[1]
        stage.values = values[n:n + length]
        stage.known = known[n:n + length]
        return (values[:n], known[:n])

    def _edges(self, cycle: int, n: int, runs: list[_DeviceRun]) -> None:
        """The state changes of a run: captures at its edge, then the transition at its last edge.

        Every device captures before any moves on, as on the board, where all of them sample
        the same rising edge.
        """
        last = cycle + n - 1
        moving = [k for k, run in enumerate(runs)
                  if not (run.kind in ("frozen", "hold") or (run.kind == "shift" and run.length > n))]
        capturing = []
        for k in moving:
            tap = self.taps[k]
            possible = self.possible[k]
            if len(possible) == 1 and tap.tck == EDGE and tap.trst == "1":
                state = next(iter(possible))
                if state == "Capture-DR":
                    capturing.append(k)
                elif state == "Capture-IR":
                    self.devices[k].capture_ir()
        if capturing:
            self.ensure_levels()
            self._capture_levels(cycle)
            for k in capturing:
                self.devices[k].capture_dr(self)
            self._end_capture()
        for k in moving:
            tap = self.taps[k]
            possible = self.possible[k]
            tms = mapped_bit(tap.tms, self.tms[last])
            following: set[str] = set()
            for state in possible:
                for value in ((0, 1) if tms == "X" else (int(tms),)):
                    following.add(following_state(state, value))
            if tap.tck == MAYBE:
                following |= possible
            if tap.trst == "0":
                following = {RESET}
            elif tap.trst == "X":
                following.add(RESET)
            self._enter(k, frozenset(following))

    def _enter(self, k: int, possible: frozenset[str]) -> None:
        before = self.possible[k]
        self.possible[k] = possible
        device = self.devices[k]
        if len(possible) != 1:
            if not device.lost or len(before) == 1:
                device.forget()
                self.dirty = True
            return
        state = next(iter(possible))
        if device.lost:
            device.lost = False
        if state == RESET:
            if before != possible or device.instruction is None:
                device.test_logic_reset()
                self.dirty = True
        elif state == "Update-IR" and before != possible:
            device.update_ir()
            self.dirty = True
        elif state == "Update-DR" and before != possible:
            device.update_dr()
            self.dirty = True


_STANDARD_REGISTERS = frozenset({"IR", "BYPASS", "BOUNDARY", "DEVICE_ID"})


def unmodelled_cycles(program: ScanProgram, cycles: CycleStream) -> bitarray:
    """Cycles that carry bits of design-specific registers out of the chain, by the records.

    What such a register captures (a user register, a self-test signature) is defined by the
    device's designer, not by the board: the virtual board leaves those bits unknown and does
    not hold them against the expectations.
    """
    out = zeros(len(cycles.tms))
    starts = iter(cycles.shift_starts)
    for record in program.records:
        if record.kind not in (IR_SCAN, DR_SCAN):
            continue
        start = next(starts)
        for segment in record.segments:
            if segment.register not in _STANDARD_REGISTERS:
                out[start + segment.offset:start + segment.offset + segment.length] = 1
    return out


def _fill(n: int, bit: int) -> bitarray:
    bits = zeros(n)
    if bit:
        bits.setall(1)
    return bits


def _find_not(bits: bitarray, mapping: LineMap, value: str, start: int) -> int:
    """The first edge at or after `start` whose input (through `mapping`) is not `value`."""
    on0, on1 = mapping.on0, mapping.on1
    if on0 == value and on1 == value:
        return -1
    if on0 == value:
        return bits.find(1, start)
    if on1 == value:
        return bits.find(0, start)
    return start


def _drive_line(mapping: LineMap, tdo: tuple[bitarray, bitarray] | str, n: int) -> tuple[bitarray, bitarray]:
    """What the input at the end of a line reads over n edges, from what drives the line."""
    if isinstance(tdo, str):
        value = mapping.onz if tdo == "Z" else mapping.onx
        return (_fill(n, value == "1"), _fill(n, value != "X"))
    return apply_map(mapping, tdo[0], tdo[1])


def _big_stream(cycles: CycleStream) -> CycleStream:
    if cycles.tms.endian == "big" and cycles.tdo.endian == "big" and cycles.mask.endian == "big":
        return cycles
    return CycleStream(_big(cycles.tms), _big(cycles.tdi), _big(cycles.tdo), _big(cycles.mask),
                       cycles.state_names, cycles.record_starts, cycles.shift_starts, cycles.lower_bound)


def check_chain(electrical: ElectricalBoard, program: ScanProgram) -> None:
    """The shift file must describe this board's chain, device by device."""
    problems = []
    maps = program.chain.devices
    if len(maps) != len(electrical.refs):
        problems.append(f"the shift file has {len(maps)} chain devices, the board {len(electrical.refs)}")
    for device_map, entry in zip(maps, electrical.board.chain):
        device = entry.device
        if (device_map.ref, device_map.entity) != (entry.ref, device.entity):
            problems.append(f"chain position {entry.position} is {device_map.ref} ({device_map.entity}) "
                            f"in the shift file, {entry.ref} ({device.entity}) on the board")
        elif (device_map.ir_length, device_map.boundary_length) != (device.ir_length, device.boundary_length):
            problems.append(f"{entry.ref}: the shift file's register lengths differ from its BSDL")
    if problems:
        raise ScanloomError([Diagnostic("error", problem, None, hint="compile the program again for this board")
                             for problem in problems])


def simulate(electrical: ElectricalBoard, program: ScanProgram, cycles: CycleStream,
             effect: FaultEffect | None = None, *, stop_on_difference: bool = False) -> SimulationResult:
    """Play `cycles` on the board (with one fault's effect, if given)."""
    return VirtualBoard(electrical, program, cycles, effect).run(stop_on_difference)

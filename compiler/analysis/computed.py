"""Computed expectations: what the fault-free board answers to a step, from its logic model.

A program may leave an expectation's value to the compiler (`ir.COMPUTED`). The value is
what the capturing cells read when the step's response is captured, on the board the
program really plays: the scheduler's own scans are worked out once (with every computed
expectation compared, so that each step's response has its capture) and the fault-free
board is resolved in every state they pass through, one bit per state, through pulls and
logic parts. The state sequence matters because a bus keeper (a KEEPER disable result)
holds whatever its node had last, and a step's scans pass through states of their own: after
an instruction scan the new instructions drive the pins from the update stages loaded
before (IEEE 1149.1-2001, Update-IR: the new instruction takes effect there, from memory),
so a keeper may hold what a net was between two steps, not what it was at the step
before. A net the receivers would read differently, or as X (floating CMOS, contention), is
expected as X: not compared.

The result is the mapping `schedule(program, board, computed)` takes:
(test, step, target) -> "0", "1" or "X".
"""

from __future__ import annotations

from dataclasses import replace
from typing import Mapping

from bitarray import frozenbitarray

from ..backend.cycles import lay_out_cycles
from ..backend.images import (
    PRELOAD_KINDS, DeviceTables, build_image, device_tables, mode_kind, selected_register,
)
from ..backend.records import ScanProgram
from ..backend.schedule import schedule
from ..diagnostics import Diagnostics
from ..ir import COMPUTED, ExpectColumns, Program, Step
from ..models.board import Board, PinRef
from ..models.cells import PIN, instruction_class, resolve_capture
from ..sim.electrical import ElectricalBoard, build_electrical
from ..sim.fault_effects import good_groups
from ..sim.resolve import GroupSolver, Level, PinDrive, read_level, scan_pin_drive
from .scan_states import ScanStates, column, scan_states

__all__ = ["compute_expectations", "fill_computed"]

Computed = dict[tuple[str, str, str], str]


def _instruction(board: Board, ref: str, name: str) -> str:
    instructions = board.devices[ref].device.instructions
    if name in instructions:
        return name
    if name.upper() in instructions:
        return name.upper()
    return "BYPASS"  # as the scheduler does for an instruction the BSDL does not describe


def _probe(program: Program) -> Computed:
    """Every computed expectation compared (its value is irrelevant): each such step gets a capture.

    The values only decide which bits are compared and whether a scan that changes nothing (an
    image already in force, a flush) is kept: the states that change the pins are those of the
    program compiled with the real values.
    """
    return {(test.name, step.name, target): "0"
            for test in program.tests for step in test.steps if COMPUTED in step.expects.values
            for target, value in zip(step.expects.targets, step.expects.values) if value == COMPUTED}


def _rails(value: int, known: int, full: int) -> tuple[int, int]:
    value &= known
    return (full & ~value, value | (full & ~known))


class _PlayedBoard:
    """The fault-free board in every state of the program's scans, one bit per state."""

    def __init__(self, program: Program, board: Board, electrical: ElectricalBoard) -> None:
        self.board = board
        self.electrical = electrical
        scan = schedule(program, board, _probe(program))
        states = scan_states(scan, lay_out_cycles(scan), board)
        self.full = states.full
        drives = self._scan_drives(states)
        solver = GroupSolver(electrical, good_groups(electrical), electrical.node_of_pin)
        solved = solver.solve(drives.__getitem__, self.full)  # keepers hold across the states
        self.levels = [solved[i] for i in range(len(electrical.nodes))]
        self.state_of_step = self._response_states(scan, states)

    def _scan_drives(self, states: ScanStates) -> dict[PinRef, PinDrive]:
        full = self.full
        drives: dict[PinRef, PinDrive] = {}
        for pin, driver in self.electrical.drivers.items():
            device = states.devices[driver.device]
            width = device.length

            def rails(cell: int | None) -> tuple[int, int] | None:
                if cell is None or not 0 <= cell < width:
                    return None if cell is None else (full, full)
                return _rails(column(device.update_rows, width, cell), device.update_known, full)

            data = rails(driver.cell) or (full, full)
            control = rails(driver.control) if driver.control is not None else None
            drives[pin] = scan_pin_drive(driver, data, control, device.drive, 0, full)
        return drives

    @staticmethod
    def _response_states(scan: ScanProgram, states: ScanStates) -> dict[tuple[str, str], int]:
        """(test, step) -> the state its response is captured in (the first capture checking it)."""
        found: dict[tuple[str, str], int] = {}
        for event in states.captures:
            for check in scan.records[event.record].checks:
                if check.register == "BOUNDARY":
                    found.setdefault((check.test, check.step), event.state)
        return found

    def levels_in(self, state: int) -> list[Level]:
        return [Level((level.v0 >> state) & 1, (level.v1 >> state) & 1, (level.fl >> state) & 1)
                for level in self.levels]


def _step_state(board: Board, tables: Mapping[str, DeviceTables], step: Step
                ) -> tuple[dict[str, str], dict[str, frozenbitarray | None]]:
    """The instructions and boundary images the step puts in force (as the scheduler builds them)."""
    modes = {ref: _instruction(board, ref, name) for ref, name in step.modes}
    drives: dict[str, list[tuple[str, str]]] = {}
    for driver, value in zip(step.drives.drivers, step.drives.values):
        if driver:
            pin = PinRef.parse(driver)
            drives.setdefault(pin.ref, []).append((pin.port, value))
    images: dict[str, frozenbitarray | None] = {}
    for entry in board.chain:
        kind = mode_kind(entry.device, modes.get(entry.ref, "BYPASS"))
        images[entry.ref] = (build_image(tables[entry.ref], kind, tuple(drives.get(entry.ref, ()))).image
                             if kind in PRELOAD_KINDS else None)
    return modes, images


def _value(board: Board, electrical: ElectricalBoard, levels: list[Level], modes: Mapping[str, str],
           images: Mapping[str, frozenbitarray | None], target: str, is_pin: bool) -> str:
    """What the capturing cells on `target` read: "0" or "1" when they agree, else "X"."""
    if is_pin:
        pin = PinRef.parse(target)
        net = electrical.net_of_pin.get(pin)
        pins = (pin,) if pin.ref in board.devices else (board.nets[net].pins if net else ())
    else:
        pins = board.nets[target].pins if target in board.nets else ()
    seen: set[str] = set()
    for pin in pins:
        receiver = electrical.receivers.get(pin)
        if receiver is None:
            continue
        device = board.devices[pin.ref].device
        instruction = modes.get(pin.ref, "BYPASS")
        if selected_register(device, instruction) != "BOUNDARY":
            continue
        cls = instruction_class(instruction, "BOUNDARY") or "SAMPLE"
        driving = _output_on(electrical, pin, images.get(pin.ref))
        if not any(resolve_capture(cell.info, cell.function, cls, driving) == PIN for cell in receiver.cells):
            continue
        level = levels[electrical.node_of_pin[pin]]
        may0, may1 = read_level(level, receiver.technology)
        seen.add("X" if may0 == may1 else ("1" if may1 else "0"))
    if len(seen) == 1:
        return seen.pop()
    return "X"


def _output_on(electrical: ElectricalBoard, pin: PinRef, image: frozenbitarray | None) -> bool:
    driver = electrical.drivers.get(pin)
    if driver is None or image is None:
        return False
    if driver.control is None or driver.disable_value is None:
        return True
    return 0 <= driver.control < len(image) and image[driver.control] != driver.disable_value


def compute_expectations(program: Program, board: Board,
                         electrical: ElectricalBoard | None = None) -> Computed:
    """(test, step, target) -> value for every expectation the program leaves to the board."""
    if electrical is None:
        electrical = build_electrical(board, Diagnostics())
    computed: Computed = {}
    if not any(COMPUTED in step.expects.values for test in program.tests for step in test.steps):
        return computed
    played = _PlayedBoard(program, board, electrical)
    tables = {entry.ref: device_tables(entry.ref, entry.device) for entry in board.chain}
    for test in program.tests:
        for step in test.steps:
            if COMPUTED not in step.expects.values:
                continue
            wanted = [e for e in step.expects if e.value == COMPUTED]
            state = played.state_of_step.get((test.name, step.name))
            if state is None:  # no cell captures any of them: nothing is compared
                computed.update({(test.name, step.name, e.target): "X" for e in wanted})
                continue
            levels = played.levels_in(state)
            modes, images = _step_state(board, tables, step)
            for expect in wanted:
                computed[(test.name, step.name, expect.target)] = _value(
                    board, electrical, levels, modes, images, expect.target, expect.is_pin)
    return computed


def fill_computed(program: Program, board: Board, electrical: ElectricalBoard | None = None) -> Program:
    """The program with every computed expectation replaced by its value."""
    computed = compute_expectations(program, board, electrical)
    tests = []
    for test in program.tests:
        items = []
        for item in test.items:
            if isinstance(item, Step) and COMPUTED in item.expects.values:
                expects = item.expects
                values = "".join(computed[(test.name, item.name, target)] if value == COMPUTED
                                 else value for target, value in zip(expects.targets, expects.values))
                item = replace(item, expects=ExpectColumns(expects.targets, expects.pins, values,
                                                           expects.spans))
            items.append(item)
        tests.append(replace(test, items=tuple(items)))
    return replace(program, tests=tuple(tests))

"""Computed expectations: what the fault-free board answers to a step, from its logic model.

A program may leave an expectation's value to the compiler (`ir.COMPUTED`). For each such
step the drive state in force is put on the virtual board: every device in EXTEST, CLAMP or
INTEST holds the boundary image the scheduler builds for the step's drives
(`scanloom.backend.images.build_image`), every other device releases its pins; the nets are
resolved through pulls and logic parts, and the expected value is what the capturing cells
read. A net the receivers would read differently, or as X (floating CMOS, contention), is
expected as X: not compared.

The result is the mapping `schedule(program, board, computed)` takes:
(test, step, target) -> "0", "1" or "X".
"""

from __future__ import annotations

from typing import Iterator, Mapping

from bitarray import frozenbitarray

from ..backend.images import PRELOAD_KINDS, build_image, device_tables, mode_kind, selected_register
from ..diagnostics import Diagnostics
from ..ir import COMPUTED, Program, Step, Test
from ..models.board import Board, PinRef
from ..models.cells import PIN, instruction_class, resolve_capture
from ..sim.electrical import ElectricalBoard, build_electrical
from ..sim.fault_effects import good_groups
from ..sim.resolve import GroupSolver, Level, PinDrive, read_level, scan_pin_drive

__all__ = ["compute_expectations", "step_levels", "iter_step_levels", "fill_computed"]

Computed = dict[tuple[str, str, str], str]


def _instruction(board: Board, ref: str, name: str) -> str:
    instructions = board.devices[ref].device.instructions
    if name in instructions:
        return name
    if name.upper() in instructions:
        return name.upper()
    return "BYPASS"  # as the scheduler does for an instruction the BSDL does not describe


class _StepBoard:
    """The fault-free board, one step at a time (a keeper remembers the step before)."""

    def __init__(self, board: Board, electrical: ElectricalBoard) -> None:
        self.board = board
        self.electrical = electrical
        self.tables = {entry.ref: device_tables(entry.ref, entry.device) for entry in board.chain}
        self.solver = GroupSolver(electrical, good_groups(electrical), electrical.node_of_pin)
        self.previous: list[Level] | None = None

    def levels(self, step: Step) -> tuple[list[Level], dict[str, str], dict[str, frozenbitarray | None]]:
        modes = {ref: _instruction(self.board, ref, name) for ref, name in step.modes}
        images: dict[str, frozenbitarray | None] = {}
        drives: dict[str, list[tuple[str, str]]] = {}
        for drive in step.drives:
            if drive.driver:
                pin = PinRef.parse(drive.driver)
                drives.setdefault(pin.ref, []).append((pin.port, drive.value))
        for entry in self.board.chain:
            ref = entry.ref
            kind = mode_kind(entry.device, modes.get(ref, "BYPASS"))
            images[ref] = (build_image(self.tables[ref], kind, tuple(drives.get(ref, ()))).image
                           if kind in PRELOAD_KINDS else None)

        def scan_drive(pin: PinRef) -> PinDrive:
            driver = self.electrical.drivers[pin]
            image = images.get(pin.ref)
            if image is None:
                return scan_pin_drive(driver, (1, 1), None, 0, 0, 1)

            def rails(cell: int | None) -> tuple[int, int] | None:
                if cell is None:
                    return None
                if not 0 <= cell < len(image):
                    return (1, 1)
                return (0, 1) if image[cell] else (1, 0)

            return scan_pin_drive(driver, rails(driver.cell) or (1, 1), rails(driver.control), 1, 0, 1)

        solved = self.solver.solve(scan_drive, 1, previous=self.previous)
        levels = [solved[i] for i in range(len(self.electrical.nodes))]
        self.previous = levels
        return levels, modes, images


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
    stepper = _StepBoard(board, electrical)  # one board for the whole program, steps in order
    for test in program.tests:
        for step in test.steps:
            wanted = [e for e in step.expects if e.value == COMPUTED]
            levels, modes, images = stepper.levels(step)
            for expect in wanted:
                computed[(test.name, step.name, expect.target)] = _value(
                    board, electrical, levels, modes, images, expect.target, expect.is_pin)
    return computed


def iter_step_levels(program: Program, board: Board, electrical: ElectricalBoard | None = None
                     ) -> Iterator[tuple[Test, Step, list[Level]]]:
    """Every step in program order with its fault-free node levels (by node index)."""
    if electrical is None:
        electrical = build_electrical(board, Diagnostics())
    stepper = _StepBoard(board, electrical)
    for test in program.tests:
        for step in test.steps:
            yield test, step, stepper.levels(step)[0]


def step_levels(program: Program, board: Board, test: str, step: str,
                electrical: ElectricalBoard | None = None) -> list[Level]:
    """The fault-free node levels during one step (by node index)."""
    if electrical is None:
        electrical = build_electrical(board, Diagnostics())
    for item in program.tests:
        if item.name != test:
            continue
        stepper = _StepBoard(board, electrical)
        for current in item.steps:
            levels, _, _ = stepper.levels(current)
            if current.name == step:
                return levels
    raise KeyError((test, step))


def fill_computed(program: Program, board: Board, electrical: ElectricalBoard | None = None) -> Program:
    """The program with every computed expectation replaced by its value."""
    from dataclasses import replace

    computed = compute_expectations(program, board, electrical)
    tests = []
    for test in program.tests:
        items = []
        for item in test.items:
            if isinstance(item, Step):
                expects = tuple(replace(e, value=computed[(test.name, item.name, e.target)])
                                if e.value == COMPUTED else e for e in item.expects)
                item = replace(item, expects=expects)
            items.append(item)
        tests.append(replace(test, items=tuple(items)))
    return replace(program, tests=tuple(tests))

"""The fast fault grader: hand-worked verdicts on the demo board, and the differential check
against the cycle-level virtual board (every fault of the examples and of random boards)."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from chainfactory import drive, expect, make_board, make_device, make_program, make_step, make_test
from scanloom.analysis.bit_meaning import ScanIndex
from scanloom.analysis.board_runs import load_program_run
from scanloom.analysis.fault_verdicts import GradingReport
from scanloom.analysis.computed import compute_expectations
from scanloom.analysis.grading import (
    DETECTED, NOT_DETECTED, POSSIBLY_DETECTED, FaultGrader, grade_faults, verdict_from_simulation,
)
from scanloom.backend.cycles import lay_out_cycles
from scanloom.backend.schedule import schedule
from scanloom.diagnostics import Diagnostics
from scanloom.ir import COMPUTED
from scanloom.models.board import Board, Part
from scanloom.sim.electrical import build_electrical
from scanloom.sim.fault_effects import fault_effect
from scanloom.sim.faults import fault_universe, parse_fault_specs
from scanloom.sim.virtual_board import VirtualBoard

EXAMPLES = Path(__file__).parents[1] / "examples" / "irrigation"


@pytest.fixture(scope="module")
def valve_nets():  # type: ignore[no-untyped-def]
    run = load_program_run(EXAMPLES / "valve_nets.loom", Diagnostics())
    return run, FaultGrader(run.electrical, run.program, run.cycles)


def _grade(fixture, spec: str):  # type: ignore[no-untyped-def]
    run, grader = fixture
    (fault,) = parse_fault_specs([spec], run.electrical)
    return grader.grade(fault)


# Hand-worked on valve_nets.loom. Its valve_lines test drives VALVE_D (U1 -> U2, U2's inputs
# are TTL) with 0b11111110, 0x55, 0xAA, 0xF0 in steps walking_zero, checkerboard, inverse,
# upper_half; each step's response is captured by the scan after its update (record 4 collects
# walking_zero, record 5 checkerboard). U2's boundary segment starts at scan bit 2 (U4's and
# U3's BYPASS bits come first), so U2 cell n is scan bit n + 2; VIN(k) is cell 11 + k.
@pytest.mark.parametrize("spec, step, cell, port, why", [
    # Common practice: an open TTL input floats high, so only a vector driving 0 through it
    # detects it. VALVE_D0 is first 0 in walking_zero, VALVE_D7 first 0 in checkerboard (0x55).
    ("open:U2.VIN(0)", "walking_zero", 11, "VIN(0)", "open TTL input reads 1, D0 driven 0"),
    ("open:U2.VIN(7)", "checkerboard", 18, "VIN(7)", "D7 is 1 in walking_zero, first 0 in 0x55"),
    ("open:VALVE_D0", "walking_zero", 11, "VIN(0)", "every receiver floats: U2's reads 1"),
    ("open:U1.PA(0)", "walking_zero", 11, "VIN(0)", "the driver reaches nothing: U2's input floats high"),
    ("stuck-at-1:VALVE_D0", "walking_zero", 11, "VIN(0)", "D0 expected 0 first in walking_zero"),
    ("stuck-at-0:VALVE_D0", "checkerboard", 11, "VIN(0)", "D0 expected 1 first in 0x55"),
    # Common practice: a wired-AND short is detected only when its two nets are driven to
    # opposite values; walking_zero drives D0=0, D1=1, so D1 reads 0.
    ("short:VALVE_D0,VALVE_D1", "walking_zero", 12, "VIN(1)", "wired-AND: D1 pulled to 0"),
    ("short:VALVE_D0,VALVE_D1:or", "walking_zero", 11, "VIN(0)", "wired-OR: D0 pulled to 1"),
    ("short:VALVE_D0,VALVE_D1:U1.PA(1)", "walking_zero", 11, "VIN(0)", "D1's driver wins: D0 reads 1"),
])
def test_hand_worked_detections(valve_nets, spec: str, step: str, cell: int, port: str, why: str) -> None:  # type: ignore[no-untyped-def]
    verdict = _grade(valve_nets, spec)
    assert verdict.verdict == DETECTED, why
    meaning = verdict.first.meaning
    assert (meaning.test, meaning.step, meaning.device, meaning.register, meaning.bit, meaning.port) == (
        "valve_lines", step, "U2", "BOUNDARY", cell, port), why
    assert verdict.first.scan_bit == cell + 2 and verdict.graded_by == "masks"


def test_a_short_onto_tdo_breaks_the_scans_that_pass_it(valve_nets) -> None:  # type: ignore[no-untyped-def]
    # Common practice: a net shorted onto a TAP signal breaks shifting. VALVE_D0 at 0 pulls
    # U2's TDO low (wired-AND): in record 4 every bit leaving U2 reads 0, and the first compared
    # bit expected 1 among them is VIN(1) (D1 = 1 in walking_zero).
    verdict = _grade(valve_nets, "short:VALVE_D0,U2.TDO")
    assert (verdict.verdict, verdict.graded_by) == (DETECTED, "cycles")
    meaning = verdict.first.meaning
    assert (meaning.record, meaning.device, meaning.bit, meaning.port) == (4, "U2", 12, "VIN(1)")


def test_an_open_tms_fails_the_first_integrity_scan(valve_nets) -> None:  # type: ignore[no-untyped-def]
    # IEEE 1149.1 (TMS behaves as 1 when undriven; from memory clause 4.4.1): U2 stays in
    # Test-Logic-Reset and releases TDO, so U3 reads its TDI pull-up: 1s where U2's
    # instruction-register capture (bit 1 is 0 by the standard) should come out.
    verdict = _grade(valve_nets, "open:U2.TMS")
    assert verdict.verdict == DETECTED
    meaning = verdict.first.meaning
    assert (meaning.record, meaning.device, meaning.register, meaning.bit) == (1, "U2", "IR", 1)


def test_an_open_cmos_input_is_possibly_detected(valve_nets) -> None:  # type: ignore[no-untyped-def]
    verdict = _grade(valve_nets, "open:U4.DQ(0)")  # U4 is CMOS: the open input reads X
    assert verdict.verdict == POSSIBLY_DETECTED
    assert (verdict.first.meaning.test, verdict.first.meaning.step) == ("data_bus", "from_controller")


@pytest.mark.parametrize("spec, reason", [
    ("short:VALVE_D1,VALVE_D3", r"the two nets are never driven to opposite values in a compared step$"),
    ("short:SPI_SCLK,SPI_SCLK_T", r"SPI_SCLK and SPI_SCLK_T are already one node \(joined through a series part\)$"),
    ("stuck-at-0:PUMP_MAINS_EN", r"no compared bit captures PUMP_MAINS_EN$"),
    ("open:U3.RAIN_N", r"no compared bit captures U3\.RAIN_N$"),
])
def test_undetected_faults_say_why(valve_nets, spec: str, reason: str) -> None:  # type: ignore[no-untyped-def]
    verdict = _grade(valve_nets, spec)
    assert verdict.verdict == NOT_DETECTED and verdict.first is None
    assert re.match(reason, verdict.reason or ""), verdict.reason


def test_an_open_ttl_input_always_driven_1_is_not_detected(tmp_path: Path) -> None:
    program = tmp_path / "ones.loom"
    program.write_text(f'board "{EXAMPLES / "irrigation.yaml"}"\n'
                       "test ones \"VALVE_D0 held high\" {\n    U1 EXTEST\n    U2 SAMPLE\n"
                       "    step high {\n        drive WDOG_DIS = 1, VALVE_D0 = 1\n        expect VALVE_D0 = 1\n    }\n"
                       "    step again {\n        expect VALVE_D0 = 1\n    }\n}\n")
    run = load_program_run(program, Diagnostics())
    report = grade_faults(run.electrical, run.program, run.cycles,
                          parse_fault_specs(["open:U2.VIN(0)", "stuck-at-0:VALVE_D0"], run.electrical))
    opened, stuck = report.verdicts
    assert opened.verdict == NOT_DETECTED
    assert opened.reason == "VALVE_D0 is driven 1 in every compared step and an open TTL input also reads 1"
    assert stuck.verdict == DETECTED


def test_coverage_per_class_and_json(valve_nets) -> None:  # type: ignore[no-untyped-def]
    run, _ = valve_nets
    faults = parse_fault_specs(["open:U2.VIN(0)", "open:U4.DQ(0)", "stuck-at-0:PUMP_MAINS_EN",
                                "short:VALVE_D0,VALVE_D1", "short:VALVE_D0,U2.TDO"], run.electrical)
    report = grade_faults(run.electrical, run.program, run.cycles, faults)
    coverage = report.coverage()
    assert (coverage["open"].total, coverage["open"].detected, coverage["open"].possibly) == (2, 1, 1)
    assert (coverage["stuck-at"].detected, coverage["short"].detected, coverage["tap"].detected) == (0, 1, 1)
    assert (coverage["all"].total, coverage["all"].detected) == (5, 3)
    data = report.as_data()
    assert data["coverage"]["all"]["coverage"] == 0.6
    first = data["faults"][0]
    assert first["fault"] == "open:U2.VIN(0)" and first["verdict"] == "detected"
    assert first["first"]["net"] == "VALVE_D0" and first["first"]["step"] == "walking_zero"
    text = report.render()
    assert re.search(r"^  all faults +3 / 5 +60\.0 %   possibly 1, not detected 1$", text, re.M)
    # The JSON text (each verdict on one line) is exactly the data, read back by the
    # standard library's parser; so is an empty report's.
    rendered = report.render_json()
    assert json.loads(rendered) == data
    assert sum(line.startswith('    {"fault": ') for line in rendered.splitlines()) == 5
    empty = GradingReport(())
    assert json.loads(empty.render_json()) == empty.as_data()


def test_bits_the_fault_free_board_does_not_reproduce_are_left_out() -> None:
    device = make_device("PAIR", 2, [(0, "BC_1", "Y", "OUTPUT2", "0"), (1, "BC_4", "A", "INPUT", "X")])
    board = make_board([("U1", device), ("U2", device)], {"N": ["U1.Y", "U2.A"]})
    modes = (("U1", "EXTEST"), ("U2", "SAMPLE"))
    wrong = make_step("wrong", modes, [drive("N", "1", "U1.Y")], [expect("N", "0")])  # a bad expectation
    scan = schedule(make_program([make_test("t", [wrong])]), board)
    cycles = lay_out_cycles(scan)
    electrical = build_electrical(board, Diagnostics())
    report = grade_faults(electrical, scan, cycles, parse_fault_specs(["stuck-at-1:N"], electrical))
    assert report.excluded_bits == 1
    assert report.verdicts[0].verdict == NOT_DETECTED  # the only compared bit already fails


def _agree(electrical, scan, cycles, faults) -> list[str]:  # type: ignore[no-untyped-def]
    """Faults on which the fast grader and the cycle-level virtual board disagree."""
    grader = FaultGrader(electrical, scan, cycles)
    good = VirtualBoard(electrical, scan, cycles).run()
    gradable = good.cycles.mask & good.known & ~(good.tdo ^ good.cycles.tdo)
    index = ScanIndex(scan, cycles)
    problems = []
    for fault in faults:
        fast = grader.grade(fault)
        played = VirtualBoard(electrical, scan, cycles, fault_effect(electrical, fault)).run()
        slow = verdict_from_simulation(fault, played, gradable, index)
        fast_cycle = fast.first.cycle if fast.first else None
        slow_cycle = slow.first.cycle if slow.first else None
        if (fast.verdict, fast_cycle) != (slow.verdict, slow_cycle):
            problems.append(f"{fault.spec}: grader {fast.verdict} at {fast_cycle}, "
                            f"virtual board {slow.verdict} at {slow_cycle}")
    return problems


@pytest.mark.parametrize("stem", ["cluster_mux", "valve_nets", "registers"])
def test_the_grader_agrees_with_the_virtual_board_on_every_example_fault(stem: str) -> None:
    run = load_program_run(EXAMPLES / f"{stem}.loom", Diagnostics())
    faults = fault_universe(run.electrical)
    assert _agree(run.electrical, run.program, run.cycles, faults) == []


# -- random small boards ------------------------------------------------------------------------
_PIN_KINDS = ("out", "out_shared", "in", "in_bc1", "bidir")
_RESULTS = ("Z", "Z", "PULL1", "WEAK0", "KEEPER")


@st.composite
def random_boards(draw):  # type: ignore[no-untyped-def]
    """2-3 devices of 2-4 pins each, random nets, pulls, technologies, a logic part, a series
    part, a pin map."""
    devices = []
    pins: list[str] = []
    for d in range(draw(st.integers(2, 3))):
        cells: list[tuple] = []
        shared_control = None
        kinds = draw(st.lists(st.sampled_from(_PIN_KINDS), min_size=2, max_size=4))
        for i, kind in enumerate(kinds):
            port = f"P({i})"
            result = draw(st.sampled_from(_RESULTS))
            number = len(cells)
            if kind in ("out", "bidir"):
                function, cell_type = ("OUTPUT3", "BC_1") if kind == "out" else ("BIDIR", "BC_7")
                cells.append((number, cell_type, port, function, "0", number + 1, 0, result))
                cells.append((number + 1, "BC_1", "*", "CONTROL", "0"))
            elif kind == "out_shared":
                if shared_control is None:
                    shared_control = 100 + d
                cells.append((number, "BC_1", port, "OUTPUT3", "0", shared_control, 0, result))
            else:
                cells.append((number, "BC_4" if kind == "in" else "BC_1", port, "INPUT", "X"))
            pins.append(f"U{d + 1}.{port}")
        if shared_control is not None:
            length = len(cells)
            cells = [c if c[5:6] != (shared_control,) else c[:5] + (length,) + c[6:] for c in cells]
            cells.append((length, "BC_1", "*", "CONTROL", "0"))
        devices.append((f"U{d + 1}", make_device(f"RND{d}", 3, cells)))
    order = draw(st.permutations(pins))
    nets: dict[str, list[str]] = {}
    index = 0
    while index < len(order):
        size = draw(st.integers(1, 3))
        nets[f"N{len(nets)}"] = list(order[index:index + size])
        index += size
    names = list(nets)
    pulls = {name: draw(st.sampled_from(("up", "down"))) for name in names if draw(st.booleans()) and draw(st.booleans())}
    board = make_board(devices, nets, technology=draw(st.sampled_from(("cmos", "ttl"))), pulls=pulls)
    parts: dict[str, Part] = {}
    if len(names) >= 3 and draw(st.booleans()):
        a, b, y = draw(st.permutations(names))[:3]
        logic = draw(st.sampled_from(("A & B", "A | ~B", "A ^ B", "~A")))
        enable = {"Y": "B"} if draw(st.booleans()) else {}
        parts["U9"] = Part("U9", ("A", "B", "Y"), logic={"Y": logic}, enables=enable,
                           technology=draw(st.sampled_from(("cmos", "ttl"))))
        extra = {a: "U9.A", b: "U9.B", y: "U9.Y"}
        nets = {name: members + ([extra[name]] if name in extra else []) for name, members in nets.items()}
        board = make_board(devices, nets, technology=board.technology, pulls=pulls, parts={"U9": ("A", "B", "Y")})
        board = Board(board.name, board.path, board.technology, board.trst, board.chain, parts, board.nets,
                      board.pulls, board.hold, board.never_drive)
    free = [name for name, net in board.nets.items() if all(pin.ref != "U9" for pin in net.pins)]
    if len(free) >= 2 and draw(st.booleans()):
        # A series resistor joining two nets into one node (a plain connection for logic); not
        # through the logic part, which would make a loop.
        a, b = draw(st.permutations(free))[:2]
        nets = {name: [str(pin) for pin in net.pins] + (["RN1.1"] if name == a else ["RN1.2"] if name == b else [])
                for name, net in board.nets.items()}
        with_pack = make_board(devices, nets, technology=board.technology, pulls=pulls,
                               parts={"RN1": ("1", "2"), **{ref: part.pins for ref, part in board.parts.items()}})
        parts = dict(board.parts)
        parts["RN1"] = Part("RN1", ("1", "2"), series=(("1", "2"),))
        board = Board(with_pack.name, with_pack.path, with_pack.technology, with_pack.trst, with_pack.chain, parts,
                      with_pack.nets, with_pack.pulls, with_pack.hold, with_pack.never_drive)
    # A leaded pin map over every port, TAP pins included, in random order: adjacent shorts.
    from dataclasses import replace

    chain = []
    for entry in board.chain:
        ports = list(entry.device.port_bits())
        shuffled = draw(st.permutations(ports))
        pin_map = {port: (str(n + 1),) for n, port in enumerate(shuffled)}
        chain.append(replace(entry, device=replace(entry.device, pin_maps={"PKG": pin_map}, pin_map_name="PKG")))
    board = Board(board.name, board.path, board.technology, board.trst, tuple(chain), board.parts, board.nets,
                  board.pulls, board.hold, board.never_drive)
    return board


@st.composite
def random_programs(draw, board: Board):  # type: ignore[no-untyped-def]
    electrical = build_electrical(board, Diagnostics())
    steps = []
    for s in range(draw(st.integers(1, 4))):
        modes = tuple((entry.ref, draw(st.sampled_from(("EXTEST", "EXTEST", "SAMPLE")))) for entry in board.chain)
        driving = {ref for ref, mode in modes if mode == "EXTEST"}
        drives = []
        for pin in sorted(electrical.drivers, key=str):
            if pin.ref in driving and draw(st.booleans()):
                drives.append(drive(str(pin), draw(st.sampled_from("01Z"))))
        expects = [expect(name, COMPUTED) for name in board.nets]
        steps.append(make_step(f"s{s}", modes, drives, expects))
    return make_program([make_test("random", steps)])


def compiled_random_case(data):  # type: ignore[no-untyped-def]
    """A random board and program, scheduled with its computed expectations and laid out:
    (board, electrical board, records, cycles)."""
    board = data.draw(random_boards())
    program = data.draw(random_programs(board))
    electrical = build_electrical(board, Diagnostics())
    scan = schedule(program, board, compute_expectations(program, board, electrical))
    return board, electrical, scan, lay_out_cycles(scan)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(st.data())
def test_the_grader_agrees_with_the_virtual_board_on_random_boards(data) -> None:  # type: ignore[no-untyped-def]
    board, electrical, scan, cycles = compiled_random_case(data)
    faults = list(fault_universe(electrical))
    nets = list(board.nets)
    specs = [f"short:{nets[0]},U1.{signal}" for signal in ("TDO", "TMS", "TCK", "TDI")]
    specs += ["open:U2.TDI", "open:U1.TCK", f"short:{nets[0]},U2.TDO:or"]
    if len(nets) > 1:
        specs += [f"short:{nets[0]},{nets[-1]}:or", f"open:{nets[-1]}"]
    faults += list(parse_fault_specs(specs, electrical))
    good = VirtualBoard(electrical, scan, cycles).run()
    assert good.passed  # computed expectations: the fault-free board passes
    assert _agree(electrical, scan, cycles, faults) == []

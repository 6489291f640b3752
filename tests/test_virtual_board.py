"""The cycle-level virtual board: TAPs, registers, nets, captures, faults on nets and TAP signals."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import pytest

from chainfactory import drive, expect, idcode_for, make_board, make_device, make_program, make_step, make_test, modes_for
from scanloom.analysis.bit_meaning import ScanIndex
from scanloom.analysis.board_runs import capture_table, load_shift_run, simulate_run
from scanloom.analysis.computed import compute_expectations
from scanloom.backend.cycles import lay_out_cycles
from scanloom.backend.schedule import schedule
from scanloom.diagnostics import Diagnostics, ScanloomError
from scanloom.ir import RegisterRead
from scanloom.lang.frontend import load_program
from scanloom.models.board import Part
from scanloom.pipeline import compile_program
from scanloom.sim.electrical import build_electrical
from scanloom.sim.fault_effects import fault_effect
from scanloom.sim.faults import parse_fault_specs
from scanloom.sim.virtual_board import VirtualBoard

EXAMPLES = Path(__file__).parents[1] / "examples" / "irrigation"

DRIVER = make_device("DRV8", 3, [
    (0, "BC_1", "Y(0)", "OUTPUT3", "X", 2, 0, "Z"),
    (1, "BC_1", "Y(1)", "OUTPUT3", "X", 2, 0, "Z"),
    (2, "BC_1", "*", "CONTROL", "0"),
], idcode=idcode_for(5))
RECEIVER = make_device("RCV4", 4, [
    (0, "BC_4", "A(0)", "INPUT", "X"),
    (1, "BC_4", "A(1)", "INPUT", "X"),
])


def _run(board, steps, faults=()):  # type: ignore[no-untyped-def]
    scan = schedule(make_program([make_test("t", steps)]), board)
    cycles = lay_out_cycles(scan)
    electrical = build_electrical(board, Diagnostics())
    effect = None
    if faults:
        (fault,) = parse_fault_specs(list(faults), electrical)
        effect = fault_effect(electrical, fault)
    return VirtualBoard(electrical, scan, cycles, effect).run(), scan, cycles


def _two_device_board(technology: str = "cmos"):  # type: ignore[no-untyped-def]
    return make_board([("U1", DRIVER), ("U2", RECEIVER)],
                      {"N0": ["U1.Y(0)", "U2.A(0)"], "N1": ["U1.Y(1)", "U2.A(1)"]}, technology=technology)


def _vectors(board, values):  # type: ignore[no-untyped-def]
    modes = modes_for(board, {"U1": "EXTEST", "U2": "SAMPLE"})
    return [make_step(f"v{i}", modes, [drive("N0", a, "U1.Y(0)"), drive("N1", b, "U1.Y(1)")],
                      [expect("N0", a), expect("N1", b)]) for i, (a, b) in enumerate(values)]


def test_a_fault_free_board_returns_what_the_scheduler_expects() -> None:
    board = _two_device_board()
    result, scan, cycles = _run(board, _vectors(board, [("0", "1"), ("1", "0"), ("1", "1")]))
    assert result.passed and result.cycles.mask.count() > 0
    assert len(result.tdo) == cycles.count


def test_a_stuck_net_fails_exactly_the_bits_that_expect_the_other_value() -> None:
    board = _two_device_board()
    result, scan, cycles = _run(board, _vectors(board, [("0", "1"), ("1", "0"), ("1", "1")]),
                                ["stuck-at-1:N0"])
    index = ScanIndex(scan, cycles)
    failing = [index.meaning(c) for c in result.differing.search(1)]
    # N0 is expected 0 only in step v0: one failing bit, U2's cell 0 on port A(0).
    assert [(m.test, m.step, m.device, m.register, m.bit, m.port, m.net) for m in failing] == [
        ("t", "v0", "U2", "BOUNDARY", 0, "A(0)", "N0")]


def test_an_open_ttl_input_floats_high() -> None:
    # Common practice (electronics handbooks): an open bipolar (TTL) input floats high, so an
    # open is detected only by a vector that drives 0 through it.
    board = _two_device_board("ttl")
    ones, scan, cycles = _run(board, _vectors(board, [("1", "1"), ("1", "1")]), ["open:U2.A(0)"])
    assert ones.passed
    zero, scan, cycles = _run(board, _vectors(board, [("1", "1"), ("0", "1")]), ["open:U2.A(0)"])
    index = ScanIndex(scan, cycles)
    assert [index.meaning(c).step for c in zero.differing.search(1)] == ["v1"]
    assert not zero.undefined.any()


def test_an_open_cmos_input_is_undefined() -> None:
    board = _two_device_board("cmos")
    result, _, _ = _run(board, _vectors(board, [("1", "1")]), ["open:U2.A(0)"])
    assert not result.differing.any() and result.undefined.count() == 1


def test_a_wired_and_short_shows_only_where_the_nets_are_driven_apart() -> None:
    # Common practice: a wired-AND short is detected only when its two nets are driven to
    # opposite values (then both read 0).
    board = _two_device_board()
    same, _, _ = _run(board, _vectors(board, [("0", "0"), ("1", "1")]), ["short:N0,N1"])
    assert same.passed
    apart, scan, cycles = _run(board, _vectors(board, [("1", "1"), ("0", "1")]), ["short:N0,N1"])
    index = ScanIndex(scan, cycles)
    assert [(index.meaning(c).step, index.meaning(c).net) for c in apart.differing.search(1)] == [("v1", "N1")]


def test_contention_between_two_scan_outputs_is_reported() -> None:
    board = make_board([("U1", DRIVER), ("U2", DRIVER)], {"N0": ["U1.Y(0)", "U2.Y(0)"]})
    modes = modes_for(board, {"U1": "EXTEST", "U2": "EXTEST"})
    step = make_step("fight", modes, [drive("U1.Y(0)", "0"), drive("U2.Y(0)", "1")])
    result, _, _ = _run(board, [step])
    assert result.contentions and result.contentions[0].node == "N0"
    assert set(result.contentions[0].drivers) == {"U1.Y(0)=0", "U2.Y(0)=1"}


def _integrity_program(board):  # type: ignore[no-untyped-def]
    """EXTEST drives N0 to 0, then the chain is checked by reading U1's IDCODE."""
    drives_zero = make_step("drive", modes_for(board, {"U1": "EXTEST", "U2": "SAMPLE"}),
                            [drive("N0", "0", "U1.Y(0)"), drive("N1", "1", "U1.Y(1)")])
    read = make_step("identify", modes_for(board, {"U1": "IDCODE"}),
                     reads=[RegisterRead("U1", "DEVICE_ID", DRIVER.idcode)])
    return [drives_zero, read]


@pytest.mark.parametrize("spec", ["short:N0,U1.TDO", "short:N0,U2.TMS", "short:N0,U1.TCK"])
def test_a_net_shorted_onto_a_tap_signal_breaks_shifting(spec: str) -> None:
    # Common practice: a net shorted onto a TAP signal breaks shifting and fails the
    # integrity scans (here the IDCODE read and the instruction-register capture).
    board = _two_device_board()
    good, _, _ = _run(board, _integrity_program(board))
    assert good.passed
    broken, scan, cycles = _run(board, _integrity_program(board), [spec])
    assert not broken.passed


def test_a_tdo_short_corrupts_the_bits_that_pass_it() -> None:
    # With N0 at 0, the wired-AND short makes U1's TDO read 0: every bit that leaves U1 while
    # N0 is low is 0, so the instruction-register capture "...01" of U1 shifted through it fails.
    board = _two_device_board()
    broken, scan, cycles = _run(board, _integrity_program(board), ["short:N0,U1.TDO"])
    index = ScanIndex(scan, cycles)
    first = index.meaning(broken.differing.find(1))
    assert (first.device, first.register, first.bit) == ("U1", "IR", 0)


def test_an_open_tms_pin_reads_1_and_holds_the_device_in_reset() -> None:
    # IEEE 1149.1 (TMS pull-up, clause 4.4.1, from memory): an undriven TMS reads 1, so the
    # controller stays in Test-Logic-Reset and never shifts; its TDO stays released.
    board = _two_device_board()
    result, scan, cycles = _run(board, _integrity_program(board), ["open:U2.TMS"])
    assert not result.passed and result.undefined.any()


def test_the_capture_table_has_one_row_per_tck() -> None:
    board = _two_device_board()
    result, _, cycles = _run(board, _vectors(board, [("0", "1")]))
    rows = capture_table(result).splitlines()
    assert rows[0] == "cycle,tdo" and len(rows) == cycles.count + 1
    assert all(row.split(",")[1] in ("0", "1") for row in rows[1:])
    assert rows[1] == "0,0"


def test_a_shift_file_for_another_board_is_refused() -> None:
    board = _two_device_board()
    scan = schedule(make_program([make_test("t", _vectors(board, [("0", "1")]))]), board)
    other = make_board([("U1", RECEIVER), ("U2", DRIVER)], {})
    with pytest.raises(ScanloomError, match="chain position 0 is U1 \\(DRV8\\) in the shift file"):
        VirtualBoard(build_electrical(other, Diagnostics()), scan, lay_out_cycles(scan))


@pytest.fixture(scope="module")
def compiled_examples(tmp_path_factory):  # type: ignore[no-untyped-def]
    out = tmp_path_factory.mktemp("compiled")
    for program in sorted(EXAMPLES.glob("*.loom")):
        compile_program(program, out, {"json"}, Diagnostics())
    return out


@pytest.mark.parametrize("stem", ["cluster_mux", "registers", "valve_nets"])
def test_every_example_passes_fault_free(compiled_examples, stem: str) -> None:  # type: ignore[no-untyped-def]
    run = load_shift_run(compiled_examples / f"{stem}.json")
    report = simulate_run(run)
    assert report.passed, report.render()
    assert not report.result.contentions


def test_bits_of_design_specific_registers_are_not_held_against_the_board(compiled_examples) -> None:  # type: ignore[no-untyped-def]
    # registers.loom reads U1's configuration and self-test registers: what they capture is the
    # silicon's design (IEEE 1149.1 design-specific registers), not the board's.
    report = simulate_run(load_shift_run(compiled_examples / "registers.json"))
    assert report.unmodelled == 8 + 8 + 16  # CFGREG read twice, BISTSIG once
    assert "not modelled by the virtual board" in report.render()


def test_a_demo_short_is_named_by_test_step_device_cell_port_and_net(compiled_examples) -> None:  # type: ignore[no-untyped-def]
    run = load_shift_run(compiled_examples / "cluster_mux.json")
    faults = parse_fault_specs(["short:MUX_Y0,MUX_Y1"], run.electrical)
    report = simulate_run(run, faults)
    assert not report.passed
    meaning, expected, got = report.failing[0]
    # Row 1 selects A = 0x5: MUX_Y0 = 1, MUX_Y1 = 0; wired-AND pulls MUX_Y0 to 0.
    assert (meaning.test, meaning.step, meaning.device, meaning.port, meaning.net) == (
        "mux_select", "row1", "U3", "MUXY(0)", "MUX_Y0")
    assert (expected, got) == (1, "0")
    assert report.render().startswith(f"cycle {meaning.cycle}: expected 1, board gave 0: test mux_select step row1")


def test_computed_expectations_follow_the_logic_model() -> None:
    program, board = load_program(EXAMPLES / "cluster_mux.loom", Diagnostics())
    computed = compute_expectations(program, board)
    # Row 13: SEL = 0 selects A = 0x3; row 14: SEL = 1 selects B = 0xC (Y = A & ~S | B & S).
    assert [computed[("mux_select", "row13", f"MUX_Y{i}")] for i in range(4)] == ["1", "1", "0", "0"]
    assert [computed[("mux_select", "row14", f"MUX_Y{i}")] for i in range(4)] == ["0", "0", "1", "1"]
    # 0b0101 and 0b1010 have two ones each: even parity, ODD = 0.
    assert computed[("parity_tree", "parity_9", "PAR_ODD")] == "0"
    assert computed[("parity_tree", "parity_10", "PAR_ODD")] == "0"
    assert len(computed) == 10


def test_a_computed_expectation_on_a_floating_cmos_net_is_not_compared() -> None:
    # Outputs with a control cell each, so that one can be released while the other drives.
    separate = make_device("DRV2", 3, [(0, "BC_1", "Y(0)", "OUTPUT3", "X", 1, 0, "Z"), (1, "BC_1", "*", "CONTROL", "0"),
                                       (2, "BC_1", "Y(1)", "OUTPUT3", "X", 3, 0, "Z"), (3, "BC_1", "*", "CONTROL", "0")])
    board = make_board([("U1", separate), ("U2", RECEIVER)],
                       {"N0": ["U1.Y(0)", "U2.A(0)"], "N1": ["U1.Y(1)", "U2.A(1)"]})
    modes = modes_for(board, {"U1": "EXTEST", "U2": "SAMPLE"})
    step = make_step("released", modes, [drive("N0", "Z", "U1.Y(0)"), drive("N1", "1", "U1.Y(1)")],
                     [expect("N0", "?"), expect("N1", "?")])
    program = make_program([make_test("t", [step])])
    assert compute_expectations(program, board) == {("t", "released", "N0"): "X", ("t", "released", "N1"): "1"}


def _keeper_board():  # type: ignore[no-untyped-def]
    """U2.Q(1) has a bus keeper on K; a buffer U9 (always 1, enabled by EN) also drives K; U1 and U2 drive EN."""
    u1 = make_device("ENA1", 3, [(0, "BC_1", "P(0)", "OUTPUT3", "X", 1, 0, "Z"), (1, "BC_1", "*", "CONTROL", "0")])
    u2 = make_device("KPR3", 3, [(0, "BC_1", "Q(0)", "OUTPUT3", "X", 1, 0, "Z"), (1, "BC_1", "*", "CONTROL", "0"),
                                 (2, "BC_1", "Q(1)", "OUTPUT3", "X", 3, 0, "KEEPER"), (3, "BC_1", "*", "CONTROL", "0"),
                                 (4, "BC_4", "Q(2)", "INPUT", "X")])
    nets = {"EN": ["U1.P(0)", "U2.Q(0)", "U9.E"], "K": ["U2.Q(1)", "U2.Q(2)", "U9.Y"]}
    board = make_board([("U1", u1), ("U2", u2)], nets, parts={"U9": ("E", "Y")})
    buffer = Part("U9", ("E", "Y"), logic={"Y": "1"}, enables={"Y": "E"}, technology="cmos")
    return replace(board, parts={"U9": buffer})


@pytest.mark.parametrize("second, kept", [("SAMPLE", "X"), ("EXTEST", "0")])
def test_a_keeper_holds_what_its_net_had_between_the_steps(second: str, kept: str) -> None:
    # Step 1: U1 holds EN at 0 (buffer off), U2 drives K to 0. Step 2: U2 releases K to its
    # keeper and takes EN over. When U1 also leaves EXTEST, its new instruction takes effect at
    # Update-IR (IEEE 1149.1-2001, instruction register: the instruction is latched at
    # Update-IR, from memory) while U2 still holds step 1's image: EN floats until U2's
    # Update-DR, a floating CMOS input is undefined (common practice), so the buffer may fight
    # U2's 0 on K and the keeper is left holding an unknown level: computed as X, not as the 0
    # of step 1. When U1 stays in EXTEST there is no such window and the keeper holds the 0.
    board = _keeper_board()
    first = make_step("drive", modes_for(board, {"U1": "EXTEST", "U2": "EXTEST"}),
                      [drive("U1.P(0)", "0"), drive("U2.Q(0)", "Z"), drive("U2.Q(1)", "0")], [expect("K", "?")])
    then = make_step("hold", modes_for(board, {"U1": second, "U2": "EXTEST"}),
                     ([drive("U1.P(0)", "0")] if second == "EXTEST" else [])
                     + [drive("U2.Q(0)", "0"), drive("U2.Q(1)", "Z")], [expect("K", "?")])
    program = make_program([make_test("t", [first, then])])
    electrical = build_electrical(board, Diagnostics())
    computed = compute_expectations(program, board, electrical)
    assert computed == {("t", "drive", "K"): "0", ("t", "hold", "K"): kept}
    scan = schedule(program, board, computed)
    cycles = lay_out_cycles(scan)
    assert VirtualBoard(electrical, scan, cycles).run().passed  # the fault-free board agrees

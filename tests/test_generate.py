"""`scanloom generate`: the programs it writes, against the papers' formulas and the board's guards.

Every generated program must compile, raise no pre-hardware finding, replay, and pass on the
fault-free virtual board; its vector tables must hold the published code sequences with the
published vector counts; a net with several drivers is driven by one at a time; held nets stay
held, never_drive nets undriven.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from chainfactory import make_board, make_device
from click.testing import CliRunner
from random_boards import random_board

from scanloom.analysis.codes import vector_count
from scanloom.analysis.drive_hazards import StepOutputs
from scanloom.analysis.generate import generate_program
from scanloom.analysis.generate_integrity import PATTERN
from scanloom.analysis.prehardware import check_program
from scanloom.analysis.sequencing import check_preload
from scanloom.backend.cycles import lay_out_cycles
from scanloom.backend.schedule import schedule
from scanloom.cli import main
from scanloom.diagnostics import Diagnostics, ScanloomError
from scanloom.ir import ChainScan, Step, TapReset
from scanloom.lang import ast
from scanloom.lang.fmt import format_text
from scanloom.lang.frontend import compile_source
from scanloom.lang.parser import parse_text
from scanloom.models.board_loader import load_board
from scanloom.sim.electrical import build_electrical
from scanloom.sim.replay import replay
from scanloom.sim.virtual_board import VirtualBoard

DEMO = Path(__file__).resolve().parents[1] / "examples" / "irrigation" / "irrigation.yaml"
KINDS = ("counting", "true-complement", "walking-one")


@pytest.fixture(scope="module")
def demo():
    return load_board(DEMO, Diagnostics())


def compiled(board, text: str):
    """Front end, pre-hardware checks, scheduler, cycles, replay and the fault-free board."""
    diagnostics = Diagnostics()
    program = compile_source(text, "generated.loom", board, diagnostics)
    assert not diagnostics.items, diagnostics.render()
    scan = schedule(program, board)
    cycles = lay_out_cycles(scan)
    report = check_program(program, board, scan, cycles)  # every check, records and cycles too
    assert not report.findings, [f.message for f in report.findings]
    assert not check_preload(scan)
    assert replay(scan, cycles).ok
    result = VirtualBoard(build_electrical(board, Diagnostics()), scan, cycles).run()
    assert result.passed, (result.differing.count(), result.undefined.count())
    return program, scan


def tables(text: str) -> dict[str, ast.Table]:
    """The vector table of every test, by test name."""
    found = {}
    for item in parse_text(text).items:
        if isinstance(item, ast.Test):
            for member in item.items:
                if isinstance(member, ast.Table):
                    found[item.name] = member
    return found


def read_codes(generated, text: str) -> dict[str, list[int]]:
    """Each driving pin's code read back from the tables (one pin per coded net, nets joined
    in series sharing it): bit v = its value in row v."""
    codes: dict[str, list[int]] = {}
    for test in generated.interconnect:
        table = tables(text)[test.name]
        groups = {}
        for item in parse_text(text).items:
            if isinstance(item, ast.GroupDecl):
                groups[item.name] = [m.name if isinstance(m, ast.NameSignal) else m.text for m in item.members]
        per_net: dict[str, int] = {}
        for column, signal in enumerate(table.drive_columns):
            members = groups[signal.name]
            for v, row in enumerate(table.rows):
                value = int(row.drives[column].digits, 16)
                for position, net in enumerate(members):
                    bit = (value >> (len(members) - 1 - position)) & 1
                    per_net[net] = per_net.get(net, 0) | (bit << v)
        codes[test.name] = list(per_net.values())
    return codes

# ---------------------------------------------------------------------------- the papers


@pytest.mark.parametrize("kind", KINDS)
def test_demo_programs_hold_the_published_vector_counts(demo, kind):
    generated = generate_program(demo, "irrigation.yaml", "interconnect", kind)
    found = tables(generated.text)
    for test in generated.interconnect:
        nets = len(test.nodes)
        rows = len(found[test.name].rows)
        if kind == "counting":
            # Goel and McMahon 1982, modified counting sequence: ceil(log2(N + 2)) vectors.
            assert rows == (nets + 1).bit_length() == vector_count(kind, nets)
        elif kind == "true-complement":
            # Wagner 1987, true/complement: 2 * ceil(log2(N + 2)) vectors.
            assert rows == 2 * (nets + 1).bit_length()
        else:
            assert rows == nets  # walking one: one vector per net
    assert {len(t.nodes) for t in generated.interconnect} == {28}


def test_counting_codes_are_distinct_and_never_all_zero_or_all_one(demo):
    generated = generate_program(demo, "irrigation.yaml", "interconnect", "counting")
    for name, codes in read_codes(generated, generated.text).items():
        width = len(tables(generated.text)[name].rows)
        # Kautz 1974: every net a distinct binary number; Goel and McMahon 1982: never the
        # all-0 or all-1 code, which a stuck or floating net would read.
        assert len(set(codes)) == len(codes)
        assert sorted(codes) == list(range(1, len(codes) + 1))
        assert 0 not in codes and (1 << width) - 1 not in codes


def test_true_complement_codes_are_their_own_complements(demo):
    generated = generate_program(demo, "irrigation.yaml", "interconnect", "true-complement")
    for name, codes in read_codes(generated, generated.text).items():
        half = len(tables(generated.text)[name].rows) // 2
        full = (1 << half) - 1
        for code in codes:
            # Wagner 1987: the second half of every code is the complement of the first, so
            # every code has exactly `half` ones and no AND or OR of two codes is a code.
            assert code >> half == full ^ (code & full)
            assert bin(code).count("1") == half


def test_five_nets_need_three_counting_vectors():
    # Hand-worked: the modified counting sequence for five nets is 001, 010, 011, 100, 101:
    # ceil(log2(5 + 2)) = 3 vectors (Goel and McMahon 1982).
    source = make_device("SRC", 3, [(i, "BC_1", f"Q({i})", "OUTPUT3", "0", 5, 0, "Z") for i in range(5)]
                         + [(5, "BC_1", "*", "CONTROL", "0")])
    sink = make_device("SNK", 3, [(i, "BC_1", f"A({i})", "INPUT", "X") for i in range(5)])
    board = make_board([("U1", source), ("U2", sink)], {f"W{i}": [f"U1.Q({i})", f"U2.A({i})"] for i in range(5)})
    generated = generate_program(board, "b.yaml", "interconnect", "counting")
    assert len(tables(generated.text)["interconnect"].rows) == 3
    assert sorted(read_codes(generated, generated.text)["interconnect"]) == [1, 2, 3, 4, 5]
    compiled(board, generated.text)

# ---------------------------------------------------------------------------- compiles and passes


@pytest.mark.parametrize("kind", KINDS)
def test_demo_program_compiles_replays_and_passes(demo, kind):
    generated = generate_program(demo, "irrigation.yaml", "all", kind)
    compiled(demo, generated.text)
    # Written in the canonical layout: scanloom fmt changes nothing.
    assert format_text(generated.text) == generated.text


@pytest.mark.parametrize("seed", range(12))
def test_random_board_programs_compile_replay_and_pass(seed):
    board = random_board(seed)
    for kind in ("counting", "true-complement"):
        generated = generate_program(board, "board.yaml", "all", kind)
        program, _ = compiled(board, generated.text)
        assert format_text(generated.text) == generated.text
        for test in generated.interconnect:
            assert len(tables(generated.text)[test.name].rows) == vector_count(kind, len(test.nodes))


def test_the_written_program_reads_like_ours(demo):
    text = generate_program(demo, "irrigation.yaml", "all", "counting").text
    assert text.startswith("# Chain-integrity and interconnect tests of RC-4 greenhouse irrigation")
    assert 'board "irrigation.yaml"' in text and "tck 10 MHz" in text
    assert "Goel and McMahon 1982" in text
    assert re.search(r"^test interconnect_1 \"28 scan-to-scan nets, counting codes, 5 vectors\" \{$",
                     text, re.M)
    assert "drive U1.PD(1) = 1  # WDOG_DIS: held by the board file" in text
    assert "Never driven (never_drive): PUMP_MAINS_EN." in text

# ---------------------------------------------------------------------------- drivers and guards


def _enabled_by_step(board, program):
    """For every step: net -> the scan pins whose outputs the shifted images enable."""
    outputs = StepOutputs(board)
    found = []
    for test in program.tests:
        for step in test.steps:
            kinds = outputs.kinds(step)
            images = outputs.step_images(step, kinds)
            on: dict[str, dict[str, str]] = {}
            for node, drivers in outputs.drivers_on.items():
                for driver in drivers:
                    value = outputs.enabled(driver, kinds, images)
                    if value is not None:
                        on.setdefault(node[0], {})[str(driver.pin)] = value
            found.append((test.name, step, on))
    return found


def test_demo_multi_driver_nets_one_driver_at_a_time_and_each_driver_once(demo):
    generated = generate_program(demo, "irrigation.yaml", "interconnect", "counting")
    program, _ = compiled(demo, generated.text)
    seen: dict[str, set[str]] = {}
    for _, _, on in _enabled_by_step(demo, program):
        for net, pins in on.items():
            assert len(pins) == 1, (net, pins)  # never two drivers enabled at once
            seen.setdefault(net, set()).update(pins)
    # The data bus has U1's BC_7 pins and U4's bus pins: each side drives it in its round.
    assert seen["DATA3"] == {"U1.D(3)", "U4.DQ(3)"}
    assert seen["FAULT_N"] == {"U2.FAULT_N", "U1.PA(10)"}
    assert seen["LINK_IRQ_N"] == {"U4.IRQ_N", "U1.PC(6)"}
    assert len(generated.interconnect) == 2


def test_demo_guards_hold_never_drive_and_cluster_nets(demo):
    generated = generate_program(demo, "irrigation.yaml", "interconnect", "counting")
    program, _ = compiled(demo, generated.text)
    cluster_values: dict[str, set[str]] = {}
    for _, step, on in _enabled_by_step(demo, program):
        assert on["WDOG_DIS"] == {"U1.PD(1)": "1"}  # held at 1 by the board file in every step
        assert "PUMP_MAINS_EN" not in on  # never_drive: never driven
        for net in ("MUX_A0", "MUX_SEL", "MUX_OE_N", "PAR_D2", "WDOG_KICK"):
            cluster_values.setdefault(net, set()).update(on.get(net, {}).values())
    # Nets into logic without boundary scan keep one safe value through every step.
    assert all(len(values) == 1 for values in cluster_values.values()), cluster_values


def test_receiving_devices_go_to_extest_and_idle_devices_stay_in_bypass():
    source = make_device("SRC", 3, [(0, "BC_1", "Q", "OUTPUT3", "0", 1, 0, "Z"), (1, "BC_1", "*", "CONTROL", "0"),
                                    (2, "BC_1", "R", "OUTPUT3", "0", 1, 0, "Z")])
    sink = make_device("SNK", 3, [(0, "BC_1", "A", "INPUT", "X"), (1, "BC_1", "Y", "OUTPUT3", "1", 2, 0, "Z"),
                                  (2, "BC_1", "*", "CONTROL", "0")])
    idle = make_device("IDL", 3, [(0, "BC_1", "K", "INPUT", "X")])
    board = make_board([("U1", source), ("U2", idle), ("U3", sink)],
                       {"W": ["U1.Q", "U3.A"], "LONELY": ["U3.Y"], "SPARE": ["U2.K"]})
    generated = generate_program(board, "b.yaml", "interconnect", "counting")
    program, _ = compiled(board, generated.text)
    for test in program.tests:
        for step in test.steps:
            modes = dict(step.modes)
            # The receiving-only device is in EXTEST with its outputs disabled, not in SAMPLE
            # where its own logic could drive; the device with nothing to test stays in BYPASS.
            assert modes == {"U1": "EXTEST", "U2": "BYPASS", "U3": "EXTEST"}
    _, _, on = _enabled_by_step(board, program)[-1]
    assert "LONELY" not in on


def test_a_shared_control_cell_keeps_siblings_from_fighting():
    # U1's Q and R share control cell 1; R sits on a net that U2 also drives. When U2 drives
    # that net, Q (and so R) must be off: U1's group and U2's output never drive together.
    a = make_device("A", 3, [(0, "BC_1", "Q", "OUTPUT3", "0", 1, 0, "Z"), (1, "BC_1", "*", "CONTROL", "0"),
                             (2, "BC_1", "R", "OUTPUT3", "0", 1, 0, "Z"), (3, "BC_1", "S", "INPUT", "X")])
    b = make_device("B", 3, [(0, "BC_1", "Y", "OUTPUT3", "0", 1, 0, "Z"), (1, "BC_1", "*", "CONTROL", "0"),
                             (2, "BC_1", "I", "INPUT", "X"), (3, "BC_1", "J", "INPUT", "X")])
    board = make_board([("U1", a), ("U2", b)], {"NQ": ["U1.Q", "U2.I"], "NR": ["U1.R", "U2.Y", "U2.J", "U1.S"]})
    generated = generate_program(board, "b.yaml", "interconnect", "true-complement")
    program, _ = compiled(board, generated.text)
    drivers_of_nr = set()
    for _, _, on in _enabled_by_step(board, program):
        assert len(on.get("NR", {})) <= 1
        drivers_of_nr.update(on.get("NR", {}))
    assert drivers_of_nr == {"U1.R", "U2.Y"}

# ---------------------------------------------------------------------------- integrity


def test_integrity_expectations_follow_the_bsdl_files(demo):
    generated = generate_program(demo, "irrigation.yaml", "integrity", "counting")
    program, _ = compiled(demo, generated.text)
    scans = {test.name: [i for i in test.items if isinstance(i, ChainScan)] for test in program.tests}
    assert isinstance(program.tests[0].items[0], TapReset)
    after_reset = scans["after_reset"][0]
    # IEEE 1149.1: after Test-Logic-Reset a device with an identification register holds
    # IDCODE (32 bits, its BSDL pattern), one without holds BYPASS (one bit capturing 0).
    ids = "".join(e.device.idcode if e.device.idcode else "0" for e in demo.chain)
    assert after_reset.expected == PATTERN + ids
    assert after_reset.tdi[-len(PATTERN):] == PATTERN and set(after_reset.tdi[:-len(PATTERN)]) == {"0"}
    bypass = scans["bypass_path"][0]
    # The pattern comes back delayed by exactly one bypass bit per device (4 on the demo).
    assert bypass.expected == PATTERN + "0000"
    for entry in demo.chain:
        scan = scans[f"boundary_{entry.ref}"][0]
        # The pattern comes back after the BOUNDARY_LENGTH cells plus the other bypass bits.
        assert len(scan.expected) == entry.device.boundary_length + len(demo.chain) - 1 + len(PATTERN)
        assert scan.expected.startswith(PATTERN)
        assert scan.expected.count("X") == entry.device.boundary_length
    identify = [i for i in program.tests[-1].items if isinstance(i, Step)][0]
    assert [r.ref for r in identify.reads] == ["U1", "U3", "U4"]  # U2 has no IDCODE


def test_a_bypass_path_one_bit_longer_is_not_what_the_chain_returns(demo):
    # The generated expectation (pattern delayed by 4) passes; the same pattern delayed by 5
    # is refused by both independent models of the chain: the replay's registers and the
    # virtual board (IEEE 1149.1: one bypass bit per device).
    text = generate_program(demo, "irrigation.yaml", "integrity", "counting").text
    assert "scan chain 12 bits in 0x9D expect 0x9D0" in text
    wrong = text.replace("scan chain 12 bits in 0x9D expect 0x9D0", "scan chain 13 bits in 0x9D expect 0x13A0")
    program = compile_source(wrong, "wrong.loom", demo, Diagnostics())
    scan = schedule(program, demo)
    cycles = lay_out_cycles(scan)
    assert not replay(scan, cycles).ok
    assert not VirtualBoard(build_electrical(demo, Diagnostics()), scan, cycles).run().passed


# ---------------------------------------------------------------------------- command line


def test_generate_command_writes_a_program_that_compiles(tmp_path):
    runner = CliRunner()
    out = tmp_path / "gen.loom"
    result = runner.invoke(main, ["generate", str(DEMO), "--kind", "all", "--codes", "true-complement",
                                  "-o", str(out)])
    assert result.exit_code == 0, result.output
    assert re.fullmatch(r".*gen\.loom: 7 integrity tests, 2 interconnect tests \(28 nets, 20 vectors, "
                        r"true-complement codes\)\n", result.output)
    text = out.read_text()
    board_line = re.search(r'^board "(.*)"$', text, re.M).group(1)
    assert (tmp_path / board_line).resolve() == DEMO.resolve()
    compiled_result = runner.invoke(main, ["compile", str(out), "--out", str(tmp_path / "o"), "--format", "json"])
    assert compiled_result.exit_code == 0, compiled_result.output


def test_generate_command_refuses_bad_input(tmp_path):
    runner = CliRunner()
    missing = runner.invoke(main, ["generate", str(tmp_path / "none.yaml"), "-o", str(tmp_path / "x.loom")])
    assert missing.exit_code == 2
    usage = runner.invoke(main, ["generate", str(DEMO), "--codes", "gray", "-o", str(tmp_path / "x.loom")])
    assert usage.exit_code == 2 and "gray" in usage.output


def test_a_vector_longer_than_the_fight_limit_says_why_it_is_meant():
    # 600 output cells and their control cell, 600 input cells, a 1 MHz TCK: one vector stands
    # for a 1201-bit scan and the 8 TAP clocks around it, 1.21 ms, above the default 1 ms fight
    # limit: a short between neighbouring outputs driven apart would fight that long.
    from dataclasses import replace

    width = 600
    cells = [(i, "BC_1", f"Q({i})", "OUTPUT3", "0", width, 0, "Z") for i in range(width)]
    source = make_device("SRC", 3, cells + [(width, "BC_1", "*", "CONTROL", "0")])
    sink = make_device("SNK", 3, [(i, "BC_1", f"A({i})", "INPUT", "X") for i in range(width)])
    slow = [replace(d, tap=replace(d.tap, max_tck_hz=1e6),
                    pin_maps={"P": {f"Q({i})": (str(i + 1),) for i in range(width)}}, pin_map_name="P")
            for d in (source, sink)]
    board = make_board([("U1", slow[0]), ("U2", slow[1])],
                       {f"W{i}": [f"U1.Q({i})", f"U2.A({i})"] for i in range(width)})
    text = generate_program(board, "b.yaml", "interconnect", "counting").text
    assert "tck 1 MHz" in text
    assert re.search(r'^    allow short_fight "each vector stands for one scan of 1201 bits, 1\.21 ms at 1 MHz',
                     text, re.M)
    diagnostics = Diagnostics()
    program = compile_source(text, "g.loom", board, diagnostics)
    scan = schedule(program, board)
    report = check_program(program, board, scan, lay_out_cycles(scan))
    assert not report.findings and report.allowed  # the fights are named, and allowed for a reason
    assert all(f.check == "short_fight" for f, _ in report.allowed)


def test_no_interconnect_on_a_board_without_scan_to_scan_nets():
    lone = make_device("LONE", 3, [(0, "BC_1", "A", "INPUT", "X")])
    board = make_board([("U1", lone)], {"N": ["U1.A"]})
    with pytest.raises(ScanloomError) as caught:
        generate_program(board, "b.yaml", "interconnect", "counting")
    assert re.match(r".*no net has a scan driver and a scan receiver on another pin", caught.value.render())
    # Integrity still makes sense on such a board, and passes.
    compiled(board, generate_program(board, "b.yaml", "integrity", "counting").text)

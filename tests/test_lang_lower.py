"""Lowering to the IR: modes per device, persisting drives, driver choice, registers, waits.

The IR contract is the docstrings of scanloom/ir.py; golden dumps of every example pin it down.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest
from lang_boards import U1_IDCODE, U2_IDCODE, run

from scanloom.diagnostics import Diagnostics
from scanloom.ir import (
    COMPUTED, Drive, Expect, Override, RegisterRead, RegisterWrite, Step, Wait,
)
from scanloom.lang.frontend import dump_program, load_program

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = ROOT / "examples" / "irrigation"
GOLDEN = Path(__file__).resolve().parent / "golden" / "ir"


def steps_of(text: str) -> tuple[Step, ...]:
    program, _ = run(text)
    return program.tests[0].steps


def test_program_fields_from_the_header():
    program, _ = run('default mode SAMPLE\nfinish in idle\nfight limit 250 us\n'
                     'test t "the title" {\n    step s {\n    }\n}\n')
    assert program.tck_hz == 10e6
    assert program.default_instruction == "SAMPLE"
    assert program.end_state == "RUN_TEST_IDLE"
    assert program.fight_limit_s == pytest.approx(250e-6)
    assert program.tests[0].title == "the title"
    assert set(program.header_spans) == {"board", "tck", "default mode", "finish", "fight limit"}
    assert program.tests[0].steps[0].modes == (("U1", "SAMPLE"), ("U2", "SAMPLE"), ("U3", "SAMPLE"))


def test_defaults_when_the_header_is_silent():
    program, _ = run('test t "t" {\n    step s {\n    }\n}\n')
    assert program.default_instruction == "BYPASS"
    assert program.end_state == "TEST_LOGIC_RESET"
    assert program.fight_limit_s == 1e-3


def test_modes_list_every_device_in_chain_order_and_change_between_steps():
    steps = steps_of('test t "t" {\n    U2 SAMPLE\n    U1 EXTEST\n    step a {\n    }\n'
                     "    U1, U2 SAMPLE\n    step b {\n    }\n}\n")
    assert steps[0].modes == (("U1", "EXTEST"), ("U2", "SAMPLE"), ("U3", "BYPASS"))
    assert steps[1].modes == (("U1", "SAMPLE"), ("U2", "SAMPLE"), ("U3", "BYPASS"))


def test_modes_do_not_carry_from_one_test_to_the_next():
    program, _ = run('test a "a" {\n    U1 EXTEST\n    step s {\n    }\n}\n'
                     'test b "b" {\n    step s {\n    }\n}\n')
    assert program.tests[1].steps[0].mode_of("U1") == "BYPASS"


def test_drives_persist_sorted_by_target_with_releases_kept():
    steps = steps_of('test t "t" {\n    U1 EXTEST\n    U2 SAMPLE\n'
                     "    step a {\n        drive N1 = 1, N0 = 0\n    }\n"
                     "    step b {\n        drive N2 = 1\n        release N0\n    }\n"
                     "    step c {\n    }\n}\n")
    assert steps[0].drives == (Drive("N0", False, "0", "U1.Q(0)"), Drive("N1", False, "1", "U1.Q(1)"))
    expected = (Drive("N0", False, "Z", "U1.Q(0)"), Drive("N1", False, "1", "U1.Q(1)"),
                Drive("N2", False, "1", "U1.Q(2)"))
    assert steps[1].drives == expected
    assert steps[2].drives == expected  # nothing changed: the state persists


def test_drives_do_not_persist_into_the_next_test():
    program, _ = run('test a "a" {\n    U1 EXTEST\n    step s {\n        drive N0 = 1\n    }\n}\n'
                     'test b "b" {\n    U1 EXTEST\n    step s {\n    }\n}\n')
    assert program.tests[1].steps[0].drives == ()


def test_a_pin_drive_replaces_the_drive_of_its_net():
    steps = steps_of('test t "t" {\n    U1, U3 EXTEST\n'
                     "    step a {\n        drive BUS = 1\n    }\n"
                     "    step b {\n        drive U3.Y = 0\n    }\n}\n")
    assert steps[0].drives == (Drive("BUS", False, "1", "U1.D"),)
    assert steps[1].drives == (Drive("U3.Y", True, "0", "U3.Y"),)


def test_driver_is_the_first_capable_device_in_chain_order():
    # BUS has U1.D (BC_7 bidirectional) and U3.Y (three-state output): both can drive it.
    (step,) = steps_of('test t "t" {\n    U3 EXTEST\n    step s {\n        drive BUS = 1\n    }\n}\n')
    assert step.drives[0].driver == "U3.Y"
    (step,) = steps_of('test t "t" {\n    U1, U3 EXTEST\n    step s {\n        drive BUS = 1\n'
                       "    }\n}\n")
    assert step.drives[0].driver == "U1.D"


def test_persisting_drive_without_a_driver_in_a_later_mode():
    steps = steps_of('test t "t" {\n    U1 EXTEST\n    step a {\n        drive N0 = 1\n    }\n'
                     "    U1 SAMPLE\n    step b {\n    }\n}\n")
    assert steps[1].drives == (Drive("N0", False, "1", None),)


def test_expectations_with_x_and_computed():
    (step,) = steps_of('test t "t" {\n    U1 EXTEST\n    U2 SAMPLE\n    step s {\n'
                       "        expect N = 0b1X0, Y = computed\n    }\n}\n")
    assert step.expects == (Expect("N0", False, "0"), Expect("N1", False, "X"),
                            Expect("N2", False, "1"), Expect("Y", False, COMPUTED))


def test_slices_count_from_the_last_member():
    # group N = [N2, N1, N0]: N2 is bit 2 (most significant), N0 bit 0.
    (step,) = steps_of('test t "t" {\n    U1 EXTEST\n    step s {\n        drive N[2:1] = 0b10\n'
                       "    }\n}\n")
    assert step.drives == (Drive("N1", False, "0", "U1.Q(1)"), Drive("N2", False, "1", "U1.Q(2)"))


def test_table_rows_become_steps_named_in_order():
    steps = steps_of('test t "t" {\n    U1 EXTEST\n    U2 SAMPLE\n    table {\n        N -> N\n'
                     "        0b001 -> 1\n        # comment\n        0b010 -> 2\n    }\n"
                     "    table walk {\n        N0 -> N0\n        1 -> 1\n    }\n}\n")
    assert [s.name for s in steps] == ["row1", "row2", "walk_1"]
    assert [d.value for d in steps[1].drives] == ["0", "1", "0"]
    assert [e.value for e in steps[1].expects] == ["0", "1", "0"]
    assert [d.value for d in steps[2].drives] == ["1", "1", "0"]  # N1 persists from row2


def test_register_access_chooses_the_selecting_instruction_from_the_bsdl():
    program, _ = run('test t "t" {\n    read U1 DEVICE_ID\n    read U2 DEVICE_ID expect X\n'
                     "    write U1 CFGREG using USERCFG 0xA5\n    read U3 BYPASS\n}\n")
    steps = program.tests[0].steps
    assert [s.name for s in steps] == ["read_U1_DEVICE_ID", "read_U2_DEVICE_ID",
                                       "write_U1_CFGREG", "read_U3_BYPASS"]
    assert steps[0].modes == (("U1", "IDCODE"), ("U2", "BYPASS"), ("U3", "BYPASS"))
    assert steps[0].reads == (RegisterRead("U1", "DEVICE_ID", U1_IDCODE),)
    assert steps[1].reads == (RegisterRead("U2", "DEVICE_ID", "X" * 32),)
    assert steps[2].mode_of("U1") == "USERCFG"
    assert steps[2].writes == (RegisterWrite("U1", "CFGREG", "10100101"),)
    # IEEE Std 1149.1 (bypass register, from memory): it captures a 0 at Capture-DR.
    assert steps[3].reads == (RegisterRead("U3", "BYPASS", "0"),)


def test_read_without_a_value_expects_the_bsdl_idcode_with_its_x_bits():
    (step,) = steps_of('test t "t" {\n    read U2 DEVICE_ID\n}\n')
    assert step.reads[0].expected == U2_IDCODE and step.reads[0].expected.startswith("XXXX")


def test_register_access_keeps_a_mode_that_already_selects_the_register():
    steps = steps_of('test t "t" {\n    U1 SAMPLE\n    step s {\n        write U1 BOUNDARY 0\n'
                     "    }\n    step u {\n        write U2 BOUNDARY 0\n    }\n}\n")
    assert steps[0].mode_of("U1") == "SAMPLE"
    assert steps[0].writes[0].bits == "0" * 9
    # 1990 style: SAMPLE is the combined sample/preload instruction.
    assert steps[1].mode_of("U2") == "SAMPLE"
    assert steps[1].mode_of("U1") == "SAMPLE"


def test_register_access_changes_the_mode_for_its_step_only():
    steps = steps_of('test t "t" {\n    U1 EXTEST\n    step a {\n        read U1 DEVICE_ID\n'
                     "    }\n    step b {\n    }\n}\n")
    assert steps[0].mode_of("U1") == "IDCODE"
    assert steps[1].mode_of("U1") == "EXTEST"


def test_waits_in_clocks_and_in_time_rounded_up_at_the_tck():
    program, _ = run('test t "t" {\n    U1 EXTEST\n    wait 100 clocks\n    step s {\n'
                     "        wait 2 ms\n        wait 3 clocks\n    }\n    wait 150 ns\n}\n")
    items = program.tests[0].items
    assert items[0] == Wait(100, (("U1", "EXTEST"), ("U2", "BYPASS"), ("U3", "BYPASS")))
    # 2 ms at 10 MHz is exactly 20 000 clocks (no rounding from binary floating point).
    assert items[1].wait_clocks == 20_003
    # 150 ns at 10 MHz is 1.5 clocks: whole clocks, rounded up.
    assert items[2].clocks == 2


def test_overrides_per_test_and_per_step():
    program, _ = run('test t "t" {\n    allow contention "bus fight on purpose"\n    step s {\n'
                     '        allow short_fight "two nets"\n    }\n}\n')
    test = program.tests[0]
    assert test.overrides == (Override("contention", "bus fight on purpose"),)
    assert test.steps[0].overrides == (Override("short_fight", "two nets"),)


def test_spans_of_ir_nodes_point_into_the_program():
    (step,) = steps_of('test t "t" {\n    U1 EXTEST\n    step s {\n        drive N0 = 1\n    }\n}\n')
    assert (step.span.line, step.drives[0].span.line, step.drives[0].span.column) == (6, 7, 20)


# ---- the examples -----------------------------------------------------------------------------

EXAMPLE_PROGRAMS = sorted(EXAMPLES.glob("*.loom"))


def test_there_are_at_least_three_examples():
    assert {p.stem for p in EXAMPLE_PROGRAMS} >= {"cluster_mux", "registers", "valve_nets"}


@pytest.mark.parametrize("path", EXAMPLE_PROGRAMS, ids=lambda p: p.stem)
def test_golden_ir_of_each_example(path: Path):
    program, _ = load_program(path, Diagnostics())
    dumped = dump_program(program, path.parent)
    golden = GOLDEN / f"{path.stem}.json"
    if os.environ.get("SCANLOOM_UPDATE_GOLDEN"):
        golden.parent.mkdir(parents=True, exist_ok=True)
        golden.write_text(dumped)
    assert dumped == golden.read_text()
    data = json.loads(dumped)
    assert data["source"] == path.name and data["board_path"] == "irrigation.yaml"
    assert str(ROOT) not in dumped


def test_cluster_example_has_a_vector_table_through_the_logic():
    program, _ = load_program(EXAMPLES / "cluster_mux.loom", Diagnostics())
    rows = [s for s in program.tests[0].steps if s.name.startswith("row")]
    assert len(rows) >= 8
    targets = {d.target for d in rows[0].drives} | {e.target for e in rows[0].expects}
    assert {"MUX_SEL", "MUX_A0", "MUX_B3", "MUX_Y0"} <= targets
    assert any(e.value == COMPUTED for s in rows for e in s.expects)


def test_register_example_reads_idcodes_with_x_bits_and_a_user_register():
    program, _ = load_program(EXAMPLES / "registers.loom", Diagnostics())
    reads = {(r.ref, r.register): r.expected for t in program.tests for s in t.steps
             for r in s.reads}
    assert reads[("U3", "DEVICE_ID")].startswith("XXXX")
    # IEEE Std 1149.1 (device identification register, from memory): bit 0 is always 1.
    assert all(v.endswith("1") for (ref, reg), v in reads.items() if reg == "DEVICE_ID")
    assert reads[("U1", "CFGREG")] in ("10100101", "00111100")
    writes = [w for t in program.tests for s in t.steps for w in s.writes]
    assert writes[0].register == "CFGREG" and writes[0].bits == "10100101"



"""Semantic checks: each error class with an anchored message at its position.

Line numbers given to `one` count from the first line after the standard test header.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from lang_boards import HEADER, diagnose, one, run, small_board

from scanloom.diagnostics import Diagnostics, ScanloomError
from scanloom.lang.checks import OVERRIDABLE_CHECKS
from scanloom.lang.frontend import compile_source, load_program

EXAMPLES = Path(__file__).resolve().parent.parent / "examples" / "irrigation"


def step(body: str, modes: str = "    U1 EXTEST\n    U2 SAMPLE\n") -> str:
    """A test whose step starts on line 3 + the number of mode lines; body lines follow."""
    return 'test t "t" {\n' + modes + "    step s {\n" + body + "\n    }\n}\n"


# Lines: 1 test, 2-3 modes, 4 step, 5.. body.
BODY = 5


# ---- names ------------------------------------------------------------------------------------

def test_unknown_device_in_a_mode_line_suggests_the_nearest():
    d = diagnose('test t "t" {\n    U11 EXTEST\n    step s {\n    }\n}\n')
    found = one(d, "error", 2, 5, r"unknown device U11")
    assert found.suggestions == ("U1",)


def test_unknown_instruction_suggests_the_nearest():
    d = diagnose('test t "t" {\n    U1 EXTST\n    step s {\n    }\n}\n')
    assert one(d, "error", 2, 8, r"U1 \(CTL\) has no instruction EXTST").suggestions[0] == "EXTEST"


def test_instruction_names_are_case_insensitive():
    program, _ = run('test t "t" {\n    U1 extest\n    step s {\n        drive N0 = 1\n    }\n}\n')
    assert program.tests[0].steps[0].mode_of("U1") == "EXTEST"


def test_private_instruction_is_refused():
    d = diagnose('test t "t" {\n    U1 SECRET\n    step s {\n    }\n}\n')
    one(d, "error", 2, 8, r"SECRET is a private instruction of U1 \(CTL\)")


def test_unknown_net_suggests_the_nearest_names_in_scope():
    d = diagnose(step("        drive N9 = 1"))
    found = one(d, "error", BODY, 15, r"unknown net or group N9")
    assert set(found.suggestions) <= {"N", "N0", "N1", "N2", "N3"} and found.suggestions


def test_unknown_port_of_a_pin():
    d = diagnose(step("        drive U1.Q(7) = 1"))
    found = one(d, "error", BODY, 15, r"U1 \(CTL\) has no port Q\(7\)")
    assert "Q(0)" in found.suggestions or "Q(1)" in found.suggestions


def test_vector_port_without_a_bit():
    d = diagnose(step("        drive U1.Q = 1"))
    one(d, "error", BODY, 15, r"U1\.Q is a vector port; name one of its bits")


def test_pin_of_a_part_without_boundary_scan_points_to_its_net():
    d = diagnose(step("        drive U10.A = 1"))
    found = one(d, "error", BODY, 15, r"U10 has no boundary scan: its pins cannot be driven or "
                                      r"read directly")
    assert found.hint == "name its net N3 instead"


def test_device_used_as_a_net():
    d = diagnose(step("        expect U2 = 1"))
    one(d, "error", BODY, 16, r"U2 is a device, not a net or group")


def test_slicing_a_net_and_an_unknown_group():
    d = diagnose(step("        drive N0[0] = 1, M[1:0] = 0"))
    one(d, "error", BODY, 15, r"N0 is a net; only groups can be sliced")
    one(d, "error", BODY, 26, r"unknown group M")


def test_slice_out_of_range_and_reversed():
    d = diagnose(step("        drive N[3:0] = 0, N[0:2] = 0"))
    one(d, "error", BODY, 15, r"N has bits 2\.\.0; bit 3 is out of range")
    one(d, "error", BODY, 27, r"slice N\[0:2\] is written low bit first")


def test_unknown_register_and_instruction_given_for_a_register():
    d = diagnose('test t "t" {\n    read U1 CFGREX expect 0\n    read U1 IDCODE\n}\n')
    assert one(d, "error", 2, 13, r"U1 \(CTL\) has no register CFGREX").suggestions == ("CFGREG",)
    found = one(d, "error", 3, 13, r"IDCODE is an instruction of U1, not a register")
    assert found.suggestions == ("DEVICE_ID",)


# ---- duplicates -------------------------------------------------------------------------------

def test_duplicate_test_and_step_names():
    d = diagnose('test t "a" {\n    step s {\n    }\n    step s {\n    }\n}\n'
                 'test t "b" {\n    step u {\n    }\n}\n')
    one(d, "error", 4, 10, r"step s is declared twice in this test")
    one(d, "error", 7, 6, r"test t is declared twice")


def test_duplicate_group_and_group_named_like_a_net():
    d = diagnose("group N = [N0]\ngroup N1 = [N0]\n")
    one(d, "error", 1, 7, r"group N is declared twice")
    one(d, "error", 2, 7, r"group N1 has the name of a net of the board")


def test_group_cycle_and_repeated_member():
    d = diagnose("group G = [H, N0]\ngroup H = [G]\ngroup R = [N0, N0]\n")
    assert any(x.message.startswith("group G contains itself: G -> H -> G") for x in d)
    one(d, "error", 3, 7, r"N0 appears twice in group R")


def test_header_setting_given_twice():
    d = diagnose("tck 5 MHz\n")
    one(d, "error", 1, 1, r"the program sets tck twice")


# ---- values -----------------------------------------------------------------------------------

def test_binary_literal_width_must_match():
    d = diagnose(step("        drive N = 0b10"))
    found = one(d, "error", BODY, 19, r"0b10 has 2 bits but N is 3 bits wide")
    assert found.expected == "3 binary digits"


def test_hex_and_decimal_values_must_fit():
    d = diagnose(step("        drive N = 0x8, N0 = 2\n        expect N = 7"))
    one(d, "error", BODY, 19, r"0x8 does not fit in N \(3 bits\)")
    one(d, "error", BODY, 29, r"2 does not fit in N0 \(1 bit: at most 1\)")
    program, _ = run(step("        drive N = 0x5\n        expect N = 5"))
    drives = {d.target: d.value for d in program.tests[0].steps[0].drives}
    assert drives == {"N2": "1", "N1": "0", "N0": "1"}


def test_malformed_numbers():
    d = diagnose(step("        drive N = 0b102, N0 = 0xG, N1 = 1.5"))
    one(d, "error", BODY, 19, r"malformed binary number 0b102")
    one(d, "error", BODY, 31, r"malformed hex number 0xG")
    one(d, "error", BODY, 41, r"1\.5 is not a whole number")


def test_roles_of_x_z_and_computed():
    d = diagnose(step("        drive N0 = X, N1 = computed, N = 0b1X0\n"
                      "        expect N0 = Z, N = 0bZ00"))
    one(d, "error", BODY, 20, r"X cannot be driven onto N0")
    one(d, "error", BODY, 28, r"'computed' is only for expectations, not for a drive")
    one(d, "error", BODY, 42, r"0b1X0 has X bits, which cannot be driven")
    one(d, "error", BODY + 1, 21, r"Z cannot be expected on N0")
    one(d, "error", BODY + 1, 28, r"0bZ00 has Z bits, which cannot be expected")


def test_register_values_against_the_register_length():
    d = diagnose('test t "t" {\n    write U1 CFGREG 0x1A5\n    read U1 CFGREG expect 0b101\n'
                 "    read U1 CFGREG\n}\n")
    one(d, "error", 2, 21, r"0x1A5 does not fit in U1 CFGREG \(8 bits\)")
    one(d, "error", 3, 27, r"0b101 has 3 bits but U1 CFGREG is 8 bits wide")
    one(d, "error", 4, 5, r"read U1 CFGREG needs an expected value")


# ---- driving and observing --------------------------------------------------------------------

def test_driving_a_net_no_device_in_a_driving_mode_can_drive():
    d = diagnose(step("        drive N0 = 1", modes="    U2 SAMPLE\n"))
    found = one(d, "error", BODY - 1, 15, r"no device in a driving mode can drive N0")
    assert found.hint == "U1 (in BYPASS) can drive it in EXTEST or CLAMP"


def test_driving_a_net_without_any_output_cell():
    d = diagnose(step("        drive Y = 1"))
    found = one(d, "error", BODY, 15, r"no device in a driving mode can drive Y")
    assert found.hint == "no scan device on Y has an output cell"


def test_driving_an_input_pin():
    d = diagnose(step("        drive U1.IN = 1"))
    found = one(d, "error", BODY, 15, r"U1\.IN cannot be driven in this step")
    assert found.hint == "U1.IN has no boundary cell that can drive it"


def test_group_drive_reports_the_failing_bits_once():
    d = diagnose(step("        drive N = 0", modes="    U3 EXTEST\n"))
    one(d, "error", BODY - 1, 15, r"no device in a driving mode can drive N2, N1, N0 "
                                  r"\(3 of 3 bits of N\)")


def test_intest_drives_core_side_input_cells():
    program, _ = run(step("        drive U1.IN = 1", modes="    U1 INTEST\n"))
    (drive,) = program.tests[0].steps[0].drives
    assert drive.driver == "U1.IN"
    d = diagnose(step("        drive U1.Q(0) = 1", modes="    U1 INTEST\n"))
    one(d, "error", BODY - 1, 15, r"U1\.Q\(0\) cannot be driven in this step")


def test_clamp_drives():
    program, _ = run(step("        drive N0 = 1", modes="    U1 CLAMP\n"))
    assert program.tests[0].steps[0].drives[0].driver == "U1.Q(0)"


def test_expecting_a_net_no_device_in_a_capturing_mode_observes():
    d = diagnose(step("        drive N0 = 1\n        expect N0 = 1", modes="    U1 EXTEST\n"))
    found = one(d, "error", BODY, 16, r"no device in a capturing mode observes N0")
    assert found.hint == "U2 (in BYPASS) could capture it in SAMPLE or EXTEST"


def test_expecting_a_net_nobody_can_capture():
    d = diagnose(step("        expect N3 = 1"))
    found = one(d, "error", BODY, 16, r"no device in a capturing mode observes N3")
    assert found.hint == "no scan device on N3 has a cell that captures it"


def test_bc1_output_cell_does_not_capture_its_pin_under_extest():
    # IEEE Std 1149.1 BC_1 (standard BSDL package, from memory): an output cell captures the
    # system-logic side (PI), not the pin, so an expectation on U3.Y cannot be checked.
    d = diagnose(step("        expect U3.Y = 1", modes="    U3 EXTEST\n"))
    one(d, "error", BODY - 1, 16, r"U3\.Y has no boundary cell that captures it")


def test_bc7_reads_its_pin_back_while_driving():
    # BC_7 (standard BSDL package): the bidirectional cell captures the pin even while driving.
    program, _ = run(step("        drive BUS = 1\n        expect BUS = 1", modes="    U1 EXTEST\n"))
    assert program.tests[0].steps[0].expects[0].target == "BUS"


def test_expectation_on_a_device_in_a_non_capturing_mode():
    d = diagnose(step("        expect U2.A(0) = 1", modes="    U2 IDCODE\n"))
    one(d, "error", BODY - 1, 16, r"U2 is in IDCODE, which does not capture pins: the "
                                  r"expectation on U2\.A\(0\) cannot be checked")


def test_expectation_on_a_device_left_in_bypass_is_a_warning():
    d = diagnose(step("        expect U2.A(0) = 1", modes="    U1 EXTEST\n"))
    found = one(d, "warning", BODY - 1, 16, r"the expectation on U2\.A\(0\) will be ignored: U2 "
                                            r"is in BYPASS")
    assert "SAMPLE" in found.hint


def test_x_expectations_need_no_observer():
    program, _ = run(step("        expect N3 = X"))
    assert program.tests[0].steps[0].expects[0].value == "X"


def test_two_different_values_for_one_net_in_one_step():
    d = diagnose(step("        drive N0 = 1\n        drive N[0] = 0"))
    one(d, "error", BODY + 1, 22, r"N0 is driven to two different values in step s: 1 and 0")


def test_a_pin_and_its_net_are_one_net():
    d = diagnose(step("        drive N0 = 1, U1.Q(0) = 0\n        expect N0 = 1, U2.A(0) = 0"))
    one(d, "error", BODY, 33, r"N0 is driven to two different values in step s: 1 and 0")
    one(d, "error", BODY + 1, 34, r"N0 is expected to two different values in step s: 1 and 0")


def test_same_value_twice_is_not_a_conflict():
    program, _ = run(step("        drive N0 = 1, N[0] = 1"))
    assert len(program.tests[0].steps[0].drives) == 1


def test_a_value_takes_the_place_of_a_dont_care_on_the_same_wire():
    # X means "not compared", so it does not contradict an expected value; the value stays.
    program, _ = run(step("        expect N0 = X, U2.A(0) = 0, N1 = 1, N[1] = X"))
    expects = program.tests[0].steps[0].expects
    assert [(e.target, e.value) for e in expects] == [("N1", "1"), ("U2.A(0)", "0")]
    program, _ = run('test t "t" {\n    U1 EXTEST\n    U2 SAMPLE\n    table {\n        N -> N0 U2.A(0)\n'
                     "        0b001 -> X 1\n    }\n}\n")
    assert [(e.target, e.value) for e in program.tests[0].steps[0].expects] == [("U2.A(0)", "1")]


# ---- register access --------------------------------------------------------------------------

def test_reading_through_an_instruction_that_does_not_select_the_register():
    d = diagnose('test t "t" {\n    read U1 DEVICE_ID using SAMPLE\n}\n')
    found = one(d, "error", 2, 29, r"SAMPLE selects BOUNDARY, not DEVICE_ID: this read of U1 "
                                   r"DEVICE_ID cannot go through it")
    assert found.suggestions == ("IDCODE",)


def test_two_instructions_for_one_device_in_one_step():
    d = diagnose('test t "t" {\n    step s {\n        read U1 DEVICE_ID\n'
                 "        write U1 CFGREG 0x01\n    }\n}\n")
    one(d, "error", 4, 9, r"U1 cannot hold IDCODE and CFGREG in one step")


def test_register_that_no_public_instruction_selects():
    d = diagnose('test t "t" {\n    read U2 DEVICE_ID\n    read U3 DEVICE_ID\n}\n')
    one(d, "error", 3, 13, r"U3 \(BUF\) has no register DEVICE_ID")


# ---- header, waits, overrides, tables ---------------------------------------------------------

def test_wait_for_a_time_needs_the_tck_frequency():
    d = diagnose('board "b"\ntest t "t" {\n    wait 2 ms\n}\n', header=False)
    assert any(x.message == "wait 2 ms needs the TCK frequency" and x.span.line == 3 and
               x.span.column == 10 for x in d)


def test_unknown_units():
    d = diagnose('test t "t" {\n    wait 2 msec\n    wait 3 clock\n}\n')
    found = one(d, "error", 2, 12, r"unknown time unit msec")
    assert "ms" in found.suggestions
    d = diagnose('board "b"\ntck 10 Mhz\ntck 1 ms\n', header=False)
    assert [x.message for x in d] == ["the program sets tck twice"]


def test_unknown_frequency_unit_stops_before_the_tests_and_fractional_clocks():
    d = diagnose('board "b"\ntck 10 MHZZ\ntest t "t" {\n    wait 2.5 clocks\n}\n', header=False)
    assert [(x.message, x.span.line) for x in d] == [("unknown frequency unit MHZZ", 2)]
    d = diagnose('test t "t" {\n    wait 2.5 clocks\n}\n')
    one(d, "error", 2, 10, r"2\.5 clocks is not a whole number of clocks")


def test_unknown_safety_check_in_allow():
    d = diagnose('test t "t" {\n    allow contenton "on purpose"\n    allow hold ""\n'
                 "    step s {\n    }\n}\n")
    found = one(d, "error", 2, 11, r"unknown safety check contenton")
    assert found.suggestions == ("contention",)
    assert found.expected == ", ".join(OVERRIDABLE_CHECKS)
    one(d, "error", 3, 5, r"allow hold needs a reason")


def test_default_instruction_must_exist_on_every_device():
    d = diagnose("default mode IDCODE\n")
    one(d, "error", 1, 14, r"the default instruction IDCODE is not an instruction of U3")


def test_table_rows_must_match_the_columns():
    d = diagnose('test t "t" {\n    U1 EXTEST\n    U2 SAMPLE\n    table {\n        N -> N\n'
                 "        1 2 -> 1\n        0b111 -> 7\n        0b1111 -> 0\n    }\n}\n")
    one(d, "error", 6, 9, r"the row has 2 drive and 1 expect cells; the table has 1 and 1 columns")
    one(d, "error", 8, 9, r"0b1111 has 4 bits but N is 3 bits wide")


def test_a_wrong_table_cell_is_reported_at_its_own_column():
    # Cells are fitted to their column's width once per distinct value; the message still
    # points at the cell, on whichever side of the arrow it is.
    d = diagnose('test t "t" {\n    U1 EXTEST\n    U2 SAMPLE\n    table {\n        N LAMP -> N N0\n'
                 "        7 1 -> 7 1\n        7 1 -> 0x8 1\n        0 X -> 0 0\n        7 1 -> 0x8 1\n"
                 "    }\n}\n")
    one(d, "error", 7, 16, r"0x8 does not fit in N \(3 bits\)")
    one(d, "error", 8, 11, r"X cannot be driven onto LAMP")
    one(d, "error", 9, 16, r"0x8 does not fit in N \(3 bits\)")
    assert len([x for x in d if x.severity == "error"]) == 3


def test_table_column_that_cannot_be_driven_is_reported_once():
    d = diagnose('test t "t" {\n    U2 SAMPLE\n    table {\n        N0 -> N0\n        1 -> 1\n'
                 "        0 -> 0\n    }\n}\n")
    errors = [x for x in d if x.severity == "error"]
    assert len(errors) == 1
    one(d, "error", 4, 9, r"no device in a driving mode can drive N0")


def test_table_column_released_in_every_row_needs_no_driver():
    # A release (Z) drives nothing, as `release` in a step; the first row that drives a value
    # where no device can is reported, once, at the column.
    d = diagnose('test t "t" {\n    U2 SAMPLE\n    table {\n        LAMP -> N0\n        Z -> X\n'
                 "        Z -> 1\n    }\n}\n")
    assert [x for x in d if x.severity == "error"] == []
    d = diagnose('test t "t" {\n    U2 SAMPLE\n    table {\n        LAMP -> N0\n        Z -> X\n'
                 "        1 -> 1\n        1 -> 0\n    }\n}\n")
    errors = [x for x in d if x.severity == "error"]
    assert len(errors) == 1
    one(d, "error", 4, 9, r"no device in a driving mode can drive LAMP")


def test_mode_line_with_no_step_after_it_and_empty_test_warn():
    d = diagnose('test t "t" {\n    step s {\n    }\n    U1 EXTEST\n}\ntest e "empty" {\n}\n')
    one(d, "warning", 4, 5, r"setting U1 to EXTEST has no effect: no step follows in test t")
    one(d, "warning", 6, 6, r"test e has no steps")


# ---- the run as a whole -----------------------------------------------------------------------

def test_several_errors_in_one_run_sorted_by_position():
    d = diagnose(step("        drive N9 = 1\n        expect N0 = 5\n        drive U1.Q(9) = 1"))
    lines = [(x.span.line, x.span.column) for x in d]
    assert lines == sorted(lines)
    assert len([x for x in d if x.severity == "error"]) == 3


def test_strict_promotes_warnings():
    text = step("        expect U2.A(0) = 1", modes="    U1 EXTEST\n")
    d = diagnose(text, strict=True)
    assert [x.severity for x in d] == ["error"]


def test_program_without_a_board_line(tmp_path):
    program = tmp_path / "p.loom"
    program.write_text('test t "t" {\n}\n')
    with pytest.raises(ScanloomError) as caught:
        load_program(program, Diagnostics())
    assert caught.value.diagnostics[0].message == "the program names no board"


def test_includes_cycle_missing_and_main_program_settings(tmp_path):
    (tmp_path / "a.loom").write_text('include "b.loom"\ngroup GA = [N0]\n')
    (tmp_path / "b.loom").write_text('include "a.loom"\ntck 1 MHz\ninclude "none.loom"\n')
    main = tmp_path / "main.loom"
    main.write_text(HEADER + 'include "a.loom"\n')
    diagnostics = Diagnostics()
    try:
        compile_source(main.read_text(), str(main), small_board(), diagnostics)
    except ScanloomError as error:
        messages = {(x.span.file.rsplit("/", 1)[-1], x.span.line, x.message) for x in error.diagnostics}
    else:  # pragma: no cover
        raise AssertionError("expected errors")
    assert ("b.loom", 1, "include cycle: " + " -> ".join(
        [str(main.parent / "a.loom"), str(main.parent / "b.loom"), str(main.parent / "a.loom")])) \
        in messages
    assert ("b.loom", 2, "'tck' belongs in the main program, not in an included file") in messages
    assert ("b.loom", 3, "cannot read included file none.loom") in messages


def test_groups_from_an_included_file(tmp_path):
    (tmp_path / "groups.loom").write_text("group LOW = [N1, N0]\n")
    main = tmp_path / "main.loom"
    main.write_text(HEADER + 'include "groups.loom"\n' + step("        drive LOW = 0b10"))
    program = compile_source(main.read_text(), str(main), small_board(), Diagnostics())
    drives = {d.target: d.value for d in program.tests[0].steps[0].drives}
    assert drives == {"N1": "1", "N0": "0"}


def test_examples_check_clean():
    for path in sorted(EXAMPLES.glob("*.loom")):
        diagnostics = Diagnostics(strict=True)
        load_program(path, diagnostics)
        assert diagnostics.items == [], path


def test_changing_a_drive_while_the_device_stays_in_clamp_warns():
    # IEEE Std 1149.1 CLAMP (from memory): it selects the bypass register, so the boundary
    # register's update stage, and with it the pins, keep the image loaded before CLAMP.
    d = diagnose('test t "t" {\n    U1 CLAMP\n    step a {\n        drive N0 = 1\n    }\n'
                 "    step b {\n        drive N0 = 1\n    }\n    step c {\n        drive N0 = 0\n"
                 "    }\n    U1 EXTEST\n    step d {\n        drive N0 = 1\n    }\n}\n")
    assert [x.severity for x in d] == ["warning"]
    one(d, "warning", 10, 15, r"U1 stays in CLAMP: the new value of N0 does not reach the pin")

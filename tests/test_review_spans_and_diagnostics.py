"""Where the front end says things are: spans of persisting drives, of table cells, of group
members lexed as one list, and the positions and words of drive and capture diagnostics.

Positions are counted by hand in the programs below (line 1 is the first line after the
standard header of lang_boards). Facts of the standard (IEEE 1149.1-2013, from memory): only
EXTEST and CLAMP drive pins from the boundary register; BYPASS selects the one-bit bypass
register, so no boundary cell captures anything for the scan (clause 8.4).
"""

from __future__ import annotations

from lang_boards import HEADER, diagnose, one, run

OFFSET = HEADER.count("\n")


def at(span) -> tuple[int, int] | None:  # noqa: ANN001
    return None if span is None else (span.line - OFFSET, span.column)


def drives_of(step) -> dict[str, tuple[str, str | None, tuple[int, int] | None]]:  # noqa: ANN001
    return {d.target: (d.value, d.driver, at(d.span)) for d in step.drives}


# ---- spans of persisting drives -------------------------------------------------------------

def test_a_drive_restated_with_the_same_value_takes_the_new_span():
    # Step b restates every bit in force (the whole-step path), step c one of two (the
    # dictionary path): both times the restatement's own span is the drive's.
    text = ('test t "t" {\n'
            "    U1 EXTEST\n"
            "    step a {\n"
            "        drive N0 = 1, LAMP = 0\n"  # line 4: N0's value at col 20, LAMP's at 30
            "    }\n"
            "    step b {\n"
            "        drive LAMP = 0, N0 = 1\n"  # line 7: LAMP's value at col 22, N0's at 30
            "    }\n"
            "    step c {\n"
            "        drive N0 = 1\n"  # line 10: col 20
            "    }\n"
            "    step d {\n"
            "    }\n"
            "}\n")
    a, b, c, d = run(text)[0].tests[0].steps
    assert drives_of(a) == {"LAMP": ("0", "U1.P", (4, 30)), "N0": ("1", "U1.Q(0)", (4, 20))}
    assert drives_of(b) == {"LAMP": ("0", "U1.P", (7, 22)), "N0": ("1", "U1.Q(0)", (7, 30))}
    assert drives_of(c) == {"LAMP": ("0", "U1.P", (7, 22)), "N0": ("1", "U1.Q(0)", (10, 20))}
    assert drives_of(d) == drives_of(c)


def test_within_one_step_the_first_of_two_equal_drives_stands():
    text = ('test t "t" {\n    U1 EXTEST\n    step a {\n'
            "        drive N0 = 1\n"  # line 4, value at col 20
            "        drive U1.Q(0) = 1, N0 = 1\n"  # the same wire twice more
            "    }\n}\n")
    (step,) = run(text)[0].tests[0].steps
    assert drives_of(step) == {"N0": ("1", "U1.Q(0)", (4, 20))}


def test_table_cells_carry_no_span_and_a_later_step_keeps_them():
    text = ('test t "t" {\n    U1 EXTEST\n'
            "    table v {\n        N0 U1.Q(1) -> \n        1 0 -> \n        0 0 -> \n    }\n"
            "    U1 SAMPLE\n"
            "    step s {\n    }\n"
            "    U1 CLAMP\n"
            "    step c {\n        drive N1 = 1\n    }\n}\n")
    v1, v2, s, c = run(text)[0].tests[0].steps
    assert at(v1.span) == (5, 9) and at(v2.span) == (6, 9)  # the rows
    assert drives_of(v2) == {"N0": ("0", "U1.Q(0)", None), "U1.Q(1)": ("0", "U1.Q(1)", None)}
    # SAMPLE drives nothing: the persisting drives wait for a driver ...
    assert drives_of(s) == {"N0": ("0", None, None), "U1.Q(1)": ("0", None, None)}
    # ... and CLAMP drives them again; the net N1 takes the place of its pin U1.Q(1).
    assert drives_of(c) == {"N0": ("0", "U1.Q(0)", None), "N1": ("1", "U1.Q(1)", (13, 20))}


def test_a_release_persists_as_z_and_the_next_test_starts_empty():
    text = ('test a "a" {\n    U1 EXTEST\n    step s {\n        drive N = 0b101\n    }\n'
            "    step r {\n        release N[2]\n    }\n    reset tap\n    step after {\n    }\n}\n"
            'test b "b" {\n    step s {\n    }\n}\n')
    program, _ = run(text)
    s, r, after = program.tests[0].steps
    assert [(d.target, d.value) for d in r.drives] == [("N0", "1"), ("N1", "0"), ("N2", "Z")]
    assert at(r.drives[2].span) == (7, 17)  # the released signal's span
    # After Test-Logic-Reset U1 holds IDCODE (IEEE 1149.1): the drives persist without a driver.
    assert after.mode_of("U1") == "IDCODE"
    assert [(d.target, d.value, d.driver) for d in after.drives] == [
        ("N0", "1", None), ("N1", "0", None), ("N2", "Z", None)]
    assert program.tests[1].steps[0].drives == ()


# ---- group members lexed as one list --------------------------------------------------------

def test_unknown_members_of_a_plain_list_are_reported_where_they_are_written():
    body = ("group G = [N0,  # first\n"  # line 1
            "\tNX, U1.QQ,\n"  # line 2: NX at col 2, U1.QQ at col 6
            "    # a comment line\n"
            "    LAMP, U9.A]\n"  # line 4: U9.A at col 11
            'test t "t" {\n    step s {\n    }\n}\n')
    found = diagnose(body)
    one(found, "error", 2, 2, r"unknown net or group NX")
    one(found, "error", 2, 6, r"U1 \(CTL\) has no port QQ")
    one(found, "error", 4, 11, r"unknown device U9")
    assert len([d for d in found if d.severity == "error"]) == 3


def test_member_spans_with_crlf_line_ends():
    body = ('group G = [LAMP,\r\n  U1.Q(3)]\r\ntest t "t" {\r\n    U1 EXTEST\r\n    step s {\r\n'
            "        drive G = 0b1Z\r\n    }\r\n}\r\n")
    program, _ = run(body)
    (step,) = program.tests[0].steps
    assert [(d.target, d.value, d.driver) for d in step.drives] == [
        ("LAMP", "1", "U1.P"), ("U1.Q(3)", "Z", "U1.Q(3)")]
    found = diagnose(body.replace("U1.Q(3)", "U1.Q(7)"))
    one(found, "error", 2, 3, r"U1 \(CTL\) has no port Q\(7\)")


def test_a_bracket_in_a_comment_inside_a_complete_list_is_only_comment():
    program, _ = run("group G = [N0, # was [N1]\n    N2]\n"
                     'test t "t" {\n    U1 EXTEST\n    step s {\n        drive G = 0b10\n    }\n}\n')
    assert [(d.target, d.value) for d in program.tests[0].steps[0].drives] == [("N0", "1"), ("N2", "0")]


# ---- drive and capture diagnostics ----------------------------------------------------------

GROUPS = "group W = [BUS, LONE, LAMP, N3]\n"  # LONE has no output cell anywhere


def test_undrivable_bits_of_a_group_in_a_step_are_counted():
    found = diagnose(GROUPS + 'test t "t" {\n    U1 EXTEST\n    step a {\n'
                     "        drive W = 0b0110\n"  # line 5: W at col 15
                     "    }\n    step b {\n"
                     "        drive W = 0b0Z10\n"  # LONE released: nothing to drive
                     "    }\n}\n")
    one(found, "error", 5, 15, r"no device in a driving mode can drive LONE \(1 of 4 bits of W\)")
    assert [d.severity for d in found] == ["error"]


def test_undrivable_columns_of_a_table_are_reported_at_the_header():
    found = diagnose(GROUPS + 'test t "t" {\n    U1 SAMPLE\n    table {\n'
                     "        W N[1:0] U1.Q(2) -> \n"  # line 5: cols 9, 11, 18
                     "        0b0000 0b01 1 -> \n        0b1111 0b10 0 -> \n    }\n}\n")
    one(found, "error", 5, 9, r"no device in a driving mode can drive BUS, LONE, LAMP, N3 "
                              r"\(4 of 4 bits of W\)")
    one(found, "error", 5, 11, r"no device in a driving mode can drive N1, N0 \(2 of 2 bits of N\[1:0\]\)")
    one(found, "error", 5, 18, r"U1.Q\(2\) cannot be driven in this step")
    assert len(found) == 3  # once per column, not once per row


def test_expectations_on_pins_of_a_device_in_bypass_are_warned_and_kept():
    text = ('test t "t" {\n    U2 BYPASS\n    step a {\n'
            "        expect U2.A(0) = 1, U2.E = X\n"  # line 4: U2.A(0) at col 16
            "    }\n}\n")
    found = diagnose(text)
    one(found, "warning", 4, 16, r"the expectation on U2.A\(0\) will be ignored: U2 is in BYPASS")
    assert len(found) == 1  # the X expectation on U2.E compares nothing
    (step,) = run(text)[0].tests[0].steps
    assert [(e.target, e.value) for e in step.expects] == [("U2.A(0)", "1"), ("U2.E", "X")]

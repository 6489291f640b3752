"""The .loom grammar and parser: every construct, and syntax errors stated in words."""

from __future__ import annotations

import re

import pytest
from lark import Lark
from lark.lexer import Lexer

from scanloom.diagnostics import Diagnostics, ScanloomError
from scanloom.lang import ast
from scanloom.lang.parser import parse_source, parse_text


def parse(text: str) -> ast.Program:
    return parse_text(text, "t.loom")


def only_test(text: str) -> ast.Test:
    program = parse(text)
    tests = [i for i in program.items if isinstance(i, ast.Test)]
    assert len(tests) == 1
    return tests[0]


def in_step(body: str) -> tuple:
    test = only_test("test t \"title\" {\n    step s {\n" + body + "\n    }\n}\n")
    step = test.items[0]
    assert isinstance(step, ast.Step)
    return step.items


def syntax_error(text: str) -> tuple[str, str]:
    """(first rendered line, whole rendering) of the syntax error in `text`."""
    with pytest.raises(ScanloomError) as caught:
        parse(text)
    rendered = caught.value.render()
    assert len(caught.value.diagnostics) == 1
    return rendered.splitlines()[0], rendered


class _NoLexer(Lexer):
    def __init__(self, conf: object) -> None:
        pass

    def lex(self, data: object):  # pragma: no cover - never called
        return iter(())


def test_grammar_is_conflict_free_lalr():
    # lark's strict mode turns every shift/reduce conflict into an error. (Its lexer half needs
    # the interegular package, so the grammar is built here with a lexer that is never used.)
    Lark.open_from_package("scanloom.grammar", "loom.lark", parser="lalr", lexer=_NoLexer,
                           strict=True)


def test_header_items_in_order():
    program = parse('board "b.yaml"\ntck 12.5 MHz\ninclude "more.loom"\n'
                    "group G = [A, U1.D(3), H[3:2]]\ndefault mode SAMPLE\n"
                    "finish in idle\nfight limit 500 us\n")
    assert program.items == (
        ast.BoardDecl("b.yaml"),
        ast.TckDecl(ast.Quantity("12.5", "MHz")),
        ast.IncludeDecl("more.loom"),
        ast.GroupDecl("G", (ast.NameSignal("A"), ast.PinSignal("U1", "D(3)"),
                            ast.SliceSignal("H", 3, 2))),
        ast.DefaultModeDecl("SAMPLE"),
        ast.FinishDecl("idle"),
        ast.FightLimitDecl(ast.Quantity("500", "us")),
    )


def test_group_may_continue_over_lines_after_commas():
    program = parse("group G = [\n    A,\n    B, C\n]\n")
    assert program.items == (ast.GroupDecl("G", tuple(ast.NameSignal(n) for n in "ABC")),)


def test_test_with_modes_steps_and_title_escapes():
    test = only_test('test cluster "the \\"mux\\" path" {\n    U1, U4 EXTEST\n    U3 sample\n'
                     "    step one {\n    }\n}\n")
    assert test.name == "cluster"
    assert test.title == 'the "mux" path'
    assert test.items == (ast.ModeSet(("U1", "U4"), "EXTEST"), ast.ModeSet(("U3",), "sample"),
                          ast.Step("one", ()))


def test_step_statements():
    items = in_step("drive A = 0, B[3:0] = 0b10XZ,\n  U1.D(3) = Z\n"
                    "release DATA, U2.Q(0)\n"
                    "expect Y = 1, W = X, V = computed, G = 0xX5\n"
                    "wait 100 clocks\nwait 2 ms\n"
                    "read U3 DEVICE_ID expect 0bXXXX0001\n"
                    "read U1 CFGREG using USERCFG expect 0xA5\n"
                    "read U4 DEVICE_ID\n"
                    "write U1 CFGREG 165\n"
                    'allow contention "the short is intended"')
    assert items == (
        ast.Drive((ast.Assignment(ast.NameSignal("A"), ast.Literal(10, "0")),
                   ast.Assignment(ast.SliceSignal("B", 3, 0), ast.Literal(2, "10XZ")),
                   ast.Assignment(ast.PinSignal("U1", "D(3)"), ast.Released()))),
        ast.Release((ast.NameSignal("DATA"), ast.PinSignal("U2", "Q(0)"))),
        ast.Expect((ast.Assignment(ast.NameSignal("Y"), ast.Literal(10, "1")),
                    ast.Assignment(ast.NameSignal("W"), ast.DontCare()),
                    ast.Assignment(ast.NameSignal("V"), ast.Computed()),
                    ast.Assignment(ast.NameSignal("G"), ast.Literal(16, "X5")))),
        ast.Wait(ast.Quantity("100", "clocks")),
        ast.Wait(ast.Quantity("2", "ms")),
        ast.Read("U3", "DEVICE_ID", None, ast.Literal(2, "XXXX0001")),
        ast.Read("U1", "CFGREG", "USERCFG", ast.Literal(16, "A5")),
        ast.Read("U4", "DEVICE_ID", None, None),
        ast.Write("U1", "CFGREG", None, ast.Literal(10, "165")),
        ast.Allow("contention", "the short is intended"),
    )


def test_single_bit_slice_is_marked():
    (drive,) = in_step("drive DATA[3] = 1")
    assert drive.assignments[0].target == ast.SliceSignal("DATA", 3, 3, single=True)


def test_literals_keep_digits_and_case_is_normalised():
    (expect,) = in_step("expect A = 0B1x0z, B = 0xab_CD, C = x")
    values = [a.value for a in expect.assignments]
    assert values == [ast.Literal(2, "1X0Z"), ast.Literal(16, "AB_CD"), ast.DontCare()]


def test_table_columns_rows_and_comments_between_rows():
    test = only_test("test t \"t\" {\n    table sweep {\n        S A[3:0] -> Y  # header\n"
                     "        0 0x5 -> 0x5\n        # a comment between rows\n\n"
                     "        1 0b0101 -> computed\n        -> X\n    }\n}\n")
    table = test.items[0]
    assert table == ast.Table(
        "sweep", (ast.NameSignal("S"), ast.SliceSignal("A", 3, 0)), (ast.NameSignal("Y"),),
        (ast.TableRow((ast.Literal(10, "0"), ast.Literal(16, "5")), (ast.Literal(16, "5"),)),
         ast.TableRow((ast.Literal(10, "1"), ast.Literal(2, "0101")), (ast.Computed(),)),
         ast.TableRow((), (ast.DontCare(),))))


def test_table_cells_carry_their_own_columns():
    test = only_test("test t \"t\" {\n    table {\n        A B -> Y\n        1   0x3 -> z\n    }\n}\n")
    row = test.items[0].rows[0]
    spans = [row.cell_span(i) for i in range(3)]
    assert [(s.line, s.column, s.end_column) for s in spans] == [(4, 9, 10), (4, 13, 16),
                                                                  (4, 20, 21)]
    assert row.expects == (ast.Released(),)


def test_spans_point_at_the_written_text():
    (drive,) = in_step("        drive MUX_A = 0x5")
    assignment = drive.assignments[0]
    assert (assignment.target.span.line, assignment.target.span.column) == (3, 15)
    assert (assignment.value.span.column, assignment.value.span.end_column) == (23, 26)
    assert (drive.span.line, drive.span.column) == (3, 9)


def test_spans_do_not_take_part_in_equality():
    assert parse("board \"b\"\n") == parse("\n\n   board    \"b\"   # moved\n")


def test_comments_are_collected_with_their_places():
    program = parse('# top\nboard "b#not-a-comment"  # after\n  # alone\n')
    assert [(c.text, c.line, c.own_line) for c in program.comments] == [
        ("# top", 1, True), ("# after", 2, False), ("# alone", 3, True)]


def test_crlf_and_missing_final_newline():
    text = 'board "b.yaml"\r\ntest t "t" {\r\n    step s {\r\n        drive A = 1\r\n    }\r\n}'
    program = parse(text)
    assert program.items[1].items[0].items[0].assignments[0].value == ast.Literal(10, "1")


def test_keywords_are_reserved_only_where_they_may_appear():
    # "step", "wait" and "table" are ordinary names in a group's member list.
    program = parse("group G = [step, wait, table]\n")
    assert program.items[0].members == tuple(ast.NameSignal(n) for n in ("step", "wait", "table"))


# ---- syntax errors, anchored ------------------------------------------------------------------

def test_error_names_what_was_expected_in_words():
    first, rendered = syntax_error('test t "t" {\n    step {\n    }\n}\n')
    assert re.fullmatch(r"t\.loom:2:10: error: syntax error: unexpected '\{'", first)
    assert "expected: a name" in rendered
    assert "NAME" not in rendered and "LBRACE" not in rendered


def test_error_after_a_complete_statement():
    first, rendered = syntax_error('test t "t" {\n    step s {\n        drive A = 0 1\n    }\n}\n')
    assert re.fullmatch(r"t\.loom:3:21: error: syntax error: unexpected '1'", first)
    assert "expected: ',' or the end of the line" in rendered


def test_error_for_a_board_without_quotes():
    first, rendered = syntax_error("board irrigation.yaml\n")
    assert re.fullmatch(r"t\.loom:1:7: error: syntax error: unexpected 'irrigation\.yaml'", first)
    assert "expected: a quoted string" in rendered


def test_error_lists_keywords_of_a_step():
    first, rendered = syntax_error('test t "t" {\n    step s {\n        drve A = 1\n    }\n}\n')
    assert re.fullmatch(r"t\.loom:3:9: error: syntax error: unexpected 'drve'", first)
    expected = re.search(r"expected: (.*)", rendered).group(1)
    for word in ("'drive'", "'expect'", "'release'", "'wait'", "'read'", "'write'", "'allow'",
                 "'}'"):
        assert word in expected


def test_row_without_arrow():
    first, rendered = syntax_error('test t "t" {\n    table {\n        A -> B\n        0 1\n'
                                   "    }\n}\n")
    assert re.fullmatch(r"t\.loom:4:9: error: syntax error: unexpected '0'", first)
    assert "a table row (drive cells, '->', expect cells)" in rendered


def test_bad_cell_in_a_row_is_a_syntax_error_at_the_cell():
    first, rendered = syntax_error('test t "t" {\n    table {\n        A -> B\n        0 -> hi\n'
                                   "    }\n}\n")
    assert re.fullmatch(r"t\.loom:4:14: error: 'hi' is not a value", first)
    assert "expected: 0, 1, X, Z" in rendered


def test_bad_slice_bound_raised_inside_the_transformer_is_reported():
    first, _ = syntax_error('test t "t" {\n    step s {\n        drive D[0x3:0] = 1\n    }\n}\n')
    assert re.fullmatch(r"t\.loom:3:17: error: slice bound '0x3' is not a bit number", first)


def test_unexpected_character():
    first, rendered = syntax_error('board "b"\ntck 10 MHz ;\n')
    assert re.fullmatch(r"t\.loom:2:12: error: syntax error: unexpected ';'", first)


def test_end_of_file_error_points_at_the_last_line():
    text = 'board "b"\ntest t "t" {\n    step s {\n        drive A = 1\n\n\n'
    first, rendered = syntax_error(text)
    assert re.fullmatch(r"t\.loom:4:20: error: syntax error: the program ends too early", first)
    assert re.search(r"expected: .* or '\}'$", rendered)
    assert "        drive A = 1" in rendered


def test_unterminated_string():
    first, _ = syntax_error('board "b.yaml\n')
    assert re.fullmatch(r't\.loom:1:7: error: syntax error: unexpected \'"\'', first)


def test_parse_source_reports_into_diagnostics_and_returns_none():
    diagnostics = Diagnostics()
    assert parse_source("board\n", "x.loom", diagnostics) is None
    assert len(diagnostics.errors) == 1
    assert diagnostics.errors[0].span.file == "x.loom"
    assert "x.loom" in diagnostics.sources


def test_several_independent_syntax_errors_in_one_run():
    diagnostics = Diagnostics()
    text = ('test t "t" {\n    step s {\n        drive A = 0 1\n        expect B = = 1\n'
            "        wait\n    }\n}\n")
    assert parse_source(text, "t.loom", diagnostics) is None
    assert [(d.span.line, d.span.column) for d in diagnostics.errors] == [(3, 21), (4, 20), (5, 13)]


def test_recovery_stops_where_setting_a_line_aside_would_mislead():
    diagnostics = Diagnostics()
    # The bad line opens a block: without it the closing braces would not match.
    text = 'test t "t" {\n    step {\n        drive A = 0 1\n    }\n}\n'
    assert parse_source(text, "t.loom", diagnostics) is None
    assert len(diagnostics.errors) == 1

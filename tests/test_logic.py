"""Board-file logic: our expression grammar, its error positions in the YAML, and evaluation.

Truth tables are checked against Python's own integer operators on 0/1 (an independent
implementation of Boolean AND, OR, XOR and NOT); X handling against Kleene's strong
three-valued logic (S. C. Kleene, "On notation for ordinal numbers", 1938, and his 1952
"Introduction to Metamathematics", from memory), the reading of X used by logic simulators.
"""

from __future__ import annotations

import itertools
import re
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from scanloom.diagnostics import Diagnostics, ScanloomError
from scanloom.models.board import Part
from scanloom.models.board_loader import load_board, parse_board
from scanloom.sim.electrical import build_electrical
from scanloom.sim.logic import (
    Binary, Constant, ExpressionOrigin, Not, PinTerm, evaluate, expression_text, parse_expression,
    pins_used, rails_of,
)

FIXTURES = Path(__file__).parent / "fixtures" / "boards"
DEMO = Path(__file__).parents[1] / "examples" / "irrigation" / "irrigation.yaml"
PINS = ("A", "B", "C", "D", "S", "OE_N", "1A", "2Y")
PART = Part("U9", PINS)
ORIGIN = ExpressionOrigin("board.yaml", 7, 10, True)


def parse(text: str):  # type: ignore[no-untyped-def]
    diagnostics = Diagnostics()
    expression = parse_expression(text, part=PART, what="logic of U9.Y", origin=ORIGIN,
                                  diagnostics=diagnostics)
    return expression, diagnostics


def value_of(text: str, **inputs: str) -> str:
    expression, diagnostics = parse(text)
    assert expression is not None, diagnostics.render()
    rails = {name: rails_of(inputs.get(name, "0"), 1) for name in PINS}
    may0, may1 = evaluate(expression, rails, 1)
    return "X" if may0 and may1 else ("1" if may1 else "0")


def test_parses_the_operators_into_our_tree() -> None:
    expression, _ = parse("(A & ~S) | (B & S)")
    assert expression == Binary("|", Binary("&", PinTerm("A"), Not(PinTerm("S"))),
                                Binary("&", PinTerm("B"), PinTerm("S")))
    assert pins_used(expression) == ("A", "S", "B")
    assert parse("1")[0] == Constant(1)
    assert parse("~~1A")[0] == Not(Not(PinTerm("1A")))  # 74-series style pin names


@pytest.mark.parametrize("text, grouped", [
    ("A | B & C", "(A | (B & C))"),  # & binds tighter than |
    ("A ^ B & C", "(A ^ (B & C))"),  # & binds tighter than ^
    ("A | B ^ C", "(A | (B ^ C))"),  # ^ binds tighter than |
    ("~A & B", "(~A & B)"),  # ~ binds tightest
    ("A & B & C", "((A & B) & C)"),  # left associative
])
def test_precedence_is_that_of_the_c_operators(text: str, grouped: str) -> None:
    # Our precedence follows the C language's &, ^, | ordering (ISO/IEC 9899, 6.5.10-6.5.12;
    # from memory), the one board engineers know from firmware.
    assert expression_text(parse(text)[0]) == grouped


@pytest.mark.parametrize("text, oracle", [
    ("A & B", lambda a, b, c: a & b),
    ("A | B", lambda a, b, c: a | b),
    ("A ^ B", lambda a, b, c: a ^ b),
    ("~A", lambda a, b, c: 1 - a),
    ("(A & ~C) | (B & C)", lambda a, b, c: b if c else a),  # a 2-to-1 multiplexer
    ("(A ^ B) ^ C", lambda a, b, c: (a + b + c) % 2),  # odd parity
    ("~(A | B) & 1", lambda a, b, c: 1 - (a | b)),
])
def test_truth_tables_match_python_integer_operators(text, oracle) -> None:  # type: ignore[no-untyped-def]
    for a, b, c in itertools.product((0, 1), repeat=3):
        assert value_of(text, A=str(a), B=str(b), C=str(c)) == str(oracle(a, b, c)), (text, a, b, c)


@pytest.mark.parametrize("text, inputs, expected", [
    ("A & B", {"A": "0", "B": "X"}, "0"),  # 0 AND anything is 0 (Kleene)
    ("A & B", {"A": "1", "B": "X"}, "X"),
    ("A | B", {"A": "1", "B": "X"}, "1"),  # 1 OR anything is 1 (Kleene)
    ("A | B", {"A": "0", "B": "X"}, "X"),
    ("A ^ B", {"A": "1", "B": "X"}, "X"),  # XOR with an unknown is unknown
    ("~A", {"A": "X"}, "X"),
    ("(A & ~S) | (B & S)", {"A": "1", "B": "1", "S": "X"}, "X"),  # Kleene, not "hazard-free"
])
def test_unknown_inputs_follow_kleene_logic(text: str, inputs: dict, expected: str) -> None:
    assert value_of(text, **inputs) == expected


def test_evaluation_is_bit_parallel_across_vectors() -> None:
    expression, _ = parse("(A & ~S) | (B & S)")
    # Eight vectors at once: vector v has A, B, S from the bits of v.
    a, b, s = 0b10101010, 0b11001100, 0b11110000
    full = 0xFF
    may0, may1 = evaluate(expression, {"A": (full & ~a, a), "B": (full & ~b, b), "S": (full & ~s, s)}, full)
    assert may1 == (a & ~s | b & s) & full and may0 == full & ~may1


@pytest.mark.parametrize("text, message, column, expected", [
    ("A & ", r"the logic of U9\.Y ends too early$", 13, r"0, 1, a pin name"),
    ("A B", r"unexpected 'B' in the logic of U9\.Y$", 12, r"an operator \(&, \|, \^\) or the end"),
    ("(A | B", r"the logic of U9\.Y ends too early$", 16, r"an operator \(&, \|, \^\) or '\)'"),
    ("A + B", r"unexpected character '\+' in the logic of U9\.Y$", 12, r"an operator"),
    ("A & 2", r"unexpected character '2'", 14, r"0, 1, a pin name"),
    ("A)", r"unexpected '\)' in the logic of U9\.Y$", 11, r"an operator .* or the end of the expression$"),
])
def test_syntax_errors_name_the_column_in_the_yaml(text: str, message: str, column: int,
                                                  expected: str) -> None:
    expression, diagnostics = parse(text)
    assert expression is None
    (error,) = diagnostics.errors
    assert re.search(message, error.message), error.message
    assert (error.span.line, error.span.column) == (7, column)
    assert re.match(expected, error.expected or ""), error.expected


def test_an_unknown_pin_names_the_nearest_pins() -> None:
    expression, diagnostics = parse("A & OEN")
    assert expression is None
    (error,) = diagnostics.errors
    assert re.fullmatch(r"'OEN' in the logic of U9\.Y is not a pin of part 'U9'", error.message)
    assert error.span.column == 14 and error.span.end_column == 17
    assert error.suggestions[0] == "OE_N"


def _board_with_logic(tmp_path: Path, logic: str, enable: str = '"~OE_N"') -> Path:
    shutil_source = FIXTURES / "ledger8.bsd"
    (tmp_path / "ledger8.bsd").write_text(shutil_source.read_text())
    board = tmp_path / "board.yaml"
    board.write_text(
        "board: logic test\n"
        "chain:\n"
        "  - {ref: U1, bsdl: ledger8.bsd}\n"
        "parts:\n"
        "  U5:\n"
        "    pins: [A, B, Y, OE_N]\n"
        "    logic:\n"
        f"      Y: {logic}\n"
        "    enable:\n"
        f"      Y: {enable}\n"
        "nets:\n"
        "  D0: [U1.Y(0), U5.A]\n"
        "  D1: [U1.Y(1), U5.B]\n"
        "  G: [U5.Y, U1.A(0)]\n")
    return board


@pytest.mark.parametrize("logic, line, column", [
    ('"A & C"', 8, 15),  # quoted: the text starts one column after the quote
    ("A & C", 8, 14),  # plain scalar
    ("'A & C'", 8, 15),
])
def test_board_file_errors_point_into_the_yaml(tmp_path: Path, logic: str, line: int, column: int) -> None:
    path = _board_with_logic(tmp_path, logic)
    diagnostics = Diagnostics()
    board = load_board(path, diagnostics)
    with pytest.raises(ScanloomError) as caught:
        build_electrical(board, diagnostics)
    (error,) = caught.value.diagnostics
    assert error.span.file == str(path)
    assert (error.span.line, error.span.column) == (line, column)
    assert error.message == "'C' in the logic of U5.Y is not a pin of part 'U5'"
    rendered = caught.value.render()
    assert "      Y: " in rendered and "^" in rendered  # the YAML line with a caret under C
    caret_line = rendered.splitlines()[2]
    assert caret_line.index("^") == rendered.splitlines()[1].index("C")


def test_enable_errors_point_at_the_enable(tmp_path: Path) -> None:
    path = _board_with_logic(tmp_path, '"A & B"', '"~OE"')
    diagnostics = Diagnostics()
    board = load_board(path, diagnostics)
    with pytest.raises(ScanloomError) as caught:
        build_electrical(board, diagnostics)
    (error,) = caught.value.diagnostics
    assert error.message == "'OE' in the enable of U5.Y is not a pin of part 'U5'"
    assert (error.span.line, error.span.column) == (10, 12)
    assert error.suggestions == ("OE_N",)


def test_block_scalars_fall_back_to_the_yaml_node(tmp_path: Path) -> None:
    path = _board_with_logic(tmp_path, "|-\n        A &\n        C")
    diagnostics = Diagnostics()
    board = load_board(path, diagnostics)
    with pytest.raises(ScanloomError) as caught:
        build_electrical(board, diagnostics)
    (error,) = caught.value.diagnostics
    assert error.span.line == 8  # the node of the expression, not a traceback


def test_every_demo_equation_parses() -> None:
    board = load_board(DEMO, Diagnostics())
    electrical = build_electrical(board, Diagnostics())
    written = {(item.part, item.pin): expression_text(item.expression) for item in electrical.logic}
    assert written[("U10", "Y0")] == "((A0 & ~S) | (B0 & S))"
    assert written[("U11", "ODD")] == "((D0 ^ D1) ^ (D2 ^ D3))"
    assert written[("U12", "RST_N")] == "DIS"
    enables = {(item.part, item.pin): expression_text(item.enable) for item in electrical.logic if item.enable}
    assert enables[("U10", "Y3")] == "~OE_N"


_names = st.sampled_from(("A", "B", "C"))


def _expressions():  # type: ignore[no-untyped-def]
    leaves = st.one_of(_names.map(PinTerm), st.sampled_from((0, 1)).map(Constant))
    return st.recursive(leaves, lambda inner: st.one_of(
        inner.map(Not),
        st.tuples(st.sampled_from("&|^"), inner, inner).map(lambda t: Binary(*t))), max_leaves=12)


def _python_value(expression, a: int, b: int, c: int) -> int:  # type: ignore[no-untyped-def]
    if isinstance(expression, PinTerm):
        return {"A": a, "B": b, "C": c}[expression.name]
    if isinstance(expression, Constant):
        return expression.value
    if isinstance(expression, Not):
        return 1 - _python_value(expression.operand, a, b, c)
    left, right = _python_value(expression.left, a, b, c), _python_value(expression.right, a, b, c)
    return {"&": left & right, "|": left | right, "^": left ^ right}[expression.operator]


@settings(max_examples=150, deadline=None)
@given(_expressions())
def test_rendering_parses_back_and_evaluates_like_python(expression) -> None:  # type: ignore[no-untyped-def]
    text = expression_text(expression)
    parsed, diagnostics = parse(text)
    assert parsed == expression, diagnostics.render()
    full = 0xFF  # all eight input combinations as eight vectors
    a, b, c = 0b10101010, 0b11001100, 0b11110000
    may0, may1 = evaluate(parsed, {"A": (full & ~a, a), "B": (full & ~b, b), "C": (full & ~c, c)}, full)
    for v in range(8):
        want = _python_value(expression, (a >> v) & 1, (b >> v) & 1, (c >> v) & 1)
        assert ((may1 >> v) & 1, (may0 >> v) & 1) == (want, 1 - want)


@settings(max_examples=100, deadline=None)
@given(st.text(alphabet="AB01&|^~() +!x", max_size=14))
def test_any_text_gives_a_tree_or_a_positioned_error(text: str) -> None:
    expression, diagnostics = parse(text)
    if expression is None:
        assert diagnostics.errors and all(d.span is not None and d.span.line == 7 for d in diagnostics.errors)


def test_parse_board_reports_loops_with_the_parts_named(tmp_path: Path) -> None:
    (tmp_path / "ledger8.bsd").write_text((FIXTURES / "ledger8.bsd").read_text())
    text = ("board: loop\nchain:\n  - {ref: U1, bsdl: ledger8.bsd}\n"
            "parts:\n  U5:\n    pins: [A, Y]\n    logic: {Y: \"~A\"}\n"
            "  U6:\n    pins: [A, Y]\n    logic: {Y: \"A\"}\n"
            "nets:\n  N1: [U5.Y, U6.A]\n  N2: [U6.Y, U5.A, U1.A(0)]\n")
    diagnostics = Diagnostics()
    board = parse_board(text, str(tmp_path / "loop.yaml"), diagnostics)
    with pytest.raises(ScanloomError) as caught:
        build_electrical(board, diagnostics)
    (error,) = caught.value.diagnostics
    assert error.message == ("combinational loop: U5.Y drives N1, read by U6.A; "
                             "U6.Y drives N2, read by U5.A")
    assert (error.span.line, error.span.column) == (7, 17)  # the equation of U5.Y

"""The board's own logic: parse a part's equations into a small expression tree and evaluate it.

The board file gives each output pin of a logic part an expression over the part's own pins
(`grammar/logic.lark`: `&`, `|`, `^`, `~`, parentheses, 0/1). It is parsed with our lark
grammar, never `eval`, into frozen nodes that remember where they were written, so that an
error names the YAML line and column of the offending character and the nearest pin name.

Evaluation is bit-parallel and three-valued: a signal is a pair of Python ints (`may0`,
`may1`) whose bit v says whether the signal can be 0, resp. 1, in vector v; 0 is (1, 0),
1 is (0, 1) and unknown (X) is (1, 1). One call evaluates every vector of a run at once.
"""

from __future__ import annotations

import importlib.util
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Mapping, Union

from lark import Lark, Token, Transformer, v_args
from lark.exceptions import UnexpectedCharacters, UnexpectedEOF, UnexpectedInput, UnexpectedToken

from ..diagnostics import Diagnostics, SourceSpan, nearest, read_source
from ..models.board import Board, Part

__all__ = [
    "Constant",
    "PinTerm",
    "Not",
    "Binary",
    "Expression",
    "Rails",
    "ExpressionOrigin",
    "expression_origin",
    "parse_expression",
    "parse_part_logic",
    "PartLogic",
    "pins_used",
    "evaluate",
    "expression_text",
    "rails_of",
]

Rails = tuple[int, int]  # (may be 0, may be 1), one bit per vector


@dataclass(frozen=True, slots=True)
class Constant:
    value: int
    offset: int = field(default=0, compare=False)
    length: int = field(default=1, compare=False)


@dataclass(frozen=True, slots=True)
class PinTerm:
    name: str
    offset: int = field(default=0, compare=False)
    length: int = field(default=1, compare=False)


@dataclass(frozen=True, slots=True)
class Not:
    operand: "Expression"
    offset: int = field(default=0, compare=False)
    length: int = field(default=1, compare=False)


@dataclass(frozen=True, slots=True)
class Binary:
    operator: str  # "&", "|" or "^"
    left: "Expression"
    right: "Expression"
    offset: int = field(default=0, compare=False)
    length: int = field(default=1, compare=False)


Expression = Union[Constant, PinTerm, Not, Binary]


@dataclass(frozen=True, slots=True)
class ExpressionOrigin:
    """Where an expression's text sits in the board file.

    `exact` is True when the text was found verbatim on one line starting at (line, column),
    so each character maps to its own column; otherwise every position maps to the YAML node.
    """

    file: str
    line: int
    column: int
    exact: bool

    def span(self, offset: int, length: int = 1) -> SourceSpan:
        if not self.exact:
            return SourceSpan(self.file, self.line, self.column, self.line, self.column + 1)
        column = self.column + offset
        return SourceSpan(self.file, self.line, column, self.line, column + max(1, length))


def expression_origin(board: Board, part: Part, key: str, text: str,
                      sources: Mapping[str, str] | None = None) -> ExpressionOrigin:
    """The origin of `part`'s expression `key` (an output pin, or "enable:PIN") in the YAML.

    The loader records the span of the YAML scalar; a quoted scalar starts one column before
    its text. When the text is not on that line as written (escapes, block scalars), every
    position falls back to the scalar's start.
    """
    span = part.expression_spans.get(key) or part.span or board.span_of("parts", part.ref)
    if span is None:
        return ExpressionOrigin(board.path, 1, 1, False)
    source = (sources or {}).get(span.file)
    if source is None:
        try:
            source = read_source(span.file)
        except OSError:
            source = ""
    lines = source.splitlines()
    if not 1 <= span.line <= len(lines):
        return ExpressionOrigin(span.file, span.line, span.column, False)
    line = lines[span.line - 1]
    start = span.column - 1
    if start < len(line) and line[start] in "\"'":
        start += 1
    if line[start:start + len(text)] == text:
        return ExpressionOrigin(span.file, span.line, start + 1, True)
    return ExpressionOrigin(span.file, span.line, span.column, False)


@lru_cache(maxsize=1)
def _parser() -> Lark:
    """The LALR parser of grammar/logic.lark, built once (strict when lark can check it)."""
    strict = importlib.util.find_spec("interegular") is not None  # lark's strict mode needs it
    return Lark.open_from_package("scanloom.grammar", "logic.lark", parser="lalr",
                                  propagate_positions=True, strict=strict)


def _extent(*nodes: Expression | Token) -> tuple[int, int]:
    starts, ends = [], []
    for node in nodes:
        if isinstance(node, Token):
            starts.append(node.start_pos or 0)
            ends.append(node.end_pos or 0)
        else:
            starts.append(node.offset)
            ends.append(node.offset + node.length)
    return min(starts), max(ends) - min(starts)


class _ToExpression(Transformer):
    """lark tree -> our frozen nodes; no lark Tree leaves this module."""

    @v_args(inline=True)
    def constant(self, token: Token) -> Constant:
        return Constant(int(str(token)), token.start_pos or 0, len(token))

    @v_args(inline=True)
    def pin(self, token: Token) -> PinTerm:
        return PinTerm(str(token), token.start_pos or 0, len(token))

    @v_args(meta=True, inline=True)
    def not_op(self, meta, operand: Expression) -> Not:  # type: ignore[no-untyped-def]
        start = meta.start_pos if not meta.empty else operand.offset
        return Not(operand, start, operand.offset + operand.length - start)

    def _binary(self, operator: str, left: Expression, right: Expression) -> Binary:
        offset, length = _extent(left, right)
        return Binary(operator, left, right, offset, length)

    @v_args(inline=True)
    def and_op(self, left: Expression, right: Expression) -> Binary:
        return self._binary("&", left, right)

    @v_args(inline=True)
    def or_op(self, left: Expression, right: Expression) -> Binary:
        return self._binary("|", left, right)

    @v_args(inline=True)
    def xor_op(self, left: Expression, right: Expression) -> Binary:
        return self._binary("^", left, right)


_OPERAND_TERMINALS = frozenset({"CONSTANT", "PIN_NAME", "LPAR", "TILDE"})
_OPERAND = "0, 1, a pin name, '~' or '('"


def _expected(names: set[str] | frozenset[str] | None, text: str, position: int) -> str:
    """What could come next, in words; lark's LALR sets are widened by state merging, so the
    open parentheses before `position` decide between ')' and the end of the expression."""
    if set(names or ()) & _OPERAND_TERMINALS:
        return _OPERAND
    depth = text[:position].count("(") - text[:position].count(")")
    closing = "')'" if depth > 0 else "the end of the expression"
    return f"an operator (&, |, ^) or {closing}"


def parse_expression(text: str, *, part: Part, what: str, origin: ExpressionOrigin,
                     diagnostics: Diagnostics) -> Expression | None:
    """Parse one expression of `part` (`what` names it for messages, e.g. "logic of U10.Y0").

    Syntax errors and pins the part does not have are reported with their YAML position;
    the result is None when anything was reported.
    """
    try:
        tree = _parser().parse(text)
    except UnexpectedInput as error:
        _report_syntax(error, text, what, origin, diagnostics)
        return None
    expression: Expression = _ToExpression().transform(tree)
    ok = True
    for term in _pin_terms(expression):
        if term.name not in part.pins:
            diagnostics.error(
                f"'{term.name}' in the {what} is not a pin of part '{part.ref}'",
                origin.span(term.offset, term.length),
                expected="one of its pins: " + ", ".join(part.pins),
                suggestions=nearest(term.name, part.pins))
            ok = False
    return expression if ok else None


def _report_syntax(error: UnexpectedInput, text: str, what: str, origin: ExpressionOrigin,
                   diagnostics: Diagnostics) -> None:
    if isinstance(error, UnexpectedEOF) or (
            isinstance(error, UnexpectedToken) and error.token.type == "$END"):
        end = len(text.rstrip())
        diagnostics.error(f"the {what} ends too early", origin.span(end, 1),
                          expected=_expected(set(error.expected), text, end))
        return
    if isinstance(error, UnexpectedToken):
        token = error.token
        diagnostics.error(f"unexpected '{token}' in the {what}",
                          origin.span(token.start_pos or 0, len(token)),
                          expected=_expected(set(error.expected), text, token.start_pos or 0))
        return
    if isinstance(error, UnexpectedCharacters):
        char = text[error.pos_in_stream] if error.pos_in_stream < len(text) else ""
        hint = None
        if char.isdigit():
            hint = "constants are 0 and 1; a pin name must contain a letter"
        elif char in "!+*":
            hint = "the operators are & (and), | (or), ^ (exclusive or) and ~ (not)"
        diagnostics.error(f"unexpected character '{char}' in the {what}",
                          origin.span(error.pos_in_stream, 1),
                          expected=_expected(set(error.allowed or ()), text, error.pos_in_stream),
                          hint=hint)
        return
    diagnostics.error(f"cannot read the {what}", origin.span(0, len(text)))  # pragma: no cover


def _pin_terms(expression: Expression) -> list[PinTerm]:
    out: list[PinTerm] = []
    stack = [expression]
    while stack:
        node = stack.pop()
        if isinstance(node, PinTerm):
            out.append(node)
        elif isinstance(node, Not):
            stack.append(node.operand)
        elif isinstance(node, Binary):
            stack.append(node.right)
            stack.append(node.left)
    out.sort(key=lambda term: term.offset)
    return out


def pins_used(expression: Expression) -> tuple[str, ...]:
    """The part pins an expression reads, in order of first appearance."""
    seen: dict[str, None] = {}
    for term in _pin_terms(expression):
        seen.setdefault(term.name, None)
    return tuple(seen)


def expression_text(expression: Expression) -> str:
    """A canonical, fully parenthesised rendering (stable for dumps and messages)."""
    if isinstance(expression, Constant):
        return str(expression.value)
    if isinstance(expression, PinTerm):
        return expression.name
    if isinstance(expression, Not):
        return "~" + expression_text(expression.operand)
    if isinstance(expression, Binary):
        return f"({expression_text(expression.left)} {expression.operator} {expression_text(expression.right)})"
    raise TypeError(f"not an expression node: {type(expression).__name__}")


def rails_of(value: str, full: int) -> Rails:
    """The rails of a constant "0", "1" or "X" over every vector of `full`."""
    if value == "0":
        return (full, 0)
    if value == "1":
        return (0, full)
    return (full, full)


def evaluate(expression: Expression, inputs: Mapping[str, Rails], full: int) -> Rails:
    """Three-valued, bit-parallel value of `expression` over all vectors in `full`.

    AND may be 1 only where both may be 1 and may be 0 where either may be 0; OR is its dual;
    NOT swaps the rails; XOR may be 1 where the inputs may differ. This is Kleene's strong
    three-valued logic, the usual reading of X in logic simulation (common practice).
    """
    if isinstance(expression, PinTerm):
        return inputs[expression.name]
    if isinstance(expression, Binary):
        a0, a1 = evaluate(expression.left, inputs, full)
        b0, b1 = evaluate(expression.right, inputs, full)
        op = expression.operator
        if op == "&":
            return (a0 | b0, a1 & b1)
        if op == "|":
            return (a0 & b0, a1 | b1)
        return ((a0 & b0) | (a1 & b1), (a0 & b1) | (a1 & b0))
    if isinstance(expression, Not):
        v0, v1 = evaluate(expression.operand, inputs, full)
        return (v1, v0)
    if isinstance(expression, Constant):
        return (0, full) if expression.value else (full, 0)
    raise TypeError(f"not an expression node: {type(expression).__name__}")


@dataclass(frozen=True, slots=True)
class PartLogic:
    """One logic output of a part: its equation and, for a tri-state output, its enable."""

    part: str
    pin: str
    expression: Expression
    enable: Expression | None
    reads: tuple[str, ...]  # the part pins the equation and the enable read
    span: SourceSpan | None = field(default=None, compare=False)


def parse_part_logic(board: Board, part: Part, diagnostics: Diagnostics,
                     sources: Mapping[str, str] | None = None) -> tuple[PartLogic, ...]:
    """Parse every equation and enable of `part`, reporting each problem with its position."""
    out: list[PartLogic] = []
    for pin, text in part.logic.items():
        origin = expression_origin(board, part, pin, text, sources)
        expression = parse_expression(text, part=part, what=f"logic of {part.ref}.{pin}",
                                      origin=origin, diagnostics=diagnostics)
        enable = None
        enable_ok = True
        if pin in part.enables:
            enable_text = part.enables[pin]
            enable_origin = expression_origin(board, part, f"enable:{pin}", enable_text, sources)
            enable = parse_expression(enable_text, part=part, what=f"enable of {part.ref}.{pin}",
                                      origin=enable_origin, diagnostics=diagnostics)
            enable_ok = enable is not None
        if expression is None or not enable_ok:
            continue
        reads = dict.fromkeys(pins_used(expression))
        if enable is not None:
            reads.update(dict.fromkeys(pins_used(enable)))
        out.append(PartLogic(part.ref, pin, expression, enable, tuple(reads), origin.span(0, len(text))))
    return tuple(out)

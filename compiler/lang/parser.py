"""Parse `.loom` text into our own syntax tree (`scanloom.lang.ast`).

lark parses LALR with the contextual lexer and calls our transformer while it parses, so no
lark tree is ever built or leaked. Syntax errors become diagnostics that say, in words, what
could have come next; an error at the end of the input points at the last line of the file.
"""

from __future__ import annotations

import bisect
import re
from dataclasses import dataclass
from functools import lru_cache
from itertools import accumulate, repeat
from operator import add, itemgetter, sub
from pathlib import Path

from lark import Lark, Token, Transformer
from lark.exceptions import (
    LarkError, UnexpectedCharacters, UnexpectedEOF, UnexpectedInput, UnexpectedToken, VisitError,
)

from ..diagnostics import Diagnostic, Diagnostics, ScanloomError, SourceSpan, read_source
from . import ast
from ..bulk_records import frozen_records
from ..collector import collector_paused
from ..grammar_support import expected_words, strict_mode_available

__all__ = ["parse_text", "parse_source", "parse_file", "grammar_parser"]

# Words for the terminals a user may meet in "expected ..." (never lark's terminal names).
_TERMINAL_WORDS = {
    "NAME": "a name",
    "PIN": "a pin such as U1.D(3)",
    "LITERAL": "a number",
    "STRING": 'a quoted string',
    "ROW": "a table row (drive cells, '->', expect cells)",
    "ARROW": "'->'",
    "FINISH_STATE": "'reset' or 'idle'",
    "_NL": "the end of the line",
    "$END": "the end of the file",
}

_CELL = re.compile(r"\S+")
# In a MEMBER_LIST token, once its comments are blanked out: a member name or pin (a split
# by it gives what lies between the members and the members themselves, in turn).
_MEMBER_SPLIT = re.compile(r"([A-Za-z_][A-Za-z0-9_]*(?:\.[A-Za-z0-9_]+(?:\([0-9]+\))?)?)")
_COMMENT = re.compile(r"#[^\r\n]*")
_LINE_BREAK = re.compile(r"\n")
_COMMENT_OR_STRING = re.compile(r'"(?:[^"\\\r\n]|\\.)*"?|#[^\r\n]*')


@lru_cache(maxsize=16)
def grammar_parser(file: str) -> Lark:
    """The LALR parser whose transformer stamps spans with `file` (built once per file name)."""
    return Lark.open_from_package(
        "scanloom.grammar", "loom.lark", ("",), parser="lalr", lexer="contextual",
        keep_all_tokens=True, transformer=_ToAst(file), strict=strict_mode_available(),
        maybe_placeholders=False,
    )


def parse_text(text: str, file: str = "<program>") -> ast.Program:
    """Parse or raise ScanloomError carrying the syntax error."""
    diagnostics = Diagnostics()
    diagnostics.add_source(file, text)
    program = parse_source(text, file, diagnostics)
    if program is None:
        raise ScanloomError(diagnostics.sorted(), diagnostics.sources)
    return program


def parse_file(path: str | Path, diagnostics: Diagnostics, name: str | None = None) -> ast.Program | None:
    """Read and parse a file; None (with a diagnostic) when it cannot be read or parsed."""
    file = name or str(path)
    try:
        text = read_source(path)
    except OSError as error:
        diagnostics.error(f"cannot read program '{file}': {error.strerror or error}")
        return None
    return parse_source(text, file, diagnostics)


def parse_source(text: str, file: str, diagnostics: Diagnostics) -> ast.Program | None:
    """Parse `text`; on syntax errors report them into `diagnostics` and return None.

    After a syntax error the offending line is set aside and the rest parsed again, so that
    one run reports several independent mistakes. Recovery stops where setting a line aside
    could itself cause errors (a line with a brace, a list continued over lines, the end of
    the file) and after MAX_SYNTAX_ERRORS.
    """
    diagnostics.add_source(file, text)
    program, problem = _parse_once(text, file)
    if problem is None:
        assert program is not None
        return ast.Program(file, program.items, _comments(text), program.span)
    diagnostics.report(problem)
    if len(text) > _RECOVERY_LIMIT:
        return None
    lines = text.split("\n")
    for _ in range(MAX_SYNTAX_ERRORS - 1):
        index = problem.span.line - 1 if problem.span else len(lines)
        if problem.message.endswith("ends too early") or not _can_set_aside(lines, index):
            break
        lines[index] = ""
        _, following = _parse_once("\n".join(lines), file)
        if following is None or following.span is None or problem.span is None or \
                following.span.line <= problem.span.line:
            break
        diagnostics.report(following)
        problem = following
    return None


MAX_SYNTAX_ERRORS = 10
_RECOVERY_LIMIT = 200_000  # characters: larger files report their first syntax error only


def _can_set_aside(lines: list[str], index: int) -> bool:
    if index >= len(lines):
        return False
    line = lines[index].split("#", 1)[0]
    before = lines[index - 1].split("#", 1)[0].rstrip() if index > 0 else ""
    return not ("{" in line or "}" in line or line.rstrip().endswith((",", "[")) or
                before.endswith((",", "[")) or '"' in line)


def _parse_once(text: str, file: str) -> tuple[ast.Program | None, Diagnostic | None]:
    # Every statement ends at a line end; a final line without one still ends there.
    padded = text if text.endswith("\n") else text + "\n"
    try:
        with collector_paused():
            return grammar_parser(file).parse(padded), None
    except VisitError as wrapped:  # lark wraps what the transformer raises
        error = wrapped.orig_exc
        if isinstance(error, _SyntaxProblem):
            return None, error.diagnostic
        raise error
    except _SyntaxProblem as problem:
        return None, problem.diagnostic
    except UnexpectedInput as error:
        return None, _syntax_diagnostic(error, text, file)
    except LarkError as error:  # any other lark complaint is still a syntax error of the input
        return None, Diagnostic("error", f"cannot parse the program: {error}",
                                SourceSpan(file, 1, 1, 1, 2))


# ---- syntax errors in words ---------------------------------------------------------------

def _syntax_diagnostic(error: UnexpectedInput, text: str, file: str) -> Diagnostic:
    parser = grammar_parser(file)
    if isinstance(error, UnexpectedCharacters):
        expected = _expected_words(parser, error.allowed)
        char = error.char
        what = "a line end" if char in "\r\n" else repr(char)
        span = SourceSpan(file, error.line, error.column, error.line, error.column + 1)
        return Diagnostic("error", f"syntax error: unexpected {what}", span, expected)
    if isinstance(error, UnexpectedToken) and error.token.type != "$END":
        token = error.token
        expected = _expected_words(parser, error.expected)
        if token.type == "_NL":
            what = "end of the line"
            span = SourceSpan(file, token.line, token.column, token.line, token.column + 1)
        else:
            what = f"'{token.value}'" if len(token.value) <= 40 else f"'{token.value[:37]}...'"
            span = SourceSpan(file, token.line, token.column, token.end_line or token.line,
                              token.end_column or token.column + 1)
        return Diagnostic("error", f"syntax error: unexpected {what}", span, expected)
    allowed = error.expected if isinstance(error, (UnexpectedToken, UnexpectedEOF)) else set()
    return Diagnostic("error", "syntax error: the program ends too early",
                      _last_line_span(text, file), _expected_words(parser, allowed))


def _last_line_span(text: str, file: str) -> SourceSpan:
    """End-of-input errors carry no position from lark: point past the last written line."""
    lines = text.splitlines()
    number = len(lines)
    while number > 1 and not lines[number - 1].strip():
        number -= 1
    column = len(lines[number - 1]) + 1 if lines else 1
    return SourceSpan(file, max(1, number), column, max(1, number), column + 1)


def _expected_words(parser: Lark, names: set[str] | frozenset[str]) -> str | None:
    words = expected_words(parser, names, _TERMINAL_WORDS, "'")
    if not words:
        return None
    if len(words) == 1:
        return words[0]
    return ", ".join(words[:-1]) + " or " + words[-1]


@dataclass(frozen=True, slots=True)
class _Using:
    name: str
    span: SourceSpan


@dataclass(frozen=True, slots=True)
class _ReadExpect:
    value: ast.Value
    span: SourceSpan | None


class _SyntaxProblem(Exception):
    """A malformed piece found while building the tree (e.g. a bad slice bound)."""

    def __init__(self, diagnostic: Diagnostic):
        super().__init__(diagnostic.message)
        self.diagnostic = diagnostic


# ---- comments -----------------------------------------------------------------------------

def _comments(text: str) -> tuple[ast.Comment, ...]:
    """Every `#` comment with its position (a `#` inside a quoted string is not one)."""
    if "#" not in text:
        return ()
    line_starts = [0] + [m.end() for m in re.finditer(r"\n", text)]
    found = []
    for match in _COMMENT_OR_STRING.finditer(text):
        if not match.group().startswith("#"):
            continue
        offset = match.start()
        index = bisect.bisect_right(line_starts, offset) - 1
        start = line_starts[index]
        own_line = not text[start:offset].strip()
        found.append(ast.Comment(match.group().rstrip(), index + 1, offset - start + 1, own_line))
    return tuple(found)


# ---- the transformer ----------------------------------------------------------------------

def _blanked(comment: re.Match) -> str:
    return " " * len(comment.group())


def _is_token(item: object, kind: str | None = None) -> bool:
    return isinstance(item, Token) and (kind is None or item.type == kind)


def _unquote(token: Token) -> str:
    body = token.value[1:-1]
    return re.sub(r"\\(.)", r"\1", body)


class _ToAst(Transformer):
    """Builds AST nodes while lark parses; spans come from the tokens themselves."""

    def __init__(self, file: str):
        super().__init__(visit_tokens=False)
        self.file = file

    # spans
    def _tok(self, token: Token) -> SourceSpan:
        return SourceSpan(self.file, token.line, token.column, token.end_line or token.line,
                          token.end_column or token.column + len(token.value))

    def _between(self, first: object, last: object) -> SourceSpan:
        start = self._span_of(first)
        end = self._span_of(last)
        return SourceSpan(self.file, start.line, start.column, end.end_line, end.end_column)

    def _span_of(self, item: object) -> SourceSpan:
        if isinstance(item, Token):
            return self._tok(item)
        span = getattr(item, "span", None)
        if span is None:
            raise TypeError(f"no span for {item!r}")
        return span

    def _statement_span(self, children: list) -> SourceSpan:
        meaningful = [c for c in children if not _is_token(c, "_NL") and not isinstance(c, list)]
        return self._between(meaningful[0], meaningful[-1])

    # top level
    def start(self, children: list) -> ast.Program:
        items = tuple(c for c in children if not isinstance(c, Token))
        span = SourceSpan(self.file, 1, 1, 1, 2)
        return ast.Program(self.file, items, (), span)

    def board(self, c: list) -> ast.BoardDecl:
        return ast.BoardDecl(_unquote(c[1]), self._between(c[0], c[1]))

    def tck(self, c: list) -> ast.TckDecl:
        return ast.TckDecl(c[1], self._between(c[0], c[1]))

    def include(self, c: list) -> ast.IncludeDecl:
        return ast.IncludeDecl(_unquote(c[1]), self._between(c[0], c[1]))

    def group(self, c: list) -> ast.GroupDecl:
        members = next(x for x in c if isinstance(x, list))
        closing = next(x for x in c if _is_token(x, "RSQB"))
        return ast.GroupDecl(c[1].value, tuple(members), self._between(c[0], closing), self._tok(c[1]))

    def group_list(self, c: list) -> ast.GroupDecl:
        """A group whose members the lexer took as one MEMBER_LIST token: split it here.

        Large boards declare groups of thousands of members, so the split works on whole
        columns (names, offsets, lines, columns) with builtins, and the members and their
        spans are made column by column (`scanloom.bulk_records.frozen_records`).
        """
        token: Token = c[3]
        text = token.value
        if "#" in text:  # comments blanked out, so that every offset stays where it was
            text = _COMMENT.sub(_blanked, text)
        pieces = _MEMBER_SPLIT.split(text)  # what lies between members, then a member, ...
        names = pieces[1::2]
        count = len(names)
        offsets = list(accumulate(map(len, pieces)))[0:-1:2]  # where each member starts
        # A member's line is the token's line plus the line breaks before it; its column
        # counts from the last of them, or on the token's first line from the token's column.
        last_breaks = list(map(text.rfind, repeat("\n", count), repeat(0, count), offsets))
        breaks = [match.start() for match in _LINE_BREAK.finditer(text)]
        line_of = dict(zip(breaks, range(token.line + 1, token.line + 1 + len(breaks))))
        line_of[-1] = token.line
        lines = list(map(line_of.__getitem__, last_breaks))
        columns = list(map(sub, offsets, last_breaks))
        for index in range(bisect.bisect_left(last_breaks, 0)):  # members on the first line
            columns[index] += token.column - 1
        ends = list(map(add, columns, map(len, names)))
        spans = frozen_records(SourceSpan, count, repeat(self.file, count), lines, columns, lines, ends)
        members: list[ast.Signal]
        pins = text.count(".")  # a pin has one dot, a plain name none
        if pins == 0:
            members = frozen_records(ast.NameSignal, count, names, spans)
        elif pins == count:
            parts = list(map(str.partition, names, repeat(".", count)))
            members = frozen_records(ast.PinSignal, count, map(itemgetter(0), parts),
                                      map(itemgetter(2), parts), spans)
        else:
            members = [ast.PinSignal(*name.split(".", 1), span) if "." in name else
                       ast.NameSignal(name, span) for name, span in zip(names, spans)]
        return ast.GroupDecl(c[1].value, tuple(members), self._between(c[0], token), self._tok(c[1]))

    def default_mode(self, c: list) -> ast.DefaultModeDecl:
        return ast.DefaultModeDecl(c[2].value, self._between(c[0], c[2]), self._tok(c[2]))

    def finish(self, c: list) -> ast.FinishDecl:
        return ast.FinishDecl(c[2].value, self._between(c[0], c[2]))

    def fight_limit(self, c: list) -> ast.FightLimitDecl:
        return ast.FightLimitDecl(c[2], self._between(c[0], c[2]))

    def test(self, c: list) -> ast.Test:
        items = tuple(x for x in c[4:] if not isinstance(x, Token))
        closing = next(x for x in reversed(c) if _is_token(x, "RBRACE"))
        return ast.Test(c[1].value, _unquote(c[2]), items, self._between(c[0], c[3]),
                        self._tok(c[1]), self._tok(closing))

    def mode_set(self, c: list) -> ast.ModeSet:
        names = [x for x in c if _is_token(x, "NAME")]
        refs = names[:-1]
        return ast.ModeSet(tuple(t.value for t in refs), names[-1].value,
                           self._between(names[0], names[-1]),
                           tuple(self._tok(t) for t in refs), self._tok(names[-1]))

    def step(self, c: list) -> ast.Step:
        items = tuple(x for x in c[3:] if not isinstance(x, Token))
        closing = next(x for x in reversed(c) if _is_token(x, "RBRACE"))
        return ast.Step(c[1].value, items, self._between(c[0], c[2]), self._tok(c[1]),
                        self._tok(closing))

    # step statements
    def drive(self, c: list) -> ast.Drive:
        return ast.Drive(tuple(x for x in c if isinstance(x, ast.Assignment)), self._statement_span(c))

    def expect(self, c: list) -> ast.Expect:
        return ast.Expect(tuple(x for x in c if isinstance(x, ast.Assignment)), self._statement_span(c))

    def release(self, c: list) -> ast.Release:
        targets = next(x for x in c if isinstance(x, list))
        return ast.Release(tuple(targets), self._between(c[0], targets[-1]))

    def assignment(self, c: list) -> ast.Assignment:
        return ast.Assignment(c[0], c[2], self._between(c[0], c[2]))

    def wait(self, c: list) -> ast.Wait:
        return ast.Wait(c[1], self._between(c[0], c[1]))

    def using(self, c: list) -> _Using:
        return _Using(c[1].value, self._tok(c[1]))

    def read_expect(self, c: list) -> _ReadExpect:
        return _ReadExpect(c[1], c[1].span)

    def read(self, c: list) -> ast.Read:
        using = next((x for x in c if isinstance(x, _Using)), None)
        expected = next((x.value for x in c if isinstance(x, _ReadExpect)), None)
        return ast.Read(c[1].value, c[2].value, using.name if using else None, expected,
                        self._statement_span(c), self._tok(c[1]), self._tok(c[2]),
                        using.span if using else None)

    def write(self, c: list) -> ast.Write:
        using = next((x for x in c if isinstance(x, _Using)), None)
        value = next(x for x in c if isinstance(x, (ast.Literal, ast.DontCare, ast.Released,
                                                    ast.Computed)))
        return ast.Write(c[1].value, c[2].value, using.name if using else None, value,
                         self._statement_span(c), self._tok(c[1]), self._tok(c[2]),
                         using.span if using else None)

    def chain_scan(self, c: list) -> ast.ChainScan:
        shifted = next(x for x in c if isinstance(x, ast.Literal))
        expected = next((x.value for x in c if isinstance(x, _ReadExpect)), None)
        return ast.ChainScan(c[2].value, shifted, expected, self._statement_span(c), self._tok(c[2]))

    def scan_bits(self, c: list) -> ast.Literal:
        return _literal(c[0].value, self._tok(c[0]))

    def chain_expect(self, c: list) -> _ReadExpect:
        return _ReadExpect(c[1], c[1].span)

    def tap_reset(self, c: list) -> ast.TapReset:
        return ast.TapReset(self._between(c[0], c[1]))

    def allow(self, c: list) -> ast.Allow:
        return ast.Allow(c[1].value, _unquote(c[2]), self._between(c[0], c[2]), self._tok(c[1]))

    # tables
    def table(self, c: list) -> ast.Table:
        name = c[1].value if _is_token(c[1], "NAME") else None
        header = next(x for x in c if isinstance(x, tuple) and x and x[0] == "header")
        rows = tuple(x for x in c if isinstance(x, ast.TableRow))
        brace = next(x for x in c if _is_token(x, "LBRACE"))
        closing = next(x for x in reversed(c) if _is_token(x, "RBRACE"))
        return ast.Table(name, header[1], header[2], rows, self._between(c[0], brace),
                         header[3], self._tok(closing))

    def table_header(self, c: list) -> tuple:
        arrow = next(i for i, x in enumerate(c) if _is_token(x, "ARROW"))
        drives = tuple(c[:arrow])
        expects = tuple(x for x in c[arrow + 1:] if not isinstance(x, Token))
        return ("header", drives, expects, self._statement_span(c))

    def table_row(self, c: list) -> ast.TableRow:
        row: Token = c[0]
        text = row.value
        arrow = text.index("->")
        columns: list[int] = []
        drives = self._cells(row, text[:arrow], 0, columns)
        expects = self._cells(row, text[arrow + 2:], arrow + 2, columns)
        end = len(text.rstrip())
        span = SourceSpan(self.file, row.line, row.column, row.line, row.column + end)
        return ast.TableRow(drives, expects, span, tuple(columns))

    def _cells(self, row: Token, text: str, offset: int, columns: list[int]) -> tuple[ast.Value, ...]:
        cells = []
        for match in _CELL.finditer(text):
            column = row.column + offset + match.start()
            cell = match.group()
            value = _cell_value(cell)
            if value is None:
                span = SourceSpan(self.file, row.line, column, row.line, column + len(cell))
                raise _SyntaxProblem(Diagnostic(
                    "error", f"'{cell}' is not a value", span,
                    "0, 1, X, Z, a binary (0b...), hex (0x...) or decimal number, or 'computed'"))
            cells.append(value)
            columns.append(column)
        return tuple(cells)

    # signals and values
    def signals(self, c: list) -> list:
        return [x for x in c if not isinstance(x, Token)]

    def name_signal(self, c: list) -> ast.NameSignal:
        return ast.NameSignal(c[0].value, self._tok(c[0]))

    def pin_signal(self, c: list) -> ast.PinSignal:
        ref, _, port = c[0].value.partition(".")
        return ast.PinSignal(ref, port, self._tok(c[0]))

    def slice_signal(self, c: list) -> ast.SliceSignal:
        bounds = [x for x in c if _is_token(x, "LITERAL")]
        numbers = []
        for bound in bounds:
            if not bound.value.isdigit():
                raise _SyntaxProblem(Diagnostic(
                    "error", f"slice bound '{bound.value}' is not a bit number", self._tok(bound),
                    "a decimal bit number, as in DATA[7:4] or DATA[3]"))
            numbers.append(int(bound.value))
        high, low = numbers[0], numbers[-1]
        return ast.SliceSignal(c[0].value, high, low, len(numbers) == 1, self._between(c[0], c[-1]))

    def literal_value(self, c: list) -> ast.Literal:
        return _literal(c[0].value, self._tok(c[0]))

    def dont_care_value(self, c: list) -> ast.DontCare:
        return ast.DontCare(self._tok(c[0]))

    def released_value(self, c: list) -> ast.Released:
        return ast.Released(self._tok(c[0]))

    def computed_value(self, c: list) -> ast.Computed:
        return ast.Computed(self._tok(c[0]))

    def quantity(self, c: list) -> ast.Quantity:
        return ast.Quantity(c[0].value, c[1].value, self._between(c[0], c[1]), self._tok(c[1]))


def _literal(text: str, span: SourceSpan | None) -> ast.Literal:
    """Classify a number by its prefix; digits are checked later against the target's width."""
    lowered = text[:2].lower()
    if lowered == "0b" and len(text) > 2:
        return ast.Literal(2, text[2:].upper(), span)
    if lowered == "0x" and len(text) > 2:
        return ast.Literal(16, text[2:].upper(), span)
    return ast.Literal(10, text.upper(), span)


@lru_cache(maxsize=4096)
def _cell_value(text: str) -> ast.Value | None:
    """A table cell's value, shared by every cell written the same way (None: not a value)."""
    upper = text.upper()
    if upper == "X":
        return ast.DontCare()
    if upper == "Z":
        return ast.Released()
    if text == "computed":
        return ast.Computed()
    if not text[0].isdigit():
        return None
    return _literal(text, None)

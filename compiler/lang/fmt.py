"""The canonical layout of a `.loom` program: `scanloom fmt`.

Four spaces per block level, one statement per line, vector tables aligned in columns, one
blank line before each test, blank lines between statements kept (at most one), long lists
wrapped after a comma. Comments are kept: a comment on its own line stays before the statement
that followed it, a comment after a statement stays on that statement's line. The formatted
text parses to the same tree as the original.
"""

from __future__ import annotations

from typing import Iterable, Sequence, Union

from ..diagnostics import SourceSpan
from . import ast
from .checks import signal_text
from .parser import parse_text
from .values import describe_value

__all__ = ["format_program", "format_text", "MAX_WIDTH"]

INDENT = "    "
MAX_WIDTH = 100

_Statement = Union[ast.TopItem, ast.TestItem, ast.StepItem]  # anything written on its own line(s)


def format_text(text: str, file: str = "<program>") -> str:
    """Parse and format; raises ScanloomError on a syntax error."""
    return format_program(parse_text(text, file), text)


def format_program(program: ast.Program, text: str) -> str:
    return _Formatter(program, text).run()


def _quote(text: str) -> str:
    return '"' + text.replace("\\", "\\\\").replace('"', '\\"') + '"'


def _quantity(quantity: ast.Quantity) -> str:
    return f"{quantity.number} {quantity.unit}"


def _assignment(assignment: ast.Assignment) -> str:
    return f"{signal_text(assignment.target)} = {describe_value(assignment.value)}"


class _Formatter:
    def __init__(self, program: ast.Program, text: str):
        self.program = program
        lines = text.splitlines()
        self.blank = {number for number, line in enumerate(lines, start=1) if not line.strip()}
        self.comments = list(program.comments)
        self.next_comment = 0
        self.out: list[str] = []

    def run(self) -> str:
        previous: ast.TopItem | None = None
        for item in self.program.items:
            force_blank = previous is not None and (isinstance(item, ast.Test) or
                                                    isinstance(previous, ast.Test))
            self.top(item, force_blank)
            previous = item
        self.flush_comments(10**9, "")
        while self.out and not self.out[-1]:
            self.out.pop()
        return "\n".join(self.out) + "\n" if self.out else ""

    # ---- comments and blank lines -------------------------------------------------------------
    def flush_comments(self, before_line: int, indent: str) -> None:
        """Own-line comments (and stray trailing ones) that come before `before_line`."""
        while self.next_comment < len(self.comments):
            comment = self.comments[self.next_comment]
            if comment.line >= before_line:
                break
            if comment.line - 1 in self.blank:
                self.blank_line()
            self.out.append(indent + comment.text)
            self.next_comment += 1

    def trailing(self, line: int) -> str:
        """The comment written after the statement that ends on `line`, if any."""
        if self.next_comment < len(self.comments):
            comment = self.comments[self.next_comment]
            if comment.line == line and not comment.own_line:
                self.next_comment += 1
                return "  " + comment.text
        return ""

    def begin(self, span_line: int, indent: str, force_blank: bool = False) -> None:
        """Start a statement: its leading comments, with blank lines where the source had them.

        The comments right above a statement (no blank line between) stay attached to it; a
        blank line forced before the statement goes above them.
        """
        pending: list[ast.Comment] = []
        while self.next_comment < len(self.comments) and \
                self.comments[self.next_comment].line < span_line:
            pending.append(self.comments[self.next_comment])
            self.next_comment += 1
        split = len(pending)
        expected = span_line - 1
        while split > 0 and pending[split - 1].line == expected:
            split -= 1
            expected -= 1
        for comment in pending[:split]:
            if comment.line - 1 in self.blank:
                self.blank_line()
            self.out.append(indent + comment.text)
        block_start = pending[split].line if split < len(pending) else span_line
        if force_blank or block_start - 1 in self.blank:
            self.blank_line()
        for comment in pending[split:]:
            self.out.append(indent + comment.text)

    def blank_line(self) -> None:
        if self.out and self.out[-1] and not self.out[-1].endswith("{"):
            self.out.append("")

    def line(self, indent: str, text: str, start_line: int, end_line: int) -> None:
        # Comments inside a statement written over several lines move after it.
        trailing = self.trailing(end_line) if start_line == end_line else ""
        self.out.append(indent + text + trailing)
        if start_line != end_line:
            self.flush_comments(end_line + 1, indent)

    def statement(self, node: _Statement, indent: str, text_or_parts: str | Sequence[str],
                  force_blank: bool = False,
                  prefix: str = "", suffix: str = "") -> None:
        span = node.span
        self.begin(span.line, indent, force_blank)
        end_line = self.end_line(node)
        if isinstance(text_or_parts, str):
            self.line(indent, text_or_parts, span.line, end_line)
            return
        self.wrapped(indent, prefix, text_or_parts, suffix, span.line, end_line)

    def wrapped(self, indent: str, prefix: str, parts: Sequence[str], suffix: str,
                start_line: int, end_line: int) -> None:
        one_line = prefix + ", ".join(parts) + suffix
        if len(indent) + len(one_line) <= MAX_WIDTH or len(parts) < 2:
            self.line(indent, one_line, start_line, end_line)
            return
        trailing = self.trailing(start_line) if start_line == end_line else ""
        current = indent + prefix
        lines: list[str] = []
        continuation = indent + INDENT
        for index, part in enumerate(parts):
            piece = part + ("," if index < len(parts) - 1 else suffix)
            if current.strip() and len(current) + 1 + len(piece) > MAX_WIDTH and \
                    current != indent + prefix:
                lines.append(current.rstrip())
                current = continuation + piece
            else:
                current = current + ("" if current.endswith((" ", "[")) else " ") + piece
        lines.append(current.rstrip())
        lines[-1] += trailing
        self.out.extend(lines)
        self.flush_comments(end_line + 1, indent)

    @staticmethod
    def end_line(node: _Statement) -> int:
        span = node.span
        return span.end_line if span.end_line else span.line

    # ---- top level --------------------------------------------------------------------------
    def top(self, item: ast.TopItem, force_blank: bool) -> None:
        if isinstance(item, ast.Test):
            self.test(item, force_blank)
        elif isinstance(item, ast.BoardDecl):
            self.statement(item, "", f"board {_quote(item.path)}", force_blank)
        elif isinstance(item, ast.TckDecl):
            self.statement(item, "", f"tck {_quantity(item.frequency)}", force_blank)
        elif isinstance(item, ast.IncludeDecl):
            self.statement(item, "", f"include {_quote(item.path)}", force_blank)
        elif isinstance(item, ast.DefaultModeDecl):
            self.statement(item, "", f"default mode {item.instruction}", force_blank)
        elif isinstance(item, ast.FinishDecl):
            self.statement(item, "", f"finish in {item.state}", force_blank)
        elif isinstance(item, ast.FightLimitDecl):
            self.statement(item, "", f"fight limit {_quantity(item.duration)}", force_blank)
        elif isinstance(item, ast.GroupDecl):
            self.group(item, force_blank)
        else:  # pragma: no cover - the parser builds only the kinds above
            raise TypeError(f"unexpected top-level item {item!r}")

    def group(self, item: ast.GroupDecl, force_blank: bool) -> None:
        members = [signal_text(m) for m in item.members]
        one_line = f"group {item.name} = [{', '.join(members)}]"
        self.begin(item.span.line, "", force_blank)
        end_line = self.end_line(item)
        if len(one_line) <= MAX_WIDTH:
            self.line("", one_line, item.span.line, end_line)
            return
        self.out.append(f"group {item.name} = [" + (self.trailing(item.span.line)
                                                    if item.span.line == end_line else ""))
        current = INDENT
        for index, member in enumerate(members):
            piece = member + ("," if index < len(members) - 1 else "")
            if current.strip() and len(current) + 1 + len(piece) > MAX_WIDTH:
                self.out.append(current.rstrip())
                current = INDENT + piece
            else:
                current += ("" if current == INDENT else " ") + piece
        self.out.append(current.rstrip())
        self.out.append("]")
        self.flush_comments(end_line + 1, "")

    def block_open(self, node: _Statement, indent: str, text: str, force_blank: bool) -> None:
        self.begin(node.span.line, indent, force_blank)
        self.out.append(indent + text + " {" + self.trailing(node.span.end_line or node.span.line))

    def block_close(self, end_span: SourceSpan, indent: str) -> None:
        self.flush_comments(end_span.line, indent + INDENT)
        self.out.append(indent + "}" + self.trailing(end_span.line))

    def test(self, test: ast.Test, force_blank: bool) -> None:
        self.block_open(test, "", f"test {test.name} {_quote(test.title)}", force_blank)
        for item in test.items:
            self.test_item(item, INDENT)
        self.block_close(test.end_span, "")

    def test_item(self, item: ast.TestItem, indent: str) -> None:
        if isinstance(item, ast.ModeSet):
            self.statement(item, indent, f"{', '.join(item.refs)} {item.instruction}")
        elif isinstance(item, ast.Step):
            self.block_open(item, indent, f"step {item.name}", False)
            for statement in item.items:
                self.step_item(statement, indent + INDENT)
            self.block_close(item.end_span, indent)
        elif isinstance(item, ast.Table):
            self.table(item, indent)
        elif isinstance(item, ast.ChainScan):
            text = f"scan chain {item.length} bits in {describe_value(item.shifted)}"
            if item.expected is not None:
                text += f" expect {describe_value(item.expected)}"
            self.statement(item, indent, text)
        elif isinstance(item, ast.TapReset):
            self.statement(item, indent, "reset tap")
        else:
            self.step_item(item, indent)  # wait, read, write, allow read the same at both levels

    def step_item(self, item: ast.StepItem, indent: str) -> None:
        if isinstance(item, ast.Drive):
            self.statement(item, indent, [_assignment(a) for a in item.assignments], prefix="drive ")
        elif isinstance(item, ast.Expect):
            self.statement(item, indent, [_assignment(a) for a in item.assignments], prefix="expect ")
        elif isinstance(item, ast.Release):
            self.statement(item, indent, [signal_text(t) for t in item.targets], prefix="release ")
        elif isinstance(item, ast.Wait):
            self.statement(item, indent, f"wait {_quantity(item.amount)}")
        elif isinstance(item, ast.Read):
            text = f"read {item.ref} {item.register}"
            if item.using is not None:
                text += f" using {item.using}"
            if item.expected is not None:
                text += f" expect {describe_value(item.expected)}"
            self.statement(item, indent, text)
        elif isinstance(item, ast.Write):
            text = f"write {item.ref} {item.register}"
            if item.using is not None:
                text += f" using {item.using}"
            self.statement(item, indent, text + f" {describe_value(item.value)}")
        elif isinstance(item, ast.Allow):
            self.statement(item, indent, f"allow {item.check} {_quote(item.reason)}")
        else:  # pragma: no cover
            raise TypeError(f"unexpected statement {item!r}")

    # ---- tables -----------------------------------------------------------------------------
    def table(self, table: ast.Table, indent: str) -> None:
        title = "table" if table.name is None else f"table {table.name}"
        self.block_open(table, indent, title, False)
        inner = indent + INDENT
        header = ([signal_text(s) for s in table.drive_columns],
                  [signal_text(s) for s in table.expect_columns])
        rows = [([describe_value(v) for v in row.drives], [describe_value(v) for v in row.expects])
                for row in table.rows]
        widths = _column_widths([header] + rows)
        self.begin(table.header_span.line, inner)
        self.out.append(inner + _table_line(header, widths) + self.trailing(table.header_span.line))
        for row, cells in zip(table.rows, rows):
            self.begin(row.span.line, inner)
            self.out.append(inner + _table_line(cells, widths) + self.trailing(row.span.line))
        self.block_close(table.end_span, indent)


def _column_widths(lines: Iterable[tuple[list[str], list[str]]]) -> tuple[list[int], list[int]]:
    drive_widths: list[int] = []
    expect_widths: list[int] = []
    for drives, expects in lines:
        for widths, cells in ((drive_widths, drives), (expect_widths, expects)):
            for index, cell in enumerate(cells):
                if index == len(widths):
                    widths.append(0)
                widths[index] = max(widths[index], len(cell))
    return drive_widths, expect_widths


def _table_line(cells: tuple[list[str], list[str]], widths: tuple[list[int], list[int]]) -> str:
    drives = "  ".join(cell.ljust(width) for cell, width in zip(cells[0], widths[0]))
    expects = "  ".join(cell.ljust(width) for cell, width in zip(cells[1], widths[1]))
    left = (drives + "  ") if drives else ""
    return (left + "->" + ("  " + expects if expects else "")).rstrip()

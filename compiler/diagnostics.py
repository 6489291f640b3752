"""Diagnostics: one collector per run, rendered as `file:line:col: severity: message`.

Every user-facing error goes through here so that bad input never reaches the user as a
Python traceback: the source line is shown with a caret span, with what was expected and the
nearest valid names in scope.
"""

from __future__ import annotations

import difflib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterable, Sequence

__all__ = [
    "SourceSpan",
    "Diagnostic",
    "Diagnostics",
    "ScanloomError",
    "nearest",
    "read_source",
]


@dataclass(frozen=True, slots=True)
class SourceSpan:
    """A region of a source file; lines and columns count from 1, the end is exclusive."""

    file: str
    line: int
    column: int
    end_line: int = 0
    end_column: int = 0

    def __str__(self) -> str:
        return f"{self.file}:{self.line}:{self.column}"

    @staticmethod
    def at_offset(file: str, text: str, offset: int, length: int = 1) -> "SourceSpan":
        """The span of `length` characters starting at character `offset` of `text`."""
        offset = max(0, min(offset, len(text)))
        line = text.count("\n", 0, offset) + 1
        start_of_line = text.rfind("\n", 0, offset) + 1
        column = offset - start_of_line + 1
        return SourceSpan(file, line, column, line, column + max(1, length))


@dataclass(frozen=True, slots=True)
class Diagnostic:
    """One message: what is wrong, where, what was expected, and what might have been meant."""

    severity: str  # "error", "warning" or "note"
    message: str
    span: SourceSpan | None = None
    expected: str | None = None
    suggestions: tuple[str, ...] = ()
    hint: str | None = None
    code: str | None = None

    def sort_key(self) -> tuple:
        if self.span is None:
            return ("", 0, 0, self.message)
        return (self.span.file, self.span.line, self.span.column, self.message)


def read_source(path: str | Path) -> str:
    """Read a text file the way every scanloom reader does: bytes as Latin-1 when not UTF-8."""
    data = Path(path).read_bytes()
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        return data.decode("latin-1")
    return text.removeprefix("\ufeff")  # the byte-order mark some editors write first


def nearest(name: str, candidates: Iterable[str], limit: int = 3) -> tuple[str, ...]:
    """The names in scope closest to `name`, for "did you mean" (case-insensitive)."""
    pool = sorted(set(candidates))
    by_upper: dict[str, str] = {}
    for cand in pool:
        by_upper.setdefault(cand.upper(), cand)
    matches = difflib.get_close_matches(name.upper(), list(by_upper), n=limit, cutoff=0.6)
    return tuple(by_upper[m] for m in matches)


class ScanloomError(Exception):
    """Raised when a stage cannot continue; carries the diagnostics that explain why."""

    def __init__(self, diagnostics: Sequence[Diagnostic], sources: dict[str, str] | None = None):
        self.diagnostics = tuple(diagnostics)
        self.sources = dict(sources or {})
        first = self.diagnostics[0].message if self.diagnostics else "error"
        super().__init__(first)

    def render(self) -> str:
        return render_all(self.diagnostics, self.sources)

    def __reduce__(self) -> tuple[type, tuple[tuple[Diagnostic, ...], dict[str, str]]]:
        # Pickled whole (a worker process sends its errors back); Exception's own reduce
        # would rebuild it from the first message alone.
        return type(self), (self.diagnostics, self.sources)


@dataclass
class Diagnostics:
    """Collects diagnostics within a stage; `raise_if_errors` stops between stages."""

    sources: dict[str, str] = field(default_factory=dict)
    items: list[Diagnostic] = field(default_factory=list)
    strict: bool = False

    def add_source(self, file: str, text: str) -> None:
        self.sources[file] = text

    def report(self, diagnostic: Diagnostic) -> None:
        if self.strict and diagnostic.severity == "warning":
            diagnostic = Diagnostic(
                "error", diagnostic.message, diagnostic.span, diagnostic.expected,
                diagnostic.suggestions, diagnostic.hint, diagnostic.code,
            )
        self.items.append(diagnostic)

    def error(self, message: str, span: SourceSpan | None = None, *, expected: str | None = None,
              suggestions: Sequence[str] = (), hint: str | None = None, code: str | None = None) -> None:
        self.report(Diagnostic("error", message, span, expected, tuple(suggestions), hint, code))

    def warning(self, message: str, span: SourceSpan | None = None, *, expected: str | None = None,
                suggestions: Sequence[str] = (), hint: str | None = None, code: str | None = None) -> None:
        self.report(Diagnostic("warning", message, span, expected, tuple(suggestions), hint, code))

    def note(self, message: str, span: SourceSpan | None = None, *, hint: str | None = None,
             code: str | None = None) -> None:
        self.report(Diagnostic("note", message, span, None, (), hint, code))

    def extend(self, diagnostics: Iterable[Diagnostic]) -> None:
        for diagnostic in diagnostics:
            self.report(diagnostic)

    @property
    def errors(self) -> list[Diagnostic]:
        return [d for d in self.items if d.severity == "error"]

    @property
    def warnings(self) -> list[Diagnostic]:
        return [d for d in self.items if d.severity == "warning"]

    def has_errors(self) -> bool:
        return any(d.severity == "error" for d in self.items)

    def raise_if_errors(self) -> None:
        if self.has_errors():
            raise ScanloomError(self.sorted(), self.sources)

    def sorted(self) -> list[Diagnostic]:
        return sorted(self.items, key=Diagnostic.sort_key)

    def render(self) -> str:
        return render_all(self.sorted(), self.sources)


def render_all(diagnostics: Iterable[Diagnostic], sources: dict[str, str]) -> str:
    return "\n".join(render(d, sources) for d in diagnostics)


def _source_line(span: SourceSpan, sources: dict[str, str]) -> str | None:
    text = sources.get(span.file)
    if text is None:
        try:
            text = read_source(span.file)
        except OSError:
            return None
        sources[span.file] = text
    lines = text.splitlines()
    if 1 <= span.line <= len(lines):
        return lines[span.line - 1]
    return None


_SHOWN_WIDTH = 120  # a longer source line is shown as this many characters around the caret


def _caret_lines(line: str, span: SourceSpan) -> list[str]:
    """The source line (control characters as `?`, long lines cut) and its caret line."""
    shown = "".join(c if c.isprintable() else " " if c == "\t" else "?" for c in line)
    column = span.column
    if len(shown) > _SHOWN_WIDTH:
        start = max(0, min(column - 1 - _SHOWN_WIDTH // 2, len(shown) - _SHOWN_WIDTH))
        cut = shown[start:start + _SHOWN_WIDTH]
        head = "..." if start else ""
        shown = head + cut + ("..." if start + _SHOWN_WIDTH < len(shown) else "")
        column = column - start + len(head)
    width = 1
    if span.end_line == span.line and span.end_column > span.column:
        width = span.end_column - span.column
    width = max(1, min(width, len(shown) - column + 1))
    return [f"    {shown}", "    " + " " * (column - 1) + "^" * width]


def render(diagnostic: Diagnostic, sources: dict[str, str] | None = None) -> str:
    """Render one diagnostic with its source line and a caret span."""
    sources = sources if sources is not None else {}
    where = f"{diagnostic.span}: " if diagnostic.span else ""
    out = [f"{where}{diagnostic.severity}: {diagnostic.message}"]
    span = diagnostic.span
    if span is not None:
        line = _source_line(span, sources)
        if line is not None:
            out.extend(_caret_lines(line, span))
    if diagnostic.expected:
        out.append(f"  expected: {diagnostic.expected}")
    if diagnostic.suggestions:
        out.append("  did you mean: " + ", ".join(diagnostic.suggestions) + "?")
    if diagnostic.hint:
        out.append(f"  hint: {diagnostic.hint}")
    return "\n".join(out)

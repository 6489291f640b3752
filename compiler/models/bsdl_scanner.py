"""Tokens of a BSDL attribute string, and a cursor that reads them with precise errors.

Attribute strings (pin maps, opcodes, boundary cells ...) have their own small syntax inside
the VHDL string. Positions here are indices into the joined string; the caller maps them back
to the file through `StringValue.file_offset`, so an error points at the offending token.
"""

from __future__ import annotations

import re
from typing import Iterator, NamedTuple, NoReturn, Sequence

from ..diagnostics import nearest

__all__ = ["AttrToken", "AttributeSyntaxError", "AttrCursor", "describe", "WORD", "REAL",
           "MARK", "OTHER", "END"]

WORD = "word"  # letters, digits and underscores: names, integers, bit patterns, pin names
REAL = "real"  # a number with a fraction or exponent: 1.00e+007, 10.0E06
MARK = "mark"  # one of ( ) , : [ ] * ;
OTHER = "other"  # any other visible character
END = "end"  # the end of the string

_TOKEN = re.compile(
    r"\s*(?:(?P<real>[0-9]+\.[0-9]*(?:[eE][+-]?[0-9]+)?|[0-9]+[eE][+-]?[0-9]+(?![A-Za-z0-9_]))"
    r"|(?P<word>[A-Za-z0-9_]+)|(?P<mark>[()\[\],:;*])|(?P<other>\S))")
_KIND = {"real": REAL, "word": WORD, "mark": MARK, "other": OTHER}


class AttrToken(NamedTuple):
    kind: str
    text: str
    start: int  # index into the joined attribute text
    end: int


class AttributeSyntaxError(Exception):
    """A fault inside one attribute string; bsdl.py turns it into a diagnostic with a span."""

    def __init__(self, message: str, start: int, end: int, expected: str | None = None,
                 suggestions: Sequence[str] = ()) -> None:
        super().__init__(message)
        self.message = message
        self.start = start
        self.end = end
        self.expected = expected
        self.suggestions = tuple(suggestions)


def describe(token: AttrToken) -> str:
    if token.kind == END:
        return "the end of the string"
    return f"`{token.text}`"


class AttrCursor:
    """Reads tokens one by one; every `expect_*` raises AttributeSyntaxError at the token.

    Tokens are made on demand from `start`, so a reader can take over part of a long string
    (one boundary cell) and hand the rest back through `position()`.
    """

    __slots__ = ("tokens", "index", "_matches", "_length")

    def __init__(self, text: str, start: int = 0) -> None:
        self.tokens: list[AttrToken] = []
        self.index = 0
        self._matches: Iterator[re.Match[str]] | None = _TOKEN.finditer(text, start)
        self._length = len(text)

    def _fill(self, position: int) -> None:
        while len(self.tokens) <= position and self._matches is not None:
            match = next(self._matches, None)
            if match is None:
                self.tokens.append(AttrToken(END, "", self._length, self._length))
                self._matches = None
                return
            kind = match.lastgroup
            if kind is not None:
                self.tokens.append(AttrToken(_KIND[kind], match.group(kind), match.start(kind),
                                             match.end(kind)))

    def _current(self) -> AttrToken:
        if self.index >= len(self.tokens):
            self._fill(self.index)
        return self.tokens[min(self.index, len(self.tokens) - 1)]

    def position(self) -> int:
        """Where the next token starts (the end of the text once everything is read)."""
        return self._current().start

    def peek(self, ahead: int = 0) -> AttrToken:
        self._fill(self.index + ahead)
        return self.tokens[min(self.index + ahead, len(self.tokens) - 1)]

    def advance(self) -> AttrToken:
        token = self._current()
        if token.kind != END:
            self.index += 1
        return token

    def at_end(self) -> bool:
        return self._current().kind == END

    def at_mark(self, mark: str) -> bool:
        token = self._current()
        return token.kind == MARK and token.text == mark

    def accept_mark(self, mark: str) -> AttrToken | None:
        token = self._current()
        if token.kind == MARK and token.text == mark:
            self.index += 1
            return token
        return None

    def expect_mark(self, mark: str, context: str) -> AttrToken:
        token = self._current()
        if token.kind == MARK and token.text == mark:
            self.index += 1
            return token
        self.fail(token, f"expected `{mark}` {context}, found {describe(token)}", f"`{mark}`")

    def expect_word(self, what: str, context: str = "") -> AttrToken:
        token = self._current()
        if token.kind == WORD:
            self.index += 1
            return token
        where = f" {context}" if context else ""
        self.fail(token, f"expected {what}{where}, found {describe(token)}", what)

    def expect_number(self, what: str) -> tuple[AttrToken, float]:
        token = self._current()
        if token.kind in (WORD, REAL):
            try:
                value = float(token.text)
            except ValueError:
                pass
            else:
                self.index += 1
                return token, value
        self.fail(token, f"expected {what}, found {describe(token)}", "a number such as 1.0e-3")

    def expect_integer(self, what: str) -> tuple[AttrToken, int]:
        token = self._current()
        if token.kind == WORD and token.text.isdigit() and len(token.text) <= 9:
            self.index += 1
            return token, int(token.text)
        self.fail(token, f"expected {what}, found {describe(token)}",
                  "a whole number below 1,000,000,000")

    def expect_choice(self, choices: Sequence[str], what: str) -> tuple[AttrToken, str]:
        """A word from `choices` (case-insensitive); the error suggests the nearest choice."""
        token = self._current()
        if token.kind == WORD:
            word = token.text.upper()
            if word in choices:
                self.index += 1
                return token, word
        self.fail(token, f"{describe(token)} is not {what}",
                  "one of " + ", ".join(choices), nearest(token.text, choices))

    def expect_end(self, context: str) -> None:
        token = self._current()
        if token.kind != END:
            self.fail(token, f"unexpected {describe(token)} {context}", "the end of the string")

    @staticmethod
    def fail(token: AttrToken, message: str, expected: str | None = None,
             suggestions: Sequence[str] = ()) -> NoReturn:
        end = token.end if token.end > token.start else token.start + 1
        raise AttributeSyntaxError(message, token.start, end, expected, suggestions)

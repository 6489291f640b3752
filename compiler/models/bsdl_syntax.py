"""Parse the outer syntax of a BSDL file (grammar/bsdl.lark) into our own tree (bsdl_ast).

Real files carry habits the grammar should not have to know about: a stray line before
`entity` (a tool's banner without `--`) or text after the final `end ...;`. Those are blanked
out before parsing (newlines kept, so every offset stays true) and reported as warnings.
Syntax errors become diagnostics with `file:line:col`, the expected tokens in plain words.
"""

from __future__ import annotations

import re
from functools import lru_cache
from typing import Any, Iterable

from lark import Lark, Token, Transformer, v_args
from lark.tree import Meta
from lark.exceptions import UnexpectedCharacters, UnexpectedEOF, UnexpectedInput, UnexpectedToken

from ..diagnostics import Diagnostics, nearest
from ..grammar_support import expected_words, strict_mode_available
from .bsdl_ast import (
    AggregateValue, AttributeDecl, AttributeSpec, BsdlFile, ConstantDecl, EntityDecl, GenericDecl,
    Identifier, NameValue, NumberValue, PackageDecl, PortDecl, PortRange, SourceText, StringPiece,
    StringValue, Target, UseClause,
)

__all__ = ["parse_syntax", "blank_stray_text", "bsdl_parser", "PORT_DIRECTIONS"]

MAX_VECTOR_WIDTH = 65_536  # a sanity limit far above any device, against damaged numbers
PORT_DIRECTIONS = ("IN", "OUT", "INOUT", "BUFFER", "LINKAGE")
PORT_TYPES = ("BIT", "BIT_VECTOR")
ENTITY_CLASSES = ("ENTITY", "SIGNAL")

# Words that can start a design unit at the top of a file (IEEE Std 1076 design units that a
# BSDL file uses: packages, the entity, and context clauses).
_UNIT_STARTS = ("entity", "package", "use", "library")

# Comments, strings and the words `entity` and `end`, in the order the lexer would see them.
_CODE_SCAN = re.compile(r'--[^\n]*|"(?:[^"\n]|"")*"|\b(entity|end)\b', re.IGNORECASE)
_WORD_OR_MARK = re.compile(r'--[^\n]*|"(?:[^"\n]|"")*"|[A-Za-z][A-Za-z0-9_]*|\S')

# The pieces of a STRINGS token: each literal's content, or a comment between literals.
_AFTER_AMPERSAND = re.compile(r"(?:[ \t\f\r\n]|--[^\n]*)*")
_PIECE = re.compile(r'--[^\n]*|"((?:[^"\n\r]|"")*)"')

_TERMINAL_WORDS = {
    "NAME": "a name",
    "NUMBER": "a number",
    "STRINGS": "a string",
    "$END": "the end of the file",
}


@lru_cache(maxsize=1)
def bsdl_parser() -> Lark:
    """The LALR parser of grammar/bsdl.lark, built once per process (lark grammars are pure)."""
    return Lark.open_from_package(
        "scanloom.grammar", "bsdl.lark", parser="lalr", propagate_positions=True,
        maybe_placeholders=False, strict=strict_mode_available(),
    )


def _blank(text: str, start: int, end: int) -> str:
    """Replace text[start:end] by spaces, keeping line ends so offsets and lines stay true."""
    middle = re.sub(r"[^\r\n]", " ", text[start:end])
    return text[:start] + middle + text[end:]


def blank_stray_text(source: SourceText, diagnostics: Diagnostics) -> str | None:
    """The text with stray lines before the first design unit and after `end` blanked.

    None (after an error) when no line starts a design unit: the file is not BSDL at all.
    """
    text = source.text
    # Before: every line up to the first one whose first word starts a design unit.
    offset = 0
    stray_start: int | None = None
    for line in text.splitlines(keepends=True):
        stripped = line.strip()
        if stripped and not stripped.startswith("--"):
            first = re.match(r"[A-Za-z][A-Za-z0-9_]*", stripped)
            if first and first.group(0).lower() in _UNIT_STARTS:
                break
            if stray_start is None:
                stray_start = offset + (len(line) - len(line.lstrip()))
        offset += len(line)
    head_end = offset
    if head_end >= len(text):
        where = source.span(stray_start, stray_start + 1) if stray_start is not None \
            else source.end_span()
        diagnostics.error("this file has no entity: it does not look like BSDL", where,
                          expected="`entity NAME is ... end NAME;`", code="bsdl-syntax")
        return None
    if stray_start is not None:
        diagnostics.warning(
            "text before the first design unit is not BSDL; it is ignored",
            source.span(stray_start, stray_start + 1),
            expected="`--` before comment lines", code="bsdl-stray-text")
        text = _blank(text, stray_start, head_end)
    # After: the entity ends at the first `end` after the word `entity`, then `entity`? NAME? `;`.
    tail = _end_of_entity(text, head_end)
    if tail is not None:
        for match in _WORD_OR_MARK.finditer(text, tail):
            if not match.group(0).startswith("--"):
                diagnostics.warning(
                    "text after the end of the entity is not BSDL; it is ignored",
                    source.span(match.start(), match.end()), code="bsdl-stray-text")
                text = _blank(text, match.start(), len(text))
                break
    return text


def _end_of_entity(text: str, start: int) -> int | None:
    """The offset just past the `;` that closes the entity, or None when it cannot be found."""
    seen_entity = False
    for match in _CODE_SCAN.finditer(text, start):
        word = match.group(1)
        if word is None:
            continue
        if word.lower() == "entity" and not seen_entity:
            seen_entity = True
            continue
        if seen_entity and word.lower() == "end":
            words = _WORD_OR_MARK.finditer(text, match.end())
            for token in words:
                piece = token.group(0)
                if piece.startswith("--"):
                    continue
                if piece == ";":
                    return token.end()
                if not re.fullmatch(r"[A-Za-z][A-Za-z0-9_]*", piece):
                    return None
            return None
    return None


def _ident(token: Token) -> Identifier:
    return Identifier(str(token).upper(), token.start_pos, token.end_pos)


def _is_token(item: Any, kind: str) -> bool:
    return isinstance(item, Token) and item.type == kind


@v_args(meta=True)
class _ToAst(Transformer):
    """lark tree -> bsdl_ast; checks the words the grammar leaves open, reporting as it goes."""

    def __init__(self, source: SourceText, diagnostics: Diagnostics) -> None:
        super().__init__()
        self.source = source
        self.diagnostics = diagnostics

    def _choose(self, token: Token, allowed: tuple[str, ...], what: str) -> str | None:
        word = str(token).upper()
        if word in allowed:
            return word
        self.diagnostics.error(
            f"`{token}` is not a {what}", self.source.span(token.start_pos, token.end_pos),
            expected=" or ".join(f"`{a.lower()}`" for a in allowed),
            suggestions=[s.lower() for s in nearest(word, allowed)], code="bsdl-syntax")
        return None

    def start(self, meta: Meta, items: list[Any]) -> BsdlFile:
        return BsdlFile(tuple(items[:-1]), items[-1])

    def _package(self, meta: Meta, items: list[Any], body: bool) -> PackageDecl:
        names = [t for t in items if _is_token(t, "NAME")]
        decls = tuple(i for i in items if not isinstance(i, Token))
        name = _ident(names[0])
        if len(names) > 1 and names[1].upper() != name.text:
            self._end_mismatch(names[1], name.text, "package")
        return PackageDecl(name, body, decls, meta.start_pos, meta.end_pos)

    def package_decl(self, meta: Meta, items: list[Any]) -> PackageDecl:
        return self._package(meta, items, False)

    def package_body(self, meta: Meta, items: list[Any]) -> PackageDecl:
        return self._package(meta, items, True)

    def _end_mismatch(self, token: Token, expected: str, what: str) -> None:
        self.diagnostics.error(
            f"`end {token}` does not close the {what} `{expected}`",
            self.source.span(token.start_pos, token.end_pos), expected=f"`end {expected};`",
            code="bsdl-syntax")

    def entity(self, meta: Meta, items: list[Any]) -> EntityDecl:
        names = [t for t in items if _is_token(t, "NAME")]
        name = _ident(names[0])
        if len(names) > 1 and names[1].upper() != name.text:
            self._end_mismatch(names[1], name.text, "entity")
        body = [i for i in items if not isinstance(i, Token)]
        generics = tuple(g for clause in body if isinstance(clause, tuple) and clause
                         and isinstance(clause[0], GenericDecl) for g in clause)
        ports = tuple(p for clause in body if isinstance(clause, tuple) and clause
                      and isinstance(clause[0], PortDecl) for p in clause)
        return EntityDecl(
            name, generics, ports,
            tuple(i for i in body if isinstance(i, UseClause)),
            tuple(i for i in body if isinstance(i, AttributeSpec)),
            tuple(i for i in body if isinstance(i, AttributeDecl)),
            tuple(i for i in body if isinstance(i, ConstantDecl)),
            meta.start_pos, meta.end_pos)

    def generic_clause(self, meta: Meta, items: list[Any]) -> tuple[GenericDecl, ...]:
        return tuple(i for i in items if isinstance(i, GenericDecl))

    def generic_decl(self, meta: Meta, items: list[Any]) -> GenericDecl:
        names, type_token = items[0], items[1]
        default = items[2] if len(items) > 2 else None
        return GenericDecl(names, _ident(type_token), default, meta.start_pos, meta.end_pos)

    def port_clause(self, meta: Meta, items: list[Any]) -> tuple[PortDecl, ...]:
        return tuple(i for i in items if isinstance(i, PortDecl))

    def port_decl(self, meta: Meta, items: list[Any]) -> PortDecl:
        names, direction_token, type_token = items[0], items[1], items[2]
        port_range = items[3] if len(items) > 3 else None
        direction = self._choose(direction_token, PORT_DIRECTIONS, "port direction") or "IN"
        type_name = self._choose(type_token, PORT_TYPES, "port type")
        vector = type_name == "BIT_VECTOR"
        if vector and port_range is None:
            self.diagnostics.error(
                "a `bit_vector` port needs its range", self.source.span(type_token.start_pos,
                                                                        type_token.end_pos),
                expected="`bit_vector (0 to N)` or `bit_vector (N downto 0)`", code="bsdl-syntax")
        if type_name == "BIT" and port_range is not None:
            self.diagnostics.error(
                "a `bit` port has no range", self.source.span(port_range.start, port_range.end),
                expected="`bit_vector` for a vector port", code="bsdl-syntax")
            port_range = None
        return PortDecl(names, direction, vector and port_range is not None, port_range,
                        meta.start_pos, meta.end_pos)

    def _whole(self, token: Token) -> int:
        """A whole number of the outer syntax; reports anything else and reads it as 0."""
        text = str(token)
        if text.isdigit() and len(text) <= 9:
            return int(text)
        self.diagnostics.error(f"`{text}` is not a bit index", self.source.span(
            token.start_pos, token.end_pos), expected="a whole number such as 7",
            code="bsdl-syntax")
        return 0

    def port_range(self, meta: Meta, items: list[Any]) -> PortRange:
        left, word, right = items
        direction = self._choose(word, ("TO", "DOWNTO"), "range direction")
        left_value, right_value = self._whole(left), self._whole(right)
        descending = direction == "DOWNTO" if direction else left_value > right_value
        if (descending and left_value < right_value) or (not descending and left_value > right_value):
            self.diagnostics.error(
                f"the range ({left} {word} {right}) is empty",
                self.source.span(meta.start_pos, meta.end_pos),
                expected="`(low to high)` or `(high downto low)`", code="bsdl-syntax")
            right_value = left_value
        if abs(right_value - left_value) >= MAX_VECTOR_WIDTH:
            self.diagnostics.error(
                f"the range ({left} {word} {right}) has more than {MAX_VECTOR_WIDTH:,} bits",
                self.source.span(meta.start_pos, meta.end_pos),
                expected="a vector of a real device's width", code="bsdl-syntax")
            right_value = left_value
        return PortRange(left_value, descending, right_value, meta.start_pos, meta.end_pos)

    def name_list(self, meta: Meta, items: list[Any]) -> tuple[Identifier, ...]:
        return tuple(_ident(t) for t in items)

    def use_clause(self, meta: Meta, items: list[Any]) -> UseClause:
        return UseClause(tuple(_ident(t) for t in items if _is_token(t, "NAME")),
                         meta.start_pos, meta.end_pos)

    def attribute_spec(self, meta: Meta, items: list[Any]) -> AttributeSpec:
        parts = [i for i in items if not _is_token(i, "ATTRIBUTE") and not _is_token(i, "OF")
                 and not _is_token(i, "IS")]
        name, targets, class_token, value = parts
        entity_class = self._choose(class_token, ENTITY_CLASSES, "entity class") or "ENTITY"
        return AttributeSpec(_ident(name), targets,
                             Identifier(entity_class, class_token.start_pos, class_token.end_pos),
                             value, meta.start_pos, meta.end_pos)

    def target_list(self, meta: Meta, items: list[Any]) -> tuple[Target, ...]:
        return tuple(items)

    def target(self, meta: Meta, items: list[Any]) -> Target:
        index = self._whole(items[1]) if len(items) > 1 else None
        return Target(_ident(items[0]), index, meta.start_pos, meta.end_pos)

    def attribute_decl(self, meta: Meta, items: list[Any]) -> AttributeDecl:
        name, type_name = (t for t in items if _is_token(t, "NAME"))
        return AttributeDecl(_ident(name), _ident(type_name), meta.start_pos, meta.end_pos)

    def constant_decl(self, meta: Meta, items: list[Any]) -> ConstantDecl:
        name, type_name = (t for t in items if _is_token(t, "NAME"))
        values = [i for i in items if not isinstance(i, Token)]
        return ConstantDecl(_ident(name), _ident(type_name), values[0] if values else None,
                            meta.start_pos, meta.end_pos)

    def concatenation(self, meta: Meta, items: list[Any]) -> StringValue:
        token = items[0]
        pieces = []
        for match in _PIECE.finditer(str(token)):
            inner = match.group(1)
            if inner is None:
                continue  # a comment between two pieces
            doubled = '""' in inner
            pieces.append(StringPiece(inner.replace('""', '"') if doubled else inner,
                                      token.start_pos + match.start(1), doubled))
        return StringValue.join(tuple(pieces), meta.start_pos, meta.end_pos)

    def number(self, meta: Meta, items: list[Any]) -> NumberValue:
        token = items[0]
        return NumberValue(str(token), float(token), token.start_pos, token.end_pos)

    def name_value(self, meta: Meta, items: list[Any]) -> NameValue:
        token = items[0]
        return NameValue(str(token).upper(), token.start_pos, token.end_pos)

    def aggregate(self, meta: Meta, items: list[Any]) -> AggregateValue:
        return AggregateValue(tuple(items), meta.start_pos, meta.end_pos)


def _expected_words(parser: Lark, names: Iterable[str]) -> str:
    return ", ".join(expected_words(parser, names, _TERMINAL_WORDS, "`"))


def _report_syntax_error(error: UnexpectedInput, parser: Lark, source: SourceText,
                         diagnostics: Diagnostics) -> None:
    if isinstance(error, UnexpectedCharacters):
        offset = error.pos_in_stream
        char = source.text[offset] if offset < len(source.text) else ""
        if char == "&":
            # `&` stops a concatenation when no complete string follows it.
            following = _AFTER_AMPERSAND.match(source.text, offset + 1)
            offset = following.end() if following else offset
            char = source.text[offset:offset + 1]
            if char != '"':
                diagnostics.error("`&` must join two strings", source.span(offset, offset + 1),
                                  expected="a string after `&`", code="bsdl-syntax")
                return
        if char == '"':
            end = source.text.find("\n", offset)
            end = len(source.text) if end < 0 else end
            diagnostics.error("this string is not closed on its line", source.span(offset, end),
                              expected='a closing `"` (join long strings with `&`)',
                              code="bsdl-syntax")
            return
        expected = _expected_words(parser, error.allowed or ())
        diagnostics.error(f"unexpected character `{char}`", source.span(offset, offset + 1),
                          expected=expected or None, code="bsdl-syntax")
        return
    if isinstance(error, UnexpectedToken):
        token = error.token
        expected = _expected_words(parser, error.accepts or error.expected)
        if token.type == "$END":
            diagnostics.error("the file ends before the entity is complete", source.end_span(),
                              expected=expected, code="bsdl-syntax")
            return
        shown = str(token) if len(str(token)) <= 40 else str(token)[:37] + "..."
        diagnostics.error(f"unexpected `{shown}`", source.span(token.start_pos, token.end_pos),
                          expected=expected, code="bsdl-syntax")
        return
    if isinstance(error, UnexpectedEOF):
        diagnostics.error("the file ends before the entity is complete", source.end_span(),
                          expected=_expected_words(parser, error.expected), code="bsdl-syntax")
        return
    diagnostics.error("this file cannot be read as BSDL", source.span(0, 1), code="bsdl-syntax")


def parse_syntax(source: SourceText, diagnostics: Diagnostics) -> BsdlFile | None:
    """The file's tree, or None after reporting a syntax error into `diagnostics`."""
    parser = bsdl_parser()
    text = blank_stray_text(source, diagnostics)
    if text is None:
        return None
    try:
        tree = parser.parse(text)
    except UnexpectedInput as error:
        _report_syntax_error(error, parser, source, diagnostics)
        return None
    return _ToAst(source, diagnostics).transform(tree)

"""The outer syntax of a BSDL file as our own small tree, with file offsets on every node.

The lark parse tree never leaves `bsdl_syntax`; everything later reads these records. Offsets
are character offsets into the file text (`SourceText` turns them into `file:line:col`), so an
error deep inside a long concatenated attribute string can still point at its exact column.
"""

from __future__ import annotations

from bisect import bisect_right
from dataclasses import dataclass, field
from typing import Union

from ..diagnostics import SourceSpan

__all__ = [
    "SourceText",
    "Identifier",
    "StringPiece",
    "StringValue",
    "NumberValue",
    "NameValue",
    "AggregateValue",
    "Value",
    "PortRange",
    "PortDecl",
    "GenericDecl",
    "UseClause",
    "Target",
    "AttributeSpec",
    "AttributeDecl",
    "ConstantDecl",
    "PackageDecl",
    "EntityDecl",
    "BsdlFile",
]


class SourceText:
    """A file's text with a line index, so offsets become spans without rescanning the text."""

    __slots__ = ("file", "text", "_line_starts")

    def __init__(self, file: str, text: str) -> None:
        self.file = file
        self.text = text
        starts = [0]
        find = text.find
        position = find("\n")
        while position >= 0:
            starts.append(position + 1)
            position = find("\n", position + 1)
        self._line_starts = starts

    def line_column(self, offset: int) -> tuple[int, int]:
        offset = max(0, min(offset, len(self.text)))
        line = bisect_right(self._line_starts, offset)
        return line, offset - self._line_starts[line - 1] + 1

    def span(self, start: int, end: int | None = None) -> SourceSpan:
        """The span from `start` to `end` (exclusive); one character when `end` is not given."""
        line, column = self.line_column(start)
        if end is None or end <= start:
            return SourceSpan(self.file, line, column, line, column + 1)
        end_line, end_column = self.line_column(end)
        return SourceSpan(self.file, line, column, end_line, end_column)

    def end_span(self) -> SourceSpan:
        """Where an error about a missing end of input points: the last visible character."""
        stripped = self.text.rstrip()
        offset = max(0, len(stripped) - 1)
        return self.span(offset, offset + 1)


@dataclass(frozen=True, slots=True)
class Identifier:
    """A VHDL name, upper case (BSDL is case-insensitive), with its place in the file."""

    text: str
    start: int = field(compare=False)
    end: int = field(compare=False)


@dataclass(frozen=True, slots=True)
class StringPiece:
    """One string literal of a concatenation: its content and where that content starts."""

    text: str  # the content, a doubled quote undone
    offset: int  # file offset of the first content character
    doubled: bool = False  # the literal held doubled quotes: offsets inside are not linear


@dataclass(frozen=True, slots=True)
class StringValue:
    """Strings joined with `&`, with a map from positions in the joined text back to the file."""

    pieces: tuple[StringPiece, ...]
    start: int = field(compare=False)
    end: int = field(compare=False)
    text: str = ""
    piece_starts: tuple[int, ...] = field(default=(), compare=False)

    @staticmethod
    def join(pieces: tuple[StringPiece, ...], start: int, end: int) -> "StringValue":
        starts: list[int] = []
        total = 0
        for piece in pieces:
            starts.append(total)
            total += len(piece.text)
        return StringValue(pieces, start, end, "".join(p.text for p in pieces), tuple(starts))

    def file_offset(self, index: int) -> int:
        """The file offset of character `index` of the joined text (the end maps past the last)."""
        if not self.pieces:
            return self.start
        if index >= len(self.text):
            last = self.pieces[-1]
            return last.offset + len(last.text) + last.text.count('"')
        which = bisect_right(self.piece_starts, max(0, index)) - 1
        piece = self.pieces[which]
        inside = index - self.piece_starts[which]
        if piece.doubled:
            inside += piece.text.count('"', 0, inside)
        return piece.offset + inside


@dataclass(frozen=True, slots=True)
class NumberValue:
    text: str
    value: float
    start: int = field(compare=False)
    end: int = field(compare=False)


@dataclass(frozen=True, slots=True)
class NameValue:
    name: str  # upper case
    start: int = field(compare=False)
    end: int = field(compare=False)


@dataclass(frozen=True, slots=True)
class AggregateValue:
    """A parenthesised list, as in `(20.0e6, BOTH)` or a CELL_INFO constant."""

    items: tuple["Value", ...]
    start: int = field(compare=False)
    end: int = field(compare=False)


Value = Union[StringValue, NumberValue, NameValue, AggregateValue]


@dataclass(frozen=True, slots=True)
class PortRange:
    left: int
    descending: bool  # `downto`
    right: int
    start: int = field(compare=False)
    end: int = field(compare=False)

    def indices(self) -> range:
        """Vector indices in declaration order: (0 to 3) is 0,1,2,3 and (3 downto 0) is 3,2,1,0."""
        if self.descending:
            return range(self.left, self.right - 1, -1)
        return range(self.left, self.right + 1)


@dataclass(frozen=True, slots=True)
class PortDecl:
    names: tuple[Identifier, ...]
    direction: str  # IN, OUT, INOUT, BUFFER, LINKAGE
    vector: bool
    range: PortRange | None
    start: int = field(compare=False)
    end: int = field(compare=False)


@dataclass(frozen=True, slots=True)
class GenericDecl:
    names: tuple[Identifier, ...]
    type_name: Identifier
    default: Value | None
    start: int = field(compare=False)
    end: int = field(compare=False)


@dataclass(frozen=True, slots=True)
class UseClause:
    path: tuple[Identifier, ...]  # e.g. STD_1149_1_2001, ALL
    start: int = field(compare=False)
    end: int = field(compare=False)

    @property
    def package(self) -> Identifier:
        return self.path[0]


@dataclass(frozen=True, slots=True)
class Target:
    """The item an attribute is given for: the entity or a port (`TDI`, rarely `D(3)`)."""

    name: Identifier
    index: int | None
    start: int = field(compare=False)
    end: int = field(compare=False)


@dataclass(frozen=True, slots=True)
class AttributeSpec:
    """`attribute NAME of TARGET : CLASS is VALUE;`"""

    name: Identifier
    targets: tuple[Target, ...]
    entity_class: Identifier  # ENTITY or SIGNAL
    value: Value
    start: int = field(compare=False)
    end: int = field(compare=False)


@dataclass(frozen=True, slots=True)
class AttributeDecl:
    """`attribute NAME : TYPE;` — how a file declares its own (BSDL_EXTENSION) attributes."""

    name: Identifier
    type_name: Identifier
    start: int = field(compare=False)
    end: int = field(compare=False)


@dataclass(frozen=True, slots=True)
class ConstantDecl:
    """`constant NAME : TYPE := VALUE;`, or a deferred constant without a value."""

    name: Identifier
    type_name: Identifier
    value: Value | None
    start: int = field(compare=False)
    end: int = field(compare=False)


@dataclass(frozen=True, slots=True)
class PackageDecl:
    """A package (or package body) declared in the file before the entity."""

    name: Identifier
    body: bool
    items: tuple[Union[UseClause, ConstantDecl, AttributeDecl], ...]
    start: int = field(compare=False)
    end: int = field(compare=False)


@dataclass(frozen=True, slots=True)
class EntityDecl:
    name: Identifier
    generics: tuple[GenericDecl, ...]
    ports: tuple[PortDecl, ...]
    uses: tuple[UseClause, ...]
    attributes: tuple[AttributeSpec, ...]
    declarations: tuple[AttributeDecl, ...]
    constants: tuple[ConstantDecl, ...]
    start: int = field(compare=False)
    end: int = field(compare=False)


@dataclass(frozen=True, slots=True)
class BsdlFile:
    """A whole file: the units before the entity (use clauses, packages) and the entity."""

    units: tuple[Union[UseClause, PackageDecl], ...]
    entity: EntityDecl

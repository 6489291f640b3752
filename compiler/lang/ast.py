"""The syntax tree of a `.loom` program: what the engineer wrote, before any name is resolved.

Every node is a frozen record; its source span is kept for diagnostics but takes no part in
equality, so a program and its canonically formatted text parse to equal trees. Literals keep
their digits as written (upper-cased, `_` separators kept) so that formatting never changes a
value's meaning or its width.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Union

from ..diagnostics import SourceSpan

__all__ = [
    "Literal", "DontCare", "Released", "Computed", "Value",
    "NameSignal", "PinSignal", "SliceSignal", "Signal",
    "Quantity", "Assignment",
    "Drive", "Release", "Expect", "Wait", "Read", "Write", "Allow", "ModeSet", "ChainScan", "TapReset",
    "Step", "TableRow", "Table", "Test",
    "BoardDecl", "TckDecl", "IncludeDecl", "GroupDecl", "DefaultModeDecl", "FinishDecl",
    "FightLimitDecl", "Program",
    "StepItem", "TestItem", "TopItem", "Comment",
]


def _span() -> SourceSpan | None:
    return field(default=None, compare=False, repr=False)  # type: ignore[return-value]


# ---- values -------------------------------------------------------------------------------

@dataclass(frozen=True, slots=True)
class Literal:
    """A number as written: `radix` 2 (`0b10XZ`), 16 (`0xA5`, `0xX5`) or 10 (`5`, `2.5`)."""

    radix: int
    digits: str
    span: SourceSpan | None = _span()

    @property
    def text(self) -> str:
        prefix = {2: "0b", 16: "0x", 10: ""}[self.radix]
        return prefix + self.digits


@dataclass(frozen=True, slots=True)
class DontCare:
    """`X`: expect anything (every bit of a group)."""

    span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class Released:
    """`Z`: drive nothing, the driver is disabled (every bit of a group)."""

    span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class Computed:
    """`computed`: the expected value comes from the board's logic model."""

    span: SourceSpan | None = _span()


Value = Union[Literal, DontCare, Released, Computed]


def _cell_text(value: Value) -> str:
    if isinstance(value, Literal):
        return value.text
    return {DontCare: "X", Released: "Z", Computed: "computed"}[type(value)]


# ---- signals ------------------------------------------------------------------------------

@dataclass(frozen=True, slots=True)
class NameSignal:
    """A net or a group, by name."""

    name: str
    span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class PinSignal:
    """A pin `REF.PORT`, vector port bits written as in BSDL: `U1.D(3)`."""

    ref: str
    port: str
    span: SourceSpan | None = _span()

    @property
    def text(self) -> str:
        return f"{self.ref}.{self.port}"


@dataclass(frozen=True, slots=True)
class SliceSignal:
    """Bits `high` down to `low` of a group (`DATA[7:4]`); one bit when `high == low` (`DATA[3]`)."""

    name: str
    high: int
    low: int
    single: bool = False  # written `DATA[3]` rather than `DATA[3:3]`
    span: SourceSpan | None = _span()


Signal = Union[NameSignal, PinSignal, SliceSignal]


# ---- statements ---------------------------------------------------------------------------

@dataclass(frozen=True, slots=True)
class Quantity:
    """A number with its unit as written, e.g. `10 MHz`, `2 ms`, `100 clocks`."""

    number: str
    unit: str
    span: SourceSpan | None = _span()
    unit_span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class Assignment:
    target: Signal
    value: Value
    span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class Drive:
    assignments: tuple[Assignment, ...]
    span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class Release:
    targets: tuple[Signal, ...]
    span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class Expect:
    assignments: tuple[Assignment, ...]
    span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class Wait:
    amount: Quantity
    span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class Read:
    """`read U3 DEVICE_ID [using IDCODE] [expect VALUE]`."""

    ref: str
    register: str
    using: str | None
    expected: Value | None
    span: SourceSpan | None = _span()
    ref_span: SourceSpan | None = _span()
    register_span: SourceSpan | None = _span()
    using_span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class Write:
    """`write U1 CFGREG [using USERCFG] VALUE`."""

    ref: str
    register: str
    using: str | None
    value: Value
    span: SourceSpan | None = _span()
    ref_span: SourceSpan | None = _span()
    register_span: SourceSpan | None = _span()
    using_span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class Allow:
    """`allow CHECK "reason"`: an intentional exception to a safety check."""

    check: str
    reason: str
    span: SourceSpan | None = _span()
    check_span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class ModeSet:
    """`U1, U4 EXTEST`: these devices hold this instruction from here on in the test."""

    refs: tuple[str, ...]
    instruction: str
    span: SourceSpan | None = _span()
    ref_spans: tuple[SourceSpan, ...] = field(default=(), compare=False, repr=False)
    instruction_span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class ChainScan:
    """`scan chain 12 bits in 0x0A5 expect 0xA50`: a raw data scan of the whole chain.

    Whatever registers the modes in force place between TDI and TDO are shifted as one: the
    value's bit 0 (its rightmost digit) is the first bit shifted in and the expected value's
    bit 0 the first bit out; bits past the chain's length come out of TDO delayed by it.
    """

    length: str  # the decimal number of bits, as written
    shifted: Literal
    expected: Value | None
    span: SourceSpan | None = _span()
    length_span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class TapReset:
    """`reset tap`: Test-Logic-Reset; every device then holds its default instruction."""

    span: SourceSpan | None = _span()


StepItem = Union[Drive, Release, Expect, Wait, Read, Write, Allow]


@dataclass(frozen=True, slots=True)
class Step:
    name: str
    items: tuple[StepItem, ...]
    span: SourceSpan | None = _span()
    name_span: SourceSpan | None = _span()
    end_span: SourceSpan | None = _span()  # the closing brace


@dataclass(frozen=True, slots=True)
class TableRow:
    """One row of cells. Cells are shared value objects without spans of their own (a large
    table repeats the same few values); `columns` gives each cell's column on the row's line."""

    drives: tuple[Value, ...]
    expects: tuple[Value, ...]
    span: SourceSpan | None = _span()
    columns: tuple[int, ...] = field(default=(), compare=False, repr=False)

    def cell_span(self, index: int) -> SourceSpan | None:
        """The span of cell `index`, counting drive cells first, then expect cells."""
        if self.span is None or index >= len(self.columns):
            return self.span
        cells = self.drives + self.expects
        width = len(_cell_text(cells[index]))
        column = self.columns[index]
        return SourceSpan(self.span.file, self.span.line, column, self.span.line, column + width)


@dataclass(frozen=True, slots=True)
class Table:
    """A vector table: drive columns `->` expect columns, one step per row."""

    name: str | None
    drive_columns: tuple[Signal, ...]
    expect_columns: tuple[Signal, ...]
    rows: tuple[TableRow, ...]
    span: SourceSpan | None = _span()
    header_span: SourceSpan | None = _span()
    end_span: SourceSpan | None = _span()


TestItem = Union[ModeSet, Step, Table, Wait, Read, Write, Allow, ChainScan, TapReset]


@dataclass(frozen=True, slots=True)
class Test:
    name: str
    title: str
    items: tuple[TestItem, ...]
    span: SourceSpan | None = _span()
    name_span: SourceSpan | None = _span()
    end_span: SourceSpan | None = _span()


# ---- header -------------------------------------------------------------------------------

@dataclass(frozen=True, slots=True)
class BoardDecl:
    path: str
    span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class TckDecl:
    frequency: Quantity
    span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class IncludeDecl:
    path: str
    span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class GroupDecl:
    """`group NAME = [MSB, ..., LSB]`: nets, pins, groups or slices, most significant first."""

    name: str
    members: tuple[Signal, ...]
    span: SourceSpan | None = _span()
    name_span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class DefaultModeDecl:
    """`default mode SAMPLE`: the instruction of devices a test does not name (BYPASS if unset)."""

    instruction: str
    span: SourceSpan | None = _span()
    instruction_span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class FinishDecl:
    """`finish in idle` or `finish in reset`: the TAP state the program ends in."""

    state: str
    span: SourceSpan | None = _span()


@dataclass(frozen=True, slots=True)
class FightLimitDecl:
    """`fight limit 1 ms`: how long a deliberately provoked short may last before a warning."""

    duration: Quantity
    span: SourceSpan | None = _span()


TopItem = Union[BoardDecl, TckDecl, IncludeDecl, GroupDecl, DefaultModeDecl, FinishDecl,
                FightLimitDecl, Test]


@dataclass(frozen=True, slots=True)
class Comment:
    """A `#` comment, kept beside the tree so that the formatter can put it back."""

    text: str  # including the leading '#', without the line end
    line: int
    column: int
    own_line: bool  # nothing but blanks before it on its line


@dataclass(frozen=True, slots=True)
class Program:
    """One parsed file: its top-level items in order, and its comments."""

    file: str
    items: tuple[TopItem, ...]
    comments: tuple[Comment, ...] = field(default=(), compare=False, repr=False)
    span: SourceSpan | None = _span()

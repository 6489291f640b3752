"""The intermediate form: a checked test program as logical steps, independent of the syntax.

The front end (`scanloom.lang`) builds it; the back end (`scanloom.backend`) schedules it into
scans. Every node is a frozen record whose source span does not take part in equality. Names
are resolved: devices by chain ref, nets by board net name, pins as `REF.PORT`.

Values are single characters: "0", "1", "Z" (released, drives only), "X" (don't care,
expectations only). Register images are bit strings in BSDL order (leftmost = most
significant bit = nearest TDI).

A step's drives and expectations are sequences of `Drive` and `Expect` records, held as
columns (`DriveColumns`, `ExpectColumns`): a step of a large board assigns tens of thousands
of bits, and the columns of targets and drivers are shared between the steps that assign the
same signals, so a step adds only its string of values. The back end and the checks read the
columns; iterating gives the records.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field, fields, is_dataclass
from itertools import repeat
from operator import attrgetter
from typing import Any, Callable, Iterable, Iterator, Self, Sequence, TypeVar, Union, overload

from .bulk_records import frozen_records
from .diagnostics import SourceSpan

__all__ = [
    "Drive",
    "Expect",
    "DriveColumns",
    "ExpectColumns",
    "RegisterWrite",
    "RegisterRead",
    "Step",
    "Wait",
    "ChainScan",
    "TapReset",
    "TestItem",
    "Test",
    "Program",
    "Override",
    "dump_ir",
    "ir_to_data",
    "COMPUTED",
]

COMPUTED = "?"  # an expectation value the virtual board computes from the board's logic


@dataclass(frozen=True, slots=True)
class Drive:
    """Drive one net or pin to "0", "1" or release it ("Z").

    `driver` is the scan pin (`REF.PORT`) the front end chose to drive the net: the user's pin
    when a pin was named, otherwise the first capable device in chain order in a driving mode.
    """

    target: str  # a net name, or REF.PORT when `is_pin`
    is_pin: bool
    value: str
    driver: str | None
    span: SourceSpan | None = field(default=None, compare=False)


@dataclass(frozen=True, slots=True)
class Expect:
    """Expect one net or pin to read "0", "1", "X", or COMPUTED from the logic model."""

    target: str
    is_pin: bool
    value: str
    span: SourceSpan | None = field(default=None, compare=False)


_Record = TypeVar("_Record", Drive, Expect)


class _Columns(Sequence[_Record]):
    """Records of one kind held as columns, one entry per bit; immutable.

    `_fields` names the holder's columns in the order of the record's fields, the span last
    (None in `spans`: no bit has a span). Made from columns (the lowering of large steps) or
    from records (`of`: small steps, records built by hand), it turns one into the other on
    first use, so either kind of reader pays only for what it reads. Equal to another holder
    or to a tuple of the same records (spans do not count, as for the records).
    """

    __slots__ = ("_columns_made", "_made")
    _record: type
    _fields: tuple[str, ...]
    _extra: int  # columns after the values, before the spans
    _getters: tuple[Callable[[Any], Any], ...]  # the record fields of `_fields`

    targets: tuple[str, ...]
    pins: tuple[bool, ...]
    values: str  # one character per bit
    spans: tuple[SourceSpan | None, ...] | None

    def __init_subclass__(cls, **kwargs: Any) -> None:
        super().__init_subclass__(**kwargs)
        cls._extra = len(cls._fields) - 3
        names = [spec.name for spec in fields(cls._record)][:len(cls._fields)]
        cls._getters = tuple(map(attrgetter, names))
        for number, name in enumerate((*cls._fields, "spans")):
            setattr(cls, name, property(_column_reader(number),
                                        doc=f"the {name} column"))

    def __init__(self, targets: Sequence[str], pins: Sequence[bool], values: str | Iterable[str],
                 *more: Any):
        """The columns of `_fields` in order, then the spans (optional)."""
        extra = self._extra
        if len(more) != extra and len(more) != extra + 1:
            raise TypeError(f"{type(self).__name__} takes the columns {', '.join(self._fields)} "
                            "and the spans")
        spans = more[extra] if len(more) > extra else None
        columns = (tuple(targets), tuple(pins), values if type(values) is str else "".join(values),
                   *map(tuple, more[:extra]), tuple(spans) if spans is not None else None)
        size = len(columns[0])
        if any(len(column) != size for column in columns[1:-1]) or \
                (columns[-1] is not None and len(columns[-1]) != size):
            raise ValueError(f"{type(self).__name__}: columns of different lengths")
        object.__setattr__(self, "_columns_made", columns)
        object.__setattr__(self, "_made", None)

    @classmethod
    def prepared(cls, *columns: Any) -> Self:
        """A holder of columns that are already what `__init__` makes of its arguments: tuples
        of one length, the values a string, the spans a tuple or None (the lowering's, made
        per step of a program of tens of thousands of steps)."""
        holder = object.__new__(cls)
        object.__setattr__(holder, "_columns_made", columns)
        object.__setattr__(holder, "_made", None)
        return holder

    @classmethod
    def of(cls, records: Iterable[_Record]) -> Self:
        """These records as a holder (the holder itself when it is one); the columns are made
        when first read."""
        if isinstance(records, cls):
            return records
        holder = object.__new__(cls)
        object.__setattr__(holder, "_columns_made", None)
        object.__setattr__(holder, "_made", records if type(records) is tuple else tuple(records))
        return holder

    def _all_columns(self) -> tuple[Any, ...]:
        """Every column of `_fields` and the spans, made from the records on first use."""
        columns = self._columns_made
        if columns is None:
            made = self._made
            assert made is not None
            taken = [tuple(map(getter, made)) for getter in self._getters]
            values = "".join(taken[2])
            if len(values) != len(made):
                raise ValueError(f"{type(self).__name__}: a value that is not one character")
            spans = tuple(map(_SPAN, made))
            columns = (taken[0], taken[1], values, *taken[3:],
                       None if spans.count(None) == len(spans) else spans)
            object.__setattr__(self, "_columns_made", columns)
        return columns

    def __setattr__(self, name: str, value: Any) -> None:
        raise AttributeError(f"{type(self).__name__} is immutable")

    def _key(self) -> tuple:
        return self._all_columns()[:-1]

    @property
    def records(self) -> tuple[_Record, ...]:
        made = self._made
        if made is None:
            *columns, spans = self._all_columns()
            made = tuple(frozen_records(self._record, len(columns[0]), *columns,
                                        spans if spans is not None else repeat(None)))
            object.__setattr__(self, "_made", made)
        return made

    def span_of(self, index: int) -> SourceSpan | None:
        spans = self.spans
        return spans[index] if spans is not None else None

    def __len__(self) -> int:
        made = self._made
        return len(made) if made is not None else len(self._all_columns()[0])

    def __iter__(self) -> Iterator[_Record]:
        return iter(self.records)

    @overload
    def __getitem__(self, index: int) -> _Record: ...

    @overload
    def __getitem__(self, index: slice) -> tuple[_Record, ...]: ...

    def __getitem__(self, index: int | slice) -> _Record | tuple[_Record, ...]:
        if isinstance(index, slice) or self._made is not None:
            return self.records[index]
        *columns, spans = self._all_columns()
        return self._record(*(column[index] for column in columns),
                            spans[index] if spans is not None else None)

    def __eq__(self, other: object) -> bool:
        if type(other) is type(self):
            return self._key() == other._key()  # type: ignore[attr-defined]
        if isinstance(other, tuple):
            return self.records == other
        return NotImplemented

    def __hash__(self) -> int:
        return hash(self._key())

    def __reduce__(self) -> tuple:
        return (type(self), self._all_columns())

    def __repr__(self) -> str:
        return f"{type(self).__name__}({self.records!r})"


def _column_reader(number: int) -> Callable[[_Columns], Any]:
    def read(holder: _Columns) -> Any:
        return holder._all_columns()[number]
    return read


class DriveColumns(_Columns[Drive]):
    """A step's drive state as columns: target, is_pin, value and driver of each bit.

    DriveColumns(targets, pins, values, drivers, spans=None)
    """

    __slots__ = ()
    _record = Drive
    _fields = ("targets", "pins", "values", "drivers")
    drivers: tuple[str | None, ...]


class ExpectColumns(_Columns[Expect]):
    """A step's expectations as columns: target, is_pin and value of each bit.

    ExpectColumns(targets, pins, values, spans=None)
    """

    __slots__ = ()
    _record = Expect
    _fields = ("targets", "pins", "values")


_SPAN = attrgetter("span")


@dataclass(frozen=True, slots=True)
class RegisterWrite:
    """Shift `bits` into a named data register of one device (BSDL order, MSB first)."""

    ref: str
    register: str
    bits: str
    span: SourceSpan | None = field(default=None, compare=False)


@dataclass(frozen=True, slots=True)
class RegisterRead:
    """Expect a named data register to capture `expected` (0/1/X per bit, BSDL order)."""

    ref: str
    register: str
    expected: str
    span: SourceSpan | None = field(default=None, compare=False)


@dataclass(frozen=True, slots=True)
class Override:
    """An intentional exception to a safety check, with the reason the listing repeats."""

    check: str
    reason: str
    span: SourceSpan | None = field(default=None, compare=False)


@dataclass(frozen=True, slots=True)
class Step:
    """One data-register scan's worth of intent.

    `modes` is the instruction in force for every chain device (chain order), after the
    compiler chose the instruction that selects any register accessed here. `drives` is the
    complete drive state in force (persisted from earlier steps, sorted by target); Z entries
    are kept so a release is visible. `expects` are this step's expectations: for boundary
    cells they are the response to this step's drives (the back end pipelines them into the
    next scan); `reads` compare what the named register captures in this step's own scan.
    `wait_clocks` are spent in Run-Test/Idle after this step's update.
    """

    name: str
    modes: tuple[tuple[str, str], ...]
    drives: DriveColumns  # records given here are kept as their columns
    expects: ExpectColumns
    writes: tuple[RegisterWrite, ...] = ()
    reads: tuple[RegisterRead, ...] = ()
    wait_clocks: int = 0
    overrides: tuple[Override, ...] = ()
    span: SourceSpan | None = field(default=None, compare=False)

    def __post_init__(self) -> None:
        if type(self.drives) is not DriveColumns:
            object.__setattr__(self, "drives", DriveColumns.of(self.drives))
        if type(self.expects) is not ExpectColumns:
            object.__setattr__(self, "expects", ExpectColumns.of(self.expects))

    def mode_of(self, ref: str) -> str:
        return dict(self.modes)[ref]


@dataclass(frozen=True, slots=True)
class Wait:
    """Clocks in Run-Test/Idle with `modes` loaded (e.g. RUNBIST needs its instruction first)."""

    clocks: int
    modes: tuple[tuple[str, str], ...]
    span: SourceSpan | None = field(default=None, compare=False)


@dataclass(frozen=True, slots=True)
class ChainScan:
    """A raw data scan of the whole chain with `modes` loaded.

    `tdi` is shifted in and `expected` compared (X: not compared); both are written most
    significant first, so the rightmost character is bit 0, the first bit shifted. Whatever
    registers the modes select are shifted as one; bits beyond the chain's length come out of
    TDO delayed by it. The registers' contents after the scan are not known images.
    """

    name: str
    modes: tuple[tuple[str, str], ...]
    tdi: str
    expected: str
    span: SourceSpan | None = field(default=None, compare=False)


@dataclass(frozen=True, slots=True)
class TapReset:
    """Test-Logic-Reset inside a test: afterwards every device holds its default instruction
    (IDCODE where it has one, else BYPASS) and no boundary image is known."""

    span: SourceSpan | None = field(default=None, compare=False)


TestItem = Union[Step, Wait, ChainScan, TapReset]


@dataclass(frozen=True, slots=True)
class Test:
    name: str
    title: str
    items: tuple[TestItem, ...]
    overrides: tuple[Override, ...] = ()
    span: SourceSpan | None = field(default=None, compare=False)

    @property
    def steps(self) -> tuple[Step, ...]:
        return tuple(item for item in self.items if isinstance(item, Step))


@dataclass(frozen=True, slots=True)
class Program:
    """A whole program. `board_path` is absolute; `tck_hz` None when not declared."""

    source: str
    board_path: str
    tck_hz: float | None
    default_instruction: str
    tests: tuple[Test, ...]
    end_state: str = "TEST_LOGIC_RESET"  # or RUN_TEST_IDLE when the program says so
    fight_limit_s: float = 1e-3
    span: SourceSpan | None = field(default=None, compare=False)
    # Where header statements were written ("board", "tck", "fight limit", ...), for checks
    # that report on them.
    header_spans: dict[str, SourceSpan] = field(default_factory=dict, compare=False)


def ir_to_data(node: Any, *, spans: bool = True) -> Any:
    """Plain JSON-able data for an IR node, field by field, with a `kind` tag."""
    if is_dataclass(node) and not isinstance(node, type):
        data: dict[str, Any] = {"kind": type(node).__name__}
        for f in fields(node):
            value = getattr(node, f.name)
            if f.name == "header_spans":
                continue
            if f.name == "span":
                if spans and value is not None:
                    data["span"] = f"{value.line}:{value.column}"
                continue
            data[f.name] = ir_to_data(value, spans=spans)
        return data
    if isinstance(node, (tuple, _Columns)):
        return [ir_to_data(item, spans=spans) for item in node]
    return node


def dump_ir(program: Program, *, spans: bool = True) -> str:
    """The deterministic JSON dump behind `scanloom check --dump-ir` and the golden tests."""
    data = ir_to_data(program, spans=spans)
    return json.dumps(data, indent=2, sort_keys=False) + "\n"

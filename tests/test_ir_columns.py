"""A step's drives and expectations held as columns behave as the tuples of records they stand for.

The IR (compiler/ir.py) defines a step's drive state and expectations as sequences of Drive
and Expect records; the columns are how they are held. Every reading a consumer can make —
length, iteration, indexing, slicing, equality (spans not counted, as for the records),
hashing, pickling, the IR dump — must give what the tuple of records gives.
"""

from __future__ import annotations

import pickle
from dataclasses import FrozenInstanceError, replace

import pytest
from hypothesis import given
from hypothesis import strategies as st

from scanloom.diagnostics import SourceSpan
from scanloom import ir
from scanloom.ir import Drive, DriveColumns, Expect, ExpectColumns, Program, Step, dump_ir

spans = st.one_of(st.none(), st.builds(lambda line, column: SourceSpan("t.loom", line, column),
                                       st.integers(1, 50), st.integers(1, 80)))
targets = st.sampled_from(["N0", "N1", "BUS", "U1.Q(0)", "U2.A", "LAMP"])
drives = st.lists(st.builds(Drive, targets, st.booleans(), st.sampled_from("01Z"),
                            st.one_of(st.none(), st.sampled_from(["U1.Q(0)", "U1.P"])), spans),
                  max_size=12)
expects = st.lists(st.builds(Expect, targets, st.booleans(), st.sampled_from("01X?"), spans),
                   max_size=12)


def _fields(record: Drive | Expect) -> tuple:
    """Every field, the span included (record equality leaves it out)."""
    return tuple(getattr(record, name) for name in record.__slots__)


@given(drives)
def test_drive_columns_give_back_the_records_field_by_field(records: list[Drive]) -> None:
    columns = DriveColumns.of(records)
    assert len(columns) == len(records)
    assert [_fields(r) for r in columns] == [_fields(r) for r in records]
    assert [_fields(columns[i]) for i in range(-len(records), len(records))] == \
        [_fields(r) for r in records + records]
    assert columns == tuple(records) and tuple(records) == columns
    assert columns.values == "".join(r.value for r in records)
    assert columns.drivers == tuple(r.driver for r in records)


@given(expects)
def test_expect_columns_give_back_the_records_field_by_field(records: list[Expect]) -> None:
    columns = ExpectColumns.of(records)
    assert [_fields(r) for r in columns] == [_fields(r) for r in records]
    assert [_fields(columns[i]) for i in range(len(records))] == [_fields(r) for r in records]
    assert columns[1:3] == tuple(records[1:3])
    assert columns == tuple(records)
    assert [columns.span_of(i) for i in range(len(records))] == [r.span for r in records]


@given(drives, st.randoms())
def test_equality_and_hash_follow_the_records_not_the_spans(records: list[Drive], rnd) -> None:
    moved = [replace(r, span=SourceSpan("other.loom", rnd.randint(1, 9), 1)) for r in records]
    a, b = DriveColumns.of(records), DriveColumns.of(moved)
    assert a == b and hash(a) == hash(b)
    if records:
        flipped = records[:-1] + [replace(records[-1], value="1" if records[-1].value != "1" else "0")]
        assert a != DriveColumns.of(flipped)
        assert a != tuple(flipped)


@given(drives, expects)
def test_columns_pickle_whole(drive_records: list[Drive], expect_records: list[Expect]) -> None:
    for columns in (DriveColumns.of(drive_records), ExpectColumns.of(expect_records)):
        again = pickle.loads(pickle.dumps(columns))
        assert type(again) is type(columns)
        assert [_fields(r) for r in again] == [_fields(r) for r in columns]


def test_columns_cannot_be_changed_and_must_be_as_long_as_each_other() -> None:
    columns = ExpectColumns(("N0",), (False,), "1")
    with pytest.raises(AttributeError):
        columns.values = "0"  # type: ignore[misc]
    with pytest.raises(ValueError):
        ExpectColumns(("N0", "N1"), (False,), "10")
    with pytest.raises(ValueError):
        DriveColumns(("N0",), (False,), "1", ("U1.Q(0)", "U1.P"))
    with pytest.raises(ValueError):  # one character per bit (found when the columns are read)
        ExpectColumns.of([Expect("N0", False, "01")]).values  # noqa: B018
    with pytest.raises(TypeError):  # a drive state needs its drivers
        DriveColumns(("N0",), (False,), "1")


def test_a_step_keeps_records_given_to_it_as_columns() -> None:
    span = SourceSpan("t.loom", 3, 5)
    step = Step("s", (("U1", "EXTEST"),), (Drive("N0", False, "1", "U1.Q(0)", span),),
                (Expect("N1", False, "0"),))
    assert type(step.drives) is DriveColumns and type(step.expects) is ExpectColumns
    assert step.drives.spans == (span,) and step.expects.spans is None
    assert step == Step("s", (("U1", "EXTEST"),), step.drives, step.expects)
    assert replace(step, expects=()).expects == ()


def test_the_ir_dump_lists_the_records() -> None:
    step = Step("s", (), (Drive("N0", False, "Z", None, SourceSpan("t.loom", 2, 7)),),
                (Expect("U1.A", True, "X"),))
    program = Program("t.loom", "b.yaml", None, "BYPASS", (ir.Test("t", "T", (step,)),))
    dumped = dump_ir(program)
    assert '"kind": "Drive"' in dumped and '"span": "2:7"' in dumped
    assert '"kind": "Expect"' in dumped and '"target": "U1.A"' in dumped
    assert "Columns" not in dumped


@given(drives)
def test_records_made_from_columns_are_the_records_the_constructor_makes(records: list[Drive]) -> None:
    # The holders make their records a column at a time (scanloom.bulk_records); the records
    # must be the constructor's: fields, equality, hashing, text, the span object, frozen.
    columns = DriveColumns.of(records)
    made = columns.records
    one_by_one = tuple(Drive(r.target, r.is_pin, r.value, r.driver, r.span) for r in records)
    assert made == one_by_one
    assert [repr(d) for d in made] == [repr(d) for d in one_by_one]
    assert [hash(d) for d in made] == [hash(d) for d in one_by_one]
    assert all(a.span is b.span for a, b in zip(made, records))
    expected = ExpectColumns(columns.targets, columns.pins, columns.values.replace("Z", "X"),
                             columns.spans).records
    assert expected == tuple(Expect(r.target, r.is_pin, r.value.replace("Z", "X"), r.span)
                             for r in records)
    for record in made[:1] + expected[:1]:
        with pytest.raises(FrozenInstanceError):
            record.value = "1"  # type: ignore[misc]


@given(drives, expects)
def test_holders_from_records_and_from_columns_read_the_same(drive_records: list[Drive],
                                                              expect_records: list[Expect]) -> None:
    # A holder made from records makes its columns when first read, one made from columns its
    # records: every reading must be the same either way.
    for kind, records in ((DriveColumns, drive_records), (ExpectColumns, expect_records)):
        lazy = kind.of(records)
        eager = kind(*[getattr(lazy, name) for name in kind._fields], lazy.spans)
        assert len(lazy) == len(eager) == len(records)
        assert lazy == eager and hash(lazy) == hash(eager)
        assert [_fields(r) for r in eager] == [_fields(r) for r in kind.of(records)]
        assert [_fields(kind.of(records)[i]) for i in range(len(records))] == \
            [_fields(eager[i]) for i in range(len(records))]
        assert [kind.of(records).span_of(i) for i in range(len(records))] == [r.span for r in records]

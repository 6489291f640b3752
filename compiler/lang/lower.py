"""Lowering: a checked plan becomes the intermediate form (`scanloom.ir`), exactly as ir.py says.

Here drives persist: within a test each step carries the complete drive state in force,
sorted by target, with Z entries kept so that a release stays visible. Every drive names the
scan pin that drives it in that step's modes — the user's pin, else the first capable device
in chain order — or None when, in these modes, no device can (a drive stated in this very
step was already checked; one that persists from an earlier step simply waits for a driver).

A step of a large board assigns tens of thousands of bits, so the plan keeps them per signal
(a column of bits and a string of values) and so does the IR (`DriveColumns`,
`ExpectColumns`). While a step assigns every bit in force — the rows of a vector table, or
steps that drive every group — the state is simply that step: the target, pin and driver
columns of its set of signals are put in target order once, and the step adds its values,
put in the same order by one prepared gather. Otherwise its bits are merged into a
dictionary of the state in force.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import chain, repeat
from operator import attrgetter, itemgetter
from typing import Sequence

from ..collector import collector_paused
from ..diagnostics import SourceSpan
from ..ir import (
    ChainScan, Drive, DriveColumns, ExpectColumns, Program, RegisterRead, RegisterWrite, Step, TapReset,
    Test, TestItem, Wait,
)
from ..models.board import Board
from .checks import (
    Assigned, BitValue, ChainScanPlan, ColumnEntries, ProgramPlan, ResetPlan, StepPlan, TestPlan, WaitPlan,
)
from .resolve import BitRef, Scope

__all__ = ["lower_program"]

Modes = tuple[tuple[str, str], ...]


def lower_program(plan: ProgramPlan, board: Board, source: str, board_path: str,
                  span: SourceSpan | None = None) -> Program:
    """The IR of a checked program; `source` and `board_path` as the caller wants them shown."""
    records = _Records(Scope(board))
    header = plan.header
    with collector_paused():
        tests = tuple(_TestLowering(records).lower(test) for test in plan.tests)
    tck = float(header.tck_hz) if header.tck_hz is not None else None
    return Program(source, board_path, tck, header.default_instruction, tests, header.end_state,
                   header.fight_limit_s, span, dict(header.spans))


class _Records:
    """The IR columns of assigned bits, made once where steps share them.

    For each set of columns a step assigns, the gather that puts their bits in target order
    and the target and pin columns in that order are made once; per set of modes, the driver
    column too. A step then adds only its values (and spans, if written in statements).
    """

    def __init__(self, scope: Scope):
        self.scope = scope
        self.drivers: dict[tuple[Modes, int], tuple[str | None, ...]] = {}
        self.layouts: dict[tuple[int, ...], _Layout] = {}
        self.layout_drivers: dict[tuple[Modes, tuple[int, ...]], tuple[str | None, ...]] = {}
        self.mode_names: dict[Modes, dict[str, str]] = {}
        self.shared: dict[tuple[str, bool, str, str | None], Drive] = {}

    def column_drivers(self, column: ColumnEntries, modes: Modes) -> tuple[str | None, ...]:
        """The scan pin chosen for each bit of a column under these modes."""
        key = (modes, id(column))
        found = self.drivers.get(key)
        if found is None:
            found = self.drivers[key] = self.scope.column_drivers(
                column.bits, modes, self.modes_by_name(modes))
        return found

    def driver(self, bit: BitRef, modes: Modes) -> str | None:
        """The scan pin that drives `bit` under these modes (the scope remembers its choices)."""
        by_name = self.mode_names.get(modes)
        return self.scope.choose_driver(bit, modes, by_name if by_name is not None
                                        else self.modes_by_name(modes))

    def modes_by_name(self, modes: Modes) -> dict[str, str]:
        by_name = self.mode_names.get(modes)
        if by_name is None:
            by_name = self.mode_names[modes] = dict(modes)
        return by_name

    def drive(self, bit: BitRef, value: str, span: SourceSpan | None, modes: Modes) -> Drive:
        """One bit's drive (the general path, bit by bit); span-less ones are shared."""
        driver = self.driver(bit, modes)
        if span is not None:
            return Drive(bit.target, bit.is_pin, value, driver, span)
        key = (bit.target, bit.is_pin, value, driver)
        found = self.shared.get(key)
        if found is None:
            found = self.shared[key] = Drive(bit.target, bit.is_pin, value, driver)
        return found

    def layout(self, assigned: Sequence[Assigned]) -> _Layout:
        """Target order and the target and pin columns of these columns' bits."""
        key = tuple(map(id, map(_COLUMN_OF, assigned)))
        found = self.layouts.get(key)
        if found is None:
            targets = [target for item in assigned for target in item.column.targets]
            order = sorted(range(len(targets)), key=targets.__getitem__)
            gather = _Gather(order)
            pins = tuple(chain.from_iterable(item.column.pins for item in assigned))
            found = self.layouts[key] = _Layout(key, gather, gather(targets), gather(pins),
                                                order == list(range(len(order))))
        return found

    def drive_state(self, assigned: Sequence[Assigned], modes: Modes) -> DriveColumns:
        """A step that assigns every bit in force, as the drive state in target order."""
        layout = self.layout(assigned)
        drivers = self.layout_drivers.get((modes, layout.key))
        if drivers is None:
            drivers = self.layout_drivers[(modes, layout.key)] = layout.gather(tuple(chain.from_iterable(
                self.column_drivers(item.column, modes) for item in assigned)))
        return DriveColumns.prepared(layout.targets, layout.pins, layout.values(assigned), drivers,
                                     layout.spans(assigned))

    def expectations(self, assigned: Sequence[Assigned]) -> ExpectColumns:
        layout = self.layout(assigned)
        return ExpectColumns.prepared(layout.targets, layout.pins, layout.values(assigned),
                                      layout.spans(assigned))


class _TestLowering:
    """The persisting drive state of one test, step by step."""

    def __init__(self, records: _Records):
        self.records = records
        self.modes: Modes | None = None  # the modes the drives in force chose drivers under
        self.state = _NO_DRIVES  # the drives in force, in target order
        # Either a whole step holds the state (`whole`: its assignments, all keys covered) ...
        self.whole: tuple[Assigned, ...] | None = None
        # ... or the dictionaries do: key (net, else pin) -> entry and Drive, in target order.
        self.entries: dict[str, BitValue] = {}
        self.drives: dict[str, Drive] = {}

    def lower(self, test: TestPlan) -> Test:
        items: list[TestItem] = []
        for item in test.items:
            if isinstance(item, WaitPlan):
                items.append(Wait(item.clocks, item.modes, item.span))
            elif isinstance(item, ChainScanPlan):
                items.append(ChainScan(item.name, item.modes, item.shifted, item.expected, item.span))
            elif isinstance(item, ResetPlan):
                items.append(TapReset(item.span))
            else:
                items.append(self.step(item))
        return Test(test.name, test.title, tuple(items), test.overrides, test.span)

    def step(self, item: StepPlan) -> Step:
        self.apply(item)
        expects = self.expectations(item.expects)
        writes = tuple(RegisterWrite(a.ref, a.register, a.bits, a.span) for a in item.writes)
        reads = tuple(RegisterRead(a.ref, a.register, a.bits, a.span) for a in item.reads)
        return Step(item.name, item.modes, self.state, expects, writes, reads, item.wait_clocks,
                    item.overrides, item.span)

    def expectations(self, assigned: tuple[Assigned, ...]) -> ExpectColumns:
        return self.records.expectations(assigned) if assigned else _NO_EXPECTS

    # ---- drives -----------------------------------------------------------------------------
    def apply(self, item: StepPlan) -> None:
        """Merge this step's drives into the state in force and refresh `self.state`."""
        assigned = item.drives
        if assigned and self.covers_all(item):
            if self.whole is not None and item.modes is self.modes and \
                    len(assigned) == len(self.whole) and all(map(Assigned.same_as, assigned, self.whole)):
                return  # the same assignments again: nothing changed
            self.whole, self.modes = assigned, item.modes
            self.entries, self.drives = {}, {}
            self.state = self.records.drive_state(assigned, item.modes)
            return
        self.to_dictionaries()
        if item.modes is not self.modes:
            self.modes = item.modes
            for entry in chain.from_iterable(a.entries() for a in assigned):
                self.entries[entry[0].key] = entry
            self.rechoose_all()
            return
        changed = False
        resort = False
        known, drives = self.entries, self.drives
        for entry in chain.from_iterable(a.entries() for a in assigned):
            key = entry[0].key
            if known.get(key) is entry:
                continue  # the same shared entry: nothing changed (a restatement's span wins)
            changed = True
            known[key] = entry
            drive = self.records.drive(entry[0], entry[1], entry[2], item.modes)
            previous = drives.get(key)
            if previous is None or previous.target != drive.target:
                resort = True
            drives[key] = drive
        if not changed:
            return
        if resort:
            self.drives = dict(sorted(drives.items(), key=_drive_target))
        self.state = DriveColumns.of(self.drives.values())

    def covers_all(self, item: StepPlan) -> bool:
        """Does this step assign every bit in force (so it alone is the new state)?"""
        if self.whole is not None:
            if len(item.drives) == len(self.whole) and \
                    all(a.column is b.column for a, b in zip(item.drives, self.whole)):
                return True
            known = {key for a in self.whole for key in a.column.keys}
        else:
            known = set(self.entries)
        keys = {key for a in item.drives for key in a.column.keys}
        return known <= keys

    def to_dictionaries(self) -> None:
        """The whole-step state becomes the dictionaries, bit by bit."""
        whole = self.whole
        if whole is None:
            return
        self.whole = None
        entries = tuple(chain.from_iterable(a.entries() for a in whole))
        self.entries = {entry[0].key: entry for entry in entries}
        self.drives = {drive_key: drive for drive_key, drive in zip(
            self.records.layout(whole).gather(tuple(e[0].key for e in entries)), self.state)}

    def rechoose_all(self) -> None:
        """New modes: every drive in force chooses its driver again."""
        assert self.modes is not None
        made = ((key, self.records.drive(entry[0], entry[1], entry[2], self.modes))
                for key, entry in self.entries.items())
        self.drives = dict(sorted(made, key=_drive_target))
        self.state = DriveColumns.of(self.drives.values())


def _drive_target(pair: tuple[str, Drive]) -> str:
    return pair[1].target


class _Gather:
    """Picks items of a sequence in a prepared order, as one builtin call."""

    def __init__(self, order: Sequence[int]):
        self.pick = itemgetter(*order) if len(order) > 1 else None
        self.single = len(order) == 1

    def __call__(self, items: Sequence) -> tuple:
        if self.pick is not None:
            return self.pick(items)
        return (items[0],) if self.single else ()


@dataclass(frozen=True, slots=True, eq=False)
class _Layout:
    """The bits of a set of columns in target order: the gather and the columns it gives."""

    key: tuple[int, ...]
    gather: _Gather
    targets: tuple[str, ...]
    pins: tuple[bool, ...]
    in_order: bool  # the bits are in target order already (a single sorted column, say)

    def values(self, assigned: Sequence[Assigned]) -> str:
        values = assigned[0].values if len(assigned) == 1 else "".join([item.values for item in assigned])
        return values if self.in_order else "".join(self.gather(values))

    def spans(self, assigned: Sequence[Assigned]) -> tuple[SourceSpan | None, ...] | None:
        if all(item.span is None for item in assigned):
            return None
        spans = tuple(chain.from_iterable(repeat(item.span, item.column.width) for item in assigned))
        return spans if self.in_order else self.gather(spans)


_NO_DRIVES = DriveColumns((), (), "", ())
_NO_EXPECTS = ExpectColumns((), (), "")
_COLUMN_OF = attrgetter("column")

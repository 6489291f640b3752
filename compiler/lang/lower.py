"""Lowering: a checked plan becomes the intermediate form (`scanloom.ir`), exactly as ir.py says.

Here drives persist: within a test each step carries the complete drive state in force,
sorted by target, with Z entries kept so that a release stays visible. Every drive names the
scan pin that drives it in that step's modes — the user's pin, else the first capable device
in chain order — or None when, in these modes, no device can (a drive stated in this very
step was already checked; one that persists from an earlier step simply waits for a driver).

Drives and expectations written in a vector table carry no span of their own (the step's span
is the row); being equal, they are shared between rows, which keeps large tables small.

A step of a large board assigns tens of thousands of bits, so the plan keeps them per signal
(a column of bits and a string of values) and the work per bit is done by builtins: while a
step assigns every bit in force — the rows of a vector table, or steps that drive every group
— the state is simply that step, signal by signal, put in target order by one prepared gather;
otherwise its bits are merged into a dictionary of the state in force.
"""

from __future__ import annotations

from itertools import chain
from operator import getitem, itemgetter
from typing import Callable, Sequence

from ..collector import collector_paused
from ..diagnostics import SourceSpan
from ..ir import (
    ChainScan, Drive, Expect, Program, RegisterRead, RegisterWrite, Step, TapReset, Test, TestItem, Wait,
    drives_of, expects_of,
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
    """The IR records of assigned bits, made once where they can be shared.

    Span-less records (table cells) are shared: per column, modes and value character, a
    tuple with one record per bit, so a cell's records are picked by builtins. Records with a
    span belong to their statement and are made for it.
    """

    def __init__(self, scope: Scope):
        self.scope = scope
        self.shared: dict[tuple, Drive | Expect] = {}
        self.drivers: dict[tuple[Modes, int], tuple[str | None, ...]] = {}
        self.drive_choices: dict[tuple[Modes, int], _Choices] = {}
        self.expect_choices: dict[int, _Choices] = {}
        self.gathers: dict[tuple[int, ...], _Gather] = {}
        self.mode_names: dict[Modes, dict[str, str]] = {}

    def column_drivers(self, column: ColumnEntries, modes: Modes) -> tuple[str | None, ...]:
        """The scan pin chosen for each bit of a column under these modes."""
        key = (modes, id(column))
        found = self.drivers.get(key)
        if found is None:
            found = self.drivers[key] = tuple(self.driver(bit, modes) for bit in column.bits)
        return found

    def driver(self, bit: BitRef, modes: Modes) -> str | None:
        """The scan pin that drives `bit` under these modes (the scope remembers its choices)."""
        by_name = self.mode_names.get(modes)
        if by_name is None:
            by_name = self.mode_names[modes] = dict(modes)
        return self.scope.choose_driver(bit, modes, by_name)

    def drives(self, assigned: Assigned, modes: Modes) -> tuple[Drive, ...]:
        column = assigned.column
        if assigned.span is not None:
            return drives_of(column.targets, column.pins, assigned.values,
                             self.column_drivers(column, modes), assigned.span)
        key = (modes, id(column))
        choices = self.drive_choices.get(key)
        if choices is None:
            drivers = self.column_drivers(column, modes)
            choices = self.drive_choices[key] = _Choices(column, lambda char: tuple(
                self.shared_drive(target, pin, char, driver)
                for target, pin, driver in zip(column.targets, column.pins, drivers)))
        return choices.pick(assigned.values)

    def expects(self, assigned: Assigned) -> tuple[Expect, ...]:
        column = assigned.column
        if assigned.span is not None:
            return expects_of(column.targets, column.pins, assigned.values, assigned.span)
        choices = self.expect_choices.get(id(column))
        if choices is None:
            choices = self.expect_choices[id(column)] = _Choices(column, lambda char: tuple(
                self.shared_expect(target, pin, char) for target, pin in zip(column.targets, column.pins)))
        return choices.pick(assigned.values)

    def drive(self, bit: BitRef, value: str, span: SourceSpan | None, modes: Modes) -> Drive:
        """One bit's drive (the general path, bit by bit)."""
        driver = self.driver(bit, modes)
        if span is not None:
            return Drive(bit.target, bit.is_pin, value, driver, span)
        return self.shared_drive(bit.target, bit.is_pin, value, driver)

    def shared_drive(self, target: str, is_pin: bool, value: str, driver: str | None) -> Drive:
        key = ("drive", target, is_pin, value, driver)
        found = self.shared.get(key)
        if found is None:
            found = self.shared.setdefault(key, Drive(target, is_pin, value, driver))
        return found  # type: ignore[return-value]

    def shared_expect(self, target: str, is_pin: bool, value: str) -> Expect:
        key = ("expect", target, is_pin, value)
        found = self.shared.get(key)
        if found is None:
            found = self.shared.setdefault(key, Expect(target, is_pin, value))
        return found  # type: ignore[return-value]

    def target_order(self, assigned: Sequence[Assigned]) -> _Gather:
        """The gather that sorts the concatenated bits of these columns by target."""
        key = tuple(id(item.column) for item in assigned)
        found = self.gathers.get(key)
        if found is None:
            targets = [target for item in assigned for target in item.column.targets]
            found = self.gathers[key] = _Gather(sorted(range(len(targets)), key=targets.__getitem__))
        return found


class _TestLowering:
    """The persisting drive state of one test, step by step."""

    def __init__(self, records: _Records):
        self.records = records
        self.modes: Modes | None = None  # the modes the drives in force chose drivers under
        self.state: tuple[Drive, ...] = ()  # the drives in force, in target order
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

    def expectations(self, assigned: tuple[Assigned, ...]) -> tuple[Expect, ...]:
        if not assigned:
            return ()
        records = self.records
        order = records.target_order(assigned)
        return order(tuple(chain.from_iterable(map(records.expects, assigned))))

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
            records = self.records
            drives = tuple(chain.from_iterable(records.drives(a, item.modes) for a in assigned))
            self.state = records.target_order(assigned)(drives)
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
        self.state = tuple(self.drives.values())

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
            self.records.target_order(whole)(tuple(e[0].key for e in entries)), self.state)}

    def rechoose_all(self) -> None:
        """New modes: every drive in force chooses its driver again."""
        assert self.modes is not None
        made = ((key, self.records.drive(entry[0], entry[1], entry[2], self.modes))
                for key, entry in self.entries.items())
        self.drives = dict(sorted(made, key=_drive_target))
        self.state = tuple(self.drives.values())


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


class _Choices(dict):
    """One column's shared IR records per value character, made on first use; a cell's
    records are then picked bit by bit by builtins."""

    def __init__(self, column: ColumnEntries, make: Callable[[str], tuple]):
        super().__init__()
        self.positions = column.positions
        self.make = make

    def __missing__(self, char: str) -> tuple:
        made = self[char] = self.make(char)
        return made

    def pick(self, values: str) -> tuple:
        return tuple(map(getitem, map(self.__getitem__, values), self.positions))

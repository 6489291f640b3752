"""Lowering: a checked plan becomes the intermediate form (`scanloom.ir`), exactly as ir.py says.

Here drives persist: within a test each step carries the complete drive state in force,
sorted by target, with Z entries kept so that a release stays visible. Every drive names the
scan pin that drives it in that step's modes — the user's pin, else the first capable device
in chain order — or None when, in these modes, no device can (a drive stated in this very
step was already checked; one that persists from an earlier step simply waits for a driver).

Drives and expectations written in a vector table carry no span of their own (the step's span
is the row); being equal, they are shared between rows, which keeps large tables small.

A vector table's step drives tens of thousands of bits, so the work per bit is done by
builtins over whole steps (dictionary updates, `map` over prepared lookups): a plan entry is
the same object in every row that gives its bit the same value, which lets identity stand for
equality, and the drive state is kept in target order so a step that changes only values needs
no sorting. While the rows of one table drive every bit in force, the state is the row itself,
cell by cell: each distinct cell becomes its drives once, and a row is their concatenation put
in target order by one prepared gather.
"""

from __future__ import annotations

from functools import partial
from itertools import chain
from operator import attrgetter, getitem, is_, is_not, itemgetter
from typing import Callable, Sequence

from ..collector import collector_paused
from ..diagnostics import SourceSpan
from ..ir import (
    ChainScan, Drive, Expect, Program, RegisterRead, RegisterWrite, Step, TapReset, Test, TestItem, Wait,
)
from ..models.board import Board
from .checks import BitValue, ChainScanPlan, ColumnEntries, ProgramPlan, ResetPlan, StepPlan, TestPlan, WaitPlan
from .resolve import Scope

__all__ = ["lower_program"]

Modes = tuple[tuple[str, str], ...]
_TARGET = attrgetter("target")
_is_none = partial(is_, None)  # `None in list` would call each record's __eq__


def lower_program(plan: ProgramPlan, board: Board, source: str, board_path: str,
                  span: SourceSpan | None = None) -> Program:
    """The IR of a checked program; `source` and `board_path` as the caller wants them shown."""
    scope = Scope(board)
    header = plan.header
    shared: dict[tuple, Drive | Expect] = {}
    with collector_paused():
        tests = tuple(_TestLowering(scope, shared).lower(test) for test in plan.tests)
    tck = float(header.tck_hz) if header.tck_hz is not None else None
    return Program(source, board_path, tck, header.default_instruction, tests, header.end_state,
                   header.fight_limit_s, span, dict(header.spans))


class _TestLowering:
    """The persisting drive state of one test, step by step."""

    def __init__(self, scope: Scope, shared: dict[tuple, Drive | Expect]):
        self.scope = scope
        self.shared = shared  # span-less drives and expectations, equal ones shared
        self.entries: dict[str, BitValue] = {}  # key (net, else pin) -> entry in force
        self.drives: dict[str, Drive] = {}  # the same keys -> Drive, kept in target order
        self.modes: Modes | None = None  # the modes self.drives chose their drivers under
        self.made: dict[Modes, dict[int, Drive]] = {}  # modes -> id(entry) -> its Drive
        self.expected: dict[int, Expect] = {}  # id(entry) -> its Expect
        self.state: tuple[Drive, ...] = ()
        # While vector-table rows hold the whole state: their keys, the gather that puts a
        # row in target order, the cells in force; the dictionaries above are then stale.
        self.layout: _Layout | None = None
        self.cells: tuple[tuple[ColumnEntries, str], ...] = ()
        # (modes, id(column)) -> value character -> the column's drives for that character
        self.column_drives: dict[tuple[Modes, int], _ColumnChoices] = {}
        self.column_expects: dict[int, _ColumnChoices] = {}
        self.expect_gathers: dict[int, _Gather] = {}

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
        expects = self.expectations(item)
        writes = tuple(RegisterWrite(a.ref, a.register, a.bits, a.span) for a in item.writes)
        reads = tuple(RegisterRead(a.ref, a.register, a.bits, a.span) for a in item.reads)
        return Step(item.name, item.modes, self.state, expects, writes, reads, item.wait_clocks,
                    item.overrides, item.span)

    # ---- drives -----------------------------------------------------------------------------
    def apply(self, item: StepPlan) -> None:
        """Merge this step's drives into the state in force and refresh `self.state`."""
        if item.drive_cells is not None and self.apply_row(item):
            return
        self.leave_layout()
        entries, keys = item.drives, item.drive_keys
        modes_changed = item.modes is not self.modes
        if not entries and not modes_changed:
            return
        if modes_changed:
            self.modes = item.modes
            self.entries.update(zip(keys, entries))
            self.rechoose_all()
            return
        known = self.entries
        count = len(known)
        changed = any(map(is_not, map(known.get, keys), entries))
        if not changed:
            return
        known.update(zip(keys, entries))
        made = self.drives_for(entries)
        drives = self.drives
        resort = len(known) != count or any(map(
            is_not, map(_TARGET, map(drives.get, keys, made)), map(_TARGET, made)))
        drives.update(zip(keys, made))
        if resort:
            self.drives = dict(sorted(drives.items(), key=_drive_target))
        self.state = tuple(self.drives.values())

    def apply_row(self, item: StepPlan) -> bool:
        """A table row that drives every bit in force becomes the state; False: it does not."""
        cells, keys = item.drive_cells, item.drive_keys
        assert cells is not None
        layout = self.layout
        if layout is None or layout.keys is not keys or item.modes is not self.modes:
            self.leave_layout()
            known = self.entries
            if len(known) > len(keys) or not keys:
                return False
            covered = set(keys)
            if len(covered) != len(keys) or not all(map(covered.__contains__, known)):
                return False
            self.modes = item.modes
            self.entries, self.drives = {}, {}
            layout = self.layout = _Layout(keys, [entry[0].target for entry in item.drives])
        elif cells == self.cells:
            return True  # the same cells again: nothing changed
        self.cells = cells
        self.state = layout.gather(tuple(chain.from_iterable(map(self.drives_of_cell, cells))))
        return True

    def drives_of_cell(self, cell: tuple[ColumnEntries, str]) -> tuple[Drive, ...]:
        column, values = cell
        key = (self.modes, id(column))
        choices = self.column_drives.get(key)  # type: ignore[arg-type]
        if choices is None:
            choices = self.column_drives[key] = _ColumnChoices(  # type: ignore[index]
                column, lambda entries: tuple(self.drives_for(entries)))
        return choices.pick(values)

    def leave_layout(self) -> None:
        """Back to the dictionaries: the row in force, bit by bit."""
        layout = self.layout
        if layout is None:
            return
        self.layout = None
        self.entries = dict(zip(layout.keys, chain.from_iterable(
            column.entries(values) for column, values in self.cells)))
        self.drives = dict(zip(layout.gather(layout.keys), self.state))
        self.cells = ()

    def rechoose_all(self) -> None:
        """New modes: every drive in force chooses its driver again."""
        entries = tuple(self.entries.values())
        made = self.drives_for(entries)
        self.drives = dict(sorted(zip(self.entries, made), key=_drive_target))
        self.state = tuple(self.drives.values())

    def drives_for(self, entries: Sequence[BitValue]) -> list[Drive]:
        """The Drive of each entry under the current modes, made once per entry."""
        assert self.modes is not None
        made = self.made.get(self.modes)
        if made is None:
            made = self.made.setdefault(self.modes, {})
        drives: list[Drive | None] = list(map(made.get, map(id, entries)))
        if any(map(_is_none, drives)):
            chosen = self.scope.driver_choices(self.modes)
            modes = dict(self.modes)
            for index, drive in enumerate(drives):
                if drive is None:
                    entry = entries[index]
                    bit, value, span = entry
                    driver = chosen[bit.target] if bit.target in chosen else \
                        self.scope.choose_driver(bit, self.modes, modes)
                    drive = made[id(entry)] = self.drive(bit.target, bit.is_pin, value, driver, span)
                    drives[index] = drive
        return drives  # type: ignore[return-value]

    def drive(self, target: str, is_pin: bool, value: str, driver: str | None,
              span: SourceSpan | None) -> Drive:
        if span is not None:
            return Drive(target, is_pin, value, driver, span)
        key = ("drive", target, is_pin, value, driver)
        found = self.shared.get(key)
        if found is None:
            found = self.shared.setdefault(key, Drive(target, is_pin, value, driver))
        return found  # type: ignore[return-value]

    # ---- expectations -----------------------------------------------------------------------
    def expectations(self, item: StepPlan) -> tuple[Expect, ...]:
        entries = item.expects
        if not entries:
            return ()
        order = item.expect_order
        if item.expect_cells is not None and order is not None:
            gather = self.expect_gathers.get(id(order))
            if gather is None:
                gather = self.expect_gathers[id(order)] = _Gather(order)
            return gather(tuple(chain.from_iterable(map(self.expects_of_cell, item.expect_cells))))
        made = self.expected
        expects: list[Expect | None] = list(map(made.get, map(id, entries)))
        if any(map(_is_none, expects)):
            for index, expect in enumerate(expects):
                if expect is None:
                    entry = entries[index]
                    expects[index] = made[id(entry)] = self.expect(*entry)
        if order is None:
            return tuple(sorted(expects, key=_TARGET))  # type: ignore[arg-type]
        return _Gather(order)(expects)  # type: ignore[arg-type]

    def expects_of_cell(self, cell: tuple[ColumnEntries, str]) -> tuple[Expect, ...]:
        column, values = cell
        choices = self.column_expects.get(id(column))
        if choices is None:
            choices = self.column_expects[id(column)] = _ColumnChoices(
                column, lambda entries: tuple(self.expect(*entry) for entry in entries))
        return choices.pick(values)

    def expect(self, bit, value: str, span: SourceSpan | None) -> Expect:  # noqa: ANN001
        if span is not None:
            return Expect(bit.target, bit.is_pin, value, span)
        key = ("expect", bit.target, bit.is_pin, value)
        found = self.shared.get(key)
        if found is None:
            found = self.shared.setdefault(key, Expect(bit.target, bit.is_pin, value))
        return found  # type: ignore[return-value]


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


class _ColumnChoices(dict):
    """One table column's IR records per value character, made on first use: a cell's
    records are then picked bit by bit by builtins."""

    def __init__(self, column: ColumnEntries, make: Callable[[tuple[BitValue, ...]], tuple]):
        super().__init__()
        self.column = column
        self.make = make

    def __missing__(self, char: str) -> tuple:
        made = self[char] = self.make(self.column[char])
        return made

    def pick(self, values: str) -> tuple:
        return tuple(map(getitem, map(self.__getitem__, values), self.column.positions))


class _Layout:
    """The bits of a vector table's rows: their keys in column order, and the gather that
    puts a row's drives in target order."""

    def __init__(self, keys: tuple[str, ...], targets: list[str]):
        self.keys = keys
        self.gather = _Gather(sorted(range(len(targets)), key=targets.__getitem__))

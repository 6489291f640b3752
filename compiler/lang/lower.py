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
no sorting.
"""

from __future__ import annotations

from functools import partial
from operator import attrgetter, is_, is_not, itemgetter
from typing import Sequence

from ..collector import collector_paused
from ..diagnostics import SourceSpan
from ..ir import (
    ChainScan, Drive, Expect, Program, RegisterRead, RegisterWrite, Step, TapReset, Test, TestItem, Wait,
)
from ..models.board import Board
from .checks import BitValue, ChainScanPlan, ProgramPlan, ResetPlan, StepPlan, TestPlan, WaitPlan
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
        made = self.expected
        expects: list[Expect | None] = list(map(made.get, map(id, entries)))
        if any(map(_is_none, expects)):
            for index, expect in enumerate(expects):
                if expect is None:
                    entry = entries[index]
                    expects[index] = made[id(entry)] = self.expect(*entry)
        if item.expect_order is None:
            return tuple(sorted(expects, key=_TARGET))  # type: ignore[arg-type]
        if len(expects) == 1:
            return (expects[0],)  # type: ignore[return-value]
        return itemgetter(*item.expect_order)(expects)

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

"""Lowering: a checked plan becomes the intermediate form (`scanloom.ir`), exactly as ir.py says.

Here drives persist: within a test each step carries the complete drive state in force,
sorted by target, with Z entries kept so that a release stays visible. Every drive names the
scan pin that drives it in that step's modes — the user's pin, else the first capable device
in chain order — or None when, in these modes, no device can (a drive stated in this very
step was already checked; one that persists from an earlier step simply waits for a driver).

Drives and expectations written in a vector table carry no span of their own (the step's span
is the row); being equal, they are shared between rows, which keeps large tables small.
"""

from __future__ import annotations

from typing import cast

from ..diagnostics import SourceSpan
from ..ir import (
    ChainScan, Drive, Expect, Program, RegisterRead, RegisterWrite, Step, TapReset, Test, TestItem, Wait,
)
from ..models.board import Board
from ..collector import collector_paused
from .checks import BitValue, ChainScanPlan, ProgramPlan, ResetPlan, StepPlan, TestPlan, WaitPlan
from .resolve import Scope

__all__ = ["lower_program"]


def lower_program(plan: ProgramPlan, board: Board, source: str, board_path: str,
                  span: SourceSpan | None = None) -> Program:
    """The IR of a checked program; `source` and `board_path` as the caller wants them shown."""
    scope = Scope(board)
    header = plan.header
    with collector_paused():
        tests = tuple(_lower_test(test, scope) for test in plan.tests)
    tck = float(header.tck_hz) if header.tck_hz is not None else None
    return Program(source, board_path, tck, header.default_instruction, tests, header.end_state,
                   header.fight_limit_s, span, dict(header.spans))


def _lower_test(test: TestPlan, scope: Scope) -> Test:
    state: dict[str, BitValue] = {}
    made: dict[str, tuple[BitValue, str | None, Drive]] = {}
    shared: dict[tuple, Drive | Expect] = {}
    modes_of: dict[tuple[tuple[str, str], ...], dict[str, str]] = {}
    items: list[TestItem] = []
    previous: tuple[tuple[tuple[str, str], ...], tuple[Drive, ...]] | None = None
    for item in test.items:
        if isinstance(item, WaitPlan):
            items.append(Wait(item.clocks, item.modes, item.span))
            continue
        if isinstance(item, ChainScanPlan):
            items.append(ChainScan(item.name, item.modes, item.shifted, item.expected, item.span))
            continue
        if isinstance(item, ResetPlan):
            items.append(TapReset(item.span))
            continue
        changed = _apply(state, item)
        if previous is not None and not changed and previous[0] is item.modes:
            drives = previous[1]
        else:
            modes = modes_of.get(item.modes)
            if modes is None:
                modes = modes_of.setdefault(item.modes, dict(item.modes))
            drives = _drive_state(state, made, shared, scope, item.modes, modes)
        previous = (item.modes, drives)
        expects = tuple(sorted((_expect(shared, bit.target, bit.is_pin, value, span)
                                for bit, value, span in item.expects), key=_target))
        writes = tuple(RegisterWrite(a.ref, a.register, a.bits, a.span) for a in item.writes)
        reads = tuple(RegisterRead(a.ref, a.register, a.bits, a.span) for a in item.reads)
        items.append(Step(item.name, item.modes, drives, expects, writes, reads, item.wait_clocks,
                          item.overrides, item.span))
    return Test(test.name, test.title, tuple(items), test.overrides, test.span)


def _apply(state: dict[str, BitValue], step: StepPlan) -> bool:
    """Merge this step's drives into the persisting state; True when anything changed."""
    changed = False
    for entry in step.drives:
        key = entry[0].key
        old = state.get(key)
        if old is None or old[0] != entry[0] or old[1] != entry[1]:
            changed = True
        state[key] = entry
    return changed


def _drive_state(state: dict[str, BitValue], made: dict[str, tuple[BitValue, str | None, Drive]],
                 shared: dict[tuple, Drive | Expect], scope: Scope,
                 modes_key: tuple[tuple[str, str], ...], modes: dict[str, str]) -> tuple[Drive, ...]:
    drives = []
    chosen = scope.driver_choices(modes_key)
    for key, entry in state.items():
        bit, value, span = entry
        found = chosen.get(bit.target, _UNCHOSEN)
        driver = (scope.choose_driver(bit, modes_key, modes) if found is _UNCHOSEN
                  else cast("str | None", found))
        cached = made.get(key)
        if cached is not None and cached[0] is entry and cached[1] == driver:
            drives.append(cached[2])
            continue
        if span is None:
            share_key = ("drive", bit.target, bit.is_pin, value, driver)
            drive = shared.get(share_key)  # type: ignore[assignment]
            if drive is None:
                drive = shared.setdefault(share_key, Drive(bit.target, bit.is_pin, value, driver))
        else:
            drive = Drive(bit.target, bit.is_pin, value, driver, span)
        made[key] = (entry, driver, drive)
        drives.append(drive)
    drives.sort(key=_target)
    return tuple(drives)


_UNCHOSEN: object = object()  # a driver not chosen yet under these modes


def _expect(shared: dict[tuple, Drive | Expect], target: str, is_pin: bool, value: str,
            span: SourceSpan | None) -> Expect:
    if span is not None:
        return Expect(target, is_pin, value, span)
    key = ("expect", target, is_pin, value)
    found = shared.get(key)
    if found is None:
        found = shared.setdefault(key, Expect(target, is_pin, value))
    return found  # type: ignore[return-value]


def _target(node: Drive | Expect) -> str:
    return node.target

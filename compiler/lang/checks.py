"""Semantic checks: every name resolved, every value fitted, every step checked against the board.

The checker walks the tests in order with the modes in force, so that each step knows which
instruction every device holds (after any register access chose its instruction) and can ask
whether some device in a driving mode can drive what it drives, and whether some device in a
capturing mode observes what it expects. It reports everything it finds and hands the lowering
a plan: per step, the modes and the drives and expectations resolved to single nets or pins.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from itertools import chain, compress, repeat
from operator import attrgetter, getitem, is_, not_
from typing import Sequence, Union

from ..diagnostics import Diagnostics, SourceSpan, nearest
from ..ir import Override
from ..models.board import Board
from ..models.device import DeviceModel
from ..safety_checks import CHECKS as SAFETY_CHECKS
from . import ast
from ..collector import collector_paused
from .includes import ProgramFiles
from .resolve import BitRef, Scope, drives_core, drives_pins, observes_pins
from .header import Header, read_header
from .values import DRIVE, EXPECT, READ, WRITE, time_in_seconds, value_bits

__all__ = [
    "OVERRIDABLE_CHECKS", "MAX_WAIT_CLOCKS", "Header", "read_header", "BitValue", "RegisterAccess", "StepPlan",
    "ChainScanPlan", "ResetPlan", "TestItemPlan",
    "WaitPlan", "TestPlan", "ColumnEntries", "Assigned", "ProgramPlan", "check_program", "signal_text",
]

# Safety checks a test or step may knowingly override with `allow NAME "reason"`.
OVERRIDABLE_CHECKS = tuple(SAFETY_CHECKS)  # the pre-hardware checks a program may allow
# The longest single wait: 10 s at 10 MHz. Every clock becomes a bit of each cycle stream and a
# row of the cycle table, so a wait of hours would exhaust memory instead of saying so.
MAX_WAIT_CLOCKS = 100_000_000

# One resolved bit of a drive or an expectation: (bit, value character, where it was written).
BitValue = tuple[BitRef, str, "SourceSpan | None"]


@dataclass(frozen=True, slots=True)
class RegisterAccess:
    ref: str
    register: str
    instruction: str
    bits: str
    span: SourceSpan | None


@dataclass(frozen=True, slots=True, eq=False)
class Assigned:
    """One signal's bits given values by one statement or one table cell.

    Kept as the signal's column and a string of value characters, not bit by bit: a step of
    a large board assigns tens of thousands of bits, and the lowering works on whole columns.
    """

    column: ColumnEntries
    values: str  # one character per bit of column.bits, most significant first
    span: SourceSpan | None  # where it was written; None for table cells (the row has one)

    def entries(self) -> tuple[BitValue, ...]:
        """Bit by bit; span-less entries are the column's shared ones."""
        if self.span is None:
            return self.column.entries(self.values)
        return tuple(zip(self.column.bits, self.values, repeat(self.span)))

    def same_as(self, other: "Assigned") -> bool:
        return self.column is other.column and self.values == other.values and self.span == other.span


@dataclass(frozen=True, slots=True)
class StepPlan:
    name: str
    modes: tuple[tuple[str, str], ...]
    drives: tuple[Assigned, ...]  # stated in this step, in the order written; no bit twice
    expects: tuple[Assigned, ...]
    writes: tuple[RegisterAccess, ...]
    reads: tuple[RegisterAccess, ...]
    wait_clocks: int
    overrides: tuple[Override, ...]
    span: SourceSpan | None


@dataclass(frozen=True, slots=True)
class WaitPlan:
    clocks: int
    modes: tuple[tuple[str, str], ...]
    span: SourceSpan | None


@dataclass(frozen=True, slots=True)
class ChainScanPlan:
    """A raw scan of the whole chain: bit strings most significant first (rightmost = bit 0)."""

    name: str
    modes: tuple[tuple[str, str], ...]
    shifted: str
    expected: str
    span: SourceSpan | None


@dataclass(frozen=True, slots=True)
class ResetPlan:
    span: SourceSpan | None


TestItemPlan = Union[StepPlan, WaitPlan, ChainScanPlan, ResetPlan]


@dataclass(frozen=True, slots=True)
class TestPlan:
    name: str
    title: str
    items: tuple[TestItemPlan, ...]
    overrides: tuple[Override, ...]
    span: SourceSpan | None


@dataclass(frozen=True, slots=True)
class ProgramPlan:
    header: Header
    tests: tuple[TestPlan, ...]


def signal_text(signal: ast.Signal) -> str:
    if isinstance(signal, ast.NameSignal):
        return signal.name
    if isinstance(signal, ast.PinSignal):
        return signal.text
    if signal.single:
        return f"{signal.name}[{signal.high}]"
    return f"{signal.name}[{signal.high}:{signal.low}]"


# ---- the program --------------------------------------------------------------------------

def check_program(files: ProgramFiles, header: Header, board: Board,
                  diagnostics: Diagnostics) -> ProgramPlan:
    """Check every test against the board and return the plan the lowering turns into IR."""
    with collector_paused():
        return _check_program(files, header, board, diagnostics)


def _check_program(files: ProgramFiles, header: Header, board: Board,
                   diagnostics: Diagnostics) -> ProgramPlan:
    scope = Scope(board)
    scope.declare_groups((i for i in files.items if isinstance(i, ast.GroupDecl)), diagnostics)
    default = _check_default(header, scope, diagnostics)
    tests: list[TestPlan] = []
    names: dict[str, ast.Test] = {}
    values: dict[tuple[ast.Value, int, str], str] = {}  # successful value fits, shared by tests
    columns: dict[int, ColumnEntries] = {}  # id(bits) -> their column, shared by tests
    for item in files.items:
        if not isinstance(item, ast.Test):
            continue
        if item.name in names:
            diagnostics.error(f"test {item.name} is declared twice", item.name_span,
                              hint=f"the first is at {names[item.name].name_span}")
        names.setdefault(item.name, item)
        tests.append(_TestChecker(scope, header, default, diagnostics, values, columns).check(item))
    return ProgramPlan(header, tuple(tests))


def _check_default(header: Header, scope: Scope, diagnostics: Diagnostics) -> str:
    name = header.default_instruction
    lacking = []
    for ref, entry in scope.devices.items():
        device = entry.device
        if name not in device.instructions:
            lacking.append(ref)
        elif name in device.private:
            diagnostics.error(f"{name} is a private instruction of {ref} ({device.entity})",
                              header.default_span)
            return "BYPASS"
    if lacking:
        pool = set().union(*(set(e.device.public_instructions) for e in scope.devices.values()))
        diagnostics.error(f"the default instruction {name} is not an instruction of "
                          f"{', '.join(lacking)}", header.default_span,
                          hint="the default applies to every device a test does not name",
                          suggestions=nearest(name, pool))
        return "BYPASS"
    return name


class _TestChecker:
    """Walks one test with the modes in force; collects the plan of its steps."""

    def __init__(self, scope: Scope, header: Header, default: str, diagnostics: Diagnostics,
                 values: dict[tuple[ast.Value, int, str], str], columns: dict[int, ColumnEntries]):
        self.scope = scope
        self.header = header
        self.diag = diagnostics
        self.modes: dict[str, str] = {ref: default for ref in scope.devices}
        self.items: list[TestItemPlan] = []
        self.step_names: dict[str, SourceSpan | None] = {}
        self.mode_keys: dict[tuple[tuple[str, str], ...], tuple[tuple[str, str], ...]] = {}
        self.unused_modes: list[ast.ModeSet] = []
        self.rows = 0  # rows of unnamed tables so far, numbered across the test
        self.values: dict[tuple[ast.Value, int, str], str] = values
        self.columns = columns
        self.coverage: dict[tuple, tuple[int, ...]] = {}  # undriven / unobserved positions
        self.distinct: dict[tuple[int, ...], bool] = {}  # columns that name no wire twice
        self.last_modes: dict[str, str] | None = None  # modes of the previous step
        self.state: dict[str, str] = {}  # net or pin -> value driven so far in this test

    def modes_key(self, modes: dict[str, str]) -> tuple[tuple[str, str], ...]:
        key = tuple(modes.items())
        return self.mode_keys.setdefault(key, key)

    def check(self, test: ast.Test) -> TestPlan:
        overrides: list[Override] = []
        # Only tests that use CLAMP need the drive history that clamped_changes keeps.
        self.clamps = "CLAMP" in self.modes.values() or any(
            isinstance(i, ast.ModeSet) and i.instruction.upper() == "CLAMP" for i in test.items)
        for item in test.items:
            if isinstance(item, ast.ModeSet):
                self.mode_set(item)
            elif isinstance(item, ast.Step):
                self.name_step(item.name, item.name_span)
                self.step(item.name, item.items, item.span)
            elif isinstance(item, ast.Table):
                self.table(item)
            elif isinstance(item, ast.Wait):
                clocks = self.wait_clocks(item)
                if clocks is not None:
                    self.items.append(WaitPlan(clocks, self.modes_key(self.modes), item.span))
                    self.unused_modes.clear()
            elif isinstance(item, (ast.Read, ast.Write)):
                name = self.access_step_name(item)
                self.step(name, (item,), item.span)
            elif isinstance(item, ast.Allow):
                override = self.allow(item)
                if override is not None:
                    overrides.append(override)
            elif isinstance(item, ast.ChainScan):
                self.chain_scan(item)
            elif isinstance(item, ast.TapReset):
                self.tap_reset(item)
            else:  # pragma: no cover - the parser builds only the kinds above
                raise TypeError(f"unexpected test item {item!r}")
        for mode_set in self.unused_modes:
            self.diag.warning(f"setting {', '.join(mode_set.refs)} to {mode_set.instruction} has "
                              f"no effect: no step follows in test {test.name}", mode_set.span)
        if not self.items:
            self.diag.warning(f"test {test.name} has no steps", test.name_span)
        return TestPlan(test.name, test.title, tuple(self.items), tuple(overrides), test.span)

    # ---- modes ------------------------------------------------------------------------------
    def mode_set(self, item: ast.ModeSet) -> None:
        seen: set[str] = set()
        for ref, span in zip(item.refs, item.ref_spans):
            if ref in seen:
                self.diag.error(f"{ref} is named twice in one mode line", span)
                continue
            seen.add(ref)
            if not self.scope.device_ref(ref, span, self.diag):
                continue
            instruction = self.scope.instruction(ref, item.instruction, item.instruction_span, self.diag)
            if instruction is not None:
                self.modes[ref] = instruction
        self.unused_modes.append(item)

    # ---- names ------------------------------------------------------------------------------
    def name_step(self, name: str, span: SourceSpan | None) -> str:
        if name in self.step_names:
            self.diag.error(f"step {name} is declared twice in this test", span,
                            hint=f"the first is at {self.step_names[name]}")
        self.step_names.setdefault(name, span)
        return name

    def access_step_name(self, item: ast.Read | ast.Write) -> str:
        base = f"{'read' if isinstance(item, ast.Read) else 'write'}_{item.ref}_{item.register}"
        name, count = base, 1
        while name in self.step_names:
            count += 1
            name = f"{base}_{count}"
        self.step_names[name] = item.span
        return name

    # ---- raw chain scans and resets ---------------------------------------------------------
    def chain_scan(self, item: ast.ChainScan) -> None:
        """A raw data scan in the modes in force; its values must fit its stated length."""
        name = self.name_step(self.chain_scan_name(), item.span)
        length = int(item.length) if item.length.isdigit() else 0
        if length < 1:
            self.diag.error(f"a chain scan needs a whole number of bits, not {item.length}",
                            item.length_span, expected="a decimal number of bits, at least 1")
            return
        shifted = value_bits(item.shifted, length, WRITE, "the chain scan", self.diag)
        expected = ("X" * length if item.expected is None else
                    value_bits(item.expected, length, READ, "the chain scan", self.diag))
        if shifted is None or expected is None:
            return
        chain = sum(self.selected_length(ref, mode) for ref, mode in self.modes.items())
        if length < chain:
            self.diag.warning(f"the chain scan shifts {length} bits, but the chain is {chain} bits "
                              "long in these modes: registers keep part of what they captured",
                              item.length_span)
        driving = [ref for ref, mode in self.modes.items()
                   if drives_pins(self.scope.devices[ref].device, mode) or drives_core(mode)]
        if driving:
            self.diag.warning(f"{', '.join(driving)} drive{'s' * (len(driving) == 1)} pins from the "
                              "boundary register: after this scan they drive what it leaves there",
                              item.span, hint="scan the chain in SAMPLE, BYPASS or IDCODE, or preload "
                                              "with a step afterwards")
        self.items.append(ChainScanPlan(name, self.modes_key(self.modes), shifted, expected, item.span))
        self.unused_modes.clear()

    def chain_scan_name(self) -> str:
        name, count = "chain_scan", 1
        while name in self.step_names:
            count += 1
            name = f"chain_scan_{count}"
        return name

    def selected_length(self, ref: str, mode: str) -> int:
        device = self.scope.devices[ref].device
        register = device.selects.get(mode, "BYPASS")
        if register == "BOUNDARY":
            return device.boundary_length
        if register == "DEVICE_ID":
            return device.registers.get(register, 32)
        return device.registers.get(register, 1)

    def tap_reset(self, item: ast.TapReset) -> None:
        """Test-Logic-Reset: IDCODE in force where the device has it, else BYPASS (IEEE 1149.1)."""
        self.items.append(ResetPlan(item.span))
        for ref, entry in self.scope.devices.items():
            self.modes[ref] = "IDCODE" if "IDCODE" in entry.device.instructions else "BYPASS"

    # ---- waits and overrides ----------------------------------------------------------------
    def wait_clocks(self, item: ast.Wait) -> int | None:
        amount = time_in_seconds(item.amount, self.diag, allow_clocks=True)
        if amount is None:
            return None
        unit, number = amount
        if unit == "clocks":
            clocks = int(number)
        elif self.header.tck_hz is None:
            self.diag.error(f"wait {item.amount.number} {item.amount.unit} needs the TCK frequency",
                            item.amount.span, hint="declare it in the header, e.g. tck 10 MHz, "
                                                   "or wait a number of clocks")
            return None
        else:
            clocks = math.ceil(number * self.header.tck_hz)  # whole clocks, rounding up
        if clocks > MAX_WAIT_CLOCKS:
            length = "" if unit == "clocks" else f" ({clocks:,} clocks at the declared TCK)"
            self.diag.error(f"wait {item.amount.number} {item.amount.unit} is too long{length}: "
                            f"one wait lasts at most {MAX_WAIT_CLOCKS:,} clocks", item.amount.span,
                            hint="every clock is a row of the cycle table and a bit of each stream")
            return None
        return clocks

    def allow(self, item: ast.Allow) -> Override | None:
        if item.check not in OVERRIDABLE_CHECKS:
            self.diag.error(f"unknown safety check {item.check}", item.check_span,
                            expected=", ".join(OVERRIDABLE_CHECKS),
                            suggestions=nearest(item.check, OVERRIDABLE_CHECKS))
            return None
        if not item.reason.strip():
            self.diag.error(f"allow {item.check} needs a reason", item.span,
                            hint="say why the exception is safe; the listing repeats it")
            return None
        return Override(item.check, item.reason, item.span)

    # ---- steps ------------------------------------------------------------------------------
    def step(self, name: str, statements: Sequence[ast.StepItem], span: SourceSpan | None) -> None:
        drives: list[tuple[ast.Signal, Assigned]] = []
        expects: list[tuple[ast.Signal, Assigned]] = []
        accesses: list[tuple[ast.Read | ast.Write, str]] = []
        wait_clocks = 0
        overrides: list[Override] = []
        for statement in statements:
            if isinstance(statement, ast.Drive):
                for assignment in statement.assignments:
                    self.assign(assignment.target, assignment.value, DRIVE, drives)
            elif isinstance(statement, ast.Release):
                for target in statement.targets:
                    self.assign(target, ast.Released(target.span), DRIVE, drives)
            elif isinstance(statement, ast.Expect):
                for assignment in statement.assignments:
                    self.assign(assignment.target, assignment.value, EXPECT, expects)
            elif isinstance(statement, ast.Wait):
                clocks = self.wait_clocks(statement)
                wait_clocks += clocks or 0
            elif isinstance(statement, (ast.Read, ast.Write)):
                if self.scope.device_ref(statement.ref, statement.ref_span, self.diag):
                    accesses.append((statement, self.modes[statement.ref]))
            elif isinstance(statement, ast.Allow):
                override = self.allow(statement)
                if override is not None:
                    overrides.append(override)
            else:  # pragma: no cover
                raise TypeError(f"unexpected step item {statement!r}")
        modes = dict(self.modes)
        writes, reads = self.register_accesses(accesses, modes)
        key = self.modes_key(modes)
        step_drives = self.no_conflicts(drives, "drives", name)
        step_expects = self.no_conflicts(expects, "expects", name)
        for signal, assigned in drives:
            self.check_drivable(signal, assigned, key, modes)
        for signal, assigned in expects:
            self.check_observed(signal, assigned, modes, key)
        self.clamped_changes(drives, key, modes)
        self.items.append(StepPlan(name, key, step_drives, step_expects, tuple(writes),
                                   tuple(reads), wait_clocks, tuple(overrides), span))
        self.unused_modes.clear()

    def clamped_changes(self, drives: Sequence[tuple[ast.Signal, Assigned]],
                        key: tuple[tuple[str, str], ...], modes: dict[str, str],
                        where: SourceSpan | None = None) -> None:
        """Warn when a drive changes on a device that stays in CLAMP (IEEE 1149.1 CLAMP).

        CLAMP selects the bypass register, so no scan updates the boundary register while the
        device stays in it: its pins keep the image they had when it entered CLAMP.
        """
        if not self.clamps:
            return
        previous = self.last_modes
        self.last_modes = modes
        warned: set[str] = set()
        for signal, assigned in drives:
            for bit, value in zip(assigned.column.bits, assigned.values):
                changed = self.state.get(bit.key) != value
                self.state[bit.key] = value
                if not changed or previous is None or "CLAMP" not in modes.values():
                    continue
                driver = self.scope.choose_driver(bit, key, modes)
                ref = driver.split(".", 1)[0] if driver else None
                if ref is None or modes[ref] != "CLAMP" or previous.get(ref) != "CLAMP" or \
                        ref in warned:
                    continue
                warned.add(ref)
                self.diag.warning(f"{ref} stays in CLAMP: the new value of {bit.target} does not "
                                  f"reach the pin", signal.span or where,
                                  hint=f"CLAMP selects the bypass register, so the pins keep the "
                                       f"image {ref} entered CLAMP with; leave CLAMP to change it")

    def assign(self, target: ast.Signal, value: ast.Value, role: str,
               into: list[tuple[ast.Signal, Assigned]]) -> None:
        bits = self.scope.signal(target, self.diag)
        if bits is None:
            return
        memo_key = (value, len(bits), role)
        values = self.values.get(memo_key)
        if values is None:
            values = value_bits(value, len(bits), role, signal_text(target), self.diag)
            if values is None:
                return
            self.values[memo_key] = values
        span = value.span if value.span is not None else target.span
        into.append((target, Assigned(self.column(bits), values, span)))

    def column(self, bits: tuple[BitRef, ...]) -> ColumnEntries:
        """The column of a signal's bits, one per bits tuple (signals resolve to shared tuples)."""
        found = self.columns.get(id(bits))
        if found is None:
            found = self.columns[id(bits)] = ColumnEntries(bits)  # it keeps `bits` alive
        return found

    def no_conflicts(self, assigned: Sequence[tuple[ast.Signal, Assigned]], what: str,
                     step: str, where: SourceSpan | None = None) -> tuple[Assigned, ...]:
        """Two different values for one net in one step is an error; repeats are merged, and
        an expected value takes the place of a don't-care (X) on the same wire."""
        layout = tuple(id(item.column) for _, item in assigned)  # columns live in self.columns
        distinct = self.distinct.get(layout)
        if distinct is None:
            keys = list(chain.from_iterable(item.column.keys for _, item in assigned))
            distinct = self.distinct[layout] = len(set(keys)) == len(keys)
        if distinct:
            return tuple(item for _, item in assigned)
        seen: dict[str, BitValue] = {}
        place: dict[str, int] = {}  # key -> its position in `flat`
        flat: list[Assigned] = []
        for _signal, item in assigned:
            for entry in item.entries():
                bit, value, span = entry
                previous = seen.get(bit.key)
                if previous is None:
                    seen[bit.key] = entry
                    place[bit.key] = len(flat)
                    flat.append(Assigned(self.column((bit,)), value, span))
                elif previous[1] != value and what == "expects" and "X" in (previous[1], value):
                    if previous[1] == "X":
                        seen[bit.key] = entry
                        flat[place[bit.key]] = Assigned(self.column((bit,)), value, span)
                elif previous[1] != value:
                    verb = "driven" if what == "drives" else "expected"
                    self.diag.error(f"{bit.key} is {verb} to two different values in step {step}: "
                                    f"{previous[1]} and {value}", span or where,
                                    hint=f"the other value is written at {previous[2]}"
                                    if previous[2] is not None else None)
        return tuple(flat)

    def check_drivable(self, signal: ast.Signal, assigned: Assigned,
                       key: tuple[tuple[str, str], ...], modes: dict[str, str]) -> bool:
        """Report the bits no device can drive (a release needs no driver); True if any."""
        bits, values = assigned.column.bits, assigned.values
        failing = [bits[i] for i in self.undriven(assigned.column, key, modes) if values[i] != "Z"]
        if not failing:
            return False
        self.diag.error(self.cannot_drive_message(signal, failing, assigned.column.width), signal.span,
                        hint=self.drive_hint(failing[0], modes), code="not_driving_mode")
        return True

    def undriven(self, column: ColumnEntries, key: tuple[tuple[str, str], ...],
                 modes: dict[str, str]) -> tuple[int, ...]:
        """Positions of the column's bits no device drives in these modes (once per column
        and modes: a program drives the same groups step after step)."""
        memo_key = ("drive", key, id(column))
        found = self.coverage.get(memo_key)
        if found is None:
            drivers = self.scope.column_drivers(column.bits, key, modes, column.targets, column.pins)
            undriven = map(is_, drivers, repeat(None))
            found = self.coverage[memo_key] = tuple(compress(column.positions, undriven))
        return found

    def unobserved(self, column: ColumnEntries, key: tuple[tuple[str, str], ...],
                   modes: dict[str, str]) -> tuple[int, ...]:
        """Positions of the column's bits no device captures in these modes."""
        memo_key = ("observe", key, id(column))
        found = self.coverage.get(memo_key)
        if found is None:
            seen = self.scope.observed_by_any(column.bits, modes, column.targets, column.pins)
            found = self.coverage[memo_key] = tuple(compress(column.positions, map(not_, seen)))
        return found

    def cannot_drive_message(self, signal: ast.Signal, failing: list[BitRef], width: int) -> str:
        names = _names(failing)
        of = f" ({len(failing)} of {width} bits of {signal_text(signal)})" if width > 1 else ""
        if len(failing) == 1 and failing[0].is_pin:
            return f"{failing[0].target} cannot be driven in this step"
        return f"no device in a driving mode can drive {names}{of}"

    def drive_hint(self, bit: BitRef, modes: dict[str, str]) -> str:
        capable = self.scope.could_drive(bit)
        if bit.is_pin and not capable:
            ref = bit.target.split(".", 1)[0]
            if modes[ref] == "INTEST":
                return f"{bit.target} has no input cell whose core side INTEST drives"
            return f"{bit.target} has no boundary cell that can drive it"
        if not capable:
            return f"no scan device on {bit.target} has an output cell"
        where = ", ".join(f"{ref} (in {modes[ref]})" for ref in capable)
        return f"{where} can drive it in EXTEST or CLAMP"

    def check_observed(self, signal: ast.Signal, assigned: Assigned, modes: dict[str, str],
                       key: tuple[tuple[str, str], ...]) -> bool:
        """Report expectations (not X) no device captures in these modes; True if any."""
        failing: list[BitRef] = []
        bypassed: list[BitRef] = []
        bits, values = assigned.column.bits, assigned.values
        for index in self.unobserved(assigned.column, key, modes):
            bit = bits[index]
            if values[index] == "X":
                continue
            if bit.is_pin and modes[bit.target.split(".", 1)[0]] == "BYPASS" and \
                    self.scope.could_observe(bit):
                bypassed.append(bit)
            else:
                failing.append(bit)
        if bypassed:
            ref = bypassed[0].target.split(".", 1)[0]
            self.diag.warning(f"the expectation on {_names(bypassed)} will be ignored: {ref} is in "
                              f"BYPASS", signal.span,
                              hint=f"set {ref} to SAMPLE or another instruction that selects its "
                                   f"boundary register")
        if not failing:
            return bool(bypassed)
        bit = failing[0]
        if bit.is_pin and len(failing) == 1 and len(bits) == 1:
            ref = bit.target.split(".", 1)[0]
            device = self.scope.devices[ref].device
            if not self.scope.could_observe(bit):
                message = f"{bit.target} has no boundary cell that captures it"
            elif not observes_pins(device, modes[ref]):
                message = (f"{ref} is in {modes[ref]}, which does not capture pins: the expectation "
                           f"on {bit.target} cannot be checked")
            else:
                message = f"{bit.target} is not captured by {ref} in {modes[ref]}"
            self.diag.error(message, signal.span, code="cannot_capture")
            return True
        of = f" ({len(failing)} of {len(bits)} bits of {signal_text(signal)})" if len(bits) > 1 else ""
        could = self.scope.could_observe(bit)
        if could:
            hint = ", ".join(f"{ref} (in {modes[ref]})" for ref in could) + \
                " could capture it in SAMPLE or EXTEST"
        else:
            hint = f"no scan device on {bit.target} has a cell that captures it"
        self.diag.error(f"no device in a capturing mode observes {_names(failing)}{of}",
                        signal.span, hint=hint, code="cannot_capture")
        return True

    # ---- register access --------------------------------------------------------------------
    def register_accesses(self, accesses: list[tuple[ast.Read | ast.Write, str]],
                          modes: dict[str, str]) -> tuple[list[RegisterAccess], list[RegisterAccess]]:
        writes: list[RegisterAccess] = []
        reads: list[RegisterAccess] = []
        chosen: dict[str, tuple[str, ast.Read | ast.Write]] = {}
        for statement, mode in accesses:
            ref = statement.ref
            register = self.scope.register(ref, statement.register, statement.register_span, self.diag)
            if register is None:
                continue
            instruction = self.select_instruction(statement, register, mode)
            if instruction is None:
                continue
            if ref in chosen and chosen[ref][0] != instruction:
                self.diag.error(f"{ref} cannot hold {chosen[ref][0]} and {instruction} in one step",
                                statement.span, hint="access these registers in separate steps")
                continue
            chosen[ref] = (instruction, statement)
            modes[ref] = instruction
            device = self.scope.devices[ref].device
            length = device.registers[register]
            label = f"{ref} {register}"
            if isinstance(statement, ast.Write):
                bits = value_bits(statement.value, length, WRITE, label, self.diag)
                if bits is not None:
                    writes.append(RegisterAccess(ref, register, instruction, bits, statement.span))
                continue
            if statement.expected is None:
                bits = self.default_read(statement, register, instruction, length)
            else:
                bits = value_bits(statement.expected, length, READ, label, self.diag)
            if bits is not None:
                reads.append(RegisterAccess(ref, register, instruction, bits, statement.span))
        return writes, reads

    def select_instruction(self, statement: ast.Read | ast.Write, register: str,
                           mode: str) -> str | None:
        """The instruction that selects `register`: the user's, the mode in force, or the BSDL's."""
        ref = statement.ref
        device = self.scope.devices[ref].device
        if statement.using is not None:
            instruction = self.scope.instruction(ref, statement.using, statement.using_span, self.diag)
            if instruction is None:
                return None
            selected = device.selects.get(instruction)
            if selected != register:
                verb = "reads" if isinstance(statement, ast.Read) else "writes"
                self.diag.error(f"{instruction} selects {selected}, not {register}: this {verb[:-1]} "
                                f"of {ref} {register} cannot go through it", statement.using_span,
                                suggestions=self.selecting(device, register))
                return None
            return instruction
        if device.selects.get(mode) == register:
            return mode
        candidates = self.selecting(device, register)
        if not candidates:
            self.diag.error(f"no public instruction of {ref} ({device.entity}) selects {register}",
                            statement.register_span)
            return None
        preferred = {"DEVICE_ID": ("IDCODE",), "BYPASS": ("BYPASS",),
                     "BOUNDARY": ("SAMPLE", "PRELOAD") if isinstance(statement, ast.Read)
                     else ("PRELOAD", "SAMPLE")}.get(register, ())
        for name in preferred:
            if name in candidates:
                return name
        return candidates[0]

    @staticmethod
    def selecting(device: DeviceModel, register: str) -> tuple[str, ...]:
        return tuple(name for name in device.public_instructions
                     if device.selects.get(name) == register)

    def default_read(self, statement: ast.Read, register: str, instruction: str,
                     length: int) -> str | None:
        device = self.scope.devices[statement.ref].device
        pattern = None
        if register == "DEVICE_ID":
            pattern = device.usercode if instruction == "USERCODE" else device.idcode
        elif register == "BYPASS":
            pattern = "0"  # IEEE 1149.1: the bypass register captures 0
        if pattern is None or len(pattern) != length:
            self.diag.error(f"read {statement.ref} {register} needs an expected value", statement.span,
                            hint="add expect 0b... (X for bits that do not matter)")
            return None
        return pattern

    # ---- tables -----------------------------------------------------------------------------
    def table(self, table: ast.Table) -> None:
        if not table.drive_columns and not table.expect_columns:
            self.diag.error("the table has no columns", table.header_span,
                            expected="drive columns, '->', expect columns")
            return
        drive_cols = [self.scope.signal(s, self.diag) for s in table.drive_columns]
        expect_cols = [self.scope.signal(s, self.diag) for s in table.expect_columns]
        modes = dict(self.modes)
        key = self.modes_key(modes)
        if any(c is None for c in drive_cols) or any(c is None for c in expect_cols):
            return
        # Columns already reported as not drivable or not captured: once per table, at the
        # header, for the first row whose values need it (a release or an X needs nothing).
        reported: set[int] = set()
        columns = [self.column(bits) for bits in chain(drive_cols, expect_cols)]  # type: ignore[arg-type]
        n_drive, n_expect = len(drive_cols), len(expect_cols)
        for number, row in enumerate(table.rows, start=1):
            if table.name is None:
                self.rows += 1
                name = self.name_step(f"row{self.rows}", row.span)
            else:
                name = self.name_step(f"{table.name}_{number}", row.span)
            if len(row.drives) != n_drive or len(row.expects) != n_expect:
                self.diag.error(f"the row has {len(row.drives)} drive and {len(row.expects)} expect "
                                f"cells; the table has {n_drive} and {n_expect} columns", row.span)
                continue
            drives = self.row_cells(row, row.drives, columns, table.drive_columns, DRIVE, 0)
            expects = self.row_cells(row, row.expects, columns, table.expect_columns, EXPECT, n_drive)
            if drives is None or expects is None:
                continue
            for index, (signal, assigned) in enumerate(drives):
                if index not in reported and self.check_drivable(signal, assigned, key, modes):
                    reported.add(index)
            for index, (signal, assigned) in enumerate(expects, start=n_drive):
                if index not in reported and self.check_observed(signal, assigned, modes, key):
                    reported.add(index)
            row_drives = self.no_conflicts(drives, "drives", name, row.span)
            row_expects = self.no_conflicts(expects, "expects", name, row.span)
            self.clamped_changes(drives, key, modes, row.span)
            self.items.append(StepPlan(name, key, row_drives, row_expects, (), (), 0, (), row.span))
        if table.rows:
            self.unused_modes.clear()

    def row_cells(self, row: ast.TableRow, cells: Sequence[ast.Value], columns: list[ColumnEntries],
                  signals: Sequence[ast.Signal], role: str,
                  offset: int) -> list[tuple[ast.Signal, Assigned]] | None:
        """Each cell as assigned bits (equal values fitted once per width and role, as
        statements' values are). Cells carry no span of their own, so neither do their bits:
        the row's span stands for them."""
        out: list[tuple[ast.Signal, Assigned]] = []
        ok = True
        for index, (cell, signal) in enumerate(zip(cells, signals)):
            column = columns[offset + index]
            memo_key = (cell, column.width, role)
            values = self.values.get(memo_key)
            if values is None:
                # Fitted without a span first (a large table has thousands of distinct cells);
                # only a cell that is reported is placed at its column for the message.
                quiet = Diagnostics()
                values = value_bits(cell, column.width, role, signal_text(signal), quiet)
                if quiet.items:
                    placed = dataclasses.replace(cell, span=row.cell_span(offset + index))
                    values = value_bits(placed, column.width, role, signal_text(signal), self.diag)
                if values is None:
                    ok = False
                    continue
                self.values[memo_key] = values
            out.append((signal, Assigned(column, values, None)))
        return out if ok else None


class ColumnEntries(dict):
    """The span-less entries of one table column, per value character, made on first use."""

    def __init__(self, bits: tuple[BitRef, ...]):
        super().__init__()
        self.bits = bits
        self.width = len(bits)
        self.positions = range(len(bits))
        self.targets = tuple(map(_TARGET, bits))
        self.pins = tuple(map(_IS_PIN, bits))
        nets = tuple(map(_NET, bits))  # a bit's key is its net, else the pin itself
        self.keys = nets if None not in nets else tuple(
            [target if net is None else net for target, net in zip(self.targets, nets)])

    def __missing__(self, char: str) -> tuple[BitValue, ...]:
        made = self[char] = tuple((bit, char, None) for bit in self.bits)
        return made

    def entries(self, values: str) -> tuple[BitValue, ...]:
        """Bit i's entry for value character values[i], by builtins alone."""
        return tuple(map(getitem, map(self.__getitem__, values), self.positions))


_TARGET = attrgetter("target")
_IS_PIN = attrgetter("is_pin")
_NET = attrgetter("net")


def _names(bits: Sequence[BitRef], limit: int = 4) -> str:
    names = [b.target for b in bits]
    if len(names) > limit:
        return ", ".join(names[:limit]) + ", ..."
    return ", ".join(names)


"""The scheduler: a checked program (IR) becomes the shift records a JTAG player clocks in.

It decides every instruction-register scan, the preload that must precede EXTEST and CLAMP,
the pipelining of responses (what a DR scan captures answers the update of the scan before),
and the flush scans that collect the last responses. Bit order follows DESIGN.md: bit i of a
record is the i-th bit shifted; the first bit shifted ends in the device nearest TDO; within a
register bit 0 is nearest TDO and is shifted first. So a scan is the concatenation, from the
last chain device back to the first, of each device's register bits 0..n-1.

Problems that the front end and the checks report as errors (unknown instructions, drives with
no driver cell, expectations no cell can capture) never crash the scheduler: it does the safe
thing and says so in ScanProgram.notes.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterator, Mapping, Sequence

from bitarray import bitarray, frozenbitarray

from ..ir import COMPUTED, ChainScan, Program, RegisterRead, Step, TapReset, Test, Wait
from ..collector import collector_paused
from ..models.board import Board, PinRef
from .chainmap import build_chain_map, register_lengths
from .captures import (
    CaptureResolver, ExpectationTable, build_expectation_table, compare_expectations,
)
from .images import (
    BOUNDARY_KINDS, CLAMP, OBSERVE, PRELOAD_KINDS, USER, chain_images, device_tables, from_msb_string, mask_from_msb_string, mode_kind, preload_instruction,
    selected_register, to_msb_string, zeros,
)
from .records import DR_SCAN, IDLE, IR_SCAN, RESET, CheckRange, ScanProgram, Segment, ShiftRecord

__all__ = ["schedule"]

Computed = Mapping[tuple[str, str, str], str]
_EXPECTED_VALUES = frozenset({"0", "1", "X"})
_DROP_EXPECTED_VALUES = str.maketrans("", "", "01X")  # what is left needs a closer look


@dataclass(frozen=True, slots=True, eq=False)
class _Layout:
    """Where each device's register sits in a DR scan under one set of instructions."""

    registers: tuple[str, ...]
    offsets: tuple[int, ...]  # the device nearest TDO starts at 0
    lengths: tuple[int, ...]
    length: int
    segments: tuple[Segment, ...]
    bypass: frozenbitarray  # 1 on every BYPASS bit: those are always compared


@dataclass(frozen=True, slots=True, eq=False)
class _Shift:
    """What one device shifts in a DR scan; `updates` when the register has an update stage."""

    register: str
    bits: frozenbitarray
    updates: bool


@dataclass(frozen=True, slots=True, eq=False)
class _Response:
    """What the scan after a step's update compares: its expectations and reads, whole scan."""

    test: str
    step: str
    layout: _Layout
    tdo: frozenbitarray
    mask: frozenbitarray
    compared: frozenset[int]  # devices with compared bits


@dataclass(frozen=True, slots=True, eq=False)
class _StepPlan:
    """A step worked out: instructions, update-stage images, the shifts and the response."""

    modes: tuple[str, ...]
    kinds: tuple[str, ...]
    layout: _Layout
    images: tuple[frozenbitarray | None, ...]  # what each update stage must hold for the step
    shifts: tuple[_Shift, ...]
    tdi: frozenbitarray  # the whole scan this step shifts
    response: _Response | None
    has_writes: bool


def schedule(program: Program, board: Board, computed: Computed | None = None) -> ScanProgram:
    """Schedule a program onto a board's chain.

    `computed` maps (test, step, target) to "0", "1" or "X" for expectations whose value is
    ir.COMPUTED; such an expectation without an entry is not compared and a note says so.
    The records are acyclic, so the cycle collector is paused while they are built.
    """
    with collector_paused():
        return _Scheduler(program, board, computed or {}).run()


def _concat(parts: Sequence[bitarray]) -> frozenbitarray:
    """Chain-order parts into scan order: the last device (nearest TDO) is shifted first."""
    out = bitarray()
    for part in reversed(parts):
        out += part
    return frozenbitarray(out)


class _Scheduler:
    """The state of one scheduling run: instruction and update stage per device, pending response."""

    def __init__(self, program: Program, board: Board, computed: Computed) -> None:
        self.program = program
        self.board = board
        self.computed = computed
        self.refs = tuple(entry.ref for entry in board.chain)
        self.index = {ref: idx for idx, ref in enumerate(self.refs)}
        self.devices = tuple(entry.device for entry in board.chain)
        self.tables = tuple(device_tables(entry.ref, entry.device) for entry in board.chain)
        self.chain_images = chain_images(board)
        self.lengths = tuple(register_lengths(device) for device in self.devices)
        self.resolver = CaptureResolver()
        self.records: list[ShiftRecord] = []
        self._notes: dict[str, None] = {}
        # After Test-Logic-Reset every device holds IDCODE if it has one, else BYPASS
        # (IEEE 1149.1, Test-Logic-Reset state and IDCODE instruction; from memory clauses
        # 6.1.1.1 and 8.13); the boundary update stages hold unknown values.
        self.instr = [("IDCODE" if "IDCODE" in device.instructions else "BYPASS")
                      for device in self.devices]
        self.boundary: list[frozenbitarray | None] = [None] * len(self.refs)
        self.user: list[dict[str, frozenbitarray]] = [{} for _ in self.refs]
        self.pending: _Response | None = None
        self.applied: _StepPlan | None = None
        self._instruction_memo: dict[tuple[int, str], str] = {}
        self._kind_memo: dict[tuple[int, str], str] = {}
        self._opcode_memo: dict[tuple[int, str], frozenbitarray] = {}
        self._layouts: dict[tuple[str, ...], _Layout] = {}
        self._expectation_table: ExpectationTable | None = None

    # ----------------------------------------------------------------------------- program
    def run(self) -> ScanProgram:
        self.records.append(ShiftRecord(RESET, purpose="reset", use_trst=self.board.trst,
                                        end_state="TEST_LOGIC_RESET"))
        for test in self.program.tests:
            for item in test.items:
                if isinstance(item, Step):
                    self._step(test, item)
                elif isinstance(item, Wait):
                    self._wait(test, item)
                elif isinstance(item, ChainScan):
                    self._chain_scan(test, item)
                elif isinstance(item, TapReset):
                    self._tap_reset(test)
                else:
                    raise TypeError(f"unknown test item {type(item).__name__}")
            # A run never crosses a test: collect the last response before the next test.
            self._flush()
        if self.program.end_state == "RUN_TEST_IDLE":
            self.records.append(ShiftRecord(IDLE, purpose="end", idle_clocks=1,
                                            end_state="RUN_TEST_IDLE"))
        else:
            # Back to functional mode (IEEE 1149.1: Test-Logic-Reset disables the test logic).
            self.records.append(ShiftRecord(RESET, purpose="end", use_trst=self.board.trst,
                                            end_state="TEST_LOGIC_RESET"))
        for ref, cell_type in self.resolver.unknown_types:
            self.note(f"{ref}: cell type {cell_type} has no capture description; "
                      "its cells capture X and are not compared")
        return ScanProgram(
            source=self.program.source,
            board=self.board.path,  # the shift file names the board file, relative to its folder
            tck_hz=self.program.tck_hz,
            chain=build_chain_map(self.board),
            records=tuple(self.records),
            notes=tuple(self._notes),
        )

    def note(self, message: str) -> None:
        self._notes.setdefault(message, None)

    def _step(self, test: Test, step: Step) -> None:
        plan = self._plan(test.name, step)
        self._enter(plan.modes, plan.kinds, plan.images, test.name, step.name)
        in_force = not plan.has_writes and all(
            self.boundary[idx] is not None and self.boundary[idx] == plan.images[idx]
            for idx, kind in enumerate(plan.kinds) if kind in PRELOAD_KINDS)
        if self.pending is None and in_force:
            # Nothing to apply and nothing to collect: the apply scan is elided.
            if step.wait_clocks:
                self._idle(step.wait_clocks, test.name, step.name, "wait")
        else:
            # The apply scan of this step is the response scan of the previous one.
            self._dr_scan(plan.layout, plan.shifts, plan.tdi, self.pending, "drive", test.name,
                          step.name, step.wait_clocks)
        self.applied = plan
        self.pending = plan.response

    def _wait(self, test: Test, wait: Wait) -> None:
        self._enter_holding(wait.modes, test.name, None)
        if wait.clocks > 0:
            self._idle(wait.clocks, test.name, None, "wait")

    def _chain_scan(self, test: Test, scan: ChainScan) -> None:
        """A raw data scan of the whole chain: the pattern in, the expected pattern compared.

        Responses still pending are collected first. Devices that drive pins are entered as
        for a wait (preloaded with the image they hold, or with every output disabled). What
        the scan leaves in a register with an update stage is not a known image: no intent is
        recorded for it, and the next step that needs an image loads one again.
        """
        self._flush()
        modes = self._enter_holding(scan.modes, test.name, scan.name)
        self._flush()
        layout = self._layout(modes)
        tdi = bitarray(from_msb_string(scan.tdi))
        tdo = bitarray(from_msb_string(scan.expected))
        mask = bitarray(mask_from_msb_string(scan.expected))
        checks = tuple(
            CheckRange(segment.device, segment.register, test.name, scan.name)
            for segment in layout.segments
            if mask[segment.offset:segment.offset + segment.length].any())
        self.records.append(ShiftRecord(
            DR_SCAN, length=len(tdi), tdi=tdi, tdo=tdo & mask, mask=mask, segments=layout.segments,
            checks=checks, test=test.name, step=scan.name, purpose="chain", intent={}))
        for idx, register in enumerate(layout.registers):
            if register == "BOUNDARY":
                self.boundary[idx] = None
            else:
                self.user[idx].pop(register, None)
        self.applied = None

    def _enter_holding(self, pairs: Sequence[tuple[str, str]], test: str,
                       step: str | None) -> tuple[str, ...]:
        """Enter the modes of a wait or a raw scan, which drive nothing new: a device entering a
        driving mode is preloaded with the image it holds, or with every output disabled."""
        modes = self._modes(pairs)
        kinds = tuple(self._kind(idx, mode) for idx, mode in enumerate(modes))
        images = tuple(
            (self.boundary[idx] if self.boundary[idx] is not None else self.tables[idx].disabled)
            if kind in PRELOAD_KINDS else None
            for idx, kind in enumerate(kinds))
        self._enter(modes, kinds, images, test, step)
        return modes

    def _tap_reset(self, test: Test) -> None:
        """Test-Logic-Reset: IDCODE (else BYPASS) in force everywhere, no image known."""
        self._flush()
        self.records.append(ShiftRecord(RESET, test=test.name, purpose="reset",
                                        use_trst=self.board.trst, end_state="TEST_LOGIC_RESET"))
        self.instr = [("IDCODE" if "IDCODE" in device.instructions else "BYPASS")
                      for device in self.devices]
        self.boundary = [None] * len(self.refs)
        self.user = [{} for _ in self.refs]
        self.applied = None

    # ----------------------------------------------------------------------------- modes
    def _instruction(self, idx: int, name: str) -> str:
        key = (idx, name)
        found = self._instruction_memo.get(key)
        if found is None:
            instructions = self.devices[idx].instructions
            if name in instructions:
                found = name
            elif name.upper() in instructions:
                found = name.upper()
            else:
                found = "BYPASS"
                self.note(f"{self.refs[idx]}: instruction {name} is not described in its BSDL; "
                          "BYPASS used instead")
            self._instruction_memo[key] = found
        return found

    def _modes(self, pairs: Sequence[tuple[str, str]]) -> tuple[str, ...]:
        given = dict(pairs)
        default = self.program.default_instruction
        return tuple(self._instruction(idx, given.get(ref, default))
                     for idx, ref in enumerate(self.refs))

    def _kind(self, idx: int, instruction: str) -> str:
        key = (idx, instruction)
        found = self._kind_memo.get(key)
        if found is None:
            found = mode_kind(self.devices[idx], instruction)
            self._kind_memo[key] = found
        return found

    def _register_length(self, idx: int, register: str) -> int:
        length = self.lengths[idx].get(register)
        if length is None:
            self.note(f"{self.refs[idx]}: register {register} has no length in its BSDL; "
                      "taken as 1 bit")
            return 1
        return length

    def _layout(self, modes: tuple[str, ...]) -> _Layout:
        """The DR scan layout under `modes`: each device's selected register and its offset."""
        found = self._layouts.get(modes)
        if found is None:
            registers = tuple(selected_register(self.devices[idx], mode)
                              for idx, mode in enumerate(modes))
            lengths = tuple(self._register_length(idx, register)
                            for idx, register in enumerate(registers))
            offsets = [0] * len(lengths)
            total = 0
            for idx in range(len(lengths) - 1, -1, -1):
                offsets[idx] = total
                total += lengths[idx]
            bypass = bitarray(total)
            bypass.setall(0)
            for idx, register in enumerate(registers):
                if register == "BYPASS":
                    bypass[offsets[idx]:offsets[idx] + lengths[idx]] = 1
            segments = tuple(Segment(ref, registers[idx], offsets[idx], lengths[idx])
                             for idx, ref in enumerate(self.refs))
            found = _Layout(registers, tuple(offsets), lengths, total, segments,
                            frozenbitarray(bypass))
            self._layouts[modes] = found
        return found

    # ----------------------------------------------------------------------------- entering modes
    def _enter(self, modes: tuple[str, ...], kinds: tuple[str, ...],
               images: tuple[frozenbitarray | None, ...], test: str, step: str | None) -> None:
        """Load `modes`, preloading every device that would otherwise drive undefined values.

        IEEE 1149.1-2001 (EXTEST and CLAMP clauses, from memory 8.8 and 8.11): the update stage
        must hold defined data before the instruction that drives it onto the pins takes
        effect; it is loaded under PRELOAD (2001) or SAMPLE/PRELOAD (1990) while the other
        devices keep their instruction.
        """
        preload: list[tuple[int, str]] = []
        for idx, kind in enumerate(kinds):
            if kind not in PRELOAD_KINDS:
                continue
            held = self.boundary[idx]
            if held is not None and held == images[idx]:
                continue
            if self.instr[idx] == modes[idx] and kind != CLAMP:
                continue  # already driving from the boundary register: the apply scan updates it
            via = preload_instruction(self.devices[idx])
            if via is None:
                self.note(f"{self.refs[idx]}: no SAMPLE/PRELOAD instruction; it enters "
                          f"{modes[idx]} without a preload")
                continue
            preload.append((idx, via))
        if preload:
            self._flush()
            stage = list(self.instr)
            for idx, via in preload:
                if self._kind(idx, stage[idx]) != OBSERVE:
                    stage[idx] = via
            if stage != self.instr:
                self._ir_scan(tuple(stage), test, step)
            shifts = [self._hold_shift(idx) for idx in range(len(self.refs))]
            for idx, _ in preload:
                image = images[idx]
                assert image is not None  # every preloaded kind has an image
                shifts[idx] = _Shift("BOUNDARY", image, True)
            self._dr_scan(self._layout(tuple(self.instr)), tuple(shifts),
                          _concat([s.bits for s in shifts]), None, "preload", test, step, 0)
        if list(modes) != self.instr:
            self._ir_scan(modes, test, step)

    def _hold_shift(self, idx: int) -> _Shift:
        """What keeps a device unchanged under its current instruction."""
        instruction = self.instr[idx]
        kind = self._kind(idx, instruction)
        register = selected_register(self.devices[idx], instruction)
        if kind in BOUNDARY_KINDS:
            held = self.boundary[idx]
            if held is None:
                tables = self.tables[idx]
                held = tables.safe if kind == OBSERVE else tables.disabled
            return _Shift("BOUNDARY", held, True)
        length = self._register_length(idx, register)
        if kind == USER:
            return _Shift(register, self.user[idx].get(register, zeros(length)), True)
        return _Shift(register, zeros(length), False)

    # ----------------------------------------------------------------------------- one step
    def _plan(self, test: str, step: Step) -> _StepPlan:
        modes = self._modes(step.modes)
        kinds = tuple(self._kind(idx, mode) for idx, mode in enumerate(modes))
        layout = self._layout(modes)
        built = self.chain_images.build(kinds, step.drives)
        for problem in built.problems:
            self.note(problem)
        images = list(built.images)
        writes = self._writes_by_device(step, modes, layout)
        chain_image = built.chain_image
        shifts: list[_Shift] = []
        has_writes = False
        for idx, kind in enumerate(kinds):
            register = layout.registers[idx]
            write = writes.get(idx)
            if write is not None and register == "BOUNDARY":
                # A whole-register write replaces the image built from drives.
                has_writes = True
                images[idx] = write
                start = self.chain_images.starts[idx]
                patched = bitarray(chain_image)
                patched[start:start + len(write)] = write
                chain_image = frozenbitarray(patched)
            if kind in BOUNDARY_KINDS:
                image = images[idx]
                assert image is not None  # every boundary kind has an image
                shifts.append(_Shift("BOUNDARY", image, True))
            elif kind == USER:
                has_writes = has_writes or write is not None
                bits = write if write is not None else self.user[idx].get(
                    register, zeros(layout.lengths[idx]))
                shifts.append(_Shift(register, bits, True))
            else:
                bits = write if write is not None else zeros(layout.lengths[idx])
                shifts.append(_Shift(register, bits, False))
        tdi = _concat([shift.bits for shift in shifts])
        frozen_images = tuple(images)
        response = self._response(test, step, modes, kinds, layout, chain_image, tdi)
        return _StepPlan(modes, kinds, layout, frozen_images, tuple(shifts), tdi, response,
                         has_writes)

    def _writes_by_device(self, step: Step, modes: tuple[str, ...],
                          layout: _Layout) -> dict[int, frozenbitarray]:
        writes: dict[int, frozenbitarray] = {}
        for write in step.writes:
            idx = self.index.get(write.ref)
            if idx is None:
                self.note(f"write to {write.ref}.{write.register}: no such chain device; ignored")
                continue
            register = layout.registers[idx]
            if write.register != register:
                self.note(f"write to {write.ref}.{write.register}: {modes[idx]} selects "
                          f"{register}; ignored")
                continue
            length = layout.lengths[idx]
            if len(write.bits) != length or any(ch not in "01" for ch in write.bits):
                self.note(f"write to {write.ref}.{write.register}: needs {length} bits of 0/1, "
                          f"got {write.bits!r}; ignored")
                continue
            writes[idx] = from_msb_string(write.bits)
        return writes

    # ----------------------------------------------------------------------------- responses
    def _scan_pins(self, target: str, is_pin: bool) -> Iterator[tuple[int, str]]:
        """(chain index, port) of the pin, or of every scan pin of the net."""
        pins: tuple[PinRef, ...] = ()
        if is_pin:
            pin = PinRef.parse(target)
            if pin.ref in self.index:
                pins = (pin,)
            else:  # a pin of a part without boundary scan: observe its net
                net_name = self.board.net_of_pin.get(pin)
                net = self.board.nets.get(net_name) if net_name else None
                pins = net.pins if net is not None else ()
        else:
            net = self.board.nets.get(target)
            pins = net.pins if net is not None else ()
        index = self.index
        for pin in pins:
            idx = index.get(pin.ref)
            if idx is not None:
                yield idx, pin.port

    def _response(self, test: str, step: Step, modes: tuple[str, ...], kinds: tuple[str, ...],
                  layout: _Layout, chain_image: frozenbitarray,
                  tdi: frozenbitarray) -> _Response | None:
        """The bits the scan after this step's update compares (whole scan, bit 0 first).

        An expectation is compared on every cell of a device in a boundary mode that captures
        the pin (IEEE 1149.1-2001 Annex B CELL_INFO: PI of an input, PO of an observing
        output) and, for cells that capture their own update latch, against the image held.
        """
        tdo = bitarray(layout.length)
        tdo.setall(0)
        mask = bitarray(tdo)
        expects = step.expects
        if expects:
            targets = expects.targets
            table = self._expectation_table
            if table is None or table.modes != modes or \
                    (table.targets is not targets and table.targets != targets):
                table = build_expectation_table(
                    modes, kinds, targets, expects.pins, self._scan_pins,
                    self.tables, layout.offsets, self.chain_images.starts, self.resolver)
                self._expectation_table = table
            values = expects.values
            if values.translate(_DROP_EXPECTED_VALUES):
                values = self._checked_values(test, step, targets)
            for owner in table.unobservable:
                if values[owner] != "X":
                    self.note(f"test {test} step {step.name}: no boundary cell in a capturing "
                              f"mode can observe {targets[owner]}; expectation not compared")
            unobserved = compare_expectations(table, values, chain_image, tdi, tdo, mask)
            for owner in unobserved:
                self.note(f"test {test} step {step.name}: {targets[owner]} is observed only by "
                          "cells that capture system logic while they drive; not compared")
        for read in step.reads:
            self._read(test, step, read, modes, layout, tdo, mask)
        compared = frozenset(idx for idx in range(len(self.refs))
                             if layout.lengths[idx]
                             and mask[layout.offsets[idx]:layout.offsets[idx] + layout.lengths[idx]].any())
        if not compared:
            return None
        return _Response(test, step.name, layout, frozenbitarray(tdo), frozenbitarray(mask),
                         compared)

    def _checked_values(self, test: str, step: Step, targets: Sequence[str]) -> str:
        """Expected values as 0/1/X: computed ones looked up, anything else not compared."""
        out: list[str] = []
        for target, value in zip(targets, step.expects.values):
            if value == COMPUTED:
                found = self.computed.get((test, step.name, target))
                if found is None:
                    self.note(f"test {test} step {step.name}: computed expectation on {target} "
                              "has no value; not compared")
                value = found if found is not None else "X"
            if value not in _EXPECTED_VALUES:
                self.note(f"test {test} step {step.name}: expectation {value!r} on {target} "
                          "is not 0, 1 or X; not compared")
                value = "X"
            out.append(value)
        return "".join(out)

    def _read(self, test: str, step: Step, read: RegisterRead, modes: tuple[str, ...],
              layout: _Layout, tdo: bitarray, mask: bitarray) -> None:
        """Compare a register read: its expected bits, X masked; "" means the BSDL IDCODE."""
        where = f"test {test} step {step.name}: read of {read.ref}.{read.register}"
        idx = self.index.get(read.ref)
        if idx is None:
            self.note(f"{where}: no such chain device; not compared")
            return
        register = layout.registers[idx]
        if read.register != register:
            self.note(f"{where}: {modes[idx]} selects {register}; not compared")
            return
        expected = read.expected
        if not expected and register == "DEVICE_ID":
            device = self.devices[idx]
            # "The BSDL pattern": IDCODE_REGISTER, or USERCODE_REGISTER under USERCODE.
            expected = (device.usercode if modes[idx] == "USERCODE" else device.idcode) or ""
        length = layout.lengths[idx]
        if len(expected) != length or any(ch not in "01Xx" for ch in expected):
            self.note(f"{where}: needs {length} bits of 0/1/X, got {expected!r}; not compared")
            return
        start = layout.offsets[idx]
        new_mask = mask_from_msb_string(expected)
        old_tdo = tdo[start:start + length]
        tdo[start:start + length] = (old_tdo & ~new_mask) | (from_msb_string(expected) & new_mask)
        mask[start:start + length] = mask[start:start + length] | new_mask

    # ----------------------------------------------------------------------------- records
    def _opcode(self, idx: int, instruction: str) -> frozenbitarray:
        """Opcode bits, bit 0 first: BYPASS prefers all ones; otherwise the first opcode, X as 0."""
        key = (idx, instruction)
        found = self._opcode_memo.get(key)
        if found is None:
            device = self.devices[idx]
            ones = "1" * device.ir_length
            codes = device.instructions.get(instruction, ())
            if instruction == "BYPASS":
                # IEEE 1149.1 (BYPASS instruction): the all-ones opcode is always BYPASS.
                code = ones if (not codes or ones in codes) else codes[0]
            else:
                code = codes[0] if codes else ones
            if len(code) != device.ir_length:
                self.note(f"{self.refs[idx]}: opcode {code} of {instruction} does not match its "
                          f"{device.ir_length}-bit instruction register; all ones used")
                code = ones
            found = from_msb_string(code)
            self._opcode_memo[key] = found
        return found

    def _ir_scan(self, modes: tuple[str, ...], test: str, step: str | None) -> None:
        """An instruction-register scan loading `modes` (flushing a pending response first)."""
        self._flush()
        tdi: list[bitarray] = []
        tdo: list[bitarray] = []
        mask: list[bitarray] = []
        for idx, device in enumerate(self.devices):
            tdi.append(self._opcode(idx, modes[idx]))
            capture = device.ir_capture
            if len(capture) != device.ir_length:
                self.note(f"{self.refs[idx]}: INSTRUCTION_CAPTURE {capture!r} does not match its "
                          f"{device.ir_length}-bit instruction register; not compared")
                capture = "X" * device.ir_length
            # IEEE 1149.1 (instruction register, Capture-IR): the two least significant bits
            # capture 01, the rest as INSTRUCTION_CAPTURE says; X bits are not compared.
            tdo.append(from_msb_string(capture))
            mask.append(mask_from_msb_string(capture))
        lengths = [len(bits) for bits in tdi]
        segments = []
        offset = 0
        for idx in range(len(lengths) - 1, -1, -1):
            segments.append(Segment(self.refs[idx], "IR", offset, lengths[idx]))
            offset += lengths[idx]
        self.records.append(ShiftRecord(
            IR_SCAN, length=offset, tdi=bitarray(_concat(tdi)), tdo=bitarray(_concat(tdo)),
            mask=bitarray(_concat(mask)), segments=tuple(reversed(segments)), test=test,
            step=step, purpose="instruction",
            intent={ref: modes[idx] for idx, ref in enumerate(self.refs)}))
        self.instr = list(modes)

    def _dr_scan(self, layout: _Layout, shifts: tuple[_Shift, ...], tdi: frozenbitarray,
                 response: _Response | None, purpose: str, test: str, step: str | None,
                 idle_clocks: int) -> None:
        """A data-register scan shifting `shifts` and comparing `response` and BYPASS zeros."""
        if response is not None:
            assert response.layout is layout  # a response is collected under its own instructions
            tdo = bitarray(response.tdo)
            mask = bitarray(response.mask) | layout.bypass
        else:
            tdo = bitarray(layout.length)
            tdo.setall(0)
            mask = bitarray(layout.bypass)
        checks: list[CheckRange] = []
        intent: dict[str, str] = {}
        for idx, shift in enumerate(shifts):
            ref = self.refs[idx]
            if response is not None and idx in response.compared:
                checks.append(CheckRange(ref, shift.register, response.test, response.step))
            elif shift.register == "BYPASS":
                # IEEE 1149.1 (bypass register clause): BYPASS captures a logic 0.
                checks.append(CheckRange(ref, "BYPASS", test, step or ""))
            if shift.updates:
                intent[ref] = to_msb_string(shift.bits)
        if purpose in ("drive", "flush") and not intent:
            purpose = "read"
        self.records.append(ShiftRecord(
            DR_SCAN, length=layout.length, tdi=bitarray(tdi), tdo=tdo, mask=mask,
            segments=layout.segments, checks=tuple(checks), test=test, step=step,
            purpose=purpose, intent=intent, idle_clocks=idle_clocks))
        for idx, shift in enumerate(shifts):
            if shift.updates:
                if shift.register == "BOUNDARY":
                    self.boundary[idx] = shift.bits
                else:
                    self.user[idx][shift.register] = shift.bits

    def _flush(self) -> None:
        """Collect a pending response by re-shifting the images in force (nothing changes)."""
        if self.pending is None:
            return
        assert self.applied is not None  # a response is only pending after its step's plan
        response, self.pending = self.pending, None
        plan = self.applied
        self._dr_scan(plan.layout, plan.shifts, plan.tdi, response, "flush", response.test,
                      response.step, 0)

    def _idle(self, clocks: int, test: str, step: str | None, purpose: str) -> None:
        self.records.append(ShiftRecord(IDLE, test=test, step=step, purpose=purpose,
                                        idle_clocks=clocks))

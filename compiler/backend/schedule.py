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
from typing import Callable, Mapping, Sequence

from bitarray import bitarray, frozenbitarray

from ..ir import COMPUTED, Expect, Program, RegisterRead, Step, Test, Wait
from ..models.board import Board, PinRef
from .chainmap import build_chain_map, register_lengths
from .images import (
    BOUNDARY_KINDS, CLAMP, OBSERVE, PIN, PRELOAD_KINDS, UPDATE, USER, CaptureResolver,
    DeviceTables, ObservingCell, build_image, device_tables, from_msb_string,
    mask_from_msb_string, mode_kind, preload_instruction, selected_register, to_msb_string, zeros,
)
from .records import DR_SCAN, IDLE, IR_SCAN, RESET, CheckRange, ScanProgram, Segment, ShiftRecord

__all__ = ["schedule"]

Computed = Mapping[tuple[str, str, str], str]
_BitsOf = Callable[[int, str, int], tuple[bitarray, bitarray]]


@dataclass(frozen=True, slots=True, eq=False)
class _Shift:
    """What one device shifts in a DR scan; `updates` when the register has an update stage."""

    register: str
    bits: frozenbitarray
    updates: bool


@dataclass(frozen=True, slots=True, eq=False)
class _Compare:
    """One device's compared bits (register bit 0 first)."""

    register: str
    tdo: frozenbitarray
    mask: frozenbitarray


@dataclass(frozen=True, slots=True, eq=False)
class _Response:
    """What the scan after a step's update must compare: the step's expectations and reads."""

    test: str
    step: str
    compares: dict[int, _Compare]


@dataclass(frozen=True, slots=True, eq=False)
class _StepPlan:
    """A step worked out: instructions, update-stage images, the shifts and the response."""

    modes: tuple[str, ...]
    kinds: tuple[str, ...]
    images: tuple[frozenbitarray | None, ...]  # what each update stage must hold for the step
    shifts: tuple[_Shift, ...]
    response: _Response | None
    user_writes: bool


def schedule(program: Program, board: Board, computed: Computed | None = None) -> ScanProgram:
    """Schedule a program onto a board's chain.

    `computed` maps (test, step, target) to "0", "1" or "X" for expectations whose value is
    ir.COMPUTED; such an expectation without an entry is not compared and a note says so.
    """
    return _Scheduler(program, board, computed or {}).run()


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
        self._driver_memo: dict[str, tuple[int, str] | None] = {}
        self._receiver_memo: dict[tuple[str, bool], tuple[tuple[int, ObservingCell], ...]] = {}
        self._image_memo: dict[int, tuple[str, tuple[tuple[str, str], ...], frozenbitarray]] = {}

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
            board=self.board.name,
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
        in_force = not plan.user_writes and all(
            self.boundary[idx] is not None and self.boundary[idx] == plan.images[idx]
            for idx, kind in enumerate(plan.kinds) if kind in PRELOAD_KINDS)
        if self.pending is None and in_force:
            # Nothing to apply and nothing to collect: the apply scan is elided.
            if step.wait_clocks:
                self._idle(step.wait_clocks, test.name, step.name, "wait")
        else:
            # The apply scan of this step is the response scan of the previous one.
            self._dr_scan(plan.shifts, self.pending, "drive", test.name, step.name,
                          step.wait_clocks)
        self.applied = plan
        self.pending = plan.response

    def _wait(self, test: Test, wait: Wait) -> None:
        modes = self._modes(wait.modes)
        kinds = tuple(self._kind(idx, mode) for idx, mode in enumerate(modes))
        images = tuple(
            (self.boundary[idx] if self.boundary[idx] is not None else self.tables[idx].disabled)
            if kind in PRELOAD_KINDS else None
            for idx, kind in enumerate(kinds))
        self._enter(modes, kinds, images, test.name, None)
        if wait.clocks > 0:
            self._idle(wait.clocks, test.name, None, "wait")

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
        modes = []
        for idx, ref in enumerate(self.refs):
            modes.append(self._instruction(idx, given.get(ref, default)))
        return tuple(modes)

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

    # ----------------------------------------------------------------------------- entering modes
    def _enter(self, modes: tuple[str, ...], kinds: tuple[str, ...],
               images: tuple[frozenbitarray | None, ...], test: str, step: str | None) -> None:
        """Load `modes`, preloading every device that would otherwise drive undefined values.

        IEEE 1149.1-2001 (EXTEST and CLAMP clauses, from memory 8.8 and 8.11): the update stage
        must hold defined data before the instruction that drives it from the pins takes
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
                shifts[idx] = _Shift("BOUNDARY", images[idx], True)  # type: ignore[arg-type]
            self._dr_scan(tuple(shifts), None, "preload", test, step, 0)
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
        drives = self._drives_by_device(step, modes, kinds)
        writes = self._writes_by_device(step, modes)
        images: list[frozenbitarray | None] = []
        shifts: list[_Shift] = []
        user_writes = False
        for idx, kind in enumerate(kinds):
            register = selected_register(self.devices[idx], modes[idx])
            write = writes.get(idx)
            image: frozenbitarray | None = None
            if kind in PRELOAD_KINDS or kind == OBSERVE:
                image = self._image(idx, kind, tuple(drives.get(idx, ())))
                if write is not None and register == "BOUNDARY":
                    image = write
            images.append(image)
            if kind in BOUNDARY_KINDS:
                shifts.append(_Shift("BOUNDARY", image, True))  # type: ignore[arg-type]
            elif kind == USER:
                user_writes = user_writes or write is not None
                length = self._register_length(idx, register)
                bits = write if write is not None else self.user[idx].get(register, zeros(length))
                shifts.append(_Shift(register, bits, True))
            else:
                length = self._register_length(idx, register)
                shifts.append(_Shift(register, write if write is not None else zeros(length), False))
        response = self._response(test, step, modes, kinds, tuple(images), tuple(shifts))
        return _StepPlan(modes, kinds, tuple(images), tuple(shifts), response, user_writes)

    def _image(self, idx: int, kind: str, drives: tuple[tuple[str, str], ...]) -> frozenbitarray:
        """A device's boundary image, reused while its drives stay the same (they persist)."""
        cached = self._image_memo.get(idx)
        if cached is not None and cached[0] == kind and cached[1] == drives:
            return cached[2]
        result = build_image(self.tables[idx], kind, drives)
        for problem in result.problems:
            self.note(problem)
        self._image_memo[idx] = (kind, drives, result.image)
        return result.image

    def _driver(self, driver: str) -> tuple[int, str] | None:
        if driver not in self._driver_memo:
            pin = PinRef.parse(driver)
            idx = self.index.get(pin.ref)
            self._driver_memo[driver] = None if idx is None else (idx, pin.port)
        return self._driver_memo[driver]

    def _drives_by_device(self, step: Step, modes: tuple[str, ...],
                          kinds: tuple[str, ...]) -> dict[int, list[tuple[str, str]]]:
        by_device: dict[int, list[tuple[str, str]]] = {}
        for drive in step.drives:
            found = self._driver(drive.driver) if drive.driver else None
            if found is None:
                self.note(f"drive on {drive.target} has no scan driver; not applied")
                continue
            idx, port = found
            if kinds[idx] not in PRELOAD_KINDS:
                self.note(f"{self.refs[idx]} is in {modes[idx]}, which does not drive; "
                          f"drive on {drive.target} not applied")
                continue
            by_device.setdefault(idx, []).append((port, drive.value))
        return by_device

    def _writes_by_device(self, step: Step, modes: tuple[str, ...]) -> dict[int, frozenbitarray]:
        writes: dict[int, frozenbitarray] = {}
        for write in step.writes:
            idx = self.index.get(write.ref)
            if idx is None:
                self.note(f"write to {write.ref}.{write.register}: no such chain device; ignored")
                continue
            register = selected_register(self.devices[idx], modes[idx])
            if write.register != register:
                self.note(f"write to {write.ref}.{write.register}: {modes[idx]} selects "
                          f"{register}; ignored")
                continue
            length = self._register_length(idx, register)
            if len(write.bits) != length or any(ch not in "01" for ch in write.bits):
                self.note(f"write to {write.ref}.{write.register}: needs {length} bits of 0/1, "
                          f"got {write.bits!r}; ignored")
                continue
            writes[idx] = from_msb_string(write.bits)
        return writes

    # ----------------------------------------------------------------------------- responses
    def _receivers(self, target: str, is_pin: bool) -> tuple[tuple[int, ObservingCell], ...]:
        """Every (device, cell) that sits on the pin, or on any scan pin of the net."""
        key = (target, is_pin)
        found = self._receiver_memo.get(key)
        if found is None:
            pins: tuple[PinRef, ...] = ()
            if is_pin:
                pin = PinRef.parse(target)
                if pin.ref in self.index:
                    pins = (pin,)
                else:
                    net_name = self.board.net_of_pin.get(pin)
                    net = self.board.nets.get(net_name) if net_name else None
                    pins = net.pins if net is not None else ()
            else:
                net = self.board.nets.get(target)
                pins = net.pins if net is not None else ()
            cells: list[tuple[int, ObservingCell]] = []
            for pin in pins:
                idx = self.index.get(pin.ref)
                if idx is not None:
                    cells.extend((idx, cell) for cell in self.tables[idx].observers.get(pin.port, ()))
            found = tuple(cells)
            self._receiver_memo[key] = found
        return found

    def _response(self, test: str, step: Step, modes: tuple[str, ...], kinds: tuple[str, ...],
                  images: tuple[frozenbitarray | None, ...],
                  shifts: tuple[_Shift, ...]) -> _Response | None:
        """The bits the scan after this step's update compares, per device."""
        tdo: dict[int, bitarray] = {}
        mask: dict[int, bitarray] = {}
        registers: dict[int, str] = {}

        def bits_of(idx: int, register: str, length: int) -> tuple[bitarray, bitarray]:
            if idx not in tdo:
                tdo[idx] = bitarray(zeros(length))
                mask[idx] = bitarray(zeros(length))
                registers[idx] = register
            return tdo[idx], mask[idx]

        for expect in step.expects:
            value = self._expected_value(test, step, expect)
            if value is None:
                continue
            hit = False
            for idx, cell in self._receivers(expect.target, expect.is_pin):
                kind = kinds[idx]
                if kind not in BOUNDARY_KINDS:
                    continue
                image = images[idx]
                assert image is not None
                captured = self.resolver.capture(idx, self.tables[idx], cell, kind, modes[idx], image)
                if captured == PIN:
                    bit = value == "1"
                elif captured == UPDATE:
                    bit = bool(image[cell.number])  # the cell's own update latch
                else:
                    continue
                t, m = bits_of(idx, "BOUNDARY", self.tables[idx].length)
                t[cell.number] = bit
                m[cell.number] = 1
                hit = True
            if not hit:
                self.note(f"test {test} step {step.name}: no boundary cell in a capturing mode "
                          f"can observe {expect.target}; expectation not compared")
        for read in step.reads:
            self._read(test, step, read, modes, shifts, bits_of)
        compares = {idx: _Compare(registers[idx], frozenbitarray(tdo[idx]), frozenbitarray(mask[idx]))
                    for idx in sorted(tdo) if mask[idx].any()}
        return _Response(test, step.name, compares) if compares else None

    def _expected_value(self, test: str, step: Step, expect: Expect) -> str | None:
        """"0" or "1" to compare, or None (X, or a computed value nobody supplied)."""
        value = expect.value
        if value == COMPUTED:
            found = self.computed.get((test, step.name, expect.target))
            if found is None:
                self.note(f"test {test} step {step.name}: computed expectation on "
                          f"{expect.target} has no value; not compared")
                return None
            value = found
        if value in ("0", "1"):
            return value
        if value != "X":
            self.note(f"test {test} step {step.name}: expectation {value!r} on {expect.target} "
                      "is not 0, 1 or X; not compared")
        return None

    def _read(self, test: str, step: Step, read: RegisterRead, modes: tuple[str, ...],
              shifts: tuple[_Shift, ...], bits_of: _BitsOf) -> None:
        where = f"test {test} step {step.name}: read of {read.ref}.{read.register}"
        idx = self.index.get(read.ref)
        if idx is None:
            self.note(f"{where}: no such chain device; not compared")
            return
        register = shifts[idx].register
        if read.register != register:
            self.note(f"{where}: {modes[idx]} selects {register}; not compared")
            return
        expected = read.expected
        if not expected and register == "DEVICE_ID":
            device = self.devices[idx]
            # "The BSDL pattern": IDCODE_REGISTER, or USERCODE_REGISTER under USERCODE.
            expected = (device.usercode if modes[idx] == "USERCODE" else device.idcode) or ""
        length = len(shifts[idx].bits)
        if len(expected) != length or any(ch not in "01Xx" for ch in expected):
            self.note(f"{where}: needs {length} bits of 0/1/X, got {expected!r}; not compared")
            return
        new_tdo = from_msb_string(expected)
        new_mask = mask_from_msb_string(expected)
        t, m = bits_of(idx, register, length)
        t &= ~new_mask
        t |= new_tdo & new_mask
        m |= new_mask

    # ----------------------------------------------------------------------------- records
    def _offsets(self, lengths: Sequence[int]) -> list[int]:
        """Scan offset of each device's segment: the device nearest TDO comes first."""
        offsets = [0] * len(lengths)
        offset = 0
        for idx in range(len(lengths) - 1, -1, -1):
            offsets[idx] = offset
            offset += lengths[idx]
        return offsets

    @staticmethod
    def _concat(parts: Sequence[bitarray]) -> bitarray:
        out = bitarray()
        for part in reversed(parts):
            out += part
        return out

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
        offsets = self._offsets(lengths)
        segments = tuple(Segment(ref, "IR", offsets[idx], lengths[idx])
                         for idx, ref in enumerate(self.refs))
        total = sum(lengths)
        self.records.append(ShiftRecord(
            IR_SCAN, length=total, tdi=self._concat(tdi), tdo=self._concat(tdo),
            mask=self._concat(mask), segments=segments, test=test, step=step,
            purpose="instruction", intent={ref: modes[idx] for idx, ref in enumerate(self.refs)}))
        self.instr = list(modes)

    def _dr_scan(self, shifts: tuple[_Shift, ...], response: _Response | None, purpose: str,
                 test: str, step: str | None, idle_clocks: int) -> None:
        """A data-register scan shifting `shifts` and comparing `response` (and BYPASS zeros)."""
        tdo: list[bitarray] = []
        mask: list[bitarray] = []
        checks: list[CheckRange] = []
        intent: dict[str, str] = {}
        for idx, shift in enumerate(shifts):
            ref = self.refs[idx]
            length = len(shift.bits)
            compare = response.compares.get(idx) if response is not None else None
            if compare is not None and compare.register == shift.register:
                tdo.append(compare.tdo)
                mask.append(compare.mask)
                checks.append(CheckRange(ref, shift.register, response.test, response.step))
            elif shift.register == "BYPASS":
                # IEEE 1149.1 (bypass register clause): BYPASS captures a logic 0.
                tdo.append(zeros(length))
                mask.append(~zeros(length))
                checks.append(CheckRange(ref, "BYPASS", test, step or ""))
            else:
                tdo.append(zeros(length))
                mask.append(zeros(length))
            if shift.updates:
                intent[ref] = to_msb_string(shift.bits)
        if purpose in ("drive", "flush") and not intent:
            purpose = "read"
        lengths = [len(shift.bits) for shift in shifts]
        offsets = self._offsets(lengths)
        segments = tuple(Segment(ref, shifts[idx].register, offsets[idx], lengths[idx])
                         for idx, ref in enumerate(self.refs))
        self.records.append(ShiftRecord(
            DR_SCAN, length=sum(lengths), tdi=self._concat([s.bits for s in shifts]),
            tdo=self._concat(tdo), mask=self._concat(mask), segments=segments,
            checks=tuple(checks), test=test, step=step, purpose=purpose, intent=intent,
            idle_clocks=idle_clocks))
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
        self._dr_scan(self.applied.shifts, response, "flush", response.test, response.step, 0)

    def _idle(self, clocks: int, test: str, step: str | None, purpose: str) -> None:
        self.records.append(ShiftRecord(IDLE, test=test, step=step, purpose=purpose,
                                        idle_clocks=clocks))

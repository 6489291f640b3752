"""Sequencing checks: preload before EXTEST/CLAMP, TCK limits, self-test idle time, compliance.

The preload check reads shift records alone (instructions decoded from the TDI bits of each IR
scan), so it also runs on JSON shift records that scanloom did not write (`scanloom verify`).
"""

from __future__ import annotations

import math
from typing import Iterable

from ..backend.records import DR_SCAN, IR_SCAN, RESET, DeviceMap, ScanProgram
from ..ir import Program, Step, TapReset, TestItem, Wait
from ..models.board import Board, PinRef
from ..safety_checks import Finding

__all__ = ["check_preload", "check_tck", "check_self_test_idle", "check_compliance",
           "decode_instruction"]

# Instructions whose update stage drives the pins: entered only with the boundary register
# loaded (IEEE Std 1149.1-2001, EXTEST and CLAMP instruction clauses, from memory 8.8/8.11).
_DRIVING = frozenset({"EXTEST", "CLAMP", "EXTEST_PULSE", "EXTEST_TRAIN"})


def decode_instruction(device: DeviceMap, opcode: str) -> str | None:
    """The instruction whose opcode (X bits match anything) equals `opcode` (BSDL order)."""
    for name, codes in device.opcodes.items():
        for code in codes:
            if len(code) == len(opcode) and all(c in ("X", "x") or c == o for c, o in zip(code, opcode)):
                return name
    return None


def check_preload(scan: ScanProgram) -> list[Finding]:
    """Every entry into EXTEST/CLAMP must follow an update of that device's boundary register.

    After Test-Logic-Reset the update stage holds no defined image; any Update-DR while the
    device selects its boundary register (SAMPLE/PRELOAD, PRELOAD, EXTEST ...) defines it.
    """
    devices = {dev.ref: dev for dev in scan.chain.devices}
    after_reset = {ref: ("IDCODE" if "IDCODE" in dev.opcodes else "BYPASS") for ref, dev in devices.items()}
    current = dict(after_reset)
    loaded = {ref: False for ref in devices}
    findings: list[Finding] = []
    for index, record in enumerate(scan.records):
        if record.kind == RESET:
            current = dict(after_reset)
            loaded = {ref: False for ref in devices}
        elif record.kind == IR_SCAN:
            for seg in record.segments:
                dev = devices.get(seg.device)
                if dev is None:
                    continue
                bits = record.tdi[seg.offset:seg.offset + seg.length]
                name = decode_instruction(dev, bits[::-1].to01()) or "BYPASS"
                was = current[seg.device]
                if name.upper() in _DRIVING and was.upper() not in _DRIVING and not loaded[seg.device]:
                    findings.append(Finding(
                        "no_preload",
                        f"record {index} (IR scan): {seg.device} enters {name} but its boundary "
                        "register was not loaded since Test-Logic-Reset",
                        test=record.test, step=record.step, record=index))
                current[seg.device] = name
        elif record.kind == DR_SCAN:
            for seg in record.segments:
                if seg.register == "BOUNDARY":
                    loaded[seg.device] = True
    return findings


def check_tck(program: Program, board: Board) -> list[Finding]:
    if program.tck_hz is None:
        return []
    findings = []
    span = program.header_spans.get("tck", program.span)
    for entry in board.chain:
        limit = entry.device.tap.max_tck_hz
        if limit is not None and program.tck_hz > limit:
            findings.append(Finding(
                "tck_too_fast",
                f"TCK {_hz(program.tck_hz)} is above the {_hz(limit)} maximum of {entry.ref} "
                f"({entry.device.entity}, TAP_SCAN_CLOCK)", span))
    return findings


def _hz(value: float) -> str:
    for unit, scale in (("MHz", 1e6), ("kHz", 1e3)):
        if value >= scale:
            return f"{value / scale:g} {unit}"
    return f"{value:g} Hz"


def check_self_test_idle(program: Program, board: Board) -> list[Finding]:
    """RUNBIST/INTEST need the idle clocks their BSDL execution attributes ask for.

    The clocks counted are those spent in Run-Test/Idle while the device stays in the mode
    (IEEE Std 1149.1, RUNBIST: the self-test runs in Run-Test/Idle; RUNBIST_EXECUTION gives
    the wait in clocks or seconds).
    """
    findings: list[Finding] = []
    for test in program.tests:
        for entry in board.chain:
            executions = entry.device.executions
            if not executions:
                continue
            runs = _mode_runs(test.items, entry.ref)
            for instruction, first, clocks in runs:
                need = executions.get(instruction.upper())
                if need is None:
                    continue
                required = need.clocks or 0
                if need.seconds:
                    if program.tck_hz is None:
                        findings.append(Finding(
                            "self_test_idle",
                            f"{entry.ref} {instruction} needs {need.seconds:g} s of idle time; declare "
                            "the tck so the wait can be counted in clocks", first.span, test.name,
                            first.name if isinstance(first, Step) else None))
                        continue
                    required = max(required, math.ceil(need.seconds * program.tck_hz))
                if clocks < required:
                    findings.append(Finding(
                        "self_test_idle",
                        f"{entry.ref} {instruction} needs {required} idle clocks in Run-Test/Idle "
                        f"({need.raw.strip()}); the test gives {clocks}", first.span, test.name,
                        first.name if isinstance(first, Step) else None))
    return findings


def _mode_runs(items: Iterable[TestItem], ref: str) -> list[tuple[str, TestItem, int]]:
    """(instruction, first item, idle clocks) for each stretch a device keeps one instruction.

    A Test-Logic-Reset ends every stretch; a raw chain scan spends no idle clocks.
    """
    runs: list[tuple[str, TestItem, int]] = []
    current: str | None = None
    for item in items:
        if isinstance(item, TapReset):
            current = None
            continue
        mode = dict(item.modes).get(ref)
        clocks = item.clocks if isinstance(item, Wait) else item.wait_clocks if isinstance(item, Step) else 0
        if mode != current:
            current = mode
            if mode is not None:
                runs.append((mode, item, clocks))
        elif runs:
            name, first, total = runs[-1]
            runs[-1] = (name, first, total + clocks)
    return runs


def check_compliance(program: Program, board: Board) -> list[Finding]:
    """Compliance-enable pins must be held at their pattern by the board.

    IEEE Std 1149.1 (compliance-enable inputs, COMPLIANCE_PATTERNS): the device conforms to the
    standard only while these pins hold the pattern; the board file says how it holds them
    (`hold`, or a pull to the pattern value).
    """
    findings: list[Finding] = []
    span = program.header_spans.get("board", program.span)
    for entry in board.chain:
        for pattern in entry.device.compliance:
            values = pattern.patterns[0] if pattern.patterns else ""
            for port, value in zip(pattern.ports, values):
                if value not in "01":
                    continue
                net = board.net_of_pin.get(PinRef(entry.ref, port))
                if net is None:
                    findings.append(Finding(
                        "compliance",
                        f"{entry.ref}.{port} enables compliance at {value} but is on no net of the board",
                        span))
                    continue
                held = board.hold.get(net)
                pull = board.pulls.get(net)
                if held == value or (pull == ("up" if value == "1" else "down") and held is None):
                    continue
                findings.append(Finding(
                    "compliance",
                    f"{entry.ref}.{port} must be held at {value} (COMPLIANCE_PATTERNS) but net {net} "
                    "is not held at that value by the board", span))
    return findings

"""`scanloom generate`: chain-integrity and interconnect tests written as a `.loom` program.

The program is ordinary text in our language, commented for the engineer who reads it and
laid out as `scanloom fmt` lays it out; `scanloom compile` accepts it, it passes on the
fault-free virtual board, and it raises no pre-hardware finding. Integrity tests come first:
while the chain itself is broken, nothing an interconnect test reads means anything.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from fractions import Fraction
from pathlib import Path

from ..collector import collector_paused
from ..diagnostics import Diagnostic, ScanloomError
from ..models.board import Board
from .codes import CODE_KINDS
from .generate_integrity import IntegrityTest, integrity_sections
from .generate_interconnect import CODE_PAPERS, InterconnectTest, interconnect_sections
from .interconnect_plan import InterconnectPlan, plan_interconnect
from .loom_text import comment_block, is_name, quoted, wrap_words
from .scan_pins import BoardPins

__all__ = ["GENERATE_KINDS", "GeneratedProgram", "generate_program", "board_reference"]

GENERATE_KINDS = ("integrity", "interconnect", "all")


@dataclass(frozen=True)
class GeneratedProgram:
    """The program text and what it holds (for the command's summary and for tests)."""

    text: str
    kind: str
    codes: str
    integrity: tuple[IntegrityTest, ...] = ()
    interconnect: tuple[InterconnectTest, ...] = ()
    plan: InterconnectPlan | None = None
    notes: tuple[str, ...] = field(default=())

    def summary(self) -> str:
        parts = []
        if self.integrity:
            parts.append(f"{len(self.integrity)} integrity tests")
        if self.interconnect:
            nets = len(self.plan.testable) if self.plan else 0
            vectors = sum(t.codes.vectors for t in self.interconnect)
            parts.append(f"{len(self.interconnect)} interconnect test"
                         f"{'s' * (len(self.interconnect) != 1)} ({nets} nets, {vectors} vectors, "
                         f"{self.codes} codes)")
        return ", ".join(parts) or "no tests"


def board_reference(board_file: str | Path, program_file: str | Path) -> str:
    """The board path as the program writes it: relative to the program's folder."""
    folder = os.path.dirname(os.path.abspath(program_file))
    return Path(os.path.relpath(os.path.abspath(board_file), folder)).as_posix()


def generate_program(board: Board, board_ref: str, kind: str = "all",
                     codes: str = "counting", pins: BoardPins | None = None) -> GeneratedProgram:
    """Write the program for `board`; `board_ref` is the board path as the program names it.

    The plan's records are acyclic, so the cycle collector is paused while they are built.
    """
    with collector_paused():
        return _generate(board, board_ref, kind, codes, pins)


def _generate(board: Board, board_ref: str, kind: str, codes: str,
              pins: BoardPins | None) -> GeneratedProgram:
    if kind not in GENERATE_KINDS:
        raise ValueError(f"unknown kind {kind!r}")
    if codes not in CODE_KINDS:
        raise ValueError(f"unknown code kind {codes!r}")
    _check_names(board)
    pins = pins if pins is not None else BoardPins(board)
    taken = set(board.nets) | set(board.devices)
    integrity: list[IntegrityTest] = []
    interconnect: list[InterconnectTest] = []
    plan = None
    body: list[str] = []
    if kind in ("integrity", "all"):
        section, integrity = integrity_sections(board, taken)
        body += section
    if kind in ("interconnect", "all"):
        plan = plan_interconnect(pins)
        if not plan.testable:
            if kind == "interconnect":
                raise ScanloomError([Diagnostic(
                    "error", f"{board.path}: no net has a scan driver and a scan receiver on "
                    "another pin: there is no interconnect to test",
                    hint="scanloom inspect lists the nets by kind")])
        else:
            section, interconnect = interconnect_sections(pins, plan, codes, taken, _slowest_hz(board))
            body += section
    header = _header(board, board_ref, kind, codes, plan, interconnect)
    text = "\n".join(header + body).rstrip("\n") + "\n"
    return GeneratedProgram(text, kind, codes, tuple(integrity), tuple(interconnect), plan)


def _check_names(board: Board) -> None:
    bad = [entry.ref for entry in board.chain if not is_name(entry.ref)]
    if bad:
        raise ScanloomError([Diagnostic(
            "error", f"{board.path}: device ref {ref!r} cannot be written in a test program",
            board.span_of("chain"), expected="a ref of letters, digits and _ that starts with a letter")
            for ref in bad])


def _header(board: Board, board_ref: str, kind: str, codes: str, plan: InterconnectPlan | None,
            interconnect: list[InterconnectTest]) -> list[str]:
    what = {"integrity": "Chain-integrity tests", "interconnect": "Interconnect tests",
            "all": "Chain-integrity and interconnect tests"}[kind]
    lines = wrap_words(f"{what} of {board.name}, written by `scanloom generate`.") + [""]
    if kind in ("integrity", "all"):
        lines += ["The integrity tests check the chain itself: the instruction-register capture of",
                  "every device, the length of the BYPASS path, each IDCODE against its BSDL file,",
                  "each boundary register's length under SAMPLE/PRELOAD and the instruction every",
                  "device holds after Test-Logic-Reset. Run them first: while the chain is broken,",
                  "no other result means anything.", ""]
    if plan is not None and interconnect:
        rounds = len(plan.rounds)
        lines += wrap_words(f"The interconnect tests give each of the {len(plan.testable)} nets that a "
                            "scan device drives and another scan pin receives a code of the "
                            f"{CODE_PAPERS[codes]}.")
        if rounds > 1:
            lines += wrap_words("Nets with several scan drivers are tested once per driver, never "
                                f"with two drivers on: {rounds} rounds.")
        lines += _not_coded(board, plan)
    lines.append("Before running on hardware: de-energise loads and know the board (README, Safety).")
    out = comment_block(lines)
    out.append("")
    out.append(f"board {quoted(board_ref)}")
    tck = _slowest_tck(board)
    if tck is not None:
        out.append(f"tck {tck}  # the slowest device's TAP_SCAN_CLOCK maximum")
    return out


def _not_coded(board: Board, plan: InterconnectPlan) -> list[str]:
    lines: list[str] = []
    if plan.held:
        held = ", ".join(f"{node[0]} = {value}" for node, value in plan.held.items())
        lines += wrap_words(f"Held at their value in every step (the board file's hold, compliance-enable pins): {held}.")
    if board.never_drive:
        lines += wrap_words(f"Never driven (never_drive): {', '.join(board.never_drive)}.")
    for reason, names in plan.skipped.items():
        shown = ", ".join(names[:12]) + (f" and {len(names) - 12} more" if len(names) > 12 else "")
        lines += wrap_words(f"Not tested ({reason}): {shown}.")
    if lines:
        lines.append("Nets into logic without boundary scan are held at safe values (a cluster test "
                     "covers them).")
    return lines + [""]


def _slowest_hz(board: Board) -> float | None:
    """The TCK the program declares: the lowest TAP_SCAN_CLOCK maximum of the chain, if any."""
    limits = [entry.device.tap.max_tck_hz for entry in board.chain if entry.device.tap.max_tck_hz]
    return min(limits) if limits else None


def _slowest_tck(board: Board) -> str | None:
    slowest = _slowest_hz(board)
    if slowest is None:
        return None
    hertz = Fraction(slowest).limit_denominator(1000)
    for unit, scale in (("MHz", 10**6), ("kHz", 10**3), ("Hz", 1)):
        value = hertz / scale
        if value >= 1 and (value * 1000).denominator == 1:
            number = value if value.denominator != 1 else value.numerator
            text = f"{float(number):g}" if isinstance(number, Fraction) else str(number)
            return f"{text} {unit}"
    return None

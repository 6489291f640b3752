"""The whole pipeline for one program: front end, checks, schedule, cycles, replay, writers.

`check_source_program` is what `scanloom check` runs; `compile_program` is `scanloom
compile`: it refuses on errors, lays out the TAP cycles, replays them independently (a
mismatch there is a compiler bug and stops the compile loudly) and writes the outputs.
The checks that need the IR alone run in a forked process while the scheduler works
(scanloom.forked); the outcome is the same as running them one after the other.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from pathlib import Path

from .analysis.prehardware import CheckReport, check_ir, check_program, report_findings
from .backend.cycle_stream import CycleStream
from .backend.cycles import lay_out_cycles
from .backend.records import ScanProgram
from .backend.schedule import schedule
from .diagnostics import Diagnostic, Diagnostics, ScanloomError
from .forked import run_forked
from .ir import COMPUTED, Program
from .safety_checks import Finding
from .lang.frontend import load_program
from .models.board import Board
from .sim.replay import ReplayReport, replay

__all__ = ["CheckedProgram", "CompileResult", "CompilerBug", "check_source_program", "compile_program",
           "validate_board_logic"]




class CompilerBug(ScanloomError):
    """The independent replay disagrees with the scheduled records: scanloom is wrong."""


@dataclass
class CheckedProgram:
    program: Program
    board: Board
    report: CheckReport


@dataclass
class CompileResult:
    checked: CheckedProgram
    scan: ScanProgram
    cycles: CycleStream
    replay: ReplayReport
    written: list[Path] = field(default_factory=list)


def _computed_expectations(program: Program, board: Board) -> dict[tuple[str, str, str], str]:
    """Values for `computed` expectations, from the fault-free virtual board."""
    needs = any(COMPUTED in step.expects.values for test in program.tests for step in test.steps)
    if not needs:
        return {}
    from .analysis.computed import compute_expectations

    return dict(compute_expectations(program, board))


def validate_board_logic(board: Board, diagnostics: Diagnostics) -> None:
    """The board's logic equations parse and form no loop (an unreadable board otherwise)."""
    if not any(part.logic or part.enables for part in board.parts.values()):
        return
    from .lang.frontend import UnreadableInput
    from .sim.electrical import build_electrical

    try:
        build_electrical(board, diagnostics)
    except ScanloomError as error:
        raise UnreadableInput(error.diagnostics, error.sources) from None


@dataclass
class _Scheduled:
    """A program scheduled and laid out, with the findings of the checks of its IR."""

    program: Program
    board: Board
    scan: ScanProgram
    cycles: CycleStream
    ir_findings: list[Finding]


def _front_to_schedule(path: str | Path, diagnostics: Diagnostics,
                       board_override: str | Path | None, computed: bool) -> _Scheduled:
    program, board = load_program(path, diagnostics, board_override)
    validate_board_logic(board, diagnostics)
    values = _computed_expectations(program, board) if computed else {}
    ir_checks = run_forked(check_ir, program, board)  # on the other core, beside the scheduler
    scan = schedule(program, board, values)
    cycles = lay_out_cycles(scan)
    return _Scheduled(program, board, scan, cycles, ir_checks.result())


def _checked(done: _Scheduled, diagnostics: Diagnostics) -> tuple[CheckedProgram, ScanProgram]:
    """The pre-hardware checks' findings reported; the records with the allowed ones noted."""
    report = check_program(done.program, done.board, done.scan, done.cycles,
                           ir_findings=done.ir_findings)
    report_findings(report, diagnostics)
    scan = replace(done.scan, notes=tuple(done.scan.notes) + tuple(report.allowed_notes()))
    return CheckedProgram(done.program, done.board, report), scan


def check_source_program(path: str | Path, diagnostics: Diagnostics,
                         board_override: str | Path | None = None) -> CheckedProgram:
    """The front end and the pre-hardware checks (on the scheduled records and cycles too).

    Front-end errors raise; pre-hardware findings go into `diagnostics` (the caller decides).
    """
    return _checked(_front_to_schedule(path, diagnostics, board_override, computed=False),
                    diagnostics)[0]


def compile_program(path: str | Path, out_dir: str | Path, formats: set[str], diagnostics: Diagnostics,
                    board_override: str | Path | None = None) -> CompileResult:
    """Compile and write `formats` into `out_dir`, or raise with the errors found.

    The checks and the independent replay run once, before any file is written; the files are
    then written by two processes at once where it can be (scanloom.forked), each its share.
    """
    from .backend.writers import check_formats, write_outputs

    requested = check_formats(formats)
    done = _front_to_schedule(path, diagnostics, board_override, computed=True)
    checked, scan = _checked(done, diagnostics)
    diagnostics.raise_if_errors()
    report = replay(scan, done.cycles)
    if not report.ok:
        raise CompilerBug([Diagnostic(
            "error", "internal error: the independent replay disagrees with the compiled scans",
            hint="this is a scanloom bug; please report it with the program and board\n"
                 + report.render(limit=20))])
    written = write_outputs(scan, done.cycles, Path(out_dir), Path(path).stem, requested)
    return CompileResult(checked, scan, done.cycles, report, written)

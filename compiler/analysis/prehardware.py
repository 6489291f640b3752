"""Pre-hardware checks: everything that must hold before a program touches a board.

`check_program` runs on a checked program (IR) and its board, and on the scheduled records
when there are some; `check_records` runs on shift records alone (JSON from elsewhere). An
intentional case is accepted by `allow CHECK "reason"` in the test or step; the reason is kept
so the listing can repeat it.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from ..backend.cycle_stream import CycleStream
from ..backend.records import ScanProgram
from ..diagnostics import Diagnostic, Diagnostics
from ..ir import Program
from ..models.board import Board
from ..safety_checks import CHECKS, Finding
from .drive_hazards import check_bypass_expectations, check_drive_hazards
from .floating import check_floating_expectations
from .short_fights import check_short_fights
from .sequencing import check_compliance, check_preload, check_self_test_idle, check_tck

__all__ = ["CheckReport", "RECORD_CHECKS", "check_ir", "check_program", "check_records", "check_scheduled",
           "report_findings"]

RECORD_CHECKS = ("no_preload",)  # what `check_records` can find on shift records alone


@dataclass
class CheckReport:
    findings: list[Finding] = field(default_factory=list)
    allowed: list[tuple[Finding, str]] = field(default_factory=list)  # (finding, reason)

    def allowed_notes(self) -> list[str]:
        return [f"allowed {f.check} in test {f.test}"
                + (f" step {f.step}" if f.step else "") + f": {reason} ({f.message})"
                for f, reason in self.allowed]


def check_program(program: Program, board: Board, scan: ScanProgram | None = None,
                  cycles: CycleStream | None = None,
                  ir_findings: list[Finding] | None = None) -> CheckReport:
    """Every check on a program; those that need the records or the cycles run when given.

    `ir_findings` are those of `check_ir` when the caller ran it already (alongside the
    scheduler, on the other core)."""
    findings = list(ir_findings) if ir_findings is not None else check_ir(program, board)
    if scan is not None:
        findings += check_scheduled(program, board, scan, cycles)
    return _apply_overrides(program, findings)


def check_ir(program: Program, board: Board) -> list[Finding]:
    """The checks that need the program and the board only, overrides not yet applied."""
    findings: list[Finding] = []
    findings += check_tck(program, board)
    findings += check_compliance(program, board)
    findings += check_self_test_idle(program, board)
    findings += check_drive_hazards(program, board)
    findings += check_bypass_expectations(program, board)
    findings += check_floating_expectations(program, board)
    return findings


def check_scheduled(program: Program, board: Board, scan: ScanProgram,
                    cycles: CycleStream | None = None) -> list[Finding]:
    """The checks on the scheduled records (and the cycles when given), overrides not applied."""
    findings = check_preload(scan)
    if cycles is not None:
        spans = {(t.name, s.name): s.span for t in program.tests for s in t.steps}
        findings += check_short_fights(scan, cycles, board, program.tck_hz,
                                       program.fight_limit_s, spans)
    return findings


def check_records(scan: ScanProgram) -> CheckReport:
    """The checks of RECORD_CHECKS, on records that may come from elsewhere (`scanloom verify`)."""
    return CheckReport(check_preload(scan))


def _apply_overrides(program: Program, findings: list[Finding]) -> CheckReport:
    overrides: dict[tuple[str | None, str | None, str], str] = {}
    for test in program.tests:
        for o in test.overrides:
            overrides[(test.name, None, o.check)] = o.reason
        for step in test.steps:
            for o in step.overrides:
                overrides[(test.name, step.name, o.check)] = o.reason
    report = CheckReport()
    for finding in findings:
        reason = overrides.get((finding.test, finding.step, finding.check)) \
            or overrides.get((finding.test, None, finding.check))
        if reason is not None:
            report.allowed.append((finding, reason))
        else:
            report.findings.append(finding)
    return report


def report_findings(report: CheckReport, diagnostics: Diagnostics) -> None:
    """Findings as diagnostics: the check's severity, its name as the code, its hint.

    A front-end warning at the place of a finding's error (the expectation on a device in
    BYPASS, which the language only warns about) gives way to the error.
    """
    errors = {(f.span.file, f.span.line) for f in report.findings
              if CHECKS[f.check].severity == "error" and f.span}
    if errors:
        diagnostics.items[:] = [d for d in diagnostics.items
                                if not (d.severity == "warning" and d.code is None and d.span
                                        and (d.span.file, d.span.line) in errors)]
    for finding in report.findings:
        kind = CHECKS[finding.check]
        message = f"[{kind.name}] {finding.message}"
        diagnostics.report(Diagnostic(kind.severity, message, finding.span, None, (),
                                      finding.hint or kind.hint, kind.name))

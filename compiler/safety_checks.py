"""The pre-hardware safety checks: each has a short stable name, a severity and a fix hint.

Names are ours and stable: programs name them in `allow NAME "reason"` to accept an
intentional case (the front end validates the name against this catalog), and tests match
them. A finding becomes a Diagnostic with the check's name as its code.
"""

from __future__ import annotations

from dataclasses import dataclass

from .diagnostics import SourceSpan

__all__ = ["CheckKind", "CHECKS", "Finding"]


@dataclass(frozen=True, slots=True)
class CheckKind:
    name: str
    severity: str  # "error" or "warning"
    summary: str
    hint: str


CHECKS: dict[str, CheckKind] = {kind.name: kind for kind in (
    CheckKind("contention", "error",
              "two enabled drivers disagree on one net",
              "drive the net from one device only, release the other driver (drive it Z), or "
              "put the other device in HIGHZ"),
    CheckKind("functional_driver", "warning",
              "a device in a functional mode may drive a net this step drives",
              "put the device in EXTEST (its outputs then stay disabled unless driven) or HIGHZ"),
    CheckKind("never_drive", "error",
              "a net the board marks never_drive is driven",
              "leave the net released; the board file says nothing may drive it"),
    CheckKind("hold", "error",
              "a net the board says must be held is not held at its value",
              "drive the net to its held value in every step of the test"),
    CheckKind("no_preload", "error",
              "a device enters EXTEST or CLAMP without its boundary register loaded first",
              "load the boundary register under SAMPLE/PRELOAD (or PRELOAD) before EXTEST"),
    CheckKind("cannot_capture", "error",
              "an expectation on a cell that cannot capture the pin in this mode",
              "expect the net on a receiving device in EXTEST or SAMPLE, or use a cell that "
              "observes its pin"),
    CheckKind("not_driving_mode", "error",
              "a drive on a device that is not in a driving mode",
              "put the device in EXTEST (or CLAMP) for this step"),
    CheckKind("bypass_expect", "error",
              "an expectation on a device left in BYPASS",
              "put the device in SAMPLE or EXTEST for this step"),
    CheckKind("compliance", "error",
              "a compliance-enable pin is not held at its pattern",
              "hold the net at the pattern in the board file (hold: or a pull)"),
    CheckKind("tck_too_fast", "error",
              "the declared TCK is above a device's TAP_SCAN_CLOCK maximum",
              "declare a lower tck"),
    CheckKind("self_test_idle", "error",
              "RUNBIST or INTEST without the idle clocks its BSDL execution attribute asks for",
              "add `wait N clocks` (or a time) while the device is in that mode"),
    CheckKind("floating", "warning",
              "an expectation on a net that nothing drives in that step",
              "drive the net, or expect what the receiver technology or the pull makes it read"),
    CheckKind("short_fight", "warning",
              "adjacent nets driven to opposite values would fight for too long if shorted",
              "keep such vectors short: raise the TCK, or split the step"),
)}


@dataclass(frozen=True, slots=True)
class Finding:
    """One check's finding, before overrides and severities are applied."""

    check: str
    message: str
    span: SourceSpan | None = None
    test: str | None = None
    step: str | None = None
    record: int | None = None  # the shift-record index, for JSON input
    hint: str | None = None

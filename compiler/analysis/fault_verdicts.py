"""Verdicts of fault grading and the report they make: per fault, and coverage per class.

Shared by the fast grader and the cycle-level virtual board, which must reach the same
verdict by the same rules: a fault is detected when some gradable compared bit is known and
differs from the expected value, possibly detected when none differs but some becomes X,
not detected otherwise. Gradable bits are the compared bits the fault-free board itself
reproduces.
"""

from __future__ import annotations

import json
from collections import Counter
from dataclasses import dataclass

from bitarray import bitarray

from ..sim.faults import FAULT_CLASSES, Fault
from ..sim.virtual_board import SimulationResult
from .bit_meaning import BitMeaning, ScanIndex

__all__ = [
    "DETECTED",
    "POSSIBLY_DETECTED",
    "NOT_DETECTED",
    "Detection",
    "FaultVerdict",
    "ClassCoverage",
    "GradingReport",
    "verdict_from_simulation",
]

DETECTED = "detected"
POSSIBLY_DETECTED = "possibly detected"
NOT_DETECTED = "not detected"


@dataclass(frozen=True, slots=True)
class Detection:
    """Where a fault first shows: the scan record, the bit in it, its cycle and meaning."""

    record: int
    scan_bit: int
    cycle: int
    meaning: BitMeaning


@dataclass(frozen=True, slots=True)
class FaultVerdict:
    fault: Fault
    verdict: str
    first: Detection | None = None  # first detecting bit (first X bit when possibly detected)
    reason: str | None = None  # why it is not detected
    graded_by: str = "masks"  # "masks" (bit-parallel) or "cycles" (the virtual board)

    def as_data(self) -> dict[str, object]:
        data: dict[str, object] = {"fault": self.fault.spec, "class": self.fault.fault_class,
                                   "verdict": self.verdict}
        if self.first is not None:
            data["first"] = self.first.meaning.as_data()
        if self.reason is not None:
            data["reason"] = self.reason
        return data


@dataclass(frozen=True, slots=True)
class ClassCoverage:
    name: str
    total: int
    detected: int
    possibly: int

    @property
    def not_detected(self) -> int:
        return self.total - self.detected - self.possibly

    @property
    def coverage(self) -> float:
        return self.detected / self.total if self.total else 0.0

    def as_data(self) -> dict[str, object]:
        return {"total": self.total, "detected": self.detected, "possibly_detected": self.possibly,
                "not_detected": self.not_detected, "coverage": round(self.coverage, 4)}


@dataclass(frozen=True)
class GradingReport:
    verdicts: tuple[FaultVerdict, ...]
    excluded_bits: int = 0  # compared bits the fault-free board does not reproduce
    simulated: int = 0  # faults the cycle-level virtual board had to play

    def coverage(self) -> dict[str, ClassCoverage]:
        """Per fault class (those with faults), then "all": counted in one pass over the verdicts."""
        tally = Counter((v.fault.fault_class, v.verdict) for v in self.verdicts)
        out: dict[str, ClassCoverage] = {}
        for name in FAULT_CLASSES + ("all",):
            counts = tally.items() if name == "all" else [(key, n) for key, n in tally.items() if key[0] == name]
            total = sum(n for _, n in counts)
            if not total and name != "all":
                continue
            out[name] = ClassCoverage(name, total, sum(n for key, n in counts if key[1] == DETECTED),
                                      sum(n for key, n in counts if key[1] == POSSIBLY_DETECTED))
        return out

    def as_data(self) -> dict[str, object]:
        return {"faults": [v.as_data() for v in self.verdicts],
                "coverage": {name: c.as_data() for name, c in self.coverage().items()},
                "excluded_bits": self.excluded_bits}

    def render_json(self) -> str:
        """`as_data()` as indented JSON with each fault's verdict on one line.

        A board's universe has a hundred thousand faults; the standard library's encoder
        writes compact JSON in C but indented JSON in Python, so the verdicts are encoded
        compactly and only the document around them is indented.
        """
        data = {"coverage": {name: c.as_data() for name, c in self.coverage().items()},
                "excluded_bits": self.excluded_bits}
        rest = json.dumps(data, indent=2)[1:].lstrip("\n")  # its keys, indented, and the "}"
        if not self.verdicts:
            return '{\n  "faults": [],\n' + rest
        body = ",\n".join(_VerdictLines().lines(self.verdicts))
        return '{\n  "faults": [\n' + body + "\n  ],\n" + rest

    def render(self, *, details: bool = True) -> str:
        lines: list[str] = []
        if details:
            width = max((len(v.fault.spec) for v in self.verdicts), default=10)
            described: dict[int, str] = {}  # per detection: faults share their first bits
            for v in self.verdicts:
                line = f"{v.fault.spec:<{width}}  {v.verdict}"
                if v.first is not None:
                    text = described.get(id(v.first))
                    if text is None:
                        text = described[id(v.first)] = v.first.meaning.describe()
                    line += f"  first: {text}"
                if v.reason:
                    line += f"  ({v.reason})"
                lines.append(line)
            lines.append("")
        lines.append("coverage (detected / faults; possibly detected not counted):")
        for name, c in self.coverage().items():
            label = "all faults" if name == "all" else name
            lines.append(f"  {label:<10} {c.detected:>6} / {c.total:<6} {100 * c.coverage:6.1f} %"
                         f"   possibly {c.possibly}, not detected {c.not_detected}")
        if self.excluded_bits:
            lines.append(f"note: {self.excluded_bits} compared bits fail on the fault-free board and "
                         "were left out of grading")
        return "\n".join(lines) + "\n"


class _VerdictLines:
    """Each verdict's `as_data()` as one line of compact JSON, exactly as the standard library's
    encoder writes it (separators ", " and ": ", ASCII only), put together from pieces encoded
    once: a universe's faults share their classes, verdicts, reasons and first bits."""

    def __init__(self) -> None:
        self.encode = json.JSONEncoder(separators=(", ", ": ")).encode
        self.middles: dict[tuple[str, str], str] = {}  # class and verdict, encoded with their keys
        self.firsts: dict[int, str] = {}  # id of a Detection -> its meaning, encoded with its key
        self.reasons: dict[str, str] = {}

    def lines(self, verdicts: tuple[FaultVerdict, ...]) -> list[str]:
        encode, middles, firsts, reasons = self.encode, self.middles, self.firsts, self.reasons
        string = json.encoder.encode_basestring_ascii  # what `encode` does with a str
        lines = []
        for v in verdicts:
            fault = v.fault
            key = (fault.fault_class, v.verdict)
            middle = middles.get(key)
            if middle is None:
                middle = middles[key] = f', "class": {encode(key[0])}, "verdict": {encode(key[1])}'
            first = v.first
            if first is None:
                shown = ""
            else:
                shown = firsts.get(id(first))  # type: ignore[assignment]
                if shown is None:
                    shown = firsts[id(first)] = ', "first": ' + encode(first.meaning.as_data())
            reason = v.reason
            if reason is not None:
                why = reasons.get(reason)
                if why is None:
                    why = reasons[reason] = ', "reason": ' + encode(reason)
                shown += why
            lines.append(f'    {{"fault": {string(fault.spec)}{middle}{shown}}}')
        return lines


def verdict_from_simulation(fault: Fault, result: SimulationResult, gradable: bitarray,
                            index: ScanIndex) -> FaultVerdict:
    """The verdict the cycle-level virtual board gives a fault (the same rules as the masks)."""
    expected = result.cycles.tdo
    detect = gradable & result.known & (result.tdo ^ expected)
    first = detect.find(1)
    if first >= 0:
        return FaultVerdict(fault, DETECTED, _cycle_detection(index, first), graded_by="cycles")
    possible = gradable & ~result.known
    first = possible.find(1)
    if first >= 0:
        return FaultVerdict(fault, POSSIBLY_DETECTED, _cycle_detection(index, first), graded_by="cycles")
    return FaultVerdict(fault, NOT_DETECTED, reason="no compared bit sees a different value",
                        graded_by="cycles")


def _cycle_detection(index: ScanIndex, cycle: int) -> Detection:
    meaning = index.meaning(cycle)
    return Detection(meaning.record if meaning.record is not None else -1,
                     meaning.scan_bit if meaning.scan_bit is not None else -1, cycle, meaning)

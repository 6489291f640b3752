"""`scanloom diagnose`: from the TDO a board returned to the faults a repair bench can fix.

The capture is compared with the shift file's expectations over the whole cycle stream; every
failing bit is named (record, test, step, device, cell, port, package pin, net). Bits that no
net can change (instruction captures, bypass bits, bits pushed through the chain) mean a
broken scan path, located to where it breaks; an identification register that alone reads
wrong is a different part. Otherwise the pin captures are explained by single faults of the
nets (stuck-at, open, short), each with the ambiguity group of the faults that fit equally.
Text for the bench (most likely fault first, pins and nets named), JSON for tools.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, replace
from pathlib import Path

from ..backend.cycle_stream import CycleStream
from ..backend.records import ScanProgram
from ..collector import collector_paused
from ..diagnostics import Diagnostic, Diagnostics, ScanloomError
from ..models.board import Board, PinRef
from .capture_log import CaptureLog, read_capture
from .chain_faults import (
    ChainFinding, chain_evidence, first_scans_after_reset, identity_mismatches, locate_chain_break,
)
from .explain import Explanation, explain_pin_failures
from .failing_bits import Comparison, FailingBit, compare_capture
from .fault_model import Candidate
from .observations import CellObservation, StateObservations
from .scan_pins import BoardPins
from .tap_check import TapChecker

__all__ = ["DiagnosedFault", "Diagnosis", "diagnose_capture", "diagnose_files", "load_shift_and_board"]


@dataclass(frozen=True)
class DiagnosedFault:
    """One explanation: what it is, the faults that fit it (most likely first), where."""

    kind: str  # "open", "short", "stuck-at", "chain" or "identity"
    summary: str
    faults: tuple[str, ...]  # fault specs, the ambiguity group
    nets: tuple[str, ...]
    pins: tuple[str, ...]  # "REF.PORT (pin P)"
    details: tuple[str, ...]
    bits: int  # failing bits it explains
    certain: bool = True  # False when it rests on what the model cannot predict
    candidates: tuple[tuple[str, ...], ...] = ()  # the most likely faults, each with its names
    weaker: tuple[str, ...] = ()  # faults that fit too, but less well (in `faults` after them)

    def as_data(self) -> dict[str, object]:
        return {"kind": self.kind, "summary": self.summary, "faults": list(self.faults),
                "candidates": [list(c) for c in self.candidates], "weaker": list(self.weaker),
                "nets": list(self.nets), "pins": list(self.pins), "details": list(self.details),
                "failing_bits": self.bits, "certain": self.certain}


@dataclass(frozen=True)
class Diagnosis:
    shift_file: str
    capture: str
    compared: int
    failing: tuple[FailingBit, ...]
    explanations: tuple[DiagnosedFault, ...]
    unexplained: int

    @property
    def passed(self) -> bool:
        return not self.failing

    def as_data(self) -> dict[str, object]:
        return {"shift_file": self.shift_file, "capture": self.capture, "compared": self.compared,
                "failing": len(self.failing), "passed": self.passed,
                "explanations": [e.as_data() for e in self.explanations],
                "unexplained_bits": self.unexplained,
                "failing_bits": [bit.as_data() for bit in self.failing]}

    def to_json(self) -> str:
        return json.dumps(self.as_data(), indent=2) + "\n"

    def render(self, limit: int = 50) -> str:
        head = f"{self.capture} against {self.shift_file}: "
        if self.passed:
            return head + f"the capture matches: all {self.compared} compared bits as expected\n"
        lines = [head + f"{len(self.failing)} of {self.compared} compared bits fail"]
        for number, fault in enumerate(self.explanations, start=1):
            lines.append(f"{number}. {fault.summary}")
            for pin in fault.pins:
                lines.append(f"     {pin}")
            for detail in fault.details:
                lines.append(f"     {detail}")
        if self.unexplained:
            lines.append(f"{self.unexplained} failing bits fit no single fault of the nets")
        shown = self.failing if limit <= 0 else self.failing[:limit]
        lines.append(f"failing bits ({len(self.failing)}):")
        lines += ["  " + bit.describe() for bit in shown]
        if len(shown) < len(self.failing):
            lines.append(f"  ... and {len(self.failing) - len(shown)} more (--limit 0 shows all)")
        return "\n".join(lines) + "\n"


def _listed(specs: tuple[str, ...], limit: int = 8) -> str:
    return ", ".join(specs[:limit]) + (f" and {len(specs) - limit} more" if len(specs) > limit else "")


def load_shift_and_board(path: str | Path) -> tuple[ScanProgram, CycleStream, Board]:
    """A shift file and the board it names; ScanloomError for bad input."""
    from ..backend.shiftfile import read_shift_file
    from ..models.board_loader import load_board

    program, cycles = read_shift_file(path)
    if not Path(program.board).is_file():
        raise ScanloomError([Diagnostic(
            "error", f"{path} names the board file {program.board}, which does not exist", None,
            hint="keep the shift file beside its board, or compile the program again")])
    board = load_board(program.board, Diagnostics())
    return program, cycles, board


def diagnose_files(shift_file: str | Path, capture_file: str | Path) -> Diagnosis:
    program, cycles, board = load_shift_and_board(shift_file)
    capture = read_capture(capture_file, cycles.count)
    return diagnose_capture(program, cycles, board, capture, str(shift_file))


def diagnose_capture(program: ScanProgram, cycles: CycleStream, board: Board, capture: CaptureLog,
                     shift_file: str = "", pins: BoardPins | None = None) -> Diagnosis:
    with collector_paused():  # acyclic records only: no collector passes over a large heap
        comparison = compare_capture(program, cycles, capture, board)
        if comparison.passed:
            return Diagnosis(shift_file, capture.path, comparison.compared, (), (), 0)
        pins = pins if pins is not None else BoardPins(board)
        observations = StateObservations(program, cycles, board, pins, capture)
        return _Diagnoser(board, pins, observations, comparison, shift_file, cycles).run()


class _Diagnoser:
    def __init__(self, board: Board, pins: BoardPins, observations: StateObservations,
                 comparison: Comparison, shift_file: str, cycles: CycleStream) -> None:
        self.board = board
        self.pins = pins
        self.obs = observations
        self.comparison = comparison
        self.shift_file = shift_file
        self.state_of_record = {event.record: event.state for event in observations.states.captures}
        self.checker = TapChecker(observations.program, cycles, board, comparison.capture)

    def pin_reader(self, bit: FailingBit) -> bool:
        state = self.state_of_record.get(bit.record) if bit.record is not None else None
        if state is None or bit.device is None or bit.bit is None:
            return False
        return self.obs.boundary_cell_is_pin_reader(bit.device, bit.bit, 1 << state)

    def run(self) -> Diagnosis:
        bits = self.comparison.bits
        evidence = chain_evidence(bits, self.pin_reader)
        faults: list[DiagnosedFault] = []
        unexplained = 0
        identities = identity_mismatches(bits, evidence)
        if evidence:
            fresh = first_scans_after_reset(self.obs.program.records)
            finding = self.confirm(locate_chain_break(self.board, evidence, fresh))
            faults.append(self.chain_fault(finding, path_bits=True))
        elif identities and len(identities) == 1 and all(b.register == "DEVICE_ID" for b in bits):
            faults += [self.identity_fault(ref, found) for ref, found in identities.items()]
        else:
            cells = self.failing_cells()
            explanations, unexplained = explain_pin_failures(self.obs, cells)
            # A net shorted onto a TAP signal garbles scans only while the net holds the value
            # that wins the short, and what it garbles may look like net faults: such suspects
            # that could have struck in time are played on the virtual board.
            net_faults = [self.net_fault(e) for e in explanations]
            if not self.checker.affordable(1) and explanations and not unexplained:
                faults += net_faults  # no suspect could be played: the nets' explanations stand
                for ref, found in identities.items():
                    faults.append(self.identity_fault(ref, found))
                return Diagnosis(self.shift_file, self.comparison.capture.path,
                                 self.comparison.compared, bits, tuple(faults), unexplained)
            failing_nets = {b.net for b in bits if b.net}
            finding = locate_chain_break(self.board, list(bits))
            ordered = sorted(finding.suspects,
                             key=lambda spec: not any(net in spec.split(",")[0] for net in failing_nets))
            finding = self.confirm(replace(finding, suspects=tuple(ordered)), opens=False)
            # One plain fault of one or two nets that reproduces every failing bit for sure.
            simple = (not unexplained and len(explanations) == 1 and not explanations[0].unknown
                      and len(explanations[0].group[0].nets) <= 2)
            if finding.confirmed and simple:
                # TAP suspects that reproduce every failing bit as well are as likely and join
                # the net fault's group; those that only fit it come last in the group.
                rest = tuple(spec for spec in finding.suspects if spec not in finding.exact)
                net_faults[0] = self.with_tap_suspects(net_faults[0], finding.exact, rest)
            elif finding.confirmed or unexplained or not explanations:
                faults.append(self.chain_fault(finding, path_bits=False))
            faults += net_faults
            for ref, found in identities.items():
                faults.append(self.identity_fault(ref, found))
        return Diagnosis(self.shift_file, self.comparison.capture.path, self.comparison.compared,
                         bits, tuple(faults), unexplained)

    def confirm(self, finding: ChainFinding, *, opens: bool = True) -> ChainFinding:
        """Keep the suspects that reproduce the capture on the virtual board, when affordable."""
        if not self.checker.affordable(len(finding.suspects)):
            return finding
        first = self.comparison.bits[0].cycle if self.comparison.bits else 0
        confirmed = self.checker.confirmed(finding.suspects, self.obs, first, opens)
        if not confirmed:
            return finding
        return replace(finding, suspects=tuple(spec for spec, _ in confirmed), confirmed=True,
                       exact=tuple(spec for spec, whole in confirmed if whole))

    def failing_cells(self) -> list[CellObservation]:
        found: dict[tuple[int, int], CellObservation] = {}
        for bit in self.comparison.bits:
            if bit.register != "BOUNDARY" or bit.port is None or bit.device is None:
                continue
            pin = PinRef(bit.device, bit.port)
            for cell in self.obs.cells_of(pin):
                if cell.number == bit.bit and cell.failing:
                    found[(cell.device, cell.number)] = cell
        return list(found.values())

    @staticmethod
    def with_tap_suspects(fault: DiagnosedFault, exact: tuple[str, ...],
                          weaker: tuple[str, ...]) -> DiagnosedFault:
        details = list(fault.details)
        if exact:
            details.append("fits equally, played on the virtual board: " + _listed(exact)
                           + " (a net shorted onto a TAP signal)")
        if weaker:
            details.append("less likely, played on the virtual board: " + _listed(weaker)
                           + " (they leave some failing bits undefined)")
        return replace(fault, faults=fault.faults + exact + weaker, details=tuple(details),
                       candidates=fault.candidates + tuple((spec,) for spec in exact),
                       weaker=fault.weaker + weaker)

    # ---- wording ---------------------------------------------------------------------------
    def pin_text(self, pin: PinRef) -> str:
        entry = self.board.devices.get(pin.ref)
        package = entry.device.pins_of(pin.port) if entry is not None else ()
        return f"{pin} (pin {', '.join(package)})" if package else str(pin)

    def net_pins(self, net: str) -> str:
        pins = ", ".join(self.pin_text(pin) for pin in self.board.nets[net].pins)
        return f"{net}: {pins}"

    def steps_of(self, states: frozenset[int]) -> str:
        """The tests and steps whose responses show the explained bits."""
        records = self.obs.program.records
        steps: dict[str, list[str]] = {}
        for event in self.obs.states.captures:
            if event.state in states:
                record = records[event.record]
                check = next((c for c in record.checks if c.register == "BOUNDARY"), None)
                test = (check.test if check else record.test) or ""
                step = (check.step if check else record.step) or ""
                names = steps.setdefault(test, [])
                if step and step not in names:
                    names.append(step)
        parts = []
        for test, names in steps.items():
            shown = ", ".join(names[:6]) + (f" and {len(names) - 6} more" if len(names) > 6 else "")
            parts.append(f"{test} (step{'s' * (len(names) != 1)} {shown})" if names else test)
        return ("in test" + ("s " if len(parts) > 1 else " ") + "; ".join(parts)) if parts else ""

    def candidate_summary(self, candidate: Candidate) -> str:
        nets = candidate.nets
        if candidate.kind == "stuck-at":
            return f"net {nets[0]} stuck at {candidate.value}: every receiver on it reads {candidate.value}"
        if candidate.kind == "open" and candidate.pins:
            pin = candidate.pins[0]
            technology = self.board.technology_of(pin.ref)
            floating = ("reads 1, as a floating TTL input does" if technology == "ttl"
                        else "reads an undefined level, as a floating CMOS input does")
            drives, reads = pin in self.pins.outputs, pin in self.pins.observers
            if drives and reads:
                return (f"open pin {self.pin_text(pin)} on net {nets[0]}: cut from the net, its driver "
                        f"no longer reaches the other pins and its receiver {floating}")
            if drives:
                return (f"open pin {self.pin_text(pin)} on net {nets[0]}: its driver no longer "
                        "reaches the net, which floats or follows its pull")
            return f"open pin {self.pin_text(pin)} on net {nets[0]}: the receiver {floating}"
        if candidate.kind == "open":
            return f"net {nets[0]} open: every pin is cut from it and its receivers float"
        joined = " and ".join(nets) if len(nets) == 2 else ", ".join(nets)
        if candidate.mode == "and":
            return f"short between nets {joined} (wired-AND: 0 dominates, each reads the AND of their codes)"
        if candidate.mode == "or":
            return f"short between nets {joined} (wired-OR: 1 dominates, each reads the OR of their codes)"
        return f"short between nets {joined}, {candidate.pins[0]} dominating: both read its value"

    def net_fault(self, explanation: Explanation) -> DiagnosedFault:
        first = explanation.group[0]
        nets = tuple(dict.fromkeys(net for c in explanation.group for net in c.nets))
        pins: list[str] = [self.net_pins(net) for net in nets if net in self.board.nets][:8]
        details = []
        if first.also:
            details.append("the same fault under another name: " + ", ".join(first.also))
        if len(explanation.group) > 1:
            others = [c.spec for c in explanation.group[1:]]
            shown = ", ".join(others[:8]) + (f" and {len(others) - 8} more" if len(others) > 8 else "")
            details.append(f"fits equally: {shown}")
        where = self.steps_of(explanation.states)
        details.append(f"explains {explanation.covered} failing bit{'s' * (explanation.covered != 1)}"
                       + (f" {where}" if where else ""))
        if explanation.unknown:
            details.append(f"{explanation.unknown} of them only because the model cannot predict "
                           "them (logic without boundary scan, fighting drivers)")
        return DiagnosedFault(first.kind, self.candidate_summary(first),
                              tuple(spec for c in explanation.group for spec in c.specs), nets,
                              tuple(pins), tuple(details), explanation.covered,
                              explanation.unknown == 0, tuple(c.specs for c in explanation.group))

    def chain_fault(self, finding: ChainFinding, *, path_bits: bool) -> DiagnosedFault:
        chain = self.board.chain
        if finding.located and finding.after is not None:
            position = self.board.devices[finding.after].position
            upstream = ", ".join(e.ref for e in chain[:position + 1])
            downstream = ", ".join(e.ref for e in chain[position + 1:])
            summary = (f"broken scan chain after {finding.after} (chain position {position})"
                       + (f", before {finding.before}" if finding.before else ", before the board's TDO"))
            details = [f"the first failing scan (record {finding.scan_record}) garbles the captures of "
                       f"{upstream}" + (f"; those of {downstream} arrive intact" if downstream else "")]
        elif path_bits:
            summary = "broken scan chain: bits that no net can change fail"
            details = [f"the first such scan (record {finding.scan_record}) is a data scan: what was "
                       "shifted in earlier may have been garbled on its way, so the break is not "
                       "located; a TAP signal (TDI, TDO, TMS, TCK, TRST) is open or shorted"]
        else:
            summary = "disturbed scan path: the failures fit no fault of the nets"
            details = ["no instruction capture or bypass bit failed: the path breaks only while the "
                       "nets hold some values, as when a net is shorted onto a TAP signal"]
        shown = ", ".join(finding.suspects[:10])
        more = len(finding.suspects) - 10
        label = ("played on the virtual board, these reproduce every failing bit"
                 if finding.confirmed else "suspects")
        details.append(f"{label}: " + shown + (f" and {more} more" if more > 0 else ""))
        details.append("repair the chain first: until it is intact, no other failing bit means anything")
        top = finding.exact or finding.suspects
        weaker = tuple(spec for spec in finding.suspects if spec not in top)
        return DiagnosedFault("chain", summary, top + weaker, (), (), tuple(details),
                              finding.evidence, finding.located, tuple((spec,) for spec in top),
                              weaker)

    def identity_fault(self, ref: str, bits: list[FailingBit]) -> DiagnosedFault:
        entry = self.board.devices[ref]
        expected = entry.device.idcode or ""
        got = list(expected.replace("X", "0"))
        for bit in bits:
            if bit.bit is not None and bit.got in "01":
                got[len(expected) - 1 - bit.bit] = bit.got
        read = "".join(got)
        summary = (f"{ref} ({entry.device.entity}) identifies as 0x{int(read, 2):08X}, its BSDL says "
                   f"{expected}: another part or revision is fitted at chain position {entry.position}")
        fields = []
        for name, (high, low) in (("version", (31, 28)), ("part number", (27, 12)),
                                  ("maker code", (11, 1))):
            if any(bit.bit is not None and low <= bit.bit <= high for bit in bits):
                fields.append(name)
        details = (f"differing fields: {', '.join(fields)}",) if fields else ()
        return DiagnosedFault("identity", summary, (), (), (ref,), details, len(bits))

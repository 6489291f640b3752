"""What `scanloom simulate` and `scanloom faults` do, apart from the command line itself.

Both start from a program's scans and cycles: read back from a shift file (`DIR/<stem>.json`),
or, for `faults`, compiled in memory from a `.loom` program. The board comes from the path
the shift file records. `simulate` plays the cycles on the virtual board (with faults, if
given) and reports every failing bit by test, step, device, cell, port and net; `faults`
grades a list of faults or the board's fault universe.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path
from typing import Callable, Sequence

from bitarray import bitarray

from ..backend.cycle_stream import CycleStream
from ..backend.records import ScanProgram
from ..diagnostics import Diagnostic, Diagnostics, ScanloomError
from ..models.board import Board
from ..sim.electrical import ElectricalBoard, build_electrical
from ..sim.fault_effects import FaultEffect, fault_effect
from ..sim.faults import Fault, fault_universe, parse_fault_specs, read_faults_file
from ..sim.virtual_board import SimulationResult, VirtualBoard
from .bit_meaning import BitMeaning, ScanIndex
from .grading import GradingReport, grade_faults

__all__ = [
    "BoardRun",
    "load_shift_run",
    "load_program_run",
    "load_run",
    "combined_effect",
    "SimulationReport",
    "simulate_run",
    "capture_table",
    "grade_run",
    "faults_for",
]


@dataclass(frozen=True, eq=False)
class BoardRun:
    """A program's scans and cycles with the board they run on."""

    program: ScanProgram
    cycles: CycleStream
    board: Board
    electrical: ElectricalBoard


def _board_of(program: ScanProgram, where: str) -> tuple[Board, ElectricalBoard]:
    from ..models.board_loader import load_board

    diagnostics = Diagnostics()
    if not Path(program.board).is_file():
        raise ScanloomError([Diagnostic(
            "error", f"{where} names the board file {program.board}, which does not exist", None,
            hint="compile the program again, or keep the shift file beside its board")])
    board = load_board(program.board, diagnostics)
    return board, build_electrical(board, diagnostics)


def load_shift_run(path: str | Path) -> BoardRun:
    """A shift file and its board; raises ScanloomError for a bad file."""
    from ..backend.shiftfile import read_shift_file

    program, cycles = read_shift_file(path)
    board, electrical = _board_of(program, str(path))
    return BoardRun(program, cycles, board, electrical)


def load_program_run(path: str | Path, diagnostics: Diagnostics) -> BoardRun:
    """A `.loom` program compiled in memory (front end, computed expectations, scheduler, cycles)."""
    from ..backend.cycles import lay_out_cycles
    from ..backend.schedule import schedule
    from ..lang.frontend import load_program
    from .computed import compute_expectations

    program, board = load_program(path, diagnostics)
    electrical = build_electrical(board, Diagnostics())
    scan = schedule(program, board, compute_expectations(program, board, electrical))
    return BoardRun(scan, lay_out_cycles(scan), board, electrical)


def load_run(path: str | Path, diagnostics: Diagnostics) -> BoardRun:
    """A shift file (`.json`) or a program (anything else)."""
    if str(path).lower().endswith(".json"):
        return load_shift_run(path)
    return load_program_run(path, diagnostics)


def combined_effect(electrical: ElectricalBoard, faults: Sequence[Fault]) -> FaultEffect | None:
    """One effect for several faults injected together; they must touch different nodes."""
    if not faults:
        return None
    effects = [fault_effect(electrical, fault) for fault in faults]
    if len(effects) == 1:
        return effects[0]
    taken: dict[int, str] = {}
    problems: list[str] = []
    for effect in effects:
        for node in effect.replaced:
            other = taken.get(node)
            if other is not None:
                problems.append(f"{effect.fault.spec} and {other} both change "
                                f"{electrical.nodes[node].label}")
            taken[node] = effect.fault.spec
    taps = [e for e in effects if e.tap is not None]
    if len(taps) > 1:
        problems.append("more than one fault acts on TAP signals: "
                        + ", ".join(e.fault.spec for e in taps))
    if problems:
        raise ScanloomError([Diagnostic("error", problem, None,
                                        hint="faults injected together must touch different nets; "
                                             "simulate them in separate runs")
                             for problem in problems])
    groups = []
    replaced: list[int] = []
    tap = None
    for effect in effects:
        if effect.tap is not None:
            tap = effect.tap
            if tap.group is not None:
                tap = replace(tap, group=tap.group + len(groups))
        replaced.extend(effect.replaced)
        groups.extend(effect.groups)
    first = effects[0].fault
    return FaultEffect(first, tuple(replaced), tuple(groups), tap)


@dataclass(frozen=True)
class SimulationReport:
    result: SimulationResult
    failing: tuple[tuple[BitMeaning, int, str], ...]  # meaning, expected, got ("0", "1" or "X")
    compared: int
    unmodelled: int

    @property
    def passed(self) -> bool:
        return not self.failing

    def render(self, limit: int = 50) -> str:
        lines = []
        shown = self.failing if limit <= 0 else self.failing[:limit]
        for meaning, expected, got in shown:
            lines.append(f"cycle {meaning.cycle}: expected {expected}, board gave {got}: {meaning.describe()}")
        if len(shown) < len(self.failing):
            lines.append(f"... and {len(self.failing) - len(shown)} more failing bits (--limit 0 shows all)")
        for contention in self.result.contentions[:20]:
            lines.append(f"warning: contention on {contention.node} after cycle {contention.cycle}: "
                         + ", ".join(contention.drivers))
        verdict = "pass" if self.passed else f"fail: {len(self.failing)} of {self.compared} compared bits"
        summary = f"{verdict}"
        if self.passed:
            summary += f": all {self.compared} compared bits as expected"
        if self.unmodelled:
            summary += (f"; {self.unmodelled} bits of design-specific registers are not modelled by the "
                        "virtual board and were not checked")
        lines.append(summary)
        return "\n".join(lines) + "\n"


def simulate_run(run: BoardRun, faults: Sequence[Fault] = ()) -> SimulationReport:
    effect = combined_effect(run.electrical, faults)
    result = VirtualBoard(run.electrical, run.program, run.cycles, effect).run()
    index = ScanIndex(run.program, result.cycles)
    failing: list[tuple[BitMeaning, int, str]] = []
    bad: bitarray = result.differing | result.undefined
    expected = result.cycles.tdo
    for cycle in bad.search(1):
        got = str(result.tdo[cycle]) if result.known[cycle] else "X"
        failing.append((index.meaning(cycle), expected[cycle], got))
    compared = (result.cycles.mask & ~result.unmodelled).count()
    unmodelled = (result.cycles.mask & result.unmodelled).count()
    return SimulationReport(result, tuple(failing), compared, unmodelled)


def capture_table(result: SimulationResult) -> str:
    """The TDO the board returned as `cycle,tdo` rows (an undefined bit is written as 0)."""
    bits = (result.tdo & result.known).to01()
    return "cycle,tdo\n" + "".join(f"{cycle},{bit}\n" for cycle, bit in enumerate(bits))


def faults_for(run: BoardRun, specs: Sequence[str] = (), faults_file: str | None = None,
               universe: Sequence[str] = ()) -> tuple[Fault, ...]:
    """The faults named by spec strings, then those of a faults file, else the universe classes."""
    faults: list[Fault] = list(parse_fault_specs(specs, run.electrical)) if specs else []
    if faults_file is not None:
        faults.extend(read_faults_file(faults_file, run.electrical))
    if not specs and faults_file is None:
        faults.extend(fault_universe(run.electrical, universe))
    return tuple(faults)


def grade_run(run: BoardRun, faults: Sequence[Fault],
              progress: Callable[[int], None] | None = None) -> GradingReport:
    return grade_faults(run.electrical, run.program, run.cycles, faults, progress)

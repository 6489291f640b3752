"""Benchmark: generate the interconnect test of a 30,000-net board, compile it, diagnose a capture.

The board is boardgen's `large` one (64 invented devices of 1,500 boundary cells, about 30,000
nets, each output received by one or two inputs of other devices). Timed, each the best of
three runs, with the board already loaded (loading its 64 BSDL files and the board file is
timed apart, as it is the same for every command):

- generate: the board's pins and nets sorted into rounds and coded (modified counting
  sequence, Goel and McMahon 1982: ceil(log2(N + 2)) vectors), the program text written;
- compile: that text through the front end, the pre-hardware checks, the scheduler, the TAP
  cycle layout, the independent replay and the shift-file writer;
- diagnose: one capture of the board with a short between two nets (played on the virtual
  board, not timed) read, compared and explained.

Targets: generate + compile 3 s, diagnose 1 s. Run: python benchmarks/bench_generate.py
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path
from typing import Callable, TypeVar

sys.path.insert(0, str(Path(__file__).resolve().parent))

from boardgen import generate_board  # noqa: E402

from scanloom.analysis.board_runs import capture_table  # noqa: E402
from scanloom.analysis.capture_log import read_capture  # noqa: E402
from scanloom.analysis.diagnose import diagnose_capture  # noqa: E402
from scanloom.analysis.generate import board_reference, generate_program  # noqa: E402
from scanloom.analysis.prehardware import check_program  # noqa: E402
from scanloom.analysis.scan_pins import BoardPins  # noqa: E402
from scanloom.backend.cycles import lay_out_cycles  # noqa: E402
from scanloom.backend.schedule import schedule  # noqa: E402
from scanloom.backend.shiftfile import read_shift_file  # noqa: E402
from scanloom.backend.writers import write_outputs  # noqa: E402
from scanloom.collector import collector_paused  # noqa: E402
from scanloom.diagnostics import Diagnostics  # noqa: E402
from scanloom.lang.frontend import compile_source  # noqa: E402
from scanloom.models.board_loader import load_board  # noqa: E402
from scanloom.sim.electrical import build_electrical  # noqa: E402
from scanloom.sim.fault_effects import fault_effect  # noqa: E402
from scanloom.sim.faults import parse_fault_specs  # noqa: E402
from scanloom.sim.replay import replay  # noqa: E402
from scanloom.sim.virtual_board import VirtualBoard  # noqa: E402

GENERATE_AND_COMPILE_TARGET = 3.0
DIAGNOSE_TARGET = 1.0
T = TypeVar("T")


def best_of(runs: int, work: Callable[[], T]) -> tuple[float, T]:
    """The fastest of `runs` runs, each with the cycle collector paused as the commands run."""
    best, result = float("inf"), None
    for _ in range(runs):
        with collector_paused():
            start = time.perf_counter()
            result = work()
            best = min(best, time.perf_counter() - start)
    return best, result  # type: ignore[return-value]


def main() -> None:
    folder = Path(tempfile.mkdtemp(prefix="scanloom-bench-generate-"))
    board_file = generate_board("large", folder)
    program_file = folder / "interconnect.loom"
    out = folder / "out"
    start = time.perf_counter()
    board = load_board(board_file, Diagnostics())
    loading = time.perf_counter() - start

    def generate() -> str:
        generated = generate_program(board, board_reference(board_file, program_file), "interconnect",
                                     "counting", BoardPins(board))
        program_file.write_text(generated.text)
        return generated.text

    def compile_text() -> tuple:  # type: ignore[type-arg]
        diagnostics = Diagnostics()
        program = compile_source(text, str(program_file), board, diagnostics)
        scan = schedule(program, board)
        cycles = lay_out_cycles(scan)
        report = check_program(program, board, scan, cycles)
        assert not report.findings and not diagnostics.has_errors()
        assert replay(scan, cycles).ok
        write_outputs(scan, cycles, out, "interconnect", {"json"})
        return scan, cycles

    generate_s, text = best_of(3, generate)
    compile_s, (scan, cycles) = best_of(3, compile_text)
    nets = len(board.nets)
    lines = text.count("\n")
    print(f"board: {len(board.chain)} devices, {sum(e.device.boundary_length for e in board.chain)} cells, "
          f"{nets} nets (loaded in {loading:.1f} s)")
    print(f"program: {lines} lines, {len(text) / 1e6:.2f} MB; {len(scan.records)} records, "
          f"{cycles.count} TCK")
    total = generate_s + compile_s
    print(f"generate {generate_s:.2f} s + compile {compile_s:.2f} s = {total:.2f} s "
          f"(target {GENERATE_AND_COMPILE_TARGET:.0f} s)")

    electrical = build_electrical(board, Diagnostics())
    names = list(board.nets)
    fault = parse_fault_specs([f"short:{names[0]},{names[1]}"], electrical)[0]
    result = VirtualBoard(electrical, scan, cycles, fault_effect(electrical, fault)).run()
    capture_file = folder / "capture.csv"
    capture_file.write_text(capture_table(result))
    shift_file = out / "interconnect.json"
    reading_s, (shift_program, shift_cycles) = best_of(3, lambda: read_shift_file(shift_file))
    pins_s, pins = best_of(3, lambda: BoardPins(board))

    def diagnose():  # type: ignore[no-untyped-def]
        capture = read_capture(capture_file, shift_cycles.count)
        return diagnose_capture(shift_program, shift_cycles, board, capture, str(shift_file), pins)

    diagnose_s, found = best_of(3, diagnose)
    print(f"diagnose {diagnose_s:.2f} s (target {DIAGNOSE_TARGET:.0f} s): {len(found.failing)} failing bits, "
          f"first: {found.explanations[0].summary}")
    print(f"  besides: reading the shift file {reading_s:.2f} s, the board's pin tables {pins_s:.2f} s")


if __name__ == "__main__":
    main()

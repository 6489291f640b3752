"""Benchmark: parse and check a generated 100,000-line test program; the target is 3 s or less.

The program runs on the demo board (examples/irrigation) and has the shape of a large
production program: a few hundred tests, each setting modes, holding the guarded nets in a
short setup step, then a vector table through the self-check cluster or the valve lines, and
a few steps of scan-to-scan drives and expectations. Times are the best of three runs.
Run: python benchmarks/bench_language.py [LINES]
"""

from __future__ import annotations

import random
import sys
import time
from pathlib import Path

from scanloom.diagnostics import Diagnostics
from scanloom.lang.checks import check_program
from scanloom.lang.header import read_header
from scanloom.lang.includes import expand_includes
from scanloom.lang.lower import lower_program
from scanloom.lang.parser import parse_source
from scanloom.models.board_loader import load_board

TARGET_SECONDS = 3.0
EXAMPLES = Path(__file__).resolve().parent.parent / "examples" / "irrigation"

GROUPS = """\
group MUX_A = [MUX_A3, MUX_A2, MUX_A1, MUX_A0]
group MUX_B = [MUX_B3, MUX_B2, MUX_B1, MUX_B0]
group MUX_Y = [MUX_Y3, MUX_Y2, MUX_Y1, MUX_Y0]
group PARITY_IN = [PAR_D3, PAR_D2, PAR_D1, PAR_D0]
group VALVE_D = [VALVE_D7, VALVE_D6, VALVE_D5, VALVE_D4, VALVE_D3, VALVE_D2, VALVE_D1, VALVE_D0]
group DATA = [DATA7, DATA6, DATA5, DATA4, DATA3, DATA2, DATA1, DATA0]
"""


def generate_program(lines_wanted: int = 100_000, seed: int = 7) -> str:
    """A valid program of at least `lines_wanted` lines on the demo board."""
    rng = random.Random(seed)
    out = ['# generated benchmark program', 'board "irrigation.yaml"', "tck 10 MHz", ""]
    out.extend(GROUPS.splitlines())
    number = 0
    while len(out) < lines_wanted:
        number += 1
        kind = number % 3
        out.append("")
        out.append(f'test t{number} "generated test {number}" {{')
        out.append("    U1 EXTEST")
        out.append("    U2, U3, U4 SAMPLE")
        out.append("    step setup {")
        out.append("        drive WDOG_DIS = 1, MUX_OE_N = 0")
        out.append("    }")
        if kind == 0:
            out.append("    table {")
            out.append("        MUX_SEL  MUX_A  MUX_B  ->  MUX_Y")
            for _ in range(300):
                select, a, b = rng.randrange(2), rng.randrange(16), rng.randrange(16)
                out.append(f"        {select}  0x{a:X}  0x{b:X}  ->  0x{(b if select else a):X}")
            out.append("    }")
        elif kind == 1:
            out.append("    table parity {")
            out.append("        PARITY_IN  ->  PAR_ODD")
            for _ in range(300):
                value = rng.randrange(16)
                out.append(f"        0b{value:04b}  ->  {bin(value).count('1') % 2}")
            out.append("    }")
        else:
            for step in range(40):
                value = rng.randrange(256)
                out.append(f"    step s{step} {{")
                out.append(f"        drive VALVE_D = 0x{value:02X}, VALVE_LE = {step % 2}")
                out.append(f"        expect VALVE_D = 0x{value:02X}, VALVE_LE = {step % 2}")
                out.append("    }")
        out.append("}")
    return "\n".join(out) + "\n"


def best_of(runs: int, work) -> tuple[float, object]:
    best, result = float("inf"), None
    for _ in range(runs):
        start = time.perf_counter()
        result = work()
        best = min(best, time.perf_counter() - start)
    return best, result


def main() -> None:
    lines = int(sys.argv[1]) if len(sys.argv) > 1 else 100_000
    text = generate_program(lines)
    file = str(EXAMPLES / "generated.loom")
    board = load_board(EXAMPLES / "irrigation.yaml", Diagnostics())
    parse_source(text[:200].rsplit("\n", 1)[0] + "\n", file, Diagnostics())  # build the parser

    def parse():
        diagnostics = Diagnostics()
        program = parse_source(text, file, diagnostics)
        assert program is not None, diagnostics.render()
        return program

    def check(program):
        diagnostics = Diagnostics()
        files = expand_includes(program, file, diagnostics)
        header = read_header(program.items, diagnostics)
        plan = check_program(files, header, board, diagnostics)
        assert not diagnostics.has_errors(), diagnostics.render()[:2000]
        return plan

    parse_s, program = best_of(3, parse)
    check_s, plan = best_of(3, lambda: check(program))
    lower_s, ir = best_of(3, lambda: lower_program(plan, board, file, board.path))
    steps = sum(len(test.items) for test in ir.tests)
    total = parse_s + check_s
    print(f"program: {text.count(chr(10))} lines, {len(ir.tests)} tests, {steps} steps")
    print(f"parse  {parse_s:6.2f} s")
    print(f"check  {check_s:6.2f} s")
    print(f"parse + check {total:6.2f} s (target {TARGET_SECONDS:.1f} s): "
          f"{'met' if total <= TARGET_SECONDS else 'missed'}")
    print(f"lowering to the IR {lower_s:6.2f} s (not part of the target)")


if __name__ == "__main__":
    main()

"""A small synthetic board for the test-language tests, and helpers that run the front end on it.

    U1 "CTL"  IR 4: Q(0..3) three-state outputs sharing control cell 4, D a BC_7 bidirectional
              pin (control 6), IN a BC_1 input, P a two-state output; IDCODE, PRELOAD, CLAMP,
              HIGHZ, INTEST, USERCFG selecting CFGREG[8], a private SECRET.
    U2 "SEN"  IR 3: BC_4 inputs A(0..3) and E; IDCODE with open version bits; 1990 style.
    U3 "BUF"  IR 2: a three-state output Y, an input K; no IDCODE.
    U10       a part without boundary scan between U1.Q(3) and U2.A(3).
"""

from __future__ import annotations

import re

from chainfactory import idcode_for, make_board, make_device

from scanloom.diagnostics import Diagnostic, Diagnostics, ScanloomError
from scanloom.ir import Program
from scanloom.lang.frontend import compile_source
from scanloom.models.board import Board

__all__ = ["small_board", "run", "diagnose", "one", "U1_IDCODE", "U2_IDCODE"]

U1_IDCODE = idcode_for(0x1234)
U2_IDCODE = "XXXX" + idcode_for(0x0055)[4:]


def small_board() -> Board:
    ctl = make_device("CTL", 4, [
        (0, "BC_1", "Q(0)", "OUTPUT3", "X", 4, 0, "Z"),
        (1, "BC_1", "Q(1)", "OUTPUT3", "X", 4, 0, "Z"),
        (2, "BC_1", "Q(2)", "OUTPUT3", "X", 4, 0, "Z"),
        (3, "BC_1", "Q(3)", "OUTPUT3", "X", 4, 0, "Z"),
        (4, "BC_1", "*", "CONTROL", "0"),
        (5, "BC_7", "D", "BIDIR", "X", 6, 0, "Z"),
        (6, "BC_1", "*", "CONTROL", "0"),
        (7, "BC_1", "IN", "INPUT", "X"),
        (8, "BC_1", "P", "OUTPUT2", "0"),
    ], idcode=U1_IDCODE, preload=True, clamp=True, highz=True,
        extra_instructions={"INTEST": "1000", "USERCFG": "1001", "SECRET": "1010"},
        selects={"INTEST": "BOUNDARY", "USERCFG": "CFGREG", "SECRET": "BYPASS"},
        private=("SECRET",), user_registers={"CFGREG": 8})
    sen = make_device("SEN", 3, [
        (0, "BC_4", "A(0)", "INPUT", "X"),
        (1, "BC_4", "A(1)", "INPUT", "X"),
        (2, "BC_4", "A(2)", "INPUT", "X"),
        (3, "BC_4", "A(3)", "INPUT", "X"),
        (4, "BC_4", "E", "INPUT", "X"),
    ], idcode=U2_IDCODE, standard="STD_1149_1_1990")
    buf = make_device("BUF", 2, [
        (0, "BC_1", "Y", "OUTPUT3", "X", 1, 0, "Z"),
        (1, "BC_1", "*", "CONTROL", "0"),
        (2, "BC_1", "K", "INPUT", "X"),
    ])
    return make_board([("U1", ctl), ("U2", sen), ("U3", buf)], {
        "N0": ["U1.Q(0)", "U2.A(0)"],
        "N1": ["U1.Q(1)", "U2.A(1)"],
        "N2": ["U1.Q(2)", "U2.A(2)"],
        "N3": ["U1.Q(3)", "U10.A"],
        "Y": ["U10.Y", "U2.A(3)"],
        "BUS": ["U1.D", "U2.E", "U3.Y"],
        "LONE": ["U1.IN", "U3.K"],
        "LAMP": ["U1.P"],
    }, parts={"U10": ["A", "Y"]})


_BOARD = small_board()

HEADER = 'board "small.yaml"\ntck 10 MHz\ngroup N = [N2, N1, N0]\n'


def run(text: str, *, board: Board | None = None, strict: bool = False,
        header: bool = True) -> tuple[Program, Diagnostics]:
    """Compile `text` (after the standard header) on the small board; raises on errors."""
    diagnostics = Diagnostics(strict=strict)
    source = (HEADER + text) if header else text
    program = compile_source(source, "t.loom", board or _BOARD, diagnostics)
    return program, diagnostics


def diagnose(text: str, *, board: Board | None = None, strict: bool = False,
             header: bool = True) -> list[Diagnostic]:
    """Every diagnostic of `text`, sorted by position (errors stop the run as in the CLI)."""
    try:
        _, diagnostics = run(text, board=board, strict=strict, header=header)
        return diagnostics.sorted()
    except ScanloomError as error:
        return list(error.diagnostics)


def one(diagnostics: list[Diagnostic], severity: str, line: int, column: int,
        pattern: str) -> Diagnostic:
    """The single diagnostic at line:column (line counted in the text after the header)."""
    offset = HEADER.count("\n")
    found = [d for d in diagnostics if d.span is not None and d.span.line == line + offset
             and d.span.column == column]
    assert len(found) == 1, f"expected one diagnostic at {line}:{column}, got {diagnostics}"
    diagnostic = found[0]
    assert diagnostic.severity == severity, diagnostic
    assert re.fullmatch(pattern, diagnostic.message), diagnostic.message
    return diagnostic

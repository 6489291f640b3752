"""Random edits of valid programs never raise anything but a diagnostic (ScanloomError).

The edits (deletions, insertions of language fragments or stray characters, duplicated or
swapped lines, case changes) run through the whole front end on the demo board — parse,
includes, checks, lowering — and through the formatter.
"""

from __future__ import annotations

from functools import lru_cache
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from scanloom.diagnostics import Diagnostics, ScanloomError
from scanloom.lang.fmt import format_text
from scanloom.lang.frontend import compile_source
from scanloom.models.board import Board
from scanloom.models.board_loader import load_board

EXAMPLES = Path(__file__).resolve().parent.parent / "examples" / "irrigation"
SOURCES = {path.name: path.read_text() for path in sorted(EXAMPLES.glob("*.loom"))}
FRAGMENTS = ["drive ", "expect ", "release ", "= ", "0b1X", "0x", "0xZZ", "[7:0]", "[3]", "->",
             "{", "}", "\n", ",", "X", "Z", "computed", "U1.", "U9.D(3)", "MUX_A", "DATA[9:0]",
             "step s {\n", "table {\n", "wait 1 ms", "wait 1.5 clocks", "read U1 DEVICE_ID",
             "write U2 BOUNDARY 0", "using IDCODE", "allow hold \"\"", '"', "#", "U3 EXTEST",
             "U3 TRIM_LOAD", "tck 0 MHz", "group DATA = [DATA]", "include \"registers.loom\"",
             "\t", "é", "\\", "99999999999999999999", "0b", "()", "."]


@lru_cache(maxsize=1)
def demo_board() -> Board:
    return load_board(EXAMPLES / "irrigation.yaml", Diagnostics())


@st.composite
def edited(draw) -> tuple[str, str]:
    name = draw(st.sampled_from(sorted(SOURCES)))
    text = SOURCES[name]
    for _ in range(draw(st.integers(1, 4))):
        kind = draw(st.sampled_from(["delete", "insert", "characters", "line", "case"]))
        at = draw(st.integers(0, len(text)))
        if kind == "delete":
            end = min(len(text), at + draw(st.integers(1, 40)))
            text = text[:at] + text[end:]
        elif kind == "insert":
            text = text[:at] + draw(st.sampled_from(FRAGMENTS)) + text[at:]
        elif kind == "characters":
            text = text[:at] + draw(st.text(max_size=5)) + text[at:]
        elif kind == "line":
            lines = text.split("\n")
            i, j = draw(st.integers(0, len(lines) - 1)), draw(st.integers(0, len(lines) - 1))
            if draw(st.booleans()):
                lines.insert(j, lines[i])
            else:
                lines[i], lines[j] = lines[j], lines[i]
            text = "\n".join(lines)
        else:
            end = min(len(text), at + draw(st.integers(1, 30)))
            text = text[:at] + text[at:end].swapcase() + text[end:]
    return name, text


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(edited())
def test_edits_give_diagnostics_never_tracebacks(case: tuple[str, str]):
    name, text = case
    diagnostics = Diagnostics()
    try:
        compile_source(text, str(EXAMPLES / name), demo_board(), diagnostics)
    except ScanloomError as error:
        assert error.diagnostics
        assert all(d.severity in ("error", "warning", "note") for d in error.diagnostics)
        error.render()
    try:
        format_text(text, name)
    except ScanloomError as error:
        error.render()


def test_the_unedited_examples_compile():
    for name, text in SOURCES.items():
        compile_source(text, str(EXAMPLES / name), demo_board(), Diagnostics())

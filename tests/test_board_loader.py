"""The board loader: a good board reads fully; every malformed variant names file:line:col."""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

from scanloom.diagnostics import Diagnostics, ScanloomError
from scanloom.models.board import PinRef
from scanloom.models.board_loader import load_board
from scanloom.models.connectivity import net_roles

FIXTURES = Path(__file__).parent / "fixtures" / "boards"


def test_good_board_reads_every_section() -> None:
    board = load_board(FIXTURES / "good.yaml", Diagnostics())
    assert board.name == "loader test board"
    assert [d.ref for d in board.chain] == ["U1", "U2"]  # TDI -> TDO as listed
    assert [d.position for d in board.chain] == [0, 1]
    assert board.chain[0].device is board.chain[1].device  # one BSDL file read once
    assert board.technology_of("U1") == "cmos" and board.technology_of("U2") == "ttl"
    assert board.parts["U5"].logic == {"Y": "A & B"}
    assert board.parts["RN1"].series == (("1", "2"),)
    # "U2#4" is package pin 4, which the pin map gives to A(2).
    assert board.nets["D2"].pins == (PinRef("U1", "Y(2)"), PinRef("U2", "A(2)"))
    assert board.pulls == {"OE": "down"}
    assert board.hold == {"OE_FAR": "0"}
    assert board.never_drive == ("SPARE",)
    assert board.net_of_pin[PinRef("U5", "Y")] == "GATE"


def test_net_kinds() -> None:
    board = load_board(FIXTURES / "good.yaml", Diagnostics())
    roles = net_roles(board)
    assert roles["D0"].kind == "scan-to-scan"
    assert roles["D0"].drivers == (PinRef("U1", "Y(0)"),)
    assert roles["D0"].receivers == (PinRef("U2", "A(0)"),)
    assert roles["D1"].kind == "cluster"  # touches the logic part U5
    assert roles["GATE"].kind == "cluster"
    assert roles["SPARE"].kind == "drive-only"
    assert roles["IN_ONLY"].kind == "observe-only"
    # OE and OE_FAR are one node through the resistor pack: receivers only.
    assert roles["OE"].kind == roles["OE_FAR"].kind == "observe-only"


GOOD = (FIXTURES / "good.yaml").read_text()

# Each variant: (name, text to replace, replacement, anchored message pattern, line, column).
# Lines and columns are those of the good file after the replacement.
VARIANTS = [
    ("unknown top-level key", "never_drive: [SPARE]", "never_drive: [SPARE]\nnever_drve: [D0]",
     r"unknown key 'never_drve' in the board file", 26, 1),
    ("unknown ref in a net", "D0: [U1.Y(0), U2.A(0)]", "D0: [U1.Y(0), U3.A(0)]",
     r"unknown device or part 'U3'", 15, 17),
    ("unknown port", "D0: [U1.Y(0), U2.A(0)]", "D0: [U1.Y(0), U2.AA(0)]",
     r"U2 \(LEDGER8\) has no port 'AA\(0\)'", 15, 17),
    ("vector port without a bit", "D0: [U1.Y(0), U2.A(0)]", "D0: [U1.Y(0), U2.A]",
     r"U2\.A is a vector port; name one bit", 15, 17),
    ("pin in two nets", "SPARE: [U2.Y(0)]", "SPARE: [U2.Y(0), U1.Y(0)]",
     r"pin U1\.Y\(0\) is in two nets: 'D0' and 'SPARE'", 21, 20),
    ("duplicate ref", "  - {ref: U2, bsdl: ledger8.bsd, technology: ttl}",
     "  - {ref: U1, bsdl: ledger8.bsd, technology: ttl}",
     r"duplicate reference designator 'U1' in the chain", 6, 11),
    ("missing BSDL file", "  - {ref: U1, bsdl: ledger8.bsd}", "  - {ref: U1, bsdl: ledgr8.bsd}",
     r"BSDL file 'ledgr8\.bsd' of U1 not found", 5, 21),
    ("TAP pin in an ordinary net", "IN_ONLY: [U1.A(3)]", "IN_ONLY: [U1.A(3), U2.TDO]",
     r"U2\.TDO is a TAP pin; net 'IN_ONLY' must be declared as a TAP net", 22, 22),
    ("unknown part pin", "GATE: [U5.Y, U2.A(3)]", "GATE: [U5.Z, U2.A(3)]",
     r"part 'U5' has no pin 'Z'", 18, 10),
    ("logic on a pin the part lacks", 'logic: {Y: "A & B"}', 'logic: {Q: "A & B"}',
     r"'Q' is not a pin of part 'U5'", 10, 13),
    ("bad technology", "technology: cmos", "technology: ecl",
     r"unknown receiver technology 'ecl'", 3, 13),
    ("package pin not in the map", '"U2#4"', '"U2#44"',
     r"U2 has no package pin '44' in its pin map", 17, 17),
    ("pull on an unknown net", "pulls: {OE: down}", "pulls: {OEX: down}",
     r"'pulls' names unknown net 'OEX'", 23, 9),
    ("bad pull direction", "pulls: {OE: down}", "pulls: {OE: sideways}",
     r"'sideways' is not a valid pulls setting for 'OE'", 23, 13),
    ("held and never driven", "hold: {OE_FAR: 0}", "hold: {OE_FAR: 0, SPARE: 1}",
     r"net 'SPARE' is both held and never to be driven", 24, 19),
    ("duplicate net", "IN_ONLY: [U1.A(3)]", "IN_ONLY: [U1.A(3)]\n  D0: [U2.Y(3)]",
     r"'D0' appears twice in the same mapping", 23, 3),
    ("not YAML", "board: loader test board", "board: [unclosed",
     r"the board file is not valid YAML", 3, 11),
    ("ref both device and part", "  U5:\n    pins: [A, B, Y]", "  U1:\n    pins: [A, B, Y]",
     r"'U1' is both a scan device and a part", 8, 3),
]


@pytest.mark.parametrize("name, old, new, pattern, line, column", VARIANTS, ids=[v[0] for v in VARIANTS])
def test_malformed_board_is_located(tmp_path: Path, name: str, old: str, new: str, pattern: str,
                                    line: int, column: int) -> None:
    assert old in GOOD, name
    shutil.copy(FIXTURES / "ledger8.bsd", tmp_path / "ledger8.bsd")
    board_file = tmp_path / "board.yaml"
    board_file.write_text(GOOD.replace(old, new, 1))
    with pytest.raises(ScanloomError) as info:
        load_board(board_file, Diagnostics())
    first = [d for d in info.value.diagnostics if re.match(pattern, d.message)]
    assert first, [d.message for d in info.value.diagnostics]
    span = first[0].span
    assert span is not None and span.file == str(board_file)
    assert (span.line, span.column) == (line, column)
    rendered = info.value.render()
    assert re.search(rf"^{re.escape(str(board_file))}:{line}:{column}: error: {pattern}", rendered, re.M)
    assert "^" in rendered  # the caret under the offending text


def test_suggestion_for_misspelled_ref(tmp_path: Path) -> None:
    shutil.copy(FIXTURES / "ledger8.bsd", tmp_path / "ledger8.bsd")
    board_file = tmp_path / "board.yaml"
    board_file.write_text(GOOD.replace("D0: [U1.Y(0), U2.A(0)]", "D0: [U1.Y(0), U2.A(0), U55.A]"))
    with pytest.raises(ScanloomError) as info:
        load_board(board_file, Diagnostics())
    assert "did you mean: U5" in info.value.render()


def test_missing_board_file_is_a_diagnostic(tmp_path: Path) -> None:
    with pytest.raises(ScanloomError, match="cannot read the board file"):
        load_board(tmp_path / "nowhere.yaml", Diagnostics())


# ---- plain scalars: the quick string answer agrees with pyyaml's own resolver ----------------

_SCALAR_WORDS = ["yes", "No", "TRUE", "off", "On", "null", "NULL", "y", "N", "Nx", "N1_0", "U1.PA(0)",
                 "on_off", "true1", "0x1F", "1e3", "-5", "+.5", ".inf", ".NaN", "~", "=", "<<",
                 "2026-12-01", "12:30", "0o17", "0b101", "_a", "o", "t", "F", "Off2"]


@given(st.one_of(st.sampled_from(_SCALAR_WORDS),
                 st.text(alphabet="aoyntfNOYTF01.+-_:~=<e ", min_size=1, max_size=6)
                 .map(str.strip).filter(bool)))
def test_plain_scalars_resolve_as_pyyaml_resolves_them(value: str) -> None:
    # Oracle: pyyaml's SafeLoader and its YAML 1.1 implicit resolvers. The board loader answers
    # "string" without the resolvers for names that cannot be anything else.
    import yaml

    from scanloom.models.yaml_nodes import _Composer

    text = f"key: {value}\n"
    try:
        expected = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.YAMLError:
        return  # not a plain scalar on its own
    ours = yaml.compose(text, Loader=_Composer)
    assert ours.value[0][1].tag == expected.value[0][1].tag

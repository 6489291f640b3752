"""Malformed BSDL: each variant of a valid file gives one anchored message at file:line:col.

Every variant changes the valid fixture tidepool_io16.bsd in one place. The rule each check
enforces is named beside it: IEEE Std 1149.1-2001 and its Annex B (BSDL), clause numbers from
memory, or IEEE Std 1076 (VHDL) for the outer syntax. No variant may reach the user as a
Python traceback: all come back as ScanloomError carrying diagnostics with a source line.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from scanloom.diagnostics import Diagnostic, Diagnostics, ScanloomError
from scanloom.models.bsdl import parse_bsdl, read_bsdl

FIXTURES = Path(__file__).parent / "fixtures" / "bsdl"
VALID = (FIXTURES / "tidepool_io16.bsd").read_text()
FILE = "tidepool_io16.bsd"

# (name, [(old, new), ...], anchored message pattern, "line:col")
VARIANTS = [
    # IEEE Std 1076: every declaration ends with `;`.
    ("missing-semicolon", [("entity is 4;", "entity is 4")],
     r"unexpected `attribute`", "67:2"),
    # IEEE Std 1076, 13.6: a string literal ends on its own line.
    ("unterminated-string", [('"XX01";', '"XX01;')],
     r"this string is not closed on its line", "82:61"),
    ("unterminated-later-piece", [('"PRIV_TRIM (1100)";', '"PRIV_TRIM (1100);')],
     r"this string is not closed on its line", "80:3"),
    ("ampersand-without-string", [('"PRIV_SCAN (101X), " &', '"PRIV_SCAN (101X), " & ;')],
     r"`&` must join two strings", "79:26"),
    ("truncated", [("end TIDEPOOL_IO16;", "")],
     r"the file ends before the entity is complete", "147:56"),
    # IEEE Std 1076 port modes; BSDL uses in, out, inout, buffer, linkage (B.8.1, from memory).
    ("bad-direction", [("TDO             : out    bit;", "TDO             : ouput  bit;")],
     r"`ouput` is not a port direction", "13:21"),
    ("vector-without-range", [("bit_vector(0 to 3);", "bit_vector;")],
     r"a `bit_vector` port needs its range", "18:28"),
    ("end-name", [("end TIDEPOOL_IO16;", "end TIDEPOOL_IO61;")],
     r"`end TIDEPOOL_IO61` does not close the entity `TIDEPOOL_IO16`", "149:5"),
    ("stray-character", [("attribute INSTRUCTION_LENGTH", "$attribute INSTRUCTION_LENGTH")],
     r"unexpected character `\$`", "65:2"),
    # B.8.8 (from memory): opcodes have INSTRUCTION_LENGTH bits of 0, 1 or X.
    ("opcode-width", [('"EXTEST    (0000), "', '"EXTEST    (000), "')],
     r"opcode 000 of `EXTEST` has 3 bits, but INSTRUCTION_LENGTH is 4", "69:15"),
    ("opcode-bit", [('"HIGHZ     (0111), "', '"HIGHZ     (0121), "')],
     r"`2` is not a bit in an opcode of `HIGHZ`", "76:17"),
    # 8.1.1 (from memory): BYPASS, SAMPLE and EXTEST are mandatory.
    ("no-bypass", [('"BYPASS    (1111, 1110), "', '"BYPAS     (1111, 1110), "')],
     r"INSTRUCTION_OPCODE has no BYPASS instruction, which IEEE 1149.1 requires", "67:2"),
    ("no-sample", [('"SAMPLE    (0001), "', '"SAMPEL    (0001), "')],
     r"INSTRUCTION_OPCODE has no SAMPLE instruction, which IEEE 1149.1 requires", "67:2"),
    # 8.4.1 (b) (from memory): the all-ones code is BYPASS.
    ("all-ones-not-bypass", [('"PRIV_TRIM (1100)"', '"PRIV_TRIM (1111)"')],
     r"opcode 1111 of `PRIV_TRIM` decodes the all-ones code, which IEEE 1149.1 reserves for "
     r"BYPASS", "80:15"),
    # 7.1.1 (d) (from memory): the instruction register captures ...01.
    ("capture-not-01", [('"XX01"', '"XX10"')],
     r"INSTRUCTION_CAPTURE XX10 does not end in 01", "82:64"),
    # 12.1.1 (b) (from memory): IDCODE bit 0 is 1; the register has 32 bits.
    ("idcode-bit0", [('"1";                   -- always 1', '"0";')],
     r"IDCODE_REGISTER bit 0 is 0", "90:4"),
    ("idcode-length", [('"00011001011" &', '"0001100101" &')],
     r"IDCODE_REGISTER has 31 bits", "87:4"),
    # B.8.14 (from memory): cells 0 .. BOUNDARY_LENGTH-1 without gaps, in order.
    ("gap", [('" 12 (BC_7,  D(1),    bidir,    X,   5,    1,   Z), " &\n', "")],
     r"BOUNDARY_REGISTER has no entry for cell 12 \(BOUNDARY_LENGTH is 27\)", "126:7"),
    ("number-too-big", [('" 26 (BC_2', '" 27 (BC_2')],
     r"cell number 27 is outside the boundary register \(BOUNDARY_LENGTH is 27\)", "141:5"),
    ("duplicate-cell", [('" 22 (BC_4', '" 21 (BC_4')],
     r"cell 21 is described 2 times and is not a merged cell", "136:5"),
    ("order", [('" 24 (BC_1,  STAT', '" 99 (BC_1,  STAT'), ('" 25 (BC_0', '" 24 (BC_0'),
               ('" 99 (BC_1,  STAT', '" 25 (BC_1,  STAT')],
     r"cell 24 is out of order: the entries so far are ascending", "140:5"),
    ("missing-comma-between-cells",
     [('"  0 (BC_4,  CLK_IN,  clock,    X),  ', '"  0 (BC_4,  CLK_IN,  clock,    X)   ')],
     r"expected `,` between boundary cells, found `1`", "115:6"),
    # B.8.14 (from memory): a 3-state or bidirectional cell names an existing CONTROL cell.
    ("control-not-control", [("Y(0),    output3,  X,  16", "Y(0),    output3,  X,  15")],
     r"cell 17 names control cell 15, whose function is INPUT", "131:39"),
    ("control-missing", [("Y(1),    output3,  X,  16", "Y(1),    output3,  X,  99")],
     r"cell 18 names control cell 99, which is not in BOUNDARY_REGISTER", "132:39"),
    ("tristate-no-control", [("Y(2),    output3,  X,  16,    1,   Z)", "Y(2),    output3,  X)")],
     r"cell 19 is OUTPUT3 but gives no control cell", "133:35"),
    # Every port a cell names is a port (bit) of the entity.
    ("bad-bit", [('"  4 (BC_1,  A(3)', '"  4 (BC_1,  A(4)')],
     r"`A\(4\)` in cell 4 is not a bit of `A`", "118:16"),
    ("unknown-port", [("IRQ_N,   output2", "IRQ,     output2")],
     r"`IRQ` in cell 21 is not a port of the entity", "135:16"),
    ("bad-function", [("IRQ_N,   output2", "IRQ_N,   outptu2")],
     r"`outptu2` is not a cell function", "135:25"),
    ("bad-disable-result", [('X,  16,    1,   Z), " &\n\t\t" 20', 'X,  16,    1,   ZZ), " &\n\t\t" 20')],
     r"`ZZ` is not a disable result", "133:51"),
    ("cell-field-count", [('" 21 (BC_1,  IRQ_N,   output2,  1)', '" 21 (BC_1,  IRQ_N,   output2)')],
     r"expected `,` after the function in boundary cell 21, found `\)`", "135:32"),
    # 11.1 (from memory): TAP pins carry no boundary cells.
    ("cell-on-tap-port", [("IRQ_N,   output2", "TDO,     output2")],
     r"cell 21 is on the TAP port `TDO`", "135:16"),
    # B.8.3 (from memory): a pin map names ports of the entity, each once, a pin per bit.
    ("pin-map-unknown-port", [('NC:37"', 'NX:37"')],
     r"`NX` in pin map TQFP48 is not a port of the entity", "44:35"),
    ("pin-map-missing-port", [('NC:37"', 'NX:37"')],
     r"pin map TQFP48 has no pin for port `NC`", "36:11"),
    ("pin-map-count", [('"A:(7, 8, 9, 10), "', '"A:(7, 8, 9), "')],
     r"port `A` has 4 bits but 3 pins in pin map TQFP48", "38:4"),
    ("pin-map-shared-pin", [("WAKE:28", "WAKE:27")],
     r"pin 27 of pin map TQFP48 is given to both `OD_N` and `WAKE`", "42:72"),
    ("pin-map-selected", [('"TQFP48");', '"TQFP84");')],
     r"PHYSICAL_PIN_MAP selects `TQFP84`, which is not a PIN_MAP_STRING constant", "8:40"),
    # B.8.5 (from memory): TAP_SCAN_CLOCK is (frequency, BOTH | LOW); TDO is an output.
    ("tck-stop", [("(1.00e+007, BOTH)", "(1.00e+007, BOHT)")],
     r"`BOHT` is not a TCK stop state", "56:61"),
    ("tap-direction", [("TDO             : out    bit;", "TDO             : in     bit;")],
     r"TAP_SCAN_OUT port `TDO` is declared in", "55:30"),
    ("missing-attribute", [("attribute INSTRUCTION_CAPTURE", "attribute INSTRUCTION_CAPTUR")],
     r"entity `TIDEPOOL_IO16` has no INSTRUCTION_CAPTURE attribute", "5:8"),
    ("duplicate-attribute", [('entity is "XX01";', 'entity is "XX01";\n\tattribute '
                              'INSTRUCTION_CAPTURE of TIDEPOOL_IO16 : entity is "0001";')],
     r"attribute INSTRUCTION_CAPTURE is given twice", "83:12"),
    ("wrong-entity", [("INSTRUCTION_LENGTH of TIDEPOOL_IO16", "INSTRUCTION_LENGTH of TIDEPOOL_IO61")],
     r"INSTRUCTION_LENGTH is given for `TIDEPOOL_IO61`, not for the entity `TIDEPOOL_IO16`",
     "65:34"),
    ("length-not-number", [("entity is 4;", 'entity is "4";')],
     r"INSTRUCTION_LENGTH needs a whole number", "65:60"),
    # B.8.9 (from memory): a register of REGISTER_ACCESS that is not standard gives its length.
    ("register-no-length", [('"TIDE_CFG[12] (TIDE_CFG), "', '"TIDE_CFG (TIDE_CFG), "')],
     r"register `TIDE_CFG` has no length", "99:4"),
    # 8.4 (from memory): BYPASS selects the bypass register.
    ("bypass-selects-boundary",
     [('PRELOAD, INTEST), " &\n\t\t"BYPASS (BYPASS, CLAMP',
       'PRELOAD, INTEST, BYPASS), " &\n\t\t"BYPASS (CLAMP')],
     r"BYPASS selects BOUNDARY, but IEEE 1149.1 has it select BYPASS", "96:47"),
    ("private-unknown", [('"PRIV_SCAN, PRIV_TRIM"', '"PRIV_SCAN, PRIV_TRIMM"')],
     r"private instruction `PRIV_TRIMM` is not in INSTRUCTION_OPCODE", "84:73"),
    # B.8.6 (from memory): one compliance pattern bit per compliance-enable port.
    ("compliance-width", [('"(TEST_EN) (1)"', '"(TEST_EN) (10)"')],
     r"compliance pattern 10 has 2 bits for 1 port", "60:15"),
    ("execution-port", [("TCK 20000", "TCLK 20000")],
     r"`TCLK` in WAIT_DURATION is not a port of the entity", "103:27"),
    ("grouping-port", [("((LVDS_P, LVDS_N))", "((LVDS_P, LVDS_M))")],
     r"`LVDS_M` in PORT_GROUPING is not a port of the entity", "63:35"),
]


def mutate(replacements: list[tuple[str, str]]) -> str:
    text = VALID
    for old, new in replacements:
        assert text.count(old) == 1, f"the variant must change one place: {old!r}"
        text = text.replace(old, new)
    return text


def errors_of(text: str) -> tuple[list[Diagnostic], ScanloomError]:
    with pytest.raises(ScanloomError) as caught:
        parse_bsdl(text, FILE, Diagnostics())
    return [d for d in caught.value.diagnostics if d.severity == "error"], caught.value


def test_enough_variants() -> None:
    assert len({name for name, *_ in VARIANTS}) == len(VARIANTS) >= 20


@pytest.mark.parametrize("name, replacements, pattern, where", VARIANTS,
                         ids=[v[0] for v in VARIANTS])
def test_malformed_variant(name: str, replacements: list[tuple[str, str]], pattern: str,
                           where: str) -> None:
    errors, error = errors_of(mutate(replacements))
    found = [d for d in errors if re.fullmatch(pattern, d.message)]
    assert found, f"no error matches {pattern!r}; got {[d.message for d in errors]}"
    assert str(found[0].span) == f"{FILE}:{where}"
    # The rendering names the place, shows the line and puts a caret under the column.
    rendered = error.render()
    line, column = (int(part) for part in where.split(":"))
    block = rendered.split(f"{FILE}:{where}: error: {found[0].message}\n", 1)[1].splitlines()
    source_line = mutate(replacements).splitlines()[line - 1].replace("\t", " ")
    assert block[0] == "    " + source_line
    assert block[1].startswith("    " + " " * (column - 1) + "^")
    assert "Traceback" not in rendered


def test_suggestions_name_the_nearest_valid_word() -> None:
    errors, _ = errors_of(mutate([("IRQ_N,   output2", "IRQ_N,   outptu2")]))
    assert errors[0].suggestions[0] == "OUTPUT2"
    errors, _ = errors_of(mutate([('"TQFP48");', '"TQFP84");')]))
    assert errors[0].suggestions == ("TQFP48",)
    errors, _ = errors_of(mutate([("IRQ_N,   output2", "IRQ,     output2")]))
    assert errors[0].suggestions[0] == "IRQ_N"


def test_all_errors_of_a_file_are_reported_together() -> None:
    errors, _ = errors_of(mutate([('"EXTEST    (0000), "', '"EXTEST    (000), "'),
                                  ('"XX01"', '"XX10"'), ("IRQ_N,   output2", "IRQ,     output2")]))
    assert len(errors) == 3


def test_missing_file_is_an_error_not_a_traceback(tmp_path: Path) -> None:
    with pytest.raises(ScanloomError, match=r"^cannot read BSDL file .*nowhere\.bsd"):
        read_bsdl(tmp_path / "nowhere.bsd", Diagnostics())


@pytest.mark.parametrize("text, pattern", [
    ("", r"this file has no entity: it does not look like BSDL"),
    ("-- only a comment\n", r"this file has no entity: it does not look like BSDL"),
    ("chain:\n  - {ref: U1, bsdl: a.bsd}\n", r"this file has no entity: it does not look like BSDL"),
    ("entity E is\n", r"the file ends before the entity is complete"),
    ("entity E is end E;", r"entity `E` declares no ports"),
])
def test_files_that_are_not_bsdl(text: str, pattern: str) -> None:
    with pytest.raises(ScanloomError) as caught:
        parse_bsdl(text, "odd.bsd", Diagnostics())
    assert any(re.fullmatch(pattern, d.message) for d in caught.value.diagnostics)


def test_strict_diagnostics_turn_stray_text_into_an_error() -> None:
    text = "Exported by a tool without comment marks\n" + VALID
    with pytest.raises(ScanloomError) as caught:
        parse_bsdl(text, FILE, Diagnostics(strict=True))
    first = caught.value.diagnostics[0]
    assert first.message == "text before the first design unit is not BSDL; it is ignored"
    assert str(first.span) == f"{FILE}:1:1"


def test_locations_hold_in_a_crlf_latin1_file() -> None:
    data = (FIXTURES / "kelpbed_ctl8_1990.bsd").read_bytes()
    damaged = data.replace(b"CONTROL,0", b"CONTROL,2")
    text = damaged.decode("latin-1")
    with pytest.raises(ScanloomError) as caught:
        parse_bsdl(text, "kelpbed.bsd", Diagnostics())
    first = next(d for d in caught.value.diagnostics if d.severity == "error")
    # B.8.14 (from memory): the safe value is 0, 1 or X.
    assert re.fullmatch(r"`2` is not a safe value \(0, 1 or X\)", first.message)
    assert str(first.span) == "kelpbed.bsd:37:19"
    assert '    "3(BC_1,*,CONTROL,2),' in caught.value.render()

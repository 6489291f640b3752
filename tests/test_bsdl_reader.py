"""The BSDL reader on valid files: every fixture, every demo file, and the habits of real files.

Facts are checked against IEEE Std 1149.1-2001 and its Annex B (BSDL); clause numbers are
given from memory and marked so. The fixtures under tests/fixtures/bsdl describe fictional
devices written for this project.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

from scanloom.diagnostics import Diagnostics, read_source
from scanloom.models.bsdl import parse_bsdl, read_bsdl
from scanloom.models.cells import STANDARD_CELLS
from scanloom.models.device import CONTROL_FUNCTIONS, DeviceModel

FIXTURES = Path(__file__).parent / "fixtures" / "bsdl"
EXAMPLES = Path(__file__).parent.parent / "examples"
VALID_FIXTURES = sorted(FIXTURES.glob("*.bsd"))
DEMO_FILES = sorted(p for p in EXAMPLES.glob("**/*") if p.suffix.lower() in (".bsd", ".bsdl"))


def read(name: str) -> tuple[DeviceModel, Diagnostics]:
    diagnostics = Diagnostics()
    return read_bsdl(FIXTURES / name, diagnostics), diagnostics


def messages(diagnostics: Diagnostics, severity: str) -> list[str]:
    return [d.message for d in diagnostics.items if d.severity == severity]


# -- every file ------------------------------------------------------------------------------

@pytest.mark.parametrize("path", VALID_FIXTURES + DEMO_FILES, ids=lambda p: p.name)
def test_every_valid_file_reads_and_obeys_the_standard(path: Path) -> None:
    diagnostics = Diagnostics()
    device = read_bsdl(path, diagnostics)
    assert not diagnostics.errors
    ones = "1" * device.ir_length
    # IEEE 1149.1-2001 7.1.1 (a) (from memory): the instruction register has at least 2 cells.
    assert device.ir_length >= 2
    # 7.1.1 (d) (from memory): the two least significant cells capture 01 (rightmost = LSB).
    assert device.ir_capture.endswith("01") and len(device.ir_capture) == device.ir_length
    # B.8.8 (from memory): every opcode has INSTRUCTION_LENGTH bits of 0, 1 or X.
    for opcodes in device.instructions.values():
        assert all(len(o) == device.ir_length and set(o) <= set("01X") for o in opcodes)
    # 8.1.1 (from memory): BYPASS, SAMPLE and EXTEST are mandatory; 8.4.1 (b): all-ones is BYPASS.
    assert {"BYPASS", "SAMPLE", "EXTEST"} <= set(device.instructions)
    assert ones in device.instructions["BYPASS"]
    # 10.1.1 (from memory): the bypass register is a single cell; 12.1.1: the device
    # identification register is 32 bits and its bit 0 (rightmost in BSDL) is 1.
    assert device.registers["BYPASS"] == 1
    assert device.registers["BOUNDARY"] == device.boundary_length
    if device.idcode is not None:
        assert len(device.idcode) == 32 and device.idcode[-1] == "1"
        assert device.registers["DEVICE_ID"] == 32
    # Every instruction, private ones included, selects a register that has a length.
    assert set(device.selects) == set(device.instructions)
    assert set(device.selects.values()) <= set(device.registers)
    # B.8.14 (from memory): cells 0 .. BOUNDARY_LENGTH-1, sorted, merged pairs adjacent.
    numbers = [cell.number for cell in device.cells]
    assert numbers == sorted(numbers)
    assert sorted(set(numbers)) == list(range(device.boundary_length))
    for cell in device.cells:
        if cell.control_cell is not None and cell.control_cell != cell.number:
            targets = [c for c in device.cells if c.number == cell.control_cell]
            assert any(t.function in CONTROL_FUNCTIONS for t in targets)
        assert cell.port is None or cell.port in device.port_bits()
        assert cell.cell_type in device.cell_info
    # B.8.3 (from memory): each pin map gives every port bit at least one pin.
    for pin_map in device.pin_maps.values():
        assert set(pin_map) == set(device.port_bits())


# -- TIDEPOOL_IO16: the 2001-style fixture with every attribute we use --------------------------

def test_ports_keep_declaration_order_of_vector_bits() -> None:
    device, _ = read("tidepool_io16.bsd")
    # IEEE Std 1076 ranges: (0 to 3) counts up, (7 downto 0) counts down, in declaration order.
    assert device.ports["A"].bits == ("A(0)", "A(1)", "A(2)", "A(3)")
    assert device.ports["D"].bits == tuple(f"D({i})" for i in range(7, -1, -1))
    assert device.ports["D"].direction == "INOUT" and device.ports["NC"].direction == "LINKAGE"
    # A comma list declares each name with the same direction and type.
    assert [device.ports[n].direction for n in ("TCK", "TMS", "TDI")] == ["IN"] * 3
    assert device.ports["TDI"].span is not None and device.ports["TDI"].span.line == 11


def test_pin_maps_follow_the_declared_bit_order_and_the_generic() -> None:
    device, _ = read("tidepool_io16.bsd")
    assert set(device.pin_maps) == {"TQFP48", "BGA49"}
    assert device.pin_map_name == "TQFP48"
    tqfp = device.pin_maps["TQFP48"]
    assert tqfp["D(7)"] == ("11",) and tqfp["D(0)"] == ("18",)
    assert device.pins_of("A(2)") == ("9",)
    # A scalar may sit on several package pins.
    assert device.pin_maps["BGA49"]["NC"] == ("F5", "F6")


def test_tap_pins_and_the_tck_figure() -> None:
    device, _ = read("tidepool_io16.bsd")
    tap = device.tap
    assert (tap.tdi, tap.tdo, tap.tms, tap.tck, tap.trst) == ("TDI", "TDO", "TMS", "TCK", "TRST_N")
    assert tap.max_tck_hz == pytest.approx(1.0e7) and tap.tck_stop == "BOTH"


def test_instruction_register() -> None:
    device, diagnostics = read("tidepool_io16.bsd")
    assert device.ir_length == 4 and device.ir_capture == "XX01"
    assert device.instructions["BYPASS"] == ("1111", "1110")  # several opcodes
    assert device.instructions["PRIV_SCAN"] == ("101X",)  # X bits kept
    assert list(device.instructions)[:3] == ["BYPASS", "EXTEST", "SAMPLE"]  # file order
    assert device.private == ("PRIV_SCAN", "PRIV_TRIM")
    assert "PRIV_SCAN" not in device.public_instructions
    assert not diagnostics.errors and not diagnostics.warnings


def test_registers_and_what_each_instruction_selects() -> None:
    device, diagnostics = read("tidepool_io16.bsd")
    assert device.registers == {"BYPASS": 1, "BOUNDARY": 27, "DEVICE_ID": 32,
                                "TIDE_CFG": 12, "BIST_SIG": 16}
    # IEEE 1149.1-2001 clause 8 (from memory): the standard's instructions and their registers.
    assert device.selects["EXTEST"] == device.selects["SAMPLE"] == "BOUNDARY"
    assert device.selects["PRELOAD"] == device.selects["INTEST"] == "BOUNDARY"
    assert device.selects["IDCODE"] == device.selects["USERCODE"] == "DEVICE_ID"
    assert device.selects["CLAMP"] == device.selects["HIGHZ"] == "BYPASS"
    assert device.selects["RUNBIST"] == "BIST_SIG" and device.selects["TIDE_CFG"] == "TIDE_CFG"
    # A private instruction without a register falls back to BYPASS, with a note.
    assert device.selects["PRIV_SCAN"] == "BYPASS"
    assert any("PRIV_SCAN" in m for m in messages(diagnostics, "note"))


def test_device_codes_keep_bsdl_order_and_x_bits() -> None:
    device, _ = read("tidepool_io16.bsd")
    assert device.idcode == "XXXX" "1011000111010110" "00011001011" "1"
    assert device.usercode == "X" * 32


def test_boundary_cells() -> None:
    device, _ = read("tidepool_io16.bsd")
    assert device.boundary_length == 27 and len(device.cells) == 28  # one merged cell
    clock = device.cell(0)
    assert (clock.cell_type, clock.port, clock.function, clock.safe) == ("BC_4", "CLK_IN", "CLOCK", "X")
    bidir = device.cell(6)
    assert (bidir.port, bidir.function, bidir.control_cell, bidir.disable_value,
            bidir.disable_result) == ("D(7)", "BIDIR", 5, 1, "Z")
    # One control cell shared by a group of outputs.
    assert [c.number for c in device.cells if c.control_cell == 16] == [17, 18, 19, 20]
    # Case does not matter: "bc_1, we_n, INPUT, x" reads as upper case.
    lower = device.cell(15)
    assert (lower.cell_type, lower.port, lower.function, lower.safe) == ("BC_1", "WE_N", "INPUT", "X")
    # The merged cell 23: an input entry and a control entry, adjacent in the model.
    merged = [c for c in device.cells if c.number == 23]
    assert [c.function for c in merged] == ["INPUT", "CONTROL"]
    assert device.cell(23, "CONTROL").port is None
    assert device.cell(24).disable_result == "WEAK1"
    assert device.cell(26).control_cell == 26  # an open-drain output controls itself
    assert device.cells_of("OD_N")[0].disable_result == "PULL1"


def test_cell_spans_point_into_the_file() -> None:
    device, _ = read("tidepool_io16.bsd")
    lines = read_source(FIXTURES / "tidepool_io16.bsd").splitlines()
    for number, expected in ((0, "0 (BC_4"), (13, "13 (BC_7,  D(0)"), (26, "26 (BC_2")):
        span = device.cell(number).span
        assert span is not None
        assert lines[span.line - 1][span.column - 1:].startswith(expected)
    span = device.spans["BOUNDARY_REGISTER"]
    assert lines[span.line - 1].lstrip().startswith("attribute BOUNDARY_REGISTER")


def test_cell_info_comes_from_the_standard() -> None:
    device, _ = read("tidepool_io16.bsd")
    assert set(device.cell_info) == {"BC_0", "BC_1", "BC_2", "BC_4", "BC_5", "BC_7"}
    assert all(device.cell_info[name] is STANDARD_CELLS[name] for name in device.cell_info)


def test_compliance_execution_grouping_and_warning() -> None:
    device, _ = read("tidepool_io16.bsd")
    assert device.compliance[0].ports == ("TEST_EN",)
    assert device.compliance[0].patterns == ("1",)
    runbist = device.executions["RUNBIST"]
    assert runbist.clocks == 20000 and runbist.seconds == pytest.approx(1.0e-3)
    assert runbist.raw.startswith("Wait_Duration")
    assert device.executions["INTEST"].clocks == 64
    assert device.executions["INTEST"].seconds is None
    assert device.port_groups == (("LVDS_P", "LVDS_N"),)
    # A doubled quote inside a VHDL string stands for one quote (IEEE Std 1076, 13.6).
    assert device.design_warning is not None and 'The "STAT" pin' in device.design_warning
    assert device.unused == ()


# -- the other fixtures: editions, packages and habits of real files -------------------------

def test_1990_style_file_with_crlf_latin1_and_no_final_newline() -> None:
    data = (FIXTURES / "kelpbed_ctl8_1990.bsd").read_bytes()
    assert b"\r\n" in data and not data.endswith(b"\n") and b"\xb0" in data  # the file's habits
    device, diagnostics = read("kelpbed_ctl8_1990.bsd")
    assert device.standard == "STD_1149_1_1990"
    # The 1990 edition has SAMPLE as the combined sample/preload instruction, no PRELOAD.
    assert "SAMPLE" in device.instructions and "PRELOAD" not in device.instructions
    assert device.idcode is None and "DEVICE_ID" not in device.registers
    assert device.tap.max_tck_hz == pytest.approx(10.0e6)  # written 10.0E06
    assert device.ports["CTL"].bits[0] == "CTL(7)"
    # The register is written from cell 11 down to 0; the model is sorted.
    assert [c.number for c in device.cells] == list(range(12))
    assert device.cell(0).port == "SENSE(1)" and device.cell(4).port == "CTL(0)"
    unused = {raw.name: raw.text for raw in device.unused}
    assert unused == {"INSTRUCTION_DISABLE": "HIGHZ", "INSTRUCTION_GUARD": "HIGHZ",
                      "BOUNDARY_CELLS": "BC_1"}
    assert sum("not used" in m for m in messages(diagnostics, "note")) == 3
    assert device.cell(3).span is not None and device.cell(3).span.line == 37


def test_1149_6_file_keeps_its_additions_as_unused_text() -> None:
    device, diagnostics = read("driftwood_serdes2.bsd")
    assert device.standard == "STD_1149_1_2001"
    names = [raw.name for raw in device.unused]
    assert names == ["AIO_COMPONENT_CONFORMANCE", "AIO_EXTEST_PULSE_EXECUTION",
                     "AIO_EXTEST_TRAIN_EXECUTION", "AIO_PIN_BEHAVIOR", "DRIFTWOOD_TRIM"]
    assert any("BSDL_EXTENSION" in m for m in messages(diagnostics, "note"))
    # IEEE 1149.6-2003 (from memory): EXTEST_PULSE and EXTEST_TRAIN use the boundary register.
    assert device.selects["EXTEST_PULSE"] == device.selects["EXTEST_TRAIN"] == "BOUNDARY"
    # SAMPLE and PRELOAD may share an opcode (IEEE 1149.1-2001 8.7, from memory): no warning.
    assert device.instructions["SAMPLE"] == device.instructions["PRELOAD"]
    assert not diagnostics.warnings
    for name in ("AC_1", "AC_2", "AC_SELX"):
        assert device.cell_info[name].known is False and device.cell_info[name].captures == ()
    assert device.port_groups[0] == ("TX_P(0)", "TX_N(0)") and len(device.port_groups) == 4


def test_vendor_packages_stray_text_and_odd_numbers() -> None:
    device, diagnostics = read("reefwatch_sens5.bsd")
    warnings = messages(diagnostics, "warning")
    assert any(m.startswith("text before the first design unit") for m in warnings)
    assert any(m.startswith("text after the end of the entity") for m in warnings)
    assert device.standard == "STD_1149_1_2013"
    assert device.pin_map_name == "LGA16" and device.pin_maps["LGA16"]["IO(1)"] == ("5",)
    assert device.ports["TDO"].direction == "BUFFER"
    assert device.tap.max_tck_hz == pytest.approx(5.0e7) and device.tap.tck_stop == "LOW"
    # The package in the file describes RW_IOCELL.
    info = device.cell_info["RW_IOCELL"]
    assert info.known and len(info.captures) == 6
    assert ("BIDIR_OUT", "EXTEST", "PO") in {(c.function, c.instruction, c.source)
                                              for c in info.captures}
    # SF_OBS comes from a maker package the file does not contain: unknown, with a note.
    assert device.cell_info["SF_OBS"].known is False
    assert any("SF_OBS" in m for m in messages(diagnostics, "note"))
    assert device.cell(2).function == "CONTROLR"


def test_parse_bsdl_reads_text_and_registers_the_source() -> None:
    text = (FIXTURES / "tidepool_io16.bsd").read_text()
    diagnostics = Diagnostics()
    device = parse_bsdl(text, "in-memory.bsd", diagnostics)
    assert device.path == "in-memory.bsd" and device.entity == "TIDEPOOL_IO16"
    assert diagnostics.sources["in-memory.bsd"] == text


def test_tabs_and_spaces_do_not_change_the_model() -> None:
    text = (FIXTURES / "tidepool_io16.bsd").read_text()
    squeezed = text.replace("\t", " ").replace("(BC_", "( BC_").replace(", ", " ,  ")
    first = parse_bsdl(text, "a.bsd", Diagnostics())
    second = parse_bsdl(squeezed, "b.bsd", Diagnostics())
    assert first.cells == second.cells and first.pin_maps == second.pin_maps
    assert first.instructions == second.instructions


# -- the outer syntax ----------------------------------------------------------------------

def test_grammar_is_free_of_lalr_conflicts(caplog: pytest.LogCaptureFixture) -> None:
    # lark resolves a shift/reduce conflict silently (as shift) and only logs it in debug
    # mode; a conflict-free LALR(1) grammar logs nothing.
    import logging

    from lark import Lark
    from lark import logger as lark_logger

    lark_logger.addHandler(caplog.handler)
    previous = lark_logger.level
    lark_logger.setLevel(logging.DEBUG)
    try:
        Lark.open_from_package("scanloom.grammar", "bsdl.lark", parser="lalr", debug=True,
                               propagate_positions=True, maybe_placeholders=False)
    finally:
        lark_logger.setLevel(previous)
        lark_logger.removeHandler(caplog.handler)
    assert not [r for r in caplog.records if "conflict" in r.getMessage().lower()]


@pytest.mark.parametrize("edition", ["STD_1149_1_1990", "STD_1149_1_1994", "STD_1149_1_2001",
                                     "STD_1149_1_2013"])
def test_the_standard_package_names_the_edition(edition: str) -> None:
    text = (FIXTURES / "tidepool_io16.bsd").read_text()
    text = text.replace("use STD_1149_1_2001.all;", f"use {edition.lower()}.ALL;")
    assert parse_bsdl(text, "t.bsd", Diagnostics()).standard == edition


def test_joined_strings_map_back_to_the_file_character_by_character() -> None:
    from scanloom.models.bsdl_ast import SourceText, StringValue
    from scanloom.models.bsdl_syntax import parse_syntax

    text = ('entity E is port (A : in bit);\n'
            '  attribute DESIGN_WARNING of E : entity is\n'
            '    "ab""c" &   -- a comment with "quotes"; and a semicolon\n'
            '\n'
            '    "x"\n'
            '    &\n'
            '    "" & "de""""f";\n'
            'end E;')
    tree = parse_syntax(SourceText("e.bsd", text), Diagnostics())
    assert tree is not None
    value = tree.entity.attributes[0].value
    assert isinstance(value, StringValue)
    assert value.text == 'ab"cx' 'de""f'
    for index, char in enumerate(value.text):
        assert text[value.file_offset(index)] == char


# -- the boundary register's two readers ---------------------------------------------------

def _register_text(path: Path) -> str:
    from scanloom.models.bsdl_ast import SourceText, StringValue
    from scanloom.models.bsdl_syntax import parse_syntax

    tree = parse_syntax(SourceText(path.name, read_source(path)), Diagnostics())
    assert tree is not None
    spec = next(a for a in tree.entity.attributes if a.name.text == "BOUNDARY_REGISTER")
    assert isinstance(spec.value, StringValue)
    return spec.value.text


@pytest.mark.parametrize("path", VALID_FIXTURES + DEMO_FILES, ids=lambda p: p.name)
def test_plain_entry_path_equals_the_token_reader(path: Path) -> None:
    from scanloom.models.bsdl_boundary import parse_boundary_register

    text = _register_text(path)
    assert parse_boundary_register(text) == parse_boundary_register(text, plain_path=False)


_port = st.one_of(st.just("*"), st.from_regex(r"[A-Za-z][A-Za-z0-9_]{0,5}", fullmatch=True),
                  st.from_regex(r"[A-Za-z][A-Za-z0-9_]{0,4} ?\( ?[0-9]{1,3} ?\)", fullmatch=True))
_bad = st.sampled_from(["oops", "2", "BC_1", "Z", "input"])
_function = st.one_of(st.sampled_from(["input", "OUTPUT3", "bidir", "Control", "controlr",
                                       "internal", "clock", "observe_only", "Output2"]), _bad)
_safe = st.one_of(st.sampled_from(["0", "1", "X", "x"]), _bad)
_result = st.one_of(st.sampled_from(["Z", "weak1", "WEAK0", "keeper", "PULL0", "pull1"]), _bad)
_entry_text = st.builds(
    lambda n, cell, port, fn, safe, tail, pad: (
        f"{pad}{n}{pad}({pad}{cell},{pad}{port},{fn},{pad}{safe}{tail})"),
    st.integers(0, 999), st.sampled_from(["BC_1", "bc_2", "BC_7", "AC_1", "RW_X", "9X"]), _port,
    _function, _safe,
    st.one_of(st.just(""), st.builds(lambda c, d, r: f", {c}, {d}, {r}", st.integers(0, 99),
                                      st.sampled_from(["0", "1", "2"]), _result),
              st.builds(lambda s: f", {s}", st.sampled_from(["PULL1", "openx", "oops"]))),
    st.sampled_from(["", " ", "  ", "\t"]))


@given(st.lists(_entry_text, min_size=1, max_size=6), st.sampled_from([", ", ",", " , "]))
def test_both_boundary_readers_agree_on_any_entries(entries: list[str], separator: str) -> None:
    from scanloom.models.bsdl_boundary import parse_boundary_register
    from scanloom.models.bsdl_scanner import AttributeSyntaxError

    text = separator.join(entries)
    outcomes = []
    for plain in (True, False):
        try:
            outcomes.append(parse_boundary_register(text, plain_path=plain))
        except AttributeSyntaxError as error:
            outcomes.append((error.message, error.start, error.end))
    assert outcomes[0] == outcomes[1]

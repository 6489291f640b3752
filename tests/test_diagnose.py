"""`scanloom diagnose`: the capture read, failing bits named, faults explained, exit codes.

Captures come from the virtual board with one injected fault (`scanloom simulate --capture`),
so what each explanation must say is known. The demo board's facts used here come from its
board file and BSDL files (package pins from each PIN_MAP, cell numbers from each
BOUNDARY_REGISTER), and receiver technologies from the board file: a floating TTL input reads
1, a floating CMOS input is undefined (common practice).
"""

from __future__ import annotations

import json
import re
import shutil
from pathlib import Path

import pytest
from bitarray import bitarray
from click.testing import CliRunner
from hypothesis import given, settings
from hypothesis import strategies as st

from scanloom.analysis.capture_log import parse_capture, read_capture
from scanloom.analysis.diagnose import diagnose_capture, diagnose_files, load_shift_and_board
from scanloom.analysis.board_runs import capture_table, load_shift_run, simulate_run
from scanloom.analysis.generate import generate_program
from scanloom.cli import main
from scanloom.diagnostics import Diagnostics, ScanloomError
from scanloom.models.board_loader import load_board
from scanloom.sim.faults import parse_fault_specs

EXAMPLE = Path(__file__).resolve().parents[1] / "examples" / "irrigation"


@pytest.fixture(scope="module")
def compiled(tmp_path_factory):
    """The demo board's generated program (all tests, counting codes) and its T/C twin, compiled."""
    folder = tmp_path_factory.mktemp("demo")
    for item in EXAMPLE.iterdir():
        if item.is_dir():
            shutil.copytree(item, folder / item.name)
        else:
            shutil.copy(item, folder / item.name)
    board = load_board(folder / "irrigation.yaml", Diagnostics())
    runner = CliRunner()
    paths = {}
    for name, kind, codes in (("all", "all", "counting"), ("tc", "interconnect", "true-complement")):
        program = folder / f"{name}.loom"
        program.write_text(generate_program(board, "irrigation.yaml", kind, codes).text)
        result = runner.invoke(main, ["compile", str(program), "--out", str(folder / "out"), "--format", "json"])
        assert result.exit_code == 0, result.output
        paths[name] = folder / "out" / f"{name}.json"
    return folder, paths


def capture_with(shift_file: Path, folder: Path, *specs: str) -> Path:
    run = load_shift_run(shift_file)
    report = simulate_run(run, parse_fault_specs(list(specs), run.electrical))
    path = folder / "capture.csv"
    path.write_text(capture_table(report.result))
    return path


def diagnosis(compiled, which: str, *specs: str):
    folder, paths = compiled
    return diagnose_files(paths[which], capture_with(paths[which], folder, *specs))

# ------------------------------------------------------------------------------------ capture


def test_capture_rows_in_any_layout(tmp_path):
    path = tmp_path / "c.csv"
    path.write_bytes(b"cycle,tdo\r\n0 , 1\r\n1,x\r\n2,0\r\n")
    log = read_capture(path, 3)
    assert log.values.to01() == "100" and log.known.to01() == "101"


@pytest.mark.parametrize("text, where, message", [
    ("cyc,tdo\n0,1\n", "1:1", r"not a capture table: the first line is 'cyc,tdo'"),
    ("cycle,tdo\n0,1\n2,0\n", "3:1", r"cycle '2' where cycle 1 comes"),
    ("cycle,tdo\n0,1\n1,2\n", "3:3", r"TDO '2' at cycle 1"),
    ("cycle,tdo\n0,1\n", "2:1", r"the capture has 1 row, the shift file has 2 cycles"),
    ("cycle,tdo\n0,1\n1,0\n2,0\n", "4:1", r"the capture has more rows than the shift file has cycles \(2\)"),
    ("cycle,tdo\n0;1\n1,0\n", "2:1", r"row '0;1' has no comma"),
])
def test_malformed_captures_are_located(text, where, message):
    with pytest.raises(ScanloomError) as caught:
        parse_capture(text.encode(), "c.csv", 2)
    rendered = caught.value.render()
    assert re.match(rf"c\.csv:{where}: error: {message}", rendered), rendered


@settings(max_examples=60, deadline=None)
@given(st.lists(st.sampled_from("01X"), min_size=1, max_size=2500))
def test_the_fast_reader_agrees_with_the_row_reader(values):
    text = "cycle,tdo\n" + "".join(f"{i},{v}\n" for i, v in enumerate(values))
    from scanloom.analysis.capture_log import _parse_rows

    fast = parse_capture(text.encode(), "c.csv", len(values))
    slow = _parse_rows(text.encode(), "c.csv", len(values))
    assert fast.values == slow.values and fast.known == slow.known
    assert fast.known.to01() == "".join("0" if v == "X" else "1" for v in values)

# ------------------------------------------------------------------------------------ failing bits


def test_a_matching_capture_passes(compiled):
    result = diagnosis(compiled, "all")
    assert result.passed and not result.explanations
    assert re.fullmatch(r".* the capture matches: all \d+ compared bits as expected\n", result.render())


def test_failing_bits_are_named_down_to_the_package_pin(compiled):
    result = diagnosis(compiled, "all", "open:U2.VIN(3)")
    bits = result.failing
    assert bits and all(b.device == "U2" and b.register == "BOUNDARY" for b in bits)
    # rc4_valvedrv.bsd: cell 14 is VIN(3), on package pin 5; the board puts it on VALVE_D3.
    assert {(b.bit, b.port, b.pins, b.net) for b in bits} == {(14, "VIN(3)", ("5",), "VALVE_D3")}
    # U2 is TTL: its open input reads 1, so exactly the bits expected 0 fail.
    assert {(b.expected, b.got) for b in bits} == {(0, "1")}
    assert {b.test for b in bits} == {"interconnect_1", "interconnect_2"}
    assert all(b.step.startswith("vector_") for b in bits)

# ------------------------------------------------------------------------------------ explanations


def test_open_receiver_on_a_ttl_input(compiled):
    result = diagnosis(compiled, "all", "open:U2.VIN(3)")
    first = result.explanations[0]
    assert first.kind == "open"
    assert "open:U2.VIN(3)" in first.faults
    # With one receiver, its own open, the driver's open and the net's open read the same.
    assert set(first.faults) >= {"open:U2.VIN(3)", "open:U1.PA(3)", "open:VALVE_D3"}
    assert "VALVE_D3: U1.PA(3) (pin E10), U2.VIN(3) (pin 5)" in first.pins


def test_stuck_net(compiled):
    result = diagnosis(compiled, "all", "stuck-at-0:SPI_MISO")
    first = result.explanations[0]
    assert first.summary == "net SPI_MISO stuck at 0: every receiver on it reads 0"
    assert first.faults[0] == "stuck-at-0:SPI_MISO"
    assert first.bits == len(result.failing)


@pytest.mark.parametrize("mode", ["and", "or"])
def test_true_complement_names_exactly_the_shorted_pair(compiled, mode):
    spec = "short:DATA1,DATA2" + (":or" if mode == "or" else "")
    result = diagnosis(compiled, "tc", spec)
    first = result.explanations[0]
    # Wagner 1987: no AND or OR of two true/complement codes is a third net's code, so the
    # short is the only explanation.
    assert first.candidates == ((spec,),)
    word = "wired-AND: 0 dominates" if mode == "and" else "wired-OR: 1 dominates"
    assert first.summary.startswith(f"short between nets DATA1 and DATA2 ({word}")
    assert "DATA1: U1.D(1) (pin H7), U4.DQ(1) (pin 3)" in first.pins


def test_a_short_through_a_series_part_names_both_nets(compiled):
    result = diagnosis(compiled, "tc", "short:SPI_MOSI_T,SPI_CS_N")
    first = result.explanations[0]
    # SPI_MOSI and SPI_MOSI_T are one node through RN1: naming either is the same short.
    assert set(first.candidates[0]) == {"short:SPI_MOSI,SPI_CS_N", "short:SPI_MOSI_T,SPI_CS_N"}


def test_a_dominant_driver_short(compiled):
    result = diagnosis(compiled, "tc", "short:VALVE_D1,VALVE_D2:U1.PA(2)")
    first = result.explanations[0]
    assert "short:VALVE_D1,VALVE_D2:U1.PA(2)" in first.faults
    assert "U1.PA(2) dominating" in first.summary


def test_a_broken_chain_is_located(compiled):
    # U3's TDI open: it floats high (IEEE 1149.1 requires TDI to read 1 when undriven), so
    # every capture from U1 and U2 reaches TDO as 1s: the instruction captures' 0 bits of U1
    # and U2 fail, U3's and U4's arrive intact.
    result = diagnosis(compiled, "all", "open:U3.TDI")
    first = result.explanations[0]
    assert first.kind == "chain"
    assert first.summary == "broken scan chain after U2 (chain position 1), before U3"
    assert "open:U3.TDI" in first.faults and "open:U2.TDO" in first.faults
    assert all(f.kind == "chain" for f in result.explanations)


def test_an_identification_register_that_alone_reads_wrong(compiled):
    folder, paths = compiled
    program, cycles, board = load_shift_and_board(paths["all"])
    capture = read_capture(capture_with(paths["all"], folder), cycles.count)
    # Flip the version bits (31..28) of U4's IDCODE in the identify test's capture.
    record = next(i for i, r in enumerate(program.records) if r.test == "identify" and r.kind == "dr")
    scan_number = [i for i, r in enumerate(program.records) if r.kind in ("ir", "dr")].index(record)
    segment = next(s for s in program.records[record].segments if s.device == "U4")
    start = cycles.shift_starts[scan_number] + segment.offset
    values = bitarray(capture.values)
    values[start + 28:start + 32] = ~values[start + 28:start + 32]
    from scanloom.analysis.capture_log import CaptureLog

    result = diagnose_capture(program, cycles, board, CaptureLog("c.csv", values, capture.known), "x.json")
    first = result.explanations[0]
    assert first.kind == "identity"
    assert re.match(r"U4 \(RC4_LINK\) identifies as 0xD59C62A7, its BSDL says "
                    r"00100101100111000110001010100111: another part or revision", first.summary)
    assert first.details == ("differing fields: version",)

# ------------------------------------------------------------------------------------ command line


def test_exit_codes_and_json(compiled):
    folder, paths = compiled
    runner = CliRunner()
    good = capture_with(paths["all"], folder)
    passed = runner.invoke(main, ["diagnose", str(paths["all"]), "--capture", str(good)])
    assert passed.exit_code == 0, passed.output
    bad = capture_with(paths["all"], folder, "short:DATA3,DATA4")
    failed = runner.invoke(main, ["diagnose", str(paths["all"]), "--capture", str(bad), "--json"])
    assert failed.exit_code == 1
    data = json.loads(failed.output)
    assert data["passed"] is False and data["failing"] == len(data["failing_bits"]) > 0
    assert data["explanations"][0]["kind"] == "short"
    assert "short:DATA3,DATA4" in data["explanations"][0]["faults"]
    assert set(data["failing_bits"][0]) >= {"cycle", "record", "test", "step", "device", "bit",
                                            "port", "pins", "net", "expected", "got"}
    text = runner.invoke(main, ["diagnose", str(paths["all"]), "--capture", str(bad), "--limit", "1"])
    assert text.exit_code == 1
    assert re.search(r"^1\. short between nets DATA3 and DATA4 \(wired-AND", text.output, re.M)
    assert re.search(r"^  \.\.\. and \d+ more \(--limit 0 shows all\)$", text.output, re.M)


def test_bad_input_exits_2(compiled, tmp_path):
    folder, paths = compiled
    runner = CliRunner()
    missing = runner.invoke(main, ["diagnose", str(paths["all"]), "--capture", str(tmp_path / "no.csv")])
    assert missing.exit_code == 2 and "cannot read the capture" in missing.output
    short = tmp_path / "short.csv"
    short.write_text("cycle,tdo\n0,0\n")
    truncated = runner.invoke(main, ["diagnose", str(paths["all"]), "--capture", str(short)])
    assert truncated.exit_code == 2 and re.search(r"short\.csv:2:1: error: the capture has 1 row", truncated.output)
    not_shift = tmp_path / "other.json"
    not_shift.write_text('{"hello": 1}\n')
    foreign = runner.invoke(main, ["diagnose", str(not_shift), "--capture", str(short)])
    assert foreign.exit_code == 2
    assert "Traceback" not in missing.output + truncated.output + foreign.output

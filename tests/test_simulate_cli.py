"""`scanloom simulate` and `scanloom faults` through the command line."""

from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from scanloom.cli import main
from scanloom.diagnostics import Diagnostics
from scanloom.pipeline import compile_program

EXAMPLES = Path(__file__).resolve().parents[1] / "examples" / "irrigation"


@pytest.fixture(scope="module")
def shift_files(tmp_path_factory):  # type: ignore[no-untyped-def]
    out = tmp_path_factory.mktemp("shift")
    for stem in ("cluster_mux", "valve_nets"):
        compile_program(EXAMPLES / f"{stem}.loom", out, {"json"}, Diagnostics())
    return out


def _run(*args: str):  # type: ignore[no-untyped-def]
    return CliRunner().invoke(main, list(args))


def test_simulate_passes_a_fault_free_example(shift_files) -> None:  # type: ignore[no-untyped-def]
    result = _run("simulate", str(shift_files / "cluster_mux.json"))
    assert result.exit_code == 0, result.output
    assert re.fullmatch(r"pass: all \d+ compared bits as expected\n", result.output)


def test_simulate_with_a_fault_fails_and_names_every_bit(shift_files) -> None:  # type: ignore[no-untyped-def]
    result = _run("simulate", str(shift_files / "valve_nets.json"), "--fault", "open:U2.VIN(0)", "--limit", "0")
    assert result.exit_code == 1
    lines = result.output.splitlines()
    assert lines[0] == "with open:U2.VIN(0):"
    # VALVE_D0 is driven 0 in walking_zero, inverse and upper_half: an open TTL input reads 1.
    failing = [line for line in lines if line.startswith("cycle ")]
    assert len(failing) == 3
    assert re.match(r"cycle \d+: expected 0, board gave 1: test valve_lines step walking_zero, record 4 bit 13, "
                    r"U2 BOUNDARY cell 11, port VIN\(0\), net VALVE_D0$", failing[0])
    assert re.match(r"fail: 3 of \d+ compared bits$", lines[-1])


def test_simulate_writes_the_capture_table(shift_files, tmp_path: Path) -> None:  # type: ignore[no-untyped-def]
    capture = tmp_path / "board.csv"
    result = _run("simulate", str(shift_files / "cluster_mux.json"), "--capture", str(capture))
    assert result.exit_code == 0
    rows = capture.read_text().splitlines()
    assert rows[0] == "cycle,tdo"
    assert rows[1:4] == ["0,0", "1,0", "2,0"]
    assert all(re.fullmatch(r"\d+,[01]", row) for row in rows[1:])
    cycles = json.loads((shift_files / "cluster_mux.json").read_text())
    assert len(rows) - 1 == _tck_count(cycles)


def _tck_count(data: dict) -> int:  # type: ignore[type-arg]
    return int(data["cycles"]["count"])


def test_simulate_refuses_a_bad_fault_spec_with_exit_2(shift_files) -> None:  # type: ignore[no-untyped-def]
    result = _run("simulate", str(shift_files / "valve_nets.json"), "--fault", "short:VALVE_D0,VALVE_DX")
    assert result.exit_code == 2
    assert "--fault #1:1:16: error: unknown net 'VALVE_DX'" in result.output
    assert "Traceback" not in result.output


def test_simulate_refuses_a_file_that_is_not_a_shift_file(tmp_path: Path) -> None:
    bad = tmp_path / "bad.json"
    bad.write_text("{\"schema\": \"something else\"}")
    result = _run("simulate", str(bad))
    assert result.exit_code == 2 and "Traceback" not in result.output


def test_faults_grades_the_universe_of_a_program(shift_files) -> None:  # type: ignore[no-untyped-def]
    result = _run("faults", str(EXAMPLES / "valve_nets.loom"), "--universe", "opens", "--summary")
    assert result.exit_code == 0, result.output
    assert result.output.startswith("coverage (detected / faults; possibly detected not counted):\n")
    assert re.search(r"^  open +\d+ / \d+ ", result.output, re.M)
    assert "stuck-at" not in result.output


def test_faults_json_from_a_faults_file(shift_files, tmp_path: Path) -> None:  # type: ignore[no-untyped-def]
    faults = tmp_path / "bench.faults"
    faults.write_text("# two suspects\nopen:U2.VIN(0)\nshort:VALVE_D1,VALVE_D3\n")
    result = _run("faults", str(shift_files / "valve_nets.json"), "--faults", str(faults), "--json")
    assert result.exit_code == 0, result.output
    data = json.loads(result.output)
    assert [f["fault"] for f in data["faults"]] == ["open:U2.VIN(0)", "short:VALVE_D1,VALVE_D3"]
    assert data["faults"][0]["verdict"] == "detected" and data["faults"][0]["first"]["step"] == "walking_zero"
    assert data["faults"][1]["reason"] == "the two nets are never driven to opposite values in a compared step"
    assert data["coverage"]["all"] == {"total": 2, "detected": 1, "possibly_detected": 0, "not_detected": 1,
                                       "coverage": 0.5}


def test_faults_text_lists_each_fault(shift_files) -> None:  # type: ignore[no-untyped-def]
    result = _run("faults", str(shift_files / "cluster_mux.json"), "--universe", "shorts")
    assert result.exit_code == 0
    assert re.search(r"^short:MUX_Y0,MUX_Y1 +detected +first: test mux_select step row1, ", result.output, re.M)


def test_faults_rejects_an_unknown_universe_class(shift_files) -> None:  # type: ignore[no-untyped-def]
    result = _run("faults", str(shift_files / "cluster_mux.json"), "--universe", "opens,bridges")
    assert result.exit_code == 2 and "unknown fault class bridges" in result.output


def test_faults_reports_a_bad_program_without_a_traceback(tmp_path: Path) -> None:
    program = tmp_path / "broken.loom"
    program.write_text('board "nowhere.yaml"\n')
    result = _run("faults", str(program))
    assert result.exit_code == 2 and "Traceback" not in result.output


def test_simulate_runs_as_a_command(shift_files) -> None:  # type: ignore[no-untyped-def]
    completed = subprocess.run([sys.executable, "-m", "scanloom.cli", "simulate",
                                str(shift_files / "valve_nets.json"), "--fault", "stuck-at-0:VALVE_LE"],
                               capture_output=True, text=True, check=False)
    assert completed.returncode == 1
    assert "net VALVE_LE" in completed.stdout and completed.stderr == ""

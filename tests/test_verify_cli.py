"""`scanloom verify DIR/<stem>.json`: exit 0 when the replay agrees, 1 on a mismatch, 2 unreadable."""

from __future__ import annotations

import json
import random
import re
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from handbuilt import random_chain, random_program, two_device_program
from scanloom.backend.cycles import lay_out_cycles
from scanloom.backend.writers.json_writer import write_shift_file
from scanloom.cli import main

REPO = Path(__file__).resolve().parents[1]


def _shift_file(tmp_path: Path, program=None) -> Path:
    program = program or two_device_program()
    return write_shift_file(program, lay_out_cycles(program), tmp_path / "prog.json")


def _verify(*args: str):
    # The hand-built programs enter EXTEST without a preload scan (they exercise the replay, not
    # safe sequencing), so the sequencing hazard is accepted by name.
    return CliRunner().invoke(main, ["verify", "--allow", "no_preload", *args])


def _flip(hex_text: str, bit: int) -> str:
    """Flip bit `bit` of a shift-file hex string (bit 0 = least significant = last digit)."""
    digits = list(hex_text)
    place = len(digits) - 1 - bit // 4
    digits[place] = format(int(digits[place], 16) ^ (1 << (bit % 4)), "x")
    return "".join(digits)


def _edit(path: Path, change) -> Path:
    data = json.loads(path.read_text())
    change(data)
    path.write_text(json.dumps(data, indent=1))
    return path


def test_a_good_file_verifies(tmp_path: Path) -> None:
    path = _shift_file(tmp_path)
    result = _verify(str(path))
    assert result.exit_code == 0, result.output
    assert result.output == (f"{path}: replay agrees: 33 TCK, 2 scans; 2 instructions, 2 register images "
                             "and 4 known TDO bits checked\n")


@pytest.mark.parametrize("change, first_line", [
    # A TDI bit of the IR scan in the record only: the stream no longer carries the record.
    (lambda d: d["records"][1].update(tdi=_flip(d["records"][1]["tdi"], 3)),
     r"record 1, cycle 13: TDI bit 3 is 1 in the cycles, 0 in the record"),
    # The same bit in the cycles only: U1 is left holding EXTEST instead of SAMPLE as well.
    (lambda d: d["cycles"].update(tdi=_flip(d["cycles"]["tdi"], 13)),
     r"record 1, cycle 13: TDI bit 3 is 0 in the cycles, 1 in the record"),
    # TMS=1 instead of 0 in Select-IR-Scan (cycle 8) resets the TAP; the IR scan comes late.
    (lambda d: d["cycles"].update(tms=_flip(d["cycles"]["tms"], 8)),
     r"record 1, cycle 30: the file says the shift starts at cycle 10, the stream shifts from cycle 27"),
    # The intended image of U2 changed: its update stage holds "10".
    (lambda d: d["records"][2]["intent"].update(U2="11"),
     r"record 2, U2 BOUNDARY bit 0, cycle 25: after Update-DR the update stage holds 0, intended 1"),
    # U2's IR capture claimed to be "X11": the model now knows a 1 where 0 is expected.
    (lambda d: d["chain"][1].update(ir_capture="X11"),
     r"record 1, U2 IR bit 1, cycle 11: scan bit 1: the model knows TDO is 1, the file expects 0"),
    # A compare bit set outside any shift.
    (lambda d: d["cycles"].update(mask=_flip(d["cycles"]["mask"], 26)),
     r"cycle 26: TDO is compared outside Shift-IR and Shift-DR"),
])
def test_a_corrupted_bit_fails_with_exit_1(tmp_path: Path, change, first_line: str) -> None:
    path = _edit(_shift_file(tmp_path), change)
    result = _verify(str(path))
    assert result.exit_code == 1
    lines = result.output.splitlines()
    assert re.fullmatch(re.escape(f"{path}: ") + first_line, lines[0]), result.output
    assert re.fullmatch(re.escape(f"{path}: ") + r"replay found \d+ mismatch(es)?: .*", lines[-1])


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.integers(min_value=0, max_value=2**32 - 1), st.sampled_from(["record", "cycles"]))
def test_any_flipped_scan_bit_makes_verify_fail(tmp_path: Path, seed: int, where: str) -> None:
    rng = random.Random(seed)
    program = random_program(rng, random_chain(rng, devices=(1, 4), boundary=(1, 30)), operations=6)
    path = _shift_file(tmp_path, program)
    data = json.loads(path.read_text())
    scans = [r for r in data["records"] if r["kind"] in ("ir", "dr")]
    if not scans:
        return
    number = rng.randrange(len(scans))
    record, bit = scans[number], rng.randrange(scans[number]["length"])
    if where == "record":
        record["tdi"] = _flip(record["tdi"], bit)
    else:
        cycle = data["cycles"]["shift_starts"][number] + bit
        data["cycles"]["tdi"] = _flip(data["cycles"]["tdi"], cycle)
    path.write_text(json.dumps(data))
    assert _verify(str(path)).exit_code == 1


def test_limit_shortens_the_list(tmp_path: Path) -> None:
    path = _edit(_shift_file(tmp_path), lambda d: d["records"][2]["intent"].update(U1="001", U2="01"))
    result = _verify("--limit", "1", str(path))
    lines = result.output.splitlines()
    assert result.exit_code == 1 and len(lines) == 3
    # U1 shifted "110" against "001" (3 bits), U2 "10" against "01" (2 bits): five mismatches.
    assert lines[1] == f"{path}: ... and 4 more mismatches (--limit 0 shows all)"
    assert len(_verify("--limit", "0", str(path)).output.splitlines()) == 6


@pytest.mark.parametrize("content, message", [
    (None, r"error: cannot read shift file .*missing\.json: No such file or directory"),
    ("{not json", r".*:1:2: error: not valid JSON: Expecting property name enclosed in double quotes"),
    ('{"title": "a waveform"}', r'.*:1:1: error: the file: not a scanloom shift file'),
    ('{"schema": "scanloom.shifts", "version": 9}',
     r".*:1:42: error: version: shift file version 9 is not supported"),
])
def test_unreadable_files_exit_2(tmp_path: Path, content: str | None, message: str) -> None:
    path = tmp_path / "missing.json"
    if content is not None:
        path.write_text(content)
    result = _verify(str(path))
    assert result.exit_code == 2
    assert re.match(message, result.output), result.output
    assert "Traceback" not in result.output


def test_compile_then_verify_an_example_in_a_subprocess(tmp_path: Path) -> None:
    # End to end through the installed command: the README's demo program on the demo board.
    program = REPO / "examples" / "irrigation" / "valve_nets.loom"
    compiled = subprocess.run([sys.executable, "-m", "scanloom.cli", "compile", str(program),
                               "--out", str(tmp_path), "--format", "json"],
                              capture_output=True, text=True)
    assert compiled.returncode == 0, compiled.stderr
    verified = subprocess.run([sys.executable, "-m", "scanloom.cli", "verify",
                               str(tmp_path / "valve_nets.json")], capture_output=True, text=True)
    assert verified.returncode == 0, verified.stderr
    assert re.fullmatch(r".*valve_nets\.json: replay agrees: \d+ TCK, \d+ scans; .*\n", verified.stdout)

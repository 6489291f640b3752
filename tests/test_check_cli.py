"""`scanloom check` and `scanloom fmt` through the command line: output and exit codes.

Exit codes (README, cli.py): 0 clean (warnings allowed), 1 errors in the program, 2 the program
or its board cannot be read.
"""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from scanloom.cli import main

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = ROOT / "examples" / "irrigation"
GOLDEN = Path(__file__).resolve().parent / "golden" / "ir"


def invoke(*args: str):
    return CliRunner().invoke(main, list(args))


@pytest.fixture
def workdir(tmp_path: Path) -> Path:
    """A copy of the demo board folder, so programs can be written beside the board."""
    target = tmp_path / "irrigation"
    shutil.copytree(EXAMPLES, target)
    return target


@pytest.mark.parametrize("name", ["cluster_mux", "registers", "valve_nets"])
def test_examples_check_clean_in_a_subprocess(name: str):
    done = subprocess.run([sys.executable, "-m", "scanloom.cli", "check", f"{name}.loom"],
                          cwd=EXAMPLES, capture_output=True, text=True, check=False)
    assert done.returncode == 0, done.stderr
    assert re.fullmatch(rf"{name}\.loom: \d+ tests?, \d+ steps?, no errors\n", done.stdout)
    assert done.stderr == ""


@pytest.mark.parametrize("name", ["cluster_mux", "registers", "valve_nets"])
def test_dump_ir_matches_the_golden_file(name: str):
    result = invoke("check", str(EXAMPLES / f"{name}.loom"), "--dump-ir")
    assert result.exit_code == 0
    assert result.stdout == (GOLDEN / f"{name}.json").read_text()


def test_errors_exit_1_with_file_line_column_caret_and_suggestion(workdir: Path):
    program = workdir / "bad.loom"
    program.write_text('board "irrigation.yaml"\ntest t "t" {\n    U1 EXTST\n    step s {\n'
                       "        drive MUX_A9 = 1\n    }\n}\n")
    result = invoke("check", str(program))
    assert result.exit_code == 1
    lines = result.stderr.splitlines()
    assert re.fullmatch(r".*bad\.loom:3:8: error: U1 \(RC4_CTRL\) has no instruction EXTST", lines[0])
    assert lines[1] == "        U1 EXTST"
    assert lines[2] == "           ^^^^^"
    assert lines[3] == "  did you mean: EXTEST?"
    assert any(re.fullmatch(r".*bad\.loom:5:15: error: unknown net or group MUX_A9", l) for l in lines)


def test_syntax_error_exits_1(workdir: Path):
    program = workdir / "bad.loom"
    program.write_text('board "irrigation.yaml"\ntest t "t" {\n    step {\n')
    result = invoke("check", str(program))
    assert result.exit_code == 1
    assert re.match(r".*bad\.loom:3:10: error: syntax error: unexpected '\{'", result.stderr)
    assert "expected: a name" in result.stderr


def test_missing_program_exits_2(tmp_path: Path):
    result = invoke("check", str(tmp_path / "none.loom"))
    assert result.exit_code == 2
    assert "cannot read program" in result.stderr
    assert "Traceback" not in result.stderr


def test_missing_board_exits_2_pointing_at_the_board_line(tmp_path: Path):
    program = tmp_path / "p.loom"
    program.write_text('board "nowhere.yaml"\n')
    result = invoke("check", str(program))
    assert result.exit_code == 2
    assert re.match(r".*p\.loom:1:1: error: cannot read the board file nowhere\.yaml", result.stderr)


def test_bad_board_exits_2(workdir: Path):
    (workdir / "broken.yaml").write_text("chain: [\n")
    program = workdir / "p.loom"
    program.write_text('board "broken.yaml"\n')
    result = invoke("check", str(program))
    assert result.exit_code == 2
    assert "broken.yaml" in result.stderr and "Traceback" not in result.stderr


def test_board_option_overrides_the_program(workdir: Path, tmp_path: Path):
    program = tmp_path / "elsewhere.loom"
    program.write_text('board "not-used.yaml"\ntest t "t" {\n    read U1 DEVICE_ID\n}\n')
    result = invoke("check", str(program), "--board", str(workdir / "irrigation.yaml"))
    assert result.exit_code == 0, result.stderr
    assert re.search(r"1 tests?, 1 steps?, no errors", result.stdout)


def test_warnings_pass_unless_strict(workdir: Path):
    program = workdir / "warn.loom"
    program.write_text('board "irrigation.yaml"\ntest t "t" {\n}\n')
    result = invoke("check", str(program))
    assert result.exit_code == 0
    assert re.search(r"warn\.loom:2:6: warning: test t has no steps", result.stderr)
    assert result.stdout.endswith("no errors, 1 warning\n")
    strict = invoke("check", str(program), "--strict")
    assert strict.exit_code == 1
    assert re.search(r"warn\.loom:2:6: error: test t has no steps", strict.stderr)


def test_expectation_on_a_bypassed_device_fails_the_check(workdir: Path):
    # The language warns that the expectation would be ignored; the pre-hardware check makes it
    # an error (the device's boundary register is not in the chain).
    program = workdir / "bypassed.loom"
    program.write_text('board "irrigation.yaml"\ntest t "t" {\n    U1 EXTEST\n    step s {\n'
                       "        drive WDOG_DIS = 1\n        expect U3.MUXY(0) = 1\n    }\n}\n")
    result = invoke("check", str(program))
    assert result.exit_code == 1
    assert re.search(r"bypassed\.loom:6:\d+: error: \[bypass_expect\] U3\.MUXY\(0\) is expected 1 in "
                     r"step s, but U3 is in BYPASS", result.stderr)
    assert "will be ignored" not in result.stderr


def test_fmt_prints_checks_and_writes(workdir: Path):
    program = workdir / "messy.loom"
    messy = 'board  "irrigation.yaml"\ntest   t "t" {\n  step s {\n  drive MUX_SEL=1\n  }\n}'
    program.write_text(messy)
    canonical = ('board "irrigation.yaml"\n\ntest t "t" {\n    step s {\n        drive MUX_SEL = 1\n'
                 "    }\n}\n")
    printed = invoke("fmt", str(program))
    assert printed.exit_code == 0 and printed.stdout == canonical
    assert program.read_text() == messy
    checked = invoke("fmt", str(program), "--check")
    assert checked.exit_code == 1 and "not in canonical form" in checked.stderr
    written = invoke("fmt", str(program), "--write")
    assert written.exit_code == 0 and program.read_text() == canonical
    assert invoke("fmt", str(program), "--check").exit_code == 0
    assert sorted(p.name for p in workdir.glob(".fmt-*")) == []


def test_fmt_of_examples_is_a_no_op():
    for path in sorted(EXAMPLES.glob("*.loom")):
        assert invoke("fmt", str(path), "--check").exit_code == 0, path


def test_fmt_errors(tmp_path: Path):
    assert invoke("fmt", str(tmp_path / "none.loom")).exit_code == 2
    bad = tmp_path / "bad.loom"
    bad.write_text("board\n")
    result = invoke("fmt", str(bad))
    assert result.exit_code == 1
    assert re.match(r".*bad\.loom:1:6: error: syntax error: unexpected end of the line", result.stderr)


def test_help_of_both_commands_states_the_exit_codes():
    for command in ("check", "fmt"):
        result = invoke(command, "--help")
        assert result.exit_code == 0
        assert "Exit codes: 0 ok, 1" in result.stdout

"""Bad input on every finished command, through `python -m scanloom.cli` in a subprocess.

The contract (README, "Exit codes"): 0 ok, 1 a check or test failed (a program with errors, a
replay mismatch), 2 bad input or usage (a file that cannot be read, a malformed or misplaced
board, BSDL or shift file, a wrong option). Every error names `file:line:col` where the input
has a position, shows that line with a caret under the place, and no Python traceback reaches
the user.
"""

from __future__ import annotations

import json
import random
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

EXAMPLES = Path(__file__).resolve().parents[1] / "examples" / "irrigation"

OK, FAILED, BAD_INPUT = 0, 1, 2  # README, "Exit codes"


def run(cwd: Path, *args: str) -> subprocess.CompletedProcess[str]:
    done = subprocess.run([sys.executable, "-m", "scanloom.cli", *args], cwd=cwd,
                          capture_output=True, text=True, check=False)
    assert "Traceback" not in done.stderr, done.stderr
    return done


def expect(done: subprocess.CompletedProcess[str], code: int, pattern: str) -> str:
    """The exit code is `code` and stderr has a line matching `pattern` (anchored at the start)."""
    assert done.returncode == code, (done.returncode, done.stdout, done.stderr)
    assert re.search(pattern, done.stderr, re.MULTILINE), done.stderr
    return done.stderr


def caret_under(stderr: str, source_line: str, marked: str) -> None:
    """`source_line` is shown, and the caret line under it starts at the text `marked`."""
    lines = stderr.splitlines()
    for shown, carets in zip(lines, lines[1:]):
        if shown == "    " + source_line:
            column = source_line.index(marked)
            assert re.fullmatch(r" {%d}\^+" % (4 + column), carets), (shown, carets)
            return
    raise AssertionError(f"source line {source_line!r} not shown in:\n{stderr}")


@pytest.fixture(scope="module")
def board_dir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A copy of the demo board folder with one compiled shift file in `out/`."""
    target = tmp_path_factory.mktemp("errors") / "irrigation"
    shutil.copytree(EXAMPLES, target)
    done = run(target, "compile", "valve_nets.loom", "--out", "out", "--format", "json")
    assert done.returncode == OK, done.stderr
    return target


@pytest.fixture
def work(board_dir: Path, tmp_path: Path) -> Path:
    """A scratch folder beside the demo board: `../irrigation` reaches its files."""
    scratch = board_dir.parent / tmp_path.name
    scratch.mkdir()
    return scratch


def garbage(path: Path) -> Path:
    rng = random.Random(7)
    path.write_bytes(bytes(rng.randrange(256) for _ in range(600)))
    return path


# ---------------------------------------------------------------------------- missing and folders

@pytest.mark.parametrize("command", [("inspect",), ("check",), ("fmt",), ("compile", "--out", "o"),
                                     ("verify",)])
def test_a_missing_file_exits_2(work: Path, command: tuple[str, ...]) -> None:
    done = run(work, *command, "absent.file")
    expect(done, BAD_INPUT, r"^error: cannot read .*absent\.file: No such file or directory$")


@pytest.mark.parametrize("command", [("inspect",), ("check",), ("fmt",), ("compile", "--out", "o"),
                                     ("verify",)])
def test_a_folder_instead_of_a_file_is_a_usage_error(work: Path, command: tuple[str, ...]) -> None:
    (work / "folder").mkdir()
    done = run(work, *command, "folder")
    expect(done, BAD_INPUT, r"^Error: Invalid value for '.*': File 'folder' is a directory\.$")


@pytest.mark.parametrize("command, name, code, pattern", [
    ("inspect", "empty.yaml", BAD_INPUT, r"^empty\.yaml:1:1: error: the board file must be a YAML mapping$"),
    ("check", "empty.loom", FAILED, r"^empty\.loom:1:1: error: the program names no board$"),
    ("verify", "empty.json", BAD_INPUT, r"^empty\.json:1:1: error: not valid JSON: Expecting value$"),
])
def test_an_empty_file(work: Path, command: str, name: str, code: int, pattern: str) -> None:
    (work / name).write_text("")
    expect(run(work, command, name), code, pattern)


@pytest.mark.parametrize("command, kind", [("inspect", "a board file"), ("check", "a test program"),
                                           ("fmt", "a test program"), ("verify", "a shift file")])
def test_binary_garbage_is_named_as_such(work: Path, command: str, kind: str) -> None:
    garbage(work / "noise.bin")
    done = run(work, command, "noise.bin")
    stderr = expect(done, BAD_INPUT, rf"^noise\.bin:1:\d+: error: this looks like binary data, not {kind}$")
    assert "syntax error" not in stderr and "not valid" not in stderr
    # Control characters of the shown line are printed as `?`, so the terminal is not disturbed.
    assert not re.search("[\x00-\x08\x0b-\x1f\x7f]", stderr)


# ---------------------------------------------------------------------------- inspect

def test_inspect_a_bsdl_file_says_what_it_is(board_dir: Path) -> None:
    done = run(board_dir, "inspect", "bsdl/rc4_ctrl.bsd")
    stderr = expect(done, BAD_INPUT, r"^bsdl/rc4_ctrl\.bsd:23:1: error: this looks like a BSDL file, "
                                     r"not a board file$")
    caret_under(stderr, "entity RC4_CTRL is", "entity")
    assert "not valid YAML" not in stderr


def test_inspect_a_program_or_a_shift_file(board_dir: Path) -> None:
    program = run(board_dir, "inspect", "valve_nets.loom")
    expect(program, BAD_INPUT, r"^valve_nets\.loom:4:1: error: this looks like a test program, "
                               r"not a board file$")
    shifts = run(board_dir, "inspect", "out/valve_nets.json")
    expect(shifts, BAD_INPUT, r"^out/valve_nets\.json:1:1: error: this looks like a shift file, "
                              r"not a board file$")


def test_a_control_character_in_a_board_is_located(work: Path) -> None:
    # YAML allows only printable characters in a document (YAML 1.1, 5.1 character set).
    (work / "ctrl.yaml").write_text("board: x\nchain: [\x07]\n")
    done = run(work, "inspect", "ctrl.yaml")
    stderr = expect(done, BAD_INPUT, r"^ctrl\.yaml:2:9: error: the board file is not valid YAML: "
                                     r"character #x0007 is not allowed")
    assert "<unicode string>" not in stderr


def _board_with(board_dir: Path, name: str, old: str, new: str) -> str:
    text = (board_dir / "irrigation.yaml").read_text()
    assert old in text
    (board_dir / name).write_text(text.replace(old, new))
    return name


def test_a_missing_bsdl_file_is_reported_once(board_dir: Path) -> None:
    name = _board_with(board_dir, "missing_bsdl.yaml", "bsdl/rc4_link.bsd", "bsdl/rc4_lnk.bsd")
    done = run(board_dir, "inspect", name)
    stderr = expect(done, BAD_INPUT, r"^missing_bsdl\.yaml:\d+:\d+: error: BSDL file 'bsdl/rc4_lnk\.bsd' "
                                     r"of U4 not found$")
    assert re.search(r"^  did you mean: rc4_link\.bsd\b", stderr, re.MULTILINE)
    # The nets naming U4's pins are not reported one by one: the cause is the chain entry.
    assert len(re.findall(r": error: ", stderr)) == 1, stderr


def test_a_board_file_where_a_bsdl_file_belongs(board_dir: Path) -> None:
    name = _board_with(board_dir, "board_as_bsdl.yaml", "bsdl/rc4_link.bsd", "irrigation.yaml")
    done = run(board_dir, "inspect", name)
    stderr = expect(done, BAD_INPUT, r"^irrigation\.yaml:1:1: error: this file has no entity: it does not "
                                     r"look like BSDL$")
    assert len(re.findall(r": error: ", stderr)) == 1, stderr


def test_a_bsdl_path_that_is_a_folder(board_dir: Path) -> None:
    name = _board_with(board_dir, "folder_bsdl.yaml", "bsdl/rc4_link.bsd", "bsdl")
    done = run(board_dir, "inspect", name)
    stderr = expect(done, BAD_INPUT, r"^folder_bsdl\.yaml:\d+:\d+: error: the BSDL path 'bsdl' of U4 "
                                     r"is a folder$")
    assert len(re.findall(r": error: ", stderr)) == 1, stderr


def test_a_broken_bsdl_file_comes_first_and_notes_are_counted(board_dir: Path) -> None:
    (board_dir / "bsdl" / "broken.bsd").write_text("entity BROKEN is\n  generic (\nend BROKEN;\n")
    name = _board_with(board_dir, "broken_bsdl.yaml", "bsdl/rc4_link.bsd", "bsdl/broken.bsd")
    done = run(board_dir, "inspect", name)
    stderr = expect(done, BAD_INPUT, r"^bsdl/broken\.bsd:\d+:\d+: error: ")
    assert stderr.startswith("bsdl/broken.bsd:"), stderr
    assert ": note: " not in stderr
    assert re.search(r"^\(\d+ notes? not shown\)$", stderr, re.MULTILINE)
    with_notes = run(board_dir, "inspect", name, "--notes")
    assert ": note: " in with_notes.stderr


def test_inspect_an_unknown_option(board_dir: Path) -> None:
    done = run(board_dir, "inspect", "irrigation.yaml", "--jsn")
    expect(done, BAD_INPUT, r"^Error: No such option '--jsn'\. Did you mean '--json'\?$")


# ---------------------------------------------------------------------------- check

@pytest.mark.parametrize("path, line, shown, kind", [
    ("bsdl/rc4_ctrl.bsd", 23, "entity RC4_CTRL is", "a BSDL file"),
    ("irrigation.yaml", 15, "chain:                          # TDI -> TDO", "a board file"),
    ("out/valve_nets.json", 1, "{", "a shift file"),
])
def test_check_another_kind_of_file(board_dir: Path, path: str, line: int, shown: str, kind: str) -> None:
    done = run(board_dir, "check", path)
    stderr = expect(done, BAD_INPUT, rf"^{re.escape(path)}:{line}:1: error: this looks like {kind}, "
                                     r"not a test program$")
    caret_under(stderr, shown, shown[0])
    assert "syntax error" not in stderr


def test_check_with_a_bsdl_file_as_board(board_dir: Path) -> None:
    done = run(board_dir, "check", "valve_nets.loom", "--board", "bsdl/rc4_ctrl.bsd")
    expect(done, BAD_INPUT, r"^bsdl/rc4_ctrl\.bsd:23:1: error: this looks like a BSDL file, "
                            r"not a board file$")


def test_a_program_naming_a_bsdl_file_as_its_board(board_dir: Path) -> None:
    (board_dir / "bsdl_board.loom").write_text('board "bsdl/rc4_ctrl.bsd"\n')
    done = run(board_dir, "check", "bsdl_board.loom")
    expect(done, BAD_INPUT, r"^bsdl/rc4_ctrl\.bsd:23:1: error: this looks like a BSDL file, "
                            r"not a board file$")


def test_a_program_naming_a_missing_board(work: Path) -> None:
    (work / "lost.loom").write_text('board "nowhere.yaml"\n')
    done = run(work, "check", "lost.loom")
    stderr = expect(done, BAD_INPUT, r"^lost\.loom:1:1: error: cannot read the board file nowhere\.yaml$")
    caret_under(stderr, 'board "nowhere.yaml"', "board")


def test_an_included_bsdl_file_is_one_error_at_the_include(board_dir: Path) -> None:
    (board_dir / "includes_bsdl.loom").write_text('board "irrigation.yaml"\ninclude "bsdl/rc4_ctrl.bsd"\n')
    done = run(board_dir, "check", "includes_bsdl.loom")
    stderr = expect(done, FAILED, r"^includes_bsdl\.loom:2:1: error: included file bsdl/rc4_ctrl\.bsd looks "
                                  r"like a BSDL file, not a test program$")
    caret_under(stderr, 'include "bsdl/rc4_ctrl.bsd"', "include")
    assert len(re.findall(r": error: ", stderr)) == 1, stderr


def test_a_syntax_error_at_the_end_of_the_file_points_at_the_last_line(board_dir: Path) -> None:
    (board_dir / "cut.loom").write_text('board "irrigation.yaml"\ntest t "t" {\n    step s {\n'
                                        "        drive MUX_SEL = 1")
    done = run(board_dir, "check", "cut.loom")
    stderr = expect(done, FAILED, r"^cut\.loom:4:26: error: syntax error: the program ends too early$")
    assert re.search(r"^  expected: .*'}'$", stderr, re.MULTILINE)


def test_unknown_names_come_with_the_nearest_ones(board_dir: Path) -> None:
    (board_dir / "names.loom").write_text(
        'board "irrigation.yaml"\ntest t "t" {\n    U9 EXTEST\n    U1 EXTST\n    step s {\n'
        "        drive VALVE_D9 = 1\n    }\n}\n")
    done = run(board_dir, "check", "names.loom")
    stderr = expect(done, FAILED, r"^names\.loom:3:5: error: unknown device U9$")
    expect(done, FAILED, r"^names\.loom:4:8: error: U1 \(RC4_CTRL\) has no instruction EXTST$")
    expect(done, FAILED, r"^names\.loom:6:15: error: unknown net or group VALVE_D9$")
    caret_under(stderr, "    U1 EXTST", "EXTST")
    assert re.search(r"^  did you mean: EXTEST\?$", stderr, re.MULTILINE)


@pytest.mark.parametrize("header, pattern", [
    ("tck 1e400 Hz", r"^bounds\.loom:2:5: error: a TCK of 1e400 Hz is out of range$"),
    ("tck 0 Hz", r"^bounds\.loom:2:5: error: the TCK frequency must be above zero$"),
    ("fight limit 1e400 s", r"^bounds\.loom:2:13: error: the fight limit must be at most an hour$"),
])
def test_numbers_out_of_range_in_the_header(board_dir: Path, header: str, pattern: str) -> None:
    (board_dir / "bounds.loom").write_text(f'board "irrigation.yaml"\n{header}\n')
    done = run(board_dir, "check", "bounds.loom")
    expect(done, FAILED, pattern)


@pytest.mark.parametrize("wait, pattern", [
    ("wait 99999999999999999999 clocks", r"wait 99999999999999999999 clocks is too long: one wait "
                                         r"lasts at most 100,000,000 clocks$"),
    ("wait 1000 s", r"wait 1000 s is too long \(10,000,000,000 clocks at the declared TCK\): one "
                    r"wait lasts at most 100,000,000 clocks$"),
])
def test_a_wait_too_long_to_lay_out(board_dir: Path, wait: str, pattern: str) -> None:
    (board_dir / "long_wait.loom").write_text(
        f'board "irrigation.yaml"\ntck 10 MHz\ntest t "t" {{\n    {wait}\n}}\n')
    for command in (("check",), ("compile", "--out", "long")):
        done = run(board_dir, *command, "long_wait.loom")
        expect(done, FAILED, r"^long_wait\.loom:4:10: error: " + pattern)
    assert not (board_dir / "long").exists()


def test_a_byte_order_mark_is_not_part_of_the_program(board_dir: Path) -> None:
    text = (board_dir / "valve_nets.loom").read_text()
    (board_dir / "bom.loom").write_text("\ufeff" + text, encoding="utf-8")
    done = run(board_dir, "check", "bom.loom")
    assert done.returncode == OK, done.stderr


def test_a_very_long_line_is_cut_around_the_caret(board_dir: Path) -> None:
    (board_dir / "wide.loom").write_text('board "irrigation.yaml"\n' + " " * 5000 + "test ?\n")
    done = run(board_dir, "check", "wide.loom")
    stderr = expect(done, FAILED, r"^wide\.loom:2:5006: error: syntax error: unexpected '\?'$")
    shown, carets = stderr.splitlines()[1:3]
    assert shown.startswith("    ...") and len(shown) < 140
    assert re.fullmatch(r" +\^", carets) and shown[len(carets) - 1] == "?"


# ---------------------------------------------------------------------------- fmt

def test_fmt_check_and_write_together_is_a_usage_error(board_dir: Path) -> None:
    done = run(board_dir, "fmt", "valve_nets.loom", "--check", "--write")
    expect(done, BAD_INPUT, r"^Error: --check and --write exclude each other")


def test_fmt_a_bsdl_file(board_dir: Path) -> None:
    done = run(board_dir, "fmt", "bsdl/rc4_link.bsd")
    expect(done, BAD_INPUT, r"^bsdl/rc4_link\.bsd:\d+:1: error: this looks like a BSDL file, "
                            r"not a test program$")


def test_fmt_a_syntax_error(work: Path) -> None:
    (work / "bad.loom").write_text('board "b.yaml"\ntest t "t" {\n    step s {\n')
    done = run(work, "fmt", "bad.loom")
    expect(done, FAILED, r"^bad\.loom:3:13: error: syntax error: the program ends too early$")


@pytest.mark.skipif(not Path("/proc/self/fd").is_dir(), reason="needs /proc (Linux)")
def test_fmt_write_into_a_folder_that_takes_no_files(work: Path) -> None:
    # /proc/self/fd/0 reads like the program, but nothing can be created in /proc/self/fd,
    # not even by the superuser: the rewrite fails and must say so.
    program = work / "messy.loom"
    program.write_text('board   "b.yaml"\n')
    with program.open() as stdin:
        done = subprocess.run([sys.executable, "-m", "scanloom.cli", "fmt", "--write", "/proc/self/fd/0"],
                              stdin=stdin, capture_output=True, text=True, check=False)
    assert "Traceback" not in done.stderr, done.stderr
    expect(done, BAD_INPUT, r"^error: cannot write program /proc/self/fd/0: ")
    assert program.read_text() == 'board   "b.yaml"\n'


# ---------------------------------------------------------------------------- compile

def test_compile_without_out(board_dir: Path) -> None:
    done = run(board_dir, "compile", "valve_nets.loom")
    expect(done, BAD_INPUT, r"^Error: Missing option '--out'")


@pytest.mark.parametrize("formats, pattern", [
    ("json,pdf", r'^error: unknown output format "pdf"$'),
    ("JSON", r"^  did you mean: json\?$"),
    (",", r"^Error: Invalid value for --format: name at least one of json, cycles, vcd, listing$"),
])
def test_compile_with_wrong_formats(board_dir: Path, formats: str, pattern: str) -> None:
    done = run(board_dir, "compile", "valve_nets.loom", "--out", "formats", "--format", formats)
    expect(done, BAD_INPUT, pattern)
    assert not (board_dir / "formats").exists()


def test_compile_into_a_file(board_dir: Path) -> None:
    done = run(board_dir, "compile", "valve_nets.loom", "--out", "irrigation.yaml")
    expect(done, BAD_INPUT, r"^Error: Invalid value for '--out': Directory 'irrigation\.yaml' is a file\.$")


def test_compile_into_a_folder_that_cannot_be_made(board_dir: Path) -> None:
    # A folder below a regular file cannot exist, whoever runs the compiler.
    done = run(board_dir, "compile", "valve_nets.loom", "--out", "irrigation.yaml/out")
    expect(done, BAD_INPUT, r"^error: cannot write irrigation\.yaml/out: Not a directory$")


def test_compile_a_program_with_errors_writes_nothing(board_dir: Path) -> None:
    (board_dir / "wrong.loom").write_text('board "irrigation.yaml"\ntest t "t" {\n    U1 EXTST\n}\n')
    done = run(board_dir, "compile", "wrong.loom", "--out", "wrong")
    expect(done, FAILED, r"^wrong\.loom:3:8: error: U1 \(RC4_CTRL\) has no instruction EXTST$")
    expect(done, FAILED, r"^wrong\.loom: not compiled: the program has errors$")
    assert not (board_dir / "wrong").exists()


def test_compile_a_board_file(board_dir: Path) -> None:
    done = run(board_dir, "compile", "irrigation.yaml", "--out", "board_out")
    expect(done, BAD_INPUT, r"^irrigation\.yaml:15:1: error: this looks like a board file, not a test program$")


# ---------------------------------------------------------------------------- verify

def _shift_data(board_dir: Path) -> dict:
    return json.loads((board_dir / "out" / "valve_nets.json").read_text())


def _write(work: Path, name: str, data: object) -> str:
    (work / name).write_text(json.dumps(data, indent=1))
    return name


def test_verify_a_truncated_file(board_dir: Path, work: Path) -> None:
    text = (board_dir / "out" / "valve_nets.json").read_text()
    cut = text[:5000]
    (work / "cut.json").write_text(cut)
    done = run(work, "verify", "cut.json")
    lines = cut.splitlines()
    stderr = expect(done, BAD_INPUT, rf"^cut\.json:{len(lines)}:\d+: error: not valid JSON: Unterminated string$")
    assert "    " + lines[-1] in stderr.splitlines()


@pytest.mark.parametrize("data, pattern", [
    ({"schema": "other.thing", "version": 1}, r'^other\.json:\d+:\d+: error: schema: not a scanloom shift file$'),
    ([1, 2, 3], r"^other\.json:1:1: error: the file: expected a shift file object, found a list$"),
])
def test_verify_json_of_another_schema(work: Path, data: object, pattern: str) -> None:
    done = run(work, "verify", _write(work, "other.json", data))
    expect(done, BAD_INPUT, pattern)


def test_verify_another_version(board_dir: Path, work: Path) -> None:
    data = _shift_data(board_dir)
    data["version"] = 2
    done = run(work, "verify", _write(work, "v2.json", data))
    stderr = expect(done, BAD_INPUT, r"^v2\.json:3:13: error: version: shift file version 2 is not supported$")
    caret_under(stderr, ' "version": 2,', "2")


@pytest.mark.parametrize("path", ["../irrigation/bsdl/rc4_ctrl.bsd", "../irrigation/valve_nets.loom"])
def test_verify_another_kind_of_file(work: Path, path: str) -> None:
    done = run(work, "verify", path)
    expect(done, BAD_INPUT, rf"^{re.escape(path)}:\d+:1: error: this looks like (a BSDL file|a test program), "
                            r"not a shift file$")


@pytest.mark.parametrize("edit, pattern", [
    (lambda d: d["records"][3].update(tdi="zz"),
     r"records\[3\]\.tdi: bad bit string: 5 hex digits expected for 18 bits, found 2$"),
    (lambda d: d["records"][3].update(kind="xyz"), r'records\[3\]\.kind: unknown record kind "xyz"$'),
    (lambda d: d["chain"][0].update(ir_length="five"),
     r'chain\[0\]\.ir_length: expected a whole number >= 1, found "five"$'),
    # IEEE Std 1149.1-2001, the bypass register is a single shift-register stage (from memory 10.1.1).
    (lambda d: d["chain"][3]["registers"].update(BYPASS=2),
     r"chain\[3\]\.registers\.BYPASS: the BYPASS register is 1 bit long \(IEEE 1149\.1\), not 2$"),
    # A length the reader would otherwise hand to the replay as a register of 2**40 bits.
    (lambda d: d["chain"][0]["registers"].update(CFGREG=2 ** 40),
     r"chain\[0\]\.registers\.CFGREG: expected a register length from 1 to 1,000,000, "
     r"found the number 1099511627776$"),
    (lambda d: d["chain"][0].update(boundary_length=208),
     r'chain\[0\]\.boundary_length: the boundary register is 209 bits long in "registers", '
     r"208 here$"),
    (lambda d: (d["chain"][1]["registers"].pop("BOUNDARY"), d["chain"][1].update(boundary_length=2 ** 40)),
     r"chain\[1\]\.boundary_length: expected a register length from 0 to 1,000,000, found 1099511627776$"),
])
def test_verify_a_hand_edited_file_that_breaks_the_schema(board_dir: Path, work: Path, edit, pattern: str) -> None:
    data = _shift_data(board_dir)
    edit(data)
    done = run(work, "verify", _write(work, "edited.json", data))
    expect(done, BAD_INPUT, r"^edited\.json:\d+:\d+: error: " + pattern)


def test_verify_a_hand_edited_bit_is_a_mismatch(board_dir: Path, work: Path) -> None:
    data = _shift_data(board_dir)
    record = data["records"][4]
    record["tdi"] = format(int(record["tdi"], 16) ^ 1, f"0{len(record['tdi'])}x")  # bit 0 flipped
    done = run(work, "verify", _write(work, "flipped.json", data))
    expect(done, FAILED, r"^flipped\.json: record 4, cycle \d+: TDI bit 0 is \d in the cycles, \d in the record$")
    expect(done, FAILED, r"^flipped\.json: replay found 1 mismatch: ")


def _flip(hex_text: str, bit: int) -> str:
    """Flip bit `bit` of a shift-file hex string (bit 0 = least significant = last digit)."""
    value = int(hex_text, 16) ^ (1 << bit)
    return format(value, f"0{len(hex_text)}x")


def test_verify_a_hand_edited_extest_without_preload_is_a_hazard(board_dir: Path, work: Path) -> None:
    # Record 1 loads PRELOAD (00010) into U1, the device nearest TDI: its 5 IR bits are the last
    # of the 18-bit scan (offset 13). Clearing opcode bit 1 (scan bit 14) in the record and in the
    # cycles makes it EXTEST (00000): the replay agrees bit for bit, but U1 now drives its pins
    # before its boundary register was loaded (IEEE Std 1149.1-2001, EXTEST clause, from memory
    # 8.8: the update stage must hold defined data first).
    data = _shift_data(board_dir)
    record = data["records"][1]
    assert record["intent"]["U1"] == "PRELOAD" and record["length"] == 18
    record["tdi"] = _flip(record["tdi"], 14)
    record["intent"]["U1"] = "EXTEST"
    cycles = data["cycles"]
    cycles["tdi"] = _flip(cycles["tdi"], cycles["shift_starts"][0] + 14)
    name = _write(work, "no_preload.json", data)
    done = run(work, "verify", name)
    expect(done, FAILED, r"^no_preload\.json: error: \[no_preload\] record 1 \(IR scan\): U1 enters EXTEST "
                         r"but its boundary register was not loaded since Test-Logic-Reset$")
    expect(done, FAILED, r"^no_preload\.json: 1 sequencing hazard: not safe to run")
    assert re.search(r"^no_preload\.json: replay agrees: ", done.stdout, re.MULTILINE), done.stdout
    accepted = run(work, "verify", "--allow", "no_preload", name)
    assert accepted.returncode == OK, accepted.stderr


@pytest.mark.parametrize("name, pattern", [
    ("contention", r"^Error: Invalid value for --allow: 'contention' is not a check of shift records; "
                   r"choose from no_preload$"),
    ("no_prelod", r"\(did you mean no_preload\?\)$"),
])
def test_verify_allows_only_checks_of_shift_records(board_dir: Path, name: str, pattern: str) -> None:
    done = run(board_dir, "verify", "--allow", name, "out/valve_nets.json")
    expect(done, BAD_INPUT, pattern)


def test_verify_a_negative_limit(board_dir: Path) -> None:
    done = run(board_dir, "verify", "--limit", "-1", "out/valve_nets.json")
    expect(done, BAD_INPUT, r"^Error: Invalid value for '--limit': -1 is not in the range x>=0\.$")

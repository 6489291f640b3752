"""Pre-hardware checks: each fires on a minimal bad program, with its message and location,
and stays silent on every example."""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import pytest

from scanloom.analysis.prehardware import check_program, check_records
from scanloom.backend.records import DR_SCAN, ScanProgram
from scanloom.backend.schedule import schedule
from scanloom.diagnostics import Diagnostics
from scanloom.lang.frontend import load_program

DEMO = Path(__file__).resolve().parents[1] / "examples" / "irrigation"
EXAMPLES = sorted(DEMO.glob("*.loom"))


def write_program(tmp_path: Path, body: str, header: str = "tck 10 MHz") -> Path:
    program = tmp_path / "p.loom"
    program.write_text(f'board "{DEMO / "irrigation.yaml"}"\n{header}\n{body}')
    return program


def findings_of(path: Path):
    diagnostics = Diagnostics()
    program, board = load_program(path, diagnostics)
    diagnostics.raise_if_errors()
    return check_program(program, board, schedule(program, board)).findings


@pytest.mark.parametrize("example", EXAMPLES, ids=[p.name for p in EXAMPLES])
def test_examples_are_clean(example: Path) -> None:
    assert findings_of(example) == []


def only(findings, check: str):
    found = [f for f in findings if f.check == check]
    assert found, [(f.check, f.message) for f in findings]
    return found


def test_contention_through_a_shared_control_cell(tmp_path: Path) -> None:
    # U1's data bus D(7:0) shares one enable cell: driving D(0) enables all eight, the others at
    # their safe value 0. U4 drives DATA1 to 1 from its own pin: the two fight on DATA1, which
    # the front end cannot see (it only sees drives on different nets).
    path = write_program(tmp_path, """
test fight "a shared enable turns on a sibling" {
    U1, U4 EXTEST
    step both {
        drive WDOG_DIS = 1
        drive U1.D(0) = 1, U4.DQ(1) = 1
    }
}
""")
    found = only(findings_of(path), "contention")
    assert re.fullmatch(r"net DATA1: U4\.DQ\(1\) drives 1 while U1\.D\(1\) drives 0 in step both",
                        found[0].message)
    assert (found[0].span.line, found[0].test, found[0].step) == (6, "fight", "both")


def test_functional_driver_on_a_driven_bus(tmp_path: Path) -> None:
    # U4 in SAMPLE keeps its outputs under its own logic while U1 drives the bus.
    path = write_program(tmp_path, """
test bus "U1 drives the bus" {
    U1 EXTEST
    U4 SAMPLE
    step s {
        drive WDOG_DIS = 1, U1.D(3) = 1
    }
}
""")
    found = only(findings_of(path), "functional_driver")
    assert any(f.message.startswith("net DATA3 is driven by U1.D(3) while U4 is in SAMPLE: its output "
                                    "U4.DQ(3) follows its own logic") for f in found)


def test_never_driven_net(tmp_path: Path) -> None:
    path = write_program(tmp_path, """
test mains "drives the pump contactor" {
    U1 EXTEST
    step on {
        drive WDOG_DIS = 1, PUMP_MAINS_EN = 1
    }
}
""")
    found = only(findings_of(path), "never_drive")
    assert re.match(r"net PUMP_MAINS_EN must never be driven, but U\d\.\S+ drives it 1 in step on",
                    found[0].message)
    assert found[0].span.line == 6


def test_held_net_left_undriven(tmp_path: Path) -> None:
    # WDOG_DIS is held at 1 by the board file; in EXTEST its driver U1 must drive it.
    path = write_program(tmp_path, """
test forgot "forgets the watchdog" {
    U1 EXTEST
    step s {
        drive VALVE_D0 = 1
    }
}
""")
    found = only(findings_of(path), "hold")
    assert re.match(r"net WDOG_DIS must be held at 1, but in step s its driver U1\.\S+ is under scan "
                    r"control and does not drive it \(drive WDOG_DIS = 1\)", found[0].message)


def test_held_net_driven_to_the_other_value(tmp_path: Path) -> None:
    path = write_program(tmp_path, """
test wrong "drives the watchdog off" {
    U1 EXTEST
    step s {
        drive WDOG_DIS = 0
    }
}
""")
    found = only(findings_of(path), "hold")
    assert re.match(r"net WDOG_DIS must be held at 1, but U1\.\S+ drives it 0 in step s", found[0].message)


def test_tck_above_the_device_maximum(tmp_path: Path) -> None:
    # U1's BSDL gives TAP_SCAN_CLOCK 25 MHz as its maximum.
    path = write_program(tmp_path, """
test t "idle" {
    read U4 DEVICE_ID
}
""", header="tck 40 MHz")
    found = only(findings_of(path), "tck_too_fast")
    assert re.fullmatch(r"TCK 40 MHz is above the 25 MHz maximum of U1 \(RC4_CTRL, TAP_SCAN_CLOCK\)",
                        found[0].message)
    assert found[0].span.line == 2


def test_runbist_without_its_idle_time(tmp_path: Path) -> None:
    # U1's RUNBIST_EXECUTION asks for 1 ms and 20000 TCK; 100 clocks are far too few.
    path = write_program(tmp_path, """
test bist "too short" {
    U1 RUNBIST
    wait 100 clocks
    read U1 BISTSIG expect 0b0110100111001010
}
""")
    found = only(findings_of(path), "self_test_idle")
    assert re.match(r"U1 RUNBIST needs 20000 idle clocks in Run-Test/Idle \(.*\); the test gives 100",
                    found[0].message)


def test_compliance_pin_not_held(tmp_path: Path) -> None:
    # U4's COMPLIANCE_PATTERNS ask for TEST_EN at 1; without the board's pull-up nothing holds it.
    board_dir = tmp_path / "board"
    shutil.copytree(DEMO, board_dir)
    yaml_path = board_dir / "irrigation.yaml"
    text = yaml_path.read_text()
    assert "TEST_EN: up" in text
    yaml_path.write_text(text.replace("TEST_EN: up", "TEST_EN: down"))
    program = board_dir / "p.loom"
    program.write_text('board "irrigation.yaml"\ntest t "idle" {\n    read U4 DEVICE_ID\n}\n')
    found = only(findings_of(program), "compliance")
    assert re.fullmatch(r"U4\.TEST_EN must be held at 1 \(COMPLIANCE_PATTERNS\) but net \S+ is not "
                        r"held at that value by the board", found[0].message)
    assert found[0].span.line == 1  # the board statement


def test_allow_accepts_an_intentional_case(tmp_path: Path) -> None:
    path = write_program(tmp_path, """
test bus "U1 drives the bus" {
    U1 EXTEST
    U4 SAMPLE
    allow functional_driver "U4 is held in reset by the fixture"
    step s {
        drive WDOG_DIS = 1, U1.D(3) = 1
    }
}
""")
    diagnostics = Diagnostics()
    program, board = load_program(path, diagnostics)
    report = check_program(program, board)
    assert not [f for f in report.findings if f.check == "functional_driver"]
    assert any("U4 is held in reset by the fixture" in note for note in report.allowed_notes())


def test_preload_check_on_records_from_elsewhere() -> None:
    # The compiler always preloads; a hand-edited record sequence without the preload DR scan
    # must be refused (IEEE 1149.1: EXTEST only after the boundary register holds defined values).
    diagnostics = Diagnostics()
    program, board = load_program(DEMO / "valve_nets.loom", diagnostics)
    scan = schedule(program, board)
    assert check_records(scan).findings == []
    kept = tuple(r for r in scan.records if not (r.kind == DR_SCAN and r.purpose == "preload"))
    assert len(kept) < len(scan.records)
    edited = ScanProgram(scan.source, scan.board, scan.tck_hz, scan.chain, kept)
    found = only(check_records(edited).findings, "no_preload")
    assert re.match(r"record \d+ \(IR scan\): U1 enters EXTEST but its boundary register was not "
                    r"loaded since Test-Logic-Reset", found[0].message)


def test_short_fight_at_a_slow_tck(tmp_path: Path) -> None:
    # VALVE_D0 and VALVE_D1 leave U1 on neighbouring balls; driven 1 and 0 at 1 kHz, the vector
    # stays applied for about a quarter of a second: shorted, the drivers would fight that long,
    # far above the 1 ms limit (common practice for output-to-output fights).
    path = write_program(tmp_path, """
test slow "opposite values on neighbours, slowly" {
    U1 EXTEST
    step opposed {
        drive WDOG_DIS = 1, VALVE_D0 = 1, VALVE_D1 = 0
    }
    step again {
        drive VALVE_D0 = 0, VALVE_D1 = 1
    }
}
""", header="tck 1 kHz")
    diagnostics = Diagnostics()
    program, board = load_program(path, diagnostics)
    scan = schedule(program, board)
    from scanloom.backend.cycles import lay_out_cycles

    found = only(check_program(program, board, scan, lay_out_cycles(scan)).findings, "short_fight")
    assert re.match(r"adjacent pins U1\.\S+ and U1\.\S+( and \d+ more pairs)? are driven to opposite "
                    r"values in step opposed: if shorted, the drivers would fight for [\d.]+ ms "
                    r"\(limit 1 ms\)", found[0].message)
    assert found[0].span.line == 6
    # At 10 MHz the same vectors stay well under the limit.
    fast = write_program(tmp_path, path.read_text().split("\n", 2)[2], header="tck 10 MHz")
    program, board = load_program(fast, Diagnostics())
    scan = schedule(program, board)
    assert not [f for f in check_program(program, board, scan, lay_out_cycles(scan)).findings
                if f.check == "short_fight"]


def test_expectation_on_a_device_in_bypass_is_an_error(tmp_path: Path) -> None:
    # U2 stays in BYPASS (the default): its boundary register is not in the chain, so the
    # expectation could never be compared (IEEE Std 1149.1, BYPASS register).
    path = write_program(tmp_path, """
test t "expects on a bypassed device" {
    U1 EXTEST
    step s {
        drive WDOG_DIS = 1, VALVE_D0 = 1
        expect U2.VIN(0) = 1
    }
}
""")
    found = only(findings_of(path), "bypass_expect")
    assert re.fullmatch(r"U2\.VIN\(0\) is expected 1 in step s, but U2 is in BYPASS: its boundary "
                        r"register is not in the chain", found[0].message)
    assert found[0].span.line == 8
    from scanloom.pipeline import check_source_program

    diagnostics = Diagnostics()
    check_source_program(path, diagnostics)
    # The language's own warning for the same expectation gives way to the error.
    assert [d.severity for d in diagnostics.items if d.span and d.span.line == 8] == ["error"]


def test_expectation_on_a_floating_net_warns(tmp_path: Path) -> None:
    # Both ends of DATA0 are in EXTEST with their outputs disabled and the net has no pull: it
    # floats, and a CMOS input reads an undefined value (common practice).
    path = write_program(tmp_path, """
test t "reads a released bus" {
    U1, U4 EXTEST
    step s {
        drive WDOG_DIS = 1
        expect DATA0 = 1
    }
}
""")
    found = only(findings_of(path), "floating")
    assert re.fullmatch(r"net DATA0 floats in step s \(nothing drives it\), yet 1 is expected: a CMOS "
                        r"receiver reads an undefined value", found[0].message)
    assert found[0].span.line == 8


def test_verify_refuses_a_shift_file_without_preload(tmp_path: Path) -> None:
    # A self-consistent shift file from elsewhere (records and cycles agree) that enters EXTEST
    # without the preload scan: the replay has nothing to object to, the sequencing check does.
    import subprocess
    import sys

    from scanloom.backend.cycles import lay_out_cycles
    from scanloom.backend.writers import write_outputs

    diagnostics = Diagnostics()
    program, board = load_program(DEMO / "valve_nets.loom", diagnostics)
    scan = schedule(program, board)
    kept = tuple(r for r in scan.records if not (r.kind == DR_SCAN and r.purpose == "preload"))
    edited = ScanProgram(scan.source, scan.board, scan.tck_hz, scan.chain, kept)
    write_outputs(edited, lay_out_cycles(edited), tmp_path, "edited", {"json"})
    result = subprocess.run([sys.executable, "-m", "scanloom.cli", "verify", str(tmp_path / "edited.json")],
                            capture_output=True, text=True, timeout=120)
    assert result.returncode == 1, result.stdout + result.stderr
    assert re.search(r"edited\.json: error: \[no_preload\] record \d+ \(IR scan\): U1 enters EXTEST but "
                     r"its boundary register was not loaded since Test-Logic-Reset", result.stderr)
    assert "Traceback" not in result.stderr


@pytest.mark.parametrize("body, code, pattern", [
    # A BC_1 output cell captures the system logic side under EXTEST: unknown, so the pin cannot
    # be checked there (IEEE Std 1149.1-2001 Annex B, BC_1: every capture from the parallel input).
    ("    U2 EXTEST\n    step s {\n        expect U2.VOUT(0) = 1\n    }\n", "cannot_capture",
     r"U2\.VOUT\(0\) has no boundary cell that captures it"),
    # U2 in SAMPLE does not drive its pins: its own logic does.
    ("    U2 SAMPLE\n    step s {\n        drive U2.VOUT(0) = 1\n    }\n", "not_driving_mode",
     r"U2\.VOUT\(0\) cannot be driven in this step"),
])
def test_language_errors_carry_the_check_names(tmp_path: Path, body: str, code: str, pattern: str) -> None:
    from scanloom.diagnostics import ScanloomError

    path = write_program(tmp_path, f'test t "t" {{\n{body}}}\n')
    with pytest.raises(ScanloomError) as info:
        load_program(path, Diagnostics())
    found = [d for d in info.value.diagnostics if d.code == code]
    assert found and re.match(pattern, found[0].message), [(d.code, d.message) for d in info.value.diagnostics]
    assert found[0].span.line == 6

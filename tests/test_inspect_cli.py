"""`scanloom inspect` through the installed command: golden JSON, text, exit codes."""

from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
BOARD = ROOT / "examples" / "irrigation" / "irrigation.yaml"
GOLDEN = Path(__file__).parent / "golden" / "inspect_irrigation.json"


def run(*args: str, cwd: Path = ROOT) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "scanloom.cli", *args], cwd=cwd,
                          capture_output=True, text=True, timeout=120)


def test_inspect_json_matches_golden() -> None:
    result = run("inspect", "examples/irrigation/irrigation.yaml", "--json")
    assert result.returncode == 0, result.stderr
    assert json.loads(result.stdout) == json.loads(GOLDEN.read_text())


def test_inspect_json_shape() -> None:
    data = json.loads(GOLDEN.read_text())
    assert set(data) >= {"board", "chain", "nets"}
    for dev in data["chain"]:
        assert set(dev) >= {"ref", "entity", "ir_length", "ir_capture", "instructions", "private",
                            "registers", "selects", "boundary_length", "idcode"}
        # IEEE Std 1149.1: the instruction register captures ...01 in its two least significant
        # bits (rightmost characters in BSDL order).
        assert dev["ir_capture"].endswith("01")
        assert all(len(code) == dev["ir_length"] for codes in dev["instructions"].values() for code in codes)
        # The standard's register names: BYPASS is one bit, DEVICE_ID 32 (IEEE Std 1149.1).
        assert dev["registers"]["BYPASS"] == 1
        assert dev["registers"]["BOUNDARY"] == dev["boundary_length"]
        if dev["idcode"] is not None:
            assert len(dev["idcode"]) == 32 and dev["idcode"].endswith("1")
            assert dev["registers"]["DEVICE_ID"] == 32
        assert not set(dev["selects"]) & set(dev["private"])
    kinds = {net["kind"] for net in data["nets"]}
    assert kinds == {"scan-to-scan", "cluster", "drive-only", "observe-only", "untestable"}


def test_inspect_text_lists_chain_in_order() -> None:
    result = run("inspect", str(BOARD))
    assert result.returncode == 0
    lines = result.stdout.splitlines()
    order = [line.split()[1] for line in lines if line.strip()[:2] in ("1.", "2.", "3.", "4.")]
    assert order == ["U1", "U2", "U3", "U4"]
    assert "scan-to-scan nets" in result.stdout and "cluster nets" in result.stdout


def test_inspect_bad_board_exits_2_without_traceback(tmp_path: Path) -> None:
    bad = tmp_path / "bad.yaml"
    bad.write_text("chain:\n  - {ref: U1, bsdl: missing.bsd}\n")
    result = run("inspect", str(bad))
    assert result.returncode == 2
    assert "Traceback" not in result.stderr
    assert f"{bad}:2:21: error: BSDL file 'missing.bsd' of U1 not found" in result.stderr


def test_version_and_help() -> None:
    assert run("--version").stdout.startswith("scanloom, version ")
    result = run("inspect", "--help")
    assert result.returncode == 0 and "Exit codes: 0 ok" in result.stdout


def test_inspect_reports_a_bad_logic_equation(tmp_path: Path) -> None:
    import shutil

    board_dir = tmp_path / "board"
    shutil.copytree(BOARD.parent, board_dir)
    yaml_path = board_dir / "irrigation.yaml"
    text = yaml_path.read_text()
    assert '"(D0 ^ D1) ^ (D2 ^ D3)"' in text
    yaml_path.write_text(text.replace('"(D0 ^ D1) ^ (D2 ^ D3)"', '"(D0 ^ D1) ^ (D2 ^ DD3)"'))
    result = run("inspect", str(yaml_path))
    assert result.returncode == 2
    assert re.search(r"irrigation\.yaml:\d+:\d+: error: 'DD3' in the logic of U11\.ODD is not a pin of "
                     r"part 'U11'", result.stderr)
    assert "did you mean: D3" in result.stderr and "Traceback" not in result.stderr

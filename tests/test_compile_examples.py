"""Every example through the installed command line: compile, golden outputs, determinism,
the VCD read back by an independent reader, and verify.

Set SCANLOOM_UPDATE_GOLDEN=1 to rewrite the golden files after a deliberate change; review the
diff before committing it.
"""

from __future__ import annotations

import csv
import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = sorted((ROOT / "examples").glob("*/*.loom"))
GOLDEN = Path(__file__).parent / "golden" / "compile"
UPDATE = os.environ.get("SCANLOOM_UPDATE_GOLDEN") == "1"


def scanloom(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "scanloom.cli", *args], cwd=ROOT,
                          capture_output=True, text=True, timeout=300)


@pytest.fixture(scope="module", params=EXAMPLES, ids=[p.stem for p in EXAMPLES])
def compiled(request: pytest.FixtureRequest) -> tuple[Path, Path]:
    # A fixed folder inside the checkout: the files name the program and the board by paths
    # relative to the output folder, which must not depend on where the temporary folder is.
    example: Path = request.param
    out = ROOT / "out-tests" / example.stem
    result = scanloom("compile", str(example.relative_to(ROOT)), "--out", str(out))
    assert result.returncode == 0, result.stderr
    assert "equals the lower bound" in result.stdout
    assert "replay agrees" in result.stdout
    return example, out


@pytest.mark.parametrize("suffix", [".json", ".cycles.csv", ".txt"])
def test_outputs_match_golden(compiled: tuple[Path, Path], suffix: str) -> None:
    example, out = compiled
    produced = (out / f"{example.stem}{suffix}").read_bytes()
    golden = GOLDEN / f"{example.stem}{suffix}"
    if UPDATE:
        golden.parent.mkdir(parents=True, exist_ok=True)
        golden.write_bytes(produced)
    assert produced == golden.read_bytes(), f"{golden.name} differs; see the module docstring"


def test_compile_twice_gives_identical_bytes(compiled: tuple[Path, Path]) -> None:
    example, out = compiled
    again = out.parent / f"{example.stem}-again"  # same depth: same relative paths inside
    result = scanloom("compile", str(example), "--out", str(again))
    assert result.returncode == 0, result.stderr
    for first in sorted(out.iterdir()):
        assert (again / first.name).read_bytes() == first.read_bytes(), first.name


def test_verify_agrees(compiled: tuple[Path, Path]) -> None:
    example, out = compiled
    result = scanloom("verify", str(out / f"{example.stem}.json"))
    assert result.returncode == 0, result.stdout + result.stderr


def test_vcd_read_back_equals_cycle_table(compiled: tuple[Path, Path]) -> None:
    # vcdvcd is an independent reader of IEEE Std 1364 value change dumps: sampling TMS, TDI and
    # the expected TDO at every rising edge of TCK must give back the cycle table row by row.
    import vcdvcd

    example, out = compiled
    vcd = vcdvcd.VCDVCD(str(out / f"{example.stem}.vcd"))
    by_name = {name.split(".")[-1].lower(): vcd[name] for name in vcd.signals}
    tck = by_name["tck"]
    rises = [t for t, v in tck.tv if v == "1"]
    with (out / f"{example.stem}.cycles.csv").open() as stream:
        rows = list(csv.DictReader(stream))
    assert len(rises) == len(rows)
    for name in ("tms", "tdi"):
        signal = by_name[name]
        assert [signal[t] for t in rises] == [row[name] for row in rows], name

"""The README's test-language examples, put together, check clean on the demo board.

A new user copies these blocks first; a block that no longer checks (a name the demo board or
its shared groups do not have, a held net left undriven) would be their first error.
"""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
README = ROOT / "README.md"
EXAMPLES = ROOT / "examples" / "irrigation"


def _block(blocks: list[str], start: str) -> str:
    found = [block for block in blocks if block.lstrip().startswith(start)]
    assert len(found) == 1, f"README has {len(found)} code blocks starting with {start!r}"
    return found[0]


def test_the_language_examples_of_the_readme_check_clean(tmp_path: Path) -> None:
    blocks = re.findall(r"```[a-z]*\n(.*?)```", README.read_text(encoding="utf-8"), re.DOTALL)
    header = _block(blocks, 'board "irrigation.yaml"')
    steps = _block(blocks, "test valve_lines")
    table = _block(blocks, "table {")
    waits = _block(blocks, "wait 100 clocks")
    # The table and the waits are shown as fragments of a test; these tests give them modes
    # and the held net the demo board asks for (hold: WDOG_DIS = 1).
    program = (header + "\n" + steps
               + '\ntest tables "the table example" {\n    U1 EXTEST\n    U3 SAMPLE\n'
               + "    step enable {\n        drive WDOG_DIS = 1, MUX_OE_N = 0\n    }\n" + table + "}\n"
               + '\ntest waits "the wait and register examples" {\n    U1 EXTEST\n'
               + "    step hold {\n        drive WDOG_DIS = 1\n    }\n" + waits + "}\n")
    board = tmp_path / "irrigation"
    shutil.copytree(EXAMPLES, board)
    (board / "readme.loom").write_text(program, encoding="utf-8")
    done = subprocess.run([sys.executable, "-m", "scanloom.cli", "check", "readme.loom"], cwd=board,
                          capture_output=True, text=True, check=False)
    assert done.returncode == 0, done.stderr
    assert re.fullmatch(r"readme\.loom: 3 tests, \d+ steps, no errors\n", done.stdout), done.stdout

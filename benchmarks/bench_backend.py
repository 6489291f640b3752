"""Back-end benchmark: 64 devices x 1,500 cells, 40 DR scans of every net driven and read back.

Times what the back end adds once the program is checked: scheduling into shift records, the
TAP cycle layout, the independent replay (`verify`) and writing the shift file and the cycle
table; then the same compile through the command line from the files, front end included.
Targets (the back-end issue): compile + verify <= 2 s and <= 500 MB peak memory.

    python benchmarks/bench_backend.py
"""

from __future__ import annotations

import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from boardgen import generate_board, generate_program  # noqa: E402

from scanloom.backend.cycles import lay_out_cycles  # noqa: E402
from scanloom.backend.schedule import schedule  # noqa: E402
from scanloom.backend.writers import write_outputs  # noqa: E402
from scanloom.diagnostics import Diagnostics  # noqa: E402
from scanloom.lang.frontend import load_program  # noqa: E402
from scanloom.sim.replay import replay  # noqa: E402


def main() -> None:
    work = Path(tempfile.mkdtemp(prefix="scanloom-backend-"))
    board = generate_board("large", work / "board")
    program_path = generate_program(board, steps=40)
    program, model = load_program(program_path, Diagnostics())
    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    stages: list[tuple[str, float]] = []
    start = time.perf_counter()
    scan = schedule(program, model)
    stages.append(("schedule", time.perf_counter() - start))
    mark = time.perf_counter()
    cycles = lay_out_cycles(scan)
    stages.append(("TAP cycles", time.perf_counter() - mark))
    mark = time.perf_counter()
    report = replay(scan, cycles)
    stages.append(("replay (verify)", time.perf_counter() - mark))
    mark = time.perf_counter()
    write_outputs(scan, cycles, work / "out", program_path.stem, {"json", "cycles"})
    stages.append(("write json + cycles", time.perf_counter() - mark))
    total = time.perf_counter() - start
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    dr_scans = sum(1 for r in scan.records if r.kind == "dr")
    print(f"{len(model.chain)} devices, {sum(d.device.boundary_length for d in model.chain)} cells, "
          f"{dr_scans} DR scans, {cycles.count} TCK (lower bound {cycles.lower_bound}); replay ok: {report.ok}")
    for name, seconds in stages:
        print(f"  {name:<22}{seconds:7.2f} s")
    print(f"  {'back end + verify':<22}{total:7.2f} s (target 2 s); peak memory {peak:.0f} MB "
          f"({before:.0f} MB after loading board and program; target 500 MB)")
    start = time.perf_counter()
    subprocess.run([sys.executable, "-m", "scanloom.cli", "compile", str(program_path), "--out",
                    str(work / "cli"), "--format", "json,cycles"], check=True, capture_output=True)
    command = time.perf_counter() - start
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    print(f"  scanloom compile from the files (board, BSDL and program read, checks): {command:.2f} s, "
          f"peak {usage.ru_maxrss / 1024:.0f} MB")


if __name__ == "__main__":
    main()

"""Output writers: the shift file (JSON), the cycle table (CSV), the waveform (VCD), the listing.

Every file is written atomically and is byte-identical for the same program; paths written
inside the files are relative to the output folder.
"""

from __future__ import annotations

from contextlib import contextmanager, suppress
from pathlib import Path
from typing import Iterable, Iterator, Sequence

from ...collector import collector_paused
from ...diagnostics import Diagnostic, ScanloomError, nearest
from ...forked import run_forked
from ..cycle_stream import CycleStream
from ..records import ScanProgram
from .cycles_csv import render_cycle_table, write_cycle_table
from .json_writer import render_shift_file, shift_file_data, write_shift_file
from .listing import render_listing, write_listing
from .vcd import write_vcd

__all__ = [
    "FORMATS",
    "output_path",
    "write_outputs",
    "check_formats",
    "share_out",
    "write_formats",
    "shift_file_data",
    "render_shift_file",
    "write_shift_file",
    "render_cycle_table",
    "write_cycle_table",
    "write_vcd",
    "render_listing",
    "write_listing",
]

# Output format name -> file name suffix after the stem, in the order files are written.
FORMATS: dict[str, str] = {
    "json": ".json",
    "cycles": ".cycles.csv",
    "vcd": ".vcd",
    "listing": ".txt",
}


def output_path(out_dir: Path, stem: str, format_name: str) -> Path:
    """Where format `format_name` of `stem` goes in `out_dir`."""
    return Path(out_dir) / f"{stem}{FORMATS[format_name]}"


def check_formats(formats: Iterable[str]) -> set[str]:
    """The requested formats, or ScanloomError naming an unknown one and the nearest names."""
    requested = set(formats)
    unknown = sorted(requested - set(FORMATS))
    if unknown:
        raise ScanloomError([
            Diagnostic("error", f"unknown output format \"{name}\"", expected=", ".join(FORMATS),
                       suggestions=nearest(name, FORMATS))
            for name in unknown
        ])
    return requested


# Relative time each writer takes on a large program (benchmarks/run.py, large board: the
# shift file 0.17 s, the cycle table 0.15 s, the listing 0.35 s, the waveform 4 s).
_WRITE_COST = {"json": 1, "cycles": 1, "vcd": 16, "listing": 3}


def write_outputs(program: ScanProgram, cycles: CycleStream, out_dir: Path, stem: str,
                  formats: set[str]) -> list[Path]:
    """Write the requested formats of `program` into `out_dir` (created if missing).

    With more than one format, the files are shared out between this process and a forked
    one (scanloom.forked), about the same writing time each; the files are the same.
    """
    aside, here = share_out(check_formats(formats))
    out_dir = Path(out_dir)
    pending = run_forked(write_formats, program, cycles, out_dir, stem, aside) if aside else None
    try:
        written = write_formats(program, cycles, out_dir, stem, here)
    except BaseException:
        if pending is not None:
            with suppress(Exception):  # the other process finishes before this is reported
                pending.result()
        raise
    if pending is not None:
        written += pending.result()
    order = {output_path(out_dir, stem, name): index for index, name in enumerate(FORMATS)}
    return sorted(written, key=order.__getitem__)


def share_out(formats: Iterable[str]) -> tuple[list[str], list[str]]:
    """The formats in two groups of about equal writing time, each in FORMATS order: the
    first for a forked process (empty when one process should write everything), the second,
    with the dearest format, for this one (a forked process runs slower at first: each page
    of the parent's memory it touches is copied for it)."""
    names = [name for name in FORMATS if name in set(formats)]
    groups: tuple[list[str], list[str]] = ([], [])
    costs = [0, 0]
    for name in sorted(names, key=lambda n: -_WRITE_COST[n]):
        side = 0 if costs[0] <= costs[1] else 1
        groups[side].append(name)
        costs[side] += _WRITE_COST[name]
    here, aside = groups
    return sorted(aside, key=names.index), sorted(here, key=names.index)


def write_formats(program: ScanProgram, cycles: CycleStream, out_dir: Path, stem: str,
                  names: Sequence[str]) -> list[Path]:
    """Write these formats of `program` here, in this process (the folder made if missing)."""
    out_dir = Path(out_dir)
    with _reported_as(out_dir):
        out_dir.mkdir(parents=True, exist_ok=True)
    written: list[Path] = []
    with collector_paused():  # the writers build millions of small strings and lists
        for name in names:
            path = output_path(out_dir, stem, name)
            with _reported_as(path):
                if name == "json":
                    write_shift_file(program, cycles, path)
                elif name == "cycles":
                    write_cycle_table(cycles, path)
                elif name == "vcd":
                    write_vcd(cycles, path, tck_hz=program.tck_hz, title=f"scanloom cycles of {stem}")
                else:
                    write_listing(program, cycles, path)
            written.append(path)
    return written


@contextmanager
def _reported_as(path: Path) -> Iterator[None]:
    """An OSError while writing `path` becomes the user-facing error that names it."""
    try:
        yield
    except OSError as error:
        reason = error.strerror or str(error)
        raise ScanloomError([Diagnostic("error", f"cannot write {path}: {reason}",
                                        expected="a folder scanloom may create files in")]) from None

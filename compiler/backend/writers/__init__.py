"""Output writers: the shift file (JSON), the cycle table (CSV), the waveform (VCD), the listing.

Every file is written atomically and is byte-identical for the same program; paths written
inside the files are relative to the output folder.
"""

from __future__ import annotations

from pathlib import Path
from typing import Iterable

from ...collector import collector_paused
from ...diagnostics import Diagnostic, ScanloomError, nearest
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


def write_outputs(program: ScanProgram, cycles: CycleStream, out_dir: Path, stem: str,
                  formats: set[str]) -> list[Path]:
    """Write the requested formats of `program` into `out_dir` (created if missing)."""
    requested = check_formats(formats)
    out_dir = Path(out_dir)
    written: list[Path] = []
    path = out_dir
    try:
        with collector_paused():  # the writers build millions of small strings and lists
            out_dir.mkdir(parents=True, exist_ok=True)
            for name in FORMATS:
                if name not in requested:
                    continue
                path = output_path(out_dir, stem, name)
                if name == "json":
                    write_shift_file(program, cycles, path)
                elif name == "cycles":
                    write_cycle_table(cycles, path)
                elif name == "vcd":
                    write_vcd(cycles, path, tck_hz=program.tck_hz, title=f"scanloom cycles of {stem}")
                else:
                    write_listing(program, cycles, path)
                written.append(path)
    except OSError as error:
        reason = error.strerror or str(error)
        raise ScanloomError([Diagnostic("error", f"cannot write {path}: {reason}",
                                        expected="a folder scanloom may create files in")]) from None
    return written

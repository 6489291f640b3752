"""The shift file `DIR/<stem>.json`: records, chain map and cycles, versioned and byte-stable.

Schema "scanloom.shifts", version 1 (the README's "Output formats" section describes it field
by field). Bit strings are hex with bit 0 = first bit shifted = least significant bit. Paths
are written relative to the output folder with forward slashes, so the file does not depend
on where the checkout lives.
"""

from __future__ import annotations

import json
from json.encoder import encode_basestring_ascii  # type: ignore[attr-defined]
import os
from pathlib import Path, PurePosixPath
from typing import Any

from ..cycle_stream import CycleStream
from ..hexbits import bits_to_hex
from ..records import DeviceMap, ScanProgram, ShiftRecord
from ..shiftfile import SCHEMA, SCHEMA_VERSION
from .atomic import write_atomically

__all__ = ["SCHEMA", "SCHEMA_VERSION", "shift_file_data", "render_shift_file", "write_shift_file",
           "relative_posix"]


def relative_posix(path: str, out_dir: Path) -> str:
    """`path` relative to `out_dir`, with forward slashes ("" stays "")."""
    if not path:
        return ""
    try:
        relative = os.path.relpath(os.path.abspath(path), os.path.abspath(out_dir))
    except ValueError:  # another drive on Windows: keep the absolute path
        relative = os.path.abspath(path)
    return PurePosixPath(*Path(relative).parts).as_posix()


def _device_data(device: DeviceMap, quoted: "_Quoted | None" = None) -> dict[str, Any]:
    return {
        "ref": device.ref,
        "entity": device.entity,
        "position": device.position,
        "ir_length": device.ir_length,
        "ir_capture": device.ir_capture,
        "idcode": device.idcode,
        "opcodes": {name: list(codes) for name, codes in device.opcodes.items()},
        "selects": dict(device.selects),
        "registers": dict(device.registers),
        "boundary_length": device.boundary_length,
        "cells": _rendered_cells(device, quoted) if quoted is not None else
                 [[cell.number, cell.cell_type, cell.function, cell.port, cell.net]
                  for cell in device.cells],
    }


class _Rendered(list):
    """List items already rendered as JSON text, one per line (boards have tens of thousands
    of cells, so they skip the generic renderer)."""


class _Quoted(dict):
    """JSON text of a string or None, each distinct one encoded once (cell types, functions
    and ports repeat across the cells of a chain)."""

    def __missing__(self, text: str | None) -> str:
        quoted = self[text] = "null" if text is None else encode_basestring_ascii(text)
        return quoted


def _rendered_cells(device: DeviceMap, q: _Quoted) -> _Rendered:
    """The device's cells as their JSON lines, `[number, type, function, port, net]`."""
    return _Rendered(
        f"[{cell.number}, {q[cell.cell_type]}, {q[cell.function]}, {q[cell.port]}, "
        f"{encode_basestring_ascii(cell.net) if cell.net is not None else 'null'}]"
        for cell in device.cells)


def _record_data(index: int, record: ShiftRecord) -> dict[str, Any]:
    return {
        "index": index,
        "kind": record.kind,
        "test": record.test,
        "step": record.step,
        "purpose": record.purpose,
        "length": record.length,
        "tdi": bits_to_hex(record.tdi),
        "tdo": bits_to_hex(record.tdo),
        "mask": bits_to_hex(record.mask),
        "segments": [{"device": s.device, "register": s.register, "offset": s.offset,
                      "length": s.length} for s in record.segments],
        "checks": [{"device": c.device, "register": c.register, "test": c.test, "step": c.step}
                   for c in record.checks],
        "intent": dict(record.intent),
        "idle_clocks": record.idle_clocks,
        "end_state": record.end_state,
        "use_trst": record.use_trst,
    }


def shift_file_data(program: ScanProgram, cycles: CycleStream, out_dir: Path,
                    *, rendered_cells: bool = False) -> dict[str, Any]:
    """The shift file as plain JSON data, keys in the documented order (with each cell
    already as its JSON line when `rendered_cells`, for the writer)."""
    quoted = _Quoted() if rendered_cells else None
    return {
        "schema": SCHEMA,
        "version": SCHEMA_VERSION,
        "source": relative_posix(program.source, out_dir),
        "board": relative_posix(program.board, out_dir),
        "tck_hz": program.tck_hz,
        "chain": [_device_data(device, quoted) for device in program.chain.devices],
        "records": [_record_data(index, record) for index, record in enumerate(program.records)],
        "cycles": {
            "count": cycles.count,
            "lower_bound": cycles.lower_bound,
            "tms": bits_to_hex(cycles.tms),
            "tdi": bits_to_hex(cycles.tdi),
            "tdo": bits_to_hex(cycles.tdo),
            "mask": bits_to_hex(cycles.mask),
            "record_starts": list(cycles.record_starts),
            "shift_starts": list(cycles.shift_starts),
        },
        "notes": list(program.notes),
    }


_compact = json.JSONEncoder(ensure_ascii=True, separators=(", ", ": ")).encode
_SCALARS = (str, int, float, bool, type(None))
_ONE_LINE_OBJECT = 100  # objects of scalars up to this width stay on one line


def _render(value: Any, depth: int) -> str:
    """Indented JSON whose leaves (lists of scalars, small objects) each take one line.

    A cell, a segment or a list of cycle numbers reads on one line, so the file stays
    readable and diffs of golden files stay small, while the structure above is indented.
    """
    if isinstance(value, _SCALARS):
        return _compact(value)
    inner = "\n" + " " * (depth + 1)
    if isinstance(value, _Rendered):
        if not value:
            return "[]"
        return "[" + inner + ("," + inner).join(value) + "\n" + " " * depth + "]"
    if isinstance(value, list):
        if not value or all(isinstance(item, _SCALARS) for item in value):
            return _compact(value)
        return "[" + inner + ("," + inner).join(_render(item, depth + 1) for item in value) + \
            "\n" + " " * depth + "]"
    if all(isinstance(item, _SCALARS) for item in value.values()):
        text = _compact(value)
        if len(text) <= _ONE_LINE_OBJECT:
            return text
    if not value:
        return "{}"
    return "{" + inner + ("," + inner).join(
        f"{_compact(key)}: {_render(item, depth + 1)}" for key, item in value.items()
    ) + "\n" + " " * depth + "}"


def render_shift_file(program: ScanProgram, cycles: CycleStream, out_dir: Path) -> str:
    """The shift file's text: indented JSON, ASCII only, one final newline."""
    data = shift_file_data(program, cycles, out_dir, rendered_cells=True)
    return _render(data, 0) + "\n"


def write_shift_file(program: ScanProgram, cycles: CycleStream, path: Path) -> Path:
    """Write the shift file atomically to `path` (paths inside relative to its folder)."""
    path = Path(path)
    return write_atomically(path, render_shift_file(program, cycles, path.parent))

"""Cell descriptions from packages declared in the BSDL file itself, before the entity.

A maker with its own boundary cells may ship them in the same file as a VHDL package whose
constants have the type CELL_INFO (IEEE Std 1149.1-2001, Annex B, B.10, from memory):

    constant BC_TIDE : CELL_INFO := ((INPUT, EXTEST, PI), (OUTPUT3, SAMPLE, PO), ...);

Each triple says what the cell captures for one function and instruction.
"""

from __future__ import annotations

from typing import Iterable

from ..diagnostics import Diagnostics, nearest
from .bsdl_ast import AggregateValue, ConstantDecl, NameValue, PackageDecl, SourceText, Value
from .device import CellCapture, CellInfo

__all__ = ["read_cell_packages", "CELL_INFO_FUNCTIONS", "CELL_INFO_INSTRUCTIONS",
           "CAPTURE_SOURCES"]

# The enumerations of the standard package (B.10, from memory).
CELL_INFO_FUNCTIONS = ("INPUT", "OUTPUT2", "OUTPUT3", "CONTROL", "CONTROLR", "INTERNAL",
                       "CLOCK", "BIDIR_IN", "BIDIR_OUT", "OBSERVE_ONLY")
CELL_INFO_INSTRUCTIONS = ("EXTEST", "SAMPLE", "INTEST")
CAPTURE_SOURCES = ("PI", "PO", "UPD", "CAP", "X", "ZERO", "ONE")


def _name(value: Value, choices: tuple[str, ...], what: str, source: SourceText,
          diagnostics: Diagnostics) -> str | None:
    if isinstance(value, NameValue) and value.name in choices:
        return value.name
    shown = value.name if isinstance(value, NameValue) else source.text[value.start:value.end]
    diagnostics.error(f"`{shown}` is not {what}", source.span(value.start, value.end),
                      expected="one of " + ", ".join(choices),
                      suggestions=nearest(shown, choices), code="bsdl-cell-info")
    return None


def _cell_info(constant: ConstantDecl, source: SourceText, diagnostics: Diagnostics
               ) -> CellInfo | None:
    value = constant.value
    if not isinstance(value, AggregateValue):
        where = constant if value is None else value
        diagnostics.error(f"CELL_INFO constant `{constant.name.text}` needs a list of "
                          "(function, instruction, source) triples",
                          source.span(where.start, where.end),
                          expected="((INPUT, EXTEST, PI), ...)", code="bsdl-cell-info")
        return None
    items = value.items
    # A single triple written without the outer parentheses of the list.
    if items and not isinstance(items[0], AggregateValue):
        items = (value,)
    captures: list[CellCapture] = []
    for item in items:
        if not isinstance(item, AggregateValue) or len(item.items) != 3:
            diagnostics.error("a CELL_INFO entry is a triple (function, instruction, source)",
                              source.span(item.start, item.end),
                              expected="(INPUT, EXTEST, PI)", code="bsdl-cell-info")
            continue
        function = _name(item.items[0], CELL_INFO_FUNCTIONS, "a cell function", source,
                         diagnostics)
        instruction = _name(item.items[1], CELL_INFO_INSTRUCTIONS,
                            "an instruction of CELL_INFO", source, diagnostics)
        capture = _name(item.items[2], CAPTURE_SOURCES, "a capture source", source, diagnostics)
        if function and instruction and capture:
            captures.append(CellCapture(function, instruction, capture))
    return CellInfo(constant.name.text, tuple(captures))


def read_cell_packages(units: Iterable[object], source: SourceText, diagnostics: Diagnostics
                       ) -> tuple[dict[str, CellInfo], set[str]]:
    """Cell descriptions by name, and the names of the packages declared in the file."""
    cells: dict[str, CellInfo] = {}
    packages: set[str] = set()
    for unit in units:
        if not isinstance(unit, PackageDecl):
            continue
        packages.add(unit.name.text)
        for item in unit.items:
            if not isinstance(item, ConstantDecl) or item.type_name.text != "CELL_INFO":
                continue
            if item.value is None:
                continue  # a deferred constant: its value is in the package body
            info = _cell_info(item, source, diagnostics)
            if info is not None:
                cells[info.name] = info
    return cells, packages

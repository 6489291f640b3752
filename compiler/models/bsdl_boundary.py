"""BOUNDARY_REGISTER entries: `num (cell, port, function, safe [, ccell, disval, rslt])`.

The syntax is IEEE Std 1149.1-2001, Annex B (B.8.14, from memory): a 4-field entry, a 7-field
entry with the disable specification of a 3-state or bidirectional pin, or a 5-field entry
whose last field is the input specification of 1149.1-2001 (from memory). Large devices have
thousands of entries, so this reads the token list directly rather than through helpers
that build intermediate strings.
"""

from __future__ import annotations

from dataclasses import dataclass

from .bsdl_attributes import Located, PortRef, read_port_ref
from .bsdl_scanner import MARK, WORD, AttrCursor, describe

__all__ = ["CellEntry", "parse_boundary_register", "CELL_FUNCTIONS", "SAFE_VALUES",
           "DISABLE_RESULTS", "INPUT_SPECS"]

# The <function> field (IEEE 1149.1-2001 B.8.14, from memory).
CELL_FUNCTIONS = ("INPUT", "OUTPUT2", "OUTPUT3", "CONTROL", "CONTROLR", "INTERNAL", "CLOCK",
                  "BIDIR", "OBSERVE_ONLY")
SAFE_VALUES = ("0", "1", "X")
# <disable result> (from memory).
DISABLE_RESULTS = ("Z", "WEAK0", "WEAK1", "PULL0", "PULL1", "KEEPER")
# <input spec>, the 5-field form (from memory).
INPUT_SPECS = ("EXTERN0", "EXTERN1", "PULL0", "PULL1", "OPEN0", "OPEN1", "KEEPER", "OPENX",
               "EXPECT1", "EXPECT0")


@dataclass(frozen=True, slots=True)
class CellEntry:
    """One entry as written, with the index range of each field for precise errors."""

    number: Located
    cell_type: Located
    port: PortRef | None  # None for `*`
    port_at: tuple[int, int]
    function: Located
    safe: Located
    control_cell: Located | None
    disable_value: Located | None
    disable_result: Located | None
    input_spec: Located | None
    start: int
    end: int


def _choice(cursor: AttrCursor, choices: tuple[str, ...], what: str) -> Located:
    token, word = cursor.expect_choice(choices, what)
    return Located(word, token.start, token.end)


def _entry(cursor: AttrCursor) -> CellEntry:
    number_token, _ = cursor.expect_integer("a cell number")
    context = f"in boundary cell {number_token.text}"
    cursor.expect_mark("(", f"after cell number {number_token.text}")
    type_token = cursor.expect_word("a cell type such as BC_1", context)
    cursor.expect_mark(",", f"after the cell type {context}")
    port_token = cursor.peek()
    port: PortRef | None
    if port_token.kind == MARK and port_token.text == "*":
        cursor.advance()
        port = None
        port_at = (port_token.start, port_token.end)
    else:
        port = read_port_ref(cursor, context)
        port_at = (port.start, port.end)
    cursor.expect_mark(",", f"after the port {context}")
    function = _choice(cursor, CELL_FUNCTIONS, "a cell function")
    cursor.expect_mark(",", f"after the function {context}")
    safe = _choice(cursor, SAFE_VALUES, "a safe value (0, 1 or X)")
    control = disable_value = disable_result = input_spec = None
    if cursor.accept_mark(","):
        following = cursor.peek()
        if following.kind == WORD and following.text.isdigit():
            control_token, _ = cursor.expect_integer("a control cell number")
            control = Located(control_token.text, control_token.start, control_token.end)
            cursor.expect_mark(",", f"after the control cell {context}")
            disable_value = _choice(cursor, ("0", "1"), "a disable value (0 or 1)")
            cursor.expect_mark(",", f"after the disable value {context}")
            disable_result = _choice(cursor, DISABLE_RESULTS, "a disable result")
        else:
            input_spec = _choice(cursor, INPUT_SPECS,
                                 "a control cell number or an input specification")
    close = cursor.peek()
    if not (close.kind == MARK and close.text == ")"):
        cursor.fail(close, f"expected `)` to close boundary cell {number_token.text}, found "
                           f"{describe(close)}", "`)` after 4 or 7 fields")
    cursor.advance()
    return CellEntry(
        Located(number_token.text, number_token.start, number_token.end),
        Located(type_token.text.upper(), type_token.start, type_token.end),
        port, port_at, function, safe, control, disable_value, disable_result, input_spec,
        number_token.start, close.end)


def parse_boundary_register(text: str) -> list[CellEntry]:
    """Every entry in the order written; numbering and order are checked in bsdl_checks."""
    cursor = AttrCursor(text)
    entries: list[CellEntry] = []
    if cursor.at_end():
        return entries
    while True:
        entries.append(_entry(cursor))
        if cursor.at_end():
            return entries
        cursor.expect_mark(",", "between boundary cells")

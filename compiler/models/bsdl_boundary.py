"""BOUNDARY_REGISTER entries: `num (cell, port, function, safe [, ccell, disval, rslt])`.

The syntax is IEEE Std 1149.1-2001, Annex B (B.8.14, from memory): a 4-field entry, a 7-field
entry with the disable specification of a 3-state or bidirectional pin, or a 5-field entry
whose last field is the input specification of 1149.1-2001 (from memory). Large devices have
thousands of entries, so this reads the token list directly rather than through helpers
that build intermediate strings.
"""

from __future__ import annotations

import re
from typing import NamedTuple

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


class CellEntry(NamedTuple):
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


# One well-formed 4- or 7-field entry and the separator after it, as most entries are
# written. Anything else (the 5-field form, a fault) is read token by token by `_entry`.
_PLAIN_ENTRY = re.compile(
    r"\s*(?P<number>[0-9]{1,9})\s*\(\s*(?P<cell>[A-Za-z][A-Za-z0-9_]*)\s*,\s*"
    r"(?:(?P<star>\*)|(?P<port>(?P<name>[A-Za-z][A-Za-z0-9_]*)"
    r"(?:\s*\(\s*(?P<index>[0-9]{1,9})\s*\))?))\s*,"
    r"\s*(?P<function>[A-Za-z][A-Za-z0-9_]*)\s*,\s*(?P<safe>[A-Za-z0-9_]+)\s*"
    r"(?:,\s*(?P<control>[0-9]{1,9})\s*,\s*(?P<disable>[01])\s*,"
    r"\s*(?P<result>[A-Za-z][A-Za-z0-9_]*)\s*)?(?P<close>\))\s*(?P<separator>,|\Z)")
_FUNCTIONS = frozenset(CELL_FUNCTIONS)
_RESULTS = frozenset(DISABLE_RESULTS)


def _plain_entry(match: re.Match[str]) -> CellEntry | None:
    """The entry `_PLAIN_ENTRY` matched, or None when a field needs `_entry`'s error."""
    function = match["function"].upper()
    safe = match["safe"].upper()
    result = match["result"]
    if function not in _FUNCTIONS or safe not in SAFE_VALUES or (
            result is not None and result.upper() not in _RESULTS):
        return None
    start, end = match.start, match.end
    port: PortRef | None = None
    if match["star"] is not None:
        port_at = (start("star"), end("star"))
    else:
        index = match["index"]
        port_at = (start("port"), end("port"))
        port = PortRef(match["name"].upper(), None if index is None else int(index), *port_at)
    control = disable = disable_result = None
    if match["control"] is not None:
        control = Located(match["control"], start("control"), end("control"))
        disable = Located(match["disable"], start("disable"), end("disable"))
        disable_result = Located(result.upper(), start("result"), end("result"))
    return CellEntry(
        Located(match["number"], start("number"), end("number")),
        Located(match["cell"].upper(), start("cell"), end("cell")),
        port, port_at, Located(function, start("function"), end("function")),
        Located(safe, start("safe"), end("safe")), control, disable, disable_result, None,
        start("number"), end("close"))


def parse_boundary_register(text: str, plain_path: bool = True) -> list[CellEntry]:
    """Every entry in the order written; numbering and order are checked in bsdl_checks.

    Entries written plainly are matched whole with one regular expression (large devices
    have thousands); the others, and every fault, go through the token reader, which gives
    the precise error. `plain_path=False` reads everything token by token (for tests).
    """
    entries: list[CellEntry] = []
    position = 0
    length = len(text)
    match_plain = _PLAIN_ENTRY.match
    while True:
        if plain_path:
            match = match_plain(text, position)
            if match is not None:
                entry = _plain_entry(match)
                if entry is not None:
                    entries.append(entry)
                    position = match.end()
                    if match["separator"] == "":
                        return entries
                    continue
        cursor = AttrCursor(text, position)
        if cursor.at_end():
            if entries:
                cursor.fail(cursor.peek(), "expected another boundary cell after `,`",
                            "a cell entry such as 0 (BC_1, A, input, X)")
            return entries
        entries.append(_entry(cursor))
        if cursor.at_end():
            return entries
        cursor.expect_mark(",", "between boundary cells")
        position = cursor.position()
        if position >= length:
            cursor.fail(cursor.peek(), "expected another boundary cell after `,`",
                        "a cell entry such as 0 (BC_1, A, input, X)")

"""Small writers of `.loom` text the generators share: names, wrapped lists, tables, literals.

A generated program must read like one an engineer would write, and it is written directly in
the canonical layout of `scanloom fmt` (four spaces per block, lists wrapped after a comma
within 100 columns, tables aligned in columns), so `scanloom fmt --check` accepts it as it
is. Group values are hex literals, the first member of a group being the most significant
bit, as the language reads them.
"""

from __future__ import annotations

import re
from typing import Sequence

from bitarray import bitarray
from bitarray.util import ba2hex

from ..lang.fmt import INDENT, MAX_WIDTH

__all__ = ["is_name", "quoted", "unique_name", "group_lines", "statement_lines", "table_lines",
           "hex_literal", "comment_block", "wrap_words", "INDENT"]

_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]*\Z")


def is_name(text: str) -> bool:
    """Whether the language can name this net directly (else it is reached through a pin)."""
    return _NAME.match(text) is not None


def quoted(text: str) -> str:
    return '"' + text.replace("\\", "\\\\").replace('"', '\\"') + '"'


def unique_name(base: str, taken: set[str]) -> str:
    """`base`, or `base_2`, `base_3` ... when the board or the program already uses it."""
    name, count = base, 1
    while name in taken:
        count += 1
        name = f"{base}_{count}"
    taken.add(name)
    return name


def group_lines(name: str, members: Sequence[str], comment: str = "") -> list[str]:
    """`group NAME = [MSB, ..., LSB]`, wrapped the way `scanloom fmt` wraps it."""
    trailing = f"  # {comment}" if comment else ""
    one_line = f"group {name} = [{', '.join(members)}]"
    if len(one_line) <= MAX_WIDTH:
        return [one_line + trailing]
    lines = [f"group {name} = [" + trailing]
    current = INDENT
    for index, member in enumerate(members):
        piece = member + ("," if index < len(members) - 1 else "")
        if current.strip() and len(current) + 1 + len(piece) > MAX_WIDTH:
            lines.append(current.rstrip())
            current = INDENT + piece
        else:
            current += ("" if current == INDENT else " ") + piece
    lines.append(current.rstrip())
    lines.append("]")
    return lines


def statement_lines(indent: str, prefix: str, parts: Sequence[str], comment: str = "") -> list[str]:
    """`prefix part, part, ...` (a drive or expect), wrapped after a comma like `scanloom fmt`."""
    one_line = prefix + ", ".join(parts)
    if len(indent) + len(one_line) <= MAX_WIDTH or len(parts) < 2:
        return [indent + one_line + (f"  # {comment}" if comment else "")]
    lines: list[str] = []
    current = indent + prefix
    for index, part in enumerate(parts):
        piece = part + ("," if index < len(parts) - 1 else "")
        if current.strip() and len(current) + 1 + len(piece) > MAX_WIDTH and current != indent + prefix:
            lines.append(current.rstrip())
            current = indent + INDENT + piece
        else:
            current = current + ("" if current.endswith((" ", "[")) else " ") + piece
    lines.append(current.rstrip())
    return lines


def table_lines(indent: str, header: tuple[list[str], list[str]],
                rows: Sequence[tuple[list[str], list[str]]]) -> list[str]:
    """A vector table's header and rows, aligned in columns as `scanloom fmt` aligns them."""
    drive_widths = [0] * len(header[0])
    expect_widths = [0] * len(header[1])
    for drives, expects in [header, *rows]:
        for index, cell in enumerate(drives):
            drive_widths[index] = max(drive_widths[index], len(cell))
        for index, cell in enumerate(expects):
            expect_widths[index] = max(expect_widths[index], len(cell))

    def line(cells: tuple[list[str], list[str]]) -> str:
        drives = "  ".join(cell.ljust(width) for cell, width in zip(cells[0], drive_widths))
        expects = "  ".join(cell.ljust(width) for cell, width in zip(cells[1], expect_widths))
        left = (drives + "  ") if drives else ""
        return indent + (left + "->" + ("  " + expects if expects else "")).rstrip()

    return [line(header)] + [line(row) for row in rows]


def hex_literal(bits: bitarray) -> str:
    """`0x...` for bits most significant first (zero-padded on the left to whole digits)."""
    pad = (-len(bits)) % 4
    padded = bitarray(pad, endian="big")
    padded.setall(0)
    padded += bitarray(bits, endian="big")
    return "0x" + ba2hex(padded).upper()


def wrap_words(text: str, width: int = 94) -> list[str]:
    """Running text cut into lines of at most `width` characters, for comments."""
    lines: list[str] = []
    line = ""
    for word in text.split():
        if line and len(line) + 1 + len(word) > width:
            lines.append(line)
            line = word
        else:
            line = f"{line} {word}" if line else word
    if line:
        lines.append(line)
    return lines


def comment_block(lines: Sequence[str], indent: str = "") -> list[str]:
    return [f"{indent}# {line}".rstrip() if line else f"{indent}#" for line in lines]

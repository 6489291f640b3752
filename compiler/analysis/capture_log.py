"""Read the TDO a board returned: a `cycle,tdo` table, one row per TCK.

This is what `scanloom simulate --capture` writes and what any player that records TDO on
every rising edge of TCK can write: the header `cycle,tdo`, then rows `0,1`, `1,0`, ...
with the cycle counting from 0 and TDO as 0, 1, or X where the player recorded nothing.
Line ends may be LF or CRLF, blanks around a field are allowed, and a row count other than
the shift file's cycle count is an error, like every malformed row, with `file:line:col`.

A capture of millions of rows in the canonical layout (LF line ends, no blanks) is read
without a Python step per row: the rows' offsets follow from the cycle numbers, so every
column is one strided slice of the file's bytes, compared with the digits it must hold.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from bitarray import bitarray

from ..diagnostics import Diagnostic, ScanloomError, SourceSpan

__all__ = ["CaptureLog", "read_capture", "parse_capture", "HEADER"]

HEADER = "cycle,tdo"
_VALUES = bytes.maketrans(b"01Xx", b"0100")
_KNOWN = bytes.maketrans(b"01Xx", b"1100")


@dataclass(frozen=True, eq=False)
class CaptureLog:
    """TDO per cycle: `values` (X read as 0) and `known` (0 where the row says X), big-endian."""

    path: str
    values: bitarray
    known: bitarray

    @property
    def count(self) -> int:
        return len(self.values)


def read_capture(path: str | Path, cycles: int) -> CaptureLog:
    """Read a capture file that must hold exactly `cycles` rows; ScanloomError otherwise."""
    file = str(path)
    try:
        data = Path(path).read_bytes()
    except OSError as error:
        raise ScanloomError([Diagnostic("error", f"cannot read the capture {file}: "
                                        f"{error.strerror or error}")]) from None
    return parse_capture(data, file, cycles)


def parse_capture(data: bytes, file: str, cycles: int) -> CaptureLog:
    fast = _canonical(data, cycles)
    if fast is not None:
        return CaptureLog(file, *fast)
    return _parse_rows(data, file, cycles)


def _bits(column: bytes) -> tuple[bitarray, bitarray]:
    values = bitarray(column.translate(_VALUES).decode("ascii"), endian="big")
    known = bitarray(column.translate(_KNOWN).decode("ascii"), endian="big")
    return values, known


def _canonical(data: bytes, cycles: int) -> tuple[bitarray, bitarray] | None:
    """The fast path: `cycle,tdo\\n` then exactly `i,v\\n` for i = 0 .. cycles-1, else None."""
    head = HEADER.encode() + b"\n"
    if not data.startswith(head) or cycles < 1:
        return None
    body = memoryview(data)[len(head):]
    columns: list[bytes] = []
    position = 0
    digits = 1
    first = 0
    while first < cycles:
        last = min(cycles, 10 ** digits)  # rows first .. last-1 have `digits` digits
        rows = last - first
        stride = digits + 3
        end = position + rows * stride
        if end > len(body):
            return None
        block = bytes(body[position:end])
        if block[digits::stride] != b"," * rows or block[digits + 2::stride] != b"\n" * rows:
            return None
        for place in range(digits):
            if block[place::stride] != _digit_column(first, rows, digits - 1 - place):
                return None
        column = block[digits + 1::stride]
        if column.translate(None, b"01Xx"):
            return None
        columns.append(column)
        position = end
        first = last
        digits += 1
    if position != len(body):
        return None
    return _bits(b"".join(columns))


def _digit_column(first: int, rows: int, power: int) -> bytes:
    """The digit at 10**power of every number first .. first+rows-1, as ASCII bytes."""
    run = 10 ** power
    cycle = b"".join(bytes([48 + d]) * run for d in range(10))
    start = first % (10 * run)
    repeats = (start + rows) // len(cycle) + 1
    return (cycle * repeats)[start:start + rows]


def _parse_rows(data: bytes, file: str, cycles: int) -> CaptureLog:
    """Row by row, for any other layout; the first problem is reported where it is."""
    text = data.decode("utf-8", errors="replace")
    if text.startswith("\ufeff"):
        text = text[1:]
    lines = text.split("\n")
    if lines and lines[-1] == "":
        lines.pop()
    sources = {file: text}

    def fail(line: int, column: int, width: int, message: str, expected: str | None = None,
             hint: str | None = None) -> ScanloomError:
        span = SourceSpan(file, line, column, line, column + max(1, width))
        return ScanloomError([Diagnostic("error", message, span, expected, hint=hint)], sources)

    if not lines or lines[0].rstrip("\r").replace(" ", "").lower() != HEADER:
        first = lines[0].rstrip("\r") if lines else ""
        raise fail(1, 1, len(first), f"not a capture table: the first line is {first[:40]!r}",
                   expected=f"the header {HEADER}",
                   hint="scanloom simulate --capture writes one; a player records TDO per TCK")
    count = 0
    chars: list[str] = []
    for number, raw in enumerate(lines[1:], start=2):
        line = raw.rstrip("\r")
        if not line.strip():
            if all(not rest.strip() for rest in lines[number - 1:]):
                break
            raise fail(number, 1, 1, "an empty row inside the capture", expected=f"{count},<tdo>")
        cycle_text, comma, value = line.partition(",")
        if not comma:
            raise fail(number, 1, len(line), f"row {line[:40]!r} has no comma",
                       expected=f"{count},<tdo>")
        lead = len(cycle_text) - len(cycle_text.lstrip())
        cycle = cycle_text.strip()
        if not cycle.isdigit() or int(cycle) != count:
            raise fail(number, lead + 1, len(cycle) or 1,
                       f"cycle {cycle!r} where cycle {count} comes" if cycle.isdigit()
                       else f"{cycle!r} is not a cycle number",
                       expected=f"cycle {count}: rows count the cycles from 0, one per TCK")
        if count >= cycles:
            raise fail(number, lead + 1, len(cycle),
                       f"the capture has more rows than the shift file has cycles ({cycles})",
                       hint="is this the capture of another program?")
        column = len(cycle_text) + 2 + (len(value) - len(value.lstrip()))
        tdo = value.strip()
        if tdo not in ("0", "1", "X", "x"):
            raise fail(number, column, len(tdo) or 1, f"TDO {tdo!r} at cycle {count}",
                       expected="0, 1 or X (nothing recorded)")
        chars.append(tdo)
        count += 1
    if count != cycles:
        last = len(lines)
        raise fail(last, 1, len(lines[-1]) if lines else 1,
                   f"the capture has {count} row{'s' * (count != 1)}, the shift file has {cycles} "
                   f"cycle{'s' * (cycles != 1)}",
                   hint="record TDO on every rising edge of TCK, from the first reset clock on")
    return CaptureLog(file, *_bits("".join(chars).encode("ascii")))

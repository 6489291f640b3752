"""The cycle table `DIR/<stem>.cycles.csv`: one row per TCK, header `cycle,tms,tdi,tdo`.

Row c is rising edge c of TCK: `tms` and `tdi` are the values the player drives for that edge
(sampled on the rising edge), `tdo` is the value expected on TDO at that edge (the device
changes TDO on the falling edge before it) or X when the bit is not compared.

A table has millions of rows, so it is assembled column by column: each column is a bytes
string with one byte per row (from bitarray unpacking), and the columns are written into a
row-major buffer with stepped slice assignments, one block per count of cycle digits.
"""

from __future__ import annotations

from pathlib import Path
from typing import Iterator

from bitarray import bitarray

from ..cycle_stream import CycleStream
from .atomic import atomic_output

__all__ = ["CYCLE_TABLE_HEADER", "cycle_table_blocks", "render_cycle_table", "write_cycle_table"]

CYCLE_TABLE_HEADER = b"cycle,tms,tdi,tdo\n"
_TDO_SYMBOLS = bytes.maketrans(b"\x00\x01\x02", b"01X")
_PATTERN_LIMIT = 100  # digit places of 1s and 10s repeat a short pattern; higher ones run long


def _tdo_column(tdo: bitarray, mask: bitarray) -> bytes:
    """'0'/'1' where compared, 'X' elsewhere: byte-wise sum of two 0/1/2 columns, translated."""
    if not len(mask):
        return b""
    compared = (tdo & mask) if tdo.endian == mask.endian else (bitarray(tdo, endian=mask.endian) & mask)
    values = int.from_bytes(compared.unpack(zero=b"\x00", one=b"\x01"), "big")
    values += int.from_bytes(mask.unpack(zero=b"\x02", one=b"\x00"), "big")
    return values.to_bytes(len(mask), "big").translate(_TDO_SYMBOLS)


def _digit_column(start: int, count: int, place: int) -> bytes:
    """The digit at decimal `place` (1, 10, 100 ...) of the numbers start .. start+count-1."""
    if place < _PATTERN_LIMIT:
        pattern = b"".join(bytes([48 + digit]) * place for digit in range(10))
        offset = start % len(pattern)
        repeats = (offset + count) // len(pattern) + 1
        return (pattern * repeats)[offset:offset + count]
    end = start + count
    pieces = []
    for value in range(start // place, (end - 1) // place + 1):
        run = min(end, (value + 1) * place) - max(start, value * place)
        pieces.append(bytes([48 + value % 10]) * run)
    return b"".join(pieces)


def cycle_table_blocks(cycles: CycleStream) -> Iterator[bytes | bytearray]:
    """The table as ASCII blocks, header first: one block per count of cycle digits, so a
    table of millions of rows is written without first being joined into one string."""
    count = cycles.count
    tms = cycles.tms.unpack(zero=b"0", one=b"1")
    tdi = cycles.tdi.unpack(zero=b"0", one=b"1")
    tdo = _tdo_column(cycles.tdo, cycles.mask)
    yield CYCLE_TABLE_HEADER
    digits = 1
    start = 0
    while start < count:
        end = min(count, 10 ** digits)
        rows = end - start
        width = digits + 7  # digits, then ",t,d,o\n"
        block = bytearray(width * rows)
        for position in range(digits):
            place = 10 ** (digits - 1 - position)
            block[position::width] = _digit_column(start, rows, place)
        block[digits::width] = b"," * rows
        block[digits + 1::width] = tms[start:end]
        block[digits + 2::width] = b"," * rows
        block[digits + 3::width] = tdi[start:end]
        block[digits + 4::width] = b"," * rows
        block[digits + 5::width] = tdo[start:end]
        block[digits + 6::width] = b"\n" * rows
        yield block
        del block
        start = end
        digits += 1


def render_cycle_table(cycles: CycleStream) -> bytes:
    """The whole table as ASCII bytes, LF line ends, header first."""
    return b"".join(cycle_table_blocks(cycles))


def write_cycle_table(cycles: CycleStream, path: Path) -> Path:
    """Write the cycle table to `path` atomically, block by block."""
    with atomic_output(path, binary=True) as handle:
        for block in cycle_table_blocks(cycles):
            handle.write(block)
    return Path(path)

"""Hex renderings of bit strings: bit 0 (the first bit shifted) is the least significant bit.

DESIGN.md fixes the convention for a whole scan; the shift file uses it for every bit string
(records and cycles alike): lower-case digits, zero-padded to ceil(length / 4) digits, so a
reader knows the length from the text and can reject stray high bits.
"""

from __future__ import annotations

import re

from bitarray import bitarray
from bitarray.util import ba2hex, hex2ba

__all__ = ["bits_to_hex", "hex_to_bits", "hex_digits"]

_HEX = re.compile("[0-9a-f]*")


def hex_digits(length: int) -> int:
    """The number of hex digits for `length` bits."""
    return (length + 3) // 4


def bits_to_hex(bits: bitarray) -> str:
    """`bits` as hex, bit 0 least significant (a little-endian copy read nibble by nibble)."""
    little = bitarray(bits, endian="little")
    little.extend([0] * (-len(little) % 4))
    return ba2hex(little)[::-1]


def hex_to_bits(text: str, length: int) -> bitarray:
    """The `length` bits written as `text`; ValueError when the text does not fit exactly."""
    if len(text) != hex_digits(length):
        raise ValueError(f"{hex_digits(length)} hex digits expected for {length} bits, found {len(text)}")
    if _HEX.fullmatch(text) is None:
        raise ValueError("only lower-case hex digits 0-9 a-f are allowed")
    little = hex2ba(text[::-1], endian="little")
    if little[length:].any():
        raise ValueError(f"bits beyond the length of {length} are set")
    return bitarray(little[:length], endian="big")

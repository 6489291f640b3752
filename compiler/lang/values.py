"""Values against widths: a written value becomes one character per bit, most significant first.

Binary literals must give exactly one digit per bit (their X and Z digits are per bit); hex
digits stand for four bits each (X and Z digits too) and a short hex or decimal number is
zero-extended, but a number that needs more bits than the target has is an error. `X` and
`Z` alone apply to every bit. What may appear depends on the role: X cannot be driven, Z
cannot be expected, register writes are plain 0/1.
"""

from __future__ import annotations

from fractions import Fraction

from ..diagnostics import Diagnostics, SourceSpan, nearest
from ..ir import COMPUTED
from . import ast

__all__ = ["value_bits", "DRIVE", "EXPECT", "WRITE", "READ", "time_in_seconds",
           "frequency_in_hz", "TIME_UNITS", "FREQUENCY_UNITS", "MIN_TCK_HZ", "MAX_TCK_HZ", "describe_value"]

DRIVE = "drive"
EXPECT = "expect"
WRITE = "write"
READ = "read"

TIME_UNITS = {"s": Fraction(1), "ms": Fraction(1, 10**3), "us": Fraction(1, 10**6),
              "ns": Fraction(1, 10**9)}
FREQUENCY_UNITS = {"Hz": Fraction(1), "kHz": Fraction(10**3), "MHz": Fraction(10**6),
                   "GHz": Fraction(10**9)}
# Far outside any TAP controller on both sides (common practice: TCK from kHz to about 100 MHz);
# the bounds keep the conversions to floating point finite and non-zero.
MIN_TCK_HZ = Fraction(1)
MAX_TCK_HZ = Fraction(10**10)
_HEX_BITS = {d: format(int(d, 16), "04b") for d in "0123456789ABCDEF"}
_HEX_BITS.update({"X": "XXXX", "Z": "ZZZZ"})
_HEX_DIGITS = frozenset(_HEX_BITS)


def describe_value(value: ast.Value) -> str:
    if isinstance(value, ast.Literal):
        return value.text
    if isinstance(value, ast.DontCare):
        return "X"
    if isinstance(value, ast.Released):
        return "Z"
    return "computed"


def value_bits(value: ast.Value, width: int, role: str, target: str,
               diagnostics: Diagnostics) -> str | None:
    """The value as `width` characters (0 1 X Z, or COMPUTED), or None when reported wrong."""
    span = value.span
    if isinstance(value, ast.Computed):
        if role != EXPECT:
            diagnostics.error(f"'computed' is only for expectations, not for a {role}", span)
            return None
        return COMPUTED * width
    if isinstance(value, ast.DontCare):
        if role in (DRIVE, WRITE):
            diagnostics.error(f"X cannot be driven onto {target}" if role == DRIVE else
                              f"X cannot be written into {target}", span,
                              hint="use Z to release a net" if role == DRIVE else None)
            return None
        return "X" * width
    if isinstance(value, ast.Released):
        if role != DRIVE:
            diagnostics.error(f"Z cannot be {'expected' if role != WRITE else 'written'} "
                              f"on {target}", span,
                              hint="a released net reads as its pull or floats; write X for "
                                   "don't care" if role != WRITE else None)
            return None
        return "Z" * width
    bits = _literal_bits(value, width, target, span, diagnostics)
    if bits is None:
        return None
    if role in (DRIVE, WRITE) and "X" in bits:
        diagnostics.error(f"{value.text} has X bits, which cannot be "
                          f"{'driven' if role == DRIVE else 'written'}", span)
        return None
    if role in (EXPECT, READ, WRITE) and "Z" in bits:
        diagnostics.error(f"{value.text} has Z bits, which cannot be "
                          f"{'written' if role == WRITE else 'expected'}", span,
                          hint="write X for don't care" if role != WRITE else None)
        return None
    return bits


def _literal_bits(value: ast.Literal, width: int, target: str, span: SourceSpan | None,
                  diagnostics: Diagnostics) -> str | None:
    digits = value.digits.replace("_", "")
    if value.radix == 2:
        if not digits or any(d not in "01XZ" for d in digits):
            diagnostics.error(f"malformed binary number {value.text}", span,
                              expected="binary digits 0, 1, X or Z after 0b")
            return None
        if len(digits) != width:
            diagnostics.error(f"{value.text} has {len(digits)} bit{'s' * (len(digits) != 1)} "
                              f"but {target} is {width} bit{'s' * (width != 1)} wide", span,
                              expected=f"{width} binary digits")
            return None
        return digits
    if value.radix == 16:
        if not digits or not _HEX_DIGITS.issuperset(digits):
            diagnostics.error(f"malformed hex number {value.text}", span,
                              expected="hex digits 0-9, A-F, X or Z after 0x")
            return None
        bits = "".join(map(_HEX_BITS.__getitem__, digits))
        return _fit(bits, width, value.text, target, span, diagnostics)
    if not digits.isdigit():
        if "." in digits:
            diagnostics.error(f"{value.text} is not a whole number", span)
        elif digits[:1].isdigit() and digits.lstrip("0123456789").isalpha():
            diagnostics.error(f"malformed number {value.text}", span,
                              hint="write a space between a number and its unit")
        else:
            diagnostics.error(f"malformed number {value.text}", span,
                              expected="a decimal, 0b binary or 0x hex number")
        return None
    number = int(digits)
    if number.bit_length() > width:
        diagnostics.error(f"{value.text} does not fit in {target} ({width} bit"
                          f"{'s' * (width != 1)}: at most {2 ** width - 1})", span)
        return None
    return format(number, f"0{width}b") if width else ""


def _fit(bits: str, width: int, text: str, target: str, span: SourceSpan | None,
         diagnostics: Diagnostics) -> str | None:
    if len(bits) <= width:
        return "0" * (width - len(bits)) + bits
    excess = bits[: len(bits) - width]
    if excess.strip("0"):
        diagnostics.error(f"{text} does not fit in {target} ({width} bit{'s' * (width != 1)})",
                          span)
        return None
    return bits[len(bits) - width:]


def _unit(quantity: ast.Quantity, units: dict[str, Fraction], what: str,
          diagnostics: Diagnostics, extra: tuple[str, ...] = ()) -> str | None:
    for unit in list(units) + list(extra):
        if unit.lower() == quantity.unit.lower():
            return unit
    diagnostics.error(f"unknown {what} unit {quantity.unit}", quantity.unit_span,
                      expected=", ".join(list(units) + list(extra)),
                      suggestions=nearest(quantity.unit, list(units) + list(extra)))
    return None


def number_of(quantity: ast.Quantity, diagnostics: Diagnostics) -> Fraction | None:
    text = quantity.number.replace("_", "")
    try:
        return Fraction(text)
    except (ValueError, ZeroDivisionError):
        diagnostics.error(f"{quantity.number} is not a decimal number", quantity.span)
        return None


def time_in_seconds(quantity: ast.Quantity, diagnostics: Diagnostics,
                    allow_clocks: bool = False) -> tuple[str, Fraction] | None:
    """("clocks", n) or ("s", seconds) for a wait or a duration; None when reported wrong."""
    extra = ("clocks",) if allow_clocks else ()
    unit = _unit(quantity, TIME_UNITS, "time", diagnostics, extra + (("clock",) if allow_clocks else ()))
    number = number_of(quantity, diagnostics)
    if unit is None or number is None:
        return None
    if unit in ("clocks", "clock"):
        if number.denominator != 1:
            diagnostics.error(f"{quantity.number} clocks is not a whole number of clocks",
                              quantity.span)
            return None
        return ("clocks", number)
    return ("s", number * TIME_UNITS[unit])


def frequency_in_hz(quantity: ast.Quantity, diagnostics: Diagnostics) -> Fraction | None:
    unit = _unit(quantity, FREQUENCY_UNITS, "frequency", diagnostics)
    number = number_of(quantity, diagnostics)
    if unit is None or number is None:
        return None
    hertz = number * FREQUENCY_UNITS[unit]
    if hertz <= 0:
        diagnostics.error("the TCK frequency must be above zero", quantity.span)
        return None
    if not MIN_TCK_HZ <= hertz <= MAX_TCK_HZ:
        diagnostics.error(f"a TCK of {quantity.number} {quantity.unit} is out of range", quantity.span,
                          expected="a frequency from 1 Hz to 10 GHz")
        return None
    return hertz

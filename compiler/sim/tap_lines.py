"""What the devices' TAP inputs read when a fault sits on a TAP signal.

Without a fault a TAP input reads what drives it: the player's TMS, TCK and TDI, or the TDO
of the device before it in the chain (released outside Shift-xR, when TDI's pull-up makes it
read 1). A fault changes that: a net shorted onto the line resolves with it (wired-AND or
wired-OR, as for any short), a stuck line holds its value, an open line floats (TDI, TMS and
TRST* then read 1, the standard requires them to behave so; TCK reads as its technology
makes a floating input read).

A `LineMap` says, for one line and one board state, what the input reads for each value its
driver may put on it: 0, 1, X or released. Applying a map to a whole run of bits is a few
bitarray operations.
"""

from __future__ import annotations

from dataclasses import dataclass

from bitarray import bitarray

from .fault_effects import PULLED_UP_INPUTS, TapEffect, TapLine
from .resolve import COMBINE_AND, DriveSum, PinDrive, level_of_constant, read_level, resolve_level

__all__ = ["LineMap", "line_map", "tap_driver_drive", "identity_map", "apply_map", "mapped_bit",
           "clock_activity", "EDGE", "HELD", "MAYBE", "map_value"]

EDGE = "edge"  # the device sees every TCK edge
HELD = "held"  # the line is held: no edges reach the device
MAYBE = "maybe"  # the line is undefined: an edge may or may not happen


@dataclass(frozen=True, slots=True)
class LineMap:
    """What a TAP input reads when its driver puts 0, 1, X on the line or releases it."""

    on0: str
    on1: str
    onx: str
    onz: str

    @property
    def identity(self) -> bool:
        return self.on0 == "0" and self.on1 == "1" and self.onx == "X"


def identity_map(line: TapLine, chain_length: int) -> LineMap:
    """A healthy line: a released TDI reads 1 (pull-up); the player's TDO input reads X."""
    signal, position = line
    released = "X" if signal == "TDI" and position == chain_length else "1"
    return LineMap("0", "1", "X", released)


def tap_driver_drive(value: str) -> PinDrive:
    """The driver of a TAP line as a drive: strong 0/1/X, or nothing when released ("Z")."""
    if value == "Z":
        return PinDrive()
    level = level_of_constant(value, 1)
    return PinDrive(level.v0, level.v1)


def _pull_up(line: TapLine, chain_length: int) -> bool:
    signal, position = line
    if signal == "TDI" and position == chain_length:
        return False  # the board's TDO goes to the player, not into a pulled-up TAP input
    return signal in PULLED_UP_INPUTS


def map_value(level_v0: int, level_v1: int) -> str:
    if level_v0 and not level_v1:
        return "0"
    if level_v1 and not level_v0:
        return "1"
    return "X"


def line_map(line: TapLine, effect: TapEffect, net_total: DriveSum | None, chain_length: int,
             technology: str) -> LineMap:
    """The map of `line` under `effect`; `net_total` is the shorted net's summed drives."""
    signal, position = line
    board_tdo = signal == "TDI" and position == chain_length
    if effect.how == "stuck":
        value = effect.value or "X"
        return LineMap(value, value, value, value)
    if effect.how == "float":
        if board_tdo:
            value = "X"
        elif signal == "TCK":
            value = "1" if technology == "ttl" else "X"
        else:
            value = "1"
        return LineMap(value, value, value, value)
    total = net_total if net_total is not None else DriveSum()
    if _pull_up(line, chain_length):
        total = total.plus(PinDrive(r1=1))
    values = []
    for driven in ("0", "1", "X", "Z"):
        level = resolve_level(total.plus(tap_driver_drive(driven)), 1, combine=effect.mode or COMBINE_AND)
        if board_tdo and level.fl:
            values.append("X")
            continue
        read = read_level(level, "ttl" if signal == "TCK" and technology == "ttl" else "cmos")
        values.append(map_value(*read))
    return LineMap(*values)


def clock_activity(mapping: LineMap) -> str:
    """EDGE when the input follows the clock, HELD when it holds a value, MAYBE otherwise."""
    if mapping.on0 == "0" and mapping.on1 == "1":
        return EDGE
    if mapping.on0 == mapping.on1 and mapping.on0 in "01":
        return HELD
    return MAYBE


def mapped_bit(mapping: LineMap, value: int) -> str:
    return mapping.on1 if value else mapping.on0


def apply_map(mapping: LineMap, values: bitarray, known: bitarray | None) -> tuple[bitarray, bitarray]:
    """The bits an input reads over a run whose driver puts `values` (unknown where not `known`)."""
    if known is None:
        known = bitarray(len(values), endian=values.endian)
        known.setall(1)
    if mapping.identity:
        return values & known, known.copy()
    ones = values & known
    zeros_ = ~values & known
    unknown = ~known
    out_values = bitarray(len(values), endian=values.endian)
    out_values.setall(0)
    out_known = out_values.copy()
    for mask, result in ((zeros_, mapping.on0), (ones, mapping.on1), (unknown, mapping.onx)):
        if result == "1":
            out_values |= mask
            out_known |= mask
        elif result == "0":
            out_known |= mask
    return out_values, out_known

"""The waveform `DIR/<stem>.vcd` (IEEE Std 1364 value change dump, written with pyvcd).

Signals, all in scope `scanloom`: `tck` (toggling every half period), `tms` and `tdi` (what
the player drives), `tdo` (the expected TDO, `x` where not compared), `mask` (1 where TDO is
compared) and `tap_state` (a string: the TAP controller state by the standard's name).

Timing of cycle c, with P the TCK period (from the program's TCK rate, 1 MHz when none is
declared): TCK falls at c*P, where TMS, TDI, TDO and mask take cycle c's values (TDO changes on
the falling edge, the player changes TMS/TDI there too); TCK rises at c*P + P/2, the edge at
which the devices sample TMS and TDI and the player samples TDO. `tap_state` changes at the
rising edge that enters the state. The dump ends with TCK falling at n*P.
"""

from __future__ import annotations

from pathlib import Path
from typing import Sequence

from bitarray import bitarray

from ... import __version__
from ..cycle_stream import CycleStream
from ..tap import UNKNOWN_STATE_CODE, TapState, next_state, state_code_name
from .atomic import atomic_output

__all__ = ["DEFAULT_TCK_HZ", "vcd_timescale", "write_vcd"]

DEFAULT_TCK_HZ = 1e6
# Timescale units the format allows: 1, 10 or 100 of s, ms, us, ns, ps, fs (IEEE Std 1364).
_UNITS: Sequence[tuple[str, float]] = tuple(
    (f"{magnitude} {unit}", magnitude * scale)
    for unit, scale in (("s", 1.0), ("ms", 1e-3), ("us", 1e-6), ("ns", 1e-9), ("ps", 1e-12),
                        ("fs", 1e-15))
    for magnitude in (100, 10, 1)
)


def vcd_timescale(tck_hz: float | None) -> tuple[str, int]:
    """The coarsest timescale in which half a TCK period is a whole number, and that number."""
    half_period = 0.5 / (tck_hz or DEFAULT_TCK_HZ)
    for name, seconds in _UNITS:
        ticks = half_period / seconds
        if ticks >= 1 and abs(ticks - round(ticks)) <= 1e-9 * ticks:
            return name, round(ticks)
    return "1 fs", max(1, round(half_period / 1e-15))


def _changes(bits: bitarray) -> bitarray:
    """1 at every cycle whose value differs from the cycle before (and at cycle 0)."""
    changed = bitarray(len(bits), endian=bits.endian)
    if len(bits):
        changed[0] = 1
        changed[1:] = bits[1:] ^ bits[:-1]
    return changed


def write_vcd(cycles: CycleStream, path: Path, *, tck_hz: float | None, title: str = "") -> Path:
    """Write the waveform of `cycles` to `path` atomically."""
    timescale, half = vcd_timescale(tck_hz)
    period = 2 * half
    count = cycles.count
    tms, tdi, mask = cycles.tms, cycles.tdi, cycles.mask
    tdo = cycles.tdo & mask if cycles.tdo.endian == mask.endian else bitarray(cycles.tdo, endian=mask.endian) & mask
    tms_changes, tdi_changes = _changes(tms), _changes(tdi)
    tdo_changes = _changes(tdo) | _changes(mask)
    states = cycles.state_names
    with atomic_output(Path(path)) as handle:
        from vcd import VCDWriter  # pyvcd, imported only when a waveform is written

        writer = VCDWriter(handle, timescale=timescale, date="", version=f"scanloom {__version__}",
                           comment=title, check_values=False)
        scope = "scanloom"
        tck_var = writer.register_var(scope, "tck", "wire", size=1, init=0)
        tms_var = writer.register_var(scope, "tms", "wire", size=1, init=0)
        tdi_var = writer.register_var(scope, "tdi", "wire", size=1, init=0)
        tdo_var = writer.register_var(scope, "tdo", "wire", size=1, init="x")
        mask_var = writer.register_var(scope, "mask", "wire", size=1, init=0)
        state_var = writer.register_var(scope, "tap_state", "string",
                                        init=state_code_name(states[0]) if count else "unknown")
        change = writer.change
        for cycle in range(count):
            time = cycle * period
            change(tck_var, time, 0)
            if tms_changes[cycle]:
                change(tms_var, time, tms[cycle])
            if tdi_changes[cycle]:
                change(tdi_var, time, tdi[cycle])
            if tdo_changes[cycle]:
                change(tdo_var, time, tdo[cycle] if mask[cycle] else "x")
                change(mask_var, time, mask[cycle])
            time += half
            change(tck_var, time, 1)
            following = states[cycle + 1] if cycle + 1 < count else _state_after(cycles)
            if following != states[cycle]:
                change(state_var, time, state_code_name(following))
        change(tck_var, count * period, 0)
        writer.close(count * period)
    return Path(path)


def _state_after(cycles: CycleStream) -> int:
    """The state the last edge leads to (unknown if the last state is)."""
    last = cycles.state_names[-1]
    if last == UNKNOWN_STATE_CODE:
        return UNKNOWN_STATE_CODE
    return int(next_state(TapState(last), cycles.tms[-1]))

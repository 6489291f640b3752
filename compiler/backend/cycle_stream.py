"""The TAP cycle stream: one TMS, TDI, expected-TDO and compare-mask bit per TCK.

Kept apart from `cycles` (which lays a stream out from shift records) so that the shift-file
reader, and through it the independent replay, can hold a stream without importing the code
that produced it.

Cycle c is the c-th rising edge of TCK. `tms[c]` and `tdi[c]` are sampled at that edge;
`tdo[c]` is the value expected on TDO at that edge (driven since the falling edge before it)
and is compared only where `mask[c]` is 1 (elsewhere `tdo[c]` is 0). `state_names[c]` is the
code of the TAP state the controller is in at edge c (`tap.TapState`, or
`tap.UNKNOWN_STATE_CODE` before the first reset has brought it to a known state).
"""

from __future__ import annotations

from dataclasses import dataclass

from bitarray import bitarray

from .tap import NEXT_STATE, UNKNOWN_STATE_CODE, TapState, state_code_name

__all__ = ["CycleStream", "tap_states_from_tms"]


@dataclass(frozen=True, eq=False)
class CycleStream:
    """A program as TAP cycles, with where each record and each scan's shift begins.

    `record_starts[i]` is the first cycle of record i (for a record of no cycles, the cycle
    that follows it); `shift_starts[j]` is the cycle of the first Shift-xR edge of the j-th
    scan record (IR or DR) in program order. `lower_bound` is the minimum TCK count for the
    program's sequence of records.
    """

    tms: bitarray
    tdi: bitarray
    tdo: bitarray
    mask: bitarray
    state_names: bytes
    record_starts: tuple[int, ...]
    shift_starts: tuple[int, ...]
    lower_bound: int

    @property
    def count(self) -> int:
        """The number of TCK rising edges."""
        return len(self.tms)

    def state_name(self, cycle: int) -> str:
        """The standard name of the TAP state at `cycle` ("unknown" before the first reset)."""
        return state_code_name(self.state_names[cycle])


_ALL_STATES = frozenset(TapState)


def tap_states_from_tms(tms: bitarray) -> bytes:
    """The TAP state at every edge of `tms`, starting from an unknown state.

    Until the set of states the controller could be in shrinks to one, the edge is recorded
    as unknown. Runs that hold the controller in a state (TMS=0 in Run-Test/Idle, Shift-xR,
    Pause-xR; TMS=1 in Test-Logic-Reset) are filled in one slice, so a stream of millions of
    TCKs takes a few Python steps per scan.
    """
    count = len(tms)
    codes = bytearray(count)
    possible: frozenset[TapState] = _ALL_STATES
    cycle = 0
    while cycle < count:
        tms_now = tms[cycle]
        following = frozenset(NEXT_STATE[state][tms_now] for state in possible)
        if following == possible:
            end = tms.find(1 - tms_now, cycle)
            end = count if end < 0 else end
            code = next(iter(possible)) if len(possible) == 1 else UNKNOWN_STATE_CODE
            codes[cycle:end] = bytes([code]) * (end - cycle)
            cycle = end
            continue
        codes[cycle] = next(iter(possible)) if len(possible) == 1 else UNKNOWN_STATE_CODE
        possible = following
        cycle += 1
    return bytes(codes)

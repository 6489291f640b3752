"""The TAP controller of IEEE Std 1149.1: its 16 states, next-state table and shortest TMS paths.

The controller is a 16-state machine clocked by the rising edge of TCK and steered by TMS
(IEEE Std 1149.1-2001, clause 6.1, Figure 6-1 "TAP controller state diagram"; clause and figure
numbers from memory). The back end uses this table to lay out TAP cycles; the independent
replay in `scanloom.sim` has its own implementation so that the two can check each other.

State codes are the example state assignment the standard tabulates beside the diagram
(IEEE Std 1149.1-2001, Table 6-3; from memory). Nothing depends on the particular codes: they
only make the per-cycle state record one byte per TCK.
"""

from __future__ import annotations

from enum import IntEnum
from types import MappingProxyType
from typing import Iterable, Mapping

__all__ = [
    "TapState",
    "NEXT_STATE",
    "STABLE_STATES",
    "SHIFT_STATES",
    "UNKNOWN_STATE_CODE",
    "next_state",
    "walk",
    "tms_path",
    "path_length",
    "state_from_name",
    "state_code_name",
]


class TapState(IntEnum):
    """The 16 TAP controller states, with the standard's example codes (from memory)."""

    EXIT2_DR = 0x0
    EXIT1_DR = 0x1
    SHIFT_DR = 0x2
    PAUSE_DR = 0x3
    SELECT_IR_SCAN = 0x4
    UPDATE_DR = 0x5
    CAPTURE_DR = 0x6
    SELECT_DR_SCAN = 0x7
    EXIT2_IR = 0x8
    EXIT1_IR = 0x9
    SHIFT_IR = 0xA
    PAUSE_IR = 0xB
    RUN_TEST_IDLE = 0xC
    UPDATE_IR = 0xD
    CAPTURE_IR = 0xE
    TEST_LOGIC_RESET = 0xF

    @property
    def standard_name(self) -> str:
        """The state's name as the standard writes it, e.g. "Run-Test/Idle"."""
        return _STANDARD_NAMES[self]


_STANDARD_NAMES: Mapping[TapState, str] = MappingProxyType({
    TapState.TEST_LOGIC_RESET: "Test-Logic-Reset",
    TapState.RUN_TEST_IDLE: "Run-Test/Idle",
    TapState.SELECT_DR_SCAN: "Select-DR-Scan",
    TapState.CAPTURE_DR: "Capture-DR",
    TapState.SHIFT_DR: "Shift-DR",
    TapState.EXIT1_DR: "Exit1-DR",
    TapState.PAUSE_DR: "Pause-DR",
    TapState.EXIT2_DR: "Exit2-DR",
    TapState.UPDATE_DR: "Update-DR",
    TapState.SELECT_IR_SCAN: "Select-IR-Scan",
    TapState.CAPTURE_IR: "Capture-IR",
    TapState.SHIFT_IR: "Shift-IR",
    TapState.EXIT1_IR: "Exit1-IR",
    TapState.PAUSE_IR: "Pause-IR",
    TapState.EXIT2_IR: "Exit2-IR",
    TapState.UPDATE_IR: "Update-IR",
})

# The code recorded for a TCK at which the state cannot be known: before the first reset the
# controller may be anywhere, and only five TMS=1 clocks bring every state to Test-Logic-Reset.
UNKNOWN_STATE_CODE = 0xFF

_S = TapState
# (next state on TMS=0, next state on TMS=1), transcribed from the state diagram.
NEXT_STATE: Mapping[TapState, tuple[TapState, TapState]] = MappingProxyType({
    _S.TEST_LOGIC_RESET: (_S.RUN_TEST_IDLE, _S.TEST_LOGIC_RESET),
    _S.RUN_TEST_IDLE: (_S.RUN_TEST_IDLE, _S.SELECT_DR_SCAN),
    _S.SELECT_DR_SCAN: (_S.CAPTURE_DR, _S.SELECT_IR_SCAN),
    _S.CAPTURE_DR: (_S.SHIFT_DR, _S.EXIT1_DR),
    _S.SHIFT_DR: (_S.SHIFT_DR, _S.EXIT1_DR),
    _S.EXIT1_DR: (_S.PAUSE_DR, _S.UPDATE_DR),
    _S.PAUSE_DR: (_S.PAUSE_DR, _S.EXIT2_DR),
    _S.EXIT2_DR: (_S.SHIFT_DR, _S.UPDATE_DR),
    _S.UPDATE_DR: (_S.RUN_TEST_IDLE, _S.SELECT_DR_SCAN),
    _S.SELECT_IR_SCAN: (_S.CAPTURE_IR, _S.TEST_LOGIC_RESET),
    _S.CAPTURE_IR: (_S.SHIFT_IR, _S.EXIT1_IR),
    _S.SHIFT_IR: (_S.SHIFT_IR, _S.EXIT1_IR),
    _S.EXIT1_IR: (_S.PAUSE_IR, _S.UPDATE_IR),
    _S.PAUSE_IR: (_S.PAUSE_IR, _S.EXIT2_IR),
    _S.EXIT2_IR: (_S.SHIFT_IR, _S.UPDATE_IR),
    _S.UPDATE_IR: (_S.RUN_TEST_IDLE, _S.SELECT_DR_SCAN),
})

# The states in which the controller can stay while TMS is held (the standard's stable states).
STABLE_STATES = frozenset({
    _S.TEST_LOGIC_RESET, _S.RUN_TEST_IDLE, _S.SHIFT_DR, _S.PAUSE_DR, _S.SHIFT_IR, _S.PAUSE_IR,
})
SHIFT_STATES = frozenset({_S.SHIFT_DR, _S.SHIFT_IR})


def next_state(state: TapState, tms: int) -> TapState:
    """The state after one rising edge of TCK with `tms` sampled."""
    return NEXT_STATE[state][1 if tms else 0]


def walk(state: TapState, tms_bits: Iterable[int]) -> list[TapState]:
    """The states at each rising edge while clocking `tms_bits`, then the state reached."""
    visited = [state]
    for tms in tms_bits:
        state = next_state(state, tms)
        visited.append(state)
    return visited


def _shortest_paths_from(source: TapState) -> dict[TapState, tuple[int, ...]]:
    """Breadth-first search over the next-state table; TMS=0 is tried first on ties."""
    paths: dict[TapState, tuple[int, ...]] = {source: ()}
    frontier = [source]
    while frontier:
        following: list[TapState] = []
        for state in frontier:
            for tms in (0, 1):
                target = NEXT_STATE[state][tms]
                if target not in paths:
                    paths[target] = paths[state] + (tms,)
                    following.append(target)
        frontier = following
    return paths


_SHORTEST: Mapping[TapState, Mapping[TapState, tuple[int, ...]]] = MappingProxyType({
    source: MappingProxyType(_shortest_paths_from(source)) for source in TapState
})


def tms_path(source: TapState, target: TapState) -> tuple[int, ...]:
    """The shortest TMS sequence that moves the controller from `source` to `target`."""
    return _SHORTEST[source][target]


def path_length(source: TapState, target: TapState) -> int:
    """The number of TCK rising edges on the shortest path from `source` to `target`."""
    return len(_SHORTEST[source][target])


_BY_NAME: Mapping[str, TapState] = MappingProxyType({
    **{state.name: state for state in TapState},
    **{state.standard_name.upper(): state for state in TapState},
})


def state_from_name(name: str) -> TapState:
    """A state from its identifier ("RUN_TEST_IDLE") or standard name ("Run-Test/Idle")."""
    try:
        return _BY_NAME[name.upper()]
    except KeyError:
        raise ValueError(f"not a TAP controller state: {name!r}") from None


def state_code_name(code: int) -> str:
    """The standard name for a per-cycle state code, "unknown" for UNKNOWN_STATE_CODE."""
    if code == UNKNOWN_STATE_CODE:
        return "unknown"
    return TapState(code).standard_name

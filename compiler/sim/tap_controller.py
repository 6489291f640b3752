"""A TAP controller for the replay, written from the state diagram's rules, not from a table.

Deliberately separate from `scanloom.backend.tap` so that the replay checks the back end
instead of repeating it. Here a state is named by the standard's words (IEEE Std 1149.1-2001,
clause 6.1, Figure 6-1; clause and figure numbers from memory), and the diagram is read as
rules: the four controller states, plus two columns (DR and IR) that run through the same
phases Select, Capture, Shift, Exit1, Pause, Exit2, Update.

The controller may start in an unknown state: it then tracks every state it could be in, and
becomes known once they agree (five TMS=1 clocks always bring all of them to
Test-Logic-Reset).
"""

from __future__ import annotations

__all__ = ["RESET", "IDLE", "TapController", "following_state", "is_shift", "column_of", "phase_of",
           "ALL_STATES"]

RESET = "Test-Logic-Reset"
IDLE = "Run-Test/Idle"
_PHASES = ("Select", "Capture", "Shift", "Exit1", "Pause", "Exit2", "Update")
ALL_STATES = frozenset([RESET, IDLE] + [
    f"Select-{column}-Scan" if phase == "Select" else f"{phase}-{column}"
    for column in ("DR", "IR") for phase in _PHASES
])


def phase_of(state: str) -> str | None:
    """The phase of a column state ("Shift" for "Shift-DR"), None for the controller states."""
    if state in (RESET, IDLE):
        return None
    return state.split("-", 1)[0]


def column_of(state: str) -> str | None:
    """"DR" or "IR" for a column state, None for Test-Logic-Reset and Run-Test/Idle."""
    if state in (RESET, IDLE):
        return None
    return "IR" if "-IR" in state else "DR"


def _in_column(phase: str, column: str) -> str:
    return f"Select-{column}-Scan" if phase == "Select" else f"{phase}-{column}"


def following_state(state: str, tms: int) -> str:
    """The state after a rising edge of TCK with `tms`, by the diagram's rules."""
    if state == RESET:
        return RESET if tms else IDLE
    if state == IDLE:
        return _in_column("Select", "DR") if tms else IDLE
    phase, column = phase_of(state), column_of(state)
    assert phase is not None and column is not None
    if phase == "Select":
        # TMS=1 moves on to the next column (DR -> IR -> reset); TMS=0 enters this column.
        if tms:
            return _in_column("Select", "IR") if column == "DR" else RESET
        return _in_column("Capture", column)
    if phase in ("Capture", "Shift", "Exit2"):
        # These lead into shifting with TMS=0; with TMS=1 Capture and Shift exit, Exit2 updates.
        if not tms:
            return _in_column("Shift", column)
        return _in_column("Update" if phase == "Exit2" else "Exit1", column)
    if phase == "Exit1":
        return _in_column("Update" if tms else "Pause", column)
    if phase == "Pause":
        return _in_column("Exit2", column) if tms else state
    # Update: like Run-Test/Idle's exits, TMS=0 rests in Run-Test/Idle, TMS=1 starts a new scan.
    return _in_column("Select", "DR") if tms else IDLE


def is_shift(state: str | None) -> bool:
    return state is not None and phase_of(state) == "Shift"


class TapController:
    """One device's controller; `state` is None while it cannot be known."""

    def __init__(self) -> None:
        self._possible: frozenset[str] = ALL_STATES

    @property
    def state(self) -> str | None:
        if len(self._possible) == 1:
            return next(iter(self._possible))
        return None

    def clock(self, tms: int) -> str | None:
        """One rising edge of TCK; returns the new state (None while unknown)."""
        self._possible = frozenset(following_state(state, tms) for state in self._possible)
        return self.state

    def holds(self, tms: int) -> bool:
        """True when clocking `tms` leaves the controller (or every state it may be in) in place."""
        return all(following_state(state, tms) == state for state in self._possible)

    def clock_run(self, tms: int, count: int) -> str | None:
        """`count` edges with the same `tms`; a held state is not stepped edge by edge."""
        for _ in range(count):
            if self.holds(tms):
                break
            self.clock(tms)
        return self.state

"""Shift records -> TAP cycles: the TMS/TDI/TDO/mask bit of every TCK a player clocks.

Layout rules (DESIGN.md; IEEE Std 1149.1 TAP controller state diagram):
- a reset record is five TMS=1 clocks, from wherever the controller is (also when the board
  has TRST: the player then asserts TRST as well, the stream stays the same);
- a scan goes from where the controller is to Shift-IR or Shift-DR by the shortest TMS path,
  spends one rising edge in Shift-xR per bit (TMS=0 except on the last bit, TMS=1 to
  Exit1-xR), then passes Update-xR; back-to-back scans go from Update-xR straight to
  Select-DR-Scan;
- `idle_clocks` n after a record are n rising edges in Run-Test/Idle with TMS=0;
- a record rests in its `end_state`; Run-Test/Idle is passed through only when something
  needs it (idle clocks, or the end of the program), since every following record leaves
  it again at once.

The cycle bits are built by concatenating whole slices (paths are precomputed, shifts are
copied from the records), never per TCK, so millions of TCKs take a fraction of a second.
"""

from __future__ import annotations

from typing import Sequence

from bitarray import bitarray
from bitarray.util import zeros

from .cycle_stream import CycleStream
from .records import DR_SCAN, IDLE, IR_SCAN, RESET, ScanProgram, ShiftRecord
from .tap import (
    UNKNOWN_STATE_CODE,
    TapState,
    next_state,
    path_length,
    state_from_name,
    tms_path,
)

__all__ = ["CycleStream", "lay_out_cycles", "scan_sequence_lower_bound", "RESET_CLOCKS", "REST_STATES"]

RESET_CLOCKS = 5  # five TMS=1 clocks reach Test-Logic-Reset from any state (IEEE Std 1149.1)
REST_STATES = frozenset({TapState.RUN_TEST_IDLE, TapState.TEST_LOGIC_RESET})
_SCAN_KINDS = {IR_SCAN: (TapState.SHIFT_IR, TapState.EXIT1_IR, TapState.UPDATE_IR),
               DR_SCAN: (TapState.SHIFT_DR, TapState.EXIT1_DR, TapState.UPDATE_DR)}


class _StreamBuilder:
    """Accumulates cycle slices; the controller's position is `state` (None = unknown)."""

    def __init__(self) -> None:
        self.tms = bitarray()
        self.tdi = bitarray()
        self.tdo = bitarray()
        self.mask = bitarray()
        self.states = bytearray()
        self.state: TapState | None = None

    @property
    def position(self) -> int:
        return len(self.tms)

    def go_to(self, target: TapState) -> None:
        """Shortest TMS path from the current state to `target`, TDI 0, nothing compared."""
        assert self.state is not None
        path = tms_path(self.state, target)
        if not path:
            return
        self.states += bytes(_path_states(self.state, path))
        self.tms += bitarray(path)
        self._quiet(len(path))
        self.state = target

    def reset(self) -> None:
        """Five TMS=1 clocks; the states are unknown when the start state is."""
        ones = (1,) * RESET_CLOCKS
        if self.state is None:
            self.states += bytes([UNKNOWN_STATE_CODE]) * RESET_CLOCKS
        else:
            self.states += bytes(_path_states(self.state, ones))
        self.tms += bitarray(ones)
        self._quiet(RESET_CLOCKS)
        self.state = TapState.TEST_LOGIC_RESET

    def shift(self, record: ShiftRecord, shift_state: TapState, exit_state: TapState) -> None:
        """`record.length` edges in Shift-xR, the last with TMS=1; expected TDO masked."""
        length = record.length
        tms = zeros(length, endian=self.tms.endian)
        tms[-1] = 1
        self.tms += tms
        self.tdi += record.tdi
        mask = _as_endian(record.mask, self.mask.endian)
        self.tdo += _as_endian(record.tdo, self.mask.endian) & mask
        self.mask += mask
        self.states += bytes([shift_state]) * length
        self.state = exit_state

    def idle(self, clocks: int) -> None:
        """`clocks` rising edges in Run-Test/Idle with TMS=0."""
        self.go_to(TapState.RUN_TEST_IDLE)
        self.tms += zeros(clocks, endian=self.tms.endian)
        self._quiet(clocks)
        self.states += bytes([TapState.RUN_TEST_IDLE]) * clocks

    def _quiet(self, count: int) -> None:
        quiet = zeros(count, endian=self.tms.endian)
        self.tdi += quiet
        self.tdo += quiet
        self.mask += quiet


def _path_states(state: TapState, path: Sequence[int]) -> list[int]:
    visited = []
    for tms in path:
        visited.append(int(state))
        state = next_state(state, tms)
    return visited


def _as_endian(bits: bitarray, endian: str) -> bitarray:
    return bits if bits.endian == endian else bitarray(bits, endian=endian)


def _check_record(index: int, record: ShiftRecord) -> TapState:
    """The record's rest state, after checking the record is one the layout can honour."""
    if record.kind not in (RESET, IR_SCAN, DR_SCAN, IDLE):
        raise ValueError(f"record {index}: unknown kind {record.kind!r}")
    if record.kind in _SCAN_KINDS:
        if record.length < 1:
            raise ValueError(f"record {index}: a {record.kind} scan needs at least one bit")
        for name in ("tdi", "tdo", "mask"):
            if len(getattr(record, name)) != record.length:
                raise ValueError(f"record {index}: {name} has {len(getattr(record, name))} bits, "
                                 f"length is {record.length}")
    if record.idle_clocks < 0:
        raise ValueError(f"record {index}: negative idle clocks")
    rest = state_from_name(record.end_state)
    if rest not in REST_STATES:
        raise ValueError(f"record {index}: cannot rest in {rest.standard_name}; "
                         f"a record rests in Run-Test/Idle or Test-Logic-Reset")
    return rest


def _needs_rest(rest: TapState, is_last: bool) -> bool:
    """Test-Logic-Reset is always entered (it resets the test logic); Run-Test/Idle only at the end."""
    return rest is TapState.TEST_LOGIC_RESET or is_last


def lay_out_cycles(program: ScanProgram) -> CycleStream:
    """The TAP cycle stream for `program`; its first record must be a reset."""
    records = program.records
    if not records or records[0].kind != RESET:
        raise ValueError("a program's first record must be a reset to Test-Logic-Reset")
    builder = _StreamBuilder()
    record_starts: list[int] = []
    shift_starts: list[int] = []
    for index, record in enumerate(records):
        rest = _check_record(index, record)
        record_starts.append(builder.position)
        if record.kind == RESET:
            builder.reset()
        elif record.kind in _SCAN_KINDS:
            shift_state, exit_state, update_state = _SCAN_KINDS[record.kind]
            builder.go_to(shift_state)
            shift_starts.append(builder.position)
            builder.shift(record, shift_state, exit_state)
            builder.go_to(update_state)
        if record.idle_clocks > 0:
            builder.idle(record.idle_clocks)
        if _needs_rest(rest, index == len(records) - 1):
            builder.go_to(rest)
    return CycleStream(
        tms=builder.tms, tdi=builder.tdi, tdo=builder.tdo, mask=builder.mask,
        state_names=bytes(builder.states), record_starts=tuple(record_starts),
        shift_starts=tuple(shift_starts), lower_bound=scan_sequence_lower_bound(records),
    )


def scan_sequence_lower_bound(records: Sequence[ShiftRecord]) -> int:
    """The fewest TCKs that carry `records`, summed from shortest-path lengths alone.

    Per record: a reset is five clocks; a scan is the shortest path to Shift-xR, one clock per
    bit, and the shortest path from Exit1-xR to Update-xR; idle clocks are the shortest path
    to Run-Test/Idle plus the clocks; a rest state is the shortest path to it where the
    record must rest there.
    """
    total = 0
    state = TapState.TEST_LOGIC_RESET
    for index, record in enumerate(records):
        if record.kind == RESET:
            total += RESET_CLOCKS
            state = TapState.TEST_LOGIC_RESET
        elif record.kind in _SCAN_KINDS:
            shift_state, exit_state, update_state = _SCAN_KINDS[record.kind]
            total += path_length(state, shift_state) + record.length
            total += path_length(exit_state, update_state)
            state = update_state
        if record.idle_clocks > 0:
            total += path_length(state, TapState.RUN_TEST_IDLE) + record.idle_clocks
            state = TapState.RUN_TEST_IDLE
        rest = state_from_name(record.end_state)
        if _needs_rest(rest, index == len(records) - 1):
            total += path_length(state, rest)
            state = rest
    return total

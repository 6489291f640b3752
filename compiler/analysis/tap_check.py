"""TAP-signal suspects checked by playing them on the virtual board.

A fault on a TAP signal does not change what a pin reads; it garbles the scans themselves, and
how depends on the cycle at which it strikes (a net shorted onto TMS strikes only while the net
is low, and the TAP then walks off the path the program planned). No rule predicts that, so a
suspect is played cycle by cycle on the virtual board (`sim.virtual_board`) and kept when it
returns exactly what the board returned on every compared bit (bits the virtual board leaves
undefined may have read either way). Playing costs a whole program run per suspect, so it is
done for boards and programs small enough, and for a bounded number of suspects.

A net shorted onto a TAP signal strikes first when a driver first pulls the net to the value
that wins the short (0 for wired-AND, 1 for wired-OR). The player then goes on clocking: a
garbled TMS or TCK takes the TAP off its path at once, a garbled TDI or TDO corrupts the next
bits that pass, so the first failing bit comes within a few scans of the strike. A suspect
whose net cannot strike by then is not played.
"""

from __future__ import annotations

from typing import Sequence

from bitarray import bitarray

from ..backend.cycle_stream import CycleStream
from ..backend.records import ScanProgram
from ..diagnostics import Diagnostics
from ..models.board import Board
from ..sim.electrical import ElectricalBoard, build_electrical
from ..sim.fault_effects import fault_effect
from ..sim.faults import OPEN_NET, OPEN_PIN, TAP_SHORT, Fault, parse_fault
from ..sim.resolve import drive_sum
from ..sim.virtual_board import VirtualBoard
from .capture_log import CaptureLog
from .observations import StateObservations

__all__ = ["TapChecker", "PLAY_LIMIT"]

PLAY_LIMIT = 96  # suspects played at most per diagnosis
_WORK_LIMIT = 6_000_000  # cycles x devices x suspects beyond which no suspect is played
_SCANS_AFTER_STRIKE = 4  # captures after a strike within which its first failure shows


def _big(bits: bitarray) -> bitarray:
    return bits if bits.endian == "big" else bitarray(bits, endian="big")


class TapChecker:
    """Plays TAP suspects against one capture."""

    def __init__(self, program: ScanProgram, cycles: CycleStream, board: Board,
                 capture: CaptureLog) -> None:
        self.program = program
        self.cycles = cycles
        self.board = board
        self.capture = capture
        self._electrical: ElectricalBoard | None = None
        self._against: CycleStream | None = None

    @property
    def against(self) -> CycleStream:
        """The program's cycles with the capture as the TDO to expect (where it is 0 or 1)."""
        if self._against is None:
            cycles = self.cycles
            mask = _big(cycles.mask) & self.capture.known
            self._against = CycleStream(_big(cycles.tms), _big(cycles.tdi), self.capture.values & mask,
                                        mask, cycles.state_names, cycles.record_starts,
                                        cycles.shift_starts, cycles.lower_bound)
        return self._against

    def affordable(self, suspects: int) -> bool:
        count = min(suspects, PLAY_LIMIT)
        return count > 0 and self.cycles.count * max(1, len(self.board.chain)) * count <= _WORK_LIMIT

    @property
    def electrical(self) -> ElectricalBoard:
        if self._electrical is None:
            self._electrical = build_electrical(self.board, Diagnostics())
        return self._electrical

    def plausible(self, fault: Fault, observations: StateObservations, first_failing: int) -> bool:
        """Whether a net shorted onto a TAP signal can have struck by the first failing bit."""
        if fault.kind != TAP_SHORT:
            return True
        node = observations.pins.node_of_net.get(fault.nets[0])
        if node is None:
            return True
        drives = [observations.drive_of(o) for o in observations.pins.node_outputs(node)]
        total = drive_sum(drives, (), observations.full)
        strikes = total.s1 if fault.mode == "or" else total.s0
        if not strikes:
            return False
        first_state = (strikes & -strikes).bit_length() - 1
        captures = [e for e in observations.states.captures if e.state >= first_state]
        limit = captures[_SCANS_AFTER_STRIKE].cycle if len(captures) > _SCANS_AFTER_STRIKE else None
        return limit is None or first_failing <= limit


    def confirmed(self, specs: Sequence[str], observations: StateObservations | None = None,
                  first_failing: int = 0, opens: bool = True) -> list[tuple[str, bool]]:
        """The suspects (at most PLAY_LIMIT played) that fit the capture, best first, each with
        whether it reproduces every failing bit for sure.

        A suspect fits when no bit it knows contradicts the capture and it predicts a failure.
        Bits it leaves undefined may read anything on a real board, but not the expected value
        nearly everywhere: a TAP walked off its path returns garbage, so a suspect whose
        undefined bits expected to read 1 nearly all did read 1 is not kept (at least 8 such
        bits, more than 90 % of them as expected).
        """
        compared = _big(self.cycles.mask)
        expected = _big(self.cycles.tdo)
        mask = compared & self.capture.known
        values = self.capture.values
        failing = (mask & (values ^ expected)) | (compared & ~self.capture.known)
        total = failing.count()
        found: list[tuple[int, int, str]] = []
        played = 0
        for spec in specs:
            if played >= PLAY_LIMIT:
                break
            fault = parse_fault(spec, self.electrical, Diagnostics())
            if fault is None or (not opens and fault.kind in (OPEN_PIN, OPEN_NET)):
                continue
            if observations is not None and not self.plausible(fault, observations, first_failing):
                continue
            played += 1
            effect = fault_effect(self.electrical, fault)
            # Played against the capture itself, the run stops at the first bit it contradicts.
            result = VirtualBoard(self.electrical, self.program, self.against, effect).run(
                stop_on_difference=True)
            if result.stopped_at is not None:
                continue
            known = _big(result.known)
            undefined_ones = mask & ~known & expected
            count = undefined_ones.count()
            if count >= 8 and (undefined_ones & values).count() > 0.9 * count:
                continue
            reproduced = (failing & known).count()
            undefined = (compared & ~known).count()
            if reproduced or undefined:
                found.append((-reproduced, undefined, spec))
        found.sort()
        return [(spec, -negative == total) for negative, _, spec in found]

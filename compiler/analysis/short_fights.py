"""How long drivers would fight if adjacent pins were shorted: the `short_fight` check.

An interconnect test drives neighbouring nets to opposite values on purpose; that is how it
finds shorts. If the short is there, the two drivers fight from the Update-DR that applies the
vector to the next update that changes it. Scan tests keep that time short: a limit of about a
millisecond per vector is common practice for boundary-scan drivers shorted output to output.
The check reads the shift records and the TAP cycles only, so the time is the one the player
will really spend at the program's TCK.
"""

from __future__ import annotations

from dataclasses import dataclass

from bitarray import bitarray

from ..backend.cycle_stream import CycleStream
from ..backend.images import from_msb_string
from ..backend.records import DR_SCAN, IR_SCAN, RESET, ScanProgram
from ..models.board import Board, PinRef
from ..models.connectivity import driver_cells
from ..safety_checks import Finding
from ..sim.faults import adjacent_pin_pairs

__all__ = ["FightWindow", "fight_windows", "check_short_fights"]

_DRIVING = frozenset({"EXTEST", "CLAMP", "EXTEST_PULSE", "EXTEST_TRAIN"})


@dataclass(frozen=True, slots=True)
class FightWindow:
    """Adjacent pins driven to opposite values between two updates."""

    record: int
    test: str | None
    step: str | None
    seconds: float
    pairs: tuple[tuple[PinRef, PinRef], ...]


@dataclass(frozen=True, slots=True)
class _Output:
    pin: PinRef
    data: int
    control: int | None
    disable_value: int | None


def _adjacent_outputs(board: Board) -> list[tuple[_Output, _Output]]:
    """Pairs of scan outputs on neighbouring package pins of one device, on different nets."""
    pairs = []
    for entry in board.chain:
        device = entry.device
        for port_a, port_b in adjacent_pin_pairs(device):
            pin_a, pin_b = PinRef(entry.ref, port_a), PinRef(entry.ref, port_b)
            net_a, net_b = board.net_of_pin.get(pin_a), board.net_of_pin.get(pin_b)
            if net_a is None or net_b is None or net_a == net_b:
                continue
            cells_a, cells_b = driver_cells(device, port_a), driver_cells(device, port_b)
            if not cells_a or not cells_b:
                continue
            a, b = cells_a[0], cells_b[0]
            pairs.append((_Output(pin_a, a.number, a.control_cell, a.disable_value),
                          _Output(pin_b, b.number, b.control_cell, b.disable_value)))
    return pairs


def _driven(output: _Output, image: bitarray) -> int | None:
    if output.control is not None and output.disable_value is not None \
            and 0 <= output.control < len(image) and image[output.control] == output.disable_value:
        return None
    return image[output.data] if 0 <= output.data < len(image) else None


def fight_windows(scan: ScanProgram, cycles: CycleStream, board: Board, tck_hz: float,
                  limit_s: float) -> list[FightWindow]:
    """Every interval between updates, longer than `limit_s`, in which adjacent pins oppose."""
    pairs = _adjacent_outputs(board)
    if not pairs:
        return []
    scans = [i for i, r in enumerate(scan.records) if r.kind in (IR_SCAN, DR_SCAN)]
    update_cycle: dict[int, int] = {}
    for k, index in enumerate(scans):  # Update-xR: two edges after the last Shift-xR edge
        update_cycle[index] = cycles.shift_starts[k] + scan.records[index].length + 1
    instruction: dict[str, str] = {}
    images: dict[str, bitarray] = {}
    windows: list[FightWindow] = []
    for position, index in enumerate(scans):
        record = scan.records[index]
        reset_between = any(r.kind == RESET for r in scan.records[scans[position - 1] + 1:index]) \
            if position else False
        if reset_between:
            instruction.clear()
            images.clear()
        if record.kind == IR_SCAN:
            instruction.update(record.intent)
        else:
            for ref, image in record.intent.items():
                images[ref] = from_msb_string(image)
        following = scans[position + 1] if position + 1 < len(scans) else None
        end = update_cycle[following] if following is not None else cycles.count
        seconds = (end - update_cycle[index]) / tck_hz
        if seconds <= limit_s:
            continue
        opposed = []
        for a, b in pairs:
            if instruction.get(a.pin.ref, "").upper() not in _DRIVING or a.pin.ref not in images:
                continue
            image = images[a.pin.ref]
            va, vb = _driven(a, image), _driven(b, image)
            if va is not None and vb is not None and va != vb:
                opposed.append((a.pin, b.pin))
        if opposed:
            windows.append(FightWindow(index, record.test, record.step, seconds, tuple(opposed)))
    return windows


def check_short_fights(scan: ScanProgram, cycles: CycleStream, board: Board, tck_hz: float | None,
                       limit_s: float, step_spans: dict[tuple[str, str], object] | None = None) -> list[Finding]:
    """One warning per step whose vector would keep shorted neighbours fighting too long."""
    if tck_hz is None:
        return []
    findings = []
    seen: set[tuple[str | None, str | None]] = set()
    for window in fight_windows(scan, cycles, board, tck_hz, limit_s):
        key = (window.test, window.step)
        if key in seen:
            continue
        seen.add(key)
        a, b = window.pairs[0]
        more = f" and {len(window.pairs) - 1} more pairs" if len(window.pairs) > 1 else ""
        where = f" in step {window.step}" if window.step else ""
        span = (step_spans or {}).get(key) if window.test and window.step else None
        findings.append(Finding(
            "short_fight",
            f"adjacent pins {a} and {b}{more} are driven to opposite values{where}: if shorted, "
            f"the drivers would fight for {window.seconds * 1e3:.3g} ms (limit {limit_s * 1e3:g} ms)",
            span, window.test, window.step, window.record))  # type: ignore[arg-type]
    return findings

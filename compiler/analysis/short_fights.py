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
from ..backend.records import DR_SCAN, IR_SCAN, RESET, ChainMap, ScanProgram
from ..models.board import Board, PinRef
from ..models.connectivity import driver_cells
from ..models.device import DeviceModel
from ..models.model_memo import per_model
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
    first: tuple[PinRef, PinRef]  # the first opposed pair in chain order
    count: int  # how many pairs oppose


_Cells = tuple[int, "int | None", "int | None"]  # data cell, control cell, disable value


@per_model
def _driver_pairs(device: DeviceModel) -> tuple[tuple[str, str, _Cells, _Cells], ...]:
    """The device's neighbouring pins that both have an output cell, with their first cells."""
    pairs = []
    for port_a, port_b in adjacent_pin_pairs(device):
        cells_a, cells_b = driver_cells(device, port_a), driver_cells(device, port_b)
        if cells_a and cells_b:
            a, b = cells_a[0], cells_b[0]
            pairs.append((port_a, port_b, (a.number, a.control_cell, a.disable_value),
                          (b.number, b.control_cell, b.disable_value)))
    return tuple(pairs)


class _PairTable:
    """Pairs of scan outputs on neighbouring package pins of one device, on different nets, in
    chain order (each device's pairs together), as positions in a chain-wide image: one window
    is then a few bitarray operations, for the hundred thousand neighbour pairs of a large
    board's interconnect test."""

    def __init__(self, board: Board, chain: ChainMap):
        self.refs = [entry.ref for entry in board.chain]
        self.lengths = [entry.device.boundary_length for entry in board.chain]
        self.sentinel = sum(self.lengths)  # a constant 1 appended to the image: the "control"
        # of a two-state output
        # Each output port's net, from the chain map the records carry (every cell's port and
        # net; a pin is on one net at most, the board loader sees to that)
        net_of_port: dict[str, dict[str, str]] = {ref: {} for ref in self.refs}
        for device in chain.devices:
            net_of_port[device.ref] = {cell.port: cell.net for cell in device.cells
                                       if cell.port and cell.net}
        self.ports: list[tuple[str, str]] = []
        self.ranges: dict[str, tuple[int, int]] = {}
        sides: tuple[list[_Cells], list[_Cells]] = ([], [])
        bases: list[int] = []
        base = 0
        for entry, length in zip(board.chain, self.lengths):
            nets = net_of_port[entry.ref]
            kept = [pair for pair in _driver_pairs(entry.device)
                    if (net_a := nets.get(pair[0])) is not None
                    and (net_b := nets.get(pair[1])) is not None and net_a != net_b]
            if kept:
                self.ranges[entry.ref] = (len(self.ports), len(self.ports) + len(kept))
                self.ports += [(pair[0], pair[1]) for pair in kept]
                sides[0].extend(pair[2] for pair in kept)
                sides[1].extend(pair[3] for pair in kept)
                bases += [base] * len(kept)
            base += length
        self.a = self._columns(sides[0], bases)
        self.b = self._columns(sides[1], bases)

    def __len__(self) -> int:
        return len(self.ports)

    def _columns(self, cells: list[_Cells], bases: list[int]) -> tuple[list[int], list[int], bitarray]:
        """Chain positions of each pair side's data and control cells, and the disable values."""
        data = [base + cell[0] for base, cell in zip(bases, cells)]
        control = [self.sentinel if cell[1] is None or cell[2] is None else base + cell[1]
                   for base, cell in zip(bases, cells)]
        disable = bitarray([0 if cell[1] is None or cell[2] is None else cell[2] for cell in cells])
        return data, control, disable

    def pair(self, k: int) -> tuple[PinRef, PinRef]:
        ref = next(ref for ref, (lo, hi) in self.ranges.items() if lo <= k < hi)
        port_a, port_b = self.ports[k]
        return PinRef(ref, port_a), PinRef(ref, port_b)

    def opposed(self, images: dict[str, bitarray], driving: set[str]) -> bitarray:
        """1 for each pair whose two outputs are enabled and drive different values."""
        chain = bitarray()
        for ref, length in zip(self.refs, self.lengths):
            image = images.get(ref)
            chain += image if image is not None and len(image) == length else bitarray(length)
        chain.append(1)
        (da, ca, xa), (db, cb, xb) = self.a, self.b
        result = (chain[ca] ^ xa) & (chain[cb] ^ xb) & (chain[da] ^ chain[db])
        for ref, (lo, hi) in self.ranges.items():
            if ref not in driving or ref not in images:
                result[lo:hi] = 0
        return result


def fight_windows(scan: ScanProgram, cycles: CycleStream, board: Board, tck_hz: float,
                  limit_s: float) -> list[FightWindow]:
    """Every interval between updates, longer than `limit_s`, in which adjacent pins oppose."""
    table: _PairTable | None = None
    scans = [i for i, r in enumerate(scan.records) if r.kind in (IR_SCAN, DR_SCAN)]
    update_cycle: dict[int, int] = {}
    for k, index in enumerate(scans):  # Update-xR: two edges after the last Shift-xR edge
        update_cycle[index] = cycles.shift_starts[k] + scan.records[index].length + 1
    instruction: dict[str, str] = {}
    images: dict[str, bitarray] = {}
    windows: list[FightWindow] = []
    for position, index in enumerate(scans):
        record = scan.records[index]
        if position and any(r.kind == RESET for r in scan.records[scans[position - 1] + 1:index]):
            instruction.clear()
            images.clear()
        if record.kind == IR_SCAN:
            instruction.update(record.intent)
        else:
            for ref, image in record.intent.items():
                images[ref] = bitarray(from_msb_string(image))
        following = scans[position + 1] if position + 1 < len(scans) else None
        end = update_cycle[following] if following is not None else cycles.count
        seconds = (end - update_cycle[index]) / tck_hz
        if seconds <= limit_s:
            continue
        table = table or _PairTable(board, scan.chain)
        if not len(table):
            return []
        driving = {ref for ref, name in instruction.items() if name.upper() in _DRIVING}
        opposed = table.opposed(images, driving)
        count = opposed.count()
        if count:
            windows.append(FightWindow(index, record.test, record.step, seconds,
                                       table.pair(opposed.index(1)), count))
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
        a, b = window.first
        more = f" and {window.count - 1} more pairs" if window.count > 1 else ""
        where = f" in step {window.step}" if window.step else ""
        span = (step_spans or {}).get(key) if window.test and window.step else None
        findings.append(Finding(
            "short_fight",
            f"adjacent pins {a} and {b}{more} are driven to opposite values{where}: if shorted, "
            f"the drivers would fight for {window.seconds * 1e3:.3g} ms (limit {limit_s * 1e3:g} ms)",
            span, window.test, window.step, window.record))  # type: ignore[arg-type]
    return findings

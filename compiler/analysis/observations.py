"""Per board state: what every scan output drove and what every receiving cell read.

The diagnosis works on the states a program goes through (`scan_states`: read from the
records, one bit per state in Python ints). For a scan output it needs the drive in each
state, exactly as the virtual board puts it on the pin (`sim.resolve.scan_pin_drive`'s rule:
the update stage where the instruction drives pins, X where that stage is unknown, the BSDL
disable result where the output is off). For a boundary cell it needs, per state, whether
the state's capture compares it while the cell captures its pin (CELL_INFO through
`models.cells`), what was expected, and what the board returned. Columns are cut out of the
state-major rows lazily, only for the cells and outputs a diagnosis looks at.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

from bitarray import bitarray

from ..backend.cycle_stream import CycleStream
from ..backend.records import ScanProgram
from ..models.board import Board, PinRef
from ..models.cells import PIN, resolve_capture
from ..models.device import DRIVER_FUNCTIONS, BoundaryCell, CellInfo
from ..sim.resolve import PinDrive
from .capture_log import CaptureLog
from .scan_pins import BoardPins, OutputPin
from .scan_states import ScanStates, column, scan_states

__all__ = ["CellObservation", "StateObservations"]


@dataclass(frozen=True, slots=True)
class CellObservation:
    """One boundary cell over the states whose capture compares it while it captures its pin."""

    device: int
    number: int
    pin: PinRef
    compared: int  # states
    expected: int  # expected value per state (within `compared`)
    value: int  # returned value per state (X read as 0)
    known: int  # states whose returned bit is 0 or 1

    @property
    def failing(self) -> int:
        return self.compared & (~self.known | (self.expected ^ self.value))


def _little(bits: bitarray) -> bitarray:
    return bits if bits.endian == "little" else bitarray(bits, endian="little")


class StateObservations:
    """The program's states on the board, with the capture laid over them."""

    def __init__(self, program: ScanProgram, cycles: CycleStream, board: Board, pins: BoardPins,
                 capture: CaptureLog, states: ScanStates | None = None) -> None:
        self.program = program
        self.board = board
        self.pins = pins
        self.states = states if states is not None else scan_states(program, cycles, board)
        self.full = self.states.full
        count = self.states.count
        values = _little(capture.values)
        known = _little(capture.known)
        self._observed: list[tuple[bitarray, bitarray]] = []
        for device in self.states.devices:
            rows = bitarray(count * device.length, endian="little")
            rows.setall(0)
            self._observed.append((rows, rows.copy()))
        for event in self.states.captures:
            record_length = program.records[event.record].length
            for d, register, at, size in event.layout:
                if register != "BOUNDARY":
                    continue
                shown = max(0, min(size, record_length - at))
                row = event.state * self.states.devices[d].length
                start = event.shift_start + at
                obs_values, obs_known = self._observed[d]
                obs_values[row:row + shown] = values[start:start + shown]
                obs_known[row:row + shown] = known[start:start + shown]
        self._cells: dict[tuple[int, int], CellObservation | None] = {}
        self._drives: dict[PinRef, PinDrive] = {}

    # ---- scan outputs --------------------------------------------------------------------
    def drive_of(self, output: OutputPin) -> PinDrive:
        """The pin's drive in every state (`sim.resolve.scan_pin_drive`'s rule)."""
        found = self._drives.get(output.pin)
        if found is not None:
            return found
        device = self.states.devices[output.device]
        length, full = device.length, self.full
        data = column(device.update_rows, length, output.cell)
        if output.control is None or output.disable_value is None:
            enabled = full
        else:
            control = column(device.update_rows, length, output.control)
            enabled = control if output.disable_value == 0 else full & ~control
        unknown = device.drive & ~device.update_known
        on = device.drive & device.update_known & enabled
        s0 = (on & ~data) | unknown
        s1 = (on & data) | unknown
        off = full & ~unknown & ~on
        result = output.disable_result
        if result in ("WEAK0", "PULL0"):
            found = PinDrive(s0 & full, s1 & full, r0=off)
        elif result in ("WEAK1", "PULL1"):
            found = PinDrive(s0 & full, s1 & full, r1=off)
        elif result == "KEEPER":
            found = PinDrive(s0 & full, s1 & full, keep=off)
        else:
            found = PinDrive(s0 & full, s1 & full)
        self._drives[output.pin] = found
        return found

    def enabled(self, output: OutputPin) -> int:
        """States where the output drives (strongly, or X from an unknown update stage)."""
        drive = self.drive_of(output)
        return drive.s0 | drive.s1

    # ---- receiving cells ------------------------------------------------------------------
    def cells_of(self, pin: PinRef) -> tuple[CellObservation, ...]:
        """The pin's boundary cells that some capture compares while they capture the pin."""
        idx = self.pins.index.get(pin.ref)
        if idx is None:
            return ()
        out = []
        for cell in self.pins.tables[idx].observers.get(pin.port, ()):
            found = self.cell(idx, cell, pin)
            if found is not None:
                out.append(found)
        return tuple(out)

    def cell(self, idx: int, cell: BoundaryCell, pin: PinRef) -> CellObservation | None:
        key = (idx, cell.number)
        if key in self._cells:
            return self._cells[key]
        device = self.states.devices[idx]
        length = device.length
        compared = column(device.compare_rows, length, cell.number)
        found = None
        if compared:
            pin_states = self.pin_states(idx, cell, pin)
            compared &= pin_states
            if compared:
                values, known = self._observed[idx]
                found = CellObservation(
                    idx, cell.number, pin, compared,
                    column(device.expected_rows, length, cell.number) & compared,
                    column(values, length, cell.number) & compared,
                    column(known, length, cell.number) & compared)
        self._cells[key] = found
        return found

    def pin_states(self, idx: int, cell: BoundaryCell, pin: PinRef) -> int:
        """States whose capture loads the pin into this cell (CELL_INFO per capture class)."""
        device = self.states.devices[idx]
        info = self.pins.tables[idx].info(cell)
        own = self.pins.outputs.get(pin)
        driving = self.enabled(own) if own is not None and own.device == idx else 0
        out = 0
        for cls, states in device.classes.items():
            if not states:
                continue
            released = _captures_pin(info, cell.function, cls, False)
            on = _captures_pin(info, cell.function, cls, True) if cell.function in DRIVER_FUNCTIONS \
                else released
            out |= states & (((driving if on else 0) | (~driving & self.full if released else 0)))
        return out & self.full

    def boundary_cell_is_pin_reader(self, device: str, number: int, state_mask: int) -> bool:
        """Whether a failing boundary bit is a pin capture (else the chain or a latch is wrong)."""
        idx = self.pins.index.get(device)
        if idx is None:
            return False
        for cell in self.pins.tables[idx].device.cells:
            if cell.number == number and cell.port is not None:
                pin = PinRef(device, cell.port)
                if pin in self.board.net_of_pin:
                    observed = self.cell(idx, cell, pin)
                    if observed is not None and observed.compared & state_mask:
                        return True
        return False


@lru_cache(maxsize=4096)
def _captures_pin(info: CellInfo | None, function: str, cls: str, driving: bool) -> bool:
    return resolve_capture(info, function, cls, driving) == PIN

"""One scan device as the replay models it: instruction register, data registers, their stages.

Every register stage is a pair of bitarrays, values and "known" flags, indexed by register
bit (bit 0 nearest TDO). What the model knows by itself (IEEE Std 1149.1-2001; clause numbers
from memory):
- Capture-IR loads INSTRUCTION_CAPTURE, X bits unknown (clause 7.1; its two least
  significant bits are 01);
- Test-Logic-Reset puts IDCODE in force when the device has an identification register,
  otherwise BYPASS (clauses 7.2 and 8.13);
- BYPASS captures 0 (clause 10.1);
- the identification register captures the IDCODE pattern under IDCODE, X bits unknown
  (clause 12.1); under any other instruction (USERCODE, ...) its capture is not known here;
- boundary and user registers capture pin or core values this model does not have: unknown;
- an opcode no instruction decodes to selects BYPASS (clause 8.1).
Registers with an update stage (the boundary register and user registers) copy the shift
stage into it at Update-DR; BYPASS and the identification register have none.
"""

from __future__ import annotations

from dataclasses import dataclass

from bitarray import bitarray
from bitarray.util import zeros

from ..backend.records import DeviceMap

__all__ = ["Stage", "ReplayDevice", "NO_UPDATE_STAGE"]

NO_UPDATE_STAGE = frozenset({"BYPASS", "DEVICE_ID"})


@dataclass(slots=True)
class Stage:
    """A register stage: bit values and which of them the model knows."""

    values: bitarray
    known: bitarray

    @staticmethod
    def unknown(length: int) -> "Stage":
        return Stage(zeros(length), zeros(length))

    @staticmethod
    def from_pattern(pattern: str) -> "Stage":
        """A stage from a BSDL-order pattern (leftmost = highest bit), X bits unknown."""
        lowest_first = pattern[::-1]
        values = bitarray(lowest_first.replace("X", "0"))
        known = bitarray(lowest_first.replace("0", "1").replace("X", "0"))
        return Stage(values, known)

    def copy(self) -> "Stage":
        return Stage(self.values.copy(), self.known.copy())


def _decode_table(device: DeviceMap) -> list[tuple[str, int, int]]:
    """(instruction, care mask, value) per opcode, register bit i = integer bit i."""
    table = []
    for name, opcodes in device.opcodes.items():
        for opcode in opcodes:
            care = int(opcode.replace("0", "1").replace("X", "0"), 2) if opcode else 0
            value = int(opcode.replace("X", "0"), 2) if opcode else 0
            table.append((name, care, value))
    return table


class ReplayDevice:
    """The registers of one chain device, driven by the replay's TAP events."""

    def __init__(self, device: DeviceMap) -> None:
        self.map = device
        self.ref = device.ref
        self.instruction: str | None = None  # None while not known
        self.opcode: str | None = None  # the IR update stage as a BSDL-order string
        self.selected: str | None = None  # the data register the instruction selects
        self.ir_shift = Stage.unknown(device.ir_length)
        self.dr_shift: Stage | None = None
        self.update: dict[str, Stage] = {}
        self._decode = _decode_table(device)
        self._ir_capture = Stage.from_pattern(device.ir_capture)
        self._idcode = Stage.from_pattern(device.idcode) if device.idcode else None

    def register_length(self, register: str) -> int | None:
        if register == "BOUNDARY":
            return self.map.boundary_length
        if register in self.map.registers:
            return self.map.registers[register]
        return {"BYPASS": 1, "DEVICE_ID": 32}.get(register)

    def test_logic_reset(self) -> None:
        """Test-Logic-Reset: IDCODE (or BYPASS) in force; update stages no longer known."""
        name = "IDCODE" if self._idcode is not None else "BYPASS"
        self.instruction = name
        codes = self.map.opcodes.get(name, ())
        self.opcode = codes[0] if codes else None
        self.selected = self.map.selects.get(name, "DEVICE_ID" if name == "IDCODE" else "BYPASS")
        self.update = {register: Stage.unknown(len(stage.values))
                       for register, stage in self.update.items()}

    def capture_ir(self) -> None:
        self.ir_shift = self._ir_capture.copy()

    def update_ir(self) -> None:
        """Decode the shifted opcode; unknown bits leave the instruction unknown."""
        stage = self.ir_shift
        self.opcode = "".join("X" if not known else str(value)
                              for value, known in zip(reversed(stage.values), reversed(stage.known)))
        if not stage.known.all():
            self.instruction, self.selected = None, None
            return
        code = int(self.opcode, 2) if self.opcode else 0
        for name, care, value in self._decode:
            if code & care == value:
                self.instruction = name
                self.selected = self.map.selects.get(name)
                return
        self.instruction, self.selected = None, "BYPASS"

    def capture_dr(self) -> int | None:
        """Load the selected register's capture; returns its length (None if not known)."""
        register = self.selected
        length = self.register_length(register) if register is not None else None
        if register is None or length is None:
            self.dr_shift = None
            return None
        if register == "BYPASS":
            self.dr_shift = Stage(zeros(length), ~zeros(length))
        elif register == "DEVICE_ID" and self.instruction == "IDCODE" and self._idcode is not None:
            self.dr_shift = self._idcode.copy()
        else:
            self.dr_shift = Stage.unknown(length)
        return length

    def update_dr(self) -> None:
        if self.selected is None or self.selected in NO_UPDATE_STAGE or self.dr_shift is None:
            return
        self.update[self.selected] = self.dr_shift.copy()

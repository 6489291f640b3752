"""Synthetic scan devices and boards for tests, built directly as model objects (no BSDL text).

    dev = make_device("ALPHA", 3, cells=[
        (0, "BC_1", "Y", "OUTPUT3", "X", 1, 0, "Z"),   # BSDL order: num, cell, port, function, safe,
        (1, "BC_1", "*", "CONTROL", "0"),             #   [control cell, disable value, result]
        (2, "BC_4", "A", "INPUT", "X"),
    ], idcode="0001" + "0" * 27 + "1")
    board = make_board([("U1", dev), ("U2", other)], {"NET0": ["U1.Y", "U2.A"]})

IR builders make programs the way the front end lowers them (`make_step`, `make_program` ...).

Opcodes are numbered in a fixed order unless given: EXTEST 0, SAMPLE 1, then PRELOAD, IDCODE,
USERCODE, CLAMP, HIGHZ and user-register instructions in the order asked for; BYPASS is all
ones (IEEE 1149.1: the all-ones opcode is BYPASS, EXTEST all zeros in the 1990 edition).
"""

from __future__ import annotations

from typing import Iterable, Mapping, Sequence, Union

from scanloom.ir import Drive, Expect, Program, RegisterRead, RegisterWrite, Step, Test, TestItem, Wait
from scanloom.models.board import Board, ChainDevice, Net, Part, PinRef
from scanloom.models.cells import STANDARD_CELLS
from scanloom.models.device import BoundaryCell, CellInfo, DeviceModel, Port, TapPins

__all__ = [
    "CellSpec",
    "cell",
    "make_device",
    "make_io_device",
    "make_board",
    "idcode_for",
    "ir_capture_for",
    "modes_for",
    "drive",
    "expect",
    "make_step",
    "make_wait",
    "make_test",
    "make_program",
]

# (number, cell_type, port or "*", function, safe[, control cell, disable value, disable result])
CellSpec = Union[BoundaryCell, tuple]

_DIRECTION = {"INPUT": "IN", "CLOCK": "IN", "OBSERVE_ONLY": "IN", "OUTPUT2": "OUT",
              "OUTPUT3": "OUT", "BIDIR": "INOUT"}


def cell(number: int, cell_type: str, port: str | None, function: str, safe: str = "X",
         control: int | None = None, disable: int | None = None,
         result: str | None = None) -> BoundaryCell:
    """One BOUNDARY_REGISTER entry, fields in BSDL order; port "*" or None for an internal cell."""
    if result is None and control is not None:
        result = "Z"
    return BoundaryCell(
        number=number, cell_type=cell_type.upper(), port=None if port in (None, "*") else port,
        function=function.upper(), safe=safe.upper(), control_cell=control,
        disable_value=disable, disable_result=result)


def _as_cell(spec: CellSpec) -> BoundaryCell:
    if isinstance(spec, BoundaryCell):
        return spec
    return cell(*spec)


def idcode_for(part: int, maker: int = 0x2A, version: int = 1) -> str:
    """A 32-bit IDCODE string (BSDL order): version, part number, maker code, then bit 0 = 1.

    IEEE 1149.1 (device identification register, from memory clause 12.1.1): bits 31..28
    version, 27..12 part number, 11..1 manufacturer identity, bit 0 fixed at 1.
    """
    return f"{version:04b}{part:016b}{maker:011b}1"


def ir_capture_for(ir_length: int) -> str:
    """The usual INSTRUCTION_CAPTURE: X above the two fixed low bits "01" (IEEE 1149.1 Capture-IR)."""
    return "X" * (ir_length - 2) + "01"


def _ports(cells: Sequence[BoundaryCell], extra: Mapping[str, str]) -> dict[str, Port]:
    bits_of: dict[str, list[str]] = {}
    direction_of: dict[str, str] = {}
    for entry in cells:
        if entry.port is None:
            continue
        name = entry.port.split("(", 1)[0]
        bits = bits_of.setdefault(name, [])
        if entry.port not in bits:
            bits.append(entry.port)
        wanted = _DIRECTION.get(entry.function, "IN")
        have = direction_of.get(name)
        if have is None:
            direction_of[name] = wanted
        elif have != wanted:
            direction_of[name] = "INOUT"
    ports = {name: Port(name, direction_of[name], tuple(bits)) for name, bits in bits_of.items()}
    for name, direction in extra.items():
        ports.setdefault(name, Port(name, direction, (name,)))
    return ports


def make_device(
    name: str,
    ir_length: int,
    cells: Iterable[CellSpec] = (),
    *,
    idcode: str | None = None,
    usercode: str | None = None,
    preload: bool = False,
    clamp: bool = False,
    highz: bool = False,
    user_registers: Mapping[str, int] | None = None,
    instructions: Mapping[str, str | Sequence[str]] | None = None,
    extra_instructions: Mapping[str, str | Sequence[str]] | None = None,
    selects: Mapping[str, str] | None = None,
    ir_capture: str | None = None,
    private: Sequence[str] = (),
    standard: str = "STD_1149_1_2001",
    cell_info: Mapping[str, CellInfo] | None = None,
    boundary_length: int | None = None,
    trst: bool = False,
) -> DeviceModel:
    """A DeviceModel as the BSDL reader would build it.

    `preload` adds a separate PRELOAD (the 2001 split); without it SAMPLE is the combined
    1990-style SAMPLE/PRELOAD. `user_registers` maps a register to its length; each gets an
    instruction of the same name selecting it. `instructions` replaces the numbered default
    set entirely; `extra_instructions` adds to it; `selects` overrides register selection.
    """
    entries = tuple(sorted((_as_cell(spec) for spec in cells), key=lambda c: c.number))
    user_registers = dict(user_registers or {})
    if instructions is None:
        names = ["EXTEST", "SAMPLE"]
        if preload:
            names.append("PRELOAD")
        if idcode is not None:
            names.append("IDCODE")
        if usercode is not None:
            names.append("USERCODE")
        if clamp:
            names.append("CLAMP")
        if highz:
            names.append("HIGHZ")
        names.extend(user_registers)
        if len(names) >= 2 ** ir_length:
            raise ValueError(f"{len(names)} instructions and BYPASS do not fit {ir_length} bits")
        opcodes: dict[str, tuple[str, ...]] = {
            instr: (format(code, f"0{ir_length}b"),) for code, instr in enumerate(names)}
        opcodes["BYPASS"] = ("1" * ir_length,)
    else:
        opcodes = {}
        for instr, codes in instructions.items():
            opcodes[instr.upper()] = (codes,) if isinstance(codes, str) else tuple(codes)
    for instr, codes in (extra_instructions or {}).items():
        opcodes[instr.upper()] = (codes,) if isinstance(codes, str) else tuple(codes)
    length = boundary_length
    if length is None:
        length = (max(c.number for c in entries) + 1) if entries else 0
    registers: dict[str, int] = {"BYPASS": 1, "BOUNDARY": length}
    if idcode is not None or usercode is not None:
        registers["DEVICE_ID"] = 32
    registers.update(user_registers)
    standard_selects = {"BYPASS": "BYPASS", "EXTEST": "BOUNDARY", "SAMPLE": "BOUNDARY",
                        "PRELOAD": "BOUNDARY", "INTEST": "BOUNDARY", "IDCODE": "DEVICE_ID",
                        "USERCODE": "DEVICE_ID", "CLAMP": "BYPASS", "HIGHZ": "BYPASS"}
    selected = {instr: standard_selects.get(instr, "BYPASS") for instr in opcodes}
    for register in user_registers:
        if register in opcodes:
            selected[register] = register
    selected.update({k.upper(): v for k, v in (selects or {}).items()})
    infos: dict[str, CellInfo] = {}
    for entry in entries:
        if cell_info and entry.cell_type in cell_info:
            infos[entry.cell_type] = cell_info[entry.cell_type]
        elif entry.cell_type in STANDARD_CELLS:
            infos[entry.cell_type] = STANDARD_CELLS[entry.cell_type]
        else:
            infos[entry.cell_type] = CellInfo(entry.cell_type, (), known=False)
    tap_ports = {"TDI": "IN", "TDO": "OUT", "TMS": "IN", "TCK": "IN"}
    if trst:
        tap_ports["TRST"] = "IN"
    return DeviceModel(
        entity=name,
        path=f"{name.lower()}.bsd",
        standard=standard,
        ports=_ports(entries, tap_ports),
        pin_maps={},
        pin_map_name=None,
        tap=TapPins("TDI", "TDO", "TMS", "TCK", "TRST" if trst else None),
        ir_length=ir_length,
        ir_capture=ir_capture if ir_capture is not None else ir_capture_for(ir_length),
        instructions=opcodes,
        private=tuple(private),
        registers=registers,
        selects=selected,
        idcode=idcode,
        usercode=usercode,
        boundary_length=length,
        cells=entries,
        cell_info=infos,
    )


def make_io_device(name: str, ir_length: int, pins: int, *, cell_type: str = "BC_7",
                   safe: str = "X", **options: object) -> DeviceModel:
    """A device of `pins` bidirectional pins IO(i), each a data cell 2i with its own control 2i+1.

    Control cells disable at 0 (result Z); data cells use `cell_type` (BC_7 reads its pin back
    even while driving). Further keyword options go to make_device.
    """
    specs: list[CellSpec] = []
    for i in range(pins):
        specs.append((2 * i, cell_type, f"IO({i})", "BIDIR", safe, 2 * i + 1, 0, "Z"))
        specs.append((2 * i + 1, "BC_1", "*", "CONTROL", "0"))
    return make_device(name, ir_length, specs, **options)  # type: ignore[arg-type]


def make_board(
    devices: Sequence[tuple[str, DeviceModel]] | Mapping[str, DeviceModel],
    nets: Mapping[str, Sequence[str]] | None = None,
    *,
    name: str = "synthetic board",
    trst: bool = False,
    technology: str = "cmos",
    parts: Mapping[str, Sequence[str]] | None = None,
    pulls: Mapping[str, str] | None = None,
    hold: Mapping[str, str] | None = None,
    never_drive: Sequence[str] = (),
) -> Board:
    """A Board with `devices` as the chain in TDI -> TDO order and nets of "REF.PORT" pins.

    `parts` maps a part without boundary scan to its pin names (no logic).
    """
    pairs = list(devices.items()) if isinstance(devices, Mapping) else list(devices)
    chain = tuple(ChainDevice(ref=ref, position=position, bsdl_path=device.path, device=device)
                  for position, (ref, device) in enumerate(pairs))
    net_objects = {net: Net(net, tuple(PinRef.parse(pin) for pin in pins))
                   for net, pins in (nets or {}).items()}
    part_objects = {ref: Part(ref, tuple(pins)) for ref, pins in (parts or {}).items()}
    return Board(
        name=name,
        path=f"/synthetic/{name.replace(' ', '_')}.yaml",
        technology=technology,
        trst=trst,
        chain=chain,
        parts=part_objects,
        nets=net_objects,
        pulls=dict(pulls or {}),
        hold=dict(hold or {}),
        never_drive=tuple(never_drive),
    )


# ---------------------------------------------------------------------------------- IR builders
def modes_for(board: Board, modes: Mapping[str, str] | None = None,
              default: str = "BYPASS") -> tuple[tuple[str, str], ...]:
    """Step/Wait modes for every chain device in chain order; unnamed devices get `default`."""
    modes = dict(modes or {})
    return tuple((entry.ref, modes.get(entry.ref, default)) for entry in board.chain)


def drive(target: str, value: str, driver: str | None = None) -> Drive:
    """A drive on a net, or on a pin when `target` is REF.PORT (then the pin is the driver)."""
    is_pin = "." in target
    return Drive(target, is_pin, value, driver if driver is not None else (target if is_pin else None))


def expect(target: str, value: str) -> Expect:
    """An expectation on a net, or on a pin when `target` is REF.PORT."""
    return Expect(target, "." in target, value)


def make_step(name: str, modes: tuple[tuple[str, str], ...], drives: Iterable[Drive] = (),
              expects: Iterable[Expect] = (), *, writes: Iterable[RegisterWrite] = (),
              reads: Iterable[RegisterRead] = (), wait_clocks: int = 0) -> Step:
    """A Step with its drives sorted by target, as the front end delivers them."""
    return Step(name, modes, tuple(sorted(drives, key=lambda d: d.target)), tuple(expects),
                tuple(writes), tuple(reads), wait_clocks)


def make_wait(clocks: int, modes: tuple[tuple[str, str], ...]) -> Wait:
    return Wait(clocks, modes)


def make_test(name: str, items: Iterable[TestItem], title: str = "") -> Test:
    return Test(name, title or name, tuple(items))


def make_program(tests: Iterable[Test], *, end_state: str = "TEST_LOGIC_RESET",
                 default_instruction: str = "BYPASS", tck_hz: float | None = None,
                 source: str = "synthetic.loom", board_path: str = "/synthetic/board.yaml") -> Program:
    return Program(source, board_path, tck_hz, default_instruction, tuple(tests), end_state)

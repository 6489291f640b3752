"""The demo board (examples/irrigation): it loads through the real reader and loader, every
device obeys the standard's rules, and every feature the later stages rely on is present.

Clause numbers are those of IEEE Std 1149.1-2001 and its Annex B (BSDL), recalled from memory
and marked so; device-level facts the test states are those the BSDL files declare.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from itertools import product
from pathlib import Path

import pytest

from scanloom.diagnostics import Diagnostics
from scanloom.models.board import Board, PinRef
from scanloom.models.board_loader import load_board
from scanloom.models.connectivity import NetRoles, net_roles
from scanloom.models.device import DeviceModel

DEMO = Path(__file__).resolve().parents[1] / "examples" / "irrigation" / "irrigation.yaml"
REFS = ("U1", "U2", "U3", "U4")


@pytest.fixture(scope="module")
def loaded() -> tuple[Board, Diagnostics]:
    diagnostics = Diagnostics()
    return load_board(DEMO, diagnostics), diagnostics


@pytest.fixture(scope="module")
def board(loaded: tuple[Board, Diagnostics]) -> Board:
    return loaded[0]


@pytest.fixture(scope="module")
def roles(board: Board) -> dict[str, NetRoles]:
    return net_roles(board)


def device(board: Board, ref: str) -> DeviceModel:
    return board.devices[ref].device


# -- the board as a whole -------------------------------------------------------------------

def test_loads_without_errors_or_warnings(loaded: tuple[Board, Diagnostics]) -> None:
    _, diagnostics = loaded
    assert not diagnostics.errors, diagnostics.render()
    assert not diagnostics.warnings, diagnostics.render()


def test_chain_order_tdi_to_tdo(board: Board) -> None:
    assert board.name == "RC-4 greenhouse irrigation controller"
    assert [entry.ref for entry in board.chain] == list(REFS)
    assert [entry.position for entry in board.chain] == [0, 1, 2, 3]
    assert [entry.device.entity for entry in board.chain] == [
        "RC4_CTRL", "RC4_VALVEDRV", "RC4_SENSE", "RC4_LINK"]
    assert not board.trst


def test_technologies(board: Board) -> None:
    assert board.technology == "cmos"
    assert board.technology_of("U2") == "ttl"  # the valve driver has bipolar inputs
    assert [board.technology_of(ref) for ref in ("U1", "U3", "U4", "U10")] == ["cmos"] * 4


def test_at_least_forty_nets_and_no_tap_nets(board: Board) -> None:
    assert len(board.nets) >= 40
    assert not any(net.tap for net in board.nets.values())  # the chain is implied


# -- the standard's rules, for every device ------------------------------------------------

@pytest.mark.parametrize("ref", REFS)
def test_instruction_register_rules(board: Board, ref: str) -> None:
    dev = device(board, ref)
    # IEEE 1149.1-2001 7.1.1: at least two stages; the two least significant capture 01
    # (from memory). BSDL order puts the least significant bit rightmost.
    assert dev.ir_length >= 2
    assert len(dev.ir_capture) == dev.ir_length
    assert dev.ir_capture.endswith("01")
    # Annex B, INSTRUCTION_OPCODE: every opcode is INSTRUCTION_LENGTH bits (from memory).
    codes = [code for opcodes in dev.instructions.values() for code in opcodes]
    assert all(len(code) == dev.ir_length and set(code) <= set("01X") for code in codes)
    assert len(codes) == len(set(codes)), "one opcode decodes to two instructions"
    # 8.4.1: the all-ones opcode is BYPASS; 8.1.1: BYPASS, SAMPLE and EXTEST are mandatory
    # (from memory).
    assert "1" * dev.ir_length in dev.instructions["BYPASS"]
    assert {"BYPASS", "SAMPLE", "EXTEST"} <= set(dev.instructions)


@pytest.mark.parametrize("ref", REFS)
def test_register_lengths(board: Board, ref: str) -> None:
    dev = device(board, ref)
    # 10.1.1: the bypass register is a single stage; 12.1.1: the device identification
    # register is 32 bits (from memory).
    assert dev.registers["BYPASS"] == 1
    assert dev.registers["BOUNDARY"] == dev.boundary_length == len({c.number for c in dev.cells})
    if dev.idcode is not None:
        assert dev.registers["DEVICE_ID"] == 32
    for name in dev.public_instructions:
        assert dev.selects[name] in dev.registers


@pytest.mark.parametrize("ref", ("U1", "U3", "U4"))
def test_idcode_rules(board: Board, ref: str) -> None:
    idcode = device(board, ref).idcode
    assert idcode is not None and len(idcode) == 32
    # 12.1.1: bit 0 (rightmost in BSDL order) is 1; the manufacturer field, bits 11..1, never
    # holds 0000 1111111, so an all-ones chain cannot pass for a device (from memory).
    assert idcode[-1] == "1"
    manufacturer = idcode[20:31]
    assert set(manufacturer) <= set("01") and manufacturer != "00001111111"


@pytest.mark.parametrize("ref", REFS)
def test_boundary_register_is_complete_and_consistent(board: Board, ref: str) -> None:
    dev = device(board, ref)
    # Annex B, BOUNDARY_REGISTER: numbers 0 .. BOUNDARY_LENGTH-1 without gaps (from memory);
    # none of the demo devices merges cells, so each number has exactly one entry.
    assert [cell.number for cell in dev.cells] == list(range(dev.boundary_length))
    bits = {bit: port.direction for port in dev.ports.values() for bit in port.bits}
    for cell in dev.cells:
        if cell.port is None:
            assert cell.function in ("CONTROL", "CONTROLR", "INTERNAL")
            continue
        assert cell.port in bits and bits[cell.port] != "LINKAGE"
        if cell.function in ("OUTPUT3", "BIDIR"):
            # Annex B: a three-state or bidirectional cell names its control cell, the value
            # that disables it and the result (from memory).
            control = dev.cell(cell.control_cell)
            assert control.function == "CONTROL"
            assert cell.disable_value in (0, 1) and cell.disable_result is not None
            # Common practice: a control cell's safe value is the one that turns its drivers off.
            assert control.safe == str(cell.disable_value)


@pytest.mark.parametrize("ref", REFS)
def test_pin_map_covers_every_port_once(board: Board, ref: str) -> None:
    dev = device(board, ref)
    assert dev.pin_map_name in dev.pin_maps
    for name, pin_map in dev.pin_maps.items():
        assert set(pin_map) == set(dev.port_bits()), name
        pins = [pin for bit_pins in pin_map.values() for pin in bit_pins]
        assert len(pins) == len(set(pins)), f"{name}: a package pin is used twice"


# -- what each device must bring -------------------------------------------------------------

def test_u1_controller(board: Board) -> None:
    dev = device(board, "U1")
    assert dev.standard == "STD_1149_1_2001"
    # 1149.1-2001 clause 8 splits SAMPLE/PRELOAD into two instructions (from memory).
    assert {"SAMPLE", "PRELOAD"} <= set(dev.instructions)
    assert set(dev.instructions["SAMPLE"]).isdisjoint(dev.instructions["PRELOAD"])
    assert dev.idcode is not None and dev.usercode is not None
    assert dev.selects["IDCODE"] == dev.selects["USERCODE"] == "DEVICE_ID"
    # Clause 8, HIGHZ and CLAMP: both select the bypass register (from memory).
    assert dev.selects["HIGHZ"] == dev.selects["CLAMP"] == "BYPASS"
    assert dev.boundary_length > 200
    assert "USERCFG" in dev.public_instructions
    assert dev.selects["USERCFG"] == "CFGREG" and dev.registers["CFGREG"] == 8
    assert dev.selects["RUNBIST"] == "BISTSIG" and dev.registers["BISTSIG"] == 16
    assert dev.executions["RUNBIST"].clocks == 20000
    assert dev.tap.max_tck_hz == pytest.approx(25e6)
    # The data bus: BC_7 bidirectional cells on D(0..7), one shared enable cell.
    bus = [cell for cell in dev.cells if cell.cell_type == "BC_7"]
    assert [cell.port for cell in bus] == [f"D({i})" for i in range(8)]
    assert {cell.function for cell in bus} == {"BIDIR"}
    assert len({cell.control_cell for cell in bus}) == 1
    # Two packages: the ball grid (selected) and the quad flat pack.
    assert dev.pin_map_name == "BGA100" and set(dev.pin_maps) == {"BGA100", "LQFP100"}
    balls = [pin for pins in dev.pin_maps["BGA100"].values() for pin in pins]
    assert len(balls) == 100 and all(re.fullmatch(r"[A-HJK](10|[1-9])", pin) for pin in balls)
    assert dev.pins_of("TDI") == ("A1",) and dev.pins_of("D(7)") == ("F3",)


def test_u2_valve_driver_1990_style(board: Board) -> None:
    dev = device(board, "U2")
    assert dev.standard == "STD_1149_1_1990"
    # 1149.1-1990: SAMPLE is the combined sample/preload instruction; no PRELOAD.
    assert "PRELOAD" not in dev.instructions
    assert dev.idcode is None and "IDCODE" not in dev.instructions
    assert {cell.cell_type for cell in dev.cells} == {"BC_1"}
    # Eight outputs share one group enable, which controls nothing else.
    outputs = [cell for cell in dev.cells if cell.function == "OUTPUT3" and cell.port.startswith("VOUT")]
    assert sorted(cell.port for cell in outputs) == [f"VOUT({i})" for i in range(8)]
    enables = {cell.control_cell for cell in outputs}
    assert len(enables) == 1, f"the outputs use enable cells {sorted(enables)}"
    (group_enable,) = enables
    controlled = [cell for cell in dev.cells if cell.control_cell == group_enable]
    assert controlled == outputs
    assert any(cell.function == "INPUT" for cell in dev.cells)
    pins = [pin for bit_pins in dev.pin_maps[dev.pin_map_name].values() for pin in bit_pins]
    assert sorted(pins, key=int) == [str(n) for n in range(1, 29)]


def test_u3_sensor_interface_1994_style(board: Board) -> None:
    dev = device(board, "U3")
    assert dev.standard == "STD_1149_1_1994"
    assert "PRELOAD" not in dev.instructions
    assert dev.idcode is not None and "X" in dev.idcode
    assert "X" in dev.ir_capture and dev.ir_capture == "0X01"
    assert dev.instructions["BYPASS"] == ("1111", "1110")
    assert set(dev.private) == {"TRIM_LOAD", "CAL_SCAN", "SCAN_CORE"}
    assert set(dev.private) <= set(dev.instructions)
    assert set(dev.private).isdisjoint(dev.public_instructions)
    input_types = {cell.cell_type for cell in dev.cells if cell.function == "INPUT"}
    assert {"BC_2", "BC_4"} <= input_types
    assert dev.cells_of("SCLK")[0].function == "CLOCK"


def test_u4_link_buffer_compliance_and_own_enables(board: Board) -> None:
    dev = device(board, "U4")
    assert dev.standard == "STD_1149_1_2001"
    assert dev.idcode is not None
    outputs = [cell for cell in dev.cells if cell.function == "OUTPUT3"]
    assert len(outputs) >= 8
    controls = [cell.control_cell for cell in outputs]
    assert len(controls) == len(set(controls)), "two outputs share an enable cell"
    assert any(cell.function == "INPUT" for cell in dev.cells)
    assert [(p.ports, p.patterns) for p in dev.compliance] == [(("TEST_EN",), ("1",))]
    # The compliance-enable input has no boundary cell, so only the board can hold it.
    assert dev.cells_of("TEST_EN") == ()
    assert board.pulls["TEST_EN"] == "up"
    assert PinRef("U4", "TEST_EN") in board.nets["TEST_EN"].pins


def test_instruction_styles_across_the_chain(board: Board) -> None:
    with_idcode = [ref for ref in REFS if device(board, ref).idcode is not None]
    assert with_idcode == ["U1", "U3", "U4"]
    # The slowest TAP sets the chain's clock: U2 at 10 MHz.
    assert min(device(board, ref).tap.max_tck_hz for ref in REFS) == pytest.approx(10e6)


# -- parts, logic and guards -----------------------------------------------------------------

def evaluate(expression: str, values: dict[str, int]) -> int:
    """A small reference evaluator of the board file's expression syntax, for this test only."""
    tokens = re.findall(r"[A-Za-z_][A-Za-z0-9_]*|[01&|^~()]", expression)
    assert "".join(tokens) == re.sub(r"\s+", "", expression), expression
    position = 0

    def peek() -> str | None:
        return tokens[position] if position < len(tokens) else None

    def take() -> str:
        nonlocal position
        position += 1
        return tokens[position - 1]

    def binary(operand: Callable[[], int], operator: str) -> Callable[[], int]:
        def parse() -> int:
            value = operand()
            while peek() == operator:
                take()
                right = operand()
                value = {"|": value | right, "^": value ^ right, "&": value & right}[operator]
            return value
        return parse

    def unary() -> int:
        token = take()
        if token == "~":
            return 1 - unary()
        if token == "(":
            value = parse_or()
            assert take() == ")"
            return value
        if token in ("0", "1"):
            return int(token)
        return values[token]

    parse_or = binary(binary(binary(unary, "&"), "^"), "|")
    result = parse_or()
    assert position == len(tokens), expression
    return result


def test_multiplexer_matches_its_truth_table(board: Board) -> None:
    mux = board.parts["U10"]
    assert set(mux.logic) == set(mux.enables) == {"Y0", "Y1", "Y2", "Y3"}
    # Common practice: a 2-to-1 multiplexer passes A while S is 0 and B while S is 1; its
    # three-state outputs are on while OE_N is 0.
    for bit in range(4):
        for a, b, s, oe_n in product((0, 1), repeat=4):
            values = {pin: 0 for pin in mux.pins} | {f"A{bit}": a, f"B{bit}": b, "S": s, "OE_N": oe_n}
            assert evaluate(mux.logic[f"Y{bit}"], values) == (b if s else a)
            assert evaluate(mux.enables[f"Y{bit}"], values) == 1 - oe_n


def test_parity_tree_matches_its_definition(board: Board) -> None:
    tree = board.parts["U11"]
    # Common practice: odd parity is 1 when an odd number of inputs are 1.
    for inputs in product((0, 1), repeat=4):
        values = dict(zip(("D0", "D1", "D2", "D3"), inputs))
        assert evaluate(tree.logic["ODD"], values) == sum(inputs) % 2


def test_cluster_sits_between_two_scan_devices(board: Board, roles: dict[str, NetRoles]) -> None:
    for ref in ("U10", "U11"):
        nets = {board.net_of_pin[PinRef(ref, pin)] for pin in board.parts[ref].pins}
        assert {roles[n].kind for n in nets} == {"cluster"}
        inputs = [pin for pin in board.parts[ref].pins if pin not in board.parts[ref].logic]
        outputs = list(board.parts[ref].logic)
        assert {d.ref for p in inputs for d in roles[board.net_of_pin[PinRef(ref, p)]].drivers} == {"U1"}
        assert {r.ref for p in outputs for r in roles[board.net_of_pin[PinRef(ref, p)]].receivers} == {"U3"}


def test_resistor_pack_passes_two_nets_through(board: Board, roles: dict[str, NetRoles]) -> None:
    pack = board.parts["RN1"]
    assert len(pack.series) == 2 and not pack.is_logic
    for a, b in pack.series:
        near, far = board.net_of_pin[PinRef("RN1", a)], board.net_of_pin[PinRef("RN1", b)]
        assert near != far
        # Through a series part the two nets are one node: U1 drives it, U3 receives it.
        assert roles[near].kind == roles[far].kind == "scan-to-scan"
        assert {p.ref for p in roles[near].drivers} == {"U1"}
        assert {p.ref for p in roles[far].receivers} == {"U3"}


def test_pulls_and_guards(board: Board, roles: dict[str, NetRoles]) -> None:
    assert board.pulls["FAULT_N"] == "up" and board.pulls["TEST_EN"] == "up"
    assert board.never_drive == ("PUMP_MAINS_EN",)
    assert roles["PUMP_MAINS_EN"].drivers == (PinRef("U1", "PD(0)"),)  # a guard with a driver
    assert board.pulls["PUMP_MAINS_EN"] == "down"
    assert board.hold == {"WDOG_DIS": "1"}
    assert roles["WDOG_DIS"].drivers == (PinRef("U1", "PD(1)"),)


# -- the kinds of net -----------------------------------------------------------------------

def test_every_kind_of_net_is_present(roles: dict[str, NetRoles]) -> None:
    kinds = {name: r.kind for name, r in roles.items()}
    assert {kinds[n] for n in ("VALVE_D0", "SPI_CS_N", "DATA0", "SENSE_RDY")} == {"scan-to-scan"}
    assert {kinds[n] for n in ("MUX_A0", "MUX_Y3", "PAR_ODD", "RESET_N")} == {"cluster"}
    assert {kinds[n] for n in ("VALVE_1", "STATUS_LAMP", "LINK_TX0")} == {"drive-only"}
    assert {kinds[n] for n in ("RAIN_N", "FLOW_PULSE", "LINK_RX1")} == {"observe-only"}
    assert {kinds[n] for n in ("SOIL_MOIST_A", "VALVE_24V", "TEST_EN")} == {"untestable"}


def test_scan_to_scan_nets_join_every_required_pair(roles: dict[str, NetRoles]) -> None:
    pairs = set()
    for r in roles.values():
        if r.kind == "scan-to-scan":
            refs = sorted({p.ref for p in r.drivers} | {p.ref for p in r.receivers})
            pairs.update((a, b) for i, a in enumerate(refs) for b in refs[i + 1:])
    assert {("U1", "U2"), ("U1", "U3"), ("U1", "U4"), ("U3", "U4")} <= pairs


def test_data_bus_has_two_scan_drivers(board: Board, roles: dict[str, NetRoles]) -> None:
    for bit in range(8):
        net = roles[f"DATA{bit}"]
        assert net.drivers == (PinRef("U1", f"D({bit})"), PinRef("U4", f"DQ({bit})"))
        cell = device(board, "U1").cells_of(f"D({bit})")[0]
        assert cell.cell_type == "BC_7" and cell.function == "BIDIR"

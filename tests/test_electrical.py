"""The board as electrical nodes: series joins, drivers with disable results, receivers, logic order."""

from __future__ import annotations

from pathlib import Path

import pytest

from chainfactory import make_board, make_device
from scanloom.diagnostics import Diagnostics, ScanloomError
from scanloom.models.board import Board, Part, PinRef
from scanloom.models.board_loader import load_board
from scanloom.sim.electrical import build_electrical, capture_cells

DEMO = Path(__file__).parents[1] / "examples" / "irrigation" / "irrigation.yaml"


@pytest.fixture(scope="module")
def demo():  # type: ignore[no-untyped-def]
    board = load_board(DEMO, Diagnostics())
    return build_electrical(board, Diagnostics())


def test_series_parts_join_nets_into_one_node(demo) -> None:  # type: ignore[no-untyped-def]
    # RN1 passes SPI_SCLK through pins 1-4 and SPI_MOSI through 2-3 (the board file).
    clock = demo.nodes[demo.node_of_net["SPI_SCLK"]]
    assert clock.nets == ("SPI_SCLK", "SPI_SCLK_T") and clock.label == "SPI_SCLK+SPI_SCLK_T"
    assert demo.node_of_net["SPI_SCLK_T"] == clock.index
    assert demo.node_of_net["SPI_MOSI"] != clock.index
    assert PinRef("U3", "SCLK") in clock.pins and PinRef("U1", "PC(0)") in clock.pins


def test_scan_drivers_carry_their_control_cell_and_disable_result(demo) -> None:  # type: ignore[no-untyped-def]
    bus = demo.drivers[PinRef("U1", "D(0)")]
    assert (bus.function, bus.control is not None, bus.disable_result) == ("BIDIR", True, "Z")
    device = demo.board.devices["U1"].device
    entry = device.cell(bus.cell)
    assert (entry.control_cell, entry.disable_value) == (bus.control, bus.disable_value)


def test_receivers_are_cells_that_capture_the_pin_with_their_technology(demo) -> None:  # type: ignore[no-untyped-def]
    # U2 is declared technology: ttl in the board file; the board default is cmos.
    assert demo.receivers[PinRef("U2", "VIN(0)")].technology == "ttl"
    assert demo.receivers[PinRef("U3", "MUXY(0)")].technology == "cmos"
    # A BC_7 bidirectional cell observes its own pin (IEEE 1149.1 BC_7 description: PO in EXTEST).
    assert [c.cell_type for c in demo.receivers[PinRef("U1", "D(0)")].cells] == ["BC_7"]
    # A pure output (U2's open-drain FAULT_N on a BC_1 OUTPUT3 cell) receives nothing.
    assert PinRef("U2", "FAULT_N") not in demo.receivers


def test_logic_outputs_are_ordered_and_their_inputs_are_receivers(demo) -> None:  # type: ignore[no-untyped-def]
    order = [(item.part, item.pin) for item in demo.logic]
    assert set(order) == {("U10", "Y0"), ("U10", "Y1"), ("U10", "Y2"), ("U10", "Y3"), ("U11", "ODD"),
                          ("U12", "RST_N")}
    assert demo.logic_receivers[PinRef("U10", "S")].technology == "cmos"
    assert PinRef("U12", "WDI") not in demo.logic_receivers  # the equation does not read WDI
    readers = demo.readers_of_pin[PinRef("U10", "S")]
    assert {demo.logic[i].pin for i in readers} == {"Y0", "Y1", "Y2", "Y3"}


def test_pulls_belong_to_the_node_of_their_net(demo) -> None:  # type: ignore[no-untyped-def]
    assert demo.nodes[demo.node_of_net["FAULT_N"]].pulls == ("up",)
    assert demo.nodes[demo.node_of_net["PUMP_MAINS_EN"]].pulls == ("down",)


def _chain_logic_board(parts: dict[str, Part], nets: dict[str, list[str]]) -> Board:
    device = make_device("LOOPER", 2, [(0, "BC_1", "Y", "OUTPUT2", "0"), (1, "BC_4", "A", "INPUT", "X")])
    board = make_board([("U1", device)], nets)
    return Board(board.name, board.path, board.technology, board.trst, board.chain, parts, board.nets,
                 board.pulls, board.hold, board.never_drive)


def test_a_chain_of_logic_is_evaluated_inputs_first() -> None:
    parts = {
        "U7": Part("U7", ("A", "Y"), logic={"Y": "~A"}),
        "U6": Part("U6", ("A", "Y"), logic={"Y": "A"}),
    }
    board = _chain_logic_board(parts, {"N1": ["U1.Y", "U6.A"], "N2": ["U6.Y", "U7.A"], "N3": ["U7.Y", "U1.A"]})
    electrical = build_electrical(board, Diagnostics())
    assert [item.part for item in electrical.logic] == ["U6", "U7"]  # U7 reads what U6 drives


def test_a_combinational_loop_is_an_error_naming_the_loop() -> None:
    parts = {
        "U5": Part("U5", ("A", "B", "Y"), logic={"Y": "A & B"}),
        "U6": Part("U6", ("A", "Y"), logic={"Y": "~A"}),
    }
    board = _chain_logic_board(parts, {"N1": ["U5.Y", "U6.A"], "N2": ["U6.Y", "U5.B"], "N3": ["U1.Y", "U5.A"]})
    with pytest.raises(ScanloomError) as caught:
        build_electrical(board, Diagnostics())
    (error,) = caught.value.diagnostics
    assert error.message == "combinational loop: U5.Y drives N1, read by U6.A; U6.Y drives N2, read by U5.B"


def test_an_output_read_by_its_own_equation_is_a_loop() -> None:
    parts = {"U5": Part("U5", ("A", "Y"), logic={"Y": "A ^ Y"})}
    board = _chain_logic_board(parts, {"N1": ["U5.Y", "U1.A"], "N2": ["U1.Y", "U5.A"]})
    with pytest.raises(ScanloomError) as caught:
        build_electrical(board, Diagnostics())
    assert caught.value.diagnostics[0].message == "combinational loop: U5.Y drives N1, read by U5.Y"


def test_pins_in_no_net_still_have_a_node() -> None:
    board = _chain_logic_board({}, {"N1": ["U1.Y"]})
    electrical = build_electrical(board, Diagnostics())
    lone = electrical.node_of(PinRef("U1", "A"))
    assert lone.nets == () and lone.name == "U1.A" and lone.pins == (PinRef("U1", "A"),)


def test_merged_cells_capture_as_their_input_side_entry() -> None:
    # A merged cell: one number, an input entry and an output entry (IEEE 1149.1 BSDL merged
    # cells); the pin is the input entry's parallel input.
    device = make_device("MERGED", 2, [(0, "BC_1", "P", "OUTPUT3", "0", 1, 0, "Z"), (0, "BC_1", "P", "INPUT", "X"),
                                       (1, "BC_1", "*", "CONTROL", "0")], boundary_length=2)
    (cell,) = capture_cells(device, "P")
    assert (cell.number, cell.function) == (0, "INPUT")


def _nodes_by_their_definition(electrical) -> list[tuple]:  # type: ignore[no-untyped-def]
    """Each net's node read back from the board: the pins of all its nets in board order, the
    pulls of those nets, TAP if any net carries a TAP signal (the module's documentation)."""
    board = electrical.board
    found = []
    for net in board.nets:
        node = electrical.nodes[electrical.node_of_net[net]]
        found.append((node.name, node.nets, node.pins, node.pulls, node.tap))
        assert node.name == node.nets[0] and net in node.nets
        assert node.pins == tuple(pin for name in node.nets for pin in board.nets[name].pins)
        assert node.pulls == tuple(board.pulls[name] for name in node.nets if name in board.pulls)
        assert node.tap is any(board.nets[name].tap for name in node.nets)
        assert all(electrical.node_of_pin[pin] == node.index for pin in node.pins)
    return found


@pytest.mark.parametrize("seed", range(8))
def test_nodes_drivers_and_receivers_are_their_definition(demo, seed: int) -> None:  # type: ignore[no-untyped-def]
    from random_boards import random_board

    for electrical in (demo, build_electrical(random_board(seed), Diagnostics())):
        _nodes_by_their_definition(electrical)
        for entry in electrical.board.chain:
            for port in entry.device.cells_by_port:
                pin = PinRef(entry.ref, port)
                outputs = [c for c in entry.device.cells_of(port) if c.function in ("OUTPUT2", "OUTPUT3", "BIDIR")]
                driver = electrical.drivers.get(pin)
                assert (driver is not None) == bool(outputs)
                if driver is not None:
                    first = outputs[0]
                    assert (driver.device, driver.cell, driver.function) == (entry.position, first.number,
                                                                            first.function)
                    assert driver.control == (first.control_cell if first.disable_value is not None else None)
                cells = capture_cells(entry.device, port)
                assert (pin in electrical.receivers) == bool(cells)
                if cells:
                    assert electrical.receivers[pin].cells == cells
                if driver is not None or cells:
                    assert electrical.node_of(pin).pins.count(pin) >= 1

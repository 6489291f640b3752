"""Fault specs as engineers write them, faults files, and the fault universe of a board."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from chainfactory import make_board, make_device
from scanloom.diagnostics import Diagnostics, ScanloomError
from scanloom.models.board import PinRef
from scanloom.models.board_loader import load_board
from scanloom.models.device import DeviceModel
from scanloom.sim.electrical import build_electrical
from scanloom.sim.fault_effects import fault_effect
from scanloom.sim.faults import (
    OPEN_NET, OPEN_PIN, SHORT, STUCK_AT, TAP_SHORT, adjacent_pin_pairs, fault_universe, parse_fault,
    parse_fault_specs, read_faults_file,
)

DEMO = Path(__file__).parents[1] / "examples" / "irrigation" / "irrigation.yaml"


@pytest.fixture(scope="module")
def demo():  # type: ignore[no-untyped-def]
    return build_electrical(load_board(DEMO, Diagnostics()), Diagnostics())


@pytest.mark.parametrize("text, kind, canonical", [
    ("open:U2.VIN(0)", OPEN_PIN, "open:U2.VIN(0)"),
    ("open:u2.vin(0)".replace("u2", "U2"), OPEN_PIN, "open:U2.VIN(0)"),  # BSDL ports are case-free
    ("open:VALVE_D0", OPEN_NET, "open:VALVE_D0"),
    ("open:U10.S", OPEN_PIN, "open:U10.S"),  # a pin of a part without boundary scan
    ("open:U2.TMS", OPEN_PIN, "open:U2.TMS"),  # a TAP pin
    ("short:VALVE_D0,VALVE_D1", SHORT, "short:VALVE_D0,VALVE_D1"),
    ("short:VALVE_D0,VALVE_D1:and", SHORT, "short:VALVE_D0,VALVE_D1"),  # wired-AND is the default
    ("short:VALVE_D0,VALVE_D1:or", SHORT, "short:VALVE_D0,VALVE_D1:or"),
    ("short:VALVE_D0,VALVE_D1:U1.PA(1)", SHORT, "short:VALVE_D0,VALVE_D1:U1.PA(1)"),
    ("short:VALVE_D0,U2.TDO", TAP_SHORT, "short:VALVE_D0,U2.TDO"),
    ("short:VALVE_D0,U1.TCK:or", TAP_SHORT, "short:VALVE_D0,U1.TCK:or"),
    ("stuck-at-0:VALVE_D0", STUCK_AT, "stuck-at-0:VALVE_D0"),
    ("  stuck-at-1: VALVE_D0 ", STUCK_AT, "stuck-at-1:VALVE_D0"),
])
def test_every_spec_form_of_the_issue_reads(demo, text: str, kind: str, canonical: str) -> None:  # type: ignore[no-untyped-def]
    (fault,) = parse_fault_specs([text.strip()], demo)
    assert (fault.kind, fault.spec) == (kind, canonical)


def test_fault_classes_and_tap_flags(demo) -> None:  # type: ignore[no-untyped-def]
    faults = parse_fault_specs(["open:U2.VIN(0)", "stuck-at-0:VALVE_D0", "short:VALVE_D0,VALVE_D1",
                                "short:VALVE_D0,U2.TDO", "open:U2.TMS"], demo)
    assert [f.fault_class for f in faults] == ["open", "stuck-at", "short", "tap", "tap"]
    assert faults[3].pin == PinRef("U2", "TDO") and faults[3].nets == ("VALVE_D0",)


@pytest.mark.parametrize("text, message, column, suggestion", [
    ("opn:VALVE_D0", r"unknown fault kind 'opn'", 1, "open"),
    ("open:VALVE_OE", r"'VALVE_OE' is neither a net nor a pin \(REF\.PORT\)", 6, "VALVE_OE_N"),
    ("open:U2.VIN(9)", r"U2 \(RC4_VALVEDRV\) has no port 'VIN\(9\)'", 9, None),
    ("open:J2.11", r"part 'J2' has no pin '11'", 9, "1"),
    ("stuck-at-1:VALVE_LEE", r"unknown net 'VALVE_LEE'", 12, "VALVE_LE"),
    ("short:VALVE_D0", r"a short names two nets, separated by a comma", 15, None),
    ("short:VALVE_D0,VALVE_D0", r"a short needs two different nets", 16, None),
    ("short:VALVE_D0,VALVE_D1:xor", r"unknown short mode 'xor'", 25, "or"),
    ("short:VALVE_D0,VALVE_D1:U2.VIN(0)", r"U2\.VIN\(0\) does not drive VALVE_D0 or VALVE_D1", 25, None),
    ("short:VALVE_D0,U2.VIN(1)", r"U2\.VIN\(1\) is not a TAP pin", 16, None),
    ("short:VALVE_D0,U2.TDO:U1.PA(0)", r"unknown short mode 'U1\.PA\(0\)'", 23, None),
    ("stuck-at-1:", r"'stuck-at-1:' needs a net", 12, None),
    ("VALVE_D0", r"'VALVE_D0' is not a fault spec", 1, None),
])
def test_bad_specs_are_errors_with_position_and_suggestions(demo, text: str, message: str, column: int,  # type: ignore[no-untyped-def]
                                                            suggestion: str | None) -> None:
    with pytest.raises(ScanloomError) as caught:
        parse_fault_specs([text], demo)
    (error,) = caught.value.diagnostics
    assert re.match(message, error.message), error.message
    assert (error.span.file, error.span.line, error.span.column) == ("--fault #1", 1, column)
    if suggestion is not None:
        assert suggestion in error.suggestions
    rendered = caught.value.render()
    assert text in rendered and "^" in rendered  # the spec is shown with a caret, no traceback


def test_an_open_needs_a_connected_pin() -> None:
    device = make_device("LONELY", 2, [(0, "BC_4", "A", "INPUT", "X"), (1, "BC_4", "B", "INPUT", "X")])
    electrical = build_electrical(make_board([("U1", device)], {"N": ["U1.A"]}), Diagnostics())
    diagnostics = Diagnostics()
    assert parse_fault("open:U1.B", electrical, diagnostics) is None
    assert diagnostics.errors[0].message == "U1.B is in no net; an open cuts a pin from its net"


def test_faults_file_with_comments_and_blank_lines(demo, tmp_path: Path) -> None:  # type: ignore[no-untyped-def]
    path = tmp_path / "bench.faults"
    path.write_text("# faults the repair bench saw on RC-4 boards\n\n"
                    "open:U2.VIN(0)        # a cracked joint\n"
                    "   short:VALVE_D0,VALVE_D1:or\n"
                    "stuck-at-0:VALVE_LE\n")
    faults = read_faults_file(path, demo)
    assert [f.spec for f in faults] == ["open:U2.VIN(0)", "short:VALVE_D0,VALVE_D1:or", "stuck-at-0:VALVE_LE"]


def test_faults_file_errors_name_line_and_column(demo, tmp_path: Path) -> None:  # type: ignore[no-untyped-def]
    path = tmp_path / "bad.faults"
    path.write_text("open:U2.VIN(0)\n  short:VALVE_D0,VALVE_DX  # typo\nstuck-at-2:VALVE_LE\n")
    with pytest.raises(ScanloomError) as caught:
        read_faults_file(path, demo)
    errors = caught.value.diagnostics
    assert [(e.span.line, e.span.column) for e in errors] == [(2, 18), (3, 1)]
    assert errors[0].message == "unknown net 'VALVE_DX'"
    assert all(name.startswith("VALVE_D") for name in errors[0].suggestions)
    assert errors[1].message == "unknown fault kind 'stuck-at-2'"


def test_an_empty_faults_file_is_refused(demo, tmp_path: Path) -> None:  # type: ignore[no-untyped-def]
    path = tmp_path / "empty.faults"
    path.write_text("# nothing yet\n")
    with pytest.raises(ScanloomError, match="names no fault"):
        read_faults_file(path, demo)


def _with_pin_map(device: DeviceModel, pins: dict[str, tuple[str, ...]]) -> DeviceModel:
    from dataclasses import replace

    return replace(device, pin_maps={"PKG": pins}, pin_map_name="PKG")


def test_leaded_packages_neighbour_consecutive_numbers() -> None:
    device = _with_pin_map(make_device("LEADED", 2, [(0, "BC_4", "A", "INPUT", "X")]),
                           {"A": ("1",), "B": ("2",), "C": ("4",), "D": ("5", "6")})
    assert adjacent_pin_pairs(device) == [("A", "B"), ("C", "D"), ("D", "D")]


def test_ball_grids_neighbour_rows_and_columns_not_diagonals() -> None:
    # JEDEC ball grids skip the row letters I, O, Q, S, X and Z (JEP95, from memory): rows H and
    # J are neighbours, B and H are not.
    device = _with_pin_map(make_device("GRID", 2, [(0, "BC_4", "A", "INPUT", "X")]),
                           {"P": ("A1",), "Q": ("A2",), "R": ("B1",), "S": ("B2",), "T": ("H1",), "U": ("J1",)})
    pairs = set(adjacent_pin_pairs(device))
    assert pairs == {("P", "Q"), ("P", "R"), ("Q", "S"), ("R", "S"), ("T", "U")}
    assert ("P", "S") not in pairs and ("R", "T") not in pairs


def test_demo_universe(demo) -> None:  # type: ignore[no-untyped-def]
    faults = fault_universe(demo)
    by_kind: dict[str, list[str]] = {}
    for fault in faults:
        by_kind.setdefault(fault.kind, []).append(fault.spec)
    board = demo.board
    receivers = [pin for net in board.nets.values() for pin in net.pins if demo.is_receiver(pin)]
    assert len(by_kind[OPEN_PIN]) == len(receivers)
    assert "open:U2.VIN(0)" in by_kind[OPEN_PIN] and "open:U10.S" in by_kind[OPEN_PIN]
    assert "open:U2.FAULT_N" not in by_kind[OPEN_PIN]  # an output only: not a receiver
    assert len(by_kind[STUCK_AT]) == 2 * len(board.nets)
    # U2's SO28 pin map: VIN(0) and VIN(1) are pins 2 and 3, OE_N (11) sits next to TDI (12).
    assert "short:VALVE_D0,VALVE_D1" in by_kind[SHORT]
    assert "short:VALVE_OE_N,U2.TDI" in by_kind[TAP_SHORT]
    # U1's BGA100: TDI is ball A1, PB(9) (MUX_OE_N) is B1 below it.
    assert "short:MUX_OE_N,U1.TDI" in by_kind[TAP_SHORT]
    # One fault per pair of nets, however many packages put them side by side.
    assert len(set(by_kind[SHORT])) == len(by_kind[SHORT])
    only = fault_universe(demo, ["opens"])
    assert {f.kind for f in only} == {OPEN_PIN}


def _universe_by_its_definition(electrical) -> list[tuple]:  # type: ignore[no-untyped-def]
    """The universe as the module's documentation states it, written out plainly: every
    receiver pin on a net open; every net stuck-at-0 and stuck-at-1; for every pair of
    adjacent package pins (chain order, then pin-map order) a wired-AND short between their
    two different nets (board order, once per pair, never two TAP nets), or a short of the
    one net onto the TAP signal of the other pin (once per net, device and signal)."""
    board = electrical.board
    faults = [(OPEN_PIN, f"open:{pin}", (net.name,), pin, None, net.tap) for net in board.nets.values()
              for pin in net.pins if pin in electrical.receivers or pin in electrical.logic_receivers]
    faults += [(STUCK_AT, f"stuck-at-{value}:{name}", (name,), None, value, net.tap)
               for name, net in board.nets.items() for value in "01"]
    position = list(board.nets).index
    seen: set = set()
    for entry in board.chain:
        tap = entry.device.tap
        signal_of = {}
        for signal in ("TRST", "TCK", "TMS", "TDO", "TDI"):  # the first in TDI..TRST order wins
            if getattr(tap, signal.lower()):
                signal_of[getattr(tap, signal.lower())] = signal
        for a, b in adjacent_pin_pairs(entry.device):
            pins = PinRef(entry.ref, a), PinRef(entry.ref, b)
            nets = [electrical.net_of_pin.get(pin) for pin in pins]
            if None not in nets:
                pair = tuple(sorted(nets, key=position))
                if nets[0] != nets[1] and pair not in seen and not all(board.nets[n].tap for n in pair):
                    seen.add(pair)
                    faults.append((SHORT, f"short:{pair[0]},{pair[1]}", pair, None, None,
                                   any(board.nets[n].tap for n in pair)))
                seen.add(pair)
                continue
            for net, pin in ((nets[0], pins[1]), (nets[1], pins[0])):
                signal = signal_of.get(pin.port)
                if net is not None and signal is not None and (net, entry.ref, signal) not in seen:
                    seen.add((net, entry.ref, signal))
                    faults.append((TAP_SHORT, f"short:{net},{entry.ref}.{signal}", (net,), pin, None, True))
    return faults


@pytest.mark.parametrize("seed", range(12))
def test_the_universe_is_its_definition(demo, seed: int) -> None:  # type: ignore[no-untyped-def]
    from random_boards import random_board

    for electrical in (demo, build_electrical(random_board(seed), Diagnostics())):
        made = [(f.kind, f.spec, f.nets, f.pin, f.value, f.tap) for f in fault_universe(electrical)]
        assert made == _universe_by_its_definition(electrical)
        assert all(f.mode == "and" and f.dominant is None for f in fault_universe(electrical))


def test_fault_effects_on_the_demo_board(demo) -> None:  # type: ignore[no-untyped-def]
    (cut,) = parse_fault_specs(["open:RN1.1"], demo)
    effect = fault_effect(demo, cut)
    # Cutting RN1 pin 1 separates SPI_SCLK from SPI_SCLK_T: the series join is gone.
    groups = {group.label: group for group in effect.groups}
    assert sorted(groups) == ["SPI_SCLK", "SPI_SCLK_T"]
    assert groups["SPI_SCLK"].pins == (PinRef("U1", "PC(0)"),)
    # The cut pin stays joined to RN1 pin 4 inside the part: it is on SPI_SCLK_T's side.
    assert PinRef("RN1", "1") in groups["SPI_SCLK_T"].pins
    (joined,) = parse_fault_specs(["short:SPI_SCLK,SPI_SCLK_T"], demo)
    assert fault_effect(demo, joined).note == ("SPI_SCLK and SPI_SCLK_T are already one node "
                                                "(joined through a series part)")
    (tap,) = parse_fault_specs(["short:VALVE_D0,U1.TMS"], demo)
    lines = fault_effect(demo, tap).tap.lines
    # TMS is bussed to every chain device when the board does not say otherwise.
    assert lines == (("TMS", 0), ("TMS", 1), ("TMS", 2), ("TMS", 3))
    (link,) = parse_fault_specs(["short:VALVE_D0,U2.TDO"], demo)
    assert fault_effect(demo, link).tap.lines == (("TDI", 2),)  # U2's TDO feeds U3's TDI

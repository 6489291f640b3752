"""Boundary images and captures, checked against the standard's boundary-register rules."""

from __future__ import annotations

import pytest
from bitarray import bitarray
from chainfactory import make_device
from hypothesis import given, settings
from hypothesis import strategies as st

from scanloom.backend.captures import CaptureResolver
from scanloom.backend.images import (
    BYPASS, CLAMP, DEVICE_ID, DRIVE, INTEST, OBSERVE, USER, ChainImages, build_image,
    device_tables, from_msb_string, mask_from_msb_string, mode_kind, preload_instruction,
    to_msb_string,
)
from scanloom.ir import Drive
from scanloom.models.cells import PIN, UNKNOWN, UPDATE

# Cells 0..6: two OUTPUT3 outputs sharing control 2; an OUTPUT2; an internal cell with safe 1;
# a merged input/output3 pair on cell 5 with its own control 6.
SHARED = make_device("SHARED", 3, cells=[
    (0, "BC_1", "Y(0)", "OUTPUT3", "X", 2, 0, "Z"),
    (1, "BC_1", "Y(1)", "OUTPUT3", "1", 2, 0, "Z"),
    (2, "BC_1", "*", "CONTROL", "1"),  # safe 1 (enabled!), but the image disables it
    (3, "BC_2", "K", "OUTPUT2", "1"),
    (4, "BC_1", "*", "INTERNAL", "1"),
    (5, "BC_1", "M", "INPUT", "X"),
    (5, "BC_1", "M", "OUTPUT3", "1", 6, 1, "Z"),
    (6, "BC_1", "*", "CONTROL", "X"),
    (7, "BC_4", "CLK", "CLOCK", "X"),
], clamp=True, highz=True, user_registers={"CFG": 5}, idcode="0001" + "0" * 27 + "1",
   extra_instructions={"INTEST": "110"})


def test_safe_image_takes_x_as_zero_and_merged_cell_from_its_output_role() -> None:
    # IEEE 1149.1-2001 Annex B (BSDL BOUNDARY_REGISTER, from memory): the safe field gives the
    # value to load for safety, X when any value will do; a merged cell is one physical cell
    # listed twice, and the output entry carries the value that matters for the pin.
    tables = device_tables("U1", SHARED)
    assert tables.safe.to01() == "01111100"  # cell 5 safe 1 from its OUTPUT3 entry
    # Every control cell at its disable value: cell 2 -> 0, cell 6 -> 1.
    assert tables.disabled.to01() == "01011110"


def test_merged_cell_order_does_not_matter() -> None:
    out_first = make_device("M1", 2, cells=[
        (0, "BC_1", "M", "OUTPUT3", "1", 1, 0, "Z"), (0, "BC_1", "M", "INPUT", "0"),
        (1, "BC_1", "*", "CONTROL", "0")])
    in_first = make_device("M2", 2, cells=[
        (0, "BC_1", "M", "INPUT", "0"), (0, "BC_1", "M", "OUTPUT3", "1", 1, 0, "Z"),
        (1, "BC_1", "*", "CONTROL", "0")])
    assert device_tables("A", out_first).safe == device_tables("B", in_first).safe == bitarray("10")


def test_drive_sets_output_and_enables_its_control() -> None:
    tables = device_tables("U1", SHARED)
    result = build_image(tables, DRIVE, [("Y(0)", "0")])
    # Y(0) = 0; shared control 2 enabled (NOT disable 0 = 1); so Y(1), on the same control,
    # drives its safe value 1 (common practice: a shared control cannot enable one output only).
    # K (OUTPUT2) safe 1; internal cell 4 safe 1; M output safe 1 but disabled by cell 6 = 1.
    assert result.image.to01() == "01111110"
    assert result.problems == ()


def test_undriven_outputs_of_an_extest_device_are_disabled() -> None:
    tables = device_tables("U1", SHARED)
    assert build_image(tables, DRIVE, []).image == tables.disabled
    assert build_image(tables, CLAMP, []).image == tables.disabled


def test_release_disables_control_and_enable_wins_on_a_shared_control() -> None:
    tables = device_tables("U1", SHARED)
    released = build_image(tables, DRIVE, [("M", "Z")]).image
    assert released[6] == 1  # disable value of M's control
    both = build_image(tables, DRIVE, [("Y(0)", "1"), ("Y(1)", "Z")])
    assert both.image[2] == 1  # Y(0) keeps control 2 enabled
    assert any("Y(1) cannot release" in p and "control cell 2" in p for p in both.problems)


def test_merged_cell_drive_sets_one_bit_and_enables_its_own_control() -> None:
    tables = device_tables("U1", SHARED)
    image = build_image(tables, DRIVE, [("M", "0")]).image
    assert image[5] == 0 and image[6] == 0  # control 6 enabled: NOT disable value 1


def test_drives_that_cannot_be_honoured_are_reported() -> None:
    tables = device_tables("U1", SHARED)
    result = build_image(tables, DRIVE, [("K", "Z"), ("CLK", "1")])
    # OUTPUT2 is a two-state output (IEEE 1149.1-2001 Annex B: output2 has no control cell).
    assert any("U1.K is a two-state output" in p for p in result.problems)
    assert any("U1.CLK has no output cell" in p for p in result.problems)
    assert result.image == tables.disabled


def test_intest_sets_core_side_inputs() -> None:
    tables = device_tables("U1", SHARED)
    image = build_image(tables, INTEST, [("CLK", "1"), ("M", "0")]).image
    assert image[7] == 1 and image[5] == 0
    assert any("U1.Y(0) has no input cell" in p
               for p in build_image(tables, INTEST, [("Y(0)", "1")]).problems)


def test_sample_and_preload_shift_the_safe_image() -> None:
    tables = device_tables("U1", SHARED)
    assert build_image(tables, OBSERVE, [("Y(0)", "0")]).image == tables.safe
    with pytest.raises(ValueError):
        build_image(tables, BYPASS, [])


@pytest.mark.parametrize(("instruction", "kind"), [
    ("EXTEST", DRIVE),  # IEEE 1149.1: EXTEST selects BOUNDARY and drives pins from it
    ("SAMPLE", OBSERVE),  # SAMPLE/PRELOAD selects BOUNDARY, system logic keeps the pins
    ("INTEST", INTEST),
    ("CLAMP", CLAMP),  # IEEE 1149.1-2001 CLAMP: pins from BOUNDARY, BYPASS selected
    ("HIGHZ", BYPASS),  # IEEE 1149.1-2001 HIGHZ: outputs off, BYPASS selected
    ("BYPASS", BYPASS),
    ("IDCODE", DEVICE_ID),
    ("CFG", USER),
    ("NO_SUCH", BYPASS),  # an undescribed instruction selects BYPASS
])
def test_mode_kinds(instruction: str, kind: str) -> None:
    assert mode_kind(SHARED, instruction) == kind


def test_preload_instruction_prefers_the_2001_preload() -> None:
    assert preload_instruction(make_device("A", 3, preload=True)) == "PRELOAD"
    assert preload_instruction(make_device("B", 3)) == "SAMPLE"  # 1990: combined SAMPLE/PRELOAD
    odd = make_device("C", 2, instructions={"EXTEST": "00", "SPY": "01", "BYPASS": "11"},
                      selects={"SPY": "BOUNDARY"})
    assert preload_instruction(odd) == "SPY"
    none = make_device("D", 2, instructions={"EXTEST": "00", "BYPASS": "11"})
    assert preload_instruction(none) is None


def test_bsdl_order_strings() -> None:
    # DESIGN.md: BSDL strings are MSB first, bit 0 is the rightmost character.
    assert to_msb_string(bitarray("100")) == "001"
    assert from_msb_string("X01").to01() == "100"
    assert mask_from_msb_string("X01").to01() == "110"


def _capture(device, port: str, kind: str, instruction: str, image=None, function=None):
    tables = device_tables("U1", device)
    cell = next(c for c in tables.observers[port] if function is None or c.function == function)
    return CaptureResolver().capture(0, tables, cell, kind, instruction,
                                     image if image is not None else tables.disabled)


CAPTURING = make_device("CAP", 3, cells=[
    (0, "BC_7", "B7", "BIDIR", "X", 1, 0, "Z"), (1, "BC_1", "*", "CONTROL", "0"),
    (2, "BC_6", "B6", "BIDIR", "X", 3, 0, "Z"), (3, "BC_1", "*", "CONTROL", "0"),
    (4, "BC_2", "O2", "OUTPUT2", "X"),
    (5, "BC_1", "O3", "OUTPUT3", "X", 1, 0, "Z"),
    (6, "BC_1", "IN", "INPUT", "X"),
    (7, "VENDOR_Q", "VQ", "INPUT", "X"),
])


def test_capture_rules_per_cell_type() -> None:
    # From memory of IEEE 1149.1-2001 Annex B CELL_INFO constants:
    # BC_1 INPUT captures the pin (PI) in SAMPLE and EXTEST.
    assert _capture(CAPTURING, "IN", OBSERVE, "SAMPLE") == PIN
    assert _capture(CAPTURING, "IN", DRIVE, "EXTEST") == PIN
    # BC_1 OUTPUT3 captures PI = system logic in EXTEST: unknown.
    assert _capture(CAPTURING, "O3", DRIVE, "EXTEST") == UNKNOWN
    # BC_2 OUTPUT2 captures its update latch in EXTEST.
    assert _capture(CAPTURING, "O2", DRIVE, "EXTEST") == UPDATE
    driving = build_image(device_tables("U1", CAPTURING), DRIVE, [("B7", "1"), ("B6", "1")]).image
    # BC_7 BIDIR driving in EXTEST captures PO, the pin; released it captures the pin as input.
    assert _capture(CAPTURING, "B7", DRIVE, "EXTEST", driving) == PIN
    assert _capture(CAPTURING, "B7", DRIVE, "EXTEST") == PIN
    # BC_6 BIDIR driving in EXTEST captures its update latch; released, the pin.
    assert _capture(CAPTURING, "B6", DRIVE, "EXTEST", driving) == UPDATE
    assert _capture(CAPTURING, "B6", DRIVE, "EXTEST") == PIN


def test_unknown_cell_type_captures_x_and_is_remembered() -> None:
    tables = device_tables("U7", CAPTURING)
    resolver = CaptureResolver()
    cell = tables.observers["VQ"][0]
    assert resolver.capture(3, tables, cell, OBSERVE, "SAMPLE", tables.safe) == UNKNOWN
    assert resolver.unknown_types == [("U7", "VENDOR_Q")]


# ------------------------------------------------------------------------------ chain-wide images

@st.composite
def _devices_and_drives(draw, every_output: bool = False):
    """A few random devices (outputs with own, shared or no controls) and random drives; with
    `every_output`, every device drives (EXTEST or CLAMP) and every output is driven 0 or 1."""
    devices = []
    for d in range(draw(st.integers(1, 3))):
        specs = []
        number = 0
        for group in range(draw(st.integers(1, 4))):
            shared = draw(st.integers(0, 3))  # 0: two-state outputs, else outputs per control
            if shared == 0:
                specs.append((number, "BC_2", f"K{group}", "OUTPUT2", draw(st.sampled_from("01X"))))
                number += 1
                continue
            control = number
            disable = draw(st.integers(0, 1))
            specs.append((control, "BC_1", "*", "CONTROL", draw(st.sampled_from("01X"))))
            number += 1
            for j in range(shared):
                function = draw(st.sampled_from(["OUTPUT3", "BIDIR"]))
                specs.append((number, "BC_7" if function == "BIDIR" else "BC_1", f"P{group}_{j}",
                              function, draw(st.sampled_from("01X")), control, disable, "Z"))
                number += 1
        devices.append((f"U{d}", make_device(f"D{d}", 3, specs)))
    modes = [DRIVE, CLAMP] if every_output else [DRIVE, CLAMP, OBSERVE, BYPASS]
    kinds = tuple(draw(st.sampled_from(modes)) for _ in devices)
    drives = []
    for ref, device in devices:
        for port in sorted(device_tables(ref, device).drivers):
            if every_output or draw(st.booleans()):
                value = draw(st.sampled_from("01" if every_output else "01Z"))
                drives.append(Drive(port, False, value, f"{ref}.{port}"))
    return devices, kinds, drives


@settings(max_examples=150, deadline=None)
@given(st.one_of(_devices_and_drives(), _devices_and_drives(every_output=True)))
def test_chain_images_agree_with_the_per_device_reference(case) -> None:
    # Steps that drive every output 0 or 1 take the one-scatter path (ChainImages._build);
    # both paths must give build_image's images.
    devices, kinds, drives = case
    tables = [device_tables(ref, device) for ref, device in devices]
    built = ChainImages(tables).build(kinds, drives)
    for idx, (table, kind) in enumerate(zip(tables, kinds)):
        mine = [(d.driver.partition(".")[2], d.value) for d in drives
                if d.driver.partition(".")[0] == table.ref]
        if kind in (DRIVE, CLAMP, OBSERVE):
            reference = build_image(table, kind, mine)
            assert built.images[idx] == reference.image
            if kind != OBSERVE:
                start = ChainImages(tables).starts[idx]
                assert built.chain_image[start:start + table.length] == reference.image
                assert set(reference.problems) <= set(built.problems)
        else:
            assert built.images[idx] is None


@settings(max_examples=30, deadline=None)
@given(_devices_and_drives(every_output=True))
def test_a_step_driving_every_output_takes_the_one_scatter_path(case) -> None:
    devices, kinds, drives = case
    tables = [device_tables(ref, device) for ref, device in devices]
    images = ChainImages(tables)
    drivers = tuple(d.driver for d in drives)
    assert images._table(kinds, drivers).all_driven is not None

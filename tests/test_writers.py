"""The four output writers: bit-exact cycle table, shift file, waveform read back, listing."""

from __future__ import annotations

import dataclasses
import json
import random
import re
from pathlib import Path

import pytest
import vcdvcd
from bitarray.util import urandom
from hypothesis import given, settings
from hypothesis import strategies as st

from handbuilt import random_chain, random_program, two_device_program
from scanloom.backend.cycle_stream import CycleStream
from scanloom.backend.cycles import lay_out_cycles
from scanloom.backend.writers import FORMATS, write_outputs
from scanloom.backend.writers.atomic import atomic_output, write_atomically
from scanloom.backend.writers.cycles_csv import render_cycle_table
from scanloom.backend.writers.json_writer import render_shift_file, shift_file_data
from scanloom.backend.writers.listing import render_listing
from scanloom.backend.writers.vcd import vcd_timescale, write_vcd
from scanloom.diagnostics import ScanloomError

# The two-device program of handbuilt.two_device_program, row by row (worked out by hand; see
# test_cycles.test_two_device_program_cycle_by_cycle for the TAP path): TDI is 0 outside
# shifts, TDO is X wherever the bit is not compared.
#   IR shift, cycles 10-14: TDI 0,0,0,1,0 (U2 EXTEST 000, then U1 SAMPLE "01" bit 0 first),
#                           TDO 1,0,X,1,0 (U2 capture "X01", U1 capture "01", bit 0 first)
#   DR shift, cycles 19-23: TDI 0,1,0,1,1 (U2 image "10", U1 image "110", bit 0 first),
#                           TDO 1,X,X,X,0 (U2 expects "X1", U1 "0XX", bit 0 first)
GOLDEN_TWO_DEVICE_CSV = """cycle,tms,tdi,tdo
0,1,0,X
1,1,0,X
2,1,0,X
3,1,0,X
4,1,0,X
5,0,0,X
6,1,0,X
7,1,0,X
8,0,0,X
9,0,0,X
10,0,0,1
11,0,0,0
12,0,0,X
13,0,1,1
14,1,0,0
15,1,0,X
16,1,0,X
17,0,0,X
18,0,0,X
19,0,0,1
20,0,1,X
21,0,0,X
22,0,1,X
23,1,1,0
24,1,0,X
25,0,0,X
26,0,0,X
27,0,0,X
28,1,0,X
29,1,0,X
30,1,0,X
31,1,0,X
32,1,0,X
"""


def test_cycle_table_of_the_two_device_program_is_bit_exact() -> None:
    stream = lay_out_cycles(two_device_program())
    assert render_cycle_table(stream).decode("ascii") == GOLDEN_TWO_DEVICE_CSV


def _naive_table(stream: CycleStream) -> bytes:
    """The table row by row, the obvious way: the oracle for the column-wise writer."""
    rows = ["cycle,tms,tdi,tdo"]
    for cycle in range(stream.count):
        tdo = str(stream.tdo[cycle]) if stream.mask[cycle] else "X"
        rows.append(f"{cycle},{stream.tms[cycle]},{stream.tdi[cycle]},{tdo}")
    return ("\n".join(rows) + "\n").encode("ascii")


@pytest.mark.parametrize("count", [0, 1, 9, 10, 11, 99, 100, 1001, 10_000, 10_007])
def test_column_wise_cycle_table_equals_row_by_row(count: int) -> None:
    tms, tdi, mask = urandom(count), urandom(count), urandom(count)
    stream = CycleStream(tms, tdi, urandom(count) & mask, mask, bytes(count), (), (), 0)
    assert render_cycle_table(stream) == _naive_table(stream)


def test_shift_file_hex_convention_and_fields() -> None:
    program = two_device_program()
    stream = lay_out_cycles(program)
    data = shift_file_data(program, stream, Path("/boards/demo/out"))
    assert list(data) == ["schema", "version", "source", "board", "tck_hz", "chain", "records",
                          "cycles", "notes"]
    assert data["schema"] == "scanloom.shifts" and data["version"] == 1
    # Paths relative to the output folder, forward slashes.
    assert data["source"] == "../program.loom" and data["board"] == "../board.yaml"
    ir = data["records"][1]
    # DESIGN.md: bit 0 = first bit shifted = least significant bit; zero-padded to ceil(5/4)=2 digits.
    # TDI 0,0,0,1,0 -> 2**3 = 0x08; TDO 1,0,0,1,0 -> 1 + 8 = 0x09; mask 1,1,0,1,1 -> 27 = 0x1b.
    assert (ir["tdi"], ir["tdo"], ir["mask"]) == ("08", "09", "1b")
    dr = data["records"][2]
    # TDI 0,1,0,1,1 -> 2 + 8 + 16 = 0x1a; TDO 1,0,0,0,0 -> 0x01; mask 1,0,0,0,1 -> 0x11.
    assert (dr["tdi"], dr["tdo"], dr["mask"]) == ("1a", "01", "11")
    assert dr["segments"][0] == {"device": "U2", "register": "BOUNDARY", "offset": 0, "length": 2}
    assert dr["intent"] == {"U1": "110", "U2": "10"} and dr["idle_clocks"] == 2
    cycles = data["cycles"]
    tms_ones = [0, 1, 2, 3, 4, 6, 7, 14, 15, 16, 23, 24, 28, 29, 30, 31, 32]
    assert cycles["tms"] == format(sum(1 << c for c in tms_ones), "09x")  # 33 bits -> 9 digits
    assert cycles["count"] == cycles["lower_bound"] == 33
    assert cycles["record_starts"] == [0, 5, 16, 28] and cycles["shift_starts"] == [10, 19]
    assert data["chain"][1]["cells"][0] == [0, "BC_1", "OUTPUT2", "P0", "U2_NET0"]


def test_shift_file_text_is_json_with_one_line_per_cell() -> None:
    program = two_device_program()
    text = render_shift_file(program, lay_out_cycles(program), Path("/boards/demo/out"))
    assert json.loads(text) == json.loads(json.dumps(
        shift_file_data(program, lay_out_cycles(program), Path("/boards/demo/out"))))
    assert '    [1, "BC_1", "INPUT", "P1", "U1_NET1"],\n' in text
    assert text.endswith("}\n") and text.isascii()


def test_every_format_is_byte_identical_across_runs(tmp_path: Path) -> None:
    rng = random.Random(3)
    program = random_program(rng, random_chain(rng, boundary=(1, 40)))
    first = write_outputs(program, lay_out_cycles(program), tmp_path / "a", "prog", set(FORMATS))
    second = write_outputs(program, lay_out_cycles(program), tmp_path / "b", "prog", set(FORMATS))
    assert [p.name for p in first] == ["prog.json", "prog.cycles.csv", "prog.vcd", "prog.txt"]
    for one, two in zip(first, second):
        assert one.read_bytes() == two.read_bytes()
    assert sorted(p.name for p in (tmp_path / "a").iterdir()) == sorted(p.name for p in first)


def test_unknown_format_is_refused_with_the_nearest_names(tmp_path: Path) -> None:
    program = two_device_program()
    with pytest.raises(ScanloomError) as caught:
        write_outputs(program, lay_out_cycles(program), tmp_path, "p", {"jsn"})
    assert re.match(r'^error: unknown output format "jsn"\n  expected: json, cycles, vcd, listing\n'
                    r"  did you mean: json\?$", caught.value.render())


def test_an_output_folder_that_cannot_be_made_is_a_diagnostic(tmp_path: Path) -> None:
    (tmp_path / "taken").write_text("a file, not a folder")
    program = two_device_program()
    with pytest.raises(ScanloomError, match=r"^cannot write .*taken"):
        write_outputs(program, lay_out_cycles(program), tmp_path / "taken", "p", {"json"})


def test_atomic_write_leaves_the_old_file_when_writing_fails(tmp_path: Path) -> None:
    target = tmp_path / "out.txt"
    write_atomically(target, "old\n")
    with pytest.raises(RuntimeError):
        with atomic_output(target) as handle:
            handle.write("half a fi")
            raise RuntimeError("disk full")
    assert target.read_text() == "old\n"
    assert [p.name for p in tmp_path.iterdir()] == ["out.txt"]  # no temporary file left behind


def _string_changes(path: Path, name: str) -> list[tuple[int, str]]:
    """String-variable changes (`s<text> <id>` lines). vcdvcd 2.6 skips these (string variables
    are an extension beyond IEEE Std 1364), so this small reader takes them."""
    text = path.read_text()
    code = re.search(rf"\$var string 1 (\S+) {name} \$end", text).group(1)
    changes, time = [], 0
    for line in text.splitlines():
        if line.startswith("#"):
            time = int(line[1:])
        elif line.startswith("s") and line.endswith(" " + code):
            changes.append((time, line[1:-len(code) - 1]))
    return changes


def _value_at(changes: list[tuple[int, str]], time: int) -> str:
    value = changes[0][1]
    for when, what in changes:
        if when > time:
            break
        value = what
    return value


@settings(max_examples=10, deadline=None)
@given(st.integers(min_value=0, max_value=2**32 - 1))
def test_waveform_read_back_by_vcdvcd_equals_the_cycle_table(tmp_path_factory, seed: int) -> None:
    rng = random.Random(seed)
    program = random_program(rng, random_chain(rng, devices=(1, 3), boundary=(1, 12)), operations=5)
    stream = lay_out_cycles(program)
    path = tmp_path_factory.mktemp("vcd") / "prog.vcd"
    write_vcd(stream, path, tck_hz=program.tck_hz)
    reader = vcdvcd.VCDVCD(str(path))  # an independent reader of IEEE Std 1364 value change dumps
    _, half = vcd_timescale(program.tck_hz)
    signals = {name: reader[f"scanloom.{name}"].tv for name in ("tck", "tms", "tdi", "tdo", "mask")}
    states = _string_changes(path, "tap_state")
    # TCK: low at c*P, high at c*P + P/2 for every cycle.
    assert signals["tck"][:4] == [(0, "0"), (half, "1"), (2 * half, "0"), (3 * half, "1")]
    assert len(signals["tck"]) == 2 * stream.count + 1
    for cycle in range(stream.count):
        rising = cycle * 2 * half + half
        assert _value_at(signals["tck"], rising) == "1"
        assert _value_at(signals["tms"], rising) == str(stream.tms[cycle])
        assert _value_at(signals["tdi"], rising) == str(stream.tdi[cycle])
        assert _value_at(signals["mask"], rising) == str(stream.mask[cycle])
        expected_tdo = str(stream.tdo[cycle]) if stream.mask[cycle] else "x"
        assert _value_at(signals["tdo"], rising) == expected_tdo
        # Just before rising edge c the controller is in the state of cycle c.
        assert _value_at(states, rising - 1) == stream.state_name(cycle)


@pytest.mark.parametrize("tck_hz, timescale, half", [
    (None, "100 ns", 5),        # 1 MHz: half a period is 500 ns
    (1e6, "100 ns", 5),
    (2.5e6, "100 ns", 2),       # 400 ns period
    (10e6, "10 ns", 5),         # 100 ns period
    (25e6, "10 ns", 2),
    (1e3, "100 us", 5),         # 1 ms period
    (3e6, "1 fs", 166_666_667),  # 333.33 ns: no unit divides it, rounded to femtoseconds
])
def test_vcd_timescale_makes_half_a_period_whole(tck_hz, timescale: str, half: int) -> None:
    # IEEE Std 1364 timescales are 1, 10 or 100 of s, ms, us, ns, ps or fs.
    assert vcd_timescale(tck_hz) == (timescale, half)


def test_listing_names_every_compared_bit_and_the_tck_count() -> None:
    program = two_device_program(tck_hz=10e6)
    stream = lay_out_cycles(program)
    text = render_listing(program, stream, Path("/boards/demo/out"))
    assert "TCK count   33, equal to the lower bound for this scan sequence (33)\n" in text
    assert "program     ../program.loom\n" in text and "TCK         10 MHz\n" in text
    assert "  0: U1 (ENTITY_U1), IR 2 bits, capture 01, boundary 3 cells\n" in text
    assert "\ntest links\n step first\n" in text
    assert "    U1: IR, scan bits 3-4, instruction SAMPLE\n" in text
    assert "    U2: IR, scan bits 0-2, instruction EXTEST\n" in text
    assert "    TDI   08\n    TDO   09\n    mask  1b\n" in text
    # IR capture "X01" of U2: bit 2 is X, so bits 0 and 1 are compared, bit 2 is not.
    assert "      scan bit 1: expect 0  U2 IR bit 1\n" in text and "U2 IR bit 2" not in text
    assert "      scan bit 0: expect 1  U2 BOUNDARY cell 0 (BC_1 OUTPUT2 port P0 net U2_NET0)\n" in text
    assert "      scan bit 4: expect 0  U1 BOUNDARY cell 2 (BC_1 OUTPUT2 port P2 net U1_NET2)\n" in text
    assert "    U1: BOUNDARY, scan bits 2-4, checks links/first\n      image 110\n" in text
    # Back-to-back: the IR scan goes straight on from Update-IR; the DR scan rests in RTI.
    assert "goes on from Update-IR to the next record (rest state Run-Test/Idle)" in text
    assert "    then 2 clocks in Run-Test/Idle\n    rests in Run-Test/Idle\n" in text
    assert text.endswith("end: 33 TCK, equal to the lower bound for this scan sequence (33)\n")


def test_listing_says_by_how_much_a_stream_exceeds_the_lower_bound() -> None:
    program = two_device_program()
    stream = dataclasses.replace(lay_out_cycles(program), lower_bound=31)
    text = render_listing(program, stream, Path("/boards/demo/out"))
    assert "TCK count   33, 2 more than the lower bound for this scan sequence (31)\n" in text


def test_listing_of_a_trst_reset_says_the_player_asserts_trst() -> None:
    program = two_device_program()
    records = (dataclasses.replace(program.records[0], use_trst=True),) + program.records[1:]
    program = dataclasses.replace(program, records=records)
    text = render_listing(program, lay_out_cycles(program), Path("/boards/demo/out"))
    assert "five clocks with TMS=1 to Test-Logic-Reset with TRST asserted by the player as well" in text


@settings(max_examples=40, deadline=None)
@given(st.integers(0, 2**32), st.booleans())
def test_listing_of_repeated_masks_equals_the_bit_by_bit_listing(seed: int, unicode_nets: bool) -> None:
    # Scans whose mask repeats an earlier one's get their compared-bit lines by setting the
    # expected 1s in that mask's prepared text; the listing must be the one picked bit by bit.
    from handbuilt import dr_scan, ir_scan, make_program, reset_record
    from scanloom.backend.records import ChainMap
    from scanloom.backend.writers import listing

    rng = random.Random(seed)
    chain = random_chain(rng, devices=(1, 4), boundary=(1, 40))
    if unicode_nets:  # names beyond ASCII move the byte offsets of the value digits
        chain = ChainMap(tuple(dataclasses.replace(device, cells=tuple(
            cell._replace(net=f"Ω{cell.net}") for cell in device.cells)) for device in chain.devices))
    records = [reset_record(), ir_scan(chain, {d.ref: "EXTEST" for d in chain.devices})]
    masks = [{d.ref: "".join(rng.choice("01X") for _ in range(d.boundary_length))
              for d in chain.devices} for _ in range(2)]
    for number in range(rng.randint(2, 7)):
        mask = rng.choice(masks)
        expected = {ref: "".join("X" if m == "X" else rng.choice("01") for m in pattern)
                    for ref, pattern in mask.items()}
        shifted = {d.ref: "0" * d.boundary_length for d in chain.devices}
        records.append(dr_scan(chain, {d.ref: "BOUNDARY" for d in chain.devices}, shifted,
                               expected, test="t", step=f"s{number}"))
    program = make_program(chain, records)
    cycles = lay_out_cycles(program)
    fast = render_listing(program, cycles, Path("/boards/demo/out"))
    original = listing._ChainLabels.filled_lines
    try:
        listing._ChainLabels.filled_lines = lambda self, segments, mask: None  # type: ignore[method-assign]
        picked = render_listing(program, cycles, Path("/boards/demo/out"))
    finally:
        listing._ChainLabels.filled_lines = original  # type: ignore[method-assign]
    assert fast == picked

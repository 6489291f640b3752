"""Reading the shift file back: a bit-exact round trip, and clear refusals of bad or foreign files."""

from __future__ import annotations

import dataclasses
import json
import random
import re
from pathlib import Path

import pytest
from bitarray import bitarray
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from handbuilt import random_chain, random_program, two_device_program
from scanloom.backend.cycles import lay_out_cycles
from scanloom.backend.shiftfile import locate_json_value, read_shift_file, shift_file_from_data
from scanloom.backend.writers.json_writer import render_shift_file, write_shift_file
from scanloom.diagnostics import ScanloomError
from scanloom.sim.replay import replay


def _plain(value):
    """Dataclasses, bitarrays and containers as comparable plain values, field by field."""
    if dataclasses.is_dataclass(value):
        return (type(value).__name__,) + tuple(
            (f.name, _plain(getattr(value, f.name))) for f in dataclasses.fields(value))
    if isinstance(value, bitarray):
        return ("bits", value.to01())
    if isinstance(value, dict):
        return tuple((key, _plain(item)) for key, item in value.items())
    if isinstance(value, (list, tuple)):
        return tuple(_plain(item) for item in value)
    return value


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.integers(min_value=0, max_value=2**32 - 1))
def test_round_trip_restores_program_and_cycles_bit_exactly(tmp_path: Path, seed: int) -> None:
    rng = random.Random(seed)
    program = random_program(rng, random_chain(rng, boundary=(1, 80)), operations=8)
    program = dataclasses.replace(program, source=str(tmp_path / "prog.loom"),
                                  board=str(tmp_path / "boards" / "b.yaml"), notes=("a note",))
    stream = lay_out_cycles(program)
    (tmp_path / "out").mkdir(exist_ok=True)
    path = write_shift_file(program, stream, tmp_path / "out" / "prog.json")
    restored_program, restored_stream = read_shift_file(path)
    assert _plain(restored_program) == _plain(program)
    assert _plain(restored_stream) == _plain(stream)


def _data() -> dict:
    program = two_device_program()
    return json.loads(render_shift_file(program, lay_out_cycles(program), Path("/boards/demo/out")))


def _write(tmp_path: Path, data) -> Path:
    path = tmp_path / "prog.json"
    path.write_text(data if isinstance(data, str) else json.dumps(data, indent=1))
    return path


def _error(path: Path) -> str:
    with pytest.raises(ScanloomError) as caught:
        read_shift_file(path)
    return caught.value.render()


def test_not_json_points_at_the_place(tmp_path: Path) -> None:
    path = _write(tmp_path, '{"schema": "scanloom.shifts",\n "version": 1,,\n}')
    # The second comma is column 15 of line 2: where Python's JSON decoder stops.
    assert re.match(rf"^{re.escape(str(path))}:2:15: error: not valid JSON: Expecting property name "
                    r'enclosed in double quotes\n     "version": 1,,\n                  \^\n'
                    r"  expected: a shift file written by scanloom compile$", _error(path))


def test_a_foreign_json_file_is_refused(tmp_path: Path) -> None:
    path = _write(tmp_path, {"signals": ["tck", "tms"]})
    assert re.match(rf"^{re.escape(str(path))}:1:1: error: the file: not a scanloom shift file\n"
                    r'(.*\n)*  expected: "schema": "scanloom.shifts"$', _error(path))


def test_another_schema_version_is_refused(tmp_path: Path) -> None:
    data = _data()
    data["version"] = 2
    message = _error(_write(tmp_path, data))
    assert re.match(r"^.*prog.json:3:13: error: version: shift file version 2 is not "
                    r"supported\n(.*\n)*  expected: version 1; write the file again with this scanloom$",
                    message)


@pytest.mark.parametrize("edit, pattern", [
    (lambda d: d["records"][1].update(tdi="8"),
     r"records\[1\]\.tdi: bad bit string: 2 hex digits expected for 5 bits, found 1"),
    (lambda d: d["records"][1].update(tdi="28"),
     r"records\[1\]\.tdi: bad bit string: bits beyond the length of 5 are set"),
    (lambda d: d["records"][1].update(mask="1B"),
     r"records\[1\]\.mask: bad bit string: only lower-case hex digits 0-9 a-f are allowed"),
    (lambda d: d["records"][2].update(kind="data"),
     r'records\[2\]\.kind: unknown record kind "data"\n(.*\n)*  expected: reset, ir, dr, idle'),
    (lambda d: d["records"][2].pop("tdo"),
     r'records\[2\]: missing field "tdo"'),
    (lambda d: d["records"][2]["segments"][0].update(device="U3"),
     r'records\[2\]\.segments\[0\]\.device: device "U3" is not in the chain\n(.*\n)*'
     r"  expected: one of U1, U2$"),
    (lambda d: d["records"][2].update(end_state="RUN_TEST_IDEL"),
     r'records\[2\]\.end_state: a record cannot rest in "RUN_TEST_IDEL"\n(.*\n)*'
     r"  did you mean: RUN_TEST_IDLE\?"),
    (lambda d: d["records"][3].update(index=7),
     r"records\[3\]\.index: record 3 carries index 7"),
    (lambda d: d["chain"][0].update(ir_capture="0"),
     r"chain\[0\]\.ir_capture: expected an IR capture pattern: 2 characters 0, 1 or X"),
    (lambda d: d["chain"][1]["cells"].__setitem__(0, [0, "BC_1"]),
     r"chain\[1\]\.cells\[0\]: expected a cell \[number, type, function, port, net\], found a list"),
    (lambda d: d["cycles"].update(record_starts=[0, 5, 16]),
     r"cycles\.record_starts: 3 entries for 4 records"),
    (lambda d: d["cycles"].update(count=40),
     r"cycles\.tms: bad bit string: 10 hex digits expected for 40 bits, found 9"),
    (lambda d: d.update(records=d["records"][1:]),
     r"records\[0\]\.index: record 0 carries index 1"),
    (lambda d: d["records"][0].update(use_trst=1),
     r"records\[0\]\.use_trst: expected true or false, found the number 1"),
])
def test_schema_violations_name_the_field_and_its_place(tmp_path: Path, edit, pattern: str) -> None:
    data = _data()
    edit(data)
    message = _error(_write(tmp_path, data))
    assert re.match(rf"^.*prog\.json:\d+:\d+: error: {pattern}", message), message


def test_an_empty_chain_is_refused(tmp_path: Path) -> None:
    data = _data()
    data["chain"] = []
    assert re.match(r"^.*prog\.json:\d+:\d+: error: chain: the chain has no devices",
                    _error(_write(tmp_path, data)))


def test_the_location_is_the_offending_value() -> None:
    text = '{"a": [1, {"b": "x", "c": [true, null]}], "d": 2}'
    assert text[locate_json_value(text, ("a", 1, "c", 1)):].startswith("null")
    assert text[locate_json_value(text, ("d",)):].startswith("2}")
    assert text[locate_json_value(text, ("a", 1, "missing")):].startswith('{"b"')


def test_a_missing_file_is_a_diagnostic(tmp_path: Path) -> None:
    assert re.match(r"^error: cannot read shift file .*nothing\.json: No such file or directory",
                    _error(tmp_path / "nothing.json"))


def test_data_without_a_file_reads_too() -> None:
    program, stream = shift_file_from_data(_data())
    assert program.source == "../program.loom"  # no folder to resolve against: kept as written
    assert stream.count == 33 and stream.state_name(10) == "Shift-IR"


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.data())
def test_random_edits_never_raise_anything_but_our_error(tmp_path: Path, data) -> None:
    text = render_shift_file(two_device_program(), lay_out_cycles(two_device_program()),
                             Path("/boards/demo/out"))
    for _ in range(data.draw(st.integers(1, 4))):
        where = data.draw(st.integers(0, len(text)))
        action = data.draw(st.sampled_from(["delete", "insert", "swap"]))
        if action == "delete":
            text = text[:where] + text[where + data.draw(st.integers(1, 5)):]
        elif action == "insert":
            text = text[:where] + data.draw(st.sampled_from(list('0f"x,[]{}: -1nulltrue'))) + text[where:]
        else:
            text = text[:where] + text[where:where + 8][::-1] + text[where + 8:]
    path = tmp_path / "fuzzed.json"
    path.write_text(text)
    try:
        program, stream = read_shift_file(path)
    except ScanloomError as error:
        assert error.render()
        return
    replay(program, stream)  # whatever a readable file says, the replay reports, never raises

"""Vector tables lower exactly like the same rows written as steps (property test).

The lowering takes a fast path for table rows (the row is the drive state, cell by cell) and
a general one for steps (drives merged bit by bit into the state in force). Both must give the
IR that ir.py defines: per step the complete drive state in force, sorted by target, drivers
chosen in the step's modes. A random test mixing steps and tables is compiled twice — once as
written, once with every table row spelled out as a step of the same name — and the two IRs
must be equal (spans do not take part in equality); a plain dictionary model of persistence
checks the values on top.
"""

from __future__ import annotations

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from lang_boards import run

# Driveable with U1 in EXTEST (see lang_boards): nets N0..N3, BUS, LAMP, and the pins of N0, N1.
# Each name with the key it shares with others (a pin and its net are one wire).
DRIVEN = {"N0": "N0", "N1": "N1", "N2": "N2", "N3": "N3", "BUS": "BUS", "LAMP": "LAMP",
          "U1.Q(0)": "N0", "U1.Q(1)": "N1"}
OBSERVED = ["N0", "N1", "N2", "Y", "BUS"]  # U2 in SAMPLE captures these

names = st.sampled_from(sorted(DRIVEN))


@st.composite
def columns(draw, pool: list[str], keys: dict[str, str] | None = None) -> list[str]:
    """Distinct signals whose wires do not overlap."""
    chosen = draw(st.lists(st.sampled_from(pool), min_size=1, max_size=len(pool), unique=True))
    if keys is None:
        return chosen
    seen: set[str] = set()
    out = []
    for name in chosen:
        if keys[name] not in seen:
            seen.add(keys[name])
            out.append(name)
    return out


@st.composite
def program_items(draw) -> list[tuple]:
    items: list[tuple] = []
    for _ in range(draw(st.integers(1, 5))):
        kind = draw(st.sampled_from(["step", "table", "table", "mode"]))
        if kind == "mode":
            items.append(("mode", draw(st.sampled_from(["EXTEST", "CLAMP"]))))
        elif kind == "step":
            drives = draw(columns(sorted(DRIVEN), DRIVEN))
            values = [draw(st.sampled_from("01Z")) for _ in drives]
            expects = draw(st.lists(st.sampled_from(OBSERVED), max_size=3, unique=True))
            expected = [draw(st.sampled_from("01X")) for _ in expects]
            items.append(("step", list(zip(drives, values)), list(zip(expects, expected))))
        else:
            drives = draw(columns(sorted(DRIVEN), DRIVEN))
            expects = draw(columns(OBSERVED))
            rows = [([draw(st.sampled_from("01")) for _ in drives],
                     [draw(st.sampled_from("01X")) for _ in expects])
                    for _ in range(draw(st.integers(1, 4)))]
            items.append(("table", drives, expects, rows))
    return items


def as_text(items: list[tuple], *, tables: bool) -> str:
    lines = ['test t "t" {', "    U1 EXTEST", "    U2 SAMPLE"]
    number = 0
    for item in items:
        if item[0] == "mode":
            lines.append(f"    U1 {item[1]}")
        elif item[0] == "step":
            number += 1
            lines.append(f"    step s{number} {{")
            drives = [f"{name} = {value}" for name, value in item[1] if value != "Z"]
            if drives:
                lines.append("        drive " + ", ".join(drives))
            released = [name for name, value in item[1] if value == "Z"]
            if released:
                lines.append("        release " + ", ".join(released))
            if item[2]:
                lines.append("        expect " + ", ".join(f"{n} = {v}" for n, v in item[2]))
            lines.append("    }")
        else:
            _, drives, expects, rows = item
            number += 1
            name = f"v{number}"
            if tables:
                lines.append(f"    table {name} {{")
                lines.append("        " + " ".join(drives) + " -> " + " ".join(expects))
                for drive_values, expect_values in rows:
                    lines.append("        " + " ".join(drive_values) + " -> " + " ".join(expect_values))
                lines.append("    }")
            else:
                for row, (drive_values, expect_values) in enumerate(rows, start=1):
                    lines.append(f"    step {name}_{row} {{")
                    lines.append("        drive " + ", ".join(f"{n} = {v}" for n, v in zip(drives, drive_values)))
                    lines.append("        expect " + ", ".join(f"{n} = {v}" for n, v in zip(expects, expect_values)))
                    lines.append("    }")
    lines.append("}")
    return "\n".join(lines) + "\n"


def persisted_values(items: list[tuple]) -> list[dict[str, tuple[str, str]]]:
    """The reference: per step, wire key -> (target, value) in force."""
    state: dict[str, tuple[str, str]] = {}
    out = []
    for item in items:
        if item[0] == "step":
            for name, value in item[1]:
                state[DRIVEN[name]] = (name, value)
            out.append(dict(state))
        elif item[0] == "table":
            for drive_values, _ in item[3]:
                for name, value in zip(item[1], drive_values):
                    state[DRIVEN[name]] = (name, value)
                out.append(dict(state))
    return out


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(program_items())
def test_table_rows_lower_like_the_same_steps(items):
    with_tables, _ = run(as_text(items, tables=True))
    as_steps, _ = run(as_text(items, tables=False))
    table_steps = with_tables.tests[0].steps
    plain_steps = as_steps.tests[0].steps
    assert table_steps == plain_steps
    for step, reference in zip(table_steps, persisted_values(items)):
        assert [d.target for d in step.drives] == sorted(target for target, _ in reference.values())
        assert {d.target: d.value for d in step.drives} == dict(reference.values())


def test_a_step_after_a_table_keeps_the_last_row_and_changes_one_bit():
    text = ('test t "t" {\n    U1 EXTEST\n    U2 SAMPLE\n    table v {\n        N LAMP -> N\n'
            "        0b101 1 -> 0b101\n        0b010 0 -> 0b010\n    }\n"
            "    step after {\n        drive U1.Q(0) = 1\n    }\n}\n")
    program, _ = run(text)
    steps = program.tests[0].steps
    assert [(d.target, d.value) for d in steps[2].drives] == [
        ("LAMP", "0"), ("N1", "1"), ("N2", "0"), ("U1.Q(0)", "1")]  # U1.Q(0) replaces N0

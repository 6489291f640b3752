"""Persisting drives and driver choice against a naive per-bit model of the small board.

The lowering keeps the drive state of a test either as the last step that assigned every bit
("whole") or as dictionaries; either way ir.py fixes the result: each step carries the
complete drive state in force sorted by target (Z kept), a wire (a net and the pins on it)
is one entry whose target is the last statement's, drivers are chosen again in every step's
modes (the named pin, else the first capable scan pin in chain order, EXTEST/CLAMP pins before
INTEST's core-side inputs), and a persisting drive without a capable device shows driver None.

The model below knows the board only from its description in lang_boards (which pins have
output cells, which nets they sit on, chain order U1, U2, U3) and keeps the state in a plain
dictionary, bit by bit. Random programs mix steps, vector tables whose columns name the same
wire twice, restated drives, expectation-only steps, mode changes (EXTEST, CLAMP, SAMPLE,
INTEST, HIGHZ, ...), register accesses that change one step's mode, waits, TAP resets and
several tests in a row.

Facts used (IEEE 1149.1-2013, from memory): EXTEST and CLAMP drive the pins from the boundary
register (clauses 8.8 and 8.16), INTEST applies the input cells to the core (8.9), SAMPLE,
PRELOAD, HIGHZ, BYPASS and IDCODE drive nothing from the boundary register; after
Test-Logic-Reset a device holds IDCODE where it has one, else BYPASS (8.1.1).
"""

from __future__ import annotations

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from lang_boards import run

from scanloom.ir import COMPUTED, Step, TapReset, Wait

CHAIN = ("U1", "U2", "U3")
# Pins with an output cell (OUTPUT2, OUTPUT3, BIDIR) and pins whose cell drives the core in INTEST.
OUTPUT_PINS = {"U1.Q(0)", "U1.Q(1)", "U1.Q(2)", "U1.Q(3)", "U1.D", "U1.P", "U3.Y"}
CORE_INPUT_PINS = {"U1.D", "U1.IN"}
INTEST_CAPABLE = {"U1"}
# Each net's pins on scan devices, in chain order.
NET_PINS = {
    "N0": ["U1.Q(0)", "U2.A(0)"], "N1": ["U1.Q(1)", "U2.A(1)"], "N2": ["U1.Q(2)", "U2.A(2)"],
    "N3": ["U1.Q(3)"], "Y": ["U2.A(3)"], "BUS": ["U1.D", "U2.E", "U3.Y"],
    "LONE": ["U1.IN", "U3.K"], "LAMP": ["U1.P"],
}
NET_OF = {pin: net for net, pins in NET_PINS.items() for pin in pins}

GROUPS_TEXT = "group M = [U1.Q(0), N1]\ngroup W = [BUS, LAMP, N3]\n"


def _bit(name: str) -> tuple[str, bool, str]:
    """(target, is_pin, key): a pin and its net share the key (the net)."""
    if "." in name:
        return name, True, NET_OF.get(name, name)
    return name, False, name


SIGNALS: dict[str, list[tuple[str, bool, str]]] = {n: [_bit(n)] for n in NET_PINS}
SIGNALS.update({p: [_bit(p)] for p in NET_OF})
SIGNALS["N"] = [_bit("N2"), _bit("N1"), _bit("N0")]  # the standard header's group
SIGNALS["N[1:0]"] = SIGNALS["N"][1:]
SIGNALS["N[2]"] = SIGNALS["N"][:1]
SIGNALS["M"] = [_bit("U1.Q(0)"), _bit("N1")]
SIGNALS["M[1]"] = SIGNALS["M"][:1]
SIGNALS["W"] = [_bit("BUS"), _bit("LAMP"), _bit("N3")]
NAMES = sorted(SIGNALS)
# U2's BC_4 inputs capture their pins whenever U2 selects its boundary register.
OBSERVED_BY_U2 = ["N0", "N1", "N2", "Y", "BUS", "U2.A(0)", "U2.A(2)", "U2.E", "N", "N[1:0]"]

MODES = {"U1": ["EXTEST", "CLAMP", "SAMPLE", "INTEST", "HIGHZ", "BYPASS", "PRELOAD", "IDCODE"],
         "U2": ["SAMPLE", "EXTEST", "BYPASS", "IDCODE"],
         "U3": ["EXTEST", "SAMPLE", "BYPASS"]}
AFTER_RESET = {"U1": "IDCODE", "U2": "IDCODE", "U3": "BYPASS"}
# Register accesses inside a step: the device takes the instruction that selects the register
# for that step only.
ACCESSES = {"read U1 DEVICE_ID": ("U1", "IDCODE"), "read U2 BYPASS": ("U2", "BYPASS")}


def _drives_pins(mode: str) -> bool:
    return mode in ("EXTEST", "CLAMP")


def model_driver(target: str, is_pin: bool, modes: dict[str, str]) -> str | None:
    def pin_drives(pin: str, core: bool) -> bool:
        mode = modes[pin.split(".")[0]]
        if core:
            return mode == "INTEST" and pin.split(".")[0] in INTEST_CAPABLE and pin in CORE_INPUT_PINS
        return _drives_pins(mode) and pin in OUTPUT_PINS

    if is_pin:
        return target if pin_drives(target, False) or pin_drives(target, True) else None
    for core in (False, True):
        for pin in NET_PINS[target]:
            if pin_drives(pin, core):
                return pin
    return None


def drivable(name: str, modes: dict[str, str]) -> bool:
    return all(model_driver(t, p, modes) is not None for t, p, _ in SIGNALS[name])


def written(values: list[str]) -> str:
    if len(values) == 1:
        return values[0]
    if len(set(values)) == 1 and values[0] == "Z":
        return "Z"
    return "0b" + "".join(values)


@st.composite
def assignments(draw, pool: list[str], alphabet: str, chosen: dict[str, str]) -> tuple[str, list[str]]:
    """A signal and per-bit values consistent with what this step gave its wires already."""
    name = draw(st.sampled_from(pool))
    values = []
    for _, _, key in SIGNALS[name]:
        if key not in chosen:
            chosen[key] = draw(st.sampled_from(alphabet))
        values.append(chosen[key])
    return name, values


@st.composite
def programs(draw) -> list[list[tuple]]:
    tests = []
    for _ in range(draw(st.integers(1, 3))):
        modes = dict.fromkeys(CHAIN, "BYPASS")
        items: list[tuple] = []
        if draw(st.booleans()):
            items.append(("mode", "U1", "EXTEST"))
            modes["U1"] = "EXTEST"
        if draw(st.booleans()):
            items.append(("mode", "U2", "SAMPLE"))
            modes["U2"] = "SAMPLE"
        for _ in range(draw(st.integers(1, 7))):
            kind = draw(st.sampled_from(["mode", "mode", "step", "step", "table", "table",
                                         "reset", "wait"]))
            if kind == "mode":
                ref = draw(st.sampled_from(CHAIN))
                modes[ref] = draw(st.sampled_from(MODES[ref]))
                items.append(("mode", ref, modes[ref]))
            elif kind == "reset":
                modes = dict(AFTER_RESET)
                items.append(("reset",))
            elif kind == "wait":
                items.append(("wait", draw(st.integers(1, 9))))
            elif kind == "step":
                access = draw(st.sampled_from([None, None, None, *ACCESSES]))
                step_modes = dict(modes)
                if access is not None:
                    ref, instruction = ACCESSES[access]
                    step_modes[ref] = instruction
                dpool = [n for n in NAMES if drivable(n, step_modes)]
                epool = OBSERVED_BY_U2 if step_modes["U2"] in ("SAMPLE", "EXTEST") else []
                statements: list[tuple] = []
                driven: dict[str, str] = {}
                expected: dict[str, str] = {}
                for _ in range(draw(st.integers(0, 4))):
                    what = draw(st.sampled_from(["drive", "drive", "release", "expect"]))
                    if what != "expect" and dpool:
                        alphabet = "Z" if what == "release" else "001Z"
                        name, values = draw(assignments(dpool, alphabet, driven))
                        if what == "release" and set(values) != {"Z"}:
                            what = "drive"
                        statements.append((what, name, values))
                        if draw(st.integers(0, 5)) == 0:  # the same drive restated
                            statements.append((what, name, values))
                    elif what == "expect" and epool:
                        before = set(expected)
                        name, values = draw(assignments(epool, "01X", expected))
                        if COMPUTED in values and set(values) != {COMPUTED}:
                            continue  # no literal restates part of a computed expectation
                        keys = [key for _, _, key in SIGNALS[name]]
                        if not before & set(keys) and draw(st.integers(0, 7)) == 0:
                            values = [COMPUTED] * len(values)
                            expected.update(dict.fromkeys(keys, COMPUTED))
                        statements.append(("expect", name, values))
                items.append(("step", access, step_modes, statements))
            else:
                dpool = [n for n in NAMES if drivable(n, modes)]
                epool = OBSERVED_BY_U2 if modes["U2"] in ("SAMPLE", "EXTEST") else []
                dcols = draw(st.lists(st.sampled_from(dpool), max_size=3)) if dpool else []
                ecols = draw(st.lists(st.sampled_from(epool), max_size=2)) if epool else []
                if not dcols and not ecols:
                    continue
                rows = []
                for _ in range(draw(st.integers(1, 4))):
                    driven, expected = {}, {}
                    dcells = [draw(assignments([c], "001Z", driven))[1] for c in dcols]
                    ecells = [draw(assignments([c], "01X", expected))[1] for c in ecols]
                    rows.append((dcells, ecells))
                items.append(("table", draw(st.booleans()), dict(modes), dcols, ecols, rows))
        tests.append(items)
    return tests


def as_text(tests: list[list[tuple]]) -> str:
    lines = [GROUPS_TEXT.rstrip("\n")]
    for number, items in enumerate(tests):
        lines.append(f'test t{number} "t{number}" {{')
        for index, item in enumerate(items):
            if item[0] == "mode":
                lines.append(f"    {item[1]} {item[2]}")
            elif item[0] == "reset":
                lines.append("    reset tap")
            elif item[0] == "wait":
                lines.append(f"    wait {item[1]} clocks")
            elif item[0] == "step":
                lines.append(f"    step s{index} {{")
                if item[1] is not None:
                    lines.append(f"        {item[1]}")
                for what, name, values in item[3]:
                    if what == "release":
                        lines.append(f"        release {name}")
                    elif what == "expect" and values[0] == COMPUTED:
                        lines.append(f"        expect {name} = computed")
                    else:
                        lines.append(f"        {what} {name} = {written(values)}")
                lines.append("    }")
            else:
                _, named, _, dcols, ecols, rows = item
                lines.append(f"    table v{index} {{" if named else "    table {")
                lines.append("        " + " ".join(dcols) + " -> " + " ".join(ecols))
                for dcells, ecells in rows:
                    lines.append("        " + " ".join(map(written, dcells)) + " -> "
                                 + " ".join(map(written, ecells)))
                lines.append("    }")
        lines.append("}")
    return "\n".join(lines) + "\n"


def model(items: list[tuple]) -> list[tuple]:
    """Per item of one test what the IR must hold, from a per-bit dictionary of the state."""
    state: dict[str, tuple[str, bool, str]] = {}  # key -> (target, is_pin, value)
    modes = dict.fromkeys(CHAIN, "BYPASS")
    out: list[tuple] = []
    unnamed_rows = 0

    def step(name: str, step_modes: dict[str, str], drives: list[tuple[str, list[str]]],
             expects: list[tuple[str, list[str]]]) -> tuple:
        stated: dict[str, tuple[str, bool, str]] = {}
        for signal, values in drives:
            for (target, is_pin, key), value in zip(SIGNALS[signal], values):
                stated.setdefault(key, (target, is_pin, value))  # the first statement wins
        state.update(stated)
        drive_records = sorted((target, is_pin, value, model_driver(target, is_pin, step_modes))
                               for target, is_pin, value in state.values())
        wanted: dict[str, tuple[str, bool, str]] = {}
        for signal, values in expects:
            for (target, is_pin, key), value in zip(SIGNALS[signal], values):
                wanted.setdefault(key, (target, is_pin, value))
        return ("step", name, tuple((ref, step_modes[ref]) for ref in CHAIN),
                drive_records, sorted(wanted.values()))

    for index, item in enumerate(items):
        if item[0] == "mode":
            modes[item[1]] = item[2]
        elif item[0] == "reset":
            modes = dict(AFTER_RESET)
            out.append(("reset",))
        elif item[0] == "wait":
            out.append(("wait", item[1], tuple((ref, modes[ref]) for ref in CHAIN)))
        elif item[0] == "step":
            statements = item[3]
            out.append(step(f"s{index}", item[2],
                            [(n, v) for w, n, v in statements if w != "expect"],
                            [(n, v) for w, n, v in statements if w == "expect"]))
        else:
            _, named, table_modes, dcols, ecols, rows = item
            for row, (dcells, ecells) in enumerate(rows, start=1):
                unnamed_rows += not named
                name = f"v{index}_{row}" if named else f"row{unnamed_rows}"
                out.append(step(name, table_modes, list(zip(dcols, dcells)), list(zip(ecols, ecells))))
    return out


def observed(test) -> list[tuple]:  # noqa: ANN001
    out: list[tuple] = []
    for item in test.items:
        if isinstance(item, Step):
            out.append(("step", item.name, item.modes,
                        [(d.target, d.is_pin, d.value, d.driver) for d in item.drives],
                        [(e.target, e.is_pin, e.value) for e in item.expects]))
        elif isinstance(item, TapReset):
            out.append(("reset",))
        elif isinstance(item, Wait):
            out.append(("wait", item.clocks, item.modes))
        else:
            raise AssertionError(f"unexpected item {item!r}")
    return out


@settings(max_examples=250, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(programs())
def test_each_step_carries_the_state_the_per_bit_model_keeps(tests):
    program, _ = run(as_text(tests))
    assert len(program.tests) == len(tests)
    for lowered, items in zip(program.tests, tests):
        assert observed(lowered) == model(items)


def test_the_model_can_tell_a_wrong_driver():
    # The model itself: a net drive whose only driver left EXTEST waits with driver None.
    items = [("mode", "U1", "EXTEST"), ("step", None, {"U1": "EXTEST", "U2": "BYPASS", "U3": "BYPASS"},
                                       [("drive", "N0", ["1"])]),
             ("mode", "U1", "SAMPLE"), ("step", None, {"U1": "SAMPLE", "U2": "BYPASS", "U3": "BYPASS"}, [])]
    program, _ = run(as_text([items]))
    steps = model(items)
    assert steps[0][3] == [("N0", False, "1", "U1.Q(0)")]
    assert steps[1][3] == [("N0", False, "1", None)]
    assert observed(program.tests[0]) == steps

"""Net resolution: strengths, contention, shorts, floating inputs, keepers, bit-parallel vectors.

The rules are the common practice of digital board simulation and of electronics handbooks
(e.g. Horowitz & Hill, "The Art of Electronics", on TTL and CMOS inputs, from memory):
an open bipolar (TTL) input floats high, an open CMOS input is undefined, a pull resistor
sets an undriven node, two totem-pole outputs fighting give no defined level.
"""

from __future__ import annotations

from hypothesis import given, settings
from hypothesis import strategies as st

from scanloom.models.board import PinRef
from scanloom.sim.electrical import ScanDriver
from scanloom.sim.resolve import (
    COMBINE_AND, COMBINE_OR, DriveSum, Level, PinDrive, contention_mask, drive_sum, logic_drive,
    read_level, resolve_joined, resolve_level, scan_pin_drive,
)

FULL = 1


def strong(value: str, full: int = FULL) -> PinDrive:
    return PinDrive(full if value in "0X" else 0, full if value in "1X" else 0)


def level_text(level: Level, bit: int = 0) -> str:
    if (level.fl >> bit) & 1:
        return "Z"
    may0, may1 = (level.v0 >> bit) & 1, (level.v1 >> bit) & 1
    return "X" if may0 and may1 else ("1" if may1 else "0")


def resolve(*drives: PinDrive, pulls=(), **options) -> Level:  # type: ignore[no-untyped-def]
    return resolve_level(drive_sum(drives, pulls, FULL), FULL, **options)


def test_a_single_strong_driver_sets_the_node() -> None:
    assert level_text(resolve(strong("0"))) == "0"
    assert level_text(resolve(strong("1"))) == "1"


def test_two_strong_drivers_disagreeing_give_x_and_contention() -> None:
    total = drive_sum([strong("0"), strong("1")])
    assert level_text(resolve_level(total, FULL)) == "X"
    assert contention_mask(total) == 1
    # Agreeing drivers are no contention; an unknown driver is not counted as a fight.
    assert contention_mask(drive_sum([strong("1"), strong("1")])) == 0
    assert contention_mask(drive_sum([strong("1"), strong("X")])) == 0


def test_wired_and_lets_0_dominate_and_wired_or_lets_1_dominate() -> None:
    # Common practice: a short between two outputs behaves as wired-AND (the low-side driver of
    # TTL-style outputs wins) unless said otherwise; wired-OR is its dual.
    assert level_text(resolve(strong("0"), strong("1"), combine=COMBINE_AND)) == "0"
    assert level_text(resolve(strong("0"), strong("1"), combine=COMBINE_OR)) == "1"
    assert level_text(resolve(strong("1"), strong("1"), combine=COMBINE_AND)) == "1"
    assert level_text(resolve(strong("1"), strong("X"), combine=COMBINE_AND)) == "X"
    assert level_text(resolve(strong("0"), strong("X"), combine=COMBINE_AND)) == "0"


def test_a_dominant_driver_wins_where_it_drives() -> None:
    boss = strong("1")
    assert level_text(resolve(strong("0"), boss, dominant=boss)) == "1"


def test_strong_beats_resistive_beats_keeper_beats_floating() -> None:
    assert level_text(resolve(strong("0"), pulls=("up",))) == "0"
    assert level_text(resolve(PinDrive(r0=1), pulls=("up",))) == "X"  # two resistive drives fight
    assert level_text(resolve(pulls=("up",))) == "1"
    assert level_text(resolve(PinDrive(keep=1), previous=Level(0, 1, 0))) == "1"
    assert level_text(resolve(PinDrive(keep=1), previous=Level(0, 0, 1))) == "X"  # nothing to hold
    assert level_text(resolve()) == "Z"


def test_a_floating_input_reads_by_its_technology() -> None:
    floating = resolve()
    # Common practice (electronics handbooks): an open TTL input floats high and reads 1;
    # an open CMOS input is undefined.
    assert read_level(floating, "ttl") == (0, 1)
    assert read_level(floating, "cmos") == (1, 1)
    # A pull resistor wins over floating, whatever the technology.
    pulled = resolve(pulls=("down",))
    assert read_level(pulled, "ttl") == (1, 0) and read_level(pulled, "cmos") == (1, 0)


def test_vectors_resolve_independently_in_one_call() -> None:
    full = 0b1111
    a = PinDrive(0b0011, 0b1100)  # vectors 0,1 drive 0; 2,3 drive 1
    b = PinDrive(0b0101, 0b0010)  # vector 0 drives 0, vector 1 drives 1, vector 2 drives 0; 3 off
    level = resolve_level(drive_sum([a, b]), full)
    assert [level_text(level, v) for v in range(4)] == ["0", "X", "X", "1"]
    assert contention_mask(drive_sum([a, b])) == 0b0110


def test_a_keeper_holds_the_last_driven_value_across_vectors() -> None:
    full = 0b11111
    driver = PinDrive(0b00010, 0b00001)  # vector 0: 1, vector 1: 0, vectors 2..4 released
    keeper = PinDrive(keep=0b11100)
    level = resolve_level(drive_sum([driver, keeper]), full)
    assert [level_text(level, v) for v in range(5)] == ["1", "0", "0", "0", "0"]
    unknown_start = resolve_level(drive_sum([PinDrive(keep=0b11)]), 0b11)
    assert [level_text(unknown_start, v) for v in range(2)] == ["X", "X"]


@settings(max_examples=200, deadline=None)
@given(st.lists(st.tuples(st.sampled_from("01XZ"), st.booleans(), st.sampled_from(["", "up", "down"])),
                min_size=1, max_size=12))
def test_keeper_batch_equals_one_vector_at_a_time(vectors) -> None:  # type: ignore[no-untyped-def]
    """The bit-parallel keeper rule gives what resolving the vectors one by one gives."""
    count = len(vectors)
    full = (1 << count) - 1
    s0 = s1 = keep = r0 = r1 = 0
    for v, (value, kept, pull) in enumerate(vectors):
        if value in "0X":
            s0 |= 1 << v
        if value in "1X":
            s1 |= 1 << v
        if kept:
            keep |= 1 << v
        if pull == "up":
            r1 |= 1 << v
        elif pull == "down":
            r0 |= 1 << v
    batch = resolve_level(drive_sum([PinDrive(s0, s1, r0, r1, keep)]), full)
    previous = Level(1, 1, 0)
    for v, (value, kept, pull) in enumerate(vectors):
        drive = PinDrive(int(value in "0X"), int(value in "1X"), int(pull == "down"), int(pull == "up"),
                         int(kept))
        one = resolve_level(drive_sum([drive]), 1, previous=previous)
        assert level_text(one) == level_text(batch, v), (v, vectors)
        previous = one


def _driver(result: str = "Z", control: int | None = 5, disable: int | None = 0) -> ScanDriver:
    return ScanDriver(PinRef("U1", "Y"), 0, 4, "OUTPUT3", control, disable, result)


def test_scan_outputs_drive_only_when_enabled_and_otherwise_show_the_disable_result() -> None:
    full = 0b1111
    data = (0b1010, 0b0101)  # vectors 0, 2 drive 1; vectors 1, 3 drive 0
    control = (0b0011, 0b1100)  # control at 1 (enabled: disable value 0) in vectors 2, 3
    driving = 0b1111
    drive = scan_pin_drive(_driver(), data, control, driving, 0, full)
    assert (drive.s0, drive.s1) == (0b1000, 0b0100)
    weak = scan_pin_drive(_driver("WEAK1"), data, control, driving, 0, full)
    assert weak.r1 == 0b0011 and (weak.s0, weak.s1) == (0b1000, 0b0100)
    kept = scan_pin_drive(_driver("KEEPER"), data, control, driving, 0, full)
    assert kept.keep == 0b0011
    # Outside a driving instruction the pin is released; an unknown instruction drives X.
    released = scan_pin_drive(_driver("PULL0"), data, control, 0b0000, 0b1000, full)
    assert released.r0 == 0b0111 and (released.s0, released.s1) == (0b1000, 0b1000)
    # A two-state output (no control cell) always drives in a driving instruction.
    two_state = scan_pin_drive(_driver(control=None, disable=None), data, None, 0b0110, 0, full)
    assert (two_state.s0, two_state.s1) == (0b0010, 0b0100)


def test_logic_outputs_three_state_with_their_enable() -> None:
    value = (0b01, 0b10)  # vector 0: 0, vector 1: 1
    assert logic_drive(value, None) == PinDrive(0b01, 0b10)
    assert logic_drive(value, (0b11, 0b00)) == PinDrive(0, 0)  # disabled: not driving
    assert logic_drive(value, (0b11, 0b11)) == PinDrive(0b11, 0b11)  # enable X: drive X


def test_drive_sums_keep_definite_values_apart_from_unknowns() -> None:
    total = DriveSum().plus(strong("X")).plus(strong("1"))
    assert (total.d0, total.d1) == (0, 1)


_DRIVES = st.builds(PinDrive, *(st.integers(0, 0b1111) for _ in range(5)))
_PULLS = st.lists(st.sampled_from(["up", "down"]), max_size=2)


@settings(max_examples=300, deadline=None)
@given(st.lists(_DRIVES, max_size=3), _PULLS, st.lists(_DRIVES, max_size=3), _PULLS,
       st.sampled_from([COMBINE_AND, COMBINE_OR, "wire"]))
def test_two_nodes_joined_resolve_as_all_their_drives_summed(first, first_pulls, second, second_pulls,  # type: ignore[no-untyped-def]
                                                             combine) -> None:
    """A short resolved from the two nodes' sums is the short resolved from every drive on it
    (drive sums OR their rails, so summing in two parts changes nothing)."""
    full = 0b1111
    joined = resolve_joined(drive_sum(first, first_pulls, full), drive_sum(second, second_pulls, full),
                            full, combine)
    whole = resolve_level(drive_sum(first + second, first_pulls + second_pulls, full), full, combine=combine)
    assert joined == whole

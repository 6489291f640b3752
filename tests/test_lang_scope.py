"""The scope's whole-column answers agree with its per-pin tables, bit for bit.

`Scope.observed_by_any` decides for a whole column of bits whether any scan pin captures each
one in a set of modes (the front end's "no device observes" check). It must say exactly what
asking pin by pin says: a bit is observed when one of its scan pins sits on a device whose mode
selects the boundary register (IEEE 1149.1, Capture-DR of the boundary register) and the pin
has a cell that captures it in that mode (Annex B CELL_INFO, through `observed_ports`).

`Scope.column_drivers` chooses the driver of a whole column as `choose_driver` does bit by bit,
and a group's list of plain nets or scan pins resolves a column at a time exactly as member by
member, wrong names and their messages included.
"""

from __future__ import annotations

from hypothesis import given, settings
from hypothesis import strategies as st

from lang_boards import small_board
from random_boards import random_board

from scanloom.diagnostics import Diagnostics, SourceSpan
from scanloom.lang import ast
from scanloom.models.board import PinRef
from scanloom.lang.resolve import BitRef, Scope, observes_pins

MODES = ("BYPASS", "SAMPLE", "EXTEST", "CLAMP", "HIGHZ", "IDCODE")


def _observed_pin_by_pin(scope: Scope, bit: BitRef, modes: dict[str, str]) -> bool:
    pins = (PinRef.parse(bit.target),) if bit.is_pin else scope.scan_pins(bit.target)
    for pin in pins:
        device = scope.devices[pin.ref].device
        mode = modes[pin.ref]
        if observes_pins(device, mode) and pin.port in scope.observed_ports(pin.ref, mode):
            return True
    return False


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 10_000), picks=st.lists(st.integers(0, len(MODES) - 1), min_size=4,
                                                    max_size=4))
def test_observed_by_any_equals_asking_pin_by_pin(seed: int, picks: list[int]) -> None:
    board = random_board(seed)
    scope = Scope(board)
    modes = {}
    for position, ref in enumerate(board.devices):
        wanted = MODES[picks[position % len(picks)]]
        instructions = board.devices[ref].device.instructions
        modes[ref] = wanted if wanted in instructions else "BYPASS"
    bits = [BitRef(name, False, name) for name in board.nets]
    bits += [BitRef(str(pin), True, net.name) for net in board.nets.values() for pin in net.pins
             if pin.ref in board.devices]
    expected = [_observed_pin_by_pin(scope, bit, modes) for bit in bits]
    assert scope.observed_by_any(bits, modes) == expected
    targets, pins = [bit.target for bit in bits], [bit.is_pin for bit in bits]
    assert Scope(board).observed_by_any(bits, modes, targets, pins) == expected
    # A board always has bits both ways under SAMPLE everywhere: the test is not vacuous there.
    sample = {ref: "SAMPLE" for ref in board.devices}
    assert any(scope.observed_by_any(bits, sample))


# ---- drivers, a column at a time -----------------------------------------------------------

DRIVE_MODES = ("BYPASS", "SAMPLE", "EXTEST", "CLAMP", "INTEST", "HIGHZ")


def _driver_pin_by_pin(scope: Scope, bit: BitRef, modes: dict[str, str]) -> str | None:
    """The rule as the design states it, asked pin by pin: a named pin drives itself if its
    device can drive it in its mode; a net takes the first scan pin in chain order (TDI to
    TDO) that drives the net itself (EXTEST or CLAMP: IEEE 1149.1, the boundary register's
    output cells drive the pins), else the first whose core side INTEST drives."""
    if bit.is_pin:
        return bit.target if scope.can_drive(PinRef.parse(bit.target), modes) else None
    pins = sorted((p for p in scope.nets[bit.target].pins if p.ref in scope.devices),
                  key=lambda p: (scope.devices[p.ref].position, p.port))
    for pin in pins:
        mode = modes[pin.ref]
        if (mode == "CLAMP" or mode == "EXTEST") and pin.port in scope.driver_ports(pin.ref):
            return str(pin)
    for pin in pins:
        if modes[pin.ref] == "INTEST" and pin.port in scope.core_input_ports(pin.ref):
            return str(pin)
    return None


@settings(max_examples=60, deadline=None)
@given(seed=st.integers(0, 10_000), picks=st.lists(st.integers(0, len(DRIVE_MODES) - 1), min_size=4,
                                                    max_size=4), shuffle=st.randoms(use_true_random=False))
def test_column_drivers_equal_choosing_pin_by_pin(seed: int, picks: list[int], shuffle) -> None:  # noqa: ANN001
    board = random_board(seed)
    modes = {ref: DRIVE_MODES[picks[position % len(picks)]]
             for position, ref in enumerate(board.devices)}
    key = tuple(modes.items())
    bits = [BitRef(name, False, name) for name in board.nets]
    bits += [BitRef(str(pin), True, net.name) for net in board.nets.values() for pin in net.pins
             if pin.ref in board.devices]
    shuffle.shuffle(bits)
    expected = [_driver_pin_by_pin(Scope(board), bit, modes) for bit in bits]
    by_column = Scope(board)
    half = len(bits) // 2  # a column after some bits were already chosen one by one
    singles = [by_column.choose_driver(bit, key, modes) for bit in bits[:half]]
    assert singles == expected[:half]
    assert list(by_column.column_drivers(bits, key, modes)) == expected
    targets, pins = [bit.target for bit in bits], [bit.is_pin for bit in bits]
    assert list(Scope(board).column_drivers(bits, key, modes, targets, pins)) == expected
    assert [Scope(board).choose_driver(bit, key, modes) for bit in bits] == expected
    # Everywhere EXTEST, every net with an output cell on it has a driver: not vacuous.
    extest = {ref: "EXTEST" for ref in board.devices}
    assert any(Scope(board).column_drivers(bits, tuple(extest.items()), extest))


def test_column_drivers_on_the_small_board() -> None:
    # U1 Q(0..3) three-state outputs, D bidirectional, IN an input, P two-state (lang_boards).
    board = small_board()
    scope = Scope(board)
    bits = [BitRef("N0", False, "N0"), BitRef("U1.IN", True, "LONE"), BitRef("BUS", False, "BUS"),
            BitRef("U1.P", True, "LAMP"), BitRef("LONE", False, "LONE")]
    extest = {"U1": "EXTEST", "U2": "SAMPLE", "U3": "BYPASS"}
    assert scope.column_drivers(bits, tuple(extest.items()), extest) == (
        "U1.Q(0)", None, "U1.D", "U1.P", None)  # an input cell drives nothing onto its pin
    intest = {"U1": "INTEST", "U2": "SAMPLE", "U3": "EXTEST"}
    # IEEE 1149.1 INTEST: U1's input cells drive its core; U3's output drives BUS itself.
    assert scope.column_drivers(bits, tuple(intest.items()), intest) == (
        None, "U1.IN", "U3.Y", None, "U1.IN")


# ---- group member lists resolved a column at a time ----------------------------------------

class _MemberByMember(Scope):
    """The general path only: every member resolved and reported on its own."""

    def _plain_members(self, members):  # type: ignore[no-untyped-def]  # noqa: ANN001, ANN202
        return None


def _member_pool(board) -> list[str]:  # noqa: ANN001
    pins = [str(pin) for net in board.nets.values() for pin in net.pins]
    taps = [f"{ref}.{entry.device.tap.tck}" for ref, entry in board.devices.items()]
    return list(board.nets) + pins + taps + ["NOPE", "U1", "U1.NOPE", "U9.A", "G0"]


@st.composite
def _group_lists(draw, board):  # noqa: ANN001, ANN202
    nets = list(board.nets)
    scan_pins = [str(pin) for net in board.nets.values() for pin in net.pins if pin.ref in board.devices]
    pool = _member_pool(board)
    groups = []
    for index in range(draw(st.integers(1, 3))):
        kind = draw(st.sampled_from(["nets", "pins", "any"]))
        source = {"nets": nets, "pins": scan_pins, "any": pool + [f"G{i}" for i in range(3)]}[kind]
        names = draw(st.lists(st.sampled_from(source), min_size=1, max_size=8))
        names = [n.lower() if "." in n and draw(st.booleans()) and kind != "nets" else n for n in names]
        groups.append((f"G{index}", names))
    return groups


def _declarations(groups: list[tuple[str, list[str]]]) -> list[ast.GroupDecl]:
    decls = []
    for line, (name, members) in enumerate(groups, start=1):
        signals: list[ast.Signal] = []
        column = 12
        for member in members:
            span = SourceSpan("t.loom", line, column, line, column + len(member))
            ref, dot, port = member.partition(".")
            # Pins named in lower case keep their device ref as written (refs are case-sensitive).
            signals.append(ast.PinSignal(ref.upper(), port, span) if dot else ast.NameSignal(member, span))
            column += len(member) + 2
        decls.append(ast.GroupDecl(name, tuple(signals), SourceSpan("t.loom", line, 1, line, column),
                                   SourceSpan("t.loom", line, 7, line, 7 + len(name))))
    return decls


@settings(max_examples=150, deadline=None)
@given(data=st.data(), seed=st.integers(0, 10_000))
def test_plain_member_lists_resolve_as_member_by_member(data, seed: int) -> None:  # noqa: ANN001
    board = small_board() if seed % 5 == 0 else random_board(seed)
    decls = _declarations(data.draw(_group_lists(board)))
    fast, slow = Scope(board), _MemberByMember(board)
    fast_found, slow_found = Diagnostics(), Diagnostics()
    fast.declare_groups(decls, fast_found)
    slow.declare_groups(decls, slow_found)
    assert fast.groups == slow.groups
    assert fast_found.items == slow_found.items


def test_a_plain_member_list_takes_the_column_path() -> None:
    board = small_board()
    decls = _declarations([("G0", ["N2", "N1", "N0"]), ("G1", ["U1.Q(1)", "U1.d", "U2.A(3)"])])
    scope = Scope(board)
    plain = [scope._plain_members(decl.members) for decl in decls]
    assert plain[0] == [BitRef("N2", False, "N2"), BitRef("N1", False, "N1"), BitRef("N0", False, "N0")]
    # Ports are matched case-insensitively and named as the BSDL spells them; U2.A(3) sits on Y.
    assert plain[1] == [BitRef("U1.Q(1)", True, "N1"), BitRef("U1.D", True, "BUS"),
                        BitRef("U2.A(3)", True, "Y")]
    found = Diagnostics()
    scope.declare_groups(decls, found)
    assert not found.items and scope.groups["G1"] == tuple(plain[1])
    # A TAP pin, a part's pin or a group among the members: resolved one by one instead.
    for members in (["N0", "G0"], ["U1.Q(0)", "U1.TCK"], ["U1.Q(0)", "U10.A"], ["N0", "U1.Q(0)"]):
        assert scope._plain_members(_declarations([("G2", members)])[0].members) is None

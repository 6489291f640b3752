"""The scope's whole-column answers agree with its per-pin tables, bit for bit.

`Scope.observed_by_any` decides for a whole column of bits whether any scan pin captures each
one in a set of modes (the front end's "no device observes" check). It must say exactly what
asking pin by pin says: a bit is observed when one of its scan pins sits on a device whose mode
selects the boundary register (IEEE 1149.1, Capture-DR of the boundary register) and the pin
has a cell that captures it in that mode (Annex B CELL_INFO, through `observed_ports`).
"""

from __future__ import annotations

from hypothesis import given, settings
from hypothesis import strategies as st

from random_boards import random_board

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
    # A board always has bits both ways under SAMPLE everywhere: the test is not vacuous there.
    sample = {ref: "SAMPLE" for ref in board.devices}
    assert any(scope.observed_by_any(bits, sample))

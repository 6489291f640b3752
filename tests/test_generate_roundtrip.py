"""Round trips: generate, compile, inject one fault, play it on the virtual board, diagnose.

For every single fault of the board's universe (`sim.faults.fault_universe`: every receiving
pin open, every net stuck at 0 and at 1, shorts between nets on neighbouring package pins and
onto TAP signals) that the capture shows, the injected fault must be inside the group the
diagnosis reports first. With true/complement codes, a wired-AND or wired-OR short between
two coded nets must be diagnosed to exactly that pair (Wagner 1987: no AND or OR of two codes
is a third net's code, and no code is all 0 or all 1).

A fault is counted as detected when the capture differs from the expectations on a compared
bit. The capture records a bit the virtual board leaves undefined as 0, as the simulate
command writes it, so a fault that only makes bits undefined may pass unseen.
"""

from __future__ import annotations

import random
from pathlib import Path

import pytest
from bitarray import bitarray
from random_boards import random_board

from scanloom.analysis.capture_log import CaptureLog
from scanloom.analysis.diagnose import diagnose_capture
from scanloom.analysis.generate import generate_program
from scanloom.analysis.scan_pins import BoardPins
from scanloom.backend.cycles import lay_out_cycles
from scanloom.backend.schedule import schedule
from scanloom.diagnostics import Diagnostics
from scanloom.lang.frontend import compile_source
from scanloom.models.board_loader import load_board
from scanloom.sim.electrical import build_electrical
from scanloom.sim.fault_effects import fault_effect
from scanloom.sim.faults import SHORT, Fault, fault_universe
from scanloom.sim.virtual_board import VirtualBoard

DEMO = Path(__file__).resolve().parents[1] / "examples" / "irrigation" / "irrigation.yaml"


class RoundTrip:
    """A generated program on a board, ready to play faults and diagnose their captures."""

    def __init__(self, board, kind: str, codes: str) -> None:
        self.board = board
        self.generated = generate_program(board, "board.yaml", kind, codes)
        program = compile_source(self.generated.text, "generated.loom", board, Diagnostics())
        self.scan = schedule(program, board)
        self.cycles = lay_out_cycles(self.scan)
        self.electrical = build_electrical(board, Diagnostics())
        self.pins = BoardPins(board)

    def diagnose(self, fault: Fault):
        """The diagnosis of the fault's capture, or None when the capture shows nothing."""
        result = VirtualBoard(self.electrical, self.scan, self.cycles, fault_effect(self.electrical, fault)).run()
        values = bitarray(result.tdo & result.known, endian="big")  # undefined recorded as 0
        known = bitarray(len(values), endian="big")
        known.setall(1)
        found = diagnose_capture(self.scan, self.cycles, self.board, CaptureLog("capture", values, known),
                                 "generated.json", self.pins)
        return None if found.passed else found

    def coded_nodes(self) -> set[tuple[str, ...]]:
        """Nodes that carry a code in every interconnect round."""
        rounds = [set(test.nodes) for test in self.generated.interconnect]
        return set.intersection(*rounds) if rounds else set()


def check_universe(trip: RoundTrip) -> tuple[int, list[str]]:
    detected, missed = 0, []
    for fault in fault_universe(trip.electrical):
        found = trip.diagnose(fault)
        if found is None:
            continue
        detected += 1
        first = found.explanations[0] if found.explanations else None
        if first is None or fault.spec not in first.faults:
            missed.append(fault.spec)
    return detected, missed


def check_pairs(trip: RoundTrip, pairs: list[tuple[str, str]]) -> list[str]:
    """Every wired-AND and wired-OR short of the pairs must come back as exactly that pair."""
    node_of = trip.pins.node_of_net
    wrong = []
    for a, b in pairs:
        for mode in ("and", "or"):
            spec = f"short:{a},{b}" + (":or" if mode == "or" else "")
            fault = Fault(SHORT, spec, (a, b), mode=mode)
            found = trip.diagnose(fault)
            assert found is not None, f"{spec} is not detected"
            top = found.explanations[0].candidates
            shorted = {frozenset((node_of[a], node_of[b]))}
            named = [c[0] for c in top]
            if len(top) != 1 or not all(s.startswith("short:") for s in named) or \
                    {frozenset(node_of[n] for n in s.split(":")[1].split(",")) for s in named} != shorted \
                    or (mode == "or") != named[0].endswith(":or"):
                wrong.append(f"{spec}: {top}")
    return wrong


def coded_pairs(trip: RoundTrip, universe_only: bool, sample: int, seed: int) -> list[tuple[str, str]]:
    coded = trip.coded_nodes()
    order = list(trip.board.nets)
    pairs: list[tuple[str, str]] = []
    if universe_only:
        for fault in fault_universe(trip.electrical, ("shorts",)):
            if fault.kind == SHORT and all(trip.pins.node_of_net[n] in coded for n in fault.nets):
                pairs.append(fault.nets)  # type: ignore[arg-type]
    nodes = sorted(coded)
    rng = random.Random(seed)
    everything = [(x[0], y[0]) for i, x in enumerate(nodes) for y in nodes[i + 1:]]
    rng.shuffle(everything)
    pairs += everything[:sample]
    return [tuple(sorted(p, key=order.index)) for p in dict.fromkeys(pairs)]  # type: ignore[misc]

# ---------------------------------------------------------------------------- demo board


@pytest.fixture(scope="module")
def demo():
    return load_board(DEMO, Diagnostics())


def test_demo_every_detected_fault_is_in_the_first_group(demo):
    detected, missed = check_universe(RoundTrip(demo, "all", "counting"))
    assert detected > 100  # the demo board's universe: 332 faults
    assert missed == []


def test_demo_true_complement_shorts_come_back_as_exactly_their_pair(demo):
    trip = RoundTrip(demo, "interconnect", "true-complement")
    detected, missed = check_universe(trip)
    assert detected > 100 and missed == []
    pairs = coded_pairs(trip, universe_only=True, sample=12, seed=1)
    assert len(pairs) >= 20
    assert check_pairs(trip, pairs) == []

# ---------------------------------------------------------------------------- random boards


@pytest.mark.parametrize("seed", [1, 3, 5, 9, 11, 16])
def test_random_boards_every_detected_fault_is_in_the_first_group(seed):
    detected, missed = check_universe(RoundTrip(random_board(seed), "all", "counting"))
    assert detected > 0
    assert missed == []


@pytest.mark.parametrize("seed", [2, 6, 18, 23, 24, 29])
def test_random_boards_true_complement_round_trip(seed):
    trip = RoundTrip(random_board(seed), "interconnect", "true-complement")
    detected, missed = check_universe(trip)
    assert detected > 0 and missed == []
    assert check_pairs(trip, coded_pairs(trip, universe_only=True, sample=6, seed=seed)) == []

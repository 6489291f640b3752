"""Faults graded from per-node tables (analysis.node_faults) against the general grader.

The oracle is the general path of `FaultGrader` (`fast=False`), which tests/test_grading.py
holds to the cycle-level virtual board on every example fault and on random boards; here the
fast path must give exactly its verdicts (verdict, first bit and its meaning, reason).
"""

from __future__ import annotations

from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from scanloom.analysis.board_runs import load_program_run
from scanloom.analysis.grading import FaultGrader
from scanloom.diagnostics import Diagnostics
from scanloom.sim.faults import OPEN_PIN, SHORT, STUCK_AT, fault_universe, parse_fault_specs
from test_grading import compiled_random_case

EXAMPLES = Path(__file__).parents[1] / "examples" / "irrigation"


def _differences(electrical, program, cycles, faults) -> tuple[list[str], int]:  # type: ignore[no-untyped-def]
    """Faults whose fast verdict differs from the general one, and how many went the fast way."""
    fast = FaultGrader(electrical, program, cycles)
    general = FaultGrader(electrical, program, cycles, fast=False)
    assert fast._node_faults is not None and general._node_faults is None
    problems = []
    taken = 0
    for fault in faults:
        taken += fast._node_faults.grade(fault) is not None
        mine, reference = fast.grade(fault), general.grade(fault)
        if mine != reference:
            problems.append(f"{fault.spec}: fast {mine}, general {reference}")
    return problems, taken


def _every_kind(electrical) -> list:  # type: ignore[no-untyped-def]
    """The universe plus wired-OR and dominant shorts and whole-net opens on the first nets."""
    faults = list(fault_universe(electrical))
    nets = list(electrical.board.nets)
    specs = [f"open:{nets[-1]}"]
    if len(nets) > 1:
        specs += [f"short:{nets[0]},{nets[-1]}:or", f"short:{nets[0]},{nets[1]}:or"]
        driver = next((pin for pin, d in electrical.drivers.items()
                       if electrical.net_of_pin.get(pin) in (nets[0], nets[1])), None)
        if driver is not None:
            specs.append(f"short:{nets[0]},{nets[1]}:{driver}")
    return faults + list(parse_fault_specs(specs, electrical))


@pytest.mark.parametrize("stem", ["cluster_mux", "valve_nets", "registers"])
def test_node_tables_give_the_general_verdicts_on_every_example_fault(stem: str) -> None:
    run = load_program_run(EXAMPLES / f"{stem}.loom", Diagnostics())
    faults = _every_kind(run.electrical)
    problems, taken = _differences(run.electrical, run.program, run.cycles, faults)
    assert problems == []
    assert taken > len(faults) // 2  # most of a universe stays on its own nodes


def test_faults_on_nodes_logic_reads_go_the_general_way() -> None:
    # cluster_mux's U10 reads its select line: a stuck-at there changes the mux output, a
    # node the fault does not name, so the node tables must not answer for it.
    run = load_program_run(EXAMPLES / "cluster_mux.loom", Diagnostics())
    electrical = run.electrical
    grader = FaultGrader(electrical, run.program, run.cycles)
    assert grader._node_faults is not None
    read = {electrical.node_of_pin[pin] for pin in electrical.readers_of_pin}
    read_nets = [net for net, node in electrical.node_of_net.items() if node in read]
    assert read_nets
    for net in read_nets:
        for fault in parse_fault_specs([f"stuck-at-0:{net}", f"open:{net}"], electrical):
            assert grader._node_faults.grade(fault) is None, fault.spec
    untouched = [net for net, node in electrical.node_of_net.items()
                 if node not in read and not electrical.nodes[node].tap]
    kinds = {f.kind for f in fault_universe(electrical)
             if set(f.nets) <= set(untouched) and grader._node_faults.grade(f) is not None}
    assert kinds == {OPEN_PIN, STUCK_AT, SHORT}


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(st.data())
def test_node_tables_give_the_general_verdicts_on_random_boards(data) -> None:  # type: ignore[no-untyped-def]
    _, electrical, scan, cycles = compiled_random_case(data)
    problems, _ = _differences(electrical, scan, cycles, _every_kind(electrical))
    assert problems == []

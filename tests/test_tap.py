"""The TAP controller model against IEEE Std 1149.1's state diagram and an outside graph library."""

from __future__ import annotations

import itertools

import networkx as nx
import pytest

from scanloom.backend.tap import (
    NEXT_STATE,
    SHIFT_STATES,
    STABLE_STATES,
    TapState,
    next_state,
    path_length,
    state_from_name,
    tms_path,
    walk,
)

S = TapState

# IEEE Std 1149.1-2001, clause 6.1, Figure 6-1 "TAP controller state diagram" (clause and figure
# numbers from memory), transcribed edge by edge as (state, TMS) -> next state, written out by
# standard names here so the check does not reuse the module's own table.
DIAGRAM = {
    ("Test-Logic-Reset", 0): "Run-Test/Idle",
    ("Test-Logic-Reset", 1): "Test-Logic-Reset",
    ("Run-Test/Idle", 0): "Run-Test/Idle",
    ("Run-Test/Idle", 1): "Select-DR-Scan",
    ("Select-DR-Scan", 0): "Capture-DR",
    ("Select-DR-Scan", 1): "Select-IR-Scan",
    ("Capture-DR", 0): "Shift-DR",
    ("Capture-DR", 1): "Exit1-DR",
    ("Shift-DR", 0): "Shift-DR",
    ("Shift-DR", 1): "Exit1-DR",
    ("Exit1-DR", 0): "Pause-DR",
    ("Exit1-DR", 1): "Update-DR",
    ("Pause-DR", 0): "Pause-DR",
    ("Pause-DR", 1): "Exit2-DR",
    ("Exit2-DR", 0): "Shift-DR",
    ("Exit2-DR", 1): "Update-DR",
    ("Update-DR", 0): "Run-Test/Idle",
    ("Update-DR", 1): "Select-DR-Scan",
    ("Select-IR-Scan", 0): "Capture-IR",
    ("Select-IR-Scan", 1): "Test-Logic-Reset",
    ("Capture-IR", 0): "Shift-IR",
    ("Capture-IR", 1): "Exit1-IR",
    ("Shift-IR", 0): "Shift-IR",
    ("Shift-IR", 1): "Exit1-IR",
    ("Exit1-IR", 0): "Pause-IR",
    ("Exit1-IR", 1): "Update-IR",
    ("Pause-IR", 0): "Pause-IR",
    ("Pause-IR", 1): "Exit2-IR",
    ("Exit2-IR", 0): "Shift-IR",
    ("Exit2-IR", 1): "Update-IR",
    ("Update-IR", 0): "Run-Test/Idle",
    ("Update-IR", 1): "Select-DR-Scan",
}


def test_sixteen_states_with_the_standards_names() -> None:
    # IEEE Std 1149.1 names sixteen controller states (clause 6.1).
    names = {state.standard_name for state in TapState}
    assert len(TapState) == 16
    assert names == {source for source, _ in DIAGRAM}


@pytest.mark.parametrize("state, tms", sorted(DIAGRAM))
def test_every_next_state_entry_matches_the_diagram(state: str, tms: int) -> None:
    source = state_from_name(state)
    assert next_state(source, tms).standard_name == DIAGRAM[(state, tms)]
    assert NEXT_STATE[source][tms].standard_name == DIAGRAM[(state, tms)]


def test_stable_states_are_those_that_hold_under_a_constant_tms() -> None:
    # IEEE Std 1149.1, clause 6.1: the stable states are Test-Logic-Reset, Run-Test/Idle,
    # Shift-DR, Pause-DR, Shift-IR and Pause-IR -- exactly the states with a self-loop.
    self_loops = {source for (source, tms), target in DIAGRAM.items() if source == target}
    assert {s.standard_name for s in STABLE_STATES} == self_loops
    assert SHIFT_STATES == {S.SHIFT_DR, S.SHIFT_IR}


def _diagram_graph() -> nx.MultiDiGraph:
    graph = nx.MultiDiGraph()
    for (source, tms), target in DIAGRAM.items():
        graph.add_edge(source, target, tms=tms)
    return graph


@pytest.mark.parametrize("source, target", list(itertools.product(TapState, TapState)))
def test_shortest_paths_agree_with_networkx(source: TapState, target: TapState) -> None:
    # networkx (an outside reference library) computes shortest paths over the standard's diagram.
    graph = _diagram_graph()
    expected = nx.shortest_path_length(graph, source.standard_name, target.standard_name)
    path = tms_path(source, target)
    assert len(path) == expected == path_length(source, target)
    assert walk(source, path)[-1] is target


def test_five_tms_ones_reach_test_logic_reset_from_every_state() -> None:
    # IEEE Std 1149.1, clause 6.1: holding TMS high for five rising edges of TCK brings the
    # controller to Test-Logic-Reset whatever its state.
    for state in TapState:
        assert walk(state, [1] * 5)[-1] is S.TEST_LOGIC_RESET
    # ... and five is needed: from Shift-DR four are not enough.
    assert walk(S.SHIFT_DR, [1] * 4)[-1] is not S.TEST_LOGIC_RESET


def test_published_walks() -> None:
    # Common practice (every JTAG primer walks it): from Run-Test/Idle, TMS 1,1,0,0 enters Shift-IR
    # and TMS 1,0,0 enters Shift-DR.
    assert walk(S.RUN_TEST_IDLE, [1, 1, 0, 0])[-1] is S.SHIFT_IR
    assert walk(S.RUN_TEST_IDLE, [1, 0, 0])[-1] is S.SHIFT_DR
    assert tms_path(S.RUN_TEST_IDLE, S.SHIFT_IR) == (1, 1, 0, 0)
    assert tms_path(S.RUN_TEST_IDLE, S.SHIFT_DR) == (1, 0, 0)
    # Leaving a shift: TMS 1,1 passes Exit1 to Update; one more 0 rests in Run-Test/Idle.
    assert walk(S.SHIFT_DR, [1, 1, 0]) == [S.SHIFT_DR, S.EXIT1_DR, S.UPDATE_DR, S.RUN_TEST_IDLE]
    # From Update-xR a new scan starts straight at Select-DR-Scan (TMS=1), not via Run-Test/Idle.
    assert tms_path(S.UPDATE_DR, S.SHIFT_IR) == (1, 1, 0, 0)
    assert tms_path(S.UPDATE_IR, S.SHIFT_DR) == (1, 0, 0)
    assert tms_path(S.TEST_LOGIC_RESET, S.SHIFT_DR) == (0, 1, 0, 0)


def test_state_names_in_both_spellings() -> None:
    assert state_from_name("RUN_TEST_IDLE") is S.RUN_TEST_IDLE
    assert state_from_name("Run-Test/Idle") is S.RUN_TEST_IDLE
    assert state_from_name("shift-dr") is S.SHIFT_DR
    with pytest.raises(ValueError, match=r"^not a TAP controller state: 'Shift-XR'$"):
        state_from_name("Shift-XR")

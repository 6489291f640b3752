"""Interconnect codes against the published formulas and properties."""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from scanloom.analysis.codes import make_codes, vector_count


@pytest.mark.parametrize("nets", [1, 2, 3, 5, 6, 7, 14, 30, 62, 1000, 30000])
def test_modified_counting_vector_count(nets: int) -> None:
    # Goel & McMahon 1982: the modified counting sequence needs ceil(log2(N + 2)) vectors.
    assert vector_count("counting", nets) == math.ceil(math.log2(nets + 2))


def test_five_nets_need_three_vectors_hand_worked() -> None:
    # Five nets get codes 1..5 = 001, 010, 011, 100, 101 over three vectors (bit v = vector v):
    # no code is 000 or 111, so a net stuck at 0 or 1 cannot pass for a good one.
    codes = make_codes("counting", 5)
    assert codes.vectors == 3
    assert codes.codes == (0b001, 0b010, 0b011, 0b100, 0b101)
    assert codes.vector(0) == (1, 0, 1, 0, 1)  # the first parallel vector, net by net


@pytest.mark.parametrize("nets", [1, 5, 6, 100, 30000])
def test_true_complement_vector_count(nets: int) -> None:
    # Wagner 1987: the counting codes and their complements, 2 * ceil(log2(N + 2)) vectors.
    assert vector_count("true-complement", nets) == 2 * math.ceil(math.log2(nets + 2))


@pytest.mark.parametrize("nets", [1, 4, 17])
def test_walking_one_vector_count(nets: int) -> None:
    # Walking one: one vector per net, each net alone at 1 once (common practice).
    codes = make_codes("walking-one", nets)
    assert codes.vectors == nets
    assert all(bin(code).count("1") == 1 for code in codes.codes)


@given(st.sampled_from(["counting", "true-complement", "walking-one"]), st.integers(1, 300))
def test_codes_unique_and_never_constant(kind: str, nets: int) -> None:
    codes = make_codes(kind, nets)
    full = (1 << codes.vectors) - 1
    assert len(set(codes.codes)) == nets  # every net has its own code (Kautz 1974)
    if kind != "walking-one" or nets > 1:
        assert all(code not in (0, full) for code in codes.codes)  # Goel & McMahon 1982


@given(st.integers(3, 120), st.data())
def test_true_complement_is_aliasing_free_for_two_net_shorts(nets: int, data: st.DataObject) -> None:
    # Wagner 1987: with true/complement codes the AND or the OR of two different codes is never
    # the code of any net, so a wired-AND/OR short of two nets cannot look like a good net.
    codes = make_codes("true-complement", nets).codes
    a = data.draw(st.integers(0, nets - 1))
    b = data.draw(st.integers(0, nets - 1).filter(lambda x: x != a))
    all_codes = set(codes)
    assert codes[a] & codes[b] not in all_codes
    assert codes[a] | codes[b] not in all_codes

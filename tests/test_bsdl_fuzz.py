"""Random damage to valid BSDL files never escapes as anything but ScanloomError.

Deletions, insertions of characters that matter to BSDL, and case changes are applied to the
fixtures; the reader must either read the result or report diagnostics whose spans lie in the
file and render with their source line: no Python exception may reach the user.
"""

from __future__ import annotations

from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from scanloom.diagnostics import Diagnostics, ScanloomError
from scanloom.models.bsdl import parse_bsdl
from scanloom.models.device import DeviceModel

FIXTURES = Path(__file__).parent / "fixtures" / "bsdl"
TEXTS = {path.name: path.read_bytes().decode("latin-1") for path in sorted(FIXTURES.glob("*.bsd"))}

# Pieces that change the meaning of BSDL text when they appear or vanish.
PIECES = ['"', "(", ")", ";", ",", ":", "&", "--", "\n", "\r\n", "*", "[", "]", "0", "1", "X",
          " ", "\t", "end", "entity", "is", "of", "attribute", "99", "1.0e+9", "BC_1", "é",
          "\x00", "bit_vector (3 downto 0)", "control", "#", "''", '""']

mutation = st.one_of(
    st.tuples(st.just("delete"), st.floats(0, 1), st.integers(1, 40)),
    st.tuples(st.just("insert"), st.floats(0, 1), st.sampled_from(PIECES)),
    st.tuples(st.just("case"), st.floats(0, 1), st.integers(1, 200)),
)


def damage(text: str, mutations: list[tuple[str, float, object]]) -> str:
    for kind, where, what in mutations:
        at = int(where * len(text))
        if kind == "delete":
            assert isinstance(what, int)
            text = text[:at] + text[at + what:]
        elif kind == "insert":
            assert isinstance(what, str)
            text = text[:at] + what + text[at:]
        else:
            assert isinstance(what, int)
            text = text[:at] + text[at:at + what].swapcase() + text[at + what:]
    return text


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(name=st.sampled_from(sorted(TEXTS)), mutations=st.lists(mutation, min_size=1, max_size=4))
def test_damaged_files_give_only_scanloom_errors(name: str, mutations: list) -> None:
    text = damage(TEXTS[name], mutations)
    diagnostics = Diagnostics()
    try:
        device = parse_bsdl(text, name, diagnostics)
    except ScanloomError as error:
        assert any(d.severity == "error" for d in error.diagnostics)
        line_count = max(1, len(text.splitlines()))
        for diagnostic in error.diagnostics:
            if diagnostic.span is not None:
                assert 1 <= diagnostic.span.line <= line_count + 1
                assert diagnostic.span.column >= 1
        assert error.render()
    else:
        assert isinstance(device, DeviceModel)
        assert not diagnostics.errors

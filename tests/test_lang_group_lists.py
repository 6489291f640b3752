"""Group member lists lexed whole (MEMBER_LIST) parse exactly as the general group rule does.

A list of plain names and pins is taken by the lexer as one token and split by the front end;
everything else goes through the general rule `"[" _NL? signals _NL? "]"`. A parser built
from the same grammar without the shortcut is the reference: for random lists — names, pins,
spaces, comments and line breaks in allowed and in forbidden places — both must accept the
same texts and give the same members with the same spans.
"""

from __future__ import annotations

from importlib import resources

from hypothesis import given, settings
from hypothesis import strategies as st
from lark import Lark
from lark.exceptions import LarkError

from scanloom.lang.parser import _ToAst, parse_text  # the transformer both parsers share
from scanloom.diagnostics import ScanloomError


def _reference_parser() -> Lark:
    text = resources.files("scanloom.grammar").joinpath("loom.lark").read_text()
    kept = [line for line in text.splitlines()
            if "MEMBER_LIST" not in line]
    return Lark("\n".join(kept) + "\n", parser="lalr", lexer="contextual", keep_all_tokens=True,
                transformer=_ToAst("t.loom"), maybe_placeholders=False)


REFERENCE = _reference_parser()

names = st.sampled_from(["N0", "VALVE_D7", "x", "_a1", "U1.PA(0)", "U12.Q(31)", "U3.EN", "X", "Z"])
gaps = st.sampled_from(["", " ", "  ", "\t", " # note, U9.Y(1)\n", "\n", "\n    ", "\r\n  ",
                        "\n  # a comment line\n  ", " \n",
                        # A comment runs to the end of its line, whatever it holds: a "]" or a
                        # name in it neither closes the list nor adds a member.
                        " # was [N0, N1]", "  #B", " # old ] list\n", "#x]\n  "])


@st.composite
def group_texts(draw) -> str:
    members = draw(st.lists(names, min_size=1, max_size=6))
    text = "group G = [" + draw(gaps)
    for index, member in enumerate(members):
        if index:
            text += draw(st.sampled_from(["", " ", "\n "])) + "," + draw(gaps)  # "\n," is not allowed
        text += member
    return text + draw(gaps) + "]\n"


def members_of(program) -> list[tuple]:  # noqa: ANN001
    (group,) = program.items
    return [(type(m).__name__, getattr(m, "name", None), getattr(m, "ref", None),
             getattr(m, "port", None), m.span) for m in group.members] + [group.span]


def _reference(text: str):  # noqa: ANN202
    try:
        return members_of(REFERENCE.parse(text))
    except LarkError:
        return None


def _ours(text: str):  # noqa: ANN202
    try:
        return members_of(parse_text(text, "t.loom"))
    except ScanloomError:
        return None


@settings(max_examples=300, deadline=None)
@given(group_texts())
def test_member_lists_parse_like_the_general_rule(text):
    assert _ours(text) == _reference(text)


def test_a_bracket_in_a_comment_does_not_close_the_list():
    # The list is never closed: the general rule reports it, and so must the shortcut.
    text = "group G = [N0, N1  # was [N0, N1, N2]\ngroup H = [A]\n"
    assert _reference(text) is None and _ours(text) is None
    closed = "group G = [N0,  # was [N0, N1]\n    N1]\n"
    assert _ours(closed) == _reference(closed) is not None


def test_a_list_with_a_slice_takes_the_general_rule():
    text = "group G = [A, DATA[7:4],\n    U1.PA(0)]\n"
    assert _ours(text) == _reference(text) is not None
    assert [m[0] for m in _ours(text)[:-1]] == ["NameSignal", "SliceSignal", "PinSignal"]


def test_the_shortcut_is_taken_for_plain_lists():
    # The reference needs a token per member; ours one for the list (seen in lark's tokens).
    from scanloom.lang.parser import grammar_parser

    tokens = [t.type for t in grammar_parser("t.loom").lex("group G = [A, B,\n  U1.C(2)]\n")]
    assert "MEMBER_LIST" in tokens and "NAME" in tokens  # the group's own name stays a NAME


# Long lists of one kind (nets only, pins only) are split a column at a time; mixed ones and
# lists with comments take the same path with more work. Both must place every member exactly.
net_names = st.sampled_from(["N0", "VALVE_D7", "x", "_a1", "DATA_12", "X", "Z"])
pin_names = st.sampled_from(["U1.PA(0)", "U12.Q(31)", "U3.EN", "u7.d_2", "U1.PA(10)"])
separators = st.sampled_from([", ", ",", ",\n    ", ",  # note\n  ", ",\r\n\t", ", \n\n  "])


@st.composite
def long_group_texts(draw) -> str:
    kind = draw(st.sampled_from([net_names, pin_names, names]))
    members = draw(st.lists(kind, min_size=1, max_size=40))
    text = "group G = [" + draw(st.sampled_from(["", "\n    ", " # first\n  "]))
    for index, member in enumerate(members):
        if index:
            text += draw(separators)
        text += member
    return draw(st.sampled_from(["", "board \"b.yaml\"\n", "\n\n# a header\n"])) + text + \
        draw(st.sampled_from(["]", "\n]", " # last\n]"])) + "\n"


def _members_anywhere(text: str, parse):  # noqa: ANN001, ANN202
    try:
        program = parse(text)
    except (LarkError, ScanloomError):
        return None
    (group,) = [item for item in program.items if hasattr(item, "members")]
    return [(type(m).__name__, getattr(m, "name", None), getattr(m, "ref", None),
             getattr(m, "port", None), m.span) for m in group.members] + [group.span, group.name_span]


@settings(max_examples=200, deadline=None)
@given(long_group_texts())
def test_long_member_lists_parse_like_the_general_rule(text):
    ours = _members_anywhere(text, lambda t: parse_text(t, "t.loom"))
    assert ours is not None
    assert ours == _members_anywhere(text, REFERENCE.parse)

"""The canonical formatter: formatting never changes what a program says, and is stable.

Property (hypothesis): for generated programs written with random spacing, blank lines and
comments, parse(fmt(text)) == parse(text), fmt(fmt(text)) == fmt(text), and every comment
survives. The same holds for every example program.
"""

from __future__ import annotations

from collections import Counter
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from scanloom.lang.fmt import MAX_WIDTH, format_text
from scanloom.lang.parser import parse_text

EXAMPLES = Path(__file__).resolve().parent.parent / "examples" / "irrigation"
KEYWORDS = {"board", "tck", "include", "group", "default", "mode", "finish", "in", "fight",
            "limit", "test", "step", "drive", "release", "expect", "wait", "read", "write",
            "using", "allow", "table", "computed", "X", "Z", "x", "z", "reset", "idle"}

names = st.from_regex(r"[A-Z][A-Z0-9_]{0,6}", fullmatch=True).filter(lambda n: n not in KEYWORDS)
lower_names = st.from_regex(r"[a-z][a-z0-9_]{0,8}", fullmatch=True).filter(
    lambda n: n not in KEYWORDS)
ports = st.one_of(names, st.builds(lambda n, i: f"{n}({i})", names, st.integers(0, 31)))
pins = st.builds(lambda r, p: f"{r}.{p}", names, ports)
slices = st.one_of(
    st.builds(lambda n, h, l: f"{n}[{max(h, l)}:{min(h, l)}]", names, st.integers(0, 31),
              st.integers(0, 31)),
    st.builds(lambda n, i: f"{n}[{i}]", names, st.integers(0, 31)))
signals = st.one_of(names, pins, slices)
literals = st.one_of(
    st.from_regex(r"0b[01XZxz]{1,12}", fullmatch=True),
    st.from_regex(r"0x[0-9A-Fa-fXx]{1,6}", fullmatch=True),
    st.integers(0, 5000).map(str))
values = st.one_of(literals, st.sampled_from(["X", "Z", "computed", "x"]))
strings = st.text(st.characters(codec="ascii", exclude_characters="\r\n\x00\x0b\x0c\x1c\x1d\x1e"
                                "\x85"), max_size=20).map(
    lambda s: '"' + s.replace("\\", "\\\\").replace('"', '\\"') + '"')
comments = st.from_regex(r"#[ -~]{0,20}", fullmatch=True)
spaces = st.sampled_from([" ", "  ", "\t", "   "])
units = st.sampled_from(["clocks", "ms", "us", "ns", "s", "MHz", "kHz"])
quantities = st.builds(lambda n, u: f"{n} {u}", st.one_of(st.integers(0, 10**6).map(str),
                                                         st.sampled_from(["2.5", "0.125"])), units)


@st.composite
def spaced(draw, parts: list[str]) -> str:
    """Parts joined with random blanks."""
    return draw(spaces).join(parts) if len(parts) < 2 else "".join(
        p + (draw(spaces) if i < len(parts) - 1 else "") for i, p in enumerate(parts))


@st.composite
def assignment_list(draw, keyword: str) -> str:
    items = draw(st.lists(st.builds(lambda s, v: f"{s} = {v}", signals, values), min_size=1,
                          max_size=4))
    joiners = [draw(st.sampled_from([", ", ",", " , ", ",\n        "])) for _ in items[1:]]
    text = keyword + " " + items[0]
    for joiner, item in zip(joiners, items[1:]):
        text += joiner + item
    return text


@st.composite
def step_statement(draw) -> str:
    kind = draw(st.sampled_from(["drive", "expect", "release", "wait", "read", "write", "allow"]))
    if kind in ("drive", "expect"):
        return draw(assignment_list(kind))
    if kind == "release":
        return "release " + ", ".join(draw(st.lists(signals, min_size=1, max_size=3)))
    if kind == "wait":
        return "wait " + draw(quantities)
    if kind == "allow":
        return f"allow {draw(lower_names)} {draw(strings)}"
    using = draw(st.one_of(st.none(), names))
    text = f"{kind} {draw(names)} {draw(names)}" + (f" using {using}" if using else "")
    if kind == "write":
        return text + " " + draw(values)
    expected = draw(st.one_of(st.none(), values))
    return text + (f" expect {expected}" if expected else "")


@st.composite
def table(draw, indent: str) -> str:
    drives = draw(st.lists(signals, max_size=3))
    expects = draw(st.lists(signals, max_size=3))
    name = draw(st.one_of(st.none(), lower_names))
    lines = [indent + "table" + (f" {name}" if name else "") + " {",
             indent + "    " + " ".join(drives) + " -> " + " ".join(expects)]
    for _ in range(draw(st.integers(0, 4))):
        if draw(st.booleans()):
            lines.append(indent + "    " + draw(comments))
        row = [draw(values) for _ in drives] + ["->"] + [draw(values) for _ in expects]
        lines.append(indent + "    " + draw(spaced(row)) + (("  " + draw(comments))
                                                             if draw(st.booleans()) else ""))
    lines.append(indent + "}")
    return "\n".join(lines)


@st.composite
def loom_test(draw) -> str:
    lines = [f"test {draw(lower_names)} {draw(strings)} {{" +
             (("  " + draw(comments)) if draw(st.booleans()) else "")]
    for _ in range(draw(st.integers(0, 5))):
        kind = draw(st.sampled_from(["mode", "step", "table", "statement", "comment", "blank"]))
        if kind == "mode":
            refs = draw(st.lists(names, min_size=1, max_size=3))
            lines.append("    " + ", ".join(refs) + " " + draw(names))
        elif kind == "step":
            lines.append(f"    step {draw(lower_names)} {{")
            for _ in range(draw(st.integers(0, 4))):
                if draw(st.booleans()):
                    lines.append("        " + draw(comments))
                if draw(st.booleans()):
                    lines.append("")
                lines.append("        " + draw(step_statement()))
            lines.append("    }" + (("  " + draw(comments)) if draw(st.booleans()) else ""))
        elif kind == "table":
            lines.append(draw(table("    ")))
        elif kind == "statement":
            lines.append("    " + draw(step_statement().filter(
                lambda s: not s.startswith(("drive", "expect", "release")))))
        elif kind == "comment":
            lines.append("    " + draw(comments))
        else:
            lines.append("")
    lines.append("}")
    return "\n".join(lines)


@st.composite
def header_item(draw) -> str:
    kind = draw(st.sampled_from(["board", "tck", "include", "group", "default", "finish",
                                 "fight", "comment", "blank"]))
    if kind in ("board", "include"):
        return f"{kind} {draw(strings)}"
    if kind == "tck":
        return "tck " + draw(quantities)
    if kind == "group":
        members = draw(st.lists(signals, min_size=1, max_size=30))
        return f"group {draw(names)} = [" + ", ".join(members) + "]"
    if kind == "default":
        return "default mode " + draw(names)
    if kind == "finish":
        return "finish in " + draw(st.sampled_from(["reset", "idle"]))
    if kind == "fight":
        return "fight limit " + draw(quantities)
    if kind == "comment":
        return draw(comments)
    return ""


@st.composite
def programs(draw) -> str:
    parts = draw(st.lists(st.one_of(header_item(), loom_test()), max_size=6))
    text = "\n".join(parts)
    return text + draw(st.sampled_from(["", "\n", "\n\n"]))


def comment_texts(text: str) -> Counter:
    return Counter(c.text for c in parse_text(text).comments)


def check_round_trip(text: str) -> str:
    formatted = format_text(text)
    assert parse_text(formatted) == parse_text(text)
    assert format_text(formatted) == formatted
    assert comment_texts(formatted) == comment_texts(text)
    return formatted


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(programs())
def test_formatting_keeps_the_tree_and_is_stable(text: str):
    check_round_trip(text)


@pytest.mark.parametrize("path", sorted(EXAMPLES.rglob("*.loom")), ids=lambda p: p.name)
def test_examples_are_canonical_and_round_trip(path: Path):
    text = path.read_text()
    assert check_round_trip(text) == text


def test_layout_of_a_messy_program():
    messy = ('board   "b.yaml"\ntck 10   MHz\n# about the test\ntest  t   "title" {  # why\n'
             "U1,U2   EXTEST\n  step   s {\n drive A=1,B =0b10\n\n\n expect Y  =  X\n}\n"
             "table {\nS  A -> Y\n0 0x5 -> 0x5\n  # middle\n1 0xA->computed\n}\n}")
    assert format_text(messy) == (
        'board "b.yaml"\ntck 10 MHz\n\n# about the test\ntest t "title" {  # why\n'
        "    U1, U2 EXTEST\n    step s {\n        drive A = 1, B = 0b10\n\n"
        "        expect Y = X\n    }\n    table {\n        S  A    ->  Y\n"
        "        0  0x5  ->  0x5\n        # middle\n        1  0xA  ->  computed\n    }\n}\n")


def test_long_lists_wrap_after_commas_within_the_width():
    members = ", ".join(f"SIGNAL_{i:02d}" for i in range(30))
    text = f"group WIDE = [{members}]\n" + 'test t "t" {\n    step s {\n        drive ' + \
        ", ".join(f"SIGNAL_{i:02d} = 1" for i in range(20)) + "\n    }\n}\n"
    formatted = check_round_trip(text)
    lines = formatted.splitlines()
    assert max(len(line) for line in lines) <= MAX_WIDTH
    assert lines[0] == "group WIDE = [" and "]" in lines
    assert sum(1 for line in lines if line.strip().startswith("drive ")) == 1

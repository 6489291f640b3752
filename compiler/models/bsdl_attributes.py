"""Our own parsing of the small languages inside BSDL attribute strings.

Each function takes the joined text of one attribute (strings concatenated with `&`) and
returns plain records whose positions are indices into that text; a fault raises
AttributeSyntaxError at the offending token. The syntax follows IEEE Std 1149.1-2001, Annex B
(BSDL), from memory: clause numbers are given where they help a reader find the rule.
The boundary register has its own module (bsdl_boundary), being the large one.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import NamedTuple

from .bsdl_scanner import END, REAL, WORD, AttrCursor, AttributeSyntaxError, AttrToken

__all__ = [
    "Located",
    "PortRef",
    "PinMapEntry",
    "OpcodeEntry",
    "RegisterAccessEntry",
    "ComplianceText",
    "PortGroup",
    "ExecutionText",
    "parse_pin_map",
    "parse_opcodes",
    "parse_bit_pattern",
    "parse_name_list",
    "parse_register_access",
    "parse_compliance",
    "parse_port_grouping",
    "parse_execution",
    "read_port_ref",
]


# Located, PortRef and the boundary register's CellEntry are named tuples rather than frozen
# dataclasses: parser-internal records made by the thousand, where creation cost shows.
class Located(NamedTuple):
    """A word of an attribute string (upper case) and its index range in the joined text."""

    text: str
    start: int
    end: int


class PortRef(NamedTuple):
    """A port or port bit named in an attribute string: `CLK`, `D(3)`."""

    name: str
    index: int | None
    start: int
    end: int

    @property
    def bit(self) -> str:
        return self.name if self.index is None else f"{self.name}({self.index})"


@dataclass(frozen=True, slots=True)
class PinMapEntry:
    port: Located
    pins: tuple[Located, ...]
    start: int
    end: int


@dataclass(frozen=True, slots=True)
class OpcodeEntry:
    name: Located
    opcodes: tuple[Located, ...]


@dataclass(frozen=True, slots=True)
class RegisterAccessEntry:
    register: Located
    length: Located | None
    instructions: tuple[Located, ...]


@dataclass(frozen=True, slots=True)
class ComplianceText:
    ports: tuple[PortRef, ...]
    patterns: tuple[Located, ...]


@dataclass(frozen=True, slots=True)
class PortGroup:
    kind: Located  # DIFFERENTIAL_VOLTAGE or DIFFERENTIAL_CURRENT
    ports: tuple[PortRef, ...]


@dataclass(frozen=True, slots=True)
class ExecutionText:
    """RUNBIST_EXECUTION / INTEST_EXECUTION: the wait, what the pins do, the expected data."""

    seconds: float | None
    clocks: tuple[tuple[PortRef, int], ...]  # (clock port, cycles)
    pin_state: Located | None  # HIGHZ or BOUNDARY
    expect_data: Located | None


def _located(token: AttrToken, text: str | None = None) -> Located:
    return Located(token.text.upper() if text is None else text, token.start, token.end)


def read_port_ref(cursor: AttrCursor, context: str) -> PortRef:
    """`NAME` or `NAME(index)`; whitespace inside is allowed, as real files have it."""
    token = cursor.expect_word("a port name", context)
    if token.text[0].isdigit():
        cursor.fail(token, f"expected a port name {context}, found `{token.text}`", "a port name")
    if cursor.at_mark("("):
        cursor.advance()
        index_token, index = cursor.expect_integer("a bit number of the port vector")
        close = cursor.expect_mark(")", f"after the bit number of `{token.text}`")
        return PortRef(token.text.upper(), index, token.start, close.end)
    return PortRef(token.text.upper(), None, token.start, token.end)


def _pin_id(cursor: AttrCursor, port: str) -> Located:
    token = cursor.peek()
    if token.kind in (WORD, REAL):
        cursor.advance()
        return _located(token)
    cursor.fail(token, f"expected a package pin for port `{port}`, found "
                       f"{'the end of the string' if token.kind == END else '`' + token.text + '`'}",
                "a pin name such as 12 or A7")


def parse_pin_map(text: str) -> list[PinMapEntry]:
    """PIN_MAP_STRING: `PORT : PIN, VEC : (P1, P2, ...), ...` (IEEE 1149.1-2001 B.8.3, from memory)."""
    cursor = AttrCursor(text)
    entries: list[PinMapEntry] = []
    if cursor.at_end():
        return entries
    while True:
        port_token = cursor.expect_word("a port name", "in the pin map")
        cursor.expect_mark(":", f"after port `{port_token.text}` in the pin map")
        pins: list[Located] = []
        if cursor.accept_mark("("):
            pins.append(_pin_id(cursor, port_token.text))
            while cursor.accept_mark(","):
                pins.append(_pin_id(cursor, port_token.text))
            end = cursor.expect_mark(")", f"to close the pin list of `{port_token.text}`").end
        else:
            pin = _pin_id(cursor, port_token.text)
            pins.append(pin)
            end = pin.end
        entries.append(PinMapEntry(_located(port_token), tuple(pins), port_token.start, end))
        if cursor.at_end():
            return entries
        cursor.expect_mark(",", "between the ports of the pin map")


def parse_opcodes(text: str) -> list[OpcodeEntry]:
    """INSTRUCTION_OPCODE: `NAME (0101, 1X11), ...`; several patterns per instruction allowed."""
    cursor = AttrCursor(text)
    entries: list[OpcodeEntry] = []
    while True:
        name = cursor.expect_word("an instruction name", "in INSTRUCTION_OPCODE")
        cursor.expect_mark("(", f"before the opcodes of `{name.text}`")
        opcodes = [_bit_word(cursor, f"an opcode of `{name.text}`", "01X")]
        while cursor.accept_mark(","):
            opcodes.append(_bit_word(cursor, f"an opcode of `{name.text}`", "01X"))
        cursor.expect_mark(")", f"after the opcodes of `{name.text}`")
        entries.append(OpcodeEntry(_located(name), tuple(opcodes)))
        if cursor.at_end():
            return entries
        cursor.expect_mark(",", "between instructions")


def _bit_word(cursor: AttrCursor, what: str, alphabet: str) -> Located:
    token = cursor.peek()
    if token.kind != WORD:
        cursor.fail(token, f"expected {what}, found "
                           f"{'the end of the string' if token.kind == END else '`' + token.text + '`'}",
                    "a pattern of " + "/".join(alphabet))
    bits = token.text.upper()
    for position, char in enumerate(bits):
        if char not in alphabet:
            raise AttributeSyntaxError(
                f"`{token.text[position]}` is not a bit in {what}", token.start + position,
                token.start + position + 1, "characters " + ", ".join(alphabet))
    cursor.advance()
    return Located(bits, token.start, token.end)


def parse_bit_pattern(text: str, what: str, alphabet: str = "01X") -> tuple[str, list[int]]:
    """A bit string such as INSTRUCTION_CAPTURE or IDCODE_REGISTER, whitespace ignored.

    Returns the pattern (upper case) and, for each character, its index in the joined text.
    """
    bits: list[str] = []
    where: list[int] = []
    for index, char in enumerate(text):
        if char.isspace():
            continue
        upper = char.upper()
        if upper not in alphabet:
            raise AttributeSyntaxError(f"`{char}` is not a bit in {what}", index, index + 1,
                                       "characters " + ", ".join(alphabet))
        bits.append(upper)
        where.append(index)
    if not bits:
        raise AttributeSyntaxError(f"{what} is empty", 0, 1, "a pattern of " + "/".join(alphabet))
    return "".join(bits), where


def parse_name_list(text: str, what: str) -> list[Located]:
    """A comma list of names, e.g. INSTRUCTION_PRIVATE."""
    cursor = AttrCursor(text)
    names: list[Located] = []
    if cursor.at_end():
        return names
    while True:
        names.append(_located(cursor.expect_word(what)))
        if cursor.at_end():
            return names
        cursor.expect_mark(",", f"between the names of {what}s")


def parse_register_access(text: str) -> list[RegisterAccessEntry]:
    """REGISTER_ACCESS: `BYPASS (HIGHZ, CLAMP), NAME[8] (PRIV1), ...` (1149.1-2001 B.8.9, from memory).

    An instruction may be followed by `CAPTURES pattern` (IEEE Std 1149.1-2013 form, from
    memory); the pattern is checked for bits and otherwise not used.
    """
    cursor = AttrCursor(text)
    entries: list[RegisterAccessEntry] = []
    while True:
        register = cursor.expect_word("a register name", "in REGISTER_ACCESS")
        length: Located | None = None
        if cursor.accept_mark("["):
            length_token, _ = cursor.expect_integer(f"the length of register `{register.text}`")
            length = _located(length_token)
            cursor.expect_mark("]", f"after the length of `{register.text}`")
        cursor.expect_mark("(", f"before the instructions of register `{register.text}`")
        instructions = [_access_instruction(cursor, register.text)]
        while cursor.accept_mark(","):
            instructions.append(_access_instruction(cursor, register.text))
        cursor.expect_mark(")", f"after the instructions of register `{register.text}`")
        entries.append(RegisterAccessEntry(_located(register), length, tuple(instructions)))
        if cursor.at_end():
            return entries
        cursor.expect_mark(",", "between registers")


def _access_instruction(cursor: AttrCursor, register: str) -> Located:
    name = cursor.expect_word("an instruction name", f"for register `{register}`")
    following = cursor.peek()
    if following.kind == WORD and following.text.upper() == "CAPTURES":
        cursor.advance()
        _bit_word(cursor, f"the CAPTURES pattern of `{name.text}`", "01X")
    return _located(name)


def parse_compliance(text: str) -> ComplianceText:
    """COMPLIANCE_PATTERNS: `(PORT, PORT) (PATTERN, PATTERN)` (1149.1-2001 B.8.6, from memory)."""
    cursor = AttrCursor(text)
    cursor.expect_mark("(", "before the compliance-enable ports")
    ports = [read_port_ref(cursor, "in COMPLIANCE_PATTERNS")]
    while cursor.accept_mark(","):
        ports.append(read_port_ref(cursor, "in COMPLIANCE_PATTERNS"))
    cursor.expect_mark(")", "after the compliance-enable ports")
    cursor.expect_mark("(", "before the compliance patterns")
    patterns = [_bit_word(cursor, "a compliance pattern", "01X")]
    while cursor.accept_mark(","):
        patterns.append(_bit_word(cursor, "a compliance pattern", "01X"))
    cursor.expect_mark(")", "after the compliance patterns")
    cursor.expect_end("after COMPLIANCE_PATTERNS")
    return ComplianceText(tuple(ports), tuple(patterns))


GROUP_KINDS = ("DIFFERENTIAL_VOLTAGE", "DIFFERENTIAL_CURRENT")


def parse_port_grouping(text: str) -> list[PortGroup]:
    """PORT_GROUPING: `DIFFERENTIAL_VOLTAGE ((P, N), (P2, N2)), DIFFERENTIAL_CURRENT (...)`."""
    cursor = AttrCursor(text)
    groups: list[PortGroup] = []
    while True:
        kind_token, kind = cursor.expect_choice(GROUP_KINDS, "a port group kind")
        cursor.expect_mark("(", f"after {kind}")
        while True:
            cursor.expect_mark("(", "before a pair of ports")
            first = read_port_ref(cursor, "in PORT_GROUPING")
            cursor.expect_mark(",", "between the two ports of a pair")
            second = read_port_ref(cursor, "in PORT_GROUPING")
            cursor.expect_mark(")", "after a pair of ports")
            groups.append(PortGroup(Located(kind, kind_token.start, kind_token.end),
                                    (first, second)))
            if not cursor.accept_mark(","):
                break
        cursor.expect_mark(")", f"to close {kind}")
        if cursor.at_end():
            return groups
        cursor.expect_mark(",", "between port group kinds")


def parse_execution(text: str, instruction: str) -> ExecutionText:
    """RUNBIST_EXECUTION / INTEST_EXECUTION (1149.1-2001 B.8.13, from memory):

    `Wait_Duration (1.0e-3, TCK 20000), Observing HIGHZ At_Pins [, Expect_Data 0101]`
    The duration is a time in seconds, a list of `PORT cycles`, or a time then such a list.
    """
    cursor = AttrCursor(text)
    what = f"{instruction}_EXECUTION"
    cursor.expect_choice(("WAIT_DURATION",), f"the start of {what}")
    cursor.expect_mark("(", "after WAIT_DURATION")
    seconds: float | None = None
    clocks: list[tuple[PortRef, int]] = []
    first = cursor.peek()
    if first.kind == REAL or (first.kind == WORD and first.text[0].isdigit()):
        _, seconds = cursor.expect_number("a time in seconds")
        cursor.accept_mark(",")
    while not cursor.at_mark(")"):
        port = read_port_ref(cursor, "in WAIT_DURATION")
        _, cycles = cursor.expect_integer(f"the number of `{port.bit}` cycles")
        clocks.append((port, cycles))
        if not cursor.accept_mark(","):
            break
    if seconds is None and not clocks:
        cursor.fail(cursor.peek(), f"WAIT_DURATION of {what} gives neither a time nor clock cycles",
                    "a time in seconds or `TCK cycles`")
    cursor.expect_mark(")", "to close WAIT_DURATION")
    pin_state: Located | None = None
    expect_data: Located | None = None
    if cursor.accept_mark(","):
        cursor.expect_choice(("OBSERVING",), "the pin state (`Observing ... At_Pins`)")
        state_token, state = cursor.expect_choice(("HIGHZ", "BOUNDARY"), "a pin state")
        pin_state = Located(state, state_token.start, state_token.end)
        cursor.expect_choice(("AT_PINS",), "`At_Pins`")
        if cursor.accept_mark(","):
            cursor.expect_choice(("EXPECT_DATA",), "`Expect_Data`")
            expect_data = _bit_word(cursor, "the expected data", "01X")
    cursor.expect_end(f"after {what}")
    return ExecutionText(seconds, tuple(clocks), pin_state, expect_data)


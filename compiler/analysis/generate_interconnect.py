"""The interconnect tests a generated program holds: one test per round, one table row per vector.

Every round codes its nets with one of the published sequences (`analysis.codes`): the code
of a net is the column of values it takes over the round's vectors. The driving pins are
grouped per device as the table's drive columns, the nets they drive (named where a cell
captures them) as its expect columns, so a board of 30,000 nets is a few hundred group lines
and one table row per vector, not a line per net. Before the table a `park` step drives the
round's constants (held nets, cluster nets at safe values, outputs their group enables) and
reads back the held and pulled nets.
"""

from __future__ import annotations

from dataclasses import dataclass

from bitarray import bitarray

from ..models.board import PinRef
from .codes import CodeSet, make_codes, vector_count
from .interconnect_plan import InterconnectPlan, Node, Round
from .loom_text import INDENT, comment_block, group_lines, hex_literal, is_name, quoted, \
    table_lines, unique_name, wrap_words
from ..lang.header import DEFAULT_FIGHT_LIMIT_S
from .scan_pins import BoardPins, OutputPin

__all__ = ["InterconnectTest", "interconnect_sections", "CODE_PAPERS"]

CODE_PAPERS = {
    "counting": ("modified counting sequence (Goel and McMahon 1982): every net gets one of the "
                 "numbers 1..N, never all 0 or all 1, so a stuck or floating net cannot pass; "
                 "N nets need ceil(log2(N + 2)) vectors"),
    "true-complement": ("true/complement counting sequence (Wagner 1987): the counting codes, then "
                        "their complements, so no wired-AND or wired-OR short of two nets gives a "
                        "third net's code; N nets need 2 * ceil(log2(N + 2)) vectors"),
    "walking-one": "walking one: vector v drives net v alone to 1; N nets need N vectors",
}
_MANY = 24  # more constants than this are written as one group literal


@dataclass(frozen=True)
class InterconnectTest:
    """What one generated test holds, for the summary and the tests of the generator."""

    name: str
    round: Round
    codes: CodeSet
    nodes: tuple[Node, ...]  # coded nodes, code i for nodes[i]


def interconnect_sections(pins: BoardPins, plan: InterconnectPlan, kind: str, taken: set[str],
                          tck_hz: float | None = None) -> tuple[list[str], list[InterconnectTest]]:
    """The program text of every round (groups, then the test) and what each test holds.

    `tck_hz` is the TCK the program declares: where one vector lasts longer than the default
    fight limit, each test says why that is intended (`allow short_fight`).
    """
    lines: list[str] = []
    tests: list[InterconnectTest] = []
    several = len(plan.rounds) > 1
    fight = _vector_seconds(pins, plan, tck_hz)
    for rnd in plan.rounds:
        name = unique_name(f"interconnect_{rnd.number}" if several else "interconnect", taken)
        section, test = _round_text(pins, plan, rnd, kind, name, taken, fight)
        lines += section
        tests.append(test)
    return lines, tests


def _vector_seconds(pins: BoardPins, plan: InterconnectPlan,
                    tck_hz: float | None) -> tuple[float, int, float] | None:
    """(seconds, scan bits, TCK) a vector stands when that is near the 1 ms fight limit, else None.

    A vector stands from one Update-DR to the next: one scan of the whole chain (every device
    in EXTEST shifts its boundary register, the others their bypass bit) plus the few TAP
    clocks between the scans.
    """
    if tck_hz is None:
        return None
    extest = set(plan.extest)
    bits = sum(entry.device.boundary_length if entry.ref in extest else 1 for entry in pins.board.chain)
    seconds = (bits + 8) / tck_hz
    return (seconds, bits, tck_hz) if seconds > 0.5 * DEFAULT_FIGHT_LIMIT_S else None


def _round_text(pins: BoardPins, plan: InterconnectPlan, rnd: Round, kind: str, name: str,
                taken: set[str], fight: tuple[float, int, float] | None) -> tuple[list[str], InterconnectTest]:
    nodes = tuple(rnd.drivers)
    codes = make_codes(kind, len(nodes))
    vectors = vector_count(kind, len(nodes))
    position = {node: i for i, node in enumerate(nodes)}
    refs = pins.refs
    # Per driving device: its pins (drive columns) and the nets they reach (expect columns).
    by_device: dict[int, list[Node]] = {}
    for node, output in rnd.drivers.items():
        by_device.setdefault(output.device, []).append(node)
    out: list[str] = [""]
    how = ("each from its first driver" if rnd.number == 1 else
           "the nets with several drivers from their next driver")
    out += comment_block([f"Round {rnd.number}: {len(nodes)} nets, {how}; "
                          f"{vectors} vector{'s' * (vectors != 1)}."])
    columns: list[tuple[str, str, list[int], list[int]]] = []  # drive group, read group, orders
    for device in sorted(by_device):
        ref = refs[device]
        device_nodes = by_device[device]
        drive_members = [str(rnd.drivers[node].pin) for node in device_nodes]
        read_members: list[str] = []
        read_order: list[int] = []
        for node in device_nodes:
            for net in rnd.observed[node]:
                if is_name(net):
                    read_members.append(net)
                    read_order.append(position[node])
                else:
                    for pin in _observing_pins(pins, net, rnd.drivers[node], plan):
                        read_members.append(str(pin))
                        read_order.append(position[node])
        drive_group = unique_name(f"R{rnd.number}_{ref}_DRIVES", taken)
        read_group = unique_name(f"R{rnd.number}_{ref}_READS", taken)
        out += group_lines(drive_group, drive_members)
        out += group_lines(read_group, read_members)
        columns.append((drive_group, read_group, [position[n] for n in device_nodes], read_order))
    park_groups, park = _park_step(pins, rnd, taken)
    out += park_groups
    out.append("")
    title = f"{len(nodes)} scan-to-scan nets, {kind} codes, {vectors} vectors"
    out.append(f"test {name} {quoted(title)} {{")
    out += comment_block(_test_comment(kind, plan, rnd), INDENT)
    out.append(INDENT + f"{', '.join(plan.extest)} EXTEST"
               + "  # every device on a tested net; outputs not driven stay disabled")
    if fight is not None:
        seconds, bits, hertz = fight
        out.append(INDENT + 'allow short_fight "each vector stands for one scan of '
                   + f'{bits} bits, {seconds * 1e3:.3g} ms at {hertz / 1e6:g} MHz: neighbouring nets driven '
                   + 'apart fight that long only where a short joins them, which this test finds"')
    out += park
    if nodes:
        out += _vector_table(codes, columns)
    out.append("}")
    return out, InterconnectTest(name, rnd, codes, nodes)


def _test_comment(kind: str, plan: InterconnectPlan, rnd: Round) -> list[str]:
    text = f"Codes: {CODE_PAPERS[kind]}."
    if rnd.number > 1:
        text += (" A net with several scan drivers is driven by one of them at a time; this "
                 "round uses the next driver of each such net.")
    return wrap_words(text, 90)


def _observing_pins(pins: BoardPins, net: str, driver: OutputPin, plan: InterconnectPlan) -> list[PinRef]:
    found = []
    extest = set(plan.extest)
    for pin in pins.board.nets[net].pins:
        cells = pins.observers.get(pin, ())
        if pin.ref in extest and any(c.when_driving if pin == driver.pin else c.when_released
                                     for c in cells):
            found.append(pin)
    return found


def _park_step(pins: BoardPins, rnd: Round, taken: set[str]) -> tuple[list[str], list[str]]:
    """The step before the vectors (constants driven, held and pulled nets read back), and the
    group declaration it needs when the constants are many."""
    if not rnd.constants and not rnd.checks:
        return [], []
    inner = INDENT * 2
    declarations: list[str] = []
    out = [INDENT + "step park {"]
    board = pins.board
    if len(rnd.constants) > _MANY:
        members = [str(output.pin) for output, _, _ in rnd.constants]
        bits = bitarray([value == "1" for _, value, _ in rnd.constants], endian="big")
        group = unique_name(f"R{rnd.number}_CONSTANTS", taken)
        declarations = group_lines(group, members, _summarise(rnd.constants))
        out.append(inner + f"drive {group} = {hex_literal(bits)}")
    else:
        for output, value, why in rnd.constants:
            net = board.net_of_pin.get(output.pin, "")
            out.append(inner + f"drive {output.pin} = {value}  # {net}: {why}")
    for net, value, why in rnd.checks:
        target = net if is_name(net) else next(str(p) for p in board.nets[net].pins)
        out.append(inner + f"expect {target} = {value}  # {why}")
    out.append(INDENT + "}")
    return declarations, out


def _summarise(constants: tuple[tuple[OutputPin, str, str], ...]) -> str:
    reasons: dict[str, int] = {}
    for _, _, why in constants:
        reasons[why] = reasons.get(why, 0) + 1
    return "; ".join(f"{count} {why}" for why, count in reasons.items())


def _vector_table(codes: CodeSet, columns: list[tuple[str, str, list[int], list[int]]]) -> list[str]:
    """One row per vector: each column group's members, most significant first, as hex."""
    per_vector = [bitarray([(code >> v) & 1 for code in codes.codes], endian="big")
                  for v in range(codes.vectors)]
    header = ([c[0] for c in columns], [c[1] for c in columns])
    rows = []
    for bits in per_vector:
        drives = [hex_literal(bitarray([bits[i] for i in order], endian="big")) for _, _, order, _ in columns]
        reads = [hex_literal(bitarray([bits[i] for i in order], endian="big")) for _, _, _, order in columns]
        rows.append((drives, reads))
    out = [INDENT + "table vector {"]
    out += table_lines(INDENT * 2, header, rows)
    out.append(INDENT + "}")
    return out

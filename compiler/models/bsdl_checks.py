"""Consistency checks of a BSDL description against the rules of IEEE Std 1149.1.

Each check names the rule it enforces. Clause numbers are those of IEEE Std 1149.1-2001 and
its Annex B (BSDL), given from memory. A violation is an error at the offending token inside
the attribute string (through `Locate`), so the user sees `file:line:col` and a caret.
"""

from __future__ import annotations

from typing import Callable, Mapping, Sequence

from ..diagnostics import Diagnostics, SourceSpan, nearest
from .bsdl_attributes import Located, OpcodeEntry, PinMapEntry, PortRef
from .bsdl_boundary import CellEntry
from .device import CONTROL_FUNCTIONS, Port

__all__ = [
    "Locate",
    "check_opcodes",
    "check_capture",
    "check_device_code",
    "check_boundary_cells",
    "check_pin_map",
    "check_port_ref",
    "check_standard_selects",
    "opcodes_overlap",
]

# Maps an index range of an attribute's joined text to the span in the file.
Locate = Callable[[int, int], SourceSpan]

# Instructions whose register the standard fixes (IEEE 1149.1-2001 clause 8, from memory):
# BYPASS 8.4, SAMPLE 8.6, PRELOAD 8.7, EXTEST 8.8, INTEST 8.9, IDCODE 8.13, USERCODE 8.14,
# CLAMP 8.11 and HIGHZ 8.12 select the bypass register.
STANDARD_SELECTS = {
    "BYPASS": "BYPASS", "SAMPLE": "BOUNDARY", "PRELOAD": "BOUNDARY", "EXTEST": "BOUNDARY",
    "INTEST": "BOUNDARY", "IDCODE": "DEVICE_ID", "USERCODE": "DEVICE_ID",
    "CLAMP": "BYPASS", "HIGHZ": "BYPASS",
}

# A merged cell: one cell number described twice, the input side and the output/control side
# (IEEE 1149.1-2001 B.8.14.3, from memory).
_MERGE_INPUT = frozenset({"INPUT", "CLOCK", "OBSERVE_ONLY"})
_MERGE_OTHER = frozenset({"OUTPUT2", "OUTPUT3", "CONTROL", "CONTROLR"})


def opcodes_overlap(first: str, second: str) -> bool:
    """Two opcodes with X bits can decode the same instruction register value."""
    return len(first) == len(second) and all(
        a == b or a == "X" or b == "X" for a, b in zip(first, second))


def check_opcodes(entries: Sequence[OpcodeEntry], ir_length: int | None, locate: Locate,
                  attribute_span: SourceSpan, diagnostics: Diagnostics) -> None:
    seen: dict[str, Located] = {}
    for entry in entries:
        if entry.name.text in seen:
            diagnostics.error(f"instruction `{entry.name.text}` is given twice in "
                              "INSTRUCTION_OPCODE", locate(entry.name.start, entry.name.end),
                              expected="each instruction once, with all its opcodes",
                              code="bsdl-check")
        seen[entry.name.text] = entry.name
        if ir_length is None:
            continue
        for opcode in entry.opcodes:
            # B.8.8 (from memory): every opcode has INSTRUCTION_LENGTH bits.
            if len(opcode.text) != ir_length:
                diagnostics.error(
                    f"opcode {opcode.text} of `{entry.name.text}` has {len(opcode.text)} bits, "
                    f"but INSTRUCTION_LENGTH is {ir_length}", locate(opcode.start, opcode.end),
                    expected=f"{ir_length} bits of 0, 1 or X", code="bsdl-check")
    names = [entry.name.text for entry in entries]
    # 8.1.1 (from memory): BYPASS, SAMPLE (SAMPLE/PRELOAD in the 1990 edition) and EXTEST are
    # mandatory public instructions.
    for required in ("BYPASS", "SAMPLE", "EXTEST"):
        if required not in seen:
            diagnostics.error(f"INSTRUCTION_OPCODE has no {required} instruction, which "
                              "IEEE 1149.1 requires", attribute_span,
                              expected=f"an entry `{required} (...)`",
                              suggestions=nearest(required, names), code="bsdl-check")
    if ir_length is None:
        return
    # 8.4.1 (b) (from memory): the all-ones instruction code selects BYPASS.
    def decodes_all_ones(opcode: str) -> bool:
        return len(opcode) == ir_length and set(opcode) <= {"1", "X"}

    ones = "1" * min(ir_length, 64)
    for entry in entries:
        for opcode in entry.opcodes:
            if decodes_all_ones(opcode.text) and entry.name.text != "BYPASS":
                diagnostics.error(
                    f"opcode {opcode.text} of `{entry.name.text}` decodes the all-ones code, "
                    "which IEEE 1149.1 reserves for BYPASS", locate(opcode.start, opcode.end),
                    expected=f"BYPASS ({ones})", code="bsdl-check")
    bypass = next((e for e in entries if e.name.text == "BYPASS"), None)
    if bypass is not None and not any(decodes_all_ones(o.text) for o in bypass.opcodes):
        diagnostics.error("BYPASS has no all-ones opcode, which IEEE 1149.1 requires",
                          locate(bypass.name.start, bypass.name.end),
                          expected=f"BYPASS ({ones}, ...)", code="bsdl-check")
    # 7.2.1 (from memory): an instruction code decodes to one instruction; SAMPLE and PRELOAD
    # may share one (8.6/8.7). Overlaps are warned about, not fatal.
    flat = [(entry.name.text, opcode) for entry in entries for opcode in entry.opcodes
            if len(opcode.text) == ir_length]
    for index, (name, opcode) in enumerate(flat):
        for other_name, other in flat[:index]:
            if other_name == name or {name, other_name} == {"SAMPLE", "PRELOAD"}:
                continue
            if opcodes_overlap(opcode.text, other.text):
                diagnostics.warning(
                    f"opcode {opcode.text} of `{name}` can decode as {other.text} of "
                    f"`{other_name}`", locate(opcode.start, opcode.end),
                    expected="opcodes that decode to one instruction each", code="bsdl-check")
                break


def check_capture(pattern: str, where: Sequence[int], ir_length: int | None, locate: Locate,
                  diagnostics: Diagnostics) -> None:
    if ir_length is not None and len(pattern) != ir_length:
        diagnostics.error(f"INSTRUCTION_CAPTURE has {len(pattern)} bits, but INSTRUCTION_LENGTH "
                          f"is {ir_length}", locate(where[0], where[-1] + 1),
                          expected=f"{ir_length} bits", code="bsdl-check")
        return
    # 7.1.1 (d) (from memory): the two least significant instruction register cells capture
    # 01 (the rightmost character is the bit nearest TDO).
    if len(pattern) >= 2 and pattern[-2:] != "01":
        diagnostics.error(f"INSTRUCTION_CAPTURE {pattern} does not end in 01",
                          locate(where[-2], where[-1] + 1),
                          expected="the two least significant bits 01, as IEEE 1149.1 requires",
                          code="bsdl-check")


def check_device_code(pattern: str, where: Sequence[int], attribute: str, locate: Locate,
                      diagnostics: Diagnostics) -> None:
    # 12.1.1 (from memory): the device identification register is 32 bits.
    if len(pattern) != 32:
        diagnostics.error(f"{attribute} has {len(pattern)} bits", locate(where[0], where[-1] + 1),
                          expected="32 bits of 0, 1 or X", code="bsdl-check")
        return
    if attribute != "IDCODE_REGISTER":
        return
    # 12.1.1 (b) (from memory): bit 0 of an identification code is 1, so a chain reads it
    # apart from a bypass register, which captures 0.
    if pattern[-1] != "1":
        diagnostics.error(f"IDCODE_REGISTER bit 0 is {pattern[-1]}", locate(where[-1], where[-1] + 1),
                          expected="bit 0 (the rightmost) 1, as IEEE 1149.1 requires",
                          code="bsdl-check")
    # 12.2.1 (b) (from memory): manufacturer code 00001111111 is reserved (end of chain).
    if pattern[-12:-1] == "00001111111":
        diagnostics.error("IDCODE_REGISTER uses the reserved manufacturer code 00001111111",
                          locate(where[-12], where[-1]),
                          expected="a manufacturer identity other than 00001111111",
                          code="bsdl-check")


def check_port_ref(ref: PortRef, ports: Mapping[str, Port], locate: Locate, context: str,
                   diagnostics: Diagnostics, all_bits: frozenset[str] | None = None) -> bool:
    """A port or port bit named in an attribute string exists; reports and returns False if not.

    `all_bits` (every port bit of the entity) makes the common case a set lookup.
    """
    if all_bits is not None and ref.bit in all_bits:
        return True
    port = ports.get(ref.name)
    if port is None:
        diagnostics.error(f"`{ref.name}` {context} is not a port of the entity",
                          locate(ref.start, ref.end), expected="a port declared in `port (...)`",
                          suggestions=nearest(ref.name, ports), code="bsdl-check")
        return False
    if ref.bit not in port.bits:
        if ref.index is None:
            message = f"`{ref.name}` {context} is a vector port; name one bit"
            expected = f"a bit such as {port.bits[0]}"
        elif port.bits == (port.name,):
            message = f"`{ref.name}` {context} is a scalar port and has no bit {ref.index}"
            expected = f"`{port.name}`"
        else:
            message = f"`{ref.bit}` {context} is not a bit of `{ref.name}`"
            expected = f"bits {port.bits[0]} .. {port.bits[-1]}"
        diagnostics.error(message, locate(ref.start, ref.end), expected=expected,
                          code="bsdl-check")
        return False
    return True


def check_boundary_cells(entries: Sequence[CellEntry], length: int | None,
                         ports: Mapping[str, Port], tap_ports: set[str], locate: Locate,
                         diagnostics: Diagnostics) -> None:
    by_number: dict[int, list[CellEntry]] = {}
    for entry in entries:
        by_number.setdefault(int(entry.number.text), []).append(entry)
    if length is not None:
        _check_numbering(entries, by_number, length, locate, diagnostics)
    _check_order(entries, locate, diagnostics)
    for number, group in by_number.items():
        if len(group) > 1 and not _is_merged_pair(group):
            second = group[1]
            diagnostics.error(
                f"cell {number} is described {len(group)} times and is not a merged cell",
                locate(second.number.start, second.number.end),
                expected="one entry per cell, or two (an input and an output or control entry "
                         "of one cell type) for a merged cell", code="bsdl-check")
    all_bits = frozenset(bit for port in ports.values() for bit in port.bits)
    for entry in entries:
        _check_cell_port(entry, ports, all_bits, tap_ports, locate, diagnostics)
        _check_disable_spec(entry, by_number, locate, diagnostics)


def _is_merged_pair(group: Sequence[CellEntry]) -> bool:
    if len(group) != 2 or group[0].cell_type.text != group[1].cell_type.text:
        return False
    functions = {group[0].function.text, group[1].function.text}
    return len(functions & _MERGE_INPUT) == 1 and len(functions & _MERGE_OTHER) == 1


def _check_numbering(entries: Sequence[CellEntry], by_number: Mapping[int, list[CellEntry]],
                     length: int, locate: Locate, diagnostics: Diagnostics) -> None:
    # B.8.14 (from memory): the cells are numbered 0 .. BOUNDARY_LENGTH-1, each described.
    for entry in entries:
        number = int(entry.number.text)
        if number >= length:
            diagnostics.error(
                f"cell number {number} is outside the boundary register (BOUNDARY_LENGTH is "
                f"{length})", locate(entry.number.start, entry.number.end),
                expected=f"cell numbers 0 .. {length - 1}", code="bsdl-check")
    missing: list[int] = []
    for n in range(length):  # stops after a few: enough to name them, cheap for any length
        if n not in by_number:
            missing.append(n)
            if len(missing) > 8:
                break
    if not missing or not entries:
        return
    above = [n for n in by_number if missing[0] < n < length]
    anchor = by_number[min(above)][0] if above else entries[-1]
    shown = ", ".join(str(n) for n in missing[:8]) + (", ..." if len(missing) > 8 else "")
    diagnostics.error(
        f"BOUNDARY_REGISTER has no entry for cell {shown} (BOUNDARY_LENGTH is {length})",
        locate(anchor.number.start, anchor.number.end),
        expected=f"every cell number 0 .. {length - 1} without gaps", code="bsdl-check")


def _check_order(entries: Sequence[CellEntry], locate: Locate, diagnostics: Diagnostics) -> None:
    direction = 0
    previous: int | None = None
    for entry in entries:
        number = int(entry.number.text)
        if previous is not None and number != previous:
            step = 1 if number > previous else -1
            if direction == 0:
                direction = step
            elif step != direction:
                order = "ascending" if direction > 0 else "descending"
                diagnostics.error(
                    f"cell {number} is out of order: the entries so far are {order}",
                    locate(entry.number.start, entry.number.end),
                    expected="cells listed in ascending or descending order", code="bsdl-check")
                return
        previous = number


_DRIVERS = frozenset({"OUTPUT2", "OUTPUT3", "BIDIR"})
_NEEDS_NO_PORT = frozenset({"CONTROL", "CONTROLR", "INTERNAL"})


def _check_cell_port(entry: CellEntry, ports: Mapping[str, Port], all_bits: frozenset[str],
                     tap_ports: set[str], locate: Locate, diagnostics: Diagnostics) -> None:
    function = entry.function.text
    number = entry.number.text
    if entry.port is None:
        # B.8.14 (from memory): `*` stands for no port and fits only cells without a pin.
        if function not in _NEEDS_NO_PORT:
            diagnostics.error(f"cell {number} is a {function} cell and needs a port, not `*`",
                              locate(*entry.port_at), expected="a port name such as D(0)",
                              code="bsdl-check")
        return
    if not check_port_ref(entry.port, ports, locate, f"in cell {number}", diagnostics, all_bits):
        return
    port = ports[entry.port.name]
    if entry.port.name not in tap_ports and port.direction != "LINKAGE" and (
            function not in _DRIVERS or port.direction != "IN") and (
            function != "BIDIR" or port.direction in ("INOUT", "BUFFER")):
        return  # the common case, without building a span
    where = locate(*entry.port_at)
    if entry.port.name in tap_ports:
        # 11.1 (from memory): the TAP pins carry no boundary-scan cells.
        diagnostics.error(f"cell {number} is on the TAP port `{port.name}`", where,
                          expected="boundary cells on system pins only", code="bsdl-check")
    elif port.direction == "LINKAGE":
        diagnostics.error(f"cell {number} is on `{port.name}`, a linkage port", where,
                          expected="a port of direction in, out, inout or buffer",
                          code="bsdl-check")
    elif function in _DRIVERS and port.direction == "IN":
        diagnostics.error(f"cell {number} drives `{entry.port.bit}` ({function}), an input port",
                          where, expected="an out, inout or buffer port", code="bsdl-check")
    elif function == "BIDIR" and port.direction not in ("INOUT", "BUFFER"):
        diagnostics.error(f"cell {number} is BIDIR on `{entry.port.bit}`, a port of direction "
                          f"{port.direction.lower()}", where, expected="an inout port",
                          code="bsdl-check")


def _check_disable_spec(entry: CellEntry, by_number: Mapping[int, list[CellEntry]],
                        locate: Locate, diagnostics: Diagnostics) -> None:
    function = entry.function.text
    number = int(entry.number.text)
    if entry.control_cell is None:
        # B.8.14 (from memory): 3-state and bidirectional cells give their control cell,
        # disable value and disable result.
        if function in ("OUTPUT3", "BIDIR"):
            diagnostics.error(
                f"cell {number} is {function} but gives no control cell",
                locate(entry.safe.start, entry.safe.end),
                expected="`, ccell, disable value, disable result` after the safe value",
                code="bsdl-check")
        return
    control = int(entry.control_cell.text)
    where = locate(entry.control_cell.start, entry.control_cell.end)
    if control == number and function in ("OUTPUT3", "BIDIR"):
        return  # an open-collector output is its own control (B.8.14, from memory)
    targets = by_number.get(control)
    if targets is None:
        diagnostics.error(f"cell {number} names control cell {control}, which is not in "
                          "BOUNDARY_REGISTER", where, expected="the number of a CONTROL cell",
                          code="bsdl-check")
    elif not any(t.function.text in CONTROL_FUNCTIONS for t in targets):
        diagnostics.error(f"cell {number} names control cell {control}, whose function is "
                          f"{targets[0].function.text}", where,
                          expected="a CONTROL or CONTROLR cell", code="bsdl-check")


def check_pin_map(name: str, entries: Sequence[PinMapEntry], ports: Mapping[str, Port],
                  locate: Locate, constant_span: SourceSpan, diagnostics: Diagnostics
                  ) -> dict[str, tuple[str, ...]]:
    """Port bits -> pins of one PIN_MAP_STRING; every port mapped once, pins used once (B.8.3)."""
    mapped: dict[str, tuple[str, ...]] = {}
    seen_ports: set[str] = set()
    pin_owner: dict[str, str] = {}
    for entry in entries:
        port = ports.get(entry.port.text)
        where = locate(entry.port.start, entry.port.end)
        if port is None:
            diagnostics.error(f"`{entry.port.text}` in pin map {name} is not a port of the entity",
                              where, expected="a port declared in `port (...)`",
                              suggestions=nearest(entry.port.text, ports), code="bsdl-check")
            continue
        if port.name in seen_ports:
            diagnostics.error(f"port `{port.name}` is mapped twice in pin map {name}", where,
                              expected="each port once", code="bsdl-check")
            continue
        seen_ports.add(port.name)
        pins = entry.pins
        if port.width > 1 and len(pins) != port.width:
            diagnostics.error(f"port `{port.name}` has {port.width} bits but {len(pins)} pins in "
                              f"pin map {name}", where, expected=f"{port.width} pins in a list",
                              code="bsdl-check")
            continue
        for pin in pins:
            owner = pin_owner.get(pin.text)
            if owner is not None and owner != port.name:
                diagnostics.error(f"pin {pin.text} of pin map {name} is given to both "
                                  f"`{owner}` and `{port.name}`", locate(pin.start, pin.end),
                                  expected="one port per package pin", code="bsdl-check")
            pin_owner[pin.text] = port.name
        if port.width > 1:
            for bit, pin in zip(port.bits, pins):
                mapped[bit] = (pin.text,)
        else:
            mapped[port.bits[0]] = tuple(pin.text for pin in pins)
    missing = [p for p in ports if p not in seen_ports]
    if missing:
        diagnostics.error(f"pin map {name} has no pin for port "
                          + ", ".join(f"`{p}`" for p in missing), constant_span,
                          expected="every port of the entity in each pin map", code="bsdl-check")
    return mapped


def check_standard_selects(selects: Mapping[str, str], where: Mapping[str, SourceSpan],
                           diagnostics: Diagnostics) -> None:
    for instruction, register in selects.items():
        required = STANDARD_SELECTS.get(instruction)
        if required is not None and register != required:
            diagnostics.error(f"{instruction} selects {register}, but IEEE 1149.1 has it select "
                              f"{required}", where.get(instruction),
                              expected=f"{instruction} under {required}", code="bsdl-check")

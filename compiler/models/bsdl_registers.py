"""Reading the instruction register, the data registers and the boundary cells of a BSDL entity.

A mixin of the device builder (bsdl_builder): it reads INSTRUCTION_OPCODE/CAPTURE/PRIVATE,
IDCODE/USERCODE_REGISTER, REGISTER_ACCESS, BOUNDARY_REGISTER and the smaller attributes that
refer to ports (COMPLIANCE_PATTERNS, *_EXECUTION, PORT_GROUPING), using the builder's helpers.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Callable, TypeVar

from ..diagnostics import Diagnostics, SourceSpan, nearest
from .bsdl_ast import SourceText
from .bsdl_attributes import (
    parse_bit_pattern, parse_compliance, parse_execution, parse_name_list, parse_opcodes,
    parse_port_grouping, parse_register_access,
)
from .bsdl_boundary import CellEntry, parse_boundary_register
from .bsdl_checks import (
    check_boundary_cells, check_capture, check_device_code, check_opcodes, check_port_ref,
    check_standard_selects,
)
from .cells import STANDARD_CELLS
from .device import (
    MAX_REGISTER_LENGTH, STANDARD_LENGTHS, BoundaryCell, CellInfo, CompliancePattern, ExecutionRequirement,
    Port, TapPins,
)

if TYPE_CHECKING:
    from .bsdl_builder import AttributeText

__all__ = ["RegisterReading", "DEFAULT_SELECTS", "MAX_REGISTER_LENGTH", "STANDARD_LENGTHS"]

T = TypeVar("T")

# The register an instruction selects when REGISTER_ACCESS does not say (IEEE 1149.1-2001
# clause 8, from memory; EXTEST_PULSE and EXTEST_TRAIN from IEEE 1149.6-2003, from memory).
DEFAULT_SELECTS = {
    "BYPASS": "BYPASS", "EXTEST": "BOUNDARY", "SAMPLE": "BOUNDARY", "PRELOAD": "BOUNDARY",
    "INTEST": "BOUNDARY", "IDCODE": "DEVICE_ID", "USERCODE": "DEVICE_ID", "CLAMP": "BYPASS",
    "HIGHZ": "BYPASS", "EXTEST_PULSE": "BOUNDARY", "EXTEST_TRAIN": "BOUNDARY",
}
# Cell types of the IEEE 1149.6 package (from memory); their captures are not in cells.py.
AC_CELL_PREFIX = "AC_"


class RegisterReading:
    """Readers for the register attributes; relies on the builder's helpers and state."""

    if TYPE_CHECKING:
        source: SourceText
        diagnostics: Diagnostics
        ports: dict[str, Port]
        spans: dict[str, SourceSpan]
        file_cells: dict[str, CellInfo]
        vendor_packages: tuple[str, ...]

        def string(self, name: str, required: bool = False) -> AttributeText | None: ...
        def parse(self, text: AttributeText, reader: Callable[..., T], *args: object
                  ) -> T | None: ...
        def attribute_span(self, name: str) -> SourceSpan: ...

    # -- instruction register -------------------------------------------------------------

    def instructions(self, ir_length: int | None) -> dict[str, tuple[str, ...]]:
        text = self.string("INSTRUCTION_OPCODE", required=True)
        if text is None:
            return {}
        entries = self.parse(text, parse_opcodes)
        if entries is None:
            return {}
        check_opcodes(entries, ir_length, text.locate, self.attribute_span(text.name),
                      self.diagnostics)
        instructions: dict[str, tuple[str, ...]] = {}
        for entry in entries:
            instructions.setdefault(entry.name.text, tuple(o.text for o in entry.opcodes))
        return instructions

    def capture(self, ir_length: int | None) -> str | None:
        text = self.string("INSTRUCTION_CAPTURE", required=True)
        if text is None:
            return None
        parsed = self.parse(text, parse_bit_pattern, "INSTRUCTION_CAPTURE")
        if parsed is None:
            return None
        pattern, where = parsed
        check_capture(pattern, where, ir_length, text.locate, self.diagnostics)
        return pattern

    def private(self, instructions: dict[str, tuple[str, ...]]) -> tuple[str, ...]:
        text = self.string("INSTRUCTION_PRIVATE")
        if text is None:
            return ()
        names = self.parse(text, parse_name_list, "a private instruction name")
        private: list[str] = []
        for name in names or ():
            if instructions and name.text not in instructions:
                self.diagnostics.error(
                    f"private instruction `{name.text}` is not in INSTRUCTION_OPCODE",
                    text.locate(name.start, name.end), expected="an instruction with an opcode",
                    suggestions=nearest(name.text, instructions), code="bsdl-check")
            elif name.text not in private:
                private.append(name.text)
        return tuple(private)

    def device_code(self, attribute: str, instruction: str,
                    instructions: dict[str, tuple[str, ...]]) -> str | None:
        text = self.string(attribute)
        if text is None:
            # B.8.11 (from memory): an IDCODE (USERCODE) instruction needs its register's value.
            if instruction in instructions:
                self.diagnostics.error(
                    f"the {instruction} instruction is given but {attribute} is not",
                    self.attribute_span("INSTRUCTION_OPCODE"),
                    expected=f"`attribute {attribute} of ... : entity is \"...\";`",
                    code="bsdl-check")
            return None
        parsed = self.parse(text, parse_bit_pattern, attribute)
        if parsed is None:
            return None
        pattern, where = parsed
        check_device_code(pattern, where, attribute, text.locate, self.diagnostics)
        if instructions and instruction not in instructions:
            self.diagnostics.warning(f"{attribute} is given but there is no {instruction} "
                                     "instruction", self.attribute_span(attribute),
                                     code="bsdl-check")
        return pattern

    # -- data registers -------------------------------------------------------------------

    def registers(self, instructions: dict[str, tuple[str, ...]], private: tuple[str, ...],
                  boundary_length: int | None) -> tuple[dict[str, int], dict[str, str]]:
        registers: dict[str, int] = {"BYPASS": 1, "BOUNDARY": boundary_length or 0}
        if "IDCODE" in instructions or "USERCODE" in instructions:
            registers["DEVICE_ID"] = 32
        given: dict[str, str] = {}
        where: dict[str, SourceSpan] = {}
        text = self.string("REGISTER_ACCESS")
        entries = self.parse(text, parse_register_access) if text is not None else None
        for entry in entries or ():
            assert text is not None
            register = entry.register.text
            register_span = text.locate(entry.register.start, entry.register.end)
            if register in STANDARD_LENGTHS or register == "BOUNDARY":
                standard = STANDARD_LENGTHS.get(register, boundary_length)
                if entry.length is not None and standard is not None \
                        and int(entry.length.text) != standard:
                    self.diagnostics.error(
                        f"{register} is given {entry.length.text} bits", register_span,
                        expected=f"{standard} bits", code="bsdl-check")
                if register == "DEVICE_ID":
                    registers["DEVICE_ID"] = 32
            elif entry.length is None:
                self.diagnostics.error(f"register `{register}` has no length", register_span,
                                       expected=f"`{register}[length] (...)`",
                                       suggestions=nearest(register, (*registers, "DEVICE_ID")),
                                       code="bsdl-check")
                continue
            else:
                length = int(entry.length.text)
                if not 1 <= length <= MAX_REGISTER_LENGTH or registers.get(register, length) != length:
                    self.diagnostics.error(f"register `{register}` is given {length} bits",
                                           text.locate(entry.length.start, entry.length.end),
                                           expected=f"one length of 1 .. {MAX_REGISTER_LENGTH:,} bits",
                                           code="bsdl-check")
                registers[register] = length
            for name in entry.instructions:
                span = text.locate(name.start, name.end)
                if instructions and name.text not in instructions:
                    self.diagnostics.error(
                        f"`{name.text}` in REGISTER_ACCESS is not an instruction of the entity",
                        span, expected="an instruction of INSTRUCTION_OPCODE",
                        suggestions=nearest(name.text, instructions), code="bsdl-check")
                elif name.text in given and given[name.text] != register:
                    self.diagnostics.error(
                        f"instruction `{name.text}` selects both {given[name.text]} and "
                        f"{register}", span, expected="one register per instruction",
                        code="bsdl-check")
                else:
                    given[name.text] = register
                    where[name.text] = span
        selects: dict[str, str] = {}
        for name in instructions:
            register = given.get(name) or DEFAULT_SELECTS.get(name)
            if register is None:
                register = "BYPASS"
                message = f"instruction `{name}` selects no register we know; taken as BYPASS"
                span = self.attribute_span("INSTRUCTION_OPCODE")
                if name in private:
                    self.diagnostics.note(message, span, code="bsdl-register")
                else:
                    self.diagnostics.warning(message, span,
                                             expected=f"`REGISTER[length] ({name})` in "
                                                      "REGISTER_ACCESS", code="bsdl-register")
            selects[name] = register
        check_standard_selects(selects, where, self.diagnostics)
        return registers, selects

    # -- boundary register ----------------------------------------------------------------

    def boundary_entries(self, boundary_length: int | None, tap: TapPins | None
                         ) -> tuple[list[CellEntry], AttributeText | None]:
        text = self.string("BOUNDARY_REGISTER", required=True)
        if text is None:
            return [], None
        entries = self.parse(text, parse_boundary_register)
        if entries is None:
            return [], None
        tap_ports = set() if tap is None else {tap.tdi, tap.tdo, tap.tms, tap.tck}
        if tap is not None and tap.trst:
            tap_ports.add(tap.trst)
        check_boundary_cells(entries, boundary_length, self.ports, tap_ports, text.locate,
                             self.diagnostics)
        return entries, text

    def cells(self, entries: list[CellEntry], text: AttributeText | None
              ) -> tuple[BoundaryCell, ...]:
        if text is None:
            return ()
        locate = text.locate
        cells = [
            BoundaryCell(
                number=int(e.number.text), cell_type=e.cell_type.text,
                port=None if e.port is None else e.port.bit, function=e.function.text,
                safe=e.safe.text,
                control_cell=None if e.control_cell is None else int(e.control_cell.text),
                disable_value=None if e.disable_value is None else int(e.disable_value.text),
                disable_result=None if e.disable_result is None else e.disable_result.text,
                span=locate(e.start, e.end))
            for e in entries
        ]
        cells.sort(key=lambda cell: cell.number)  # stable: a merged pair stays adjacent
        return tuple(cells)

    def cell_info(self, entries: list[CellEntry], text: AttributeText | None
                  ) -> dict[str, CellInfo]:
        info: dict[str, CellInfo] = {}
        for entry in entries:
            name = entry.cell_type.text
            if name in info:
                continue
            if name in self.file_cells:
                info[name] = self.file_cells[name]
            elif name in STANDARD_CELLS:
                info[name] = STANDARD_CELLS[name]
            else:
                info[name] = CellInfo(name, (), known=False)
                assert text is not None
                if name.startswith(AC_CELL_PREFIX):
                    why = "an IEEE 1149.6 cell whose captures scanloom does not model"
                else:
                    why = "described neither by the standard nor by a package in this file"
                packages = ", ".join(self.vendor_packages)
                self.diagnostics.note(
                    f"cell type {name} is {why}; its captures are taken as unknown (X)",
                    text.locate(entry.cell_type.start, entry.cell_type.end),
                    hint=f"the file uses {packages}" if packages else None,
                    code="bsdl-unknown-cell")
        return info

    # -- attributes that name ports -------------------------------------------------------

    def compliance(self) -> tuple[CompliancePattern, ...]:
        text = self.string("COMPLIANCE_PATTERNS")
        parsed = self.parse(text, parse_compliance) if text is not None else None
        if parsed is None or text is None:
            return ()
        for ref in parsed.ports:
            check_port_ref(ref, self.ports, text.locate, "in COMPLIANCE_PATTERNS",
                           self.diagnostics)
        for pattern in parsed.patterns:
            if len(pattern.text) != len(parsed.ports):
                # B.8.6 (from memory): one pattern character per compliance-enable port.
                count = len(parsed.ports)
                self.diagnostics.error(
                    f"compliance pattern {pattern.text} has {len(pattern.text)} bits for "
                    f"{count} port{'s' if count != 1 else ''}",
                    text.locate(pattern.start, pattern.end),
                    expected=f"one bit per port ({count})", code="bsdl-check")
        return (CompliancePattern(tuple(ref.bit for ref in parsed.ports),
                                  tuple(p.text for p in parsed.patterns)),)

    def executions(self, instructions: dict[str, tuple[str, ...]], tap: TapPins | None
                   ) -> dict[str, ExecutionRequirement]:
        executions: dict[str, ExecutionRequirement] = {}
        for instruction in ("RUNBIST", "INTEST"):
            text = self.string(f"{instruction}_EXECUTION")
            parsed = self.parse(text, parse_execution, instruction) if text else None
            if parsed is None or text is None:
                continue
            tck_cycles: int | None = None
            for ref, cycles in parsed.clocks:
                if check_port_ref(ref, self.ports, text.locate, "in WAIT_DURATION",
                                  self.diagnostics) and tap is not None and ref.bit == tap.tck:
                    tck_cycles = cycles
            if instructions and instruction not in instructions:
                self.diagnostics.warning(f"{instruction}_EXECUTION is given but there is no "
                                         f"{instruction} instruction",
                                         self.attribute_span(text.name), code="bsdl-check")
            executions[instruction] = ExecutionRequirement(instruction, tck_cycles,
                                                           parsed.seconds, text.value.text)
        return executions

    def port_groups(self) -> tuple[tuple[str, ...], ...]:
        text = self.string("PORT_GROUPING")
        groups = self.parse(text, parse_port_grouping) if text is not None else None
        if groups is None or text is None:
            return ()
        for group in groups:
            for ref in group.ports:
                check_port_ref(ref, self.ports, text.locate, "in PORT_GROUPING",
                               self.diagnostics)
        return tuple(tuple(ref.bit for ref in group.ports) for group in groups)

    def design_warning(self) -> str | None:
        text = self.string("DESIGN_WARNING")
        return None if text is None else text.value.text

"""Build a DeviceModel from the BSDL tree: read each attribute we use, check it, fill the model.

Every attribute we do not use is kept as text (`DeviceModel.unused`) with a note, never an
error: real files carry older attributes, IEEE 1149.6 additions and their makers' extensions.
Errors are collected for the whole file before the caller raises, so one run shows them all.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Callable, TypeVar

from ..diagnostics import Diagnostics, SourceSpan, nearest
from .bsdl_ast import (
    AggregateValue, AttributeSpec, BsdlFile, NameValue, NumberValue, SourceText, StringValue,
    UseClause, Value,
)
from .bsdl_attributes import parse_pin_map
from .bsdl_checks import check_pin_map
from .bsdl_packages import read_cell_packages
from .bsdl_registers import MAX_REGISTER_LENGTH, RegisterReading
from .bsdl_scanner import AttributeSyntaxError
from .device import DeviceModel, Port, RawAttribute, TapPins

__all__ = ["build_device", "AttributeText", "USED_ATTRIBUTES"]

TAP_ATTRIBUTES = ("TAP_SCAN_IN", "TAP_SCAN_OUT", "TAP_SCAN_MODE", "TAP_SCAN_CLOCK",
                  "TAP_SCAN_RESET")
USED_ATTRIBUTES = frozenset({
    "COMPONENT_CONFORMANCE", "PIN_MAP", *TAP_ATTRIBUTES, "COMPLIANCE_PATTERNS",
    "INSTRUCTION_LENGTH", "INSTRUCTION_OPCODE", "INSTRUCTION_CAPTURE", "INSTRUCTION_PRIVATE",
    "IDCODE_REGISTER", "USERCODE_REGISTER", "REGISTER_ACCESS", "BOUNDARY_LENGTH",
    "BOUNDARY_REGISTER", "PORT_GROUPING", "DESIGN_WARNING", "RUNBIST_EXECUTION",
    "INTEST_EXECUTION",
})

MAX_INSTRUCTION_LENGTH = 1024
_STANDARD_PACKAGE = re.compile(r"STD_1149_1_\d{4}")
# Packages of the standards themselves, as opposed to a maker's cell package.
_STANDARDS_PACKAGES = re.compile(r"STD_1149_\d+_\d{4}")

T = TypeVar("T")


@dataclass(frozen=True, slots=True)
class AttributeText:
    """An attribute's joined string and how to find its characters in the file."""

    name: str
    value: StringValue
    source: SourceText

    def locate(self, start: int, end: int) -> SourceSpan:
        first = self.value.file_offset(start)
        last = self.value.file_offset(max(start, end - 1)) + 1
        return self.source.span(first, last)


def build_device(tree: BsdlFile, source: SourceText, diagnostics: Diagnostics) -> DeviceModel | None:
    """The device, or None when errors were reported (the caller raises)."""
    return _DeviceBuilder(tree, source, diagnostics).build()


class _DeviceBuilder(RegisterReading):
    """One file's attributes, read in dependency order (ports, TAP, lengths, registers, cells)."""

    def __init__(self, tree: BsdlFile, source: SourceText, diagnostics: Diagnostics) -> None:
        self.tree = tree
        self.entity = tree.entity
        self.source = source
        self.diagnostics = diagnostics
        self.name = tree.entity.name.text
        self.attributes: dict[str, AttributeSpec] = {}
        self.unused: list[RawAttribute] = []
        self.spans: dict[str, SourceSpan] = {}
        self.ports: dict[str, Port] = {}
        self.errors_before = len(diagnostics.errors)
        self.file_cells, file_packages = read_cell_packages(tree.units, source, diagnostics)
        uses = [u for u in tree.units if isinstance(u, UseClause)] + list(tree.entity.uses)
        self.uses = uses
        self.vendor_packages = tuple(
            u.package.text for u in uses if not _STANDARDS_PACKAGES.fullmatch(u.package.text)
            and u.package.text not in file_packages)

    # -- helpers -------------------------------------------------------------------------

    def span_of(self, node: Value | AttributeSpec | UseClause) -> SourceSpan:
        return self.source.span(node.start, node.end)

    def entity_span(self) -> SourceSpan:
        name = self.entity.name
        return self.source.span(name.start, name.end)

    def attribute_span(self, name: str) -> SourceSpan:
        return self.spans.get(name) or self.entity_span()

    def string(self, name: str, required: bool = False) -> AttributeText | None:
        spec = self.attributes.get(name)
        if spec is None:
            if required:
                self.missing(name)
            return None
        if not isinstance(spec.value, StringValue):
            self.diagnostics.error(f"{name} needs a string value", self.span_of(spec.value),
                                   expected='a string in double quotes (join lines with `&`)',
                                   code="bsdl-attribute")
            return None
        return AttributeText(name, spec.value, self.source)

    def missing(self, name: str) -> None:
        self.diagnostics.error(f"entity `{self.name}` has no {name} attribute",
                               self.entity_span(), expected=f"`attribute {name} of {self.name} "
                               ": ... is ...;`, which IEEE 1149.1 BSDL requires",
                               code="bsdl-attribute")

    def parse(self, text: AttributeText, reader: Callable[..., T], *args: object) -> T | None:
        try:
            return reader(text.value.text, *args)
        except AttributeSyntaxError as error:
            self.diagnostics.error(error.message, text.locate(error.start, error.end),
                                   expected=error.expected, suggestions=error.suggestions,
                                   code="bsdl-attribute")
            return None

    def integer(self, name: str, minimum: int, maximum: int) -> int | None:
        spec = self.attributes.get(name)
        if spec is None:
            self.missing(name)
            return None
        value = spec.value
        if not isinstance(value, NumberValue) or not value.text.isdigit() or len(value.text) > 9:
            self.diagnostics.error(f"{name} needs a whole number", self.span_of(value),
                                   expected="a whole number such as 4", code="bsdl-attribute")
            return None
        number = int(value.text)
        if not minimum <= number <= maximum:
            self.diagnostics.error(f"{name} is {number}", self.span_of(value),
                                   expected=f"{minimum:,} .. {maximum:,}", code="bsdl-check")
            return None
        return number

    # -- the model -----------------------------------------------------------------------

    def build(self) -> DeviceModel | None:
        self.read_ports()
        standard = self.standard()
        self.collect_attributes()
        pin_maps, pin_map_name = self.pin_maps()
        tap = self.tap()
        # 7.1.1 (a) (from memory): at least two instruction register cells. The upper bounds
        # are sanity limits far above any device, so a damaged number cannot exhaust memory.
        ir_length = self.integer("INSTRUCTION_LENGTH", 2, MAX_INSTRUCTION_LENGTH)
        boundary_length = self.integer("BOUNDARY_LENGTH", 1, MAX_REGISTER_LENGTH)
        instructions = self.instructions(ir_length)
        ir_capture = self.capture(ir_length)
        private = self.private(instructions)
        idcode = self.device_code("IDCODE_REGISTER", "IDCODE", instructions)
        usercode = self.device_code("USERCODE_REGISTER", "USERCODE", instructions)
        registers, selects = self.registers(instructions, private, boundary_length)
        entries, boundary_text = self.boundary_entries(boundary_length, tap)
        cells = self.cells(entries, boundary_text)
        cell_info = self.cell_info(entries, boundary_text)
        compliance = self.compliance()
        executions = self.executions(instructions, tap)
        port_groups = self.port_groups()
        design_warning = self.design_warning()
        self.conformance()
        if len(self.diagnostics.errors) > self.errors_before or tap is None \
                or ir_length is None or boundary_length is None or ir_capture is None:
            return None
        return DeviceModel(
            entity=self.name, path=self.source.file, standard=standard, ports=self.ports,
            pin_maps=pin_maps, pin_map_name=pin_map_name, tap=tap, ir_length=ir_length,
            ir_capture=ir_capture, instructions=instructions, private=private,
            registers=registers, selects=selects, idcode=idcode, usercode=usercode,
            boundary_length=boundary_length, cells=cells, cell_info=cell_info,
            compliance=compliance, executions=executions, port_groups=port_groups,
            design_warning=design_warning, unused=tuple(self.unused), spans=self.spans)

    def read_ports(self) -> None:
        if not self.entity.ports:
            self.diagnostics.error(f"entity `{self.name}` declares no ports", self.entity_span(),
                                   expected="`port (...);` after the generic", code="bsdl-port")
        for decl in self.entity.ports:
            direction = decl.direction
            for ident in decl.names:
                name = ident.text
                if decl.vector and decl.range is not None:
                    bits = tuple(f"{name}({index})" for index in decl.range.indices())
                else:
                    bits = (name,)
                span = self.source.span(ident.start, ident.end)
                if name in self.ports:
                    self.diagnostics.error(f"port `{name}` is declared twice", span,
                                           expected="each port name once", code="bsdl-port")
                    continue
                self.ports[name] = Port(name, direction, bits, span)

    def standard(self) -> str | None:
        """The STD_1149_1_xxxx package the file uses (upper case), else its conformance."""
        for use in self.uses:
            if _STANDARD_PACKAGE.fullmatch(use.package.text):
                return use.package.text
        spec = self.entity_attribute("COMPONENT_CONFORMANCE")
        if spec is not None and isinstance(spec.value, StringValue):
            text = spec.value.text.strip().upper()
            if _STANDARD_PACKAGE.fullmatch(text):
                return text
        return None

    def entity_attribute(self, name: str) -> AttributeSpec | None:
        for spec in self.entity.attributes:
            if spec.name.text == name:
                return spec
        return None

    def collect_attributes(self) -> None:
        declared = {d.name.text: d.type_name.text for d in self.entity.declarations}
        for spec in self.entity.attributes:
            name = spec.name.text
            span = self.span_of(spec)
            name_span = self.source.span(spec.name.start, spec.name.end)
            if name not in USED_ATTRIBUTES:
                self.spans.setdefault(name, span)
                raw = (spec.value.text if isinstance(spec.value, StringValue)
                       else self.source.text[spec.value.start:spec.value.end])
                self.unused.append(RawAttribute(name, raw, span))
                kind = f" (declared as {declared[name]})" if name in declared else ""
                self.diagnostics.note(f"attribute {name}{kind} is not used; kept as text",
                                      name_span, code="bsdl-unused")
                continue
            if name in self.attributes:
                first = self.spans[name]
                self.diagnostics.error(f"attribute {name} is given twice", name_span,
                                       expected="each attribute once",
                                       hint=f"first given at {first}", code="bsdl-attribute")
                continue
            if self.target_fits(spec):
                self.attributes[name] = spec
                self.spans[name] = span

    def target_fits(self, spec: AttributeSpec) -> bool:
        name = spec.name.text
        target = spec.targets[0]
        target_span = self.source.span(target.start, target.end)
        if name in TAP_ATTRIBUTES:
            if spec.entity_class.text != "SIGNAL" or len(spec.targets) != 1:
                self.diagnostics.error(f"{name} is given for one TAP port, as a signal",
                                       self.source.span(spec.entity_class.start,
                                                        spec.entity_class.end),
                                       expected=f"`attribute {name} of PORT : signal is ...;`",
                                       code="bsdl-attribute")
                return False
            if target.name.text not in self.ports or target.index is not None:
                self.diagnostics.error(f"{name} names `{target.name.text}`, which is not a "
                                       "scalar port of the entity", target_span,
                                       expected="a port declared as `bit`",
                                       suggestions=nearest(target.name.text, self.ports),
                                       code="bsdl-attribute")
                return False
            return True
        if spec.entity_class.text != "ENTITY" or len(spec.targets) != 1:
            self.diagnostics.error(f"{name} is an attribute of the entity",
                                   self.source.span(spec.entity_class.start,
                                                    spec.entity_class.end),
                                   expected=f"`attribute {name} of {self.name} : entity is ...;`",
                                   code="bsdl-attribute")
            return False
        if target.name.text != self.name or target.index is not None:
            self.diagnostics.error(f"{name} is given for `{target.name.text}`, not for the "
                                   f"entity `{self.name}`", target_span,
                                   expected=f"`{self.name}`", suggestions=(self.name,),
                                   code="bsdl-attribute")
            return False
        return True

    def conformance(self) -> None:
        text = self.string("COMPONENT_CONFORMANCE")
        if text is not None and not _STANDARD_PACKAGE.fullmatch(text.value.text.strip().upper()):
            self.diagnostics.warning(
                f"COMPONENT_CONFORMANCE `{text.value.text}` names no edition of IEEE 1149.1",
                self.attribute_span(text.name), expected='"STD_1149_1_2001" or another edition',
                code="bsdl-attribute")

    # -- pin maps and TAP ----------------------------------------------------------------

    def pin_maps(self) -> tuple[dict[str, dict[str, tuple[str, ...]]], str | None]:
        maps: dict[str, dict[str, tuple[str, ...]]] = {}
        for constant in self.entity.constants:
            span = self.source.span(constant.name.start, constant.name.end)
            if constant.type_name.text != "PIN_MAP_STRING":
                self.diagnostics.note(f"constant {constant.name.text} of type "
                                      f"{constant.type_name.text} is not used", span,
                                      code="bsdl-unused")
                continue
            if not isinstance(constant.value, StringValue):
                where = constant.value if constant.value is not None else constant
                self.diagnostics.error(f"pin map {constant.name.text} needs a string value",
                                       self.source.span(where.start, where.end),
                                       expected='"PORT:PIN, VECTOR:(PIN, PIN), ..."',
                                       code="bsdl-pin-map")
                continue
            if constant.name.text in maps:
                self.diagnostics.error(f"pin map {constant.name.text} is declared twice", span,
                                       expected="each constant once", code="bsdl-pin-map")
                continue
            text = AttributeText(constant.name.text, constant.value, self.source)
            entries = self.parse(text, parse_pin_map)
            if entries is None:
                maps[constant.name.text] = {}
                continue
            maps[constant.name.text] = check_pin_map(
                constant.name.text, entries, self.ports, text.locate, span, self.diagnostics)
        return maps, self.selected_pin_map(maps)

    def selected_pin_map(self, maps: dict[str, dict[str, tuple[str, ...]]]) -> str | None:
        generic = next((g for g in self.entity.generics
                        if any(n.text == "PHYSICAL_PIN_MAP" for n in g.names)), None)
        for other in self.entity.generics:
            if other is not generic:
                first = other.names[0]
                self.diagnostics.note(f"generic {first.text} is not used",
                                      self.source.span(first.start, first.end),
                                      code="bsdl-unused")
        pin_map = self.attributes.get("PIN_MAP")
        if pin_map is not None and not (isinstance(pin_map.value, NameValue)
                                        and pin_map.value.name == "PHYSICAL_PIN_MAP"):
            self.diagnostics.error("PIN_MAP must name the generic PHYSICAL_PIN_MAP",
                                   self.span_of(pin_map.value),
                                   expected="`attribute PIN_MAP of ENTITY : entity is "
                                            "PHYSICAL_PIN_MAP;`", code="bsdl-pin-map")
        if generic is None or generic.default is None:
            return None
        if not isinstance(generic.default, StringValue):
            self.diagnostics.error("PHYSICAL_PIN_MAP needs a string default",
                                   self.span_of(generic.default),
                                   expected='the name of a pin map constant, e.g. "PQFP64"',
                                   code="bsdl-pin-map")
            return None
        chosen = generic.default.text.strip().upper()
        if chosen not in maps:
            self.diagnostics.error(f"PHYSICAL_PIN_MAP selects `{chosen}`, which is not a "
                                   "PIN_MAP_STRING constant", self.span_of(generic.default),
                                   expected="the name of a pin map constant of the entity",
                                   suggestions=nearest(chosen, maps), code="bsdl-pin-map")
            return None
        return chosen

    def tap(self) -> TapPins | None:
        """The TAP ports (IEEE 1149.1-2001 B.8.5, from memory), checked for direction."""
        found: dict[str, str] = {}
        for name in TAP_ATTRIBUTES:
            spec = self.attributes.get(name)
            if spec is None:
                if name != "TAP_SCAN_RESET":
                    self.missing(name)
                continue
            port = self.ports[spec.targets[0].name.text]
            target_span = self.source.span(spec.targets[0].start, spec.targets[0].end)
            wanted = ("OUT", "BUFFER", "INOUT") if name == "TAP_SCAN_OUT" else ("IN",)
            if port.direction not in wanted or port.width != 1:
                self.diagnostics.error(f"{name} port `{port.name}` is declared "
                                       f"{port.direction.lower()}", target_span,
                                       expected=" or ".join(w.lower() for w in wanted) + " bit",
                                       code="bsdl-tap")
            if name != "TAP_SCAN_CLOCK" and not (isinstance(spec.value, NameValue)
                                                  and spec.value.name == "TRUE"):
                self.diagnostics.error(f"{name} needs the value true", self.span_of(spec.value),
                                       expected="`true`", code="bsdl-tap")
            for other, port_name in found.items():
                if port_name == port.name:
                    self.diagnostics.error(f"`{port.name}` is both {other} and {name}",
                                           target_span, expected="a separate port per TAP signal",
                                           code="bsdl-tap")
            found[name] = port.name
        clock = self.tck_clock()
        if not all(n in found for n in TAP_ATTRIBUTES[:4]) or clock is None:
            return None
        return TapPins(tdi=found["TAP_SCAN_IN"], tdo=found["TAP_SCAN_OUT"],
                       tms=found["TAP_SCAN_MODE"], tck=found["TAP_SCAN_CLOCK"],
                       trst=found.get("TAP_SCAN_RESET"), max_tck_hz=clock[0], tck_stop=clock[1])

    def tck_clock(self) -> tuple[float, str] | None:
        spec = self.attributes.get("TAP_SCAN_CLOCK")
        if spec is None:
            return None
        value = spec.value
        expected = "`(frequency in Hz, BOTH or LOW)`, e.g. (20.0e6, BOTH)"
        if not (isinstance(value, AggregateValue) and len(value.items) == 2):
            self.diagnostics.error("TAP_SCAN_CLOCK needs the maximum TCK frequency and the "
                                   "stop state", self.span_of(value), expected=expected,
                                   code="bsdl-tap")
            return None
        frequency, stop = value.items
        if not isinstance(frequency, NumberValue) or not 0 < frequency.value < math.inf:
            self.diagnostics.error("the TCK frequency must be a positive number",
                                   self.span_of(frequency), expected=expected, code="bsdl-tap")
            return None
        if not (isinstance(stop, NameValue) and stop.name in ("BOTH", "LOW")):
            shown = self.source.text[stop.start:stop.end]
            self.diagnostics.error(f"`{shown}` is not a TCK stop state", self.span_of(stop),
                                   expected="BOTH or LOW",
                                   suggestions=nearest(shown, ("BOTH", "LOW")), code="bsdl-tap")
            return None
        return frequency.value, stop.name

"""Name resolution: what a program's names mean on this board, and what each device can do.

A `Scope` answers, for one board and the program's groups: which nets or pins a signal stands
for (most significant bit first), which instruction or register a name denotes, and which scan
pin can drive or observe a net in a given set of device modes. Every wrong name is reported
with "did you mean" from the names in scope.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Iterable, Mapping, Sequence

from ..diagnostics import Diagnostics, SourceSpan, nearest
from ..models.board import Board, PinRef
from ..models.cells import PIN, instruction_class, resolve_capture
from ..models.device import DRIVER_FUNCTIONS, RECEIVER_FUNCTIONS, DeviceModel
from . import ast

__all__ = ["BitRef", "Scope", "drives_pins", "drives_core", "observes_pins", "CORE_INPUT_FUNCTIONS"]

# Cells whose core side INTEST drives (IEEE 1149.1 INTEST: input cells apply values to the core).
CORE_INPUT_FUNCTIONS = frozenset({"INPUT", "CLOCK", "BIDIR"})

Modes = Mapping[str, str]


@dataclass(frozen=True, slots=True)
class BitRef:
    """One bit of a signal: a net, or a pin `REF.PORT` (with the net it sits on, if any)."""

    target: str
    is_pin: bool
    net: str | None

    @property
    def key(self) -> str:
        """What two drives of the same wire share: the net, else the pin itself."""
        return self.net if self.net is not None else self.target


# Resolves a group declared later in the program on first use (None: reported as wrong).
GroupResolver = Callable[[str], "tuple[BitRef, ...] | None"]


def drives_pins(device: DeviceModel, instruction: str) -> bool:
    """EXTEST and CLAMP put the boundary register's output cells onto the pins."""
    if instruction == "CLAMP":
        return True
    return instruction_class(instruction, device.selects.get(instruction)) == "EXTEST"


def drives_core(instruction: str) -> bool:
    """INTEST applies the input cells' values to the core instead of the pins."""
    return instruction == "INTEST"


def observes_pins(device: DeviceModel, instruction: str) -> bool:
    """Instructions that select the boundary register capture the pins at Capture-DR."""
    return device.selects.get(instruction) == "BOUNDARY"


class Scope:
    """The names a program may use on one board, with the program's groups."""

    def __init__(self, board: Board):
        self.board = board
        self.devices = board.devices
        self.nets = board.nets
        self.groups: dict[str, tuple[BitRef, ...]] = {}
        self._pending_groups: dict[str, ast.GroupDecl] = {}
        self._ports: dict[str, dict[str, str]] = {}
        self._drivers: dict[str, frozenset[str]] = {}
        self._core_inputs: dict[str, frozenset[str]] = {}
        self._observed: dict[tuple[str, str], frozenset[str]] = {}
        self._net_scan_pins: dict[str, tuple[PinRef, ...]] = {}
        # modes of a step -> target -> chosen driver: one dictionary per set of modes, so the
        # lookup per driven bit is a plain string key (tens of thousands of bits per step).
        self._driver_choice: dict[tuple[tuple[str, str], ...], dict[str, str | None]] = {}
        self._signals: dict[ast.Signal, tuple[BitRef, ...]] = {}

    # ---- groups -----------------------------------------------------------------------------
    def declare_groups(self, declarations: Iterable[ast.GroupDecl], diagnostics: Diagnostics) -> None:
        """Resolve every group; groups may name each other in any order (cycles are errors)."""
        pending: dict[str, ast.GroupDecl] = {}
        for decl in declarations:
            if decl.name in pending:
                diagnostics.error(f"group {decl.name} is declared twice", decl.name_span,
                                  hint=f"the first declaration is at {pending[decl.name].name_span}")
                continue
            if decl.name in self.nets:
                diagnostics.error(f"group {decl.name} has the name of a net of the board",
                                  decl.name_span, hint="give the group a name of its own")
                continue
            pending[decl.name] = decl
        visiting: list[str] = []

        def resolve(name: str) -> tuple[BitRef, ...] | None:
            if name in self.groups:
                return self.groups[name]
            if name in visiting:
                cycle = " -> ".join(visiting[visiting.index(name):] + [name])
                diagnostics.error(f"group {name} contains itself: {cycle}", pending[name].name_span)
                return None
            decl = pending[name]
            visiting.append(name)
            bits: list[BitRef] = []
            ok = True
            for member in decl.members:
                member_bits = self._signal(member, diagnostics, resolve)
                if member_bits is None:
                    ok = False
                    continue
                bits.extend(member_bits)
            visiting.pop()
            seen: dict[str, BitRef] = {}
            for bit in bits:
                if bit.key in seen:
                    diagnostics.error(f"{bit.target} appears twice in group {name}", decl.name_span)
                    ok = False
                    break
                seen[bit.key] = bit
            result = tuple(bits) if ok else None
            if result is not None:
                self.groups[name] = result
            else:
                self.groups[name] = ()  # reported once; later uses stay silent
            return result

        self._pending_groups = pending
        for name in pending:
            if name not in self.groups:
                resolve(name)
        self._pending_groups = {}

    # ---- signals ----------------------------------------------------------------------------
    def signal(self, signal: ast.Signal, diagnostics: Diagnostics) -> tuple[BitRef, ...] | None:
        """The bits of a signal, most significant first; None (reported) when it is unknown."""
        known = self._signals.get(signal)
        if known is not None:
            return known
        bits = self._signal(signal, diagnostics, None)
        if bits is not None:
            self._signals[signal] = bits
        return bits

    def _signal(self, signal: ast.Signal, diagnostics: Diagnostics,
                group_resolver: GroupResolver | None) -> tuple[BitRef, ...] | None:
        if isinstance(signal, ast.PinSignal):
            bit = self.pin(signal, diagnostics)
            return (bit,) if bit is not None else None
        if isinstance(signal, ast.NameSignal):
            group = self._group(signal.name, group_resolver)
            if group is not None:
                return group if group else None
            if signal.name in self.nets:
                return (BitRef(signal.name, False, signal.name),)
            self._unknown_name(signal.name, signal.span, diagnostics)
            return None
        group = self._group(signal.name, group_resolver)
        if group is None:
            if signal.name in self.nets:
                diagnostics.error(f"{signal.name} is a net; only groups can be sliced", signal.span,
                                  hint="declare a group: group NAME = [NET_MSB, ..., NET_LSB]")
            else:
                diagnostics.error(f"unknown group {signal.name}", signal.span,
                                  suggestions=nearest(signal.name, self.group_names()))
            return None
        if not group:
            return None
        width = len(group)
        if signal.high < signal.low:
            diagnostics.error(f"slice {signal.name}[{signal.high}:{signal.low}] is written low bit "
                              f"first", signal.span,
                              expected=f"the high bit first, as in {signal.name}[{signal.low}:{signal.high}]")
            return None
        if signal.high >= width:
            diagnostics.error(f"{signal.name} has bits {width - 1}..0; bit {signal.high} is out of range",
                              signal.span)
            return None
        # Bit i of a group is its i-th member counted from the last (least significant) one.
        return group[width - 1 - signal.high: width - signal.low]

    def _group(self, name: str, resolver: GroupResolver | None) -> tuple[BitRef, ...] | None:
        if name in self.groups:
            return self.groups[name]
        if resolver is not None and name in self._pending_groups:
            resolved = resolver(name)
            return resolved if resolved is not None else ()
        return None

    def group_names(self) -> list[str]:
        return list(self.groups) + list(self._pending_groups)

    def _unknown_name(self, name: str, span: SourceSpan | None, diagnostics: Diagnostics) -> None:
        if name in self.devices or name in self.board.parts:
            diagnostics.error(f"{name} is a device, not a net or group", span,
                              hint=f"name one of its pins as {name}.PORT")
            return
        diagnostics.error(f"unknown net or group {name}", span,
                          suggestions=nearest(name, list(self.nets) + self.group_names()))

    def pin(self, signal: ast.PinSignal, diagnostics: Diagnostics) -> BitRef | None:
        ref = signal.ref
        if ref not in self.devices:
            if ref in self.board.parts:
                net = self.board.net_of_pin.get(PinRef(ref, signal.port))
                part = self.board.parts[ref]
                if signal.port not in part.pins:
                    diagnostics.error(f"{ref} has no pin {signal.port}", signal.span,
                                      suggestions=nearest(signal.port, part.pins))
                    return None
                hint = f"name its net {net} instead" if net else "the pin is on no net"
                diagnostics.error(f"{ref} has no boundary scan: its pins cannot be driven or "
                                  f"read directly", signal.span, hint=hint)
                return None
            diagnostics.error(f"unknown device {ref}", signal.span,
                              suggestions=nearest(ref, list(self.devices) + list(self.board.parts)))
            return None
        device = self.devices[ref].device
        ports = self._port_index(ref)
        port = ports.get(signal.port.upper())
        if port is None:
            if signal.port.upper() in {p.upper() for p in device.ports}:
                vector = device.ports[next(p for p in device.ports if p.upper() == signal.port.upper())]
                diagnostics.error(f"{ref}.{signal.port} is a vector port; name one of its bits",
                                  signal.span, expected=f"a bit such as {ref}.{vector.bits[0]}")
                return None
            diagnostics.error(f"{ref} ({device.entity}) has no port {signal.port}", signal.span,
                              suggestions=nearest(signal.port, list(ports.values())))
            return None
        tap = device.tap
        if port in {tap.tdi, tap.tdo, tap.tms, tap.tck, tap.trst}:
            diagnostics.error(f"{ref}.{port} is a TAP pin: the scan chain itself uses it", signal.span)
            return None
        target = f"{ref}.{port}"
        return BitRef(target, True, self.board.net_of_pin.get(PinRef(ref, port)))

    def _port_index(self, ref: str) -> dict[str, str]:
        index = self._ports.get(ref)
        if index is None:
            index = {bit.upper(): bit for bit in self.devices[ref].device.port_bits()}
            self._ports[ref] = index
        return index

    # ---- instructions and registers ---------------------------------------------------------
    def instruction(self, ref: str, name: str, span: SourceSpan | None,
                    diagnostics: Diagnostics) -> str | None:
        """The instruction `name` of device `ref` (case-insensitive); private ones are refused."""
        device = self.devices[ref].device
        canonical = name.upper()
        if canonical not in device.instructions:
            diagnostics.error(f"{ref} ({device.entity}) has no instruction {name}", span,
                              suggestions=nearest(canonical, device.public_instructions))
            return None
        if canonical in device.private:
            diagnostics.error(f"{canonical} is a private instruction of {ref} ({device.entity})",
                              span, hint="private instructions are the maker's own; a board test "
                                         "may use only public ones")
            return None
        return canonical

    def device_ref(self, ref: str, span: SourceSpan | None, diagnostics: Diagnostics) -> bool:
        if ref in self.devices:
            return True
        if ref in self.board.parts:
            diagnostics.error(f"{ref} has no boundary scan: it has no instructions or registers", span)
            return False
        diagnostics.error(f"unknown device {ref}", span, suggestions=nearest(ref, self.devices))
        return False

    def register(self, ref: str, name: str, span: SourceSpan | None,
                 diagnostics: Diagnostics) -> str | None:
        device = self.devices[ref].device
        canonical = name.upper()
        if canonical in device.registers:
            return canonical
        if canonical in device.instructions:
            selected = device.selects.get(canonical)
            diagnostics.error(f"{canonical} is an instruction of {ref}, not a register", span,
                              hint=f"it selects the register {selected}" if selected else None,
                              suggestions=(selected,) if selected else ())
            return None
        diagnostics.error(f"{ref} ({device.entity}) has no register {name}", span,
                          suggestions=nearest(canonical, device.registers))
        return None

    # ---- what each device can do ------------------------------------------------------------
    def driver_ports(self, ref: str) -> frozenset[str]:
        """Ports with an OUTPUT2, OUTPUT3 or BIDIR cell (the device model's own index)."""
        ports = self._drivers.get(ref)
        if ports is None:
            ports = self._drivers[ref] = frozenset(self.devices[ref].device.driver_cells_by_port)
        return ports

    def core_input_ports(self, ref: str) -> frozenset[str]:
        """Ports whose input cell drives the core side under INTEST."""
        ports = self._core_inputs.get(ref)
        if ports is None:
            ports = self._core_inputs[ref] = frozenset(
                port for port, cells in self.devices[ref].device.cells_by_port.items()
                if any(c.function in CORE_INPUT_FUNCTIONS for c in cells))
        return ports

    def observed_ports(self, ref: str, instruction: str) -> frozenset[str]:
        """Ports whose pin some boundary cell captures under `instruction` (cells.py tables)."""
        key = (ref, instruction)
        ports = self._observed.get(key)
        if ports is None:
            device = self.devices[ref].device
            klass = instruction_class(instruction, device.selects.get(instruction)) or "SAMPLE"
            found = set()
            for cell in device.cells:
                if cell.port is None:
                    continue
                if cell.function in RECEIVER_FUNCTIONS:
                    found.add(cell.port)
                elif cell.function in DRIVER_FUNCTIONS and resolve_capture(
                        device.cell_info.get(cell.cell_type), cell.function, klass, True) == PIN:
                    found.add(cell.port)
            ports = frozenset(found)
            self._observed[key] = ports
        return ports

    def scan_pins(self, net: str) -> tuple[PinRef, ...]:
        """The net's pins on scan devices, in chain order."""
        pins = self._net_scan_pins.get(net)
        if pins is None:
            on_net = [p for p in self.nets[net].pins if p.ref in self.devices]
            pins = tuple(sorted(on_net, key=lambda p: (self.devices[p.ref].position, p.port)))
            self._net_scan_pins[net] = pins
        return pins

    def can_drive(self, pin: PinRef, modes: Modes) -> bool:
        device = self.devices[pin.ref].device
        mode = modes[pin.ref]
        if drives_pins(device, mode):
            return pin.port in self.driver_ports(pin.ref)
        if drives_core(mode):
            return pin.port in self.core_input_ports(pin.ref)
        return False

    def choose_driver(self, bit: BitRef, modes_key: tuple[tuple[str, str], ...],
                      modes: Modes) -> str | None:
        """The scan pin that drives `bit`: the named pin, else the first capable one in chain order.

        Pins that drive the net itself (EXTEST, CLAMP) come before INTEST's core-side inputs.
        """
        chosen = self._driver_choice.get(modes_key)
        if chosen is None:
            chosen = self._driver_choice.setdefault(modes_key, {})
        elif bit.target in chosen:
            return chosen[bit.target]
        choice: str | None = None
        if bit.is_pin:
            pin = PinRef.parse(bit.target)
            choice = bit.target if self.can_drive(pin, modes) else None
        else:
            candidates = self.scan_pins(bit.target)
            for pin in candidates:
                if drives_pins(self.devices[pin.ref].device, modes[pin.ref]) and \
                        pin.port in self.driver_ports(pin.ref):
                    choice = str(pin)
                    break
            else:
                for pin in candidates:
                    if drives_core(modes[pin.ref]) and pin.port in self.core_input_ports(pin.ref):
                        choice = str(pin)
                        break
        chosen[bit.target] = choice
        return choice

    def observed_by_any(self, bits: Sequence[BitRef], modes: Modes) -> list[bool]:
        """For each bit, whether some scan pin captures it in these modes: `observers`
        reduced to a yes or no, for whole columns (no sorting, no pin names)."""
        observing: dict[str, frozenset[str]] = {}
        for ref, mode in modes.items():
            entry = self.devices.get(ref)
            if entry is not None and observes_pins(entry.device, mode):
                observing[ref] = self.observed_ports(ref, mode)
        nets = self.nets
        none: frozenset[str] = frozenset()
        out: list[bool] = []
        for bit in bits:
            if bit.is_pin:
                ref, _, port = bit.target.partition(".")
                out.append(port in observing.get(ref, none))
            else:
                net = nets.get(bit.target)
                out.append(net is not None and any(
                    pin.port in observing.get(pin.ref, none) for pin in net.pins))
        return out

    def could_observe(self, bit: BitRef) -> tuple[str, ...]:
        """Devices that could capture `bit` under SAMPLE, whatever their mode now."""
        pins = (PinRef.parse(bit.target),) if bit.is_pin else self.scan_pins(bit.target)
        return tuple(dict.fromkeys(p.ref for p in pins
                                   if p.port in self.observed_ports(p.ref, "SAMPLE")))

    def could_drive(self, bit: BitRef) -> tuple[str, ...]:
        pins = (PinRef.parse(bit.target),) if bit.is_pin else self.scan_pins(bit.target)
        return tuple(dict.fromkeys(p.ref for p in pins if p.port in self.driver_ports(p.ref)))

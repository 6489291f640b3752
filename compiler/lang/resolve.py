"""Name resolution: what a program's names mean on this board, and what each device can do.

A `Scope` answers, for one board and the program's groups: which nets or pins a signal stands
for (most significant bit first), which instruction or register a name denotes, and which scan
pin can drive or observe a net in a given set of device modes. Every wrong name is reported
with "did you mean" from the names in scope.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import accumulate, chain, compress, repeat
from operator import attrgetter, contains, itemgetter, not_
from typing import Callable, Iterable, Mapping, Sequence

from ..diagnostics import Diagnostics, SourceSpan, nearest
from ..models.board import Board, PinRef
from ..models.cells import PIN, instruction_class, resolve_capture
from ..models.device import DRIVER_FUNCTIONS, RECEIVER_FUNCTIONS, DeviceModel
from ..models.model_memo import per_model
from . import ast
from ..bulk_records import frozen_records

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


# ---- tables of a device model (boards repeat their parts: one table per model) -------------

@per_model
def _port_index(device: DeviceModel) -> dict[str, str]:
    """Port bits by their upper-case spelling: pins are named case-insensitively."""
    return {bit.upper(): bit for bit in device.port_bits()}


@per_model
def _scan_port_index(device: DeviceModel) -> dict[str, str]:
    """`_port_index` without the TAP pins: the ports a pin signal may name."""
    tap = device.tap
    taps = {tap.tdi, tap.tdo, tap.tms, tap.tck, tap.trst}
    return {upper: bit for upper, bit in _port_index(device).items() if bit not in taps}


@per_model
def _driver_ports(device: DeviceModel) -> frozenset[str]:
    return frozenset(device.driver_cells_by_port)


@per_model
def _core_input_ports(device: DeviceModel) -> frozenset[str]:
    return frozenset(port for port, cells in device.cells_by_port.items()
                     if any(c.function in CORE_INPUT_FUNCTIONS for c in cells))


@per_model
def _observed_ports_by_class(device: DeviceModel) -> dict[str, frozenset[str]]:
    """Per instruction class, the ports whose pin some cell captures (filled on first use)."""
    return {}


def _observed_ports(device: DeviceModel, klass: str) -> frozenset[str]:
    known = _observed_ports_by_class(device)
    ports = known.get(klass)
    if ports is None:
        found = set()
        for cell in device.cells:
            if cell.port is None:
                continue
            if cell.function in RECEIVER_FUNCTIONS:
                found.add(cell.port)
            elif cell.function in DRIVER_FUNCTIONS and resolve_capture(
                    device.cell_info.get(cell.cell_type), cell.function, klass, True) == PIN:
                found.add(cell.port)
        ports = known[klass] = frozenset(found)
    return ports


@dataclass(frozen=True, slots=True)
class _DriveTables:
    """Per device, in one set of modes: the ports its pins can drive (EXTEST, CLAMP) and the
    ports whose core side INTEST drives; a named pin may be driven either way."""

    pins: dict[str, frozenset[str]]  # what a named pin REF.PORT may be driven by
    outward: dict[str, frozenset[str]]  # drives the net itself
    inward: dict[str, frozenset[str]]  # drives the core side (INTEST)


_NO_PORTS: frozenset[str] = frozenset()


class _NoNet:
    """What a name that is no net of the board stands for in `observed_by_any`: no pins."""

    pins: tuple[PinRef, ...] = ()


_NO_NET = _NoNet()


class Scope:
    """The names a program may use on one board, with the program's groups."""

    def __init__(self, board: Board):
        self.board = board
        self.devices = board.devices
        self.nets = board.nets
        self.groups: dict[str, tuple[BitRef, ...]] = {}
        self._pending_groups: dict[str, ast.GroupDecl] = {}
        self._net_scan_pins: dict[str, tuple[PinRef, ...]] = {}
        self._drive_tables: dict[tuple[tuple[str, str], ...], _DriveTables] = {}
        self._observing_in: dict[tuple[tuple[str, str], ...], dict[str, frozenset[str]]] = {}
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
            bits = self._plain_members(decl.members)
            ok = True
            if bits is None:  # groups, slices or wrong names among them: member by member
                bits = []
                for member in decl.members:
                    member_bits = self._signal(member, diagnostics, resolve)
                    if member_bits is None:
                        ok = False
                        continue
                    bits.extend(member_bits)
            visiting.pop()
            keys = _keys(bits)
            if len(set(keys)) != len(keys):
                seen: set[str] = set()
                for bit, key in zip(bits, keys):
                    if key in seen:
                        diagnostics.error(f"{bit.target} appears twice in group {name}", decl.name_span)
                        ok = False
                        break
                    seen.add(key)
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

    def _plain_members(self, members: Sequence[ast.Signal]) -> list[BitRef] | None:
        """The bits of a member list of nets only or scan pins only, worked out a column at a
        time (groups of large boards have thousands of members); None when some member needs
        more (a group, a slice, a name that is no net, a pin that is no scan pin): then the
        members are resolved one by one, which reports what is wrong.
        """
        count = len(members)
        kinds = set(map(type, members))
        if kinds == {ast.NameSignal}:
            names = list(map(_NAME, members))
            wanted = set(names)
            if not wanted <= self.nets.keys() or not wanted.isdisjoint(self.groups) or \
                    not wanted.isdisjoint(self._pending_groups):
                return None
            return frozen_records(BitRef, count, names, repeat(False, count), names)
        if kinds == {ast.PinSignal}:
            refs = list(map(_REF, members))
            devices = self.devices
            if not devices.keys() >= set(refs):
                return None
            indexes = {ref: _scan_port_index(devices[ref].device) for ref in set(refs)}
            ports = list(map(dict.get, map(indexes.__getitem__, refs), map(str.upper, map(_PORT, members))))
            if None in ports:
                return None
            targets = list(map(".".join, zip(refs, ports)))
            nets = map(self.board.net_of_pin.get, zip(refs, ports))  # PinRef keys equal plain pairs
            return frozen_records(BitRef, count, targets, repeat(True, count), nets)
        return None

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
        ports = _port_index(device)
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
        return _driver_ports(self.devices[ref].device)

    def core_input_ports(self, ref: str) -> frozenset[str]:
        """Ports whose input cell drives the core side under INTEST."""
        return _core_input_ports(self.devices[ref].device)

    def observed_ports(self, ref: str, instruction: str) -> frozenset[str]:
        """Ports whose pin some boundary cell captures under `instruction` (cells.py tables)."""
        device = self.devices[ref].device
        klass = instruction_class(instruction, device.selects.get(instruction)) or "SAMPLE"
        return _observed_ports(device, klass)

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

    def _tables(self, modes_key: tuple[tuple[str, str], ...], modes: Modes) -> _DriveTables:
        """What each device can drive in these modes (once per set of modes)."""
        tables = self._drive_tables.get(modes_key)
        if tables is None:
            pins: dict[str, frozenset[str]] = {}
            outward: dict[str, frozenset[str]] = {}
            inward: dict[str, frozenset[str]] = {}
            for ref, mode in modes.items():
                entry = self.devices.get(ref)
                if entry is None:
                    continue
                onto_pins = drives_pins(entry.device, mode)
                outward[ref] = _driver_ports(entry.device) if onto_pins else _NO_PORTS
                inward[ref] = _core_input_ports(entry.device) if drives_core(mode) else _NO_PORTS
                pins[ref] = outward[ref] if onto_pins else inward[ref]
            tables = self._drive_tables[modes_key] = _DriveTables(pins, outward, inward)
        return tables

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
        tables = self._tables(modes_key, modes)
        if bit.is_pin:
            ref, _, port = bit.target.partition(".")
            choice = bit.target if port in tables.pins[ref] else None
        else:
            choice = self._net_driver(bit.target, tables)
        chosen[bit.target] = choice
        return choice

    def column_drivers(self, bits: Sequence[BitRef], modes_key: tuple[tuple[str, str], ...],
                       modes: Modes, targets: Sequence[str] | None = None,
                       is_pin: Sequence[bool] | None = None) -> tuple[str | None, ...]:
        """`choose_driver` for each bit of a column, the named pins a column at a time
        (`targets` and `is_pin`: the bits' own, when the caller has them already)."""
        chosen = self._driver_choice.setdefault(modes_key, {})
        if targets is None or is_pin is None:
            targets, is_pin = list(map(_TARGET, bits)), list(map(_IS_PIN, bits))
        if not chosen.keys() >= set(targets):
            tables = self._tables(modes_key, modes)
            pins = [target for target, pin in zip(targets, is_pin) if pin and target not in chosen]
            if pins:
                parts = list(map(str.partition, pins, repeat(".")))
                capable = list(map(contains, map(tables.pins.__getitem__, map(_FIRST, parts)),
                                   map(_THIRD, parts)))
                chosen.update(zip(pins, repeat(None)))
                chosen.update(zip(compress(pins, capable), compress(pins, capable)))  # itself
            for target in compress(targets, map(not_, is_pin)):
                if target not in chosen:
                    chosen[target] = self._net_driver(target, tables)
        return tuple(map(chosen.__getitem__, targets))

    def _net_driver(self, net: str, tables: _DriveTables) -> str | None:
        candidates = self.scan_pins(net)
        for pin in candidates:
            if pin.port in tables.outward[pin.ref]:
                return str(pin)
        for pin in candidates:
            if pin.port in tables.inward[pin.ref]:
                return str(pin)
        return None

    def observed_by_any(self, bits: Sequence[BitRef], modes: Modes, targets: Sequence[str] | None = None,
                        is_pin: Sequence[bool] | None = None) -> list[bool]:
        """For each bit, whether some scan pin captures it in these modes: `observers`
        reduced to a yes or no, for whole columns (no sorting, no pin names, no Python code
        per bit: a column of a large board has thousands of bits). `targets` and `is_pin`:
        the bits' own, when the caller has them already."""
        observing = self._observing(modes)
        if targets is None or is_pin is None:
            targets, is_pin = list(map(_TARGET, bits)), list(map(_IS_PIN, bits))
        pin_targets = list(compress(targets, is_pin))
        net_targets = list(compress(targets, map(not_, is_pin)))
        pins_seen: list[bool] = []
        nets_seen: list[bool] = []
        if pin_targets:  # the pin's own port, on its own device
            parts = list(map(str.partition, pin_targets, repeat(".")))
            pins_seen = list(map(contains, map(observing.get, map(_FIRST, parts), repeat(_NO_PORTS)),
                                 map(_THIRD, parts)))
        if net_targets:  # any pin of the net: every pin's answer, then any() over each net's share
            on_net = list(map(_PINS, map(self.nets.get, net_targets, repeat(_NO_NET))))
            every = list(chain.from_iterable(on_net))
            seen = list(map(contains, map(observing.get, map(_FIRST, every), repeat(_NO_PORTS)),
                            map(_SECOND, every)))
            ends = list(accumulate(map(len, on_net)))
            nets_seen = list(map(any, map(seen.__getitem__, map(slice, [0, *ends[:-1]], ends))))
        if not net_targets:
            return pins_seen
        if not pin_targets:
            return nets_seen
        pin_answers, net_answers = iter(pins_seen), iter(nets_seen)
        return [next(pin_answers) if pin else next(net_answers) for pin in is_pin]

    def _observing(self, modes: Modes) -> dict[str, frozenset[str]]:
        """The devices that capture their pins in these modes, with the ports they capture."""
        key = tuple(modes.items())
        observing = self._observing_in.get(key)
        if observing is None:
            observing = self._observing_in[key] = {}
            for ref, mode in key:
                entry = self.devices.get(ref)
                if entry is not None and observes_pins(entry.device, mode):
                    observing[ref] = self.observed_ports(ref, mode)
        return observing

    def could_observe(self, bit: BitRef) -> tuple[str, ...]:
        """Devices that could capture `bit` under SAMPLE, whatever their mode now."""
        pins = (PinRef.parse(bit.target),) if bit.is_pin else self.scan_pins(bit.target)
        return tuple(dict.fromkeys(p.ref for p in pins
                                   if p.port in self.observed_ports(p.ref, "SAMPLE")))

    def could_drive(self, bit: BitRef) -> tuple[str, ...]:
        pins = (PinRef.parse(bit.target),) if bit.is_pin else self.scan_pins(bit.target)
        return tuple(dict.fromkeys(p.ref for p in pins if p.port in self.driver_ports(p.ref)))


_NAME = attrgetter("name")
_REF = attrgetter("ref")
_PORT = attrgetter("port")
_TARGET = attrgetter("target")
_IS_PIN = attrgetter("is_pin")
_PINS = attrgetter("pins")
_FIRST = itemgetter(0)
_SECOND = itemgetter(1)
_THIRD = itemgetter(2)


def _keys(bits: Sequence[BitRef]) -> list[str]:
    """Each bit's `key` (its net, else the pin itself), for a whole column."""
    nets = list(map(_NET, bits))
    if None not in nets:
        return nets  # type: ignore[return-value]
    return [target if net is None else net for target, net in zip(map(_TARGET, bits), nets)]


_NET = attrgetter("net")

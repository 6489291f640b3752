"""Faults: the spec strings engineers write, a faults file, and the fault universe of a board.

Spec strings (one per `--fault`, or one per line of a faults file where `#` starts a comment):

    open:REF.PORT            the pin is cut from its net: its receiver floats, its driver
                             reaches nothing (also a TAP pin: open:U2.TMS)
    open:NET                 every pin of the net is cut: every receiver floats
    short:NET_A,NET_B        a wired-AND short (0 dominates), the default; add :and to say so,
                             :or for wired-OR (1 dominates), or :REF.PORT for that driver dominating
    short:NET,REF.TDO        a net shorted onto a TAP signal (TDI, TDO, TMS, TCK or TRST of a
                             chain device); :and (default) or :or
    stuck-at-0:NET           the net is held at 0 (stuck-at-1:NET at 1)

The universe: every receiver pin on a net open, every net stuck-at-0 and stuck-at-1, and
shorts between the nets (or a net and a TAP signal) on adjacent package pins of one device:
neighbouring numbers for leaded packages, grid neighbours (same row or column, next to each
other) for ball grids such as "A1", "B2".
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from itertools import cycle, repeat
from pathlib import Path
from typing import Iterable, Sequence

from ..bulk_records import frozen_records
from ..diagnostics import Diagnostic, Diagnostics, ScanloomError, SourceSpan, nearest, read_source
from ..models.board import PinRef
from ..models.device import DeviceModel
from ..models.model_memo import per_model
from .electrical import ElectricalBoard

__all__ = [
    "OPEN_PIN",
    "OPEN_NET",
    "STUCK_AT",
    "SHORT",
    "TAP_SHORT",
    "FAULT_CLASSES",
    "UNIVERSE_CLASSES",
    "TAP_SIGNALS",
    "Fault",
    "parse_fault",
    "parse_fault_specs",
    "read_faults_file",
    "fault_universe",
    "adjacent_pin_pairs",
    "tap_port",
    "tap_signal_of_port",
    "tap_ports",
]

OPEN_PIN = "open-pin"
OPEN_NET = "open-net"
STUCK_AT = "stuck-at"
SHORT = "short"
TAP_SHORT = "tap-short"

# Coverage is reported per class; TAP-signal faults form their own class.
FAULT_CLASSES = ("open", "stuck-at", "short", "tap")
UNIVERSE_CLASSES = ("opens", "shorts", "stuck")
TAP_SIGNALS = ("TDI", "TDO", "TMS", "TCK", "TRST")
_KINDS = ("open", "short", "stuck-at-0", "stuck-at-1")


@dataclass(frozen=True, slots=True)
class Fault:
    """One fault. `spec` is the canonical spec string; the other fields say what it touches."""

    kind: str  # OPEN_PIN, OPEN_NET, STUCK_AT, SHORT, TAP_SHORT
    spec: str
    nets: tuple[str, ...] = ()
    pin: PinRef | None = None  # OPEN_PIN: the pin; TAP_SHORT: the TAP pin (REF.TDO ...)
    value: str | None = None  # STUCK_AT: "0" or "1"
    mode: str = "and"  # SHORT / TAP_SHORT: "and", "or" or "dominant"
    dominant: PinRef | None = None
    tap: bool = False  # the fault acts on a TAP signal

    @property
    def fault_class(self) -> str:
        if self.tap:
            return "tap"
        if self.kind in (OPEN_PIN, OPEN_NET):
            return "open"
        if self.kind == STUCK_AT:
            return "stuck-at"
        return "short"

    def __str__(self) -> str:
        return self.spec


def tap_port(device: DeviceModel, signal: str) -> str | None:
    """The BSDL port that carries TAP `signal` (TDI, TDO, TMS, TCK, TRST) on `device`."""
    tap = device.tap
    return {"TDI": tap.tdi, "TDO": tap.tdo, "TMS": tap.tms, "TCK": tap.tck, "TRST": tap.trst}.get(signal)


def tap_signal_of_port(device: DeviceModel, port: str) -> str | None:
    """The TAP signal (TDI, TDO, TMS, TCK or TRST, first in that order) that `port` carries on
    `device`, or None; a table per device model, since every pin of a board's universe asks."""
    return _tap_signals(device).get(port)


def tap_ports(device: DeviceModel) -> tuple[str, ...]:
    """The ports of `device` that carry a TAP signal."""
    return tuple(_tap_signals(device))


@per_model
def _tap_signals(device: DeviceModel) -> dict[str, str]:
    signals: dict[str, str] = {}
    for signal in TAP_SIGNALS:
        port = tap_port(device, signal)
        if port is not None:
            signals.setdefault(port, signal)
    return signals


def _tap_signal_of(electrical: ElectricalBoard, pin: PinRef) -> str | None:
    """TDI, TDO, TMS, TCK or TRST when `pin` is a TAP pin of a chain device."""
    entry = electrical.board.devices.get(pin.ref)
    if entry is None:
        return None
    return tap_signal_of_port(entry.device, pin.port)


class _SpecReader:
    """Parses one spec string; positions count from the spec's first character."""

    def __init__(self, electrical: ElectricalBoard, text: str, span_of, diagnostics: Diagnostics) -> None:
        self.electrical = electrical
        self.board = electrical.board
        self.text = text
        self.span_of = span_of
        self.diag = diagnostics

    def error(self, message: str, offset: int, length: int, **kwargs) -> None:  # type: ignore[no-untyped-def]
        self.diag.error(message, self.span_of(offset, length), **kwargs)

    def read(self) -> Fault | None:
        text = self.text
        kind, colon, rest = text.partition(":")
        if not colon:
            self.error(f"'{text}' is not a fault spec", 0, len(text),
                       expected="open:, short:, stuck-at-0: or stuck-at-1: and a net or pin",
                       suggestions=nearest(text, _KINDS))
            return None
        kind_key = kind.strip().lower()
        start = len(kind) + 1
        if kind_key not in _KINDS:
            self.error(f"unknown fault kind '{kind}'", 0, len(kind),
                       expected="open, short, stuck-at-0 or stuck-at-1", suggestions=nearest(kind, _KINDS))
            return None
        if not rest.strip():
            self.error(f"'{kind}:' needs a net or pin", len(text), 1,
                       expected="a net name" + (" or REF.PORT" if kind_key == "open" else ""))
            return None
        if kind_key == "open":
            return self.open(rest, start)
        if kind_key == "short":
            return self.short(rest, start)
        net = self.net(rest, start)
        if net is None:
            return None
        value = kind_key[-1]
        return Fault(STUCK_AT, f"stuck-at-{value}:{net}", (net,), value=value,
                     tap=self.board.nets[net].tap)

    def stripped(self, text: str, start: int) -> tuple[str, int]:
        lead = len(text) - len(text.lstrip())
        return text.strip(), start + lead

    def net(self, text: str, start: int) -> str | None:
        name, start = self.stripped(text, start)
        if name in self.board.nets:
            return name
        self.error(f"unknown net '{name}'", start, len(name), expected="a net of the board file",
                   suggestions=nearest(name, self.board.nets))
        return None

    def pin(self, text: str, start: int) -> PinRef | None:
        """REF.PORT of a chain device (a port bit or TAP port) or of a part."""
        name, start = self.stripped(text, start)
        ref, dot, port = name.partition(".")
        if not dot or not port:
            return None
        entry = self.board.devices.get(ref)
        if entry is not None:
            bit = port.upper().replace(" ", "")
            signal_port = tap_port(entry.device, bit)
            if signal_port is not None:
                return PinRef(ref, signal_port)
            if bit in entry.device.port_bits():
                return PinRef(ref, bit)
            self.error(f"{ref} ({entry.device.entity}) has no port '{port}'", start + len(ref) + 1, len(port),
                       suggestions=nearest(bit, entry.device.port_bits()))
            return PinRef("", "")
        part = self.board.parts.get(ref)
        if part is not None:
            if port in part.pins:
                return PinRef(ref, port)
            self.error(f"part '{ref}' has no pin '{port}'", start + len(ref) + 1, len(port),
                       expected="one of its pins: " + ", ".join(part.pins), suggestions=nearest(port, part.pins))
            return PinRef("", "")
        return None

    def open(self, text: str, start: int) -> Fault | None:
        name, begin = self.stripped(text, start)
        if name in self.board.nets:
            return Fault(OPEN_NET, f"open:{name}", (name,), tap=self.board.nets[name].tap)
        pin = self.pin(text, start)
        if pin is None:
            refs = sorted(set(self.board.devices) | set(self.board.parts))
            self.error(f"'{name}' is neither a net nor a pin (REF.PORT)", begin, len(name),
                       expected="a net name or REF.PORT",
                       suggestions=nearest(name, list(self.board.nets) + refs))
            return None
        if not pin.ref:
            return None
        net = self.electrical.net_of_pin.get(pin)
        signal = _tap_signal_of(self.electrical, pin)
        if net is None and signal is None:
            self.error(f"{pin} is in no net; an open cuts a pin from its net", begin, len(name))
            return None
        tap = signal is not None or (net is not None and self.board.nets[net].tap)
        return Fault(OPEN_PIN, f"open:{pin}", (net,) if net else (), pin=pin, tap=tap)

    def short(self, text: str, start: int) -> Fault | None:
        first, comma, rest = text.partition(",")
        if not comma:
            self.error("a short names two nets, separated by a comma", start + len(text), 1,
                       expected="short:NET_A,NET_B")
            return None
        second, colon, mode_text = rest.partition(":")
        net_a = self.net(first, start)
        second_start = start + len(first) + 1
        other_name, other_start = self.stripped(second, second_start)
        tap_pin = None
        net_b = None
        if other_name in self.board.nets:
            net_b = other_name
        else:
            pin = self.pin(second, second_start)
            if pin is not None and pin.ref and _tap_signal_of(self.electrical, pin) is not None:
                tap_pin = pin
            elif pin is not None and pin.ref:
                self.error(f"{pin} is not a TAP pin; a short onto a pin names a TAP signal "
                           "(TDI, TDO, TMS, TCK or TRST)", other_start, len(other_name),
                           hint="to short two nets, name both nets")
                return None
            elif pin is None:
                self.error(f"unknown net '{other_name}'", other_start, len(other_name),
                           expected="a net of the board file, or REF.TDI/TDO/TMS/TCK/TRST",
                           suggestions=nearest(other_name, self.board.nets))
                return None
            else:
                return None
        if net_a is None:
            return None
        mode, dominant = "and", None
        mode_start = second_start + len(second) + 1
        if colon:
            word, word_start = self.stripped(mode_text, mode_start)
            if word.lower() in ("and", "or"):
                mode = word.lower()
            elif tap_pin is None and "." in word:
                dominant = self.pin(mode_text, mode_start)
                if dominant is None or not dominant.ref:
                    if dominant is None:
                        self.error(f"unknown driver '{word}'", word_start, len(word),
                                   expected="and, or, or the REF.PORT of a driver on one of the nets")
                    return None
                if not self.drives(dominant, (net_a, net_b)):  # type: ignore[arg-type]
                    self.error(f"{dominant} does not drive {net_a} or {net_b}", word_start, len(word),
                               expected="the REF.PORT of a scan output or logic output on one of the two nets")
                    return None
                mode = "dominant"
            else:
                self.error(f"unknown short mode '{word}'", word_start, max(1, len(word)),
                           expected="and, or" + ("" if tap_pin else ", or REF.PORT of the dominant driver"),
                           suggestions=nearest(word, ("and", "or")))
                return None
        if tap_pin is not None:
            suffix = ":or" if mode == "or" else ""
            signal = _tap_signal_of(self.electrical, tap_pin)
            return Fault(TAP_SHORT, f"short:{net_a},{tap_pin.ref}.{signal}{suffix}", (net_a,),
                         pin=tap_pin, mode=mode, tap=True)
        assert net_b is not None
        if net_a == net_b:
            self.error(f"a short needs two different nets; '{net_a}' is named twice",
                       other_start, len(other_name))
            return None
        suffix = {"and": "", "or": ":or", "dominant": f":{dominant}"}[mode]
        tap = self.board.nets[net_a].tap or self.board.nets[net_b].tap
        if self.board.nets[net_a].tap and self.board.nets[net_b].tap:
            self.error(f"{net_a} and {net_b} both carry TAP signals; the virtual board models a TAP "
                       "signal shorted to an ordinary net", other_start, len(other_name),
                       hint="grade the chain-integrity tests for shorts between TAP signals")
            return None
        return Fault(SHORT, f"short:{net_a},{net_b}{suffix}", (net_a, net_b), mode=mode,
                     dominant=dominant, tap=tap)

    def drives(self, pin: PinRef, nets: tuple[str, str]) -> bool:
        if pin not in self.electrical.drivers and pin not in self.electrical.logic_of_pin:
            return False
        node = self.electrical.node_of_pin.get(pin)
        return node is not None and any(self.electrical.node_of_net[n] == node for n in nets)


def parse_fault(text: str, electrical: ElectricalBoard, diagnostics: Diagnostics, *,
                file: str = "--fault", line: int = 1, column: int = 1) -> Fault | None:
    """One spec string; problems are reported at `file:line:column` + offset, None returned."""

    def span_of(offset: int, length: int) -> SourceSpan:
        start = column + offset
        return SourceSpan(file, line, start, line, start + max(1, length))

    return _SpecReader(electrical, text, span_of, diagnostics).read()


def parse_fault_specs(specs: Sequence[str], electrical: ElectricalBoard) -> tuple[Fault, ...]:
    """Faults from `--fault` options; raises ScanloomError naming every bad spec."""
    diagnostics = Diagnostics()
    faults: list[Fault] = []
    for number, text in enumerate(specs, 1):
        file = f"--fault #{number}"
        diagnostics.add_source(file, text)
        fault = parse_fault(text, electrical, diagnostics, file=file)
        if fault is not None:
            faults.append(fault)
    diagnostics.raise_if_errors()
    return tuple(faults)


def read_faults_file(path: str | Path, electrical: ElectricalBoard) -> tuple[Fault, ...]:
    """A faults file: one spec per line, `#` comments, blank lines ignored."""
    diagnostics = Diagnostics()
    file = str(path)
    try:
        text = read_source(path)
    except OSError as exc:
        diagnostics.error(f"cannot read the faults file {file}: {exc.strerror or exc}")
        diagnostics.raise_if_errors()
        raise  # unreachable: raise_if_errors raised
    diagnostics.add_source(file, text)
    faults: list[Fault] = []
    for number, raw in enumerate(text.splitlines(), 1):
        body = raw.split("#", 1)[0]
        spec = body.strip()
        if not spec:
            continue
        column = len(body) - len(body.lstrip()) + 1
        fault = parse_fault(spec, electrical, diagnostics, file=file, line=number, column=column)
        if fault is not None:
            faults.append(fault)
    diagnostics.raise_if_errors()
    if not faults:
        raise ScanloomError([_no_faults(file)], diagnostics.sources)
    return tuple(faults)


def _no_faults(file: str) -> Diagnostic:
    return Diagnostic("error", f"the faults file {file} names no fault", SourceSpan(file, 1, 1),
                      expected="one fault spec per line, e.g. open:U1.PA(3) or short:NET_A,NET_B")


_GRID = re.compile(r"^([A-Z]+)(\d+)$")
# Ball-grid row letters in order: JEDEC leaves out I, O, Q, S, X and Z (JEP95; from memory).
_ROW_LETTERS = "ABCDEFGHJKLMNPRTUVWY"


def _row_index(row: str, letters: str) -> int | None:
    """Position of a row label (A, B, ... Y, AA, AB ...) in the package's row sequence."""
    index = 0
    for char in row:
        position = letters.find(char)
        if position < 0:
            return None
        index = index * len(letters) + position + 1
    return index


def adjacent_pin_pairs(device: DeviceModel) -> list[tuple[str, str]]:
    """Pairs of port bits on neighbouring package pins of the selected pin map.

    Leaded packages (numbered pins) neighbour n and n+1; ball grids (row letters and column
    numbers, e.g. "C7") neighbour the next column in a row and the next row in a column, with
    rows lettered as JEDEC does (no I, O, Q, S, X or Z: H is next to J). Worked out once per
    device model: a board repeats its parts, and grading, checks and diagnosis all ask.
    """
    return list(_adjacent_pairs(device))


@per_model
def _adjacent_pairs(device: DeviceModel) -> tuple[tuple[str, str], ...]:
    if device.pin_map_name is None:
        return ()
    pins: dict[str, str] = {}
    for port, package_pins in device.pin_maps.get(device.pin_map_name, {}).items():
        for pin in package_pins:
            pins.setdefault(str(pin).upper(), port)
    pairs: list[tuple[str, str]] = []
    numbered = {int(p): port for p, port in pins.items() if p.isdigit()}
    for number in sorted(numbered):
        if number + 1 in numbered:
            pairs.append((numbered[number], numbered[number + 1]))
    grid: dict[tuple[str, int], str] = {}
    for pin, port in pins.items():
        found = _GRID.match(pin)
        if found:
            grid[(found.group(1), int(found.group(2)))] = port
    rows = {row for row, _ in grid}
    letters = _ROW_LETTERS
    if any(_row_index(row, letters) is None for row in rows):
        letters = "ABCDEFGHIJKLMNOPQRSTUVWXYZ"  # a package that uses every letter
    index_of = {row: _row_index(row, letters) for row in rows}
    row_at = {index: row for row, index in index_of.items()}
    for (row, column) in sorted(grid, key=lambda rc: (index_of[rc[0]], rc[1])):
        port = grid[(row, column)]
        if (row, column + 1) in grid:
            pairs.append((port, grid[(row, column + 1)]))
        below = row_at.get(index_of[row] + 1)  # type: ignore[operator]
        if below is not None and (below, column) in grid:
            pairs.append((port, grid[(below, column)]))
    return tuple(pairs)


def fault_universe(electrical: ElectricalBoard, classes: Iterable[str] = UNIVERSE_CLASSES) -> tuple[Fault, ...]:
    """The faults of a board, in a stable order: opens, then stuck-at, then shorts.

    A board has a fault per receiver pin, two per net and one per adjacent pair: the faults
    are made a column of fields at a time (`frozen_records`)."""
    wanted = set(classes)
    board = electrical.board
    faults: list[Fault] = []
    if "opens" in wanted:
        receivers, logic_receivers = electrical.receivers, electrical.logic_receivers
        pins: list[PinRef] = []
        of_net: list[tuple[str, ...]] = []
        taps: list[bool] = []
        for net in board.nets.values():
            nets = (net.name,)
            for pin in net.pins:
                if pin in receivers or pin in logic_receivers:
                    pins.append(pin)
                    of_net.append(nets)
                    taps.append(net.tap)
        specs = [f"open:{ref}.{port}" for ref, port in pins]
        faults += frozen_records(Fault, len(pins), repeat(OPEN_PIN), specs, of_net, pins, repeat(None),
                                 repeat("and"), repeat(None), taps)
    if "stuck" in wanted:
        names = [(name,) for name in board.nets for _ in "01"]
        specs = [f"stuck-at-{value}:{name}" for name in board.nets for value in "01"]
        taps = [net.tap for net in board.nets.values() for _ in "01"]
        faults += frozen_records(Fault, len(names), repeat(STUCK_AT), specs, names, repeat(None),
                                 cycle("01"), repeat("and"), repeat(None), taps)
    if "shorts" in wanted:
        faults.extend(_adjacent_shorts(electrical))
    return tuple(faults)


def _adjacent_shorts(electrical: ElectricalBoard) -> list[Fault]:
    """Shorts between the nets (or a net and a TAP signal) on adjacent package pins, each once."""
    board = electrical.board
    nets = board.nets
    net_of_pin = electrical.net_of_pin
    order = {name: i for i, name in enumerate(nets)}
    seen: set[tuple[str, ...]] = set()
    kinds: list[str] = []
    specs: list[str] = []
    shorted: list[tuple[str, ...]] = []
    pins: list[PinRef | None] = []
    taps: list[bool] = []
    for entry in board.chain:
        ref = entry.ref
        for port_a, port_b in adjacent_pin_pairs(entry.device):
            pin_a, pin_b = PinRef(ref, port_a), PinRef(ref, port_b)
            net_a, net_b = net_of_pin.get(pin_a), net_of_pin.get(pin_b)
            if net_a is not None and net_b is not None:
                if net_a == net_b:
                    continue
                pair = (net_a, net_b) if order[net_a] < order[net_b] else (net_b, net_a)
                if pair in seen:
                    continue
                seen.add(pair)
                tap_a, tap_b = nets[net_a].tap, nets[net_b].tap
                if tap_a and tap_b:
                    continue  # between two TAP signals: outside the model (see parse_fault)
                kinds.append(SHORT)
                specs.append(f"short:{pair[0]},{pair[1]}")
                shorted.append(pair)
                pins.append(None)
                taps.append(tap_a or tap_b)
                continue
            for net, pin in ((net_a, pin_b), (net_b, pin_a)):
                if net is None:
                    continue
                signal = tap_signal_of_port(entry.device, pin.port)
                if signal is None:
                    continue
                key = (net, ref, signal)
                if key in seen:
                    continue
                seen.add(key)
                kinds.append(TAP_SHORT)
                specs.append(f"short:{net},{ref}.{signal}")
                shorted.append((net,))
                pins.append(pin)
                taps.append(True)
    return frozen_records(Fault, len(kinds), kinds, specs, shorted, pins, repeat(None), repeat("and"),
                          repeat(None), taps)

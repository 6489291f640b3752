"""The board file loader: our YAML schema (DEVELOPERS.md, "The board file") into a `Board`.

Every problem is reported with the YAML line and column of the offending node and, where a
name is wrong, the nearest valid names. All problems of a file are collected before stopping.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from ..diagnostics import Diagnostics, SourceSpan, nearest, read_source
from ..file_kinds import BOARD, misplaced_kind_error
from .board import TECHNOLOGIES, Board, ChainDevice, Net, Part, PinRef
from .board_cache import BoardCache
from .device import DeviceModel
from .yaml_nodes import PositionedYaml, load_positioned_yaml

__all__ = ["load_board", "parse_board", "TOP_LEVEL_KEYS"]

TOP_LEVEL_KEYS = ("board", "technology", "trst", "chain", "parts", "nets", "pulls", "hold", "never_drive")
CHAIN_KEYS = ("ref", "bsdl", "technology")
PART_KEYS = ("pins", "logic", "enable", "series", "technology")
NET_KEYS = ("pins", "tap")


def load_board(path: str | Path, diagnostics: Diagnostics) -> Board:
    """Read and validate a board file and every BSDL file it names; raises ScanloomError.

    A large board comes from the board cache (models.board_cache) while its files are
    unchanged; the board, its warnings and its sources are the same either way.
    """
    path = Path(path)
    file = str(path)
    cache = BoardCache.from_environment()
    if cache is not None:
        cached = cache.load(file, diagnostics)
        if cached is not None:
            return cached
    try:
        text = read_source(path)
    except OSError as exc:
        diagnostics.error(f"cannot read the board file {file}: {exc.strerror or exc}",
                          hint="check the path; board files are YAML (DEVELOPERS.md)")
        diagnostics.raise_if_errors()
        raise  # unreachable: raise_if_errors raised
    sources_before = set(diagnostics.sources)
    items_before = len(diagnostics.items)
    board = parse_board(text, file, diagnostics)
    if cache is not None:
        sources = {name: source for name, source in diagnostics.sources.items()
                   if name not in sources_before}
        cache.store(file, board, diagnostics.items[items_before:], sources)
    return board


def parse_board(text: str, file: str, diagnostics: Diagnostics) -> Board:
    diagnostics.add_source(file, text)
    yaml_diagnostics = Diagnostics(sources=diagnostics.sources)
    doc = load_positioned_yaml(text, file, yaml_diagnostics)
    misplaced = None
    if doc is None or not isinstance(doc.data, dict) or "chain" not in doc.data or "schema" in doc.data:
        misplaced = misplaced_kind_error(file, text, BOARD)
    if misplaced is not None:
        diagnostics.report(misplaced)
    else:
        diagnostics.extend(yaml_diagnostics.items)
    diagnostics.raise_if_errors()
    assert doc is not None
    board = _BoardBuilder(doc, file, diagnostics).build()
    diagnostics.raise_if_errors()
    assert board is not None
    return board


class _BoardBuilder:
    """Validates one board document; collects every error before the loader stops."""

    def __init__(self, doc: PositionedYaml, file: str, diagnostics: Diagnostics):
        self.doc = doc
        self.file = file
        self.base = Path(file).parent
        self.diag = diagnostics
        self.unread_refs: set[str] = set()  # chain refs without a device: their pins are not checked

    # -- helpers -------------------------------------------------------------------------
    def span(self, *path: str | int) -> SourceSpan | None:
        return self.doc.span(*path)

    def error(self, message: str, *path: str | int, key: bool = False, **kwargs: Any) -> None:
        span = self.doc.key_span(*path) if key else self.span(*path)
        self.diag.error(message, span, **kwargs)

    def check_keys(self, mapping: dict, allowed: tuple[str, ...], what: str, *path: str | int) -> None:
        for key in mapping:
            if key not in allowed:
                self.error(f"unknown key '{key}' in {what}", *path, key, key=True,
                           expected="one of " + ", ".join(allowed),
                           suggestions=nearest(str(key), allowed))

    def mapping(self, value: Any, what: str, *path: str | int) -> dict:
        if value is None:
            return {}
        if not isinstance(value, dict):
            self.error(f"{what} must be a mapping", *path, expected=f"a mapping under '{path[-1]}'")
            return {}
        return value

    # -- the document --------------------------------------------------------------------
    def build(self) -> Board | None:
        data = self.doc.data
        if not isinstance(data, dict):
            self.diag.error("the board file must be a YAML mapping", self.span() or SourceSpan(self.file, 1, 1),
                            expected="keys such as board, chain and nets")
            return None
        self.check_keys(data, TOP_LEVEL_KEYS, "the board file")
        technology = self.technology(data.get("technology", "cmos"), "technology") or "cmos"
        trst = data.get("trst", False)
        if not isinstance(trst, bool):
            self.error("'trst' must be true or false", "trst", expected="true or false")
            trst = False
        if "chain" not in data:
            self.diag.error("the board file has no 'chain'", self.span() or SourceSpan(self.file, 1, 1),
                            expected="chain: a list of {ref, bsdl} in TDI -> TDO order")
        chain = self.chain(data.get("chain"))
        parts = self.parts(self.mapping(data.get("parts"), "'parts'", "parts"), chain)
        nets = self.nets(self.mapping(data.get("nets"), "'nets'", "nets"), chain, parts)
        pulls = self.net_values(data.get("pulls"), "pulls", nets, {"up", "down"})
        hold = {net: str(value) for net, value in
                self.net_values(data.get("hold"), "hold", nets, {"0", "1"}).items()}
        never = self.never_drive(data.get("never_drive"), nets)
        for net in hold:
            if net in never:
                self.error(f"net '{net}' is both held and never to be driven", "hold", net, key=True,
                           hint="a held net needs a driver; choose one of the two")
        name = data.get("board", Path(self.file).stem)
        return Board(
            name=str(name), path=self.file, technology=technology, trst=trst,
            chain=tuple(chain), parts=parts, nets=nets, pulls=pulls, hold=hold,
            never_drive=tuple(never), spans=self.doc.spans,
        )

    def technology(self, value: Any, *path: str | int) -> str | None:
        text = str(value).lower()
        if text in ("bipolar", "ttl"):
            return "ttl"
        if text not in TECHNOLOGIES:
            self.error(f"unknown receiver technology '{value}'", *path,
                       expected="cmos or ttl (bipolar)", suggestions=nearest(str(value), TECHNOLOGIES))
            return None
        return text

    def chain(self, value: Any) -> list[ChainDevice]:
        from .bsdl import read_bsdl  # the reader pulls in the BSDL grammar; load it only here

        if value is None:
            return []
        if not isinstance(value, list) or not value:
            self.error("'chain' must be a non-empty list of {ref, bsdl}", "chain",
                       expected="- {ref: U1, bsdl: bsdl/part.bsd}")
            return []
        seen: dict[str, int] = {}
        devices_by_path: dict[Path, DeviceModel] = {}
        chain: list[ChainDevice] = []
        for index, entry in enumerate(value):
            if not isinstance(entry, dict):
                self.error("a chain entry must be a mapping with 'ref' and 'bsdl'", "chain", index,
                           expected="{ref: U1, bsdl: bsdl/part.bsd}")
                continue
            self.check_keys(entry, CHAIN_KEYS, "a chain entry", "chain", index)
            ref, bsdl = entry.get("ref"), entry.get("bsdl")
            if not ref or not isinstance(ref, str):
                self.error("a chain entry needs a 'ref' (the reference designator)", "chain", index,
                           expected="ref: U1")
                continue
            if ref in seen:
                self.error(f"duplicate reference designator '{ref}' in the chain", "chain", index, "ref",
                           hint=f"'{ref}' is already chain entry {seen[ref]}")
                continue
            seen[ref] = index
            if not bsdl or not isinstance(bsdl, str):
                self.error(f"chain entry '{ref}' needs a 'bsdl' file", "chain", index,
                           expected="bsdl: a path relative to the board file")
                self.unread_refs.add(ref)
                continue
            bsdl_path = (self.base / bsdl)
            if bsdl_path.is_dir():
                self.error(f"the BSDL path '{bsdl}' of {ref} is a folder", "chain", index, "bsdl",
                           expected="the path of a BSDL file, relative to the board file")
                self.unread_refs.add(ref)
                continue
            if not bsdl_path.is_file():
                self.unread_refs.add(ref)
                near = nearest(Path(bsdl).name, [p.name for p in bsdl_path.parent.glob("*")]
                               if bsdl_path.parent.is_dir() else [])
                self.error(f"BSDL file '{bsdl}' of {ref} not found", "chain", index, "bsdl",
                           expected="a path relative to the board file", suggestions=near)
                continue
            technology = None
            if "technology" in entry:
                technology = self.technology(entry["technology"], "chain", index, "technology")
            key = bsdl_path.resolve()
            device = devices_by_path.get(key)
            if device is None:
                device = read_bsdl(bsdl_path, self.diag)
                devices_by_path[key] = device
            chain.append(ChainDevice(ref, len(chain), str(bsdl_path), device, technology,
                                     self.span("chain", index)))
        return chain

    def parts(self, value: dict, chain: list[ChainDevice]) -> dict[str, Part]:
        chain_refs = {d.ref for d in chain}
        parts: dict[str, Part] = {}
        for ref, entry in value.items():
            if ref in chain_refs:
                self.error(f"'{ref}' is both a scan device and a part", "parts", ref, key=True,
                           hint="reference designators must be unique on the board")
                continue
            entry = self.mapping(entry, f"part '{ref}'", "parts", ref)
            self.check_keys(entry, PART_KEYS, f"part '{ref}'", "parts", ref)
            raw_pins = entry.get("pins")
            if not isinstance(raw_pins, list) or not raw_pins:
                self.error(f"part '{ref}' needs a list of 'pins'", "parts", ref, expected="pins: [A, B, Y]")
                continue
            pins = tuple(str(p) for p in raw_pins)
            for i, pin in enumerate(pins):
                if pins.index(pin) != i:
                    self.error(f"pin '{pin}' listed twice on part '{ref}'", "parts", ref, "pins", i)
            logic = self.pin_expressions(entry.get("logic"), ref, pins, "logic")
            enables = self.pin_expressions(entry.get("enable"), ref, pins, "enable")
            for pin in enables:
                if pin not in logic:
                    self.error(f"'{ref}.{pin}' has an enable but no logic", "parts", ref, "enable", pin,
                               key=True, hint="add its equation under 'logic'")
            series = self.series(entry.get("series"), ref, pins)
            technology = None
            if "technology" in entry:
                technology = self.technology(entry["technology"], "parts", ref, "technology")
            spans = {pin: self.span("parts", ref, "logic", pin) for pin in logic}
            spans.update({f"enable:{pin}": self.span("parts", ref, "enable", pin) for pin in enables})
            parts[ref] = Part(ref, pins, logic, enables, series, technology, self.span("parts", ref),
                              {k: v for k, v in spans.items() if v is not None})
        return parts

    def pin_expressions(self, value: Any, ref: str, pins: tuple[str, ...], what: str) -> dict[str, str]:
        value = self.mapping(value, f"'{what}' of part '{ref}'", "parts", ref, what)
        out: dict[str, str] = {}
        for pin, expr in value.items():
            pin = str(pin)
            if pin not in pins:
                self.error(f"'{pin}' is not a pin of part '{ref}'", "parts", ref, what, pin, key=True,
                           expected="one of its pins: " + ", ".join(pins), suggestions=nearest(pin, pins))
                continue
            if isinstance(expr, bool) or isinstance(expr, int):
                expr = str(int(expr))
            if not isinstance(expr, str):
                self.error(f"the {what} of '{ref}.{pin}' must be an expression string", "parts", ref, what, pin,
                           expected="e.g. \"(A & ~S) | (B & S)\"")
                continue
            out[pin] = expr
        return out

    def series(self, value: Any, ref: str, pins: tuple[str, ...]) -> tuple[tuple[str, str], ...]:
        if value is None:
            return ()
        if not isinstance(value, list):
            self.error(f"'series' of part '{ref}' must be a list of pin pairs", "parts", ref, "series",
                       expected="series: [[\"1\", \"2\"], [\"3\", \"4\"]]")
            return ()
        pairs: list[tuple[str, str]] = []
        for i, pair in enumerate(value):
            if not isinstance(pair, list) or len(pair) != 2:
                self.error("a series entry must be a pair of pins", "parts", ref, "series", i,
                           expected="[\"1\", \"2\"]")
                continue
            a, b = str(pair[0]), str(pair[1])
            for j, pin in enumerate((a, b)):
                if pin not in pins:
                    self.error(f"'{pin}' is not a pin of part '{ref}'", "parts", ref, "series", i, j,
                               suggestions=nearest(pin, pins))
            pairs.append((a, b))
        return tuple(pairs)

    def nets(self, value: dict, chain: list[ChainDevice], parts: dict[str, Part]) -> dict[str, Net]:
        devices = {d.ref: d.device for d in chain}
        pin_numbers = {ref: _pin_number_index(dev) for ref, dev in devices.items()}
        tap_ports = {ref: {p for p in (dev.tap.tdi, dev.tap.tdo, dev.tap.tms, dev.tap.tck, dev.tap.trst) if p}
                     for ref, dev in devices.items()}
        all_refs = sorted(set(devices) | set(parts))
        owner: dict[PinRef, str] = {}
        nets: dict[str, Net] = {}
        for name, entry in value.items():
            name = str(name)
            tap = False
            path: tuple[str | int, ...] = ("nets", name)
            if isinstance(entry, dict):
                self.check_keys(entry, NET_KEYS, f"net '{name}'", "nets", name)
                tap = bool(entry.get("tap", False))
                entry = entry.get("pins")
                path = ("nets", name, "pins")
            if not isinstance(entry, list) or not entry:
                self.error(f"net '{name}' needs a list of pins", *path, expected="[U1.PA(0), U2.IN3]")
                continue
            pins: list[PinRef] = []
            for i, text in enumerate(entry):
                pin = self.pin(str(text), devices, parts, pin_numbers, all_refs, (*path, i))
                if pin is None:
                    continue
                if pin in owner:
                    self.error(f"pin {pin} is in two nets: '{owner[pin]}' and '{name}'", *path, i,
                               hint="a pin belongs to exactly one net")
                    continue
                if pin.ref in tap_ports and pin.port in tap_ports[pin.ref] and not tap:
                    self.error(f"{pin} is a TAP pin; net '{name}' must be declared as a TAP net", *path, i,
                               hint=f"write {name}: {{pins: [...], tap: true}} if the board really routes it")
                    continue
                owner[pin] = name
                pins.append(pin)
            nets[name] = Net(name, tuple(pins), tap)  # its span: board.span_of("nets", name)
        return nets

    def pin(self, text: str, devices: dict[str, DeviceModel], parts: dict[str, Part],
            pin_numbers: dict[str, dict[str, str]], all_refs: list[str],
            path: tuple[str | int, ...]) -> PinRef | None:
        text = text.strip()
        if "#" in text:
            ref, _, number = text.partition("#")
            if ref not in devices:
                return self.unknown_ref(ref, all_refs, path)
            port = pin_numbers[ref].get(number.upper())
            if port is None:
                self.error(f"{ref} has no package pin '{number}' in its pin map", *path,
                           suggestions=nearest(number, pin_numbers[ref]))
                return None
            return PinRef(ref, port)
        ref, dot, port = text.partition(".")
        if not dot or not port:
            self.error(f"'{text}' is not a pin", *path, expected="REF.PORT (e.g. U1.D(3)) or REF#PIN")
            return None
        if ref in devices:
            device = devices[ref]
            bit = port.upper().replace(" ", "")
            if bit not in device.port_bit_set:
                bits = device.port_bits()
                if bit in device.ports and device.ports[bit].width > 1:
                    self.error(f"{ref}.{port} is a vector port; name one bit", *path,
                               expected=f"one of {device.ports[bit].bits[0]} .. {device.ports[bit].bits[-1]}")
                else:
                    self.error(f"{ref} ({device.entity}) has no port '{port}'", *path,
                               suggestions=nearest(bit, bits))
                return None
            return PinRef(ref, bit)
        if ref in parts:
            if port not in parts[ref].pins:
                self.error(f"part '{ref}' has no pin '{port}'", *path, expected="one of its pins: "
                           + ", ".join(parts[ref].pins), suggestions=nearest(port, parts[ref].pins))
                return None
            return PinRef(ref, port)
        return self.unknown_ref(ref, all_refs, path)

    def unknown_ref(self, ref: str, all_refs: list[str], path: tuple[str | int, ...]) -> None:
        if ref in self.unread_refs:
            return None  # its chain entry is reported already
        self.error(f"unknown device or part '{ref}'", *path, expected="a ref from 'chain' or 'parts'",
                   suggestions=nearest(ref, all_refs))
        return None

    def net_values(self, value: Any, what: str, nets: dict[str, Net], allowed: set[str]) -> dict[str, str]:
        value = self.mapping(value, f"'{what}'", what)
        out: dict[str, str] = {}
        for net, setting in value.items():
            net = str(net)
            if net not in nets:
                self.error(f"'{what}' names unknown net '{net}'", what, net, key=True,
                           suggestions=nearest(net, nets))
                continue
            text = str(int(setting)) if isinstance(setting, (bool, int)) else str(setting).lower()
            if text not in allowed:
                self.error(f"'{setting}' is not a valid {what} setting for '{net}'", what, net,
                           expected=" or ".join(sorted(allowed)))
                continue
            out[net] = text
        return out

    def never_drive(self, value: Any, nets: dict[str, Net]) -> list[str]:
        if value is None:
            return []
        if not isinstance(value, list):
            self.error("'never_drive' must be a list of net names", "never_drive")
            return []
        out: list[str] = []
        for i, net in enumerate(value):
            net = str(net)
            if net not in nets:
                self.error(f"'never_drive' names unknown net '{net}'", "never_drive", i,
                           suggestions=nearest(net, nets))
                continue
            out.append(net)
        return out


def _pin_number_index(device: DeviceModel) -> dict[str, str]:
    """Package pin (upper case) -> port bit, in the pin map the BSDL selects."""
    index: dict[str, str] = {}
    if device.pin_map_name is None:
        return index
    for port, pins in device.pin_maps.get(device.pin_map_name, {}).items():
        for pin in pins:
            index.setdefault(str(pin).upper(), port)
    return index

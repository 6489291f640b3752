"""The board model: the scan chain, the nets, the parts without boundary scan, and guards.

Loaded from our own YAML schema by `board_loader`; everything later reads this, never YAML.
Pins are written `REF.PORT` where PORT is a BSDL port bit (`D(3)`) for scan devices or a part
pin name for parts without boundary scan.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import cached_property
from typing import NamedTuple

from ..diagnostics import SourceSpan
from .device import DeviceModel

__all__ = ["PinRef", "ChainDevice", "Part", "Net", "Board", "TECHNOLOGIES"]

TECHNOLOGIES = ("cmos", "ttl")  # receiver technologies: how a floating input reads


class PinRef(NamedTuple):
    """A pin of a device or part: `ref` and the BSDL port bit or part pin name.

    A named tuple rather than a dataclass: pins are dictionary keys on every hot path of the
    virtual board and the grading, and a tuple hashes and compares without Python code.
    """

    ref: str
    port: str

    def __str__(self) -> str:
        return f"{self.ref}.{self.port}"

    @staticmethod
    def parse(text: str) -> "PinRef":
        ref, _, port = text.partition(".")
        return PinRef(ref, port)


@dataclass(frozen=True, eq=False)
class ChainDevice:
    """A scan device in the chain, at `position` counted from TDI (0 is nearest TDI)."""

    ref: str
    position: int
    bsdl_path: str
    device: DeviceModel
    technology: str | None = None
    span: SourceSpan | None = None


@dataclass(frozen=True, eq=False)
class Part:
    """A part without boundary scan: pins, optional combinational logic and pass-throughs.

    `logic` maps an output pin to its expression text (our expression language, parsed by the
    virtual board); `enables` maps a tri-state output pin to its enable expression; `series`
    lists pin pairs that pass a net through (resistor packs, jumpers).
    """

    ref: str
    pins: tuple[str, ...]
    logic: dict[str, str] = field(default_factory=dict)
    enables: dict[str, str] = field(default_factory=dict)
    series: tuple[tuple[str, str], ...] = ()
    technology: str | None = None
    span: SourceSpan | None = None
    expression_spans: dict[str, SourceSpan] = field(default_factory=dict)

    @property
    def is_logic(self) -> bool:
        return bool(self.logic)


@dataclass(frozen=True, eq=False)
class Net:
    name: str
    pins: tuple[PinRef, ...]
    tap: bool = False  # declared as carrying a TAP signal
    span: SourceSpan | None = None  # usually None: Board.span_of("nets", name) finds it on demand


@dataclass(frozen=True, eq=False)
class Board:
    """A whole board. `chain` is in TDI -> TDO order."""

    name: str
    path: str
    technology: str
    trst: bool
    chain: tuple[ChainDevice, ...]
    parts: dict[str, Part]
    nets: dict[str, Net]
    pulls: dict[str, str]  # net -> "up" or "down"
    hold: dict[str, str]  # net -> "0" or "1": must be held at this value
    never_drive: tuple[str, ...]  # nets no scan device may drive
    spans: Mapping[str, SourceSpan] = field(default_factory=dict)  # YAML path -> span

    @cached_property
    def devices(self) -> dict[str, ChainDevice]:
        return {entry.ref: entry for entry in self.chain}

    @cached_property
    def net_of_pin(self) -> dict[PinRef, str]:
        return {pin: net.name for net in self.nets.values() for pin in net.pins}

    def technology_of(self, ref: str) -> str:
        """The receiver technology of a device or part (the board default when not set)."""
        if ref in self.devices and self.devices[ref].technology:
            return self.devices[ref].technology  # type: ignore[return-value]
        part = self.parts.get(ref)
        if part is not None and part.technology:
            return part.technology
        return self.technology

    def span_of(self, *path: str | int) -> SourceSpan | None:
        """The YAML span of a node, by its path (e.g. `span_of("nets", "DATA0", 2)`)."""
        key = "/".join(str(p) for p in path)
        while key:
            if key in self.spans:
                return self.spans[key]
            key = key.rpartition("/")[0]
        return self.spans.get("")

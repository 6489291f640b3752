"""The nets of the virtual board in its current state, resolved fast enough for big boards.

Most nodes of a board have one scan driver and no pulls or logic (or no driver at all): their
level follows from the driving device's update stage alone, so they are resolved for a
whole device at once with bitarray gathers (data cells, control cells, disable values). The
others (several drivers, pulls, weak or keeper disable results, logic outputs, a fault's
groups) go through the general `GroupSolver`, reading the simple ones as they need them.
Both give the same levels; the split only saves time.
"""

from __future__ import annotations

from typing import Callable, Iterable, Sequence

from bitarray import bitarray
from bitarray.util import zeros

from ..models.board import PinRef
from .board_device import DRIVE, RELEASE, UNKNOWN_MODE, BoardDevice
from .electrical import ElectricalBoard
from .resolve import (
    COMBINE_WIRE, DriveSum, Group, GroupSolver, Level, PinDrive, read_level, scan_pin_drive,
)

__all__ = ["BoardLevels"]

_UNDRIVEN = 1  # no driver, no pull, no logic: always floating
_ONE_DRIVER = 2  # a single scan output with a Z disable result and nothing else
_FLOATING = Level(0, 0, 1)
_UNKNOWN = Level(1, 1, 0)


class BoardLevels:
    """Levels and reads of every group for the devices' current registers."""

    def __init__(self, electrical: ElectricalBoard, groups: Sequence[Group], group_of_pin: dict[PinRef, int],
                 devices: Sequence[BoardDevice], technologies: Sequence[str], force_general: Iterable[int] = ()):
        self.electrical = electrical
        self.groups = groups
        self.group_of_pin = group_of_pin
        self.devices = devices
        self.technologies = sorted(set(technologies) | {"cmos", "ttl"})
        forced = set(force_general)
        self.kind = [0] * len(groups)
        self.simple_of_device: list[list[tuple[int, int, int, int]]] = [[] for _ in devices]
        self.local: dict[int, tuple[int, int]] = {}
        for index, group in enumerate(groups):
            if index in forced or group.pulls or group.forced is not None:
                continue
            drivers = [p for p in group.pins if p in electrical.drivers]
            if any(p in electrical.logic_of_pin for p in group.pins):
                continue
            if not drivers:
                self.kind[index] = _UNDRIVEN
                continue
            if len(drivers) != 1:
                continue
            driver = electrical.drivers[drivers[0]]
            if driver.disable_result != "Z":
                continue
            self.kind[index] = _ONE_DRIVER
            entries = self.simple_of_device[driver.device]
            control = driver.control if driver.control is not None and driver.disable_value is not None else -1
            self.local[index] = (driver.device, len(entries))
            entries.append((index, driver.cell, control, driver.disable_value or 0))
        self._gather = []
        for entries in self.simple_of_device:
            cells = [cell for _, cell, _, _ in entries]
            controls = [max(control, 0) for _, _, control, _ in entries]
            has_control = bitarray([control >= 0 for _, _, control, _ in entries])
            disable = bitarray([bool(value) for _, _, _, value in entries])
            self._gather.append(([g for g, _, _, _ in entries], cells, controls, has_control, disable))
        self.general = [i for i, kind in enumerate(self.kind) if kind == 0]
        self.solver = GroupSolver(electrical, groups, group_of_pin, solve_only=self.general)
        self.general_levels: dict[int, Level] = {g: _UNKNOWN for g in self.general}
        self._simple_bits: list[tuple[bitarray, bitarray, bitarray]] = []
        self._reads: dict[str, tuple[bitarray, bitarray]] = {}
        self._override: dict[int, Level] | None = None
        self._template: dict[str, tuple[bitarray, bitarray]] = {}
        for technology in self.technologies:
            values, known = zeros(len(groups)), zeros(len(groups))
            if technology == "ttl":
                for index, kind in enumerate(self.kind):
                    if kind == _UNDRIVEN:
                        values[index] = known[index] = 1  # an open TTL input floats high
            self._template[technology] = (values, known)
        self._groups_of_ports: dict[tuple[int, tuple[str, ...]], list[int]] = {}
        self.ports_of: list[dict[str, int]] = [{} for _ in devices]
        position = {ref: i for i, ref in enumerate(electrical.refs)}
        for pin, group in group_of_pin.items():
            device = position.get(pin.ref)
            if device is not None:
                self.ports_of[device][pin.port] = group

    # -- drives ---------------------------------------------------------------------------------
    def scan_drive(self, pin: PinRef) -> PinDrive:
        driver = self.electrical.drivers[pin]
        device = self.devices[driver.device]
        mode = device.pin_mode
        if mode == UNKNOWN_MODE:
            return PinDrive(1, 1)
        stage = device.update.get("BOUNDARY")
        data = _rails_of(stage, driver.cell)
        control = _rails_of(stage, driver.control) if driver.control is not None else None
        return scan_pin_drive(driver, data, control, 1 if mode == DRIVE else 0, 0, 1)

    # -- levels -----------------------------------------------------------------------------
    def resolve(self) -> list[int]:
        """Resolve every group for the current registers; returns the groups in contention."""
        self._simple_bits = [self._device_bits(k) for k in range(len(self.devices))]
        totals: dict[int, DriveSum] = {}
        solved = self.solver.solve(self.scan_drive, 1, outside=self.level, previous=self.general_levels,
                                   totals=totals)
        self.general_levels = solved
        self._reads = {}
        return [g for g, total in totals.items() if total.d0 & total.d1
                and self.groups[g].combine == COMBINE_WIRE and self.groups[g].dominant is None]

    def _device_bits(self, k: int) -> tuple[bitarray, bitarray, bitarray]:
        """(strong-known, value, floating) of each simple group this device drives."""
        groups, cells, controls, has_control, disable = self._gather[k]
        count = len(groups)
        if not count:
            empty = bitarray()
            return (empty, empty, empty)
        device = self.devices[k]
        mode = device.pin_mode
        if mode == RELEASE:
            return (zeros(count), zeros(count), ~zeros(count))
        stage = device.update.get("BOUNDARY")
        if mode == UNKNOWN_MODE or stage is None:
            return (zeros(count), zeros(count), zeros(count))
        values, known = stage.values, stage.known
        data, data_known = values[cells], known[cells]
        control, control_known = values[controls], known[controls]
        enabled = ~has_control | (control ^ disable)
        enable_known = ~has_control | control_known
        floating = enable_known & ~enabled
        strong = enable_known & enabled & data_known
        return (strong, data & strong, floating)

    def level(self, group: int) -> Level:
        if self._override is not None and group in self._override:
            return self._override[group]
        kind = self.kind[group]
        if kind == _UNDRIVEN:
            return _FLOATING
        if kind == _ONE_DRIVER:
            k, i = self.local[group]
            strong, value, floating = self._simple_bits[k]
            if floating[i]:
                return _FLOATING
            if strong[i]:
                return Level(0, 1, 0) if value[i] else Level(1, 0, 0)
            return _UNKNOWN
        return self.general_levels[group]

    def total_of(self, group: int) -> DriveSum:
        total, _ = self.solver.total_of(group, self.scan_drive, 1, self.level)
        return total

    # -- reads ------------------------------------------------------------------------------
    def reads(self, technology: str) -> tuple[bitarray, bitarray]:
        """What a receiver of `technology` reads on every group: values and known flags."""
        found = self._reads.get(technology)
        if found is not None:
            return found
        template = self._template.get(technology) or self._template["cmos"]
        values, known = template[0].copy(), template[1].copy()
        ttl = technology == "ttl"
        for k, (groups, _, _, _, _) in enumerate(self._gather):
            if not groups:
                continue
            strong, value, floating = self._simple_bits[k]
            if ttl:
                known[groups] = strong | floating
                values[groups] = value | floating
            else:
                known[groups] = strong
                values[groups] = value
        levels = dict(self.general_levels)
        if self._override is not None:
            levels.update(self._override)
        for group, level in levels.items():
            may0, may1 = read_level(level, technology)
            known[group] = may0 != may1
            values[group] = bool(may1 and not may0)
        found = (values, known)
        self._reads[technology] = found
        return found

    def read(self, device: int, technology: str, ports: Sequence[str]) -> tuple[bitarray, bitarray]:
        key = (device, tuple(ports))
        groups = self._groups_of_ports.get(key)
        if groups is None:
            groups = self._groups_of_ports[key] = [self.ports_of[device][port] for port in ports]
        values, known = self.reads(technology)
        return values[groups], known[groups]

    def override(self, levels: dict[int, Level] | None) -> None:
        """Read `levels` for these groups until cleared (a TAP signal joining a net at a capture)."""
        self._override = levels
        self._reads = {}

    def solve_cone(self, cone: GroupSolver, extra: Callable[[int], PinDrive | None]) -> dict[int, Level]:
        return cone.solve(self.scan_drive, 1, outside=self.level, previous=_Previous(self), extra=extra)


class _Previous:
    """The current level of any group, as a keeper's previous level."""

    def __init__(self, levels: BoardLevels) -> None:
        self.levels = levels

    def __getitem__(self, group: int) -> Level:
        return self.levels.level(group)


def _rails_of(stage, index: int | None) -> tuple[int, int]:  # type: ignore[no-untyped-def]
    if stage is None or index is None or not 0 <= index < len(stage.values) or not stage.known[index]:
        return (1, 1)
    return (0, 1) if stage.values[index] else (1, 0)

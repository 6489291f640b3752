"""Drive hazards per step: scan outputs fighting, guarded nets, devices left driving on their own.

The images are the ones the back end shifts (`ChainImages`), so an output that a shared
control cell enables together with a driven one is seen exactly as the hardware will see it.
Only nets where a hazard is possible are looked at in each step: nets with scan drivers on
two devices or more, and guarded nets; boards have tens of thousands of nets.
"""

from __future__ import annotations

from typing import NamedTuple

from bitarray import frozenbitarray

from ..backend.images import CLAMP, DRIVE, chain_images, device_tables, mode_kind
from ..ir import Program, Step
from ..models.board import Board, PinRef
from ..models.connectivity import first_driver_cells, series_groups
from ..safety_checks import Finding

__all__ = ["check_drive_hazards", "check_bypass_expectations", "StepOutputs"]

_FUNCTIONAL_KINDS = frozenset({"observe", "bypass", "device_id", "user"})  # system logic drives pins


class _DriverPin(NamedTuple):
    """A scan output on a net (a named tuple: one per driving pin of the board)."""

    pin: PinRef
    device: int
    data: int
    control: int | None
    disable_value: int | None


class StepOutputs:
    """Which scan outputs are enabled, and at what value, in a step: from the shifted images."""

    def __init__(self, board: Board) -> None:
        self.board = board
        self.refs = tuple(entry.ref for entry in board.chain)
        self.tables = tuple(device_tables(e.ref, e.device) for e in board.chain)
        self.images = chain_images(board)
        self.index = {ref: i for i, ref in enumerate(self.refs)}
        self.node_of: dict[str, tuple[str, ...]] = {}
        groups = series_groups(board)
        for net in board.nets:
            self.node_of[net] = groups.get(net, (net,))
        self.drivers_on: dict[tuple[str, ...], tuple[_DriverPin, ...]] = {}
        first = [first_driver_cells(entry.device) for entry in board.chain]
        index, nets = self.index, board.nets
        for node in set(self.node_of.values()):
            found = []
            for net in node:
                for pin in nets[net].pins:
                    idx = index.get(pin.ref)
                    if idx is not None:
                        cell = first[idx].get(pin.port)
                        if cell is not None:
                            found.append(_DriverPin(pin, idx, cell.number, cell.control_cell,
                                                    cell.disable_value))
            self.drivers_on[node] = tuple(found)

    def kinds(self, step: Step) -> tuple[str, ...]:
        modes = dict(step.modes)
        return tuple(mode_kind(e.device, modes[e.ref]) for e in self.board.chain)

    @staticmethod
    def functional(kinds: tuple[str, ...], step: Step) -> tuple[bool, ...]:
        """Devices whose pins follow their own system logic in this step (HIGHZ disables them)."""
        return tuple(kind in _FUNCTIONAL_KINDS and instruction.upper() != "HIGHZ"
                     for kind, (_, instruction) in zip(kinds, step.modes))

    def step_images(self, step: Step, kinds: tuple[str, ...]) -> list[frozenbitarray | None]:
        return self.images.build(kinds, step.drives).images

    @staticmethod
    def enabled(driver: _DriverPin, kinds: tuple[str, ...],
                images: list[frozenbitarray | None]) -> str | None:
        """The value the output drives, or None when it is disabled (or not under scan control)."""
        kind = kinds[driver.device]
        image = images[driver.device]
        if kind not in (DRIVE, CLAMP) or image is None:
            return None
        if driver.control is not None and driver.disable_value is not None \
                and 0 <= driver.control < len(image) and image[driver.control] == driver.disable_value:
            return None
        return "1" if image[driver.data] else "0"


def check_drive_hazards(program: Program, board: Board) -> list[Finding]:
    outputs = StepOutputs(board)
    held = dict(board.hold)
    for entry in board.chain:  # compliance-enable pins are held at their pattern too
        for pattern in entry.device.compliance:
            for port, value in zip(pattern.ports, pattern.patterns[0] if pattern.patterns else ""):
                net = board.net_of_pin.get(PinRef(entry.ref, port))
                if net is not None and value in "01":
                    held.setdefault(net, value)
    never = set(board.never_drive)
    contested = sorted(node for node, drivers in outputs.drivers_on.items()
                       if len(drivers) >= 2 and len({d.device for d in drivers}) >= 2)
    guarded = sorted({outputs.node_of[n] for n in (set(held) | never)})
    findings: list[Finding] = []
    seen: set[tuple[str, str, str]] = set()
    for test in program.tests:
        for step in test.steps:
            if not contested and not guarded:
                break
            kinds = outputs.kinds(step)
            images = outputs.step_images(step, kinds)
            functional = outputs.functional(kinds, step)
            span = step.span

            def report(check: str, node: tuple[str, ...], message: str) -> None:
                key = (check, test.name, " ".join(node) + message)
                if key not in seen:
                    seen.add(key)
                    findings.append(Finding(check, message, span, test.name, step.name))

            for node in contested:
                enabled = [(d, v) for d in outputs.drivers_on[node]
                           if (v := outputs.enabled(d, kinds, images)) is not None]
                net = node[0]
                if len({v for _, v in enabled}) > 1:
                    ones = next(str(d.pin) for d, v in enabled if v == "1")
                    zeros = next(str(d.pin) for d, v in enabled if v == "0")
                    report("contention", node, f"net {net}: {ones} drives 1 while {zeros} drives 0 "
                           f"in step {step.name}")
                if enabled:
                    for d in outputs.drivers_on[node]:
                        if functional[d.device]:
                            mode = dict(step.modes)[d.pin.ref]
                            report("functional_driver", node,
                                   f"net {net} is driven by {enabled[0][0].pin} while {d.pin.ref} is in "
                                   f"{mode}: its output {d.pin} follows its own logic and may fight")
            for node in guarded:
                enabled = [(d, v) for d in outputs.drivers_on[node]
                           if (v := outputs.enabled(d, kinds, images)) is not None]
                for net in node:
                    if net in never and enabled:
                        report("never_drive", node, f"net {net} must never be driven, but "
                               f"{enabled[0][0].pin} drives it {enabled[0][1]} in step {step.name}")
                    if net in held:
                        value = held[net]
                        wrong = [d for d, v in enabled if v != value]
                        taken = [d for d in outputs.drivers_on[node] if not functional[d.device]]
                        right = [d for d, v in enabled if v == value]
                        if wrong:
                            report("hold", node, f"net {net} must be held at {value}, but "
                                   f"{wrong[0].pin} drives it {1 - int(value)} in step {step.name}")
                        elif taken and not right and not _pulled_to(board, node, value):
                            report("hold", node, f"net {net} must be held at {value}, but in step "
                                   f"{step.name} its driver {taken[0].pin} is under scan control and "
                                   f"does not drive it (drive {net} = {value})")
    return findings


def _pulled_to(board: Board, node: tuple[str, ...], value: str) -> bool:
    want = "up" if value == "1" else "down"
    return any(board.pulls.get(net) == want for net in node)


def check_bypass_expectations(program: Program, board: Board) -> list[Finding]:
    """An expectation on a pin of a device left in BYPASS (or another mode that does not select
    the boundary register) can never be compared: the device's boundary register is not in the
    chain (IEEE Std 1149.1, BYPASS: a one-bit register between TDI and TDO)."""
    findings: list[Finding] = []
    for test in program.tests:
        for step in test.steps:
            modes = dict(step.modes)
            expects = step.expects
            if not any(expects.pins):
                continue
            for number, (target, is_pin, value) in enumerate(zip(expects.targets, expects.pins,
                                                                  expects.values)):
                if not is_pin or value not in ("0", "1"):
                    continue
                ref = target.partition(".")[0]
                entry = board.devices.get(ref)
                if entry is None:
                    continue
                instruction = modes.get(ref, "BYPASS")
                if mode_kind(entry.device, instruction) == "bypass":
                    findings.append(Finding(
                        "bypass_expect",
                        f"{target} is expected {value} in step {step.name}, but {ref} is in "
                        f"{instruction}: its boundary register is not in the chain",
                        expects.span_of(number) or step.span, test.name, step.name))
    return findings

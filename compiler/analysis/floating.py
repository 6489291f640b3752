"""The `floating` check: an expectation on a net that nothing drives in that step.

What a floating input reads depends on the receiver: a bipolar (TTL) input floats high, a
CMOS input is undefined (common practice; electronics handbooks). A pull resistor decides the
value and is not floating.

A node counts as possibly driven when it has a pull, an output of a part without boundary
scan (its logic may enable it), or a scan output of a device in a functional mode (its own
logic drives it); otherwise it floats exactly when every scan output on it is disabled by the
step's images: one indexed read of the chain-wide image gives every output's enable at once.
"""

from __future__ import annotations

from bitarray import bitarray

from ..backend.images import CLAMP, DRIVE, chain_images, mode_kind
from ..ir import Program
from ..models.board import Board, PinRef
from ..models.connectivity import first_driver_cells, series_groups
from ..safety_checks import Finding

__all__ = ["check_floating_expectations"]

_NOT_COMPARED = str.maketrans("", "", "01")  # what is left of expected values is not compared


def _compares(values: str) -> bool:
    """Does a step expect any 0 or 1 (X and computed ones aside)?"""
    return len(values.translate(_NOT_COMPARED)) < len(values)

_FUNCTIONAL = frozenset({"observe", "bypass", "device_id", "user"})


def check_floating_expectations(program: Program, board: Board) -> list[Finding]:
    if not any(_compares(step.expects.values) for t in program.tests for step in t.steps):
        return []
    refs = [entry.ref for entry in board.chain]
    index = {ref: i for i, ref in enumerate(refs)}
    images = chain_images(board)
    groups = series_groups(board)
    logic_pins = {PinRef(part.ref, pin) for part in board.parts.values() for pin in part.logic}

    # Every scan output, grouped by device (a contiguous range each): its node, the chain-image
    # position of its control cell and that cell's disable value. A two-state output has no
    # control: it points at a constant 1 appended to the image, with disable value 0.
    node_of_net: dict[str, tuple[str, ...]] = {}
    always_driven: set[tuple[str, ...]] = set()
    per_device: list[list[tuple[tuple[str, ...], int, int]]] = [[] for _ in refs]
    first = [first_driver_cells(entry.device) for entry in board.chain]
    starts = images.starts
    for net in board.nets.values():
        node = groups.get(net.name, (net.name,))
        node_of_net[net.name] = node
        if board.pulls.get(net.name):
            always_driven.add(node)
        for pin in net.pins:
            if pin in logic_pins:
                always_driven.add(node)
            idx = index.get(pin.ref)
            if idx is None:
                continue
            cell = first[idx].get(pin.port)
            if cell is None:
                continue
            if cell.control_cell is not None and cell.disable_value is not None:
                per_device[idx].append((node, starts[idx] + cell.control_cell, cell.disable_value))
            else:
                per_device[idx].append((node, -1, 0))
    always_on = len(images.disabled)
    owners = [node for outs in per_device for node, _, _ in outs]
    controls = [c if c >= 0 else always_on for outs in per_device for _, c, _ in outs]
    disable = bitarray([d for outs in per_device for _, _, d in outs])
    ranges, at = [], 0
    for outs in per_device:
        ranges.append((at, at + len(outs)))
        at += len(outs)
    outputs_of: dict[tuple[str, ...], list[int]] = {}
    for k, node in enumerate(owners):
        outputs_of.setdefault(node, []).append(k)
    undriven = {node for node in node_of_net.values() if node not in outputs_of} - always_driven

    findings: list[Finding] = []
    for test in program.tests:
        for step in test.steps:
            expects = step.expects
            if not _compares(expects.values):
                continue
            kinds = tuple(mode_kind(e.device, instr) for e, (_, instr) in zip(board.chain, step.modes))
            image = bitarray(images.build(kinds, step.drives).chain_image)
            image.append(1)
            enabled = image[controls] ^ disable if controls else bitarray()
            for idx, (kind, (_, instruction)) in enumerate(zip(kinds, step.modes)):
                lo, hi = ranges[idx]
                if lo == hi or kind in (DRIVE, CLAMP):
                    continue
                # A functional device drives with its own logic; HIGHZ and the rest drive nothing.
                enabled[lo:hi] = kind in _FUNCTIONAL and instruction.upper() != "HIGHZ"
            floating = set(undriven)
            for k in enabled.search(0):
                node = owners[k]
                if node not in always_driven and not any(enabled[j] for j in outputs_of[node]):
                    floating.add(node)
            if not floating:
                continue
            reported: set[tuple[str, ...]] = set()
            for number, (target, is_pin, value) in enumerate(zip(expects.targets, expects.pins,
                                                                  expects.values)):
                if value != "0" and value != "1":
                    continue
                net = board.net_of_pin.get(PinRef.parse(target)) if is_pin else target
                node = node_of_net.get(net) if net else None
                if node is None or node not in floating or node in reported:
                    continue
                reported.add(node)
                readers = sorted({board.technology_of(p.ref) for n in node for p in board.nets[n].pins
                                  if p.ref in index})
                reads = "; ".join("a TTL receiver reads 1" if t == "ttl" else
                                  "a CMOS receiver reads an undefined value" for t in readers) \
                    or "its receivers read an undefined value"
                findings.append(Finding(
                    "floating",
                    f"net {net} floats in step {step.name} (nothing drives it), yet {value} is "
                    f"expected: {reads}", expects.span_of(number) or step.span, test.name, step.name,
                    hint="drive the net, release the expectation (X), or expect what the receiver reads"))
    return findings

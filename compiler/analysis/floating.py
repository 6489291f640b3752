"""The `floating` check: an expectation on a net that nothing drives in that step.

What a floating input reads depends on the receiver: a bipolar (TTL) input floats high, a
CMOS input is undefined (common practice; electronics handbooks). A pull resistor decides the
value and is not floating. The levels are the fault-free virtual board's.
"""

from __future__ import annotations

from ..diagnostics import Diagnostics
from ..ir import Program
from ..models.board import Board, PinRef
from ..safety_checks import Finding
from ..sim.electrical import build_electrical
from .computed import iter_step_levels

__all__ = ["check_floating_expectations"]


def check_floating_expectations(program: Program, board: Board) -> list[Finding]:
    wanted = any(e.value in ("0", "1") for t in program.tests for s in t.steps for e in s.expects)
    if not wanted:
        return []
    electrical = build_electrical(board, Diagnostics())
    findings: list[Finding] = []
    for test, step, levels in iter_step_levels(program, board, electrical):
        reported: set[int] = set()
        for expect in step.expects:
            if expect.value not in ("0", "1"):
                continue
            if expect.is_pin:
                pin = PinRef.parse(expect.target)
                net = board.net_of_pin.get(pin)
            else:
                net = expect.target
            if net is None or net not in board.nets:
                continue
            node = electrical.node_of_pin.get(board.nets[net].pins[0]) if board.nets[net].pins else None
            if node is None or node in reported or not levels[node].fl & 1:
                continue
            reported.add(node)
            readers = sorted({board.technology_of(p.ref) for p in board.nets[net].pins
                              if p.ref in board.devices})
            reads = "; ".join("a TTL receiver reads 1" if t == "ttl" else "a CMOS receiver reads an "
                              "undefined value" for t in readers) or "its receivers read an undefined value"
            findings.append(Finding(
                "floating",
                f"net {net} floats in step {step.name} (nothing drives it), yet {expect.value} is "
                f"expected: {reads}", expect.span or step.span, test.name, step.name,
                hint="drive the net, release the expectation (X), or expect what the receiver reads"))
    return findings

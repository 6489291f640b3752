"""`scanloom inspect`: the chain and the nets of a board, as data and as text.

The JSON shape is part of our interface (README, "scanloom inspect"); bit strings keep BSDL
order (leftmost nearest TDI).
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any

from ..models.board import Board
from ..models.connectivity import NET_KINDS, net_roles

__all__ = ["board_summary", "render_board_summary", "summary_json"]


def summary_json(summary: dict[str, Any]) -> str:
    """The summary as JSON: the chain indented, one net per line (large boards have tens of
    thousands of nets, and the standard library encodes flat values far faster than indented)."""
    chain = ",\n".join("    " + json.dumps(dev) for dev in summary["chain"])
    nets = ",\n".join("    " + json.dumps(net) for net in summary["nets"])
    return (f'{{\n  "board": {json.dumps(summary["board"])},\n  "chain": [\n{chain}\n  ],\n'
            f'  "nets": [\n{nets}\n  ]\n}}\n')


def board_summary(board: Board) -> dict[str, Any]:
    chain = []
    for entry in board.chain:
        dev = entry.device
        chain.append({
            "ref": entry.ref,
            "entity": dev.entity,
            "bsdl": Path(os.path.relpath(entry.bsdl_path, Path(board.path).parent)).as_posix(),
            "position": entry.position,
            "ir_length": dev.ir_length,
            "ir_capture": dev.ir_capture,
            "instructions": {name: list(codes) for name, codes in dev.instructions.items()},
            "private": list(dev.private),
            "registers": dict(dev.registers),
            "selects": {name: reg for name, reg in dev.selects.items() if name not in dev.private},
            "boundary_length": dev.boundary_length,
            "idcode": dev.idcode,
            "standard": dev.standard,
        })
    nets = []
    for roles in net_roles(board).values():
        nets.append({
            "name": roles.name,
            "pins": [str(p) for p in roles.pins],
            "drivers": [str(p) for p in roles.drivers],
            "receivers": [str(p) for p in roles.receivers],
            "kind": roles.kind,
        })
    return {"board": board.name, "chain": chain, "nets": nets}


def render_board_summary(summary: dict[str, Any], board: Board) -> str:
    lines = [f"board {summary['board']}  ({len(summary['chain'])} scan devices, "
             f"{len(summary['nets'])} nets)", "", "chain, TDI -> TDO:"]
    for i, dev in enumerate(summary["chain"]):
        idcode = dev["idcode"] if dev["idcode"] else "none"
        lines.append(f"  {i + 1}. {dev['ref']:<6} {dev['entity']}  ({dev['standard'] or 'standard not named'})")
        lines.append(f"       instruction register {dev['ir_length']} bits, captures {dev['ir_capture']}")
        public = [n for n in dev["instructions"] if n not in dev["private"]]
        lines.append(f"       instructions: {', '.join(public)}")
        if dev["private"]:
            lines.append(f"       private: {', '.join(dev['private'])}")
        lines.append(f"       boundary register {dev['boundary_length']} cells; IDCODE {idcode}")
        others = {k: v for k, v in dev["registers"].items() if k not in ("BYPASS", "BOUNDARY", "DEVICE_ID")}
        if others:
            lines.append("       user registers: " + ", ".join(f"{k}[{v}]" for k, v in others.items()))
    by_kind: dict[str, list[dict[str, Any]]] = {kind: [] for kind in NET_KINDS}
    for net in summary["nets"]:
        by_kind.setdefault(net["kind"], []).append(net)
    for kind, nets in by_kind.items():
        if not nets:
            continue
        lines.append("")
        lines.append(f"{kind} nets ({len(nets)}):")
        for net in nets:
            flags = []
            if net["name"] in board.pulls:
                flags.append(f"pull-{board.pulls[net['name']]}")
            if net["name"] in board.hold:
                flags.append(f"held at {board.hold[net['name']]}")
            if net["name"] in board.never_drive:
                flags.append("never driven")
            extra = f"  [{', '.join(flags)}]" if flags else ""
            drivers = ", ".join(net["drivers"]) or "-"
            receivers = ", ".join(net["receivers"]) or "-"
            lines.append(f"  {net['name']:<18} drivers: {drivers}; receivers: {receivers}{extra}")
    return "\n".join(lines) + "\n"

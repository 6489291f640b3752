"""Random boards for the generator and diagnosis tests, built from `chainfactory` devices.

Each board has two to four devices in a chain with a mix of cells: three-state outputs, some
sharing one control cell (enabling one enables its siblings), BC_7 and BC_1 bidirectional
pins, an output and an input cell on one port, two-state outputs, BC_1 and BC_4 inputs, and
disable results Z, PULL1 and WEAK0. Nets join a driver with zero to two receivers, a fifth of
them a second driver; some nets are pulled up or down, one may be held and one never driven;
the receivers are CMOS or TTL. Every device gets a leaded package whose pin numbers, the TAP
pins among them, are shuffled, so the fault universe has shorts between neighbouring pins and
onto TAP signals.
"""

from __future__ import annotations

import dataclasses
import random

from chainfactory import idcode_for, make_board, make_device

from scanloom.models.board import Board

__all__ = ["random_board"]

_KINDS = ("out3", "out3", "bidir", "bidir1", "in", "in", "out2", "iopair")


def _device(rng: random.Random, seed: int, d: int):  # type: ignore[no-untyped-def]
    cells: list[tuple] = []
    roles: list[tuple[str, str]] = []
    number = 0
    shared = None
    for p in range(rng.randint(4, 9)):
        port = f"P({p})"
        kind = rng.choice(_KINDS)
        if kind in ("out3", "bidir", "bidir1", "iopair"):
            if shared is not None and rng.random() < 0.4:
                control = shared
            else:
                control = number
                number += 1
                cells.append((control, "BC_1", "*", "CONTROL", str(rng.choice([0, 1]))))
                shared = control
            disable = next(int(c[4]) for c in cells if c[0] == control)
            cell_type = {"out3": "BC_1", "bidir": "BC_7", "bidir1": "BC_1", "iopair": "BC_1"}[kind]
            function = "OUTPUT3" if kind in ("out3", "iopair") else "BIDIR"
            result = rng.choice(["Z", "Z", "Z", "PULL1", "WEAK0"]) if kind == "out3" else "Z"
            cells.append((number, cell_type, port, function, rng.choice("01X"), control, disable, result))
            number += 1
            if kind == "iopair":
                cells.append((number, "BC_1", port, "INPUT", "X"))
                number += 1
            roles.append((port, "driver+receiver" if kind != "out3" else "driver"))
        elif kind == "in":
            cells.append((number, rng.choice(["BC_1", "BC_4"]), port, "INPUT", "X"))
            number += 1
            roles.append((port, "receiver"))
        else:
            cells.append((number, "BC_1", port, "OUTPUT2", rng.choice("01")))
            number += 1
            roles.append((port, "driver"))
    idcode = idcode_for(0x100 + d) if rng.random() < 0.7 else None
    device = make_device(f"R{seed}D{d}", rng.randint(3, 5), cells, idcode=idcode,
                         preload=rng.random() < 0.5)
    ports = [port for port, _ in roles] + ["TDI", "TDO", "TMS", "TCK"]
    rng.shuffle(ports)
    device = dataclasses.replace(device, pin_maps={"PKG": {port: (str(i + 1),) for i, port in enumerate(ports)}},
                                 pin_map_name="PKG")
    return device, roles


def random_board(seed: int) -> Board:
    rng = random.Random(seed)
    devices = []
    drivers: list[str] = []
    receivers: list[str] = []
    for d in range(rng.randint(2, 4)):
        device, roles = _device(rng, seed, d)
        ref = f"U{d + 1}"
        devices.append((ref, device))
        drivers += [f"{ref}.{port}" for port, role in roles if role.startswith("driver")]
        receivers += [f"{ref}.{port}" for port, role in roles if role == "receiver"]
    rng.shuffle(drivers)
    rng.shuffle(receivers)
    nets: dict[str, list[str]] = {}
    while drivers:
        pins = [drivers.pop()]
        if drivers and rng.random() < 0.25:
            pins.append(drivers.pop())
        for _ in range(rng.choice([0, 1, 1, 2])):
            if receivers:
                pins.append(receivers.pop())
        nets[f"N{len(nets)}"] = pins
    for pin in receivers:
        if nets and rng.random() < 0.5:
            rng.choice(list(nets.values())).append(pin)
        else:
            nets[f"N{len(nets)}"] = [pin]
    names = list(nets)
    pulls = {net: rng.choice(["up", "down"]) for net in names if rng.random() < 0.2}
    hold = {rng.choice(names): rng.choice("01")} if rng.random() < 0.4 else {}
    free = [n for n in names if n not in hold]
    never = [rng.choice(free)] if rng.random() < 0.3 and free else []
    return make_board(devices, nets, name=f"random board {seed}", technology=rng.choice(["cmos", "ttl"]),
                      pulls=pulls, hold=hold, never_drive=never)

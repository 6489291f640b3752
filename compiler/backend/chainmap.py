"""The chain map: the fixed facts of the scan chain that every shift record refers to.

Built once from a Board, it travels with the records so that writers, the listing and the
independent replay can say what each bit means (device, register, cell, port, net) without
going back to the BSDL files or the board file.
"""

from __future__ import annotations

from itertools import repeat

from ..models.board import Board, ChainDevice
from ..models.device import DeviceModel
from ..models.model_memo import per_model
from .records import CellMeaning, ChainMap, DeviceMap

__all__ = ["build_chain_map", "register_lengths"]

# IEEE Std 1149.1 (clause on the device identification register, from memory: clause 12):
# the DEVICE_ID register is 32 bits long.
DEVICE_ID_LENGTH = 32


def register_lengths(device: DeviceModel) -> dict[str, int]:
    """Every register's length, with the standard's fixed lengths filled in where BSDL is silent.

    BYPASS is a single cell (IEEE 1149.1, bypass register clause); BOUNDARY has
    BOUNDARY_LENGTH cells; DEVICE_ID is 32 bits when IDCODE or USERCODE exists.
    """
    lengths = dict(device.registers)
    lengths.setdefault("BYPASS", 1)
    lengths.setdefault("BOUNDARY", device.boundary_length)
    if device.idcode is not None or device.usercode is not None:
        lengths.setdefault("DEVICE_ID", DEVICE_ID_LENGTH)
    return lengths


@per_model
def _cell_columns(device: DeviceModel) -> tuple[tuple[int, ...], tuple[str, ...], tuple[str, ...],
                                                 tuple[str | None, ...]]:
    """Number, cell type, function and port of each of the model's cells (None: internal)."""
    cells = device.cells
    return (tuple(cell.number for cell in cells), tuple(cell.cell_type for cell in cells),
            tuple(cell.function for cell in cells), tuple(cell.port for cell in cells))


def _device_map(entry: ChainDevice, net_of_port: dict[str | None, str]) -> DeviceMap:
    device = entry.device
    numbers, types, functions, ports = _cell_columns(device)
    # An internal cell (port None) looks up None, which no port is: it has no net.
    # (tuple.__new__ makes the named tuples without a Python-level call per cell)
    cells = tuple(map(tuple.__new__, repeat(CellMeaning),
                      zip(numbers, types, functions, ports, map(net_of_port.get, ports))))
    return DeviceMap(
        ref=entry.ref,
        entity=device.entity,
        position=entry.position,
        ir_length=device.ir_length,
        ir_capture=device.ir_capture,
        idcode=device.idcode,
        opcodes={name: tuple(codes) for name, codes in device.instructions.items()},
        selects=dict(device.selects),
        registers=register_lengths(device),
        boundary_length=device.boundary_length,
        cells=cells,
    )


def build_chain_map(board: Board) -> ChainMap:
    """The chain in TDI -> TDO order, each boundary cell with its port and board net."""
    net_of_port: dict[str, dict[str | None, str]] = {entry.ref: {} for entry in board.chain}
    for net in board.nets.values():
        for pin in net.pins:
            ports = net_of_port.get(pin.ref)
            if ports is not None:
                ports.setdefault(pin.port, net.name)
    return ChainMap(devices=tuple(_device_map(entry, net_of_port[entry.ref])
                                  for entry in board.chain))

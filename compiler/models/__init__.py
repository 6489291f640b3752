"""Models: what the BSDL files and the board file say, as plain dataclasses."""

from .board import Board, ChainDevice, Net, Part, PinRef
from .device import BoundaryCell, CellInfo, DeviceModel, Port, TapPins

__all__ = [
    "Board", "ChainDevice", "Net", "Part", "PinRef",
    "BoundaryCell", "CellInfo", "DeviceModel", "Port", "TapPins",
]

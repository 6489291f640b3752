"""Broken chains: failures of bits that no net can change, located to a place in the chain.

What a board returns in an instruction-register scan (INSTRUCTION_CAPTURE, whose two lowest
bits are 01 by IEEE Std 1149.1), in a bypass bit (always 0), in an identification register
(its BSDL pattern) or in bits pushed through the whole chain depends on the scan path alone.
When such bits fail, the path is broken: a TAP signal is open or shorted, or a device does not
follow the TAP. Bits travel toward TDO, so in one scan the bits of every device upstream of a
broken link (nearer TDI) come out wrong while those downstream arrive intact: the last device
whose bits fail, and the link after it, are where to look.

The suspects are the TAP faults there: each TAP pin (TDI, TDO, TMS, TCK, TRST) of the devices at
that place open, and shorted to the nets on neighbouring package pins; TMS, TCK and TRST are
bussed to every device, so a short onto any of them is a suspect wherever the break shows.
An identification register that alone reads wrong, with the path intact, is a different part
or revision on that position, not a broken chain.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Sequence

from ..backend.records import ShiftRecord
from ..models.board import Board, PinRef
from ..sim.faults import TAP_SIGNALS, adjacent_pin_pairs, tap_port
from .failing_bits import PASS_THROUGH, FailingBit

__all__ = ["ChainFinding", "chain_evidence", "locate_chain_break", "identity_mismatches",
           "first_scans_after_reset"]

_PATH_REGISTERS = frozenset({"IR", "BYPASS", PASS_THROUGH})
_BUSSED = ("TMS", "TCK", "TRST")


@dataclass(frozen=True)
class ChainFinding:
    """A broken scan path: where, why we think so, and the TAP faults that could do it."""

    after: str | None  # the last device whose bits fail (None: not located)
    before: str | None  # the device after it, toward TDO (None: the board's TDO)
    scan_record: int | None  # the first scan that shows it
    suspects: tuple[str, ...]  # fault specs, nearest first
    located: bool
    evidence: int  # failing bits that depend on the scan path alone
    confirmed: bool = False  # the suspects were played on the virtual board and reproduce it
    exact: tuple[str, ...] = ()  # of them, those that reproduce every failing bit


def chain_evidence(bits: tuple[FailingBit, ...],
                   pin_reader: Callable[[FailingBit], bool]) -> list[FailingBit]:
    """Failing bits that no net can change: instruction, bypass, identification and user
    registers, bits passing through the chain, and boundary bits that do not capture a pin."""
    out = []
    for bit in bits:
        if bit.register in _PATH_REGISTERS or bit.register not in ("BOUNDARY", "DEVICE_ID"):
            out.append(bit)
        elif bit.register == "BOUNDARY" and not pin_reader(bit):
            out.append(bit)
    return out


def identity_mismatches(bits: tuple[FailingBit, ...], evidence: list[FailingBit]) -> dict[str, list[FailingBit]]:
    """Identification registers that read wrong while nothing else on the path fails."""
    ids = [bit for bit in bits if bit.register == "DEVICE_ID"]
    if not ids or evidence:
        return {}
    out: dict[str, list[FailingBit]] = {}
    for bit in ids:
        out.setdefault(bit.device or "", []).append(bit)
    return out


def locate_chain_break(board: Board, bits: list[FailingBit],
                       after_reset: frozenset[int] = frozenset()) -> ChainFinding:
    """Where the path breaks, from the first scan whose path bits fail, and its suspects.

    Only a scan whose captures do not depend on what earlier scans shifted in locates the
    break for sure: an instruction scan (fixed capture patterns), or the first data scan after
    a reset (`after_reset`: IDCODE and bypass bits). A later data scan may fail because an
    earlier scan's bits were garbled on their way in (wrong instructions, wrong lengths).
    """
    chain = board.chain
    first_record = min((bit.record for bit in bits if bit.record is not None), default=None)
    in_first = [bit for bit in bits if bit.record == first_record and bit.position is not None]
    located = bool(in_first) and (all(bit.register == "IR" for bit in in_first)
                                  or first_record in after_reset)
    if located:
        last = max(bit.position for bit in in_first if bit.position is not None)
        window = [p for p in (last, last + 1) if p < len(chain)]
    else:
        last = None
        window = list(range(len(chain)))
    suspects: dict[str, None] = {}
    for position in window:
        for spec in _tap_faults(board, position, opens=True, signals=TAP_SIGNALS):
            suspects[spec] = None
    for position in range(len(chain)):  # bussed signals: wherever the break shows
        for spec in _tap_faults(board, position, opens=False, signals=_BUSSED):
            suspects[spec] = None
    after = chain[last].ref if last is not None else None
    before = chain[last + 1].ref if last is not None and last + 1 < len(chain) else None
    return ChainFinding(after, before, first_record, tuple(suspects), located, len(bits))


def first_scans_after_reset(records: Sequence[ShiftRecord]) -> frozenset[int]:
    """The records that are the first scan after a reset: what they capture is fixed."""
    out = set()
    fresh = False
    for index, record in enumerate(records):
        if record.kind == "reset":
            fresh = True
        elif record.kind in ("ir", "dr"):
            if fresh:
                out.add(index)
            fresh = False
    return frozenset(out)


def _tap_faults(board: Board, position: int, *, opens: bool, signals: tuple[str, ...]) -> list[str]:
    """The TAP faults of one device: its TAP pins open, shorted onto neighbouring nets, and the
    faults of a net the board declares as carrying that TAP signal."""
    entry = board.chain[position]
    device = entry.device
    neighbours: dict[str, set[str]] = {}
    for a, b in adjacent_pin_pairs(device):
        neighbours.setdefault(a, set()).add(b)
        neighbours.setdefault(b, set()).add(a)
    out: list[str] = []
    for signal in signals:
        port = tap_port(device, signal)
        if port is None:
            continue
        pin = PinRef(entry.ref, port)
        tap_net = board.net_of_pin.get(pin)
        if opens:
            out.append(f"open:{pin}")
        if tap_net is not None:
            out += [f"stuck-at-0:{tap_net}", f"stuck-at-1:{tap_net}"]
            if opens:
                out.append(f"open:{tap_net}")
        for other in sorted(neighbours.get(port, ())):
            net = board.net_of_pin.get(PinRef(entry.ref, other))
            if net is None or net == tap_net:
                continue
            if tap_net is not None:
                pair = sorted((net, tap_net), key=list(board.nets).index)
                out += [f"short:{pair[0]},{pair[1]}", f"short:{pair[0]},{pair[1]}:or"]
            else:
                out += [f"short:{net},{entry.ref}.{signal}", f"short:{net},{entry.ref}.{signal}:or"]
    return out

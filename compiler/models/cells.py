"""Boundary-cell capture behaviour: what a cell loads at Capture-DR, per function and instruction.

The descriptions follow the CELL_INFO constants of the standard's BSDL package
(IEEE Std 1149.1-2001, Annex B, package STD_1149_1_2001: cells BC_0 .. BC_10). The tables below
are written from memory of that package and marked as such; each entry is a triple
(function, instruction, capture source) where the source is PI (the cell's parallel input),
PO (its parallel output), UPD (its update latch), CAP (its own capture flip-flop: holds),
X (unknown), ZERO or ONE.

What PI and PO *are* depends on where the cell sits: for an input cell the parallel input is
the pin; for an output or control cell it is the system logic (unknown to us: X) and the
parallel output is the pin side. `resolve_capture` turns the source into what the virtual
board can know: the pin, the update latch, or X.
"""

from __future__ import annotations

from .device import CellCapture, CellInfo

__all__ = [
    "STANDARD_CELLS",
    "capture_source",
    "resolve_capture",
    "instruction_class",
    "PIN",
    "UPDATE",
    "UNKNOWN",
    "HOLD",
]

# What a capture resolves to, as the virtual board sees it.
PIN = "PIN"  # the value on the pin (as the cell's receiver reads it)
UPDATE = "UPDATE"  # the cell's own update latch
UNKNOWN = "X"  # system logic or undefined
HOLD = "HOLD"  # the capture flip-flop keeps its content (CAP)

_FUNCTIONS_ALL = ("INPUT", "OUTPUT2", "OUTPUT3", "CONTROL", "CONTROLR", "INTERNAL", "CLOCK",
                  "BIDIR_IN", "BIDIR_OUT", "OBSERVE_ONLY")


def _all(source: str, instructions: tuple[str, ...] = ("EXTEST", "SAMPLE", "INTEST"),
         functions: tuple[str, ...] = _FUNCTIONS_ALL) -> list[tuple[str, str, str]]:
    return [(f, i, source) for i in instructions for f in functions]


def _info(name: str, entries: list[tuple[str, str, str]]) -> CellInfo:
    return CellInfo(name, tuple(CellCapture(f, i, s) for f, i, s in entries))


# From memory of IEEE Std 1149.1-2001 Annex B (STD_1149_1_2001 package), CELL_INFO constants.
STANDARD_CELLS: dict[str, CellInfo] = {
    # BC_0: a generic cell; every capture from the parallel input.
    "BC_0": _info("BC_0", _all("PI")),
    # BC_1: the basic cell (IEEE 1149.1 Figure 11-20 style); every capture from PI.
    "BC_1": _info("BC_1", _all("PI")),
    # BC_2: output/control captures its update latch in EXTEST; input captures in INTEST too.
    "BC_2": _info("BC_2", [
        ("INPUT", "EXTEST", "PI"), ("OUTPUT2", "EXTEST", "UPD"), ("OUTPUT3", "EXTEST", "UPD"),
        ("CONTROL", "EXTEST", "UPD"), ("CONTROLR", "EXTEST", "UPD"), ("INTERNAL", "EXTEST", "PI"),
        ("CLOCK", "EXTEST", "PI"), ("BIDIR_IN", "EXTEST", "PI"), ("BIDIR_OUT", "EXTEST", "UPD"),
        *_all("PI", ("SAMPLE",)),
        ("INPUT", "INTEST", "UPD"), ("OUTPUT2", "INTEST", "PI"), ("OUTPUT3", "INTEST", "PI"),
        ("CONTROL", "INTEST", "PI"), ("CONTROLR", "INTEST", "PI"), ("INTERNAL", "INTEST", "UPD"),
        ("CLOCK", "INTEST", "UPD"), ("BIDIR_IN", "INTEST", "UPD"), ("BIDIR_OUT", "INTEST", "PI"),
    ]),
    # BC_3: an internal or input cell with no update stage in the pin path.
    "BC_3": _info("BC_3", _all("PI", functions=("INPUT", "INTERNAL"))),
    # BC_4: observe-only input or clock cell.
    "BC_4": _info("BC_4", _all("PI", functions=("INPUT", "CLOCK", "OBSERVE_ONLY"))
                  + [("INTERNAL", "EXTEST", "PI"), ("INTERNAL", "SAMPLE", "PI"),
                     ("INTERNAL", "INTEST", "PI")]),
    # BC_5: combined input and control cell.
    "BC_5": _info("BC_5", [
        ("INPUT", "EXTEST", "PI"), ("CONTROL", "EXTEST", "PI"),
        ("INPUT", "SAMPLE", "PI"), ("CONTROL", "SAMPLE", "PI"),
        ("INPUT", "INTEST", "UPD"), ("CONTROL", "INTEST", "UPD"),
    ]),
    # BC_6: reversible bidirectional cell.
    "BC_6": _info("BC_6", [
        ("BIDIR_IN", "EXTEST", "PI"), ("BIDIR_OUT", "EXTEST", "UPD"),
        ("BIDIR_IN", "SAMPLE", "PI"), ("BIDIR_OUT", "SAMPLE", "PI"),
        ("BIDIR_IN", "INTEST", "UPD"), ("BIDIR_OUT", "INTEST", "PI"),
    ]),
    # BC_7: bidirectional cell that observes the pin even while it drives (PO in EXTEST).
    "BC_7": _info("BC_7", [
        ("BIDIR_IN", "EXTEST", "PI"), ("BIDIR_OUT", "EXTEST", "PO"),
        ("BIDIR_IN", "SAMPLE", "PI"), ("BIDIR_OUT", "SAMPLE", "PI"),
        ("BIDIR_IN", "INTEST", "UPD"), ("BIDIR_OUT", "INTEST", "PI"),
    ]),
    # BC_8: bidirectional cell, captures the pin in every mode.
    "BC_8": _info("BC_8", [
        ("BIDIR_IN", "EXTEST", "PI"), ("BIDIR_OUT", "EXTEST", "PO"),
        ("BIDIR_IN", "SAMPLE", "PI"), ("BIDIR_OUT", "SAMPLE", "PO"),
        ("BIDIR_IN", "INTEST", "UPD"), ("BIDIR_OUT", "INTEST", "PO"),
        ("OUTPUT3", "EXTEST", "PO"), ("OUTPUT3", "SAMPLE", "PO"), ("OUTPUT3", "INTEST", "PO"),
    ]),
    # BC_9: output cell that observes its pin.
    "BC_9": _info("BC_9", [
        ("OUTPUT2", "EXTEST", "PO"), ("OUTPUT3", "EXTEST", "PO"),
        ("OUTPUT2", "SAMPLE", "PI"), ("OUTPUT3", "SAMPLE", "PI"),
        ("OUTPUT2", "INTEST", "PI"), ("OUTPUT3", "INTEST", "PI"),
    ]),
    # BC_10: output cell that observes its pin in EXTEST and SAMPLE.
    "BC_10": _info("BC_10", [
        ("OUTPUT2", "EXTEST", "PO"), ("OUTPUT3", "EXTEST", "PO"),
        ("OUTPUT2", "SAMPLE", "PO"), ("OUTPUT3", "SAMPLE", "PO"),
        ("OUTPUT2", "INTEST", "PI"), ("OUTPUT3", "INTEST", "PI"),
    ]),
}


def instruction_class(instruction: str, selected_register: str | None) -> str | None:
    """The CELL_INFO instruction column an instruction behaves as, for the boundary register.

    EXTEST and CLAMP-like external tests capture as EXTEST; SAMPLE, PRELOAD and SAMPLE/PRELOAD
    as SAMPLE; INTEST and RUNBIST as INTEST. Other instructions that select BOUNDARY (a maker's
    own) are treated as SAMPLE, the safe reading.
    """
    name = instruction.upper()
    if name in ("EXTEST", "EXTEST_PULSE", "EXTEST_TRAIN"):
        return "EXTEST"
    if name in ("SAMPLE", "PRELOAD", "SAMPLE/PRELOAD", "SAMPLE_PRELOAD"):
        return "SAMPLE"
    if name in ("INTEST", "RUNBIST"):
        return "INTEST"
    if selected_register == "BOUNDARY":
        return "SAMPLE"
    return None


def capture_source(info: CellInfo | None, function: str, instruction: str, driving: bool) -> str | None:
    """The CELL_INFO source (PI, PO, UPD, CAP, X, ZERO, ONE) or None when the cell is unknown.

    A BIDIR cell is looked up as BIDIR_OUT while its output is enabled, else BIDIR_IN.
    """
    if info is None:
        return None
    lookup = function
    if function == "BIDIR":
        lookup = "BIDIR_OUT" if driving else "BIDIR_IN"
    for entry in info.captures:
        if entry.function == lookup and entry.instruction == instruction:
            return entry.source
    if function == "BIDIR":
        # Some descriptions list only one direction; fall back to the other.
        other = "BIDIR_IN" if lookup == "BIDIR_OUT" else "BIDIR_OUT"
        for entry in info.captures:
            if entry.function == other and entry.instruction == instruction:
                return entry.source
    return None


def resolve_capture(info: CellInfo | None, function: str, instruction: str, driving: bool) -> str:
    """What the cell captures as the board sees it: PIN, UPDATE, HOLD, X, "0" or "1".

    Input-side functions (INPUT, CLOCK, OBSERVE_ONLY, BIDIR_IN) have the pin on PI; output and
    control cells have system logic on PI (unknown: X) and the pin side on PO. An unknown cell
    type or a missing entry captures X (the caller warns).
    """
    source = capture_source(info, function, instruction, driving)
    if source is None:
        return UNKNOWN
    if source == "ZERO":
        return "0"
    if source == "ONE":
        return "1"
    if source == "X":
        return UNKNOWN
    if source == "UPD":
        return UPDATE
    if source == "CAP":
        return HOLD
    pin_side_input = function in ("INPUT", "CLOCK", "OBSERVE_ONLY") or (
        function == "BIDIR" and not driving)
    if source == "PI":
        if pin_side_input:
            return PIN
        if function == "BIDIR" and driving and instruction == "EXTEST":
            return UNKNOWN  # PI of a driving bidir is the system logic output
        return UNKNOWN
    if source == "PO":
        if function in ("OUTPUT2", "OUTPUT3", "BIDIR"):
            return PIN
        return UNKNOWN
    return UNKNOWN

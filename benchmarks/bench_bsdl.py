"""Benchmark: read a generated 2,000-cell BSDL file; the target is 0.25 s or less.

The file is generated from scratch for a fictional device (MANGROVE_IO2K): 500 bidirectional
pins in groups of eight sharing a control cell, plus inputs and 2-state outputs, written the
way real files are (one cell per line, concatenated with `&`, comments between the lines).
Run: python benchmarks/bench_bsdl.py
"""

from __future__ import annotations

import statistics
import time

from scanloom.diagnostics import Diagnostics
from scanloom.models.bsdl import parse_bsdl

TARGET_SECONDS = 0.25


def generate_bsdl(cells_wanted: int = 2000) -> str:
    """A valid BSDL file with exactly `cells_wanted` boundary cells.

    The cells repeat a pattern of one control cell, the eight bidirectional cells it enables,
    one input and one 2-state output; an internal cell fills a last odd place.
    """
    entries: list[str] = []
    inputs: list[int] = []
    outputs: list[int] = []
    bidirs: list[tuple[int, int]] = []  # (pin index, control cell)
    number = 0
    pin = 0
    while number < cells_wanted:
        remaining = cells_wanted - number
        if remaining >= 9:
            control = number
            entries.append(f"{number:5d} (BC_1, *, control, 1)")
            number += 1
            for _ in range(8):
                entries.append(f"{number:5d} (BC_7, IO({pin}), bidir, X, {control}, 1, Z)")
                bidirs.append((pin, control))
                number += 1
                pin += 1
        if cells_wanted - number >= 2:
            index = len(inputs)
            entries.append(f"{number:5d} (BC_1, DIN({index}), input, X)")
            inputs.append(number)
            number += 1
            index = len(outputs)
            entries.append(f"{number:5d} (BC_1, DOUT({index}), output2, 0)")
            outputs.append(number)
            number += 1
        elif cells_wanted - number == 1:
            entries.append(f"{number:5d} (BC_0, *, internal, X)")
            number += 1
    io_width, din_width, dout_width = pin, len(inputs), len(outputs)
    total_pins = 5 + io_width + din_width + dout_width
    pins = iter(range(1, total_pins + 1))
    pin_map = [f"TCK:{next(pins)}", f"TMS:{next(pins)}", f"TDI:{next(pins)}",
               f"TDO:{next(pins)}", f"TRST_N:{next(pins)}"]
    for name, width in (("IO", io_width), ("DIN", din_width), ("DOUT", dout_width)):
        pin_map.append(f"{name}:(" + ",".join(str(next(pins)) for _ in range(width)) + ")")
    pin_lines = "\n".join(f'        "{item}, " &' for item in pin_map[:-1])
    pin_lines += f'\n        "{pin_map[-1]}";'
    cell_lines = []
    for index, entry in enumerate(entries):
        tail = ", " if index < len(entries) - 1 else ""
        cell_lines.append(f'        "{entry}{tail}"' + (" &" if tail else ";"))
        if index % 50 == 49:
            cell_lines.append("        -- another fifty cells")
    cells = "\n".join(cell_lines)
    return f"""-- MANGROVE_IO2K: a generated device for the reader benchmark.
entity MANGROVE_IO2K is
    generic (PHYSICAL_PIN_MAP : string := "BGA");
    port (
        TCK, TMS, TDI, TRST_N : in bit;
        TDO  : out bit;
        IO   : inout bit_vector (0 to {io_width - 1});
        DIN  : in bit_vector (0 to {din_width - 1});
        DOUT : out bit_vector (0 to {dout_width - 1})
    );
    use STD_1149_1_2001.all;
    attribute COMPONENT_CONFORMANCE of MANGROVE_IO2K : entity is "STD_1149_1_2001";
    attribute PIN_MAP of MANGROVE_IO2K : entity is PHYSICAL_PIN_MAP;
    constant BGA : PIN_MAP_STRING :=
{pin_lines}
    attribute TAP_SCAN_IN of TDI : signal is true;
    attribute TAP_SCAN_OUT of TDO : signal is true;
    attribute TAP_SCAN_MODE of TMS : signal is true;
    attribute TAP_SCAN_CLOCK of TCK : signal is (5.0e7, BOTH);
    attribute TAP_SCAN_RESET of TRST_N : signal is true;
    attribute INSTRUCTION_LENGTH of MANGROVE_IO2K : entity is 6;
    attribute INSTRUCTION_OPCODE of MANGROVE_IO2K : entity is
        "BYPASS (111111), EXTEST (000000), SAMPLE (000001), PRELOAD (000001), " &
        "IDCODE (000010), CLAMP (000011), HIGHZ (000100)";
    attribute INSTRUCTION_CAPTURE of MANGROVE_IO2K : entity is "000001";
    attribute IDCODE_REGISTER of MANGROVE_IO2K : entity is
        "0001" & "0110011001100110" & "01010101010" & "1";
    attribute BOUNDARY_LENGTH of MANGROVE_IO2K : entity is {cells_wanted};
    attribute BOUNDARY_REGISTER of MANGROVE_IO2K : entity is
{cells}
end MANGROVE_IO2K;
"""


def main() -> None:
    text = generate_bsdl(2000)
    parse_bsdl(text, "warm-up.bsd", Diagnostics())  # builds the grammar once per process
    wall: list[float] = []
    cpu: list[float] = []
    for _ in range(9):
        start, start_cpu = time.perf_counter(), time.process_time()
        device = parse_bsdl(text, "mangrove_io2k.bsd", Diagnostics())
        wall.append(time.perf_counter() - start)
        cpu.append(time.process_time() - start_cpu)
    assert device.boundary_length == 2000 and len(device.cells) == 2000
    # The best of several runs is the figure least disturbed by other work on the machine
    # (the convention of Python's timeit); the median and the CPU time are shown beside it.
    best = min(wall)
    verdict = "within" if best <= TARGET_SECONDS else "OVER"
    print(f"BSDL reader: 2,000-cell file ({len(text):,} characters) read in "
          f"{best * 1000:.1f} ms (best of {len(wall)}; median {statistics.median(wall) * 1000:.1f} ms, "
          f"CPU {statistics.median(cpu) * 1000:.1f} ms) - {verdict} the "
          f"{TARGET_SECONDS * 1000:.0f} ms target")


if __name__ == "__main__":
    main()

"""Synthetic boards for the benchmarks: BSDL files and a board YAML written from scratch.

Three sizes with fixed seeds: `small` is the bundled demo board, `medium` 16 devices x 500
cells, `large` 64 devices x 1,500 cells (about 30,000 nets). Every device is an invented
"SYNTH" part: OUTPUT3 cells in groups of eight sharing one control cell, and input cells.
Each output drives one net received by inputs of other devices in the chain.
"""

from __future__ import annotations

import argparse
import random
from dataclasses import dataclass
from pathlib import Path

__all__ = ["SIZES", "BoardSize", "generate_board", "write_bsdl"]

REPO = Path(__file__).resolve().parents[1]
DEMO_BOARD = REPO / "examples" / "irrigation" / "irrigation.yaml"


@dataclass(frozen=True)
class BoardSize:
    name: str
    devices: int
    cells: int
    seed: int


SIZES = {
    "small": BoardSize("small", 0, 0, 1),
    "medium": BoardSize("medium", 16, 500, 2),
    "large": BoardSize("large", 64, 1500, 3),
}


def _split(cells: int) -> tuple[int, int, int]:
    """(outputs, controls, inputs) for a device of `cells` boundary cells."""
    outputs = (cells * 470) // 1500
    controls = -(-outputs // 8)
    inputs = cells - outputs - controls
    return outputs, controls, inputs


def write_bsdl(path: Path, entity: str, cells: int, ir_length: int, idcode_part: int) -> None:
    """Write one synthetic BSDL file (IEEE 1149.1-2001 style) of exactly `cells` cells."""
    outputs, controls, inputs = _split(cells)
    pins = outputs + inputs + 6
    pin_list = [f"PA:({','.join(str(i + 1) for i in range(outputs))})",
                f"PB:({','.join(str(outputs + i + 1) for i in range(inputs))})"]
    base = outputs + inputs
    pin_list += [f"TCK:{base + 1}", f"TMS:{base + 2}", f"TDI:{base + 3}", f"TDO:{base + 4}",
                 f"VCC:{base + 5}", f"GND:{base + 6}"]
    ones = "1" * ir_length
    zeros = "0" * ir_length
    sample = "0" * (ir_length - 2) + "10"
    preload = "0" * (ir_length - 2) + "11"
    idcode_op = "0" * (ir_length - 1) + "1"
    capture = "X" * (ir_length - 2) + "01"
    idcode = f"0001{idcode_part:016b}00001111001" + "1"  # version, part, maker, bit 0 = 1
    assert len(idcode) == 32
    entries: list[str] = []
    number = 0
    for group in range(controls):
        ctrl = number
        entries.append(f"{ctrl} (BC_1, *, control, 1)")
        number += 1
        for j in range(group * 8, min(outputs, group * 8 + 8)):
            entries.append(f"{number} (BC_1, PA({j}), output3, X, {ctrl}, 1, Z)")
            number += 1
    for j in range(inputs):
        entries.append(f"{number} (BC_4, PB({j}), input, X)")
        number += 1
    assert number == cells
    register = " &\n".join(f'        "{e}{"," if i < len(entries) - 1 else ""}"'
                           for i, e in enumerate(entries))
    text = f"""-- {entity}: an invented device generated for scanloom's benchmarks.
entity {entity} is
    generic (PHYSICAL_PIN_MAP : string := "GEN{pins}");
    port (
        PA : out bit_vector (0 to {outputs - 1});
        PB : in bit_vector (0 to {inputs - 1});
        TCK, TMS, TDI : in bit;
        TDO : out bit;
        VCC, GND : linkage bit
    );
    use STD_1149_1_2001.all;
    attribute COMPONENT_CONFORMANCE of {entity} : entity is "STD_1149_1_2001";
    attribute PIN_MAP of {entity} : entity is PHYSICAL_PIN_MAP;
    constant GEN{pins} : PIN_MAP_STRING := "{', '.join(pin_list)}";
    attribute TAP_SCAN_IN of TDI : signal is true;
    attribute TAP_SCAN_OUT of TDO : signal is true;
    attribute TAP_SCAN_MODE of TMS : signal is true;
    attribute TAP_SCAN_CLOCK of TCK : signal is (50.0e6, BOTH);
    attribute INSTRUCTION_LENGTH of {entity} : entity is {ir_length};
    attribute INSTRUCTION_OPCODE of {entity} : entity is
        "BYPASS ({ones}), EXTEST ({zeros}), SAMPLE ({sample}), PRELOAD ({preload}), IDCODE ({idcode_op})";
    attribute INSTRUCTION_CAPTURE of {entity} : entity is "{capture}";
    attribute IDCODE_REGISTER of {entity} : entity is "{idcode}";
    attribute REGISTER_ACCESS of {entity} : entity is
        "BOUNDARY (EXTEST, SAMPLE, PRELOAD), BYPASS (BYPASS), DEVICE_ID (IDCODE)";
    attribute BOUNDARY_LENGTH of {entity} : entity is {cells};
    attribute BOUNDARY_REGISTER of {entity} : entity is
{register};
end {entity};
"""
    path.write_text(text)


def generate_board(size: str, out_dir: Path) -> Path:
    """Write the board of `size` under `out_dir` (or return the demo board for `small`)."""
    spec = SIZES[size]
    if size == "small":
        return DEMO_BOARD
    rng = random.Random(spec.seed)
    out_dir.mkdir(parents=True, exist_ok=True)
    (out_dir / "bsdl").mkdir(exist_ok=True)
    outputs, _controls, inputs = _split(spec.cells)
    types = min(8, spec.devices)
    ir_lengths = [rng.choice((3, 4, 5, 6, 8)) for _ in range(types)]
    for t in range(types):
        name = f"SYNTH{t:02d}"
        write_bsdl(out_dir / "bsdl" / f"{name.lower()}.bsd", name, spec.cells, ir_lengths[t], 0x100 + t)
    lines = [f"# Synthetic benchmark board '{size}': {spec.devices} devices x {spec.cells} cells.",
             f"board: synthetic {size}", "technology: cmos", "chain:"]
    for d in range(spec.devices):
        name = f"SYNTH{d % types:02d}".lower()
        lines.append(f"  - {{ref: U{d + 1}, bsdl: bsdl/{name}.bsd}}")
    lines.append("nets:")
    next_input = [0] * spec.devices
    for d in range(spec.devices):
        for j in range(outputs):
            pins = [f"U{d + 1}.PA({j})"]
            fanout = 1 + (rng.random() < 0.5)
            for k in range(fanout):
                r = (d + 1 + (j + k * 7) % (spec.devices - 1)) % spec.devices
                if next_input[r] < inputs:
                    pins.append(f"U{r + 1}.PB({next_input[r]})")
                    next_input[r] += 1
            lines.append(f"  N{d + 1}_{j}: [{', '.join(pins)}]")
    board = out_dir / f"synthetic_{size}.yaml"
    board.write_text("\n".join(lines) + "\n")
    return board


def generate_program(board: Path, steps: int = 40, seed: int = 5) -> Path:
    """A program of `steps` EXTEST steps driving every net of a synthetic board with random
    values and expecting them back: one group per driving device keeps the text compact."""
    if board == DEMO_BOARD:
        return DEMO_BOARD.parent / "valve_nets.loom"
    rng = random.Random(seed)
    groups: dict[str, list[str]] = {}
    for line in board.read_text().splitlines():
        if line.startswith("  N") and ":" in line:
            net = line.split(":", 1)[0].strip()
            device = net[1:].split("_", 1)[0]
            groups.setdefault(device, []).append(net)
    out = [f"# generated: {steps} EXTEST steps over every net of {board.name}",
           f'board "{board.name}"', "tck 10 MHz", ""]
    for device, nets in groups.items():
        out.append(f"group G{device} = [{', '.join(reversed(nets))}]")
    out += ["", 'test all_nets "every net driven and read back" {',
            f"    {', '.join(f'U{d}' for d in groups)} EXTEST"]
    for step in range(steps):
        out.append(f"    step v{step} {{")
        for device, nets in groups.items():
            value = rng.getrandbits(len(nets))
            out.append(f"        drive G{device} = 0x{value:x}")
            out.append(f"        expect G{device} = 0x{value:x}")
        out.append("    }")
    out.append("}")
    program = board.parent / f"{board.stem}_nets.loom"
    program.write_text("\n".join(out) + "\n")
    return program


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("size", choices=sorted(SIZES))
    parser.add_argument("out", type=Path)
    args = parser.parse_args()
    print(generate_board(args.size, args.out))


if __name__ == "__main__":
    main()

"""Chain-integrity tests: is the scan chain there, as long as its BSDL files say, in order?

Each check is a test of its own, so that a failure names what failed and where:
- `after_reset`: Test-Logic-Reset, then one raw scan of the whole chain. Every device must hold
  its default instruction (IEEE Std 1149.1: IDCODE where it has an identification register,
  else BYPASS), so the scan reads each IDCODE (X bits of the BSDL pattern not compared) and a
  0 for each bypass bit, then the pattern shifted in;
- `bypass_path`: every device in BYPASS; a known pattern pushed through comes back delayed by
  exactly the chain's length (one bypass bit per device, each capturing 0);
- `boundary_<REF>`: one device in SAMPLE/PRELOAD, the others in BYPASS; the pattern comes back
  after exactly that device's boundary-register length plus the other devices' bypass bits;
- `identify`: every identification register read under IDCODE.
Every instruction-register scan these tests make also compares what each device captures
(INSTRUCTION_CAPTURE; its two lowest bits are 01), which finds a chain stuck at 0 or 1 and
where it is stuck. Nothing here drives a pin: SAMPLE, BYPASS and IDCODE leave the pins to
the devices' own logic.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..backend.images import preload_instruction
from ..models.board import Board, ChainDevice
from .loom_text import INDENT, comment_block, quoted, unique_name, wrap_words

__all__ = ["IntegrityTest", "integrity_sections", "PATTERN"]

# The pattern pushed through the chain, bit 0 first shifted: not periodic and starting and
# ending in 1, so a path one bit too long or too short, or stuck, cannot return it.
PATTERN = "10011101"


@dataclass(frozen=True)
class IntegrityTest:
    """A generated integrity test: its name, what it checks, and its chain-scan length."""

    name: str
    checks: str  # "after_reset", "bypass_path", "boundary", "identify"
    device: str | None = None
    scan_bits: int = 0


def _hex(text: str) -> str:
    return "0x" + format(int(text, 2), "X")


def _scan_line(register_text: str, why: str) -> list[str]:
    """`scan chain` of the registers (most significant first, TDI end first) plus the pattern."""
    length = len(register_text) + len(PATTERN)
    expected = PATTERN + register_text
    value = _hex(expected) if "X" not in expected else "0b" + expected
    return [INDENT + f"scan chain {length} bits in {_hex(PATTERN)} expect {value}  # {why}"]


def integrity_sections(board: Board, taken: set[str]) -> tuple[list[str], list[IntegrityTest]]:
    """The text of every integrity test, and what each one checks."""
    chain = board.chain
    refs = [entry.ref for entry in chain]
    lines: list[str] = []
    tests: list[IntegrityTest] = []

    def open_test(base: str, title: str, comment: str) -> str:
        name = unique_name(base, taken)
        lines.extend(["", f"test {name} {quoted(title)} {{"])
        lines.extend(comment_block(wrap_words(comment, 90), INDENT))
        return name

    # -- the default instruction after Test-Logic-Reset ---------------------------------------
    defaults = "".join(entry.device.idcode if _has_idcode(entry) else "0" for entry in chain)
    name = open_test("after_reset", "after Test-Logic-Reset every device holds IDCODE, else BYPASS",
                     "IEEE 1149.1: Test-Logic-Reset puts IDCODE in force where a device has an "
                     "identification register, else BYPASS. The scan reads every IDCODE and bypass "
                     "bit at once (X bits of a BSDL pattern are not compared), then the pattern "
                     "pushed in.")
    lines.append(INDENT + "reset tap")
    lines += _scan_line(defaults, f"{len(defaults)} bits of registers, then the pattern")
    lines.append("}")
    tests.append(IntegrityTest(name, "after_reset", None, len(defaults) + len(PATTERN)))

    # -- the BYPASS path -----------------------------------------------------------------------
    name = open_test("bypass_path", f"the bypass path is {len(chain)} bits long",
                     "Every device in BYPASS: each bypass bit captures 0, and a pattern pushed "
                     "through comes back delayed by exactly one bit per device. Loading BYPASS is "
                     "an instruction-register scan that compares each device's INSTRUCTION_CAPTURE "
                     "(its two lowest bits are 01).")
    lines.append(INDENT + f"{', '.join(refs)} BYPASS")
    lines += _scan_line("0" * len(chain), f"{len(chain)} bypass bit{'s' * (len(chain) != 1)}, "
                                          "then the pattern")
    lines.append("}")
    tests.append(IntegrityTest(name, "bypass_path", None, len(chain) + len(PATTERN)))

    # -- each boundary register's length -------------------------------------------------------
    for position, entry in enumerate(chain):
        device = entry.device
        sample = preload_instruction(device)
        if sample is None or device.boundary_length < 1:
            continue
        registers = "".join("X" * device.boundary_length if k == position else "0"
                            for k in range(len(chain)))
        name = open_test(f"boundary_{entry.ref}",
                         f"{entry.ref}'s boundary register is {device.boundary_length} cells long",
                         f"{entry.ref} ({device.entity}) in {sample}, which selects its boundary "
                         "register without driving a pin; the others in BYPASS. The pattern comes "
                         f"back after exactly {device.boundary_length} + {len(chain) - 1} bits.")
        others = [ref for ref in refs if ref != entry.ref]
        lines.append(INDENT + f"{entry.ref} {sample}")
        if others:
            lines.append(INDENT + f"{', '.join(others)} BYPASS")
        others_bits = len(chain) - 1
        lines += _scan_line(registers, f"{device.boundary_length} cells of {entry.ref} (not compared), "
                                       f"{others_bits} bypass bit{'s' * (others_bits != 1)}")
        lines.append("}")
        tests.append(IntegrityTest(name, "boundary", entry.ref, len(registers) + len(PATTERN)))

    # -- identification registers under IDCODE --------------------------------------------------
    with_id = [entry for entry in chain if _has_idcode(entry)]
    if with_id:
        name = open_test("identify", "every identification register under IDCODE matches its BSDL file",
                         "IEEE 1149.1 identification register: version, part number and maker "
                         "code, bit 0 always 1; X bits of the BSDL pattern are not compared.")
        lines.append(INDENT + "step identities {")
        for entry in with_id:
            lines.append(INDENT * 2 + f"read {entry.ref} DEVICE_ID  # {entry.device.entity}: "
                         f"{entry.device.idcode}")
        lines.append(INDENT + "}")
        lines.append("}")
        tests.append(IntegrityTest(name, "identify"))
    return lines, tests


def _has_idcode(entry: ChainDevice) -> bool:
    device = entry.device
    return bool(device.idcode) and "IDCODE" in device.instructions and len(device.idcode or "") == 32

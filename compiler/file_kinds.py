"""What a file that fails to read as one kind of scanloom input looks like instead.

Engineers keep BSDL files, board files, test programs and shift files side by side, and pass
the wrong one now and then. A reader that then lists the syntax errors of the wrong language
helps no one; one line saying "this looks like a BSDL file, not a board file" does. Readers
call `misplaced_kind` only after the text failed to read, so a valid file is never refused
for what it resembles.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from .diagnostics import Diagnostic, SourceSpan

__all__ = ["BSDL", "BOARD", "PROGRAM", "SHIFT_FILE", "BINARY", "MisplacedKind", "misplaced_kind",
           "misplaced_kind_error"]

BSDL = "a BSDL file"
BOARD = "a board file"
PROGRAM = "a test program"
SHIFT_FILE = "a shift file"
BINARY = "binary data"

# Each kind's unmistakable mark: the entity header of BSDL (IEEE 1149.1 BSDL, the entity
# description), the chain list of our board schema, the board or test line of a program, the
# schema name of a shift file.
_MARKS: tuple[tuple[str, re.Pattern[str]], ...] = (
    (SHIFT_FILE, re.compile(r'\A\s*\{.*?"schema"\s*:\s*"scanloom\.shifts"', re.DOTALL)),
    (BSDL, re.compile(r"^[ \t]*entity[ \t]+\w+[ \t]+is\b", re.IGNORECASE | re.MULTILINE)),
    (BOARD, re.compile(r"^chain[ \t]*:", re.MULTILINE)),
    (PROGRAM, re.compile(r'^[ \t]*(?:board[ \t]+"|test[ \t]+\w+[ \t]+")', re.MULTILINE)),
)
_SAMPLE = 8192  # characters looked at for control characters
_SHORT = 256  # a stray control character in a short text file does not make it binary
# Control characters that no text file of ours contains (tab, line ends and form feed are text).
_CONTROL = re.compile("[\x00-\x08\x0b\x0e-\x1f\x7f-\x9f]")
_HINTS = {
    BSDL: "BSDL files are named by the chain entries of a board file",
    BOARD: "board files are read by scanloom inspect and named by a program's board line (or --board)",
    PROGRAM: "test programs are read by scanloom check, compile and fmt",
    SHIFT_FILE: "shift files are written by scanloom compile and read by scanloom verify",
    BINARY: "scanloom reads text files",
}


@dataclass(frozen=True, slots=True)
class MisplacedKind:
    kind: str
    offset: int  # where the text gives itself away

    @property
    def hint(self) -> str:
        """Where a file of this kind belongs."""
        return _HINTS[self.kind]


def misplaced_kind(text: str, expected: str) -> MisplacedKind | None:
    """The other kind `text` looks like, or None when it bears the expected kind's mark or none.

    Text with control characters in more than one in fifty of its first characters (at least
    six of them, or any NUL) is binary data whatever else it contains.
    """
    sample = text[:_SAMPLE]
    controls = [m.start() for m in _CONTROL.finditer(sample)]
    if controls and ("\x00" in sample or len(controls) * 50 > max(len(sample), _SHORT)):
        return MisplacedKind(BINARY, controls[0])
    found = {kind: mark.search(text) for kind, mark in _MARKS}
    if found.get(expected) is not None:
        return None
    for kind, _ in _MARKS:
        match = found[kind]
        if match is not None:
            return MisplacedKind(kind, match.start() + len(match.group(0)) - len(match.group(0).lstrip()))
    return None


def misplaced_kind_error(file: str, text: str, expected: str) -> Diagnostic | None:
    """The error for a file of another kind than `expected`, pointing where it shows; or None."""
    found = misplaced_kind(text, expected)
    if found is None:
        return None
    span = SourceSpan.at_offset(file, text, found.offset)
    return Diagnostic("error", f"this looks like {found.kind}, not {expected}", span,
                      hint=found.hint)

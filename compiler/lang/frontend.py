"""The front end in one call: parse, includes, board, checks, lowering.

`load_program` stops between stages when a stage found errors, raising ScanloomError with all
of that stage's diagnostics; a program or board that cannot be read at all raises
`UnreadableInput` (the command line exits 2 for it, 1 for errors in the program).
"""

from __future__ import annotations

import dataclasses
import os
from pathlib import Path

from ..diagnostics import Diagnostics, ScanloomError, read_source
from ..file_kinds import PROGRAM, misplaced_kind_error
from ..ir import Program, dump_ir
from ..models.board import Board
from .checks import check_program
from .header import read_header
from .includes import expand_includes
from .lower import lower_program
from .parser import parse_source

__all__ = ["load_program", "compile_source", "UnreadableInput", "dump_program"]


class UnreadableInput(ScanloomError):
    """The program file or its board could not be read (missing file, bad board or BSDL)."""


def load_program(path: str | Path, diagnostics: Diagnostics,
                 board_override: str | Path | None = None) -> tuple[Program, Board]:
    """The checked IR of the program at `path` and the board it runs on.

    The board is the one the program names (relative to the program), unless `board_override`
    is given. Warnings stay in `diagnostics`; errors raise.
    """
    from ..models.board_loader import load_board  # the loader pulls in the BSDL grammar

    path = Path(path)
    file = str(path)
    try:
        text = read_source(path)
    except OSError as error:
        diagnostics.error(f"cannot read program {file}: {error.strerror or error}")
        raise UnreadableInput(diagnostics.sorted(), diagnostics.sources) from None
    root = parse_source(text, file, diagnostics)
    if diagnostics.has_errors():
        misplaced = misplaced_kind_error(file, text, PROGRAM)
        if misplaced is not None:
            raise UnreadableInput([misplaced], {file: text})
    diagnostics.raise_if_errors()
    assert root is not None
    files = expand_includes(root, path, diagnostics)
    header = read_header(root.items, diagnostics)
    if board_override is not None:
        board_file = Path(board_override)
    elif header.board_path is not None:
        board_file = path.parent / header.board_path
    else:
        diagnostics.error("the program names no board", root.span,
                          hint='add a header line such as board "my-board.yaml", or pass --board')
        board_file = None
    diagnostics.raise_if_errors()
    assert board_file is not None
    board_diagnostics = Diagnostics()
    try:
        board = load_board(board_file, board_diagnostics)
    except ScanloomError as error:
        if header.board_path is not None and board_override is None and not board_file.exists():
            diagnostics.error(f"cannot read the board file {header.board_path}", header.board_span,
                              hint=f"looked for {board_file} (relative to the program)")
            raise UnreadableInput(diagnostics.sorted(), diagnostics.sources) from None
        raise UnreadableInput(error.diagnostics, error.sources) from None
    plan = check_program(files, header, board, diagnostics)
    diagnostics.raise_if_errors()
    program = lower_program(plan, board, str(path.resolve()), str(Path(board.path).resolve()),
                            root.span)
    return program, board


def compile_source(text: str, file: str, board: Board, diagnostics: Diagnostics) -> Program:
    """The IR of program text on an already loaded board (its `board` line is not read).

    Includes are resolved relative to `file`. Errors raise ScanloomError, warnings stay.
    """
    root = parse_source(text, file, diagnostics)
    diagnostics.raise_if_errors()
    assert root is not None
    files = expand_includes(root, Path(file), diagnostics)
    header = read_header(root.items, diagnostics)
    diagnostics.raise_if_errors()
    plan = check_program(files, header, board, diagnostics)
    diagnostics.raise_if_errors()
    return lower_program(plan, board, file, board.path, root.span)


def dump_program(program: Program, base: str | Path) -> str:
    """The deterministic JSON dump, with the program's and board's paths relative to `base`."""
    base = os.path.abspath(base)

    def relative(path: str) -> str:
        return Path(os.path.relpath(os.path.abspath(path), base)).as_posix()

    shown = dataclasses.replace(program, source=relative(program.source),
                                board_path=relative(program.board_path))
    return dump_ir(shown)

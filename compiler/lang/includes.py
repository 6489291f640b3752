"""`include "file.loom"`: shared groups and tests from other files, spliced in where named.

Paths are relative to the including file. A file reached twice through different includes is
read once; a file that includes itself, directly or through others, is an error that names
the cycle. Included files hold groups, tests and further includes; the board, the clock and
the program-wide settings belong to the main program only.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from ..diagnostics import Diagnostics
from ..file_kinds import PROGRAM, misplaced_kind
from . import ast
from .parser import parse_file

__all__ = ["ProgramFiles", "expand_includes", "INCLUDABLE"]

INCLUDABLE = (ast.GroupDecl, ast.Test, ast.IncludeDecl)

Parse = Callable[[Path, Diagnostics, str], "ast.Program | None"]


@dataclass(frozen=True)
class ProgramFiles:
    """The main program and everything it includes, as one ordered list of top-level items."""

    root: ast.Program
    items: tuple[ast.TopItem, ...]
    files: tuple[str, ...]


def expand_includes(root: ast.Program, root_path: str | Path, diagnostics: Diagnostics,
                    parse: Parse | None = None) -> ProgramFiles:
    """Splice included files into `root`; problems are reported, never raised."""
    reader: Parse = parse or (lambda path, diags, name: parse_file(path, diags, name))
    items: list[ast.TopItem] = []
    files: list[str] = [root.file]
    done: set[Path] = set()

    def walk(program: ast.Program, path: Path, stack: list[tuple[Path, str]], is_root: bool) -> None:
        done.add(path)
        for item in program.items:
            if not isinstance(item, ast.IncludeDecl):
                if not is_root and not isinstance(item, INCLUDABLE):
                    keyword = _keyword(item)
                    diagnostics.error(f"'{keyword}' belongs in the main program, not in an "
                                      f"included file", item.span,
                                      hint="included files hold groups and tests")
                    continue
                items.append(item)
                continue
            target = (path.parent / item.path).resolve()
            shown = os.path.normpath(os.path.join(os.path.dirname(program.file), item.path))
            chain = [p for p, _ in stack] + [path]
            if target in chain:
                names = [name for _, name in stack] + [program.file, shown]
                start = chain.index(target)
                diagnostics.error("include cycle: " + " -> ".join(names[start:]), item.span)
                continue
            if target in done:
                continue
            if not target.is_file():
                diagnostics.error(f"cannot read included file {item.path}", item.span,
                                  hint=f"looked for {shown} (paths are relative to the including file)")
                continue
            parsed = Diagnostics(sources=diagnostics.sources)
            included = reader(target, parsed, shown)
            misplaced = None
            if parsed.has_errors() and shown in parsed.sources:
                misplaced = misplaced_kind(parsed.sources[shown], PROGRAM)
            if misplaced is not None:
                diagnostics.error(f"included file {item.path} looks like {misplaced.kind}, not a test "
                                  "program", item.span, hint=misplaced.hint)
            else:
                diagnostics.extend(parsed.items)
            if included is None:
                done.add(target)
                continue
            files.append(included.file)
            walk(included, target, stack + [(path, program.file)], False)

    walk(root, Path(root_path).resolve(), [], True)
    return ProgramFiles(root, tuple(items), tuple(files))


def _keyword(item: ast.TopItem) -> str:
    return {
        ast.BoardDecl: "board", ast.TckDecl: "tck", ast.DefaultModeDecl: "default mode",
        ast.FinishDecl: "finish in", ast.FightLimitDecl: "fight limit",
    }.get(type(item), type(item).__name__)

"""The program header: board, TCK, default instruction, end state and fight limit.

Each setting may be given once, in the main program; `read_header` reports repeats and bad
units and returns the settings with their defaults filled in.
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from typing import Iterable

from ..diagnostics import Diagnostics, SourceSpan
from . import ast
from .values import frequency_in_hz, time_in_seconds

__all__ = ["Header", "read_header", "DEFAULT_FIGHT_LIMIT_S", "END_STATES"]

DEFAULT_FIGHT_LIMIT_S = 1e-3
MAX_FIGHT_LIMIT_S = 3600  # longer means no limit at all; also keeps the value a finite float
END_STATES = {"reset": "TEST_LOGIC_RESET", "idle": "RUN_TEST_IDLE"}


@dataclass(frozen=True, slots=True)
class Header:
    """The program-wide settings, from the main program's header."""

    board_path: str | None
    board_span: SourceSpan | None
    tck_hz: Fraction | None
    default_instruction: str
    default_span: SourceSpan | None
    end_state: str
    fight_limit_s: float
    spans: dict[str, SourceSpan]  # header statement ("board", "tck", ...) -> where written


def read_header(items: Iterable[ast.TopItem], diagnostics: Diagnostics) -> Header:
    """The settings of the main program; each may be given once."""
    seen: dict[type, ast.TopItem] = {}
    board_path = board_span = None
    tck: Fraction | None = None
    default, default_span = "BYPASS", None
    end_state = "TEST_LOGIC_RESET"
    fight = DEFAULT_FIGHT_LIMIT_S
    spans: dict[str, SourceSpan] = {}
    for item in items:
        if isinstance(item, (ast.GroupDecl, ast.Test, ast.IncludeDecl)):
            continue
        if type(item) in seen:
            diagnostics.error(f"the program sets {_setting(item)} twice", item.span,
                              hint=f"it is first set at {seen[type(item)].span}")
            continue
        seen[type(item)] = item
        if item.span is not None:
            spans[_setting(item)] = item.span
        if isinstance(item, ast.BoardDecl):
            board_path, board_span = item.path, item.span
        elif isinstance(item, ast.TckDecl):
            tck = frequency_in_hz(item.frequency, diagnostics)
        elif isinstance(item, ast.DefaultModeDecl):
            default, default_span = item.instruction.upper(), item.instruction_span
        elif isinstance(item, ast.FinishDecl):
            end_state = END_STATES[item.state]
        elif isinstance(item, ast.FightLimitDecl):
            duration = time_in_seconds(item.duration, diagnostics)
            if duration is not None:
                if duration[1] <= 0:
                    diagnostics.error("the fight limit must be above zero", item.duration.span)
                elif duration[1] > MAX_FIGHT_LIMIT_S:
                    diagnostics.error("the fight limit must be at most an hour", item.duration.span,
                                      hint='to accept a provoked short, write allow short_fight "reason"')
                else:
                    fight = float(duration[1])
    return Header(board_path, board_span, tck, default, default_span, end_state, fight, spans)


def _setting(item: ast.TopItem) -> str:
    return {ast.BoardDecl: "board", ast.TckDecl: "tck", ast.DefaultModeDecl: "default mode",
            ast.FinishDecl: "finish", ast.FightLimitDecl: "fight limit"}[type(item)]

"""What the grammars of scanloom share around lark: strict mode, and syntax errors in words.

A syntax error says what may come next in the reader's own words, never lark's terminal names:
each reader names its terminals, and literal keywords are shown quoted in its quote style.
"""

from __future__ import annotations

import importlib.util
from typing import Iterable, Mapping

from lark import Lark
from lark.lexer import PatternStr

__all__ = ["strict_mode_available", "expected_words"]


def strict_mode_available() -> bool:
    """lark's strict mode (a grammar conflict fails loudly) needs the interegular package."""
    return importlib.util.find_spec("interegular") is not None


def expected_words(parser: Lark, names: Iterable[str], terminal_words: Mapping[str, str],
                   quote: str) -> list[str]:
    """The terminals `names` in words, each once: quoted keywords first, then kinds, sorted."""
    words: set[str] = set()
    for name in names:
        if name in terminal_words:
            words.add(terminal_words[name])
            continue
        try:
            pattern = parser.get_terminal(name).pattern
        except KeyError:
            words.add(name.lower())
            continue
        words.add(f"{quote}{pattern.value}{quote}" if isinstance(pattern, PatternStr) else name.lower())
    return sorted(words, key=lambda word: (not word.startswith(quote), word))

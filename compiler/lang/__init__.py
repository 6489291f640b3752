"""The test-language front end: parse `.loom` programs, check them, build the IR."""

from .fmt import format_program, format_text
from .frontend import UnreadableInput, compile_source, dump_program, load_program
from .parser import parse_file, parse_source, parse_text

__all__ = [
    "load_program", "compile_source", "dump_program", "UnreadableInput",
    "parse_text", "parse_source", "parse_file", "format_text", "format_program",
]

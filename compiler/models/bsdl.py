"""The BSDL reader: a BSDL file (IEEE Std 1149.1, Annex B) in, a checked DeviceModel out.

    from scanloom.models.bsdl import read_bsdl, parse_bsdl
    device = read_bsdl("bsdl/tidepool_io16.bsd", diagnostics)

Three layers: the outer VHDL-like syntax (bsdl_syntax, grammar/bsdl.lark), our own parsing of
the attribute strings (bsdl_attributes, bsdl_boundary), and the model with its consistency
checks (bsdl_builder, bsdl_checks). Errors go into `diagnostics` with `file:line:col` and are
raised as ScanloomError once the whole file has been looked at; warnings and notes (stray
text, attributes we do not use, unknown vendor cells) stay in `diagnostics`.
"""

from __future__ import annotations

from pathlib import Path

from ..diagnostics import Diagnostics, ScanloomError, read_source
from .bsdl_ast import SourceText
from .bsdl_builder import build_device
from .bsdl_syntax import parse_syntax
from .device import DeviceModel

__all__ = ["read_bsdl", "parse_bsdl"]


def read_bsdl(path: str | Path, diagnostics: Diagnostics) -> DeviceModel:
    """Read a BSDL file (UTF-8, or Latin-1 when the bytes are not UTF-8)."""
    try:
        text = read_source(path)
    except OSError as error:
        reason = error.strerror or str(error)
        diagnostics.error(f"cannot read BSDL file {path}: {reason}",
                          expected="a readable BSDL file", code="bsdl-file")
        raise ScanloomError(diagnostics.sorted(), diagnostics.sources) from None
    return parse_bsdl(text, str(path), diagnostics)


def parse_bsdl(text: str, filename: str, diagnostics: Diagnostics) -> DeviceModel:
    """Read BSDL from `text`; `filename` is what diagnostics name as the file."""
    diagnostics.add_source(filename, text)
    source = SourceText(filename, text)
    tree = parse_syntax(source, diagnostics)
    device = build_device(tree, source, diagnostics) if tree is not None else None
    diagnostics.raise_if_errors()
    if device is None:  # every path that gives no model has reported an error already
        diagnostics.error("this file does not describe a device", source.span(0, 1),
                          code="bsdl-file")
        raise ScanloomError(diagnostics.sorted(), diagnostics.sources)
    return device

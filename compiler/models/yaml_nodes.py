"""YAML with positions: plain Python data plus a span for every node, keyed by its path.

`yaml.safe_load` forgets where things were; board-file errors must name line and column, so we
compose the node tree with the safe loader and convert it ourselves, noting each node's start.
Duplicate mapping keys (which YAML would silently overwrite) are reported.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import yaml

from ..diagnostics import Diagnostics, SourceSpan

__all__ = ["PositionedYaml", "load_positioned_yaml"]


@dataclass
class PositionedYaml:
    data: Any
    spans: dict[str, SourceSpan] = field(default_factory=dict)  # "a/b/0" -> span
    key_spans: dict[str, SourceSpan] = field(default_factory=dict)  # span of the key itself

    def span(self, *path: str | int) -> SourceSpan | None:
        key = "/".join(str(p) for p in path)
        while True:
            if key in self.spans:
                return self.spans[key]
            if not key:
                return None
            key = key.rpartition("/")[0]

    def key_span(self, *path: str | int) -> SourceSpan | None:
        key = "/".join(str(p) for p in path)
        return self.key_spans.get(key) or self.span(*path)


def _span(file: str, node: yaml.Node) -> SourceSpan:
    start, end = node.start_mark, node.end_mark
    end_col = end.column + 1 if end.line == start.line else start.column + 2
    return SourceSpan(file, start.line + 1, start.column + 1, start.line + 1, max(end_col, start.column + 2))


_STR_TAG = "tag:yaml.org,2002:str"


def _scalar(node: yaml.ScalarNode, loader: yaml.SafeLoader) -> Any:
    if node.tag == _STR_TAG:
        return node.value
    return loader.construct_object(node, deep=True)


def load_positioned_yaml(text: str, file: str, diagnostics: Diagnostics) -> PositionedYaml | None:
    """Parse YAML text; None (with a diagnostic) when it is not well-formed YAML."""
    try:
        root = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        span = SourceSpan(file, mark.line + 1, mark.column + 1) if mark else SourceSpan(file, 1, 1)
        problem = getattr(exc, "problem", None) or str(exc)
        diagnostics.error(f"the board file is not valid YAML: {problem}", span,
                          expected="a YAML mapping with keys such as board, chain and nets")
        return None
    result = PositionedYaml(None)
    loader = yaml.SafeLoader("")
    if root is None:
        result.data = None
        return result

    def convert(node: yaml.Node, path: str) -> Any:
        result.spans[path] = _span(file, node)
        if isinstance(node, yaml.MappingNode):
            out: dict[Any, Any] = {}
            for key_node, value_node in node.value:
                key = convert_key(key_node)
                child = f"{path}/{key}" if path else str(key)
                if key in out:
                    diagnostics.error(f"'{key}' appears twice in the same mapping", _span(file, key_node),
                                      hint="YAML keeps only the last one; merge the two entries")
                result.key_spans[child] = _span(file, key_node)
                out[key] = convert(value_node, child)
            return out
        if isinstance(node, yaml.SequenceNode):
            return [convert(item, f"{path}/{i}" if path else str(i)) for i, item in enumerate(node.value)]
        return _scalar(node, loader)  # type: ignore[arg-type]

    def convert_key(node: yaml.Node) -> Any:
        if isinstance(node, yaml.ScalarNode):
            value = _scalar(node, loader)
            return value if isinstance(value, str) else str(value)
        return str(node.value)

    result.data = convert(root, "")
    return result

"""YAML with positions: plain Python data plus a span for every node, keyed by its path.

`yaml.safe_load` forgets where things were; board-file errors must name line and column, so we
compose the node tree with the safe loader and convert it ourselves, keeping each node so its
span can be made when someone asks (boards have a hundred thousand nodes, errors are few).
Duplicate mapping keys (which YAML would silently overwrite) are reported.
"""

from __future__ import annotations

import re
from collections.abc import Iterator, Mapping
from typing import Any

import yaml

from ..diagnostics import Diagnostics, SourceSpan

__all__ = ["PositionedYaml", "NodeSpans", "load_positioned_yaml"]


def _span(file: str, node: yaml.Node) -> SourceSpan:
    start, end = node.start_mark, node.end_mark
    end_col = end.column + 1 if end.line == start.line else start.column + 2
    return SourceSpan(file, start.line + 1, start.column + 1, start.line + 1, max(end_col, start.column + 2))


class NodeSpans(Mapping[str, SourceSpan]):
    """Path ("nets/DATA0/1") -> span, made from the YAML node on first access.

    Pickled as the file's text alone (a board cache keeps boards on disk): the node tree is
    composed again from it the first time a span is asked for, which is when an error or a
    finding names a place in the board file.
    """

    def __init__(self, file: str, nodes: dict[str, yaml.Node] | None, text: str = ""):
        self.file = file
        self._nodes = nodes
        self._text = text

    def __reduce__(self) -> tuple[Any, tuple[str, None, str]]:
        return NodeSpans, (self.file, None, self._text)

    @property
    def nodes(self) -> dict[str, yaml.Node]:
        if self._nodes is None:
            again = load_positioned_yaml(self._text, self.file, Diagnostics())
            self._nodes = again.nodes if again is not None else {}
        return self._nodes

    def __getitem__(self, key: str) -> SourceSpan:
        return _span(self.file, self.nodes[key])

    def __contains__(self, key: object) -> bool:
        return key in self.nodes

    def __iter__(self) -> Iterator[str]:
        return iter(self.nodes)

    def __len__(self) -> int:
        return len(self.nodes)


class PositionedYaml:
    def __init__(self, data: Any, file: str, text: str = ""):
        self.data = data
        self.file = file
        self.nodes: dict[str, yaml.Node] = {}
        self.key_nodes: dict[str, yaml.Node] = {}
        self.spans = NodeSpans(file, self.nodes, text)

    def span(self, *path: str | int) -> SourceSpan | None:
        key = "/".join(str(p) for p in path)
        while True:
            if key in self.nodes:
                return _span(self.file, self.nodes[key])
            if not key:
                return None
            key = key.rpartition("/")[0]

    def key_span(self, *path: str | int) -> SourceSpan | None:
        key = "/".join(str(p) for p in path)
        node = self.key_nodes.get(key)
        return _span(self.file, node) if node is not None else self.span(*path)


_STR_TAG = "tag:yaml.org,2002:str"
# A plain scalar can only be a number, date, null, merge key or value indicator when it starts
# with one of these characters (YAML 1.1 implicit resolvers, as pyyaml registers them) ...
_MAYBE_TYPED = re.compile(r"[-+.0-9~=<]")
# ... and, starting with a letter, only one of these words (bools and null; the one-letter
# forms y/n too, which other YAML 1.1 readers take as bools).
_TYPED_WORDS = frozenset(
    "yes Yes YES no No NO true True TRUE false False FALSE on On ON off Off OFF null Null NULL "
    "y Y n N".split())


class _Composer(getattr(yaml, "CSafeLoader", yaml.SafeLoader)):  # type: ignore[misc]
    """libyaml's safe loader (when pyyaml has it) with a quick answer for plain names.

    Board files are mostly pin names such as U1.PA(0); the general resolver tries its regular
    expressions on every scalar, which dominates loading a large board.
    """

    def resolve(self, kind: type, value: Any, implicit: Any) -> str:
        if kind is yaml.ScalarNode and implicit[0] and value and not _MAYBE_TYPED.match(value) \
                and value not in _TYPED_WORDS:
            return _STR_TAG
        return super().resolve(kind, value, implicit)


def _scalar(node: yaml.ScalarNode, loader: yaml.SafeLoader) -> Any:
    if node.tag == _STR_TAG:
        return node.value
    return loader.construct_object(node, deep=True)


def load_positioned_yaml(text: str, file: str, diagnostics: Diagnostics) -> PositionedYaml | None:
    """Parse YAML text; None (with a diagnostic) when it is not well-formed YAML."""
    try:
        root = yaml.compose(text, Loader=_Composer)
    except yaml.reader.ReaderError as exc:  # a character YAML does not allow; no mark, an offset
        character = exc.character if isinstance(exc.character, int) else ord(exc.character)
        diagnostics.error(f"the board file is not valid YAML: character #x{character:04x} is not "
                          f"allowed ({exc.reason})", SourceSpan.at_offset(file, text, exc.position),
                          expected="a YAML mapping with keys such as board, chain and nets")
        return None
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        span = SourceSpan(file, mark.line + 1, mark.column + 1) if mark else SourceSpan(file, 1, 1)
        problem = getattr(exc, "problem", None) or str(exc)
        diagnostics.error(f"the board file is not valid YAML: {problem}", span,
                          expected="a YAML mapping with keys such as board, chain and nets")
        return None
    result = PositionedYaml(None, file, text)
    loader = yaml.SafeLoader("")
    if root is None:
        return result
    nodes = result.nodes
    key_nodes = result.key_nodes

    def convert(node: yaml.Node, path: str) -> Any:
        nodes[path] = node
        if isinstance(node, yaml.MappingNode):
            out: dict[Any, Any] = {}
            prefix = f"{path}/" if path else ""
            for key_node, value_node in node.value:
                key = convert_key(key_node)
                child = f"{prefix}{key}"
                if key in out:
                    diagnostics.error(f"'{key}' appears twice in the same mapping", _span(file, key_node),
                                      hint="YAML keeps only the last one; merge the two entries")
                key_nodes[child] = key_node
                out[key] = convert(value_node, child)
            return out
        if isinstance(node, yaml.SequenceNode):
            prefix = f"{path}/" if path else ""
            return [convert(item, f"{prefix}{i}") for i, item in enumerate(node.value)]
        if node.tag == _STR_TAG:
            return node.value
        return _scalar(node, loader)  # type: ignore[arg-type]

    def convert_key(node: yaml.Node) -> Any:
        if isinstance(node, yaml.ScalarNode):
            value = _scalar(node, loader)
            return value if isinstance(value, str) else str(value)
        return str(node.value)

    result.data = convert(root, "")
    return result

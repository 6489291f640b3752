"""Layers depend one way: models -> lang -> ir -> backend -> writers; the replay stays
independent of the scheduler and the cycle layout. Scanned from the source's import lines."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "compiler"

# package (or module) -> packages it must never import
FORBIDDEN = {
    "models": {"lang", "backend", "sim", "analysis", "cli", "pipeline"},
    "ir": {"lang", "backend", "sim", "analysis", "cli", "pipeline"},
    "lang": {"backend", "sim", "analysis", "cli", "pipeline"},
    "backend": {"lang", "sim", "analysis", "cli", "pipeline"},
}
REPLAY_FORBIDDEN = {"backend.schedule", "backend.cycles", "backend.images", "backend.captures"}


def imports_of(path: Path) -> set[str]:
    """Modules imported by a file, as dotted names inside the package (relative imports resolved)."""
    tree = ast.parse(path.read_text())
    here = path.relative_to(PACKAGE).with_suffix("").parts
    found: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = list(here[:len(here) - node.level])
                name = ".".join(base + ([node.module] if node.module else []))
            elif node.module and node.module.startswith("scanloom"):
                name = node.module.removeprefix("scanloom").lstrip(".")
            else:
                continue
            found.add(name)
            found.update(f"{name}.{alias.name}" if name else alias.name for alias in node.names)
        elif isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name.startswith("scanloom."):
                    found.add(alias.name.removeprefix("scanloom."))
    return found


SOURCES = sorted(PACKAGE.rglob("*.py"))


@pytest.mark.parametrize("path", SOURCES, ids=[str(p.relative_to(PACKAGE)) for p in SOURCES])
def test_layering(path: Path) -> None:
    layer = path.relative_to(PACKAGE).with_suffix("").parts[0]
    imported = imports_of(path)
    for forbidden in FORBIDDEN.get(layer, ()):
        bad = {name for name in imported if name == forbidden or name.startswith(forbidden + ".")}
        assert not bad, f"{path.name} ({layer}) imports {sorted(bad)}"


def test_replay_is_independent_of_the_scheduler_and_the_cycle_layout() -> None:
    for name in ("replay.py", "replay_device.py", "tap_controller.py"):
        imported = imports_of(PACKAGE / "sim" / name)
        assert not imported & REPLAY_FORBIDDEN, (name, sorted(imported & REPLAY_FORBIDDEN))


def test_the_scanner_sees_relative_imports() -> None:
    # The test must be able to fail: the pipeline module imports the back end.
    assert "backend.schedule" in imports_of(PACKAGE / "pipeline.py")

"""The board cache: a cached board is the board the files give, and only while they give it.

A cache may make a command faster, never different: the board from an entry must compile to
the same bytes as the board read from its files, bring back the same warnings and sources,
and an entry must be passed over as soon as any file it was made from changes, when it is
damaged, or when its folder is open to other users.
"""

from __future__ import annotations

import os
import shutil
import time
from pathlib import Path

import pytest

from scanloom.backend.cycles import lay_out_cycles
from scanloom.backend.schedule import schedule
from scanloom.backend.writers import render_listing, render_shift_file
from scanloom.diagnostics import Diagnostics, ScanloomError
from scanloom.lang.frontend import load_program
from scanloom.models import board_cache
from scanloom.models.board_loader import load_board

DEMO = Path(__file__).resolve().parents[1] / "examples" / "irrigation"


@pytest.fixture
def demo(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    """The demo board and programs in a folder of their own, cached however small, written
    at once (not in the background) so the test can look at the entry."""
    shutil.copytree(DEMO, tmp_path / "demo")
    monkeypatch.setenv("SCANLOOM_CACHE", str(tmp_path / "cache"))
    monkeypatch.setattr(board_cache, "MIN_BYTES", 0)
    monkeypatch.setattr(board_cache, "_in_background", lambda function, *args: function(*args))
    return tmp_path / "demo"


def _nets(board) -> dict[str, tuple]:  # noqa: ANN001
    return {name: (net.pins, net.tap) for name, net in board.nets.items()}


def _entries(folder: Path) -> list[Path]:
    return sorted(folder.glob("*.board"))


def _load(path: Path) -> tuple[object, Diagnostics]:
    diagnostics = Diagnostics()
    return load_board(path, diagnostics), diagnostics


def _compiled(program: Path) -> tuple[str, str]:
    diagnostics = Diagnostics()
    ir, board = load_program(program, diagnostics)
    scan = schedule(ir, board)
    cycles = lay_out_cycles(scan)
    return (render_shift_file(scan, cycles, program.parent),
            render_listing(scan, cycles, program.parent))


def test_a_cached_board_compiles_to_the_same_bytes(demo: Path, tmp_path: Path,
                                                  monkeypatch: pytest.MonkeyPatch) -> None:
    program = demo / "valve_nets.loom"
    first = _compiled(program)  # reads the files, keeps an entry
    assert len(_entries(tmp_path / "cache")) == 1
    monkeypatch.setattr("scanloom.models.board_loader.parse_board", None)
    second = _compiled(program)  # from the entry: the files' reader is not needed
    assert second == first


def test_a_cached_board_brings_back_its_warnings_sources_and_spans(demo: Path, tmp_path: Path,
                                                                   monkeypatch: pytest.MonkeyPatch) -> None:
    board_file = demo / "irrigation.yaml"
    fresh, fresh_diagnostics = _load(board_file)
    assert fresh_diagnostics.items  # the demo's BSDL files have notes and warnings
    cached, cached_diagnostics = _load(board_file)
    assert cached is not fresh
    assert cached_diagnostics.items == fresh_diagnostics.items
    assert cached_diagnostics.sources == fresh_diagnostics.sources
    assert cached.span_of("nets", "DATA1") == fresh.span_of("nets", "DATA1")
    assert [e.ref for e in cached.chain] == [e.ref for e in fresh.chain]
    assert _nets(cached) == _nets(fresh)
    # It really came from the entry: with the files' reader broken, it still loads.
    monkeypatch.setattr("scanloom.models.board_loader.parse_board", None)
    again, _ = _load(board_file)
    assert _nets(again) == _nets(fresh)


@pytest.mark.parametrize("changed", ["irrigation.yaml", "bsdl/rc4_link.bsd"])
def test_changing_any_file_read_passes_the_entry_over(demo: Path, changed: str,
                                                      monkeypatch: pytest.MonkeyPatch) -> None:
    board_file = demo / "irrigation.yaml"
    _load(board_file)
    path = demo / changed
    path.write_text(path.read_text() + "\n-- one more line\n" if path.suffix == ".bsd"
                    else path.read_text() + "\n# one more line\n")
    calls = []
    real = board_cache.BoardCache.load

    def counting(self, *args):  # noqa: ANN001, ANN202
        found = real(self, *args)
        calls.append(found)
        return found

    monkeypatch.setattr(board_cache.BoardCache, "load", counting)
    _load(board_file)
    assert calls == [None]


def test_a_board_with_errors_is_not_kept(demo: Path, tmp_path: Path) -> None:
    board_file = demo / "irrigation.yaml"
    board_file.write_text(board_file.read_text().replace("rc4_link.bsd", "rc4_missing.bsd", 1))
    with pytest.raises(ScanloomError):
        _load(board_file)
    assert _entries(tmp_path / "cache") == []


def test_small_boards_are_not_kept(demo: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(board_cache, "MIN_BYTES", 256 * 1024)
    _load(demo / "irrigation.yaml")
    assert _entries(tmp_path / "cache") == []


def test_a_damaged_entry_is_passed_over(demo: Path, tmp_path: Path) -> None:
    board_file = demo / "irrigation.yaml"
    fresh, _ = _load(board_file)
    (entry,) = _entries(tmp_path / "cache")
    entry.write_bytes(entry.read_bytes()[:200])
    again, diagnostics = _load(board_file)
    assert _nets(again) == _nets(fresh) and diagnostics.items


def test_a_folder_others_may_write_to_is_not_read(demo: Path, tmp_path: Path,
                                                 monkeypatch: pytest.MonkeyPatch) -> None:
    board_file = demo / "irrigation.yaml"
    _load(board_file)
    folder = tmp_path / "cache"
    assert folder.stat().st_mode & 0o777 == 0o700  # made private
    folder.chmod(0o777)
    monkeypatch.setattr("scanloom.models.board_loader.parse_board", _counted := _Counter())
    with pytest.raises(TypeError):
        _load(board_file)  # the entry was not used: the (replaced) reader was called
    assert _counted.calls == 1


class _Counter:
    def __init__(self) -> None:
        self.calls = 0

    def __call__(self, *args: object) -> None:
        self.calls += 1
        raise TypeError("reader called")


def test_off_turns_the_cache_off(demo: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("SCANLOOM_CACHE", "off")
    assert board_cache.BoardCache.from_environment() is None
    _load(demo / "irrigation.yaml")
    assert not (tmp_path / "cache").exists()


def test_only_the_most_recently_used_entries_stay(demo: Path, tmp_path: Path,
                                                  monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(board_cache, "KEEP", 2)
    boards = []
    for copy in range(3):
        folder = tmp_path / f"copy{copy}"
        shutil.copytree(demo, folder)
        boards.append(folder / "irrigation.yaml")
        _load(boards[-1])
        time.sleep(0.01)
    assert len(_entries(tmp_path / "cache")) == 2


def test_the_entry_is_written_in_the_background(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    shutil.copytree(DEMO, tmp_path / "demo")
    monkeypatch.setenv("SCANLOOM_CACHE", str(tmp_path / "cache"))
    monkeypatch.setattr(board_cache, "MIN_BYTES", 0)
    started = os.getpid()
    _load(tmp_path / "demo" / "irrigation.yaml")
    assert os.getpid() == started
    deadline = time.monotonic() + 20
    while not _entries(tmp_path / "cache") and time.monotonic() < deadline:
        time.sleep(0.05)
    assert len(_entries(tmp_path / "cache")) == 1

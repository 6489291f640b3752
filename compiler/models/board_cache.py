"""A per-user cache of loaded boards, so a large board's YAML and BSDL files are read once.

Every command starts by loading its board: tens of thousands of nets and a few dozen BSDL files
take about a second on a large board, unpickling the loaded board a sixth of that. An entry is
kept for a board whose files total at least MIN_BYTES and is used only while every file the
load read (the board file and each BSDL file) has the same content, byte for byte (SHA-256),
and the same scanloom code (the model modules' sizes and times) reads it; a board that loaded
with errors is never kept, its warnings are kept and reported again.

The cache lives in SCANLOOM_CACHE when that names a folder, otherwise in
$XDG_CACHE_HOME/scanloom (or ~/.cache/scanloom); SCANLOOM_CACHE=off turns it off. Entries are
pickles: the folder is made private to its user, and one that other users could write to,
or that another user owns, is not read. At most KEEP entries stay, the most recently used.
Writing an entry happens in a background process, so the first load costs no more than before.
"""

from __future__ import annotations

import hashlib
import os
import pickle
import stat
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..diagnostics import Diagnostic, Diagnostics
from .board import Board

__all__ = ["BoardCache", "CACHE_VARIABLE", "MIN_BYTES", "KEEP"]

CACHE_VARIABLE = "SCANLOOM_CACHE"
MIN_BYTES = 256 * 1024  # smaller boards load in a few hundredths of a second: not worth a file
KEEP = 16
_FORMAT = b"scanloom board cache 1\n"
_CODE = Path(__file__).resolve().parent  # the modules whose code decides what a board is


@dataclass(frozen=True)
class _Header:
    """What an entry was made from: every file read, with its digest, and the load's sources."""

    files: tuple[tuple[str, str], ...]  # (path as the board names it, SHA-256 of its bytes)


class BoardCache:
    """One cache folder; `load` and `store` never raise for the cache's own problems."""

    def __init__(self, folder: Path):
        self.folder = folder

    @classmethod
    def from_environment(cls) -> "BoardCache | None":
        setting = os.environ.get(CACHE_VARIABLE, "").strip()
        if setting.lower() == "off":
            return None
        if setting:
            return cls(Path(setting).expanduser())
        base = os.environ.get("XDG_CACHE_HOME", "").strip() or os.path.join(
            os.path.expanduser("~"), ".cache")
        return cls(Path(base) / "scanloom")

    # ---- reading --------------------------------------------------------------------------
    def load(self, path: str, diagnostics: Diagnostics) -> Board | None:
        """The board kept for `path` if its files are unchanged, its warnings and sources
        reported into `diagnostics`; None when there is no usable entry."""
        entry = self._entry(path)
        if entry is None or not self._private():
            return None
        try:
            with open(entry, "rb") as stream:
                if stream.read(len(_FORMAT)) != _FORMAT:
                    return None
                header = pickle.load(stream)
                if not isinstance(header, _Header) or not _unchanged(header.files):
                    return None
                board, warnings, sources = pickle.load(stream)
        except Exception:  # noqa: BLE001 - a damaged or foreign entry is just not used
            return None
        if not isinstance(board, Board):
            return None
        for file, text in sources.items():
            diagnostics.add_source(file, text)
        diagnostics.extend(warnings)
        try:
            os.utime(entry)  # most recently used: kept longest
        except OSError:
            pass
        return board

    # ---- writing --------------------------------------------------------------------------
    def store(self, path: str, board: Board, warnings: list[Diagnostic],
              sources: dict[str, str]) -> None:
        """Keep `board` (loaded from `path` without errors) in the background."""
        files = _files_read(path, board)
        if files is None or sum(size for _, size in files) < MIN_BYTES:
            return
        entry = self._entry(path)
        if entry is None:
            return
        _in_background(self._write, entry, [name for name, _ in files], board, warnings, sources)

    def _write(self, entry: Path, names: list[str], board: Board, warnings: list[Diagnostic],
               sources: dict[str, str]) -> None:
        digests = [_digest(name) for name in names]
        if None in digests:
            return
        self.folder.mkdir(mode=0o700, parents=True, exist_ok=True)
        if not self._private():
            return
        header = _Header(tuple(zip(names, digests)))  # type: ignore[arg-type]
        temporary = entry.with_name(f".{entry.name}.{os.getpid()}.tmp")
        descriptor = os.open(temporary, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
        with os.fdopen(descriptor, "wb") as stream:
            stream.write(_FORMAT)
            pickle.dump(header, stream, protocol=pickle.HIGHEST_PROTOCOL)
            pickle.dump((board, list(warnings), dict(sources)), stream,
                        protocol=pickle.HIGHEST_PROTOCOL)
        os.replace(temporary, entry)
        self._prune()

    def _prune(self) -> None:
        entries = sorted(self.folder.glob("*.board"), key=lambda p: p.stat().st_mtime,
                         reverse=True)
        for old in entries[KEEP:]:
            old.unlink(missing_ok=True)

    # ---- where ------------------------------------------------------------------------------
    def _entry(self, path: str) -> Path | None:
        """The entry's file: named by the board path as given (it is written into the board),
        the folder it is relative to, the Python and the scanloom code."""
        try:
            where = path if os.path.isabs(path) else os.path.join(os.getcwd(), "\0", path)
            key = hashlib.sha256("\n".join(
                (where, sys.version, _code_fingerprint())).encode("utf-8", "surrogateescape"))
        except OSError:
            return None
        return self.folder / f"{key.hexdigest()[:40]}.board"

    def _private(self) -> bool:
        """The folder is ours alone (like ssh's rule for its own files)."""
        try:
            info = self.folder.stat()
        except OSError:
            return False
        if hasattr(os, "getuid") and info.st_uid != os.getuid():
            return False
        return not info.st_mode & (stat.S_IWGRP | stat.S_IWOTH)


def _files_read(path: str, board: Board) -> list[tuple[str, int]] | None:
    names = [path] + sorted({entry.bsdl_path for entry in board.chain})
    try:
        return [(name, os.stat(name).st_size) for name in names]
    except OSError:
        return None


def _digest(name: str) -> str | None:
    try:
        with open(name, "rb") as stream:
            return hashlib.file_digest(stream, "sha256").hexdigest()
    except OSError:
        return None


def _unchanged(files: tuple[tuple[str, str], ...]) -> bool:
    return all(_digest(name) == digest for name, digest in files)


def _code_fingerprint() -> str:
    parts = []
    for module in sorted(_CODE.glob("*.py")):
        info = module.stat()
        parts.append(f"{module.name}:{info.st_size}:{info.st_mtime_ns}")
    return ";".join(parts)


def _in_background(function: Any, *args: Any) -> None:
    """Run `function(*args)` in a detached grandchild (nobody waits for it), or here when this
    process cannot fork; errors are dropped either way: the cache is only an optimisation."""
    from ..forked import forking_possible

    if not forking_possible():
        try:
            function(*args)
        except Exception:  # noqa: BLE001 - a cache that cannot be written is not an error
            pass
        return
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):
            pass
    leave = _leave
    child = os.fork()
    if child:
        os.waitpid(child, 0)  # the child leaves at once; the grandchild is nobody's to wait for
        return
    try:
        if os.fork() == 0:
            try:
                os.setsid()
                quiet = os.open(os.devnull, os.O_RDWR)
                for descriptor in (0, 1, 2):  # a reader of our output must not wait for this
                    os.dup2(quiet, descriptor)
                function(*args)
            except BaseException:  # noqa: BLE001 - nothing may escape a forked process
                pass
    finally:
        leave(0)


try:  # a forked process must leave this way even where os._exit has been replaced (tests do)
    from posix import _exit as _leave
except ImportError:  # no fork on this system either
    _leave = os._exit

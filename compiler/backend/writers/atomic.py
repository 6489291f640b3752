"""Atomic output files: write beside the target, then rename over it.

A reader (or a JTAG player polling the output folder) never sees half a file, and a failed
write leaves the previous file in place. The temporary file is created with the usual
permissions (0666 minus the umask) so the renamed file looks like any other output.
"""

from __future__ import annotations

import contextlib
import os
import secrets
from pathlib import Path
from typing import IO, Iterator

__all__ = ["atomic_output", "write_atomically"]


@contextlib.contextmanager
def atomic_output(path: Path, *, binary: bool = False) -> Iterator[IO]:
    """A file object for `path`; the file appears under its name only if the block succeeds."""
    path = Path(path)
    temporary = path.with_name(f".{path.name}.{os.getpid()}.{secrets.token_hex(4)}.tmp")
    descriptor = os.open(temporary, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
    try:
        mode = "wb" if binary else "w"
        encoding = None if binary else "utf-8"
        newline = None if binary else "\n"
        with os.fdopen(descriptor, mode, encoding=encoding, newline=newline) as handle:
            yield handle
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(temporary, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(temporary)
        raise


def write_atomically(path: Path, data: str | bytes) -> Path:
    """Write `data` (text as UTF-8 with LF line ends, or bytes) to `path` atomically."""
    with atomic_output(path, binary=isinstance(data, bytes)) as handle:
        handle.write(data)
    return Path(path)

"""The `scanloom` program's exit: the command's code, output flushed, no teardown.

`cli.run` is the console entry point (pyproject) and what `python -m scanloom.cli` runs. It
leaves with os._exit once the command is done, so the exit codes (0 ok, 1 failure, 2 bad
input or usage) must come through it unchanged and nothing printed may be lost.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from scanloom import cli

ROOT = Path(__file__).resolve().parent.parent
EXAMPLE = ROOT / "examples" / "irrigation" / "valve_nets.loom"


class _Left(Exception):
    def __init__(self, code: int):
        super().__init__(code)
        self.code = code


@pytest.fixture
def leave(monkeypatch):  # noqa: ANN001, ANN201
    def fake_exit(code: int) -> None:
        raise _Left(code)

    monkeypatch.setattr(cli.os, "_exit", fake_exit)


@pytest.mark.parametrize("args, code", [
    (["check", str(EXAMPLE)], 0),
    (["check", str(ROOT / "examples" / "no-such.loom")], 2),
    (["compile", str(EXAMPLE)], 2),  # --out missing: a usage error
    (["--version"], 0),
])
def test_run_leaves_with_the_commands_exit_code(leave, monkeypatch, capsys, args, code) -> None:  # noqa: ANN001
    monkeypatch.setattr(sys, "argv", ["scanloom", *args])
    with pytest.raises(_Left) as left:
        cli.run()
    assert left.value.code == code
    captured = capsys.readouterr()
    assert captured.out or captured.err  # every command says something


def test_a_message_given_to_sys_exit_is_printed_and_exits_1(leave, monkeypatch, capsys) -> None:  # noqa: ANN001
    def failing() -> None:
        sys.exit("scanloom: stopped")

    monkeypatch.setattr(cli, "main", failing)
    with pytest.raises(_Left) as left:
        cli.run()
    assert left.value.code == 1
    assert capsys.readouterr().err == "scanloom: stopped\n"


def test_a_reader_that_went_away_does_not_turn_the_exit_into_a_traceback(leave, monkeypatch) -> None:  # noqa: ANN001
    class Gone:
        def write(self, text: str) -> int:
            return len(text)

        def flush(self) -> None:
            raise BrokenPipeError(32, "Broken pipe")

    def done() -> None:
        sys.exit(0)

    monkeypatch.setattr(cli, "main", done)
    monkeypatch.setattr(sys, "stdout", Gone())
    with pytest.raises(_Left) as left:
        cli.run()
    assert left.value.code == 0


def test_output_into_a_closed_pipe_ends_quietly() -> None:
    # `scanloom ... | head -1`: the reader stops early; no traceback, exit code 0 or 1.
    done = subprocess.run(f"{sys.executable} -m scanloom.cli check --dump-ir {EXAMPLE} | head -c 1",
                          shell=True, capture_output=True, text=True, check=False)
    assert "Traceback" not in done.stderr


def test_the_module_as_a_program_prints_everything_before_it_exits(tmp_path: Path) -> None:
    done = subprocess.run([sys.executable, "-m", "scanloom.cli", "compile", str(EXAMPLE), "--out",
                           str(tmp_path), "--format", "json"], capture_output=True, text=True, check=False)
    assert done.returncode == 0, done.stderr
    assert done.stdout.endswith(f"  wrote {tmp_path / 'valve_nets.json'}\n")
    assert (tmp_path / "valve_nets.json").stat().st_size > 0


def test_the_collector_stays_off_to_the_end(leave, monkeypatch, capsys) -> None:  # noqa: ANN001
    # The command pauses the cycle collector; `run` leaves without switching it back on (a
    # first pass over a large compile's objects would cost a third of a second).
    import gc

    seen = []
    monkeypatch.setattr(sys, "argv", ["scanloom", "check", str(EXAMPLE)])
    monkeypatch.setattr(cli.os, "_exit", lambda code: seen.append((code, gc.isenabled())))
    was_enabled = gc.isenabled()
    try:
        cli.run()
    finally:
        if was_enabled:
            gc.enable()
    assert seen == [(0, False)]
    capsys.readouterr()

"""Work in a forked process: the same result as the call made here, or the same exception.

`scanloom.forked.run_forked` is how a compile uses the second core. Whatever happens in the
child, the caller must get what calling the function directly gives: its value, its exception
(a ScanloomError with its diagnostics intact), or, when the child dies or cannot send a
result, the call made again in this process.
"""

from __future__ import annotations

import os
import signal
import threading
from pathlib import Path

import pytest
from click.testing import CliRunner

from scanloom import forked
from scanloom.cli import main
from scanloom.diagnostics import Diagnostic, ScanloomError, SourceSpan
from scanloom.forked import forking_possible, run_forked

PARENT = os.getpid()
DEMO = Path(__file__).resolve().parents[1] / "examples" / "irrigation"
needs_fork = pytest.mark.skipif(not forking_possible(), reason="this machine cannot fork workers")


def _pid_and_sum(values: list[int]) -> tuple[int, int]:
    return os.getpid(), sum(values)


def _fails() -> None:
    raise ScanloomError([Diagnostic("error", "bad pin", SourceSpan("p.loom", 3, 7, 3, 9),
                                    expected="a port", suggestions=("PA(1)",))],
                        {"p.loom": "a\nb\ndrive U1.PX = 1\n"})


def _dies_in_a_child() -> int:
    if os.getpid() != PARENT:
        os.kill(os.getpid(), signal.SIGKILL)
    return 42


def _unpicklable_in_a_child():  # noqa: ANN202
    return (lambda: 1) if os.getpid() != PARENT else "made here"


@needs_fork
def test_the_call_runs_in_another_process_and_its_value_comes_back() -> None:
    values = list(range(100_000))
    pid, total = run_forked(_pid_and_sum, values).result()
    assert pid != os.getpid()
    assert total == sum(values)


def test_a_scanloom_error_comes_back_whole() -> None:
    with pytest.raises(ScanloomError) as raised:
        run_forked(_fails).result()
    (diagnostic,) = raised.value.diagnostics
    assert diagnostic.message == "bad pin"
    assert diagnostic.span == SourceSpan("p.loom", 3, 7, 3, 9)
    assert diagnostic.suggestions == ("PA(1)",)
    assert raised.value.sources == {"p.loom": "a\nb\ndrive U1.PX = 1\n"}


@needs_fork
def test_a_child_that_dies_costs_time_not_the_answer() -> None:
    pending = run_forked(_dies_in_a_child)
    assert pending.result() == 42
    assert "signal 9" in pending.ran_here_after


@needs_fork
def test_a_result_that_cannot_be_sent_is_made_here() -> None:
    pending = run_forked(_unpicklable_in_a_child)
    assert pending.result() == "made here"
    assert "could not send its result back" in pending.ran_here_after


def test_scanloom_jobs_1_runs_the_call_here(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("SCANLOOM_JOBS", "1")
    assert not forking_possible()
    assert run_forked(_pid_and_sum, [1, 2]).result() == (os.getpid(), 3)


def test_no_fork_while_other_threads_run(monkeypatch: pytest.MonkeyPatch) -> None:
    release = threading.Event()
    other = threading.Thread(target=release.wait)
    other.start()
    try:
        assert not forking_possible()
        assert run_forked(_pid_and_sum, [5]).result() == (os.getpid(), 5)
    finally:
        release.set()
        other.join()


def test_a_single_core_or_no_fork_runs_the_call_here(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(forked.os, "sched_getaffinity", lambda pid: {0}, raising=False)
    assert not forking_possible()
    monkeypatch.undo()
    monkeypatch.delattr(forked.os, "fork", raising=False)
    assert not forking_possible()
    assert run_forked(_pid_and_sum, [7]).result() == (os.getpid(), 7)


# ---- the compile, with and without the second core ------------------------------------------


def _compile(program: Path, out: Path, monkeypatch: pytest.MonkeyPatch, jobs: str | None):  # noqa: ANN202
    if jobs is None:
        monkeypatch.delenv("SCANLOOM_JOBS", raising=False)
    else:
        monkeypatch.setenv("SCANLOOM_JOBS", jobs)
    result = CliRunner().invoke(main, ["compile", str(program), "--out", str(out)])
    files = {p.name: p.read_bytes() for p in sorted(out.glob("*"))} if out.exists() else {}
    return result.exit_code, result.output, files


@pytest.mark.parametrize("example", sorted(DEMO.glob("*.loom")), ids=lambda p: p.name)
def test_compiling_on_two_cores_writes_the_same_files(example: Path, tmp_path: Path,
                                                      monkeypatch: pytest.MonkeyPatch) -> None:
    one = _compile(example, tmp_path / "one", monkeypatch, "1")
    two = _compile(example, tmp_path / "two", monkeypatch, None)
    assert one[0] == two[0] == 0
    assert one[1].replace("/one/", "/two/") == two[1]
    assert set(one[2]) == {f"{example.stem}{s}" for s in (".json", ".cycles.csv", ".vcd", ".txt")}
    assert one[2] == two[2]


def test_a_check_of_the_ir_refuses_the_same_way_on_two_cores(tmp_path: Path,
                                                              monkeypatch: pytest.MonkeyPatch) -> None:
    # The contention of tests/test_prehardware.py: found by the checks of the IR alone, which a
    # compile runs in a worker process beside the scheduler.
    program = tmp_path / "p.loom"
    program.write_text(f'board "{DEMO / "irrigation.yaml"}"\ntck 10 MHz\n' """
test fight "a shared enable turns on a sibling" {
    U1, U4 EXTEST
    step both {
        drive WDOG_DIS = 1
        drive U1.D(0) = 1, U4.DQ(1) = 1
    }
}
""")
    one = _compile(program, tmp_path / "one", monkeypatch, "1")
    two = _compile(program, tmp_path / "two", monkeypatch, None)
    assert one[0] == two[0] == 1
    assert "[contention]" in one[1]
    assert one[1] == two[1]
    assert one[2] == two[2] == {}


class _Disagreeing:
    ok = False

    def render(self, limit: int = 20) -> str:
        return "record 3: TDO bit 7 differs"


@pytest.mark.parametrize("jobs", ["1", None])
def test_a_replay_that_disagrees_stops_the_compile_before_any_file(
        jobs: str | None, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # The replay's verdict is reached before the files are shared out between the processes,
    # so none is written.
    monkeypatch.setattr("scanloom.pipeline.replay", lambda scan, cycles: _Disagreeing())
    code, output, files = _compile(DEMO / "valve_nets.loom", tmp_path / "out", monkeypatch, jobs)
    assert code != 0
    assert "independent replay disagrees" in output
    assert files == {}

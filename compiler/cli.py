"""The command line: a thin click layer over the pipeline stages.

Exit codes: 0 ok, 1 a check or test failed, 2 bad input or usage.
"""

from __future__ import annotations

import gc
import os
import sys

import click

from . import __version__
from .collector import collector_paused
from .diagnostics import Diagnostics, ScanloomError

EXIT_OK = 0
EXIT_FAIL = 1
EXIT_BAD_INPUT = 2

EXIT_CODES_HELP = "Exit codes: 0 ok, 1 check or test failure, 2 bad input or usage."


def report_error(error: ScanloomError, *, notes: bool = False) -> int:
    """Print a stage's errors and warnings to stderr, notes only when asked; bad input exits 2.

    A board whose fifth BSDL file is broken should show that error, not first the readers'
    notes on the four good ones.
    """
    from .diagnostics import render_all

    shown = [d for d in error.diagnostics if notes or d.severity != "note"] or list(error.diagnostics)
    click.echo(render_all(shown, error.sources), err=True)
    hidden = len(error.diagnostics) - len(shown)
    if hidden:
        click.echo(f"({hidden} note{'s' * (hidden != 1)} not shown)", err=True)
    return EXIT_BAD_INPUT


@click.group(context_settings={"help_option_names": ["-h", "--help"]}, epilog=EXIT_CODES_HELP)
@click.version_option(__version__, prog_name="scanloom")
@click.pass_context
def main(context: click.Context) -> None:
    """scanloom: compile boundary-scan (IEEE 1149.1) board tests into bit-exact scans."""
    # A command builds millions of small acyclic records (bits, cells, drives) and then exits;
    # Python's cycle collector would rescan them again and again as they accumulate, which
    # costs a quarter of a large compile. Reference counting still frees them.
    context.with_resource(collector_paused())


@main.command("inspect", epilog=EXIT_CODES_HELP)
@click.argument("board", type=click.Path(dir_okay=False))
@click.option("--json", "as_json", is_flag=True, help="Print the summary as JSON.")
@click.option("--notes", is_flag=True, help="Also list the readers' notes (attributes not used ...).")
def inspect_command(board: str, as_json: bool, notes: bool) -> None:
    """Show the chain TDI -> TDO and the nets of BOARD, grouped by how they can be tested."""
    from .analysis.board_summary import board_summary, render_board_summary, summary_json
    from .models.board_loader import load_board
    from .pipeline import validate_board_logic

    diagnostics = Diagnostics()
    try:
        model = load_board(board, diagnostics)
        validate_board_logic(model, diagnostics)
    except ScanloomError as error:
        sys.exit(report_error(error, notes=notes))
    summary = board_summary(model)
    if as_json:
        click.echo(summary_json(summary), nl=False)
    else:
        click.echo(render_board_summary(summary, model), nl=False)
    report_diagnostics(diagnostics, notes=notes)


def report_diagnostics(diagnostics: Diagnostics, *, notes: bool = False) -> None:
    """Print warnings (and notes when asked) to stderr; count the notes otherwise."""
    from .diagnostics import render_all

    shown = [d for d in diagnostics.sorted() if notes or d.severity != "note"]
    if shown:
        click.echo(render_all(shown, diagnostics.sources), err=True)
    hidden = sum(1 for d in diagnostics.items if d.severity == "note") if not notes else 0
    if hidden:
        click.echo(f"({hidden} notes; --notes lists them)", err=True)
    sys.exit(EXIT_OK)


@main.command("check", epilog=EXIT_CODES_HELP)
@click.argument("program", type=click.Path(dir_okay=False))
@click.option("--board", "board", type=click.Path(dir_okay=False),
              help="Use this board file instead of the one the program names.")
@click.option("--strict", is_flag=True, help="Treat warnings as errors.")
@click.option("--dump-ir", is_flag=True, help="Print the checked program's intermediate form as JSON.")
def check_command(program: str, board: str | None, strict: bool, dump_ir: bool) -> None:
    """Check PROGRAM (.loom) against its board: every diagnostic, sorted by position.

    Exits 0 when there are no errors (warnings allowed), 1 when the program has errors,
    2 when the program or its board cannot be read.
    """
    from pathlib import Path

    from .lang.frontend import UnreadableInput, dump_program
    from .pipeline import check_source_program

    diagnostics = Diagnostics(strict=strict)
    try:
        checked = check_source_program(program, diagnostics, board).program
    except UnreadableInput as error:
        sys.exit(report_error(error))
    except ScanloomError as error:
        click.echo(error.render(), err=True)
        sys.exit(EXIT_FAIL)
    if diagnostics.items:
        click.echo(diagnostics.render(), err=True)
    if dump_ir:
        click.echo(dump_program(checked, Path(program).parent), nl=False)
    if diagnostics.has_errors():
        sys.exit(EXIT_FAIL)
    if not dump_ir:
        steps = sum(len(test.steps) for test in checked.tests)
        warnings = len(diagnostics.warnings)
        tests = len(checked.tests)
        click.echo(f"{program}: {tests} test{'s' * (tests != 1)}, {steps} step{'s' * (steps != 1)}, no errors"
                   + (f", {warnings} warning{'s' * (warnings != 1)}" if warnings else ""))
    sys.exit(EXIT_OK)


@main.command("compile", epilog=EXIT_CODES_HELP)
@click.argument("program", type=click.Path(dir_okay=False))
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False),
              help="Folder for the output files (created if missing).")
@click.option("--format", "formats", default="json,cycles,vcd,listing", show_default=True,
              help="Comma-separated output formats: json, cycles, vcd, listing.")
@click.option("--board", "board", type=click.Path(dir_okay=False),
              help="Use this board file instead of the one the program names.")
@click.option("--strict", is_flag=True, help="Treat warnings as errors.")
def compile_command(program: str, out_dir: str, formats: str, board: str | None, strict: bool) -> None:
    """Compile PROGRAM (.loom) into bit-exact shift records, TAP cycles, VCD and a listing.

    Refuses (exit 1) when the program has errors, including the pre-hardware safety checks;
    every compile ends with an independent replay of the cycles it wrote.
    """
    from .backend.writers import check_formats
    from .lang.frontend import UnreadableInput
    from .pipeline import CompilerBug, compile_program

    names = [name.strip() for name in formats.split(",") if name.strip()]
    if not names:
        raise click.BadParameter("name at least one of json, cycles, vcd, listing", param_hint="--format")
    diagnostics = Diagnostics(strict=strict)
    try:
        wanted = check_formats(names)
        result = compile_program(program, out_dir, wanted, diagnostics, board)
    except UnreadableInput as error:
        sys.exit(report_error(error))
    except CompilerBug as error:
        click.echo(error.render(), err=True)
        sys.exit(EXIT_FAIL)
    except ScanloomError as error:
        click.echo(error.render(), err=True)
        if diagnostics.has_errors() or any(d.span for d in error.diagnostics):
            click.echo(f"{program}: not compiled: the program has errors", err=True)
            sys.exit(EXIT_FAIL)
        sys.exit(EXIT_BAD_INPUT)
    if diagnostics.items:
        click.echo(diagnostics.render(), err=True)
    cycles = result.cycles
    bound = "equals" if cycles.count == cycles.lower_bound else f"exceeds by {cycles.count - cycles.lower_bound}"
    click.echo(f"{program}: {len(result.scan.records)} records, {cycles.count} TCK "
               f"({bound} the lower bound); {result.replay.summary()}")
    for path in result.written:
        click.echo(f"  wrote {path}")
    sys.exit(EXIT_OK)


@main.command("verify", epilog=EXIT_CODES_HELP)
@click.argument("shift_file", type=click.Path(dir_okay=False))
@click.option("--limit", default=50, show_default=True, type=click.IntRange(min=0),
              help="Show at most this many mismatches (0 shows all).")
@click.option("--allow", "allowed", multiple=True, metavar="CHECK",
              help="Accept a named sequencing hazard (e.g. no_preload) in this file.")
def verify_command(shift_file: str, limit: int, allowed: tuple[str, ...]) -> None:
    """Replay SHIFT_FILE (DIR/<stem>.json) on an independent model of every device's TAP and registers.

    Also checks the records' sequencing (no device enters EXTEST or CLAMP without a preload).
    Exit 0 when every record does what it says, 1 on a mismatch (a compiler bug or a damaged
    file) or a sequencing hazard, 2 when the file cannot be read or is not a scanloom shift file.
    """
    from .analysis.prehardware import RECORD_CHECKS, check_records
    from .backend.shiftfile import read_shift_file
    from .diagnostics import nearest
    from .sim.replay import replay

    for name in allowed:
        if name not in RECORD_CHECKS:
            raise click.BadParameter(f"{name!r} is not a check of shift records; choose from "
                                     f"{', '.join(RECORD_CHECKS)}"
                                     + "".join(f" (did you mean {n}?)" for n in nearest(name, RECORD_CHECKS)),
                                     param_hint="--allow")
    try:
        program, cycles = read_shift_file(shift_file)
    except ScanloomError as error:
        sys.exit(report_error(error))
    report = replay(program, cycles)
    hazards = [f for f in check_records(program).findings if f.check not in allowed]
    for finding in hazards:
        click.echo(f"{shift_file}: error: [{finding.check}] {finding.message}", err=True)
    if not report.ok:
        for line in report.render(None if limit == 0 else limit).splitlines():
            more = " (--limit 0 shows all)" if line.startswith("... and ") else ""
            click.echo(f"{shift_file}: {line}{more}", err=True)
        sys.exit(EXIT_FAIL)
    click.echo(f"{shift_file}: {report.summary()}")
    if hazards:
        count = len(hazards)
        click.echo(f"{shift_file}: {count} sequencing hazard{'s' * (count != 1)}: not safe to run "
                   f"(--allow {hazards[0].check} accepts it where the file means it)", err=True)
        sys.exit(EXIT_FAIL)
    sys.exit(EXIT_OK)


@main.command("fmt", epilog=EXIT_CODES_HELP)
@click.argument("program", type=click.Path(dir_okay=False))
@click.option("--check", "check_only", is_flag=True,
              help="Change nothing; exit 1 when PROGRAM is not in canonical form.")
@click.option("--write", is_flag=True, help="Rewrite PROGRAM in place.")
def fmt_command(program: str, check_only: bool, write: bool) -> None:
    """Print PROGRAM (.loom) in canonical form (comments kept), or check or rewrite it."""
    from pathlib import Path

    from .backend.writers.atomic import write_atomically
    from .diagnostics import Diagnostic, read_source
    from .file_kinds import PROGRAM, misplaced_kind_error
    from .lang.fmt import format_text

    if check_only and write:
        raise click.UsageError("--check and --write exclude each other: --check changes nothing")

    try:
        text = read_source(program)
    except OSError as error:
        sys.exit(report_error(ScanloomError([Diagnostic(
            "error", f"cannot read program {program}: {error.strerror or error}")])))
    try:
        formatted = format_text(text, program)
    except ScanloomError as error:
        misplaced = misplaced_kind_error(program, text, PROGRAM)
        if misplaced is not None:
            sys.exit(report_error(ScanloomError([misplaced], {program: text})))
        click.echo(error.render(), err=True)
        sys.exit(EXIT_FAIL)
    if check_only:
        if formatted != text:
            click.echo(f"{program}: not in canonical form (run scanloom fmt --write)", err=True)
            sys.exit(EXIT_FAIL)
        return
    if write:
        if formatted != text:
            try:
                write_atomically(Path(program), formatted)
            except OSError as error:
                sys.exit(report_error(ScanloomError([Diagnostic(
                    "error", f"cannot write program {program}: {error.strerror or error}",
                    expected="a file in a folder scanloom may create files in")])))
        return
    click.echo(formatted, nl=False)


@main.command("simulate", epilog=EXIT_CODES_HELP)
@click.argument("shift_file", type=click.Path(dir_okay=False))
@click.option("--fault", "fault_specs", multiple=True, metavar="SPEC",
              help="Inject a fault (repeatable): open:REF.PORT, open:NET, short:NET_A,NET_B[:and|:or|:REF.PORT], "
                   "short:NET,REF.TDO (TDI, TMS, TCK), stuck-at-0:NET, stuck-at-1:NET.")
@click.option("--capture", "capture_path", type=click.Path(dir_okay=False),
              help="Write the TDO the board returns as CSV `cycle,tdo`, one row per TCK.")
@click.option("--limit", default=50, show_default=True, type=click.IntRange(min=0),
              help="Show at most this many failing bits (0 shows all).")
def simulate_command(shift_file: str, fault_specs: tuple[str, ...], capture_path: str | None,
                     limit: int) -> None:
    """Play SHIFT_FILE (DIR/<stem>.json) on the virtual board, cycle by cycle, and compare.

    Every device's TAP and registers are simulated; the nets are resolved from the scan
    drivers, pulls and the board's logic at every update and read at every Capture-DR.
    Prints pass or fail with each failing bit's test, step, device, cell, port and net.
    Exit 0 pass, 1 fail, 2 bad input.
    """
    from pathlib import Path

    from .analysis.board_runs import capture_table, faults_for, load_shift_run, simulate_run
    from .backend.writers.atomic import write_atomically

    try:
        run = load_shift_run(shift_file)
        faults = faults_for(run, fault_specs)
        report = simulate_run(run, faults)
    except ScanloomError as error:
        sys.exit(report_error(error))
    if capture_path:
        write_atomically(Path(capture_path), capture_table(report.result))
    text = report.render(limit)
    if faults:
        text = "with " + ", ".join(f.spec for f in faults) + ":\n" + text
    click.echo(text, nl=False)
    sys.exit(EXIT_OK if report.passed else EXIT_FAIL)


@main.command("faults", epilog=EXIT_CODES_HELP)
@click.argument("target", type=click.Path(dir_okay=False))
@click.option("--faults", "faults_file", type=click.Path(dir_okay=False),
              help="Grade the faults of this file (one spec per line, # comments) instead of the universe.")
@click.option("--universe", default="opens,shorts,stuck", show_default=True,
              help="Fault classes of the universe: opens, shorts, stuck (comma-separated).")
@click.option("--json", "as_json", is_flag=True, help="Print the grading as JSON.")
@click.option("--summary", is_flag=True, help="Print only the coverage summary.")
def faults_command(target: str, faults_file: str | None, universe: str, as_json: bool, summary: bool) -> None:
    """Grade the faults a program detects: TARGET is a program (.loom) or a shift file (.json).

    For each fault: detected, possibly detected (the faulty value is X where the fault-free
    board's is known) or not detected, with the first detecting test, step and bit, or the
    reason in words; then coverage per fault class. Exit 0 when graded, 2 on bad input.
    """
    from .analysis.board_runs import faults_for, grade_run, load_run
    from .sim.faults import UNIVERSE_CLASSES

    classes = tuple(c.strip() for c in universe.split(",") if c.strip())
    unknown = [c for c in classes if c not in UNIVERSE_CLASSES]
    if unknown or not classes:
        raise click.BadParameter(f"unknown fault class {', '.join(unknown) or '(none)'}; "
                                 f"choose from {', '.join(UNIVERSE_CLASSES)}", param_hint="--universe")
    diagnostics = Diagnostics()
    try:
        run = load_run(target, diagnostics)
        faults = faults_for(run, (), faults_file, classes)
        if sys.stderr.isatty() and len(faults) > 200:
            with click.progressbar(length=len(faults), label="grading", file=sys.stderr) as bar:
                report = grade_run(run, faults, lambda done: bar.update(1))
        else:
            report = grade_run(run, faults)
    except ScanloomError as error:
        sys.exit(report_error(error))
    if as_json:
        click.echo(report.render_json())
    else:
        click.echo(report.render(details=not summary), nl=False)
    report_diagnostics(diagnostics)
    sys.exit(EXIT_OK)


@main.command("generate", epilog=EXIT_CODES_HELP)
@click.argument("board", type=click.Path(dir_okay=False))
@click.option("--kind", type=click.Choice(["integrity", "interconnect", "all"]), default="all",
              show_default=True, help="Chain-integrity tests, interconnect tests, or both.")
@click.option("--codes", type=click.Choice(["counting", "true-complement", "walking-one"]),
              default="counting", show_default=True,
              help="The interconnect code sequence (modified counting, true/complement, walking one).")
@click.option("-o", "--output", "output", required=True, type=click.Path(dir_okay=False),
              help="The program to write (.loom); its board line is relative to it.")
def generate_command(board: str, kind: str, codes: str, output: str) -> None:
    """Write a commented test program (.loom) for BOARD: chain integrity and/or interconnect.

    Integrity: instruction capture, bypass path length, IDCODEs, boundary-register lengths and
    the instruction after Test-Logic-Reset. Interconnect: every net a scan device drives and
    another scan pin receives gets a code; a net with several drivers is tested once per
    driver; held nets stay held, never_drive nets are never driven.
    """
    from pathlib import Path

    from .analysis.generate import board_reference, generate_program
    from .backend.writers.atomic import write_atomically
    from .models.board_loader import load_board

    diagnostics = Diagnostics()
    try:
        model = load_board(board, diagnostics)
        generated = generate_program(model, board_reference(board, output), kind, codes)
    except ScanloomError as error:
        sys.exit(report_error(error))
    try:
        write_atomically(Path(output), generated.text)
    except OSError as error:
        from .diagnostics import Diagnostic

        sys.exit(report_error(ScanloomError([Diagnostic(
            "error", f"cannot write program {output}: {error.strerror or error}")])))
    click.echo(f"{output}: {generated.summary()}")
    sys.exit(EXIT_OK)


@main.command("diagnose", epilog=EXIT_CODES_HELP)
@click.argument("shift_file", type=click.Path(dir_okay=False))
@click.option("--capture", "capture_path", required=True, type=click.Path(dir_okay=False),
              help="The TDO the board returned: CSV `cycle,tdo`, one row per TCK (X: not recorded).")
@click.option("--json", "as_json", is_flag=True, help="Print the diagnosis as JSON.")
@click.option("--limit", default=50, show_default=True, type=click.IntRange(min=0),
              help="List at most this many failing bits (0 lists all).")
def diagnose_command(shift_file: str, capture_path: str, as_json: bool, limit: int) -> None:
    """Explain the failing bits of a capture: stuck, open and shorted nets, broken chains.

    Every failing bit is named by test, step, device, cell, pin and net; the explanations
    come most likely first, each with the faults that fit equally well.
    Exit 0 when the capture matches, 1 when failures were diagnosed, 2 bad input.
    """
    from .analysis.diagnose import diagnose_files

    try:
        diagnosis = diagnose_files(shift_file, capture_path)
    except ScanloomError as error:
        sys.exit(report_error(error))
    click.echo(diagnosis.to_json() if as_json else diagnosis.render(limit), nl=False)
    sys.exit(EXIT_OK if diagnosis.passed else EXIT_FAIL)


def run() -> None:
    """The `scanloom` program: a command, then a prompt exit with its code.

    A command ends with sys.exit while its results (a board, a program, millions of bits)
    are still referenced from the unwinding frames. Freeing them one object at a time would
    take a large compile most of a second; a process about to end has no use for that, so
    the program flushes its output and leaves with the exit code instead. (Tests call `main`
    through click's runner and never reach this.) For the same reason the cycle collector,
    paused while the command runs, is not switched back on at its end: its first pass would
    walk every object the command left behind, a third of a second after a large compile.
    """
    gc.disable()
    try:
        main()
    except SystemExit as done:
        code = done.code
        if code is not None and not isinstance(code, int):
            print(code, file=sys.stderr)  # what sys.exit("message") prints
            code = 1
        for stream in (sys.stdout, sys.stderr):
            try:
                stream.flush()
            except OSError:  # a reader that went away (| head): nothing more to tell it
                pass
        os._exit(code or 0)


if __name__ == "__main__":  # pragma: no cover
    run()

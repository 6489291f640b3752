"""The command line: a thin click layer over the pipeline stages.

Exit codes: 0 ok, 1 a check or test failed, 2 bad input or usage.
"""

from __future__ import annotations

import sys

import click

from . import __version__
from .diagnostics import ScanloomError

EXIT_OK = 0
EXIT_FAIL = 1
EXIT_BAD_INPUT = 2

EXIT_CODES_HELP = "Exit codes: 0 ok, 1 check or test failure, 2 bad input or usage."


def report_error(error: ScanloomError) -> int:
    """Print a stage's diagnostics to stderr; bad input always exits 2."""
    click.echo(error.render(), err=True)
    return EXIT_BAD_INPUT


@click.group(context_settings={"help_option_names": ["-h", "--help"]}, epilog=EXIT_CODES_HELP)
@click.version_option(__version__, prog_name="scanloom")
def main() -> None:
    """scanloom: compile boundary-scan (IEEE 1149.1) board tests into bit-exact scans."""


@main.command("inspect", epilog=EXIT_CODES_HELP)
@click.argument("board", type=click.Path(dir_okay=False))
@click.option("--json", "as_json", is_flag=True, help="Print the summary as JSON.")
def inspect_command(board: str, as_json: bool) -> None:
    """Show the chain TDI -> TDO and the nets of BOARD, grouped by how they can be tested."""
    import json

    from .analysis.board_summary import board_summary, render_board_summary
    from .diagnostics import Diagnostics
    from .models.board_loader import load_board

    diagnostics = Diagnostics()
    try:
        model = load_board(board, diagnostics)
    except ScanloomError as error:
        sys.exit(report_error(error))
    summary = board_summary(model)
    if as_json:
        click.echo(json.dumps(summary, indent=2))
    else:
        click.echo(render_board_summary(summary, model), nl=False)
    warnings = diagnostics.render()
    if warnings:
        click.echo(warnings, err=True)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())

"""The typer application object, shared by the command modules."""

from __future__ import annotations

import typer

app = typer.Typer(
    name="envpredict",
    help=(
        "Predict speech intelligibility from envelope modulation: STI (IEC 60268-16) "
        "from impulse responses and test-signal recordings, STOI/ESTOI and speech-based "
        "STI from clean/degraded pairs, decay figures (ISO 3382-1), and predicted "
        "listening-test scores.\n\n"
        "Exit codes: 0 done; 1 a computation failed (or, for batch and survey, some rows "
        "could not be scored); 2 bad input or options (one line 'error: WHAT — FIX'); "
        "130 interrupted."
    ),
    add_completion=False,
    no_args_is_help=True,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
)

# set by the --debug option of the main callback
STATE = {"debug": False}


def _print_version(value: bool) -> None:
    if value:
        from envpredict import __version__

        typer.echo(f"envpredict {__version__}")
        raise typer.Exit(0)


@app.callback()
def _main_options(
    debug: bool = typer.Option(False, "--debug", help="Show a full traceback on errors (for bug reports)."),
    version: bool = typer.Option(False, "--version", help="Print the version and exit.", callback=_print_version,
                                 is_eager=True),
) -> None:
    STATE["debug"] = debug

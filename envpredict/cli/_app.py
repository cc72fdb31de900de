"""The typer application object, shared by the command modules."""

from __future__ import annotations

import typer

app = typer.Typer(
    name="envpredict",
    help=(
        "Predict speech intelligibility from envelope modulation: STI (IEC 60268-16) "
        "from impulse responses and test-signal recordings, STOI/ESTOI and speech-based "
        "STI from clean/degraded pairs, decay figures (ISO 3382-1), and predicted "
        "listening-test scores."
    ),
    add_completion=False,
    no_args_is_help=True,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
)

# set by the --debug option of the main callback
STATE = {"debug": False}


@app.callback()
def _main_options(
    debug: bool = typer.Option(False, "--debug", help="Show a full traceback on errors (for bug reports)."),
) -> None:
    STATE["debug"] = debug

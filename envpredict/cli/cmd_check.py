"""``envpredict check``: run the bundled reference-case library."""

from __future__ import annotations

from typing import Optional

import typer

from ._app import app
from ._common import JSON_HELP, Progress, dumps


@app.command("check")
def check_command(
    case: Optional[str] = typer.Option(None, "--case", help="Run only the cases whose id contains this text."),
    method: Optional[str] = typer.Option(None, "--method", help="Run only the cases of this method (ir, sweep, stipa, "
                                         "fullsti, stoi, estoi, ssti, mapping)."),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
    verbose: bool = typer.Option(False, "--verbose", "-v", help="Show every compared quantity."),
) -> None:
    """Run the reference cases (analytic formulas, standard values, reference libraries) and
    print pass/fail per case with its source. Exits 1 if any case fails."""
    from envpredict.refcases import run_cases

    with Progress("running reference cases", None, quiet=as_json) as prog:
        run = run_cases(id_contains=case, method=method, progress=prog)
    d = run.to_dict()
    d["inputs"] = {"case": case, "method": method}
    if as_json:
        typer.echo(dumps(d))
    else:
        for o in run.outcomes:
            typer.echo(f"{'PASS' if o.passed else 'FAIL'}  [{o.method}] {o.id}: {o.title}")
            typer.echo(f"      source: {o.source}")
            if o.error:
                typer.echo(f"      could not run: {o.error}")
            for c in o.checks:
                if verbose or not c.passed:
                    typer.echo(f"      {c.quantity}: expected {c.expected}, got {c.got} ({c.tolerance})"
                               f"{'' if c.passed else '  <-- outside tolerance'}")
        typer.echo("")
        per = d["methods"]
        typer.echo(f"{d['passed']} of {len(run.outcomes)} reference cases passed ("
                   + ", ".join(f"{m} {v['passed']}/{v['passed'] + v['failed']}" for m, v in per.items()) + ").")
    if run.n_failed:
        raise typer.Exit(1)

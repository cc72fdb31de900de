"""Command-line interface: ``envpredict COMMAND ...``.

The CLI is a thin shell over the public API. Each command module registers itself
on the shared typer app; heavy numeric modules are imported inside the commands so
that ``envpredict --help`` stays fast.
"""

from __future__ import annotations

import sys

from ._app import STATE, app

import importlib

# command modules, in the order of the help listing; each registers its commands on
# ``app`` when imported (add one line per module)
_COMMAND_MODULES = [
    "cmd_ir",
    "cmd_direct",
    "cmd_pair",
    "cmd_batch",
    "cmd_predict",
    "cmd_demo",
    "cmd_check",
    "cmd_inspect",
]
for _name in _COMMAND_MODULES:
    importlib.import_module(f"{__name__}.{_name}")

__all__ = ["app", "main"]

#: Exit code of an interrupted command: 128 + SIGINT (2), the shell convention.
EXIT_INTERRUPTED = 130


def _fail(msg: str, code: int) -> None:
    sys.stderr.write(f"error: {msg}\n")
    raise SystemExit(code)


def main(argv: list[str] | None = None) -> None:
    """Entry point: run the app with the one-line error contract.

    Expected failures print ``error: WHAT — FIX`` on stderr and exit 2 (bad input or
    usage) or 1 (a computation that cannot give a trustworthy result). Tracebacks are
    shown only with ``--debug``.
    """
    import typer

    from envpredict.exceptions import EnvpredictError

    click_errors, no_args, exits, aborts = _click_classes()
    args = sys.argv[1:] if argv is None else list(argv)
    debug = "--debug" in args
    command = typer_main_command()
    try:
        rv = command.main(args=args, prog_name="envpredict", standalone_mode=False)
    except EnvpredictError as e:
        if debug:
            raise
        _fail(e.one_line(), e.exit_code)
    except exits as e:
        code = getattr(e, "exit_code", 0)
        if code == EXIT_INTERRUPTED:  # typer turns Ctrl-C into Exit(130)
            _fail("interrupted — run the command again (batch: add --resume to finish the rows)", EXIT_INTERRUPTED)
        raise SystemExit(code) from None
    except aborts:
        _fail("interrupted", EXIT_INTERRUPTED)
    except no_args as e:
        typer.echo(e.format_message())
        raise SystemExit(0) from None
    except click_errors as e:
        if debug:
            raise
        hint = "see 'envpredict --help'"
        ctx = getattr(e, "ctx", None)
        if ctx is not None and getattr(ctx, "command_path", None):
            hint = f"see '{ctx.command_path} --help'"
        msg = " ".join(e.format_message().split())
        _fail(f"{msg} — {hint}", 2)
    except KeyboardInterrupt:
        _fail("interrupted", EXIT_INTERRUPTED)
    except BrokenPipeError:
        raise SystemExit(1) from None
    except MemoryError:
        if debug:
            raise
        _fail("out of memory — process a shorter file or free memory", 1)
    except Exception as e:  # an unexpected failure is a bug: say so in one line
        if debug or STATE.get("debug"):
            raise
        _fail(f"internal failure ({type(e).__name__}: {e}) — rerun with --debug and report it", 1)
    if isinstance(rv, int) and rv:
        raise SystemExit(rv)


def typer_main_command():
    import typer.main

    return typer.main.get_command(app)


def _click_classes():
    """Exception classes of the click that typer uses (typer may vendor its own copy)."""
    import typer

    errors, no_args, exits, aborts = [], [], [typer.Exit], [typer.Abort]
    for modname in ("typer._click.exceptions", "click.exceptions"):
        try:
            mod = importlib.import_module(modname)
        except ImportError:
            continue
        errors.append(mod.ClickException)
        if hasattr(mod, "NoArgsIsHelpError"):
            no_args.append(mod.NoArgsIsHelpError)
        for name, bucket in (("Exit", exits), ("Abort", aborts)):
            if hasattr(mod, name):
                bucket.append(getattr(mod, name))
    return tuple(errors), tuple(no_args), tuple(exits), tuple(aborts)

"""Command-line interface: ``envpredict COMMAND ...``.

The CLI is a thin shell over the public API. Each command module registers itself
on the shared typer app; heavy numeric modules are imported inside the commands so
that ``envpredict --help`` stays fast.
"""

from __future__ import annotations

import errno
import os
import sys

from ._app import STATE, app

import importlib

# command modules, in the order of the help listing; each registers its commands on
# ``app`` when imported (add one line per module)
_COMMAND_MODULES = [
    "cmd_ir",
    "cmd_direct",
    "cmd_sinesweep",
    "cmd_pair",
    "cmd_batch",
    "cmd_survey",
    "cmd_design",
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
INTERRUPTED = "interrupted — run the command again (batch: add --resume to finish the rows)"


def _fail(msg: str, code: int) -> None:
    if sys.stderr is not None:
        try:
            sys.stderr.write(f"error: {msg}\n")
            sys.stderr.flush()
        except (OSError, ValueError):
            pass
    raise SystemExit(code)


def _stdout_failure() -> OSError | None:
    """The error of flushing standard output, if what is still buffered cannot be written."""
    out = sys.stdout
    if out is None:
        return OSError(errno.EBADF, "standard output is closed")
    try:
        out.flush()
    except OSError as e:
        return e
    except ValueError:  # closed file object
        return OSError(errno.EBADF, "standard output is closed")
    return None


def _from_echo(e: BaseException) -> bool:
    """Whether an OSError was raised while printing (click's echo) rather than by a file."""
    tb = e.__traceback__
    while tb is not None:
        code = tb.tb_frame.f_code
        if code.co_name == "echo" and os.path.basename(os.path.dirname(code.co_filename)) in ("click", "_click"):
            return True
        tb = tb.tb_next
    return False


def _fail_stdout(e: OSError) -> None:
    from ._common import stdout_error

    _fail(stdout_error(e).one_line(), 1)


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
    if sys.stdout is None:  # started with standard output closed (`>&-`): the result would be lost
        _fail("standard output is closed — run the command with its output going to a file or terminal", 2)
    for stream in (sys.stdout, sys.stderr):  # a file name that is not UTF-8 is shown escaped, not fatal
        try:
            stream.reconfigure(errors="backslashreplace")
        except (AttributeError, ValueError, OSError):
            pass
    command = typer_main_command()
    try:
        rv = command.main(args=args, prog_name="envpredict", standalone_mode=False)
    except EnvpredictError as e:
        if debug:
            raise
        _fail(e.one_line(), e.exit_code)
    except exits as e:
        code = getattr(e, "exit_code", 0)
        failure = _stdout_failure() if not code else None
        if failure is not None:
            _fail_stdout(failure)
        if code == EXIT_INTERRUPTED:  # typer turns Ctrl-C into Exit(130)
            _fail(INTERRUPTED, EXIT_INTERRUPTED)
        raise SystemExit(code) from None
    except aborts:
        _fail(INTERRUPTED, EXIT_INTERRUPTED)
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
        _fail(INTERRUPTED, EXIT_INTERRUPTED)
    except BrokenPipeError:  # the reader went away (`| head`): stop quietly, as shell tools do
        from ._common import silence_stdout

        silence_stdout()
        raise SystemExit(1) from None
    except OSError as e:
        if _from_echo(e):  # printed by a command directly (typer.echo), not through _common.echo
            _fail_stdout(e)
        if debug or STATE.get("debug"):
            raise
        _fail(f"internal failure ({type(e).__name__}: {e}) — rerun with --debug and report it", 1)
    except MemoryError:
        if debug:
            raise
        _fail("out of memory — process a shorter file or free memory", 1)
    except Exception as e:  # an unexpected failure is a bug: say so in one line
        if debug or STATE.get("debug"):
            raise
        _fail(f"internal failure ({type(e).__name__}: {e}) — rerun with --debug and report it", 1)
    failure = _stdout_failure()
    if failure is not None:
        _fail_stdout(failure)
    if rv == EXIT_INTERRUPTED:  # click returns typer's Exit(130) for Ctrl-C instead of raising it
        _fail(INTERRUPTED, EXIT_INTERRUPTED)
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

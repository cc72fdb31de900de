"""The public API table of envpredict/__init__.py: every name resolves, and the package
docstring lists every public name exactly once, grouped by job."""

from __future__ import annotations

import re

import envpredict


def test_every_public_name_resolves():
    for name, module in envpredict._API.items():
        obj = getattr(envpredict, name)
        assert obj is getattr(__import__(module, fromlist=[name]), name)


def test_package_docstring_lists_every_public_name_once():
    doc = envpredict.__doc__
    section = doc[doc.index("Public names, by job"):]
    listed = re.findall(r"\b([A-Za-z_][A-Za-z0-9_]*)\b(?=,|\n|$)", section)
    listed = [n for n in listed if n in envpredict._API or n[0].islower() and "_" in n]
    assert sorted(listed) == sorted(envpredict._API), set(listed) ^ set(envpredict._API)


def test_version_option_prints_the_installed_version(capsys):
    # reference: the installed distribution's metadata (importlib.metadata), not the module's constant
    from importlib.metadata import version

    from cli_for_tests import run_cli

    code, out, _ = run_cli(["--version"], capsys)
    assert code == 0 and out == f"envpredict {version('envpredict')}\n"


def test_help_lists_exit_codes_and_choices(capsys):
    from cli_for_tests import run_cli

    code, out, _ = run_cli(["--help"], capsys)
    assert code == 0 and "Exit codes: 0 done; 1" in " ".join(out.split()) and "130 interrupted" in out
    code, out, _ = run_cli(["ir", "--help"], capsys)
    assert "[male|female]" in out

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

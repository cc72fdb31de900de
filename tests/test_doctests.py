"""The examples in the docstrings run (librosa habit: examples are doctests).

Every module of the envpredict package is walked with pkgutil, so a new module's
examples are run without adding it to a list here.
"""

import doctest
import importlib
import pkgutil

import pytest

import envpredict


def _modules() -> list[str]:
    names = [envpredict.__name__]
    for info in pkgutil.walk_packages(envpredict.__path__, prefix=envpredict.__name__ + "."):
        names.append(info.name)
    return sorted(names)


def test_the_walk_finds_the_modules():
    # a guard on the walk itself: it must reach subpackages and the numeric core
    names = _modules()
    assert {"envpredict.correlation", "envpredict.sti", "envpredict.cli"} <= set(names)
    assert any(n.startswith("envpredict.cli.") for n in names)


@pytest.mark.parametrize("name", _modules())
def test_docstring_examples(name):
    mod = importlib.import_module(name)
    finder = doctest.DocTestFinder(exclude_empty=True)
    runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    for test in finder.find(mod, name):
        runner.run(test)
    result = runner.summarize(verbose=False)
    assert result.failed == 0, f"{result.failed} of {result.attempted} docstring examples of {name} failed"

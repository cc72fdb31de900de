"""The examples in the public docstrings run (librosa habit: examples are doctests)."""

import doctest
import importlib

import pytest

MODULES = ["envpredict.modulation", "envpredict.indirect", "envpredict.sti", "envpredict.decay", "envpredict.stats"]


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name):
    mod = importlib.import_module(name)
    failed, _ = doctest.testmod(mod, optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    assert failed == 0

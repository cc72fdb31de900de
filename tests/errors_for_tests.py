"""The error contract for property tests (a helper module, not a test file)."""

from __future__ import annotations

from hypothesis import event

from envpredict.exceptions import EnvpredictError


def result_or_refusal(fn, *args, **kwargs):
    """``fn(*args, **kwargs)``, or None after checking that the error is a documented
    one-line error (:class:`EnvpredictError` with a ``what``). Records a hypothesis
    ``event`` either way, so ``--hypothesis-show-statistics`` shows what share of the
    examples reached the computation."""
    try:
        out = fn(*args, **kwargs)
    except EnvpredictError as e:
        assert e.what and "\n" not in e.one_line()
        event(f"refused: {e.what[:50]}")
        return None
    event("reached the computation")
    return out

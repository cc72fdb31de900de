"""Measure what the direct-method, pair and mapping cases really achieve (uses envpredict).

For each case of the library, the recipe is run again with other seeds (signal, room
response, noise); the spread of envpredict's value around the expected one (the formula,
or pystoi recomputed on the new signals) is what the tolerance in ``make_cases.py``
must cover. Run by hand: ``python reference_cases/measure_tolerances.py [--seeds 8]``.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
import recipes  # noqa: E402


def reseed(spec: dict, k: int) -> dict:
    """The same recipe with every seed moved by ``k`` (k = 0: the case itself)."""
    out = dict(spec, seed=spec["seed"] + 7919 * k)
    if out.get("channel"):
        out["channel"] = {q: (v + 7919 * k if q.endswith("seed") else v) for q, v in spec["channel"].items()}
    if out.get("noise"):
        out["noise"] = dict(spec["noise"], seed=spec["noise"]["seed"] + 7919 * k)
    return out


def value(method: str, spec: dict) -> tuple[float, float | None]:
    """(envpredict's value, the reference value when it depends on the signal, else None)."""
    import envpredict

    if method == "stipa":
        x, fs = recipes.stipa(spec)
        return envpredict.stipa_from_recording(x, fs).sti.sti, None
    if method == "fullsti":
        return envpredict.full_sti_from_recordings(recipes.full_sti(spec)).sti.sti, None
    clean, degraded, fs = recipes.speechlike(spec)
    if method == "ssti":
        return envpredict.pair_indices(clean, degraded, fs, align=False).ssti_regression, None
    from pystoi import stoi

    extended = method == "estoi"
    ours = envpredict.estoi(clean, degraded, fs) if extended else envpredict.stoi(clean, degraded, fs)
    return ours, float(stoi(clean, degraded, fs, extended=extended))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=8)
    ap.add_argument("--case", default="", help="only cases whose id contains this text")
    args = ap.parse_args()
    import json

    print(f"{'case':42s} {'tol':>8s} {'this case':>10s} {'max |d| over seeds':>19s} {'mean d':>9s}")
    for path in sorted(HERE.glob("*.json")):
        case = json.loads(path.read_text(encoding="utf-8"))
        method = case.get("method", "ir")
        if method not in ("stipa", "fullsti", "ssti", "stoi", "estoi") or args.case not in case["id"]:
            continue
        (q, exp), = case["expected"].items()
        diffs = []
        for k in range(args.seeds):
            got, ref = value(method, reseed(case["input"], k))
            diffs.append(got - (exp["value"] if ref is None else ref))
        d = np.array(diffs)
        print(f"{case['id']:42s} {exp['abs_tol']:8.2g} {d[0]:+10.2e} {np.max(np.abs(d)):19.2e} {d.mean():+9.2e}",
              flush=True)


if __name__ == "__main__":
    main()

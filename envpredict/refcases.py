"""The reference-case library: cases with inputs, expected values, tolerances and sources.

Each case is one JSON file in ``reference_cases/`` (installed with the package). The
test suite and ``envpredict check`` read the same files through :func:`load_cases`
and :func:`run_case`.

Case file format
----------------
``id``          short unique name
``title``       one line for people
``source``      where the expected values come from (formula, standard, library)
``input``       how to get the impulse response:
                ``{"synth": "exponential_decay", "t60_s", "fs", "seconds", "seed",
                "amplitude", "noise_floor_db"(optional)}`` -- Gaussian noise times
                exp(-6.91 t / T60) (energy decays 60 dB in T60), optional
                stationary noise floor in dB re the initial envelope level; or
                ``{"synth": "impulse", "fs", "seconds"}`` (a unit impulse: an ideal channel);
                or ``{"file": "name.wav"}``.
``settings``    ``noise_db`` (7 values or null), ``speech_level_dba``, ``talker``,
                ``auditory``
``expected``    per quantity ``{"value": number or 7-list, "abs_tol" or "rel_tol"}``;
                quantities: ``sti``, ``rating``, ``mti``, ``t30``, ``t20``, ``edt``,
                ``c50``, ``c80``, ``d50``, ``mtf_500_1k`` (mean MTF of the 500 Hz and 1 kHz
                bands at the 14 frequencies, before noise corrections).
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ._data import reference_dir


@dataclass(frozen=True)
class Check:
    quantity: str
    expected: object
    got: object
    tolerance: str
    passed: bool


@dataclass(frozen=True)
class CaseOutcome:
    id: str
    title: str
    source: str
    passed: bool
    checks: tuple[Check, ...]
    error: str | None = None

    def to_dict(self) -> dict:
        from .results import jsonable

        return jsonable({
            "id": self.id, "title": self.title, "source": self.source, "passed": self.passed,
            "error": self.error,
            "checks": [{"quantity": c.quantity, "expected": c.expected, "got": c.got,
                        "tolerance": c.tolerance, "passed": c.passed} for c in self.checks],
        })


def case_files(folder: Path | None = None) -> list[Path]:
    folder = Path(folder) if folder else reference_dir()
    return sorted(p for p in folder.glob("*.json"))


def load_cases(folder: Path | None = None) -> list[dict]:
    """All cases, sorted by file name."""
    cases = []
    for p in case_files(folder):
        with open(p, encoding="utf-8") as fh:
            case = json.load(fh)
        case["_path"] = str(p)
        cases.append(case)
    return cases


def synthesize(spec: dict, folder: Path | None = None) -> tuple[np.ndarray, int]:
    """Build the impulse response a case describes."""
    fs = int(spec.get("fs", 48000))
    if "file" in spec:
        from .audio import load_audio

        base = Path(folder) if folder else reference_dir()
        return load_audio(base / spec["file"], name="reference impulse response")
    kind = spec["synth"]
    n = int(round(float(spec["seconds"]) * fs))
    if kind == "impulse":
        x = np.zeros(n)
        x[int(spec.get("delay_s", 0.01) * fs)] = float(spec.get("amplitude", 0.5))
        return x, fs
    if kind == "exponential_decay":
        rng = np.random.default_rng(int(spec.get("seed", 0)))
        t = np.arange(n) / fs
        T = float(spec["t60_s"])
        # amplitude envelope exp(-3 ln(10) t / T): energy falls 60 dB in T
        env = np.exp(-3.0 * np.log(10.0) * t / T)
        x = float(spec.get("amplitude", 0.2)) * rng.standard_normal(n) * env
        if spec.get("noise_floor_db") is not None:
            x += float(spec.get("amplitude", 0.2)) * 10 ** (float(spec["noise_floor_db"]) / 20) * rng.standard_normal(n)
        return x, fs
    raise ValueError(f"unknown synthesis '{kind}'")


def _compare(name: str, exp: dict, got) -> Check:
    value = exp["value"]
    if isinstance(value, str):
        return Check(name, value, got, "exact", got == value)
    # null: not checked; "nan": the figure must be refused (not computed)
    vals = value if isinstance(value, list) else [value]
    g = np.atleast_1d(np.asarray(got, dtype=float))
    checked = np.array([v is not None for v in vals])
    must_nan = np.array([isinstance(v, str) and v.lower() == "nan" for v in vals])
    e = np.array([np.nan if (v is None or isinstance(v, str)) else float(v) for v in vals])
    if "abs_tol" in exp:
        tol = float(exp["abs_tol"])
        limit = np.full(e.shape, tol)
        tol_text = f"±{tol:g}"
    else:
        tol = float(exp["rel_tol"])
        limit = tol * np.abs(e)
        tol_text = f"±{100 * tol:g} %"
    num = checked & ~must_nan
    ok_num = np.isfinite(g[num]) & (np.abs(g[num] - e[num]) <= limit[num] + 1e-12)
    ok_nan = ~np.isfinite(g[must_nan])
    ok = bool(np.all(ok_num) and np.all(ok_nan))
    exp_show = [None if v is None else ("not computed" if isinstance(v, str) else round(float(v), 4)) for v in vals]
    got_show = [None if not np.isfinite(x) else round(float(x), 4) for x in g]
    if not isinstance(value, list):
        exp_show, got_show = exp_show[0], got_show[0]
    return Check(name, exp_show, got_show, tol_text, ok)


def run_case(case: dict) -> CaseOutcome:
    """Run one case and compare every expected quantity."""
    from . import standards as std
    from .decay import reverberation_time
    from .indirect import sti_from_ir

    folder = Path(case["_path"]).parent if "_path" in case else None
    try:
        ir, fs = synthesize(case["input"], folder)
        s = case.get("settings", {})
        r = sti_from_ir(
            ir, fs, noise_db=s.get("noise_db"), speech_level_dba=s.get("speech_level_dba", 60.0),
            talker=s.get("talker", "male"), auditory=s.get("auditory", True),
        )
    except Exception as e:  # a case that cannot run is a failed case, with the reason
        return CaseOutcome(case["id"], case.get("title", ""), case.get("source", ""), False, (), str(e))
    got = {
        "sti": r.sti.sti,
        "rating": r.sti.rating,
        "mti": r.sti.mti,
        "t30": r.decay.t30, "t20": r.decay.t20, "edt": r.decay.edt,
        "c50": r.decay.c50, "c80": r.decay.c80, "d50": r.decay.d50,
        "t30_broadband": lambda: reverberation_time(ir, fs, "t30"),
        "t20_broadband": lambda: reverberation_time(ir, fs, "t20"),
        "mtf_500_1k": r.sti.mtf_measured[[std.OCTAVE_BANDS_HZ.index(500.0),
                                          std.OCTAVE_BANDS_HZ.index(1000.0)]].mean(axis=0),
    }
    checks = []
    for name, exp in case["expected"].items():
        if name not in got:
            checks.append(Check(name, exp.get("value"), None, "", False))
            continue
        value = got[name]() if callable(got[name]) else got[name]
        checks.append(_compare(name, exp, value))
    return CaseOutcome(case["id"], case.get("title", ""), case.get("source", ""),
                       all(c.passed for c in checks) and bool(checks), tuple(checks))


def run_all(folder: Path | None = None, progress=None) -> list[CaseOutcome]:
    cases = load_cases(folder)
    out = []
    for i, c in enumerate(cases):
        out.append(run_case(c))
        if progress:
            progress(i + 1, len(cases))
    return out

"""The reference-case library: cases with inputs, expected values, tolerances and sources.

Each case is one JSON file in ``reference_cases/`` (installed with the package). The
test suite and ``envpredict check`` read the same files through :func:`load_cases`
and :func:`run_case`.

Case file format
----------------
``id``          short unique name
``method``      what the case checks: ``"ir"`` (STI and decay figures from an impulse
                response), ``"sweep"`` (the same figures of the impulse response recovered
                from a recorded exponential sweep), ``"stipa"``, ``"fullsti"`` (direct method), ``"stoi"``,
                ``"estoi"``, ``"ssti"`` (speech-based STI of a pair) or ``"mapping"``
                (score-mapping fit) or ``"design"`` (design-stage prediction of a scene's
                listeners); a file without it is an ``"ir"`` case
``title``       one line for people
``source``      where the expected values come from (formula, standard, library)
``input``       what to analyse:

                * ``ir``: ``{"synth": "exponential_decay", "t60_s", "fs", "seconds", "seed",
                  "amplitude", "noise_floor_db"(optional)}`` -- Gaussian noise times
                  exp(-6.91 t / T60) (energy decays 60 dB in T60), optional
                  stationary noise floor in dB re the initial envelope level; or
                  ``{"synth": "impulse", "fs", "seconds"}`` (a unit impulse: an ideal channel);
                  or ``{"file": "name.wav"}``;
                * ``sweep``, ``stipa``, ``fullsti``, ``stoi``, ``estoi``, ``ssti``: a signal recipe
                  (``reference_cases/recipes.py``: plain numpy/scipy, not the product's
                  generator ``envpredict.signals``);
                * ``mapping``: the data rows ``{"index", "correct", "trials", "shape"}`` and
                  optionally ``"dispersion"`` (``"binomial"`` when absent, or ``"quasi"``);
                * ``design``: the scene (as in a scene file).
``settings``    ``ir``, ``sweep``: ``noise_db`` (7 values or null), ``speech_level_dba``, ``talker``,
                ``auditory``, ``audiogram`` (``ir``: text form, dB HL); ``stipa``/``fullsti``:
                ``talker``; ``design``: ``talker``, ``auditory``
``expected``    per quantity ``{"value": number or list, "abs_tol" or "rel_tol"}``;
                ``ir`` quantities: ``sti``, ``rating``, ``mti``, ``t30``, ``t20``, ``edt``,
                ``c50``, ``c80``, ``d50``, ``mtf_500_1k`` (mean MTF of the 500 Hz and 1 kHz
                bands at the 14 frequencies, before noise corrections); ``sweep``: those
                and ``distortion_db`` (7 values); ``stipa``,
                ``fullsti``: ``sti``; ``stoi``: ``stoi``; ``estoi``: ``estoi``; ``ssti``:
                ``ssti_regression``; ``mapping``: ``a``, ``b``, ``se_a``, ``se_b``; ``design``:
                ``sti`` (one value per listener, or one number for one listener).
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from . import checks
from ._data import reference_dir
from .exceptions import InputError


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
    method: str
    title: str
    source: str
    passed: bool
    checks: tuple[Check, ...]
    error: str | None = None

    def to_dict(self) -> dict:
        from .results import jsonable

        return jsonable({
            "id": self.id, "method": self.method, "title": self.title, "source": self.source, "passed": self.passed,
            "error": self.error,
            "checks": [{"quantity": c.quantity, "expected": c.expected, "got": c.got,
                        "tolerance": c.tolerance, "passed": c.passed} for c in self.checks],
        })


def case_files(folder: Path | None = None) -> list[Path]:
    """The case files (``*.json``) of ``folder`` (default: the installed library), sorted.

    Raises
    ------
    InputError
        If ``folder`` is not a folder.
    """
    folder = checks.path(folder, "case folder") if folder is not None else reference_dir()
    if not folder.is_dir():
        raise InputError(f"case folder '{folder}' is not a folder", "give the folder of the reference cases")
    return sorted(p for p in folder.glob("*.json"))


def load_cases(folder: Path | None = None) -> list[dict]:
    """All cases, sorted by file name.

    Raises
    ------
    InputError
        If ``folder`` is not a folder, or a case file is not readable JSON.
    """
    cases = []
    for p in case_files(folder):
        try:
            with open(p, encoding="utf-8") as fh:
                case = json.load(fh)
        except (OSError, UnicodeDecodeError, ValueError, RecursionError) as e:
            raise InputError(f"reference case '{p}' is not readable JSON ({type(e).__name__})",
                             "fix the file or remove it from the case folder") from None
        if not isinstance(case, dict):
            raise InputError(f"reference case '{p}' is not a JSON object", "fix the file")
        case["_path"] = str(p)
        cases.append(case)
    return cases


def synthesize(spec: dict, folder: Path | None = None) -> tuple[np.ndarray, int]:
    """Build the impulse response a case describes.

    Raises
    ------
    InputError
        For a spec that is not a dictionary or an unknown synthesis.
    """
    if not isinstance(spec, dict):
        raise InputError("the case input is not a JSON object", "fix the case file")
    fs = int(spec.get("fs", 48000))
    if "array" in spec:  # a response computed by the case's method (the sweep cases)
        return np.asarray(spec["array"], dtype=np.float64), fs
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
    raise InputError(f"unknown synthesis '{kind}'", "use 'impulse' or 'exponential_decay', or give a file")


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
    # show enough digits to see the tolerance (4 for the usual ones, 11 for 1e-9)
    positive = limit[num][limit[num] > 0]
    digits = int(max(4, np.ceil(-np.log10(np.min(positive))) + 2)) if positive.size else 4
    exp_show = [None if v is None else ("not computed" if isinstance(v, str) else round(float(v), digits))
                for v in vals]
    got_show = [None if not np.isfinite(x) else round(float(x), digits) for x in g]
    if not isinstance(value, list):
        exp_show, got_show = exp_show[0], got_show[0]
    return Check(name, exp_show, got_show, tol_text, ok)


def _ir_quantities(case: dict, folder: Path | None) -> dict:
    import envpredict
    from . import standards as std

    ir, fs = synthesize(case["input"], folder)
    s = case.get("settings", {})
    r = envpredict.sti_from_ir(
        ir, fs, noise_db=s.get("noise_db"), speech_level_dba=s.get("speech_level_dba", 60.0),
        talker=s.get("talker", "male"), auditory=s.get("auditory", True), audiogram=s.get("audiogram"),
    )
    return {
        "sti": r.sti.sti,
        "rating": r.sti.rating,
        "mti": r.sti.mti,
        "t30": r.decay.t30, "t20": r.decay.t20, "edt": r.decay.edt,
        "c50": r.decay.c50, "c80": r.decay.c80, "d50": r.decay.d50,
        "t30_broadband": lambda: envpredict.reverberation_time(ir, fs, "t30"),
        "t20_broadband": lambda: envpredict.reverberation_time(ir, fs, "t20"),
        "mtf_500_1k": r.sti.mtf_measured[[std.OCTAVE_BANDS_HZ.index(500.0),
                                          std.OCTAVE_BANDS_HZ.index(1000.0)]].mean(axis=0),
    }


def _recipes():
    """The case library's own signal synthesiser (``reference_cases/recipes.py``)."""
    import importlib.util

    from ._data import reference_dir as package_reference_dir

    try:
        from envpredict.reference_cases import recipes  # installed package data
        return recipes
    except ImportError:  # pragma: no cover - a source tree without the package mapping
        path = package_reference_dir() / "recipes.py"
        spec = importlib.util.spec_from_file_location("envpredict_reference_recipes", path)
        mod = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(mod)
        return mod


def _stipa_quantities(case: dict, folder: Path | None) -> dict:
    import envpredict

    x, fs = _recipes().stipa(case["input"])
    r = envpredict.stipa_from_recording(x, fs, talker=case.get("settings", {}).get("talker", "male"))
    return {"sti": r.sti.sti}


def _fullsti_quantities(case: dict, folder: Path | None) -> dict:
    import envpredict

    recs = _recipes().full_sti(case["input"])
    r = envpredict.full_sti_from_recordings(recs, talker=case.get("settings", {}).get("talker", "male"))
    return {"sti": r.sti.sti}


def _sweep_quantities(case: dict, folder: Path | None) -> dict:
    import envpredict

    spec = case["input"]
    played, rec, fs = _recipes().sweep(spec)
    sweep = envpredict.sweep_spec(fs, spec["f1_hz"], spec["f2_hz"], spec["seconds"], fade_in_s=spec["fade_in_s"],
                                  fade_out_s=spec["fade_out_s"], repeats=spec["repeats"], tail_s=spec["tail_s"],
                                  peak_dbfs=spec["peak_dbfs"])
    d = envpredict.deconvolve_sweep(rec, fs, played, fs, sweep)
    q = _ir_quantities({**case, "input": {"array": d.ir, "fs": d.fs}}, folder)
    q["distortion_db"] = d.distortion_db
    return q


def _stoi_quantities(case: dict, folder: Path | None) -> dict:
    import envpredict

    clean, degraded, fs = _recipes().speechlike(case["input"])
    return {"stoi": lambda: envpredict.stoi(clean, degraded, fs)}


def _estoi_quantities(case: dict, folder: Path | None) -> dict:
    import envpredict

    clean, degraded, fs = _recipes().speechlike(case["input"])
    return {"estoi": lambda: envpredict.estoi(clean, degraded, fs)}


def _ssti_quantities(case: dict, folder: Path | None) -> dict:
    import envpredict

    clean, degraded, fs = _recipes().speechlike(case["input"])
    r = envpredict.pair_indices(clean, degraded, fs, align=False)
    return {"ssti_regression": r.ssti_regression}


def _mapping_quantities(case: dict, folder: Path | None) -> dict:
    import envpredict

    rows = case["input"]
    m = envpredict.fit_mapping(rows["index"], rows["correct"], rows["trials"], shape=rows.get("shape", "logistic"),
                               dispersion=rows.get("dispersion", "binomial"))
    se = np.sqrt(np.diag(np.asarray(m.cov, dtype=float)))
    return {"a": m.a, "b": m.b, "se_a": se[0], "se_b": se[1]}


def _design_quantities(case: dict, folder: Path | None) -> dict:
    import envpredict

    s = case.get("settings", {})
    r = envpredict.predict_design(case["input"], talker=s.get("talker", "male"), auditory=s.get("auditory", True))
    sti = [li.sti.sti for li in r.listeners]
    return {"sti": sti[0] if len(sti) == 1 else sti}


#: method name -> function returning the computed quantities of a case (a value, or a
#: callable for a quantity that is computed only when a case asks for it)
METHODS = {
    "ir": _ir_quantities,
    "stipa": _stipa_quantities,
    "fullsti": _fullsti_quantities,
    "sweep": _sweep_quantities,
    "stoi": _stoi_quantities,
    "estoi": _estoi_quantities,
    "ssti": _ssti_quantities,
    "mapping": _mapping_quantities,
    "design": _design_quantities,
}


def run_case(case: dict) -> CaseOutcome:
    """Run one case and compare every expected quantity.

    Raises
    ------
    InputError
        For a case that is not a dictionary with an ``id``.
    """
    if not isinstance(case, dict) or "id" not in case:
        raise InputError("the case is not a dictionary with an id", "pass a case from load_cases")
    folder = Path(case["_path"]).parent if "_path" in case else None
    method = case.get("method", "ir")
    head = (case["id"], method, case.get("title", ""), case.get("source", ""))
    try:
        if method not in METHODS:
            raise ValueError(f"unknown method '{method}' (known: {', '.join(METHODS)})")
        got = METHODS[method](case, folder)
        checks = []
        for name, exp in case["expected"].items():
            if name not in got:
                checks.append(Check(name, exp.get("value"), None, "", False))
                continue
            value = got[name]() if callable(got[name]) else got[name]
            checks.append(_compare(name, exp, value))
    except Exception as e:  # a case that cannot run is a failed case, with the reason
        return CaseOutcome(*head, False, (), str(e))
    return CaseOutcome(*head, all(c.passed for c in checks) and bool(checks), tuple(checks))


def select_cases(id_contains: str | None = None, method: str | None = None,
                 folder: Path | None = None) -> list[dict]:
    """The cases of the library whose id contains ``id_contains`` and whose method is ``method``.

    Raises
    ------
    InputError
        An unknown method, or no case left.
    """
    from .exceptions import InputError

    cases = load_cases(folder)
    if method:
        if method not in METHODS:
            raise InputError(f"unknown method '{method}'", f"give one of {', '.join(METHODS)}")
        cases = [c for c in cases if c.get("method", "ir") == method]
    if id_contains:
        cases = [c for c in cases if id_contains in c["id"]]
    if not cases:
        raise InputError("no reference case matches " + " and ".join(
            t for t in (f"method '{method}'" if method else "", f"id containing '{id_contains}'" if id_contains
                        else "") if t), "run 'envpredict check' to list them")
    return cases


def summary(outcomes: list[CaseOutcome]) -> dict:
    """Passed and failed counts, in all and per method (methods in the order of :data:`METHODS`).

    Raises
    ------
    InputError
        If ``outcomes`` is not a list of :class:`CaseOutcome`.
    """
    if isinstance(outcomes, (str, bytes)) or not hasattr(outcomes, "__iter__") or not all(
            isinstance(o, CaseOutcome) for o in outcomes):
        raise InputError("outcomes are not a list of CaseOutcome", "pass the outcomes of run_case")
    per = {m: {"passed": 0, "failed": 0} for m in METHODS if any(o.method == m for o in outcomes)}
    for o in outcomes:
        per.setdefault(o.method, {"passed": 0, "failed": 0})["passed" if o.passed else "failed"] += 1
    n_fail = sum(not o.passed for o in outcomes)
    return {"passed": len(outcomes) - n_fail, "failed": n_fail, "methods": per}


@dataclass(frozen=True)
class ReferenceRun:
    """The outcomes of a run of the reference-case library (:func:`run_cases`)."""

    outcomes: tuple[CaseOutcome, ...]

    @property
    def n_failed(self) -> int:
        return sum(not o.passed for o in self.outcomes)

    def to_dict(self) -> dict:
        return {**summary(list(self.outcomes)), "cases": [o.to_dict() for o in self.outcomes]}


def run_cases(id_contains: str | None = None, method: str | None = None, *, folder: Path | None = None,
              progress=None) -> ReferenceRun:
    """Run the cases of :func:`select_cases` (all by default).

    Parameters
    ----------
    id_contains, method, folder : as for :func:`select_cases`.
    progress : optional ``progress(done, total)`` callback, one step per case.

    Raises
    ------
    InputError
        For a case folder or case file that cannot be read.
    """
    cases = select_cases(id_contains=id_contains, method=method, folder=folder)
    out = []
    for i, c in enumerate(cases):
        out.append(run_case(c))
        if progress:
            progress(i + 1, len(cases))
    return ReferenceRun(tuple(out))


def run_all(folder: Path | None = None, progress=None) -> list[CaseOutcome]:
    """Run every case of ``folder`` (default: the installed library), in file-name order.

    Raises
    ------
    InputError
        For a case folder or case file that cannot be read.
    """
    cases = load_cases(folder)
    out = []
    for i, c in enumerate(cases):
        out.append(run_case(c))
        if progress:
            progress(i + 1, len(cases))
    return out

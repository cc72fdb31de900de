"""Tests of envpredict.report: the files exist, are valid PNG and HTML, the page is
self-contained, and every number it shows is the number of the JSON result.

The page's numbers are checked by parsing the HTML (html.parser), reading each cell
that carries a ``data-key`` (its path in the JSON result), and comparing the shown
text with the JSON value at the shown precision; the JSON embedded in the page is
parsed and compared with the result as a whole.
"""

from __future__ import annotations

import base64
import io
import json
import re
import subprocess
import sys
from html.parser import HTMLParser

import numpy as np
import pytest

from envpredict import __version__
from envpredict.exceptions import ComputationError, InputError
from envpredict.report import KINDS, write_report

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
VOID = {"meta", "img", "br", "hr", "link", "input", "col", "area", "base", "source", "wbr"}


class PageParser(HTMLParser):
    """Collects keyed numbers, images, links, the embedded JSON; checks tag nesting."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.errors: list[str] = []
        self.keyed: list[tuple[str, str]] = []
        self.images: list[str] = []
        self.urls: list[str] = []
        self.script_json: str | None = None
        self.text: list[str] = []
        self._key: str | None = None
        self._buf: list[str] = []
        self._in_result = False
        self.doctype = False

    def handle_decl(self, decl):
        self.doctype = self.doctype or decl.lower() == "doctype html"

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        for name in ("src", "href"):
            if name in a:
                self.urls.append(a[name])
        if tag == "img":
            self.images.append(a.get("src", ""))
        if tag not in VOID:
            self.stack.append(tag)
        if "data-key" in a:
            self._key, self._buf = a["data-key"], []
        if tag == "script" and a.get("id") == "result":
            self._in_result, self._buf = True, []

    def handle_endtag(self, tag):
        if tag in VOID:
            return
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes <{self.stack[-1] if self.stack else None}>")
            return
        self.stack.pop()
        if self._key is not None and tag in ("td", "div", "span"):
            self.keyed.append((self._key, "".join(self._buf)))
            self._key = None
        if tag == "script" and self._in_result:
            self.script_json = "".join(self._buf)
            self._in_result = False

    def handle_data(self, data):
        self.text.append(data)
        if self._key is not None or self._in_result:
            self._buf.append(data)


NUMBER = re.compile(r"^[+\-−]?\d+(?:\.(\d+))?(?:e([+\-]?\d+))?")


def json_at(d, path):
    cur = d
    for part in path.split("."):
        cur = cur[part] if isinstance(cur, dict) else cur[int(part)]
    return cur


def check_shown_number(text: str, value) -> None:
    """``text`` (as shown, maybe with a unit) equals ``value`` at the shown precision."""
    text = text.strip()
    if text == "—":
        assert value is None, f"dash shown for {value!r}"
        return
    m = NUMBER.match(text)
    assert m, f"not a number: {text!r}"
    if text.endswith(" %") and value is not None:  # a fraction shown as a percentage ("44 %")
        value = 100 * float(value)
    shown = float(m.group(0).replace("−", "-"))
    decimals = len(m.group(1) or "")
    exp = int(m.group(2) or 0)
    tol = 0.5 * 10.0 ** (exp - decimals) * (1 + 1e-9) + 1e-12
    assert value is not None, f"{text!r} shown for null"
    assert abs(shown - float(value)) <= tol, f"{text!r} shown for {value!r}"


def check_report(folder, result, *, kind, min_keys=5, required_keys=(), n_png=1):
    """All the checks a report folder must pass; returns the parsed page."""
    html_path = folder / "report.html"
    assert html_path.is_file()
    pngs = sorted(folder.glob("*.png"))
    assert len(pngs) >= n_png
    for p in pngs:
        check_png(p.read_bytes())
    assert json.loads((folder / "result.json").read_text()) == result
    doc = html_path.read_text(encoding="utf-8")
    parser = PageParser()
    parser.feed(doc)
    parser.close()
    assert parser.doctype
    assert not parser.errors, parser.errors[:5]
    assert not parser.stack, f"unclosed tags: {parser.stack}"
    # self-contained: every src/href is a data URI or an in-page anchor
    for u in parser.urls:
        assert u.startswith("data:") or u.startswith("#"), u
    assert "http://" not in doc and "https://" not in doc
    # the figures are embedded, one per PNG file, and decode to the same PNG bytes
    assert len(parser.images) == len(pngs)
    embedded = sorted(base64.b64decode(s.split(",", 1)[1]) for s in parser.images)
    assert embedded == sorted(p.read_bytes() for p in pngs)
    # the embedded JSON is the result
    assert parser.script_json is not None
    assert json.loads(parser.script_json) == result
    # every shown number is the JSON number at its precision
    assert len(parser.keyed) >= min_keys
    for key, text in parser.keyed:
        check_shown_number(text, json_at(result, key))
    keys = {k for k, _ in parser.keyed}
    for k in required_keys:
        assert k in keys, f"{k} not shown"
    page_text = " ".join(" ".join(parser.text).split())
    assert f"envpredict {__version__}" in page_text
    for c in result.get("cautions") or []:
        assert " ".join(c.split()) in page_text
    return parser


def check_png(data: bytes) -> None:
    from PIL import Image

    assert data[:8] == PNG_SIGNATURE
    assert data[12:16] == b"IHDR" and data[-8:-4] == b"IEND"
    Image.open(io.BytesIO(data)).verify()
    im = Image.open(io.BytesIO(data)).convert("L")
    w, h = im.size
    assert w >= 500 and h >= 250  # readable at a glance, not a thumbnail
    lo, hi = im.getextrema()
    assert hi - lo > 100  # not blank


# ---------------------------------------------------------------------------
# results of each kind
# ---------------------------------------------------------------------------

@pytest.fixture(scope="module")
def ir_result():
    from envpredict.indirect import sti_from_ir

    fs = 48000
    rng = np.random.default_rng(3)
    t = np.arange(int(1.6 * fs)) / fs
    ir = 0.2 * rng.standard_normal(t.size) * np.exp(-6.9 * t / 0.6) + 1e-4 * rng.standard_normal(t.size)
    r = sti_from_ir(ir, fs, noise_db=[40, 38, 35, 33, 30, 28, 25])
    d = r.to_dict()
    d["inputs"] = {"impulse_response": "hall_seat_12.wav", "talker": "male"}
    return d


def stipa_result():
    # keys as written by envpredict.direct (DirectResult.to_dict), values invented
    mod = [[1.6, 8.0], [1.0, 5.0], [0.63, 3.15], [2.0, 10.0], [1.25, 6.25], [0.8, 4.0], [2.5, 12.5]]
    mtf = [[0.88, 0.46], [0.96, 0.50], [0.99, 0.73], [0.81, 0.34], [0.93, 0.41], [0.91, 0.62], [0.51, 0.17]]
    return {
        "sti": 0.6431, "rating": "C", "subjective": "good", "talker": "male",
        "bands_hz": [125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0, 8000.0], "modulation_hz": mod,
        "mtf": mtf, "mtf_measured": mtf, "mti": [0.70, 0.74, 0.86, 0.62, 0.68, 0.78, 0.41],
        "speech_db": None, "noise_db": None, "masking_db": None, "threshold_db": None,
        "auditory_corrections": False, "method": "direct (STIPA recording), IEC 60268-16:2011",
        "uncertainty": 0.006, "window_sti": [0.649, 0.635, 0.6515, 0.6263],
        "cautions": ["No calibration was given: level-dependent corrections were not applied."],
    }


@pytest.fixture(scope="module")
def pair_result():
    from envpredict.pair import pair_indices

    fs = 16000
    rng = np.random.default_rng(5)
    t = np.arange(4 * fs) / fs
    ph = 2 * np.pi * np.cumsum(120 + 20 * np.sin(2 * np.pi * 0.4 * t)) / fs
    clean = sum(np.cos(k * ph) / k for k in range(1, 25)) * (0.5 * (1 - np.cos(2 * np.pi * 4 * t))) ** 2
    clean = 0.1 * clean / np.max(np.abs(clean))
    deg = clean + 0.02 * rng.standard_normal(t.size)
    return pair_indices(clean, deg, fs).to_dict()


@pytest.fixture(scope="module")
def compare_result():
    from envpredict.stats import compare_conditions

    rng = np.random.default_rng(8)
    rows = []
    for item in range(10):
        base = rng.uniform(0.5, 0.7)
        for cond, shift in (("quiet", 0.0), ("fan on", -0.08), ("door open", 0.01)):
            value = base + shift + 0.02 * rng.standard_normal()
            rows.append({"condition": cond, "item": str(item), "stoi": f"{value:.4f}"})
    return compare_conditions(rows, by="condition", baseline="quiet", index="stoi", pair_on="item",
                              n_resamples=300).to_dict()


def sweep_result():
    # keys as written by envpredict.predict (SweepResult.to_dict); a logistic of SNR
    snr = np.arange(-20.0, 4.1, 2.0)
    pred = 100.0 / (1.0 + np.exp(-(snr + 9.0) / 2.0))
    return {
        "snr_db": snr.tolist(), "index": "stoi",
        "stoi": np.round(0.3 + 0.5 * pred / 100, 5).tolist(), "index_sd": [0.01] * snr.size,
        "predicted_percent": np.round(pred, 3).tolist(),
        "targets": [
            {"percent": 50.0, "index_value": 0.55, "snr_db": -9.0, "ci_low": -9.6, "ci_high": -8.4,
             "slope_percent_per_db": 12.5, "note": None},
            {"percent": 80.0, "index_value": 0.70, "snr_db": -6.23, "ci_low": -6.9, "ci_high": -5.6,
             "slope_percent_per_db": 8.0, "note": None},
        ],
        "srt_db": -9.0, "slope_at_srt_percent_per_db": 12.5, "notes": [],
    }


@pytest.fixture(scope="module")
def inspect_result():
    from envpredict.timescales import inspect_signal

    fs = 16000
    t = np.arange(3 * fs) / fs
    x = sum(np.cos(2 * np.pi * 150 * k * t) / k for k in range(1, 20)) * (1 + 0.8 * np.cos(2 * np.pi * 4 * t))
    r = inspect_signal(0.05 * x, fs)
    return r.to_dict()


# ---------------------------------------------------------------------------
# tests
# ---------------------------------------------------------------------------

def test_ir_report(tmp_path, ir_result):
    d = ir_result
    out = write_report("ir", d, tmp_path / "rep")
    assert out == tmp_path / "rep" / "report.html"
    names = sorted(p.name for p in (tmp_path / "rep").glob("*.png"))
    assert names == ["decay_curves.png", "mtf.png", "transmission_index.png"]
    check_report(tmp_path / "rep", d, kind="ir", min_keys=7 * 14,
                 required_keys=("sti", "mti.0", "mtf.6.13", "decay.t30.3", "decay.edt.0", "noise_db.2"))
    doc = out.read_text()
    assert "hall_seat_12.wav" in doc and ">male<" in doc


def test_ir_report_without_curves_says_so(tmp_path, ir_result):
    d = json.loads(json.dumps(ir_result))
    d["decay"]["curves_db"] = None
    write_report("ir", d, tmp_path / "rep")
    assert not (tmp_path / "rep" / "decay_curves.png").exists()
    assert "holds no decay curves" in (tmp_path / "rep" / "report.html").read_text()


@pytest.mark.parametrize("kind", ["ir", "pair", "inspect", "compare"])
def test_report_rebuilt_from_its_result_json_alone(tmp_path, kind, request):
    """A report folder's result.json is enough to draw the same page again: the same
    figures (byte-identical PNGs) and the same HTML except the creation time."""
    d = request.getfixturevalue(f"{kind}_result")
    write_report(kind, d, tmp_path / "one")
    again = json.loads((tmp_path / "one" / "result.json").read_text())
    write_report(kind, again, tmp_path / "two")
    pngs = sorted(p.name for p in (tmp_path / "one").glob("*.png"))
    assert pngs == sorted(p.name for p in (tmp_path / "two").glob("*.png"))
    for name in pngs:
        assert (tmp_path / "one" / name).read_bytes() == (tmp_path / "two" / name).read_bytes(), name
    strip = lambda t: re.sub(r"\d{4}-\d\d-\d\d \d\d:\d\d UTC", "", t)  # noqa: E731
    pages = [strip((tmp_path / f / "report.html").read_text()) for f in ("one", "two")]
    assert pages[0] == pages[1]


def test_stipa_report(tmp_path):
    d = stipa_result()
    write_report("stipa", d, tmp_path / "rep")
    check_report(tmp_path / "rep", d, kind="stipa", n_png=2,
                 required_keys=("sti", "uncertainty", "mtf.6.1", "modulation_hz.0.1"))


def test_pair_report(tmp_path, pair_result):
    write_report("pair", pair_result, tmp_path / "rep")
    assert (tmp_path / "rep" / "band_correlation.png").is_file()
    check_report(tmp_path / "rep", pair_result, kind="pair", n_png=3,
                 required_keys=("stoi", "estoi", "bands.third_octave.stoi.0"))


def test_pair_report_without_the_band_timeline(tmp_path, pair_result):
    d = json.loads(json.dumps(pair_result))
    del d["timeline"]["band_stoi"]
    write_report("pair", d, tmp_path / "rep")
    assert not (tmp_path / "rep" / "band_correlation.png").exists()
    check_report(tmp_path / "rep", d, kind="pair", n_png=2)


def test_compare_report(tmp_path, compare_result):
    write_report("compare", compare_result, tmp_path / "rep")
    n = len(compare_result["conditions"])
    check_report(tmp_path / "rep", compare_result, kind="compare",
                 required_keys=tuple(f"conditions.{i}.mean" for i in range(n)) + ("conditions.1.ci_low",))


def test_sweep_report(tmp_path):
    d = sweep_result()
    write_report("sweep", d, tmp_path / "rep")
    check_report(tmp_path / "rep", d, kind="sweep", required_keys=("srt_db", "targets.0.snr_db", "snr_db.0"))


def test_sweep_without_mapping(tmp_path):
    d = sweep_result()
    d.update(predicted_percent=None, targets=[], srt_db=None, slope_at_srt_percent_per_db=None)
    write_report("sweep", d, tmp_path / "rep")
    check_report(tmp_path / "rep", d, kind="sweep")


def test_inspect_report(tmp_path, inspect_result):
    d = inspect_result
    write_report("inspect", d, tmp_path / "rep", settings={"input": "reading.wav"})
    names = sorted(p.name for p in (tmp_path / "rep").glob("*.png"))
    assert names == ["modulation_spectra.png", "three_levels.png", "timescales_per_band.png", "waveform_f0.png"]
    check_report(tmp_path / "rep", d, kind="inspect",
                 required_keys=("duration_s", "voiced_fraction", "f0_median_hz", "modulation_peak_hz",
                                "modulation_spectra.0.9", "envelope_modulation.3"))


def test_inspect_report_without_figure_data(tmp_path, inspect_result):
    # without the figure data only the figures the summary numbers support are drawn
    d = dict(inspect_result, figure_data={})
    write_report("inspect", d, tmp_path / "rep")
    check_report(tmp_path / "rep", d, kind="inspect", n_png=2)


def test_every_kind_has_a_page():
    assert set(KINDS) == {"ir", "stipa", "fullsti", "pair", "compare", "sweep", "inspect", "survey", "design",
                          "fitmap"}


def test_unknown_kind_refused(tmp_path):
    with pytest.raises(InputError, match="unknown report kind"):
        write_report("roomscan", {}, tmp_path / "rep")
    assert not (tmp_path / "rep").exists()


def test_non_json_result_refused(tmp_path):
    with pytest.raises(InputError, match="to_dict"):
        write_report("sweep", {"snr_db": np.arange(3)}, tmp_path / "rep")
    with pytest.raises(InputError):
        write_report("sweep", {"snr_db": [float("nan")]}, tmp_path / "rep")
    assert not (tmp_path / "rep").exists()


def test_failure_leaves_nothing_half_written(tmp_path, monkeypatch):
    import envpredict.report as rep

    d = sweep_result()
    folder = tmp_path / "rep"
    write_report("sweep", d, folder)
    before = sorted(p.name for p in folder.iterdir())
    old_html = (folder / "report.html").read_bytes()

    def broken(tmp, page, doc, result):
        (tmp / "psychometric.png").write_bytes(b"partial")
        raise OSError("disk full")

    monkeypatch.setattr(rep, "_write_folder", broken)
    # an OSError while writing is the documented one-line error (exit 1), not a raw OSError
    with pytest.raises(ComputationError, match="could not be written"):
        write_report("sweep", d, folder)
    # the previous report is untouched and no temporary folder is left behind
    assert sorted(p.name for p in folder.iterdir()) == before
    assert (folder / "report.html").read_bytes() == old_html
    assert sorted(p.name for p in tmp_path.iterdir()) == ["rep"]
    with pytest.raises(ComputationError):
        write_report("sweep", d, tmp_path / "new")
    assert not (tmp_path / "new").exists()


def test_report_into_missing_parent_refused(tmp_path):
    with pytest.raises(InputError, match="does not exist"):
        write_report("sweep", sweep_result(), tmp_path / "no" / "rep")


def test_script_block_cannot_be_closed_by_the_data(tmp_path):
    d = sweep_result()
    d["notes"] = ["a note with </script><b>markup</b> in it", "a condition named <!-- hall <script>"]
    write_report("sweep", d, tmp_path / "rep")
    page = (tmp_path / "rep" / "report.html").read_text()
    parser = PageParser()
    parser.feed(page)
    assert json.loads(parser.script_json) == d
    # an HTML parser (the browser's rules: "<!--" inside a script starts an escaped state
    # where "</script>" no longer ends it) sees no "<" in the embedded data at all
    script = page[page.index('id="result">'):]
    script = script[: script.index("</script>")]
    assert "<" not in script


def test_matplotlib_is_not_imported_by_the_numeric_core_or_the_cli():
    # the report module imports matplotlib only inside its functions (CLI stays fast)
    code = ("import sys, envpredict.report, envpredict.timescales, envpredict.indirect, envpredict.cli; "
            "print('matplotlib' in sys.modules)")
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert res.returncode == 0, res.stderr
    assert res.stdout.strip() == "False"


def test_the_page_checks_catch_a_wrong_number(tmp_path, inspect_result):
    # the checks above must be able to fail: a page showing a changed number, or a
    # page whose embedded JSON differs from the result, is caught
    d = inspect_result
    folder = tmp_path / "rep"
    write_report("inspect", d, folder)
    page = folder / "report.html"
    doc = page.read_text()
    shown = f'data-key="voiced_fraction">{100 * d["voiced_fraction"]:.0f} %<'
    assert shown in doc
    page.write_text(doc.replace(shown, f'data-key="voiced_fraction">{100 * d["voiced_fraction"] + 1:.0f} %<'))
    with pytest.raises(AssertionError, match="shown for"):
        check_report(folder, d, kind="inspect")
    other = dict(d, voiced_fraction=d["voiced_fraction"] + 0.01)
    page.write_text(doc)
    with pytest.raises(AssertionError):
        check_report(folder, other, kind="inspect")
    with pytest.raises(AssertionError):
        check_shown_number("0.57", 0.576)
    check_shown_number("0.58", 0.576)
    check_shown_number("1.2e-05", 1.24e-5)
    check_shown_number("124.8 Hz", 124.83)


def test_folder_with_other_files_is_never_replaced(tmp_path):
    # the report replaces its folder as a whole: a folder holding anything but an
    # earlier report (e.g. '--report .') is refused and left as it was
    folder = tmp_path / "work"
    folder.mkdir()
    (folder / "notes.txt").write_text("keep me")
    with pytest.raises(InputError, match="not part of a report"):
        write_report("sweep", sweep_result(), folder)
    assert (folder / "notes.txt").read_text() == "keep me"
    # an earlier report folder, and an empty folder, are fine
    write_report("sweep", sweep_result(), tmp_path / "rep")
    write_report("compare", {"conditions": []}, tmp_path / "rep")
    assert not (tmp_path / "rep" / "psychometric.png").exists()
    (tmp_path / "empty").mkdir()
    write_report("sweep", sweep_result(), tmp_path / "empty")
    assert (tmp_path / "empty" / "report.html").is_file()


def test_report_leaves_the_callers_matplotlib_settings_alone(tmp_path, compare_result):
    """The report's look is applied in a context (matplotlib.rc_context), never process-wide."""
    import matplotlib

    with matplotlib.rc_context({"font.size": 7.0, "axes.grid": False, "text.color": "#123456"}):
        before = dict(matplotlib.rcParams)
        write_report("compare", compare_result, tmp_path / "rep")
        after = dict(matplotlib.rcParams)
    changed = {k for k in before if before[k] != after[k]}
    assert not changed, changed


def test_labels_are_drawn_as_typed_not_as_mathematics(tmp_path, compare_result):
    """A '$' in a condition name (or a half-formed TeX command) must neither fail nor be
    interpreted: without the setting, matplotlib's mathtext raises on '$\\frac$'."""
    d = json.loads(json.dumps(compare_result))
    d["conditions"][1]["name"] = "gain $\\frac$"
    write_report("compare", d, tmp_path / "rep")
    assert (tmp_path / "rep" / "report.html").is_file()


def test_sweep_report_shows_the_mapping_interval_and_extrapolations(tmp_path):
    d = sweep_result()
    d["mapping"] = {"formula": "p = F(a + b x)", "params": {"a": -11.0, "b": 20.0}, "index_range": [0.5, 0.6]}
    d["targets"][0].update({"map_ci_low": -10.4, "map_ci_high": -7.7})  # index 0.55: inside the range
    d["targets"][1].update({"map_ci_low": -7.5, "map_ci_high": -5.0})   # index 0.70: outside it
    write_report("sweep", d, tmp_path / "rep")
    page = check_report(tmp_path / "rep", d, kind="sweep", required_keys=("targets.0.map_ci_low",))
    doc = (tmp_path / "rep" / "report.html").read_text(encoding="utf-8")
    assert "hollow points lie outside the index range" in doc and "hatched" in doc
    assert doc.count("extrapolated (outside the fitted index range)") == 1  # the 80 % target only
    assert page is not None


def test_fitmap_report(tmp_path):
    import envpredict
    from envpredict.mapping import ScoreData, fit_report_data

    x = np.array([0.45, 0.55, 0.65, 0.75, 0.85])
    k, n = np.array([2, 40, 30, 95, 88]), np.full(5, 100)
    m = envpredict.fit_mapping(x, k, n, index="stoi")
    data = ScoreData(index_values=x, correct=k, trials=n, fitted_percent=m.percent(x))
    d = json.loads(json.dumps({**m.to_dict(), "fit_data": fit_report_data(m, data), "inputs": {}}))
    write_report("fitmap", d, tmp_path / "rep")
    check_report(tmp_path / "rep", d, kind="fitmap",
                 required_keys=("fit_data.observed_low.0", "fit_data.pearson_residual.2", "params.x50"))


# ---------------------------------------------------------------------------
# envelope-power index, phase-inversion separation, per-item paired plot
# ---------------------------------------------------------------------------

@pytest.fixture(scope="module")
def inverted_pair_result(tmp_path_factory):
    # a phase-inverted pair through a linear chain (a gain): the report shows the
    # envelope-power index and the output SNR per band of the separated speech and noise
    import soundfile as sf

    from envpredict.pair import pair_from_files
    from signals_for_tests import speech_like, speech_shaped_noise

    fs = 16000
    d = tmp_path_factory.mktemp("inv")
    x = speech_like(3.0, fs, seed=4)
    n = speech_shaped_noise(x, 5) * 0.7
    for name, sig in (("c", x), ("a", 0.8 * (x + n)), ("b", 0.8 * (x - n))):
        sf.write(d / f"{name}.wav", sig, fs, subtype="FLOAT")
    return pair_from_files(d / "c.wav", d / "a.wav", inverted_path=d / "b.wav").to_dict()


def test_pair_report_with_the_envelope_power_index_and_separation(tmp_path, inverted_pair_result):
    d = inverted_pair_result
    assert d["sepsm"] is not None and d["separation"] is not None
    write_report("pair", d, tmp_path / "rep")
    for fig in ("sepsm_snr_env.png", "separation_snr.png"):
        assert (tmp_path / "rep" / fig).is_file(), fig
    check_report(tmp_path / "rep", d, kind="pair", n_png=5,
                 required_keys=("sepsm.snr_env_db", "sepsm.percent_correct", "sepsm.band_snr_env_db.12",
                                "separation.output_snr_db.3", "separation.broadband_snr_db"))
    page = (tmp_path / "rep" / "report.html").read_text(encoding="utf-8")
    assert "material" in page and "ranking aid" in page
    # a linear chain: the separated speech and noise are the scaled inputs, so the output
    # SNR is the input SNR (-20 log10(0.7) = 3.1 dB broadband, by construction)
    assert d["separation"]["broadband_snr_db"] == pytest.approx(-20 * np.log10(0.7), abs=0.05)


def test_compare_report_shows_each_item_paired(tmp_path, compare_result):
    # the JSON carries each item's value per condition (the rows' own cells), the page
    # draws them as a paired plot
    items = {it["item"]: it["values"] for it in compare_result["items"]}
    assert len(items) == 10 and set(items["3"]) == {"quiet", "fan on", "door open"}
    rng = np.random.default_rng(8)  # the fixture's rows, drawn again
    first = {}
    for item in range(10):
        base = rng.uniform(0.5, 0.7)
        for cond, shift in (("quiet", 0.0), ("fan on", -0.08), ("door open", 0.01)):
            first[(str(item), cond)] = float(f"{base + shift + 0.02 * rng.standard_normal():.4f}")
    for (item, cond), v in first.items():
        assert items[item][cond] == pytest.approx(v, abs=1e-12)
    write_report("compare", compare_result, tmp_path / "rep")
    assert (tmp_path / "rep" / "paired_items.png").is_file()
    check_report(tmp_path / "rep", compare_result, kind="compare", n_png=2)


def test_sweep_report_of_the_envelope_power_index(tmp_path):
    from envpredict.sweep import snr_sweep
    from signals_for_tests import speech_like, speech_shaped_noise

    fs = 16000
    x = speech_like(1.5, fs, seed=2)
    d = snr_sweep(x, np.tile(speech_shaped_noise(x, 1), 2), fs, snr_db=[-12.0, -8.0, -4.0, 0.0], index="sepsm",
                  n_segments=2, snr_reference="long-term").to_dict()
    write_report("sweep", d, tmp_path / "rep")
    assert (tmp_path / "rep" / "sepsm_bands.png").is_file()
    check_report(tmp_path / "rep", d, kind="sweep", n_png=2,
                 required_keys=("sepsm.snr_env_db.1", "predicted_percent.2"))
    assert "ranking aid" in (tmp_path / "rep" / "report.html").read_text(encoding="utf-8")


def test_every_path_among_the_inputs_is_cut_to_its_file_name():
    # a report handed to a client shows file names, never folders: any input path, whatever its
    # key (the inverted file of a pair, a sentence folder, a noise recording), relative or not
    from envpredict.report import names_only

    d = {"sti": 0.5, "inputs": {"inverted": "site/corpus/s01_wiener_inverted.flac", "noise": "a/b/noise.wav",
                                "levels": "58,55,52", "nested": {"x": "deep/er/file.csv"}},
         "notes": ["compare a/b with c"]}
    out = names_only(d)
    assert out["inputs"] == {"inverted": "s01_wiener_inverted.flac", "noise": "noise.wav", "levels": "58,55,52",
                             "nested": {"x": "file.csv"}}
    assert out["notes"] == ["compare a/b with c"]  # text outside the inputs stays as written

"""What a person reads: every table header, headline label and figure axis label of every
command's text and report output is in the presentation vocabulary (envpredict.labels,
issue 18), band names are the nominal ISO 266 labels, the report explains the terms on its
page, and the results CSV carries no 17-digit numbers.

The commands run once (module fixture) on small inputs: the bundled demo material, a short
STIPA recording and a full-STI set made here from the test signals through a synthetic
room, and the README's pilot scores. The checks read the outputs themselves: terminal table
headers are cut out of the text by the dashed rule under them, report headers and headline
labels out of the HTML, figure labels from the matplotlib figures the report draws.
"""

from __future__ import annotations

import contextlib
import csv
import io
import json
import re
import shutil
import html
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
from cli_for_tests import run_cli
from signals_for_tests import noise_decay

from envpredict.labels import NOMINAL_THIRD_OCTAVE_HZ, band_label, known_label

FS = 24000  # the 8 kHz octave band needs more than 22.6 kHz

#: ISO 266:1997 preferred frequencies 125 Hz ... 8 kHz, typed from the standard's table (not
#: from the module), as a person should read them in a band column.
ISO_266_LABELS = {"50", "63", "80", "100", "125", "160", "200", "250", "315", "400", "500", "630", "800", "1k",
                  "1.25k", "1.6k", "2k", "2.5k", "3.15k", "4k", "5k", "6.3k", "8k"}
#: a report's band column may end with the row of all bands together
ISO_266_LABELS_HZ = {(f"{v} Hz" if not v.endswith("k") else f"{v[:-1]} kHz") for v in ISO_266_LABELS} | {"broadband"}

#: The README's pilot scores (section "Pilot and fitted mapping").
PILOT = ("condition,snr_db,stoi,correct,trials\npilot_a,-12,0.567,19,100\npilot_b,-9,0.621,43,100\n"
         "pilot_c,-6,0.675,61,100\npilot_d,-3,0.725,83,100\npilot_e,0,0.772,90,100\n")


def _two_listeners() -> str:
    """The pilot scores of two listeners (the README's invented scores)."""
    rows = ["listener,snr_db,stoi,correct,trials"]
    for who, scores in (("A", (8, 20, 32, 40, 46)), ("B", (11, 23, 29, 43, 44))):
        for snr, x, c in zip((-12, -9, -6, -3, 0), (0.586, 0.642, 0.697, 0.747, 0.793), scores):
            rows.append(f"{who},{snr},{x},{c},50")
    return "\n".join(rows) + "\n"


def _run(args) -> tuple[int, str]:
    buf, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(buf), contextlib.redirect_stderr(err):
        code, _, _ = run_cli(args)
    return code, buf.getvalue() if code == 0 else err.getvalue()


def _room(x: np.ndarray, seed: int) -> np.ndarray:
    from scipy.signal import fftconvolve

    y = fftconvolve(x, noise_decay(0.9, fs=FS, seconds=1.2, seed=seed))[: x.size]
    y = 0.4 * y / np.max(np.abs(y))
    return y + 0.002 * np.random.default_rng(seed).standard_normal(y.size)


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    """command name -> (text output, report folder or None); plus the batch results CSV."""
    from envpredict.signals import full_sti_signals, stipa_signal

    root = tmp_path_factory.mktemp("presentation")
    site = root / "site"
    code, _ = _run(["demo", "--copy-to", site])
    assert code == 0
    # a short STIPA recording and a full-STI set through a synthetic room
    sf.write(root / "stipa.wav", _room(stipa_signal(16.0, FS, seed=2), 1), FS, subtype="PCM_24")
    (root / "full").mkdir()
    for k, (spec, x) in enumerate(full_sti_signals(FS, seed=3)):
        sf.write(root / "full" / spec.filename, _room(x, 10 + k), FS, subtype="PCM_24")
    (root / "pilot.csv").write_text(PILOT)
    # a recording of the README's short sweep through the synthetic room (for deconvolve)
    code, _ = _run(["testsignal", "sweep", root / "sweep.wav", "--repeats", "1", "--rate", "32000", "--f2", "14000"])
    assert code == 0
    from scipy.signal import fftconvolve

    sweep, fs_sweep = sf.read(root / "sweep.wav")
    rec = fftconvolve(sweep, noise_decay(0.5, fs=fs_sweep, seconds=0.8, seed=5))[: sweep.size]
    sf.write(root / "sweep_rec.wav", 0.5 * rec / np.max(np.abs(rec)), fs_sweep, subtype="PCM_24")
    # four sentences of the demo corpus in its three conditions
    rows = (site / "corpus.csv").read_text().splitlines()
    (site / "small.csv").write_text("\n".join(rows[:13]) + "\n")
    noise = "58,55,52,49,45,40,33"
    # a two-channel response (the hall's at both ears, the right one 6 dB down and with more noise)
    ir, fs_ir = sf.read(site / "waiting_hall_ir.wav")
    right = 0.5 * ir + 1e-4 * np.random.default_rng(7).standard_normal(ir.size)
    sf.write(root / "ears_ir.wav", np.stack([ir, right], axis=1), fs_ir, subtype="FLOAT")
    (root / "listeners.csv").write_text(_two_listeners())
    audiogram = "250:20,500:25,1000:30,2000:45,4000:60,8000:70"
    cmds = {
        "ir": ["ir", site / "waiting_hall_ir.wav", "--noise", noise, "--speech-level", "68", "--require", "0.5"],
        "stipa": ["stipa", root / "stipa.wav", "--calibration-db", "110", "--talker", "female"],
        "fullsti": ["fullsti", root / "full"],
        "pair": ["pair", site / "announcement_clean.wav", site / "announcement_in_hall.wav"],
        "fitmap": ["fitmap", root / "pilot.csv", "--index", "stoi", "--out", root / "map.json"],
        "sweep": ["sweep", site / "announcement_clean.wav", site / "hall_noise.wav", "--snr=-12:0:6", "--segments",
                  "2", "--map", root / "map.json"],
        "inspect": ["inspect", site / "announcement_clean.wav"],
        "survey": ["survey", site / "survey" / "survey.csv", "--out", root / "survey_rows.csv", "--require",
                   "mean >= 0.5"],
        "design": ["design", site / "design_hall.json"],
        "batch": ["batch", site / "small.csv", "--out", root / "results.csv", "--workers", "1"],
        "compare": ["compare", root / "results.csv", "--by", "condition", "--baseline", "unprocessed", "--pair-on",
                    "sentence"],
        "compare all pairs": ["compare", root / "results.csv", "--by", "condition", "--baseline", "unprocessed",
                              "--pair-on", "sentence", "--all-pairs"],
        "ir listener": ["ir", site / "waiting_hall_ir.wav", "--noise", noise, "--audiogram", audiogram],
        "ir ears": ["ir", root / "ears_ir.wav", "--ears"],
        "pair listener": ["pair", site / "announcement_clean.wav", site / "announcement_in_hall.wav",
                          "--age", "70", "--calibration-db", "100"],
        "pair inverted": ["pair", site / "corpus" / "s01_clean.wav", site / "corpus" / "s01_wiener.wav",
                          "--inverted", site / "corpus" / "s01_wiener_inverted.flac"],
        "fitmap listener": ["fitmap", root / "listeners.csv", "--index", "stoi", "--listener", "listener"],
        "sweep sepsm": ["sweep", site / "announcement_clean.wav", site / "hall_noise.wav", "--snr=-12:0:6",
                        "--segments", "2", "--index", "sepsm", "--target", "50"],
        "sweep stimuli": ["sweep", site / "sentences", site / "hall_noise.wav", "--snr=-6:0:6", "--segments", "2",
                          "--write-stimuli", root / "stimuli", "--presentation-level=-30"],
        "demo": ["demo"],
        "testsignal full": ["testsignal", "full", root / "signals"],
        "deconvolve": ["deconvolve", root / "sweep_rec.wav", "--sweep", root / "sweep.wav", "--out", root / "ir.wav"],
    }
    reports = {"ir", "stipa", "fullsti", "pair", "fitmap", "sweep", "inspect", "survey", "design", "compare",
               "ir listener", "ir ears", "pair listener", "pair inverted", "fitmap listener", "sweep sepsm"}
    out = {}
    for name, args in cmds.items():
        folder = root / f"report_{name}" if name in reports else None
        code, text = _run(args + (["--report", folder] if folder else []))
        assert code == 0, (name, text[-2000:])
        out[name] = (text, folder)
    out["_results"] = root / "results.csv"
    yield out
    shutil.rmtree(root, ignore_errors=True)


# ---------------------------------------------------------------------------
# Reading the outputs
# ---------------------------------------------------------------------------

_RULE = re.compile(r"^-+( +-+)*$")


def terminal_tables(text: str) -> list[tuple[list[str], list[list[str]]]]:
    """(headers, rows) of every table in a command's text, cut by the dashed rule under the
    header line (the columns are where the dashes are)."""
    lines = text.splitlines()
    found = []
    for i in range(1, len(lines)):
        if not _RULE.match(lines[i]):
            continue
        spans = [m.span() for m in re.finditer(r"-+", lines[i])]

        def cut(line):
            return [line[a:b if j + 1 < len(spans) else None].strip() for j, (a, b) in enumerate(spans)]

        gaps = [(b, a) for (_, b), (a, _) in zip(spans, spans[1:])]
        rows = []
        for line in lines[i + 1:]:
            # a row fills the columns and leaves the gaps between them blank; a column note
            # (indented) or the text after the table does not
            if not line.strip() or line.startswith("  ") or any(line[b:a].strip() for b, a in gaps):
                break
            rows.append(cut(line))
        found.append((cut(lines[i - 1]), rows))
    return found


@dataclass
class ReportPage:
    """Table headers (with each table's first column), headline labels and glossary terms
    of a report page."""

    headers: list[str] = field(default_factory=list)
    columns: dict[str, list[str]] = field(default_factory=dict)  # header -> its cells, all tables
    headline: list[str] = field(default_factory=list)
    glossary: list[str] = field(default_factory=list)
    figures: dict[str, list[str]] = field(default_factory=dict)  # figure id -> its axis and colour-bar labels


def _text(fragment: str) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", fragment)).split())


def report_page(folder: Path) -> ReportPage:
    doc = (folder / "report.html").read_text(encoding="utf-8")
    page = ReportPage()
    for head, body in re.findall(r"<table><thead><tr>(.*?)</tr></thead><tbody>(.*?)</tbody>", doc, re.S):
        hs = [_text(h) for h in re.findall(r"<th>(.*?)</th>", head, re.S)]
        page.headers += hs
        for row in re.findall(r"<tr>(.*?)</tr>", body, re.S):
            for h, c in zip(hs, re.findall(r"<td[^>]*>(.*?)</td>", row, re.S)):
                page.columns.setdefault(h, []).append(_text(c))
    page.headline = [_text(t) for t in re.findall(r'<div class="label">(.*?)</div>', doc, re.S)]
    page.glossary = [_text(t) for t in re.findall(r"<dt>(.*?)</dt>", doc, re.S)]
    # each figure carries the labels its axes and colour bars draw (report.py reads them off the
    # matplotlib figure before saving it)
    page.figures = {i: json.loads(html.unescape(v))
                    for i, v in re.findall(r'<figure id="([^"]+)" data-labels="([^"]*)">', doc)}
    assert len(page.figures) == doc.count("<figure "), "a figure without its labels"
    return page


def unknown(labels) -> list[str]:
    return [lab for lab in labels if not known_label(lab)]


# ---------------------------------------------------------------------------
# The checks
# ---------------------------------------------------------------------------

TEXT_COMMANDS = ["ir", "stipa", "fullsti", "pair", "fitmap", "sweep", "inspect", "survey", "design", "batch",
                 "compare", "demo", "testsignal full", "deconvolve", "ir listener", "ir ears", "pair listener",
                 "pair inverted", "fitmap listener", "sweep sepsm", "sweep stimuli", "compare all pairs"]
REPORT_KINDS = {"ir": "ir", "stipa": "stipa", "fullsti": "fullsti", "pair": "pair", "fitmap": "fitmap",
                "sweep": "sweep", "inspect": "inspect", "survey": "survey", "design": "design", "compare": "compare",
                "ir listener": "ir", "ir ears": "ir", "pair listener": "pair", "pair inverted": "pair",
                "fitmap listener": "fitmap", "sweep sepsm": "sweep"}


@pytest.mark.parametrize("command", TEXT_COMMANDS)
def test_terminal_headers_are_in_the_vocabulary(runs, command):
    text, _ = runs[command]
    tables = terminal_tables(text)
    if command not in ("batch",):  # batch prints a summary, no table
        assert tables, f"{command}: no table found in\n{text[:1500]}"
    for headers, rows in tables:
        assert not unknown(headers), f"{command}: headers not in the vocabulary: {unknown(headers)}"
        for j, h in enumerate(headers):  # nominal band labels (ISO 266), a '*' marks a partial band
            if h in ("band", "band, Hz"):
                assert {r[j].rstrip(" *") for r in rows} <= ISO_266_LABELS, (command, [r[j] for r in rows])


@pytest.mark.parametrize("command", sorted(REPORT_KINDS))
def test_report_labels_are_in_the_vocabulary_and_explained(runs, command):
    _, folder = runs[command]
    page = report_page(folder)
    figs = [lab for labels in page.figures.values() for lab in labels]
    assert page.headers and figs
    for what, labels in (("table header", page.headers), ("headline label", page.headline),
                         ("figure label", figs)):
        assert not unknown(labels), f"{command}: {what}s not in the vocabulary: {unknown(labels)}"
    # band columns read nominal labels with their unit ("1.6 kHz")
    # a column headed "band" holds nominal band labels with their unit ("1.6 kHz"), nothing else
    assert set(page.columns.get("band", [])) <= ISO_266_LABELS_HZ, (command, page.columns.get("band"))
    # a glossary of the terms on this page: present, and each of its terms shown on the page
    from envpredict.labels import glossary

    assert page.glossary, f"{command}: no glossary"
    expected = [k for k, _ in glossary(page.headline + figs + page.headers)]
    assert page.glossary == expected


def test_figures_name_their_axes(runs):
    # every figure of every report kind labels at least one axis (a chart without units misleads)
    for command in REPORT_KINDS:
        for name, labels in report_page(runs[command][1]).figures.items():
            assert labels, f"{command}: figure {name} has no axis label"


def test_the_figure_labels_in_the_page_are_those_drawn(runs):
    # the labels the page lists are read off the drawn figures: rebuilding the page from
    # result.json gives the same ones (so the check above reads what the PNGs show)
    from envpredict.report import build_page

    folder = runs["ir"][1]
    d = json.loads((folder / "result.json").read_text(encoding="utf-8"))
    drawn = {f"fig-{f.name}": f.labels for f in build_page("ir", d).figures}
    assert drawn == report_page(folder).figures
    assert "time after onset, s" in drawn["fig-decay_curves"]


def test_results_csv_numbers_are_rounded(runs):
    # issue 18: no 17-digit numbers; indices keep 6 decimals (cut, so that no verdict against a
    # requirement of up to 6 decimals can flip), delays and dB 3
    with open(runs["_results"], newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert rows
    for r in rows:
        for col in ("stoi", "estoi", "ssti", "ssti_regression"):
            assert re.fullmatch(r"-?\d+\.\d{1,6}", r[col]), (col, r[col])
        assert re.fullmatch(r"-?\d+(\.\d{1,3})?", r["delay_ms"]), r["delay_ms"]


def test_rating_is_shown_the_same_way_everywhere(runs):
    # JSON keeps the letter (rating) and the word (subjective); the terminal and the report both
    # show "G (fair)"
    text, folder = runs["ir"]
    d = json.loads((folder / "result.json").read_text(encoding="utf-8"))
    shown = f"{d['rating']} ({d['subjective']})"
    assert f"qualification band {shown}" in text
    assert shown in (folder / "report.html").read_text(encoding="utf-8")


def test_compare_figure_and_note_use_the_holm_adjusted_p(runs):
    text, folder = runs["compare"]
    d = json.loads((folder / "result.json").read_text(encoding="utf-8"))
    html = (folder / "report.html").read_text(encoding="utf-8")
    assert "p_holm" not in text and "p (Holm)" in text
    every_pair = runs["compare all pairs"][0]
    assert "p_holm" not in every_pair and "p (Holm) adjusts the p-values for all 3 pairs" in every_pair
    from envpredict.labels import show

    for c in d["conditions"]:
        if c.get("p_holm") is not None:
            assert f"p (Holm) = {show('p_holm', c['p_holm'])}" in html  # the figure's caption lists them


# ---------------------------------------------------------------------------
# The check itself can fail (a stray label is caught)
# ---------------------------------------------------------------------------

def test_a_stray_terminal_header_is_caught():
    from envpredict.cli._common import table

    text = table([["125", "68"]], ["band, Hz", "range dB"])
    headers = terminal_tables(text)[0][0]
    assert headers == ["band, Hz", "range dB"] and unknown(headers) == ["range dB"]


def test_a_stray_figure_label_is_caught():
    from envpredict.report import _fig, _mpl, _style

    with _style():
        fig = _mpl()(3, 2)
        ax = fig.add_subplot(111)
        ax.set_xlabel("band centre frequency")
        ax.set_ylabel("T30, s")
        f = _fig("x", "caption", fig)
    assert unknown(f.labels) == ["band centre frequency"]


def test_every_nominal_label_of_the_bands_shown_is_iso_266():
    # the sets typed above agree with the module's table (ISO 266 R10) for 50 Hz ... 8 kHz
    mine = {band_label(f, unit=False) for f in NOMINAL_THIRD_OCTAVE_HZ if 50 <= f <= 8000}
    assert mine == ISO_266_LABELS

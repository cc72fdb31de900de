"""Reports people look at: PNG figures and one self-contained HTML page.

:func:`write_report` takes a command's JSON dictionary (the ``to_dict()`` output it
prints with ``--json``) and writes into a folder

* one PNG per figure (matplotlib, Agg canvas, imported only when a report is made),
* ``report.html`` -- figures embedded as base64 data URIs, tables of the numbers, the
  inputs and settings used, the envpredict version and the cautions; it has no
  external references and opens offline in any browser,
* ``result.json`` -- the dictionary itself,
* ``.envpredict-report`` -- the list of the files above: a later report into the same
  folder replaces only these, and refuses a folder holding anything else.

The folder is written through :func:`envpredict.outputs.atomic_directory`: it appears
whole or not at all. This module draws and lays out; it computes nothing beyond what
a figure needs (a fitted line through a plotted range). The numeric core never
imports it.

Every number shown in an HTML table carries a ``data-key`` attribute with its path in
the JSON dictionary (``"decay.t30.3"``), and the dictionary is embedded in the page as
``<script type="application/json" id="result">``, so a reader (or a test) can check
that the page shows the same numbers as the JSON.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import io
import json
import math
import os
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from . import checks
from . import standards as std
from .exceptions import InputError

KINDS: tuple[str, ...] = ("ir", "stipa", "fullsti", "pair", "compare", "sweep", "inspect", "survey", "design",
                          "fitmap")

KIND_TITLES: dict[str, str] = {
    "ir": "STI and decay figures from an impulse response",
    "stipa": "STIPA from a test-signal recording",
    "fullsti": "Full STI from test-signal recordings",
    "pair": "Intelligibility of a clean/degraded pair",
    "compare": "Comparison of conditions",
    "sweep": "Predicted score against SNR",
    "inspect": "Envelope, periodicity and fine structure of a recording",
    "survey": "Site survey: STI per position and zone",
    "design": "Design prediction: STI of a room and its loudspeakers",
    "fitmap": "Mapping from an index to % correct, fitted on pilot scores",
}

# ---------------------------------------------------------------------------
# Look: colours and type (a scheme of our own)
# ---------------------------------------------------------------------------

INK = "#22303c"
MUTED = "#6a7580"
GRID = "#dcd6c8"
PAPER = "#fbfaf6"
TEAL = "#17736c"
COPPER = "#c2672f"
PLUM = "#6b3e75"
STEEL = "#3d6f9e"
OCHRE = "#c9962a"
BRICK = "#a8443a"
#: sequential ramp for heat maps, dark aubergine (low) to cream (high)
HEAT_RAMP: tuple[str, ...] = ("#2e1f3b", "#6e2e52", "#b0533a", "#dd9a45", "#f6e9c8")
#: one colour per octave band, 125 Hz ... 8 kHz (low bands warm, high bands cool)
BAND_COLOURS: tuple[str, ...] = ("#a8443a", "#c2672f", "#c9962a", "#7d8f2e", "#17736c", "#3d6f9e", "#6b3e75")

DPI = 110
#: Recordings longer than this (s) are drawn as an overview: syllables are no longer
#: resolved at figure width (about 1000 pixels), so lines get thinner (judgement).
LONG_VIEW_S = 30.0


#: The report's look, applied inside :func:`_style` only (never process-wide).
STYLE: dict[str, Any] = {
    "font.size": 10.5, "axes.titlesize": 11.5, "axes.labelsize": 10.5,
    "axes.edgecolor": MUTED, "axes.labelcolor": INK, "xtick.color": INK, "ytick.color": INK,
    "text.color": INK, "axes.grid": True, "grid.color": GRID, "grid.linewidth": 0.7,
    "axes.spines.top": False, "axes.spines.right": False, "figure.facecolor": "white",
    "axes.facecolor": "white", "legend.frameon": False, "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    # labels are shown as typed: a '$' in a condition name is not mathematics
    "text.usetex": False, "text.parse_math": False,
}


def _style():
    """A context in which the report's figures are drawn; the caller's matplotlib
    settings are restored on exit (``matplotlib.rc_context``)."""
    import matplotlib

    return matplotlib.rc_context(STYLE)


def _mpl():
    """matplotlib's Figure and Agg canvas (no pyplot: no global state, no display).

    Call inside :func:`_style`: figures take the report's look from there.
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    def new(w: float, h: float, **kw):
        fig = Figure(figsize=(w, h), dpi=DPI, **kw)
        FigureCanvasAgg(fig)
        return fig

    return new


def _heat_cmap():
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("envpredict_heat", list(HEAT_RAMP))


def _text_colour(rgba) -> str:
    r, g, b = rgba[:3]
    return INK if 0.299 * r + 0.587 * g + 0.114 * b > 0.55 else "white"


def _band_label(fc: float) -> str:
    from .labels import band_label

    return band_label(fc)


def _arr(v: Any) -> np.ndarray:
    """JSON list (with nulls) -> float array with NaN."""
    if v is None:
        return np.array([], dtype=float)
    return np.array(_nan_for_none(v), dtype=float)


def _nan_for_none(v: Any) -> Any:
    if isinstance(v, (list, tuple)):
        return [_nan_for_none(e) for e in v]
    return np.nan if v is None else v


@dataclass
class Figure:
    name: str          # file name without suffix
    caption: str
    png: bytes
    #: the axis and colour-bar labels drawn (checked against the vocabulary, listed in the glossary)
    labels: list[str] = field(default_factory=list)


@dataclass
class Cell:
    text: str
    key: str | None = None   # JSON path of the number shown ("decay.t30.3")
    cls: str = ""


@dataclass
class Table:
    title: str
    header: list[str]
    rows: list[list[Cell]]
    note: str = ""


@dataclass
class Page:
    headline: list[tuple[str, Cell]] = field(default_factory=list)
    figures: list[Figure] = field(default_factory=list)
    tables: list[Table] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)   # e.g. figures left out and why


def _fig(name: str, caption: str, fig) -> Figure:
    """The :class:`Figure` of a drawn matplotlib figure, with the axis and colour-bar labels it shows."""
    labels = [t for ax in fig.axes for t in (ax.get_xlabel(), ax.get_ylabel()) if t]
    return Figure(name, caption, _png(fig), labels)


def _term(key: str) -> str:
    from .labels import header

    return header(key)


def _spec(key: str) -> str:
    """The format of a quantity's numbers: the vocabulary's decimals (as the terminal shows them)."""
    from .labels import term

    d = term(key).decimals
    return "g" if d is None else f".{d}f"


def _name(key: str) -> str:
    from .labels import name

    return name(key)


def _png(fig) -> bytes:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=DPI, bbox_inches="tight", pad_inches=0.15, facecolor="white")
    return buf.getvalue()


def _get(d: Mapping, path: str) -> Any:
    cur: Any = d
    for part in path.split("."):
        if isinstance(cur, Mapping):
            cur = cur[part]
        else:
            cur = cur[int(part)]
    return cur


def num(d: Mapping, path: str, spec: str = ".2f", unit: str = "") -> Cell:
    """A table cell showing the number at ``path`` of ``d`` (a dash where it is null)."""
    try:
        v = _get(d, path)
    except (KeyError, IndexError, TypeError, ValueError):
        return Cell("—")
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return Cell("—", path, "na")
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        return Cell(html.escape(str(v)))
    if spec.endswith("%"):  # a fraction shown as a percentage, "44 %"
        return Cell(f"{100 * float(v):{spec[:-1]}f} %", path)
    return Cell(format(float(v), spec) + (f" {unit}" if unit else ""), path)


def txt(v: Any) -> Cell:
    return Cell("—" if v is None else html.escape(str(v)))


# ---------------------------------------------------------------------------
# Figures shared by the STI kinds
# ---------------------------------------------------------------------------

def _mtf_heatmap(d: Mapping, stipa: bool) -> Figure:
    new = _mpl()
    m = _arr(d["mtf"])
    bands = list(d.get("bands_hz", std.OCTAVE_BANDS_HZ))
    mod = d.get("modulation_hz", std.MODULATION_FREQUENCIES_HZ)
    per_band = bool(mod) and isinstance(mod[0], (list, tuple))
    if per_band and all(list(row) == list(mod[0]) for row in mod):
        mod, per_band = list(mod[0]), False  # the same frequencies in every band (full STI)
    nb, nf = m.shape
    wide = nf > 4
    fig = new(10.0 if wide else 6.4, 4.6)
    ax = fig.add_subplot(111)
    ax.grid(False)
    im = ax.imshow(m, cmap=_heat_cmap(), vmin=0.0, vmax=1.0, aspect="auto", origin="lower")
    for i in range(nb):
        for j in range(nf):
            v = m[i, j]
            if not np.isfinite(v):
                continue
            label = f"{v:.2f}"
            if per_band:
                label += f"\n{mod[i][j]:g} Hz"
            ax.text(j, i, label, ha="center", va="center", fontsize=8.5 if wide else 10,
                    color=_text_colour(im.cmap(im.norm(v))))
    used = list(d.get("bands_used") or [True] * nb)
    ax.set_yticks(range(nb), [_band_label(f) + ("" if u else "\n(not used)") for f, u in zip(bands, used)])
    ax.set_ylabel("octave band")
    if per_band:
        ax.set_xticks(range(nf), ["lower modulation\nfrequency", "upper modulation\nfrequency"][:nf] if nf == 2
                      else [f"#{j + 1}" for j in range(nf)])
        ax.set_xlabel("modulation frequency (each band's own f1 and f2: the value shown under m)")
    else:
        ax.set_xticks(range(nf), [f"{f:g}" for f in mod])
        ax.set_xlabel("modulation frequency, Hz")
    cb = fig.colorbar(im, ax=ax, fraction=0.04, pad=0.02)
    cb.set_label("m (modulation transfer: 0 = lost, 1 = kept)")
    corr = "after noise and auditory corrections" if d.get("auditory_corrections", True) else "after noise correction"
    ax.set_title(f"Modulation transfer used for the index ({corr})")
    return _fig("mtf", "Modulation transfer m per octave band (rows) and modulation frequency (columns): "
                  "each cell is the fraction of the speech envelope's modulation that survives the path to "
                  "the listener, written in the cell and coloured from dark (0, lost) to cream (1, kept).", fig)


def _ti_figure(d: Mapping) -> Figure:
    new = _mpl()
    bands = list(d.get("bands_hz", std.OCTAVE_BANDS_HZ))
    mti = _arr(d["mti"])
    used = list(d.get("bands_used") or [True] * len(mti))
    mti = np.where(used, mti, np.nan)  # an unused band (female 125 Hz) gets no bar
    sti = d.get("sti")
    fig = new(10.0, 4.4)
    gs = fig.add_gridspec(1, 2, width_ratios=[5.2, 1.0], wspace=0.08)
    ax = fig.add_subplot(gs[0])
    x = np.arange(len(bands))
    # one colour: a bar's height is the MTI, its colour says nothing more
    bars = ax.bar(x, np.nan_to_num(mti), color=TEAL, width=0.66)
    for b, v, u in zip(bars, mti, used):
        if not u:
            ax.text(b.get_x() + b.get_width() / 2, 0.02, "not\nused", ha="center", va="bottom", fontsize=9,
                    color=MUTED)
        elif np.isfinite(v):
            inside = v > 0.12
            ax.text(b.get_x() + b.get_width() / 2, v - 0.025 if inside else v + 0.02, f"{v:.2f}",
                    ha="center", va="top" if inside else "bottom", fontsize=10.5, fontweight="bold",
                    color="white" if inside else INK)
    ax.set_xticks(x, [_band_label(f) for f in bands])
    ax.set_xlabel("octave band")
    ax.set_ylabel("MTI (0 to 1)")
    ax.set_ylim(0, 1.08)
    ax.grid(axis="x", visible=False)
    if sti is not None:
        ax.axhline(sti, color=INK, lw=1.4, ls="--", label=f"STI {sti:.2f} (weighted over the bands)")
    req = d.get("requirement")
    if isinstance(req, (int, float)):
        ax.axhline(req, color=BRICK, lw=1.6, ls=":", label=f"required STI {req:g}")
    if sti is not None or isinstance(req, (int, float)):
        ax.legend(loc="upper right", fontsize=10)
    ax.set_title("Transmission index per octave band")
    # qualification band scale
    sc = fig.add_subplot(gs[1])
    sc.grid(False)
    qb = [(lab, lo) for lab, lo, _ in std.QUALIFICATION_BANDS]
    from matplotlib.colors import LinearSegmentedColormap

    ramp = LinearSegmentedColormap.from_list("qb", [BRICK, OCHRE, TEAL])
    # the ladder shares the bar chart's vertical scale, so the STI line and the arrow meet
    top = 1.0
    for lab, lo in qb:
        frac = (max(lo, 0.20) - 0.20) / (0.80 - 0.20)
        sc.add_patch(_rect((0, lo), 1, top - lo, ramp(min(1, max(0, frac))), alpha=0.9))
        sc.text(0.5, (lo + top) / 2, lab, ha="center", va="center", fontsize=8.5 if top - lo < 0.05 else 9.5,
                color="white", fontweight="bold")
        top = lo
    sc.set_xlim(0, 1)
    sc.set_ylim(*ax.get_ylim())
    sc.set_xticks([])
    sc.yaxis.tick_right()
    sc.yaxis.set_label_position("right")
    sc.set_ylabel("STI")
    sc.spines["left"].set_visible(False)
    sc.spines["right"].set_visible(True)
    if isinstance(req, (int, float)):
        sc.axhline(req, color=BRICK, lw=1.6, ls=":")
    if sti is not None:
        y = sti
        sc.axhline(y, color=INK, lw=2.4)
        sc.plot([0.0], [y], marker=">", ms=11, color=INK, clip_on=False, zorder=5)
    from .labels import rating_text

    sc.set_title(rating_text(d.get("rating"), d.get("subjective")), loc="center", fontsize=10.5)
    return _fig("transmission_index", "Modulation transfer index (MTI, 0 to 1) per octave band (bars, one "
                  "colour), the STI (dashed: the weighted combination of the bands) and, on the same vertical "
                  "scale at the right, the qualification bands of IEC 60268-16 Annex F (A+ best, U below 0.36) "
                  "with the arrow at the STI.", fig)


def _rect(xy, w, h, colour, alpha=1.0):
    from matplotlib.patches import Rectangle

    return Rectangle(xy, w, h, facecolor=colour, edgecolor="white", lw=1.0, alpha=alpha)


def _decay_figure(d: Mapping) -> Figure | None:
    dec = d.get("decay") or {}
    curves = dec.get("curves_db")
    rate = dec.get("curve_rate_hz")
    if curves is None or not rate:
        return None
    new = _mpl()
    curves = _arr(curves)
    bands = list(dec.get("bands_hz", d.get("bands_hz", std.OCTAVE_BANDS_HZ)))
    fig = new(11.0, 6.2)
    axes = fig.subplots(2, 4, sharex=True, sharey=True).ravel()
    t = np.arange(curves.shape[1]) / float(rate)
    t_end = 0.0
    for k in range(min(len(bands), curves.shape[0])):
        c = curves[k]
        ok = np.isfinite(c)
        if ok.any():
            t_end = max(t_end, float(t[ok][-1]))
    t_end = t_end * 1.05 if t_end > 0 else float(t[-1])
    fits = tuple((name, std.DECAY_RANGES_DB[name], col,
                  f"{name.upper()}, {std.DECAY_RANGES_DB[name][0]:g} to {std.DECAY_RANGES_DB[name][1]:g} dB")
                 for name, col in (("edt", COPPER), ("t20", STEEL), ("t30", PLUM)))
    cross = _arr(dec.get("crossing_s", []))
    for k, ax in enumerate(axes[: len(bands)]):
        if k >= curves.shape[0]:
            break
        c = curves[k]
        ok = np.isfinite(c)
        lines = []
        gap = 0.018 * t_end
        for j, (name, (hi, lo), col, lab) in enumerate(fits):
            T = _arr(dec.get(name, []))
            T = T[k] if k < T.size else np.nan
            # the evaluation range, as a bar standing just right of where this band's curve
            # leaves the range (its lower end, or the curve's end if it never gets there), so
            # that it sits on the curve in every band
            below = np.flatnonzero(ok & (c <= lo))
            t_lo = float(t[below[0]]) if below.size else (float(t[ok][-1]) if ok.any() else 0.0)
            ax.plot([t_lo + gap] * 2, [hi, lo], color=col, lw=4, solid_capstyle="butt", label=lab, alpha=0.9)
            if not np.isfinite(T):
                lines.append(f"{name.upper()} —")
                continue
            sel = ok & (c <= hi) & (c >= lo)
            if np.count_nonzero(sel) < 3:
                continue
            # regression line with the fitted slope -60/T (least-squares intercept over the
            # range), over its range; drawn as nested sleeves (T30 widest) so that all three
            # stay visible where they agree
            slope = -60.0 / T
            a = float(np.mean(c[sel] - slope * t[sel]))
            ax.plot([(hi - a) / slope, (lo - a) / slope], [hi, lo], color=col, lw=(2.4, 5.0, 8.0)[j],
                    alpha=(0.95, 0.6, 0.35)[j], solid_capstyle="butt", zorder=3 - j)
            lines.append(f"{name.upper()} {T:.2f} s")
        ax.plot(t, c, color=INK, lw=1.1, label="Schroeder decay curve", zorder=4)
        if k < cross.size and np.isfinite(cross[k]) and cross[k] < t[-1]:
            ax.axvline(cross[k], color=MUTED, lw=0.9, ls=":", label="crossing with the noise floor")
        ax.set_title(_band_label(bands[k]), loc="left")
        ax.text(0.04, 0.04, "\n".join(lines), transform=ax.transAxes, ha="left", va="bottom", fontsize=8.8,
                bbox={"facecolor": "white", "edgecolor": GRID, "alpha": 0.92, "boxstyle": "round,pad=0.3"})
        ax.set_ylim(-65, 3)
        ax.set_xlim(0, t_end)
    for ax in axes[4:]:
        ax.set_xlabel("time after onset, s")
    for ax in axes[::4]:
        ax.set_ylabel("level, dB")
    leg_ax = axes[-1]
    if len(bands) < len(axes):
        handles, labels = [], []
        for ax in axes[: len(bands)]:
            for h, lab in zip(*ax.get_legend_handles_labels()):
                if lab not in labels:
                    handles.append(h)
                    labels.append(lab)
        leg_ax.axis("off")
        leg_ax.legend(handles, labels, loc="center left", fontsize=9.5, frameon=False,
                      title="bars: evaluation ranges (beside the curve\nwhere it leaves them); sleeves: fitted lines",
                      title_fontsize=9.5,
                      bbox_to_anchor=(0.08, 0.5))
    fig.suptitle("Schroeder decay curves per octave band, with the fitted ranges (ISO 3382-1)",
                 x=0.01, ha="left", fontweight="bold", fontsize=11.5)
    return _fig("decay_curves", "Backward-integrated (Schroeder) decay curves per octave band, truncated "
                  "at the crossing with the noise floor (dotted). Coloured bars mark the EDT, T20 and T30 "
                  "evaluation ranges, each standing beside the curve where the curve leaves it; the sleeves of "
                  "the same colour are the regression lines over them, and the box gives "
                  "the decay times they extrapolate to 60 dB.", fig)


def _sti_tables(d: Mapping, stipa: bool) -> list[Table]:
    bands = list(d.get("bands_hz", std.OCTAVE_BANDS_HZ))
    rows = []
    noise = d.get("noise_db")
    # the direct method's band levels are of the whole recording (test signal and noise), in
    # dB SPL when calibrated, else dB re full scale, as in the terminal
    level_key = "speech_db"
    if stipa:
        level_key = "band_levels_db" if d.get("band_levels_unit", "dB SPL") == "dB SPL" else "band_levels_dbfs"
    level_path = "band_levels_db" if stipa else "speech_db"
    for k, fc in enumerate(bands):
        rows.append([
            Cell(_band_label(fc)),
            num(d, f"mti.{k}", _spec("mti")) if (d.get("bands_used") or [True] * 7)[k] else Cell("not used", cls="na"),
            num(d, f"{level_path}.{k}", ".1f"),
            num(d, f"noise_db.{k}", ".1f") if noise else Cell("—"),
            num(d, f"masking_db.{k}", ".1f") if d.get("masking_db") else Cell("—"),
            num(d, f"threshold_db.{k}", ".1f") if d.get("threshold_db") else Cell("—"),
        ])
    head = ["band", _term("mti"), _term(level_key), _term("noise_db"), _term("masking_db"), _term("threshold_db")]
    # leave out the level columns the result has no values for (e.g. an uncalibrated recording)
    keep = [j for j in range(len(head)) if j < 2 or any(r[j].text != "—" for r in rows)]
    tables = [Table("Per octave band", [head[j] for j in keep], [[r[j] for j in keep] for r in rows])]
    mod = d.get("modulation_hz", [])
    per_band = bool(mod) and isinstance(mod[0], (list, tuple))
    if per_band and all(list(row) == list(mod[0]) for row in mod):
        mod, per_band = list(mod[0]), False  # the same frequencies in every band
    m = d.get("mtf") or []
    nf = len(m[0]) if m else 0
    if per_band:
        head = ["band"] + [_term(f"m_f{j + 1}") for j in range(nf)] + [_term(f"f{j + 1}") for j in range(nf)] + \
            [f"{_term('mtf_measured')} (at f{j + 1})" for j in range(nf)]
        rows = [[Cell(_band_label(fc))] + [num(d, f"mtf.{k}.{j}", _spec("m_f1")) for j in range(nf)]
                + [num(d, f"modulation_hz.{k}.{j}", "g") for j in range(nf)]
                + [num(d, f"mtf_measured.{k}.{j}", ".3f") for j in range(nf)] for k, fc in enumerate(bands)]
    else:
        head = ["band"] + [f"{f:g} Hz" for f in mod]
        rows = [[Cell(_band_label(fc))] + [num(d, f"mtf.{k}.{j}", ".2f") for j in range(nf)]
                for k, fc in enumerate(bands)]
    note = ("Rows: octave bands. Columns: m at the band's two modulation frequencies f1 and f2 (after the noise "
            "and auditory corrections, as used for the index), f1 and f2 themselves, and m as measured before the "
            "corrections." if per_band else
            "Rows: octave bands. Columns: modulation frequencies; each cell is the modulation transfer m used for "
            "the index (0 = lost, 1 = kept).")
    tables.append(Table("Modulation transfer m used for the index", head, rows, note))
    return tables


def _sti_headline(d: Mapping) -> list[tuple[str, Cell]]:
    from .sti import verdict_decimals

    req = d.get("requirement")
    ref = std.VOICE_ALARM_TARGET_STI if not isinstance(req, (int, float)) else float(req)
    # two decimals, or more where rounding would contradict the verdict (0.498, not "0.50")
    spec = f".{verdict_decimals(d['sti'], ref)}f" if isinstance(d.get("sti"), (int, float)) else ".2f"
    from .labels import rating_text

    out = [("STI", num(d, "sti", spec)),
           ("qualification band", txt(rating_text(d.get("rating"), d.get("subjective")))),
           ("talker", txt(d.get("talker")))]
    if isinstance(req, (int, float)) and d.get("meets_requirement") is not None:
        met = bool(d["meets_requirement"])
        out.insert(1, (f"required STI ({req:g})", Cell("MET" if met else "NOT MET", cls="pass" if met else "fail")))
    return out


def _page_ir(d: Mapping) -> Page:
    if d.get("binaural"):
        return _page_ears(d, False)
    p = Page(headline=_sti_headline(d))
    p.figures += [_mtf_heatmap(d, False), _ti_figure(d)]
    dec_fig = _decay_figure(d)
    if dec_fig is not None:
        p.figures.append(dec_fig)
    else:
        p.notes.append("The result holds no decay curves (decay.curves_db), so they are not drawn.")
    p.tables += _sti_tables(d, False)
    dec = d.get("decay")
    if dec:
        bands = list(dec.get("bands_hz", d.get("bands_hz", std.OCTAVE_BANDS_HZ)))
        rows = [[Cell(_band_label(fc)), num(d, f"decay.edt.{k}", ".2f"), num(d, f"decay.t20.{k}", ".2f"),
                 num(d, f"decay.t30.{k}", ".2f"), num(d, f"decay.c50.{k}", ".1f"), num(d, f"decay.c80.{k}", ".1f"),
                 num(d, f"decay.d50.{k}", ".2f"), num(d, f"decay.decay_range_db.{k}", ".0f"),
                 num(d, f"decay.crossing_s.{k}", ".2f")]
                for k, fc in enumerate(bands)]
        p.tables.append(Table("Decay figures (ISO 3382-1)", ["band"] + [_term(k) for k in (
                              "edt", "t20", "t30", "c50", "c80", "d50", "decay_range_db", "crossing_s")],
                              rows, "A dash: not computed (see the notes below)." if dec.get("notes") else ""))
        for n in dec.get("notes", []):
            p.notes.append(str(n))
    return p


def _page_stipa(d: Mapping) -> Page:
    if d.get("binaural"):
        return _page_ears(d, True)
    p = Page(headline=_sti_headline(d))
    if d.get("uncertainty") is not None:
        from .sti import verdict_decimals

        # with as many decimals as the STI beside it, as in the terminal
        req = d.get("requirement") if isinstance(d.get("requirement"), (int, float)) else std.VOICE_ALARM_TARGET_STI
        from .labels import uncertainty_decimals

        dec = verdict_decimals(d["sti"], req) if isinstance(d.get("sti"), (int, float)) else 2
        dec = uncertainty_decimals(d["uncertainty"], dec)
        p.headline.insert(1, ("standard uncertainty (±)", num(d, "uncertainty", f".{dec}f")))
    p.figures += [_mtf_heatmap(d, True), _ti_figure(d)]
    win = _arr(d.get("window_sti")) if d.get("window_sti") else np.array([])
    if win.size >= 2:
        new = _mpl()
        fig = new(10.0, 3.4)
        ax = fig.add_subplot(111)
        t0, t1, one = _window_span(d)
        edges = np.linspace(t0, t1, win.size + 1)
        x = (edges[:-1] + edges[1:]) / 2
        ax.hlines(win, edges[:-1], edges[1:], color=TEAL, lw=3.0, alpha=0.45)
        ax.plot(x, win, "o", color=TEAL, ms=7, label="STI of each analysis window (bar: its stretch)")
        if d.get("sti") is not None:
            ax.axhline(d["sti"], color=INK, lw=1.2, ls="--", label=f"STI of the whole recording {d['sti']:.2f}")
        # at least +-0.05 around the values: a scatter of 0.01 should look small
        span = max(0.05, float(np.nanmax(win) - np.nanmin(win)))
        ax.set_ylim(float(np.nanmin(win)) - span, float(np.nanmax(win)) + span)
        ax.set_xlim(min(0.0, t0), t1 + 0.02 * (t1 - t0))
        ax.set_xlabel("time, s (in the recording)" if one else "time, s (from the start of each recording's "
                      "analysed stretch)")
        ax.set_ylabel("STI")
        ax.legend(loc="upper center", ncols=2, fontsize=9.5, bbox_to_anchor=(0.5, -0.2))
        ax.set_title("Consistency over time")
        unc = d.get("uncertainty")
        cap = ("STI of consecutive analysis windows (dots at their centres, bars over their stretches; x: time in "
               + ("the recording" if one else "each recording, the windows of the 14 recordings pooled") +
               "): a wide scatter points to a changing noise or a disturbed measurement.")
        if unc is not None:
            cap += (f" The uncertainty given above, {unc:.3f}, is the larger of their standard error and the spread "
                    "from the envelope noise, combined with the expected offset.")
        p.figures.append(_fig("window_sti", cap, fig))
    p.tables += _sti_tables(d, True)
    if win.size:
        t0, t1, _ = _window_span(d)
        edges = np.linspace(t0, t1, win.size + 1)
        p.tables.append(Table("STI per analysis window", ["window", _term("from_s"), _term("to_s"), "STI"],
                              [[Cell(str(i + 1)), Cell(f"{edges[i]:.1f}"), Cell(f"{edges[i + 1]:.1f}"),
                                num(d, f"window_sti.{i}", ".3f")] for i in range(win.size)]))
    return p


def _window_span(d: Mapping) -> tuple[float, float, bool]:
    """Start and end (s) of the analysed stretch the windows split into equal parts, and
    whether it is one recording's (STIPA) rather than the median of several (full STI)."""
    recs = [r for r in d.get("recordings") or [] if isinstance(r, Mapping)]
    spans = [(float(r["analysed_start_s"]), float(r["analysed_end_s"])) for r in recs
             if all(isinstance(r.get(k), (int, float)) for k in ("analysed_start_s", "analysed_end_s"))]
    if len(spans) == 1:
        return spans[0][0], spans[0][1], True
    if spans:
        return 0.0, float(np.median([b - a for a, b in spans])), False
    n = len(d.get("window_sti") or [])
    return 0.0, float(max(n, 1)), False


# ---------------------------------------------------------------------------
# pair, compare, sweep
# ---------------------------------------------------------------------------

def _first(d: Mapping, *keys: str) -> Any:
    for k in keys:
        if k in d and d[k] is not None:
            return d[k]
    return None


def _page_pair(d: Mapping) -> Page:
    if d.get("binaural"):
        return _page_pair_ears(d)
    p = Page()
    for key, label, spec in (("stoi", "STOI", ".3f"), ("estoi", "ESTOI", ".3f"), ("ssti", "speech-based STI", ".3f"),
                             ("delay_ms", "delay", ".1f")):
        if d.get(key) is not None:
            p.headline.append((label, num(d, key, spec, "ms" if key == "delay_ms" else "")))
    new = _mpl()
    bands = d.get("bands") if isinstance(d.get("bands"), Mapping) else {}
    third = bands.get("third_octave") if isinstance(bands.get("third_octave"), Mapping) else {}
    octave = bands.get("octave") if isinstance(bands.get("octave"), Mapping) else {}
    tl = d.get("timeline") if isinstance(d.get("timeline"), Mapping) else {}
    worst = list(d.get("worst_moments") or [])
    # 1. envelope correlation over time, per band (timeline.band_stoi: bands x time bins)
    corr = tl.get("band_stoi")
    if corr is not None and tl.get("start_s") is not None:
        c = _arr(corr)
        cf = list(third.get("bands_hz", []))
        start = _arr(tl["start_s"])
        step_s = float(tl.get("step_s") or 1.0)
        fig = new(11.0, 4.8)
        ax = fig.add_subplot(111)
        ax.grid(False)
        lo_t = float(start[0]) if start.size else 0.0
        hi_t = float(start[-1] + step_s) if start.size else lo_t + step_s
        im = ax.imshow(c, aspect="auto", origin="lower", cmap=_heat_cmap(), vmin=0.0, vmax=1.0,
                       extent=(lo_t, hi_t, -0.5, c.shape[0] - 0.5), interpolation="nearest")
        step = max(1, len(cf) // 8)
        ax.set_yticks(range(0, len(cf), step), [_band_label(float(f)) for f in cf[::step]])
        ax.set_xlabel(f"time, s (in the aligned pair; bins of {step_s:g} s; blank: no speech)")
        ax.set_ylabel("one-third-octave band")
        cb = fig.colorbar(im, ax=ax, fraction=0.04, pad=0.02)
        cb.set_label("envelope correlation (STOI part)")
        ax.set_title("Envelope correlation per band over time, clean vs degraded")
        p.figures.append(_fig("band_correlation", "Correlation of the clean and degraded band envelopes per "
                                "one-third-octave band (rows) and time bin (columns), coloured from dark (0: the "
                                "envelope is lost) to cream (1: kept): dark patches show in which bands and when "
                                "the degraded signal lost the envelope of the clean one.", fig))
    if tl.get("start_s") is not None and (tl.get("stoi") is not None or tl.get("estoi") is not None):
        start = _arr(tl["start_s"])
        step_s = float(tl.get("step_s") or (start[1] - start[0] if start.size > 1 else 1.0))
        mid = start + step_s / 2
        fig = new(11.0, 3.9)
        ax = fig.add_subplot(111)
        w0 = worst[0] if worst else {}
        if w0.get("start_s") is not None and w0.get("end_s") is not None:
            ax.axvspan(w0["start_s"], w0["end_s"], color=COPPER, alpha=0.18, lw=0,
                       label=f"lowest ESTOI ({w0['start_s']:g}-{w0['end_s']:g} s)")
        if tl.get("stoi") is not None:
            ax.plot(mid, _arr(tl["stoi"]), "-o", ms=3.5, color=TEAL, lw=1.6, label="STOI in the time bin")
        if tl.get("estoi") is not None:
            ax.plot(mid, _arr(tl["estoi"]), "-s", ms=3.5, color=PLUM, lw=1.6, label="ESTOI in the time bin")
        ax.legend(loc="upper center", ncols=3, fontsize=9.5, bbox_to_anchor=(0.5, -0.2))
        vals = np.concatenate([_arr(tl.get("stoi") or []), _arr(tl.get("estoi") or [])])
        low = float(np.nanmin(vals)) if np.isfinite(vals).any() else 0.0
        ax.set_ylim(min(0.0, low - 0.05), 1.02)
        ax.set_xlim(0, float(start[-1] + step_s) if start.size else 1.0)
        ax.set_xlabel(f"time, s (in the aligned pair; bins of {step_s:g} s)")
        ax.set_ylabel("envelope correlation")
        ax.set_title("Envelope correlation over time (all bands)")
        p.figures.append(_fig("correlation_over_time", "Local STOI and ESTOI (mean envelope correlation over "
                                "the bands) in each time bin; shaded: the bin where the envelope is lost most. "
                                "Gaps: no speech in the bin.", fig))
    # 2. per band
    cf = third.get("bands_hz")
    if cf is not None and (third.get("stoi") is not None or third.get("estoi") is not None):
        cfl = [float(f) for f in cf]
        fig = new(11.0, 4.2)
        ax = fig.add_subplot(111)
        x = np.arange(len(cfl))
        w = 0.4
        if third.get("stoi") is not None:
            ax.bar(x - w / 2, _arr(third["stoi"]), w, color=TEAL, label="STOI part (mean envelope correlation)")
        if third.get("estoi") is not None:
            ax.bar(x + w / 2, _arr(third["estoi"]), w, color=PLUM,
                   label="ESTOI part (the band's share of the correlation x 15)")
        from .labels import band_label

        ax.set_xticks(x, [band_label(f, unit=False) for f in cfl])
        ax.set_xlabel("one-third-octave band, Hz")
        ax.set_ylabel("per-band value")
        vals = np.concatenate([_arr(third.get("stoi") or []), _arr(third.get("estoi") or [])])
        low = float(np.nanmin(vals)) if np.isfinite(vals).any() else 0.0
        ax.set_ylim(min(0.0, low - 0.05), 1.18)
        ax.legend(loc="upper left", ncols=2, fontsize=9)
        ax.grid(axis="x", visible=False)
        ax.set_title("Envelope correlation per band (mean over the segments; their mean is the index)")
        p.figures.append(_fig("band_correlation_mean", "Per one-third-octave band (nominal frequencies): teal, the "
                                "band's STOI part, its mean envelope correlation (STOI is the mean of the teal bars); "
                                "plum, the band's ESTOI part, its share of ESTOI's spectral correlation times the 15 "
                                "bands (ESTOI is the mean of the plum bars). Low bars are the bands whose envelope "
                                "the degradation destroyed.", fig))
        rows = [[Cell(_band_label(f)), num(d, f"bands.third_octave.stoi.{k}", ".3f"),
                 num(d, f"bands.third_octave.estoi.{k}", ".3f")] for k, f in enumerate(cfl)]
        p.tables.append(Table("Per one-third-octave band", ["band", _term("stoi_band"), _term("estoi_band")], rows))
    if octave.get("bands_hz") is not None:
        rows = []
        for k, f in enumerate(octave["bands_hz"]):
            rows.append([Cell(_band_label(float(f))), num(d, f"bands.octave.correlation.{k}", ".3f"),
                         num(d, f"bands.octave.mtf.{k}", ".3f"), num(d, f"bands.octave.apparent_snr_db.{k}", ".1f"),
                         num(d, f"bands.octave.ti.{k}", ".3f")])
        p.tables.append(Table("Speech-based STI per octave band", ["band", _term("correlation"), _term("apparent_mtf"),
                                                                    _term("apparent_snr_db"), _term("ti")], rows))
    rows = [[Cell(label), num(d, key, spec, unit)] for key, label, spec, unit in
            (("stoi", "STOI", ".3f", ""), ("estoi", "ESTOI", ".3f", ""),
             ("ssti", "speech-based STI (normalised covariance)", ".3f", ""),
             ("ssti_regression", "speech-based STI (envelope regression)", ".3f", ""),
             ("delay_ms", "delay of degraded re clean", ".1f", "ms"),
             ("alignment.match_correlation", "waveform match (peak within the search)", ".3f", ""),
             ("duration_s", "common duration", ".2f", "s"), ("fs", "analysis sample rate", ".0f", "Hz"))
            if _has(d, key)]
    p.tables.insert(0, Table("Indices", ["quantity", "value"], rows))
    if worst:
        rows = [[num(d, f"worst_moments.{i}.start_s", ".1f", "s"), num(d, f"worst_moments.{i}.end_s", ".1f", "s"),
                 num(d, f"worst_moments.{i}.estoi", ".3f"), num(d, f"worst_moments.{i}.stoi", ".3f")]
                for i in range(len(worst))]
        p.tables.append(Table("Worst moments", ["from", "to", "ESTOI", "STOI"], rows))
    _sepsm_section(p, d)
    for n in d.get("notes") or []:
        p.notes.append(str(n))
    return p


def _first_path(d: Mapping, path: str) -> Any:
    """The value at ``path`` of ``d``, or None where the path leads nowhere."""
    try:
        return _get(d, path)
    except (KeyError, IndexError, TypeError, ValueError):
        return None


def _has(d: Mapping, path: str) -> bool:
    return _first_path(d, path) is not None


def _p_cell(d: Mapping, path: str) -> Cell:
    """A p-value cell with the vocabulary's decimals, as the terminal shows it ("0.0156", "< 0.0001")."""
    from .labels import show

    c = num(d, path, ".4f")
    return Cell(html.escape(show("p_value", _get(d, path))), path) if c.key and c.cls != "na" else c


def _page_compare(d: Mapping) -> Page:
    p = Page()
    conds = list(d.get("conditions") or [])
    if d.get("index"):
        p.headline.append(("index", txt(_name(str(d["index"])))))
    if d.get("baseline") is not None:
        p.headline.append(("baseline", txt(d["baseline"])))
    p.headline.append(("conditions", Cell(str(len(conds)))))
    if not conds:
        p.notes.append("The result holds no conditions.")
        return p
    new = _mpl()
    h = max(2.6, 0.5 * len(conds) + 1.4)
    fig = new(10.0, h)
    ax = fig.add_subplot(111)
    y = np.arange(len(conds))[::-1]
    # labels stand in one column right of every interval and of the zero line
    right = max([c.get("ci_high") for c in conds if c.get("ci_high") is not None]
                + [c.get("diff") for c in conds if c.get("diff") is not None] + [0.0])
    left = min([c.get("ci_low") for c in conds if c.get("ci_low") is not None]
               + [c.get("diff") for c in conds if c.get("diff") is not None] + [0.0])
    label_x = right + 0.04 * ((right - left) or 1.0)
    from .labels import show

    for yi, c in zip(y, conds):
        diff, lo, hi = c.get("diff"), c.get("ci_low"), c.get("ci_high")
        if diff is None or c.get("verdict") == "baseline":
            ax.plot([0], [yi], "|", color=INK, ms=14, mew=2)
            ax.annotate("baseline", (0, yi), xytext=(8, 0), textcoords="offset points", va="center",
                        fontsize=9.5, color=MUTED)
            continue
        verdict = c.get("verdict")
        if verdict in ("higher", "lower", "no clear difference"):
            col = {"higher": TEAL, "lower": BRICK}.get(verdict, MUTED)
        else:
            col = TEAL if (lo is not None and lo > 0) else BRICK if (hi is not None and hi < 0) else MUTED
        if lo is not None and hi is not None:
            ax.plot([lo, hi], [yi, yi], color=col, lw=3.0, solid_capstyle="butt", alpha=0.85)
        ax.plot([diff], [yi], "o", color=col, ms=8, mec="white", mew=1.2)
        # the verdict uses the Holm-adjusted p: the figure shows that one, labelled as such
        pv = c.get("p_holm")
        lab = f"{diff:+.3f}" + (f"  [{lo:+.3f}, {hi:+.3f}]" if lo is not None and hi is not None else "")
        if pv is not None:
            lab += f"  p (Holm) = {show('p_holm', pv)}"
        ax.annotate(lab, (label_x, yi), xytext=(0, 0), textcoords="offset points", va="center", fontsize=9.5)
    ax.axvline(0, color=INK, lw=1.0)
    ax.set_yticks(y, [str(c.get("name", "?")) for c in conds])
    level = _first(d, "confidence", "ci_level")
    lvl = f"{float(level) * 100:g} % " if isinstance(level, (int, float)) else ""
    index = d.get("index") or "index"
    ref = _first(d, "baseline", "reference")
    ref_text = f" from '{ref}'" if ref else ""
    ax.set_xlabel(f"difference ({_name(str(index))}{ref_text}; dot: mean, bar: {lvl}confidence interval)")
    ax.grid(axis="y", visible=False)
    lo_all = [c.get("ci_low") for c in conds if c.get("ci_low") is not None] + \
             [c.get("diff") for c in conds if c.get("diff") is not None] + [0.0]
    hi_all = [c.get("ci_high") for c in conds if c.get("ci_high") is not None] + \
             [c.get("diff") for c in conds if c.get("diff") is not None] + [0.0]
    span = max(hi_all) - min(lo_all) or 1.0
    ax.set_xlim(min(lo_all) - 0.08 * span, max(hi_all) + 0.75 * span)
    ax.set_ylim(-0.7, len(conds) - 0.3)
    ax.set_title("Differences between conditions")
    p.figures.append(_fig("differences", "Mean paired difference of each condition from the baseline (dot) with its "
                            "confidence interval (bar), and beside it the p adjusted for the several comparisons "
                            "(p (Holm), which the verdict uses). Teal: higher than the baseline; red: lower; grey: "
                            "no clear difference (the verdict of the comparison). "
                            + "; ".join(f"{c.get('name')}: p (Holm) = {show('p_holm', c['p_holm'])}"
                                        for c in conds if c.get("p_holm") is not None) + ".", fig))
    _paired_items_figure(p, d)
    rows = []
    for i, c in enumerate(conds):
        rows.append([txt(c.get("name")), num(d, f"conditions.{i}.n", ".0f"), num(d, f"conditions.{i}.mean", ".3f"),
                     num(d, f"conditions.{i}.diff", "+.3f"), num(d, f"conditions.{i}.ci_low", "+.3f"),
                     num(d, f"conditions.{i}.ci_high", "+.3f"), _p_cell(d, f"conditions.{i}.p_value"),
                     _p_cell(d, f"conditions.{i}.p_holm"), txt(c.get("verdict"))])
    p.tables.append(Table("Conditions", ["condition", "n", "mean", "difference", "CI low", "CI high", "p",
                                         "p (Holm)", "verdict"], rows,
                          "Difference: mean paired difference to the baseline; CI: "
                          f"{lvl}bootstrap confidence interval ({d.get('ci_method', 'bootstrap')}); p: Wilcoxon "
                          "signed-rank; p (Holm): adjusted for the several comparisons, used by the verdict."))
    for n in d.get("notes") or []:
        p.notes.append(str(n))
    return p


def _page_sweep(d: Mapping) -> Page:
    p = Page()
    snr = _arr(d.get("snr_db"))
    pred = _arr(d.get("predicted_percent")) if d.get("predicted_percent") is not None else None
    key = str(d.get("index") or "index")
    if isinstance(d.get(key), Mapping):  # the envelope-power index: its SNR_env in dB per SNR
        key = f"{key}.snr_env_db"
    idx = _arr(_first_path(d, key))
    name = _name("sepsm_snr_env_db") if key.endswith("snr_env_db") else _name(key)
    targets = list(d.get("targets") or [])
    if d.get("srt_db") is not None:
        p.headline.append(("SRT (predicted)", num(d, "srt_db", ".1f", "dB")))
    if d.get("slope_at_srt_percent_per_db") is not None:
        p.headline.append(("slope (at the SRT)", num(d, "slope_at_srt_percent_per_db", ".1f", "%/dB")))
    new = _mpl()
    fig = new(10.0, 4.8)
    ax = fig.add_subplot(111)
    mp0 = d.get("mapping") if isinstance(d.get("mapping"), Mapping) else None
    rng = mp0.get("index_range") if mp0 else None
    outside = np.zeros(snr.size, dtype=bool)
    if isinstance(rng, (list, tuple)) and len(rng) == 2 and idx.size == snr.size:
        outside = (idx < float(rng[0])) | (idx > float(rng[1]))
    if pred is not None and pred.size:
        ax.plot(snr, pred, "-", color=TEAL, lw=2.0, label="predicted score")
        ax.plot(snr[~outside], pred[~outside], "o", color=TEAL, ms=4.5)
        if outside.any():
            ax.plot(snr[outside], pred[outside], "o", mfc="white", mec=TEAL, ms=5.5,
                    label="extrapolated (outside the fitted index range)")
        ax.set_ylabel("predicted score, % correct")
        ax.set_ylim(-2, 102)
        for t in targets:
            s, lo, hi, pc = t.get("snr_db"), t.get("ci_low"), t.get("ci_high"), t.get("percent")
            if s is None or pc is None:
                continue
            is_srt = abs(pc - 50.0) < 1e-9
            col = COPPER if is_srt else PLUM
            mlo, mhi = t.get("map_ci_low"), t.get("map_ci_high")
            if mlo is not None and mhi is not None:
                ax.axvspan(mlo, mhi, facecolor="none", edgecolor=col, alpha=0.5, hatch="///", lw=0.0)
            if lo is not None and hi is not None:
                ax.axvspan(lo, hi, color=col, alpha=0.15, lw=0)
            ax.plot([s, s], [-2, pc], color=col, lw=1.3, ls="--")
            ax.plot([snr[0], s], [pc, pc], color=col, lw=0.9, ls=":")
            tlo, thi = t.get("total_ci_low"), t.get("total_ci_high")
            if tlo is not None and thi is not None:  # several sentences: the interval to plan with
                ax.errorbar([s], [pc], xerr=[[s - tlo], [thi - s]], fmt="none", ecolor=col, elinewidth=2.2,
                            capsize=5, zorder=4)
            ax.plot([s], [pc], "D", color=col, ms=7, mec="white", zorder=5)
            lab = (f"SRT {s:.1f} dB" if is_srt else f"{pc:g} % at {s:.1f} dB")
            if tlo is not None and thi is not None:
                lab += f"\n(total CI {tlo:.1f} to {thi:.1f} dB)"
            elif lo is not None and hi is not None:
                lab += f"\n(CI {lo:.1f} to {hi:.1f} dB)"
            # up and to the left of the point: above a rising curve, where it is empty
            ax.annotate(lab, (s, pc), xytext=(-12, 12), textcoords="offset points", va="bottom", ha="right",
                        fontsize=9.5, color=col, fontweight="bold" if is_srt else "normal",
                        bbox={"facecolor": "white", "edgecolor": "none", "alpha": 0.6, "pad": 1.5})
        if d.get("srt_db") is None and any(abs((t.get("percent") or 0) - 50.0) < 1e-9 for t in targets):
            ax.text(0.99, 0.04, "SRT (50 %) not reached in the swept range", transform=ax.transAxes,
                    ha="right", va="bottom", fontsize=10, color=BRICK)
        ax.set_title(f"Predicted psychometric function ({name} mapped to % correct)")
        cap = ("Predicted score against SNR; the dashed line marks the predicted speech reception threshold "
               "(SRT, 50 % correct), the shaded strip its confidence interval over noise segments and the hatched "
               "strip the interval from the mapping's own uncertainty"
               + ("; the bar through each target is its total interval (sentences, noise segments and mapping "
                  "together: the interval to plan with)" if any(t.get("total_ci_low") is not None for t in targets)
                  else "")
               + ("; hollow points lie outside the index range the mapping was fitted on (extrapolations)."
                  if outside.any() else "."))
        if outside.any():
            ax.legend(loc="lower right", fontsize=9, frameon=False)
    else:
        sd = _arr(d.get("index_sd")) if d.get("index_sd") is not None else None
        ax.plot(snr, idx, "-o", color=TEAL, lw=2.0, ms=4.5)
        if sd is not None and sd.size == idx.size:
            ax.fill_between(snr, idx - sd, idx + sd, color=TEAL, alpha=0.15, lw=0, label="± 1 SD over segments")
        ax.set_ylabel(f"{name} (mean over noise segments)")
        ax.set_title(f"{name} against SNR (no score mapping given)")
        cap = f"{name} against SNR; give a score mapping to see the predicted psychometric function and SRT."
    ax.set_xlabel("SNR, dB (speech re noise)")
    p.figures.append(_fig("psychometric", cap, fig))
    _sweep_sepsm_figure(p, d)
    rows = []
    for i in range(snr.size):
        r = [num(d, f"snr_db.{i}", ".1f"), num(d, f"{key}.{i}", ".3f")]
        if d.get("index_sd") is not None:
            r.append(num(d, f"index_sd.{i}", ".3f"))
        if pred is not None:
            r.append(num(d, f"predicted_percent.{i}", ".1f"))
        rows.append(r)
    head = [_term("snr_db"), f"{name}"] + ([_term("index_sd")] if d.get("index_sd") is not None else []) + \
        ([_term("predicted_percent")] if pred is not None else [])
    p.tables.append(Table("Sweep", head, rows))
    if targets:
        def extrapolated(t):
            v = t.get("index_value")
            if not (isinstance(rng, (list, tuple)) and len(rng) == 2 and v is not None):
                return ""
            return "extrapolated (outside the fitted index range)" if not rng[0] <= v <= rng[1] else ""

        trow = [[num(d, f"targets.{i}.percent", "g"), num(d, f"targets.{i}.snr_db", ".1f"),
                 num(d, f"targets.{i}.ci_low", ".1f"), num(d, f"targets.{i}.ci_high", ".1f"),
                 num(d, f"targets.{i}.map_ci_low", ".1f"), num(d, f"targets.{i}.map_ci_high", ".1f"),
                 num(d, f"targets.{i}.index_value", ".3f"), num(d, f"targets.{i}.slope_percent_per_db", ".1f"),
                 txt("; ".join(x for x in (t.get("note") or "", extrapolated(t)) if x))]
                for i, t in enumerate(targets)]
        p.tables.append(Table("Targets (95 % intervals: noise segments; mapping)",
                              [_term("target_percent"), _term("snr_db"), f"{_term('segments_ci')} (low)",
                               f"{_term('segments_ci')} (high)", f"{_term('mapping_ci')} (low)",
                               f"{_term('mapping_ci')} (high)", f"{name} (at the target)",
                               _term("slope_percent_per_db"), "note"], trow))
        if (d.get("n_sentences") or 1) > 1:
            srow = [[num(d, f"targets.{i}.percent", "g"), num(d, f"targets.{i}.sentence_sd_db", ".2f"),
                     num(d, f"targets.{i}.sentence_ci_low", ".1f"), num(d, f"targets.{i}.sentence_ci_high", ".1f"),
                     num(d, f"targets.{i}.combined_ci_low", ".1f"), num(d, f"targets.{i}.combined_ci_high", ".1f"),
                     num(d, f"targets.{i}.total_ci_low", ".1f"), num(d, f"targets.{i}.total_ci_high", ".1f")]
                    for i in range(len(targets))]
            p.tables.append(Table(f"Targets over {d['n_sentences']} sentences (95 % intervals)",
                                  [_term("target_percent"), _term("sentence_sd_db")]
                                  + [f"{_term(k)} ({end})" for k in ("sentences_ci", "combined_ci", "total_ci")
                                     for end in ("low", "high")],
                                  srow))
    mp = d.get("mapping") if isinstance(d.get("mapping"), Mapping) else None
    if mp:
        rows = [[Cell("formula"), txt(mp.get("formula"))]]
        params = mp.get("params") if isinstance(mp.get("params"), Mapping) else {}
        rows += [[Cell(html.escape(str(k))), num(d, f"mapping.params.{k}", ".4g")] for k in params]
        if mp.get("source"):
            rows.append([Cell("source"), txt(mp.get("source"))])
        p.tables.append(Table("Score mapping", ["quantity", "value"], rows))
    if d.get("snr_reference_text"):
        act = d.get("activity_factor")
        p.notes.append(f"SNR reference ({d.get('snr_reference', '')}): {d['snr_reference_text']}"
                       + ("." if act is None else f"; activity factor of the speech {100 * act:.1f} %."))
    if d.get("level_convention_text"):
        p.notes.append(f"Level convention ({d.get('level_convention', '')}): {d['level_convention_text']}.")
    for n in d.get("notes") or []:
        p.notes.append(str(n))
    return p


# ---------------------------------------------------------------------------
# envelope-power index (sEPSM), phase-inversion separation, per-item paired plot
# ---------------------------------------------------------------------------

SEPSM_MATERIAL_CAUTION = ("The percent correct of the envelope-power index comes from an ideal observer whose "
                          "parameters were fitted to one sentence material (Jørgensen & Dau 2011; from memory): "
                          "read it as a ranking aid, not as the score of your listeners with your material.")


def _sepsm_section(p: Page, d: Mapping) -> None:
    """The pair page's envelope-power part: SNR_env per band and modulation filter (heat
    map and table), the observer's percent correct with its caution, and, for a phase-
    inverted pair, the output SNR per band of the separated speech and noise."""
    sp = d.get("sepsm") if isinstance(d.get("sepsm"), Mapping) else None
    sep = d.get("separation") if isinstance(d.get("separation"), Mapping) else None
    new = _mpl() if (sp or sep) else None
    if sp:
        if sp.get("snr_env_db") is not None:
            p.headline.append(("SNR_env", num(d, "sepsm.snr_env_db", ".1f", "dB")))
        grid = _arr(sp.get("snr_env_bands"))
        bands = [float(b) for b in sp.get("bands_hz") or []]
        mods = [float(m) for m in sp.get("modulation_hz") or []]
        if grid.ndim == 2 and grid.shape == (len(bands), len(mods)) and grid.size:
            with np.errstate(divide="ignore", invalid="ignore"):
                g_db = 10.0 * np.log10(grid)
            fig = new(11.0, 5.2)
            ax = fig.add_subplot(111)
            ax.grid(False)
            shown = np.ma.masked_invalid(g_db)
            finite = g_db[np.isfinite(g_db)]
            hi = max(10.0, float(np.ceil(finite.max() / 5) * 5)) if finite.size else 10.0
            im = ax.imshow(shown, aspect="auto", origin="lower", cmap=_heat_cmap(), vmin=-30.0, vmax=hi,
                           interpolation="nearest")
            ax.set_facecolor("#ececec")
            ax.set_xticks(range(len(mods)), ["≤ 1 (low-pass)" if i == 0 else f"{m:g}" for i, m in enumerate(mods)])
            step = max(1, len(bands) // 11)
            ax.set_yticks(range(0, len(bands), step), [_band_label(b) for b in bands[::step]])
            ax.set_xlabel(_term("modulation_filter_hz"))
            ax.set_ylabel(_term("gammatone_band_hz"))
            cb = fig.colorbar(im, ax=ax, fraction=0.04, pad=0.02)
            cb.set_label("SNR_env, dB (floor -30 dB)")
            ax.set_title("Envelope-power SNR per audio band and modulation filter")
            p.figures.append(_fig(
                "sepsm_snr_env", "SNR_env = (P_env,S+N - P_env,N) / P_env,N in each gammatone band (rows) and "
                "modulation filter (columns), in dB: how far the envelope power of the processed speech in noise "
                "rises above that of the processed noise alone. Grey cells: filters not used in that band (a "
                "filter counts only below a quarter of the band's centre frequency). The index is the root sum "
                "of squares over all cells.", fig))
        rows = [[Cell(_band_label(b)), num(d, f"sepsm.band_snr_env_db.{k}", ".1f", "dB")]
                for k, b in enumerate(bands)]
        if rows:
            p.tables.append(Table("Envelope-power index per gammatone band", ["band", "SNR_env (all filters)"],
                                  rows, "Root sum of squares of the band's SNR_env over its modulation filters."))
        summary = [[Cell("SNR_env (all bands and filters)"), num(d, "sepsm.snr_env_db", ".2f", "dB")],
                   [Cell("percent correct (ideal observer, material-specific)"),
                    num(d, "sepsm.percent_correct", ".1f", "% correct")]]
        p.tables.append(Table("Envelope-power index (sEPSM)", ["quantity", "value"], summary,
                              "Jørgensen & Dau 2011, JASA 130(3):1475-1487."))
        p.notes.append(SEPSM_MATERIAL_CAUTION)
        for n in sp.get("notes") or []:
            p.notes.append(f"envelope-power index: {n}")
    if sep:
        bands = [float(b) for b in sep.get("bands_hz") or []]
        snr = _arr(sep.get("output_snr_db"))
        if bands and snr.size == len(bands):
            fig = new(10.0, 4.0)
            ax = fig.add_subplot(111)
            x = np.arange(len(bands))
            ok = np.isfinite(snr)
            ax.bar(x[ok], snr[ok], 0.6, color=[TEAL if v >= 0 else BRICK for v in snr[ok]])
            for xi in x[~ok]:
                ax.text(xi, 0, "absent", ha="center", va="bottom", fontsize=9, color=MUTED)
            for xi, v in zip(x[ok], snr[ok]):
                ax.annotate(f"{v:+.1f}", (xi, v), xytext=(0, 3 if v >= 0 else -12), textcoords="offset points",
                            ha="center", fontsize=9)
            ax.axhline(0, color=INK, lw=1.0)
            if sep.get("broadband_snr_db") is not None:
                ax.axhline(float(sep["broadband_snr_db"]), color=COPPER, lw=1.2, ls="--",
                           label=f"broadband {float(sep['broadband_snr_db']):+.1f} dB")
                ax.legend(loc="upper left", fontsize=9, frameon=False)
            ax.set_xticks(x, [_band_label(b) for b in bands])
            ax.set_xlabel(_name("octave_band"))
            ax.set_ylabel(_term("output_snr_db"))
            ax.grid(axis="x", visible=False)
            lo, hi = float(np.nanmin(np.append(snr[ok], 0.0))), float(np.nanmax(np.append(snr[ok], 0.0)))
            ax.set_ylim(lo - 0.15 * (hi - lo or 1.0) - 1.0, hi + 0.2 * (hi - lo or 1.0) + 1.0)
            ax.set_title("Output SNR per band: processed speech over processed noise (phase inversion)")
            p.figures.append(_fig(
                "separation_snr", "The processed speech ((a + b)/2) and the processed noise ((a - b)/2), "
                "separated from the outputs for speech + noise (a) and speech - noise (b) (Hagerman & Olofsson "
                "2004), compared band by band: the SNR after the processing. Exact for linear processing, an "
                "approximation for nonlinear processing.", fig))
        rows = [[Cell(_band_label(b)), num(d, f"separation.output_snr_db.{k}", "+.1f", "dB")]
                for k, b in enumerate(bands)]
        rows.append([Cell("broadband"), num(d, "separation.broadband_snr_db", "+.1f", "dB")])
        p.tables.append(Table("Output SNR after the processing (phase inversion)",
                              ["band", _term("output_snr_db")], rows,
                              "Counterpart check: peak correlation with the clean speech of the derived speech "
                              f"{_fmt_or_dash(sep.get('speech_correlation'))} and of the derived noise "
                              f"{_fmt_or_dash(sep.get('noise_correlation'))}."))


def _sweep_sepsm_figure(p: Page, d: Mapping) -> None:
    """The sweep page's envelope-power part: SNR_env per gammatone band against the SNR,
    and the caution on the observer's material."""
    sp = d.get("sepsm") if isinstance(d.get("sepsm"), Mapping) else None
    if not sp:
        return
    p.notes.append(SEPSM_MATERIAL_CAUTION)
    p.notes.append("On the score figure the line joins the swept points straight, while each target's SNR is "
                   "where the SNR_env curve (straight between the points) reaches the observer's value for that "
                   "score; the observer is steep, so a marker can sit beside the line. A finer SNR step brings "
                   "them together.")
    grid = _arr(sp.get("band_snr_env_db"))
    snr = _arr(d.get("snr_db"))
    bands = [float(b) for b in sp.get("bands_hz") or []]
    if grid.ndim != 2 or grid.shape != (snr.size, len(bands)) or not grid.size:
        return
    new = _mpl()
    fig = new(10.0, 4.8)
    ax = fig.add_subplot(111)
    ax.grid(False)
    step_snr = float(np.median(np.diff(snr))) if snr.size > 1 else 1.0
    finite = grid[np.isfinite(grid)]
    hi = max(10.0, float(np.ceil(finite.max() / 5) * 5)) if finite.size else 10.0
    im = ax.imshow(np.ma.masked_invalid(grid.T), aspect="auto", origin="lower", cmap=_heat_cmap(), vmin=-30.0,
                   vmax=hi, interpolation="nearest",
                   extent=(snr[0] - step_snr / 2, snr[-1] + step_snr / 2, -0.5, len(bands) - 0.5))
    step = max(1, len(bands) // 11)
    ax.set_yticks(range(0, len(bands), step), [_band_label(b) for b in bands[::step]])
    ax.set_xlabel(f"{_term('snr_db')} (speech re noise)")
    ax.set_ylabel(_term("gammatone_band_hz"))
    cb = fig.colorbar(im, ax=ax, fraction=0.04, pad=0.02)
    cb.set_label(_term("band_snr_env_db"))
    ax.set_title("Envelope-power SNR per band against the SNR (mean over noise segments)")
    p.figures.append(_fig(
        "sepsm_bands", "SNR_env of each gammatone band (root sum of squares over its modulation filters), in dB, "
        "at each swept SNR: the bands that carry the index. The index combines all bands, so a few unmasked bands "
        "can carry it where the noise is weak in them.", fig))


def _fmt_or_dash(v: Any, spec: str = ".2f") -> str:
    return "—" if not isinstance(v, (int, float)) else format(float(v), spec)


def _index_name(index: str) -> str:
    """How an index column is named on the paired plot: its header in the vocabulary."""
    from .labels import TERMS, header

    return header(index) if index in TERMS else index.upper()


def _paired_items_figure(p: Page, d: Mapping) -> None:
    """The compare page's per-item paired plot: each item's value under every condition
    (a line per item) and each item's difference to the baseline with the mean and its
    interval."""
    items = [it for it in d.get("items") or [] if isinstance(it, Mapping) and isinstance(it.get("values"), Mapping)]
    conds = [str(c.get("name")) for c in d.get("conditions") or [] if isinstance(c, Mapping)]
    if not items or len(conds) < 2:
        return
    base = str(d.get("baseline") or conds[0])
    others = [c for c in conds if c != base]
    order = [base] + others
    index = _index_name(str(d.get("index") or "index"))
    new = _mpl()
    fig = new(11.0, 4.6)
    ax, ax2 = fig.add_subplot(121), fig.add_subplot(122)
    x = np.arange(len(order))
    vals = np.array([[it["values"].get(c) if it["values"].get(c) is not None else np.nan for c in order]
                     for it in items], dtype=float)
    for row in vals:
        ok = np.isfinite(row)
        ax.plot(x[ok], row[ok], "-", color=MUTED, lw=0.9, alpha=0.7)
        ax.plot(x[ok], row[ok], "o", color=MUTED, ms=3.5, alpha=0.8)
    with np.errstate(invalid="ignore"):
        means = np.nanmean(vals, axis=0)
    ax.plot(x, means, "-D", color=TEAL, lw=2.2, ms=7, mec="white", label="mean over items")
    ax.set_xticks(x, order)
    ax.set_xlim(-0.4, len(order) - 0.6)
    ax.set_ylabel(index)
    ax.set_title("Each item under each condition")
    ax.legend(loc="best", fontsize=9, frameon=False)
    ax.grid(axis="x", visible=False)
    rng = np.random.default_rng(0)
    cstats = {str(c.get("name")): c for c in d.get("conditions") or [] if isinstance(c, Mapping)}
    for k, c in enumerate(others):
        diff = vals[:, order.index(c)] - vals[:, 0]
        diff = diff[np.isfinite(diff)]
        jitter = rng.uniform(-0.12, 0.12, diff.size)
        ax2.plot(k + jitter, diff, "o", color=MUTED, ms=4, alpha=0.8)
        st = cstats.get(c, {})
        if st.get("ci_low") is not None and st.get("ci_high") is not None:
            ax2.plot([k + 0.3, k + 0.3], [st["ci_low"], st["ci_high"]], color=COPPER, lw=3.0,
                     solid_capstyle="butt")
        if st.get("diff") is not None:
            ax2.plot([k + 0.3], [st["diff"]], "o", color=COPPER, ms=8, mec="white")
    ax2.axhline(0, color=INK, lw=1.0)
    ax2.set_xticks(range(len(others)), others)
    ax2.set_xlim(-0.5, len(others) - 0.3)
    ax2.set_ylabel(f"difference ({index} re '{base}')")
    ax2.set_title("Each item's difference; mean and its interval")
    ax2.grid(axis="x", visible=False)
    level = d.get("confidence")
    lvl = f"{float(level) * 100:g} % " if isinstance(level, (int, float)) else ""
    p.figures.append(_fig(
        "paired_items", f"Left: every item's {index} under each condition, a grey line joining an item's values "
        "(lines that cross show items the conditions rank differently); teal: the mean over items. Right: "
        f"each item's difference to the baseline '{base}' (grey dots, spread sideways to be seen), with the mean "
        f"difference (copper dot) and its {lvl}bootstrap interval (copper bar).", fig))


# ---------------------------------------------------------------------------
# fitmap
# ---------------------------------------------------------------------------

def _page_fitmap(d: Mapping) -> Page:
    p = Page()
    f = d.get("fit_data") if isinstance(d.get("fit_data"), Mapping) else {}
    key = str(d.get("index") or "index")
    params = d.get("params") if isinstance(d.get("params"), Mapping) else {}
    if params.get("x50") is not None:
        from .labels import significant_decimals

        p.headline.append(("x50", num(d, "params.x50", f".{significant_decimals(params['x50'])}f")))
    if d.get("interval_method"):
        p.headline.append(("intervals", txt(d["interval_method"])))
    if f.get("curve_index") is not None and f.get("index_values") is not None:
        new = _mpl()
        fig = new(10.0, 6.4)
        ax, axr = fig.add_subplot(211), fig.add_subplot(212)
        gx, gy = _arr(f["curve_index"]), _arr(f["curve_percent"])
        if f.get("band_low") is not None:
            ax.fill_between(gx, _arr(f["band_low"]), _arr(f["band_high"]), color=TEAL, alpha=0.18, lw=0,
                            label=f"{100 * float(f.get('ci_level', 0.95)):g} % band ({f.get('interval_method')})")
        ax.plot(gx, gy, "-", color=TEAL, lw=2.0, label="fitted mapping")
        x, y = _arr(f["index_values"]), _arr(f["observed_percent"])
        lo, hi = _arr(f["observed_low"]), _arr(f["observed_high"])
        ax.errorbar(x, y, yerr=[y - lo, hi - y], fmt="o", color=COPPER, ms=5, capsize=3,
                    label="pilot rows (exact binomial 95 % intervals)")
        ax.set_ylim(-2, 102)
        ax.set_ylabel("% correct")
        ax.set_title(f"Fitted mapping from {key.upper()} to % correct")
        ax.legend(loc="lower right", fontsize=9, frameon=False)
        res = _arr(f["pearson_residual"])
        axr.axhline(0.0, color=INK, lw=0.8)
        for v in (-2.0, 2.0):
            axr.axhline(v, color=BRICK, lw=0.8, ls=":")
        axr.plot(x, res, "o", color=COPPER, ms=5)
        axr.set_xlim(ax.get_xlim())
        axr.set_xlabel(_name(key))
        axr.set_ylabel("Pearson residual")
        p.figures.append(_fig("mapping_fit", "The fitted mapping with its pointwise band, the pilot rows with "
                                "their exact binomial intervals (top), and the Pearson residuals (bottom; dotted: "
                                "+-2).", fig))
        rows = [[num(d, f"fit_data.index_values.{i}", ".4g"), num(d, f"fit_data.correct.{i}", "g"),
                 num(d, f"fit_data.trials.{i}", "g"), num(d, f"fit_data.observed_percent.{i}", ".1f"),
                 num(d, f"fit_data.observed_low.{i}", ".1f"), num(d, f"fit_data.observed_high.{i}", ".1f"),
                 num(d, f"fit_data.fitted_percent.{i}", ".1f"), num(d, f"fit_data.pearson_residual.{i}", ".2f")]
                for i in range(x.size)]
        obs = _term("observed_percent")
        p.tables.append(Table("Pilot rows", [_name(key), "correct", "trials", obs, f"{obs} (95 % low)",
                                             f"{obs} (95 % high)", _term("fitted_percent"), "Pearson residual"],
                              rows))
    prow = []
    for k in params:
        from .labels import significant_decimals

        spec = f".{significant_decimals(params[k])}f"  # the estimate and its interval with the same decimals
        prow.append([Cell(html.escape(str(k))), num(d, f"params.{k}", spec), num(d, f"ci.{k}.0", spec),
                     num(d, f"ci.{k}.1", spec)])
    if prow:
        lvl = f"{100 * float(d.get('ci_level') or 0.95):g} %"
        p.tables.append(Table("Parameters", ["parameter", "estimate", f"interval ({lvl}, low)",
                                             f"interval ({lvl}, high)"], prow))
    for n in d.get("notes") or []:
        p.notes.append(str(n))
    return p


# ---------------------------------------------------------------------------
# inspect
# ---------------------------------------------------------------------------

def _voiced_spans(t: np.ndarray, voiced: np.ndarray, hop: float) -> list[tuple[float, float]]:
    v = np.concatenate([[False], np.asarray(voiced, bool), [False]])
    dv = np.diff(v.astype(np.int8))
    starts, ends = np.flatnonzero(dv == 1), np.flatnonzero(dv == -1)
    return [(float(t[s] - hop / 2), float(t[e - 1] + hop / 2)) for s, e in zip(starts, ends)]


def _page_inspect(d: Mapping) -> Page:
    p = Page()
    vf = d.get("voiced_fraction")
    p.headline = [("duration", num(d, "duration_s", ".2f", "s")),
                  ("voiced fraction", Cell("—" if vf is None else f"{100 * vf:.0f} %", "voiced_fraction")),
                  ("F0 (median)", num(d, "f0_median_hz", ".1f", "Hz")),
                  ("dominant modulation rate", num(d, "modulation_peak_hz", ".2f", "Hz"))]
    new = _mpl()
    bands = list(d.get("bands_hz", []))
    # figure data of the result: JSON lists (null for NaN) back to float arrays
    ex = {k: (_arr(v) if isinstance(v, list) else v) for k, v in (d.get("figure_data") or {}).items()}
    # 1. waveform + envelope, voicing + F0
    if "wave_t_s" in ex and "f0_times_s" in ex:
        fig = new(11.0, 5.6)
        ax1, ax2 = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": [1.3, 1.0], "hspace": 0.32})
        tw = np.asarray(ex["wave_t_s"])
        ax1.fill_between(tw, ex["wave_min"], ex["wave_max"], color="#9fb4c4", lw=0, label="waveform")
        te, env = np.asarray(ex["envelope_t_s"]), np.asarray(ex["envelope"])
        dur = float(d.get("duration_s") or tw[-1])
        long_view = dur > LONG_VIEW_S
        ax1.plot(te, env, color=COPPER, lw=0.6 if long_view else 1.5, label="envelope (< 50 Hz)")
        if not long_view:
            ax1.plot(te, -env, color=COPPER, lw=1.5)
        ax1.set_ylabel("amplitude, full scale")
        ax1.legend(loc="lower right", ncols=2, fontsize=9, bbox_to_anchor=(1.0, 1.0), borderaxespad=0.2)
        ax1.set_title("Waveform and slow envelope" + (" (overview)" if long_view else ""))
        t0 = np.asarray(ex["f0_times_s"])
        voiced = np.asarray(ex["voiced"], bool)
        hop = float(d.get("frame_hop_s") or (t0[1] - t0[0] if t0.size > 1 else 0.01))
        for a, b in _voiced_spans(t0, voiced, hop):
            ax2.axvspan(a, b, color=TEAL, alpha=0.13, lw=0)
            if not long_view:
                ax1.axvspan(a, b, color=TEAL, alpha=0.08, lw=0)
        f0 = np.asarray(ex["f0_hz"], float)
        ax2.plot(t0, f0, ".", color=TEAL, ms=1.5 if long_view else 3.5, label="F0 (voiced frames)")
        lo, hi = d.get("f0_search_hz", [std.F0_MIN_HZ, std.F0_MAX_HZ])
        ax2.set_yscale("log")
        ax2.set_ylim(lo * 0.9, hi * 1.1)
        ticks = [t for t in (50, 70, 100, 150, 200, 300, 500) if lo * 0.9 <= t <= hi * 1.1]
        ax2.set_yticks(ticks, [f"{t:g}" for t in ticks])
        ax2.minorticks_off()
        med = d.get("f0_median_hz")
        if med:
            ax2.axhline(med, color=PLUM, lw=1.0, ls="--", label=f"median {med:.1f} Hz")
        from matplotlib.patches import Patch

        h, lab = ax2.get_legend_handles_labels()
        h.append(Patch(color=TEAL, alpha=0.25))
        lab.append(f"voiced ({100 * float(d.get('voiced_fraction') or 0):.0f} % of the time)")
        ax2.legend(h, lab, loc="lower right", ncols=3, fontsize=9, bbox_to_anchor=(1.0, 1.0), borderaxespad=0.2)
        ax2.set_ylabel("F0, Hz (log scale)")
        ax2.set_xlabel("time, s")
        ax2.set_xlim(0, float(d.get("duration_s") or tw[-1]))
        ax2.set_title(f"Voicing and F0 (YIN, {lo:g}-{hi:g} Hz)")
        p.figures.append(_fig("waveform_f0", "Top: waveform (grey) with its envelope below 50 Hz (copper). "
                                "Bottom: voiced stretches (shaded) and the fundamental frequency of each voiced "
                                "10 ms frame."
                                + (f" The recording is longer than {LONG_VIEW_S:g} s, so this is an overview; "
                                   "look closer at an excerpt with 'envpredict inspect --start S --duration S'."
                                   if long_view else ""), fig))
    # 2. three levels of one band, zoomed
    if "excerpt_t_s" in ex and len(ex["excerpt_t_s"]):
        fig = new(11.0, 3.9)
        ax = fig.add_subplot(111)
        t = (np.asarray(ex["excerpt_t_s"]) - ex["excerpt_t_s"][0]) * 1000.0
        band = np.asarray(ex["excerpt_band"])
        amp = np.asarray(ex["excerpt_amplitude"])
        slow = np.asarray(ex["excerpt_slow"])
        ax.plot(t, band, color="#9fb4c4", lw=0.8, label="fine structure (band signal, > 500 Hz)")
        ax.plot(t, amp, color=TEAL, lw=1.6, label="envelope + periodicity (amplitude envelope, < 500 Hz)")
        ax.plot(t, slow, color=COPPER, lw=2.4, label="slow envelope (< 50 Hz)")
        ax.set_xlabel(f"time, ms (from {float(ex['excerpt_t_s'][0]):.3f} s)")
        ax.set_ylabel("amplitude, full scale")
        peak = float(np.max(np.abs(band))) if band.size else 1.0
        ax.set_ylim(-1.15 * peak, 1.6 * peak)
        ax.legend(loc="upper left", ncols=3, fontsize=9)
        fb = float(ex.get("excerpt_band_hz", 1000.0))
        ax.set_title(f"The three timing levels in the {_band_label(fb)} band ({t[-1]:.0f} ms excerpt)")
        p.figures.append(_fig("three_levels", "One octave band over a short stretch: the carrier (grey, fine "
                                "structure), its amplitude envelope (teal, which beats at the voice's F0: "
                                "periodicity) and the slow envelope that carries syllables (copper).", fig))
    # 3. modulation depth per band by timescale
    env_m, per_m = _arr(d.get("envelope_modulation")), _arr(d.get("periodicity_modulation"))
    if bands and env_m.size:
        fig = new(11.0, 4.2)
        ax = fig.add_subplot(111)
        x = np.arange(len(bands))
        w = 0.38
        ax.bar(x - w / 2, env_m, w, color=COPPER, label="envelope (< 50 Hz)")
        ax.bar(x + w / 2, per_m, w, color=TEAL, label="periodicity (50-500 Hz)")
        car = _arr(d.get("carrier_hz"))
        top = float(np.nanmax(np.concatenate([env_m, per_m]))) if np.isfinite(env_m).any() else 1.0
        for i in x:
            if i < car.size and np.isfinite(car[i]):
                c = car[i]
                lab = f"carrier\n{c:.0f} Hz" if c < 1000 else f"carrier\n{c / 1000:.1f} kHz"
                ax.text(i, top * 1.08, lab, ha="center", va="bottom", fontsize=8.5,
                        color=STEEL if c > std.TIMESCALE_PERIODICITY_MAX_HZ else MUTED)
        ax.set_ylim(0, top * 1.42)
        ax.set_xticks(x, [_band_label(f) for f in bands])
        ax.set_xlabel("octave band (carrier above 500 Hz: fine structure, blue)")
        ax.set_ylabel("modulation index\n(1 = full sinusoidal modulation)")
        ax.legend(loc="upper left", ncols=2, fontsize=9, bbox_to_anchor=(0.0, 1.0))
        ax.grid(axis="x", visible=False)
        ax.set_title("Where the envelope and the periodicity are carried, per octave band")
        p.figures.append(_fig("timescales_per_band", "Depth of the slow envelope modulation (copper, below 50 Hz) "
                                "and of the periodicity modulation (teal, 50-500 Hz) of each band's amplitude "
                                "envelope, as sqrt(2) x SD / mean: 1 for a full sinusoidal modulation; values above "
                                "1 are a peaky envelope with pauses, as in running speech. Above the bars: the "
                                "band's carrier rate.", fig))
    # 4. modulation spectra
    spec = _arr(d.get("modulation_spectra"))
    mb = list(d.get("modulation_bands_hz", std.MODULATION_BANDS_HZ))
    if spec.size and bands:
        fig = new(11.0, 4.8)
        gs = fig.add_gridspec(1, 2, width_ratios=[1.5, 1.0], wspace=0.45)
        ax = fig.add_subplot(gs[0])
        ax.grid(False)
        vmax = float(np.nanmax(spec)) if np.isfinite(spec).any() else 1.0
        cm = _heat_cmap().with_extremes(bad="#eeeeee")
        im = ax.imshow(np.ma.masked_invalid(spec), aspect="auto", origin="lower", cmap=cm, vmin=0, vmax=vmax)
        ax.set_yticks(range(len(bands)), [_band_label(f) for f in bands])
        step = 3
        ax.set_xticks(range(0, len(mb), step), [f"{f:g}" for f in mb[::step]])
        ax.set_xlabel("modulation frequency, Hz (one-third-octave modulation bands)")
        ax.set_ylabel("octave band")
        cb = fig.colorbar(im, ax=ax, fraction=0.05, pad=0.02)
        cb.set_label("modulation index (1 = full sinusoidal modulation;\nabove 1: peaky envelope with pauses)")
        ax.set_title("Envelope modulation spectrum per band")
        ax2 = fig.add_subplot(gs[1])
        fq = np.asarray(ex.get("modulation_freqs_hz", []), float)
        comb = np.asarray(ex.get("modulation_psd_combined", []), float)
        if fq.size > 1 and comb.shape == fq.shape:
            sel = (fq >= 0.4) & (fq <= 40)
            y = fq[sel] * comb[sel]
            y = y / np.max(y) if np.max(y) > 0 else y
            ax2.fill_between(fq[sel], 0, y, color=TEAL, alpha=0.25, lw=0)
            ax2.plot(fq[sel], y, color=TEAL, lw=1.4)
            ax2.set_ylabel("relative power (per unit log-frequency)")
            ax2.set_ylim(0, 1.15)
        else:
            # from the JSON alone: the mean modulation index over the bands
            ok = np.isfinite(spec)
            mean = np.where(ok.any(axis=0), np.where(ok, spec, 0.0).sum(axis=0) / np.maximum(ok.sum(axis=0), 1),
                            np.nan)
            ax2.plot(mb, mean, "-o", ms=3, color=TEAL, lw=1.4)
            ax2.set_ylabel("modulation index (mean over the bands)")
        ax2.set_xscale("log")
        ticks = [0.5, 1, 2, 4, 8, 16, 32]
        ax2.set_xticks(ticks, [f"{t:g}" for t in ticks])
        ax2.minorticks_off()
        ax2.set_xlabel("modulation frequency, Hz")
        pk = d.get("modulation_peak_hz")
        if pk:
            ax2.axvline(pk, color=INK, lw=1.2, ls="--")
            ax2.annotate(f"peak {pk:.2f} Hz", (pk, 1.0), xycoords=("data", "axes fraction"), xytext=(6, -16),
                         textcoords="offset points", fontsize=10, fontweight="bold")
        ax2.set_title("All bands together, with the dominant rate")
        p.figures.append(_fig("modulation_spectra", "Modulation spectrum of each band's intensity envelope: "
                                "left as modulation indices in one-third-octave modulation bands per octave band "
                                "(sqrt(2 x power) of the envelope normalised by its mean: 1 for a full sinusoidal "
                                "modulation, above 1 for speech with pauses; grey: too short to resolve); right, the "
                                "intensity-weighted sum over the bands as power "
                                "per unit log-frequency, with its dominant rate (the syllable rate for running "
                                "speech).", fig))
    # tables
    rows = [[Cell(label), num(d, key, spec, unit)] for label, key, spec, unit in (
        ("duration", "duration_s", ".2f", "s"), ("sample rate", "fs", ".0f", "Hz"),
        ("voiced fraction", "voiced_fraction", ".0%", ""), ("median F0", "f0_median_hz", ".1f", "Hz"),
        ("F0 10th percentile", "f0_p10_hz", ".1f", "Hz"), ("F0 90th percentile", "f0_p90_hz", ".1f", "Hz"),
        ("dominant modulation rate", "modulation_peak_hz", ".2f", "Hz"),
        ("spectral resolution", "modulation_resolution_hz", ".3f", "Hz"))]
    p.tables.append(Table("Summary", ["quantity", "value"], rows))
    rows = [[Cell(_band_label(fc)), num(d, f"band_level_db.{k}", ".1f"), num(d, f"envelope_modulation.{k}", ".2f"),
             num(d, f"periodicity_modulation.{k}", ".2f"), num(d, f"carrier_hz.{k}", ".0f"),
             num(d, f"band_peak_hz.{k}", ".2f")] for k, fc in enumerate(bands)]
    p.tables.append(Table("Per octave band", ["band", "level re total, dB", "envelope modulation (< 50 Hz)",
                                              "periodicity modulation (50-500 Hz)", "carrier, Hz",
                                              "modulation peak, Hz"], rows))
    if spec.size:
        rows = [[Cell(_band_label(fc))] + [num(d, f"modulation_spectra.{k}.{j}", ".2f") for j in range(len(mb))]
                for k, fc in enumerate(bands)]
        p.tables.append(Table("Envelope modulation spectra (modulation index)", ["band"] + [f"{f:g}" for f in mb],
                              rows, "Columns: centre of each 1/3-octave modulation band, Hz. A dash: the "
                              "recording is too short to resolve that band."))
    return p


# ---------------------------------------------------------------------------
# survey
# ---------------------------------------------------------------------------

def _rule_value(rule: str) -> float:
    return float(str(rule).split()[-1])


def _survey_chart(d: Mapping) -> Figure:
    """STI of every position (mean of its repeats, the repeats as small marks), grouped
    by zone, over the qualification bands, with each required value as a line."""
    from .sti import format_index

    new = _mpl()
    positions = list(d["positions"])
    zones = list(dict.fromkeys(p["zone"] for p in positions))
    n = len(positions)
    fig = new(max(8.0, min(11.0, 2.0 + 0.9 * n)), 5.0)
    ax = fig.add_subplot(111)
    ax.grid(axis="x", visible=False)
    lo_y = min([v for p in positions for v in p["sti_values"]] + [0.40]) - 0.04
    hi_y = max([v for p in positions for v in p["sti_values"]] + [0.70]) + 0.04
    # qualification bands as pale stripes, labelled at the right
    top = 1.0
    for k, (lab, lo, _nom) in enumerate(std.QUALIFICATION_BANDS):
        ax.axhspan(lo, top, color=GRID if k % 2 else PAPER, alpha=0.9, zorder=0, lw=0)
        mid = (max(lo, lo_y) + min(top, hi_y)) / 2
        if lo_y < mid < hi_y and min(top, hi_y) - max(lo, lo_y) > 0.012:
            ax.text(1.005, mid, lab, transform=ax.get_yaxis_transform(), fontsize=8.5, color=MUTED,
                    va="center", ha="left")
        top = lo
    x = np.arange(n)
    colours = {z: BAND_COLOURS[(2 * i + 4) % 7] for i, z in enumerate(zones)}
    for i, p in enumerate(positions):
        c = colours[p["zone"]]
        if p["sti_values"]:
            ax.plot([i] * len(p["sti_values"]), p["sti_values"], "_", color=c, ms=14, mew=1.6, zorder=3)
        if p["sti_mean"] is not None:
            ax.plot([i], [p["sti_mean"]], "o", color=c, ms=9, zorder=4, mec="white", mew=1.2)
        else:
            ax.text(i, lo_y + 0.01, "not\nscored", ha="center", va="bottom", fontsize=8, color=BRICK)
    reqs = list(d.get("requirements") or [])
    styles = ["--", ":", "-.", (0, (5, 1, 1, 1))]
    for k, r in enumerate(reqs):
        v = _rule_value(r)
        ax.axhline(v, color=BRICK if k == 0 else INK, lw=1.5, ls=styles[k % len(styles)], zorder=2,
                   label=f"required: {r}")
    # zone separators and names
    start = 0
    for z in zones:
        count = sum(1 for p in positions if p["zone"] == z)
        if start:
            ax.axvline(start - 0.5, color=MUTED, lw=0.8, zorder=1)
        zd = next((zz for zz in d["zones"] if zz["zone"] == z), {})
        verdict = (zd.get("verdict") or "").upper()
        ax.text(start + (count - 1) / 2, 1.01, f"{z}" + (f"\n{verdict}" if verdict else ""),
                transform=ax.get_xaxis_transform(), ha="center", va="bottom", fontsize=9.5 if count > 1 else 8.5,
                fontweight="bold", color=colours[z], linespacing=1.15)
        start += count
    ax.set_xticks(x, [p["position"] for p in positions], rotation=30 if n > 6 else 0,
                  ha="right" if n > 6 else "center")
    ax.set_xlim(-0.6, n - 0.4)
    ax.set_ylim(lo_y, hi_y)
    ax.set_ylabel("STI (dot: mean of repeats; dashes: repeats)")
    if reqs:
        ax.legend(loc="lower right", fontsize=9, framealpha=0.95)
    worst = [p for p in positions if p["sti_mean"] is not None]
    cap = ("STI at every position (dot: mean of its repeats; dashes: the repeats), one colour per zone, grouped "
           "by zone (with its verdict), over the qualification bands of IEC 60268-16 Annex F (stripes, labels at "
           "the right)")
    if reqs:
        cap += "; the lines are the required values"
    if worst:
        w = min(worst, key=lambda p: p["sti_mean"])
        ref = _rule_value(reqs[0]) if reqs else std.VOICE_ALARM_TARGET_STI
        cap += f". Lowest position: {w['zone']}, {w['position']} ({format_index(w['sti_mean'], ref)})"
    return _fig("positions", cap + ".", fig)


def _page_survey(d: Mapping) -> Page:
    from .sti import format_index

    reqs = list(d.get("requirements") or [])
    ref = max((_rule_value(r) for r in reqs), default=std.VOICE_ALARM_TARGET_STI)
    zones = list(d.get("zones") or [])
    p = Page()
    for z in zones:
        verdict = z.get("verdict")
        p.headline.append((f"zone ({z['zone']})", Cell(html.escape((verdict or "no requirement").upper()),
                                           cls={"pass": "pass", "fail": "fail"}.get(verdict or "", ""))))
    p.figures.append(_survey_chart(d))

    def sti_cell(path: str, value, req: float = ref) -> Cell:
        if value is None:
            return Cell("—", path, "na")
        return Cell(format_index(value, req), path)

    rows = []
    for i, z in enumerate(zones):
        checks = "; ".join(
            f"{c['rule']}: {'—' if c['value'] is None else format_index(c['value'], _rule_value(c['rule']))} "
            f"{'holds' if c['holds'] else 'fails' if c['holds'] is False else '(not judged: ' + c['reason'] + ')'}"
            for c in z.get("checks", []))
        below = "; ".join(f"below {b['rule'].split()[-1]}: {', '.join(b['positions'])}"
                          for b in z.get("below", []) if b["positions"])
        rows.append([txt(z["zone"]), Cell(str(z["positions"])), sti_cell(f"zones.{i}.sti_mean", z["sti_mean"]),
                     num(d, f"zones.{i}.sti_sd", ".3f"), sti_cell(f"zones.{i}.sti_min", z["sti_min"]),
                     sti_cell(f"zones.{i}.sti_max", z["sti_max"]),
                     Cell(html.escape((z.get("verdict") or "—").upper()),
                          cls={"pass": "pass", "fail": "fail"}.get(z.get("verdict") or "", "")),
                     txt(z.get("decided_by")), txt(checks or "—"), txt(below or "none")])
    p.tables.append(Table("Zones", ["zone", "positions", "mean", "sd", "min", "max", "verdict", "decided by",
                                    "requirements", "positions below"], rows,
                          "Statistics of the position means (each position counts once); sd: sample standard "
                          "deviation. Verdicts are taken on unrounded values."))
    rows = []
    for i, q in enumerate(d.get("positions") or []):
        rows.append([txt(q["zone"]), txt(q["position"]), Cell(str(q["repeats"])),
                     sti_cell(f"positions.{i}.sti_mean", q["sti_mean"]), num(d, f"positions.{i}.sti_sd", ".3f"),
                     num(d, f"positions.{i}.sti_spread", ".3f"), txt(q.get("rating")),
                     txt(", ".join(format_index(v, ref) for v in q["sti_values"]) or "—"),
                     txt(", ".join(str(r) for r in q["failed_rows"]) or "")])
    p.tables.append(Table("Positions", ["zone", "position", "repeats", "STI mean", "sd", "spread", "qualification band",
                                        "repeats' STI", "rows not scored"], rows))
    for f in d.get("failures") or []:
        p.notes.append(f"Row {f['row']} could not be scored: {f['error']}")
    p.notes += [str(n) for n in d.get("notes") or []]
    return p


# ---------------------------------------------------------------------------
# design
# ---------------------------------------------------------------------------

def _design_map(d: Mapping) -> Figure:
    """The STI over the plan (raster of the grid in the colours of the qualification bands),
    the requirement's contour, the loudspeakers (triangles, aim as a line) and the listeners."""
    from matplotlib.colors import BoundaryNorm, ListedColormap

    from .sti import format_index

    new = _mpl()
    req = float(d["requirement"])
    g = d.get("grid")
    edges = [0.0] + [lo for _lab, lo, _n in reversed(std.QUALIFICATION_BANDS) if lo > 0] + [1.0]
    labels = [lab for lab, _lo, _n in reversed(std.QUALIFICATION_BANDS)]
    ramp = _heat_cmap()
    cmap = ListedColormap([ramp(0.08 + 0.9 * i / (len(labels) - 1)) for i in range(len(labels))])
    norm = BoundaryNorm(edges, cmap.N)
    room = d.get("room") or {}
    dims = room.get("dimensions_m")
    pts = [s["position_m"] for s in d["sources"]] + [li["position_m"] for li in d["listeners"]]
    xs = [p[0] for p in pts] + ([g["x_m"][0], g["x_m"][-1]] if g else []) + ([0, dims[0]] if dims else [])
    ys = [p[1] for p in pts] + ([g["y_m"][0], g["y_m"][-1]] if g else []) + ([0, dims[1]] if dims else [])
    w, h = max(xs) - min(xs) or 1.0, max(ys) - min(ys) or 1.0
    fig = new(10.0, max(3.6, min(9.0, 10.0 * h / w + 1.2)))
    ax = fig.add_subplot(111)
    ax.grid(False)
    im = None
    if g:
        z = _arr(g["sti"])
        x, y = _arr(g["x_m"]), _arr(g["y_m"])
        step = float(g["step_m"])
        im = ax.imshow(z, cmap=cmap, norm=norm, origin="lower", interpolation="nearest",
                       extent=(x[0] - step / 2, x[-1] + step / 2, y[0] - step / 2, y[-1] + step / 2), zorder=1)
        if z.shape[0] > 1 and z.shape[1] > 1 and np.nanmin(z) < req <= np.nanmax(z):
            ax.contour(x, y, z, levels=[req], colors=[PAPER], linewidths=3.2, zorder=2)
            ax.contour(x, y, z, levels=[req], colors=[INK], linewidths=1.5, linestyles="--", zorder=3)
        lo = g["min_at_m"]
        ax.plot([lo[0]], [lo[1]], "x", color=BRICK, ms=10, mew=2.2, zorder=5)
        ax.annotate(f"min {format_index(g['min_sti'], req)}", (lo[0], lo[1]), xytext=(6, -12),
                    textcoords="offset points", fontsize=8.5, color=BRICK, fontweight="bold", zorder=6)
    if dims:
        ax.add_patch(_rect((0, 0), dims[0], dims[1], "none"))
        ax.patches[-1].set_edgecolor(INK)
        ax.patches[-1].set_linewidth(1.4)
        ax.patches[-1].set_zorder(4)
    for s in d["sources"]:
        px, py = s["position_m"][0], s["position_m"][1]
        if s.get("aim_m"):
            ax.plot([px, s["aim_m"][0]], [py, s["aim_m"][1]], color=INK, lw=1.0, zorder=5)
        ax.plot([px], [py], "^", color=TEAL, mec="white", mew=1.2, ms=11, zorder=6)
        ax.annotate(s["name"], (px, py), xytext=(7, 5), textcoords="offset points", fontsize=8.5, color=INK,
                    fontweight="bold", zorder=7)
    for li in d["listeners"]:
        px, py = li["position_m"][0], li["position_m"][1]
        ok = li["sti"] >= req
        ax.plot([px], [py], "o", color=TEAL if ok else BRICK, mec=INK, mew=1.0, ms=9, zorder=6)
        ax.annotate(f"{li['name']} {format_index(li['sti'], req)}", (px, py), xytext=(7, -11),
                    textcoords="offset points", fontsize=8.5, color=INK, zorder=7,
                    bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": "none", "alpha": 0.8})
    ax.set_aspect("equal")
    pad = 0.03 * max(w, h)
    ax.set_xlim(min(xs) - pad, max(xs) + pad)
    ax.set_ylim(min(ys) - pad, max(ys) + pad)
    ax.set_xlabel("x, m")
    ax.set_ylabel("y, m")
    if im is not None:
        cb = fig.colorbar(im, ax=ax, fraction=0.035, pad=0.02, ticks=[(a + b) / 2 for a, b in zip(edges, edges[1:])],
                          spacing="uniform")
        cb.ax.set_yticklabels([f"{lab}  {a:.2f}" for lab, a in zip(labels, edges)], fontsize=8)
        cb.ax.axhline(req, color=INK, lw=2.0, ls="--")
        cb.set_label("STI (predicted; qualification band and its lower edge)")
        ax.set_title(f"Predicted STI at z = {g['z_m']:g} m: {100 * g['share_meeting_requirement']:.1f} % "
                     f"at or above {req:g}")
    else:
        ax.set_title("Loudspeakers and listener positions")
    cap = ("Plan of the predicted STI: grid cells coloured by qualification band (IEC 60268-16 Annex F), the dashed "
           f"line is the requirement {req:g}, triangles are loudspeakers (line: aim), dots are listener positions "
           "(teal: requirement met; brick: not met), the cross is the lowest grid value.")
    return _fig("map", cap, fig)


def _page_design(d: Mapping) -> Page:
    from .sti import format_index

    req = float(d["requirement"])
    p = Page()
    g = d.get("grid")
    if g:
        p.headline.append((f"share of the grid (at or above {req:g})",
                           Cell(f"{100 * g['share_meeting_requirement']:.1f} %", "grid.share_meeting_requirement")))
        p.headline.append(("STI (lowest on the grid)", Cell(format_index(g["min_sti"], req), "grid.min_sti")))
        p.headline.append(("STI (mean over the grid)", num(d, "grid.mean_sti", ".2f")))
    lis = d.get("listeners") or []
    if lis:
        met = sum(1 for li in lis if li["sti"] >= req)
        p.headline.append(("listeners meeting the requirement",
                           Cell(f"{met} of {len(lis)}", cls="pass" if met == len(lis) else "fail")))
    p.headline.append(("engine", txt(d.get("engine"))))
    p.figures.append(_design_map(d))
    rows = []
    for i, li in enumerate(lis):
        late = li.get("late_arrival")
        ok = li["sti"] >= req
        rows.append([txt(li["name"]), txt(", ".join(f"{v:g}" for v in li["position_m"])),
                     Cell(format_index(li["sti"], req), f"listeners.{i}.sti"), txt(li["rating"]),
                     Cell("yes" if ok else "NO", cls="pass" if ok else "fail"),
                     num(d, f"listeners.{i}.speech_level_dba", ".1f"), txt(li["dominant_source"]),
                     txt("—" if late is None else f"{late['source']}: {late['delay_ms']:.0f} ms, "
                         f"{late['level_db']:+.1f} dB"),
                     Cell("ECHO", cls="fail") if li.get("echo") else txt("no")])
    head = ["listener", "position, m", "STI", "qualification band", f"meets ({req:g})", _term("speech_level_dba"),
            "dominant source", "strongest late arrival", "echo"]
    if any(li.get("statistical_sti") is not None for li in lis):
        head[2] = "STI (image engine)"
        head.insert(3, "STI (statistical)")
        for i, row in enumerate(rows):
            row.insert(3, num(d, f"listeners.{i}.statistical_sti", ".2f"))
    if rows:
        p.tables.append(Table("Listener positions", head, rows, "Echo criterion: " + str(d.get("echo_criterion"))))
    rows = []
    for i, s in enumerate(d["sources"]):
        rows.append([txt(s["name"]), txt(", ".join(f"{v:g}" for v in s["position_m"])),
                     txt("—" if not s.get("aim_m") else ", ".join(f"{v:g}" for v in s["aim_m"])),
                     num(d, f"sources.{i}.level_1m_dba", ".1f"), num(d, f"sources.{i}.q.3", ".1f"),
                     num(d, f"sources.{i}.critical_distance_m.3", ".1f"), num(d, f"sources.{i}.delay_ms", ".1f"),
                     txt(s.get("pattern"))])
    p.tables.append(Table("Loudspeakers", ["name", "position, m", "aim, m", "level at 1 m, dB(A)", "Q at 1 kHz",
                                           "critical distance at 1 kHz, m", "signal delay, ms", "directivity"], rows))
    room = d.get("room") or {}
    bands = list(d.get("bands_hz", std.OCTAVE_BANDS_HZ))
    rows = [[Cell(_band_label(fc)), num(d, f"room.rt_s.{k}", ".2f"), num(d, f"room.absorption_area_m2.{k}", ".0f"),
             num(d, f"noise_db.{k}", ".1f") if d.get("noise_db") else Cell("—")] for k, fc in enumerate(bands)]
    p.tables.append(Table(f"Room: {room.get('volume_m3', 0):g} m3 (reverberation time {room.get('rt_from')}, "
                          f"{room.get('field')} reverberant field)",
                          ["band", "RT, s", "absorption area, m2", "noise, dB SPL"], rows))
    p.notes += [str(n) for n in d.get("notes") or []]
    return p


# ---------------------------------------------------------------------------
# Two ears (``--ears``): the interaural difference per octave band
# ---------------------------------------------------------------------------

def _ears_figure(d: Mapping) -> Figure:
    """Each ear's band index (MTI; for a pair the speech-based STI's TI) and the left-minus-right
    difference per octave band, the better ear marked."""
    new = _mpl()
    b = d["binaural"]
    bands = [float(f) for f in b["bands_hz"]]
    left, right, diff = _arr(b["mti_left"]), _arr(b["mti_right"]), _arr(b["mti_difference"])
    what = "TI of the speech-based STI" if "ssti_left" in b else "MTI"
    fig = new(10.0, 5.6)
    gs = fig.add_gridspec(2, 1, height_ratios=[2.0, 1.2], hspace=0.35)
    ax = fig.add_subplot(gs[0])
    x = np.arange(len(bands))
    w = 0.38
    ax.bar(x - w / 2, np.nan_to_num(left), w, color=STEEL, label="left ear")
    ax.bar(x + w / 2, np.nan_to_num(right), w, color=COPPER, label="right ear")
    for k, ear in enumerate(b["better_ear"]):
        v = left[k] if ear == "left" else right[k]
        if np.isfinite(v):
            ax.text(x[k] + (-w / 2 if ear == "left" else w / 2), v + 0.02, "better", ha="center", va="bottom",
                    fontsize=8.5, color=INK)
    ax.set_xticks(x, [_band_label(f) for f in bands])
    ax.set_ylim(0, 1.12)
    ax.set_ylabel(what)
    ax.grid(axis="x", visible=False)
    ax.legend(loc="lower right", ncols=2, fontsize=9.5, bbox_to_anchor=(1.0, 1.0), borderaxespad=0.2)
    ax.set_title(f"{what} of each ear per octave band")
    ax2 = fig.add_subplot(gs[1])
    ax2.bar(x, np.nan_to_num(diff), 0.6, color=[STEEL if v >= 0 else COPPER for v in np.nan_to_num(diff)])
    ax2.axhline(0, color=INK, lw=1.0)
    lim = max(0.1, float(np.nanmax(np.abs(diff))) * 1.2) if np.isfinite(diff).any() else 0.1
    ax2.set_ylim(-lim, lim)
    ax2.set_xticks(x, [_band_label(f) for f in bands])
    ax2.set_xlabel("octave band")
    ax2.set_ylabel(_term("ear_difference"))
    ax2.grid(axis="x", visible=False)
    ax2.set_title("Interaural difference (above zero: the left ear is better)")
    return _fig("interaural_difference", f"{what} of the left and right ear per octave band (top) and their "
                  "difference, left minus right (bottom). The better-ear value takes, in each band, the ear "
                  "marked \u201cbetter\u201d.", fig)


def _ears_tables(d: Mapping) -> list[Table]:
    b = d["binaural"]
    rows = [[Cell(_band_label(float(f))), num(d, f"binaural.mti_left.{k}", ".3f"),
             num(d, f"binaural.mti_right.{k}", ".3f"), num(d, f"binaural.mti_difference.{k}", "+.3f"),
             txt(b["better_ear"][k])] for k, f in enumerate(b["bands_hz"])]
    what = "TI (speech-based STI)" if "ssti_left" in b else "MTI"
    head = ["band", _term("left_ear"), _term("right_ear"), _term("ear_difference"), _term("better_ear")]
    out = [Table(f"Two ears per octave band: {what}", head,
                 rows, f"Rule: {b['rule']}. Source: {b['source']}.")]
    keys = [k for k in ("sti", "stoi", "estoi", "ssti") if f"{k}_left" in b]
    names = {"sti": "STI", "stoi": "STOI", "estoi": "ESTOI", "ssti": "speech-based STI"}
    out.append(Table("Each ear and the better ear",
                     ["index", _term("left_ear"), _term("right_ear"), _term("better_ear")],
                     [[Cell(names[k]), num(d, f"binaural.{k}_left", ".3f"), num(d, f"binaural.{k}_right", ".3f"),
                       num(d, k, ".3f")] for k in keys]))
    for ear, msg in (b.get("errors") or {}).items():
        if msg:
            out[-1].note += f"The {ear} ear gave no result: {msg}. "
    return out


def _page_ears(d: Mapping, stipa: bool) -> Page:
    """An STI page of two ears: the better-ear STI, its MTF and MTI, the interaural difference."""
    p = Page(headline=_sti_headline(d))
    p.headline[1:1] = [("left ear", num(d, "binaural.sti_left", ".2f")), ("right ear", num(d, "binaural.sti_right",
                                                                                          ".2f"))]
    p.figures += [_ears_figure(d), _ti_figure(d), _mtf_heatmap(d, stipa)]
    p.tables += _ears_tables(d) + _sti_tables(d, stipa)
    p.notes.append("Each ear's full result (decay figures, uncertainty, levels) is in result.json under "
                   "ears.left and ears.right.")
    p.notes += [str(n) for n in d.get("notes") or []]
    return p


def _page_pair_ears(d: Mapping) -> Page:
    p = Page()
    for key, label in (("stoi", "STOI, better ear"), ("estoi", "ESTOI, better ear"),
                       ("ssti", "speech-based STI, better ear")):
        if d.get(key) is not None:
            p.headline.append((label, num(d, key, ".3f")))
    p.figures.append(_ears_figure(d))
    p.tables += _ears_tables(d)
    p.notes.append("Each ear's full result (per band, over time, alignment) is in result.json under ears.left "
                   "and ears.right.")
    p.notes += [str(n) for n in d.get("notes") or []]
    return p
def _listener_tables(d: Mapping) -> list[Table]:
    """The listener's audiogram (issue 17), for any kind whose result carries one: hearing
    level per octave band, the listener's threshold, and whether the loss made the band
    inaudible."""
    a = d.get("audiogram")
    if not isinstance(a, Mapping):
        return []
    gone = a.get("inaudible_bands_hz")
    filled = set(a.get("filled_bands_hz") or [])
    rows = []
    for k, fc in enumerate(a["bands_hz"]):
        row = [Cell(_band_label(fc)), num(d, f"audiogram.band_hl_db.{k}", ".0f"),
               txt("filled" if fc in filled else "measured"),
               num(d, f"audiogram.threshold_spl_db.{k}", ".1f"), num(d, f"audiogram.reception_threshold_db.{k}", ".1f")]
        if gone is not None:
            row.append(Cell("inaudible", cls="fail") if fc in gone else txt("audible"))
        rows.append(row)
    head = ["band", _term("hearing_level_db"), "value", f"{_term('threshold_spl_db')} (free field)",
            _term("reception_threshold_used_db")]
    if gone is not None:
        head.append(_term("inaudible"))
    measured = ", ".join(f"{f:g} Hz: {round(v, 1):g}" for f, v in zip(a["measured_hz"], a["measured_hl_db"]))
    note = (f"Audiogram ({a.get('source')}): {measured} dB HL. " + "".join(f"{n}. " for n in a.get("notes") or [])
            + "Audibility only: the suprathreshold deficits of sensorineural loss are not modelled.")
    return [Table("Listener: hearing loss per octave band", head, rows, note)]


_PAGES: dict[str, Callable[[Mapping], Page]] = {
    "ir": _page_ir, "stipa": _page_stipa, "fullsti": _page_stipa, "pair": _page_pair, "compare": _page_compare,
    "sweep": _page_sweep, "inspect": _page_inspect, "survey": _page_survey, "design": _page_design,
    "fitmap": _page_fitmap,
}



# ---------------------------------------------------------------------------
# The measurement record (who, where, with what) shown at the top of a report
# ---------------------------------------------------------------------------

#: Fields of the measurement record, in the order shown, with their labels.
ABOUT_FIELDS: dict[str, str] = {
    "project": "Project", "site": "Site", "zone": "Zone", "position": "Position", "operator": "Measured by",
    "instrument": "Instrument", "serial": "Serial number", "calibration_date": "Calibration date",
    "measurement_date": "Measurement date", "notes": "Notes",
}

#: Longest text of one field, characters (a record is a few lines, not a document).
ABOUT_MAX_CHARS: int = 2000


def read_about(path: str | os.PathLike | None = None, items: Sequence[str] = ()) -> dict[str, str]:
    """The measurement record of a report from a small file and/or ``KEY=VALUE`` items
    (items override the file).

    The file holds one ``key: value`` line per field (blank lines and lines starting
    with ``#`` are skipped), or a JSON object. Keys are those of :data:`ABOUT_FIELDS`.

    Raises
    ------
    InputError
        An unreadable file, a line or item without a value, an unknown key, or a value
        longer than :data:`ABOUT_MAX_CHARS`.

    Examples
    --------
    >>> read_about(items=["project=Pier 4 PA", "operator=K. Lind"])
    {'project': 'Pier 4 PA', 'operator': 'K. Lind'}
    """
    pairs: list[tuple[str, str, str]] = []
    if items is None:
        items = ()
    if isinstance(items, (str, bytes)) or not isinstance(items, (list, tuple)):
        raise InputError(f"record items are not a list of KEY=VALUE texts ({type(items).__name__})",
                         "give a list such as ['operator=K. Lind']")
    if path is not None:
        from .tables import read_text

        text = read_text(checks.path(path, "record file"), "record file")
        where = f"record file '{path}'"
        if text.lstrip().startswith("{"):
            try:
                obj = json.loads(text)
            except RecursionError:
                raise InputError(f"{where} nests too deeply", "write a flat JSON object of fields") from None
            except ValueError as e:
                raise InputError(f"{where} is not valid JSON ({e.args[0] if e.args else e})",
                                 "write one 'key: value' line per field, or a JSON object") from None
            if not isinstance(obj, dict):
                raise InputError(f"{where} holds JSON that is not an object", "write a JSON object of fields")
            pairs += [(str(k), "" if v is None else str(v), where) for k, v in obj.items()]
        else:
            for i, line in enumerate(text.splitlines(), start=1):
                if not line.strip() or line.lstrip().startswith("#"):
                    continue
                if ":" not in line:
                    raise InputError(f"{where}, line {i} has no ':'", "write one 'key: value' line per field")
                k, v = line.split(":", 1)
                pairs.append((k, v, f"{where}, line {i}"))
    for item in items:
        if not isinstance(item, str):
            raise InputError(f"record item {type(item).__name__} is not text", "write KEY=VALUE, e.g. operator=K. Lind")
        if "=" not in str(item):
            raise InputError(f"record item '{item}' has no '='", "write KEY=VALUE, e.g. operator=K. Lind")
        k, v = str(item).split("=", 1)
        pairs.append((k, v, f"record item '{item}'"))
    out: dict[str, str] = {}
    for k, v, where in pairs:
        key = k.strip().lower().replace(" ", "_").replace("-", "_")
        if key not in ABOUT_FIELDS:
            raise InputError(f"{where}: unknown field '{k.strip()}'", f"use one of {', '.join(ABOUT_FIELDS)}")
        value = " ".join(v.split())
        if len(value) > ABOUT_MAX_CHARS:
            raise InputError(f"{where}: the {key} is {len(value)} characters long",
                             f"keep each field under {ABOUT_MAX_CHARS} characters")
        if value:
            out[key] = value
    return out


def _about_html(about: Mapping[str, Any]) -> str:
    rows = [(ABOUT_FIELDS[k], str(about[k])) for k in ABOUT_FIELDS if about.get(k)]
    if not rows:
        return ""
    body = "".join(f"<tr><th>{html.escape(k)}</th><td>{html.escape(v)}</td></tr>" for k, v in rows)
    return f'<section class="record"><h2>Measurement record</h2><table><tbody>{body}</tbody></table></section>'


_SIGN_OFF = (
    '<section class="signoff"><h2>Review and sign-off</h2>'
    "<p class=\"note\">The figures above are computed from the measurements and settings listed in this "
    "report. Whether they meet a requirement is for a qualified person to decide under the local codes and "
    "standards.</p><table><tbody>"
    "<tr><th>Reviewed by</th><td></td></tr><tr><th>Date</th><td></td></tr><tr><th>Signature</th><td></td></tr>"
    "</tbody></table></section>"
)


def _file_name(v: str) -> str:
    """A path as its file name (a report shows names, never folders)."""
    return Path(v).name or v


def names_only(d: Any, *, _key: str = "", _inputs: bool = False) -> Any:
    """A copy of a result with every path among its inputs (and the survey's file
    entries) cut to its file name: a report handed to a client shows no folders."""
    if isinstance(d, Mapping):
        return {k: names_only(v, _key=str(k), _inputs=_inputs or k in ("inputs", "settings")) for k, v in d.items()}
    if isinstance(d, list):
        return [names_only(v, _key=_key, _inputs=_inputs) for v in d]
    if isinstance(d, str) and (os.sep in d or (os.altsep and os.altsep in d)) and "\n" not in d:
        if _inputs or _key in _PATH_KEYS or os.path.isabs(d):
            return _file_name(d)
    return d


#: Result keys that hold paths (beside the ``inputs`` object, whose path values are cut too).
_PATH_KEYS: frozenset[str] = frozenset(
    {"survey", "results", "folder", "manifest", "out", "impulse_response", "recording", "noise_recording",
     "calibrator", "clean", "degraded", "scores", "map", "file", "path", "inverted", "sentences", "ir"})

# ---------------------------------------------------------------------------
# HTML
# ---------------------------------------------------------------------------

_CSS_TEMPLATE = """
:root{--ink:@INK@;--muted:@MUTED@;--grid:@GRID@;--paper:@PAPER@;--teal:@TEAL@;--copper:@COPPER@}
*{box-sizing:border-box}
body{margin:0;background:var(--paper);color:var(--ink);font:15px/1.5 system-ui,-apple-system,"Segoe UI",
Roboto,"Helvetica Neue",Arial,sans-serif}
main{max-width:1180px;margin:0 auto;padding:28px 32px 48px}
header{border-bottom:3px solid var(--teal);padding-bottom:10px;margin-bottom:18px}
h1{font-size:26px;margin:0 0 4px}
h2{font-size:19px;margin:30px 0 10px;border-bottom:1px solid var(--grid);padding-bottom:4px}
h3{font-size:16px;margin:20px 0 6px}
.sub{color:var(--muted);font-size:14px}
.headline{display:flex;flex-wrap:wrap;gap:14px;margin:16px 0}
.stat{background:white;border:1px solid var(--grid);border-left:5px solid var(--teal);border-radius:6px;
padding:10px 16px;min-width:150px}
.stat .label{color:var(--muted);font-size:13px;text-transform:uppercase;letter-spacing:.04em}
.stat .value{font-size:26px;font-weight:700}
.cautions{background:#fff7ec;border:1px solid #e8c9a2;border-left:5px solid var(--copper);border-radius:6px;
padding:10px 18px;margin:14px 0}
.cautions h2{border:none;margin:6px 0;font-size:17px}
.cautions li{margin:4px 0}
figure{margin:18px 0 26px;background:white;border:1px solid var(--grid);border-radius:6px;padding:12px}
figure img{max-width:100%;height:auto;display:block;margin:0 auto}
figcaption{color:var(--muted);font-size:14px;margin-top:8px}
table{border-collapse:collapse;background:white;margin:6px 0 4px;font-variant-numeric:tabular-nums;
font-size:14px}
th,td{border:1px solid var(--grid);padding:4px 9px}
th{background:#eef3f2;text-align:left;font-weight:600}
td.n{text-align:right}
td.na{color:var(--muted);text-align:center}
.scroll{overflow-x:auto;max-width:100%}
.note{color:var(--muted);font-size:13.5px;margin:2px 0 10px}
ul.notes{color:var(--ink);font-size:14px}
details{margin:12px 0}
pre{background:white;border:1px solid var(--grid);padding:10px;overflow-x:auto;font-size:12.5px}
footer{margin-top:34px;color:var(--muted);font-size:13px;border-top:1px solid var(--grid);padding-top:8px}
td.pass,.stat .value.pass{color:var(--teal);font-weight:700}
td.fail,.stat .value.fail{color:#a8443a;font-weight:700}
.record table,.signoff table{min-width:60%}
.record th,.signoff th{width:14em}
.signoff td{height:2.6em}
.glossary dl{display:grid;grid-template-columns:max-content 1fr;gap:3px 16px;font-size:14px;margin:6px 0}
.glossary dt{font-weight:600}
.glossary dd{margin:0;color:var(--ink)}
@page{size:A4 portrait;margin:14mm 12mm 16mm}
@media print{
body{background:white;font-size:11pt}
main{max-width:none;padding:0}
h2{break-before:page;break-after:avoid}
header+section h2,.record h2,.cautions h2,.signoff h2{break-before:auto}
h3{break-after:avoid}
figure,table,.stat,.cautions,.record,.signoff{break-inside:avoid}
figure{border:none;padding:0}
figure img{max-width:100%;max-height:150mm;width:auto}
.scroll{overflow:visible}
table{font-size:9pt}
th,td{padding:2px 5px}
details{display:none}
}
"""
CSS = _CSS_TEMPLATE
for _colour, _value in (("INK", INK), ("MUTED", MUTED), ("GRID", GRID), ("PAPER", PAPER), ("TEAL", TEAL),
                     ("COPPER", COPPER)):
    CSS = CSS.replace(f"@{_colour}@", _value)


def _td(c: Cell, first: bool) -> str:
    cls = c.cls or ("n" if c.key is not None else "")
    attrs = f' class="{cls}"' if cls else ""
    if c.key is not None:
        attrs += f' data-key="{html.escape(c.key, quote=True)}"'
    return f"<td{attrs}>{c.text}</td>"


def _table_html(t: Table) -> str:
    head = "".join(f"<th>{html.escape(h)}</th>" for h in t.header)
    body = "\n".join("<tr>" + "".join(_td(c, i == 0) for i, c in enumerate(r)) + "</tr>" for r in t.rows)
    note = f'<p class="note">{html.escape(t.note)}</p>' if t.note else ""
    return (f"<h3>{html.escape(t.title)}</h3>\n<div class=\"scroll\"><table><thead><tr>{head}</tr></thead>"
            f"<tbody>\n{body}\n</tbody></table></div>{note}")


def _settings_rows(settings: Mapping[str, Any]) -> str:
    rows = []
    for k, v in settings.items():
        if k == "about":
            continue
        if isinstance(v, (list, tuple)):
            v = ", ".join(str(x) for x in v)
        elif v is None:
            v = "—"
        rows.append(f"<tr><th>{html.escape(str(k))}</th><td>{html.escape(str(v))}</td></tr>")
    return "<table><tbody>" + "\n".join(rows) + "</tbody></table>"


def _json_for_script(d: Mapping) -> str:
    # no "<" at all inside the <script> element ("</script>", "<!--" in a name): JSON's own
    # escape \u003c reads back as the same character
    return json.dumps(d, indent=1, allow_nan=False).replace("<", "\\u003c")


def _input_files(result: Mapping) -> dict[str, str]:
    """The file names among the result's inputs, for the page header (never folders)."""
    inputs = result.get("inputs")
    if not isinstance(inputs, Mapping):
        return {}
    out = {}
    for k, v in inputs.items():
        if isinstance(v, str) and "." in Path(v).name:
            out[str(k)] = Path(v).name
        elif isinstance(v, list) and v and all(isinstance(x, str) for x in v):
            names = [Path(x).name for x in v]
            out[str(k)] = ", ".join(names) if len(names) <= 3 else f"{names[0]} … {names[-1]} ({len(names)} files)"
    return out


def _check_result(kind: str, result: Any) -> None:
    """Refuse an unknown kind and a result that is not a plain JSON dictionary."""
    if not isinstance(kind, str) or kind not in KINDS:
        raise InputError(f"unknown report kind {kind!r:.40}", f"use one of {', '.join(KINDS)}")
    if not isinstance(result, Mapping):
        raise InputError("the report needs the result as a dictionary", "pass result.to_dict()")
    try:
        json.dumps(result, allow_nan=False)
    except (TypeError, ValueError, RecursionError) as e:
        raise InputError(f"the result is not plain JSON ({str(e)[:80]})",
                         "pass result.to_dict(), not the result object") from None


def page_labels(page: Page) -> list[str]:
    """Every label a person reads on ``page`` as a name of a quantity: the headline labels,
    the table headers and the figures' axis and colour-bar labels, in page order.

    Raises
    ------
    InputError
        ``page`` is not a :class:`Page`.
    """
    if not isinstance(page, Page):
        raise InputError("page is not a Page", "pass the page built for the result")
    return ([label for label, _ in page.headline] + [lab for f in page.figures for lab in f.labels]
            + [h for t in page.tables for h in t.header])


def page_glossary(page: Page) -> list[tuple[str, str]]:
    """(term, explanation) for the terms on ``page`` only (:func:`envpredict.labels.glossary`).

    Raises
    ------
    InputError
        ``page`` is not a :class:`Page`.
    """
    from .labels import glossary

    return glossary(page_labels(page))


def render_html(kind: str, result: Mapping, page: Page, *, settings: Mapping[str, Any], title: str,
                version: str, created: str) -> str:
    """The report page as one HTML string (no external references).

    Raises
    ------
    InputError
        For an unknown ``kind``, a result that is not a plain JSON dictionary, a ``page``
        that is not a :class:`Page`, settings that are not a dictionary or a title,
        version or date that is not text.
    """
    _check_result(kind, result)
    if not isinstance(page, Page):
        raise InputError("page is not a Page", "pass the page built for the result")
    if not isinstance(settings, Mapping):
        raise InputError("settings are not a dictionary", "pass a dict of the inputs and options")
    title, version, created = (checks.text(v, n) for v, n in ((title, "title"), (version, "version"),
                                                              (created, "date")))
    parts = [
        "<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{html.escape(title)}</title>", f"<style>{CSS}</style>", "</head>", "<body><main>",
        f"<header><h1>{html.escape(title)}</h1><div class=\"sub\">"
        + ("" if title == KIND_TITLES[kind] else f"{html.escape(KIND_TITLES[kind])} · ")
        + "".join(f"{html.escape(str(k))}: {html.escape(str(v))} · " for k, v in _input_files(result).items())
        + f"envpredict {html.escape(version)} · {html.escape(created)}</div></header>",
    ]
    inputs = result.get("inputs")
    about = inputs.get("about") if isinstance(inputs, Mapping) else None
    if isinstance(about, Mapping):
        parts.append(_about_html(about))
    if page.headline:
        parts.append('<section class="headline">')
        for label, c in page.headline:
            key = f' data-key="{html.escape(c.key, quote=True)}"' if c.key else ""
            parts.append(f'<div class="stat"><div class="label">{html.escape(label)}</div>'
                         f'<div class="value"{key}>{c.text}</div></div>')
        parts.append("</section>")
    cautions = [str(c) for c in (result.get("cautions") or [])]
    if cautions:
        parts.append('<section class="cautions"><h2>Cautions</h2><ul>')
        parts += [f"<li>{html.escape(c)}</li>" for c in cautions]
        parts.append("</ul></section>")
    if page.figures:
        parts.append("<h2>Figures</h2>")
        for f in page.figures:
            b64 = base64.b64encode(f.png).decode("ascii")
            # the axis and colour-bar labels drawn, for a reader (or a test) checking the page's terms
            labels = html.escape(json.dumps(f.labels), quote=True)
            parts.append(f'<figure id="fig-{f.name}" data-labels="{labels}">'
                         f'<img alt="{html.escape(f.caption, quote=True)}" '
                         f'src="data:image/png;base64,{b64}"><figcaption>{html.escape(f.caption)}</figcaption>'
                         "</figure>")
    if page.tables:
        parts.append("<h2>Numbers</h2>")
        parts += [_table_html(t) for t in page.tables]
    if page.notes:
        parts.append("<h3>Notes</h3><ul class=\"notes\">")
        parts += [f"<li>{html.escape(n)}</li>" for n in page.notes]
        parts.append("</ul>")
    terms = page_glossary(page)
    if terms:
        parts.append('<section class="glossary"><h2>Terms on this page</h2><dl>')
        parts += [f"<dt>{html.escape(k)}</dt><dd>{html.escape(v)}</dd>" for k, v in terms]
        parts.append("</dl></section>")
    parts.append("<h2>Inputs and settings</h2>")
    base = {"envpredict version": version, "report kind": kind, "created": created}
    method = result.get("method")
    if method:
        base["method"] = method
    parts.append(_settings_rows({**base, **dict(settings)}))
    parts.append(_SIGN_OFF)
    parts.append("<details><summary>The full result as JSON</summary><pre>"
                 + html.escape(json.dumps(result, indent=1, allow_nan=False)) + "</pre></details>")
    parts.append(f'<script type="application/json" id="result">{_json_for_script(result)}</script>')
    parts.append(f"<footer>Written by envpredict {html.escape(version)}. Figures and tables show the numbers of "
                 "the JSON result above; a dash marks a figure that could not be computed.</footer>")
    parts.append("</main></body></html>")
    return "\n".join(parts) + "\n"


def build_page(kind: str, result: Mapping[str, Any]) -> Page:
    """The figures, tables, headline and notes of a report of ``kind`` drawn from ``result``
    (what :func:`write_report` lays out as HTML).

    Raises
    ------
    InputError
        For an unknown ``kind`` or a result that is not a complete result of ``kind``.
    """
    _check_result(kind, result)
    with _style():
        try:
            return _PAGES[kind](result)
        except (KeyError, IndexError, TypeError, ValueError, AttributeError) as e:
            # the page reads the result's fields by name and shape: a dictionary that lacks
            # one, or holds one of another shape, is not a result of this kind
            raise InputError(f"the result is not a complete '{kind}' result ({type(e).__name__}: {str(e)[:80]})",
                             f"pass the dictionary of a '{kind}' result (result.to_dict() plus its inputs) "
                             "unchanged") from None


def write_report(
    kind: str,
    result: Mapping[str, Any],
    folder: str | Path,
    *,
    settings: Mapping[str, Any] | None = None,
    title: str | None = None,
) -> Path:
    """Write PNG figures, ``report.html`` and ``result.json`` into ``folder``.

    The page is drawn from ``result`` alone (figure data are part of the result, e.g.
    ``decay.curves_db``, ``timeline.band_stoi``, ``figure_data``), so writing the report
    again from the ``result.json`` it wrote gives the same page.

    Parameters
    ----------
    kind : one of ``'ir'``, ``'stipa'``, ``'pair'``, ``'compare'``, ``'sweep'``,
        ``'inspect'``.
    result : the command's JSON dictionary -- exactly what it prints with ``--json``
        (``Result.to_dict()`` plus its ``inputs`` object).
    folder : output folder; created, or replaced as a whole, atomically (a failure
        leaves the previous folder or nothing).
    settings : the inputs and options to show in the page (default: ``result["inputs"]``).
    title : page heading (default: the kind's title).

    Returns
    -------
    Path of ``report.html`` inside ``folder``.

    Raises
    ------
    InputError
        For an unknown ``kind``; a result that is not a plain JSON dictionary, or not a
        complete result of ``kind`` (a field missing or of another shape); a title that
        is not text; a folder that is not a usable path, cannot be written, holds files
        envpredict did not write there, or holds an input.
    ComputationError
        If the folder cannot be written (a full disk).

    Examples
    --------
    In a command, after ``d = result.to_dict()`` and ``d["inputs"] = {...}`` (so the page
    embeds exactly what ``--json`` prints), with ``--report DIR`` given as
    ``report: Optional[Path]``. Check the folder before the slow work with
    ``check_report_folder(report)`` (refuses a folder holding other files), then::

        from envpredict.report import write_report

        write_report("ir", d, report)

    and later, from the folder alone::

        d = json.loads((report / "result.json").read_text())
        write_report("ir", d, other_folder)
    """
    from . import __version__
    from .outputs import atomic_directory

    _check_result(kind, result)
    folder = checks.path(folder, "report folder")
    if title is not None:
        title = checks.text(title, "report title")
    result = names_only(result)
    if settings is None:
        inputs = result.get("inputs")
        settings = inputs if isinstance(inputs, Mapping) else {}
    if not isinstance(settings, Mapping):
        raise InputError("settings are not a dictionary", "pass a dict of the inputs and options, or None")
    settings = names_only(dict(settings))
    page = build_page(kind, result)
    page.tables += _listener_tables(result)
    created = _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    doc = render_html(kind, result, page, settings=dict(settings), title=title or KIND_TITLES[kind],
                      version=__version__, created=created)
    folder = Path(folder)
    check_report_folder(folder)
    with atomic_directory(folder, replaceable=_replaceable) as tmp:
        _write_folder(tmp, page, doc, result)
    return folder / "report.html"


#: Hidden file in every report folder listing the files envpredict wrote there (one name
#: a line after its first line): only these are ever replaced or removed.
REPORT_MANIFEST = ".envpredict-report"
_MANIFEST_HEAD = "envpredict report folder: files written by envpredict (replaced as a whole by the next report)"

#: File names a report folder of an earlier version (without a manifest) can hold: the
#: page, the JSON and the figures of every kind. Such a folder is replaced only when it
#: holds nothing else.
LEGACY_REPORT_FILES: frozenset[str] = frozenset(
    {"report.html", "result.json"} | {f"{n}.png" for n in (
        "mtf", "transmission_index", "decay_curves", "window_sti", "band_correlation", "correlation_over_time",
        "band_correlation_mean", "differences", "psychometric", "waveform_f0", "three_levels",
        "timescales_per_band", "modulation_spectra")})


def _foreign_files(folder: Path) -> list[str]:
    """Names in an existing report folder that envpredict did not write there."""
    names = sorted(os.listdir(folder))
    if not names:
        return []
    listed: set[str] | None = None
    mpath = folder / REPORT_MANIFEST
    if REPORT_MANIFEST in names and mpath.is_file() and not mpath.is_symlink():
        try:
            lines = mpath.read_text(encoding="utf-8").splitlines()
        except (OSError, UnicodeDecodeError):
            lines = []
        if lines and lines[0] == _MANIFEST_HEAD:
            listed = {n for n in lines[1:] if n and "/" not in n and n not in (".", "..")}
            listed.add(REPORT_MANIFEST)
    if listed is None:  # a folder of an earlier version: only the known names, with the page
        listed = set(LEGACY_REPORT_FILES) if "report.html" in names else set()
    foreign = []
    for n in names:
        e = folder / n
        if n not in listed or e.is_symlink() or not e.is_file():
            foreign.append(n)
    return foreign


def check_report_folder(folder: str | Path, *, inputs: Sequence[str | os.PathLike | None] | None = None,
                        out: str | os.PathLike | None = None) -> None:
    """Refuse a report folder that cannot be written, holds files envpredict did not write
    there, or holds an input; and an ``out`` file that is the folder or lies inside it.

    The report replaces its folder as a whole, so a folder with other files in it
    (``--report .``, a home folder, a folder with a site photo) must not be used. A
    report folder lists the files envpredict wrote in its hidden ``.envpredict-report``;
    a folder of an earlier version without that list is used only when it holds nothing
    but report file names. Call it before the slow work so a command fails fast.

    Parameters
    ----------
    folder : the report folder.
    inputs : the input files of the run (refused inside the folder).
    out : the run's other output file (``--out``), refused inside the folder.

    Raises
    ------
    InputError
        With the reason and what to do.
    """
    from .outputs import check_distinct, check_inputs_outside, check_output_folder

    p = Path(folder)
    target = check_output_folder(p, option="report folder")
    check_distinct(out, p)
    if target.is_dir():
        foreign = _foreign_files(target)
        if foreign:
            shown = ", ".join(f"'{n}'" for n in foreign[:3]) + (f" and {len(foreign) - 3} more"
                                                                 if len(foreign) > 3 else "")
            raise InputError(f"folder '{p}' holds files that are not part of a report ({shown})",
                             "give a new folder name (the report replaces its folder as a whole)")
    check_inputs_outside(p, inputs, option="report folder")


def _replaceable(old: Path) -> None:
    """Last check on the old report folder, moved aside just before it is replaced."""
    foreign = _foreign_files(old)
    if foreign:
        raise InputError(f"the report folder gained files while the report was made ({', '.join(foreign[:3])})",
                         "move them out or give a new folder name, then run again")


def _write_folder(tmp: Path, page: Page, doc: str, result: Mapping[str, Any]) -> None:
    """Fill the temporary report folder (made by :func:`write_report`), listing every file
    written in the folder's manifest."""
    written = []
    for f in page.figures:
        (tmp / f"{f.name}.png").write_bytes(f.png)
        written.append(f"{f.name}.png")
    # a file name that is not UTF-8 (its undecodable bytes kept as surrogates) is shown escaped
    (tmp / "report.html").write_bytes(doc.encode("utf-8", "backslashreplace"))
    (tmp / "result.json").write_text(json.dumps(result, indent=2, allow_nan=False) + "\n", encoding="utf-8")
    written += ["report.html", "result.json"]
    (tmp / REPORT_MANIFEST).write_text("\n".join([_MANIFEST_HEAD, *written]) + "\n", encoding="utf-8")


def figure_names(folder: str | Path) -> list[str]:
    """PNG files of a report folder, sorted (for listing after a run).

    Raises
    ------
    InputError
        If ``folder`` is not a usable path.
    """
    folder = checks.path(folder, "report folder")
    return sorted(p.name for p in Path(folder).glob("*.png"))


__all__: Sequence[str] = ("KINDS", "REPORT_MANIFEST", "build_page", "check_report_folder", "figure_names",
                          "page_glossary", "page_labels", "render_html", "write_report")

"""Design-stage prediction of the modulation transfer function: the statistical room model.

A scene (a room, its loudspeakers, the site noise, listener positions and/or a grid) is
read and checked by :func:`read_scene` / :func:`parse_scene`; :func:`source_terms` gives
each loudspeaker's direct and reverberant intensity and arrival time at a set of points,
and :func:`modulation_transfer` the complex sum of these arrivals as an MTF (7 octave
bands x F modulation frequencies) with the octave-band speech levels they add up to.
The index itself is computed by :mod:`envpredict.sti` (the same code as the impulse-
response path); :mod:`envpredict.design` orchestrates.

The model (Houtgast, Steeneken & Plomp 1980; IEC 60268-16 prediction by statistical
methods): for each source *i* and octave band *k*, the direct sound has the intensity
``D = I_1m g(theta) / r^2`` (on-axis level at 1 m, distance law, directivity at the
listener's angle) and arrives at ``t = r / c + delay``; from then on a diffuse reverberant
sound of intensity ``R = I_1m 16 pi / (Q A)`` decays exponentially with the room's
reverberation time T, where ``A = 0.161 V / T`` is Sabine's equivalent absorption area
(so ``D = R`` at the critical distance ``r_c = sqrt(Q A / (16 pi))`` on axis). The
complex modulation transfer is::

    m(F) = | sum_i (D_i + R_i / (1 + j 2 pi F T / 13.8)) exp(-j 2 pi F t_i) | / sum_i (D_i + R_i)

so the late direct sound of a distant loudspeaker acts as an echo and lowers the MTF.
With ``"field": "revised"`` the reverberant energy follows Barron's revised theory,
``R exp(-13.82 r / (c T))``.

References
----------
T. Houtgast, H. J. M. Steeneken, R. Plomp, "Predicting speech intelligibility in rooms
from the modulation transfer function. I. General room acoustics", Acustica 46 (1980)
60-72. T. Houtgast, H. J. M. Steeneken, "A review of the MTF concept in room acoustics
and its use for estimating speech intelligibility in auditoria", JASA 77 (1985)
1069-1077. C. F. Eyring, "Reverberation time in 'dead' rooms", JASA 1 (1930) 217-241.
M. Barron, L.-J. Lee, "Energy relations in concert auditoriums. I", JASA 84 (1988) 618-628.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

from . import checks
from . import standards as std
from .exceptions import InputError
from .sti import a_weighted_level, check_talker, speech_band_levels

NB = len(std.OCTAVE_BANDS_HZ)

#: Most grid points a scene may ask for (judgement: 250 000 points is a 500 m x 500 m
#: floor at 1 m steps, about 25 s with 20 loudspeakers on one core; a finer grid shows
#: nothing the statistical model can resolve).
MAX_GRID_POINTS: int = 250_000

#: Closest a listener or grid point may be to a loudspeaker, m. The point-source distance
#: law diverges at 0; at 10 cm it already puts the level 20 dB above the 1 m reference,
#: far inside the near field of any loudspeaker (judgement).
MIN_SOURCE_DISTANCE_M: float = 0.1

#: Plausible reverberation times, s: above 0 and at most the longest met in rooms
#: (see :data:`envpredict.standards.IR_MAX_REVERBERATION_S`).
MAX_RT_S: float = std.IR_MAX_REVERBERATION_S

#: Plausible on-axis directivity factors (judgement: 1 is omnidirectional; large horn
#: arrays reach a few hundred at 8 kHz).
Q_RANGE: tuple[float, float] = (1.0, 1000.0)

#: Longest electronic delay accepted, ms (judgement: delays of distributed systems stay
#: within a few hundred ms; 2 s is surely a typing error).
MAX_DELAY_MS: float = 2000.0

#: Points per block of the grid evaluation (bounded memory; judgement).
BLOCK_VALUES: int = 2_000_000

#: Keys the scene file knows, per object (anything else is refused, so typos do not pass).
KNOWN_KEYS: dict[str, tuple[str, ...]] = {
    "scene": ("title", "description", "room", "noise_db", "sources", "listeners", "grid"),
    "room": ("volume_m3", "dimensions_m", "rt_s", "surfaces", "rt_formula", "field"),
    "surface": ("name", "area_m2", "absorption"),
    "source": ("name", "position_m", "aim_m", "level_1m_db", "level_1m_dba", "q", "off_axis_db", "delay_ms"),
    "off_axis_db": ("angles_deg", "attenuation_db"),
    "listener": ("name", "position_m"),
    "grid": ("x_m", "y_m", "z_m", "step_m"),
}

RT_FORMULAS: tuple[str, ...] = ("sabine", "eyring")
FIELDS: tuple[str, ...] = ("classic", "revised")

#: Most modulation frequencies the model is asked for at once (judgement: the STI uses
#: 14; a finer curve for a figure needs a few hundred at most).
MAX_MODULATION_FREQUENCIES: int = 1000


# ---------------------------------------------------------------------------
# The scene
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class Room:
    """The room as the model sees it.

    Attributes
    ----------
    volume_m3 : volume V.
    rt_s : reverberation time per octave band (7), s.
    rt_from : "given" (``rt_s`` in the scene), "sabine" or "eyring" (from ``surfaces``).
    field : "classic" (diffuse level from A) or "revised" (Barron & Lee 1988).
    dimensions_m : (L, W, H) of the bounding box with a corner at the origin, or None.
    surface_m2 : total surface area, m2 (from the surfaces or the box), or None.
    """

    volume_m3: float
    rt_s: np.ndarray
    rt_from: str = "given"
    field: str = "classic"
    dimensions_m: tuple[float, float, float] | None = None
    surface_m2: float | None = None

    @property
    def absorption_area_m2(self) -> np.ndarray:
        """Sabine's equivalent absorption area per band, A = 0.161 V / T, m2."""
        return std.SABINE_CONSTANT * self.volume_m3 / self.rt_s


@dataclass(frozen=True)
class Source:
    """One loudspeaker: on-axis octave-band speech level at 1 m, directivity, aim, delay."""

    name: str
    position_m: np.ndarray
    level_1m_db: np.ndarray
    q: np.ndarray
    aim_m: np.ndarray | None = None
    delay_ms: float = 0.0
    off_axis_deg: np.ndarray | None = None       # (n,) angles of the attenuation table
    off_axis_db: np.ndarray | None = None        # (n, 7) attenuation re on-axis, dB (>= 0)

    @property
    def pattern(self) -> str:
        """How the direct level depends on the angle: "omnidirectional", "table" or "q-pattern"."""
        if self.aim_m is None:
            return "omnidirectional"
        return "table" if self.off_axis_db is not None else "q-pattern"


@dataclass(frozen=True)
class GridSpec:
    """A horizontal grid of points at height z (x and y inclusive of both ends)."""

    x_m: np.ndarray
    y_m: np.ndarray
    z_m: float
    step_m: float

    def points(self) -> np.ndarray:
        """(ny * nx, 3) points, rows of y outermost (row-major over (y, x))."""
        xx, yy = np.meshgrid(self.x_m, self.y_m)
        return np.column_stack([xx.ravel(), yy.ravel(), np.full(xx.size, self.z_m)])


@dataclass(frozen=True)
class Scene:
    """A checked scene: everything :func:`modulation_transfer` and the design job need."""

    room: Room
    sources: tuple[Source, ...]
    noise_db: np.ndarray | None
    listeners: tuple[tuple[str, np.ndarray], ...]
    grid: GridSpec | None
    title: str = ""
    description: str = ""


def _where(path: str) -> str:
    return f" in {path}" if path else ""


def _obj(value: Any, path: str, kind: str) -> Mapping:
    if not isinstance(value, Mapping):
        raise InputError(f"{path or 'the scene'} is not an object", "write it as {\"key\": value, ...}")
    unknown = [k for k in value if k not in KNOWN_KEYS[kind]]
    if unknown:
        raise InputError(f"unknown key '{unknown[0]}'{_where(path)}",
                         f"known keys: {', '.join(KNOWN_KEYS[kind])}")
    return value


def _number(value: Any, path: str, *, lo: float = -math.inf, hi: float = math.inf, lo_open: bool = False,
            unit: str = "") -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(float(value)):
        raise InputError(f"{path} is not a number ({value!r})", f"give a number{' in ' + unit if unit else ''}")
    v = float(value)
    if v < lo or v > hi or (lo_open and v == lo):
        rng = f"{'above' if lo_open else 'at least'} {lo:g}" if hi == math.inf else f"between {lo:g} and {hi:g}"
        raise InputError(f"{path} is {v:g}{' ' + unit if unit else ''}", f"give a value {rng}")
    return v


def _bands(value: Any, path: str, *, lo: float, hi: float, lo_open: bool = False, unit: str = "") -> np.ndarray:
    """One number for all seven octave bands, or seven numbers (125 Hz ... 8 kHz)."""
    if isinstance(value, (list, tuple)):
        if len(value) != NB:
            raise InputError(f"{path} has {len(value)} values; {NB} are needed",
                             "give one value per octave band, 125 Hz to 8 kHz, or one number for all bands")
        return np.array([_number(v, f"{path}[{k}]", lo=lo, hi=hi, lo_open=lo_open, unit=unit)
                         for k, v in enumerate(value)])
    return np.full(NB, _number(value, path, lo=lo, hi=hi, lo_open=lo_open, unit=unit))


def _vector(value: Any, path: str, n: int = 3) -> np.ndarray:
    if not isinstance(value, (list, tuple)) or len(value) != n:
        raise InputError(f"{path} must be {n} numbers", "give [x, y, z] in metres" if n == 3 else f"give {n} numbers")
    return np.array([_number(v, f"{path}[{k}]", unit="m") for k, v in enumerate(value)])


def _name(value: Any, path: str, default: str) -> str:
    if value is None:
        return default
    if not isinstance(value, str) or not value.strip():
        raise InputError(f"{path} must be a non-empty text", "give a short name such as \"LS1\"")
    return value.strip()


def _inside(p: np.ndarray, dims: tuple[float, float, float] | None, what: str) -> None:
    if dims is None:
        return
    if np.any(p < -1e-9) or np.any(p > np.asarray(dims) + 1e-9):
        raise InputError(
            f"{what} at ({', '.join(f'{v:g}' for v in p)}) m is outside the room "
            f"(0..{dims[0]:g}, 0..{dims[1]:g}, 0..{dims[2]:g} m)",
            "check its coordinates against room.dimensions_m (a corner of the room is the origin)")


def _room(d: Any, talker: str) -> Room:
    d = _obj(d, "room", "room")
    dims = None
    if d.get("dimensions_m") is not None:
        v = d["dimensions_m"]
        if not isinstance(v, (list, tuple)) or len(v) != 3:
            raise InputError("room.dimensions_m must be 3 numbers", "give [length, width, height] in metres")
        dims = tuple(_number(x, f"room.dimensions_m[{k}]", lo=0.0, lo_open=True, unit="m") for k, x in enumerate(v))
    box_volume = None if dims is None else dims[0] * dims[1] * dims[2]
    if d.get("volume_m3") is None:
        if box_volume is None:
            raise InputError("the room has no volume", "give room.volume_m3 (m3) or room.dimensions_m")
        volume = box_volume
    else:
        volume = _number(d["volume_m3"], "room.volume_m3", lo=0.0, lo_open=True, unit="m3")
        if box_volume is not None and volume > box_volume * (1 + 1e-9):
            raise InputError(f"room.volume_m3 {volume:g} is larger than the box of room.dimensions_m "
                             f"({box_volume:g} m3)", "the dimensions bound the room: check both")
    surface = None if dims is None else 2 * (dims[0] * dims[1] + dims[0] * dims[2] + dims[1] * dims[2])
    formula = d.get("rt_formula", "sabine")
    if formula not in RT_FORMULAS:
        raise InputError(f"room.rt_formula '{formula}' is not known", f"use one of: {', '.join(RT_FORMULAS)}")
    field = d.get("field", "classic")
    if field not in FIELDS:
        raise InputError(f"room.field '{field}' is not known", f"use one of: {', '.join(FIELDS)}")
    has_rt, has_surf = d.get("rt_s") is not None, d.get("surfaces") is not None
    if has_rt == has_surf:
        raise InputError("the room needs either rt_s or surfaces" if not has_rt else
                         "the room has both rt_s and surfaces",
                         "give the reverberation time per octave band (rt_s) or the surfaces with their "
                         "absorption coefficients, not both")
    if has_rt:
        if "rt_formula" in d:
            raise InputError("room.rt_formula is given with rt_s", "rt_formula applies to surfaces only: remove it")
        rt = _bands(d["rt_s"], "room.rt_s", lo=0.0, hi=MAX_RT_S, lo_open=True, unit="s")
        rt_from = "given"
    else:
        surfs = d["surfaces"]
        if not isinstance(surfs, (list, tuple)) or not surfs:
            raise InputError("room.surfaces must be a non-empty list", "give [{\"area_m2\": ..., \"absorption\": "
                             "[7 coefficients]}, ...]")
        areas, alphas = [], []
        for i, s in enumerate(surfs):
            s = _obj(s, f"room.surfaces[{i}]", "surface")
            if "area_m2" not in s or "absorption" not in s:
                raise InputError(f"room.surfaces[{i}] needs area_m2 and absorption",
                                 "give its area in m2 and its absorption coefficients per octave band")
            areas.append(_number(s["area_m2"], f"room.surfaces[{i}].area_m2", lo=0.0, lo_open=True, unit="m2"))
            alphas.append(_bands(s["absorption"], f"room.surfaces[{i}].absorption", lo=0.0, hi=1.0))
        areas_a, alphas_a = np.array(areas), np.array(alphas)
        surface = float(areas_a.sum())
        a_sabine = areas_a @ alphas_a                       # sum S_i alpha_i per band
        if np.any(a_sabine <= 0):
            raise InputError("the surfaces absorb nothing in some octave band",
                             "give absorption coefficients above 0 (a room without absorption never decays)")
        if formula == "sabine":
            area = a_sabine
        else:
            mean_alpha = a_sabine / surface
            if np.any(mean_alpha >= 1.0):
                raise InputError("the mean absorption coefficient is 1 in some band: Eyring's formula gives T = 0",
                                 "give coefficients below 1, or use rt_formula \"sabine\"")
            area = -surface * np.log1p(-mean_alpha)         # Eyring: A = -S ln(1 - mean alpha)
        rt = std.SABINE_CONSTANT * volume / area
        rt_from = formula
        if np.any(rt > MAX_RT_S):
            raise InputError(f"the surfaces give a reverberation time of {rt.max():.1f} s",
                             f"check the absorption coefficients (at most {MAX_RT_S:g} s is plausible)")
    if surface is not None:
        area = std.SABINE_CONSTANT * volume / rt
        if np.any(area > surface * (1 + 1e-9)):
            k = int(np.argmax(area / surface))
            t_min = std.SABINE_CONSTANT * volume / surface
            raise InputError(
                f"room.rt_s {rt[k]:g} s at {std.OCTAVE_BANDS_HZ[k]:g} Hz implies an absorption area of "
                f"{area[k]:.0f} m2, more than the room's {surface:.0f} m2 of surface",
                f"check rt_s and the volume: this room cannot decay faster than {t_min:.2f} s by Sabine's formula")
    return Room(volume_m3=volume, rt_s=rt, rt_from=rt_from, field=field, dimensions_m=dims, surface_m2=surface)


def _source(d: Any, i: int, talker: str, dims) -> Source:
    path = f"sources[{i}]"
    d = _obj(d, path, "source")
    name = _name(d.get("name"), f"{path}.name", f"S{i + 1}")
    if "position_m" not in d:
        raise InputError(f"{path} has no position_m", "give [x, y, z] in metres")
    pos = _vector(d["position_m"], f"{path}.position_m")
    _inside(pos, dims, f"source {name}")
    lo, hi = std.NOISE_LEVEL_RANGE_DB
    has_db, has_dba = d.get("level_1m_db") is not None, d.get("level_1m_dba") is not None
    if has_db == has_dba:
        raise InputError(f"source {name} has both level_1m_db and level_1m_dba" if has_db else
                         f"source {name} has no level (level_1m_db or level_1m_dba)",
                         "give its on-axis speech level at 1 m per octave band (dB SPL) or as one dB(A) figure "
                         "with the standard speech spectrum")
    if has_db:
        level = _bands(d["level_1m_db"], f"{path}.level_1m_db", lo=lo, hi=hi, unit="dB")
    else:
        level = speech_band_levels(_number(d["level_1m_dba"], f"{path}.level_1m_dba", lo=lo, hi=hi, unit="dB(A)"),
                                   talker)
        level = np.where(np.isfinite(level), level, -np.inf)    # a band without speech for this talker
    q = _bands(d.get("q", 1.0), f"{path}.q", lo=Q_RANGE[0], hi=Q_RANGE[1])
    aim = None
    if d.get("aim_m") is not None:
        aim = _vector(d["aim_m"], f"{path}.aim_m")
        if np.linalg.norm(aim - pos) < MIN_SOURCE_DISTANCE_M:
            raise InputError(f"source {name} is aimed at its own position", "give aim_m as a point it points at")
    delay = _number(d.get("delay_ms", 0.0), f"{path}.delay_ms", lo=0.0, hi=MAX_DELAY_MS, unit="ms")
    ang = att = None
    if d.get("off_axis_db") is not None:
        if aim is None:
            raise InputError(f"source {name} has an off-axis table but no aim_m",
                             "give aim_m (the point on its axis), or remove off_axis_db")
        t = _obj(d["off_axis_db"], f"{path}.off_axis_db", "off_axis_db")
        angles = t.get("angles_deg")
        rows = t.get("attenuation_db")
        if not isinstance(angles, (list, tuple)) or not isinstance(rows, (list, tuple)) or len(angles) != len(rows) \
                or len(angles) < 2:
            raise InputError(f"{path}.off_axis_db needs angles_deg and attenuation_db of the same length (2 or more)",
                             "give angles from 0 to 180 degrees and, per angle, the attenuation re on-axis in dB "
                             "(one number or seven)")
        ang = np.array([_number(a, f"{path}.off_axis_db.angles_deg[{k}]", lo=0.0, hi=180.0)
                        for k, a in enumerate(angles)])
        if ang[0] != 0.0 or np.any(np.diff(ang) <= 0):
            raise InputError(f"{path}.off_axis_db.angles_deg must start at 0 and increase",
                             "give e.g. [0, 30, 60, 90, 180]")
        att = np.array([_bands(r, f"{path}.off_axis_db.attenuation_db[{k}]", lo=0.0, hi=100.0, unit="dB")
                        for k, r in enumerate(rows)])
        if np.any(att[0] != 0.0):
            raise InputError(f"{path}.off_axis_db: the attenuation at 0 degrees must be 0 dB",
                             "give the on-axis level in level_1m_db and the attenuation re that level")
    return Source(name=name, position_m=pos, level_1m_db=level, q=q, aim_m=aim, delay_ms=delay,
                  off_axis_deg=ang, off_axis_db=att)


def _grid(d: Any, dims) -> GridSpec:
    d = _obj(d, "grid", "grid")
    missing = [k for k in ("x_m", "y_m", "z_m", "step_m") if k not in d]
    if missing:
        raise InputError(f"grid has no {missing[0]}", "give x_m [from, to], y_m [from, to], z_m (ear height) "
                         "and step_m")
    step = _number(d["step_m"], "grid.step_m", lo=0.0, lo_open=True, unit="m")
    axes = []
    for key in ("x_m", "y_m"):
        ends = _vector(d[key], f"grid.{key}", n=2)
        if ends[1] < ends[0]:
            raise InputError(f"grid.{key} runs from {ends[0]:g} down to {ends[1]:g}", "give [from, to] with from <= to")
        n = int(math.floor((ends[1] - ends[0]) / step + 1e-9)) + 1
        if n > MAX_GRID_POINTS:
            raise InputError(f"the grid has more than {MAX_GRID_POINTS} points",
                             f"use a larger step_m (the limit is {MAX_GRID_POINTS} points)")
        axes.append(ends[0] + step * np.arange(n))
    z = _number(d["z_m"], "grid.z_m", unit="m")
    count = axes[0].size * axes[1].size
    if count > MAX_GRID_POINTS:
        raise InputError(f"the grid has {count} points, more than {MAX_GRID_POINTS}",
                         f"use a larger step_m or a smaller area (the limit is {MAX_GRID_POINTS} points)")
    g = GridSpec(x_m=axes[0], y_m=axes[1], z_m=z, step_m=step)
    if dims is not None:
        for corner in ((axes[0][0], axes[1][0], z), (axes[0][-1], axes[1][-1], z)):
            _inside(np.array(corner), dims, "the grid corner")
    return g


def parse_scene(d: Mapping, *, talker: str = std.DEFAULT_TALKER) -> Scene:
    """Check a scene given as a dictionary (the parsed JSON) and return it as a :class:`Scene`.

    Parameters
    ----------
    d : the scene: ``room`` (``volume_m3`` and/or ``dimensions_m``; ``rt_s`` per octave band or
        one number, or ``surfaces`` with ``rt_formula`` "sabine" or "eyring"; ``field``
        "classic" or "revised"), ``noise_db`` (optional, seven dB SPL), ``sources`` (each with
        ``position_m``, ``level_1m_db`` or ``level_1m_dba``, optional ``name``, ``q``,
        ``aim_m``, ``off_axis_db``, ``delay_ms``), ``listeners`` and/or ``grid``.
    talker : speech spectrum used for a source given by ``level_1m_dba``.

    Raises
    ------
    InputError : an unknown key (with the list of known ones), a wrong list length, a
        non-positive volume or reverberation time, a reverberation time that implies more
        absorption area than the room has surface, a point outside the room, a listener at
        a loudspeaker, a grid of more than :data:`MAX_GRID_POINTS` points.
    """
    talker = check_talker(talker)
    d = _obj(d, "", "scene")
    if "room" not in d:
        raise InputError("the scene has no room", "give room.volume_m3 and room.rt_s (or room.surfaces)")
    room = _room(d["room"], talker)
    dims = room.dimensions_m
    srcs = d.get("sources")
    if not isinstance(srcs, (list, tuple)) or not srcs:
        raise InputError("the scene has no sources", "give a list of loudspeakers under \"sources\"")
    sources = tuple(_source(s, i, talker, dims) for i, s in enumerate(srcs))
    names = [s.name for s in sources]
    if len(set(names)) != len(names):
        dup = next(n for n in names if names.count(n) > 1)
        raise InputError(f"two sources are named '{dup}'", "give each loudspeaker its own name")
    noise = None
    if d.get("noise_db") is not None:
        lo, hi = std.NOISE_LEVEL_RANGE_DB
        noise = _bands(d["noise_db"], "noise_db", lo=lo, hi=hi, unit="dB SPL")
    listeners = []
    raw = d.get("listeners") or []
    if not isinstance(raw, (list, tuple)):
        raise InputError("listeners must be a list", "give [{\"name\": \"P1\", \"position_m\": [x, y, z]}, ...]")
    for i, li in enumerate(raw):
        li = _obj(li, f"listeners[{i}]", "listener")
        name = _name(li.get("name"), f"listeners[{i}].name", f"P{i + 1}")
        if "position_m" not in li:
            raise InputError(f"listener {name} has no position_m", "give [x, y, z] in metres")
        pos = _vector(li["position_m"], f"listeners[{i}].position_m")
        _inside(pos, dims, f"listener {name}")
        for s in sources:
            r = float(np.linalg.norm(pos - s.position_m))
            if r < MIN_SOURCE_DISTANCE_M:
                raise InputError(f"listener {name} is {r:.2f} m from source {s.name}",
                                 f"a listener must be at least {MIN_SOURCE_DISTANCE_M:g} m from a loudspeaker")
        listeners.append((name, pos))
    lnames = [n for n, _ in listeners]
    if len(set(lnames)) != len(lnames):
        raise InputError("two listeners have the same name", "give each listener position its own name")
    grid = _grid(d["grid"], dims) if d.get("grid") is not None else None
    if not listeners and grid is None:
        raise InputError("the scene has neither listeners nor a grid", "give listener positions, a grid, or both")
    if grid is not None:
        _check_grid_distance(grid, sources)
    for key in ("title", "description"):
        if key in d and not isinstance(d[key], str):
            raise InputError(f"{key} must be text", f"write the {key} in quotes")
    return Scene(room=room, sources=sources, noise_db=noise, listeners=tuple(listeners), grid=grid,
                 title=str(d.get("title", "")), description=str(d.get("description", "")))


def _check_grid_distance(grid: GridSpec, sources: Sequence[Source]) -> None:
    """A grid point within :data:`MIN_SOURCE_DISTANCE_M` of a loudspeaker is refused."""
    for s in sources:
        # the grid point nearest to the source (grid is regular): clip its projection
        ix = int(np.clip(np.round((s.position_m[0] - grid.x_m[0]) / grid.step_m), 0, grid.x_m.size - 1))
        iy = int(np.clip(np.round((s.position_m[1] - grid.y_m[0]) / grid.step_m), 0, grid.y_m.size - 1))
        p = np.array([grid.x_m[ix], grid.y_m[iy], grid.z_m])
        r = float(np.linalg.norm(p - s.position_m))
        if r < MIN_SOURCE_DISTANCE_M:
            raise InputError(f"the grid point ({p[0]:g}, {p[1]:g}, {p[2]:g}) m is {r:.2f} m from source {s.name}",
                             "move the grid's height (z_m) or the loudspeaker")


def read_scene(path: str | Path, *, talker: str = std.DEFAULT_TALKER) -> Scene:
    """Read and check a scene file (JSON, or TOML with the suffix ``.toml``); see :func:`parse_scene`.

    Raises
    ------
    InputError
        For a file that is missing, a folder, unreadable or not valid JSON/TOML, and for
        every scene :func:`parse_scene` refuses.
    """
    p = checks.path(path, "scene file")
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError(f"scene file '{p}' does not exist", "check the path") from None
    except IsADirectoryError:
        raise InputError(f"'{p}' is a folder, not a scene file", "give the scene's JSON file") from None
    except (OSError, UnicodeDecodeError) as e:
        raise InputError(f"scene file '{p}' cannot be read ({e.__class__.__name__})",
                         "give a UTF-8 JSON file") from None
    if p.suffix.lower() == ".toml":
        import tomllib

        try:
            data = tomllib.loads(text)
        except tomllib.TOMLDecodeError as e:
            raise InputError(f"scene file '{p.name}' is not valid TOML ({e})", "fix the file") from None
    else:
        try:
            data = json.loads(text)
        except json.JSONDecodeError as e:
            raise InputError(f"scene file '{p.name}' is not valid JSON (line {e.lineno}, column {e.colno}: {e.msg})",
                             "fix the file (a JSON validator shows where)") from None
    return parse_scene(data, talker=talker)


# ---------------------------------------------------------------------------
# The model
# ---------------------------------------------------------------------------

def _checked(value: Any, kind: type, what: str) -> Any:
    """``value`` when it is a ``kind`` (a :class:`Room`, :class:`Source` or :class:`Scene`
    made by :func:`parse_scene`), else InputError."""
    if not isinstance(value, kind):
        raise InputError(f"{what} is not a {kind.__name__} ({type(value).__name__})",
                         f"take the {kind.__name__.lower()} from a scene read by read_scene or parse_scene")
    return value


def _points(points: Any) -> np.ndarray:
    """``points`` as a finite (P, 3) array, P >= 1 (a single point may be given as 3 numbers)."""
    pts = checks.array(points, "points", ndim=(1, 2), min_size=3, fix="give points as (P, 3) coordinates in metres")
    if pts.shape[-1] != 3:
        raise InputError(f"points have {pts.shape[-1]} coordinates, not 3", "give [x, y, z] per point, in metres")
    if pts.size // 3 > MAX_GRID_POINTS * 10:
        raise InputError(f"{pts.size // 3} points asked for at once", f"give at most {MAX_GRID_POINTS * 10}")
    return pts.reshape(-1, 3)


def _modulation_hz(modulation_hz: Any) -> np.ndarray:
    if isinstance(modulation_hz, str):
        raise InputError("modulation frequencies are text", "give them as numbers in Hz")
    f = checks.array(modulation_hz, "modulation frequencies", fix="give one or more frequencies in Hz")
    if f.size > MAX_MODULATION_FREQUENCIES or np.any(f <= 0) or np.any(f > 1000.0):
        raise InputError("modulation frequencies must be 1 to 1000 values above 0 and at most 1000 Hz",
                         "give the modulation frequencies in Hz, e.g. the 14 of the STI")
    return f


def directivity_gain(source: Source, cos_theta: np.ndarray) -> np.ndarray:
    """Intensity re on-axis of ``source`` at angles with cosine ``cos_theta`` (shape (P,)),
    per octave band: shape (P, 7).

    Without an aim the source radiates its on-axis level in every direction (its ``q``
    then only sets the power feeding the reverberant field). With an aim and no table the
    pattern is ``((1 + cos theta) / 2) ** (Q - 1)``: a cardioid family whose directivity
    factor is exactly Q (4 pi / integral over the sphere = 2 / integral_{-1}^{1}
    ((1 + u) / 2)^(Q - 1) du = Q), so the direct and reverberant sound use the same Q
    (a model of this tool). With a table the attenuation is interpolated linearly in angle.

    Raises
    ------
    InputError
        For a ``source`` that is not a :class:`Source`, or cosines that are not a finite
        1-D array (or a single number).
    """
    _checked(source, Source, "source")
    c = np.clip(checks.array(np.atleast_1d(cos_theta) if np.ndim(cos_theta) == 0 else cos_theta,
                             "cosines of the angles"), -1.0, 1.0)
    if source.aim_m is None:
        return np.ones((c.size, NB))
    if source.off_axis_db is None:
        return ((1.0 + c[:, None]) / 2.0) ** (source.q[None, :] - 1.0)
    theta = np.degrees(np.arccos(c))
    att = np.column_stack([np.interp(theta, source.off_axis_deg, source.off_axis_db[:, k]) for k in range(NB)])
    return 10.0 ** (-att / 10.0)


def source_terms(room: Room, source: Source, points: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Direct intensity D, reverberant intensity R (both (P, 7), re 1 pW/m2 as 10 lg I = dB)
    and arrival time t (P,), s, of one loudspeaker at ``points`` (P, 3).

    D = I_1m g(theta) / r^2; R = I_1m 16 pi / (Q A) (times exp(-13.82 r / (c T)) with the
    revised theory); t = r / c + delay. See the module docstring for the sources.

    Raises
    ------
    InputError
        For a ``room`` or ``source`` that is not a :class:`Room` / :class:`Source`, or
        points that are not finite (P, 3) coordinates.
    """
    _checked(room, Room, "room")
    _checked(source, Source, "source")
    pts = _points(points)
    v = pts - source.position_m
    r = np.sqrt(np.einsum("ij,ij->i", v, v))
    i1 = 10.0 ** (source.level_1m_db / 10.0)               # -inf (no speech) -> 0
    if source.aim_m is None:
        cos_t = np.ones(r.size)
    else:
        axis = source.aim_m - source.position_m
        axis = axis / np.linalg.norm(axis)
        with np.errstate(invalid="ignore", divide="ignore"):
            cos_t = np.where(r > 0, (v @ axis) / r, 1.0)
    direct = i1[None, :] * directivity_gain(source, cos_t) / (r[:, None] ** 2)
    rev = np.broadcast_to(i1 * 16.0 * np.pi / (source.q * room.absorption_area_m2), direct.shape)
    if room.field == "revised":
        rev = rev * np.exp(-std.BARRON_DECAY_CONSTANT * r[:, None] / (std.SPEED_OF_SOUND_M_S * room.rt_s[None, :]))
    t = r / std.SPEED_OF_SOUND_M_S + source.delay_ms / 1000.0
    return direct, np.array(rev), t


def reverberant_transfer(rt_s: np.ndarray, modulation_hz: Sequence[float]) -> np.ndarray:
    """1 / (1 + j 2 pi F T / 13.8) per band and modulation frequency: shape (7, F)
    (Houtgast, Steeneken & Plomp 1980).

    Raises
    ------
    InputError
        For reverberation times that are not finite positive numbers (one per band), or
        modulation frequencies that are not positive numbers.
    """
    f = _modulation_hz(modulation_hz)
    rt = checks.array(rt_s, "reverberation times", fix="give the reverberation time per octave band, s")
    if np.any(rt <= 0) or np.any(rt > MAX_RT_S):
        raise InputError(f"reverberation times must be above 0 and at most {MAX_RT_S:g} s",
                         "give the reverberation time per octave band, s")
    return 1.0 / (1.0 + 1j * 2.0 * np.pi * f[None, :] * rt[:, None] / std.MTF_DECAY_DIVISOR)


def modulation_transfer(room: Room, sources: Sequence[Source], points: np.ndarray,
                        modulation_hz: Sequence[float] = std.MODULATION_FREQUENCIES_HZ
                        ) -> tuple[np.ndarray, np.ndarray]:
    """Modelled MTF and total speech intensity of all ``sources`` at ``points``.

    Returns ``mtf`` of shape (P, 7, F) and the total intensity per band (P, 7) (its
    10 lg is the octave-band speech level at each point, dB SPL). The complex sums over
    the sources are taken as matrix products of the direct and reverberant intensities
    with the cosines and sines of the arrival phases.

    Raises
    ------
    InputError
        For a ``room`` that is not a :class:`Room`, ``sources`` that are not a non-empty
        sequence of :class:`Source`, points that are not finite (P, 3) coordinates, or
        modulation frequencies that are not positive numbers.
    """
    _checked(room, Room, "room")
    if isinstance(sources, (str, bytes)) or not isinstance(sources, Sequence) or not sources:
        raise InputError("sources are not a non-empty list of loudspeakers", "take them from a checked scene")
    for s in sources:
        _checked(s, Source, "a source")
    pts = _points(points)
    f = _modulation_hz(modulation_hz)
    h = reverberant_transfer(room.rt_s, f)                 # (7, F)
    n = len(sources)
    block = max(64, BLOCK_VALUES // max(1, n * f.size))
    mtf = np.empty((pts.shape[0], NB, f.size))
    total = np.empty((pts.shape[0], NB))
    for a in range(0, pts.shape[0], block):
        p = pts[a:a + block]
        terms = [source_terms(room, s, p) for s in sources]
        d = np.stack([t[0] for t in terms], axis=-1)        # (P, 7, S)
        r = np.stack([t[1] for t in terms], axis=-1)        # (P, 7, S)
        ph = 2.0 * np.pi * np.stack([t[2] for t in terms], axis=-1)[:, :, None] * f[None, None, :]  # (P, S, F)
        cos, sin = np.cos(ph), np.sin(ph)
        # sum_i X_i exp(-j phi_i) = sum_i X_i cos phi_i - j sum_i X_i sin phi_i
        sum_d = d @ cos - 1j * (d @ sin)                     # (P, 7, F)
        sum_r = r @ cos - 1j * (r @ sin)
        energy = d.sum(axis=-1) + r.sum(axis=-1)             # (P, 7)
        with np.errstate(invalid="ignore", divide="ignore"):
            m = np.abs(sum_d + h[None] * sum_r) / energy[:, :, None]
        mtf[a:a + block] = np.where(energy[:, :, None] > 0, m, 0.0)
        total[a:a + block] = energy
    return mtf, total


def critical_distance(room: Room, source: Source) -> np.ndarray:
    """On-axis critical distance r_c = sqrt(Q A / (16 pi)) per octave band, m (classic theory).

    Raises
    ------
    InputError
        For a ``room`` or ``source`` that is not a :class:`Room` / :class:`Source`.
    """
    _checked(room, Room, "room")
    _checked(source, Source, "source")
    return np.sqrt(source.q * room.absorption_area_m2 / (16.0 * np.pi))


def level_dba(band_db: np.ndarray) -> float:
    """A-weighted sum of seven octave-band levels (-inf bands count as silent).

    Raises
    ------
    InputError
        For levels that are not seven numbers (NaN or +inf included).
    """
    b = checks.array(band_db, "octave-band levels", min_size=NB, finite=False,
                     fix=f"give {NB} levels, 125 Hz to 8 kHz, in dB")
    if b.size != NB or np.any(np.isnan(b)) or np.any(b == np.inf) or np.any(b > 300.0):
        raise InputError(f"octave-band levels must be {NB} numbers up to 300 dB (-inf: silent)",
                         f"give {NB} levels, 125 Hz to 8 kHz, in dB")
    return a_weighted_level(np.where(np.isfinite(b), b, -400.0))


# ---------------------------------------------------------------------------
# The image-source cross-check (pyroomacoustics, optional)
# ---------------------------------------------------------------------------

#: Sample rate of the image-source impulse responses, Hz (the 8 kHz octave needs more than
#: 22.6 kHz; judgement).
IMAGE_FS: int = 48000

#: Highest reflection order of the image sources (judgement: 40 orders hold about 270 000
#: image sources per loudspeaker, a few seconds; responses cut earlier get the ir path's
#: truncation caution).
MAX_IMAGE_ORDER: int = 40

#: Decay the image-source response should cover, dB (the range T30 needs, see
#: :data:`envpredict.standards.T30_NEEDED_RANGE_DB`).
IMAGE_DECAY_DB: float = std.T30_NEEDED_RANGE_DB


def image_absorption(room: Room) -> np.ndarray:
    """Uniform energy absorption coefficient per band for the image sources: the mean
    coefficient of the surfaces by inverting Eyring's formula, alpha = 1 - exp(-0.161 V / (S T)),
    so that the image-source decay (reflections weakened by (1 - alpha) each) has the room's T.

    Raises
    ------
    InputError
        For a ``room`` that is not a :class:`Room`, or one without a surface area (give
        ``room.dimensions_m`` or its surfaces).
    """
    _checked(room, Room, "room")
    if room.surface_m2 is None:
        raise InputError("the room has no surface area", "give room.dimensions_m or room.surfaces")
    return 1.0 - np.exp(-std.SABINE_CONSTANT * room.volume_m3 / (room.surface_m2 * room.rt_s))


def image_source_ir(scene: Scene, point: np.ndarray, fs: int = IMAGE_FS) -> tuple[np.ndarray, np.ndarray]:
    """Impulse response at ``point`` of all loudspeakers in the rectangular room, by the image-
    source method of pyroomacoustics, and the octave-band speech levels it carries (dB SPL).

    Each loudspeaker is an omnidirectional point source (its ``q`` and aim are not modelled);
    its response is split into octave bands (:func:`envpredict.bands.octave_bands`), scaled so
    that its direct sound at 1 m has the loudspeaker's level and delayed by its electronic delay; the bands of all
    loudspeakers are summed. Walls absorb uniformly (:func:`image_absorption`).

    References
    ----------
    J. B. Allen, D. A. Berkley, "Image method for efficiently simulating small-room acoustics",
    JASA 65 (1979) 943-950; R. Scheibler et al., "Pyroomacoustics", ICASSP 2018.

    Raises
    ------
    InputError
        For a ``scene`` that is not a :class:`Scene`, a room without dimensions, a point
        that is not three finite coordinates inside the room, a rate outside the
        accepted range, or when pyroomacoustics is not installed.
    """
    _checked(scene, Scene, "scene")
    fs = checks.sample_rate(fs, "image-source response")
    point = _points(point)
    if point.shape[0] != 1:
        raise InputError(f"{point.shape[0]} points given", "give one point [x, y, z] in metres")
    point = point[0]
    if scene.room.dimensions_m is not None:
        _inside(point, scene.room.dimensions_m, "the point")
    try:
        import pyroomacoustics as pra
    except ImportError:
        raise InputError("the image engine needs pyroomacoustics", "install it: pip install '.[rooms]'") from None
    from .bands import octave_bands

    room = scene.room
    if room.dimensions_m is None:
        raise InputError("the image engine needs the room's dimensions", "give room.dimensions_m [L, W, H]")
    alpha = image_absorption(room)
    t_need = float(room.rt_s.max()) * IMAGE_DECAY_DB / 60.0
    order = int(min(MAX_IMAGE_ORDER, math.ceil(std.SPEED_OF_SOUND_M_S * t_need / min(room.dimensions_m))))
    mat = pra.Material({"description": "uniform", "coeffs": [float(a) for a in alpha],
                        "center_freqs": [float(f) for f in std.OCTAVE_BANDS_HZ]})
    shoebox = pra.ShoeBox(list(room.dimensions_m), fs=fs, materials=mat, max_order=order, air_absorption=False)
    shoebox.set_sound_speed(std.SPEED_OF_SOUND_M_S)
    for s in scene.sources:
        shoebox.add_source(list(s.position_m))
    shoebox.add_microphone(np.asarray(point, dtype=float).reshape(3, 1))
    shoebox.compute_rir()
    rirs = shoebox.rir[0]
    n = max(len(h) + int(round(s.delay_ms * fs / 1000.0)) for h, s in zip(rirs, scene.sources))
    bands = np.zeros((NB, n))
    # an octave band passes only its share of a unit impulse's energy: scale each band so that
    # the direct sound keeps its full level at 1 m in every band
    unit = np.zeros(n)
    unit[n // 2] = 1.0
    share = np.sqrt(np.sum(octave_bands(unit, fs) ** 2, axis=1))
    # pyroomacoustics' amplitude convention (1/r or 1/(4 pi r), by version): measured on its
    # free-field response at 1 m, so that the direct sound at 1 m has the source's level
    free = pra.ShoeBox([4.0, 4.0, 4.0], fs=fs, max_order=0)
    free.add_source([1.5, 2.0, 2.0])
    free.add_microphone(np.array([[2.5], [2.0], [2.0]]))
    free.compute_rir()
    unit_1m = 1.0 / np.sqrt(np.sum(np.asarray(free.rir[0][0], dtype=float) ** 2))
    for h, s in zip(rirs, scene.sources):
        k0 = int(round(s.delay_ms * fs / 1000.0))
        gain = unit_1m * 10.0 ** (np.where(np.isfinite(s.level_1m_db), s.level_1m_db, -400.0) / 20.0) / share
        bands[:, k0:k0 + len(h)] += gain[:, None] * octave_bands(np.asarray(h, dtype=float), fs)
    with np.errstate(divide="ignore"):
        speech_db = 10.0 * np.log10(np.sum(bands ** 2, axis=1))
    return bands.sum(axis=0), speech_db

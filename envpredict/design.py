"""Design stage: the STI of a room and its loudspeakers predicted before anything is built.

The job reads a scene (:mod:`envpredict.roommodel`), models the MTF at each listener and
over a grid (:func:`envpredict.roommodel.modulation_transfer`) and rates it with the STI
formulas of :mod:`envpredict.sti` -- noise, auditory masking and the reception threshold
exactly as for a measured impulse response, with the octave-band speech levels the model
gives at each point. It owns no acoustics of its own.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path
from typing import Callable, Mapping

import numpy as np

from . import cautions as cau
from . import checks
from . import standards as std
from .results import jsonable
from .exceptions import InputError
from .roommodel import (
    IMAGE_FS, GridSpec, Room, Scene, Source, critical_distance, image_source_ir, level_dba, modulation_transfer,
    parse_scene, read_scene, source_terms,
)
from .hearing import CAUTION_AUDIBILITY, Audiogram, audiogram_summary, check_auditory, inaudible_bands_hz
from .sti import StiResult, check_requirement, check_talker, format_index, sti_from_mtf, sti_many
from .tables import load_audiogram

#: The decimals of grid STI values in the JSON (as for a single STI).
GRID_DECIMALS: int = 4

#: The engines: the statistical model, or image sources (pyroomacoustics) for the listeners.
ENGINES: tuple[str, ...] = ("statistical", "image")

METHOD = ("design-stage prediction: statistical model of the MTF (direct sound + diffuse reverberation per "
          "loudspeaker, complex sum with arrival times; Houtgast, Steeneken & Plomp 1980), STI per "
          "IEC 60268-16:2011 Annex A")

ECHO_CRITERION = (f"an arrival more than {std.ECHO_DELAY_MS:g} ms after the first direct sound and not more than "
                  f"{-std.ECHO_LEVEL_DB:g} dB below it (A-weighted) is flagged as a likely echo (common design rule "
                  "after Haas 1951, Acustica 1:49-58; judgement, not a standard's limit)")

STATISTICAL = (
    "This is a statistical prediction from the room's volume and reverberation time and the loudspeakers' data, "
    "not a measurement: it assumes a diffuse reverberant field (no single reflections, focusing, coupled spaces or "
    "obstacles). Galbrun & Kitapci (2014, Applied Acoustics 81:1-14) found predictions of this kind within "
    f"{std.STATISTICAL_STI_MAX_ERROR:.1f} of the measured STI ({std.STATISTICAL_STI_MEAN_ERROR:.2f} on average), "
    "mostly below it. Measure the installed system (envpredict ir or stipa) before sign-off."
)

DEFAULT_REQUIREMENT = (
    f"No requirement was given: the map and verdicts use STI {std.VOICE_ALARM_TARGET_STI:.2f}, the value commonly "
    "required of voice-alarm systems (common practice; the local code sets the real requirement and the "
    "measurement procedure, and a qualified person must sign off the installed system). Give it with --require."
)

NO_NOISE = ("The scene gives no background noise (noise_db): the prediction holds only for a silent room. Give the "
            "octave-band noise levels expected in use.")


@dataclass(frozen=True)
class DesignListener:
    """The prediction at one listener position.

    Attributes
    ----------
    name, position_m : as in the scene.
    sti : the STI with its MTF (``mtf_measured`` is the modelled MTF before the noise and
        auditory corrections, ``mtf`` after them) and band levels.
    arrivals : the loudspeakers' direct sounds at the listener, first first: (source,
        arrival time re the first arrival in ms, A-weighted level re the first arrival in dB,
        A-weighted direct level in dB(A)).
    dominant_source : the loudspeaker with the highest A-weighted direct level.
    """

    name: str
    position_m: np.ndarray
    sti: StiResult
    arrivals: tuple[tuple[str, float, float, float], ...]
    dominant_source: str
    statistical_sti: float | None = None     # with the image engine: the statistical model's STI

    @property
    def late_arrival(self) -> tuple[str, float, float] | None:
        """The strongest direct arrival more than ECHO_DELAY_MS after the first: (source,
        delay ms, level dB re the first arrival), or None."""
        late = [a for a in self.arrivals[1:] if a[1] > std.ECHO_DELAY_MS]
        if not late:
            return None
        a = max(late, key=lambda a: a[2])
        return a[0], a[1], a[2]

    @property
    def echo(self) -> bool:
        late = self.late_arrival
        return late is not None and late[2] >= std.ECHO_LEVEL_DB

    def to_dict(self) -> dict:
        d = self.sti.to_dict()
        late = self.late_arrival
        d.update({
            "name": self.name,
            "position_m": np.round(self.position_m, 3),
            "speech_level_dba": round(level_dba(self.sti.speech_db), 1),
            "dominant_source": self.dominant_source,
            "arrivals": [{"source": s, "delay_ms": round(t, 1), "level_db": round(lv, 1), "direct_dba": round(a, 1)}
                         for s, t, lv, a in self.arrivals],
            "late_arrival": None if late is None else {
                "source": late[0], "delay_ms": round(late[1], 1), "level_db": round(late[2], 1), "echo": self.echo},
            "echo": self.echo,
        })
        if self.statistical_sti is not None:
            d["statistical_sti"] = round(self.statistical_sti, 4)
        return jsonable(d)


@dataclass(frozen=True)
class DesignGrid:
    """The STI over a horizontal grid (rows = y, columns = x)."""

    x_m: np.ndarray
    y_m: np.ndarray
    z_m: float
    step_m: float
    sti: np.ndarray
    requirement: float

    @property
    def share_meeting(self) -> float:
        """Share of the grid points with STI >= requirement (unrounded values)."""
        return float(np.mean(self.sti >= self.requirement))

    def _at(self, flat: int) -> list[float]:
        iy, ix = np.unravel_index(flat, self.sti.shape)
        return [float(self.x_m[ix]), float(self.y_m[iy]), float(self.z_m)]

    def to_dict(self) -> dict:
        lo, hi = int(np.argmin(self.sti)), int(np.argmax(self.sti))
        return jsonable({
            "x_m": np.round(self.x_m, 4), "y_m": np.round(self.y_m, 4), "z_m": self.z_m, "step_m": self.step_m,
            "points": int(self.sti.size),
            "sti": np.round(self.sti, GRID_DECIMALS),
            "requirement": self.requirement,
            "share_meeting_requirement": round(self.share_meeting, 4),
            "min_sti": float(format_index(self.sti.flat[lo], self.requirement, minimum=GRID_DECIMALS)),
            "min_at_m": self._at(lo),
            "max_sti": round(float(self.sti.flat[hi]), GRID_DECIMALS),
            "max_at_m": self._at(hi),
            "mean_sti": round(float(self.sti.mean()), GRID_DECIMALS),
        })


@dataclass(frozen=True)
class DesignResult:
    """A design-stage prediction: the STI at each listener and over a grid."""

    scene: Scene
    listeners: tuple[DesignListener, ...]
    grid: DesignGrid | None
    talker: str
    auditory: bool
    requirement: float
    requirement_given: bool
    cautions: tuple[str, ...]
    notes: tuple[str, ...]
    engine: str = "statistical"
    audiogram: Audiogram | None = None

    def to_dict(self) -> dict:
        room: Room = self.scene.room
        listener = {} if self.audiogram is None else {"audiogram": audiogram_summary(self.audiogram)}
        return jsonable({
            "index": "sti",
            "method": METHOD,
            "engine": self.engine,
            "title": self.scene.title,
            "description": self.scene.description,
            "talker": self.talker,
            "auditory_corrections": self.auditory,
            "requirement": self.requirement,
            "requirement_given": self.requirement_given,
            "bands_hz": std.OCTAVE_BANDS_HZ,
            "room": {
                "volume_m3": room.volume_m3, "dimensions_m": room.dimensions_m, "surface_m2": room.surface_m2,
                "rt_s": np.round(room.rt_s, 3), "rt_from": room.rt_from, "field": room.field,
                "absorption_area_m2": np.round(room.absorption_area_m2, 1),
            },
            "noise_db": self.scene.noise_db,
            "sources": [_source_dict(room, s) for s in self.scene.sources],
            "listeners": [li.to_dict() for li in self.listeners],
            "grid": None if self.grid is None else self.grid.to_dict(),
            "echo_criterion": ECHO_CRITERION,
            "cautions": list(self.cautions),
            "notes": list(self.notes),
            **listener,
        })


def _source_dict(room: Room, s: Source) -> dict:
    return {
        "name": s.name, "position_m": s.position_m, "aim_m": s.aim_m, "delay_ms": s.delay_ms,
        "level_1m_db": np.round(s.level_1m_db, 1), "level_1m_dba": round(level_dba(s.level_1m_db), 1),
        "q": s.q, "pattern": s.pattern, "critical_distance_m": np.round(critical_distance(room, s), 2),
    }


def _listener(scene: Scene, name: str, pos: np.ndarray, *, talker: str, auditory: bool,
              requirement: float, audiogram: Audiogram | None = None) -> DesignListener:
    mtf, total = modulation_transfer(scene.room, scene.sources, pos[None, :])
    with np.errstate(divide="ignore"):
        speech_db = 10.0 * np.log10(total[0])
    res = sti_from_mtf(mtf[0], noise_db=scene.noise_db, talker=talker, auditory=auditory, speech_db=speech_db,
                       audiogram=audiogram)
    res = replace(res, requirement=requirement)
    direct = []
    for s in scene.sources:
        d, _, t = source_terms(scene.room, s, pos[None, :])
        with np.errstate(divide="ignore"):
            direct.append((s.name, float(t[0]), level_dba(10.0 * np.log10(d[0]))))
    direct.sort(key=lambda a: a[1])
    t0, l0 = direct[0][1], direct[0][2]
    arrivals = tuple((n, 1000.0 * (t - t0), lv - l0, lv) for n, t, lv in direct)
    dominant = max(direct, key=lambda a: a[2])[0]
    return DesignListener(name=name, position_m=pos, sti=res, arrivals=arrivals, dominant_source=dominant)


def grid_sti(scene: Scene, grid: GridSpec, *, talker: str = std.DEFAULT_TALKER, auditory: bool = True,
             progress: Callable[[int, int], None] | None = None, audiogram: Audiogram | None = None) -> np.ndarray:
    """STI at every point of ``grid``, shape (ny, nx): the modelled MTF and speech levels
    rated by :func:`envpredict.sti.sti_many` (the helpers of :func:`sti_from_mtf`), for a
    listener with the hearing loss of ``audiogram`` when given.

    Raises
    ------
    InputError
        For a ``scene`` that is not a :class:`~envpredict.roommodel.Scene`, a ``grid``
        that is not a :class:`~envpredict.roommodel.GridSpec`, an unknown talker, an
        ``auditory`` that is not a flag, or an audiogram refused by
        :func:`envpredict.hearing.check_auditory`.
    """
    if not isinstance(scene, Scene):
        raise InputError(f"scene is not a Scene ({type(scene).__name__})", "read it with read_scene or parse_scene")
    if not isinstance(grid, GridSpec):
        raise InputError(f"grid is not a GridSpec ({type(grid).__name__})", "take the grid of a checked scene")
    talker = check_talker(talker)
    auditory = checks.flag(auditory, "auditory")
    audiogram = check_auditory(audiogram, auditory)
    pts = grid.points()
    out = np.empty(pts.shape[0])
    block = 20_000
    for a in range(0, pts.shape[0], block):
        mtf, total = modulation_transfer(scene.room, scene.sources, pts[a:a + block])
        with np.errstate(divide="ignore"):
            speech_db = 10.0 * np.log10(total)
        out[a:a + block] = sti_many(mtf, speech_db, scene.noise_db, talker=talker, auditory=auditory,
                                    audiogram=audiogram)
        if progress:
            progress(min(a + block, pts.shape[0]), pts.shape[0])
    return out.reshape(grid.y_m.size, grid.x_m.size)


def predict_design(
    scene: Scene | Mapping,
    *,
    talker: str = std.DEFAULT_TALKER,
    auditory: bool = True,
    requirement: float | None = None,
    progress: Callable[[int, int], None] | None = None,
    engine: str = "statistical",
    audiogram: Audiogram | str | Path | None = None,
) -> DesignResult:
    """Predict the STI at the scene's listeners and over its grid.

    Parameters
    ----------
    scene : a checked :class:`~envpredict.roommodel.Scene`, or the scene as a dictionary
        (see :func:`envpredict.roommodel.parse_scene` for its keys).
    talker : "male" or "female": band weights, and the speech spectrum of sources given in dB(A).
    auditory : apply auditory masking and the reception threshold (IEC 60268-16).
    requirement : the STI the system must reach; default
        :data:`~envpredict.standards.VOICE_ALARM_TARGET_STI` (with a caution).
    engine : "statistical", or "image" to rate the listeners by the indirect method on
        image-source impulse responses of the rectangular room (pyroomacoustics; needs
        ``room.dimensions_m``); the grid stays statistical, and each listener also carries
        the statistical STI for comparison.
    audiogram : a listener with hearing loss (:mod:`envpredict.hearing`): an Audiogram, its
        text form or a CSV file (:func:`envpredict.tables.load_audiogram`); it raises the
        reception threshold of each band (audibility only). Needs ``auditory``.

    Returns
    -------
    DesignResult

    Raises
    ------
    InputError
        A scene that does not pass :func:`envpredict.roommodel.parse_scene` (unknown keys,
        wrong lengths, impossible rooms, a listener at a loudspeaker, too large a grid), an
        unknown talker, a requirement outside 0..1, or a refused audiogram.

    References
    ----------
    T. Houtgast, H. J. M. Steeneken, R. Plomp, Acustica 46 (1980) 60-72; IEC 60268-16:2011
    Annex A; L. Galbrun, K. Kitapci, Applied Acoustics 81 (2014) 1-14 (accuracy).

    Examples
    --------
    >>> r = predict_design({"room": {"volume_m3": 2000, "rt_s": 1.5},
    ...                     "sources": [{"position_m": [0, 0, 3], "level_1m_dba": 80, "q": 2}],
    ...                     "listeners": [{"name": "near", "position_m": [1, 0, 3]}]}, auditory=False)
    >>> round(r.listeners[0].sti.sti, 2)
    0.88
    """
    talker = check_talker(talker)
    auditory = checks.flag(auditory, "auditory")
    req_given = requirement is not None
    req = check_requirement(requirement) if req_given else std.VOICE_ALARM_TARGET_STI
    engine = _check_engine(engine)
    audiogram = check_auditory(load_audiogram(audiogram), auditory)
    if not isinstance(scene, Scene):
        scene = parse_scene(scene, talker=talker)
    listeners = tuple(_listener(scene, n, p, talker=talker, auditory=auditory, requirement=req, audiogram=audiogram)
                      for n, p in scene.listeners)
    image_cautions: tuple[str, ...] = ()
    if engine == "image":
        listeners, image_cautions = _image_listeners(scene, listeners, talker=talker, auditory=auditory,
                                                     requirement=req, audiogram=audiogram)
    grid = None
    if scene.grid is not None:
        g = scene.grid
        grid = DesignGrid(x_m=g.x_m, y_m=g.y_m, z_m=g.z_m, step_m=g.step_m,
                          sti=grid_sti(scene, g, talker=talker, auditory=auditory, progress=progress,
                                       audiogram=audiogram),
                          requirement=req)
    return DesignResult(scene=scene, listeners=listeners, grid=grid, talker=talker, auditory=bool(auditory),
                        requirement=req, requirement_given=req_given,
                        cautions=(_cautions(scene, listeners, grid, req, req_given, auditory, audiogram)
                                  + image_cautions),
                        notes=_notes(scene) + (IMAGE_NOTES if engine == "image" else ()), engine=engine,
                        audiogram=audiogram)


def predict_design_file(
    path: str | Path,
    *,
    talker: str = std.DEFAULT_TALKER,
    auditory: bool = True,
    requirement: float | None = None,
    progress: Callable[[int, int], None] | None = None,
    engine: str = "statistical",
    audiogram: Audiogram | str | Path | None = None,
) -> DesignResult:
    """:func:`predict_design` of a scene file (JSON, or TOML with the suffix ``.toml``);
    every option is checked before the file is read.

    Raises
    ------
    InputError
        As :func:`predict_design`, and for a scene file that is missing, unreadable or not
        valid JSON/TOML.
    """
    talker = check_talker(talker)
    engine = _check_engine(engine)
    if requirement is not None:
        check_requirement(requirement)
    audiogram = check_auditory(load_audiogram(audiogram), auditory)
    return predict_design(read_scene(path, talker=talker), talker=talker, auditory=auditory,
                          requirement=requirement, progress=progress, engine=engine, audiogram=audiogram)


def _check_engine(engine: str) -> str:
    e = str(engine).strip().lower()
    if e not in ENGINES:
        raise InputError(f"unknown engine '{engine}'", f"use one of: {', '.join(ENGINES)}")
    return e


IMAGE_NOTES = (
    "Image engine: each listener's impulse response is built by the image-source method of pyroomacoustics "
    "(Allen & Berkley 1979) in the rectangular room of room.dimensions_m, with a uniform absorption coefficient "
    "per band from Eyring's formula inverted, alpha = 1 - exp(-0.161 V / (S T)); loudspeakers are omnidirectional "
    "point sources there (q and aim are not modelled); the response is rated by the indirect method (envpredict "
    "ir) with the band speech levels it carries. The grid is the statistical model's.",
)


def _image_listeners(scene: Scene, listeners: tuple[DesignListener, ...], *, talker: str, auditory: bool,
                     requirement: float, audiogram: Audiogram | None = None
                     ) -> tuple[tuple[DesignListener, ...], tuple[str, ...]]:
    """The listeners rated by the indirect method on image-source responses (the statistical
    STI kept beside each), and the cautions of those responses."""
    from . import cautions as cau_mod
    from .indirect import sti_from_ir

    lo = std.NOISE_LEVEL_RANGE_DB[0]
    out, extra = [], []
    generic = {cau_mod.LIFE_SAFETY, cau_mod.NO_NOISE, cau_mod.NO_AUDITORY}
    for li in listeners:
        ir, speech_db = image_source_ir(scene, li.position_m)
        speech_db = np.where(np.isfinite(speech_db), np.maximum(speech_db, lo), lo)
        res = sti_from_ir(0.5 * ir / np.max(np.abs(ir)), IMAGE_FS, noise_db=scene.noise_db, speech_db=speech_db,
                          talker=talker, auditory=auditory, requirement=requirement, audiogram=audiogram)
        for c in res.cautions:
            if (c not in generic and not c.startswith(("STI ", "Listener: ", "The hearing loss puts"))
                    and f"{li.name}: {c}" not in extra):
                extra.append(f"{li.name}: {c}")
        out.append(replace(li, sti=res.sti, statistical_sti=li.sti.sti))
    diffs = [li.sti.sti - li.statistical_sti for li in out]
    k = int(np.argmax(np.abs(diffs))) if diffs else 0
    head = []
    if diffs:
        head.append(f"Image engine: the image-source STI differs from the statistical model's by {diffs[k]:+.3f} at "
                    f"{out[k].name} (the largest difference of {len(out)} listener(s)). In a room with specular walls "
                    "only, the late decay of the image sources is not diffuse (it lasts longer than Eyring's T in a "
                    "shoebox), and the loudspeakers are omnidirectional there; see the README.")
    return tuple(out), tuple(head + extra)


def _cautions(scene: Scene, listeners, grid: DesignGrid | None, req: float, req_given: bool,
              auditory: bool, audiogram: Audiogram | None = None) -> tuple[str, ...]:
    out = [STATISTICAL]
    if not req_given:
        out.append(DEFAULT_REQUIREMENT)
    below = [li for li in listeners if li.sti.sti < req]
    if below:
        out.append(f"Listener positions below the required {req:g}: "
                   + ", ".join(f"{li.name} ({format_index(li.sti.sti, req)})" for li in below) + ".")
    if grid is not None and grid.share_meeting < 1.0:
        lo = int(np.argmin(grid.sti))
        x, y, _ = grid._at(lo)
        out.append(f"{100 * (1 - grid.share_meeting):.1f} % of the grid is below the required {req:g}; the lowest "
                   f"predicted STI is {format_index(grid.sti.flat[lo], req)} at x = {x:g} m, y = {y:g} m.")
    echoes = [li for li in listeners if li.echo]
    if echoes:
        out.append("Likely echoes at " + ", ".join(
            f"{li.name} ({li.late_arrival[0]} {li.late_arrival[1]:.0f} ms after the first arrival, "
            f"{li.late_arrival[2]:+.1f} dB)" for li in echoes)
            + ": delay the nearer loudspeakers or turn down the distant ones. Criterion: " + ECHO_CRITERION + ".")
    if scene.noise_db is None:
        out.append(NO_NOISE)
    if not auditory:
        out.append(cau.NO_AUDITORY)
    if audiogram is not None:
        out.append(f"Listener: {audiogram.source}. {CAUTION_AUDIBILITY}.")
        gone = [(li.name, inaudible_bands_hz(li.sti.speech_db, audiogram)) for li in listeners]
        gone = [(n, g) for n, g in gone if g]
        if gone:
            out.append("The hearing loss puts the speech below the listener's threshold at "
                       + "; ".join(f"{n} ({', '.join(f'{f:g}' for f in g)} Hz)" for n, g in gone) + ".")
    return tuple(out)


def _notes(scene: Scene) -> tuple[str, ...]:
    room = scene.room
    rt = {"given": "as given in the scene",
          "sabine": "from the surfaces by Sabine's formula T = 0.161 V / sum(S_i alpha_i) (Sabine 1922)",
          "eyring": "from the surfaces by Eyring's formula T = 0.161 V / (-S ln(1 - mean alpha)) "
                    "(Eyring 1930, JASA 1:217-241)"}[room.rt_from]
    out = [
        "Model per loudspeaker and octave band: direct sound D = I_1m g(theta) / r^2 arriving at r / c + delay "
        f"(c = {std.SPEED_OF_SOUND_M_S:g} m/s), then diffuse reverberation R = I_1m 16 pi / (Q A) with "
        "A = 0.161 V / T; m(F) = |sum (D + R / (1 + j 2 pi F T / 13.8)) exp(-j 2 pi F t)| / sum (D + R) "
        "(Houtgast, Steeneken & Plomp 1980, Acustica 46:60-72). mtf_measured is this modelled MTF, mtf the MTF "
        "after noise, masking and threshold.",
        f"Reverberation time {rt}; no air absorption beyond what the reverberation times contain.",
        ("Reverberant level by Barron's revised theory: R exp(-13.82 r / (c T)) (Barron & Lee 1988, JASA "
         "84:618-628)." if room.field == "revised" else
         "Reverberant level by the classic diffuse-field theory (the same at every distance)."),
        "Directivity: a loudspeaker without aim_m radiates its on-axis level in all directions; with aim_m and no "
        "off-axis table the intensity falls as ((1 + cos theta) / 2)^(Q - 1), a pattern whose directivity factor "
        "is Q (a model of this tool); with a table, its attenuation is interpolated in angle.",
        "Dominant source: the loudspeaker with the highest A-weighted direct level at the listener. Echo "
        f"criterion: {ECHO_CRITERION}.",
    ]
    if room.dimensions_m is None:
        out.append("The room's dimensions were not given: positions were not checked against the room.")
    return tuple(out)

"""The bundled demo site: the main jobs on the installed demo material.

:func:`rate_demo_site` rates an invented ferry-terminal waiting hall: STI and decay
figures from its impulse response and site noise (:func:`envpredict.indirect.sti_from_ir_file`),
and the indices of a recorded announcement against its clean original
(:func:`envpredict.pair.pair_from_files`). The scenario (levels, file names) is read
from the demo folder's ``scenario.json``.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

from .exceptions import InputError
from . import checks
from ._data import demo_dir
from .decay import mid_frequency
from .indirect import IrResult
from .pair import PairResult
from .results import jsonable

#: The file of the demo folder that describes the scenario.
SCENARIO_FILE = "scenario.json"


def read_scenario(folder: Path | None = None) -> dict:
    """The demo scenario (title, description, levels, file names) from ``scenario.json``.

    Raises
    ------
    InputError
        If ``folder`` is not a folder holding a readable ``scenario.json``.
    """
    folder = demo_dir() if folder is None else checks.path(folder, "demo folder")
    try:
        with open(folder / SCENARIO_FILE, encoding="utf-8") as fh:
            return json.load(fh)
    except (OSError, UnicodeDecodeError, ValueError) as e:
        raise InputError(f"demo scenario '{folder / SCENARIO_FILE}' cannot be read ({type(e).__name__})",
                         "give the folder of a demo site with its scenario.json") from None


@dataclass(frozen=True)
class DemoResult:
    """The rating of the demo site.

    Attributes
    ----------
    scenario : the scenario as stored in ``scenario.json`` (title, description, speech
        level, site noise per octave band, talker, file names).
    folder : the installed demo folder.
    ir : STI and decay figures of the hall's impulse response with the site noise.
    announcement : STOI, ESTOI and speech-based STI of the recorded announcement.
    t30_mid_s, edt_mid_s : mid-frequency T30 and EDT (ISO 3382-1, 500 Hz and 1 kHz;
        NaN when a band is missing).
    cautions : what must accompany the numbers (those of the impulse-response result).
    notes : method details.
    """

    scenario: dict
    folder: str
    ir: IrResult
    announcement: PairResult
    t30_mid_s: float
    edt_mid_s: float
    cautions: tuple[str, ...] = field(default=())
    notes: tuple[str, ...] = field(default=())

    def to_dict(self) -> dict:
        return jsonable({
            "scenario": self.scenario, "folder": self.folder, "ir": self.ir.to_dict(),
            "announcement": self.announcement.to_dict(), "t30_mid_s": self.t30_mid_s,
            "edt_mid_s": self.edt_mid_s, "cautions": list(self.cautions), "notes": list(self.notes),
        })


def rate_demo_site(progress: Callable[[int, int], None] | None = None) -> DemoResult:
    """Rate the bundled demo site (the impulse-response job and the pair job on its material).

    Parameters
    ----------
    progress : optional ``progress(done, total)`` callback of the impulse-response job.

    Returns
    -------
    DemoResult

    Raises
    ------
    InputError
        If the installed demo material cannot be read.
    """
    from .indirect import sti_from_ir_file
    from .pair import pair_from_files

    folder = demo_dir()
    sc = read_scenario(folder)
    ir = sti_from_ir_file(folder / sc["ir"], noise_db=sc["noise_db"], speech_level_dba=sc["speech_level_dba"],
                          talker=sc["talker"], progress=progress)
    pair = pair_from_files(folder / sc["clean"], folder / sc["degraded"])
    return DemoResult(
        scenario=sc, folder=str(folder), ir=ir, announcement=pair,
        t30_mid_s=mid_frequency(ir.decay.t30, ir.decay.bands_hz),
        edt_mid_s=mid_frequency(ir.decay.edt, ir.decay.bands_hz),
        cautions=tuple(ir.cautions),
    )


#: The demo survey's file, inside the demo folder (see tools/make_demo_survey.py).
SURVEY_FILE = "survey/survey.csv"


def demo_survey_path() -> Path:
    """The installed demo survey (three zones of the demo site, two repeats per position)."""
    return demo_dir() / SURVEY_FILE


#: Folder of a copied demo (:func:`copy_demo`) holding the corpus's clean sentences alone,
#: as a researcher's sentence list would be (``sNN.wav``, from ``corpus/sNN_clean.wav``).
SENTENCES_FOLDER = "sentences"


def copy_demo(folder: str | Path) -> list[str]:
    """Copy the demo material (impulse responses, recordings, the survey) into a new
    folder, to try the commands on files of one's own. The copy also has a folder
    :data:`SENTENCES_FOLDER` holding the eight clean sentences of the demo corpus alone
    (``s01.wav`` ... ``s08.wav``, 3-4 s each at 16 kHz): with ``hall_noise.wav``, the
    folder of sentences and the noise a listening test starts from.

    Parameters
    ----------
    folder : a folder that does not exist yet, or an empty one (written atomically).

    Returns
    -------
    The copied files, relative to ``folder``.

    Raises
    ------
    InputError
        The folder exists and is not empty, or cannot be written.
    """
    import shutil

    from .outputs import atomic_directory

    src = demo_dir()
    files = sorted(p.relative_to(src) for p in src.rglob("*")
                   if p.is_file() and p.suffix in (".wav", ".flac", ".csv", ".json"))
    sentences = [(rel, Path(SENTENCES_FOLDER) / (rel.name[: -len("_clean.wav")] + ".wav")) for rel in files
                 if rel.parent == Path("corpus") and rel.name.endswith("_clean.wav")]
    with atomic_directory(folder) as tmp:
        for rel in files:
            (tmp / rel).parent.mkdir(parents=True, exist_ok=True)
            shutil.copyfile(src / rel, tmp / rel)
        for rel, dst in sentences:
            (tmp / dst).parent.mkdir(parents=True, exist_ok=True)
            shutil.copyfile(src / rel, tmp / dst)
    return [str(r) for r in files] + [str(d) for _, d in sentences]


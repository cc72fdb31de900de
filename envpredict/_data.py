"""Locations of the data installed with the package (demo audio, reference cases)."""

from __future__ import annotations

from pathlib import Path


def _package_dir(name: str) -> Path:
    try:
        from importlib.resources import files

        p = Path(str(files(f"envpredict.{name}")))
        if p.is_dir():
            return p
    except (ModuleNotFoundError, TypeError):
        pass
    # running from a source checkout without installation
    p = Path(__file__).resolve().parent.parent / name
    if p.is_dir():
        return p
    raise FileNotFoundError(f"envpredict data folder '{name}' is missing; reinstall the package")


def demo_dir() -> Path:
    """Folder holding the bundled demo audio."""
    return _package_dir("demo_pairs")


def reference_dir() -> Path:
    """Folder holding the reference-case library."""
    return _package_dir("reference_cases")

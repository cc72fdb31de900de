"""The house's one-way data path (shared/HOUSE.md, "One engine, one straight data path"):
a module of the package imports only modules before it in LAYERS, at module level or
inside a function. The order is the README's "How the code is organised"."""

from __future__ import annotations

import ast
from pathlib import Path

import envpredict

#: The package's modules in pipeline order; each may import only modules before it.
LAYERS: tuple[str, ...] = (
    "standards", "exceptions", "checks", "results", "labels", "outputs", "_data",
    "bands", "audio", "speechlevel", "modulation", "hearing", "sti", "roommodel", "cautions", "decay", "correlation",
    "envpower",
    "pitch", "signals", "sinesweep", "deconvolve", "tables", "mapping",
    "indirect", "design", "direct", "pair", "binaural", "timescales", "sweep", "stimuli", "stats", "batch", "survey",
    "refcases",
    "demo",
    "report", "predict",
)


def _imports(path: Path) -> set[str]:
    """Sibling modules a file imports (relative or absolute, anywhere in the file)."""
    out = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom):
            if node.level == 1:
                out |= {node.module.split(".")[0]} if node.module else {a.name for a in node.names}
            elif node.module and node.module.startswith("envpredict."):
                out.add(node.module.split(".")[1])
        elif isinstance(node, ast.Import):
            out |= {a.name.split(".")[1] for a in node.names if a.name.startswith("envpredict.")}
    return out


def test_every_module_has_a_place_in_the_order():
    pkg = Path(envpredict.__file__).parent
    found = {p.stem for p in pkg.glob("*.py")} - {"__init__"}
    assert found == set(LAYERS), f"place these in LAYERS: {sorted(found ^ set(LAYERS))}"


def test_modules_import_only_to_their_left():
    pkg = Path(envpredict.__file__).parent
    rank = {m: i for i, m in enumerate(LAYERS)}
    wrong = []
    for m in LAYERS:
        for dep in _imports(pkg / f"{m}.py") & set(rank):
            if rank[dep] >= rank[m]:
                wrong.append(f"{m} imports {dep}")
    assert not wrong, wrong


def test_the_numeric_core_never_imports_the_cli_or_the_report():
    pkg = Path(envpredict.__file__).parent
    for m in LAYERS[: LAYERS.index("report")]:
        deps = _imports(pkg / f"{m}.py")
        assert "cli" not in deps and "report" not in deps, m

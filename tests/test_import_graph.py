"""The house's shape: no import circles in app/lopside, and the statistics never reach a face.

The graph is read from the source with :mod:`ast` (every ``import`` and ``from ... import``,
at module level or inside a function, since a lazy import is still a dependency), so it
needs no import of the package. ``from pkg import submodule`` counts as a dependency on
the submodule, not on the package's ``__init__``.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1] / "app" / "lopside"

#: No circle is allowed. (The last one, ``cli.py`` <-> ``figures/cli_plot.py``, went when
#: the options and loading both share moved to ``cli_options.py``.)
ALLOWED_CYCLES: tuple[frozenset[str], ...] = ()

#: The statistics core imports nothing from these faces.
FACES = ("lopside.window", "lopside.cli", "lopside.sheet", "lopside.figures")


def _modules() -> dict[str, tuple[Path, list[str]]]:
    mods = {}
    for p in ROOT.rglob("*.py"):
        parts = list(p.relative_to(ROOT.parent).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts = parts[:-1]
            pkg = parts
        else:
            pkg = parts[:-1]
        mods[".".join(parts)] = (p, pkg)
    return mods


def import_graph() -> dict[str, set[str]]:
    """Module -> the lopside modules it imports."""
    mods = _modules()
    graph: dict[str, set[str]] = {}
    for name, (path, pkg) in mods.items():
        deps: set[str] = set()
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.ImportFrom):
                if node.level:
                    base = pkg[: len(pkg) - (node.level - 1)]
                    mod = ".".join(base + ([node.module] if node.module else []))
                else:
                    mod = node.module or ""
                subs = [f"{mod}.{a.name}" for a in node.names if f"{mod}.{a.name}" in mods]
                cands = subs if len(subs) == len(node.names) else [mod, *subs]
            elif isinstance(node, ast.Import):
                cands = [a.name for a in node.names]
            else:
                continue
            deps.update(c for c in cands if c in mods and c != name)
        graph[name] = deps
    return graph


def cycles(graph: dict[str, set[str]]) -> list[frozenset[str]]:
    """Strongly connected components with more than one module (Tarjan)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on: set[str] = set()
    out: list[frozenset[str]] = []
    counter = [0]

    def visit(v: str) -> None:
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on.add(v)
        for w in sorted(graph[v]):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = set()
            while True:
                w = stack.pop()
                on.discard(w)
                comp.add(w)
                if w == v:
                    break
            if len(comp) > 1:
                out.append(frozenset(comp))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return out


def test_the_graph_sees_the_package():
    g = import_graph()
    assert "lopside.summary" in g and "lopside.assessment" in g
    assert "lopside.words.numbers" in g["lopside.summary"]
    assert "lopside.appraise" in g["lopside.assessment"]


def test_the_cycle_finder_finds_a_planted_cycle():
    g = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}
    assert cycles(g) == [frozenset({"a", "b", "c"})]


def test_no_import_cycles():
    found = cycles(import_graph())
    extra = [sorted(c) for c in found if c not in ALLOWED_CYCLES]
    assert not extra, f"import circles: {extra}"


def test_summary_and_appraise_are_not_a_circle():
    g = import_graph()
    appraise_mods = [m for m in g if m == "lopside.appraise" or m.startswith("lopside.appraise.")]
    for m in appraise_mods:
        assert "lopside.summary" not in g[m], m
        assert "lopside.report" not in g[m], m


@pytest.mark.parametrize("face", FACES)
def test_statistics_import_no_face(face):
    g = import_graph()
    stats = [m for m in g if m == "lopside.stats" or m.startswith("lopside.stats.")]
    assert stats
    for m in stats:
        bad = [d for d in g[m] if d == face or d.startswith(face + ".")]
        assert not bad, f"{m} imports {bad}"

"""The layout's rules, checked on the source: data flows one way, and nothing is circular.

A stage imports only from the stages before it (ingest -> analytics -> api); inside analytics
the physics comes first, then diagnostics, the runner, the alert rules; the simulation may use
the physics but nothing in the pipeline uses the simulation (only the command line does). Every
import counts, also one made inside a function.
"""

from __future__ import annotations

import ast
from collections.abc import Iterator
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
STAGE_DIRS = {"ingest": "tecfleet.ingest", "analytics": "tecfleet.analytics", "api": "tecfleet.api"}
SIMULATION = "tecfleet.analytics.simulation"
#: The only modules outside the simulation that may import it: the command line.
SIMULATION_USERS = ("tecfleet.api.cli",)

#: Rank of each layer; a module may import only layers of a lower or equal rank.
LAYERS = (
    ("tecfleet.ingest", 0),
    ("tecfleet.analytics.diagnostics", 2),
    ("tecfleet.analytics.runner", 3),
    ("tecfleet.analytics.alerts", 3),
    (SIMULATION, 4),
    ("tecfleet.analytics", 1),  # the physics core: every analytics module not named above
    ("tecfleet.api", 5),
)


def rank(module: str) -> int:
    for prefix, r in LAYERS:
        if module == prefix or module.startswith(prefix + "."):
            return r
    raise ValueError(f"{module} is in no layer")


def modules(root: Path, stage_dirs: dict[str, str]) -> dict[str, Path]:
    """Installed module name -> source file, for every module of the three stages."""
    out: dict[str, Path] = {}
    for folder, package in stage_dirs.items():
        for path in sorted((root / folder).rglob("*.py")):
            rel = path.relative_to(root / folder).with_suffix("")
            parts = [p for p in rel.parts if p != "__init__"]
            out[".".join([package, *parts])] = path
    return out


def imports(name: str, path: Path) -> Iterator[str]:
    """Every tecfleet module that ``name`` imports, anywhere in its source."""
    is_package = path.name == "__init__.py"
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            yield from (a.name for a in node.names if a.name.startswith("tecfleet."))
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = name.split(".")
                base = base[: len(base) - node.level + (1 if is_package else 0)]
                target = ".".join([*base, *([node.module] if node.module else [])])
            else:
                target = node.module or ""
            if target.startswith("tecfleet."):
                yield target
                # ``from package import module`` imports the submodule too
                yield from (f"{target}.{a.name}" for a in node.names)


def import_graph(root: Path, stage_dirs: dict[str, str]) -> dict[str, set[str]]:
    mods = modules(root, stage_dirs)
    graph: dict[str, set[str]] = {}
    for name, path in mods.items():
        graph[name] = {t for t in imports(name, path) if t in mods and t != name}
    return graph


def violations(graph: dict[str, set[str]]) -> list[str]:
    """Imports that go against the flow, or into the simulation from the pipeline."""
    bad = []
    for src, targets in sorted(graph.items()):
        for dst in sorted(targets):
            in_sim = dst == SIMULATION or dst.startswith(SIMULATION + ".")
            src_in_sim = src == SIMULATION or src.startswith(SIMULATION + ".")
            if in_sim and not src_in_sim and src not in SIMULATION_USERS:
                bad.append(f"{src} imports the simulation ({dst})")
            elif rank(dst) > rank(src) and src not in SIMULATION_USERS:
                bad.append(f"{src} imports a later stage ({dst})")
    return bad


def cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected groups of more than one module (Tarjan's algorithm), ignoring a
    package's imports of its own submodules (``__init__`` re-exporting its public names)."""

    def edges(src: str) -> set[str]:
        return {d for d in graph[src] if not d.startswith(src + ".")}

    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in sorted(edges(v)):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            group = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                group.append(w)
                if w == v:
                    break
            if len(group) > 1:
                found.append(sorted(group))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return found


def test_stages_import_only_earlier_stages_and_never_the_simulation() -> None:
    assert violations(import_graph(ROOT, STAGE_DIRS)) == []


def test_no_import_cycles() -> None:
    assert cycles(import_graph(ROOT, STAGE_DIRS)) == []


def _tree(tmp_path: Path, files: dict[str, str]) -> dict[str, set[str]]:
    for rel, text in files.items():
        path = tmp_path / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
    return import_graph(tmp_path, STAGE_DIRS)


@pytest.mark.parametrize(
    ("files", "expected"),
    [
        (
            {"ingest/store.py": "def f():\n    from tecfleet.api import app\n", "api/app.py": ""},
            "tecfleet.ingest.store imports a later stage (tecfleet.api.app)",
        ),
        (
            {
                "analytics/physics.py": "from .runner import go\n",
                "analytics/runner/__init__.py": "",
            },
            "tecfleet.analytics.physics imports a later stage (tecfleet.analytics.runner)",
        ),
        (
            {
                "api/routes.py": "from tecfleet.analytics.simulation import model\n",
                "analytics/simulation/model.py": "",
            },
            "tecfleet.api.routes imports the simulation (tecfleet.analytics.simulation.model)",
        ),
    ],
)
def test_the_check_catches_an_upward_import(
    tmp_path: Path, files: dict[str, str], expected: str
) -> None:
    # The rules above would pass vacuously if the checker saw nothing: a planted violation
    # must be reported.
    assert expected in violations(_tree(tmp_path, files))


def test_the_check_catches_a_cycle(tmp_path: Path) -> None:
    graph = _tree(
        tmp_path,
        {
            "analytics/simulation/model.py": "from . import publisher\n",
            "analytics/simulation/publisher.py": "from .scenario import x\n",
            "analytics/simulation/scenario.py": "from tecfleet.analytics.simulation import model\n",
        },
    )
    assert cycles(graph) == [
        [
            "tecfleet.analytics.simulation.model",
            "tecfleet.analytics.simulation.publisher",
            "tecfleet.analytics.simulation.scenario",
        ]
    ]

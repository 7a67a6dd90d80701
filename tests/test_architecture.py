"""The package's structure, read from its imports (the layout rules in DEVELOPERS.md).

Every ``import`` and ``from ... import`` in every module counts, inside functions too; only
imports under ``if TYPE_CHECKING:`` do not (they never run). An import of a name from a
package's lazy contents page counts as an import of the private module that defines it.
"""

from __future__ import annotations

import ast
import functools
import subprocess
import sys
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "flatcheck"
HEAVY = ("scipy.sparse", "scipy.optimize", "scipy.linalg", "matplotlib")


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for p in PACKAGE.rglob("*.py")}


def _lazy_contents(tree: ast.Module) -> dict[str, str]:
    """name -> submodule, from a contents page's ``attach(__name__, {...})`` call."""
    out = {}
    for node in ast.walk(tree):
        if isinstance(node, ast.Call) and getattr(node.func, "id", None) == "_attach" and len(node.args) == 2:
            table = ast.literal_eval(node.args[1])
            for module, names in table.items():
                for n in names:
                    out[n] = module
    return out


def _is_type_checking(node: ast.If) -> bool:
    t = node.test
    return (isinstance(t, ast.Name) and t.id == "TYPE_CHECKING") or (
        isinstance(t, ast.Attribute) and t.attr == "TYPE_CHECKING"
    )


def _imports(tree: ast.Module):
    """Every import node that can run (not under ``if TYPE_CHECKING``)."""
    stack = list(tree.body)
    while stack:
        node = stack.pop()
        if isinstance(node, ast.If) and _is_type_checking(node):
            stack.extend(node.orelse)
            continue
        if isinstance(node, (ast.Import, ast.ImportFrom)):
            yield node
        stack.extend(ast.iter_child_nodes(node))


@functools.lru_cache(maxsize=1)
def _graph() -> dict[str, set[str]]:
    mods = _modules()
    trees = {m: ast.parse(p.read_text(encoding="utf-8")) for m, p in mods.items()}
    pages = {m: _lazy_contents(t) for m, t in trees.items() if mods[m].name == "__init__.py"}
    graph: dict[str, set[str]] = {m: set() for m in mods}

    def add(src: str, target: str, names=()):
        if target not in mods:
            return
        if target in pages and pages[target] and names:
            for n in names:
                sub = pages[target].get(n)
                if sub is not None:
                    add(src, f"{target}.{sub}", (n,))
                elif f"{target}.{n}" in mods:
                    graph[src].add(f"{target}.{n}")
            return
        if target != src:
            graph[src].add(target)

    for m, tree in trees.items():
        is_pkg = mods[m].name == "__init__.py"
        for node in _imports(tree):
            if isinstance(node, ast.Import):
                for a in node.names:
                    if a.name.startswith("flatcheck"):
                        add(m, a.name)
                continue
            if node.level:
                base = m.split(".") if is_pkg else m.split(".")[:-1]
                base = base[: len(base) - node.level + 1]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            if not target.startswith("flatcheck"):
                continue
            names = [a.name for a in node.names]
            submodules = [n for n in names if f"{target}.{n}" in mods]
            for n in submodules:
                graph[m].add(f"{target}.{n}")
            add(m, target, [n for n in names if n not in submodules])
    return graph


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components of more than one module, or with a self-loop (Tarjan)."""
    index, low, on, stack, out = {}, {}, set(), [], []
    counter = [0]
    sys.setrecursionlimit(10_000)

    def visit(v):
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on.add(v)
        for w in graph.get(v, ()):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                out.append(sorted(comp))

    for v in graph:
        if v not in index:
            visit(v)
    return out


def test_no_import_circles_anywhere_in_the_package():
    assert _cycles(_graph()) == []


def test_the_cycle_finder_finds_a_planted_circle():
    # the check must be able to fail: a -> b -> c -> a is one circle; d hangs off it
    assert _cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]


FLOORS = {
    # package -> the flatcheck packages its modules may import (besides errors, units, _lazy, safety)
    "flatcheck.form": set(),
    "flatcheck.survey": {"flatcheck.form"},
    "flatcheck.evaluation": {"flatcheck.form", "flatcheck.survey"},
    "flatcheck.conformance": {"flatcheck.form"},
    "flatcheck.bearing": {"flatcheck.form", "flatcheck.conformance"},  # its verdicts use the ISO 14253-1 rule
    "flatcheck.lapping": {"flatcheck.form", "flatcheck.conformance", "flatcheck.bearing"},
    "flatcheck.optics": {"flatcheck.form", "flatcheck.bearing"},
    "flatcheck.spheres": {"flatcheck.form"},
    "flatcheck.bench": {"flatcheck.form", "flatcheck.survey", "flatcheck.conformance", "flatcheck.evaluation"},
    "flatcheck.guideway": {"flatcheck.form", "flatcheck.survey", "flatcheck.evaluation", "flatcheck.bearing",
                           "flatcheck.conformance"},
}
BASE = ("flatcheck.errors", "flatcheck.units", "flatcheck.limits", "flatcheck._lazy", "flatcheck.safety")


@pytest.mark.parametrize("package", sorted(FLOORS))
def test_lower_floors_never_import_higher_ones(package):
    allowed = FLOORS[package] | {package}
    bad = sorted(
        f"{src} -> {dst}"
        for src, dsts in _graph().items()
        if src == package or src.startswith(package + ".")
        for dst in dsts
        if not dst.startswith(BASE) and not any(dst == a or dst.startswith(a + ".") for a in allowed)
    )
    assert bad == []


def test_no_command_module_imports_another():
    graph = _graph()
    commands = {m for m in graph if m.startswith("flatcheck.cli.") and m.endswith("_cmd")}
    bad = sorted(f"{a} -> {b}" for a in commands for b in graph[a] if b in commands)
    assert bad == []


def test_only_output_imports_matplotlib():
    bad = []
    for m, p in _modules().items():
        if m.startswith("flatcheck.output"):
            continue
        for node in _imports(ast.parse(p.read_text(encoding="utf-8"))):
            names = [a.name for a in node.names] if isinstance(node, ast.Import) else [node.module or ""]
            bad += [f"{m}: {n}" for n in names if n.startswith("matplotlib")]
    assert bad == []


def test_core_never_imports_the_command_line():
    bad = sorted(f"{a} -> {b}" for a, bs in _graph().items() if not a.startswith("flatcheck.cli")
                 for b in bs if b.startswith("flatcheck.cli"))
    assert bad == []


def test_every_public_name_of_the_package_imports():
    import flatcheck

    missing = [n for n in flatcheck.__all__ if getattr(flatcheck, n, None) is None]
    assert missing == [] and len(flatcheck.__all__) >= 100


@pytest.mark.parametrize(
    "code",
    [
        "import flatcheck",
        "import sys; sys.argv = ['flatcheck', '--help']\nfrom flatcheck.cli.main import run\nrun(['--help'])",
        "from flatcheck.cli.main import run\nrun(['units'])",
    ],
    ids=["import", "help", "units"],
)
def test_start_up_loads_nothing_heavy(code):
    probe = code + "\nimport sys\nprint('HEAVY:' + ' '.join(sorted(m for m in sys.modules if m.startswith(%r))))" % (
        HEAVY,
    )
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    loaded = out.stdout.rsplit("HEAVY:", 1)[1].strip()
    assert loaded == "", f"start-up loaded {loaded}"


def test_the_command_lines_copies_of_core_defaults_stay_equal():
    # the CLI writes these defaults out so that starting it does not load numpy; they must not drift
    from flatcheck.bearing import DEFAULT_GAP_FRACTION, DEFAULT_MARGINAL_FROM
    from flatcheck.cli import bearing_cmd, compare_cmd, plan_cmd
    from flatcheck.lapping import DEFAULT_MATCH_TOL_MM
    from flatcheck.survey import DEFAULT_MARGIN_MM

    assert plan_cmd.DEFAULT_MARGIN_MM == DEFAULT_MARGIN_MM
    assert (bearing_cmd.DEFAULT_GAP_FRACTION, bearing_cmd.DEFAULT_MARGINAL_FROM) == (
        DEFAULT_GAP_FRACTION, DEFAULT_MARGINAL_FROM)
    assert compare_cmd.DEFAULT_MATCH_TOL_MM == DEFAULT_MATCH_TOL_MM

"""The package layout: rooms in one-way layers, no large modules, a numeric core free of
plotting and of pandapower at import (the project's own architecture rules; no outside
reference applies)."""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

from .conftest import ROOT

PKG = ROOT / "resonance"

#: the rooms from the bottom up: a module may import its own room and the rooms below it only
LAYERS = (
    ("resonance", "resonance.errors", "resonance.names", "resonance.outputs", "resonance.memo"),
    ("resonance.standards",),
    ("resonance.inputs",),
    ("resonance.model",),
    ("resonance.harmonics",),
    ("resonance.assessment",),
    ("resonance.design",),
    ("resonance.report",),
    ("resonance.pipeline", "resonance.batch_run"),
    ("resonance.cli", "resonance.sizing_cli", "resonance.docgen", "resonance.__main__"),
)

#: rooms of the numeric core (plain data in and out: no plotting, pandapower only on demand)
CORE = ("resonance.standards", "resonance.inputs", "resonance.model", "resonance.harmonics",
        "resonance.assessment", "resonance.design", "resonance.pipeline")

MAX_LINES = 620


def _modules() -> dict[str, Path]:
    out = {}
    for p in sorted(PKG.rglob("*.py")):
        rel = p.relative_to(ROOT).with_suffix("")
        name = ".".join(rel.parts)
        out[name.removesuffix(".__init__")] = p
    return out


def _rank(mod: str) -> int:
    best = None
    for i, room in enumerate(LAYERS):
        for prefix in room:
            if mod == prefix or mod.startswith(prefix + "."):
                if prefix == "resonance" and mod != "resonance":
                    continue
                best = i
    assert best is not None, mod
    return best


def _imports(path: Path, name: str) -> set[str]:
    """Every resonance module ``path`` imports, at module level or inside functions."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    pkg = name if path.name == "__init__.py" else name.rpartition(".")[0]
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found |= {a.name for a in node.names if a.name.startswith("resonance")}
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                base = ".".join(pkg.split(".")[: len(pkg.split(".")) - node.level + 1] + ([base] if base else []))
            if not base.startswith("resonance"):
                continue
            mods = _modules()
            for a in node.names:
                sub = f"{base}.{a.name}"
                found.add(sub if sub in mods else base)
    return found


def test_imports_go_one_way_down_the_rooms():
    bad = []
    for name, path in _modules().items():
        if name == "resonance":
            continue  # the package's lazy re-exports (load_case, run_check, ...)
        for dep in _imports(path, name):
            if dep == "resonance":
                continue  # __version__
            if _rank(dep) > _rank(name):
                bad.append(f"{name} imports {dep}")
    assert bad == []


def test_no_import_cycle_between_modules():
    mods = _modules()
    graph = {n: {d for d in _imports(p, n) if d in mods and d != n and d != "resonance"} for n, p in mods.items()
             if n != "resonance"}
    seen, stack, cycles = set(), [], []

    def visit(n):
        if n in stack:
            cycles.append(stack[stack.index(n):] + [n])
            return
        if n in seen:
            return
        stack.append(n)
        for d in graph.get(n, ()):
            visit(d)
        stack.pop()
        seen.add(n)

    for n in graph:
        visit(n)
    assert cycles == []


def test_no_module_is_large():
    big = {n: p.read_text(encoding="utf-8").count("\n") for n, p in _modules().items()}
    assert {n: k for n, k in big.items() if k > MAX_LINES} == {}


def test_every_core_module_loads_without_matplotlib_or_pandapower():
    core = [n for n in _modules() if any(n == c or n.startswith(c + ".") for c in CORE)]
    assert "resonance.pipeline" in core and "resonance.assessment.verdict" in core and len(core) > 25
    code = ("import importlib, sys\n"
            f"for m in {core!r}:\n"
            "    importlib.import_module(m)\n"
            "print(','.join(m for m in ('pandapower', 'matplotlib') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, timeout=120,
                         check=True)
    assert out.stdout.strip().splitlines()[-1:] in ([], [""])


def test_a_backend_is_chosen_only_by_the_command_line():
    users = sorted(n for n, p in _modules().items() if "matplotlib.use(" in p.read_text(encoding="utf-8"))
    assert users == ["resonance.cli"]


def test_no_module_keeps_a_cache_of_its_own():
    # the one cache is the check's memo (resonance.memo); a module-level store would outlive it
    words = ("WeakKeyDictionary", "lru_cache", "functools.cache", ".cache[", "model.cache")
    found = sorted(f"{n}: {w}" for n, p in _modules().items() for w in words if w in p.read_text(encoding="utf-8"))
    assert found == []


def test_a_check_owns_its_memo_and_equal_runs_give_equal_results():
    import json

    from resonance import memo
    from resonance.pipeline import run_check

    from .conftest import CASES

    seen = []
    real = memo.Memo.active

    def spy(self):
        seen.append(self)
        return real(self)

    memo.Memo.active = spy
    try:
        a = run_check(CASES / "demo_plant.toml")
    finally:
        memo.Memo.active = real
    assert memo.current() is None  # nothing is left active after the check
    m = seen[0]
    sizes = m.sizes()
    # the detuned re-checks shared the bank-off scans, load flows and engines of one network
    assert sizes.get("variant_study", 0) >= 1 and m.hits > 0
    b = run_check(CASES / "demo_plant.toml")
    assert json.dumps(a.data, sort_keys=True) == json.dumps(b.data, sort_keys=True)

"""Imports point one way (ARCHITECTURE.md): benchmark and test kits stay out of the library."""
from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[1] / "searcher"
KITS = ("searcher.bench", "searcher.testing")


def _imports(path: Path) -> set[str]:
    # absolute imports only: the kits are reached by absolute names
    names = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            names.update(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.add(node.module)
    return names


def test_nothing_in_the_library_imports_the_benchmark_or_test_kits():
    offenders = []
    for path in PACKAGE.rglob("*.py"):
        rel = path.relative_to(PACKAGE.parent).with_suffix("")
        if rel.parts[1] in ("bench", "testing"):
            continue
        offenders += [f"{rel}: {name}" for name in _imports(path)
                      if any(name == k or name.startswith(k + ".") for k in KITS)]
    assert offenders == []


def test_importing_search_loads_no_analysis_report_or_kits():
    code = ("import sys, searcher.search; "
            "bad = [m for m in sys.modules if m.split('.')[:2] in "
            "(['searcher', 'analysis'], ['searcher', 'report'], ['searcher', 'bench'], "
            "['searcher', 'testing'])]; print(bad); sys.exit(1 if bad else 0)")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert done.returncode == 0, done.stdout + done.stderr


def _models_imports(name: str) -> set[str]:
    """Sibling modules ``searcher/models/<name>.py`` imports, absolute or relative, anywhere."""
    tree = ast.parse((PACKAGE / "models" / f"{name}.py").read_text(encoding="utf-8"))
    out = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.module:
            mod = node.module if node.level == 0 else f"searcher.models.{node.module}"
            if mod.startswith("searcher.models."):
                out.add(mod.rsplit(".", 1)[1])
    return out


def test_the_build_cache_and_the_fused_kernels_form_no_cycle():
    assert "_fused" not in _models_imports("_build_cache")
    assert "_build_cache" in _models_imports("_fused")   # the one direction left

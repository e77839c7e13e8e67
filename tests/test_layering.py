"""Imports go downward only: engine and report never import Qt, pyqtgraph, the GUI or qtrender.

Checked two ways: statically (every import statement in the source) and dynamically
(importing every engine/report module in a fresh interpreter loads no Qt module).
"""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import pytest

PKG = Path(__file__).resolve().parents[1] / "appraise"
FORBIDDEN = ("PySide6", "pyqtgraph", "appraise.gui", "appraise.qtrender", "shiboken6")
UNSAFE_CALLS = {"eval", "exec", "compile", "__import__"}


def _modules(sub: str) -> list[Path]:
    return sorted((PKG / sub).rglob("*.py"))


def _imports(path: Path) -> list[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    pkg_parts = ["appraise", *path.relative_to(PKG).parent.parts]
    names = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.extend(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = pkg_parts[: len(pkg_parts) - node.level + 1]
                mod = ".".join(base + ([node.module] if node.module else []))
            else:
                mod = node.module or ""
            names.append(mod)
    return names


@pytest.mark.parametrize("layer", ["engine", "report"])
def test_core_layers_import_no_qt_statically(layer):
    offenders = [
        f"{p.relative_to(PKG)} imports {name}"
        for p in _modules(layer)
        for name in _imports(p)
        if any(name == f or name.startswith(f + ".") for f in FORBIDDEN)
    ]
    assert not offenders, offenders


def test_engine_and_report_load_without_qt_at_runtime():
    mods = [
        ".".join(("appraise", *p.relative_to(PKG).with_suffix("").parts)).removesuffix(".__init__")
        for layer in ("engine", "report")
        for p in _modules(layer)
    ]
    code = (
        "import importlib, sys\n"
        f"for m in {mods!r}:\n"
        "    importlib.import_module(m)\n"
        "bad = sorted(m for m in sys.modules if m.split('.')[0] in ('PySide6', 'pyqtgraph', 'shiboken6'))\n"
        "print(','.join(bad))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "", f"Qt modules loaded by the core: {out.stdout}"


def test_engine_never_imports_report_or_commands():
    offenders = [
        f"{p.relative_to(PKG)} imports {name}"
        for p in _modules("engine")
        for name in _imports(p)
        if name.startswith(("appraise.report", "appraise.commands", "appraise.cli"))
    ]
    assert not offenders, offenders


def test_no_eval_exec_or_pickle_anywhere():
    offenders = []
    for p in PKG.rglob("*.py"):
        tree = ast.parse(p.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.Call) and isinstance(node.func, ast.Name):
                if node.func.id in UNSAFE_CALLS:
                    offenders.append(f"{p.relative_to(PKG)}:{node.lineno} calls {node.func.id}")
            if isinstance(node, ast.Import | ast.ImportFrom):
                mods = (
                    [a.name for a in node.names] if isinstance(node, ast.Import) else [node.module]
                )
                if any(
                    m and m.split(".")[0] in ("pickle", "dill", "cloudpickle", "marshal")
                    for m in mods
                ):
                    offenders.append(f"{p.relative_to(PKG)}:{node.lineno} imports a pickle module")
    assert not offenders, offenders

"""The layer contract, checked so that a planted upward import breaks it.

Layers, lowest first (a module may import its own layer and the layers below it)::

    engine                      no Qt
    pipeline, resources         no Qt; load -> fit -> value -> check, bundled files
    report                      no Qt; worksheet content, text, HTML, CSV/XLSX
    qtrender                    Qt without widgets: PDF writer, figures
    commands + cli | gui        the two front ends; they never import each other

The one allowed crossing is the late import, inside a function, with which
``appraise open`` and ``appraise demo`` start the window (:data:`EXCEPTIONS`).

Every import statement is read with ``ast``; ``from X import Y`` is recorded as ``X.Y``
(so ``from .. import gui`` inside ``appraise/engine`` is ``appraise.gui``, not ``appraise``).
The check is also run on copies of the package with upward imports planted, and must fail
on each of them.
"""

from __future__ import annotations

import ast
import shutil
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

import pytest

PKG = Path(__file__).resolve().parents[1] / "appraise"
QT = ("PySide6", "pyqtgraph", "shiboken6")
UNSAFE_CALLS = {"eval", "exec", "compile", "__import__"}

# layer -> the appraise packages/modules it may import (besides the standard library and
# third-party packages other than Qt where ``qt`` is False)
LAYERS: dict[str, tuple[tuple[str, ...], bool]] = {
    "engine": (("appraise.engine",), False),
    "pipeline": (("appraise.engine", "appraise.pipeline"), False),
    "resources": (("appraise.engine", "appraise.resources"), False),
    "report": (("appraise.engine", "appraise.report"), False),
    "qtrender": (("appraise.engine", "appraise.report", "appraise.qtrender"), True),
    "commands": (
        (
            "appraise.engine",
            "appraise.pipeline",
            "appraise.resources",
            "appraise.report",
            "appraise.qtrender",
            "appraise.commands",
            "appraise.cli",
        ),
        True,
    ),
    "gui": (
        (
            "appraise.engine",
            "appraise.pipeline",
            "appraise.resources",
            "appraise.report",
            "appraise.qtrender",
            "appraise.gui",
        ),
        True,
    ),
}
ALWAYS_ALLOWED = ("appraise.__version__",)
EXCEPTIONS = {
    # (importing module, imported module): allowed only inside a function
    ("appraise.commands.open", "appraise.gui.app"),
    ("appraise.commands.demo", "appraise.gui.app"),
}


@dataclass(frozen=True)
class Import:
    module: str  # the importing module, dotted
    target: str  # what it imports, dotted (from X import Y -> X.Y)
    line: int
    in_function: bool


def module_name(path: Path, root: Path) -> str:
    parts = ("appraise", *path.relative_to(root).with_suffix("").parts)
    return ".".join(parts).removesuffix(".__init__")


def layer_of(module: str) -> str:
    parts = module.split(".")
    if len(parts) == 1:  # appraise/__init__.py, __main__
        return "commands"
    head = parts[1]
    if head in ("cli", "__main__"):
        return "commands"
    return head


def imports_of(path: Path, root: Path) -> list[Import]:
    mod = module_name(path, root)
    tree = ast.parse(path.read_text(encoding="utf-8"))
    is_pkg = path.name == "__init__.py"
    pkg_parts = mod.split(".") if is_pkg else mod.split(".")[:-1]
    out: list[Import] = []

    def visit(node: ast.AST, in_function: bool) -> None:
        for child in ast.iter_child_nodes(node):
            inner = in_function or isinstance(child, ast.FunctionDef | ast.AsyncFunctionDef)
            if isinstance(child, ast.Import):
                out.extend(Import(mod, a.name, child.lineno, in_function) for a in child.names)
            elif isinstance(child, ast.ImportFrom):
                if child.level:
                    base = pkg_parts[: len(pkg_parts) - child.level + 1]
                    src = ".".join(base + ([child.module] if child.module else []))
                else:
                    src = child.module or ""
                for a in child.names:
                    target = src if a.name == "*" else f"{src}.{a.name}"
                    out.append(Import(mod, target, child.lineno, in_function))
            visit(child, inner)

    visit(tree, False)
    return out


def violations(root: Path = PKG) -> list[str]:
    """Every import in the package at ``root`` that breaks the layer contract."""
    found = []
    for path in sorted(root.rglob("*.py")):
        for imp in imports_of(path, root):
            layer = layer_of(imp.module)
            allowed, qt_ok = LAYERS[layer]
            where = f"{path.relative_to(root)}:{imp.line} imports {imp.target}"
            top = imp.target.split(".")[0]
            if top in QT and not qt_ok:
                found.append(f"{where} (no Qt in {layer})")
                continue
            if top != "appraise" or imp.target == "appraise":
                continue
            if imp.target.startswith(ALWAYS_ALLOWED):
                continue
            if any(imp.target == a or imp.target.startswith(a + ".") for a in allowed):
                continue
            exception = any(
                imp.module == m and (imp.target == t or imp.target.startswith(t + "."))
                for m, t in EXCEPTIONS
            )
            if exception and imp.in_function:
                continue
            found.append(f"{where} (upward or sideways from {layer})")
    return found


def test_layering_contract_holds():
    assert violations() == []


def test_layering_every_module_has_a_layer():
    layers = {layer_of(module_name(p, PKG)) for p in PKG.rglob("*.py")}
    assert layers <= set(LAYERS), layers - set(LAYERS)


PLANTS = [
    ("engine/sales.py", "from .. import gui\n"),
    ("report/numbers.py", "from appraise import qtrender\n"),
    ("gui/app.py", "from appraise.commands import common\n"),
    ("engine/fitting.py", "import PySide6.QtCore\n"),
    ("report/content.py", "from ..qtrender.pdf import write_pdf\n"),
    ("pipeline.py", "from .report import text\n"),
    ("commands/fit.py", "from ..gui import session\n"),  # not in a function, not an exception
    ("gui/session.py", "from .. import cli\n"),
    ("engine/errors.py", "from appraise.pipeline import analyse\n"),
]


@pytest.mark.parametrize(("relpath", "line"), PLANTS, ids=[p for p, _ in PLANTS])
def test_layering_check_fails_on_a_planted_upward_import(tmp_path, relpath, line):
    copy = tmp_path / "appraise"
    shutil.copytree(PKG, copy, ignore=shutil.ignore_patterns("__pycache__"))
    target = copy / relpath
    text = target.read_text(encoding="utf-8")
    # after the module docstring and the __future__ import, like a real import would be
    lines = text.splitlines(keepends=True)
    at = next(i for i, s in enumerate(lines) if s.startswith("from __future__")) + 1
    target.write_text("".join([*lines[:at], line, *lines[at:]]), encoding="utf-8")
    found = violations(copy)
    assert any(relpath in v for v in found), found


def test_layering_allows_the_late_window_import_only_inside_a_function(tmp_path):
    copy = tmp_path / "appraise"
    shutil.copytree(PKG, copy, ignore=shutil.ignore_patterns("__pycache__"))
    target = copy / "commands" / "open.py"
    text = target.read_text(encoding="utf-8")
    assert "from ..gui.app import" in text
    at = text.index("from __future__ import annotations") + len(
        "from __future__ import annotations"
    )
    target.write_text(text[:at] + "\nfrom ..gui.app import run\n" + text[at:], encoding="utf-8")
    found = violations(copy)
    assert any("commands/open.py" in v for v in found), found


def test_layering_no_gui_module_imports_the_command_line():
    offenders = [
        f"{p.relative_to(PKG)} imports {i.target}"
        for p in (PKG / "gui").rglob("*.py")
        for i in imports_of(p, PKG)
        if i.target.startswith(("appraise.commands", "appraise.cli"))
    ]
    assert offenders == []


def test_layering_core_loads_without_qt_at_runtime():
    mods = [
        module_name(p, PKG)
        for layer in ("engine", "report")
        for p in sorted((PKG / layer).rglob("*.py"))
    ] + ["appraise.pipeline", "appraise.resources"]
    code = (
        "import importlib, sys\n"
        f"for m in {mods!r}:\n"
        "    importlib.import_module(m)\n"
        "bad = sorted(m for m in sys.modules if m.split('.')[0] in ('PySide6', 'pyqtgraph', 'shiboken6'))\n"
        "print(','.join(bad))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "", f"Qt modules loaded by the core: {out.stdout}"


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

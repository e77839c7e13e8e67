"""The package never runs text as code or unpickles anything: a scan of every module's syntax tree.

Refused: calls of ``eval``, ``exec``, ``compile`` and ``__import__``; importing ``pickle``,
``shelve``, ``marshal``, ``dill`` or ``cloudpickle`` (nothing of theirs is needed, so the
import alone is refused) and calling their ``load``/``loads``; ``numpy.load`` or
``pandas.read_pickle`` (``allow_pickle`` paths); ``yaml.load``/``yaml.unsafe_load``
(``yaml.safe_load`` is fine); any call with ``shell=True``; ``os.system`` and ``os.popen``.
The scanner proves itself on planted snippets, one per rule, each of which it must catch.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "appraise"

BANNED_CALLS = {"eval", "exec", "compile", "__import__"}
BANNED_MODULES = {"pickle", "shelve", "marshal", "dill", "cloudpickle", "_pickle"}
BANNED_ATTRIBUTE_CALLS = {
    ("os", "system"),
    ("os", "popen"),
    ("yaml", "load"),
    ("yaml", "unsafe_load"),
    ("yaml", "full_load"),
    ("np", "load"),
    ("numpy", "load"),
    ("pd", "read_pickle"),
    ("pandas", "read_pickle"),
    *((m, f) for m in BANNED_MODULES for f in ("load", "loads", "Unpickler", "open")),
}


def problems(source: str, filename: str = "<snippet>") -> list[str]:
    """Every unsafe construct in ``source``, as ``file:line: what``."""
    tree = ast.parse(source, filename=filename)
    found: list[str] = []

    def say(node: ast.AST, what: str) -> None:
        found.append(f"{filename}:{getattr(node, 'lineno', '?')}: {what}")

    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name.split(".")[0] in BANNED_MODULES:
                    say(node, f"imports {alias.name}")
        elif isinstance(node, ast.ImportFrom):
            if (node.module or "").split(".")[0] in BANNED_MODULES:
                say(node, f"imports from {node.module}")
            if node.module == "os" and any(a.name in ("system", "popen") for a in node.names):
                say(node, "imports os.system/os.popen")
        elif isinstance(node, ast.Call):
            f = node.func
            if isinstance(f, ast.Name) and f.id in BANNED_CALLS:
                say(node, f"calls {f.id}()")
            if isinstance(f, ast.Attribute):
                base = f.value.id if isinstance(f.value, ast.Name) else None
                if (base, f.attr) in BANNED_ATTRIBUTE_CALLS:
                    say(node, f"calls {base}.{f.attr}()")
                if f.attr in BANNED_CALLS and base == "builtins":
                    say(node, f"calls builtins.{f.attr}()")
            for kw in node.keywords:
                if kw.arg == "shell" and not (
                    isinstance(kw.value, ast.Constant) and kw.value.value is False
                ):
                    say(node, "passes shell=...")
        elif (
            isinstance(node, ast.Name)
            and node.id in ("eval", "exec")
            and isinstance(node.ctx, ast.Load)
        ):
            say(node, f"refers to {node.id}")  # e.g. f = eval; f(text)
    return found


def _modules() -> list[Path]:
    return sorted(PACKAGE.rglob("*.py"))


def test_the_package_has_modules_to_scan():
    assert len(_modules()) > 40


def test_no_module_runs_text_as_code_or_unpickles():
    found = []
    for path in _modules():
        found += problems(path.read_text(encoding="utf-8"), str(path.relative_to(PACKAGE.parent)))
    assert found == []


PLANTED = [
    "eval(text)",
    "exec(code)",
    "compile(src, 'f', 'exec')",
    "__import__('os')",
    "import pickle",
    "from pickle import loads",
    "import shelve",
    "import marshal",
    "import cloudpickle",
    "pickle.loads(data)",
    "marshal.loads(data)",
    "yaml.load(text)",
    "yaml.unsafe_load(text)",
    "np.load(path, allow_pickle=True)",
    "pd.read_pickle(path)",
    "subprocess.run(cmd, shell=True)",
    "subprocess.Popen(cmd, shell=flag)",
    "os.system('ls')",
    "os.popen('ls')",
    "from os import system",
    "f = eval",
    "builtins.exec(code)",
]


@pytest.mark.parametrize("snippet", PLANTED)
def test_the_scanner_catches_each_planted_construct(snippet):
    assert problems(snippet), snippet


@pytest.mark.parametrize(
    "snippet",
    [
        "yaml.safe_load(text)",
        "subprocess.run(['ls'], shell=False)",
        "json.loads(text)",
        "ast.parse(text, mode='eval')",
        "re.compile('x')",
        "model.evaluate(x)",
    ],
)
def test_the_scanner_lets_safe_calls_pass(snippet):
    assert problems(snippet) == []

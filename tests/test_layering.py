"""Architecture rules (DESIGN.md): dependency direction, and no risky calls in the package."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PKG = Path(__file__).resolve().parents[1] / "workspace"

ALLOWED = {
    "spectral": {"domain", "errors", "spectral"},
    "compare": {"domain", "errors", "compare"},
    "io": {"domain", "errors", "io"},
    "store": {"domain", "errors", "store"},
    "cli": {"services", "jobs", "domain", "errors", "cli", "tui"},
    "tui": {"services", "jobs", "domain", "errors", "tui", "palette"},
    # reports sit at the numerics / io level: plain arrays in, HTML / SVG / PNG out
    "report": {"domain", "errors", "report", "palette"},
}


def _workspace_imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            names = [node.module]
        else:
            continue
        for name in names:
            parts = name.split(".")
            if parts[0] == "workspace" and len(parts) > 1:
                found.add(parts[1])
    return found


@pytest.mark.parametrize("layer", sorted(ALLOWED))
def test_dependency_direction(layer):
    bad = {}
    for f in (PKG / layer).rglob("*.py"):
        extra = _workspace_imports(f) - ALLOWED[layer]
        if extra:
            bad[str(f.relative_to(PKG))] = sorted(extra)
    assert not bad, f"{layer} imports layers it must not: {bad}"


def test_numerics_do_not_import_front_ends_or_store():
    for layer in ("spectral", "compare", "io", "report"):
        for f in (PKG / layer).rglob("*.py"):
            src = f.read_text(encoding="utf-8")
            for mod in ("sqlalchemy", "textual", "rich", "alembic"):
                assert f"import {mod}" not in src and f"from {mod}" not in src, (f, mod)


def test_no_pickle_eval_exec_or_shell():
    # common practice: untrusted files must never reach pickle, eval/exec or a shell
    offenders = []
    for f in PKG.rglob("*.py"):
        tree = ast.parse(f.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.Call):
                fn = node.func
                name = fn.id if isinstance(fn, ast.Name) else fn.attr if isinstance(fn, ast.Attribute) else ""
                if name in {"eval", "exec"} and isinstance(fn, ast.Name):
                    offenders.append(f"{f}:{node.lineno} {name}()")
                if isinstance(fn, ast.Attribute) and name in {"load", "loads"} and \
                        isinstance(fn.value, ast.Name) and fn.value.id in {"pickle", "cPickle", "dill"}:
                    offenders.append(f"{f}:{node.lineno} pickle.{name}")
                for kw in node.keywords:
                    if kw.arg == "shell" and isinstance(kw.value, ast.Constant) and kw.value.value is True:
                        offenders.append(f"{f}:{node.lineno} shell=True")
                    if kw.arg == "allow_pickle" and isinstance(kw.value, ast.Constant) and kw.value.value is True:
                        offenders.append(f"{f}:{node.lineno} allow_pickle=True")
            if isinstance(node, (ast.Import, ast.ImportFrom)):
                mods = [a.name for a in node.names] if isinstance(node, ast.Import) else [node.module or ""]
                if any(m.split(".")[0] in {"pickle", "cPickle", "dill", "marshal", "shelve"} for m in mods):
                    offenders.append(f"{f}:{node.lineno} imports a pickle-like module")
    assert not offenders, offenders


def test_palette_imports_nothing():
    # the shared colours are imported by the UI and the reports alike: no Textual, no workspace layer
    tree = ast.parse((PKG / "palette.py").read_text(encoding="utf-8"))
    imports = [n for n in ast.walk(tree) if isinstance(n, (ast.Import, ast.ImportFrom))]
    assert all(isinstance(n, ast.ImportFrom) and n.module == "__future__" for n in imports)


def test_cli_help_imports_nothing_heavy():
    import subprocess
    import sys

    code = ("import sys; from workspace.cli.parser import build_parser; build_parser(); "
            "import workspace.cli; heavy = [m for m in ('numpy', 'scipy', 'sqlalchemy', 'textual', 'rich', "
            "'networkx', 'pyarrow', 'matplotlib') if m in sys.modules]; print(','.join(heavy))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""

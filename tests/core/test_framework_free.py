"""The core never imports Django (STYLE.md: a framework-free core, enforced by a test)."""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import allocation.core

CORE = Path(allocation.core.__file__).resolve().parent


def django_imports(path: Path, root: Path = CORE) -> list[str]:
    """``file:line`` of every ``import django…`` or ``from django… import`` in a file."""
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names = [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            names = [node.module]
        else:
            continue
        if any(name == "django" or name.startswith("django.") for name in names):
            found.append(f"{path.relative_to(root)}:{node.lineno}")
    return found


def test_the_core_has_python_files_to_scan():
    assert len(list(CORE.rglob("*.py"))) >= 10


def test_no_module_of_the_core_imports_django():
    offending = [hit for path in sorted(CORE.rglob("*.py")) for hit in django_imports(path)]
    assert offending == []


def test_the_scan_finds_a_django_import(tmp_path):
    """The scanner itself catches both spellings of the import, even inside a function."""
    sample = tmp_path / "sample.py"
    sample.write_text("import os\nimport django.db\n\ndef f():\n    from django import forms\n")
    assert django_imports(sample, tmp_path) == ["sample.py:2", "sample.py:5"]


def test_importing_every_core_module_loads_no_django():
    """In a fresh interpreter, importing all of allocation.core leaves django unloaded."""
    code = (
        "import importlib, pkgutil, sys\n"
        "import allocation.core as core\n"
        "for module in pkgutil.walk_packages(core.__path__, 'allocation.core.'):\n"
        "    importlib.import_module(module.name)\n"
        "loaded = sorted(name for name in sys.modules if name.split('.')[0] == 'django')\n"
        "print(loaded)\n"
        "sys.exit(1 if loaded else 0)\n"
    )
    root = CORE.parent.parent
    done = subprocess.run([sys.executable, "-c", code], cwd=root, capture_output=True, text=True)
    assert done.returncode == 0, done.stdout + done.stderr

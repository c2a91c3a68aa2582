"""The direction of imports between pipeline stages (import-linter's layers contract).

The contract lives in ``pyproject.toml`` (``[tool.importlinter]``). These tests run it
on the package as it is, and on a copy with one deliberate upward import, which must
break the contract with a message that names both modules.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
LINT = shutil.which("lint-imports", path=str(Path(sys.executable).parent)) or shutil.which("lint-imports")

pytestmark = pytest.mark.skipif(LINT is None, reason="import-linter is a test extra: pip install '.[test]'")


def _lint(project: Path) -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONPATH": str(project)}
    return subprocess.run([LINT, "--no-cache"], cwd=project, env=env, capture_output=True, text=True, timeout=120)


def _copy_project(tmp_path: Path) -> Path:
    project = tmp_path / "project"
    shutil.copytree(ROOT / "textkit", project / "textkit", ignore=shutil.ignore_patterns("__pycache__"))
    shutil.copy(ROOT / "pyproject.toml", project / "pyproject.toml")
    return project


def test_package_keeps_the_layer_contract(tmp_path):
    result = _lint(_copy_project(tmp_path))
    assert result.returncode == 0, result.stdout + result.stderr
    assert "1 kept, 0 broken" in result.stdout


def _lint_with_extra_import(tmp_path: Path, module: str, statement: str) -> subprocess.CompletedProcess:
    """Lint a copy of the package in which ``module`` (a path under textkit/) gains ``statement``."""
    project = _copy_project(tmp_path)
    path = project / "textkit" / module
    path.write_text(path.read_text() + f"\n\n{statement}  # deliberate\n")
    return _lint(project)


def test_an_upward_import_breaks_the_contract_naming_both_modules(tmp_path):
    result = _lint_with_extra_import(tmp_path, "text/tokens.py", "from ..stats import design")
    assert result.returncode != 0
    assert "BROKEN" in result.stdout or "broken" in result.stdout
    assert "textkit.text.tokens -> textkit.stats.design" in result.stdout


def test_sibling_stages_stay_independent(tmp_path):
    result = _lint_with_extra_import(tmp_path, "coding/coder.py", "from ..discover import keyness")
    assert result.returncode != 0
    assert "textkit.coding.coder -> textkit.discover.keyness" in result.stdout

"""The engine stays free of web, database and test-only packages (STYLE.md recommendation 1).

1. Import models and every submodule in a fresh interpreter and inspect sys.modules for
   web/database packages.
2. Scan the source of models/ for import statements of those packages and of the
   test-only dependencies (scipy, magpylib, per pyproject.toml).  scipy cannot be checked
   through sys.modules: numba loads it opportunistically when it is installed.
   One exception, a runtime dependency: ``scipy.linalg`` (LU factorisation kept for
   iterative refinement, models/route/refined_solve.py); the tests check that solve
   against numpy.linalg.solve, never against scipy.linalg.
"""

from __future__ import annotations

import ast
import json
import os
import pathlib
import subprocess
import sys

ROOT = pathlib.Path(__file__).resolve().parents[2]
WEB_AND_DB = ("flask", "werkzeug", "marshmallow", "sqlalchemy", "gunicorn", "psycopg")
TEST_ONLY = ("scipy", "magpylib", "pytest", "hypothesis")
ALLOWED = ("scipy.linalg",)  # runtime dependency of models/route/refined_solve.py

SCRIPT = """
import importlib, json, pkgutil, sys
import models
for info in pkgutil.walk_packages(models.__path__, "models."):
    importlib.import_module(info.name)
print(json.dumps(sorted({name.split(".")[0] for name in sys.modules})))
"""


def test_importing_models_loads_no_web_or_database_package():
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    out = subprocess.run([sys.executable, "-c", SCRIPT], cwd=ROOT, env=env, capture_output=True, text=True,
                         timeout=120, check=True)
    loaded = set(json.loads(out.stdout.strip().splitlines()[-1]))
    assert "models" in loaded and "numpy" in loaded
    assert not loaded & set(WEB_AND_DB), sorted(loaded & set(WEB_AND_DB))


def test_models_source_imports_no_web_database_or_test_only_package():
    offenders = []
    for path in sorted((ROOT / "models").rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        for node in ast.walk(tree):
            if isinstance(node, ast.Import):
                names = [alias.name for alias in node.names]
            elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
                names = [node.module]
            else:
                continue
            offenders += [f"{path.relative_to(ROOT)}:{node.lineno} {n}" for n in names
                          if n.split(".")[0] in WEB_AND_DB + TEST_ONLY and n not in ALLOWED]
    assert not offenders, offenders

"""The project's structure rules, checked on every test run.

* Layers point down (ingest < network < analysis < export < study < pipeline
  < cli): the contract in ``pyproject.toml`` ([tool.importlinter]), checked
  with import-linter (a general-purpose tool from PyPI), not by hand.
* Modules stay readable: none over about 600 lines (DEVELOPERS.md).
* Each package's ``__all__`` names only what it defines or re-exports.
"""

from __future__ import annotations

import importlib
import pkgutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "geo_reach"
#: "About 600 lines": a module may run a little over while a split would cut one idea in two.
MAX_LINES = 650


def test_layers_point_down():
    lint = Path(sys.executable).with_name("lint-imports")
    res = subprocess.run([str(lint), "--config", str(ROOT / "pyproject.toml")], cwd=ROOT,
                         capture_output=True, text=True)
    assert res.returncode == 0, res.stdout[-4000:] + res.stderr[-2000:]
    assert "Contracts: 1 kept, 0 broken" in res.stdout


def test_no_module_is_too_long():
    long = {str(p.relative_to(ROOT)): n for p in PACKAGE.rglob("*.py")
            if (n := len(p.read_text(encoding="utf-8").splitlines())) > MAX_LINES}
    assert not long, f"split these modules (over {MAX_LINES} lines): {long}"


def _modules():
    import geo_reach

    yield "geo_reach"
    for m in pkgutil.walk_packages(geo_reach.__path__, "geo_reach."):
        if not m.name.endswith("__main__"):
            yield m.name


@pytest.mark.parametrize("name", list(_modules()))
def test_all_names_exist(name):
    mod = importlib.import_module(name)
    names = getattr(mod, "__all__", None)
    assert names is not None, f"{name} has no __all__"
    missing = [n for n in names if not hasattr(mod, n)]
    assert not missing, f"{name}.__all__ names {missing}, which it does not define"

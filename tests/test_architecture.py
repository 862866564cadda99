"""The layout keeps itself: the import-linter contracts in pyproject.toml hold.

Layers (ui over cli over outputs over study over engine and intake over rules over plan over
problem), the plan checker apart from the code it checks, and no import cycles between the
modules of a package, imports inside functions included (grimp reads every import
statement).
"""

from __future__ import annotations

from pathlib import Path

from importlinter.cli import lint_imports

ROOT = Path(__file__).resolve().parents[1]


def test_import_contracts_hold(monkeypatch):
    monkeypatch.chdir(ROOT)
    assert lint_imports(config_filename=str(ROOT / "pyproject.toml"), no_cache=True) == 0


def test_no_module_is_over_six_hundred_lines():
    sizes = {p.relative_to(ROOT).as_posix(): len(p.read_text(encoding="utf-8").splitlines())
             for folder in ("districting", "ui") for p in (ROOT / folder).rglob("*.py")}
    assert {p: n for p, n in sizes.items() if n > 600} == {}

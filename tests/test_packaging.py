"""pyproject lists every package explicitly; a new sub-package must not be left out of the wheel."""

from __future__ import annotations

import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def test_every_subpackage_is_listed_in_pyproject():
    config = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    listed = set(config["tool"]["setuptools"]["packages"])
    found = {
        ".".join(init.parent.relative_to(ROOT).parts)
        for init in (ROOT / "calib").rglob("__init__.py")
    }
    assert found - listed == set(), "add these to [tool.setuptools] packages"
    mapped = set(config["tool"]["setuptools"]["package-dir"])
    assert listed - found == mapped

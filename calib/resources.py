"""Finding the folders calib ships beside its code (templates, fonts, demo runs).

Installed, they are the packages ``calib.report_templates`` and
``calib.sample_runs`` (pyproject maps the top-level folders there); in a source
checkout they are the top-level folders themselves.
"""

from __future__ import annotations

from importlib import resources
from pathlib import Path

__all__ = ["bundled_folder"]

_TOP_LEVEL = {"report_templates": "report_templates", "sample_runs": "sample_runs"}


def bundled_folder(name: str) -> Path:
    """Path of the bundled folder ``name`` (``report_templates`` or ``sample_runs``).

    Examples
    --------
    >>> (bundled_folder("sample_runs") / "make_demo_runs.py").is_file()
    True
    """
    if name not in _TOP_LEVEL:
        raise ValueError(f"name must be one of {', '.join(_TOP_LEVEL)}; got {name!r}")
    try:
        folder = Path(str(resources.files(f"calib.{name}")))
        if folder.is_dir():
            return folder
    except ModuleNotFoundError:
        pass
    folder = Path(__file__).resolve().parent.parent / _TOP_LEVEL[name]
    if not folder.is_dir():
        raise FileNotFoundError(f"calib's bundled folder {name!r} is missing from this installation")
    return folder

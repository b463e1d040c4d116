"""Every exception class calib defines lives in calib/errors.py and is a CalibError.

So that one ``except CalibError`` catches everything calib means to raise (the
promise of calib/errors.py), no module may define an exception of its own.  The
classes are found with :mod:`ast`, without importing anything: a class is an
exception when a base is a built-in exception or another exception class found
in calib/ (followed to a fixed point, so ``class A(B)`` with ``class
B(ValueError)`` elsewhere counts).
"""

from __future__ import annotations

import ast
import builtins
from pathlib import Path

import calib.errors

ROOT = Path(__file__).resolve().parent.parent / "calib"
HOME = ROOT / "errors.py"


def _base_name(node: ast.expr) -> str | None:
    if isinstance(node, ast.Name):
        return node.id
    if isinstance(node, ast.Attribute):
        return node.attr
    return None


def _is_builtin_exception(name: str) -> bool:
    value = getattr(builtins, name, None)
    return isinstance(value, type) and issubclass(value, BaseException)


def exception_classes(root: Path) -> dict[str, list[tuple[Path, int]]]:
    """Name → where each exception class of that name is defined under ``root``."""
    classes: list[tuple[str, list[str], Path, int]] = []
    for path in sorted(root.rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        for node in ast.walk(tree):
            if isinstance(node, ast.ClassDef):
                bases = [b for b in map(_base_name, node.bases) if b]
                classes.append((node.name, bases, path, node.lineno))
    found: dict[str, list[tuple[Path, int]]] = {}
    changed = True
    while changed:
        changed = False
        for name, bases, path, line in classes:
            if (path, line) in found.get(name, []):
                continue
            if any(_is_builtin_exception(b) or b in found for b in bases):
                found.setdefault(name, []).append((path, line))
                changed = True
    return found


def test_the_finder_sees_exceptions_anywhere(tmp_path: Path) -> None:
    # Worked by hand: B is a ValueError, A a B (defined in another module), C inside a
    # function is still a class definition, D is no exception.
    (tmp_path / "one.py").write_text("class B(ValueError):\n    pass\n")
    (tmp_path / "two.py").write_text(
        "import one\nclass A(one.B):\n    pass\n"
        "def f():\n    class C(Exception):\n        pass\n"
        "class D:\n    pass\n")
    assert sorted(exception_classes(tmp_path)) == ["A", "B", "C"]


def test_every_exception_is_defined_in_errors_py() -> None:
    outside = sorted(f"{path.relative_to(ROOT.parent)}:{line} {name}"
                     for name, places in exception_classes(ROOT).items()
                     for path, line in places if path != HOME)
    assert outside == [], "exception classes outside calib/errors.py:\n" + "\n".join(outside)


def test_every_exception_of_errors_py_is_a_calib_error() -> None:
    names = sorted(name for name, places in exception_classes(ROOT).items()
                   if any(path == HOME for path, _ in places))
    assert "RangeError" in names and "PageError" in names
    for name in names:
        assert issubclass(getattr(calib.errors, name), calib.errors.CalibError), name
    assert sorted(calib.errors.__all__) == names


def test_moved_exceptions_keep_their_old_import_paths() -> None:
    # Users and tests import these from the modules that raise them.
    from calib.archive.backends import ArchiveError
    from calib.archive.baseline import BaselineError
    from calib.archive.people import RefusedAction, SignInRefused
    from calib.checks.narrowing import RangeError
    from calib.io.cells import CellError
    from calib.io.numbers import NumberTextError
    from calib.record.keyfile import KeyFileError, PassphraseError
    from calib.record.signing import SignOffError
    from calib.web.base import PageError
    from calib.web.state import SessionsFull

    moved = (ArchiveError, BaselineError, RefusedAction, SignInRefused, RangeError, CellError,
             NumberTextError, KeyFileError, PassphraseError, SignOffError, PageError,
             SessionsFull)
    assert all(cls.__module__ == "calib.errors" for cls in moved)
    # Those once raised as ValueError are still ValueErrors for callers catching that.
    assert all(issubclass(cls, ValueError) for cls in (RangeError, CellError, NumberTextError))

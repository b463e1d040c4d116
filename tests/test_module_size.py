"""No module of calib/ is longer than 600 lines (STYLE.md, the common rules).

A longer module is split by topic.  Lines are counted as ``wc -l`` does (newlines).
"""

from __future__ import annotations

from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent / "calib"
LIMIT = 600



def lengths(root: Path = ROOT) -> dict[str, int]:
    """Module path (relative to the repository) → its number of lines."""
    return {path.relative_to(root.parent).as_posix(): path.read_bytes().count(b"\n")
            for path in sorted(root.rglob("*.py"))}


def test_counting_lines(tmp_path: Path) -> None:
    pkg = tmp_path / "calib"
    pkg.mkdir()
    (pkg / "a.py").write_text("x = 1\n" * 601)
    (pkg / "b.py").write_text("")
    assert lengths(pkg) == {"calib/a.py": 601, "calib/b.py": 0}


def test_no_module_over_600_lines() -> None:
    long = {name: n for name, n in lengths().items() if n > LIMIT}
    over = sorted(f"{name}: {n} lines" for name, n in long.items())
    assert not over, f"modules over {LIMIT} lines (split them by topic):\n" + "\n".join(over)

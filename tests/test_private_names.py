"""Internal helper names carry a leading underscore (issue 18: a public face and private rooms).

A top-level name of a module under calib/ that no other file of the repository mentions is
internal; ``tests/private_names.py`` finds them (and renames them with ``--apply``).
"""

from __future__ import annotations

from tests.private_names import candidates, rename


def test_no_internal_name_without_its_underscore() -> None:
    found = {str(path): names for path, names in candidates().items()}
    assert not found, ("names used only in their own module: give them a leading underscore "
                       f"(python -m tests.private_names --apply): {found}")


def test_rename_touches_code_docstrings_and_all_but_not_other_words() -> None:
    text = ('"""Uses helper."""\n__all__ = ["helper", "keep"]\n\n\ndef helper():\n'
            '    return helpers + helper()  # helper\n')
    out = rename(text, ["helper"])
    assert '__all__ = ["keep"]' in out
    assert "def _helper():" in out and "return helpers + _helper()  # _helper" in out
    assert '"""Uses _helper."""' in out

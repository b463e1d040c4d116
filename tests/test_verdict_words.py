"""Verdict words are spelled in one place: calib/verdict_words.py.

Every string constant in calib/ that is not a docstring is read with :mod:`ast`
(f-string pieces included); one spelling a verdict word (ACCEPTED, NEEDS
REVIEW, REJECTED, UNUSABLE as words, or a sentence-case label such as "Needs
review" as the whole string) outside calib/verdict_words.py fails.  Docstrings
are left out: their examples show what is printed.
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

from calib.verdict_words import VERDICT_LABELS, VERDICT_WORDS

ROOT = Path(__file__).resolve().parent.parent / "calib"
HOME = ROOT / "verdict_words.py"
_SHOUTED = re.compile(r"\b(?:" + "|".join(map(re.escape, VERDICT_WORDS.values())) + r")\b")


def _docstrings(tree: ast.AST) -> set[int]:
    out = set()
    for node in ast.walk(tree):
        if isinstance(node, (ast.Module, ast.ClassDef, ast.FunctionDef, ast.AsyncFunctionDef)):
            body = node.body
            if body and isinstance(body[0], ast.Expr) and isinstance(body[0].value, ast.Constant):
                out.add(id(body[0].value))
    return out


def spellings(source: str) -> list[tuple[int, str]]:
    """(line, text) of each non-docstring string constant spelling a verdict word."""
    tree = ast.parse(source)
    skip = _docstrings(tree)
    return sorted((node.lineno, node.value) for node in ast.walk(tree)
            if isinstance(node, ast.Constant) and isinstance(node.value, str)
            and id(node) not in skip
            and (_SHOUTED.search(node.value) or node.value in VERDICT_LABELS.values()))


def test_the_finder_sees_words_but_not_docstrings() -> None:
    source = ('"""Prints ACCEPTED."""\n'
              'A = {"x": "NEEDS REVIEW"}\n'
              'def f(v):\n    """REJECTED here is a doc."""\n    return f"a {v} REJECTED curve"\n'
              'B = "Needs review"\nC = "Needs reviewing later"\nD = "NOT_ACCEPTED"\n')
    assert [line for line, _ in spellings(source)] == [2, 5, 6]


def test_no_module_but_one_spells_a_verdict_word() -> None:
    found = [f"{path.relative_to(ROOT.parent)}:{line} {text!r}"
             for path in sorted(ROOT.rglob("*.py")) if path != HOME
             for line, text in spellings(path.read_text(encoding="utf-8"))]
    assert found == [], "verdict words spelled outside calib/verdict_words.py:\n" + "\n".join(found)


def test_the_words_match_the_codes_records_store() -> None:
    from calib.checks.result import CurveVerdict

    assert {v.value for v in CurveVerdict} | {"unusable"} == set(VERDICT_WORDS)

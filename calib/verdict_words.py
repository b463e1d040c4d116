"""The verdict words people read, defined once for the terminal, the PDFs, the web pages and exports.

A record stores a verdict as its code (``accepted``, ``needs-review``,
``rejected``: :class:`calib.checks.result.CurveVerdict`); these are the words
printed for it.  ``unusable`` is a run file that ``calib check`` of several
files could not read.  No other module spells these words
(tests/test_verdict_words.py checks it); a report template may still choose its
own words for its PDF (:class:`calib.report.template.Verdicts`).

Examples
--------
>>> VERDICT_WORDS["needs-review"], VERDICT_LABELS["needs-review"]
('NEEDS REVIEW', 'Needs review')
>>> verdict_word("rejected"), verdict_label("accepted"), verdict_word("odd")
('REJECTED', 'Accepted', 'ODD')
"""

from __future__ import annotations

from typing import Any

__all__ = ["VERDICT_LABELS", "VERDICT_WORDS", "verdict_label", "verdict_word"]

#: Code → the word in capitals (terminal, text summaries, shouted in sentences).
VERDICT_WORDS = {"accepted": "ACCEPTED", "needs-review": "NEEDS REVIEW", "rejected": "REJECTED",
                 "unusable": "UNUSABLE"}
#: Code → the word in sentence case (web pages, PDF tables).
VERDICT_LABELS = {code: word.capitalize() for code, word in VERDICT_WORDS.items()}


def _code(verdict: Any) -> str:
    return str(getattr(verdict, "value", verdict))


def verdict_word(verdict: Any) -> str:
    """The verdict (a code or a verdict enum) in capitals; an unknown code upper-cased."""
    code = _code(verdict)
    return VERDICT_WORDS.get(code, code.upper())


def verdict_label(verdict: Any) -> str:
    """The verdict (a code or a verdict enum) in sentence case; an unknown code as it is."""
    code = _code(verdict)
    return VERDICT_LABELS.get(code, code)

"""The verdicts in plain words for a terminal, failing rules first.

Built from a ``calib.check/1`` document.  Colour is a help only: every
verdict is written out in words, and colour is added only when the caller
asks for it (the command line does so on a terminal, never in a pipe).
"""

from __future__ import annotations

import textwrap
from collections.abc import Mapping
from typing import Any

from calib.verdict_words import verdict_word

__all__ = ["verdict_text"]

_COLOURS = {"accepted": "32", "rejected": "31", "needs-review": "33"}  # green, red, yellow
_WIDTH = 100


def _word(verdict: Any, colour: bool) -> str:
    word = verdict_word(verdict)
    if not colour or str(verdict) not in _COLOURS:
        return word
    return f"\x1b[1;{_COLOURS[str(verdict)]}m{word}\x1b[0m"


def _wrap(text: str, indent: int) -> str:
    return textwrap.fill(text, width=_WIDTH, initial_indent=" " * indent,
                         subsequent_indent=" " * (indent + 3))


def _range_text(low: Any, high: Any) -> str:
    return f"{low:g} to {high:g}"


def _curve_lines(curve: Mapping[str, Any], colour: bool) -> list[str]:
    lines = [f"  {curve.get('analyte')}: {_word(curve.get('verdict'), colour)}"]
    for i, reason in enumerate(curve.get("reasons") or [], start=1):
        lines.append(_wrap(f"{i}. {reason}", 4))
    span = curve.get("working_range") or {}
    applied, proposed = span.get("applied"), span.get("proposed")
    if applied:
        original = applied.get("original") or {}
        reason = str(applied.get("reason")).rstrip(".")
        lines.append(_wrap(
            f"Working range {_range_text(applied['low'], applied['high'])} applied by the "
            f"analyst: {reason}. On the full range the curve was "
            f"{_word(original.get('verdict'), colour)}.", 4))
    if proposed and not (applied and applied.get("as_proposed")):
        lines.append(_wrap(
            f"Proposed, not applied: range {_range_text(proposed['lloq'], proposed['uloq'])} "
            f"gives {_word(proposed.get('verdict'), colour)}. {proposed.get('reason')} To apply "
            f"it: --range '{curve.get('analyte')}:{proposed['lloq']:g}..{proposed['uloq']:g}'.",
            4))
    return lines


def verdict_text(document: Mapping[str, Any], *, colour: bool = False) -> str:
    """Each curve's verdict with its reasons, proposals and ranges, then the exclusions.

    Parameters
    ----------
    document : mapping
        A ``calib.check/1`` document.
    colour : bool
        Add terminal colour codes to the verdict words.

    Examples
    --------
    >>> doc = {"profile": {"name": "default", "version": "1"}, "verdict": "needs-review",
    ...        "curves": [{"analyte": "Fluoride", "verdict": "needs-review",
    ...                    "reasons": ["Intercept against zero: p = 2.2e-11"]}]}
    >>> print(verdict_text(doc))
    Verdicts under profile default version 1:
      Fluoride: NEEDS REVIEW
        1. Intercept against zero: p = 2.2e-11
    """
    profile = document.get("profile") or {}
    lines = [f"Verdicts under profile {profile.get('name')} version {profile.get('version')}:"]
    for curve in document.get("curves", []):
        lines += _curve_lines(curve, colour)
    exclusions = document.get("exclusions") or []
    if exclusions:
        lines.append("Excluded when checking:")
        for e in exclusions:
            cells = ", ".join(e.get("cells", []))
            named = "" if [str(e.get("target"))] == e.get("cells") else f" ({e.get('target')})"
            lines.append(_wrap(f"{cells}{named}: {e.get('reason')}", 2))
    return "\n".join(lines)

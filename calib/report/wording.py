"""How the PDF record puts the figures of a record in words: labels, verdicts, signatures.

These read the parsed ``calib.record/1`` or ``/2`` JSON defensively (a stored record may
lack a field; it then prints a dash) and are shared by the PDF story and the
web page.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping, Sequence
from typing import Any

from calib.report.formatting import MISSING, as_float, format_compact
from calib.report.template import ReportTemplate

__all__ = [
    "CHECK_VERDICTS",
    "COEFFICIENTS",
    "MODELS",
    "ROLES",
    "SEVERITIES",
    "WEIGHTINGS",
    "as_list",
    "as_mapping",
    "coefficient_order",
    "common_sheet",
    "fit_weighting",
    "fixed_digits",
    "lod_remark",
    "range_sentences",
    "settings_weighting",
    "shared_reasons",
    "signature_words",
    "text_or_dash",
    "verdict_sentence",
    "weighting_words",
]

MODELS = {
    "linear": "straight line, y = a + b·x",
    "origin": "straight line through the origin, y = b·x",
    "quadratic": "quadratic, y = a + b·x + c·x²",
    "mean-rf": "mean response factor, y = RF·x (RF the mean of yᵢ/xᵢ)",
}
#: Every weighting of :class:`calib.options.Weighting`, as the record pages name it.
WEIGHTINGS = {"none": "none (equal weights)", "1/x": "1/x", "1/x2": "1/x²", "1/y": "1/y",
              "1/y2": "1/y²", "1/s2": "1/s² (variance function fitted to the replicates)"}
COEFFICIENTS = {"intercept": "Intercept a", "slope": "Slope b", "quadratic": "Quadratic term c"}
CHECK_VERDICTS = {"pass": "Pass", "fail": "Fail", "warn": "Warning",
                  "not-evaluated": "Not evaluated"}
SEVERITIES = {"reject": "Reject", "review": "Review", "info": "Information"}
ROLES = ("prepared", "reviewed", "approved")


def weighting_words(model: Any, weighting: Any) -> str:
    """A curve's weighting as the record pages name it.

    A ``mean-rf`` curve is fitted with 1/x² weights whatever its record says (records
    before ``calib.record/2`` said ``none``, meaning its response factors count alike).

    Examples
    --------
    >>> weighting_words("linear", "1/s2")
    '1/s² (variance function fitted to the replicates)'
    >>> weighting_words("mean-rf", "none")
    '1/x² (each response factor counts alike)'
    """
    if model == "mean-rf":
        return "1/x² (each response factor counts alike)"
    return text_or_dash(WEIGHTINGS.get(str(weighting), weighting))


def fit_weighting(details: Mapping[str, Any], curve: Mapping[str, Any]) -> str:
    """The weights a curve's fit used: ``fit_details`` of ``calib.record/1``, else its weighting.

    Examples
    --------
    >>> fit_weighting({"weight_function": "1/x2"}, {"model": "mean-rf", "weighting": "none"})
    '1/x2'
    >>> fit_weighting({}, {"model": "linear", "weighting": "1/y"})
    '1/y'
    """
    stored = details.get("weight_function")  # calib.record/1 only
    if stored:
        return str(stored)
    return "1/x2" if curve.get("model") == "mean-rf" else str(curve.get("weighting") or "none")


def settings_weighting(record: Mapping[str, Any], source: Mapping[str, Any]) -> str:
    """The weighting row of the settings: a curve's, or the run's (``settings``).

    ``calib.record/2`` states the weighting per curve only, so the run's is the
    curves' when they share one.

    Examples
    --------
    >>> record = {"check": {"curves": [{"model": "linear", "weighting": "1/x"}] * 2}}
    >>> settings_weighting(record, {"model": "linear", "confidence": 0.95})
    '1/x'
    """
    if "weighting" in source or "model" not in source:
        return weighting_words(source.get("model"), source.get("weighting"))
    curves = [as_mapping(c) for c in as_list(as_mapping(record.get("check")).get("curves"))]
    named = {weighting_words(c.get("model"), c.get("weighting")) for c in curves}
    if len(named) == 1:
        return named.pop()
    return "per analyte (see each curve)" if named else MISSING


def text_or_dash(value: Any) -> str:
    """Record text as printed: the dash when missing."""
    if value is None or value == "":
        return MISSING
    return str(value)


def as_mapping(value: Any) -> Mapping[str, Any]:
    """``value`` if it is a mapping, else an empty one (a record field missing or malformed)."""
    return value if isinstance(value, Mapping) else {}


def as_list(value: Any) -> Sequence[Any]:
    """``value`` if it is a list, else an empty one."""
    return value if isinstance(value, list) else []


def fixed_digits(value: Any, decimals: int = 6) -> str:
    """A number with ``decimals`` digits after the point (R², r); the dash when missing.

    Examples
    --------
    >>> fixed_digits(0.99934712), fixed_digits(None)
    ('0.999347', '—')
    """
    v = as_float(value)
    return MISSING if v is None else f"{v:.{decimals}f}"


def coefficient_order(coefficients: Mapping[str, Any]) -> list[str]:
    """Design order (intercept, slope, quadratic), whatever order the mapping has.

    A record read back from its canonical JSON has its keys sorted, and it must
    print exactly as it did when it was issued.
    """
    known = [name for name in COEFFICIENTS if name in coefficients]
    return known + sorted(set(coefficients) - set(known))


def verdict_sentence(curve: Mapping[str, Any], template: ReportTemplate) -> str:
    """The verdict in words, naming the checks that failed, warned or could not be evaluated.

    Examples
    --------
    >>> from calib.report.template import load_template
    >>> curve = {"verdict": "rejected", "checks": [
    ...     {"title": "Intercept is near zero", "verdict": "fail", "severity": "reject"},
    ...     {"title": "Enough levels", "verdict": "pass", "severity": "reject"}]}
    >>> verdict_sentence(curve, load_template())
    'Rejected. Failed: Intercept is near zero.'
    """
    word = template.verdicts.word(curve.get("verdict"))
    groups: dict[str, list[str]] = {"fail": [], "warn": [], "not-evaluated": [], "info": []}
    for check in as_list(curve.get("checks")):
        check = as_mapping(check)
        verdict, severity = check.get("verdict"), check.get("severity")
        title = str(check.get("title") or check.get("id") or "?")
        if severity == "info":
            # Reported for information: named apart, since they never move the verdict.
            if verdict in ("fail", "warn"):
                groups["info"].append(title)
            continue
        # An unevaluated check matters when it could reject.
        if verdict == "not-evaluated" and severity != "reject":
            continue
        if verdict in groups:
            groups[verdict].append(title)
    parts = [f"{word}."]
    labels = (("fail", "Failed"), ("warn", "Warnings"), ("not-evaluated", "Not evaluated"),
              ("info", "Not met, for information only (the verdict does not depend on it)"))
    for key, label in labels:
        if groups[key]:
            parts.append(f"{label}: {'; '.join(groups[key])}.")
    return " ".join(parts)


def signature_words(entry: Mapping[str, Any]) -> str:
    """What the Signature column says: entered by name only, or signed with a key.

    The key id is shown to 16 hex digits in groups of four, the start of the
    fingerprint that ``calib verify`` prints in full.

    Examples
    --------
    >>> signature_words({"role": "prepared", "name": "R. Okafor"})
    'Entered in the record'
    >>> signature_words({"key_id": "3f9a1c2b77de44108b0c5e6f7a8b9c0d", "algorithm": "ed25519"})
    'Signed electronically (Ed25519, key 3f9a 1c2b 77de 4410)'
    >>> signature_words({"key_id": "3f9a1c2b77de4410", "algorithm": "ecdsa-p256-sha256"})
    'Signed electronically (ECDSA P-256, key 3f9a 1c2b 77de 4410)'
    """
    key_id = entry.get("key_id")
    if not key_id:
        return "Entered in the record"
    digits = str(key_id)[:16]
    grouped = " ".join(digits[i:i + 4] for i in range(0, len(digits), 4))
    names = {"ed25519": "Ed25519", "ecdsa-p256-sha256": "ECDSA P-256"}
    algorithm = names.get(str(entry.get("algorithm")), text_or_dash(entry.get("algorithm")))
    return f"Signed electronically ({algorithm}, key {grouped})"


def common_sheet(cells: Any) -> tuple[str, str]:
    """The ``Sheet!`` prefix every source cell shares, and the column title naming it.

    Examples
    --------
    >>> common_sheet(["Run!C7", "Run!C8"])
    ('Run!', 'Cell in Run')
    >>> common_sheet(["A!C7", "B!C8"])
    ('', 'Source cell')
    """
    prefixes = {str(c).rpartition("!")[0] for c in cells if c}
    if len(prefixes) == 1 and (sheet := prefixes.pop()):
        return f"{sheet}!", f"Cell in {sheet.strip(chr(39))}"
    return "", "Source cell"


def _same_range(applied: Mapping[str, Any], proposed: Mapping[str, Any]) -> bool:
    def close(a: Any, b: Any) -> bool:
        try:
            x, y = float(a), float(b)
        except (TypeError, ValueError):
            return False
        return abs(x - y) <= 1e-9 * max(abs(x), abs(y), 1e-300)

    return close(applied.get("low"), proposed.get("lloq")) and close(applied.get("high"),
                                                                     proposed.get("uloq"))


def range_sentences(curve: Mapping[str, Any], words: Callable[[Any], str]) -> list[str]:
    """The working-range sentences of a curve's page, each range said once.

    Examples
    --------
    >>> curve = {"working_range": {
    ...     "applied": {"low": 0.05, "high": 5, "reason": "level 1 contaminated",
    ...                 "original": {"verdict": "rejected"}},
    ...     "proposed": {"lloq": 0.05, "uloq": 5, "reason": "lowest level fails",
    ...                  "verdict": "accepted"}}}
    >>> import textwrap
    >>> print(textwrap.fill(range_sentences(curve, str.capitalize)[0], 90))
    Working range applied by the analyst: 0.05 to 5 (level 1 contaminated), the range calib
    proposed. On the full range the curve was: Rejected.
    """
    working = as_mapping(curve.get("working_range"))
    applied = as_mapping(working.get("applied"))
    proposed = as_mapping(working.get("proposed"))
    notes = []
    if applied:
        original = as_mapping(applied.get("original"))
        same = bool(proposed) and _same_range(applied, proposed)
        notes.append(
            f"Working range applied by the analyst: {format_compact(applied.get('low'))} to "
            f"{format_compact(applied.get('high'))} ({text_or_dash(applied.get('reason'))})"
            + (", the range calib proposed" if same else "")
            + f". On the full range the curve was: {words(original.get('verdict'))}.")
        if proposed and not same:
            notes.append(
                f"calib had proposed {format_compact(proposed.get('lloq'))} to "
                f"{format_compact(proposed.get('uloq'))} ({text_or_dash(proposed.get('reason'))}; "
                f"on it the curve would be: {words(proposed.get('verdict'))}); the analyst "
                "applied the range above instead.")
    elif proposed:
        notes.append(
            f"calib proposes the range {format_compact(proposed.get('lloq'))} to "
            f"{format_compact(proposed.get('uloq'))} ({text_or_dash(proposed.get('reason'))}); "
            f"on it the curve would be: {words(proposed.get('verdict'))}. Not applied: the analyst "
            "applies a range only with --range, and the record then shows it.")
    return notes


#: A reason at least this long, shared by at least two points, is printed once below the table.
_SHARED_REASON_LENGTH = 40


def shared_reasons(reasons: Iterable[Any]) -> dict[str, str]:
    """Long exclusion reasons given for two or more points → a short mark (``A``, ``B``...).

    The standards table then says "No: reason A below" in each row and prints
    the reason once, instead of repeating a long sentence row after row.

    Examples
    --------
    >>> why = "level 7 vial lost its cap overnight; evaporation suspected, see lab note 31"
    >>> shared_reasons([why, why, "injection error", why])
    {'level 7 vial lost its cap overnight; evaporation suspected, see lab note 31': 'A'}
    """
    counts: dict[str, int] = {}
    for reason in reasons:
        text = str(reason or "")
        counts[text] = counts.get(text, 0) + 1
    shared = [r for r, n in counts.items() if n >= 2 and len(r) >= _SHARED_REASON_LENGTH]
    return {r: _mark(i) for i, r in enumerate(shared)}


def _mark(i: int) -> str:
    """A, B, ... Z, AA, AB, ...: a mark per shared reason, however many there are."""
    letters = ""
    i += 1
    while i:
        i, rest = divmod(i - 1, 26)
        letters = chr(ord("A") + rest) + letters
    return letters


def lod_remark(lod: Any, lloq: Any, unit: str = "") -> str:
    """A remark when the curve's LOD lies above its LLOQ (the lowest standard); else empty.

    An LOD above the LLOQ says the curve cannot tell its own lowest standard
    from a blank with the stated confidence, so results near the LLOQ are not
    what the range promises.

    Examples
    --------
    >>> lod_remark(0.0105, 0.01, "mg/L")[:62]
    'The LOD (0.0105 mg/L) lies above the LLOQ (0.01 mg/L), the low'
    >>> lod_remark(0.004, 0.01)
    ''
    """
    low, limit = as_float(lloq), as_float(lod)
    if low is None or limit is None or not limit > low:
        return ""
    u = f" {unit}" if unit else ""
    return (f"The LOD ({limit:.3g}{u}) lies above the LLOQ ({low:.3g}{u}), the lowest standard "
            "in the fit: the curve cannot tell its lowest standard from a blank with the stated "
            "confidence. Review the low end (narrow the range or re-prepare the low standards) "
            "before reporting results near the LLOQ.")

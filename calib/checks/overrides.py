"""Per-analyte settings in a profile: ``[[analyte]]`` tables.

A lab that fits lead with a quadratic and the other elements with a straight
line, or reports copper to four figures, says so in the profile::

    [[analyte]]
    match = "Pb*"                  # glob, case-insensitive: Pb, Pb 220.353, PB208 ...
    model = "quadratic"
    weighting = "1/x"
    digits = 4                     # significant figures of reported results
    note = "Pb 220.353 bends above 200 µg/L (method validation 2026-05)"

    [analyte.rules.back-calculation]   # limits of named rules, for these analytes only
    tolerance_pct = 10

An entry gives ``match`` (a glob: ``*``, ``?``, ``[...]``) or ``name`` (one
analyte, exactly, ignoring case), never both.  An analyte named by a ``name``
entry takes that entry; otherwise the one pattern that matches it.  Two
patterns that can match one analyte are ambiguous and refused when the profile
is loaded, naming both and an example name (:mod:`calib.checks.globs`).
:func:`calib.checks.evaluate.evaluate_run` judges each analyte under its own
effective profile (:func:`settings_by_analyte`) in one pass over the run.
A rule named under ``rules`` must be one of the profile's rules; its
parameters are checked as the rule's own.  Command-line ``--model`` and
``--weighting`` apply to every curve and take precedence.
"""

from __future__ import annotations

import fnmatch
import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING, Any

from calib.checks.result import CheckResult, Severity, Verdict
from calib.errors import OptionError, ProfileError
from calib.options import FitOptions, Model, Weighting

if TYPE_CHECKING:
    from calib.checks.evaluate import CurveAssessment
    from calib.checks.profile import Profile, RuleSpec

__all__ = ["AnalyteOverride", "digits_by_analyte", "given_options", "override_for",
           "parse_overrides", "settings_by_analyte", "with_settings_line"]

_SETTINGS_ID = "analyte-settings"
"""Id of the information line naming the ``[[analyte]]`` entry a curve was judged with."""
_KEYS = {"match", "name", "model", "weighting", "digits", "note", "rules"}


@dataclass(frozen=True)
class AnalyteOverride:
    """One ``[[analyte]]`` entry: which analytes, and what differs for them."""

    index: int
    """1-based position among the profile's ``[[analyte]]`` entries."""
    pattern: str = ""
    name: str = ""
    model: Model | None = None
    weighting: Weighting | None = None
    digits: int | None = None
    note: str = ""
    rules: dict[str, dict[str, Any]] = field(default_factory=dict)

    @property
    def label(self) -> str:
        """How the record names the entry.

        Examples
        --------
        >>> AnalyteOverride(2, pattern="Pb*").label, AnalyteOverride(1, name="Cu 324.754").label
        ('[[analyte]] 2 (match "Pb*")', '[[analyte]] 1 (name "Cu 324.754")')
        """
        what = f'match "{self.pattern}"' if self.pattern else f'name "{self.name}"'
        return f"[[analyte]] {self.index} ({what})"

    def matches(self, analyte: str) -> bool:
        """Whether the entry names ``analyte`` (glob or exact name, ignoring case).

        Examples
        --------
        >>> o = AnalyteOverride(1, pattern="Pb*")
        >>> o.matches("pb 220.353"), o.matches("Cu 324.754")
        (True, False)
        """
        if self.name:
            return analyte.casefold() == self.name.casefold()
        return re.fullmatch(fnmatch.translate(self.pattern.casefold()), analyte.casefold()) \
            is not None

    def changes(self) -> str:
        """What the entry changes, in words.

        Examples
        --------
        >>> AnalyteOverride(1, pattern="Pb*", model=Model.QUADRATIC, digits=4,
        ...                 rules={"back-calculation": {"tolerance_pct": 10.0}}).changes()
        'model quadratic; back-calculation tolerance_pct = 10; 4 significant figures reported'
        """
        parts = []
        if self.model is not None:
            parts.append(f"model {self.model.value}")
        if self.weighting is not None:
            parts.append(f"weighting {self.weighting.value}")
        for rule, params in self.rules.items():
            parts.append(f"{rule} " + ", ".join(f"{k} = {v:g}" if isinstance(v, float)
                                                else f"{k} = {v}" for k, v in params.items()))
        if self.digits is not None:
            parts.append(f"{self.digits} significant figures reported")
        return "; ".join(parts) or "nothing (note only)"


def parse_overrides(entries: Any, rules: Sequence[RuleSpec], *, where: Callable[[int], str]
                    ) -> tuple[AnalyteOverride, ...]:
    """Read the ``[[analyte]]`` entries of a profile; ``where(i)`` names entry ``i`` (1-based).

    Raises
    ------
    ProfileError
        For anything unknown, missing, out of range or ambiguous, naming the entry.
    """
    from calib.checks.rules import RULES

    if not isinstance(entries, list) or not all(isinstance(e, dict) for e in entries):
        raise ProfileError(f"{where(1)}: per-analyte settings are written [[analyte]] tables")
    known_rules = {r.id: r for r in rules}
    out: list[AnalyteOverride] = []
    for i, raw in enumerate(entries, start=1):
        at = where(i)
        for key in raw:
            if key not in _KEYS:
                raise ProfileError(f"{at}: unknown key {key!r} in [[analyte]]; expected one of "
                                   f"{', '.join(sorted(_KEYS))}")
        pattern, name = raw.get("match", ""), raw.get("name", "")
        if not isinstance(pattern, str) or not isinstance(name, str):
            raise ProfileError(f"{at}: [[analyte]] match and name must be texts")
        if bool(pattern.strip()) == bool(name.strip()):
            raise ProfileError(f"{at}: an [[analyte]] entry gives match (a pattern such as "
                               "\"Pb*\") or name (one analyte), exactly one of them")
        try:
            model = Model(raw["model"]) if "model" in raw else None
            weighting = Weighting(raw["weighting"]) if "weighting" in raw else None
        except ValueError as exc:
            raise ProfileError(f"{at}: {exc}") from None
        digits = raw.get("digits")
        if digits is not None and (isinstance(digits, bool) or not isinstance(digits, int)
                                   or not 1 <= digits <= 8):
            raise ProfileError(f"{at}: digits must be a whole number from 1 to 8, got {digits!r}")
        note = raw.get("note", "")
        if not isinstance(note, str):
            raise ProfileError(f"{at}: note must be a text")
        limits = raw.get("rules", {})
        if not isinstance(limits, dict):
            raise ProfileError(f"{at}: rules must be tables such as "
                               "[analyte.rules.back-calculation]")
        checked: dict[str, dict[str, Any]] = {}
        for rule_id, params in limits.items():
            if rule_id not in known_rules:
                raise ProfileError(f"{at}: rule {rule_id!r} is not one of this profile's rules "
                                   f"({', '.join(known_rules)}); add it to [[rules]] first")
            if not isinstance(params, dict) or not params:
                raise ProfileError(f"{at}: [analyte.rules.{rule_id}] must set a parameter")
            spec = RULES[rule_id].params
            checked[rule_id] = {}
            for key, value in params.items():
                if key not in spec:
                    raise ProfileError(f"{at}: rule {rule_id!r} has no parameter {key!r} "
                                       f"(known: {', '.join(spec) or 'none'})")
                problem = spec[key].check(value)
                if problem:
                    raise ProfileError(f"{at}: rule {rule_id!r} parameter {key!r} {problem}")
                checked[rule_id][key] = float(value) if spec[key].kind is float else value
        out.append(AnalyteOverride(i, pattern.strip(), name.strip(), model, weighting, digits,
                                   note, checked))
    _refuse_same(out, where)
    return tuple(out)


def _refuse_same(entries: Sequence[AnalyteOverride], where: Callable[[int], str]) -> None:
    """Refuse two names alike, and two patterns that can match one analyte (both named)."""
    from calib.checks.globs import common_match

    names: dict[str, AnalyteOverride] = {}
    patterns: list[AnalyteOverride] = []
    for e in entries:
        if e.name:
            if e.name.casefold() in names:
                raise ProfileError(f"{where(e.index)}: {names[e.name.casefold()].label} and "
                                   f"{e.label} name the same analyte; merge them into one entry")
            names[e.name.casefold()] = e
            continue
        for other in patterns:
            example = common_match(other.pattern, e.pattern)
            if example is not None:
                raise ProfileError(
                    f"{where(e.index)}: {other.label} and {e.label} can both match one analyte "
                    f"(e.g. {example!r}): the profile would be ambiguous; narrow a pattern, or "
                    "give that analyte its own name entry and patterns that do not overlap")
        patterns.append(e)


def override_for(analyte: str, entries: Sequence[AnalyteOverride]) -> AnalyteOverride | None:
    """The entry that applies to ``analyte``: its ``name`` entry, else the one matching pattern.

    Raises
    ------
    ProfileError
        When two patterns match the analyte (both named).

    Examples
    --------
    >>> a, b = AnalyteOverride(1, pattern="Pb*"), AnalyteOverride(2, pattern="*220*")
    >>> override_for("Cu 324.754", [a, b]) is None
    True
    >>> override_for("Pb 220.353", [a, b])
    Traceback (most recent call last):
    calib.errors.ProfileError: analyte 'Pb 220.353' is matched by [[analyte]] 1 (match "Pb*") and [[analyte]] 2 (match "*220*"): the profile is ambiguous; add a name entry for it or narrow a pattern
    >>> override_for("Pb 220.353", [a, b, AnalyteOverride(3, name="pb 220.353")]).index
    3
    """
    named = [e for e in entries if e.name and e.matches(analyte)]
    if named:
        return named[0]
    matched = [e for e in entries if e.pattern and e.matches(analyte)]
    if len(matched) > 1:
        raise ProfileError(f"analyte {analyte!r} is matched by {matched[0].label} and "
                           f"{matched[1].label}: the profile is ambiguous; add a name entry for "
                           "it or narrow a pattern")
    return matched[0] if matched else None


def digits_by_analyte(profile: Profile, analytes: Sequence[str]) -> dict[str, int]:
    """Reporting digits the profile sets for each of ``analytes`` (only those it sets)."""
    out = {}
    for a in analytes:
        entry = override_for(a, profile.overrides)
        if entry is not None and entry.digits is not None:
            out[a] = entry.digits
    return out


def _profile_for(profile: Profile, entry: AnalyteOverride) -> Profile:
    """The profile as it stands for the analytes of ``entry``: its model, weighting and limits."""
    rules = tuple(replace(r, params={**r.params, **entry.rules[r.id]}) if r.id in entry.rules
                  else r for r in profile.rules)
    options = profile.fit_options.given(model=entry.model, weighting=entry.weighting)
    return replace(profile, model=options.model, weighting=options.weighting, rules=rules)


def given_options(profile: Profile, model: Model | str | None = None,
                  weighting: Weighting | str | None = None,
                  confidence: float | str | None = None) -> FitOptions:
    """The profile's fit options with those a caller gives, checked for every ``[[analyte]]`` too.

    Raises
    ------
    OptionError
        When the options given cannot go with the profile's, or with an entry's
        (the entry named).
    """
    options = profile.fit_options.given(model, weighting, confidence)
    for entry in profile.overrides:
        try:
            _profile_for(profile, entry).fit_options.given(model, weighting, confidence)
        except OptionError as exc:
            raise OptionError(f"{exc} (for the analytes of {entry.label} of profile "
                              f"{profile.name})") from None
    return options


def settings_by_analyte(profile: Profile, analytes: Sequence[str]
                        ) -> dict[str, tuple[Profile, AnalyteOverride | None]]:
    """Each analyte's effective profile and the ``[[analyte]]`` entry that made it (or None).

    An analyte no entry names keeps ``profile`` itself; the analytes of one entry share
    one effective profile (its model, weighting and rule limits).

    Raises
    ------
    ProfileError
        When two patterns match one analyte (both named).
    """
    made: dict[int, Profile] = {}
    out: dict[str, tuple[Profile, AnalyteOverride | None]] = {}
    for analyte in analytes:
        entry = override_for(analyte, profile.overrides) if profile.overrides else None
        if entry is None:
            out[analyte] = (profile, None)
            continue
        if entry.index not in made:
            made[entry.index] = _profile_for(profile, entry)
        out[analyte] = (made[entry.index], entry)
    return out


def with_settings_line(curve: CurveAssessment, entry: AnalyteOverride) -> CurveAssessment:
    """``curve`` with the information line (``analyte-settings``) naming the entry it was
    judged with and what that entry changed."""
    note = f" Note: {entry.note}" if entry.note else ""
    line = CheckResult(_SETTINGS_ID, "Per-analyte settings of the profile", Verdict.PASS,
                       Severity.INFO, None, None,
                       f"Judged with {entry.label}: {entry.changes()}.{note}")
    return replace(curve, checks=(*curve.checks, line))

"""Acceptance profiles: a laboratory's written rules as a TOML file.

A profile has ``name``, ``version``, ``description``, ``sources``, a
``[defaults]`` table (model, weighting, confidence, zero_standards, lod_method,
fit_replicates) and a list
of ``[[rules]]``, each with an ``id`` from :data:`calib.checks.rules.RULES`, a
``severity`` and the rule's parameters.  An optional ``[signoff]`` table says
whether the analyst who prepared a record may also review or approve it
(both false unless the profile says so; see :class:`SignoffPolicy`).  An
optional ``[narrowing]`` table lets calib propose a narrowed working range
(see :class:`NarrowingPolicy`).  Optional ``[[analyte]]`` tables set the model,
weighting, rule limits and reporting digits of some analytes by name or pattern
(:mod:`calib.checks.overrides`).  A profile that uses ``correlation`` must
also use a relative-error or lack-of-fit rule (AMC Technical Brief No. 3).
Anything unknown or out of range is a :class:`~calib.errors.ProfileError`
naming the file and line.
"""

from __future__ import annotations

import hashlib
import re
import tomllib
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from typing import TYPE_CHECKING, Any

from calib.checks.family import ReviewFamily, parse_review_family
from calib.checks.result import Severity
from calib.checks.rules import RULES
from calib.errors import OptionError, ProfileError
from calib.options import FitOptions, LimitMethod, Model, Weighting

if TYPE_CHECKING:
    from calib.checks.overrides import AnalyteOverride

__all__ = ["NarrowingPolicy", "Profile", "RuleSpec", "SignoffPolicy", "load_profile",
           "shipped_profiles", "signoff_policy"]

_TOP_KEYS = {"name", "version", "description", "sources", "defaults", "rules", "signoff",
             "narrowing", "analyte", "review_family"}
_NARROWING_KEYS = ("propose", "max_dropped_levels")
_SEVERITY_RANK = {Severity.INFO: 0, Severity.REVIEW: 1, Severity.REJECT: 2}
_SIGNOFF_KEYS = ("allow_preparer_to_review", "allow_preparer_to_approve",
                 "allow_reviewer_to_approve", "require_key_signatures")
_DEFAULT_KEYS = {"model", "weighting", "confidence", "zero_standards", "lod_method",
                 "fit_replicates"}
_ZERO_CHOICES = ("fit", "exclude")
#: A profile's fit options when [defaults] sets none; a model with its own weighting
#: (mean-rf) takes it when the profile names no weighting.
_DEFAULT_OPTIONS = FitOptions(Model.LINEAR, Weighting.NONE, 0.95)
_REPLICATE_CHOICES = ("all", "first")


@dataclass(frozen=True)
class RuleSpec:
    """One rule of a profile: check id, severity and parameters (defaults filled in)."""

    id: str
    severity: Severity
    params: dict[str, Any]
    source: str = ""


@dataclass(frozen=True)
class NarrowingPolicy:
    """Whether calib may propose a narrowed working range: the ``[narrowing]`` table.

    When a curve is not accepted, calib tries dropping up to
    ``max_dropped_levels`` levels from the ends of the range and proposes the
    narrowest change that improves the verdict.  It never applies one: the
    analyst does, explicitly, and the record shows the range and the reason.

    Attributes
    ----------
    propose : bool
        Propose narrowed ranges (false unless the profile says so).
    max_dropped_levels : int
        Most levels dropped in all, from either end.
    """

    propose: bool = False
    max_dropped_levels: int = 1


@dataclass(frozen=True)
class SignoffPolicy:
    """Who may sign a record off: the profile's optional ``[signoff]`` table.

    The same person preparing and then reviewing or approving a record is
    refused unless the profile allows it (SPEC §6; a second person's review is
    what makes the record trustworthy).

    Attributes
    ----------
    allow_preparer_to_review, allow_preparer_to_approve : bool
        Whether the analyst who prepared the record may review / approve it.
    allow_reviewer_to_approve : bool
        Whether the reviewer may also approve it.
    require_key_signatures : bool
        Whether review, approval and rejection must be signed with a person's key
        (21 CFR 11.200(a): two distinct identification components); printed-name-only
        signatures are then refused.
    """

    allow_preparer_to_review: bool = False
    allow_preparer_to_approve: bool = False
    allow_reviewer_to_approve: bool = False
    require_key_signatures: bool = False


@dataclass(frozen=True)
class Profile:
    """A parsed acceptance profile.

    Attributes
    ----------
    name, version, description : str
        As written in the file.
    sources : tuple of str
        Where the limits come from.
    model, weighting, confidence, zero_standards
        Defaults used unless the command line overrides them (see :attr:`fit_options`;
        for ``mean-rf`` the weighting is its own, ``1/x2``).
    rules : tuple of RuleSpec
        The checks, in the order they are reported.
    text : str
        The file's full text, kept in the record.
    signoff : SignoffPolicy
        Whether the preparer may also review or approve.
    lod_method : LimitMethod
        How the detection and quantitation limits are worked out
        (``ich-sd`` when the profile does not say).
    fit_replicates : str
        ``all`` (every standard enters the regression) or ``first``: one value per
        level, the first injected, enters it, and the other replicates are kept for
        the variance test only (ISO 8466-1: ten standards in the regression, the ten
        replicates of the lowest and highest for the variance test; from memory).
    """

    name: str
    version: str
    description: str
    sources: tuple[str, ...]
    model: Model
    weighting: Weighting
    confidence: float
    zero_standards: str
    rules: tuple[RuleSpec, ...]
    text: str = field(repr=False)
    signoff: SignoffPolicy = field(default_factory=SignoffPolicy)
    lod_method: LimitMethod = LimitMethod.ICH_SD
    narrowing: NarrowingPolicy = field(default_factory=NarrowingPolicy)
    fit_replicates: str = "all"
    #: Per-analyte settings, the ``[[analyte]]`` tables (calib.checks.overrides).
    overrides: tuple[AnalyteOverride, ...] = ()
    #: The review-level diagnostics judged together (Holm), when the profile declares them.
    review_family: ReviewFamily | None = None

    @property
    def fit_options(self) -> FitOptions:
        """The profile's model, weighting and confidence, checked together."""
        return FitOptions(self.model, self.weighting, self.confidence)

    @property
    def sha256(self) -> str:
        """SHA-256 of the profile text (UTF-8)."""
        return hashlib.sha256(self.text.encode("utf-8")).hexdigest()


def shipped_profiles() -> dict[str, str]:
    """Names of the profiles shipped with calib, mapped to their TOML text."""
    folder = resources.files("calib.checks").joinpath("profiles")
    return {
        entry.name.removesuffix(".toml"): entry.read_text(encoding="utf-8")
        for entry in sorted(folder.iterdir(), key=lambda e: e.name)
        if entry.name.endswith(".toml")
    }


def load_profile(profile: str | Path = "default") -> Profile:
    """Read a profile by shipped name or file path.

    Parameters
    ----------
    profile : str or Path
        A shipped profile name (``"default"``) or the path of a TOML file.

    Returns
    -------
    Profile

    Raises
    ------
    ProfileError
        If the file cannot be read or breaks the format.

    Examples
    --------
    >>> p = load_profile("default")
    >>> p.name, [r.id for r in p.rules][:2]
    ('default', ['min-levels', 'intercept-zero'])
    """
    shipped = shipped_profiles()
    if isinstance(profile, str) and profile in shipped:
        return parse_profile(shipped[profile], origin=f"profile {profile}")
    path = Path(profile)
    if not path.is_file():
        raise ProfileError(
            f"profile {str(profile)!r} is neither a shipped profile "
            f"({', '.join(shipped)}) nor a readable file"
        )
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise ProfileError(f"{path}: cannot read the profile ({exc})") from None
    return parse_profile(text, origin=str(path))


def parse_profile(text: str, *, origin: str = "profile") -> Profile:
    """Parse and validate profile TOML text (see :func:`load_profile`)."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ProfileError(f"{origin}: not valid TOML ({exc})") from None

    def fail(key: str, message: str) -> ProfileError:
        return ProfileError(f"{origin}, line {_line_of(text, key)}: {message}")

    for key in data:
        if key not in _TOP_KEYS:
            raise fail(key, f"unknown key {key!r}; expected one of {', '.join(sorted(_TOP_KEYS))}")
    for key in ("name", "version"):
        if not isinstance(data.get(key), str) or not data[key].strip():
            raise ProfileError(f"{origin}: {key!r} must be given as a non-empty text")
    sources = data.get("sources", [])
    if not isinstance(sources, list) or not all(isinstance(s, str) for s in sources):
        raise fail("sources", "'sources' must be a list of texts")

    defaults = data.get("defaults", {})
    for key in defaults:
        if key not in _DEFAULT_KEYS:
            raise fail(key, f"unknown key {key!r} in [defaults]; expected one of "
                            f"{', '.join(sorted(_DEFAULT_KEYS))}")
    try:
        options = _DEFAULT_OPTIONS.given(model=defaults.get("model"),
                                         weighting=defaults.get("weighting"))
    except OptionError as exc:
        text_of = str(exc)
        key = ("weighting" if text_of.startswith("weighting") or
               ("takes no other" in text_of and "weighting" in defaults) else "model")
        raise fail(key, str(exc)) from None
    confidence = defaults.get("confidence", 0.95)
    try:
        options = options.given(confidence=confidence)
    except OptionError as exc:
        raise fail("confidence", str(exc)) from None
    zero = defaults.get("zero_standards", "fit")
    if zero not in _ZERO_CHOICES:
        raise fail("zero_standards", f"zero_standards must be one of {', '.join(_ZERO_CHOICES)}, got {zero!r}")
    fit_replicates = defaults.get("fit_replicates", "all")
    if fit_replicates not in _REPLICATE_CHOICES:
        raise fail("fit_replicates", f"fit_replicates must be one of "
                                     f"{', '.join(_REPLICATE_CHOICES)}, got {fit_replicates!r}")
    lod_method = defaults.get("lod_method", LimitMethod.ICH_SD.value)
    if lod_method not in {m.value for m in LimitMethod}:
        raise fail("lod_method", f"lod_method must be one of "
                                 f"{', '.join(m.value for m in LimitMethod)}, got {lod_method!r}")

    rules_data = data.get("rules", [])
    if not isinstance(rules_data, list) or not rules_data:
        raise ProfileError(f"{origin}: a profile needs at least one [[rules]] entry")
    specs = []
    seen: set[str] = set()
    for index, raw in enumerate(rules_data):
        specs.append(_parse_rule(raw, index, text, origin, seen))
    _check_correlation(specs, text, origin)
    return Profile(
        name=data["name"].strip(),
        version=data["version"].strip(),
        description=str(data.get("description", "")),
        sources=tuple(sources),
        model=options.model,
        weighting=options.weighting,
        confidence=options.confidence,
        zero_standards=zero,
        rules=tuple(specs),
        text=text,
        signoff=_parse_signoff(data.get("signoff", {}), text, origin),
        lod_method=LimitMethod(lod_method),
        narrowing=_parse_narrowing(data.get("narrowing", {}), text, origin),
        fit_replicates=fit_replicates,
        overrides=_parse_overrides(data.get("analyte", []), specs, text, origin, options),
        review_family=_parse_family(data.get("review_family"), text, origin),
    )


def _parse_overrides(entries: Any, specs: list[RuleSpec], text: str, origin: str,
                     options: FitOptions) -> tuple[AnalyteOverride, ...]:
    from calib.checks.overrides import parse_overrides

    starts = [m.start() for m in re.finditer(r"^[ \t]*\[\[[ \t]*analyte[ \t]*\]\]", text,
                                             re.MULTILINE)]

    def where(i: int) -> str:
        line = text.count("\n", 0, starts[i - 1]) + 1 if i <= len(starts) else 1
        return f"{origin}, line {line}"

    parsed = parse_overrides(entries, specs, where=where)
    for entry in parsed:  # each entry's model and weighting must go together over the defaults
        try:
            options.given(model=entry.model, weighting=entry.weighting)
        except OptionError as exc:
            raise ProfileError(f"{where(entry.index)}: {exc}") from None
    return parsed


def _parse_family(table: Any, text: str, origin: str) -> ReviewFamily | None:
    where = f"{origin}, line {_line_of(text, 'review_family')}"
    try:
        family = parse_review_family(table, where)
    except ValueError as exc:
        raise ProfileError(str(exc)) from None
    unknown = [i for i in (family.leave_out if family else ()) if i not in RULES]
    if unknown:
        raise ProfileError(f"{where}: [review_family] leave_out names unknown rule id "
                           f"{unknown[0]!r}; known: {', '.join(RULES)}")
    return family


def _parse_narrowing(table: Any, text: str, origin: str) -> NarrowingPolicy:
    where = f"{origin}, line {_line_of(text, 'narrowing')}"
    if not isinstance(table, dict):
        raise ProfileError(f"{where}: 'narrowing' must be a table")
    for key in table:
        if key not in _NARROWING_KEYS:
            raise ProfileError(f"{where}: unknown key {key!r} in [narrowing]; expected one of "
                               f"{', '.join(_NARROWING_KEYS)}")
    propose = table.get("propose", False)
    if not isinstance(propose, bool):
        raise ProfileError(f"{where}: [narrowing] propose must be true or false, got {propose!r}")
    most = table.get("max_dropped_levels", 1)
    if isinstance(most, bool) or not isinstance(most, int) or not 1 <= most <= 10:
        raise ProfileError(f"{where}: [narrowing] max_dropped_levels must be a whole number "
                           f"from 1 to 10, got {most!r}")
    return NarrowingPolicy(propose=propose, max_dropped_levels=most)


def _check_correlation(specs: list[RuleSpec], text: str, origin: str) -> None:
    """r or r² never decides alone (AMC Technical Brief No. 3; Van Loco et al. 2002)."""
    from calib.checks.rules.acceptance import CORRELATION_COMPANIONS

    index = next((i for i, s in enumerate(specs) if s.id == "correlation"), None)
    if index is None:
        return
    judged = specs[index].severity is not Severity.INFO
    companions = [s for s in specs if s.id in CORRELATION_COMPANIONS
                  and (not judged or s.severity is not Severity.INFO)]
    if companions:
        return
    strength = " with severity reject or review" if judged else ""
    raise ProfileError(
        f"{origin}, line {_rule_line(text, index)}: rule 'correlation' needs a relative-error "
        f"or lack-of-fit rule beside it ({', '.join(CORRELATION_COMPANIONS)}{strength}): r or "
        "r² alone never shows that a curve is linear (AMC Technical Brief No. 3; Van Loco et "
        "al., Accred. Qual. Assur. 2002)")


def signoff_policy(text: str, *, origin: str = "profile") -> SignoffPolicy:
    """The ``[signoff]`` policy of profile TOML text, reading nothing else.

    A record keeps the text of the profile it was judged with; signing reads
    the policy from there, so a profile whose rules a later calib no longer
    knows still says who may sign.

    Raises
    ------
    ProfileError
        If the text is not TOML or the ``[signoff]`` table is malformed.

    Examples
    --------
    >>> policy = signoff_policy('[signoff]\\nallow_preparer_to_review = true\\n')
    >>> policy.allow_preparer_to_review, policy.allow_reviewer_to_approve
    (True, False)
    >>> signoff_policy('name = "x"\\n').allow_preparer_to_approve
    False
    """
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ProfileError(f"{origin}: not valid TOML ({exc})") from None
    return _parse_signoff(data.get("signoff", {}), text, origin)


def _parse_signoff(table: Any, text: str, origin: str) -> SignoffPolicy:
    where = f"{origin}, line {_line_of(text, 'signoff')}"
    if not isinstance(table, dict):
        raise ProfileError(f"{where}: 'signoff' must be a table")
    for key, value in table.items():
        if key not in _SIGNOFF_KEYS:
            raise ProfileError(f"{where}: unknown key {key!r} in [signoff]; expected one of "
                               f"{', '.join(_SIGNOFF_KEYS)}")
        if not isinstance(value, bool):
            raise ProfileError(f"{where}: [signoff] {key} must be true or false, got {value!r}")
    return SignoffPolicy(**table)


def _parse_rule(raw: Any, index: int, text: str, origin: str, seen: set[str]) -> RuleSpec:
    where = f"{origin}, line {_rule_line(text, index)}"
    if not isinstance(raw, dict):
        raise ProfileError(f"{where}: each rule must be a [[rules]] table")
    rule_id = raw.get("id")
    if rule_id not in RULES:
        raise ProfileError(f"{where}: unknown rule id {rule_id!r}; known: {', '.join(RULES)}")
    if rule_id in seen:
        raise ProfileError(f"{where}: rule {rule_id!r} is given twice")
    seen.add(rule_id)
    try:
        severity = Severity(raw.get("severity", ""))
    except ValueError:
        raise ProfileError(
            f"{where}: rule {rule_id!r} needs severity reject, review or info; "
            f"got {raw.get('severity')!r}") from None
    rule = RULES[rule_id]
    source = raw.get("source", "")
    if not isinstance(source, str):
        raise ProfileError(f"{where}: rule {rule_id!r} 'source' must be a text")
    params: dict[str, Any] = {}
    for key, value in raw.items():
        if key in ("id", "severity", "source", "note"):
            continue
        if key not in rule.params:
            known = ", ".join(rule.params) or "none"
            raise ProfileError(f"{where}: rule {rule_id!r} has no parameter {key!r} (known: {known})")
        problem = rule.params[key].check(value)
        if problem:
            raise ProfileError(f"{where}: rule {rule_id!r} parameter {key!r} {problem}")
        params[key] = float(value) if rule.params[key].kind is float else value
    problem = rule.validate(params) if rule.validate is not None else None
    if problem:
        raise ProfileError(f"{where}: rule {rule_id!r}: {problem}")
    for key, param in rule.params.items():
        if param.default is not None:  # optional parameters stay absent unless given
            params.setdefault(key, param.default)
    return RuleSpec(id=rule_id, severity=severity, params=params, source=source)


def _line_of(text: str, key: str) -> int:
    """1-based line where ``key`` is first assigned (or its table opens); 1 if not found."""
    pattern = re.compile(rf"^[ \t]*(\[+[ \t]*{re.escape(key)}\s*\]+|{re.escape(key)}\s*=)", re.MULTILINE)
    match = pattern.search(text)
    return text.count("\n", 0, match.start()) + 1 if match else 1


def _rule_line(text: str, index: int) -> int:
    """1-based line of the ``index``-th ``[[rules]]`` header."""
    starts = [m.start() for m in re.finditer(r"^[ \t]*\[\[[ \t]*rules[ \t]*\]\]", text, re.MULTILINE)]
    return text.count("\n", 0, starts[index]) + 1 if index < len(starts) else 1

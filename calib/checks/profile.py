"""Acceptance profiles: a laboratory's written rules as a TOML file.

A profile has ``name``, ``version``, ``description``, ``sources``, a
``[defaults]`` table (model, weighting, confidence, zero_standards) and a list
of ``[[rules]]``, each with an ``id`` from :data:`calib.checks.rules.RULES`, a
``severity`` and the rule's parameters.  Anything unknown or out of range is a
:class:`~calib.errors.ProfileError` naming the file and line.
"""

from __future__ import annotations

import hashlib
import re
import tomllib
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from typing import Any

from calib.checks.result import Severity
from calib.checks.rules import RULES
from calib.errors import ProfileError
from calib.options import Model, Weighting

__all__ = ["Profile", "RuleSpec", "load_profile", "shipped_profiles"]

_TOP_KEYS = {"name", "version", "description", "sources", "defaults", "rules"}
_DEFAULT_KEYS = {"model", "weighting", "confidence", "zero_standards"}
_ZERO_CHOICES = ("fit", "exclude")


@dataclass(frozen=True)
class RuleSpec:
    """One rule of a profile: check id, severity and parameters (defaults filled in)."""

    id: str
    severity: Severity
    params: dict[str, Any]


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
        Defaults used unless the command line overrides them.
    rules : tuple of RuleSpec
        The checks, in the order they are reported.
    text : str
        The file's full text, kept in the record.
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
        model = Model(defaults.get("model", "linear"))
        weighting = Weighting(defaults.get("weighting", "none"))
    except ValueError as exc:
        raise fail("model" if "model" in str(exc).lower() else "weighting", str(exc)) from None
    confidence = defaults.get("confidence", 0.95)
    if isinstance(confidence, bool) or not isinstance(confidence, (int, float)) or not 0.5 <= confidence < 1:
        raise fail("confidence", f"confidence must be a number from 0.5 to below 1, got {confidence!r}")
    zero = defaults.get("zero_standards", "fit")
    if zero not in _ZERO_CHOICES:
        raise fail("zero_standards", f"zero_standards must be one of {', '.join(_ZERO_CHOICES)}, got {zero!r}")

    rules_data = data.get("rules", [])
    if not isinstance(rules_data, list) or not rules_data:
        raise ProfileError(f"{origin}: a profile needs at least one [[rules]] entry")
    specs = []
    seen: set[str] = set()
    for index, raw in enumerate(rules_data):
        specs.append(_parse_rule(raw, index, text, origin, seen))
    return Profile(
        name=data["name"].strip(),
        version=data["version"].strip(),
        description=str(data.get("description", "")),
        sources=tuple(sources),
        model=model,
        weighting=weighting,
        confidence=float(confidence),
        zero_standards=zero,
        rules=tuple(specs),
        text=text,
    )


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
    for key, param in rule.params.items():
        params.setdefault(key, param.default)
    return RuleSpec(id=rule_id, severity=severity, params=params)


def _line_of(text: str, key: str) -> int:
    """1-based line where ``key`` is first assigned (or its table opens); 1 if not found."""
    pattern = re.compile(rf"^[ \t]*(\[+[ \t]*{re.escape(key)}\s*\]+|{re.escape(key)}\s*=)", re.MULTILINE)
    match = pattern.search(text)
    return text.count("\n", 0, match.start()) + 1 if match else 1


def _rule_line(text: str, index: int) -> int:
    """1-based line of the ``index``-th ``[[rules]]`` header."""
    starts = [m.start() for m in re.finditer(r"^[ \t]*\[\[[ \t]*rules[ \t]*\]\]", text, re.MULTILINE)]
    return text.count("\n", 0, starts[index]) + 1 if index < len(starts) else 1

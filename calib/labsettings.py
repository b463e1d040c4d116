"""The lab's one-time settings: which report template carries its letterhead.

An analyst should not have to name the lab's template on every command, and a
record must never carry another lab's letterhead by accident.  ``calib lab init
--template FILE`` writes a small TOML file naming the template and the SHA-256
of its bytes at the time it was set up::

    # calib lab settings
    [lab]
    template = "/srv/lab/our-lab.toml"
    template_sha256 = "3b1f…"

The file lives in the user's configuration folder (``$XDG_CONFIG_HOME/calib/
config.toml``, by default ``~/.config/calib/config.toml``), or wherever the
``CALIB_CONFIG`` environment variable points.  When the template file changes
after set-up, it is refused until ``calib lab init`` is run again: a record's
letterhead changes only by a deliberate step a reviewer can see.
"""

from __future__ import annotations

import hashlib
import json
import os
import tomllib
from dataclasses import dataclass
from pathlib import Path

from calib.errors import ConfigError, TemplateError

__all__ = ["LabSettings", "config_path", "read_settings", "write_settings"]

_CONFIG_ENV = "CALIB_CONFIG"
"""Environment variable naming the settings file (tests and shared installations use it)."""
_MAX_BYTES = 64 * 1024  # a settings file is a few lines; anything larger is not ours


@dataclass(frozen=True)
class LabSettings:
    """What ``calib lab init`` wrote.

    Attributes
    ----------
    template : Path
        The lab's report template (absolute path).
    template_sha256 : str
        SHA-256 (hex) of the template file when it was set up.
    source : Path
        The settings file these were read from.
    """

    template: Path
    template_sha256: str
    source: Path


def config_path() -> Path:
    """The settings file: ``$CALIB_CONFIG``, else ``$XDG_CONFIG_HOME/calib/config.toml``.

    Examples
    --------
    >>> import os
    >>> old = os.environ.get("CALIB_CONFIG")
    >>> os.environ["CALIB_CONFIG"] = "lab-settings.toml"
    >>> config_path().name
    'lab-settings.toml'
    >>> _ = os.environ.pop("CALIB_CONFIG") if old is None else os.environ.update(CALIB_CONFIG=old)
    """
    named = os.environ.get(_CONFIG_ENV)
    if named:
        return Path(named)
    base = os.environ.get("XDG_CONFIG_HOME") or os.path.join(os.path.expanduser("~"), ".config")
    return Path(base) / "calib" / "config.toml"


def _file_sha256(path: str | Path) -> str:
    """SHA-256 (hex) of a file's bytes; a TemplateError naming the file when it cannot be read."""
    try:
        return hashlib.sha256(Path(path).read_bytes()).hexdigest()
    except FileNotFoundError:
        raise TemplateError(f"template {path}: file not found") from None
    except OSError as exc:
        raise TemplateError(f"template {path}: cannot be read ({exc.strerror})") from None


def read_settings(path: str | Path | None = None) -> LabSettings | None:
    """The lab settings, or None when none were set up.

    Raises
    ------
    ConfigError
        When the file exists but is not a settings file calib wrote (names file and key).
    """
    source = Path(path) if path is not None else config_path()
    try:
        if source.stat().st_size > _MAX_BYTES:
            raise ConfigError(f"lab settings {source}: larger than {_MAX_BYTES // 1024} kB; "
                              "not a calib settings file")
        text = source.read_text(encoding="utf-8")
    except FileNotFoundError:
        return None
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"lab settings {source}: cannot be read ({exc})") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"lab settings {source}: not valid TOML ({exc})") from None
    lab = data.get("lab")
    if not isinstance(lab, dict):
        raise ConfigError(f"lab settings {source}: no [lab] table; run calib lab init again")
    template, digest = lab.get("template"), lab.get("template_sha256")
    if not isinstance(template, str) or not template:
        raise ConfigError(f"lab settings {source}: key 'lab.template' must be a file path")
    if not (isinstance(digest, str) and len(digest) == 64
            and all(c in "0123456789abcdef" for c in digest)):
        raise ConfigError(f"lab settings {source}: key 'lab.template_sha256' must be 64 "
                          "lower-case hex digits; run calib lab init again")
    return LabSettings(Path(template), digest, source)


def write_settings(template: str | Path, sha256: str, *,
                   path: str | Path | None = None) -> LabSettings:
    """Record ``template`` (made absolute) and its ``sha256`` as the lab's template.

    The settings file is replaced atomically.  The template is checked by the
    caller first (:func:`calib.report.template.set_lab_template` loads it), so
    a broken one is refused before anything is written.
    """
    from calib.output import write_atomic

    resolved = Path(template).resolve()
    target = Path(path) if path is not None else config_path()
    text = ("# calib lab settings, written by `calib lab init`; run it again to change them.\n"
            "[lab]\n"
            f"template = {_toml_string(str(resolved))}\n"
            f"template_sha256 = {_toml_string(sha256)}\n")
    write_atomic(target, text.encode("utf-8"), private=True)
    return LabSettings(resolved, sha256, target)


def _toml_string(text: str) -> str:
    r"""A TOML basic string (JSON's escapes are valid TOML escapes).

    Examples
    --------
    >>> _toml_string('C:\\labs\\"ours".toml')
    '"C:\\\\labs\\\\\\"ours\\".toml"'
    """
    return json.dumps(text, ensure_ascii=False)

"""Report templates: the lab details, page size and wording a PDF record is laid out with.

A template is a small TOML file.  The bundled ``default.toml`` (folder
``report_templates/``) holds every key; a lab's own template needs only a
``[lab]`` table with a ``name`` and whatever it wants to change, the rest is
taken from the bundled file::

    [lab]
    name = "Fernbrook Water Laboratory"
    address = ["4 Weir Cottages, Millrace Lane", "Fernbrook FB3 9QD"]
    method = "Inorganic chemistry · ion chromatography"
    accreditation = "Testing laboratory accredited to ISO/IEC 17025:2017 (fictional)."
    logo = "fernbrook-logo.png"   # optional; PNG or JPEG inside the template's folder

    [page]
    size = "A4"            # or "Letter"

    [show]                 # optional sections, true or false
    summary = true
    ...

    [titles]  [verdicts]  [meanings]  [cautions]   # wording

The cautions and the sign-off block cannot be switched off: every record
shows them (SPEC §12 and §6).

The logo path is read relative to the template file's folder and must stay
inside it (no absolute paths, no ``..`` or symbolic link leading out): a
template handed around between labs must not make calib read, and print,
some other file of the machine.  The image is read when the template is
loaded and kept as bytes, so every rendering uses the same picture.
"""

from __future__ import annotations

import base64
import binascii
import dataclasses
import functools
import hashlib
import io
import json
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from calib import resources
from calib.errors import TemplateError

if TYPE_CHECKING:
    from calib.labsettings import LabSettings

__all__ = [
    "LabDetails",
    "Meanings",
    "ReportTemplate",
    "Sections",
    "Titles",
    "Verdicts",
    "bundled_folder",
    "demo_template",
    "load_template",
    "resolve_template",
    "set_lab_template",
    "template_for_record",
    "template_section",
]

NOT_CONFIGURED = "Laboratory not configured"
"""The lab name of the bundled template: what a record says until ``calib lab init`` is run."""
_DEMO_TEMPLATE = "fernbrook-demo.toml"
"""The bundled letterhead of the fictional demo lab (``calib demo`` only)."""

PAGE_SIZES = ("A4", "Letter")
_LOGO_MAX_BYTES = 2_000_000
_IMAGE_MAGIC = (b"\x89PNG\r\n\x1a\n", b"\xff\xd8\xff")


@dataclass(frozen=True)
class LabDetails:
    """Who issues the record: printed at the top of every analyte section."""

    name: str
    address: tuple[str, ...] = ()
    method: str = ""
    accreditation: str = ""
    logo: str = ""


@dataclass(frozen=True)
class Sections:
    """Which optional sections the record shows."""

    summary: bool = True
    run: bool = True
    fit: bool = True
    checks: bool = True
    standards: bool = True
    calibration_plot: bool = True
    residual_plot: bool = True


@dataclass(frozen=True)
class Titles:
    """Headings of the document and its sections."""

    document: str
    summary: str
    run: str
    fit: str
    checks: str
    standards: str
    plots: str
    cautions: str
    signoff: str


@dataclass(frozen=True)
class Verdicts:
    """The verdict of a curve or run in words."""

    accepted: str
    rejected: str
    needs_review: str

    def word(self, verdict: str | None) -> str:
        """The words for a ``calib.check/1`` verdict (``accepted``, ``needs-review``...).

        Examples
        --------
        >>> Verdicts("Accepted", "Rejected", "Needs review").word("needs-review")
        'Needs review'
        """
        key = (verdict or "").replace("-", "_")
        return str(getattr(self, key, verdict or "—"))


@dataclass(frozen=True)
class Meanings:
    """What a signature in each sign-off role means (21 CFR 11.50 asks for it)."""

    prepared: str
    reviewed: str
    approved: str
    rejected: str = "Rejected: this calibration must not be used to report results"


@dataclass(frozen=True)
class ReportTemplate:
    """Everything about a PDF record that is not the record itself.

    Build one with :func:`load_template`.

    Attributes
    ----------
    lab : LabDetails
        Lab name, address lines, method or department line, accreditation statement,
        logo path (as written in the template).
    page_size : str
        ``"A4"`` or ``"Letter"``.
    show : Sections
        Optional sections switched on or off.
    titles, verdicts, meanings : Titles, Verdicts, Meanings
        Wording.
    cautions : str
        The cautions printed in every analyte section (paragraphs split on blank
        lines); when empty, the record's own ``cautions`` text is printed instead.
    source : str
        Where the template was read from (for messages).
    logo : bytes or None
        The logo image (PNG or JPEG) named by ``lab.logo``, read when the
        template was loaded.
    """

    lab: LabDetails
    page_size: str
    show: Sections
    titles: Titles
    verdicts: Verdicts
    meanings: Meanings
    cautions: str
    source: str = "default.toml"
    logo: bytes | None = dataclasses.field(default=None, repr=False)
    sha256: str = ""
    """SHA-256 (hex) of the template file's bytes (what ``sha256sum`` prints); empty for a
    template rebuilt from a record."""

    @property
    def fingerprint(self) -> str:
        """SHA-256 (hex) of everything that shapes the pages: wording, layout and logo.

        Two templates with the same fingerprint render a record to the same
        bytes; the PDF names it so that verification can tell a record laid
        out with another template from an altered one.

        Examples
        --------
        >>> load_template().fingerprint == load_template().fingerprint
        True
        """
        parts = dataclasses.asdict(self)
        parts.pop("source")
        parts.pop("sha256")
        parts["logo"] = hashlib.sha256(self.logo).hexdigest() if self.logo else None
        text = json.dumps(parts, sort_keys=True, ensure_ascii=False, separators=(",", ":"))
        return hashlib.sha256(text.encode("utf-8")).hexdigest()


def bundled_folder() -> Path:
    """The folder of the bundled templates and fonts.

    The installed package ``calib.report_templates`` when there is one, else
    ``report_templates/`` beside the ``calib/`` folder of a source checkout.

    Examples
    --------
    >>> (bundled_folder() / "default.toml").is_file()
    True
    """
    return resources.bundled_folder("report_templates")


def load_template(path: str | Path | None = None) -> ReportTemplate:
    """Read a report template; the bundled ``default.toml`` when ``path`` is None.

    Parameters
    ----------
    path : str or Path, optional
        A TOML template.  Keys it leaves out are taken from the bundled
        template, except the ``[lab]`` table, which is the lab's own.

    Returns
    -------
    ReportTemplate

    Raises
    ------
    TemplateError
        When the file cannot be read, is not TOML, has an unknown key or a
        value of the wrong kind; the message names the file and the key.

    Examples
    --------
    >>> template = load_template()
    >>> template.lab.name, template.page_size
    ('Laboratory not configured', 'A4')
    >>> template.verdicts.word("rejected")
    'Rejected'
    """
    if path is None:
        return _bundled()
    path = Path(path)
    text, digest = _read_file(path)
    loaded = _from_table(_parse_toml(text, path), source=path.name, base=_bundled(),
                         folder=path.parent)
    return dataclasses.replace(loaded, sha256=digest)


@functools.cache
def _bundled() -> ReportTemplate:
    path = bundled_folder() / "default.toml"
    text, digest = _read_file(path)
    loaded = _from_table(_parse_toml(text, path), source=path.name, base=None,
                         folder=path.parent)
    return dataclasses.replace(loaded, sha256=digest)


def demo_template() -> ReportTemplate:
    """The bundled letterhead of the fictional Fernbrook Water Laboratory, for ``calib demo``.

    Records issued before templates were named in the record were laid out
    with this letterhead (it was then the bundled default).

    Examples
    --------
    >>> demo_template().lab.name
    'Fernbrook Water Laboratory'
    """
    return load_template(bundled_folder() / _DEMO_TEMPLATE)


def resolve_template(template: str | Path | ReportTemplate | None = None) -> ReportTemplate:
    """The template a new record is laid out with.

    ``template`` when given (a path or a loaded template); else the lab's
    template set up with ``calib lab init`` (:mod:`calib.labsettings`); else
    the bundled one, whose letterhead says "Laboratory not configured".

    Raises
    ------
    TemplateError
        When the template cannot be used, or the lab's template file changed
        since ``calib lab init`` (its SHA-256 differs).
    ConfigError
        When the lab settings file is damaged.
    """
    if isinstance(template, ReportTemplate):
        return template
    if template is not None:
        return load_template(template)
    from calib.labsettings import read_settings

    settings = read_settings()
    if settings is None:
        return load_template()
    loaded = load_template(settings.template)
    if loaded.sha256 != settings.template_sha256:
        raise TemplateError(
            f"template {settings.template}: the lab's template changed since it was set up "
            f"(SHA-256 {loaded.sha256[:16]}…, set up as {settings.template_sha256[:16]}…); "
            "check the change, then run calib lab init --template "
            f"{settings.template} again")
    return loaded


def set_lab_template(template: str | Path, *, path: str | Path | None = None) -> LabSettings:
    """Check ``template`` and record it (absolute path and SHA-256) as the lab's template.

    The template is loaded first, so a broken one is refused before anything is
    written (:func:`calib.labsettings.write_settings` writes the settings file).

    Raises
    ------
    TemplateError
        When the template cannot be used.
    """
    from calib.labsettings import write_settings

    resolved = Path(template).resolve()
    return write_settings(resolved, load_template(resolved).sha256, path=path)


def _read_file(path: Path) -> tuple[str, str]:
    """The template's text and the SHA-256 of its bytes."""
    try:
        data = path.read_bytes()
        text = data.decode("utf-8")
    except FileNotFoundError:
        raise TemplateError(f"template {path.name}: file not found") from None
    except IsADirectoryError:
        raise TemplateError(f"template {path.name}: is a folder, not a TOML file") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise TemplateError(f"template {path.name}: cannot be read ({exc})") from None
    return text, hashlib.sha256(data).hexdigest()


def _parse_toml(text: str, path: Path) -> dict[str, Any]:
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise TemplateError(f"template {path.name}: not valid TOML ({exc})") from None


# Top-level tables and the dataclass each one fills.
_TABLES: dict[str, type] = {
    "lab": LabDetails,
    "show": Sections,
    "titles": Titles,
    "verdicts": Verdicts,
    "meanings": Meanings,
}


def _from_table(
    data: dict[str, Any], *, source: str, base: ReportTemplate | None, folder: Path
) -> ReportTemplate:
    known = set(_TABLES) | {"page", "cautions"}
    for key, value in data.items():
        if key not in known:
            raise TemplateError(f"template {source}: unknown key '{key}'")
        if not isinstance(value, dict):
            raise TemplateError(f"template {source}: key '{key}' must be a table")

    parts: dict[str, Any] = {}
    for key, cls in _TABLES.items():
        table = data.get(key)
        if cls is LabDetails or base is None:
            # The lab is never inherited: a lab's template must not print our demo lab.
            start = None
        else:
            start = getattr(base, key)
        if table is None and start is not None:
            parts[key] = start
            continue
        parts[key] = _fill(cls, table or {}, start, where=key, source=source)

    page = _plain_table(data.get("page", {}), {"size": str}, where="page", source=source)
    size = page.get("size", base.page_size if base else None)
    if size is None:
        raise TemplateError(f"template {source}: missing key 'page.size'")
    if size not in PAGE_SIZES:
        raise TemplateError(
            f"template {source}: key 'page.size' must be one of {', '.join(PAGE_SIZES)}; "
            f"got {size!r}"
        )

    cautions = _plain_table(
        data.get("cautions", {}), {"text": str}, where="cautions", source=source
    )
    text = cautions.get("text", base.cautions if base else None)
    if text is None:
        raise TemplateError(f"template {source}: missing key 'cautions.text'")

    logo = _read_logo(parts["lab"].logo, folder, source) if parts["lab"].logo else None
    return ReportTemplate(page_size=size, cautions=text.strip(), source=source, logo=logo,
                          **parts)


def _read_logo(relative: str, folder: Path, source: str) -> bytes:
    """The logo file's bytes, refusing any path that leads out of the template's folder."""
    where = f"template {source}: key 'lab.logo'"
    candidate = Path(relative)
    if candidate.is_absolute() or candidate.drive or not relative.strip():
        raise TemplateError(f"{where} must be a file name inside the template's folder; "
                            f"got {relative!r}")
    root = folder.resolve()
    # resolve() follows symbolic links, so a link inside the folder to a file outside is caught.
    target = (root / candidate).resolve()
    if not target.is_relative_to(root):
        raise TemplateError(f"{where} points outside the template's folder: {relative!r}")
    try:
        size = target.stat().st_size
        if size > _LOGO_MAX_BYTES:
            raise TemplateError(f"{where}: the logo {relative!r} is larger than "
                                f"{_LOGO_MAX_BYTES // 1_000_000} MB")
        data = target.read_bytes()
    except FileNotFoundError:
        raise TemplateError(f"{where}: logo file {relative!r} not found") from None
    except OSError as exc:
        raise TemplateError(f"{where}: logo file {relative!r} cannot be read "
                            f"({exc.strerror})") from None
    if not data.startswith(_IMAGE_MAGIC):
        raise TemplateError(f"{where}: logo file {relative!r} is not a PNG or JPEG image")
    from reportlab.lib.utils import ImageReader

    try:
        ImageReader(io.BytesIO(data)).getSize()
    except Exception:  # noqa: BLE001 - reportlab and Pillow raise many kinds on a bad image
        raise TemplateError(f"{where}: logo file {relative!r} is a damaged image") from None
    return data


def _plain_table(
    table: dict[str, Any], kinds: dict[str, type], *, where: str, source: str
) -> dict[str, Any]:
    for key, value in table.items():
        if key not in kinds:
            raise TemplateError(f"template {source}: unknown key '{where}.{key}'")
        _check_kind(value, kinds[key], key=f"{where}.{key}", source=source)
    return table


def _fill(cls: type, table: dict[str, Any], start: Any, *, where: str, source: str) -> Any:
    fields = {f.name: f for f in dataclasses.fields(cls)}
    for key, value in table.items():
        if key not in fields:
            raise TemplateError(f"template {source}: unknown key '{where}.{key}'")
        _check_kind(value, _kind(fields[key]), key=f"{where}.{key}", source=source)
    values = {k: tuple(v) if isinstance(v, list) else v for k, v in table.items()}
    if start is not None:
        return dataclasses.replace(start, **values)
    for name, field in fields.items():
        required = (
            field.default is dataclasses.MISSING and field.default_factory is dataclasses.MISSING
        )
        if required and name not in values:
            raise TemplateError(f"template {source}: missing key '{where}.{name}'")
    return cls(**values)


def _kind(field: dataclasses.Field[Any]) -> type:
    annotation = str(field.type)
    if annotation.startswith("tuple"):
        return tuple
    return {"bool": bool, "str": str}[annotation]


_KIND_WORDS = {str: "a string", bool: "true or false", tuple: "a list of strings"}


def _check_kind(value: Any, kind: type, *, key: str, source: str) -> None:
    if kind is tuple:
        ok = isinstance(value, list) and all(isinstance(v, str) for v in value)
    else:
        ok = isinstance(value, kind)
    if not ok:
        raise TemplateError(
            f"template {source}: key '{key}' must be {_KIND_WORDS[kind]}; got {value!r}"
        )


# ---------------------------------------------------------------- the template inside a record

def template_section(template: ReportTemplate) -> dict[str, Any]:
    """What a record states about the template it was issued with (its ``template`` key).

    The file name and the SHA-256 of the file's bytes say *which* template (an
    auditor can compare them with ``sha256sum``); ``layout`` and ``logo`` carry
    everything that shapes the pages, so that signing and verifying find the
    template in the record itself, years later, without the file; the
    ``fingerprint`` (:attr:`ReportTemplate.fingerprint`) ties the two.

    Examples
    --------
    >>> section = template_section(load_template())
    >>> section["name"], section["laboratory"], len(section["sha256"])
    ('default.toml', 'not configured', 64)
    """
    layout = dataclasses.asdict(template)
    for key in ("source", "sha256", "logo"):
        layout.pop(key)
    if template.lab.name == NOT_CONFIGURED:
        laboratory = "not configured"
    elif template.source == _DEMO_TEMPLATE and template.sha256 == demo_template().sha256:
        laboratory = "demonstration"
    else:
        laboratory = "configured"
    return {
        "name": template.source,
        "sha256": template.sha256,
        "fingerprint": template.fingerprint,
        "laboratory": laboratory,
        "layout": layout,
        "logo": base64.b64encode(template.logo).decode("ascii") if template.logo else None,
    }


def template_for_record(record: bytes | str | dict[str, Any]) -> ReportTemplate:
    """The template a record was issued with, rebuilt from the record itself.

    Parameters
    ----------
    record : bytes, str or dict
        The record JSON (as bytes or text) or its parsed body.

    Returns
    -------
    ReportTemplate
        Rebuilt from the record's ``template`` section; for a record issued
        before records named their template, the demo letterhead that was
        then the bundled default.

    Raises
    ------
    TemplateError
        When the ``template`` section is malformed or does not match its own
        fingerprint.

    Examples
    --------
    >>> body = {"template": template_section(demo_template())}
    >>> template_for_record(body).fingerprint == demo_template().fingerprint
    True
    >>> template_for_record({}).lab.name
    'Fernbrook Water Laboratory'
    """
    body = json.loads(record) if isinstance(record, (bytes, str)) else record
    section = body.get("template") if isinstance(body, dict) else None
    if section is None:
        return demo_template()
    where = "the record's template section"
    try:
        layout = dict(section["layout"])
        lab = LabDetails(**{k: tuple(v) if isinstance(v, list) else v
                            for k, v in layout.pop("lab").items()})
        parts = {key: cls(**layout.pop(key)) for key, cls in _TABLES.items() if key != "lab"}
        logo = base64.b64decode(section["logo"], validate=True) if section.get("logo") else None
        rebuilt = ReportTemplate(lab=lab, page_size=layout.pop("page_size"),
                                 cautions=layout.pop("cautions"), source=str(section["name"]),
                                 logo=logo, sha256=str(section["sha256"]), **parts)
    except (KeyError, TypeError, AttributeError, ValueError, binascii.Error) as exc:
        raise TemplateError(f"{where} is malformed ({type(exc).__name__}: {exc})") from None
    if layout:
        raise TemplateError(f"{where} has unknown keys: {', '.join(sorted(layout))}")
    if rebuilt.fingerprint != section.get("fingerprint"):
        raise TemplateError(f"{where} does not match its fingerprint: the template named "
                            f"{section.get('name')!r} was altered")
    return rebuilt

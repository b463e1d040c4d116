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

import dataclasses
import functools
import hashlib
import io
import json
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from calib import resources
from calib.errors import TemplateError

__all__ = [
    "LabDetails",
    "Meanings",
    "ReportTemplate",
    "Sections",
    "Titles",
    "Verdicts",
    "bundled_folder",
    "load_template",
]

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
    ('Fernbrook Water Laboratory', 'A4')
    >>> template.verdicts.word("rejected")
    'Rejected'
    """
    if path is None:
        return _bundled()
    path = Path(path)
    return _from_table(_read_toml(path), source=path.name, base=_bundled(), folder=path.parent)


@functools.cache
def _bundled() -> ReportTemplate:
    path = bundled_folder() / "default.toml"
    return _from_table(_read_toml(path), source=path.name, base=None, folder=path.parent)


def _read_toml(path: Path) -> dict[str, Any]:
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise TemplateError(f"template {path.name}: file not found") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise TemplateError(f"template {path.name}: cannot be read ({exc})") from None
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

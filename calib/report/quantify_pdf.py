"""The batch report: quantified samples, their intervals, flags and QCs, as PDF.

Same fonts, table style and page furniture as the calibration record; the
footer names the curve the samples were read against and the digest of the
batch's ``calib.quantify/1`` document, which is attached inside the PDF as
``calib-quantify.json``.  A sign-off block leaves room for the reviewer's
hand signature.  The output depends on its arguments only (reportlab's
invariant mode).
"""

from __future__ import annotations

import functools
import hashlib
import io
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any
from xml.sax.saxutils import escape

from reportlab.pdfgen.canvas import Canvas
from reportlab.platypus import (
    BaseDocTemplate,
    CondPageBreak,
    Flowable,
    Frame,
    KeepTogether,
    PageTemplate,
    Paragraph,
    Spacer,
    Table,
)

from calib.record.record import canonical_json
from calib.report.embed import embed_file
from calib.report.formatting import (
    MISSING,
    format_compact,
    format_number,
    format_percent,
    format_utc,
)
from calib.report.grid import FONT_SIZE, PAD_X
from calib.report.pages import PAGE_SIZES, Furniture, RecordCanvas, SectionMark, page_margins
from calib.report.styles import BOLD, INK, REGULAR, SHADE, Styles, get_styles, register_fonts
from calib.report.tables import TableMaker
from calib.report.template import ReportTemplate, load_template
from calib.report.text import measure
from calib.report.wording import lod_remark
from calib.verdict_words import VERDICT_LABELS, VERDICT_WORDS

__all__ = ["QUANTIFY_ATTACHMENT", "write_quantify_pdf"]

#: Name of the batch JSON attached inside the PDF.
QUANTIFY_ATTACHMENT = "calib-quantify.json"

_TITLE = "Sample results"
_VERDICTS = VERDICT_LABELS
_FLAGS = (
    ("above-uloq", "above the highest standard: not reported as a number; dilute and re-run"),
    ("outside-range", "outside the calibrated range: no concentration is given (no extrapolation)"),
    ("below-lloq", "below the lower limit of quantitation (the lowest standard in the fit)"),
    ("below-lod", "below the curve's limit of detection"),
    ("no-reading", "no usable reading (every injection set aside)"),
    ("curve-rejected", "the curve was rejected: the sample was not quantified"),
    ("forced", "quantified against a rejected curve because the analyst asked (--force)"),
    ("curve-needs-review", "read from a curve whose verdict is needs review: the result stands "
                           "only once a qualified person has reviewed and accepted the curve"),
)
_SIGNOFF = (
    ("Quantified by", "I quantified these samples and issued this report"),
    ("Reviewed", "I checked the results, intervals, flags and QCs in this report"),
    ("Approved", "These results may be reported"),
)


@dataclass(frozen=True)
class _BatchFurniture(Furniture):
    """Header and footer of a batch report; ``curve`` names what the samples were read against."""

    curve: str = ""

    def footer_text(self, page: int, pages: int) -> str:
        """The footer line.

        Examples
        --------
        >>> _BatchFurniture("Lab", "Sample results", "", "ab" * 32, "record CR-1").footer_text(1, 2)
        'Sample results · record CR-1 · digest abababababababab · page 1 of 2'
        """
        return (f"{self.document_title} · {self.curve} · digest {self.digest[:16]} · "
                f"page {page} of {pages}")


def _num(value: Any, digits: int = 4) -> str:
    return format_number(value, digits)


class _AnalyteMark(SectionMark):
    """Names the analytes on a page for its running header.

    The header names the analyte continuing from the previous page and every
    analyte that starts on the page; an analyte starting at the top of a page
    replaces the one before.  ``top`` is the top of the text frame: a mark
    drawn there opens the page.  An empty name (the summary) names none.
    """

    def __init__(self, name: str, top: float) -> None:
        super().__init__(name)
        self.top = top
        self._opens_page = False

    def drawOn(self, canvas: Canvas, x: float, y: float, _sW: float = 0) -> None:
        self._opens_page = y >= self.top - 0.5
        super().drawOn(canvas, x, y, _sW)

    def draw(self) -> None:
        canv = self.canv
        page = canv.getPageNumber()
        held = getattr(canv, "_batch_names", None)
        last = getattr(canv, "_batch_last", "")
        if held is None or held[0] != page:
            held = (page, [] if self._opens_page or not last else [last])
        names = held[1]
        if self._opens_page:
            names.clear()
        if self.name and self.name not in names:
            names.append(self.name)
        canv._batch_names = held
        canv._batch_last = self.name
        canv._calib_section = ", ".join(names) or None


class _BatchCanvas(RecordCanvas):
    """The record canvas; a new page's header starts with the analyte continuing onto it."""

    def showPage(self) -> None:
        super().showPage()
        self._calib_section = getattr(self, "_batch_last", "") or None


def _fit_columns(rows: Sequence[Sequence[str]], fractions: Sequence[float], whole: set[int],
                 width: float) -> list[float]:
    """Column fractions widened so that no word of a ``whole`` column is ever broken.

    A number broken across two lines ("0.0099" / "3") misreads; the room comes
    from the other columns, in proportion to their width.
    """
    out = list(fractions)
    need = [0.0] * len(out)
    for r, row in enumerate(rows):
        face = BOLD if r == 0 else REGULAR
        for c in whole:
            for word in row[c].split():
                need[c] = max(need[c], (measure(word, face, FONT_SIZE) + 2 * PAD_X + 1) / width)
    extra = sum(max(0.0, need[c] - out[c]) for c in whole)
    flexible = [c for c in range(len(out)) if c not in whole]
    room = sum(out[c] for c in flexible)
    if extra <= 0 or room <= extra:
        return out
    for c in whole:
        out[c] = max(out[c], need[c])
    for c in flexible:
        out[c] -= extra * out[c] / room
    return out


class _Story:
    def __init__(self, doc: Mapping[str, Any], template: ReportTemplate, width: float,
                 digest: str, top: float = 0.0) -> None:
        self.doc = doc
        self.t = template
        self.width = width
        self.top = top
        self.digest = digest
        self.s: Styles = get_styles()
        self.tables = TableMaker(width)

    def para(self, text: str, style: Any = None) -> Paragraph:
        # Sample names and notes come from spreadsheets: never read them as markup.
        return Paragraph(escape(text), style or self.s.body)

    def heading(self, text: str) -> list[Flowable]:
        return [CondPageBreak(80), self.para(text, self.s.heading)]

    def boxed(self, bold: str, rest: str) -> Table:
        table = Table([[Paragraph(f"<b>{escape(bold)}</b> {escape(rest)}", self.s.verdict)]],
                      colWidths=[self.width])
        table.setStyle([("BOX", (0, 0), (-1, -1), 0.8, INK),
                        ("BACKGROUND", (0, 0), (-1, -1), SHADE),
                        ("LEFTPADDING", (0, 0), (-1, -1), 6), ("RIGHTPADDING", (0, 0), (-1, -1), 6),
                        ("TOPPADDING", (0, 0), (-1, -1), 4),
                        ("BOTTOMPADDING", (0, 0), (-1, -1), 5)])
        return table

    def lab(self) -> list[Flowable]:
        lab = self.t.lab
        lines = [" · ".join(lab.address), lab.method, lab.accreditation]
        return [self.para(lab.name, self.s.lab),
                *(self.para(line, self.s.lab_line) for line in lines if line)]

    def summary(self) -> list[Flowable]:
        doc = self.doc
        samples = doc.get("samples", [])
        analytes = sorted({s["analyte"] for s in samples})
        curve = doc.get("curve", {})
        origin = (f"record {curve.get('record_id')}" if curve.get("record_id")
                  else f"run file {curve.get('file')}")
        verdict = _VERDICTS.get(str(doc.get("verdict")), str(doc.get("verdict")))
        reasons = "; ".join(doc.get("reasons") or [])
        rest = (f"{len(samples)} sample result{'s' if len(samples) != 1 else ''} of "
                f"{len(analytes)} analyte{'s' if len(analytes) != 1 else ''} read against "
                f"{origin}." + (f" {reasons}." if reasons else ""))
        out: list[Flowable] = [self.boxed(f"{verdict}.", rest)]
        if doc.get("forced"):
            out += [Spacer(1, 4), self.boxed(
                "Forced.", "Samples of " + ", ".join(doc.get("forced_analytes", []))
                + f" were quantified against a {VERDICT_WORDS['rejected']} curve because the "
                  "analyst asked for it "
                  "(--force). Those results carry the flag 'forced' and must not be reported "
                  "without a documented justification.")]
        profile = curve.get("profile") or {}
        source = doc.get("samples_source", {})
        rule = doc.get("qc", {}).get("rule", {})
        items = [
            ("Curve", origin, False),
            ("Created", format_utc(doc.get("created_at")), False),
            ("Curve file", str(curve.get("file") or MISSING), False),
            ("Profile", (f"{profile.get('name') or MISSING}, version "
                        f"{profile.get('version') or MISSING}"), False),
            ("Curve file SHA-256", str(curve.get("sha256") or MISSING), True),
        ]
        if curve.get("digest"):
            items.append(("Record version digest", str(curve["digest"]), True))
        items += [
            ("Samples", "the run file's unknowns and QCs" if source.get("from_run")
             else str(source.get("file") or MISSING), False),
            ("calib version", str(doc.get("tool_version") or MISSING), False),
            ("Samples file SHA-256", str(source.get("sha256") or MISSING), True),
            ("QC rule", (f"within ±{rule.get('tolerance_pct', 15):g} % (±"
                        f"{rule.get('lloq_tolerance_pct', 20):g} % at the LLOQ); at least "
                        f"{rule.get('min_pass_pct', 66.7):g} % of QCs and "
                        f"{rule.get('min_level_pass_pct', 50):g} % at each level; severity "
                        f"{rule.get('severity', 'review')}; {rule.get('source', '')}"), True),
            ("Batch digest (SHA-256)", self.digest, True),
        ]
        return out + [*self.heading("Curve and samples"), self.tables.pairs(items)]

    def curve_items(self, c: Mapping[str, Any]) -> list[tuple[str, str, bool]]:
        unit = f" {c['unit']}" if c.get("unit") else ""
        lod = MISSING if c.get("lod") is None else f"{_num(c['lod'])}{unit}"
        remark = lod_remark(c.get("lod"), c.get("lloq"), str(c.get("unit") or ""))
        return [
            ("Curve verdict", _VERDICTS.get(str(c.get("verdict")), str(c.get("verdict"))), False),
            ("Model, weighting", f"{c['model']}, {c['weighting']}", False),
            ("Calibrated range", f"{_num(c['x_min'])} to {_num(c['x_max'])}{unit}", False),
            ("LLOQ, ULOQ", f"{_num(c['lloq'])}, {_num(c['uloq'])}{unit}", False),
            ("LOD", lod + (f" ({c['lod_method']})" if c.get("lod_method") else ""), True),
            ("Intervals", (f"{100 * c['confidence']:g} %, x₀ ± t·s(x₀) with t = "
                          f"{_num(c.get('t_critical'))} on {c['residual_df']} df; s(x₀) by the "
                          f"{c['interval_method']}"), True),
            *([("Remark", remark, True)] if remark else []),
        ]

    def samples_table(self, samples: Sequence[Mapping[str, Any]], c: Mapping[str, Any]
                      ) -> Flowable:
        unit = f" ({c['unit']})" if c.get("unit") else ""
        level = f"{100 * c['confidence']:g} %"
        rows: list[list[Any]] = [["Sample", "Type", "n", "Mean response", f"Conc.{unit}", "SE",
                                  f"{level} interval", "Dilution", "Reported", "Flags"]]
        bold = []
        for s in samples:
            interval = (f"{_num(s['ci_low'])} to {_num(s['ci_high'])}"
                        if s.get("ci_low") is not None else MISSING)
            if s["flags"]:
                bold.append((8, len(rows)))
            rows.append([str(s["sample_id"]), "QC" if s["sample_type"] == "qc" else "unknown",
                         str(s["n_replicates"]), _num(s.get("mean_response"), 5),
                         _num(s.get("concentration")), _num(s.get("std_error"), 3), interval,
                         format_compact(s["dilution_factor"], 6), str(s["reported"]),
                         ", ".join(s["flags"]) or MISSING])
        fractions = _fit_columns(rows, [0.12, 0.08, 0.04, 0.1, 0.1, 0.07, 0.14, 0.08, 0.1, 0.17],
                                 {2, 3, 4, 5, 6, 7, 8, 9}, self.width)
        return self.tables.grid(rows, fractions, right=(2, 3, 4, 5, 7), bold=bold)

    def qc_section(self, q: Mapping[str, Any], unit: str) -> list[Flowable]:
        if not q.get("outcomes"):
            return [self.para(f"QC: not evaluated. {q['detail']}", self.s.small)]
        rows: list[list[Any]] = [["QC", f"Nominal{unit}", f"Found{unit}", "Deviation %",
                                  "Allowed", "Within"]]
        for o in q["outcomes"]:
            rows.append([o["sample_id"], _num(o["nominal"]), _num(o.get("found")),
                         format_percent(o.get("deviation_pct")), f"±{o['allowed_pct']:g} %",
                         "yes" if o["within"] else "NO"])
        fractions = _fit_columns(rows, [0.25, 0.15, 0.15, 0.15, 0.15, 0.15], {1, 2, 3, 4, 5},
                                 self.width)
        table = self.tables.grid(rows, fractions, right=(1, 2, 3, 4))
        verdict = {"pass": "QC rule met", "fail": "QC rule NOT met"}.get(q["verdict"], "QC")
        return [Spacer(1, 4), table, Spacer(1, 2),
                self.para(f"{verdict} (severity {q['severity']}). {q['detail']}", self.s.small)]

    def analyte(self, c: Mapping[str, Any], samples: Sequence[Mapping[str, Any]],
                q: Mapping[str, Any] | None) -> list[Flowable]:
        # The mark after the conditional page break, so that it lands on the analyte's page.
        out: list[Flowable] = [CondPageBreak(80), _AnalyteMark(str(c["analyte"]), self.top),
                               self.para(str(c["analyte"]), self.s.heading)]
        if c.get("not_fitted"):
            return out + [self.para(f"The standards could not be fitted ({c['not_fitted']}); "
                                    "the samples were not quantified.")]
        out += [self.tables.pairs(self.curve_items(c)), Spacer(1, 4),
                self.samples_table(samples, c)]
        notes = [f"{s['sample_id']}: {s['note']}" for s in samples
                 if s.get("note") and "curve-rejected" not in s["flags"]]
        if c.get("status") == "refused":
            notes.insert(0, "The curve was rejected, so its samples were not quantified")
        if notes:
            out.append(self.para("; ".join(notes) + ".", self.s.note))
        if q is not None:
            unit = f" ({c['unit']})" if c.get("unit") else ""
            out += self.qc_section(q, unit)
        return out

    def closing(self) -> list[Flowable]:
        flags = [["Flag", "Meaning"], *[[k, v] for k, v in _FLAGS]]
        out: list[Flowable] = [*self.heading("Flags"),
                               self.tables.grid(flags, [0.18, 0.82])]
        notes = list(self.doc.get("notes", []))
        notes += [f"{a}: {why}" for a, why in (self.doc.get("refused") or {}).items()]
        if notes:
            out += [*self.heading("Notes"), *(self.para(n, self.s.small) for n in notes)]
        caution = self.t.cautions or str(self.doc.get("cautions") or "")
        out += [*self.heading(self.t.titles.cautions),
                *(self.para(" ".join(chunk.split()), self.s.small)
                  for chunk in caution.split("\n\n") if chunk.strip())]
        rows = [["Role", "Printed name", "Signature", "Date and time (UTC)", "Meaning"],
                *[[role, "", "", "", meaning] for role, meaning in _SIGNOFF]]
        table = self.tables.grid(rows, [0.14, 0.2, 0.2, 0.17, 0.29],
                                 tall_rows=range(1, len(rows)))
        out.append(KeepTogether([*self.heading(self.t.titles.signoff), table]))
        return out

    def story(self) -> list[Flowable]:
        out: list[Flowable] = [_AnalyteMark("", self.top), *self.lab(),
                               self.para(_TITLE, self.s.title),
                               *self.summary()]
        qcs = {q["analyte"]: q for q in self.doc.get("qc", {}).get("analytes", [])}
        for c in self.doc.get("curves", []):
            mine = [s for s in self.doc.get("samples", []) if s["analyte"] == c["analyte"]]
            if mine:
                out += self.analyte(c, mine, qcs.get(c["analyte"]))
        return out + self.closing()


def _finish(canvas: Canvas, *, attachment: bytes, digest: str) -> None:
    embed_file(canvas, name=QUANTIFY_ATTACHMENT, data=attachment, mime_type="application/json",
               description="Quantified batch (canonical calib.quantify/1 JSON); its SHA-256 is "
                           "the batch digest")
    # reportlab seeds the file identifier from the clock or SOURCE_DATE_EPOCH; the digest
    # keeps the bytes independent of the environment.
    canvas._doc.signature = hashlib.md5(b"calib quantify " + digest.encode("ascii"),
                                        usedforsecurity=False)


def write_quantify_pdf(document: Mapping[str, Any], *, template: ReportTemplate | None = None
                       ) -> bytes:
    """Render a quantified batch as a PDF report with its JSON attached.

    Parameters
    ----------
    document : mapping
        A ``calib.quantify/1`` document (:func:`calib.quantify.quantify_document`).
    template : ReportTemplate, optional
        Lab details, page size and wording; the bundled template when None.

    Returns
    -------
    bytes
        The PDF; the same document and template give the same bytes.

    Examples
    --------
    >>> doc = {"schema": "calib.quantify/1", "curve": {"record_id": "CR-1"}, "samples": [],
    ...        "curves": [], "qc": {"analytes": []}, "verdict": "accepted"}
    >>> write_quantify_pdf(doc)[:5]
    b'%PDF-'
    """
    template = template or load_template()
    register_fonts()
    attachment = canonical_json(dict(document))
    digest = hashlib.sha256(attachment).hexdigest()
    curve = document.get("curve") or {}
    label = (f"record {curve.get('record_id')}" if curve.get("record_id")
             else f"run file {curve.get('file')}")
    furniture = _BatchFurniture(lab_name=template.lab.name, document_title=_TITLE, record_id="",
                                digest=digest, curve=label)
    buffer = io.BytesIO()
    doc = BaseDocTemplate(buffer, pagesize=PAGE_SIZES[template.page_size], invariant=1,
                          pageCompression=1, title=f"{_TITLE} ({label})", author=template.lab.name,
                          subject=f"Samples quantified against {label}", creator="calib",
                          keywords=[digest, label], initialFontName=REGULAR, **page_margins())
    frame = Frame(doc.leftMargin, doc.bottomMargin, doc.width, doc.height, leftPadding=0,
                  rightPadding=0, topPadding=0, bottomPadding=0, id="body")
    doc.addPageTemplates([PageTemplate(id="batch", frames=[frame])])
    before_save = functools.partial(_finish, attachment=attachment, digest=digest)
    top = doc.bottomMargin + doc.height
    doc.build(_Story(document, template, doc.width, digest, top).story(),
              canvasmaker=functools.partial(_BatchCanvas, furniture=furniture,
                                            before_save=before_save))
    return buffer.getvalue()

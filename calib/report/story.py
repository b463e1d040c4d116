"""Turn a calibration record (parsed ``calib.record/2`` or ``/1`` JSON) into reportlab flowables.

Only the record is read, never live fit objects, so a stored record renders
again to the same pages.  Every figure printed comes from the record; the
one thing computed is the drawing of the confidence band, through
:func:`calib.fit.bands.mean_band` from the stored coefficients and covariance
(:mod:`calib.report.story_band`).
"""

from __future__ import annotations

import io
from collections.abc import Iterator, Mapping
from typing import Any

from reportlab.lib.utils import ImageReader
from reportlab.platypus import (
    CondPageBreak,
    Flowable,
    Image,
    KeepTogether,
    PageBreak,
    Spacer,
    Table,
)

from calib.report.blocks import SideBySide, TextBlock, plain
from calib.report.charts import (
    CurveBand,
    PlotPoint,
    calibration_chart,
    residual_chart,
    wants_log_axis,
)
from calib.report.formatting import (
    MISSING,
    as_float,
    format_compact,
    format_number,
    format_p,
    format_percent,
    format_utc,
)
from calib.report.pages import SectionMark
from calib.report.story_band import curve_band
from calib.report.styles import BOLD, get_styles
from calib.report.tables import TableMaker
from calib.report.template import ReportTemplate
from calib.report.vector import as_flowable
from calib.report.wording import (
    CHECK_VERDICTS,
    COEFFICIENTS,
    MODELS,
    ROLES,
    SEVERITIES,
    as_list,
    as_mapping,
    coefficient_order,
    common_sheet,
    fixed_digits,
    lod_remark,
    range_sentences,
    settings_weighting,
    shared_reasons,
    signature_words,
    text_or_dash,
    verdict_sentence,
    weighting_words,
)

__all__ = ["story_sections"]

_LOGO_HEIGHT = 40.0  # points (14 mm)
_LOGO_WIDTH = 130.0
_PLOT_HEIGHT = 190


class _Builder:
    """Holds what every section needs while the story is assembled."""

    def __init__(self, record: Mapping[str, Any], *, record_id: str, digest: str,
                 template: ReportTemplate, width: float) -> None:
        self.record = record
        self.record_id = record_id
        self.digest = digest
        self.t = template
        self.width = width
        self.s = get_styles()
        self.tables = TableMaker(width)
        units = as_mapping(as_mapping(record.get("run")).get("units"))
        self.conc_unit = str(units.get("concentration") or "")
        self.resp_unit = str(units.get("response") or "")
        self.curves = [as_mapping(c) for c in as_list(as_mapping(record.get("check")).get("curves"))]
        self.details = {
            as_mapping(d).get("analyte"): as_mapping(d) for d in as_list(record.get("fit_details"))
        }

    # -- small pieces ----------------------------------------------------------------------
    def para(self, text: str, style: Any = None) -> TextBlock:
        """A block of plain text (record text is never markup)."""
        return plain(text, style or self.s.body)

    def heading(self, text: str) -> TextBlock:
        return plain(text, self.s.heading, keep_with_next=True)

    def plot_title(self, text: str) -> TextBlock:
        title = plain(text, self.s.head_cell)
        title.spaceAfter = 3
        return title

    def table_heading(self, text: str) -> list[Flowable]:
        """Heading of a table that may split across pages: never left alone at a page foot."""
        # keepWithNext would move a whole long table to the next page; a conditional
        # break only moves the heading when the table could not start below it.
        return [CondPageBreak(80), self.para(text, self.s.heading)]

    def unit(self, which: str) -> str:
        unit = self.conc_unit if which == "concentration" else self.resp_unit
        return f" ({unit})" if unit else ""

    def lab_block(self) -> list[Flowable]:
        lab = self.t.lab
        lines = [" · ".join(lab.address), lab.method, lab.accreditation]
        block = [self.para(lab.name, self.s.lab),
                 *(self.para(line, self.s.lab_line) for line in lines if line)]
        if not self.t.logo:
            return block
        logo = self.logo()
        table = Table([[block, logo]], colWidths=[self.width - logo.drawWidth, logo.drawWidth])
        table.setStyle([("LEFTPADDING", (0, 0), (-1, -1), 0),
                        ("RIGHTPADDING", (0, 0), (-1, -1), 0),
                        ("TOPPADDING", (0, 0), (-1, -1), 0),
                        ("BOTTOMPADDING", (0, 0), (-1, -1), 0),
                        ("VALIGN", (0, 0), (-1, -1), "TOP"),
                        ("ALIGN", (1, 0), (1, 0), "RIGHT")])
        return [table]

    def logo(self) -> Image:
        """The template's logo, at most ``_LOGO_HEIGHT`` high and ``_LOGO_WIDTH`` wide."""
        reader = ImageReader(io.BytesIO(self.t.logo or b""))
        width, height = reader.getSize()
        scale = min(_LOGO_HEIGHT / height, _LOGO_WIDTH / width)
        return Image(io.BytesIO(self.t.logo or b""), width=width * scale, height=height * scale)

    def boxed(self, bold: str, rest: str = "") -> TextBlock:
        style = self.s.verdict
        return TextBlock([(bold, BOLD), (rest, style.fontName)], size=style.fontSize,
                         leading=style.leading, color=style.textColor, boxed=True)

    # -- sections --------------------------------------------------------------------------
    def run_items(self, curve: Mapping[str, Any] | None) -> list[tuple[str, str, bool]]:
        record, run = self.record, as_mapping(self.record.get("run"))
        profile = as_mapping(record.get("profile"))
        tool = as_mapping(record.get("tool"))
        units = as_mapping(run.get("units"))
        source = curve if curve is not None else as_mapping(record.get("settings"))
        confidence = as_float(source.get("confidence"))
        profile_sha = str(profile.get("sha256") or "")
        items = [
            ("Record id", text_or_dash(self.record_id), False),
            ("Created", format_utc(record.get("created_at")), False),
            ("Version digest (SHA-256)", text_or_dash(self.digest), True),
            ("Source file", text_or_dash(run.get("file")), True),
            ("Source file SHA-256", text_or_dash(run.get("sha256")), True),
            ("Sheet", text_or_dash(run.get("sheet")), False),
            ("Layout", text_or_dash(run.get("layout")), False),
            ("Profile", f"{text_or_dash(profile.get('name'))}, version {text_or_dash(profile.get('version'))}",
             False),
            ("Profile SHA-256", f"{profile_sha[:16]} …" if profile_sha else MISSING, False),
            ("Model", text_or_dash(MODELS.get(str(source.get("model")), source.get("model"))), False),
            ("Weighting", settings_weighting(self.record, source), False),
            ("Confidence level", f"{confidence * 100:g} %" if confidence else MISSING, False),
            ("Prepared by", text_or_dash(record.get("prepared_by")), False),
        ]
        if units:
            items.append(("Units", "; ".join(f"{k}: {units[k]}" for k in sorted(units)), False))
        made = f"{tool.get('name') or 'calib'} {tool.get('version') or ''}".strip()
        libraries = as_mapping(record.get("libraries"))
        if libraries:
            made += " (" + ", ".join(f"{k} {libraries[k]}" for k in sorted(libraries)) + ")"
        items.append(("Issued with", made, True))
        metadata = as_mapping(run.get("metadata"))
        for key in sorted(metadata, key=str):
            value = metadata[key]
            label = str(key).replace("_", " ")
            items.append((label[:1].upper() + label[1:], text_or_dash(value), len(str(value)) > 38))
        for note in as_list(run.get("warnings")):
            items.append(("Import note", text_or_dash(note), True))
        return items

    def fit_section(self, curve: Mapping[str, Any]) -> list[Flowable]:
        coefficients = as_mapping(curve.get("coefficients"))
        if not coefficients:
            return [self.para("The curve could not be fitted, so there are no coefficients. "
                              "The checks and standards below say why.")]
        confidence = as_float(curve.get("confidence"))
        level = f"{confidence * 100:g} %" if confidence else ""
        resp, conc = self.resp_unit, self.conc_unit
        unit_of = {
            "intercept": resp,
            "slope": f"{resp} per {conc}" if resp and conc else "",
            "quadratic": f"{resp} per ({conc})²" if resp and conc else "",
        }
        rows: list[list[Any]] = [["Coefficient", "Unit", "Estimate", "Standard error", "t",
                                  "p", f"Lower {level} limit", f"Upper {level} limit"]]
        for name in coefficient_order(coefficients):
            row = as_mapping(coefficients[name])
            rows.append([
                COEFFICIENTS.get(name, name),
                unit_of.get(name, ""),
                format_number(row.get("estimate"), 6),
                format_number(row.get("std_error"), 4),
                format_number(row.get("t_value"), 4),
                format_p(row.get("p_value")),
                format_number(row.get("ci_low"), 6),
                format_number(row.get("ci_high"), 6),
            ])
        table = self.tables.grid(rows, [0.13, 0.17, 0.12, 0.11, 0.09, 0.09, 0.145, 0.145],
                                 right=range(2, 8))
        lod, loq = as_mapping(curve.get("lod")), as_mapping(curve.get("loq"))

        def with_unit(text: str, unit: str) -> str:
            return f"{text} {unit}" if unit and text != MISSING else text

        stats = self.tables.pairs([
            ("Residual SD σ̂", with_unit(format_number(curve.get("residual_sd"), 5), resp),
             False),
            (_r2_label(curve), fixed_digits(curve.get("r_squared")), False),
            ("Correlation r", fixed_digits(curve.get("r")), False),
            ("Points in the fit N", text_or_dash(curve.get("n_points")), False),
            ("Levels", text_or_dash(curve.get("n_levels")), False),
            ("Residual df ν", text_or_dash(curve.get("residual_df")), False),
            ("LOD", with_unit(format_number(lod.get("value"), 4), conc), False),
            ("LOQ", with_unit(format_number(loq.get("value"), 4), conc), False),
        ])
        notes = [f"{label}: {entry['method']}." for label, entry in (("LOD", lod), ("LOQ", loq))
                 if entry.get("method")]
        remark = lod_remark(lod.get("value"),
                            as_mapping(curve.get("working_range")).get("lloq"), conc)
        if remark:
            notes.insert(0, remark)
        out: list[Flowable] = [table, Spacer(1, 4), stats]
        if notes:
            out += [Spacer(1, 2), self.para(" ".join(notes), self.s.note)]
        return out

    def checks_table(self, curve: Mapping[str, Any]) -> Flowable:
        checks = [as_mapping(c) for c in as_list(curve.get("checks"))]
        if not checks:
            return self.para("No acceptance checks were evaluated.")
        rows: list[list[Any]] = [["Check", "Value", "Limit", "Verdict", "Severity", "Detail"]]
        bold = []
        for i, c in enumerate(checks, start=1):
            verdict = str(c.get("verdict") or "")
            if verdict in ("fail", "warn"):
                bold.append((3, i))
            severity = str(c.get("severity") or "")
            value, limit = format_compact(c.get("value")), format_compact(c.get("limit"))
            test = as_mapping(c.get("test"))
            if test:
                # A statistical test: name the statistic and give raw (and family) p and α.
                value = (f"{test.get('statistic')} = {format_compact(test.get('statistic_value'))}"
                         f"; p = {format_p(test.get('p_value'))}")
                limit = f"α = {format_compact(test.get('alpha'))}"
                if test.get("adjusted_p") is not None:
                    limit += (f"; Holm p = {format_p(test.get('adjusted_p'))} "
                              f"(family α = {format_compact(test.get('family_alpha'))})")
            rows.append([
                text_or_dash(c.get("title") or c.get("id")),
                value,
                limit,
                CHECK_VERDICTS.get(verdict, verdict or MISSING),
                SEVERITIES.get(severity, severity or MISSING),
                text_or_dash(c.get("detail")),
            ])
        return self.tables.grid(rows, [0.18, 0.14, 0.125, 0.1, 0.095, 0.36], right=(1, 2),
                                bold=bold)

    def standards_table(self, curve: Mapping[str, Any]) -> list[Flowable]:
        """The standards, a long exclusion reason shared by several points given once below."""
        points = [as_mapping(p) for p in as_list(curve.get("points"))]
        if not points:
            return [self.para("The record holds no standards for this analyte.")]
        marks = shared_reasons(p.get("exclusion_reason") for p in points
                               if not p.get("included", True))
        conc, resp = self.unit("concentration"), self.unit("response")
        prefix, cell_title = common_sheet(p.get("source_cell") for p in points)
        rows: list[list[Any]] = [[
            cell_title, "Level", f"Nominal{conc}", f"Response{resp}",
            f"Fitted response{resp}", f"Back-calculated{conc}", "Deviation %", "Used in the fit",
        ]]
        for p in points:
            if p.get("included", True):
                used = "Yes"
            elif str(p.get("exclusion_reason") or "") in marks:
                used = f"No: reason {marks[str(p.get('exclusion_reason'))]} below"
            else:
                used = "No: " + str(p.get("exclusion_reason") or "no reason given")
            rows.append([
                text_or_dash(p.get("source_cell")).removeprefix(prefix),
                text_or_dash(p.get("level")),
                format_compact(p.get("concentration"), 6),
                format_compact(p.get("response"), 7),
                format_number(p.get("fitted"), 6),
                format_number(p.get("back_calculated"), 5),
                format_percent(p.get("deviation_pct")),
                used,
            ])
        out: list[Flowable] = [self.tables.grid(
            rows, [0.12, 0.06, 0.11, 0.13, 0.13, 0.14, 0.09, 0.22], right=range(1, 7))]
        out += [self.para(f"Reason {mark}: {reason}", self.s.note)
                for reason, mark in marks.items()]
        return out

    def band(self, curve: Mapping[str, Any], log_x: bool) -> CurveBand | None:
        """Fitted curve and confidence band from the stored fit details, or None."""
        return curve_band(self.details.get(curve.get("analyte")), curve, log_x)

    def plots(self, curve: Mapping[str, Any]) -> list[Flowable]:
        s, show = self.s, self.t.show
        if not (show.calibration_plot or show.residual_plot):
            return []
        xy = []
        for p in (as_mapping(p) for p in as_list(curve.get("points"))):
            x, y = as_float(p.get("concentration")), as_float(p.get("response"))
            if x is not None and y is not None:
                xy.append((x, y, as_float(p.get("fitted")), bool(p.get("included", True))))
        log_x = wants_log_axis([x for x, *_ in xy])
        x_title = "Concentration" + self.unit("concentration")
        gap = 10
        w = (self.width - gap) / 2
        titles: list[Any] = []
        drawings: list[Any] = []
        if show.calibration_plot:
            titles.append(self.plot_title("Response against concentration"))
            drawings.append(as_flowable(calibration_chart(
                [PlotPoint(x, y, used) for x, y, _, used in xy], self.band(curve, log_x),
                width=w, height=_PLOT_HEIGHT, x_title=x_title,
                y_title="Response" + self.unit("response"), log_x=log_x)))
        if show.residual_plot:
            residuals = [PlotPoint(x, y - f, used) for x, y, f, used in xy if f is not None]
            titles.append(self.plot_title("Residuals (response − fitted) against concentration"))
            if residuals:
                drawings.append(as_flowable(residual_chart(
                    residuals, width=w, height=_PLOT_HEIGHT, x_title=x_title,
                    y_title="Residual" + self.unit("response"), log_x=log_x)))
            else:
                drawings.append(self.para("No residuals: the curve was not fitted."))
        table = SideBySide([[t, d] for t, d in zip(titles, drawings)],
                           [w + gap / 2] * len(drawings))
        notes = []
        if log_x:
            all_positive = bool(xy) and min(y for _, y, _, _ in xy) > 0
            notes.append("The concentration axes are logarithmic"
                         + (", and so is the response axis of the calibration plot."
                            if all_positive else "."))
        weighting = str(curve.get("weighting") or "none")
        if (weighting != "none" or curve.get("model") == "mean-rf") and show.residual_plot:
            notes.append("Residuals are plotted unweighted, in response units; the fit "
                         "weighted the standards by "
                         f"{weighting_words(curve.get('model'), weighting)}.")
        out: list[Flowable] = [self.heading(self.t.titles.plots), table]
        if notes:
            out.append(self.para(" ".join(notes), s.note))
        return [KeepTogether(out)]

    def cautions(self) -> list[Flowable]:
        # The template's wording is the lab's; the record's own text is the fallback.
        text = self.t.cautions or str(self.record.get("cautions") or "")
        body: list[Flowable] = []
        for i, chunk in enumerate(c for c in text.split("\n\n") if c.strip()):
            if i:
                body.append(Spacer(1, 3))
            body.append(self.para(" ".join(chunk.split()), self.s.small))
        return [KeepTogether([self.heading(self.t.titles.cautions), *body])]

    def signoff(self) -> list[Flowable]:
        meanings = self.t.meanings
        signatures = [as_mapping(x) for x in as_list(self.record.get("signatures"))]
        rows: list[list[Any]] = [["Role", "Printed name", "Signature", "Date and time (UTC)",
                                  "Meaning"]]
        blank_rows = []
        others = {str(x.get("role")) for x in signatures if x.get("role")} - set(ROLES)
        # A rejected record is closed: no blank rows invite a review or approval by hand.
        closed = any(x.get("role") == "rejected" for x in signatures)
        for role in [*ROLES, *sorted(others)]:
            signed = [x for x in signatures if x.get("role") == role]
            for x in signed:
                rows.append([role.capitalize(), text_or_dash(x.get("name")), signature_words(x),
                             format_utc(x.get("signed_at")),
                             text_or_dash(x.get("meaning") or getattr(meanings, role, ""))])
            if not signed and closed and role != "prepared":
                continue
            if not signed:
                name = self.record.get("prepared_by") if role == "prepared" else None
                blank_rows.append(len(rows))
                rows.append([role.capitalize(), str(name or ""), "", "",
                             getattr(meanings, role, "")])
        # Blank rows get room to sign by hand on a printed copy.
        table = self.tables.grid(rows, [0.11, 0.2, 0.2, 0.17, 0.32], tall_rows=blank_rows)
        return [KeepTogether([self.heading(self.t.titles.signoff), table])]

    def range_notes(self, curve: Mapping[str, Any]) -> list[Flowable]:
        """The analyst's applied working range (with the full-range result), the refit
        without rejected standards, and calib's proposal.

        A range is stated once: when the analyst applied the range calib
        proposed, the proposal is not repeated as if it were still open; when
        the analyst applied another range, the proposal is named as such.
        """
        words = self.t.verdicts.word
        notes = list(range_sentences(curve, words))
        refit = as_mapping(curve.get("refit"))
        if refit:
            first = as_mapping(refit.get("first_fit"))
            figures = ", ".join(f"{k} {format_compact(v)}"
                                for k, v in as_mapping(first.get("coefficients")).items())
            notes.append(
                f"{text_or_dash(refit.get('reason'))} First fit, with every standard "
                f"({text_or_dash(first.get('n_points'))} in the fit): {figures}, r "
                f"{format_compact(first.get('r'))}, residual SD "
                f"{format_compact(first.get('residual_sd'))}; verdict on it: "
                f"{words(first.get('verdict'))}.")
        return [self.para(n) for n in notes]

    # -- whole sections ----------------------------------------------------------------------
    def analyte(self, curve: Mapping[str, Any]) -> list[Flowable]:
        t = self.t
        name = str(curve.get("analyte") or "Analyte")
        sentence = verdict_sentence(curve, t)
        cut = len(t.verdicts.word(curve.get("verdict"))) + 1
        out: list[Flowable] = [SectionMark(name), *self.lab_block(),
                               self.para(f"{t.titles.document}: {name}", self.s.title),
                               self.boxed(sentence[:cut], sentence[cut:])]
        out += self.range_notes(curve)
        if t.show.run:
            out += [self.heading(t.titles.run), self.tables.pairs(self.run_items(curve))]
        if t.show.fit:
            out += [self.heading(t.titles.fit), *self.fit_section(curve)]
        if t.show.checks:
            out += [*self.table_heading(t.titles.checks), self.checks_table(curve)]
        if t.show.standards:
            out += [*self.table_heading(t.titles.standards), *self.standards_table(curve)]
        out += self.traceability(name)
        return out + self.plots(curve) + self.cautions() + self.signoff()

    def traceability(self, analyte: str) -> list[Flowable]:
        """The reference materials and prepared levels behind this curve (when the record names
        them): calib.report.traceability."""
        from calib.report import traceability as tr

        section = as_mapping(self.record.get("standards"))
        if not section:
            return []
        materials = tr.materials_for(section, analyte)
        if not materials:
            return [*self.table_heading(tr.TITLE),
                    self.para(f"The standards file {section.get('file')} names no reference "
                              f"material for {analyte}.")]
        out = [*self.table_heading(tr.TITLE),
               self.tables.grid(tr.material_rows(materials), [0.17, 0.3, 0.13, 0.26, 0.14])]
        levels = tr.level_rows(section, materials)
        if len(levels) > 1:
            out += [Spacer(1, 4), self.tables.grid(levels, [0.2, 0.2, 0.14, 0.2, 0.26],
                                                   right=(2, 3))]
        return out

    def summary(self) -> list[Flowable]:
        t = self.t
        verdicts = [str(c.get("verdict")) for c in self.curves]
        order = ["accepted", "needs-review", "rejected"]
        order += sorted(set(verdicts) - set(order))
        tally = ", ".join(f"{t.verdicts.word(k).lower()}: {verdicts.count(k)}" for k in order
                          if k in verdicts)
        rows: list[list[Any]] = [["Analyte", "Verdict", "Slope", "R²", "Checks behind the verdict"]]
        for c in self.curves:
            slope = as_mapping(as_mapping(c.get("coefficients")).get("slope")).get("estimate")
            # What moved the verdict: failures and warnings of rules that are not info-only.
            failing = [str(as_mapping(x).get("title") or as_mapping(x).get("id"))
                       for x in as_list(c.get("checks"))
                       if as_mapping(x).get("verdict") in ("fail", "warn")
                       and as_mapping(x).get("severity") != "info"]
            rows.append([text_or_dash(c.get("analyte")), t.verdicts.word(c.get("verdict")),
                         format_number(slope, 5), fixed_digits(c.get("r_squared")),
                         "; ".join(failing) or MISSING])
        table = self.tables.grid(rows, [0.2, 0.12, 0.13, 0.12, 0.43], right=(2, 3))
        verdict = t.verdicts.word(as_mapping(self.record.get("check")).get("verdict"))
        out: list[Flowable] = [
            SectionMark(t.titles.summary), *self.lab_block(),
            self.para(t.titles.document, self.s.title),
            self.boxed(f"{verdict}.", f" {len(self.curves)} analytes; {tally}."),
        ]
        if t.show.run:
            out += [self.heading(t.titles.run), self.tables.pairs(self.run_items(None))]
        return out + [*self.table_heading(t.titles.summary), table]

    def sections(self) -> Iterator[list[Flowable]]:
        """The story section by section: the summary (several analytes), then each analyte."""
        if not self.curves:
            yield [SectionMark(""), *self.lab_block(),
                   self.para(self.t.titles.document, self.s.title),
                   self.boxed("This record holds no analytes."),
                   self.heading(self.t.titles.run), self.tables.pairs(self.run_items(None)),
                   *self.cautions(), *self.signoff()]
            return
        started = False
        if len(self.curves) > 1 and self.t.show.summary:
            yield self.summary()
            started = True
        for curve in self.curves:
            yield ([PageBreak()] if started else []) + self.analyte(curve)
            started = True


def story_sections(
    record: Mapping[str, Any],
    *,
    record_id: str,
    digest: str,
    template: ReportTemplate,
    width: float,
) -> Iterator[list[Flowable]]:
    """The flowables of a record one section at a time, made as they are asked for.

    A record of hundreds of analytes is laid out section by section, so only
    one analyte's tables and charts are held at a time.  Parameters as for
    :func:`_build_story`.

    Examples
    --------
    >>> from calib.report.template import load_template
    >>> sections = story_sections({"check": {"curves": []}}, record_id="CR-0", digest="0" * 64,
    ...                           template=load_template(), width=480)
    >>> len(list(sections))
    1
    """
    return _Builder(record, record_id=record_id, digest=digest, template=template,
                    width=width).sections()


def _build_story(
    record: Mapping[str, Any],
    *,
    record_id: str,
    digest: str,
    template: ReportTemplate,
    width: float,
) -> list[Flowable]:
    """Flowables of a whole record: a summary page (several analytes), then one section each.

    Parameters
    ----------
    record : mapping
        The parsed ``calib.record/2`` (or ``/1``) JSON.
    record_id, digest : str
        Identifier and SHA-256 of the record (not part of the record itself).
    template : ReportTemplate
        Lab details and wording.
    width : float
        Width of the text frame in points.

    Returns
    -------
    list of Flowable

    Examples
    --------
    >>> from calib.report.template import load_template
    >>> story = _build_story({"check": {"curves": []}}, record_id="CR-0", digest="0" * 64,
    ...                     template=load_template(), width=480)
    >>> len(story) > 5
    True
    """
    sections = story_sections(record, record_id=record_id, digest=digest, template=template,
                              width=width)
    return [flowable for section in sections for flowable in section]


def _r2_label(curve: Mapping[str, Any]) -> str:
    """R² named for what it is: centred or uncentred, weighted or unweighted (issue 15)."""
    model, weighting = str(curve.get("model") or ""), str(curve.get("weighting") or "none")
    centred = "uncentred" if model in ("origin", "mean-rf") else "centred"
    weighted = ("weighted 1/x2" if model == "mean-rf"
                else "unweighted" if weighting == "none" else f"weighted {weighting}")
    return f"R² ({centred}, {weighted})"

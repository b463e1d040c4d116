"""Results as pandas tables: ``to_frame()`` and their display in Jupyter.

The result classes (:class:`~calib.fit.curve.CurveFit`,
:class:`~calib.checks.evaluate.CurveAssessment`,
:class:`~calib.checks.evaluate.RunAssessment`,
:class:`~calib.quantify.batch.Batch`) inherit :class:`Tabular`, so a notebook
shows each as a table.  pandas is imported only when a table is asked for.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["Tabular", "batch_frame", "curve_frame", "fit_frame", "run_frame"]


class Tabular:
    """Adds ``_repr_html_`` (Jupyter's table view) to a class with ``to_frame()``."""

    __slots__ = ()

    def to_frame(self) -> pd.DataFrame:  # pragma: no cover - every subclass defines it
        raise NotImplementedError

    def _repr_html_(self) -> str:
        return self.to_frame()._repr_html_()


def fit_frame(fit: Any) -> pd.DataFrame:
    """One row per coefficient: estimate, standard error, t, p and the interval.

    Examples
    --------
    >>> from calib.fit import fit_curve
    >>> fit_frame(fit_curve([1, 2, 3, 4], [2.0, 4.1, 5.9, 8.1])).columns.tolist()
    ['estimate', 'std_error', 't_value', 'p_value', 'ci_low', 'ci_high']
    """
    import pandas as pd

    rows = fit.coefficient_table()
    return pd.DataFrame(
        [[r.estimate, r.std_error, r.t_value, r.p_value, r.ci_low, r.ci_high] for r in rows],
        index=pd.Index([r.name for r in rows], name="coefficient"),
        columns=["estimate", "std_error", "t_value", "p_value", "ci_low", "ci_high"])


def curve_frame(curve: Any) -> pd.DataFrame:
    """One row per standard of a judged curve, back-calculated, with its place in the fit."""
    import pandas as pd

    return pd.DataFrame([{
        "analyte": curve.analyte, "cell": s.point.source_cell, "sample": s.point.sample_id,
        "level": s.level, "concentration": s.point.concentration, "response": s.point.response,
        "used": s.used, "exclusion_reason": s.exclusion_reason, "fitted": s.fitted,
        "back_calculated": s.back_calculated, "deviation_pct": s.deviation_pct,
    } for s in curve.standards])


def run_frame(assessment: Any) -> pd.DataFrame:
    """One row per curve of a run: verdict, fit figures and why it is not accepted."""
    import pandas as pd

    rows = []
    for c in assessment.curves:
        fit = c.fit
        rows.append({
            "analyte": c.analyte, "verdict": c.verdict.value, "model": c.model.value,
            "weighting": c.weighting.value, "n_used": sum(s.used for s in c.standards),
            "slope": fit.coefficients.get("slope") if fit else None,
            "intercept": fit.coefficients.get("intercept") if fit else None,
            "r_squared": fit.r_squared if fit else None,
            "residual_sd": fit.residual_sd if fit else None,
            "reasons": " ".join(c.reasons),
        })
    return pd.DataFrame(rows).set_index("analyte")


def batch_frame(batch: Any) -> pd.DataFrame:
    """One row per quantified sample: concentration, interval, flags and the reported value."""
    import pandas as pd

    return pd.DataFrame([{
        "sample_id": r.sample_id, "analyte": r.analyte, "sample_type": r.sample_type.value,
        "n_replicates": r.n_replicates, "mean_response": r.mean_response,
        "dilution_factor": r.dilution_factor, "concentration": r.concentration,
        "std_error": r.std_error, "ci_low": r.ci_low, "ci_high": r.ci_high,
        "flags": ", ".join(r.flags), "reported": r.reported, "note": r.note,
    } for r in batch.samples])

"""Vetting a published table: how strong would a hidden confounder have to be?

``vet`` works from the reported numbers alone (no data, no graph): an estimate with its
standard error, interval, t or p-value, and the residual degrees of freedom. It answers in the
two languages reviewers meet:

- for a regression coefficient (a difference), the partial-R² robustness values of Cinelli &
  Hazlett (2020): the share of the residual variance of both the treatment and the outcome a
  confounder must explain to bring the estimate, or its confidence interval, to the threshold;
- for a ratio (or a difference with the outcome's SD), the E-value of VanderWeele & Ding
  (2017): the risk ratio a confounder must have with both to explain the estimate away.

The result is a :class:`VetResult`; its ``to_dict()`` is the ``causalcheck/vet/1`` JSON
contract of DESIGN.md; :mod:`causalcheck.commands.vet` renders the report a reviewer reads.

Examples
--------
>>> from causalcheck.study import Reported
>>> result = vet(Reported(estimate=0.0973, std_error=0.0232, dof=783))
>>> round(result.robustness.point, 3), round(result.robustness.ci, 3)
(0.139, 0.077)
"""

from __future__ import annotations

import csv
import io
import math
import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from .errors import DegenerateWarning, NumericsError, OutputError, ReportedError
from .report.files import write_atomic
from .reported import FIELD_NAMES, Summary, summarize
from .sensitivity import (
    BiasSweep,
    BoundGrid,
    Bounds,
    EValue,
    ExtremeBound,
    RobustnessValues,
    bounds,
    bounds_grid,
    e_value,
    extreme_bound,
    robustness_values,
)
from .study import Reported, Study

__all__ = ["EXTREME_STRENGTHS", "SCHEMA", "SWEEP_STRENGTHS", "VetResult", "sweep_to_csv", "vet"]

SCHEMA = "causalcheck/vet/1"

#: Equal partial R² values of the small table of hypothetical confounders.
SWEEP_STRENGTHS = (0.01, 0.02, 0.05, 0.10, 0.15, 0.20, 0.30)
#: Treatment strengths of the extreme scenario (a confounder explaining all outcome variance).
EXTREME_STRENGTHS = (0.005, 0.01, 0.02, 0.05)


@dataclass(frozen=True, eq=False)
class VetResult:
    """Everything ``vet`` found about one reported estimate.

    ``robustness``, ``sweep`` and ``extreme`` are ``None`` when the partial-R² analysis does
    not apply (a ratio measure, or unknown dof); ``e_value`` is ``None`` when no E-value can
    be formed (a difference without the outcome's SD). ``threshold`` is on the scale of the
    reported estimate (a ratio for ratio measures). ``notes`` explain every choice and gap.
    """

    summary: Summary
    threshold: float
    alpha: float
    robustness: RobustnessValues | None
    sweep: Bounds | None
    extreme: ExtremeBound | None
    e_value: EValue | None
    title: str = ""
    claim: str | None = None
    source: str | None = None
    overrides: tuple[str, ...] = ()
    notes: tuple[str, ...] = field(default=())

    @property
    def analysis_threshold(self) -> float:
        """The threshold on the analysis scale (the log for ratio measures)."""
        return math.log(self.threshold) if self.summary.is_ratio else self.threshold

    def grid(self, points: int = 101, *, upper: float | None = None) -> BoundGrid:
        """Adjusted estimates on a ``points`` × ``points`` grid of partial R² values.

        Both axes run from 0 to ``upper`` (default: 2.5 times the robustness value, at least
        0.1 and at most 0.99), the data of a contour plot and of ``--grid-csv``.
        """
        if self.robustness is None:
            raise ReportedError("a partial-R² grid needs the residual degrees of freedom of a "
                                "regression estimate (a difference); "
                                + (self.notes[0] if self.notes else "give dof"))
        if upper is None:
            upper = min(0.99, max(0.1, 2.5 * self.robustness.point))
        values = np.linspace(0.0, upper, int(points))
        s = self.summary
        return bounds_grid(s.estimate, s.std_error, s.dof, values, values,
                           threshold=self.analysis_threshold, alpha=self.alpha)

    def to_dict(self) -> dict[str, Any]:
        """The ``causalcheck/vet/1`` document (DESIGN.md) with extra keys."""
        s = self.summary
        rv = self.robustness
        ci_low, ci_high = s.reported_ci
        out: dict[str, Any] = {
            "schema": SCHEMA,
            "estimate": s.reported_estimate,
            "std_error": s.std_error,
            "t": s.t,
            "dof": s.dof,
            "partial_r2": rv.partial_r2 if rv else None,
            "robustness_value": rv.point if rv else None,
            "robustness_value_ci": rv.ci if rv else None,
            "e_value": None if self.e_value is None else self.e_value.to_dict(),
            "title": self.title,
            "claim": self.claim,
            "source": self.source,
            "measure": s.measure,
            "scale": s.scale,
            "log_estimate": s.estimate if s.is_ratio else None,
            "ci_low": ci_low,
            "ci_high": ci_high,
            "ci_level": s.ci_level,
            "ci_given": s.ci_given,
            "p_value": s.p_value,
            "threshold": self.threshold,
            "alpha": self.alpha,
            "se_source": s.se_source,
            "dof_source": s.dof_source,
            "critical_value": s.critical,
            "extreme_case": None,
            "bounds": [],
            "overrides": list(self.overrides),
            "notes": list(self.notes),
        }
        if rv is not None:
            out["robustness_value_ci_outcome_r2"] = rv.ci_r2yz
        if self.extreme is not None:
            out["extreme_case"] = {
                "r2yz": 1.0,
                "r2dz_to_threshold": self.extreme.r2dz_to_threshold,
                "rows": [{"r2dz": float(r), "adjusted_estimate": float(a)}
                         for r, a in zip(self.extreme.r2dz, self.extreme.adjusted_estimate)],
            }
        if self.sweep is not None:
            out["bounds"] = self.sweep.rows()
        return out


def _degenerate(notes: list[str], text: str) -> None:
    """A note in the result and, for the caller, a :class:`DegenerateWarning` saying the same."""
    notes.append(text)
    warnings.warn(text, DegenerateWarning, stacklevel=3)


def _reported_names(study: Study | None, overridden: Sequence[str],
                    names: Mapping[str, str] | None) -> dict[str, str]:
    # the file is named once, at the head of an error (see vet), not beside every field
    out = dict(FIELD_NAMES)
    for key in overridden:
        if names and key in names:
            out[key] = names[key]
    return out


def vet(source: Study | Reported | Summary, *, threshold: float | None = None,
        alpha: float | None = None, names: Mapping[str, str] | None = None,
        overrides: Sequence[str] = (), overridden: Sequence[str] = ()) -> VetResult:
    """Vet a published estimate against hidden confounding.

    Parameters
    ----------
    source : Study, Reported or Summary
        A study with a ``[reported]`` table, the table itself, or an already checked summary.
    threshold : float, keyword-only
        The value that would overturn the claim, on the estimate's own scale; default the
        study's ``[sensitivity].threshold`` (0), and for ratio measures the null ratio 1 (a
        threshold of 0 is read as 1 there).
    alpha : float, keyword-only
        1 − confidence level for the robustness value of the interval; default the study's
        ``alpha`` (0.05).
    names : mapping, keyword-only
        Field name to the flag that set it, for messages (see
        :func:`~causalcheck.reported.apply_overrides`).
    overrides : sequence of str, keyword-only
        Sentences saying which flags replaced file values; they go into the result.
    overridden : sequence of str, keyword-only
        Field names set by flags (so messages name the flag rather than the file).

    Returns
    -------
    VetResult

    Raises
    ------
    ReportedError
        Impossible numbers, or a table from which nothing can be computed.

    References
    ----------
    Cinelli & Hazlett (2020), Sec. 4-5 (robustness values, minimal reporting); VanderWeele &
    Ding (2017) (E-value).
    """
    study = source if isinstance(source, Study) else None
    if study is not None and study.reported is None:
        raise ReportedError(f"study file {study.source!r} has no [reported] table; add one "
                            "(estimate = ..., std_error = ..., dof = ...) or pass the numbers "
                            "as flags, e.g. --estimate 0.097 --se 0.023 --dof 783")
    if isinstance(source, Summary):
        summary = source
    else:
        reported = study.reported if study is not None else source
        assert isinstance(reported, Reported)
        try:
            summary = summarize(reported, names=_reported_names(study, overridden, names))
        except ReportedError as error:
            if study is None or study.path is None:
                raise
            raise ReportedError(f"study file {study.source!r}: {error}") from None
    label = (lambda key, default: (names or {}).get(key, default))
    if alpha is None:
        alpha = study.alpha if study is not None else 0.05
    if isinstance(alpha, bool) or not isinstance(alpha, (int, float)) \
            or not math.isfinite(alpha) or not 0 < alpha < 1:
        raise ReportedError(f"{label('alpha', 'alpha')} must be a number strictly between 0 "
                            f"and 1, such as 0.05; got {alpha!r}")
    notes: list[str] = []
    if threshold is None:
        threshold = study.sensitivity.threshold if study is not None else 0.0
    if isinstance(threshold, bool) or not isinstance(threshold, (int, float)) \
            or not math.isfinite(threshold):
        raise ReportedError(f"{label('threshold', 'threshold')} must be a finite number; got "
                            f"{threshold!r}")
    threshold = float(threshold)
    if summary.is_ratio:
        if threshold == 0:
            threshold = 1.0
        elif threshold < 0:
            raise ReportedError(f"{label('threshold', '[sensitivity].threshold')} = "
                                f"{threshold!r} cannot be a {summary.measure.replace('_', ' ')}; "
                                "for a ratio give the ratio that would overturn the claim "
                                "(1 for no effect)")
    notes.extend(summary.notes)

    robustness = sweep = extreme = None
    analysis_threshold = math.log(threshold) if summary.is_ratio else threshold
    if summary.is_ratio:
        measure = summary.measure.replace('_', ' ')
        article = "an" if measure[:1] in "aeiou" else "a"
        notes.append(f"the standard error and t are on the log scale of the {measure} "
                     "(std_error, t and log_estimate in the JSON); the estimate, the interval "
                     "and the threshold are ratios")
        notes.append(f"robustness values are partial-R² bounds for a linear regression "
                     f"estimate; for {article} {measure} the E-value is the sensitivity "
                     "measure, so no robustness value is given (robustness_value and "
                     "partial_r2 are null in the JSON)")
    elif summary.dof is None:
        notes.append("robustness values need the residual degrees of freedom; give dof, or n "
                     "with covariates (dof = n - covariates - 2)")
    elif summary.dof <= 1:
        _degenerate(notes, f"the residual degrees of freedom ({summary.dof:.8g}) are too few "
                    "for the partial-R² bounds, which need more than 1, so the robustness "
                    "values are null")
    else:
        try:
            robustness = robustness_values(summary.estimate, summary.std_error, summary.dof,
                                           threshold=analysis_threshold, alpha=alpha)
            strengths = np.asarray(SWEEP_STRENGTHS)
            sweep = bounds(summary.estimate, summary.std_error, summary.dof, strengths,
                           strengths, threshold=analysis_threshold, alpha=alpha)
            extreme = extreme_bound(summary.estimate, summary.std_error, summary.dof,
                                    EXTREME_STRENGTHS, threshold=analysis_threshold)
        except NumericsError as error:
            raise ReportedError(f"the reported numbers cannot be bounded: {error}") from None
        if not math.isfinite(robustness.critical_f):
            _degenerate(notes, f"with {summary.dof:.8g} residual degrees of freedom the "
                        "intervals of the adjusted estimates (at dof - 1) have no finite "
                        "limits, so the robustness value of the interval is 0 and the limits "
                        "are null")
        if robustness.f == 0:
            _degenerate(notes, "the estimate equals the threshold (t = 0 measured from it): "
                        "both robustness values are 0, and the direction in which a hidden "
                        "confounder would move it is undefined (the tables show a bias that "
                        "lowers it)")

    ev = None
    ci = summary.reported_ci
    if summary.is_ratio:
        ev = e_value(summary.reported_estimate, ci=ci, measure=summary.measure,
                     outcome_common=summary.outcome_common, null=threshold)
        if not summary.ci_given:
            notes.append("the E-value of the interval uses an interval computed from the "
                         "standard error (no interval was given)")
        if summary.measure != "risk_ratio" and not summary.outcome_common:
            notes.append(f"the {summary.measure.replace('_', ' ')} is taken as a risk ratio, "
                         "which assumes the outcome is rare (under about 15%); set "
                         "outcome_common = true (--common-outcome) if it is not")
    elif summary.outcome_sd is not None:
        ev = e_value(summary.estimate, ci=ci, measure="difference",
                     outcome_sd=summary.outcome_sd, null=threshold)
        notes.append("the E-value of a difference uses the standardised mean difference "
                     "d = estimate / outcome SD and RR ≈ exp(0.91 d), an approximation for "
                     "a roughly normal outcome")
    else:
        notes.append("no E-value: for a difference, give the outcome's standard deviation "
                     "([reported] outcome_sd = ..., or --outcome-sd) to get one")

    if robustness is None and ev is None:
        raise ReportedError(
            "nothing can be computed from these numbers: the robustness values need the "
            "residual degrees of freedom (dof, or n with covariates) and an E-value of a "
            "difference needs the outcome's standard deviation (outcome_sd). Add one of them "
            "to [reported], or pass --dof, --n with --covariates, or --outcome-sd")
    notes.extend(overrides)
    return VetResult(
        summary=summary, threshold=threshold, alpha=float(alpha), robustness=robustness,
        sweep=sweep, extreme=extreme, e_value=ev,
        title=study.title if study is not None else "",
        claim=study.claim if study is not None else None,
        source=study.source if study is not None and study.path is not None else None,
        overrides=tuple(overrides), notes=tuple(notes))


# --------------------------------------------------------------------------------------------
# CSV


def sweep_to_csv(grid: BoundGrid | BiasSweep, path: str | Path, *, force: bool = False) -> Path:
    """Write a sensitivity grid as a long CSV table, atomically, never clobbering a file.

    Parameters
    ----------
    grid : BoundGrid or BiasSweep
        A partial-R² grid (columns ``r2dz, r2yz, adjusted_estimate, adjusted_std_error, t,
        ci_low, ci_high``) or a γ × δ sweep (columns ``gamma, delta, adjusted_estimate``).
    path : str or Path
        The CSV file to write.
    force : bool, keyword-only
        Overwrite ``path`` if it exists (otherwise that is an error and nothing is written).

    Returns
    -------
    Path

    Raises
    ------
    OutputError
        ``path`` exists (without ``force``), is a folder, or its folder does not exist.
    """
    path = Path(path)
    if path.is_dir():
        raise OutputError(f"--grid-csv {str(path)!r} is a folder; give a file name such as "
                          f"{str(path / 'grid.csv')!r}")
    if path.exists() and not force:
        raise OutputError(f"--grid-csv {str(path)!r} already exists; nothing was written. "
                          "Choose a new file name, or pass --force to overwrite it")
    if not path.parent.is_dir():
        raise OutputError(f"--grid-csv {str(path)!r}: the folder {str(path.parent)!r} does "
                          "not exist; create it first or choose another place")
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    if isinstance(grid, BoundGrid):
        b = grid.bounds
        writer.writerow(["r2dz", "r2yz", "adjusted_estimate", "adjusted_std_error", "t",
                         "ci_low", "ci_high"])
        shape = b.adjusted_estimate.shape
        dz = np.broadcast_to(grid.r2dz[:, None], shape).ravel()
        yz = np.broadcast_to(grid.r2yz[None, :], shape).ravel()
        columns = [dz, yz] + [np.asarray(getattr(b, k)).ravel() for k in
                              ("adjusted_estimate", "adjusted_std_error", "t", "ci_low",
                               "ci_high")]
    elif isinstance(grid, BiasSweep):
        writer.writerow(["gamma", "delta", "adjusted_estimate"])
        shape = grid.adjusted_estimate.shape
        columns = [np.broadcast_to(grid.gamma[:, None], shape).ravel(),
                   np.broadcast_to(grid.delta[None, :], shape).ravel(),
                   grid.adjusted_estimate.ravel()]
    else:
        raise OutputError(f"sweep_to_csv needs a BoundGrid or a BiasSweep; got "
                          f"{type(grid).__name__}")
    for row in zip(*columns):
        writer.writerow(["" if not math.isfinite(v) else repr(float(v)) for v in row])
    return write_atomic(path, buffer.getvalue())

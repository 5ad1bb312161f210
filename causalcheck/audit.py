"""The data audit: naive against adjusted estimates, why they differ, and how robust they are.

:func:`audit` takes a study (with a causal graph and data) and answers, in one pass over the
rows:

1. which controls the graph says are valid, and whether the declared ones are
   (:func:`causalcheck.graph.identify`);
2. the naive slope of the outcome on the treatment and the adjusted slope for the *headline*
   set — the declared controls when they are valid, else the optimal set when all of it is
   measured, else the first minimal set — plus the slope for every minimal set, the optimal set
   and the declared controls;
3. the exact split of the naive–adjusted gap into one term per confounder (Gelbach 2016), and
   what each invalid declared control does when added to the headline set;
4. how strong an unmeasured confounder would need to be to overturn the adjusted estimate
   (partial R², robustness values, benchmarks; Cinelli & Hazlett 2020) and coefficient
   stability (Oster 2019), through :mod:`causalcheck.sensitivity`;
5. whether the data contradict an independence the graph implies
   (:mod:`causalcheck.implications`).

All regressions are solved from one :class:`~causalcheck.moments.Moments` object; only the two
headline models (naive and adjusted) go back to the rows once, for HC1 robust standard errors.

References
----------
Gelbach, J. B. (2016). J. Labor Econ. 34(2), 509–543.
Cinelli, C. & Hazlett, C. (2020). JRSS-B 82(1), 39–67.
Oster, E. (2019). J. Bus. Econ. Stat. 37(2), 187–204.
Henckel, L., Perković, E. & Maathuis, M. H. (2022). JRSS-B 84(2), 579–599 (the optimal set).
MacKinnon, J. G. & White, H. (1985). J. Econometrics 29, 305–325 (HC1).
"""

from __future__ import annotations

import warnings
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from . import sensitivity
from .decompose import ControlShift, Decomposition, added_control_shifts, decompose
from .engines import compute_moments
from .errors import CausalCheckError, NumericsError, Problem, StudyFileError
from .graph import identify
from .implications import ImplicationTest, check_implications
from .moments import Moments, RowCount
from .regress import LinearFit, fit
from .study import Study, load_study

__all__ = ["HEADLINE_REASONS", "SCHEMA", "AuditResult", "RowSource", "SetEstimate", "audit",
           "collect_rows"]

SCHEMA = "causalcheck/audit/1"
# adjusted.reason is one of these codes; reason_text says it in words
HEADLINE_REASONS = {
    "declared": "the declared controls, which are a valid adjustment set",
    "optimal": "the optimal set: of the valid sets, the one with the smallest asymptotic "
               "variance (Henckel, Perkovic & Maathuis 2022), all of it measured",
    "minimal": "the first minimal valid set that could be estimated (the optimal set is not "
               "fully measured, or its columns are collinear)",
    "best_available": "no valid set exists: the optimal set without its unmeasured members, "
                      "which leaves the biasing paths through them open (not a valid set)",
}


@dataclass(frozen=True)
class SetEstimate:
    """The treatment's slope when adjusting for one set of variables.

    ``labels`` says where the set comes from: any of ``"naive"``, ``"minimal"``, ``"optimal"``,
    ``"declared"``. ``estimate`` and the rest are ``None`` when the set cannot be estimated
    (an unmeasured member, or collinear columns); ``note`` says why.
    """

    set: tuple[str, ...]
    labels: tuple[str, ...]
    valid: bool | None
    estimate: float | None = None
    std_error: float | None = None
    ci_low: float | None = None
    ci_high: float | None = None
    dof: int | None = None
    t: float | None = None
    p_value: float | None = None
    r2: float | None = None
    standardized: float | None = None
    robust_std_error: float | None = None
    condition_number: float | None = None
    note: str | None = None

    def to_dict(self) -> dict[str, Any]:
        out = {"set": list(self.set), "labels": list(self.labels), "valid": self.valid,
               "estimate": self.estimate, "std_error": self.std_error,
               "ci_low": self.ci_low, "ci_high": self.ci_high, "dof": self.dof, "t": self.t,
               "p_value": self.p_value, "r2": self.r2, "standardized": self.standardized}
        if self.robust_std_error is not None:
            out["robust_std_error"] = self.robust_std_error
            out["robust_type"] = "HC1"
        if self.note:
            out["note"] = self.note
        return out


@dataclass(frozen=True)
class AuditResult:
    """Everything the audit found; :meth:`to_dict` is the ``causalcheck/audit/1`` document."""

    study: Study
    identification: Any                         # graph.Identification
    rows: RowCount
    naive: SetEstimate
    adjusted: SetEstimate | None
    adjusted_reason: str | None
    by_set: tuple[SetEstimate, ...]
    decomposition: Decomposition | None
    decomposition_target: str | None            # "adjusted" or "declared"
    bad_controls: tuple[ControlShift, ...]
    robustness: Any | None                      # sensitivity.RobustnessValues
    robustness_of: str | None                   # "adjusted", "declared" or "naive"
    benchmarks: tuple[Mapping[str, Any], ...]
    coefficient_stability: Any | None           # sensitivity.CoefficientStability
    implications: tuple[ImplicationTest, ...]
    columns: tuple[str, ...]
    notes: tuple[str, ...] = field(default=())

    @property
    def treatment(self) -> str:
        return str(self.study.treatment)

    @property
    def outcome(self) -> str:
        return str(self.study.outcome)

    @property
    def identifiable(self) -> bool:
        return bool(self.identification.identifiable)

    @property
    def controls_valid(self) -> bool | None:
        check = self.identification.controls
        return None if check is None else bool(check.valid)

    def headline(self) -> SetEstimate | None:
        """The estimate the verdict reads (the adjusted one), if any."""
        return self.adjusted

    def to_dict(self) -> dict[str, Any]:
        document = dict(self.identification.to_dict())
        document["schema"] = SCHEMA
        document["title"] = self.study.title or None
        document["alpha"] = self.study.alpha
        document["rows"] = self.rows.to_dict()
        adjusted: dict[str, Any] | None = None
        if self.adjusted is not None:
            adjusted = self.adjusted.to_dict()
            adjusted["reason"] = self.adjusted_reason
            adjusted["reason_text"] = HEADLINE_REASONS.get(str(self.adjusted_reason))
        naive = self.naive.to_dict()
        document["estimates"] = {"naive": naive, "adjusted": adjusted,
                                 "adjusted_reason": self.adjusted_reason,
                                 "by_set": [s.to_dict() for s in self.by_set]}
        # "decomposition" splits naive - adjusted (the contract); without an adjusted
        # estimate the split of naive - declared goes under a key of its own
        parts = self.decomposition
        summary = None
        if parts is not None:
            summary = {"from": "naive", "to": self.decomposition_target,
                       "set": list(parts.added), "naive_estimate": parts.base_estimate,
                       "adjusted_estimate": parts.full_estimate, "gap": parts.gap}
        to_adjusted = parts is not None and self.decomposition_target == "adjusted"
        document["decomposition"] = [t.to_dict() for t in parts.terms] if to_adjusted else []
        document["decomposition_summary"] = summary if to_adjusted else None
        document["decomposition_declared"] = None if to_adjusted or parts is None else {
            **summary, "terms": [t.to_dict() for t in parts.terms]}
        document["bad_controls"] = [s.to_dict() for s in self.bad_controls]
        if self.robustness is not None:
            rv = self.robustness
            block: dict[str, Any] = {
                "of": self.robustness_of, "estimate": rv.estimate, "std_error": rv.std_error,
                "dof": rv.dof, "threshold": rv.threshold, "alpha": rv.alpha,
                "partial_r2": rv.partial_r2, "robustness_value": rv.point,
                "robustness_value_ci": rv.ci, "extreme_r2dz": rv.extreme_r2dz,
                "benchmarks": [dict(b) for b in self.benchmarks]}
        else:
            block = {"of": None, "partial_r2": None, "robustness_value": None,
                     "robustness_value_ci": None, "benchmarks": []}
        block["coefficient_stability"] = (self.coefficient_stability.to_dict()
                                          if self.coefficient_stability is not None else None)
        document["sensitivity"] = block
        document["implications"] = [t.to_dict() for t in self.implications]
        graph_notes = [n for n in document.get("notes") or [] if n not in self.notes]
        document["notes"] = graph_notes + list(self.notes)
        return document


# --------------------------------------------------------------------------------------------


def _as_study(study_or_path: Study | str | Path) -> Study:
    if isinstance(study_or_path, Study):
        return study_or_path
    return load_study(study_or_path)


def _check_study(study: Study) -> None:
    problems = []
    if not study.has_graph:
        problems.append(Problem("[graph]", "is missing; the audit needs the causal graph, "
                                "edges = [\"a -> b\", ...] (to check a published table without "
                                "a graph, use `causalcheck vet`)"))
    for role in ("treatment", "outcome"):
        name = getattr(study, role)
        if name is None:
            problems.append(Problem(f"[study].{role}", f"is missing; name the {role}"))
        elif not study.variable(name).measured:
            problems.append(Problem(f"[variables].{name}.measured",
                                    f"the {role} {name!r} is marked measured = false; the "
                                    f"audit estimates from data, so the {role} must be a "
                                    "column. Remove measured = false (or use `causalcheck "
                                    "plan` for a study not yet run)"))
    if problems:
        raise StudyFileError(study.source, problems)


@dataclass(frozen=True)
class RowSource:
    """What the audit needs from the rows: their moments, the row counts, and one extra pass.

    ``robust(fits, column)`` returns the HC1 standard error of ``column`` in each fit, in one
    pass over the rows. An engine that streams a file or runs on a cluster provides the same
    three things. ``close()`` releases what the engine holds (a temporary copy of the rows)
    when the audit stops before that pass.
    """

    moments: Moments
    rows: RowCount
    robust: Callable[[Sequence[LinearFit], str], list[float]]
    close: Callable[[], None] = lambda: None


def collect_rows(study: Study, data: Any, columns: Sequence[str],
                 *, notes: Callable[[str], None] | None = None, engine: str | None = None,
                 quiet: bool = False) -> RowSource:
    """Read and encode the rows and take their moments, with the engine ``[data].engine``
    (or ``engine``) names: in memory, streamed in batches or on Dask
    (:func:`causalcheck.engines.compute_moments`).

    Warnings raised while encoding (a declared level with no row, say) and the engine's own
    notes (which engine ``auto`` chose, where Dask ran) are passed to ``notes``.
    """
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        loaded = compute_moments(study, data, engine=engine, quiet=quiet, variables=columns)
    for warning in caught:
        if notes is not None:
            notes(str(warning.message))
    if notes is not None:
        for note in loaded.notes:
            notes(note)
    rows_source = loaded.source

    def robust(fits: Sequence[LinearFit], column: str) -> list[float]:
        # the one extra pass; afterwards the source's temporary copy of the rows is removed
        try:
            return [float(se[0]) for se in rows_source.robust_std_errors(fits, column=column,
                                                                          quiet=quiet)]
        finally:
            rows_source.close()

    return RowSource(moments=loaded.moments, rows=loaded.rows, robust=robust,
                     close=rows_source.close)


def _measured_columns(study: Study) -> list[str]:
    treatment, outcome = str(study.treatment), str(study.outcome)
    others = [n for n in study.measured if n not in (treatment, outcome)]
    return [treatment, outcome, *others]


def _summary(result: LinearFit, moments: Moments, treatment: str, variables: tuple[str, ...],
             labels: tuple[str, ...], valid: bool | None, alpha: float,
             robust: float | None = None) -> SetEstimate:
    (column,) = moments.select([treatment])
    interval = result.confidence_interval(column, alpha=alpha)
    return SetEstimate(
        set=variables, labels=labels, valid=valid, estimate=result.coefficient(column),
        std_error=result.se(column), ci_low=interval.low, ci_high=interval.high,
        dof=result.dof, t=result.t(column), p_value=result.p_value(column), r2=result.r2,
        standardized=result.standardized_coefficient(column), robust_std_error=robust,
        condition_number=result.condition_number)


class _Notes:
    def __init__(self) -> None:
        self.items: list[str] = []

    def add(self, text: str) -> None:
        if text not in self.items:
            self.items.append(text)


def _fit_set(moments: Moments, study: Study, variables: tuple[str, ...], notes: _Notes,
             ) -> tuple[LinearFit | None, str | None]:
    """Fit the outcome on treatment + variables; collinearity becomes a note, not a crash."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            result = fit(moments, str(study.outcome), (str(study.treatment), *variables))
        except NumericsError as error:
            return None, str(error)
    for warning in caught:
        notes.add(f"adjusting for {_set_text(variables)}: {warning.message}")
    return result, None


def _set_text(variables: Sequence[str]) -> str:
    return "{" + ", ".join(variables) + "}" if variables else "nothing"


def audit(study_or_path: Study | str | Path, data: pd.DataFrame | str | Path | None = None,
          *, engine: str | None = None, quiet: bool = False) -> AuditResult:
    """Audit a study against its data.

    Parameters
    ----------
    study_or_path : Study or path
        A parsed study or the path of its TOML file; it needs a ``[graph]``.
    data : DataFrame, dask DataFrame or path, optional
        The rows; by default the study's ``[data].path``.
    engine : {"auto", "pandas", "stream", "dask"}, optional
        Overrides ``[data].engine`` (see :mod:`causalcheck.engines`).
    quiet : bool
        No progress bar while reading a large file.

    Returns
    -------
    AuditResult

    Raises
    ------
    StudyFileError
        No graph, or an unmeasured treatment or outcome.
    DataError
        Unreadable data, a missing or non-numeric column, too few usable rows.
    GraphError
        A cycle in the graph.
    NumericsError
        The graph identifies the effect but every valid set is perfectly collinear in the
        data (a set that is collinear while another is not becomes a note).

    Notes
    -----
    Every slope is an OLS coefficient with intercept, solved from the moments of the rows
    left after dropping any row with a missing value in a used column (one sample for every
    set, so that estimates are comparable and the decomposition is exact).

    References
    ----------
    See the module docstring.
    """
    study = _as_study(study_or_path)
    _check_study(study)
    treatment, outcome = str(study.treatment), str(study.outcome)
    alpha = study.alpha
    notes = _Notes()

    columns = _measured_columns(study)
    identification = identify(study)          # a graph error comes before any data error
    source_rows = collect_rows(study, data, columns, notes=notes.add, engine=engine,
                               quiet=quiet)
    moments, rows = source_rows.moments, source_rows.rows
    if rows.dropped_missing:
        worst = sorted(((v, k) for k, v in rows.missing.items() if v), reverse=True)[:3]
        notes.add(f"{rows.dropped_missing} of {rows.read} rows were dropped for a missing "
                  f"value ({', '.join(f'{k}: {v}' for v, k in worst)} missing); every "
                  "estimate uses the same remaining rows")

    # -- the sets to estimate -----------------------------------------------------------
    check = identification.controls
    declared: tuple[str, ...] | None = tuple(check.used) if check is not None else None
    entries: dict[tuple[str, ...], dict[str, Any]] = {}

    def want(variables: Sequence[str], label: str, valid: bool | None) -> tuple[str, ...]:
        key = tuple(variables)
        entry = entries.setdefault(key, {"labels": [], "valid": valid})
        entry["labels"].append(label)
        if valid is not None:
            entry["valid"] = valid
        return key

    measured = set(study.measured)
    for minimal in identification.minimal_sets:
        want(minimal, "minimal", True)
    optimal = identification.optimal_set
    if optimal is not None:
        want(optimal, "optimal", True)
    if declared is not None:
        want(declared, "declared", bool(check.valid))
    (t_column,) = moments.select([treatment])
    best_available: tuple[str, ...] | None = None
    if not identification.identifiable:
        # the optimal set if everything were measured, without its unmeasured members: it
        # blocks every biasing path that measured variables can block (not a valid set)
        everything = getattr(identification, "optimal_if_all_measured", None)
        if everything is not None:
            best_available = tuple(v for v in everything if v in measured)
            want(best_available, "best_available", False)

    fits: dict[tuple[str, ...], LinearFit] = {}
    by_set: list[SetEstimate] = []
    for key, entry in entries.items():
        labels = tuple(entry["labels"])
        unmeasured = [v for v in key if v not in measured]
        if unmeasured:
            by_set.append(SetEstimate(set=key, labels=labels, valid=entry["valid"],
                                      note=f"not estimable: {', '.join(unmeasured)} "
                                           f"{'is' if len(unmeasured) == 1 else 'are'} not "
                                           "measured"))
            continue
        result, problem = _fit_set(moments, study, key, notes)
        if result is None:
            by_set.append(SetEstimate(set=key, labels=labels, valid=entry["valid"],
                                      note=f"not estimable: {problem}"))
            continue
        fits[key] = result
        by_set.append(_summary(result, moments, treatment, key, labels, entry["valid"], alpha))

    # -- naive and headline -------------------------------------------------------------
    naive_fit = fit(moments, outcome, [treatment])

    headline_key: tuple[str, ...] | None = None
    reason: str | None = None
    if declared is not None and check.valid and declared in fits:
        headline_key, reason = declared, "declared"
    elif optimal is not None and tuple(optimal) in fits:
        headline_key, reason = tuple(optimal), "optimal"
    else:
        for minimal in identification.minimal_sets:
            if tuple(minimal) in fits:
                headline_key, reason = tuple(minimal), "minimal"
                break
    if headline_key is None and identification.identifiable:
        # one reason a line, with the sets it stops (the same reason often stops several)
        grouped: dict[str, list[str]] = {}
        for s in by_set:
            if s.valid and s.note:
                why = s.note.removeprefix("not estimable: ")
                grouped.setdefault(why, []).append(_set_text(s.set))
        raise NumericsError(
            "no valid adjustment set could be estimated from the data: "
            + "; ".join(f"adjusting for {' or '.join(sets)}: {why}"
                        for why, sets in grouped.items()))
    if headline_key is None and best_available is not None and best_available in fits:
        headline_key, reason = best_available, "best_available"
    if not identification.identifiable:
        missing = [list(g) for g in identification.measure_to_identify]
        needed = f" (measuring {' or '.join(', '.join(g) for g in missing)} would change " \
                 "that)" if missing else ""
        if reason == "best_available":
            hidden = [v for v in getattr(identification, "optimal_if_all_measured", ()) or ()
                      if v not in measured]
            notes.add(
                "no valid adjustment set of measured variables exists, so the effect is not "
                f"identified by covariate adjustment{needed}; the adjusted estimate uses the "
                f"best available set {_set_text(best_available or ())}, which leaves the "
                f"biasing paths through {', '.join(hidden) or 'unmeasured variables'} open; "
                "the sensitivity analysis bounds how much they could move it")
        else:
            notes.add(
                "no valid adjustment set of measured variables exists, so the effect is not "
                f"identified by covariate adjustment{needed}; the naive and declared estimates "
                "are shown for reference only")
    adjusted: SetEstimate | None = None
    adjusted_fit = fits[headline_key] if headline_key is not None else None
    # the one extra pass over the rows: HC1 errors of the headline models
    headline_fits = [naive_fit] + ([adjusted_fit] if adjusted_fit is not None else [])
    robust = source_rows.robust(headline_fits, t_column)
    naive = _summary(naive_fit, moments, treatment, (), ("naive",), None, alpha,
                     robust=robust[0])
    if adjusted_fit is not None and headline_key is not None:
        entry = entries[headline_key]
        adjusted = _summary(adjusted_fit, moments, treatment, headline_key,
                            tuple(entry["labels"]), bool(entry["valid"]), alpha,
                            robust=robust[1])
        by_set = [adjusted if s.set == headline_key else s for s in by_set]

    # -- decomposition and bad controls -------------------------------------------------
    decomposition: Decomposition | None = None
    target: str | None = None
    if headline_key is not None:
        decomposition, target = decompose(moments, treatment, outcome, headline_key), \
            "adjusted"
    elif declared is not None and declared in fits and declared:
        decomposition, target = decompose(moments, treatment, outcome, declared), "declared"

    shifts: tuple[ControlShift, ...] = ()
    if check is not None and not check.valid and headline_key is not None:
        problems_by_variable: dict[str, list[str]] = {}
        for problem in check.problems:
            problems_by_variable.setdefault(problem.variable, []).append(problem.kind)
        bad = [v for v in check.used if v in problems_by_variable and v in measured
               and v not in headline_key]
        try:
            shifts = added_control_shifts(moments, treatment, outcome, headline_key, bad,
                                          problems=problems_by_variable)
        except NumericsError as error:
            notes.add(f"the effect of adding the invalid controls could not be computed: "
                      f"{error}")

    # -- sensitivity ------------------------------------------------------------------------
    spec = study.sensitivity
    robustness = None
    robustness_of: str | None = None
    source_estimate = adjusted
    robustness_of = "adjusted"
    if source_estimate is None:
        declared_estimate = next((s for s in by_set if "declared" in s.labels
                                  and s.estimate is not None), None)
        source_estimate = declared_estimate or naive
        robustness_of = "declared" if declared_estimate is not None else "naive"
        notes.add(f"the robustness values describe the {robustness_of} estimate, which the "
                  "graph does not support as causal")
    if source_estimate.std_error and source_estimate.dof and source_estimate.dof > 1:
        robustness = sensitivity.robustness_values(
            float(source_estimate.estimate), float(source_estimate.std_error),
            float(source_estimate.dof), threshold=spec.threshold, alpha=alpha)
    else:
        notes.add(f"no robustness values: the {robustness_of} estimate has "
                  f"{source_estimate.dof} residual degree"
                  f"{'' if source_estimate.dof == 1 else 's'} of freedom, and the partial-R² "
                  "bounds need more than 1; add rows or adjust for fewer variables")

    benchmark_rows: list[Mapping[str, Any]] = []
    if spec.benchmarks and adjusted_fit is not None and headline_key is not None:
        benchmark_rows = _benchmarks(moments, study, headline_key, adjusted, notes)
    elif spec.benchmarks:
        notes.add("benchmarks need a valid adjusted estimate; none were computed")

    stability = None
    if adjusted_fit is not None and headline_key:
        stability = _coefficient_stability(moments, study, naive_fit, adjusted_fit,
                                           headline_key, notes)

    implications = check_implications(moments, identification.implications, alpha=alpha)
    rejected = [t for t in implications if t.rejected]
    if rejected:
        notes.add(f"the data contradict {len(rejected)} of {len(implications)} independences "
                  "the graph implies (Holm-adjusted); the graph may be missing an edge")

    return AuditResult(
        study=study, identification=identification, rows=rows, naive=naive, adjusted=adjusted,
        adjusted_reason=reason, by_set=tuple(by_set), decomposition=decomposition,
        decomposition_target=target, bad_controls=shifts, robustness=robustness,
        robustness_of=robustness_of, benchmarks=tuple(benchmark_rows),
        coefficient_stability=stability, implications=implications,
        columns=moments.columns, notes=tuple(notes.items))


def _benchmarks(moments: Moments, study: Study, headline: tuple[str, ...],
                adjusted: SetEstimate, notes: _Notes) -> list[Mapping[str, Any]]:
    """Partial R² of each benchmark covariate with treatment and outcome, then the bounds."""
    spec = study.sensitivity
    treatment, outcome = str(study.treatment), str(study.outcome)
    names, r2d, r2y = [], [], []
    for name in spec.benchmarks:
        if name not in headline:
            notes.add(f"benchmark {name!r} is not in the adjusted set {_set_text(headline)}; "
                      "a benchmark must be one of the adjusted covariates, so it was skipped")
            continue
        rest = tuple(v for v in headline if v != name)
        # R²_{D~Xj|X-j} = (R²(D~X) - R²(D~X-j)) / (1 - R²(D~X-j)), groups included
        d_full = fit(moments, treatment, headline).r2
        d_reduced = fit(moments, treatment, rest).r2
        y_full = fit(moments, outcome, (treatment, *headline)).r2
        y_reduced = fit(moments, outcome, (treatment, *rest)).r2
        names.append(name)
        r2d.append(float(sensitivity.partial_r2_from_r2(d_full, d_reduced)))
        r2y.append(float(sensitivity.partial_r2_from_r2(y_full, y_reduced)))
    if not names:
        return []
    if not adjusted.dof or adjusted.dof <= 1:
        notes.add("no benchmark bounds: the adjusted estimate has too few residual degrees of "
                  "freedom (the partial-R² bounds need more than 1)")
        return []
    table = sensitivity.benchmark_bounds(
        float(adjusted.estimate), float(adjusted.std_error), float(adjusted.dof), r2d, r2y,
        names=names, multipliers=spec.multipliers, threshold=spec.threshold,
        alpha=study.alpha)
    return table.rows()


def _coefficient_stability(moments: Moments, study: Study, naive_fit: LinearFit,
                           adjusted_fit: LinearFit, headline: tuple[str, ...],
                           notes: _Notes) -> Any | None:
    treatment, outcome = str(study.treatment), str(study.outcome)
    (t_column,) = moments.select([treatment])
    cov = moments.covariance()
    try:
        treatment_on_controls = fit(moments, treatment, headline)
        return sensitivity.coefficient_stability(
            naive_fit.coefficient(t_column), naive_fit.r2,
            adjusted_fit.coefficient(t_column), adjusted_fit.r2,
            outcome_variance=float(cov[moments.index(outcome), moments.index(outcome)]),
            treatment_variance=float(cov[moments.index(t_column), moments.index(t_column)]),
            treatment_r2_controls=treatment_on_controls.r2, r2_max=study.sensitivity.r2_max,
            threshold=study.sensitivity.threshold)
    except CausalCheckError as error:
        notes.add(f"coefficient stability (Oster 2019) not computed: {error}")
        return None


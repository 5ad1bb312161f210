"""A published table's numbers, checked and completed into one :class:`Summary`.

A table reports an estimate with *one* of a standard error, a confidence interval, a t
statistic or a p-value, and (for the partial-R² bounds) the residual degrees of freedom, or the
sample size and the number of controls. Ratio measures (risk, odds and hazard ratios) are
worked on the log scale, where their intervals are symmetric.

The rules, in order of precedence:

- the standard error is taken from ``std_error``, else the interval, else ``t``, else
  ``p_value``; the others, when also given, are checked against it and a disagreement larger
  than the rounding of the printed digits is noted;
- an interval becomes a standard error through the t quantile when the dof are known, the
  normal quantile otherwise (the summary says which);
- dof = ``dof``, else ``n - covariates - 2`` (``covariates`` counts the controls only).

Impossible numbers (a negative SE, a reversed interval, an estimate outside its interval,
dof <= 0, a non-positive ratio, an unknown measure, text or infinity where a number belongs)
raise one :class:`~causalcheck.errors.ReportedError` listing every problem, each naming the
field as the user wrote it (``[reported].std_error`` or ``--se``).

Examples
--------
>>> s = summarize(Reported(estimate=0.0973, ci=(0.0517, 0.1429), dof=783))
>>> round(s.std_error, 4), s.se_source
(0.0232, 'ci')
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field, fields, replace
from decimal import Decimal, InvalidOperation
from typing import Any

from scipy import stats

from .errors import DegenerateWarning, ReportedError, near_matches
from .study import MEASURES, Reported

__all__ = [
    "DEFAULT_CI_LEVEL",
    "FIELD_NAMES",
    "RATIO_MEASURES",
    "Summary",
    "apply_overrides",
    "summarize",
]

RATIO_MEASURES = ("risk_ratio", "odds_ratio", "hazard_ratio")
DEFAULT_CI_LEVEL = 0.95
_SOURCE_WORDS = {"std_error": "standard error given", "ci": "interval", "t": "t statistic",
                 "p_value": "p-value"}

#: How each field is named in a study file; the CLI passes its own flag names.
FIELD_NAMES: dict[str, str] = {f.name: f"[reported].{f.name}" for f in fields(Reported)}


def _exp(value: float) -> float:
    """``exp`` that gives infinity past the double range (an interval of infinite width)."""
    try:
        return math.exp(value)
    except OverflowError:
        return math.inf


@dataclass(frozen=True)
class Summary:
    """The reported estimate, completed: SE, t, dof, interval, p-value, and how each was found.

    For a ratio ``measure`` the analysis scale is the log: ``estimate``, ``std_error``, ``t``,
    ``ci_low`` and ``ci_high`` are log-ratios; ``reported_estimate`` and ``reported_ci`` give
    them back as ratios. ``dof`` is ``None`` when the table gives neither dof nor n with
    covariates. ``critical`` is the quantile the interval used: ``"t"`` or ``"normal"``.
    """

    measure: str
    estimate: float
    std_error: float
    t: float
    p_value: float
    dof: float | None
    ci_low: float
    ci_high: float
    ci_level: float
    se_source: str
    dof_source: str | None
    critical: str
    outcome_common: bool = False
    outcome_sd: float | None = None
    ci_given: bool = False
    notes: tuple[str, ...] = field(default=())
    #: the estimate and interval exactly as given (so a ratio is not round-tripped through log)
    original: tuple[float, tuple[float, float] | None] | None = None

    @property
    def is_ratio(self) -> bool:
        return self.measure in RATIO_MEASURES

    @property
    def scale(self) -> str:
        """``"log"`` for ratio measures, else ``"identity"``."""
        return "log" if self.is_ratio else "identity"

    @property
    def reported_estimate(self) -> float:
        """The estimate on the scale the table printed it (a ratio for ratio measures)."""
        if self.original is not None:
            return self.original[0]
        return _exp(self.estimate) if self.is_ratio else self.estimate

    @property
    def reported_ci(self) -> tuple[float, float]:
        """The interval on the table's own scale (as given, or computed from the SE)."""
        if self.original is not None and self.original[1] is not None:
            return self.original[1]
        if self.is_ratio:
            return _exp(self.ci_low), _exp(self.ci_high)
        return self.ci_low, self.ci_high

    def to_dict(self) -> dict[str, Any]:
        out = {f.name: getattr(self, f.name) for f in fields(self) if f.name != "original"}
        out["notes"] = list(self.notes)
        out["scale"] = self.scale
        out["reported_estimate"] = self.reported_estimate
        out["reported_ci"] = list(self.reported_ci)
        return out


# --------------------------------------------------------------------------------------------
# Overrides from the command line


_INTEGER_FIELDS = ("n", "covariates")
_BOOLEAN_FIELDS = ("outcome_common",)
_PRECISION_FIELDS = ("std_error", "ci", "t", "p_value")
_DOF_FIELDS = ("dof", "n", "covariates")


def apply_overrides(base: Reported | None, overrides: Mapping[str, Any], *,
                    names: Mapping[str, str] | None = None) -> tuple[Reported, tuple[str, ...]]:
    """Replace fields of ``base`` (from a study file, or ``None``) by command-line values.

    Parameters
    ----------
    base : Reported or None
        The study file's ``[reported]`` table, if any.
    overrides : mapping
        Field name (of :class:`~causalcheck.study.Reported`) to the value as typed: a string,
        a number, a pair for ``ci``, a bool for ``outcome_common``. ``None`` values are skipped.
    names : mapping, keyword-only
        Field name to the flag that set it (``{"std_error": "--se"}``), for messages.

    Returns
    -------
    (Reported, notes)
        The merged table and one sentence per override that replaced a value from the file.
        A flag giving the precision (SE, CI, t or p) replaces all of the file's precision
        fields, and ``--dof`` replaces ``n``/``covariates`` (and vice versa), so a flag is never
        silently outranked by a file value.

    Raises
    ------
    ReportedError
        Text that is not a number, infinities, whole-number fields that are not whole, an
        unknown field or measure; every problem is listed.
    """
    names = dict(FIELD_NAMES, **(names or {}))
    known = {f.name for f in fields(Reported)}
    problems: list[str] = []
    values: dict[str, Any] = {}
    for key, raw in overrides.items():
        if raw is None:
            continue
        if key not in known:
            problems.append(f"{key!r} is not a field of a reported table"
                            f"{near_matches(key, sorted(known))}")
            continue
        label = names.get(key, key)
        if key == "ci":
            if not isinstance(raw, (list, tuple)) or len(raw) != 2:
                problems.append(f"{label} needs two numbers LOW HIGH; got {raw!r}")
                continue
            low = _parse_number(label + " (low)", raw[0], problems)
            high = _parse_number(label + " (high)", raw[1], problems)
            if low is not None and high is not None:
                values[key] = (low, high)
        elif key == "measure":
            values[key] = raw
        elif key in _BOOLEAN_FIELDS:
            if not isinstance(raw, bool):
                problems.append(f"{label} must be true or false; got {raw!r}")
            else:
                values[key] = raw
        elif key in _INTEGER_FIELDS:
            number = _parse_number(label, raw, problems)
            if number is not None:
                if number != int(number):
                    problems.append(f"{label} must be a whole number; got {raw!r}")
                else:
                    values[key] = int(number)
        else:
            number = _parse_number(label, raw, problems)
            if number is not None:
                values[key] = number
    if problems:
        raise ReportedError(_paragraph(problems))
    notes: list[str] = []
    merged = base if base is not None else Reported()
    if base is not None:
        cleared: list[str] = []
        if any(k in values for k in _PRECISION_FIELDS):
            cleared += [k for k in _PRECISION_FIELDS if k not in values
                        and getattr(base, k) is not None]
        if "dof" in values:
            cleared += [k for k in ("n", "covariates") if getattr(base, k) is not None]
        if "n" in values or "covariates" in values:
            cleared += [k for k in ("dof",) if getattr(base, k) is not None]
        cleared = [k for k in dict.fromkeys(cleared) if k not in values]
        for key in cleared:
            setter = next(names.get(k, k) for k in values
                          if k in (_PRECISION_FIELDS if key in _PRECISION_FIELDS
                                   else _DOF_FIELDS))
            notes.append(f"{setter} replaces {FIELD_NAMES[key]} = {getattr(base, key)!r} "
                         "from the study file")
        merged = replace(merged, **{k: None for k in cleared})
        for key, value in values.items():
            old = getattr(base, key)
            if old is not None and old != value:
                notes.append(f"{names.get(key, key)} {_show(value)} overrides "
                             f"{FIELD_NAMES[key]} = {_show(old)} from the study file")
    merged = replace(merged, **values)
    return merged, tuple(notes)


def _show(value: Any) -> str:
    if isinstance(value, tuple):
        return "[" + ", ".join(_show(v) for v in value) + "]"
    if isinstance(value, float):
        return f"{value:g}"
    return repr(value) if isinstance(value, str) else str(value)


def _parse_number(label: str, raw: Any, problems: list[str]) -> float | None:
    if isinstance(raw, bool):
        problems.append(f"{label} must be a number; got {raw!r}")
        return None
    if isinstance(raw, (int, float)):
        number = float(raw)
    elif isinstance(raw, str):
        try:
            number = float(raw.strip())
        except ValueError:
            problems.append(f"{label} must be a number such as 0.05; got {raw!r}")
            return None
    else:
        problems.append(f"{label} must be a number; got {raw!r}")
        return None
    if not math.isfinite(number):
        problems.append(f"{label} must be a finite number; got {raw!r}. Copy the number "
                        "from the table")
        return None
    return number


def _paragraph(problems: list[str]) -> str:
    head = "the reported numbers cannot be used"
    if len(problems) == 1:
        return f"{head}: {problems[0]}"
    return f"{head} ({len(problems)} problems): " + "; ".join(problems)


# --------------------------------------------------------------------------------------------
# Summarising


def _half_unit(value: float) -> float:
    """Half a unit in the last printed digit of ``value`` (its shortest repr)."""
    try:
        exponent = Decimal(repr(float(value))).as_tuple().exponent
    except (InvalidOperation, ValueError):
        return 0.0
    if not isinstance(exponent, int):
        return 0.0
    return 0.5 * 10.0**exponent


def _critical(level: float, dof: float | None) -> float:
    upper = 1 - (1 - level) / 2
    if dof is None:
        return float(stats.norm.ppf(upper))
    quantile = float(stats.t.ppf(upper, dof))
    # below about 0.01 dof the true quantile passes the double range and scipy returns a
    # wrong finite number; the round trip through the tail area shows it (then: infinite)
    if dof < 1 and not math.isclose(2 * float(stats.t.sf(quantile, dof)), 1 - level,
                                    rel_tol=1e-6):
        return math.inf
    return quantile


def summarize(reported: Reported, *, names: Mapping[str, str] | None = None) -> Summary:
    """Check a reported table and complete it into a :class:`Summary`.

    Parameters
    ----------
    reported : Reported
        From a study's ``[reported]`` table, :func:`apply_overrides`, or built in code.
    names : mapping, keyword-only
        Field name to its user-facing name (a flag), for error messages.

    Returns
    -------
    Summary

    Raises
    ------
    ReportedError
        Listing every impossible or missing number with the field, the value and the fix.

    Notes
    -----
    From an interval at level ``L``: :math:`\\operatorname{se} = (\\text{high} -
    \\text{low})/(2 q)` with :math:`q` the ``1 - (1-L)/2`` quantile of t(dof), or of the
    normal when dof is unknown (log limits for ratios). From t:
    :math:`\\operatorname{se} = |\\hat\\beta / t|`. From a two-sided p-value:
    :math:`|t| = F^{-1}(1 - p/2)` with F the t(dof) or normal distribution.

    >>> s = summarize(Reported(estimate=2.0, ci=(1.2, 3.3), measure="risk_ratio"))
    >>> round(s.std_error, 4), s.critical
    (0.2581, 'normal')
    """
    names = dict(FIELD_NAMES, **(names or {}))
    problems: list[str] = []
    notes: list[str] = []

    def number(key: str) -> float | None:
        value = getattr(reported, key)
        if value is None:
            return None
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            problems.append(f"{names[key]} must be a number; got {value!r}")
            return None
        if not math.isfinite(float(value)):
            problems.append(f"{names[key]} must be a finite number; got {value!r}. Copy the "
                            "number from the table")
            return None
        return float(value)

    measure = reported.measure
    if measure not in MEASURES:
        hint = near_matches(measure, MEASURES) if isinstance(measure, str) else ""
        problems.append(f"{names['measure']} must be one of {', '.join(map(repr, MEASURES))}; "
                        f"got {measure!r}{hint}")
        measure = "difference"
    ratio = measure in RATIO_MEASURES
    estimate = number("estimate")
    if reported.estimate is None:
        problems.append(f"{names['estimate']} is missing; give the published estimate")
    std_error = number("std_error")
    t_given = number("t")
    p_given = number("p_value")
    dof = number("dof")
    outcome_sd = number("outcome_sd")
    ci_level = number("ci_level")
    n = number("n")
    covariates = number("covariates")
    ci: tuple[float, float] | None = None
    if reported.ci is not None:
        raw = reported.ci
        if (not isinstance(raw, (list, tuple)) or len(raw) != 2
                or not all(isinstance(c, (int, float)) and not isinstance(c, bool)
                           and math.isfinite(float(c)) for c in raw)):
            problems.append(f"{names['ci']} must be two finite numbers [low, high]; got {raw!r}")
        elif raw[0] >= raw[1]:
            problems.append(f"{names['ci']} is reversed or empty: low {raw[0]!r} is not below "
                            f"high {raw[1]!r}; write [low, high]")
        else:
            ci = (float(raw[0]), float(raw[1]))
    if std_error is not None and std_error <= 0:
        problems.append(f"{names['std_error']} must be positive; got {reported.std_error!r}. A "
                        "standard error is never zero or negative: copy it from the table again")
        std_error = None
    if p_given is not None and not 0 < p_given <= 1:
        problems.append(f"{names['p_value']} must be a two-sided p-value in (0, 1]; got "
                        f"{reported.p_value!r}")
        p_given = None
    if dof is not None and dof <= 0:
        problems.append(f"{names['dof']} must be positive (residual degrees of freedom); got "
                        f"{reported.dof!r}")
        dof = None
    if outcome_sd is not None and outcome_sd <= 0:
        problems.append(f"{names['outcome_sd']} must be positive; got {reported.outcome_sd!r}")
        outcome_sd = None
    if ci_level is not None and not 0 < ci_level < 1:
        problems.append(f"{names['ci_level']} must be a level in (0, 1) such as 0.95; got "
                        f"{reported.ci_level!r}")
        ci_level = None
    for key, value in (("n", n), ("covariates", covariates)):
        if value is not None and value != int(value):
            problems.append(f"{names[key]} must be a whole number; got {getattr(reported, key)!r}")
    if n is not None and n < 3:
        problems.append(f"{names['n']} must be at least 3; got {reported.n!r}")
        n = None
    if covariates is not None and covariates < 0:
        problems.append(f"{names['covariates']} must be 0 or more; got {reported.covariates!r}")
        covariates = None
    if not isinstance(reported.outcome_common, bool):
        problems.append(f"{names['outcome_common']} must be true or false; got "
                        f"{reported.outcome_common!r}")
    if ratio:
        if estimate is not None and estimate <= 0:
            problems.append(f"{names['estimate']} is a {measure.replace('_', ' ')} and must be "
                            f"positive; got {reported.estimate!r}. Give the ratio itself "
                            "(e.g. 1.8), not its logarithm")
            estimate = None
        if ci is not None and ci[0] <= 0:
            problems.append(f"{names['ci']} of a {measure.replace('_', ' ')} must be positive; "
                            f"got {list(reported.ci)!r}")
            ci = None
    if estimate is not None and ci is not None and not ci[0] <= estimate <= ci[1]:
        problems.append(f"{names['estimate']} = {reported.estimate!r} lies outside "
                        f"{names['ci']} = {list(reported.ci)!r}; check that both come from the "
                        "same row of the table")
    if (std_error is None and ci is None and t_given is None and p_given is None
            and not any(getattr(reported, k) is not None for k in _PRECISION_FIELDS)):
        problems.append(f"the precision is missing: give one of {names['std_error']}, "
                        f"{names['ci']}, {names['t']} or {names['p_value']}")
    if estimate is not None and estimate == (1.0 if ratio else 0.0) and std_error is None \
            and ci is None and (t_given is not None or p_given is not None):
        problems.append(f"{names['estimate']} is exactly the null, so a t statistic or p-value "
                        f"cannot give its standard error; give {names['std_error']} or "
                        f"{names['ci']}")
    if p_given is not None and p_given == 1 and std_error is None and ci is None \
            and t_given is None:
        problems.append(f"{names['p_value']} = 1 means t = 0, which gives no standard error; "
                        f"give {names['std_error']} or {names['ci']}")
    if t_given is not None and t_given == 0 and std_error is None and ci is None:
        problems.append(f"{names['t']} = 0 gives no standard error; give "
                        f"{names['std_error']} or {names['ci']}")

    # degrees of freedom
    dof_source: str | None = None
    if dof is not None:
        dof_source = "dof"
        if n is not None and covariates is not None and n - covariates - 2 != dof:
            notes.append(f"{names['dof']} = {dof:g} differs from {names['n']} - "
                         f"{names['covariates']} - 2 = {n - covariates - 2:g}; the dof given "
                         "is used")
    elif n is not None and covariates is not None:
        dof = n - covariates - 2
        if dof <= 0:
            problems.append(f"{names['n']} = {n:g} with {names['covariates']} = {covariates:g} "
                            "leaves no residual degrees of freedom (dof = n - covariates - 2 "
                            "must be positive)")
            dof = None
        else:
            dof_source = "n - covariates - 2"
    elif n is not None:
        notes.append(f"{names['n']} is given without {names['covariates']}, so the residual "
                     f"degrees of freedom are unknown; give {names['covariates']} (the number "
                     f"of controls) or {names['dof']}")
    elif covariates is not None:
        notes.append(f"{names['covariates']} is given without {names['n']}; the residual "
                     "degrees of freedom are unknown")

    if problems:
        raise ReportedError(_paragraph(problems))
    assert estimate is not None

    # the analysis scale
    to_scale = math.log if ratio else (lambda v: v)
    est = to_scale(estimate)
    ci_scaled = None if ci is None else (to_scale(ci[0]), to_scale(ci[1]))
    level = ci_level if ci_level is not None else DEFAULT_CI_LEVEL
    if ci is not None and ci_level is None:
        notes.append(f"the interval is taken to be a {DEFAULT_CI_LEVEL:.0%} confidence "
                     f"interval; set {names['ci_level']} if the table used another level")
    critical_kind = "normal" if dof is None else "t"
    q = _critical(level, dof)
    if ratio and std_error is not None:
        notes.append(f"{names['std_error']} is read as the standard error of the log "
                     f"{measure.replace('_', ' ')}")

    if std_error is not None:
        se, se_source = std_error, "std_error"
    elif ci_scaled is not None:
        # se = (high - low) / (2 q)
        se = (ci_scaled[1] - ci_scaled[0]) / (2 * q)
        se_source = "ci"
        how = f"the t quantile at {dof:g} dof" if dof is not None else \
            "the normal quantile (dof unknown)"
        notes.append(f"the standard error {se:.4g} comes from the {level:.0%} interval's "
                     f"width with {how}, {q:.4f}" + (" on the log scale" if ratio else ""))
    elif t_given is not None:
        # se = |estimate / t|
        se, se_source = abs(est / t_given), "t"
        notes.append(f"the standard error {se:.4g} is |estimate / t|"
                     + (" on the log scale" if ratio else ""))
    else:
        assert p_given is not None
        # |t| = F^{-1}(1 - p/2), the two-sided quantile at level 1 - p
        abs_t = _critical(1 - p_given, dof)
        # a p-value within rounding of 1 gives |t| = 0: no SE (refused just below)
        se, se_source = (abs(est) / abs_t if abs_t > 0 else math.inf), "p_value"
        notes.append(f"the standard error {se:.4g} comes from the two-sided p-value with the "
                     f"{'t' if dof is not None else 'normal'} distribution (|t| = {abs_t:.4f}); "
                     "a rounded p-value (such as 0.001 or p < 0.05) gives only a rough SE")
    if not 0 < se < math.inf:
        # a width, t or p-value at the edge of double precision (or an infinite quantile at a
        # tiny dof) gives an SE of 0 or infinity, from which nothing can be bounded
        why = (f" (at {dof:g} residual degrees of freedom the {level:.0%} t quantile is "
               "infinite, so no width pins the SE down)" if se_source == "ci"
               and not math.isfinite(q) else "")
        raise ReportedError(_paragraph([(
            f"the standard error taken from {names[se_source]} is {se!r}, not a positive "
            f"finite number{why}; give {names['std_error']} as printed in the table, or "
            "check the numbers and their units")]))
    t = est / se
    p_value = float(2 * (stats.norm.sf(abs(t)) if dof is None else stats.t.sf(abs(t), dof)))

    _consistency(reported, names, notes, estimate=estimate, est=est, se=se, se_source=se_source,
                 t_given=t_given, p_given=p_given, ci=ci, ci_scaled=ci_scaled, q=q, level=level,
                 dof=dof, ratio=ratio)

    if ci_scaled is not None:
        low, high = ci_scaled
    else:
        low, high = est - q * se, est + q * se
        if not (math.isfinite(low) and math.isfinite(high)):
            why = (f"at {dof:g} residual degrees of freedom the {level:.0%} t quantile is "
                   "infinite; check the dof" if not math.isfinite(q) else
                   f"estimate ± {q:.3g} × SE passes the double range")
            text = (f"the interval computed from the standard error has no finite limits "
                    f"({why}); they are written as null")
            notes.append(text)
            warnings.warn(text, DegenerateWarning, stacklevel=2)
    if outcome_sd is not None and ratio:
        notes.append(f"{names['outcome_sd']} is only used for a difference; it is ignored for "
                     f"a {measure.replace('_', ' ')}")
    if reported.outcome_common and not ratio:
        notes.append(f"{names['outcome_common']} only matters for odds and hazard ratios; it "
                     "is ignored for a difference")
    return Summary(measure=measure, estimate=est, std_error=se, t=t, p_value=p_value, dof=dof,
                   ci_low=low, ci_high=high, ci_level=level, se_source=se_source,
                   dof_source=dof_source, critical=critical_kind,
                   outcome_common=bool(reported.outcome_common), outcome_sd=outcome_sd,
                   ci_given=ci is not None, notes=tuple(notes), original=(estimate, ci))


def _consistency(reported: Reported, names: Mapping[str, str], notes: list[str], *,
                 estimate: float, est: float, se: float, se_source: str,
                 t_given: float | None, p_given: float | None,
                 ci: tuple[float, float] | None, ci_scaled: tuple[float, float] | None,
                 q: float, level: float, dof: float | None, ratio: bool) -> None:
    """Note any two inputs that disagree by more than the rounding of their printed digits."""
    h_est = _half_unit(estimate)
    # the estimate's range on the analysis scale, given its rounding
    if ratio:
        est_low = math.log(max(estimate - h_est, 1e-300))
        est_high = math.log(estimate + h_est)
    else:
        est_low, est_high = estimate - h_est, estimate + h_est
    h_se = _half_unit(se) if se_source == "std_error" else 0.0
    log_note = " (log scale)" if ratio else ""
    if ci is not None and ci_scaled is not None:
        h_low, h_high = _half_unit(ci[0]), _half_unit(ci[1])
        if ratio:
            width_low = math.log(max(ci[1] - h_high, 1e-300)) - math.log(ci[0] + h_low)
            width_high = math.log(ci[1] + h_high) - math.log(max(ci[0] - h_low, 1e-300))
        else:
            width_low = ci[1] - ci[0] - h_low - h_high
            width_high = ci[1] - ci[0] + h_low + h_high
        if se_source == "std_error":
            # with unknown dof the table may have used a t quantile (larger than the normal)
            q_large = q if dof is not None else _critical(level, 5)
            se_low, se_high = width_low / (2 * q_large), width_high / (2 * q)
            if not se_low - h_se <= se <= se_high + h_se:
                implied = (ci_scaled[1] - ci_scaled[0]) / (2 * q)
                notes.append(f"{names['std_error']} = {se:g} disagrees with {names['ci']}, whose "
                             f"width implies a standard error of {implied:.4g}{log_note}; the "
                             "standard error given is used. Check the interval's level and that "
                             "both come from the same row")
        middle = (ci_scaled[0] + ci_scaled[1]) / 2
        slack = (est_high - est_low) / 2 + (width_high - width_low) / 2
        if abs(middle - est) > slack + 0.01 * (ci_scaled[1] - ci_scaled[0]):
            shown = math.exp(middle) if ratio else middle
            notes.append(f"{names['ci']} is not symmetric{' on the log scale' if ratio else ''} "
                         f"around the estimate (its midpoint is {shown:.4g}); it may be a "
                         "bootstrap or profile interval, so a standard error taken from its "
                         "width is approximate")
    # the range of |estimate / SE| the printed digits allow
    if est_low <= 0 <= est_high:
        abs_est_min = 0.0
    else:
        abs_est_min = min(abs(est_low), abs(est_high))
    abs_est_max = max(abs(est_low), abs(est_high))
    t_min = abs_est_min / (se + h_se)
    t_max = abs_est_max / max(se - h_se, 1e-300)
    if t_given is not None:
        if se_source != "t":
            h_t = _half_unit(t_given)
            if not t_min - h_t <= abs(t_given) <= t_max + h_t:
                notes.append(f"{names['t']} = {t_given:g} disagrees with estimate / SE = "
                             f"{est / se:.4g}{log_note} by more than rounding; the "
                             f"{_SOURCE_WORDS[se_source]} is used")
        if t_given * est < 0:
            notes.append(f"{names['t']} = {t_given:g} has the opposite sign to the estimate; "
                         "its size is used (tables often print |t|)")
    if p_given is not None and se_source != "p_value":
        distribution = stats.norm if dof is None else stats.t(dof)
        # a larger |t| gives a smaller p
        p_low = float(2 * distribution.sf(t_max))
        p_high = float(2 * distribution.sf(t_min))
        h_p = _half_unit(p_given)
        if not p_low - h_p <= p_given <= p_high + h_p:
            implied = float(2 * distribution.sf(abs(est / se)))
            notes.append(f"{names['p_value']} = {p_given:g} disagrees with the p-value "
                         f"{implied:.3g} implied by the estimate and its "
                         f"{'standard error' if se_source != 't' else 't'}; the "
                         f"{_SOURCE_WORDS[se_source]} is used")

"""Sensitivity of an estimate to a confounder nobody measured.

Every function here is a pure formula on plain numbers (an estimate, its standard error, its
residual degrees of freedom, partial R² values, ratios), vectorised with numpy, so that the
audit can feed it from :class:`~causalcheck.moments.Moments` and ``vet`` from a published table.

Four families of methods, each with its usual name:

**Partial-R² bounds** (Cinelli & Hazlett 2020). Suppose the regression of the outcome Y on the
treatment D and covariates X left out a confounder Z. Describe Z by two numbers: its partial R²
with the outcome given D and X, :math:`R^2_{Y\\sim Z|D,X}` (``r2yz``), and its partial R² with
the treatment given X, :math:`R^2_{D\\sim Z|X}` (``r2dz``). Then, exactly,

.. math::

    |\\hat\\tau_{\\text{res}} - \\hat\\tau| = \\operatorname{se}(\\hat\\tau_{\\text{res}})
        \\sqrt{\\text{dof}}\\, \\sqrt{\\frac{R^2_{Y\\sim Z|D,X}\\, R^2_{D\\sim Z|X}}
                                      {1 - R^2_{D\\sim Z|X}}} ,

with the standard error of the estimate that includes Z

.. math::

    \\operatorname{se}(\\hat\\tau) = \\operatorname{se}(\\hat\\tau_{\\text{res}})
        \\sqrt{\\frac{1 - R^2_{Y\\sim Z|D,X}}{1 - R^2_{D\\sim Z|X}}}
        \\sqrt{\\frac{\\text{dof}}{\\text{dof} - 1}} .

The *robustness value* is the common partial R² that a confounder needs with both the treatment
and the outcome to move the estimate (or its confidence interval) to a threshold.
**Benchmarks** bound a confounder ``k`` times as strong as an observed covariate.

**The two-number sweep** (textbook omitted-variable-bias algebra): bias = γ·δ.

**E-values** (VanderWeele & Ding 2017) for ratio measures, with the usual conversions of odds
ratios, hazard ratios and standardised mean differences to risk ratios.

**Coefficient stability** (Oster 2019): how much selection on unobservables, relative to the
selection on the observed controls, would move the estimate to the threshold.

Sign convention
---------------
A confounder may push the estimate either way. ``direction="toward"`` (the default) assumes the
bias moves the estimate *toward the threshold* (the direction that can overturn the claim):
``adjusted = estimate - sign(estimate - threshold) * |bias|``; ``direction="away"`` adds it.
When ``estimate == threshold``, "toward" subtracts the bias.

References
----------
Cinelli, C. & Hazlett, C. (2020). Making sense of sensitivity: extending omitted variable bias.
    *Journal of the Royal Statistical Society: Series B*, 82(1), 39-67.
VanderWeele, T. J. & Ding, P. (2017). Sensitivity analysis in observational research:
    introducing the E-value. *Annals of Internal Medicine*, 167(4), 268-274.
Ding, P. & VanderWeele, T. J. (2016). Sensitivity analysis without assumptions.
    *Epidemiology*, 27(3), 368-377.
VanderWeele, T. J. (2017). On a square-root transformation of the odds ratio for a common
    outcome. *Epidemiology*, 28(6), e58-e60.
Chinn, S. (2000). A simple method for converting an odds ratio to effect size for use in
    meta-analysis. *Statistics in Medicine*, 19(22), 3127-3131.
Oster, E. (2019). Unobservable selection and coefficient stability: theory and evidence.
    *Journal of Business & Economic Statistics*, 37(2), 187-204.
Angrist, J. D. & Pischke, J.-S. (2009). *Mostly Harmless Econometrics*, Sec. 3.2.

Examples
--------
The Darfur example of Cinelli & Hazlett (2020): estimate 0.097, SE 0.023, 783 dof.

>>> rv = robustness_values(0.09731582, 0.02325654, 783)
>>> round(rv.partial_r2, 4), round(rv.point, 4), round(rv.ci, 4)
(0.0219, 0.1388, 0.0763)
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import stats

from .errors import NumericsError

__all__ = [
    "DIRECTIONS",
    "RATIO_MEASURES",
    "BenchmarkBounds",
    "BiasSweep",
    "BoundGrid",
    "Bounds",
    "CoefficientStability",
    "EValue",
    "ExtremeBound",
    "RobustnessValues",
    "adjusted_std_error",
    "benchmark_bounds",
    "benchmark_partial_r2",
    "bias_bound",
    "bias_sweep",
    "bounds",
    "bounds_grid",
    "coefficient_stability",
    "critical_t",
    "e_value",
    "extreme_bound",
    "group_partial_r2",
    "partial_r2_from_r2",
    "partial_r2_from_t",
    "risk_ratio_e_value",
    "robustness_value",
    "robustness_values",
    "smd_to_risk_ratio",
    "to_risk_ratio",
]

DIRECTIONS = ("toward", "away")
RATIO_MEASURES = ("risk_ratio", "odds_ratio", "hazard_ratio")

ArrayLike = float | Sequence[float] | np.ndarray


# --------------------------------------------------------------------------------------------
# Checks shared by every function: bad arguments are errors, named and explained.


def _finite(name: str, value: Any) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise NumericsError(f"{name} must be a number; got {value!r}. Pass a plain finite "
                            "number")
    number = float(value)
    if not math.isfinite(number):
        raise NumericsError(f"{name} must be a finite number; got {value!r}")
    return number


def _core(estimate: Any, std_error: Any, dof: Any) -> tuple[float, float, float]:
    estimate = _finite("estimate", estimate)
    std_error = _finite("std_error", std_error)
    if std_error <= 0:
        raise NumericsError(f"std_error must be positive; got {std_error!r}. A standard error "
                            "is never zero or negative")
    dof = _finite("dof", dof)
    if dof <= 1:
        raise NumericsError(f"dof (residual degrees of freedom) must be above 1 for the "
                            f"partial-R² bounds; got {dof!r}")
    # every bound is a multiple of se·√dof: outside this range it under- or overflows doubles
    scale = std_error * math.sqrt(dof)
    if not _SCALE_RANGE[0] <= scale <= _SCALE_RANGE[1]:
        raise NumericsError(f"std_error × √dof = {scale:.3g} (std_error {std_error!r}, dof "
                            f"{dof!r}) is outside the range the bounds can be computed in "
                            f"({_SCALE_RANGE[0]:g} to {_SCALE_RANGE[1]:g}); express the outcome "
                            "in other units")
    return estimate, std_error, dof


# se·√dof must stay inside this range, and the partial Cohen's f below its limit, for the
# bounds (products of them with factors up to about 1e8) to stay finite and normal doubles
_SCALE_RANGE = (1e-290, 1e290)
_F_LIMIT = 1e150


def _cohen_f(estimate: float, threshold: float, std_error: float, dof: float) -> float:
    """Partial Cohen's f of the distance to the threshold, checked to be computable."""
    # f_theta = |estimate - threshold| / (se sqrt(dof)); _core keeps se·√dof a normal double,
    # and a quotient past the double range is inf (Python floats), caught below
    f = abs(estimate - threshold) / (std_error * math.sqrt(dof))
    if not f <= _F_LIMIT:
        raise NumericsError(
            f"the estimate {estimate!r} lies {f:.3g} standard errors (times 1/√dof) from the "
            f"threshold {threshold!r}, beyond what double precision can bound (at most "
            f"{_F_LIMIT:g}); no real table is that precise, so check the standard error's units "
            "and the threshold")
    return f


def _alpha(alpha: Any) -> float:
    alpha = _finite("alpha", alpha)
    if not 0 < alpha < 1:
        raise NumericsError(f"alpha must lie strictly between 0 and 1, such as 0.05; got "
                            f"{alpha!r}")
    return alpha


def _direction(direction: str) -> float:
    if direction not in DIRECTIONS:
        raise NumericsError(f"direction must be 'toward' or 'away' (the threshold); got "
                            f"{direction!r}")
    return -1.0 if direction == "toward" else 1.0


def _r2(name: str, value: ArrayLike, *, allow_one: bool) -> np.ndarray:
    try:
        array = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise NumericsError(f"{name} must be partial R² values (numbers in [0, 1)); got "
                            f"{value!r}") from None
    upper_ok = array <= 1 if allow_one else array < 1
    if not np.all(np.isfinite(array) & (array >= 0) & upper_ok):
        bad = float(array[~(np.isfinite(array) & (array >= 0) & upper_ok)].ravel()[0])
        rule = "[0, 1]" if allow_one else "[0, 1)"
        raise NumericsError(f"{name} must be partial R² values in {rule}; got {bad!r}")
    return array


def _plain(value: Any) -> Any:
    """numpy arrays and scalars to lists and floats, for ``to_dict``."""
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, np.generic):
        return value.item()
    return value


def critical_t(alpha: float, dof: float | None) -> float:
    """Two-sided critical value: the ``1 - alpha/2`` quantile of Student's t with ``dof``.

    With ``dof=None`` (unknown) or infinite, the standard normal quantile.

    >>> round(critical_t(0.05, None), 4), round(critical_t(0.05, 10), 4)
    (1.96, 2.2281)
    """
    alpha = _alpha(alpha)
    if dof is None or math.isinf(dof):
        return float(stats.norm.ppf(1 - alpha / 2))
    quantile = float(stats.t.ppf(1 - alpha / 2, dof))
    # below about 0.01 dof the true quantile passes the double range and scipy's answer is a
    # finite number that is wrong; the round trip through the tail area shows it
    if dof < 1 and not math.isclose(2 * float(stats.t.sf(quantile, dof)), alpha, rel_tol=1e-6):
        return math.inf
    return quantile


# --------------------------------------------------------------------------------------------
# Partial R² and the bias bound


def partial_r2_from_t(t: ArrayLike, dof: ArrayLike) -> np.ndarray | float:
    """Partial R² of a regressor with the outcome from its t statistic.

    Parameters
    ----------
    t : float or array
        t statistic of the coefficient.
    dof : float or array
        Residual degrees of freedom of the regression.

    Returns
    -------
    float or ndarray
        :math:`R^2 = t^2 / (t^2 + \\text{dof})`.

    References
    ----------
    Cinelli & Hazlett (2020), Sec. 3 (partial R² from the t statistic).

    >>> round(partial_r2_from_t(4.18445, 783), 5)
    0.02187
    """
    t = np.asarray(t, dtype=float)
    dof = np.asarray(dof, dtype=float)
    with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
        # R^2_{Y~D|X} = t^2 / (t^2 + dof) = 1 / (1 + (sqrt(dof)/t)^2), the second form where
        # t^2 would overflow
        result = np.where(np.abs(t) > 1e100, 1 / (1 + (np.sqrt(dof) / t) ** 2),
                          t**2 / (t**2 + dof))
    return float(result) if result.ndim == 0 else result


def partial_r2_from_r2(r2_full: ArrayLike, r2_reduced: ArrayLike) -> np.ndarray | float:
    """Partial R² of a regressor (or a group) from the R² with and without it.

    .. math:: R^2_{Y\\sim X_j|W} = \\frac{R^2_{Y\\sim X_j,W} - R^2_{Y\\sim W}}{1 - R^2_{Y\\sim W}}

    This is the definition of the partial R² (the share of the residual variance left by ``W``
    that ``X_j`` explains); for a group of columns (the dummies of a categorical) it is the
    group's partial R², as used by :func:`benchmark_partial_r2` (Cinelli & Hazlett 2020,
    Sec. 6.2).

    >>> round(partial_r2_from_r2(0.5, 0.4), 4)
    0.1667
    """
    full = np.asarray(r2_full, dtype=float)
    reduced = np.asarray(r2_reduced, dtype=float)
    result = (full - reduced) / (1 - reduced)
    return float(result) if result.ndim == 0 else result


def group_partial_r2(f_statistic: float, numerator_dof: float, dof: float) -> float:
    """Partial R² of a group of ``numerator_dof`` regressors from its F statistic.

    .. math:: R^2 = \\frac{F\\, q}{F\\, q + \\text{dof}}

    with ``q`` the number of columns in the group and ``dof`` the residual degrees of freedom
    of the regression that includes them (for ``q = 1`` this is ``t²/(t² + dof)``).

    >>> round(group_partial_r2(4.18445**2, 1, 783), 5)
    0.02187
    """
    f_statistic = _finite("f_statistic", f_statistic)
    numerator_dof = _finite("numerator_dof", numerator_dof)
    dof = _finite("dof", dof)
    if f_statistic < 0 or numerator_dof <= 0 or dof <= 0:
        raise NumericsError(f"group_partial_r2 needs F >= 0 and positive degrees of freedom; "
                            f"got F={f_statistic!r}, q={numerator_dof!r}, dof={dof!r}")
    # F = (R^2 / q) / ((1 - R^2) / dof)  <=>  R^2 = F q / (F q + dof)
    return f_statistic * numerator_dof / (f_statistic * numerator_dof + dof)


def bias_bound(std_error: float, dof: float, r2yz: ArrayLike, r2dz: ArrayLike
               ) -> np.ndarray | float:
    """Absolute bias caused by a confounder of the given strength (Cinelli & Hazlett 2020).

    Parameters
    ----------
    std_error : float
        Standard error of the estimate from the regression that leaves the confounder out.
    dof : float
        Residual degrees of freedom of that regression.
    r2yz : float or array
        Partial R² of the confounder with the outcome, given the treatment and covariates.
    r2dz : float or array
        Partial R² of the confounder with the treatment, given the covariates; below 1.

    Returns
    -------
    float or ndarray
        .. math:: |b| = \\operatorname{se}\\sqrt{\\text{dof}}
                  \\sqrt{R^2_{Y\\sim Z|D,X} R^2_{D\\sim Z|X} / (1 - R^2_{D\\sim Z|X})}

    References
    ----------
    Cinelli & Hazlett (2020), Sec. 3 (the partial-R² form of omitted-variable bias).

    >>> round(bias_bound(0.0232, 783, 0.1246, 0.0092), 4)
    0.0221
    """
    _, std_error, dof = _core(0.0, std_error, dof)
    r2yz = _r2("r2yz", r2yz, allow_one=True)
    r2dz = _r2("r2dz", r2dz, allow_one=False)
    # |bias| = se * sqrt(dof) * sqrt(r2yz * r2dz / (1 - r2dz))
    result = std_error * np.sqrt(dof) * np.sqrt(r2yz * r2dz / (1 - r2dz))
    return float(result) if result.ndim == 0 else result


def adjusted_std_error(std_error: float, dof: float, r2yz: ArrayLike, r2dz: ArrayLike
                       ) -> np.ndarray | float:
    """Standard error the estimate would have with the confounder in the regression.

    .. math:: \\operatorname{se}\\sqrt{(1 - R^2_{Y\\sim Z|D,X})/(1 - R^2_{D\\sim Z|X})}
              \\sqrt{\\text{dof}/(\\text{dof} - 1)}

    References
    ----------
    Cinelli & Hazlett (2020), Sec. 3.

    >>> round(adjusted_std_error(0.0232, 783, 0.1246, 0.0092), 4)
    0.0218
    """
    _, std_error, dof = _core(0.0, std_error, dof)
    r2yz = _r2("r2yz", r2yz, allow_one=True)
    r2dz = _r2("r2dz", r2dz, allow_one=False)
    # se_adj = se * sqrt((1 - r2yz) / (1 - r2dz)) * sqrt(dof / (dof - 1))
    result = std_error * np.sqrt((1 - r2yz) / (1 - r2dz)) * np.sqrt(dof / (dof - 1))
    return float(result) if result.ndim == 0 else result


@dataclass(frozen=True, eq=False)
class Bounds:
    """Estimates adjusted for hypothetical confounders, element by element.

    Every array has the broadcast shape of ``r2dz`` and ``r2yz``. ``dof`` is the residual
    degrees of freedom of the adjusted regression (one fewer than the reported one), used for
    the confidence interval.
    """

    estimate: float
    std_error: float
    dof: float
    threshold: float
    alpha: float
    direction: str
    r2dz: np.ndarray
    r2yz: np.ndarray
    bias: np.ndarray
    adjusted_estimate: np.ndarray
    adjusted_std_error: np.ndarray
    t: np.ndarray
    ci_low: np.ndarray
    ci_high: np.ndarray

    def reaches_threshold(self) -> np.ndarray:
        """True where the adjusted estimate is at or beyond the threshold."""
        side = np.sign(self.estimate - self.threshold) or 1.0
        return side * (self.adjusted_estimate - self.threshold) <= 0

    def ci_includes_threshold(self) -> np.ndarray:
        """True where the adjusted confidence interval contains the threshold."""
        return (self.ci_low <= self.threshold) & (self.threshold <= self.ci_high)

    def to_dict(self) -> dict[str, Any]:
        return {k: _plain(getattr(self, k)) for k in self.__dataclass_fields__}

    def rows(self) -> list[dict[str, float]]:
        """One dictionary per element (flattened), for tables and CSV."""
        shape = np.broadcast_shapes(self.r2dz.shape, self.r2yz.shape)
        columns = {k: np.broadcast_to(getattr(self, k), shape).ravel()
                   for k in ("r2dz", "r2yz", "bias", "adjusted_estimate",
                             "adjusted_std_error", "t", "ci_low", "ci_high")}
        return [{k: float(v[i]) for k, v in columns.items()}
                for i in range(int(np.prod(shape)))]


def bounds(estimate: float, std_error: float, dof: float, r2dz: ArrayLike, r2yz: ArrayLike,
           *, threshold: float = 0.0, alpha: float = 0.05, direction: str = "toward") -> Bounds:
    """Adjusted estimate, SE, t and CI for confounders of the given partial R² values.

    Parameters
    ----------
    estimate, std_error, dof : float
        The reported (restricted) estimate, its standard error and residual dof.
    r2dz : float or array
        Partial R² of the confounder with the treatment given the covariates, in [0, 1).
    r2yz : float or array
        Partial R² of the confounder with the outcome given treatment and covariates, in [0, 1].
        Broadcast against ``r2dz``.
    threshold : float, keyword-only
        The value at which the claim is overturned (0 by default).
    alpha : float, keyword-only
        1 − confidence level of the interval.
    direction : {"toward", "away"}, keyword-only
        Whether the bias moves the estimate toward the threshold (default) or away from it.

    Returns
    -------
    Bounds

    Notes
    -----
    .. math::

        \\hat\\tau_{adj} = \\hat\\tau \\mp |b|, \\quad
        t_{adj} = \\hat\\tau_{adj} / \\operatorname{se}_{adj}, \\quad
        \\text{CI} = \\hat\\tau_{adj} \\pm t^*_{1-\\alpha/2,\\,\\text{dof}-1}\\operatorname{se}_{adj}

    with :math:`|b|` from :func:`bias_bound`, :math:`\\operatorname{se}_{adj}` from
    :func:`adjusted_std_error`; the adjusted regression has one more regressor, hence
    ``dof - 1``.

    References
    ----------
    Cinelli & Hazlett (2020), Sec. 3-4.

    >>> b = bounds(0.0973, 0.0232, 783, 0.0092, 0.1246)
    >>> round(float(b.adjusted_estimate), 4), round(float(b.ci_low), 4)
    (0.0752, 0.0324)
    """
    estimate, std_error, dof = _core(estimate, std_error, dof)
    threshold = _finite("threshold", threshold)
    alpha = _alpha(alpha)
    sign = _direction(direction)
    r2dz_a = _r2("r2dz", r2dz, allow_one=False)
    r2yz_a = _r2("r2yz", r2yz, allow_one=True)
    bias = np.asarray(bias_bound(std_error, dof, r2yz_a, r2dz_a))
    se_adj = np.asarray(adjusted_std_error(std_error, dof, r2yz_a, r2dz_a))
    # the side of the threshold the estimate is on; "toward" moves it to the other side
    side = 1.0 if estimate >= threshold else -1.0
    adjusted = estimate + sign * side * bias
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        t = adjusted / se_adj
    critical = critical_t(alpha, dof - 1)
    # CI = adjusted ± t*_{dof-1} se_adj (of infinite width when dof - 1 is tiny; nan where
    # an infinite quantile meets a zero SE, at r2yz = 1)
    with np.errstate(over="ignore", invalid="ignore"):
        half_width = critical * se_adj
    return Bounds(
        estimate=estimate, std_error=std_error, dof=dof - 1, threshold=threshold, alpha=alpha,
        direction=direction, r2dz=r2dz_a, r2yz=r2yz_a, bias=bias, adjusted_estimate=adjusted,
        adjusted_std_error=se_adj, t=t, ci_low=adjusted - half_width,
        ci_high=adjusted + half_width)


@dataclass(frozen=True, eq=False)
class BoundGrid:
    """Adjusted estimates on a grid: rows are ``r2dz`` values, columns ``r2yz`` values.

    ``bounds`` holds the 2-D arrays; the contour where the adjusted estimate equals the
    threshold is given by :meth:`tipping_r2yz`.
    """

    r2dz: np.ndarray
    r2yz: np.ndarray
    bounds: Bounds

    def tipping_r2yz(self) -> np.ndarray:
        """For each ``r2dz`` of the grid, the ``r2yz`` that brings the estimate to the threshold.

        From :math:`|\\hat\\tau - \\theta| = |b|`:
        :math:`R^2_{Y\\sim Z} = (\\hat\\tau-\\theta)^2 (1 - R^2_{D\\sim Z}) /
        (\\operatorname{se}^2\\,\\text{dof}\\, R^2_{D\\sim Z})`; ``nan`` where it would exceed 1
        (no confounder that weak with the treatment can do it) or ``r2dz = 0``.
        """
        b = self.bounds
        dof = b.dof + 1
        # f^2 = (estimate - threshold)^2 / (se^2 dof), formed from f so se^2 cannot underflow
        f = np.float64(abs(b.estimate - b.threshold) / (b.std_error * math.sqrt(dof)))
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            needed = f**2 * (1 - self.r2dz) / self.r2dz
        return np.where((needed <= 1) & (self.r2dz > 0), needed, np.nan)

    def to_dict(self) -> dict[str, Any]:
        b = self.bounds
        return {"r2dz": self.r2dz.tolist(), "r2yz": self.r2yz.tolist(),
                "adjusted_estimate": b.adjusted_estimate.tolist(),
                "adjusted_std_error": b.adjusted_std_error.tolist(), "t": b.t.tolist(),
                "ci_low": b.ci_low.tolist(), "ci_high": b.ci_high.tolist(),
                "tipping_r2yz": self.tipping_r2yz().tolist(), "threshold": b.threshold,
                "alpha": b.alpha, "direction": b.direction}


def bounds_grid(estimate: float, std_error: float, dof: float, r2dz: ArrayLike,
                r2yz: ArrayLike, *, threshold: float = 0.0, alpha: float = 0.05,
                direction: str = "toward") -> BoundGrid:
    """:func:`bounds` on the outer product of ``r2dz`` (rows) and ``r2yz`` (columns).

    The data behind a contour plot of the adjusted estimate (Cinelli & Hazlett 2020, Sec. 5).

    >>> g = bounds_grid(0.0973, 0.0232, 783, [0, 0.1], [0, 0.1, 0.2])
    >>> g.bounds.adjusted_estimate.shape
    (2, 3)
    """
    rows = _r2("r2dz", r2dz, allow_one=False).ravel()
    columns = _r2("r2yz", r2yz, allow_one=True).ravel()
    result = bounds(estimate, std_error, dof, rows[:, None], columns[None, :],
                    threshold=threshold, alpha=alpha, direction=direction)
    return BoundGrid(r2dz=rows, r2yz=columns, bounds=result)


# --------------------------------------------------------------------------------------------
# Robustness values


def _rv_from_f(f: np.ndarray) -> np.ndarray:
    # solves r / sqrt(1 - r) = f, i.e. r = (sqrt(f^4 + 4 f^2) - f^2) / 2, written in the form
    # r = 2 f / (sqrt(f^2 + 4) + f), which has no cancellation for large f
    return 2 * f / (np.sqrt(f**2 + 4) + f)


def robustness_value(estimate: float, std_error: float, dof: float, *, threshold: float = 0.0,
                     alpha: float | None = None) -> float:
    """Robustness value: the partial R² a confounder needs with both treatment and outcome.

    Parameters
    ----------
    estimate, std_error, dof : float
        Reported estimate, standard error and residual degrees of freedom.
    threshold : float, keyword-only
        The value the estimate must reach to overturn the claim (default 0).
    alpha : float or None, keyword-only
        ``None`` for the point estimate (:math:`RV_q`); a level such as 0.05 for the
        confidence interval (:math:`RV_{q,\\alpha}`: the strength that makes the ``1 - alpha``
        interval reach the threshold).

    Returns
    -------
    float
        In [0, 1]. Zero when the estimate (or the interval) is already at the threshold.

    Notes
    -----
    With a threshold θ the relevant partial Cohen's f is
    :math:`f_\\theta = |\\hat\\tau - \\theta| / (\\operatorname{se}\\sqrt{\\text{dof}})`
    (θ = 0 gives :math:`f = t/\\sqrt{\\text{dof}}`; the paper's :math:`f_q = q|f|` with
    :math:`q = |\\hat\\tau - \\theta|/|\\hat\\tau|`). For the point estimate, a confounder with
    both partial R² equal to r has bias :math:`\\operatorname{se}\\sqrt{\\text{dof}}\\,r/\\sqrt{1-r}`,
    so

    .. math:: RV = \\tfrac12\\left(\\sqrt{f_\\theta^4 + 4 f_\\theta^2} - f_\\theta^2\\right).

    For the interval, with :math:`f^* = t^*_{1-\\alpha/2,\\text{dof}-1}/\\sqrt{\\text{dof}-1}`,
    the interval reaches θ when :math:`|b| + t^*\\operatorname{se}_{adj} \\ge |\\hat\\tau-\\theta|`.
    The largest left side over confounders with both partial R² at most r is at
    :math:`R^2_{D\\sim Z} = r` and :math:`R^2_{Y\\sim Z} = \\min(r, r/(r + f^{*2}))` (a larger
    :math:`R^2_{Y\\sim Z}` also shrinks the SE). Solving gives

    .. math::

        RV_{\\alpha} = \\begin{cases}
            0 & f_\\theta \\le f^* \\\\
            \\tfrac12\\left(\\sqrt{x^4 + 4x^2} - x^2\\right),\\ x = f_\\theta - f^* &
                f_\\theta f^* \\le 1 \\\\
            (f_\\theta^2 - f^{*2}) / (1 + f_\\theta^2) & f_\\theta f^* > 1 .
        \\end{cases}

    References
    ----------
    Cinelli & Hazlett (2020), Sec. 4 (robustness value), with the threshold generalisation of
    their :math:`RV_q`.

    >>> round(robustness_value(0.09731582, 0.02325654, 783), 4)
    0.1388
    >>> round(robustness_value(0.09731582, 0.02325654, 783, alpha=0.05), 4)
    0.0763
    """
    if alpha is None:
        return robustness_values(estimate, std_error, dof, threshold=threshold).point
    return robustness_values(estimate, std_error, dof, threshold=threshold, alpha=alpha).ci


@dataclass(frozen=True)
class RobustnessValues:
    """Robustness values of one estimate and the numbers behind them.

    ``point``: both partial R² needed to bring the estimate to the threshold. ``ci``: to make
    the ``1 - alpha`` confidence interval reach it; the worst confounder at that strength has
    partial R² ``ci`` with the treatment and ``ci_r2yz`` with the outcome. ``partial_r2``: the
    treatment's partial R² with the outcome, ``t²/(t² + dof)``. ``extreme_r2dz``: the partial R²
    with the treatment that a confounder explaining *all* the residual variance of the outcome
    needs to bring the estimate to the threshold (``f_θ²/(1 + f_θ²)``).
    """

    estimate: float
    std_error: float
    dof: float
    threshold: float
    alpha: float
    t: float
    partial_r2: float
    f: float
    critical_f: float
    point: float
    ci: float
    ci_r2yz: float
    extreme_r2dz: float

    def to_dict(self) -> dict[str, Any]:
        return {k: getattr(self, k) for k in self.__dataclass_fields__}


def robustness_values(estimate: float, std_error: float, dof: float, *,
                      threshold: float = 0.0, alpha: float = 0.05) -> RobustnessValues:
    """Both robustness values, the partial R² and the extreme-case strength, at once.

    See :func:`robustness_value` for the formulas.

    References
    ----------
    Cinelli & Hazlett (2020), Sec. 4.

    >>> rv = robustness_values(0.0973, 0.0232, 783)
    >>> round(rv.extreme_r2dz, 4) == round(rv.partial_r2, 4)
    True
    """
    estimate, std_error, dof = _core(estimate, std_error, dof)
    threshold = _finite("threshold", threshold)
    alpha = _alpha(alpha)
    t = estimate / std_error
    # f_theta = |estimate - threshold| / (se sqrt(dof))
    f = _cohen_f(estimate, threshold, std_error, dof)
    point = float(_rv_from_f(np.asarray(f)))
    # f* = t*_{1-alpha/2, dof-1} / sqrt(dof - 1)
    critical_f = critical_t(alpha, dof - 1) / math.sqrt(dof - 1)
    if f <= critical_f:
        ci, ci_r2yz = 0.0, 0.0
    elif f * critical_f <= 1:
        ci = float(_rv_from_f(np.asarray(f - critical_f)))
        ci_r2yz = ci
    else:
        # interior optimum: r2yz = r / (r + f*^2) < r
        ci = (f**2 - critical_f**2) / (1 + f**2)
        ci_r2yz = ci / (ci + critical_f**2)
    # RV_alpha <= RV holds exactly; at f near 1e8 the two formulas round to either side of 1
    ci = min(ci, point)
    return RobustnessValues(
        estimate=estimate, std_error=std_error, dof=dof, threshold=threshold, alpha=alpha,
        t=t, partial_r2=float(partial_r2_from_t(t, dof)), f=f, critical_f=critical_f,
        point=point, ci=ci, ci_r2yz=ci_r2yz, extreme_r2dz=f**2 / (1 + f**2))


@dataclass(frozen=True, eq=False)
class ExtremeBound:
    """Adjusted estimates for a confounder that explains all the outcome's residual variance.

    With :math:`R^2_{Y\\sim Z|D,X} = 1` the bias is the largest any confounder of treatment
    strength ``r2dz`` can cause; the adjusted standard error is then zero, so only the
    estimate is given. ``r2dz_to_threshold`` is the treatment strength at which even this
    confounder just reaches the threshold.
    """

    estimate: float
    threshold: float
    r2dz: np.ndarray
    adjusted_estimate: np.ndarray
    r2dz_to_threshold: float

    def to_dict(self) -> dict[str, Any]:
        return {k: _plain(getattr(self, k)) for k in self.__dataclass_fields__}


def extreme_bound(estimate: float, std_error: float, dof: float,
                  r2dz: ArrayLike = (0.01, 0.02, 0.05, 0.1), *, threshold: float = 0.0,
                  direction: str = "toward") -> ExtremeBound:
    """The extreme scenario :math:`R^2_{Y\\sim Z|D,X} = 1`.

    .. math:: \\hat\\tau_{adj} = \\hat\\tau \\mp \\operatorname{se}\\sqrt{\\text{dof}}
              \\sqrt{R^2_{D\\sim Z|X}/(1 - R^2_{D\\sim Z|X})}

    and it reaches θ at :math:`R^2_{D\\sim Z|X} = f_\\theta^2/(1 + f_\\theta^2)`, which for θ = 0
    is the treatment's partial R² with the outcome.

    References
    ----------
    Cinelli & Hazlett (2020), Sec. 4 (the extreme scenario and the partial R² of the
    treatment with the outcome as a bound).

    >>> e = extreme_bound(0.0973, 0.0232, 783, [0.0219])
    >>> abs(float(e.adjusted_estimate[0])) < 0.001
    True
    """
    estimate, std_error, dof = _core(estimate, std_error, dof)
    threshold = _finite("threshold", threshold)
    sign = _direction(direction)
    values = _r2("r2dz", r2dz, allow_one=False)
    side = 1.0 if estimate >= threshold else -1.0
    adjusted = estimate + sign * side * np.asarray(bias_bound(std_error, dof, 1.0, values))
    # f^2 = (estimate - threshold)^2 / (se^2 dof), from f so that se^2 cannot underflow
    f2 = _cohen_f(estimate, threshold, std_error, dof) ** 2
    return ExtremeBound(estimate=estimate, threshold=threshold, r2dz=values,
                        adjusted_estimate=adjusted, r2dz_to_threshold=f2 / (1 + f2))


# --------------------------------------------------------------------------------------------
# Benchmarks


def benchmark_partial_r2(r2dxj: ArrayLike, r2yxj: ArrayLike, kd: ArrayLike,
                         ky: ArrayLike | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Strength of a confounder ``kd`` (``ky``) times as strong as a covariate ``X_j``.

    Parameters
    ----------
    r2dxj : float or array
        Partial R² of ``X_j`` with the treatment given the other covariates,
        :math:`R^2_{D\\sim X_j|X_{-j}}`. For a categorical covariate, the group partial R² of
        its dummy columns.
    r2yxj : float or array
        Partial R² of ``X_j`` with the outcome given the treatment and the other covariates,
        :math:`R^2_{Y\\sim X_j|D,X_{-j}}`.
    kd, ky : float or array
        Multipliers: the confounder explains ``kd`` times the treatment variance and ``ky``
        times the outcome variance that ``X_j`` explains (given the rest). ``ky`` defaults
        to ``kd``.

    Returns
    -------
    (r2dz, r2yz) : tuple of ndarray
        Bounds on :math:`R^2_{D\\sim Z|X}` and :math:`R^2_{Y\\sim Z|D,X}`. ``r2dz`` is ``nan``
        where ``kd · r2dxj >= 1`` (no such confounder exists); ``r2yz`` is capped at 1.

    Notes
    -----
    Assuming Z is orthogonal to :math:`X_j` given the other covariates,

    .. math::

        R^2_{D\\sim Z|X} = k_D \\frac{R^2_{D\\sim X_j}}{1 - R^2_{D\\sim X_j}}, \\qquad
        R^2_{Z\\sim X_j|D} = \\frac{k_D (R^2_{D\\sim X_j})^2}
                                {(1 - k_D R^2_{D\\sim X_j})(1 - R^2_{D\\sim X_j})},

    .. math::

        R^2_{Y\\sim Z|D,X} \\le \\eta^2 \\frac{R^2_{Y\\sim X_j}}{1 - R^2_{Y\\sim X_j}}, \\qquad
        \\eta = \\frac{\\sqrt{k_Y} + \\sqrt{R^2_{Z\\sim X_j|D}}}{\\sqrt{1 - R^2_{Z\\sim X_j|D}}} .

    The second term of η is the association that conditioning on the treatment (a collider
    of Z and :math:`X_j`) creates. The same formulas hold for a group of columns with group
    partial R² values, because conditioning on D correlates Z only with the one combination
    of the group that predicts D.

    References
    ----------
    Cinelli & Hazlett (2020), Sec. 6.1-6.2 (bounds from observed covariates).

    >>> r2dz, r2yz = benchmark_partial_r2(0.00912, 0.1089, [1, 2, 3])
    >>> [round(float(v), 4) for v in r2dz], [round(float(v), 3) for v in r2yz]
    ([0.0092, 0.0184, 0.0276], [0.124, 0.249, 0.374])
    """
    r2dxj_a = _r2("r2dxj", r2dxj, allow_one=False)
    r2yxj_a = _r2("r2yxj", r2yxj, allow_one=False)
    r2dz, r2yz, _ = _benchmark_strengths(r2dxj_a, r2yxj_a, kd, ky)
    return r2dz, r2yz


def _benchmark_strengths(r2dxj: np.ndarray, r2yxj: np.ndarray, kd: ArrayLike,
                         ky: ArrayLike | None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The formulas of :func:`benchmark_partial_r2`; also says where r2yz was capped at 1."""
    kd_a = np.asarray(kd, dtype=float)
    ky_a = kd_a if ky is None else np.asarray(ky, dtype=float)
    if not (np.all(np.isfinite(kd_a) & (kd_a >= 0)) and np.all(np.isfinite(ky_a) & (ky_a >= 0))):
        raise NumericsError(f"benchmark multipliers must be finite numbers of 0 or more; got "
                            f"kd={kd!r}, ky={ky!r}")
    feasible = kd_a * r2dxj < 1
    with np.errstate(divide="ignore", invalid="ignore"):
        # r2dz = kd r2dxj / (1 - r2dxj)
        r2dz = kd_a * r2dxj / (1 - r2dxj)
        # r2zxj = kd r2dxj^2 / ((1 - kd r2dxj)(1 - r2dxj)): the collider-induced association
        r2zxj = kd_a * r2dxj**2 / ((1 - kd_a * r2dxj) * (1 - r2dxj))
        # eta = (sqrt(ky) + sqrt(r2zxj)) / sqrt(1 - r2zxj); r2yz <= eta^2 r2yxj / (1 - r2yxj)
        eta = (np.sqrt(ky_a) + np.sqrt(r2zxj)) / np.sqrt(1 - r2zxj)
        r2yz = eta**2 * r2yxj / (1 - r2yxj)
    feasible = feasible & (r2dz < 1) & (r2zxj < 1)
    capped = feasible & (r2yz > 1)
    r2dz = np.where(feasible, r2dz, np.nan)
    r2yz = np.where(feasible, np.minimum(r2yz, 1.0), np.nan)
    return r2dz, r2yz, capped


@dataclass(frozen=True, eq=False)
class BenchmarkBounds:
    """Bounds for confounders ``k`` times as strong as observed covariates.

    Arrays are flat, one entry per (benchmark, multiplier) pair in benchmark-major order.
    ``feasible`` is False where no such confounder exists (``kd · r2dxj >= 1``); the numbers
    there are ``nan``. ``capped`` is True where the outcome bound exceeded 1 and was set to 1.
    """

    names: tuple[str, ...]
    kd: np.ndarray
    ky: np.ndarray
    r2dxj: np.ndarray
    r2yxj: np.ndarray
    r2dz: np.ndarray
    r2yz: np.ndarray
    feasible: np.ndarray
    capped: np.ndarray
    bounds: Bounds

    def rows(self) -> list[dict[str, Any]]:
        """One dictionary per (benchmark, multiplier): the table and the plot data."""
        b = self.bounds
        out = []
        for i, name in enumerate(self.names):
            out.append({
                "benchmark": name, "kd": float(self.kd[i]), "ky": float(self.ky[i]),
                "r2dxj": float(self.r2dxj[i]), "r2yxj": float(self.r2yxj[i]),
                "r2dz": float(self.r2dz[i]), "r2yz": float(self.r2yz[i]),
                "feasible": bool(self.feasible[i]), "capped": bool(self.capped[i]),
                "adjusted_estimate": float(b.adjusted_estimate[i]),
                "adjusted_std_error": float(b.adjusted_std_error[i]), "t": float(b.t[i]),
                "ci_low": float(b.ci_low[i]), "ci_high": float(b.ci_high[i]),
            })
        return out

    def to_dict(self) -> dict[str, Any]:
        return {"threshold": self.bounds.threshold, "alpha": self.bounds.alpha,
                "direction": self.bounds.direction, "rows": self.rows()}


def benchmark_bounds(estimate: float, std_error: float, dof: float, r2dxj: ArrayLike,
                     r2yxj: ArrayLike, *, names: Sequence[str] | None = None,
                     multipliers: ArrayLike = (1.0, 2.0, 3.0),
                     outcome_multipliers: ArrayLike | None = None, threshold: float = 0.0,
                     alpha: float = 0.05, direction: str = "toward") -> BenchmarkBounds:
    """Adjusted estimates for confounders as strong as multiples of observed covariates.

    Parameters
    ----------
    estimate, std_error, dof : float
        The estimate from the regression with all the observed covariates.
    r2dxj, r2yxj : float or sequence
        Per benchmark covariate (or group), its partial R² with the treatment given the other
        covariates and with the outcome given the treatment and the other covariates; the
        audit computes them from the data.
    names : sequence of str, keyword-only
        Benchmark names (default ``"X1"``, ``"X2"``, ...).
    multipliers : sequence of float, keyword-only
        ``kd`` values: how many times as strong with the treatment (default 1, 2, 3).
    outcome_multipliers : sequence of float, keyword-only
        ``ky`` values paired with ``multipliers``; default equal to them.
    threshold, alpha, direction : keyword-only
        As in :func:`bounds`.

    Returns
    -------
    BenchmarkBounds

    Notes
    -----
    The strengths come from :func:`benchmark_partial_r2`; the adjusted numbers from
    :func:`bounds`.

    References
    ----------
    Cinelli & Hazlett (2020), Sec. 6.1-6.2.

    >>> table = benchmark_bounds(0.0973, 0.0232, 783, [0.00912], [0.1089], names=["female"])
    >>> [round(r["adjusted_estimate"], 3) for r in table.rows()]
    [0.075, 0.053, 0.03]
    """
    r2dxj_a = np.atleast_1d(_r2("r2dxj", r2dxj, allow_one=False)).ravel()
    r2yxj_a = np.atleast_1d(_r2("r2yxj", r2yxj, allow_one=False)).ravel()
    if r2dxj_a.shape != r2yxj_a.shape:
        raise NumericsError(f"r2dxj and r2yxj must have one value per benchmark; got "
                            f"{r2dxj_a.size} and {r2yxj_a.size}")
    if names is None:
        names = [f"X{i + 1}" for i in range(r2dxj_a.size)]
    names = tuple(str(n) for n in names)
    if len(names) != r2dxj_a.size:
        raise NumericsError(f"names must give one name per benchmark ({r2dxj_a.size}); got "
                            f"{len(names)}")
    kd = np.atleast_1d(np.asarray(multipliers, dtype=float)).ravel()
    ky = kd if outcome_multipliers is None else \
        np.atleast_1d(np.asarray(outcome_multipliers, dtype=float)).ravel()
    if ky.shape != kd.shape:
        raise NumericsError(f"outcome_multipliers must pair with multipliers ({kd.size} "
                            f"values); got {ky.size}")
    m = kd.size
    # benchmark-major: benchmark i with every multiplier
    r2dxj_f = np.repeat(r2dxj_a, m)
    r2yxj_f = np.repeat(r2yxj_a, m)
    kd_f = np.tile(kd, r2dxj_a.size)
    ky_f = np.tile(ky, r2dxj_a.size)
    r2dz, r2yz, capped = _benchmark_strengths(r2dxj_f, r2yxj_f, kd_f, ky_f)
    feasible = np.isfinite(r2dz)
    # evaluate the bounds where feasible; leave nan elsewhere
    safe_dz = np.where(feasible, r2dz, 0.0)
    safe_yz = np.where(feasible, r2yz, 0.0)
    result = bounds(estimate, std_error, dof, safe_dz, safe_yz, threshold=threshold,
                    alpha=alpha, direction=direction)
    nan = np.where(feasible, 1.0, np.nan)
    masked = Bounds(
        estimate=result.estimate, std_error=result.std_error, dof=result.dof,
        threshold=result.threshold, alpha=result.alpha, direction=result.direction,
        r2dz=r2dz, r2yz=r2yz, bias=result.bias * nan,
        adjusted_estimate=result.adjusted_estimate * nan,
        adjusted_std_error=result.adjusted_std_error * nan, t=result.t * nan,
        ci_low=result.ci_low * nan, ci_high=result.ci_high * nan)
    return BenchmarkBounds(
        names=tuple(n for n in names for _ in range(m)), kd=kd_f, ky=ky_f, r2dxj=r2dxj_f,
        r2yxj=r2yxj_f, r2dz=r2dz, r2yz=r2yz, feasible=feasible, capped=capped, bounds=masked)


# --------------------------------------------------------------------------------------------
# The two-number sweep


@dataclass(frozen=True, eq=False)
class BiasSweep:
    """Adjusted estimates over a grid of γ (rows) and δ (columns): ``estimate - γ·δ``."""

    estimate: float
    threshold: float
    gamma: np.ndarray
    delta: np.ndarray
    adjusted_estimate: np.ndarray

    def tipping_gamma(self) -> np.ndarray:
        """For each δ, the γ that brings the estimate to the threshold: (estimate − θ)/δ.

        ``nan`` where δ = 0 (no imbalance, no bias).
        """
        with np.errstate(divide="ignore", invalid="ignore"):
            gamma = (self.estimate - self.threshold) / self.delta
        return np.where(self.delta != 0, gamma, np.nan)

    def to_dict(self) -> dict[str, Any]:
        return {"estimate": self.estimate, "threshold": self.threshold,
                "gamma": self.gamma.tolist(), "delta": self.delta.tolist(),
                "adjusted_estimate": self.adjusted_estimate.tolist(),
                "tipping_gamma": self.tipping_gamma().tolist()}


def bias_sweep(estimate: float, gamma: ArrayLike, delta: ArrayLike, *,
               threshold: float = 0.0) -> BiasSweep:
    """The classic two-number sensitivity sweep: bias = γ·δ.

    Parameters
    ----------
    estimate : float
        The estimate that leaves the confounder U out.
    gamma : sequence of float
        Effect of U on the outcome (its coefficient in the regression that includes it), in
        outcome units per unit of U.
    delta : sequence of float
        Imbalance of U across the treatment: Cov(T, U)/Var(T), the slope of U on T (given the
        covariates). For a binary treatment this is the difference in the mean of U between
        treated and untreated; for a binary U, the difference in its prevalence.
    threshold : float, keyword-only

    Returns
    -------
    BiasSweep
        ``adjusted_estimate[i, j] = estimate - gamma[i] * delta[j]``.

    Notes
    -----
    Omitted-variable bias: short − long = γ·δ (Angrist & Pischke 2009, Sec. 3.2), so the
    estimate with U included is :math:`\\hat\\beta - \\gamma\\delta`; the tipping curve is
    :math:`\\gamma = (\\hat\\beta - \\theta)/\\delta`.

    >>> s = bias_sweep(2.0, [0, 1, 2], [0.5, 1.0])
    >>> s.adjusted_estimate.tolist(), s.tipping_gamma().tolist()
    ([[2.0, 2.0], [1.5, 1.0], [1.0, 0.0]], [4.0, 2.0])
    """
    estimate = _finite("estimate", estimate)
    threshold = _finite("threshold", threshold)
    gamma_a = np.atleast_1d(np.asarray(gamma, dtype=float)).ravel()
    delta_a = np.atleast_1d(np.asarray(delta, dtype=float)).ravel()
    if not (np.all(np.isfinite(gamma_a)) and np.all(np.isfinite(delta_a))):
        raise NumericsError("gamma and delta must be finite numbers")
    # long = short - gamma * delta
    adjusted = estimate - np.multiply.outer(gamma_a, delta_a)
    return BiasSweep(estimate=estimate, threshold=threshold, gamma=gamma_a, delta=delta_a,
                     adjusted_estimate=adjusted)


# --------------------------------------------------------------------------------------------
# E-values


def risk_ratio_e_value(risk_ratio: ArrayLike) -> np.ndarray | float:
    """E-value of a risk ratio: :math:`RR + \\sqrt{RR (RR - 1)}`, after inverting RR < 1.

    The minimum strength of association, on the risk-ratio scale, that a confounder needs with
    both the treatment and the outcome (given the measured covariates) to explain away ``RR``.

    References
    ----------
    VanderWeele & Ding (2017), Ann. Intern. Med., the E-value formula.

    >>> round(risk_ratio_e_value(3.9), 2), round(risk_ratio_e_value(1 / 3.9), 2)
    (7.26, 7.26)
    """
    rr = np.asarray(risk_ratio, dtype=float)
    if not np.all(np.isfinite(rr) & (rr > 0)):
        raise NumericsError(f"a risk ratio must be a positive finite number; got "
                            f"{risk_ratio!r}")
    with np.errstate(over="ignore"):
        rr = np.where(rr < 1, 1 / rr, rr)
        # E = RR + sqrt(RR (RR - 1)), the root taken factor by factor so RR^2 cannot overflow
        e = rr + np.sqrt(rr) * np.sqrt(rr - 1)
    return float(e) if e.ndim == 0 else e


def smd_to_risk_ratio(d: ArrayLike) -> np.ndarray | float:
    """Approximate risk ratio of a standardised mean difference: :math:`\\exp(0.91\\,d)`.

    References
    ----------
    VanderWeele (2017), from Chinn (2000): ln(OR) ≈ 1.81 d and the square root of the odds
    ratio, ln(RR) ≈ 0.91 d; VanderWeele & Ding (2017), table of conversions.

    >>> round(smd_to_risk_ratio(0.5), 4)
    1.5762
    """
    d = np.asarray(d, dtype=float)
    with np.errstate(over="ignore"):
        result = np.exp(0.91 * d)       # inf past the double range: the limit, not an error
    return float(result) if result.ndim == 0 else result


def to_risk_ratio(value: ArrayLike, measure: str, *, outcome_common: bool = False
                  ) -> np.ndarray | float:
    """Convert a ratio measure to the risk-ratio scale the E-value uses.

    =================  ======================  =============================================
    measure            rare outcome            common outcome (above about 15%)
    =================  ======================  =============================================
    ``risk_ratio``     as is                   as is
    ``odds_ratio``     as a risk ratio         :math:`\\sqrt{OR}`
    ``hazard_ratio``   as a risk ratio         :math:`(1 - 0.5^{\\sqrt{HR}})/(1 - 0.5^{\\sqrt{1/HR}})`
    =================  ======================  =============================================

    References
    ----------
    VanderWeele & Ding (2017), conversions table; VanderWeele (2017) for the square root of
    the odds ratio.

    >>> round(to_risk_ratio(4.0, "odds_ratio", outcome_common=True), 4)
    2.0
    >>> round(to_risk_ratio(2.0, "hazard_ratio", outcome_common=True), 4)
    1.6125
    """
    if measure not in RATIO_MEASURES:
        raise NumericsError(f"measure must be one of {', '.join(map(repr, RATIO_MEASURES))}; "
                            f"got {measure!r}")
    ratio = np.asarray(value, dtype=float)
    if not np.all(np.isfinite(ratio) & (ratio > 0)):
        raise NumericsError(f"a {measure.replace('_', ' ')} must be a positive finite number; "
                            f"got {value!r}")
    if measure == "risk_ratio" or not outcome_common:
        result = ratio
    elif measure == "odds_ratio":
        # RR ~ sqrt(OR) for a common outcome
        result = np.sqrt(ratio)
    else:
        # RR ~ (1 - 0.5^sqrt(HR)) / (1 - 0.5^sqrt(1/HR)) for a common outcome; limit 1 at HR=1
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            result = (1 - 0.5 ** np.sqrt(ratio)) / (1 - 0.5 ** np.sqrt(1 / ratio))
        result = np.where(ratio == 1, 1.0, result)
    return float(result) if np.ndim(result) == 0 else result


@dataclass(frozen=True)
class EValue:
    """E-values of a point estimate and of its confidence limit closest to the null.

    ``risk_ratio`` and ``risk_ratio_ci`` are on the risk-ratio scale after conversion
    (``conversion`` says which); ``null`` is the risk ratio the confounder would have to move
    the estimate to (1 unless a threshold was given). ``ci`` is 1 when the interval already
    includes the null, ``None`` when no interval was given.
    """

    measure: str
    risk_ratio: float
    risk_ratio_ci: tuple[float, float] | None
    null: float
    point: float
    ci: float | None
    conversion: str

    def to_dict(self) -> dict[str, Any]:
        return {"point": self.point, "ci": self.ci, "measure": self.measure,
                "risk_ratio": self.risk_ratio,
                "risk_ratio_ci": list(self.risk_ratio_ci) if self.risk_ratio_ci else None,
                "null": self.null, "conversion": self.conversion}


_CONVERSIONS = {
    ("risk_ratio", False): "none (a risk ratio)",
    ("risk_ratio", True): "none (a risk ratio)",
    ("odds_ratio", False): "odds ratio taken as a risk ratio (rare outcome)",
    ("odds_ratio", True): "square root of the odds ratio (common outcome; VanderWeele 2017)",
    ("hazard_ratio", False): "hazard ratio taken as a risk ratio (rare outcome)",
    ("hazard_ratio", True): "(1 - 0.5^sqrt(HR)) / (1 - 0.5^sqrt(1/HR)) (common outcome)",
}


def e_value(estimate: float, *, ci: tuple[float, float] | None = None,
            measure: str = "risk_ratio", outcome_common: bool = False,
            outcome_sd: float | None = None, null: float | None = None) -> EValue:
    """E-value of a reported estimate and of its confidence interval.

    Parameters
    ----------
    estimate : float
        A ratio (``measure`` a ratio) or a mean difference (``measure="difference"``, with
        ``outcome_sd``).
    ci : (low, high), keyword-only
        Its confidence interval on the same scale, if reported.
    measure : {"risk_ratio", "odds_ratio", "hazard_ratio", "difference"}, keyword-only
    outcome_common : bool, keyword-only
        For odds and hazard ratios: the outcome is common (above about 15%), so the ratio is
        converted before the E-value (see :func:`to_risk_ratio`).
    outcome_sd : float, keyword-only
        For a difference: the outcome's standard deviation, turning the difference into a
        standardised mean difference ``d`` and then :math:`RR \\approx \\exp(0.91 d)`.
    null : float, keyword-only
        The value, on the estimate's own scale, the confounder must move it to (default the
        null: 1 for ratios, 0 for a difference). E-values are then computed for the ratio
        RR/RR₀ (VanderWeele & Ding 2017, E-values for a non-null true value).

    Returns
    -------
    EValue

    Notes
    -----
    .. math:: E = RR^* + \\sqrt{RR^* (RR^* - 1)}, \\quad RR^* = \\max(RR/RR_0, RR_0/RR)

    For the interval, the limit closest to the null is used; if the interval includes the
    null, its E-value is 1. A confounder with risk ratios ``RR_EU`` (treatment) and ``RR_UD``
    (outcome) can move the estimate by at most the bounding factor
    :math:`RR_{EU}RR_{UD}/(RR_{EU} + RR_{UD} - 1)` (Ding & VanderWeele 2016); the E-value is
    the common value of both at which this factor equals :math:`RR^*`.

    References
    ----------
    VanderWeele & Ding (2017); Ding & VanderWeele (2016); VanderWeele (2017); Chinn (2000).

    >>> ev = e_value(3.9, ci=(1.8, 8.7))
    >>> round(ev.point, 2), round(ev.ci, 2)
    (7.26, 3.0)
    """
    estimate = _finite("estimate", estimate)
    if measure == "difference":
        if outcome_sd is None:
            raise NumericsError("an E-value for a mean difference needs the outcome's standard "
                                "deviation (outcome_sd) to form a standardised difference")
        outcome_sd = _finite("outcome_sd", outcome_sd)
        if outcome_sd <= 0:
            raise NumericsError(f"outcome_sd must be positive; got {outcome_sd!r}")
        base = 0.0 if null is None else _finite("null", null)
        # d = difference / sd; RR ~ exp(0.91 d); the null difference maps to RR0
        rr = float(smd_to_risk_ratio(estimate / outcome_sd))
        rr_ci = None if ci is None else (float(smd_to_risk_ratio(ci[0] / outcome_sd)),
                                         float(smd_to_risk_ratio(ci[1] / outcome_sd)))
        rr_null = float(smd_to_risk_ratio(base / outcome_sd))
        for name, value in (("estimate", rr), ("null", rr_null)):
            if not 0 < value < math.inf:
                raise NumericsError(
                    f"the standardised difference of the {name}, d = {name} / outcome_sd = "
                    f"{(estimate if name == 'estimate' else base) / outcome_sd:.3g}, is too "
                    "large for RR = exp(0.91 d) in double precision; check outcome_sd and the "
                    "units of the estimate")
        conversion = "standardised mean difference d = difference / outcome SD, RR = exp(0.91 d)"
    elif measure in RATIO_MEASURES:
        rr = float(to_risk_ratio(estimate, measure, outcome_common=outcome_common))
        # an interval of infinite width (tiny dof) has limits 0 and inf, which every
        # conversion maps to themselves
        rr_ci = None if ci is None else tuple(
            float(c) if c in (0.0, math.inf)
            else float(to_risk_ratio(c, measure, outcome_common=outcome_common)) for c in ci)
        base = 1.0 if null is None else _finite("null", null)
        rr_null = float(to_risk_ratio(base, measure, outcome_common=outcome_common))
        conversion = _CONVERSIONS[(measure, bool(outcome_common))]
    else:
        raise NumericsError(f"measure must be one of 'difference', "
                            f"{', '.join(map(repr, RATIO_MEASURES))}; got {measure!r}")
    if rr_ci is not None and not rr_ci[0] <= rr_ci[1]:
        raise NumericsError(f"the confidence interval must be (low, high); got {ci!r}")
    if not (0 < rr_null < math.inf and 0 < rr / rr_null < math.inf):
        raise NumericsError(f"the risk ratio {rr:.3g} against the null {rr_null:.3g} is too "
                            "far from 1 for an E-value in double precision; check the number")
    point = float(risk_ratio_e_value(rr / rr_null))
    if not math.isfinite(point):
        raise NumericsError(f"the E-value of a risk ratio of {rr / rr_null:.3g} passes the "
                            "double range; a ratio this far from 1 cannot come from a study, "
                            "so check the number")
    ci_e: float | None = None
    if rr_ci is not None:
        low, high = rr_ci
        if low <= rr_null <= high:
            ci_e = 1.0
        elif rr > rr_null:
            ci_e = float(risk_ratio_e_value(low / rr_null))
        else:
            ci_e = float(risk_ratio_e_value(high / rr_null))
    return EValue(measure=measure, risk_ratio=rr,
                  risk_ratio_ci=None if rr_ci is None else (rr_ci[0], rr_ci[1]),
                  null=rr_null, point=point, ci=ci_e, conversion=conversion)


# --------------------------------------------------------------------------------------------
# Coefficient stability (Oster 2019)


@dataclass(frozen=True)
class CoefficientStability:
    """Oster's (2019) bias-adjusted estimate and proportional-selection δ.

    ``delta_for_threshold``: the δ (selection on unobservables relative to observables) at
    which the estimate would equal ``threshold``, given ``r2_max``. ``adjusted_estimate``: the
    bias-adjusted estimate β* at the chosen ``delta``; ``roots`` lists every real solution of
    the cubic (β* is the one closest to the approximation ``approximate_adjusted``).
    ``None`` values mean the quantity does not exist for these inputs; ``notes`` says why.
    """

    naive_estimate: float
    naive_r2: float
    adjusted_estimate_observed: float
    adjusted_r2: float
    r2_max: float
    delta: float
    threshold: float
    adjusted_estimate: float | None
    roots: tuple[float, ...]
    approximate_adjusted: float | None
    delta_for_threshold: float | None
    approximate_delta: float | None
    notes: tuple[str, ...] = field(default=())

    def to_dict(self) -> dict[str, Any]:
        out = {k: getattr(self, k) for k in self.__dataclass_fields__}
        out["roots"] = list(self.roots)
        out["notes"] = list(self.notes)
        return out


def coefficient_stability(naive_estimate: float, naive_r2: float, adjusted_estimate: float,
                          adjusted_r2: float, *, outcome_variance: float,
                          treatment_variance: float, treatment_r2_controls: float,
                          r2_max: float | None = None, delta: float = 1.0,
                          threshold: float = 0.0) -> CoefficientStability:
    """Bias-adjusted estimate and the δ that would move it to the threshold (Oster 2019).

    Parameters
    ----------
    naive_estimate, naive_r2 : float
        β̊ and R̊² from regressing the outcome on the treatment alone (with intercept).
    adjusted_estimate, adjusted_r2 : float
        β̃ and R̃² from regressing the outcome on the treatment and the observed controls.
    outcome_variance, treatment_variance : float, keyword-only
        Var(Y) and Var(T) (the same ``ddof`` for both).
    treatment_r2_controls : float, keyword-only
        R² of the treatment regressed on the observed controls; the treatment's residual
        variance is ``τ = Var(T)(1 − R²)``.
    r2_max : float, keyword-only
        R² of the hypothetical regression with the unobservables too; default
        ``min(1, 1.3 R̃²)`` (Oster 2019, Sec. 4).
    delta : float, keyword-only
        Proportional selection δ for β* (default 1: unobservables as important as observables).
    threshold : float, keyword-only
        The value of β for ``delta_for_threshold`` (default 0).

    Returns
    -------
    CoefficientStability

    Notes
    -----
    Model: :math:`Y = \\beta T + W_1 + W_2 + \\varepsilon` with :math:`W_1` the index of
    observed controls, :math:`W_2` the unobserved index orthogonal to the controls, and
    proportional selection :math:`\\sigma_{2T}/\\sigma_2^2 = \\delta\\,\\sigma_{1T}/\\sigma_1^2`.
    Let :math:`m = \\operatorname{Var}(T)`, :math:`\\tau` the residual variance of T on the
    controls, :math:`g = m - \\tau`, :math:`\\Delta = \\mathring\\beta - \\tilde\\beta`,
    :math:`S = \\operatorname{Var}(Y)(R_{max} - \\tilde R^2)`,
    :math:`A = \\operatorname{Var}(Y)(\\tilde R^2 - \\mathring R^2) + m\\Delta^2`, and
    :math:`\\nu = \\tilde\\beta - \\beta` the remaining bias. Solving the moment equations
    exactly gives

    .. math::

        \\delta(\\nu) = \\frac{\\tau\\nu\\,(A + 2m\\Delta\\nu + g\\nu^2)}
                              {(S + \\tau\\nu^2)(m\\Delta + g\\nu)} ,

    so ``delta_for_threshold`` is :math:`\\delta(\\tilde\\beta - \\theta)`, and for a given δ,
    ν solves the cubic

    .. math::

        \\tau g(\\delta - 1)\\nu^3 + \\tau m\\Delta(\\delta - 2)\\nu^2
        + (\\delta S g - \\tau A)\\nu + \\delta S m \\Delta = 0 ,

    with :math:`\\beta^* = \\tilde\\beta - \\nu` (a quadratic when δ = 1). This is the exact
    solution behind Oster (2019, Prop. 2); the approximations are
    :math:`\\beta^* \\approx \\tilde\\beta - \\delta\\Delta(R_{max} - \\tilde R^2)/(\\tilde R^2 -
    \\mathring R^2)` and :math:`\\delta \\approx (\\tilde\\beta - \\theta)(\\tilde R^2 -
    \\mathring R^2)/(\\Delta(R_{max} - \\tilde R^2))` (Oster 2019, Prop. 1 and Sec. 3).

    References
    ----------
    Oster (2019), J. Bus. Econ. Stat., Sec. 3 (Prop. 1-2) and Sec. 4 (R²max = 1.3 R̃²);
    Altonji, Elder & Taber (2005), J. Polit. Econ. (selection on observables as a guide).

    >>> cs = coefficient_stability(0.5, 0.10, 0.4, 0.30, outcome_variance=1.0,
    ...                            treatment_variance=0.4, treatment_r2_controls=0.2)
    >>> round(cs.r2_max, 2), cs.delta_for_threshold is not None
    (0.39, True)
    """
    b0 = _finite("naive_estimate", naive_estimate)
    r0 = _finite("naive_r2", naive_r2)
    b1 = _finite("adjusted_estimate", adjusted_estimate)
    r1 = _finite("adjusted_r2", adjusted_r2)
    var_y = _finite("outcome_variance", outcome_variance)
    m = _finite("treatment_variance", treatment_variance)
    r2_tw = _finite("treatment_r2_controls", treatment_r2_controls)
    delta = _finite("delta", delta)
    threshold = _finite("threshold", threshold)
    for name, value in (("naive_r2", r0), ("adjusted_r2", r1), ("treatment_r2_controls", r2_tw)):
        if not 0 <= value < 1:
            raise NumericsError(f"{name} must be an R² in [0, 1); got {value!r}")
    if var_y <= 0 or m <= 0:
        raise NumericsError(f"outcome_variance and treatment_variance must be positive; got "
                            f"{var_y!r} and {m!r}")
    if r2_max is None:
        r2_max = min(1.0, 1.3 * r1)
    r2_max = _finite("r2_max", r2_max)
    if not r1 < r2_max <= 1:
        raise NumericsError(f"r2_max must lie above the adjusted R² ({r1!r}) and at most 1; "
                            f"got {r2_max!r}")
    notes: list[str] = []
    tau = m * (1 - r2_tw)
    g = m - tau
    gap = b0 - b1
    s = var_y * (r2_max - r1)
    a = var_y * (r1 - r0) + m * gap**2
    if r1 <= r0:
        notes.append("the controls do not raise the R² (adjusted R² <= naive R²); the "
                     "approximations divide by zero and are not given")
    # delta(nu) = tau nu (A + 2 m Delta nu + g nu^2) / ((S + tau nu^2)(m Delta + g nu))
    nu_t = b1 - threshold
    numerator = tau * nu_t * (a + 2 * m * gap * nu_t + g * nu_t**2)
    denominator = (s + tau * nu_t**2) * (m * gap + g * nu_t)
    delta_t: float | None = numerator / denominator if denominator != 0 else None
    if delta_t is None:
        notes.append("no finite delta moves the estimate to the threshold (the observed "
                     "controls carry no selection on the treatment)")
    # cubic in nu: tau g (d-1) nu^3 + tau m Delta (d-2) nu^2 + (d S g - tau A) nu + d S m Delta
    coefficients = [tau * g * (delta - 1), tau * m * gap * (delta - 2),
                    delta * s * g - tau * a, delta * s * m * gap]
    while coefficients and abs(coefficients[0]) <= 1e-14 * max(map(abs, coefficients)):
        coefficients = coefficients[1:]
    roots: tuple[float, ...] = ()
    if len(coefficients) >= 2:
        found = np.roots(coefficients)
        scale = max(1.0, float(np.max(np.abs(found)))) if found.size else 1.0
        real = sorted(float(r.real) for r in found if abs(r.imag) <= 1e-9 * scale)
        roots = tuple(b1 - nu for nu in real)
    approx_adjusted = approx_delta = None
    if r1 > r0:
        approx_adjusted = b1 - delta * gap * (r2_max - r1) / (r1 - r0)
        if gap != 0:
            approx_delta = (b1 - threshold) * (r1 - r0) / (gap * (r2_max - r1))
    adjusted: float | None = None
    if roots:
        target = approx_adjusted if approx_adjusted is not None else b1
        adjusted = min(roots, key=lambda r: abs(r - target))
    else:
        notes.append("the equations have no real solution for this delta and r2_max")
    if len(roots) > 1:
        notes.append(f"{len(roots)} real solutions; the one closest to the approximate "
                     "bias-adjusted estimate is reported")
    return CoefficientStability(
        naive_estimate=b0, naive_r2=r0, adjusted_estimate_observed=b1, adjusted_r2=r1,
        r2_max=r2_max, delta=delta, threshold=threshold, adjusted_estimate=adjusted,
        roots=roots, approximate_adjusted=approx_adjusted, delta_for_threshold=delta_t,
        approximate_delta=approx_delta, notes=tuple(notes))

"""Linear regressions solved from :class:`~causalcheck.moments.Moments` in :math:`O(p^3)`.

Every model here has an intercept. With ``C`` the centred cross-product matrix, the slopes of
``y`` on the regressors ``X`` are

.. math::

    \\hat\\beta = C_{XX}^{-1} C_{Xy}, \\qquad
    \\mathrm{SSR} = C_{yy} - C_{yX} \\hat\\beta, \\qquad
    \\hat\\sigma^2 = \\mathrm{SSR} / (n - k - 1), \\qquad
    \\widehat{\\mathrm{Var}}(\\hat\\beta) = \\hat\\sigma^2 C_{XX}^{-1},

the usual OLS algebra (Frisch–Waugh–Lovell: centring removes the intercept). To keep digits
the system is first scaled to correlation form (each column divided by its root sum of
squares), its condition number checked, and solved by a Cholesky factorisation of the
augmented matrix :math:`[X\\;y]`, whose last pivot squared is :math:`1 - R^2` (no subtraction
of nearly equal numbers).

Perfectly collinear regressors raise :class:`~causalcheck.errors.NumericsError` naming the
columns of the linear dependence (read from the null space); nearly collinear ones give a
:class:`CollinearityWarning` with the condition number.

The heteroskedasticity-consistent HC1 standard errors (MacKinnon & White 1985) need the rows
once more; :func:`robust_std_error` makes that one pass.

References
----------
MacKinnon, J. G. & White, H. (1985). Some heteroskedasticity-consistent covariance matrix
estimators with improved finite sample properties. Journal of Econometrics 29, 305–325.

Angrist, J. D. & Pischke, J.-S. (2009). Mostly Harmless Econometrics, Ch. 3. Princeton.

Examples
--------
>>> import numpy as np
>>> from causalcheck.moments import moments_from_array
>>> x = np.array([1.0, 2.0, 3.0, 4.0, 5.0])
>>> y = 2.0 * x + np.array([0.1, -0.1, 0.0, 0.1, -0.1])
>>> result = fit(moments_from_array(np.column_stack([x, y]), ["x", "y"]), "y", ["x"])
>>> round(result.coefficient("x"), 6), result.dof
(1.98, 3)
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from scipy import linalg, special

from .errors import CausalCheckWarning, DataError, NumericsError
from .moments import Design, Moments

__all__ = [
    "COLLINEAR_CONDITION",
    "WARN_CONDITION",
    "CollinearityWarning",
    "Interval",
    "LinearFit",
    "fit",
    "partial_r2",
    "residuals",
    "robust_std_error",
    "robust_std_errors",
]

# Condition number (of the correlation-scaled regressor matrix) above which the regressors are
# treated as perfectly collinear: about 1e-3 of 1/eps, where rounding noise in the cross
# products is as large as the smallest eigenvalue.
COLLINEAR_CONDITION = 1e12
# Above this the slopes keep fewer than about 8 significant digits: warn (common practice).
WARN_CONDITION = 1e8


class CollinearityWarning(CausalCheckWarning):
    """Regressors are nearly collinear: the slopes are solved but poorly determined."""


@dataclass(frozen=True)
class Interval:
    """A confidence interval ``[low, high]`` at ``level``."""

    low: float
    high: float
    level: float

    def to_dict(self) -> dict[str, float]:
        return {"low": self.low, "high": self.high, "level": self.level}

    def contains(self, value: float) -> bool:
        return self.low <= value <= self.high


@dataclass(frozen=True, eq=False)
class LinearFit:
    """An OLS fit with intercept, solved from moments.

    Attributes
    ----------
    outcome : str
        Design column regressed on the others.
    regressors : tuple of str
        Design columns (the intercept is implicit).
    coef, std_error : ndarray
        Slopes and classical standard errors, in the order of ``regressors``.
    intercept : float
    dof : int
        Residual degrees of freedom, :math:`n - k - 1`.
    sigma2 : float
        Residual variance :math:`\\mathrm{SSR}/\\mathrm{dof}`.
    r2 : float
    n : int
    standardized : ndarray
        Slopes in standard-deviation units, :math:`\\hat\\beta_j s_{x_j} / s_y`.
    cov_params : ndarray
        Classical covariance matrix of the slopes, :math:`\\hat\\sigma^2 C_{XX}^{-1}`.
    condition_number : float
        2-norm condition number of the correlation-scaled regressor matrix (1 when k <= 1).
    regressor_means, outcome_mean : ndarray, float
        Means used to form residuals in the row pass (keeps digits at large offsets).
    """

    outcome: str
    regressors: tuple[str, ...]
    coef: np.ndarray
    std_error: np.ndarray
    intercept: float
    dof: int
    sigma2: float
    r2: float
    n: int
    standardized: np.ndarray
    cov_params: np.ndarray
    condition_number: float
    regressor_means: np.ndarray
    outcome_mean: float

    def _where(self, column: str) -> int:
        try:
            return self.regressors.index(column)
        except ValueError:
            raise KeyError(f"{column!r} is not a regressor of this fit; the regressors are "
                           f"{', '.join(self.regressors) or '(none)'}") from None

    def coefficient(self, column: str) -> float:
        """Slope of ``column``."""
        return float(self.coef[self._where(column)])

    def se(self, column: str) -> float:
        """Classical standard error of the slope of ``column``."""
        return float(self.std_error[self._where(column)])

    def t(self, column: str) -> float:
        """t statistic, slope / standard error."""
        se = self.se(column)
        return self.coefficient(column) / se if se > 0 else math.nan

    def p_value(self, column: str) -> float:
        """Two-sided p-value of the t test that the slope is zero."""
        # 2 * (1 - F_t(|t|; dof)), with scipy.special's Student t distribution function
        return float(2.0 * special.stdtr(self.dof, -abs(self.t(column))))

    def standardized_coefficient(self, column: str) -> float:
        return float(self.standardized[self._where(column)])

    def confidence_interval(self, column: str, *, alpha: float = 0.05) -> Interval:
        """Two-sided :math:`1-\\alpha` interval, :math:`\\hat\\beta \\pm t_{1-\\alpha/2,\\,dof}\\,SE`."""
        estimate, se = self.coefficient(column), self.se(column)
        # t_{1 - alpha/2, dof}: scipy.special's inverse of the Student t distribution function
        quantile = float(special.stdtrit(self.dof, 1.0 - alpha / 2.0))
        return Interval(estimate - quantile * se, estimate + quantile * se, 1.0 - alpha)

    def to_dict(self) -> dict[str, Any]:
        return {
            "outcome": self.outcome, "regressors": list(self.regressors),
            "coef": self.coef.tolist(), "std_error": self.std_error.tolist(),
            "intercept": self.intercept, "dof": self.dof, "sigma2": self.sigma2,
            "r2": self.r2, "n": self.n, "standardized": self.standardized.tolist(),
            "condition_number": self.condition_number,
        }


def _describe_dependence(vector: np.ndarray, names: Sequence[str]) -> tuple[list[str], str]:
    """Columns with a visible weight in a null vector, and the relation as text."""
    weights = vector / np.max(np.abs(vector))
    involved = [i for i in np.argsort(-np.abs(weights)) if abs(weights[i]) > 1e-6]
    lead = involved[0]
    terms = []
    for i in involved[1:]:
        factor = -weights[i] / weights[lead]
        terms.append(f"{factor:+.3g}·{names[i]}")
    relation = f"{names[lead]} ≈ constant {' '.join(terms)}" if terms else \
        f"{names[lead]} is constant"
    return [names[i] for i in involved], relation


def fit(moments: Moments, outcome: str, regressors: Sequence[str]) -> LinearFit:
    """Regress ``outcome`` on ``regressors`` (with an intercept) from moments alone.

    Parameters
    ----------
    moments : Moments
    outcome : str
        A design column (or a study variable with a single column).
    regressors : sequence of str
        Design columns or study variables (a categorical expands to its dummies).

    Returns
    -------
    LinearFit

    Raises
    ------
    NumericsError
        When the regressors are perfectly collinear (the message names the columns of the
        dependence), a regressor is constant, or the outcome is an exact linear function of
        the regressors.
    DataError
        When there are fewer rows than parameters.

    Notes
    -----
    With correlation scaling :math:`D = \\mathrm{diag}(C_{XX})^{1/2}`,
    :math:`R = D^{-1} C_{XX} D^{-1}`, :math:`r = D^{-1} C_{Xy} / \\sqrt{C_{yy}}`, the Cholesky
    factor of :math:`\\begin{pmatrix} R & r \\\\ r^\\top & 1 \\end{pmatrix}` has last pivot
    :math:`\\ell` with :math:`\\ell^2 = 1 - R^2`; the slopes are
    :math:`\\hat\\beta = D^{-1} R^{-1} r \\sqrt{C_{yy}}`.

    References
    ----------
    Golub, G. H. & Van Loan, C. F. (2013). Matrix Computations, 4th ed., Sec. 5.3 (normal
    equations, Cholesky) and Sec. 2.6 (condition). Johns Hopkins University Press.
    """
    (y_name,) = _single(moments, outcome)
    names = tuple(c for c in moments.select(regressors))
    if y_name in names:
        raise ValueError(f"the outcome {y_name!r} is also among the regressors")
    k = len(names)
    n = moments.n
    dof = n - k - 1
    if dof <= 0:
        raise DataError(
            f"the regression of {y_name!r} on {k} column{'s' if k != 1 else ''} needs more "
            f"than {k + 1} rows (one per parameter, intercept included) but only {n} are "
            "used; add rows or adjust for fewer variables")
    iy = moments.index(y_name)
    ix = [moments.index(c) for c in names]
    # values beyond about 1e154 overflow their squares: say which column, not a NaN later
    beyond = [c for c in (y_name, *names)
              if not np.isfinite(moments.cross[moments.index(c), moments.index(c)])
              or not np.isfinite(moments.means[moments.index(c)])]
    if beyond:
        raise NumericsError(
            f"the column{'s' if len(beyond) > 1 else ''} {', '.join(repr(c) for c in beyond)} "
            f"hold{'' if len(beyond) > 1 else 's'} values so large that their sums of squares "
            "pass the double range (about 1e154 or more); rescale "
            f"{'them' if len(beyond) > 1 else 'it'} (thousands or millions instead of units) "
            "or check for a stray huge number")
    syy = float(moments.cross[iy, iy])
    if not syy > 0:
        raise NumericsError(f"the outcome {y_name!r} is constant among the {n} rows used; "
                            "there is no variation to explain")
    y_scale = math.sqrt(syy)
    sxx = moments.cross[np.ix_(ix, ix)]
    sxy = moments.cross[ix, iy]
    diag = np.diag(sxx).copy()
    tiny = diag <= 0
    if tiny.any():
        bad = [names[i] for i in np.flatnonzero(tiny)]
        raise NumericsError(
            f"the regressor{'s' if len(bad) > 1 else ''} {', '.join(repr(b) for b in bad)} "
            f"{'are' if len(bad) > 1 else 'is'} constant among the {n} rows used, so "
            "it cannot be adjusted for (it is collinear with the intercept); drop it from the "
            "adjustment set or check the data")
    scale = np.sqrt(diag)
    corr_xx = sxx / np.outer(scale, scale)
    corr_xy = sxy / (scale * y_scale)
    condition = 1.0
    if k >= 1:
        eigenvalues, eigenvectors = np.linalg.eigh(corr_xx)
        largest = float(eigenvalues[-1])
        smallest = float(eigenvalues[0])
        condition = largest / smallest if smallest > 0 else math.inf
        if condition > COLLINEAR_CONDITION:
            columns, relation = _describe_dependence(eigenvectors[:, 0], names)
            raise NumericsError(
                f"the regressors {', '.join(repr(c) for c in columns)} are perfectly "
                f"collinear among the {n} rows used ({relation}; condition number "
                f"{condition:.3g}), so their separate slopes are not determined. Drop one of "
                "them from the adjustment set, or check for a column that duplicates or sums "
                "others (such as a dummy for every level)")
        if condition > WARN_CONDITION:
            warnings.warn(
                f"regressors {', '.join(names)} of {y_name!r} are nearly collinear "
                f"(condition number {condition:.3g}); their slopes keep only about "
                f"{max(0, int(16 - math.log10(condition)))} significant digits",
                CollinearityWarning, stacklevel=2)
    augmented = np.empty((k + 1, k + 1))
    augmented[:k, :k] = corr_xx
    augmented[:k, k] = corr_xy
    augmented[k, :k] = corr_xy
    augmented[k, k] = 1.0
    try:
        factor = linalg.cholesky(augmented, lower=True, check_finite=False)
        residual_share = float(factor[k, k] ** 2)  # 1 - R^2
    except linalg.LinAlgError:
        residual_share = 0.0
    if residual_share <= 1e-14:
        raise NumericsError(
            f"the outcome {y_name!r} is an exact linear function of "
            f"{', '.join(names)} among the {n} rows used (R² = 1), so no standard error can "
            "be computed; check that the outcome is not built from these columns")
    if k:
        chol = linalg.cho_factor(corr_xx, lower=True, check_finite=False)
        # standardised slopes b = R^{-1} r ; beta = b * sqrt(Cyy) / sqrt(Cxx_jj)
        standardized = linalg.cho_solve(chol, corr_xy, check_finite=False)
        corr_inverse = linalg.cho_solve(chol, np.eye(k), check_finite=False)
        coef = standardized * y_scale / scale
    else:
        standardized = np.zeros(0)
        corr_inverse = np.zeros((0, 0))
        coef = np.zeros(0)
    ssr = syy * residual_share
    sigma2 = ssr / dof
    # Var(beta) = sigma^2 C_XX^{-1} = sigma^2 D^{-1} R^{-1} D^{-1}
    cov_params = sigma2 * corr_inverse / np.outer(scale, scale)
    std_error = np.sqrt(np.diag(cov_params))
    x_means = moments.means[ix]
    y_mean = float(moments.means[iy])
    intercept = y_mean - float(x_means @ coef) if k else y_mean
    return LinearFit(
        outcome=y_name, regressors=names, coef=coef, std_error=std_error, intercept=intercept,
        dof=dof, sigma2=sigma2, r2=1.0 - residual_share, n=n,
        standardized=standardized, cov_params=cov_params, condition_number=condition,
        regressor_means=x_means.copy(), outcome_mean=y_mean)


def _single(moments: Moments, name: str) -> tuple[str]:
    columns = moments.select([name])
    if len(columns) != 1:
        raise ValueError(f"{name!r} has {len(columns)} design columns; an outcome must be one "
                         "column")
    return (columns[0],)


def partial_r2(fit: LinearFit, column: str) -> float:
    """Partial R² of ``column`` with the outcome given the other regressors.

    .. math:: R^2_{Y\\sim D\\mid X} = t^2 / (t^2 + \\mathrm{dof})

    References
    ----------
    Cinelli, C. & Hazlett, C. (2020). Making sense of sensitivity: extending omitted variable
    bias. JRSS-B 82(1), 39–67, Sec. 4.
    """
    t = fit.t(column)
    return float(t * t / (t * t + fit.dof))


def _row_chunks(source: Design | pd.DataFrame | np.ndarray, columns: Sequence[str],
                chunk_rows: int) -> Iterator[np.ndarray]:
    """The rows of ``columns`` in chunks of ``chunk_rows`` (a Design is never copied whole)."""
    if isinstance(source, Design):
        yield from source.chunks(columns, rows=chunk_rows)
        return
    if isinstance(source, pd.DataFrame):
        missing = [c for c in columns if c not in source.columns]
        if missing:
            raise DataError(f"the frame lacks the design column(s) {missing}; pass the "
                            "encoded Design, or a frame with these columns")
        values = source[list(columns)].to_numpy(dtype=np.float64)
    else:
        values = np.asarray(source, dtype=np.float64)
    for start in range(0, values.shape[0], chunk_rows):
        yield values[start:start + chunk_rows]


def _row_count(source: Design | pd.DataFrame | np.ndarray) -> int:
    return source.n if isinstance(source, Design) else len(source)


def residuals(source: Design | pd.DataFrame, fit: LinearFit) -> np.ndarray:
    """Row residuals :math:`e_i = (y_i - \\bar y) - (x_i - \\bar x)^\\top\\hat\\beta`."""
    parts = []
    for chunk in _row_chunks(source, (*fit.regressors, fit.outcome), 1 << 16):
        centred_x = chunk[:, :-1] - fit.regressor_means
        parts.append((chunk[:, -1] - fit.outcome_mean) - centred_x @ fit.coef)
    return np.concatenate(parts) if parts else np.zeros(0)


def robust_std_error(source: Design | pd.DataFrame, fit: LinearFit, *,
                     columns: Sequence[str] | None = None,
                     chunk_rows: int = 1 << 17) -> np.ndarray:
    """HC1 heteroskedasticity-consistent standard errors of the slopes (one pass over rows).

    Parameters
    ----------
    source : Design or DataFrame
        The rows the fit was computed from (a DataFrame must hold the design columns).
    fit : LinearFit
    columns : sequence of str, optional
        Only these regressors (default all); the pass costs :math:`O(n k)` per column asked.

    Returns
    -------
    ndarray
        One HC1 standard error per regressor asked for, in that order.

    Notes
    -----
    .. math::

        \\widehat{\\mathrm{Var}}_{HC1}(\\hat\\beta) = \\frac{n}{n-k-1}
        C_{XX}^{-1} \\Big(\\sum_i e_i^2 \\tilde x_i \\tilde x_i^\\top\\Big) C_{XX}^{-1},

    with :math:`\\tilde x_i = x_i - \\bar x`; by Frisch–Waugh–Lovell this is the slope block of
    the sandwich with an explicit intercept. Only its diagonal is needed:
    :math:`\\sum_i e_i^2 w_{ij}^2` with :math:`w_i = C_{XX}^{-1}\\tilde x_i`.

    References
    ----------
    MacKinnon, J. G. & White, H. (1985). Journal of Econometrics 29, 305–325 (HC1).
    """
    k = len(fit.regressors)
    wanted = list(range(k)) if columns is None else [fit._where(c) for c in columns]
    if k == 0 or not wanted:
        return np.zeros(0)
    if _row_count(source) != fit.n:
        raise ValueError(f"the rows ({_row_count(source)}) are not the rows of the fit "
                         f"({fit.n})")
    # rows of C_XX^{-1} = cov_params / sigma^2 for the wanted regressors
    inverse = fit.cov_params[:, wanted] / fit.sigma2
    # one product per chunk: [x~ y~] @ [[-beta, C^{-1}], [1, 0]] = [e, w]
    weights = np.zeros((k + 1, 1 + len(wanted)))
    weights[:k, 0] = -fit.coef
    weights[k, 0] = 1.0
    weights[:k, 1:] = inverse
    centre = np.append(fit.regressor_means, fit.outcome_mean)
    total = np.zeros(len(wanted))
    for chunk in _row_chunks(source, (*fit.regressors, fit.outcome), chunk_rows):
        centred = chunk - centre
        product = centred @ weights
        # e_i = (y_i - ybar) - (x_i - xbar)' beta ;  w_i = C_XX^{-1} (x_i - xbar)
        error = product[:, 0]
        total += (error * error) @ (product[:, 1:] ** 2)
    # HC1: scale the HC0 sandwich by n / (n - k - 1)
    return np.sqrt(total * fit.n / fit.dof)


def robust_std_errors(source: Design | pd.DataFrame, fits: Sequence[LinearFit], column: str,
                      *, chunk_rows: int = 1 << 15) -> list[float]:
    """HC1 standard error of ``column`` in each of several fits, in a single pass over rows.

    The fits must come from the same moments (same rows, same means). Each chunk of the union
    of their columns is read and centred once; per fit, one product
    :math:`[\\tilde x\\; \\tilde y]\\,[[-\\hat\\beta, C_{XX}^{-1}e_j], [1, 0]] = [e, w_j]` gives
    the residuals and the weights, and the HC1 variance is
    :math:`\\frac{n}{n-k-1}\\sum_i e_i^2 w_{ij}^2` as in :func:`robust_std_error`.

    References
    ----------
    MacKinnon, J. G. & White, H. (1985). Journal of Econometrics 29, 305–325 (HC1).
    """
    if not fits:
        return []
    # the union of the columns, the widest fit's first so that its block is a plain slice
    ordered = sorted(range(len(fits)), key=lambda i: -len(fits[i].regressors))
    union: list[str] = []
    centre: dict[str, float] = {}
    for f in (fits[i] for i in ordered):
        if f.n != fits[0].n:
            raise ValueError("robust_std_errors: the fits use different rows")
        for name, mean in (*zip(f.regressors, f.regressor_means), (f.outcome, f.outcome_mean)):
            if name not in centre:
                union.append(name)
                centre[name] = float(mean)
    if _row_count(source) != fits[0].n:
        raise ValueError(f"the rows ({_row_count(source)}) are not the rows of the fits "
                         f"({fits[0].n})")
    plans = []
    for f in fits:
        j = f._where(column)
        k = len(f.regressors)
        index = [union.index(c) for c in (*f.regressors, f.outcome)]
        block: slice | list[int] = slice(0, k + 1) if index == list(range(k + 1)) else index
        weights = np.zeros((k + 1, 2))
        weights[:k, 0] = -f.coef
        weights[k, 0] = 1.0
        # row j of C_XX^{-1} = cov_params / sigma^2
        weights[:k, 1] = f.cov_params[:, j] / f.sigma2
        plans.append((block, weights))
    means = np.array([centre[c] for c in union])
    totals = np.zeros(len(fits))
    if isinstance(source, Design):
        chunks = source.chunks(union, rows=chunk_rows, centre=means)
    else:
        chunks = (chunk - means for chunk in _row_chunks(source, union, chunk_rows))
    for centred in chunks:
        width = centred.shape[0]
        error = np.empty(width)
        weight = np.empty(width)
        scratch = np.empty(width)
        for i, (block, weights) in enumerate(plans):
            columns = range(block.start, block.stop) if isinstance(block, slice) else block
            # [x~ y~] @ [[-beta, C^{-1} e_j], [1, 0]] = [e, w_j], column by column: thin
            # products are faster as cache-resident axpy updates than as threaded BLAS calls
            error.fill(0.0)
            weight.fill(0.0)
            for row, c in enumerate(columns):
                values = centred[:, c]
                if weights[row, 0] != 0.0:
                    np.multiply(values, weights[row, 0], out=scratch)
                    error += scratch
                if weights[row, 1] != 0.0:
                    np.multiply(values, weights[row, 1], out=scratch)
                    weight += scratch
            # sum_i e_i^2 w_ij^2
            np.multiply(error, weight, out=scratch)
            totals[i] += float(np.dot(scratch, scratch))
    return [float(np.sqrt(total * f.n / f.dof)) for total, f in zip(totals, fits)]

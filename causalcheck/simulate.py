"""Monte Carlo of planned studies: many samples of size n, every plan's regression on each.

Rather than simulating ``n`` rows per study, each simulated study draws its sample covariance
matrix directly from its sampling distribution, :math:`(n-1)S \\sim W_p(\\Sigma, n-1)` for
Gaussian rows (:func:`causalcheck.design.sample_covariances`), which costs :math:`O(p^3)`
instead of :math:`O(np^2)`. Ordinary least squares with an intercept depends on the rows only
through the centred cross-products :math:`C = (n-1)S`, so every plan's estimate and standard
error are exactly those a row-level fit would give for a sample with that :math:`S`.

For many draws at once the small systems are solved with numpy's batched linear algebra
(:func:`fit_batch`); the same formulas as :func:`causalcheck.regress.fit`, which the tests
check draw by draw:

.. math::

    \\hat\\beta = S_{XX}^{-1} S_{Xy}, \\quad
    \\hat\\sigma^2 = \\frac{(n-1)(S_{yy} - S_{yX}\\hat\\beta)}{n-k-1}, \\quad
    \\mathrm{SE}(\\hat\\beta_T) = \\sqrt{\\hat\\sigma^2\\,[S_{XX}^{-1}]_{TT} / (n-1)} .

Reported per plan: the mean and standard deviation of the estimates, the mean reported
standard error, the coverage of the true effect by the :math:`1-\\alpha` t interval and the
power (share of studies whose interval excludes zero).

References
----------
Anderson, T. W. (2003). An Introduction to Multivariate Statistical Analysis, 3rd ed. Wiley,
Sec. 7.2 (Wishart distribution of the sample covariance) and Sec. 3.3.
Chan, T. F., Golub, G. H. & LeVeque, R. J. (1979). Updating formulae and a pairwise algorithm
for computing sample variances. Stanford report STAN-CS-79-773 (merging batch summaries).
Morris, T. P., White, I. R. & Crowther, M. J. (2019). Using simulation studies to evaluate
statistical methods. Statistics in Medicine 38(11), 2074-2102 (Monte Carlo standard errors).
"""

from __future__ import annotations

import math
import sys
import time
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy import stats

from .design import sample_covariances, sample_rows

__all__ = [
    "OptionSimulation",
    "SimulationResult",
    "fit_batch",
    "simulate_plans",
]

_BATCH_ELEMENTS = 2_000_000     # doubles per batch of covariance draws (about 16 MB)


@dataclass(frozen=True)
class OptionSimulation:
    """Monte Carlo results of one plan's regression.

    ``mc_se_mean`` is the Monte Carlo standard error of ``mean_estimate``
    (:math:`\\mathrm{sd}/\\sqrt{R}`, Morris et al. 2019, Table 6).
    """

    measure: tuple[str, ...]
    adjust_for: tuple[str, ...]
    mean_estimate: float
    sd_estimate: float
    mc_se_mean: float
    mean_std_error: float
    empirical_bias: float
    empirical_rmse: float
    coverage: float
    power: float

    def to_dict(self) -> dict:
        return {"measure": list(self.measure), "adjust_for": list(self.adjust_for),
                "mean_estimate": self.mean_estimate, "sd_estimate": self.sd_estimate,
                "mc_se_mean": self.mc_se_mean, "mean_std_error": self.mean_std_error,
                "empirical_bias": self.empirical_bias, "empirical_rmse": self.empirical_rmse,
                "coverage": self.coverage, "power": self.power}


@dataclass(frozen=True)
class SimulationResult:
    """The ``simulation`` key of the plan document."""

    method: str
    replications: int
    n: int
    seed: int | None
    alpha: float
    true_effect: float
    options: tuple[OptionSimulation, ...]
    seconds: float

    def to_dict(self) -> dict:
        return {"method": self.method, "replications": self.replications, "n": self.n,
                "seed": self.seed, "alpha": self.alpha, "true_effect": self.true_effect,
                "coverage_level": 1.0 - self.alpha,
                "power_means": "share of simulated studies whose interval excludes zero",
                "seconds": self.seconds,
                "options": [o.to_dict() for o in self.options]}


def fit_batch(covariances: np.ndarray, outcome: int, regressors: Sequence[int], n: int
              ) -> tuple[np.ndarray, np.ndarray, int]:
    """OLS slope and standard error of the first regressor, for a batch of sample covariances.

    Parameters
    ----------
    covariances : ndarray, shape (r, p, p)
        Sample covariance matrices (divisor ``n - 1``).
    outcome : int
        Column index of the outcome.
    regressors : sequence of int
        Column indices of the regressors, the treatment first (intercept implicit).
    n : int
        Rows behind each matrix.

    Returns
    -------
    estimate, std_error : ndarray, shape (r,)
        Slope of ``regressors[0]`` and its classical standard error.
    dof : int
        :math:`n - k - 1`.

    Examples
    --------
    >>> s = np.array([[[1.0, 0.5], [0.5, 1.0]]])
    >>> estimate, se, dof = fit_batch(s, 1, [0], 101)
    >>> float(estimate[0]), round(float(se[0]), 6), dof   # se = sqrt((1-.25)/(99*1))
    (0.5, 0.087039, 99)
    """
    ix = np.asarray(regressors, dtype=int)
    k = ix.size
    dof = n - k - 1
    sxx = covariances[:, ix[:, None], ix[None, :]]              # (r, k, k)
    sxy = covariances[:, ix, outcome]                           # (r, k)
    syy = covariances[:, outcome, outcome]                      # (r,)
    inverse = np.linalg.inv(sxx)
    beta = np.einsum("rij,rj->ri", inverse, sxy)                # S_XX^{-1} S_Xy
    # residual variance per row of S: S_yy - S_yX beta; sigma^2 = (n-1) * that / dof
    residual = syy - np.einsum("ri,ri->r", sxy, beta)
    # SE^2 = sigma^2 [C_XX^{-1}]_00 = residual * [S_XX^{-1}]_00 / dof
    variance = np.maximum(residual, 0.0) * inverse[:, 0, 0] / dof
    return beta[:, 0], np.sqrt(variance), dof


def simulate_plans(covariance: np.ndarray, variables: Sequence[str], treatment: str,
                   outcome: str, plans: Sequence[tuple[Sequence[str], Sequence[str]]], *,
                   n: int, replications: int, true_effect: float, alpha: float = 0.05,
                   rng: np.random.Generator, seed: int | None = None,
                   method: str = "wishart", progress: bool = False) -> SimulationResult:
    """Simulate ``replications`` studies of ``n`` rows and fit every plan on each.

    Parameters
    ----------
    covariance : ndarray, shape (p, p)
        Population covariance of ``variables``.
    variables : sequence of str
    treatment, outcome : str
    plans : sequence of (measure, adjust_for)
        Each plan's measured variables (carried into the result) and adjustment set.
    n : int
        Rows in each simulated study.
    replications : int
        Simulated studies (the same draws serve every plan).
    true_effect : float
        For coverage.
    alpha : float
        Interval level :math:`1-\\alpha`.
    rng : numpy.random.Generator
        The only source of randomness.
    seed : int, optional
        Recorded in the result.
    method : {"wishart", "rows"}
        Draw each sample covariance from the Wishart distribution (fast) or compute it from
        ``n`` simulated rows (the slow peer, for checks and benchmarks).
    progress : bool
        Show a tqdm progress bar on stderr.

    Returns
    -------
    SimulationResult
    """
    if method not in ("wishart", "rows"):
        raise ValueError(f"method must be 'wishart' or 'rows'; got {method!r}")
    started = time.perf_counter()
    index = {name: i for i, name in enumerate(variables)}
    p = len(variables)
    columns = [[index[treatment], *(index[z] for z in sorted(adjust))] for _, adjust in plans]
    k = len(plans)
    dofs = [n - len(c) - 1 for c in columns]
    quantiles = np.array([float(stats.t.ppf(1.0 - alpha / 2.0, d)) for d in dofs])
    # running summaries per plan, merged batch by batch (memory does not grow with R):
    # count, mean and centred sum of squares of the estimates (Chan, Golub & LeVeque 1979),
    # sums of standard errors and squared errors, covered and rejected counts
    seen = 0
    mean = np.zeros(k)
    m2 = np.zeros(k)
    se_sum = np.zeros(k)
    squared_error = np.zeros(k)
    covered = np.zeros(k)
    rejects = np.zeros(k)
    batch = max(1, min(replications, _BATCH_ELEMENTS // (p * p)))
    bar = None
    if progress:
        from tqdm import tqdm

        bar = tqdm(total=replications, unit="study", file=sys.stderr, leave=False,
                   desc="simulating")
    while seen < replications:
        size = min(batch, replications - seen)
        if method == "wishart":
            draws = sample_covariances(covariance, n, size, rng)
        else:
            draws = np.stack([np.cov(sample_rows(covariance, n, rng), rowvar=False)
                              for _ in range(size)])
        for row, regressors in enumerate(columns):
            estimate, error, _ = fit_batch(draws, index[outcome], regressors, n)
            batch_mean = float(estimate.mean())
            batch_m2 = float(np.sum((estimate - batch_mean) ** 2))
            # pairwise update: d = mean_b - mean_a, M2 = M2_a + M2_b + d^2 n_a n_b / n
            total = seen + size
            delta = batch_mean - mean[row]
            mean[row] += delta * size / total
            m2[row] += batch_m2 + delta * delta * seen * size / total
            se_sum[row] += float(error.sum())
            squared_error[row] += float(np.sum((estimate - true_effect) ** 2))
            # coverage: |estimate - tau| <= t_{1-alpha/2} SE ; power: |estimate| > t SE
            covered[row] += int(np.sum(np.abs(estimate - true_effect) <= quantiles[row] * error))
            rejects[row] += int(np.sum(np.abs(estimate) > quantiles[row] * error))
        seen += size
        if bar is not None:
            bar.update(size)
    if bar is not None:
        bar.close()
    results = []
    for row, (measure, adjust) in enumerate(plans):
        spread = math.sqrt(m2[row] / (replications - 1)) if replications > 1 else math.nan
        results.append(OptionSimulation(
            measure=tuple(measure), adjust_for=tuple(sorted(adjust)),
            mean_estimate=float(mean[row]), sd_estimate=spread,
            mc_se_mean=spread / math.sqrt(replications),
            mean_std_error=float(se_sum[row] / replications),
            empirical_bias=float(mean[row] - true_effect),
            empirical_rmse=math.sqrt(squared_error[row] / replications),
            coverage=float(covered[row] / replications),
            power=float(rejects[row] / replications)))
    return SimulationResult(method=method, replications=replications, n=n, seed=seed,
                            alpha=alpha, true_effect=true_effect, options=tuple(results),
                            seconds=time.perf_counter() - started)

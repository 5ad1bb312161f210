"""Testing the conditional independences a causal graph implies, from moments alone.

A DAG implies that some pairs of measured variables are independent given others
(d-separation); :func:`causalcheck.graph.identify` lists a basis of them. If the data
contradict one, the graph (or the linear-Gaussian working model) is wrong somewhere, and the
adjustment sets read off it are in doubt. Here each implication :math:`A \\perp B \\mid S` is
tested by a linear test on the moments, and the p-values are adjusted for multiplicity with
Holm's (1979) step-down method.

Tests used
----------
*Two single columns* (numeric or binary): the partial correlation
:math:`r = -P_{AB}/\\sqrt{P_{AA}P_{BB}}`, with :math:`P` the inverse covariance of
:math:`(A, B, S)`, and Fisher's (1924) z test

.. math:: z = \\operatorname{artanh}(r)\\,\\sqrt{n - |S| - 3},

two-sided against the standard normal (:math:`|S|` counts design columns).

*A categorical on either side* (a block of dummy columns): the two blocks are independent given
:math:`S` exactly when every partial canonical correlation is zero. The test is Wilks'
likelihood ratio

.. math:: \\Lambda = \\frac{\\det \\Sigma_{AB\\cdot S}}{\\det\\Sigma_{A\\cdot S}\\,\\det\\Sigma_{B\\cdot S}}
          = \\prod_i (1 - \\rho_i^2),

with Rao's (1951) F approximation, which is exact under normality when one block has one or two
columns. For one column against a block it equals the usual partial F test of the block's
coefficients; because :math:`\\Lambda` is symmetric in the two blocks, so is the test. We chose
this over testing each dummy separately and combining (Bonferroni inside the pair), which loses
power and depends on the reference level.

References
----------
Fisher, R. A. (1924). The distribution of the partial correlation coefficient. Metron 3,
329–332.

Rao, C. R. (1951). An asymptotic expansion of the distribution of Wilks' criterion. Bulletin of
the International Statistical Institute 33(2), 177–180.

Anderson, T. W. (2003). An Introduction to Multivariate Statistical Analysis, 3rd ed., Secs.
4.3 (partial correlation) and 8.5 (Wilks' criterion). Wiley.

Holm, S. (1979). A simple sequentially rejective multiple test procedure. Scandinavian Journal
of Statistics 6, 65–70.

Examples
--------
>>> import numpy as np
>>> from causalcheck.moments import moments_from_array
>>> rng = np.random.default_rng(1)
>>> z = rng.normal(size=2000); a = z + rng.normal(size=2000); b = z + rng.normal(size=2000)
>>> m = moments_from_array(np.column_stack([a, b, z]), ["a", "b", "z"])
>>> abs(partial_correlation(m, "a", "b", ["z"])) < 0.1
True
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from typing import Any, Protocol

import numpy as np
from scipy import linalg, stats

from .errors import NumericsError
from .moments import Moments

__all__ = [
    "ImplicationTest",
    "check_implication",
    "check_implications",
    "holm_adjust",
    "partial_correlation",
]


class _ImplicationLike(Protocol):
    left: str
    right: str
    given: tuple[str, ...]


@dataclass(frozen=True)
class ImplicationTest:
    """The test of one implied independence ``left ⊥ right | given``.

    ``test`` is ``"fisher_z"`` (statistic z), ``"wilks_rao_f"`` (statistic F with
    ``dof = (df1, df2)``), or ``"degenerate"`` / ``"none"`` when the data cannot test it (then
    the numbers are ``nan`` and ``note`` says why); ``partial_correlation`` is set for the
    Fisher test only.
    ``holm_p_value`` and ``rejected`` (Holm-adjusted p below ``alpha``) come from the family
    tested together.
    """

    left: str
    right: str
    given: tuple[str, ...]
    test: str
    statistic: float
    p_value: float
    dof: tuple[float, ...]
    n: int
    partial_correlation: float | None = None
    wilks_lambda: float | None = None
    holm_p_value: float | None = None
    rejected: bool | None = None
    alpha: float = 0.05
    note: str | None = None

    def to_dict(self) -> dict[str, Any]:
        return {"left": self.left, "right": self.right, "given": list(self.given),
                "test": self.test, "statistic": self.statistic, "p_value": self.p_value,
                "holm_p_value": self.holm_p_value, "rejected": self.rejected,
                "dof": list(self.dof), "n": self.n,
                "partial_correlation": self.partial_correlation,
                "wilks_lambda": self.wilks_lambda, "note": self.note}


def _partial_covariance(moments: Moments, columns: Sequence[str],
                        given: Sequence[str]) -> np.ndarray:
    """Covariance of ``columns`` after regressing out ``given``: Σ_AA − Σ_AS Σ_SS⁻¹ Σ_SA."""
    ia = [moments.index(c) for c in columns]
    cov = moments.covariance()
    used = [*columns, *given]
    beyond = [c for c in used if not np.isfinite(cov[moments.index(c), moments.index(c)])]
    if beyond:
        raise NumericsError(f"the column(s) {beyond} hold values too large to square in double "
                            "precision; the implied independence cannot be tested")
    saa = cov[np.ix_(ia, ia)]
    if not given:
        return saa
    iS = [moments.index(c) for c in given]
    sss = cov[np.ix_(iS, iS)]
    ssa = cov[np.ix_(iS, ia)]
    # scale to correlation form before solving, for digits
    scale = np.sqrt(np.diag(sss))
    if np.any(scale == 0):
        bad = [given[i] for i in np.flatnonzero(scale == 0)]
        raise NumericsError(f"the conditioning column(s) {bad} are constant; an implied "
                            "independence cannot be tested given a constant")
    corr = sss / np.outer(scale, scale)
    try:
        solved = linalg.solve(corr, ssa / scale[:, None], assume_a="pos")
    except (linalg.LinAlgError, ValueError) as e:
        raise NumericsError(f"the conditioning columns {list(given)} are collinear; the "
                            "implied independence cannot be tested given all of them") from e
    # Σ_AA·S = Σ_AA − Σ_AS Σ_SS⁻¹ Σ_SA
    return saa - (ssa / scale[:, None]).T @ solved


def partial_correlation(moments: Moments, left: str, right: str,
                        given: Sequence[str] = ()) -> float:
    """Partial correlation of two single columns given others.

    .. math:: r_{AB\\cdot S} = \\frac{\\Sigma_{AB\\cdot S}}{\\sqrt{\\Sigma_{AA\\cdot S}\\,\\Sigma_{BB\\cdot S}}}
    """
    columns = moments.select([left, right])
    if len(columns) != 2:
        raise ValueError("partial_correlation needs two single-column variables")
    part = _partial_covariance(moments, columns, moments.select(given))
    return float(part[0, 1] / math.sqrt(part[0, 0] * part[1, 1]))


def _fisher_z(r: float, n: int, conditioning: int) -> tuple[float, float]:
    dof = n - conditioning - 3
    if dof <= 0:
        return math.nan, math.nan
    r = min(max(r, -1.0 + 1e-16), 1.0 - 1e-16)
    # z = atanh(r) * sqrt(n - |S| - 3)
    z = math.atanh(r) * math.sqrt(dof)
    # two-sided normal p-value, 2 * (1 - Phi(|z|)) = erfc(|z| / sqrt 2)
    return z, math.erfc(abs(z) / math.sqrt(2.0))


def _wilks_rao(part: np.ndarray, p: int, q: int, n: int,
               conditioning: int) -> tuple[float, float, float, float, float]:
    """Wilks' Λ of blocks a (first p) and b (last q) of a partial covariance, with Rao's F.

    Returns (F, p-value, df1, df2, Λ).
    """
    scale = np.sqrt(np.diag(part))
    corr = part / np.outer(scale, scale)
    # Λ = det Σ_AB·S / (det Σ_A·S det Σ_B·S), through log-determinants of correlation blocks
    _, log_all = np.linalg.slogdet(corr)
    _, log_a = np.linalg.slogdet(corr[:p, :p])
    _, log_b = np.linalg.slogdet(corr[p:, p:])
    wilks = float(np.exp(log_all - log_a - log_b))
    wilks = min(max(wilks, 1e-300), 1.0)
    error_dof = n - 1 - conditioning - q       # residual dof of block a on (b, S)
    # Rao (1951): s = sqrt((p²q² − 4)/(p² + q² − 5)), w = ν_e + q − (p + q + 1)/2
    s = math.sqrt((p * p * q * q - 4) / (p * p + q * q - 5)) if p * p + q * q - 5 > 0 else 1.0
    w = error_dof + q - (p + q + 1) / 2.0
    df1 = p * q
    df2 = w * s - p * q / 2.0 + 1.0
    if df2 <= 0:
        return math.nan, math.nan, df1, df2, wilks
    root = wilks ** (1.0 / s)
    # F = (1 − Λ^{1/s}) / Λ^{1/s} · df2 / df1
    f_value = (1.0 - root) / root * df2 / df1
    return f_value, float(stats.f.sf(f_value, df1, df2)), float(df1), float(df2), wilks


def _degenerate(moments: Moments, columns: Sequence[str], given: Sequence[str],
                part: np.ndarray) -> str | None:
    """Why the independence cannot be tested (a column fixed by the conditioning set), or None.

    A column that is an exact linear function of the conditioning columns is trivially
    independent of everything given them, so the data cannot test the implication.
    """
    total = np.diag(moments.cross)[[moments.index(c) for c in columns]] / (moments.n - 1)
    for column, residual, variance in zip(columns, np.diag(part), total):
        # residual variance share 1 - R^2 of the column on the conditioning set
        if not variance > 0 or residual <= 1e-10 * variance:
            fixed = f"given {', '.join(given)}" if given else "in the data"
            return (f"{column} is constant {fixed} (an exact linear function of them), so the "
                    "independence cannot be tested")
    return None


def check_implication(moments: Moments, left: str, right: str, given: Sequence[str] = (), *,
                     alpha: float = 0.05) -> ImplicationTest:
    """Test ``left ⊥ right | given`` (see the module notes for the tests used).

    Returns
    -------
    ImplicationTest
        ``holm_p_value`` is the raw p-value here; :func:`check_implications` adjusts a family.
    """
    a = moments.select([left])
    b = moments.select([right])
    s = moments.select(given)
    if not a or not b:
        # a categorical with a single observed level carries no variation: nothing to test
        return ImplicationTest(left, right, tuple(given), "none", math.nan, math.nan, (),
                               moments.n, alpha=alpha,
                               note="a variable with a single observed level cannot be tested")
    try:
        part = _partial_covariance(moments, (*a, *b), s)
        problem = _degenerate(moments, (*a, *b), s, part)
    except NumericsError as error:
        problem = str(error)
    if problem is not None:
        return ImplicationTest(left, right, tuple(given), "degenerate", math.nan, math.nan,
                               (), moments.n, alpha=alpha, note=problem)
    if len(a) == 1 and len(b) == 1:
        # r = Σ_AB·S / sqrt(Σ_AA·S Σ_BB·S)
        r = float(part[0, 1] / math.sqrt(part[0, 0] * part[1, 1]))
        z, p_value = _fisher_z(r, moments.n, len(s))
        return ImplicationTest(left, right, tuple(given), "fisher_z", z, p_value,
                               (float(moments.n - len(s) - 3),), moments.n,
                               partial_correlation=r, holm_p_value=p_value,
                               rejected=None if math.isnan(p_value) else bool(p_value < alpha),
                               alpha=alpha)
    f_value, p_value, df1, df2, wilks = _wilks_rao(part, len(a), len(b), moments.n, len(s))
    return ImplicationTest(left, right, tuple(given), "wilks_rao_f", f_value, p_value,
                           (df1, df2), moments.n, wilks_lambda=wilks, holm_p_value=p_value,
                           rejected=None if math.isnan(p_value) else bool(p_value < alpha),
                           alpha=alpha)


def holm_adjust(p_values: Sequence[float]) -> list[float]:
    """Holm (1979) step-down adjusted p-values (``nan`` entries stay ``nan``, not counted).

    .. math:: \\tilde p_{(i)} = \\max_{j \\le i} \\min\\{1, (m - j + 1)\\, p_{(j)}\\}

    >>> [round(p, 12) for p in holm_adjust([0.01, 0.04, 0.03])]
    [0.03, 0.06, 0.06]
    """
    finite = [(p, i) for i, p in enumerate(p_values) if not math.isnan(p)]
    m = len(finite)
    adjusted = [math.nan] * len(p_values)
    running = 0.0
    for rank, (p, i) in enumerate(sorted(finite)):
        running = max(running, min(1.0, (m - rank) * p))
        adjusted[i] = running
    return adjusted


def check_implications(moments: Moments, implications: Iterable[_ImplicationLike], *,
                      alpha: float = 0.05) -> tuple[ImplicationTest, ...]:
    """Test every implication and Holm-adjust the family; ``rejected`` uses the adjusted p."""
    raw = [check_implication(moments, imp.left, imp.right, tuple(imp.given), alpha=alpha)
           for imp in implications]
    adjusted = holm_adjust([t.p_value for t in raw])
    out = []
    for result, holm in zip(raw, adjusted):
        out.append(ImplicationTest(
            left=result.left, right=result.right, given=result.given, test=result.test,
            statistic=result.statistic, p_value=result.p_value, dof=result.dof, n=result.n,
            partial_correlation=result.partial_correlation, wilks_lambda=result.wilks_lambda,
            holm_p_value=holm, rejected=None if math.isnan(holm) else bool(holm < alpha),
            alpha=alpha, note=result.note))
    return tuple(out)

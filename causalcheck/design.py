"""Planning mode's structural model: path strengths → a linear-Gaussian SEM and its covariance.

Before any data exist, a study file's ``[strengths]`` table gives a *standardised path
coefficient* for edges of the causal graph: the change in the child, in its standard
deviations, per standard deviation of the parent with the other parents held fixed. A fixed
strength is a number; a range ``[low, high]`` is planned at its midpoint and swept by
:mod:`causalcheck.plan`. Edges without a strength get ``[plan].default_strength``.

Definitions
-----------
Each variable is a linear function of its parents plus an independent Gaussian error,

.. math:: X = B X + \\varepsilon,\\qquad \\varepsilon \\sim N(0, \\Omega),\\;
          \\Omega = \\operatorname{diag}(\\omega_1, \\dots, \\omega_p),

with ``B[j, i]`` the strength of ``i -> j``. Because the strengths are standardised, every
variable has unit variance, which fixes the error variances. In a topological order,

.. math:: \\omega_j = 1 - b_j^\\top \\Sigma_{\\mathrm{pa}(j)} b_j,

where :math:`b_j` holds the strengths into :math:`j` and :math:`\\Sigma_{\\mathrm{pa}(j)}` is the
(already known) correlation matrix of its parents. When the parents would explain all of the
variance or more (:math:`b_j^\\top \\Sigma_{\\mathrm{pa}(j)} b_j \\ge 1`) the strengths describe
no possible population and :class:`~causalcheck.errors.PlanError` names the variable. The
implied covariance (here a correlation matrix) is

.. math:: \\Sigma = (I - B)^{-1}\\, \\Omega\\, (I - B)^{-\\top}.

Sampling: the sample covariance matrix :math:`S` of :math:`n` Gaussian rows satisfies
:math:`(n-1) S \\sim \\mathrm{Wishart}(\\Sigma, n - 1)` (Anderson 2003, Sec. 7.2), so a Monte
Carlo study can draw :math:`S` directly (Bartlett 1933 decomposition) instead of :math:`n` rows.

References
----------
Wright, S. (1934). The method of path coefficients. *Annals of Mathematical Statistics* 5(3),
161-215.
Bollen, K. A. (1989). *Structural Equations with Latent Variables*. Wiley, Ch. 4 (implied
covariance of a recursive model).
Bartlett, M. S. (1933). On the theory of statistical regression. *Proceedings of the Royal
Society of Edinburgh* 53, 260-283.
Anderson, T. W. (2003). *An Introduction to Multivariate Statistical Analysis*, 3rd ed. Wiley,
Sec. 7.2 (the Wishart distribution) and Corollary 7.2.1 (Bartlett decomposition).

Examples
--------
>>> from causalcheck.study import parse_study
>>> study = parse_study('''
... [study]
... treatment = "x"
... outcome = "y"
... [graph]
... edges = ["z -> x", "z -> y", "x -> y"]
... [strengths]
... "z -> x" = 0.5
... "z -> y" = 0.4
... "x -> y" = 0.3
... [plan]
... n = 500
... ''')
>>> model = build_structural_model(study)
>>> model.variables
('z', 'x', 'y')
>>> round(float(model.correlation("x", "y")), 4)   # 0.3 + 0.5*0.4 by path tracing
0.5
>>> round(model.total_effect("x", "y"), 4)
0.3
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import networkx as nx
import numpy as np

from .errors import GraphError, PlanError, Problem, StudyFileError
from .study import Study

__all__ = [
    "Strength",
    "StrengthTable",
    "StructuralModel",
    "build_structural_model",
    "error_variances_batch",
    "implied_covariance",
    "resolve_strengths",
    "sample_covariances",
    "sample_rows",
    "topological_order",
    "unit_variance_error_variances",
]


def _edge_text(edge: tuple[str, str]) -> str:
    return f"{edge[0]} -> {edge[1]}"


@dataclass(frozen=True)
class Strength:
    """The planned strength of one edge.

    ``source`` is ``"study"`` (a number in ``[strengths]``), ``"range"`` (a ``[low, high]``
    range, planned at its midpoint ``value``) or ``"default"`` (``[plan].default_strength``).
    """

    edge: tuple[str, str]
    value: float
    low: float
    high: float
    source: str

    @property
    def is_range(self) -> bool:
        return self.high > self.low

    def to_dict(self) -> dict:
        return {"edge": _edge_text(self.edge), "value": self.value, "low": self.low,
                "high": self.high, "source": self.source}


@dataclass(frozen=True)
class StrengthTable:
    """Every edge's planned strength, in the order of ``[graph].edges``."""

    strengths: tuple[Strength, ...]
    default_strength: float

    @property
    def defaulted(self) -> tuple[tuple[str, str], ...]:
        """Edges that got the default strength because ``[strengths]`` is silent on them."""
        return tuple(s.edge for s in self.strengths if s.source == "default")

    @property
    def ranged(self) -> tuple[Strength, ...]:
        """Edges given as a range ``[low, high]`` with ``low < high``."""
        return tuple(s for s in self.strengths if s.is_range)

    def values(self) -> dict[tuple[str, str], float]:
        """Edge → planned (point) strength."""
        return {s.edge: s.value for s in self.strengths}

    def to_dict(self) -> dict:
        return {"default_strength": self.default_strength,
                "edges": [s.to_dict() for s in self.strengths],
                "defaulted": [_edge_text(e) for e in self.defaulted]}


def resolve_strengths(study: Study) -> StrengthTable:
    """Each edge's planned strength: the study's number, a range's midpoint, or the default.

    Parameters
    ----------
    study : Study
        A parsed study with a ``[graph]``; ``[plan]`` is optional here.

    Returns
    -------
    StrengthTable

    Raises
    ------
    StudyFileError
        When ``[plan].require_strengths = true`` and some edges have no strength (all of them
        are listed).
    """
    spec = study.plan
    default = spec.default_strength if spec is not None else 0.2
    require = spec.require_strengths if spec is not None else False
    rows: list[Strength] = []
    missing: list[tuple[str, str]] = []
    for edge in study.edges:
        given = study.strengths.get(edge)
        if given is None:
            missing.append(edge)
            rows.append(Strength(edge, default, default, default, "default"))
            continue
        low, high = given
        source = "range" if high > low else "study"
        # a range is planned at its midpoint; the sweep covers the rest
        rows.append(Strength(edge, 0.5 * (low + high), low, high, source))
    if require and missing:
        listed = ", ".join(f'"{_edge_text(e)}"' for e in missing)
        raise StudyFileError(study.source, [Problem(
            "[strengths]",
            f"[plan].require_strengths = true, but {len(missing)} edge"
            f"{'s have' if len(missing) != 1 else ' has'} no strength: {listed}. Add a "
            "standardised path coefficient (or a range [low, high]) for each, or set "
            "require_strengths = false to give them [plan].default_strength")])
    return StrengthTable(tuple(rows), default)


def topological_order(study: Study) -> tuple[str, ...]:
    """The graph's nodes in a topological order (ties broken alphabetically).

    Raises
    ------
    GraphError
        When the graph has a cycle (one cycle is named).
    """
    graph = nx.DiGraph()
    graph.add_nodes_from(study.nodes)
    graph.add_edges_from(study.edges)
    try:
        return tuple(nx.lexicographical_topological_sort(graph))
    except nx.NetworkXUnfeasible:
        cycle = [u for u, _ in nx.find_cycle(graph)]
        loop = " -> ".join(cycle + [cycle[0]])
        raise GraphError(
            f"study file {study.source!r}: [graph].edges has a cycle {loop}; a causal DAG "
            "cannot loop back on itself. Remove or reverse one of these edges") from None


@dataclass(frozen=True, eq=False)
class StructuralModel:
    """A standardised linear-Gaussian structural model.

    Attributes
    ----------
    variables : tuple of str
        Nodes in topological order; the index of the arrays below.
    coefficients : ndarray, shape (p, p)
        ``B[j, i]`` is the path coefficient of ``variables[i] -> variables[j]`` (strictly lower
        triangular in this order).
    error_variances : ndarray, shape (p,)
        :math:`\\omega_j`, chosen so every variable has unit variance.
    strengths : StrengthTable
        Where each coefficient came from.
    """

    variables: tuple[str, ...]
    coefficients: np.ndarray
    error_variances: np.ndarray
    strengths: StrengthTable

    def index(self, name: str) -> int:
        return self.variables.index(name)

    def covariance(self) -> np.ndarray:
        """:math:`\\Sigma = (I-B)^{-1}\\Omega(I-B)^{-\\top}` (a correlation matrix)."""
        return implied_covariance(self.coefficients, self.error_variances)

    def correlation(self, a: str, b: str) -> float:
        """The implied correlation of ``a`` and ``b``."""
        return float(self.covariance()[self.index(a), self.index(b)])

    def total_effect(self, cause: str, effect: str) -> float:
        """Total causal effect of ``cause`` on ``effect``: :math:`[(I-B)^{-1}]_{effect,cause}`.

        It equals the sum, over directed paths from ``cause`` to ``effect``, of the product of
        the path coefficients along each path (Wright 1934), because
        :math:`(I-B)^{-1} = I + B + B^2 + \\dots` and :math:`[B^k]_{ji}` sums the products
        over directed paths of length ``k``.
        """
        p = len(self.variables)
        # (I - B)^{-1}: total effects of column variable on row variable
        total = np.linalg.solve(np.eye(p) - self.coefficients, np.eye(p))
        return float(total[self.index(effect), self.index(cause)])

    def with_strengths(self, values: Mapping[tuple[str, str], float]) -> StructuralModel:
        """A copy with some coefficients replaced (error variances re-solved)."""
        coefficients = self.coefficients.copy()
        for (parent, child), value in values.items():
            coefficients[self.index(child), self.index(parent)] = value
        omega = unit_variance_error_variances(self.variables, coefficients)
        return StructuralModel(self.variables, coefficients, omega, self.strengths)

    def to_dict(self) -> dict:
        return {
            "variables": list(self.variables),
            "error_variances": {v: float(w) for v, w in zip(self.variables,
                                                            self.error_variances)},
            "strengths": self.strengths.to_dict(),
        }


def build_structural_model(study: Study, *,
                           strengths: StrengthTable | None = None) -> StructuralModel:
    """The standardised linear SEM a study's ``[strengths]`` describe.

    Parameters
    ----------
    study : Study
        A parsed study with a ``[graph]``.
    strengths : StrengthTable, optional
        Planned strengths; by default :func:`resolve_strengths` of the study.

    Returns
    -------
    StructuralModel

    Raises
    ------
    GraphError
        When the graph has a cycle.
    PlanError
        When some variable's parents would explain all of its variance or more.
    StudyFileError
        When ``require_strengths`` is set and strengths are missing.

    Notes
    -----
    Error variances solve :math:`\\omega_j = 1 - b_j^\\top\\Sigma_{pa(j)}b_j` in topological order
    (Bollen 1989, Ch. 4); see :func:`unit_variance_error_variances`.
    """
    table = strengths if strengths is not None else resolve_strengths(study)
    order = topological_order(study)
    index = {name: i for i, name in enumerate(order)}
    p = len(order)
    coefficients = np.zeros((p, p))
    for s in table.strengths:
        parent, child = s.edge
        coefficients[index[child], index[parent]] = s.value
    sources = {s.edge: s for s in table.strengths}

    def annotate(parent: str, child: str) -> str:
        found = sources.get((parent, child))
        if found is None or found.source == "study":
            return ""
        if found.source == "default":
            return " (default)"
        return f" (midpoint of {found.low:g} to {found.high:g})"

    try:
        omega = unit_variance_error_variances(order, coefficients, annotate=annotate)
    except PlanError as error:
        raise PlanError(f"study file {study.source!r}: {error}") from None
    return StructuralModel(order, coefficients, omega, table)


def unit_variance_error_variances(variables: Sequence[str], coefficients: np.ndarray, *,
                                  annotate: Callable[[str, str], str] | None = None
                                  ) -> np.ndarray:
    """Error variances that give every variable unit variance.

    Parameters
    ----------
    variables : sequence of str
        Names in topological order (the order of ``coefficients``' rows and columns).
    coefficients : ndarray, shape (p, p)
        ``B[j, i]`` the standardised path coefficient of ``i -> j``; strictly lower triangular.
    annotate : callable, optional
        ``annotate(parent, child)`` returns a remark shown after that strength in the error
        message, such as ``" (default)"``.

    Returns
    -------
    ndarray, shape (p,)
        :math:`\\omega_j = 1 - b_j^\\top \\Sigma_{pa(j)} b_j`.

    Raises
    ------
    PlanError
        For the first variable (in topological order) whose parents explain a share of at
        least 1 of its variance; the message names it, its parents' strengths and the share.

    Examples
    --------
    >>> B = np.array([[0, 0, 0], [0.6, 0, 0], [0.5, 0.5, 0]])   # a->b, a->c, b->c
    >>> unit_variance_error_variances("abc", B).round(4).tolist()
    [1.0, 0.64, 0.2]
    """
    p = len(variables)
    sigma = np.eye(p)
    omega = np.ones(p)
    for j in range(p):
        parents = np.flatnonzero(coefficients[j, :j])
        if coefficients[j, j:].any():
            raise PlanError(f"the coefficients are not in topological order at "
                            f"{variables[j]!r}")
        if parents.size == 0:
            continue
        b = coefficients[j, parents]
        block = sigma[np.ix_(parents, parents)]
        # explained share: b_j^T Sigma_pa b_j
        explained = float(b @ block @ b)
        if explained >= 1.0 - 1e-12:
            raise PlanError(_explained_detail(variables, j, parents, b, block, explained,
                                              annotate))
        omega[j] = 1.0 - explained
        # Cov(X_j, X_k) = sum_i b_ji Cov(X_i, X_k) for every earlier k
        row = b @ sigma[parents, :j]
        sigma[j, :j] = row
        sigma[:j, j] = row
    return omega


def _explained_detail(variables: Sequence[str], j: int, parents: np.ndarray, b: np.ndarray,
                      block: np.ndarray, explained: float,
                      annotate: Callable[[str, str], str] | None) -> str:
    name = variables[j]
    remarks = [annotate(variables[i], name) if annotate else "" for i in parents]
    listed = ", ".join(f"{variables[i]} -> {name} = {v:g}{remark}"
                       for i, v, remark in zip(parents, b, remarks))
    hint = ""
    if any("default" in r for r in remarks):
        hint = ("; strengths marked (default) are not in [strengths] and use "
                "[plan].default_strength: give them a value or lower the default")
    if any("midpoint" in r for r in remarks):
        hint += "; a range is checked at its midpoint, so narrow or lower it"
    direct = float(b @ b)
    shared = explained - direct
    split = ""
    if abs(shared) > 1e-12:
        split = (f" ({direct:.3f} from the squared strengths plus {shared:+.3f} from the "
                 "correlations among those parents)")
    return (f"the strengths into {name!r} are impossible: its parents ({listed}) would "
            f"explain {explained:.3f} of its variance{split}, but a standardised variable's "
            "parents must explain less than 1 (the rest is its own error variance). Lower "
            f"some of these strengths in [strengths] so that the parents of {name!r} "
            "explain less than all of it" + hint)


def error_variances_batch(coefficients: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """:func:`unit_variance_error_variances` for a batch of coefficient matrices.

    Parameters
    ----------
    coefficients : ndarray, shape (r, p, p)
        Strictly lower-triangular coefficient matrices (one topological order for all).

    Returns
    -------
    omega : ndarray, shape (r, p)
        Error variances; rows of impossible draws hold ``nan``.
    possible : ndarray of bool, shape (r,)
        ``False`` where some variable's parents explain a share of at least 1.
    """
    r, p, _ = coefficients.shape
    sigma = np.broadcast_to(np.eye(p), (r, p, p)).copy()
    omega = np.ones((r, p))
    possible = np.ones(r, dtype=bool)
    for j in range(1, p):
        b = coefficients[:, j, :j]                              # (r, j)
        # explained share: b^T Sigma_{<j} b (zero strengths drop out)
        explained = np.einsum("ri,rik,rk->r", b, sigma[:, :j, :j], b)
        possible &= explained < 1.0 - 1e-12
        omega[:, j] = 1.0 - explained
        row = np.einsum("ri,rik->rk", b, sigma[:, :j, :j])      # Cov(X_j, X_k), k < j
        sigma[:, j, :j] = row
        sigma[:, :j, j] = row
    omega[~possible] = np.nan
    return omega, possible


def implied_covariance(coefficients: np.ndarray, error_variances: np.ndarray) -> np.ndarray:
    """:math:`\\Sigma = (I-B)^{-1}\\Omega(I-B)^{-\\top}` for one model or a batch.

    Parameters
    ----------
    coefficients : ndarray, shape (p, p) or (r, p, p)
    error_variances : ndarray, shape (p,) or (r, p)

    Returns
    -------
    ndarray, shape (p, p) or (r, p, p)

    References
    ----------
    Bollen (1989), Ch. 4, eq. for the recursive observed-variable model.

    Examples
    --------
    >>> B = np.array([[0.0, 0.0], [0.6, 0.0]])
    >>> implied_covariance(B, np.array([1.0, 0.64])).round(4).tolist()
    [[1.0, 0.6], [0.6, 1.0]]
    """
    p = coefficients.shape[-1]
    identity = np.eye(p)
    inverse = np.linalg.inv(identity - coefficients)            # (I - B)^{-1}
    scaled = inverse * error_variances[..., None, :]            # (I - B)^{-1} Omega
    return scaled @ np.swapaxes(inverse, -1, -2)


def sample_covariances(covariance: np.ndarray, n: int, size: int,
                       rng: np.random.Generator) -> np.ndarray:
    """Draw ``size`` sample covariance matrices of ``n`` Gaussian rows, without the rows.

    Parameters
    ----------
    covariance : ndarray, shape (p, p)
        Population covariance :math:`\\Sigma` (positive definite).
    n : int
        Rows in each simulated sample; needs ``n - 1 >= p``.
    size : int
        Number of matrices.
    rng : numpy.random.Generator
        The only source of randomness.

    Returns
    -------
    ndarray, shape (size, p, p)
        Sample covariances (divisor ``n - 1``).

    Notes
    -----
    :math:`(n-1)S \\sim W_p(\\Sigma, m)` with :math:`m = n-1`. Bartlett's decomposition: with
    :math:`\\Sigma = LL^\\top` and :math:`A` lower triangular, :math:`A_{ii}^2 \\sim
    \\chi^2_{m-i+1}` (:math:`i = 1..p`), :math:`A_{ij} \\sim N(0,1)` below the diagonal, all
    independent, :math:`LAA^\\top L^\\top \\sim W_p(\\Sigma, m)` (Anderson 2003, Cor. 7.2.1).

    Examples
    --------
    >>> draws = sample_covariances(np.eye(2), 101, 4000, np.random.default_rng(1))
    >>> bool(abs(draws[:, 0, 1].mean()) < 0.01), draws.shape
    (True, (4000, 2, 2))
    """
    p = covariance.shape[0]
    m = n - 1
    if m < p:
        raise PlanError(f"a sample of n = {n} rows cannot have a full-rank covariance of "
                        f"{p} variables; use n > {p}")
    lower = np.linalg.cholesky(covariance)
    a = np.tril(rng.standard_normal((size, p, p)), k=-1)
    # A_ii = sqrt(chi2(m - i + 1)), i = 1..p
    degrees = m - np.arange(p)
    diagonal = np.sqrt(rng.chisquare(degrees, size=(size, p)))
    index = np.arange(p)
    a[:, index, index] = diagonal
    la = lower @ a                                               # L A
    return (la @ np.swapaxes(la, -1, -2)) / m                    # S = L A A^T L^T / (n-1)


def sample_rows(covariance: np.ndarray, n: int, rng: np.random.Generator) -> np.ndarray:
    """``n`` rows from :math:`N(0, \\Sigma)`: ``Z @ L.T`` with :math:`\\Sigma = LL^\\top`.

    The slow peer of :func:`sample_covariances`, for tests and benchmarks.
    """
    lower = np.linalg.cholesky(covariance)
    return rng.standard_normal((n, covariance.shape[0])) @ lower.T


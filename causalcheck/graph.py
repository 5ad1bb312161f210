"""Identification by covariate adjustment: valid controls, bad controls, and which set to use.

This module answers one question about a causal DAG: *which sets of measured variables may a
regression of the outcome Y on the treatment T adjust for, so that the coefficient of T is
the causal effect?* Everything here is graph algebra; no data are read and nothing is printed.

Paths and d-separation
----------------------
A *path* between T and Y is a sequence of distinct nodes, each adjacent to the next, whatever
the directions of the edges. A node ``b`` on a path ``a - b - c`` is a *collider* when both
edges point into it (``a -> b <- c``) and a *non-collider* otherwise. A path is *open* (it
d-connects its ends) given a set Z when every non-collider on it is outside Z and every collider
is in Z or has a descendant in Z; otherwise Z *blocks* it. Z d-separates T and Y when it blocks
every path between them (Pearl 2009, Sec. 1.2.3).

A *causal path* is a directed path ``T -> ... -> Y``; every other path between T and Y is
*non-causal* (a *biasing* path). A non-causal path that starts with an edge into T
(``T <- ...``) is a *back-door path*.

The adjustment criterion
------------------------
Let cn(T, Y), the *causal nodes*, be the nodes other than T on causal paths from T to Y (Y and
every mediator). The *forbidden set* is

.. math:: \\mathrm{forb}(T, Y) = \\{T\\} \\cup \\mathrm{de}(\\mathrm{cn}(T, Y)),

the causal nodes and all their descendants. The *proper back-door graph* is the graph with the
first edge of every causal path removed (edges ``T -> c`` with c in cn). A set Z of variables
other than T and Y is a *valid adjustment set* if and only if

1. Z contains no node of forb(T, Y), and
2. Z d-separates T and Y in the proper back-door graph,

equivalently, (1) and Z blocks every non-causal path between T and Y in the graph itself
(Shpitser, VanderWeele & Robins 2010; Perković et al. 2018, Sec. 4; from memory). Then the
effect is identified by adjustment for Z, and in a linear model the coefficient of T in the
regression of Y on T and Z is the total effect. It is complete: no other set works for every
distribution compatible with the graph. Pearl's back-door criterion (1995) is the special case
that forbids every descendant of T. With unmeasured variables, a usable set must in addition
consist of measured variables only.

Minimal sets, by separators in a moral graph
--------------------------------------------
A valid set is *minimal* when no proper subset of it is valid. Minimal valid sets of the allowed
variables R (measured, not forbidden) are exactly the inclusion-minimal sets Z of R that
separate T and Y, and every such set lies in the ancestors An(T, Y) of the proper back-door
graph. For sets inside An(T, Y), d-separation equals ordinary vertex separation in the *moral
graph* of the subgraph induced by An(T, Y): marry the parents of each node and drop directions
(Lauritzen et al. 1990). So the listing runs on an undirected graph M in which only vertices of
R may be cut (van der Zander, Liśkiewicz & Textor 2019, Sec. 3-4):

*FindMinSep.* Given a connected vertex set A containing T (vertices known to sit on T's side)
and a set I of vertices that must be in the separator, close A under vertices that cannot be
cut, let N(A) be its boundary (all cuttable), let B be the component of Y once A and N(A) are
removed, and let S = N(B). S is a minimal separator with A on T's side, and a minimal separator
containing I and avoiding A exists if and only if I is contained in S.

*ListMinSep.* Output S; then, for the members v1, v2, ... of S not in I, branch into the
searches "v_k on T's side, v1..v_{k-1} in the separator", keeping only branches FindMinSep
declares feasible. Every minimal separator is output exactly once. Only feasible searches are
kept, so each one kept outputs a set as soon as it is taken up, after at most n FindMinSep
calls of O(n + m) for its branches: the delay between two outputs is O(n (n + m)), where
enumerating subsets would take 2^n steps before the first answer.

The cheapest set (minimum cost) is a minimum-weight vertex cut in M, found by a maximum flow on
the split-node graph in which each cuttable vertex v becomes an edge ``v_in -> v_out`` of
capacity cost(v) (van der Zander et al. 2019, Sec. 5; Ford & Fulkerson 1956). Ties are broken by
fewer variables, then by the alphabetically first sorted list of names.

The optimal set
---------------
.. math:: O(T, Y) = \\mathrm{pa}(\\mathrm{cn}(T, Y)) \\setminus \\mathrm{forb}(T, Y)

is valid whenever any valid set exists, and among all valid sets it gives the smallest
asymptotic variance of the adjusted estimator in linear models (Henckel, Perković & Maathuis
2022, Sec. 3; from memory). It often contains unmeasured variables; it is then reported as
unavailable, with the missing members named.

Roles of the variables
----------------------
With de/an the descendants/ancestors in the graph G, and G_T the graph with T's outgoing edges
removed (so that paths through T's effects are cut):

- *mediator*: on a causal path, strictly between T and Y (in cn(T, Y) other than Y).
- *descendant_of_outcome*: a descendant of Y.
- *descendant_of_treatment*: a descendant of T that is neither a mediator nor a descendant of Y
  (for example a consequence of a mediator, or a side effect of T).
- *confounder*: not a descendant of T or Y, and a *common cause* of T and Y (it has a directed
  path to T, and one to Y that avoids T) or a descendant of a common cause. This covers the
  common causes, the variables on an open back-door path (every node of a back-door path
  without colliders descends from its source) and proxies measured downstream of a common
  cause.
- *collider*: a collider on some path between T and Y, or a descendant of one: conditioning on
  it opens that path unless the path is blocked elsewhere.
- *instrument*: not a descendant of T, d-connected to T, and d-separated from Y in G_T
  (given nothing): it is associated with T and reaches Y only through T (Pearl 2009,
  Sec. 7.4.5). Adjusting for it is harmless for bias in the absence of other confounding but
  costs precision, and amplifies any remaining bias (Cinelli, Forney & Pearl 2022, models 9
  and 10).
- *outcome_predictor*: not a descendant of T or Y, d-separated from T and d-connected to Y
  (given nothing): adjusting for it costs no bias and usually improves precision.
- *unrelated*: none of the above.

Given the empty set, two nodes are d-connected exactly when they have a common ancestor (each is
its own ancestor), so these tests are reachability questions. A variable may have several roles.

What to measure
---------------
When no set of measured variables is valid, ``measure_to_identify`` lists the smallest groups of
unmeasured variables that would make the effect identifiable if measured: the unmeasured members
of the minimal valid sets computed as if every variable were measured, keeping the groups that
contain no other group, ordered by size, total cost and names, at most five. The group with the
fewest unmeasured variables is always found (a minimum-weight cut that counts them), even when
the listing is capped.

Testable implications
---------------------
A basis of conditional independences among measured variables. When every node is measured:
for each pair of non-adjacent nodes, the one later in a topological order is independent of the
earlier one given its own parents (the pairwise form of the local Markov property; Pearl 2009,
Sec. 1.2.3; Shipley 2000). With unmeasured nodes: for each non-adjacent pair of measured nodes,
a minimal d-separator made of measured nodes when one exists (networkx's
``find_minimal_d_separator`` restricted to measured nodes); pairs no measured set separates imply
nothing testable and are left out.

Examples
--------
M-bias (Cinelli, Forney & Pearl 2022, model 7): adjusting for nothing is valid, and adjusting for
the pre-treatment collider z is not.

>>> g = nx.DiGraph([("u1", "t"), ("u1", "z"), ("u2", "z"), ("u2", "y"), ("t", "y")])
>>> is_valid_adjustment_set(g, "t", "y", set()), is_valid_adjustment_set(g, "t", "y", {"z"})
(True, False)
>>> sorted(sorted(s) for s in iter_minimal_adjustment_sets(g, "t", "y", allowed={"z", "u1"}))
[[]]

A confounder c and a mediator m:

>>> g = nx.DiGraph([("c", "t"), ("c", "y"), ("t", "m"), ("m", "y"), ("w", "y")])
>>> sorted(optimal_adjustment_set(g, "t", "y"))
['c', 'w']
>>> variable_roles(g, "t", "y")["m"], variable_roles(g, "t", "y")["c"]
(('mediator',), ('confounder',))

References
----------
.. [1] Pearl, J. (1995). Causal diagrams for empirical research. *Biometrika* 82(4), 669-688.
.. [2] Pearl, J. (2009). *Causality*, 2nd ed. Cambridge University Press (Sec. 1.2.3, 3.3,
   7.4.5).
.. [3] Shpitser, I., VanderWeele, T. J. & Robins, J. M. (2010). On the validity of covariate
   adjustment for estimating causal effects. *UAI 2010*, 527-536.
.. [4] Perković, E., Textor, J., Kalisch, M. & Maathuis, M. H. (2018). Complete graphical
   characterization and construction of adjustment sets in Markov equivalence classes of
   ancestral graphs. *Journal of Machine Learning Research* 18(220), 1-62.
.. [5] van der Zander, B., Liśkiewicz, M. & Textor, J. (2019). Separators and adjustment sets
   in causal graphs: complete criteria and an algorithmic framework. *Artificial Intelligence*
   270, 1-40.
.. [6] Takata, K. (2010). Space-optimal, backtracking algorithms to list the minimal vertex
   separators of a graph. *Discrete Applied Mathematics* 158(15), 1660-1667.
.. [7] Henckel, L., Perković, E. & Maathuis, M. H. (2022). Graphical criteria for efficient
   total effect estimation via adjustment in causal linear models. *Journal of the Royal
   Statistical Society B* 84(2), 579-599.
.. [8] Cinelli, C., Forney, A. & Pearl, J. (2022). A crash course in good and bad controls.
   *Sociological Methods & Research* 53(3), 1071-1104.
.. [9] Lauritzen, S. L., Dawid, A. P., Larsen, B. N. & Leimer, H.-G. (1990). Independence
   properties of directed Markov fields. *Networks* 20(5), 491-505.
.. [10] Shipley, B. (2000). A new inferential test for path models based on directed acyclic
   graphs. *Structural Equation Modeling* 7(2), 206-218.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Hashable, Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from fractions import Fraction

import networkx as nx

from .errors import GraphError, near_matches
from .study import Study

__all__ = [
    "PROBLEM_KINDS",
    "ROLES",
    "SCHEMA",
    "BiasingPath",
    "ControlCheck",
    "ControlProblem",
    "Identification",
    "Implication",
    "build_graph",
    "causal_nodes",
    "cheapest_adjustment_set",
    "check_controls",
    "forbidden_nodes",
    "identify",
    "is_path_open",
    "is_valid_adjustment_set",
    "iter_biasing_paths",
    "iter_minimal_adjustment_sets",
    "list_implications",
    "list_measure_to_identify",
    "optimal_adjustment_set",
    "path_text",
    "proper_backdoor_graph",
    "variable_roles",
]

SCHEMA = "causalcheck/controls/1"

ROLES = (
    "treatment", "outcome", "confounder", "mediator", "collider", "descendant_of_treatment",
    "descendant_of_outcome", "instrument", "outcome_predictor", "unrelated",
)

# In the order problems are reported; a variable with several gets the first that applies.
PROBLEM_KINDS = (
    "mediator", "descendant_of_outcome", "descendant_of_treatment", "collider_opened",
    "path_left_open", "unmeasured",
)

MAX_MEASURE_GROUPS = 5
SEARCH_BUDGET = 5000     # paths examined when looking for one open path beyond a capped list


# --------------------------------------------------------------------------------------------
# Results


@dataclass(frozen=True)
class ControlProblem:
    """Why one variable makes the declared controls invalid (or would repair them).

    ``kind`` is one of :data:`PROBLEM_KINDS`; ``detail`` is a sentence for a person. For
    ``path_left_open`` the variable is one that would block the open path(s), not a control.
    """

    variable: str
    kind: str
    detail: str

    def to_dict(self) -> dict:
        return {"variable": self.variable, "kind": self.kind, "detail": self.detail}


@dataclass(frozen=True)
class ControlCheck:
    """The declared controls checked against the adjustment criterion.

    ``valid`` holds when the set satisfies the criterion and every member is measured.
    ``avoids_forbidden`` and ``blocks_non_causal_paths`` are the criterion's two conditions.
    """

    used: tuple[str, ...]
    valid: bool
    problems: tuple[ControlProblem, ...]
    avoids_forbidden: bool = True
    blocks_non_causal_paths: bool = True

    def to_dict(self) -> dict:
        return {
            "used": list(self.used),
            "valid": self.valid,
            "problems": [p.to_dict() for p in self.problems],
            "avoids_forbidden": self.avoids_forbidden,
            "blocks_non_causal_paths": self.blocks_non_causal_paths,
        }


@dataclass(frozen=True)
class BiasingPath:
    """A non-causal path between treatment and outcome.

    ``open_given_controls`` is ``None`` when the study declares no controls;
    ``open_unadjusted`` says whether the path is open when nothing is adjusted for. The JSON
    contract fixes ``open_given_controls`` as a bool, so with no ``[controls]`` table
    :meth:`to_dict` writes the unadjusted state there (no controls means nothing adjusted).
    """

    path: tuple[str, ...]
    open_given_controls: bool | None
    open_unadjusted: bool = True
    colliders: tuple[str, ...] = ()
    back_door: bool = False
    text: str = ""

    def to_dict(self) -> dict:
        return {
            "path": list(self.path),
            "open_given_controls": (self.open_unadjusted if self.open_given_controls is None
                                    else self.open_given_controls),
            "open_unadjusted": self.open_unadjusted,
            "colliders": list(self.colliders),
            "back_door": self.back_door,
            "text": self.text,
        }


@dataclass(frozen=True)
class Implication:
    """``left`` is independent of ``right`` given ``given`` in every model of the graph."""

    left: str
    right: str
    given: tuple[str, ...]

    def to_dict(self) -> dict:
        return {"left": self.left, "right": self.right, "given": list(self.given)}

    def text(self) -> str:
        """``"a _||_ b | c, d"``."""
        given = ", ".join(self.given) if self.given else "(nothing)"
        return f"{self.left} _||_ {self.right} | {given}"


@dataclass(frozen=True)
class Identification:
    """What the causal graph says about adjusting for the effect of treatment on outcome.

    The fields fixed by the interface come first; the rest add detail for reports.
    ``optimal_set`` is ``None`` when the O-set needs an unmeasured variable
    (``optimal_unmeasured`` names them) or when no valid set exists at all.
    """

    treatment: str
    outcome: str
    identifiable: bool
    minimal_sets: tuple[tuple[str, ...], ...]
    optimal_set: tuple[str, ...] | None
    cheapest_set: tuple[str, ...] | None
    cheapest_cost: float | None
    roles: Mapping[str, tuple[str, ...]]
    measured: Mapping[str, bool]
    biasing_paths: tuple[BiasingPath, ...]
    controls: ControlCheck | None
    measure_to_identify: tuple[tuple[str, ...], ...]
    implications: tuple[Implication, ...]
    labels: Mapping[str, str] = field(default_factory=dict)
    costs: Mapping[str, float] = field(default_factory=dict)
    optimal_if_all_measured: tuple[str, ...] | None = None
    optimal_unmeasured: tuple[str, ...] = ()
    has_causal_path: bool = True
    minimal_sets_complete: bool = True
    biasing_paths_complete: bool = True
    identifiable_if_all_measured: bool = True
    notes: tuple[str, ...] = ()

    def label(self, name: str) -> str:
        return self.labels.get(name, name)

    def to_dict(self) -> dict:
        """The ``causalcheck controls`` JSON document (schema ``causalcheck/controls/1``)."""
        cheapest = None
        if self.cheapest_set is not None:
            cheapest = {"set": list(self.cheapest_set), "cost": self.cheapest_cost}
        order = [self.treatment, self.outcome] + sorted(
            v for v in self.roles if v not in (self.treatment, self.outcome))
        variables = {
            name: {
                "role": "+".join(self.roles[name]),
                "measured": bool(self.measured.get(name, True)),
                "roles": list(self.roles[name]),
                "label": self.label(name),
                "cost": self.costs.get(name, 0.0),
            }
            for name in order
        }
        return {
            "schema": SCHEMA,
            "treatment": self.treatment,
            "outcome": self.outcome,
            "identifiable": self.identifiable,
            "adjustment_sets": {
                "minimal": [list(s) for s in self.minimal_sets],
                "optimal": list(self.optimal_set) if self.optimal_set is not None else None,
                "cheapest": cheapest,
                "minimal_complete": self.minimal_sets_complete,
                "optimal_if_all_measured": (list(self.optimal_if_all_measured)
                                            if self.optimal_if_all_measured is not None
                                            else None),
                "optimal_unmeasured": list(self.optimal_unmeasured),
            },
            "controls": self.controls.to_dict() if self.controls is not None else None,
            "variables": variables,
            "biasing_paths": [p.to_dict() for p in self.biasing_paths],
            "biasing_paths_complete": self.biasing_paths_complete,
            "has_causal_path": self.has_causal_path,
            "identifiable_if_all_measured": self.identifiable_if_all_measured,
            "measure_to_identify": [list(g) for g in self.measure_to_identify],
            "implications": [i.to_dict() for i in self.implications],
            "notes": list(self.notes),
        }


# --------------------------------------------------------------------------------------------
# The graph and its checks


def build_graph(study: Study) -> nx.DiGraph:
    """The study's causal graph as a DAG whose nodes carry ``measured``, ``label``, ``cost``.

    Raises
    ------
    GraphError
        When the study has no graph, when the edges form a cycle (one cycle is named), or when
        the treatment or outcome is missing from the graph or they coincide.
    """
    if not study.has_graph:
        raise GraphError(
            f"study file {study.source!r} has no [graph] table; this check needs the causal "
            "graph: add [graph] edges = [\"cause -> effect\", ...]")
    graph = nx.DiGraph()
    for name in study.nodes:
        facts = study.variable(name)
        graph.add_node(name, measured=facts.measured, label=facts.label, cost=facts.cost)
    graph.add_edges_from(study.edges)
    _check_acyclic(graph, where=f"[graph].edges of {study.source!r}")
    _check_ends(graph, study.treatment, study.outcome)
    return graph


def _check_acyclic(graph: nx.DiGraph, *, where: str = "the graph") -> None:
    try:
        cycle = nx.find_cycle(graph)
    except nx.NetworkXNoCycle:
        return
    names = [u for u, _ in cycle]
    start = names.index(min(names, key=str))          # name the cycle from its first name
    names = names[start:] + names[:start]
    names.append(names[0])
    raise GraphError(
        f"{where} contain a cycle: {' -> '.join(names)}. A causal graph must be acyclic (no "
        "variable can cause itself through others); remove or reverse one of these edges")


def _check_ends(graph: nx.DiGraph, treatment: object, outcome: object) -> None:
    nodes = sorted(map(str, graph.nodes))
    for role, name in (("treatment", treatment), ("outcome", outcome)):
        if not isinstance(name, str) or not name:
            raise GraphError(f"the {role} must be named (got {name!r}); set [study].{role} to a "
                             "node of the graph")
        if name not in graph:
            raise GraphError(f"the {role} {name!r} is not a node of the graph"
                             f"{near_matches(name, nodes)}; add it to [graph].edges or fix the "
                             "name")
    if treatment == outcome:
        raise GraphError(f"the treatment and the outcome are the same variable ({treatment!r});"
                         " they must differ")


def _check_inputs(graph: nx.DiGraph, treatment: str, outcome: str) -> None:
    if not isinstance(graph, nx.DiGraph):
        raise GraphError(f"the graph must be a networkx DiGraph; got {type(graph).__name__}")
    _check_ends(graph, treatment, outcome)
    _check_acyclic(graph)


def _check_names(graph: nx.DiGraph, names: Iterable[str], what: str) -> set[str]:
    found = set(names)
    unknown = sorted(n for n in found if n not in graph)
    if unknown:
        nodes = sorted(map(str, graph.nodes))
        hint = near_matches(unknown[0], nodes)
        raise GraphError(f"{what} names {', '.join(repr(u) for u in unknown)}, not "
                         f"node{'s' if len(unknown) > 1 else ''} of the graph{hint}; use names "
                         "from [graph].edges")
    return found


def _reachable(sources: Iterable[Hashable], step) -> set:
    """``sources`` and every node reached from them by repeating ``step`` (a neighbour map)."""
    seen = set(sources)
    stack = list(seen)
    while stack:
        for w in step(stack.pop()):
            if w not in seen:
                seen.add(w)
                stack.append(w)
    return seen


def _descendants(graph: nx.DiGraph, sources: Iterable[Hashable]) -> set:
    """``sources`` and all their descendants."""
    return _reachable(sources, graph.successors)


def _ancestors(graph: nx.DiGraph, sources: Iterable[Hashable]) -> set:
    """``sources`` and all their ancestors."""
    return _reachable(sources, graph.predecessors)


def causal_nodes(graph: nx.DiGraph, treatment: str, outcome: str) -> frozenset[str]:
    """cn(T, Y): the nodes other than T on directed paths from T to Y (Y included).

    Empty when Y is not a descendant of T.

    >>> sorted(causal_nodes(nx.DiGraph([("t", "m"), ("m", "y"), ("t", "s")]), "t", "y"))
    ['m', 'y']
    """
    _check_inputs(graph, treatment, outcome)
    return _causal_nodes(graph, treatment, outcome)


def _causal_nodes(graph: nx.DiGraph, treatment: str, outcome: str) -> frozenset[str]:
    # cn(T, Y) = (de(T) \ {T}) ∩ an(Y), with Y counted as its own ancestor
    below = _descendants(graph, [treatment]) - {treatment}
    if outcome not in below:
        return frozenset()
    return frozenset(below & _ancestors(graph, [outcome]))


def forbidden_nodes(graph: nx.DiGraph, treatment: str, outcome: str) -> frozenset[str]:
    """forb(T, Y) = {T} ∪ de(cn(T, Y)): nodes no valid adjustment set may contain.

    >>> sorted(forbidden_nodes(nx.DiGraph([("t", "m"), ("m", "y"), ("m", "d"), ("t", "s")]),
    ...                        "t", "y"))
    ['d', 'm', 't', 'y']
    """
    _check_inputs(graph, treatment, outcome)
    return _forbidden(graph, treatment, _causal_nodes(graph, treatment, outcome))


def _forbidden(graph: nx.DiGraph, treatment: str, causal: frozenset[str]) -> frozenset[str]:
    return frozenset(_descendants(graph, causal) | {treatment})


def proper_backdoor_graph(graph: nx.DiGraph, treatment: str, outcome: str) -> nx.DiGraph:
    """The graph with the first edge ``T -> c`` of every causal path removed (c in cn(T, Y))."""
    _check_inputs(graph, treatment, outcome)
    return _proper_backdoor(graph, treatment, _causal_nodes(graph, treatment, outcome))


def _proper_backdoor(graph: nx.DiGraph, treatment: str, causal: frozenset[str]) -> nx.DiGraph:
    pbd = nx.DiGraph()
    pbd.add_nodes_from(graph.nodes)
    pbd.add_edges_from((u, v) for u, v in graph.edges if not (u == treatment and v in causal))
    return pbd


def is_valid_adjustment_set(graph: nx.DiGraph, treatment: str, outcome: str,
                            adjustment: Iterable[str]) -> bool:
    """Whether ``adjustment`` satisfies the adjustment criterion for the effect of T on Y.

    Parameters
    ----------
    graph : networkx.DiGraph
        The causal DAG (every node counts, measured or not).
    treatment, outcome : str
        T and Y.
    adjustment : iterable of str
        The candidate set Z (T and Y may not be in it).

    Returns
    -------
    bool
        True when Z ∩ forb(T, Y) = ∅ and Z d-separates T and Y in the proper back-door graph.

    Raises
    ------
    GraphError
        Unknown names, Z containing T or Y, a cycle, or T = Y.

    Notes
    -----
    .. math:: Z \\text{ valid} \\iff Z \\cap \\mathrm{forb}(T,Y) = \\emptyset \\;\\wedge\\;
              (T \\perp Y \\mid Z)_{G^{pbd}_{TY}}

    References
    ----------
    Shpitser, VanderWeele & Robins (2010); Perković et al. (2018), JMLR 18(220), Sec. 4.

    Examples
    --------
    >>> g = nx.DiGraph([("z", "t"), ("z", "y"), ("t", "y")])
    >>> is_valid_adjustment_set(g, "t", "y", []), is_valid_adjustment_set(g, "t", "y", ["z"])
    (False, True)
    """
    _check_inputs(graph, treatment, outcome)
    z = _check_names(graph, adjustment, "the adjustment set")
    if treatment in z or outcome in z:
        raise GraphError(f"the adjustment set {sorted(z)!r} contains the treatment or the "
                         "outcome; an adjustment set holds other variables only")
    causal = _causal_nodes(graph, treatment, outcome)
    if z & _forbidden(graph, treatment, causal):
        return False
    pbd = _proper_backdoor(graph, treatment, causal)
    return bool(nx.is_d_separator(pbd, {treatment}, {outcome}, z))


# --------------------------------------------------------------------------------------------
# Minimal separators in the moral graph (ListMinSep / FindMinSep)


class _SeparatorSearch:
    """Minimal (x, y) vertex separators of an undirected graph, members restricted to ``cuttable``.

    Vertices are renumbered 0..n-1 in name order so that the listing is deterministic.
    """

    def __init__(self, adjacency: Mapping[Hashable, Iterable[Hashable]], x: Hashable,
                 y: Hashable, cuttable: Iterable[Hashable]):
        names = sorted(adjacency, key=str)
        index = {v: i for i, v in enumerate(names)}
        self.names = names
        self.adjacency = [tuple(sorted(index[w] for w in adjacency[v] if w != v))
                          for v in names]
        self.x = index[x]
        self.y = index[y]
        cut = set(cuttable)
        self.cuttable = [v in cut and v not in (x, y) for v in names]

    # -- FindMinSep ----------------------------------------------------------------------
    def _extend(self, side: set[int], seeds: Iterable[int]) -> bool:
        """Grow ``side`` from ``seeds`` through vertices that cannot be cut; False if y joins."""
        adjacency, cuttable, y = self.adjacency, self.cuttable, self.y
        stack = [s for s in seeds]
        while stack:
            u = stack.pop()
            for w in adjacency[u]:
                if w in side or cuttable[w]:
                    continue
                if w == y:
                    return False
                side.add(w)
                stack.append(w)
        return True

    def _component(self, start: int, blocked: set[int]) -> set[int]:
        adjacency = self.adjacency
        seen = {start}
        stack = [start]
        while stack:
            for w in adjacency[stack.pop()]:
                if w not in seen and w not in blocked:
                    seen.add(w)
                    stack.append(w)
        return seen

    def _boundary(self, part: set[int]) -> set[int]:
        adjacency = self.adjacency
        return {w for u in part for w in adjacency[u] if w not in part}

    def find(self, near: set[int], added: Sequence[int], included: frozenset[int],
             boundary: set[int]) -> tuple[set[int], set[int]] | None:
        """FindMinSep: the minimal separator closest to y given T's side and ``included``.

        ``near`` is a closed T-side set whose boundary is ``boundary``; ``added`` are vertices
        of that boundary moved to T's side. Returns (T's full component, separator) or None.
        """
        side = set(near)
        side.update(added)
        if not self._extend(side, added):
            return None
        # N(A): the old boundary minus what moved, plus the new vertices' cuttable neighbours
        fresh = side - near
        new_boundary = (boundary - fresh) | {w for u in fresh for w in self.adjacency[u]
                                             if w not in side}
        # B: Y's component once A and N(A) are removed; S = N(B) ⊆ N(A)
        far = self._component(self.y, side | new_boundary)
        separator = self._boundary(far)
        if not included <= separator:
            return None
        # A normalised: T's component of the graph minus S (its boundary is exactly S)
        spill = new_boundary - separator
        full = side | spill
        stack = list(spill)
        adjacency = self.adjacency
        while stack:
            for w in adjacency[stack.pop()]:
                if w not in full and w not in separator:
                    full.add(w)
                    stack.append(w)
        return full, separator

    def root(self) -> tuple[set[int], set[int]] | None:
        side = {self.x}
        if not self._extend(side, [self.x]):
            return None
        boundary = self._boundary(side)
        return self.find(side, (), frozenset(), boundary)

    # -- ListMinSep ----------------------------------------------------------------------
    def __iter__(self) -> Iterator[frozenset]:
        start = self.root()
        if start is None:
            return
        names = self.names
        stack: list[tuple[set[int], set[int], frozenset[int]]] = [(*start, frozenset())]
        while stack:
            near, separator, included = stack.pop()
            yield frozenset(names[i] for i in separator)
            children = []
            fixed = set(included)
            for v in sorted(separator - included):
                # branch: v on T's side, the earlier free members in the separator
                found = self.find(near, (v,), frozenset(fixed), separator)
                if found is not None:
                    children.append((*found, frozenset(fixed)))
                fixed.add(v)
            stack.extend(reversed(children))

    def separable(self) -> bool:
        return self.root() is not None


def _search_for(graph: nx.DiGraph, treatment: str, outcome: str,
                allowed: Iterable[str]) -> tuple[_SeparatorSearch, frozenset[str]]:
    """The moral graph of An(T, Y) in the proper back-door graph, with its cuttable vertices."""
    causal = _causal_nodes(graph, treatment, outcome)
    forbidden = _forbidden(graph, treatment, causal)
    pbd = _proper_backdoor(graph, treatment, causal)
    relevant = _ancestors(pbd, [treatment, outcome])
    moral = nx.moral_graph(pbd.subgraph(relevant))
    cuttable = (set(allowed) & relevant) - forbidden - {treatment, outcome}
    adjacency = {v: list(moral[v]) for v in moral}
    return _SeparatorSearch(adjacency, treatment, outcome, cuttable), frozenset(cuttable)


def iter_minimal_adjustment_sets(graph: nx.DiGraph, treatment: str, outcome: str, *,
                                 allowed: Iterable[str]) -> Iterator[frozenset[str]]:
    """Every minimal valid adjustment set made of ``allowed`` variables, with polynomial delay.

    Parameters
    ----------
    graph : networkx.DiGraph
        The causal DAG, unmeasured nodes included.
    treatment, outcome : str
        T and Y.
    allowed : iterable of str
        Variables a set may use (typically the measured ones); T and Y are ignored.

    Returns
    -------
    iterator of frozenset
        Each minimal valid set once, in search order (sort them for display). Nothing when no
        valid set of allowed variables exists; one empty set when adjusting for nothing works.

    Raises
    ------
    GraphError
        Unknown names in ``allowed``, a cycle, or a treatment/outcome problem.

    Notes
    -----
    Minimal valid sets are the minimal T-Y separators of R = allowed \\ forb(T, Y) in the moral
    graph of An(T, Y) taken in the proper back-door graph; they are listed by ListMinSep with
    the FindMinSep test (module docstring), with delay O(n (n + m)) between two sets.

    References
    ----------
    van der Zander, Liśkiewicz & Textor (2019), Artificial Intelligence 270, Sec. 4; Takata
    (2010), Discrete Applied Mathematics 158(15).

    Examples
    --------
    >>> g = nx.DiGraph([("a", "t"), ("b", "t"), ("a", "y"), ("b", "y"), ("t", "y")])
    >>> sorted(sorted(s) for s in iter_minimal_adjustment_sets(g, "t", "y",
    ...                                                         allowed={"a", "b"}))
    [['a', 'b']]
    """
    _check_inputs(graph, treatment, outcome)
    allowed_set = _check_names(graph, allowed, "allowed") - {treatment, outcome}
    search, _ = _search_for(graph, treatment, outcome, allowed_set)
    return iter(search)


# --------------------------------------------------------------------------------------------
# Optimal and cheapest sets


def optimal_adjustment_set(graph: nx.DiGraph, treatment: str,
                           outcome: str) -> frozenset[str] | None:
    """The O-set pa(cn(T, Y)) \\ forb(T, Y), or None when it does not apply.

    Parameters
    ----------
    graph : networkx.DiGraph
        The causal DAG; measurement is ignored (the O-set may contain unmeasured variables).
    treatment, outcome : str
        T and Y.

    Returns
    -------
    frozenset or None
        The O-set; None when Y is not a descendant of T (no causal path, the O-set is not
        defined) or when no valid adjustment set exists at all.

    Notes
    -----
    .. math:: O(T, Y) = \\mathrm{pa}(\\mathrm{cn}(T, Y)) \\setminus \\mathrm{forb}(T, Y)

    It is valid whenever some valid set exists and has the smallest asymptotic variance among
    valid sets for OLS in linear causal models.

    References
    ----------
    Henckel, Perković & Maathuis (2022), JRSS-B 84(2), 579-599, Sec. 3.

    Examples
    --------
    >>> g = nx.DiGraph([("z", "t"), ("t", "y"), ("w", "y")])
    >>> sorted(optimal_adjustment_set(g, "t", "y"))
    ['w']
    """
    _check_inputs(graph, treatment, outcome)
    causal = _causal_nodes(graph, treatment, outcome)
    if not causal:
        return None
    forbidden = _forbidden(graph, treatment, causal)
    # O = pa(cn) \ forb
    o_set = {p for c in causal for p in graph.predecessors(c)} - forbidden
    pbd = _proper_backdoor(graph, treatment, causal)
    if not nx.is_d_separator(pbd, {treatment}, {outcome}, o_set):
        return None
    return frozenset(o_set)


def _integer_weights(cost: Mapping[str, float], names: Iterable[str]) -> dict[str, int]:
    """Costs as exact integers w(v) = cost(v)·D·K + 1: cost first, then the count of members.

    D clears the (binary) denominators of the float costs; K exceeds the number of variables,
    so a cheaper set always weighs less and, at equal cost, a smaller set does.
    """
    names = list(names)
    exact = {}
    for v in names:
        c = cost.get(v, 0.0)
        if isinstance(c, bool) or not isinstance(c, (int, float)) or not math.isfinite(c) \
                or c < 0:
            raise GraphError(f"the cost of {v!r} must be a finite number of zero or more; got "
                             f"{c!r}")
        exact[v] = Fraction(c)
    denominator = math.lcm(*(f.denominator for f in exact.values())) if exact else 1
    k = len(names) + 1
    return {v: int(f * denominator) * k + 1 for v, f in exact.items()}


def _cut_weight(adjacency: Mapping[str, Iterable[str]], x: str, y: str,
                weights: Mapping[str, int], removed: set[str]) -> tuple[int, set[str]]:
    """Minimum-weight x-y vertex cut in ``adjacency`` minus ``removed``, by maximum flow."""
    flow = nx.DiGraph()
    for u, neighbours in adjacency.items():
        if u in removed:
            continue
        if u in weights:
            flow.add_edge((u, 0), (u, 1), capacity=weights[u])
        else:
            flow.add_edge((u, 0), (u, 1))          # no capacity: cannot be cut
        for w in neighbours:
            if w not in removed:
                flow.add_edge((u, 1), (w, 0))      # undirected edge: both arcs, uncuttable
    value, (reachable, _) = nx.minimum_cut(flow, (x, 1), (y, 0))
    cut = {u for u in weights if u not in removed and (u, 0) in reachable
           and (u, 1) not in reachable}
    return int(value), cut


def cheapest_adjustment_set(graph: nx.DiGraph, treatment: str, outcome: str, *,
                            allowed: Iterable[str],
                            cost: Mapping[str, float]) -> tuple[frozenset[str], float] | None:
    """The valid adjustment set of ``allowed`` variables with the smallest total cost.

    Parameters
    ----------
    graph : networkx.DiGraph
        The causal DAG.
    treatment, outcome : str
        T and Y.
    allowed : iterable of str
        Variables a set may use; T and Y are ignored.
    cost : mapping
        Cost of each allowed variable (missing means 0); finite and non-negative.

    Returns
    -------
    (frozenset, float) or None
        The set and its total cost; None when no valid set of allowed variables exists. Ties
        go to the set with fewer variables, then to the alphabetically first sorted names.

    Notes
    -----
    A minimum-weight vertex cut between T and Y in the moral graph of An(T, Y) of the proper
    back-door graph, with weight cost(v) on each allowed, non-forbidden vertex, computed by
    max-flow on the split-node graph (``v_in -> v_out`` of capacity cost(v), other arcs
    uncapacitated). By the max-flow min-cut theorem the cut value is the flow value:

    .. math:: \\min_{Z \\text{ valid}} \\sum_{v \\in Z} c(v) = \\text{max-flow}(T_{out}, Y_{in})

    References
    ----------
    van der Zander, Liśkiewicz & Textor (2019), Artificial Intelligence 270, Sec. 5; Ford &
    Fulkerson (1956), Canadian Journal of Mathematics 8, 399-404.

    Examples
    --------
    >>> g = nx.DiGraph([("a", "t"), ("a", "b"), ("b", "y"), ("t", "y")])
    >>> cheapest_adjustment_set(g, "t", "y", allowed={"a", "b"}, cost={"a": 5, "b": 1})
    (frozenset({'b'}), 1.0)
    """
    _check_inputs(graph, treatment, outcome)
    allowed_set = _check_names(graph, allowed, "allowed") - {treatment, outcome}
    search, cuttable = _search_for(graph, treatment, outcome, allowed_set)
    if not search.separable():
        return None
    adjacency = {search.names[i]: [search.names[j] for j in search.adjacency[i]]
                 for i in range(len(search.names))}
    weights = _integer_weights(cost, sorted(cuttable))
    best, cut = _cut_weight(adjacency, treatment, outcome, weights, set())
    size = len(cut)
    # Ties: the alphabetically first sorted list among the cuts of weight `best` (all of the
    # same size). Take names in order and keep one when some optimal cut contains it together
    # with those kept so far: w(F) + w(v) + mincut(M - F - v) = best.
    forced: set[str] = set()
    paid = 0
    for v in sorted(cuttable):
        if len(forced) == size:
            break
        value, _ = _cut_weight(adjacency, treatment, outcome, weights, forced | {v})
        if paid + weights[v] + value == best:
            forced.add(v)
            paid += weights[v]
    chosen = frozenset(forced)
    return chosen, math.fsum(float(cost.get(v, 0.0)) for v in sorted(chosen))


# --------------------------------------------------------------------------------------------
# Paths


def path_text(graph: nx.DiGraph, path: Sequence[str]) -> str:
    """A path with its arrows: ``"t <- c -> y"``.

    >>> path_text(nx.DiGraph([("c", "t"), ("c", "y")]), ("t", "c", "y"))
    't <- c -> y'
    """
    parts = [str(path[0])]
    for a, b in itertools.pairwise(path):
        parts.append("->" if graph.has_edge(a, b) else "<-")
        parts.append(str(b))
    return " ".join(parts)


def _is_causal(graph: nx.DiGraph, path: Sequence[str]) -> bool:
    return all(graph.has_edge(a, b) for a, b in itertools.pairwise(path))


def _colliders(graph: nx.DiGraph, path: Sequence[str]) -> tuple[str, ...]:
    return tuple(b for a, b, c in zip(path, path[1:], path[2:])
                 if graph.has_edge(a, b) and graph.has_edge(c, b))


def iter_biasing_paths(graph: nx.DiGraph, treatment: str,
                       outcome: str) -> Iterator[tuple[str, ...]]:
    """Every non-causal path between T and Y, shortest first.

    Paths are taken in the skeleton (directions ignored) and the directed paths
    ``T -> ... -> Y`` are skipped. The number of paths can grow exponentially with the graph:
    take what you need with :func:`itertools.islice`.

    >>> g = nx.DiGraph([("c", "t"), ("c", "y"), ("t", "y")])
    >>> list(iter_biasing_paths(g, "t", "y"))
    [('t', 'c', 'y')]
    """
    _check_inputs(graph, treatment, outcome)
    skeleton = nx.Graph()
    skeleton.add_nodes_from(sorted(graph.nodes, key=str))
    skeleton.add_edges_from(sorted((tuple(sorted((u, v), key=str)) for u, v in graph.edges),
                                   key=lambda e: (str(e[0]), str(e[1]))))

    def generate() -> Iterator[tuple[str, ...]]:
        try:
            for path in nx.shortest_simple_paths(skeleton, treatment, outcome):
                if not _is_causal(graph, path):
                    yield tuple(path)
        except nx.NetworkXNoPath:
            return

    return generate()


def is_path_open(graph: nx.DiGraph, path: Sequence[str], given: Iterable[str]) -> bool:
    """Whether ``path`` d-connects its ends given the set ``given``.

    Open when every non-collider on it is outside ``given`` and every collider is in ``given``
    or has a descendant in it (Pearl 2009, Sec. 1.2.3).

    >>> g = nx.DiGraph([("t", "c"), ("y", "c"), ("c", "d")])
    >>> is_path_open(g, ("t", "c", "y"), []), is_path_open(g, ("t", "c", "y"), ["d"])
    (False, True)
    """
    z = set(given)
    activated = _ancestors(graph, z)           # a collider is opened by a descendant in Z
    return _open(graph, path, z, activated)


def _open(graph: nx.DiGraph, path: Sequence[str], z: set[str], activated: set[str]) -> bool:
    for a, b, c in zip(path, path[1:], path[2:]):
        if graph.has_edge(a, b) and graph.has_edge(c, b):
            if b not in activated:
                return False
        elif b in z:
            return False
    return True


# --------------------------------------------------------------------------------------------
# Roles


def variable_roles(graph: nx.DiGraph, treatment: str, outcome: str, *,
                   max_paths: int | None = 500) -> dict[str, tuple[str, ...]]:
    """The role(s) of every node relative to T and Y (definitions in the module docstring).

    ``max_paths`` caps the paths examined for the collider role (None: no cap).

    >>> g = nx.DiGraph([("z", "t"), ("t", "y"), ("w", "y"), ("t", "s")])
    >>> r = variable_roles(g, "t", "y")
    >>> r["z"], r["w"], r["s"]
    (('instrument',), ('outcome_predictor',), ('descendant_of_treatment',))
    """
    _check_inputs(graph, treatment, outcome)
    paths = itertools.islice(iter_biasing_paths(graph, treatment, outcome), max_paths)
    colliders = {c for p in paths for c in _colliders(graph, p)}
    return _roles(graph, treatment, outcome, colliders)


def _roles(graph: nx.DiGraph, treatment: str, outcome: str,
           colliders: set[str]) -> dict[str, tuple[str, ...]]:
    causal = _causal_nodes(graph, treatment, outcome)
    below_t = _descendants(graph, [treatment])
    below_y = _descendants(graph, [outcome])
    above_t = _ancestors(graph, [treatment])
    cut = graph.copy()
    cut.remove_edges_from(list(graph.out_edges(treatment)))      # G_T: no effects of T
    above_y_cut = _ancestors(cut, [outcome])
    # common causes: a directed path to T, and one to Y avoiding T
    common = (above_t & above_y_cut) - {treatment, outcome}
    near_common = _descendants(graph, common)
    # d-connected given nothing <=> a common ancestor (each node is its own ancestor)
    linked_t = _descendants(graph, above_t)
    linked_y = _descendants(cut, above_y_cut)
    collider_like = _descendants(graph, colliders)
    roles: dict[str, tuple[str, ...]] = {}
    for v in sorted(graph.nodes, key=str):
        if v == treatment:
            roles[v] = ("treatment",)
            continue
        if v == outcome:
            roles[v] = ("outcome",)
            continue
        found = set()
        outside = v not in below_t and v not in below_y
        if outside and v in near_common:
            found.add("confounder")
        if v in causal:
            found.add("mediator")
        if v in collider_like:
            found.add("collider")
        if v in below_t and v not in causal and v not in below_y:
            found.add("descendant_of_treatment")
        if v in below_y:
            found.add("descendant_of_outcome")
        if outside and v in linked_t and v not in linked_y:
            found.add("instrument")
        if outside and v not in linked_t and v in linked_y:
            found.add("outcome_predictor")
        if not found:
            found.add("unrelated")
        roles[v] = tuple(r for r in ROLES if r in found)
    return roles


# --------------------------------------------------------------------------------------------
# Checking declared controls


def _names(items: Iterable[str], labels: Mapping[str, str]) -> str:
    shown = [labels.get(v, v) for v in items]
    if not shown:
        return "nothing"
    if len(shown) == 1:
        return shown[0]
    return ", ".join(shown[:-1]) + " and " + shown[-1]


def _directed_text(graph: nx.DiGraph, *stops: str) -> str:
    nodes: list[str] = [stops[0]]
    for a, b in itertools.pairwise(stops):
        nodes.extend(nx.shortest_path(graph, a, b)[1:])
    return " -> ".join(nodes)


def check_controls(graph: nx.DiGraph, treatment: str, outcome: str, used: Sequence[str], *,
                   measured: Mapping[str, bool] | None = None,
                   labels: Mapping[str, str] | None = None,
                   paths: Iterable[Sequence[str]] | None = None,
                   preferred: Sequence[Iterable[str]] = ()) -> ControlCheck:
    """Check a declared control set against the adjustment criterion, one problem a variable.

    Parameters
    ----------
    graph : networkx.DiGraph
        The causal DAG.
    treatment, outcome : str
        T and Y.
    used : sequence of str
        The declared controls Z.
    measured : mapping, optional
        Which variables are measured (default: all).
    labels : mapping, optional
        Labels used in the sentences (default: the names).
    paths : iterable of paths, optional
        The non-causal paths to examine (default: all, from :func:`iter_biasing_paths`).
    preferred : sequence of sets
        Sets whose members are preferred when suggesting a variable to block an open path
        (for example the optimal, then the cheapest valid set).

    Returns
    -------
    ControlCheck
        ``valid`` when Z satisfies the adjustment criterion and every member is measured.
        Problems: ``mediator``, ``descendant_of_outcome``, ``descendant_of_treatment`` (Z meets
        forb(T, Y)); ``collider_opened`` (a control that opens a non-causal path because it is
        a collider on it or a descendant of one); ``path_left_open`` (a non-causal path with no
        collider and no control on it; the problem names a variable that would block it);
        ``unmeasured`` (a declared control marked not measured).

    References
    ----------
    Shpitser, VanderWeele & Robins (2010); Perković et al. (2018); Cinelli, Forney & Pearl
    (2022).

    Examples
    --------
    >>> g = nx.DiGraph([("c", "t"), ("c", "y"), ("t", "m"), ("m", "y")])
    >>> check = check_controls(g, "t", "y", ["m"])
    >>> check.valid, [(p.variable, p.kind) for p in check.problems]
    (False, [('m', 'mediator'), ('c', 'path_left_open')])
    """
    _check_inputs(graph, treatment, outcome)
    z_list = list(dict.fromkeys(used))
    z = _check_names(graph, z_list, "the declared controls")
    if treatment in z or outcome in z:
        raise GraphError(f"the declared controls {sorted(z)!r} contain the treatment or the "
                         "outcome; controls are other variables")
    measured = measured if measured is not None else {}
    labels = labels if labels is not None else {}
    is_measured = {v: bool(measured.get(v, True)) for v in graph.nodes}

    def lab(v: str) -> str:
        return labels.get(v, v)

    causal = _causal_nodes(graph, treatment, outcome)
    forbidden = _forbidden(graph, treatment, causal)
    below_y = _descendants(graph, [outcome])
    pbd = _proper_backdoor(graph, treatment, causal)
    blocks = bool(nx.is_d_separator(pbd, {treatment}, {outcome}, z))
    avoids = not (z & forbidden)

    details: dict[str, tuple[str, str]] = {}         # variable -> (kind, detail)
    for v in sorted(z & forbidden):
        if v in causal:
            details[v] = ("mediator", (
                f"{lab(v)} is a mediator: it lies on the causal path "
                f"{_directed_text(graph, treatment, v, outcome)}, so adjusting for it removes "
                f"part of the effect of {lab(treatment)} on {lab(outcome)} (overcontrol). Drop "
                "it."))
        elif v in below_y:
            details[v] = ("descendant_of_outcome", (
                f"{lab(v)} is a consequence of the outcome ({_directed_text(graph, outcome, v)})"
                f"; adjusting for it selects on {lab(outcome)} itself and biases the estimate. "
                "Drop it."))
        else:
            source = next(c for c in sorted(causal)
                          if c != outcome and nx.has_path(graph, c, v))
            details[v] = ("descendant_of_treatment", (
                f"{lab(v)} is a consequence of the mediator {lab(source)} "
                f"({_directed_text(graph, treatment, source, v)}); adjusting for it removes or "
                f"distorts part of the effect that {lab(source)} carries to {lab(outcome)}. "
                "Drop it."))

    # Open non-causal paths given Z, in G.
    if paths is None:       # every path, in no particular order (faster than shortest-first)
        skeleton = graph.to_undirected(as_view=True)
        paths = (p for p in nx.all_simple_paths(skeleton, treatment, outcome)
                 if not _is_causal(graph, p))
    activated = _ancestors(graph, z)
    open_paths = [tuple(p) for p in paths if _open(graph, p, z, activated)]
    if not blocks and avoids and not open_paths:
        # The given list was capped: look for an open path in the ancestral part of the proper
        # back-door graph (every node of a d-connecting path is in An(T, Y, Z)), shortest first
        # and within a budget; a path of that graph is non-causal in G.
        relevant = _ancestors(pbd, z | {treatment, outcome})
        skeleton = nx.Graph(pbd.subgraph(relevant).to_undirected())
        pbd_active = _ancestors(pbd, z)
        try:
            for p in itertools.islice(nx.shortest_simple_paths(skeleton, treatment, outcome),
                                      SEARCH_BUDGET):
                if _open(pbd, p, z, pbd_active):
                    open_paths.append(tuple(p))
                    break
        except nx.NetworkXNoPath:
            pass

    unnamed = not blocks and avoids and not open_paths
    preferred_sets = [set(s) for s in preferred]
    opened: dict[str, list[tuple[tuple[str, ...], str]]] = {}
    left_open: dict[str, list[tuple[str, ...]]] = {}
    for p in open_paths:
        colliders = _colliders(graph, p)
        if colliders:
            for c in colliders:
                for v in sorted(z & _descendants(graph, [c])):
                    opened.setdefault(v, []).append((p, c))
            continue
        blocker = _blocker(p, colliders, is_measured, forbidden, preferred_sets, treatment,
                           outcome)
        left_open.setdefault(blocker, []).append(p)

    for v in sorted(opened):
        cases = opened[v]
        p, c = cases[0]
        a, b = _collider_parents(p, c)
        where = (f"{lab(v)} is a collider on it (a common effect of {lab(a)} and {lab(b)})"
                 if v == c else
                 f"{lab(v)} is a descendant of {lab(c)}, a collider on it (a common effect of "
                 f"{lab(a)} and {lab(b)})")
        more = f" (and {len(cases) - 1} more such path{'s' if len(cases) > 2 else ''})" \
            if len(cases) > 1 else ""
        alternative = [u for u in p[1:-1] if u not in z and u not in _colliders(graph, p)
                       and is_measured[u] and u not in forbidden]
        repair = f", or also adjust for {lab(alternative[0])}, which blocks that path" \
            if alternative else ""
        sentence = (f"Adjusting for {lab(v)} opens the non-causal path {path_text(graph, p)}"
                    f"{more}: {where}, and conditioning on a common effect creates an "
                    f"association between its causes. Drop {lab(v)}{repair}.")
        if v in details:
            kind, text = details[v]
            details[v] = (kind, (f"{text} It also opens the non-causal path "
                                f"{path_text(graph, p)}."))
        else:
            details[v] = ("collider_opened", sentence)

    for v in sorted(left_open):
        group = left_open[v]
        shown = " and ".join(path_text(graph, p) for p in group[:2])
        more = f" (and {len(group) - 2} more)" if len(group) > 2 else ""
        plural = len(group) > 1
        head = (f"The non-causal path{'s' if plural else ''} {shown}{more} "
                f"{'are' if plural else 'is'} left open by the declared controls")
        if v == outcome:
            text = (f"{head}: {lab(outcome)} is a direct cause of {lab(treatment)}, so no "
                    "adjustment can block it and the effect is not identifiable by "
                    "adjustment.")
        elif not is_measured[v]:
            text = (f"{head}; no measured variable on it can block it, and measuring {lab(v)} "
                    "would.")
            below_t = _descendants(graph, [treatment])
            proxies = sorted(u for u in z if u != v and u in _descendants(graph, [v])
                             and u not in below_t and u not in below_y)
            if proxies:
                text += (f" Adjusting for {_names(proxies, labels)}, measured downstream of "
                         f"{lab(v)}, may reduce this bias but does not remove it.")
        else:
            text = (f"{head}; adjusting for {lab(v)} would block "
                    f"{'them' if plural else 'it'}.")
        details.setdefault(v, ("path_left_open", text))

    if unnamed:
        details.setdefault(outcome, ("path_left_open", (
            f"The declared controls leave a non-causal path between {lab(treatment)} and "
            f"{lab(outcome)} open (d-connected in the proper back-door graph); the graph has "
            "too many paths to name it. Use one of the valid sets listed instead.")))

    for v in sorted(z):
        if not is_measured[v]:
            note = (f"{lab(v)} is declared as a control but marked measured = false in "
                    "[variables]; a report cannot have adjusted for a variable that was not "
                    "measured. Check the study file.")
            if v in details:
                kind, text = details[v]
                details[v] = (kind, f"{text} It is also marked measured = false.")
            else:
                details[v] = ("unmeasured", note)

    rank = {k: i for i, k in enumerate(PROBLEM_KINDS)}
    problems = tuple(ControlProblem(v, kind, text) for v, (kind, text) in
                     sorted(details.items(), key=lambda item: (rank[item[1][0]], item[0])))
    valid = avoids and blocks and all(is_measured[v] for v in z)
    return ControlCheck(used=tuple(z_list), valid=valid, problems=problems,
                        avoids_forbidden=avoids, blocks_non_causal_paths=blocks)


def _collider_parents(path: Sequence[str], collider: str) -> tuple[str, str]:
    i = list(path).index(collider)
    return path[i - 1], path[i + 1]


def _blocker(path: Sequence[str], colliders: Sequence[str], is_measured: Mapping[str, bool],
             forbidden: frozenset[str], preferred: Sequence[set[str]], treatment: str,
             outcome: str) -> str:
    """A variable that would block ``path``: a measured, allowed non-collider on it."""
    candidates = [u for u in path[1:-1] if u not in colliders and u not in forbidden]
    if not candidates:
        return outcome if len(path) == 2 else path[1]
    usable = [u for u in candidates if is_measured[u]]
    for group in preferred:
        inside = [u for u in usable if u in group]
        if inside:
            return min(inside)
    if usable:
        return min(usable)
    return min(candidates)


# --------------------------------------------------------------------------------------------
# Implications and what to measure


def list_implications(graph: nx.DiGraph, measured: Iterable[str], *,
                      max_implications: int | None = None) -> tuple[Implication, ...]:
    """A basis of conditional independences the graph implies among ``measured`` nodes.

    Parameters
    ----------
    graph : networkx.DiGraph
        The causal DAG.
    measured : iterable of str
        The measured nodes.
    max_implications : int, optional
        Stop after this many (None: all).

    Returns
    -------
    tuple of Implication
        Sorted by (left, right). ``left`` is the later node of the pair in a topological order.

    Notes
    -----
    All nodes measured: for every non-adjacent pair with u before v in a topological order,
    :math:`v \\perp u \\mid \\mathrm{pa}(v)` (pairwise local Markov property). Some nodes
    unmeasured: a minimal d-separator of measured nodes for each non-adjacent measured pair,
    when one exists.

    References
    ----------
    Pearl (2009), Sec. 1.2.3; Shipley (2000), Structural Equation Modeling 7(2).

    Examples
    --------
    >>> g = nx.DiGraph([("a", "b"), ("b", "c")])
    >>> [i.text() for i in list_implications(g, ["a", "b", "c"])]
    ['c _||_ a | b']
    """
    _check_acyclic(graph)
    observed = _check_names(graph, measured, "the measured variables")
    order = list(nx.lexicographical_topological_sort(graph, key=str))
    position = {v: i for i, v in enumerate(order)}
    everything = observed == set(graph.nodes)
    skeleton = graph.to_undirected(as_view=True)
    found: list[Implication] = []
    chosen = sorted(observed, key=lambda v: position[v])
    for j, later in enumerate(chosen):
        for earlier in chosen[:j]:
            if skeleton.has_edge(earlier, later):
                continue
            if everything:
                given = set(graph.predecessors(later))
            else:
                separator = nx.find_minimal_d_separator(
                    graph, earlier, later, restricted=observed - {earlier, later})
                if separator is None:
                    continue
                given = set(separator)
            found.append(Implication(later, earlier, tuple(sorted(given, key=str))))
            if max_implications is not None and len(found) >= max_implications:
                return tuple(sorted(found, key=lambda i: (i.left, i.right)))
    return tuple(sorted(found, key=lambda i: (i.left, i.right)))


def list_measure_to_identify(graph: nx.DiGraph, treatment: str, outcome: str, *,
                             measured: Iterable[str], cost: Mapping[str, float] | None = None,
                             max_sets: int | None = 1000,
                             max_groups: int = MAX_MEASURE_GROUPS) -> tuple[tuple[str, ...], ...]:
    """Smallest groups of unmeasured variables whose measurement would identify the effect.

    Parameters
    ----------
    graph : networkx.DiGraph
        The causal DAG.
    treatment, outcome : str
        T and Y.
    measured : iterable of str
        The measured variables.
    cost : mapping, optional
        Cost of measuring each variable (ties in size go to the cheaper group).
    max_sets : int, optional
        Cap on the minimal sets listed as if everything were measured.
    max_groups : int
        How many groups to return.

    Returns
    -------
    tuple of sorted tuples
        Empty when the measured variables already suffice, or when no adjustment set exists
        even with every variable measured.

    Notes
    -----
    The rule: list the minimal valid sets as if every variable were measured; take each set's
    unmeasured members; keep the groups that contain no other group; order them by size, total
    cost, names; keep ``max_groups``. The group with the fewest unmeasured variables is added
    from a minimum-weight cut (each unmeasured variable weighs 1, measured ones nothing), so
    it is found even when the listing is capped.

    Examples
    --------
    >>> g = nx.DiGraph([("u", "t"), ("u", "y"), ("t", "y")])
    >>> list_measure_to_identify(g, "t", "y", measured=["t", "y"])
    (('u',),)
    """
    _check_inputs(graph, treatment, outcome)
    observed = _check_names(graph, measured, "the measured variables")
    cost = cost if cost is not None else {}
    everyone = set(graph.nodes) - {treatment, outcome}
    search, cuttable = _search_for(graph, treatment, outcome, everyone)
    if not search.separable():
        return ()
    if _search_for(graph, treatment, outcome, everyone & observed)[0].separable():
        return ()
    groups = {frozenset(s - observed) for s in itertools.islice(iter(search), max_sets)}
    count_cost = {v: (0.0 if v in observed else 1.0) for v in cuttable}
    fewest = cheapest_adjustment_set(graph, treatment, outcome, allowed=everyone,
                                     cost=count_cost)
    if fewest is not None:
        groups.add(frozenset(fewest[0] - observed))
    smallest = [g for g in groups if not any(o < g for o in groups)]
    smallest.sort(key=lambda g: (len(g), math.fsum(float(cost.get(v, 0.0)) for v in g),
                                 sorted(g)))
    return tuple(tuple(sorted(g)) for g in smallest[:max_groups])


# --------------------------------------------------------------------------------------------
# The whole identification


def identify(study: Study, *, max_sets: int | None = 1000, max_paths: int | None = 500,
             max_implications: int | None = 1000) -> Identification:
    """Everything the causal graph says about adjusting for the effect of T on Y.

    Parameters
    ----------
    study : Study
        A study with a ``[graph]``; ``[variables]`` gives measurement, labels and costs,
        ``[controls]`` the declared set to check.
    max_sets : int, optional
        Cap on the minimal valid sets listed (None: all; their number can be exponential).
    max_paths : int, optional
        Cap on the non-causal paths listed, shortest first.
    max_implications : int, optional
        Cap on the testable implications listed.

    Returns
    -------
    Identification
        ``to_dict()`` is the ``causalcheck controls`` JSON document.

    Raises
    ------
    GraphError
        No graph, a cycle, or a treatment/outcome problem.

    References
    ----------
    See the module docstring: Shpitser et al. (2010); Perković et al. (2018); van der Zander et
    al. (2019); Henckel et al. (2022); Cinelli, Forney & Pearl (2022).

    Examples
    --------
    >>> from causalcheck.study import parse_study
    >>> study = parse_study('''
    ... [study]
    ... treatment = "t"
    ... outcome = "y"
    ... [variables]
    ... u = { measured = false }
    ... [graph]
    ... edges = ["u -> t", "u -> c", "c -> y", "t -> y"]
    ... [controls]
    ... used = []
    ... ''')
    >>> result = identify(study)
    >>> result.identifiable, result.minimal_sets, result.controls.valid
    (True, (('c',),), False)
    """
    graph = build_graph(study)
    treatment, outcome = str(study.treatment), str(study.outcome)
    nodes = sorted(graph.nodes, key=str)
    measured = {v: bool(graph.nodes[v]["measured"]) for v in nodes}
    labels = {v: graph.nodes[v]["label"] for v in nodes}
    costs = {v: float(graph.nodes[v]["cost"]) for v in nodes}
    allowed = {v for v in nodes if measured[v]} - {treatment, outcome}
    notes: list[str] = []

    causal = _causal_nodes(graph, treatment, outcome)
    has_causal_path = bool(causal)
    if not has_causal_path:
        notes.append(f"the graph has no directed path from {treatment} to {outcome}, so it "
                     f"implies that {treatment} has no effect on {outcome}; a valid adjustment "
                     "set lets the data check that (the adjusted estimate should be near zero)")
    parents = sorted(graph.predecessors(treatment))
    if study.design == "randomized" and parents:
        notes.append(f"the study is declared randomized, yet the graph gives {treatment} the "
                     f"cause{'s' if len(parents) > 1 else ''} {', '.join(parents)}; under "
                     "randomization nothing but the assignment affects the treatment, so check "
                     "the design or the graph")
    for role, name in (("treatment", treatment), ("outcome", outcome)):
        if not measured[name]:
            notes.append(f"the {role} {name} is marked measured = false; no estimate can be "
                         "made until it is measured")

    # Minimal sets (capped), sorted.
    listing = iter_minimal_adjustment_sets(graph, treatment, outcome, allowed=allowed)
    found = list(itertools.islice(listing, None if max_sets is None else max_sets + 1))
    complete = max_sets is None or len(found) <= max_sets
    if not complete:
        found = found[:max_sets]
        notes.append(f"there are more than {max_sets} minimal valid adjustment sets; the first "
                     f"{max_sets} found are listed (sorted), not necessarily the smallest")
    minimal = tuple(sorted(tuple(sorted(s)) for s in found))
    identifiable = bool(minimal)

    # Optimal set.
    optimal_all = optimal_adjustment_set(graph, treatment, outcome)
    optimal = None
    optimal_unmeasured: tuple[str, ...] = ()
    if optimal_all is not None:
        optimal_unmeasured = tuple(sorted(v for v in optimal_all if not measured[v]))
        if not optimal_unmeasured:
            optimal = tuple(sorted(optimal_all))
        else:
            notes.append("the optimal adjustment set (Henckel et al. 2022) would need "
                         f"{_names(optimal_unmeasured, {})}, which "
                         f"{'is' if len(optimal_unmeasured) == 1 else 'are'} not measured")

    # Cheapest set.
    cheapest = cheapest_adjustment_set(graph, treatment, outcome, allowed=allowed, cost=costs)
    cheapest_set = tuple(sorted(cheapest[0])) if cheapest is not None else None
    cheapest_cost = cheapest[1] if cheapest is not None else None

    # Non-causal paths (capped, shortest first).
    paths_iter = iter_biasing_paths(graph, treatment, outcome)
    paths = list(itertools.islice(paths_iter, None if max_paths is None else max_paths + 1))
    paths_complete = max_paths is None or len(paths) <= max_paths
    if not paths_complete:
        paths = paths[:max_paths]
        notes.append(f"there are more than {max_paths} non-causal paths between {treatment} and "
                     f"{outcome}; the {max_paths} shortest are listed, and roles that depend "
                     "on paths (collider) may be incomplete")
    paths.sort(key=lambda p: (len(p), p))
    z = set(study.controls) if study.controls is not None else None
    activated = _ancestors(graph, z) if z is not None else set()
    biasing = tuple(
        BiasingPath(
            path=p,
            open_given_controls=_open(graph, p, z, activated) if z is not None else None,
            open_unadjusted=_open(graph, p, set(), set()),
            colliders=_colliders(graph, p),
            back_door=graph.has_edge(p[1], p[0]),
            text=path_text(graph, p),
        )
        for p in paths)

    roles = _roles(graph, treatment, outcome, {c for p in biasing for c in p.colliders})

    controls = None
    if study.controls is not None:
        preferred = [s for s in (optimal, cheapest_set) if s is not None]
        preferred.extend(minimal)
        controls = check_controls(graph, treatment, outcome, study.controls, measured=measured,
                                  labels=labels, paths=paths,
                                  preferred=preferred)
        instruments = [v for v in study.controls if "instrument" in roles[v]]
        if instruments:
            names = _names(instruments, labels)
            effect = ("keeps the set valid but inflates the standard error" if controls.valid
                      else "amplifies whatever bias is left open")
            notes.append(f"{names} {'acts' if len(instruments) == 1 else 'act'} as an "
                         f"instrument (affecting {labels[outcome]} only through "
                         f"{labels[treatment]}); adjusting for it {effect} (Cinelli, Forney & "
                         "Pearl 2022, models 9 and 10)")

    measure: tuple[tuple[str, ...], ...] = ()
    identifiable_all = True
    if not identifiable:
        everyone = set(nodes) - {treatment, outcome}
        identifiable_all = _search_for(graph, treatment, outcome, everyone)[0].separable()
        if identifiable_all:
            measure = list_measure_to_identify(graph, treatment, outcome,
                                               measured=[v for v in nodes if measured[v]],
                                               cost=costs, max_sets=max_sets)
        else:
            reason = (f"{outcome} is a direct cause of {treatment}" if graph.has_edge(
                outcome, treatment) else "a non-causal path runs only through variables "
                "that may not be adjusted for")
            notes.append("no adjustment set exists even if every variable were measured ("
                         f"{reason}); covariate adjustment cannot identify this effect")

    implications = list_implications(graph, [v for v in nodes if measured[v]],
                                     max_implications=max_implications)
    if max_implications is not None and len(implications) >= max_implications:
        notes.append(f"the testable implications were capped at {max_implications}")

    return Identification(
        treatment=treatment, outcome=outcome, identifiable=identifiable,
        minimal_sets=minimal, optimal_set=optimal, cheapest_set=cheapest_set,
        cheapest_cost=cheapest_cost, roles=roles, measured=measured,
        biasing_paths=biasing, controls=controls, measure_to_identify=measure,
        implications=implications, labels=labels, costs=costs,
        optimal_if_all_measured=tuple(sorted(optimal_all)) if optimal_all is not None else None,
        optimal_unmeasured=optimal_unmeasured, has_causal_path=has_causal_path,
        minimal_sets_complete=complete, biasing_paths_complete=paths_complete,
        identifiable_if_all_measured=identifiable_all, notes=tuple(notes),
    )

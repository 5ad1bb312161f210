"""Study files: the TOML document a user writes, parsed into frozen dataclasses.

A study file names the treatment and the outcome, declares the causal graph as edge strings
``"a -> b"``, and optionally points at data, a published table, path strengths for planning,
and the controls a report chose. The format is a public interface, fixed in DESIGN.md.

Parsing collects *every* problem in a file (unknown keys, wrong types, malformed edges, names
that are not nodes of the graph) and raises them together as one
:class:`~causalcheck.errors.StudyFileError`, each with its key path and, where it can be found,
its line.

Examples
--------
>>> study = parse_study('''
... [study]
... treatment = "x"
... outcome = "y"
... [graph]
... edges = ["z -> x", "z -> y", "x -> y"]
... ''')
>>> study.treatment, study.outcome, study.nodes
('x', 'y', ('x', 'y', 'z'))
"""

from __future__ import annotations

import math
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

from .errors import Problem, StudyFileError, near_matches

__all__ = [
    "Study",
    "Variable",
    "DataSpec",
    "Reported",
    "SensitivitySpec",
    "PlanSpec",
    "load_study",
    "parse_study",
    "parse_edge",
    "ENGINES",
    "MEASURES",
    "KINDS",
    "DESIGNS",
]

ENGINES = ("auto", "pandas", "stream", "dask")
MEASURES = ("difference", "risk_ratio", "odds_ratio", "hazard_ratio")
KINDS = ("numeric", "binary", "categorical")
DESIGNS = ("observational", "randomized")

_NAME = re.compile(r"^[A-Za-z_][A-Za-z0-9_.]*$")
_EDGE = re.compile(r"^\s*([^\s<>-]+)\s*->\s*([^\s<>-]+)\s*$")


@dataclass(frozen=True)
class Variable:
    """What the study file says about one node of the graph (defaults when it says nothing)."""

    name: str
    label: str
    unit: str | None = None
    cost: float = 0.0
    kind: str = "numeric"
    measured: bool = True
    levels: tuple[str, ...] | None = None
    synonyms: tuple[str, ...] = ()

    def display(self) -> str:
        """The label with its unit, for tables: ``"Household income (k/yr)"``."""
        return f"{self.label} ({self.unit})" if self.unit else self.label


@dataclass(frozen=True)
class DataSpec:
    """Where the data are (``[data]``)."""

    path: Path
    engine: str = "auto"
    batch_rows: int | None = None


@dataclass(frozen=True)
class Reported:
    """A published table's numbers (``[reported]``); any subset may be given."""

    estimate: float | None = None
    std_error: float | None = None
    ci: tuple[float, float] | None = None
    t: float | None = None
    p_value: float | None = None
    dof: float | None = None
    n: int | None = None
    covariates: int | None = None
    measure: str = "difference"
    outcome_common: bool = False
    outcome_sd: float | None = None
    ci_level: float | None = None


@dataclass(frozen=True)
class SensitivitySpec:
    """Options for the sensitivity analysis (``[sensitivity]``)."""

    benchmarks: tuple[str, ...] = ()
    multipliers: tuple[float, ...] = (1.0, 2.0, 3.0)
    threshold: float = 0.0
    r2_max: float | None = None
    grid_points: int = 101


@dataclass(frozen=True)
class PlanSpec:
    """Options for planning mode (``[plan]``)."""

    n: int | None = None
    budget: float | None = None
    default_strength: float = 0.2
    require_strengths: bool = False
    range_draws: int = 64
    seed: int = 0


@dataclass(frozen=True)
class Study:
    """A parsed, validated study file.

    ``variables`` holds an entry for every node of the graph, filled with defaults where the
    file says nothing. ``strengths`` maps an edge to its ``(low, high)`` standardised path
    coefficient; a fixed strength has ``low == high``.
    """

    treatment: str | None
    outcome: str | None
    title: str = ""
    claim: str | None = None
    design: str = "observational"
    alpha: float = 0.05
    report_text: Path | None = None
    data: DataSpec | None = None
    variables: Mapping[str, Variable] = field(default_factory=dict)
    edges: tuple[tuple[str, str], ...] = ()
    controls: tuple[str, ...] | None = None
    reported: Reported | None = None
    sensitivity: SensitivitySpec = field(default_factory=SensitivitySpec)
    strengths: Mapping[tuple[str, str], tuple[float, float]] = field(default_factory=dict)
    plan: PlanSpec | None = None
    path: Path | None = None

    @property
    def nodes(self) -> tuple[str, ...]:
        """Every node of the graph, sorted."""
        return tuple(sorted({n for e in self.edges for n in e}))

    @property
    def has_graph(self) -> bool:
        return bool(self.edges)

    @property
    def measured(self) -> tuple[str, ...]:
        """Measured nodes, sorted."""
        return tuple(n for n in self.nodes if self.variable(n).measured)

    def variable(self, name: str) -> Variable:
        """The facts about ``name`` (defaults when the file gives none)."""
        found = self.variables.get(name)
        return found if found is not None else Variable(name=name, label=name)

    def label(self, name: str) -> str:
        return self.variable(name).label

    @property
    def source(self) -> str:
        return str(self.path) if self.path else "<study>"


# --------------------------------------------------------------------------------------------
# Parsing


_ALLOWED: dict[str, tuple[str, ...]] = {
    "study": ("title", "treatment", "outcome", "claim", "design", "alpha", "report_text"),
    "data": ("path", "engine", "batch_rows"),
    "variables": (),
    "graph": ("edges",),
    "controls": ("used",),
    "reported": (
        "estimate", "std_error", "ci", "t", "p_value", "dof", "n", "covariates", "measure",
        "outcome_common", "outcome_sd", "ci_level",
    ),
    "sensitivity": ("benchmarks", "multipliers", "threshold", "r2_max", "grid_points"),
    "strengths": (),
    "plan": ("n", "budget", "default_strength", "require_strengths", "range_draws", "seed"),
}
_VARIABLE_KEYS = ("label", "unit", "cost", "kind", "measured", "levels", "synonyms")


def parse_edge(text: object) -> tuple[str, str] | None:
    """Parse ``"a -> b"`` into ``("a", "b")``; ``None`` when it is not one edge of two names.

    >>> parse_edge("income -> grant")
    ('income', 'grant')
    >>> parse_edge("a - > b") is None, parse_edge("a -> b -> c") is None
    (True, True)
    """
    if not isinstance(text, str):
        return None
    match = _EDGE.match(text)
    if not match:
        return None
    left, right = match.group(1), match.group(2)
    if not (_NAME.match(left) and _NAME.match(right)):
        return None
    return left, right


class _Collector:
    """Gathers problems with their lines so that a file reports all of them at once."""

    def __init__(self, text: str):
        self.lines = text.splitlines()
        self.problems: list[Problem] = []

    def add(self, where: str, message: str, *, find: str | None = None) -> None:
        self.problems.append(Problem(where, message, self.locate(where, find)))

    def locate(self, where: str, find: str | None) -> int | None:
        """Best-effort line of a key path such as ``[graph].edges[3]``."""
        match = re.match(r"^\[([^\]]+)\](?:\.([^\[]+))?", where)
        if not match:
            return None
        section, key = match.group(1), match.group(2)
        in_section = False
        first: int | None = None
        for number, line in enumerate(self.lines, start=1):
            stripped = line.strip()
            header = re.match(r"^\[([^\[\]]+)\]\s*(#.*)?$", stripped)
            if header:
                in_section = header.group(1).strip() == section
                if in_section and first is None:
                    first = number
                continue
            if not in_section:
                continue
            if find is not None and find in line:
                return number
            if find is None and key is not None:
                bare = key.strip('"') if key.startswith('"') else key.split(".")[0]
                if re.match(rf'^\s*"?{re.escape(bare)}"?\s*=', line):
                    return number
        return first


def load_study(path: str | Path) -> Study:
    """Read and validate the study file at ``path``.

    Raises
    ------
    StudyFileError
        When the file cannot be read, is not TOML, or breaks any rule of the format; every
        problem found is listed.
    """
    path = Path(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise StudyFileError(str(path), [Problem(
            "file", "does not exist; check the path, which is relative to where you run the "
            "command")]) from None
    except IsADirectoryError:
        raise StudyFileError(str(path), [Problem(
            "file", "is a folder, not a study file; pass the .toml file inside it")]) from None
    except OSError as e:
        raise StudyFileError(str(path), [Problem(
            "file", f"cannot be read ({e.strerror}); check its permissions")]) from None
    if b"\x00" in raw:
        raise StudyFileError(str(path), [Problem(
            "file", "is a binary file, not a TOML study file; pass the .toml file")])
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as e:
        raise StudyFileError(str(path), [Problem(
            "file", f"is not UTF-8 text (bad byte at offset {e.start}); save it as UTF-8")]
        ) from None
    return parse_study(text, path=path)


def parse_study(text: str, *, path: str | Path | None = None) -> Study:
    """Parse study-file ``text``; relative paths inside resolve against ``path``'s folder."""
    source = str(path) if path is not None else "<study>"
    base = Path(path).resolve().parent if path is not None else Path.cwd()
    if not text.strip():
        raise StudyFileError(source, [Problem(
            "file", "is empty; a study file needs at least a [study] table with treatment and "
            "outcome and a [graph] table with edges, or a [reported] table")])
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as e:
        line = getattr(e, "lineno", None)
        message = getattr(e, "msg", str(e))
        if line is None:      # Python < 3.14: "... (at line 3, column 11)" in the message
            found = re.search(r"\(at line (\d+), column \d+\)", message)
            line = int(found.group(1)) if found else None
        message = _plain_toml_message(message)
        raise StudyFileError(source, [Problem(
            "TOML syntax", f"{message}; fix the TOML syntax there (strings need double quotes, "
            "tables are written [name], lists [a, b])", line)]) from None
    out = _Collector(text)
    study = _build(doc, out, base)
    if out.problems:
        raise StudyFileError(source, out.problems)
    assert study is not None
    return _replace_path(study, Path(path) if path is not None else None)


_TOML_MESSAGES = (
    (re.compile(r"^Cannot declare \('([^']*)',?\) twice"),
     "the table [{0}] is declared twice; merge its keys under one [{0}] header"),
    (re.compile(r"^Cannot overwrite a value"),
     ("a key on this line is already set (given twice, or also set as a table); give each "
      "key once")),
    (re.compile(r"^Illegal character '\\n'"),
     "a string runs to the end of the line; close it with a double quote"),
)


def _plain_toml_message(message: str) -> str:
    """The TOML reader's message, with the common ones said in plain words first."""
    for pattern, plain in _TOML_MESSAGES:
        found = pattern.match(message)
        if found:
            return plain.format(*found.groups()) + f" ({message})"
    return message


def _replace_path(study: Study, path: Path | None) -> Study:
    from dataclasses import replace

    return replace(study, path=path)


# -- typed getters ---------------------------------------------------------------------------


def _is_number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _number(out: _Collector, where: str, value: Any, *, rule: str = "a number",
            check=None) -> float | None:
    if not _is_number(value) or not math.isfinite(float(value)):
        out.add(where, f"must be {rule}; got {value!r}. Write a plain finite number such as 0.5")
        return None
    number = float(value)
    if check is not None and not check(number):
        out.add(where, f"must be {rule}; got {value!r}")
        return None
    return number


def _integer(out: _Collector, where: str, value: Any, *, rule: str, minimum: int) -> int | None:
    if isinstance(value, bool) or not isinstance(value, int) or value < minimum:
        out.add(where, f"must be {rule}; got {value!r}")
        return None
    return int(value)


def _string(out: _Collector, where: str, value: Any, *, rule: str = "a string") -> str | None:
    if not isinstance(value, str):
        out.add(where, f"must be {rule} in double quotes; got {value!r}")
        return None
    return value


def _boolean(out: _Collector, where: str, value: Any) -> bool | None:
    if not isinstance(value, bool):
        out.add(where, f"must be true or false (no quotes); got {value!r}")
        return None
    return value


def _choice(out: _Collector, where: str, value: Any, choices: tuple[str, ...]) -> str | None:
    if not isinstance(value, str) or value not in choices:
        options = ", ".join(repr(c) for c in choices)
        hint = near_matches(value, choices) if isinstance(value, str) else ""
        out.add(where, f"must be one of {options}; got {value!r}{hint}")
        return None
    return value


def _name_list(out: _Collector, where: str, value: Any) -> tuple[str, ...] | None:
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        out.add(where, f"must be a list of variable names in double quotes, such as "
                f"[\"income\", \"region\"]; got {value!r}")
        return None
    seen: set[str] = set()
    for i, name in enumerate(value):
        if name in seen:
            out.add(f"{where}[{i}]", f"names {name!r} twice; list each variable once",
                    find=f'"{name}"')
        seen.add(name)
    return tuple(value)


def _home_of(key: str) -> str:
    """``" (it belongs in [controls])"`` when ``key`` is a key of other tables, else ``""``."""
    homes = [f"[{t}]" for t, keys in _ALLOWED.items() if key in keys]
    return f" (it belongs in {' or '.join(homes)})" if homes else ""


def _unknown_keys(out: _Collector, where: str, table: Mapping[str, Any],
                  allowed: tuple[str, ...]) -> None:
    for key in table:
        if key not in allowed:
            hint = near_matches(key, allowed) or _home_of(key)
            out.add(f"{where}.{key}", f"is not a known key{hint}; "
                    f"the keys allowed here are {', '.join(allowed)}")


# -- the builder -----------------------------------------------------------------------------


def _build(doc: dict[str, Any], out: _Collector, base: Path) -> Study | None:
    for section, value in doc.items():
        if section not in _ALLOWED and not isinstance(value, dict):
            # a key before the first [table] header (a deleted or misspelt header)
            line = next((i for i, text in enumerate(out.lines, start=1)
                         if re.match(r"^\s*\[", text) or re.match(
                             rf'^\s*"?{re.escape(section)}"?\s*=', text)), None)
            if line is not None and re.match(r"^\s*\[", out.lines[line - 1]):
                line = None
            home = _home_of(section)
            out.problems.append(Problem(
                section, f"= {value!r} stands outside every table (before the first [table] "
                f"header){home}; put it under its table's header"
                + ("" if home else f", one of {', '.join('[' + s + ']' for s in _ALLOWED)}"),
                line))
        elif section not in _ALLOWED:
            out.add(f"[{section}]", f"is not a known table{near_matches(section, _ALLOWED)}; "
                    f"the tables are {', '.join('[' + s + ']' for s in _ALLOWED)}")
        elif not isinstance(value, dict):
            out.add(f"[{section}]", f"must be a table written [{section}] on its own line; "
                    f"got the value {value!r}")
    tables = {k: v for k, v in doc.items() if k in _ALLOWED and isinstance(v, dict)}
    for section in ("study", "data", "graph", "controls", "reported", "sensitivity", "plan"):
        if section in tables:
            _unknown_keys(out, f"[{section}]", tables[section], _ALLOWED[section])

    # [graph]
    edges: list[tuple[str, str]] = []
    graph = tables.get("graph")
    if graph is not None and "edges" in graph:
        raw_edges = graph["edges"]
        if not isinstance(raw_edges, list):
            out.add("[graph].edges", f"must be a list of strings like \"a -> b\"; got "
                    f"{raw_edges!r}")
        elif not raw_edges:
            out.add("[graph].edges", "is empty; list the edges as edges = [\"a -> b\", ...] "
                    "or remove the [graph] table (a graph is optional only for vetting a "
                    "[reported] table)")
        else:
            seen_edges: set[tuple[str, str]] = set()
            for i, raw in enumerate(raw_edges):
                where = f"[graph].edges[{i}]"
                find = raw if isinstance(raw, str) else None
                edge = parse_edge(raw)
                if edge is None:
                    out.add(where, f"{raw!r} is not an edge; write one edge as \"cause -> "
                            "effect\" with two names made of letters, digits, _ or . "
                            "(one edge a string)", find=find)
                    continue
                if edge[0] == edge[1]:
                    out.add(where, f"{raw!r} is a self-loop; a variable cannot cause itself "
                            "in a DAG, remove this edge", find=find)
                    continue
                if edge in seen_edges:
                    out.add(where, f"{raw!r} repeats an earlier edge; remove the duplicate",
                            find=find)
                    continue
                seen_edges.add(edge)
                edges.append(edge)
    elif graph is not None:
        out.add("[graph].edges", "is missing; list the edges as edges = [\"a -> b\", ...]")
    nodes = sorted({n for e in edges for n in e})
    _check_case_clashes(out, nodes)

    def check_node(where: str, name: str, what: str) -> bool:
        if not edges:
            return True
        if name not in nodes:
            out.add(where, f"{what} {name!r} is not a node of the graph"
                    f"{near_matches(name, nodes)}; add it to [graph].edges or fix the name",
                    find=f'"{name}"' if where.endswith("]") else None)
            return False
        return True

    # [study]
    st = tables.get("study", {})
    treatment = outcome = None
    if "treatment" in st:
        treatment = _string(out, "[study].treatment", st["treatment"])
        if treatment is not None:
            check_node("[study].treatment", treatment, "the treatment")
    if "outcome" in st:
        outcome = _string(out, "[study].outcome", st["outcome"])
        if outcome is not None:
            check_node("[study].outcome", outcome, "the outcome")
    if edges:
        if "treatment" not in st:
            out.add("[study].treatment", "is missing; name the treatment variable, e.g. "
                    "treatment = \"grant\"")
        if "outcome" not in st:
            out.add("[study].outcome", "is missing; name the outcome variable, e.g. "
                    "outcome = \"bill_change\"")
    if treatment is not None and outcome is not None and treatment == outcome:
        out.add("[study].outcome", f"is the same variable as the treatment ({treatment!r}); "
                "the treatment and the outcome must differ")
    title = _string(out, "[study].title", st["title"]) if "title" in st else None
    claim = _string(out, "[study].claim", st["claim"]) if "claim" in st else None
    design = "observational"
    if "design" in st:
        design = _choice(out, "[study].design", st["design"], DESIGNS) or design
    alpha = 0.05
    if "alpha" in st:
        alpha = _number(out, "[study].alpha", st["alpha"],
                        rule="a number strictly between 0 and 1, such as 0.05",
                        check=lambda a: 0 < a < 1) or alpha
    report_text = None
    if "report_text" in st:
        text_path = _string(out, "[study].report_text", st["report_text"],
                            rule="a file path")
        if text_path is not None:
            report_text = (base / text_path)

    # [data]
    data = None
    if "data" in tables:
        dt = tables["data"]
        if "path" not in dt:
            out.add("[data].path", "is missing; give the data file, e.g. path = \"data.csv\"")
        data_path = _string(out, "[data].path", dt["path"], rule="a file path") \
            if "path" in dt else None
        engine = "auto"
        if "engine" in dt:
            engine = _choice(out, "[data].engine", dt["engine"], ENGINES) or engine
        batch_rows = None
        if "batch_rows" in dt:
            batch_rows = _integer(out, "[data].batch_rows", dt["batch_rows"],
                                  rule="a whole number of rows of at least 1000", minimum=1000)
        if data_path is not None:
            data = DataSpec(path=base / data_path, engine=engine, batch_rows=batch_rows)

    # [variables]
    variables: dict[str, Variable] = {}
    for name, spec in tables.get("variables", {}).items():
        where = f"[variables].{name}"
        if not check_node(where, name, "the variable"):
            continue
        if not isinstance(spec, dict):
            out.add(where, f"must be an inline table such as {{ label = \"...\" }}; got "
                    f"{spec!r}")
            continue
        _unknown_keys(out, where, spec, _VARIABLE_KEYS)
        label = _string(out, f"{where}.label", spec["label"]) if "label" in spec else None
        unit = _string(out, f"{where}.unit", spec["unit"]) if "unit" in spec else None
        cost = 0.0
        if "cost" in spec:
            cost = _number(out, f"{where}.cost", spec["cost"],
                           rule="a cost of zero or more", check=lambda c: c >= 0) or 0.0
        kind = "numeric"
        if "kind" in spec:
            kind = _choice(out, f"{where}.kind", spec["kind"], KINDS) or kind
        measured = True
        if "measured" in spec:
            got = _boolean(out, f"{where}.measured", spec["measured"])
            measured = True if got is None else got
        levels = None
        if "levels" in spec:
            raw_levels = spec["levels"]
            if (not isinstance(raw_levels, list) or len(raw_levels) < 2
                    or not all(isinstance(v, (str, int)) and not isinstance(v, bool)
                               for v in raw_levels)):
                out.add(f"{where}.levels", "must list at least two category values, such as "
                        f"[\"north\", \"south\"]; got {raw_levels!r}")
            else:
                levels = tuple(str(v) for v in raw_levels)
                if len(set(levels)) != len(levels):
                    out.add(f"{where}.levels", f"repeats a level in {raw_levels!r}; list each "
                            "level once")
                if kind != "categorical":
                    out.add(f"{where}.levels", "is only allowed with kind = \"categorical\"; "
                            "add kind = \"categorical\" or remove levels")
        synonyms: tuple[str, ...] = ()
        if "synonyms" in spec:
            got_syn = spec["synonyms"]
            if not isinstance(got_syn, list) or not all(isinstance(s, str) for s in got_syn):
                out.add(f"{where}.synonyms", f"must be a list of strings; got {got_syn!r}")
            else:
                synonyms = tuple(got_syn)
        variables[name] = Variable(name=name, label=label or name, unit=unit, cost=cost,
                                   kind=kind, measured=measured, levels=levels,
                                   synonyms=synonyms)
    for name in nodes:
        variables.setdefault(name, Variable(name=name, label=name))
    for role, name in (("treatment", treatment), ("outcome", outcome)):
        if name is not None and name in variables and variables[name].kind == "categorical":
            out.add(f"[variables].{name}.kind", f"the {role} {name!r} is declared categorical; "
                    f"the {role} must be numeric or binary (0/1). Recode it or pick one level")

    # [controls]
    controls = None
    if "controls" in tables:
        ct = tables["controls"]
        if "used" not in ct:
            out.add("[controls].used", "is missing; list the controls the report adjusted "
                    "for, e.g. used = [\"income\"] (or used = [] for none)")
            controls = ()
        else:
            got_controls = _name_list(out, "[controls].used", ct["used"])
            controls = got_controls or ()
            for i, name in enumerate(controls):
                where = f"[controls].used[{i}]"
                if check_node(where, name, "the control"):
                    if name in (treatment, outcome):
                        out.add(where, f"{name!r} is the {'treatment' if name == treatment else 'outcome'}; "
                                "it cannot also be a control", find=f'"{name}"')

    reported = _build_reported(tables["reported"], out) if "reported" in tables else None
    sensitivity = _build_sensitivity(tables.get("sensitivity"), out, check_node)
    strengths = _build_strengths(tables.get("strengths"), out, edges)
    plan = _build_plan(tables["plan"], out) if "plan" in tables else None

    if not edges and reported is None:
        if graph is None:
            out.add("[graph]", "is missing; a study needs [graph] edges = [\"a -> b\", ...] "
                    "(or, to vet a published table only, a [reported] table)")
    return Study(
        treatment=treatment, outcome=outcome, title=title or "", claim=claim, design=design,
        alpha=alpha, report_text=report_text, data=data, variables=variables,
        edges=tuple(edges), controls=controls, reported=reported, sensitivity=sensitivity,
        strengths=strengths, plan=plan,
    )


def _check_case_clashes(out: _Collector, nodes: list[str]) -> None:
    by_lower: dict[str, list[str]] = {}
    for name in nodes:
        by_lower.setdefault(name.lower(), []).append(name)
    for group in by_lower.values():
        if len(group) > 1:
            out.add("[graph].edges", f"the names {', '.join(repr(g) for g in group)} differ "
                    "only by case; names are case-sensitive, so these are different nodes. "
                    "Spell each variable one way", find=f'"{group[1]}')


def _build_reported(rt: dict[str, Any], out: _Collector) -> Reported:
    w = "[reported]"
    values: dict[str, Any] = {}
    for key in ("estimate", "std_error", "t", "p_value", "dof", "outcome_sd", "ci_level"):
        if key in rt:
            values[key] = _number(out, f"{w}.{key}", rt[key])
    if values.get("std_error") is not None and values["std_error"] <= 0:
        out.add(f"{w}.std_error", f"must be positive; got {rt['std_error']!r}. A standard "
                "error is never zero or negative: copy it from the table again")
        values["std_error"] = None
    if values.get("p_value") is not None and not 0 < values["p_value"] <= 1:
        out.add(f"{w}.p_value", f"must be a two-sided p-value in (0, 1]; got {rt['p_value']!r}")
        values["p_value"] = None
    if values.get("dof") is not None and values["dof"] <= 0:
        out.add(f"{w}.dof", f"must be positive (residual degrees of freedom); got "
                f"{rt['dof']!r}")
        values["dof"] = None
    if values.get("outcome_sd") is not None and values["outcome_sd"] <= 0:
        out.add(f"{w}.outcome_sd", f"must be positive; got {rt['outcome_sd']!r}")
        values["outcome_sd"] = None
    if values.get("ci_level") is not None and not 0 < values["ci_level"] < 1:
        out.add(f"{w}.ci_level", f"must be a level in (0, 1) such as 0.95; got "
                f"{rt['ci_level']!r}")
        values["ci_level"] = None
    if "n" in rt:
        values["n"] = _integer(out, f"{w}.n", rt["n"], rule="a whole number of at least 3",
                               minimum=3)
    if "covariates" in rt:
        values["covariates"] = _integer(out, f"{w}.covariates", rt["covariates"],
                                        rule="a whole number of controls, 0 or more",
                                        minimum=0)
    if "ci" in rt:
        ci = rt["ci"]
        if (not isinstance(ci, list) or len(ci) != 2
                or not all(_is_number(c) and math.isfinite(c) for c in ci)):
            out.add(f"{w}.ci", f"must be two finite numbers [low, high]; got {ci!r}")
        elif ci[0] >= ci[1]:
            out.add(f"{w}.ci", f"is reversed or empty: low {ci[0]!r} is not below high "
                    f"{ci[1]!r}; write [low, high]")
        else:
            values["ci"] = (float(ci[0]), float(ci[1]))
    measure = "difference"
    if "measure" in rt:
        measure = _choice(out, f"{w}.measure", rt["measure"], MEASURES) or measure
    common = False
    if "outcome_common" in rt:
        common = bool(_boolean(out, f"{w}.outcome_common", rt["outcome_common"]))
    if "estimate" not in rt:
        out.add(f"{w}.estimate", "is missing; give the published estimate, e.g. estimate = "
                "-14.2")
    if values.get("n") is not None and values.get("covariates") is not None:
        if values["n"] - values["covariates"] - 2 <= 0:
            out.add(f"{w}.n", f"n = {values['n']} with covariates = {values['covariates']} "
                    "leaves no residual degrees of freedom (dof = n - covariates - 2 must be "
                    "positive)")
    return Reported(measure=measure, outcome_common=common,
                    **{k: v for k, v in values.items() if v is not None})


def _build_sensitivity(tab: dict[str, Any] | None, out: _Collector, check_node) -> SensitivitySpec:
    if tab is None:
        return SensitivitySpec()
    w = "[sensitivity]"
    kwargs: dict[str, Any] = {}
    if "benchmarks" in tab:
        names = _name_list(out, f"{w}.benchmarks", tab["benchmarks"])
        if names is not None:
            for i, name in enumerate(names):
                check_node(f"{w}.benchmarks[{i}]", name, "the benchmark")
            kwargs["benchmarks"] = names
    if "multipliers" in tab:
        raw = tab["multipliers"]
        if (not isinstance(raw, list) or not raw
                or not all(_is_number(m) and math.isfinite(m) and m > 0 for m in raw)):
            out.add(f"{w}.multipliers", f"must be a list of positive numbers such as [1, 2, 3];"
                    f" got {raw!r}")
        else:
            kwargs["multipliers"] = tuple(float(m) for m in raw)
    if "threshold" in tab:
        got = _number(out, f"{w}.threshold", tab["threshold"])
        if got is not None:
            kwargs["threshold"] = got
    if "r2_max" in tab:
        got = _number(out, f"{w}.r2_max", tab["r2_max"], rule="a number in (0, 1]",
                      check=lambda r: 0 < r <= 1)
        if got is not None:
            kwargs["r2_max"] = got
    if "grid_points" in tab:
        got_i = _integer(out, f"{w}.grid_points", tab["grid_points"],
                         rule="a whole number from 3 to 2001", minimum=3)
        if got_i is not None and got_i > 2001:
            out.add(f"{w}.grid_points", f"must be at most 2001; got {got_i!r}")
        elif got_i is not None:
            kwargs["grid_points"] = got_i
    return SensitivitySpec(**kwargs)


def _build_strengths(tab: dict[str, Any] | None, out: _Collector,
                     edges: list[tuple[str, str]]) -> dict[tuple[str, str], tuple[float, float]]:
    strengths: dict[tuple[str, str], tuple[float, float]] = {}
    if tab is None:
        return strengths
    edge_set = set(edges)
    for key, value in tab.items():
        where = f'[strengths]."{key}"'
        edge = parse_edge(key)
        if edge is None:
            out.add(where, f"{key!r} is not an edge; write the key as \"cause -> effect\" in "
                    "double quotes", find=key)
            continue
        if edge not in edge_set:
            hint = ""
            if (edge[1], edge[0]) in edge_set:
                hint = f" (the graph has {edge[1]} -> {edge[0]}; check the direction)"
            out.add(where, f"the edge {key!r} is not in [graph].edges{hint}; add the edge to "
                    "the graph or remove this strength", find=key)
            continue
        if _is_number(value) and math.isfinite(value):
            low = high = float(value)
        elif (isinstance(value, list) and len(value) == 2
              and all(_is_number(v) and math.isfinite(v) for v in value)):
            low, high = float(value[0]), float(value[1])
            if low > high:
                out.add(where, f"the range {value!r} is reversed; write [low, high]", find=key)
                continue
        else:
            out.add(where, f"must be a standardised path coefficient (a number) or a range "
                    f"[low, high]; got {value!r}", find=key)
            continue
        if max(abs(low), abs(high)) >= 1:
            out.add(where, f"a standardised path coefficient must lie strictly between -1 and "
                    f"1; got {value!r}", find=key)
            continue
        strengths[edge] = (low, high)
    return strengths


def _build_plan(tab: dict[str, Any], out: _Collector) -> PlanSpec:
    w = "[plan]"
    kwargs: dict[str, Any] = {}
    if "n" in tab:
        got = _integer(out, f"{w}.n", tab["n"], rule="a planned sample size of at least 3",
                       minimum=3)
        if got is not None:
            kwargs["n"] = got
    if "budget" in tab:
        got_b = _number(out, f"{w}.budget", tab["budget"], rule="a budget of zero or more",
                        check=lambda b: b >= 0)
        if got_b is not None:
            kwargs["budget"] = got_b
    if "default_strength" in tab:
        got_d = _number(out, f"{w}.default_strength", tab["default_strength"],
                        rule="a number strictly between -1 and 1",
                        check=lambda s: -1 < s < 1)
        if got_d is not None:
            kwargs["default_strength"] = got_d
    if "require_strengths" in tab:
        got_r = _boolean(out, f"{w}.require_strengths", tab["require_strengths"])
        if got_r is not None:
            kwargs["require_strengths"] = got_r
    if "range_draws" in tab:
        got_n = _integer(out, f"{w}.range_draws", tab["range_draws"],
                         rule="a whole number of at least 2", minimum=2)
        if got_n is not None:
            kwargs["range_draws"] = got_n
    if "seed" in tab:
        got_s = _integer(out, f"{w}.seed", tab["seed"], rule="a whole number 0 or more",
                         minimum=0)
        if got_s is not None:
            kwargs["seed"] = got_s
    return PlanSpec(**kwargs)

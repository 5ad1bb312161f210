"""Tests of the study-file parser (causalcheck.study): what it builds and how it refuses."""

from __future__ import annotations

from pathlib import Path

import pytest

from causalcheck.errors import StudyFileError
from causalcheck.study import load_study, parse_edge, parse_study

HEAD = '[study]\ntreatment = "x"\noutcome = "y"\n[graph]\nedges = ["x -> y", "income -> y"]\n'


def problems(text: str) -> list[str]:
    """Every problem of ``text`` as formatted in the error, one string each."""
    with pytest.raises(StudyFileError) as info:
        parse_study(text, path="s.toml")
    error = info.value
    assert str(error).startswith(f"study file 's.toml' has {len(error.problems)} problem")
    return [p.format() for p in error.problems]


def only(text: str) -> str:
    found = problems(text)
    assert len(found) == 1, found
    return found[0]


# --------------------------------------------------------------------------------------------
# What a good file becomes


def test_full_study_parses(tmp_path):
    path = tmp_path / "study.toml"
    (tmp_path / "households.csv").write_text("a\n1\n")
    path.write_text("""
[study]
title = "Grants"
treatment = "grant"
outcome = "bill"
claim = "The grant cut bills."
design = "observational"
alpha = 0.1

[data]
path = "households.csv"
engine = "stream"
batch_rows = 5000

[variables]
income   = { label = "Household income", unit = "k/yr", cost = 2 }
region   = { kind = "categorical", levels = ["north", "south"] }
attitude = { measured = false, cost = 40, synonyms = ["green views"] }

[graph]
edges = ["income -> grant", "income -> bill", "attitude -> grant", "attitude -> bill",
         "region -> grant", "grant -> bill"]

[controls]
used = ["income"]

[sensitivity]
benchmarks = ["income"]
multipliers = [1, 2]
threshold = -1

[strengths]
"income -> grant" = 0.3
"attitude -> bill" = [0.1, 0.4]

[plan]
n = 2000
budget = 50
""", encoding="utf-8")
    study = load_study(path)
    assert study.treatment == "grant" and study.outcome == "bill" and study.alpha == 0.1
    assert study.nodes == ("attitude", "bill", "grant", "income", "region")
    assert study.measured == ("bill", "grant", "income", "region")
    assert study.data.path == tmp_path / "households.csv"        # relative to the file
    assert study.data.engine == "stream" and study.data.batch_rows == 5000
    assert study.variable("income").display() == "Household income (k/yr)"
    assert study.variable("region").levels == ("north", "south")
    assert study.variable("attitude").synonyms == ("green views",)
    assert study.label("grant") == "grant"                      # default label: the name
    assert study.controls == ("income",)
    assert study.sensitivity.multipliers == (1.0, 2.0) and study.sensitivity.threshold == -1
    assert study.strengths[("income", "grant")] == (0.3, 0.3)
    assert study.strengths[("attitude", "bill")] == (0.1, 0.4)
    assert study.plan.n == 2000 and study.plan.budget == 50
    assert study.source == str(path)


def test_defaults_and_optional_tables():
    study = parse_study('[study]\ntreatment = "x"\noutcome = "y"\n[graph]\nedges = ["x -> y"]\n')
    assert study.controls is None and study.reported is None and study.data is None
    assert study.design == "observational" and study.alpha == 0.05
    assert study.variable("x").measured and study.variable("x").cost == 0.0
    # a published table alone is enough (no graph needed to vet it)
    vet = parse_study("[reported]\nestimate = -14.2\nstd_error = 3.1\ndof = 1890\n")
    assert vet.reported.estimate == -14.2 and not vet.has_graph
    # an empty control list checks the unadjusted comparison
    assert parse_study(HEAD + "[controls]\nused = []\n").controls == ()


def test_parse_edge():
    assert parse_edge("a->b") == ("a", "b")
    assert parse_edge("  x.1 ->  y_2 ") == ("x.1", "y_2")
    assert parse_edge("a -> b -> c") is None
    assert parse_edge("1a -> b") is None
    assert parse_edge(3) is None


def test_every_problem_is_reported_at_once():
    found = problems('[study]\ntreatment = 3\noutcome = "y"\nalpha = "0.05"\ntitel = "t"\n'
                     '[graph]\nedges = ["x -> y", "y -> y"]\n')
    assert len(found) == 4
    assert any(p.startswith("[study].treatment (line 2)") for p in found)
    assert any(p.startswith("[study].alpha (line 4)") for p in found)
    assert any(p.startswith("[study].titel (line 5)") for p in found)
    assert any(p.startswith("[graph].edges[1] (line 7)") for p in found)


# --------------------------------------------------------------------------------------------
# One test a kind of problem


def test_error_unknown_key_with_near_match():
    assert only('[study]\ntreatment = "x"\noutcome = "y"\ntitel = "t"\n[graph]\n'
                'edges = ["x -> y"]\n') == (
        "[study].titel (line 4): is not a known key (did you mean 'title'?); the keys allowed "
        "here are title, treatment, outcome, claim, design, alpha, report_text")


def test_error_unknown_variable_key_with_near_match():
    assert only(HEAD + '[variables]\nincome = { lable = "I" }\n') == (
        "[variables].income.lable (line 7): is not a known key (did you mean 'label'?); the "
        "keys allowed here are label, unit, cost, kind, measured, levels, synonyms")


def test_error_unknown_section_with_near_match():
    found = problems('[study]\ntreatment = "x"\noutcome = "y"\n[grpah]\nedges = ["x -> y"]\n')
    assert found[0].startswith("[grpah] (line 4): is not a known table (did you mean 'graph'?)")
    assert found[1].startswith("[graph]: is missing")


def test_error_malformed_edge_is_quoted():
    assert only('[study]\ntreatment = "x"\noutcome = "y"\n[graph]\n'
                'edges = ["x -> y", "x => z"]\n') == (
        "[graph].edges[1] (line 5): 'x => z' is not an edge; write one edge as \"cause -> "
        "effect\" with two names made of letters, digits, _ or . (one edge a string)")


def test_error_self_loop():
    assert only('[study]\ntreatment = "x"\noutcome = "y"\n[graph]\n'
                'edges = ["x -> y", "y -> y"]\n') == (
        "[graph].edges[1] (line 5): 'y -> y' is a self-loop; a variable cannot cause itself "
        "in a DAG, remove this edge")


def test_error_duplicate_edge():
    assert only('[study]\ntreatment = "x"\noutcome = "y"\n[graph]\n'
                'edges = ["x -> y", "x->y"]\n') == (
        "[graph].edges[1] (line 5): 'x->y' repeats an earlier edge; remove the duplicate")


def test_error_empty_edge_list():
    # a bug fixed here: edges = [] used to be accepted as a study with no graph at all
    assert only('[study]\ntreatment = "x"\noutcome = "y"\n[graph]\nedges = []\n') == (
        "[graph].edges (line 5): is empty; list the edges as edges = [\"a -> b\", ...] or "
        "remove the [graph] table (a graph is optional only for vetting a [reported] table)")


def test_error_case_clash():
    assert only('[study]\ntreatment = "x"\noutcome = "y"\n[graph]\n'
                'edges = ["x -> y", "Income -> x", "income -> y"]\n') == (
        "[graph].edges (line 5): the names 'Income', 'income' differ only by case; names are "
        "case-sensitive, so these are different nodes. Spell each variable one way")


def test_error_wrong_types():
    found = problems('[study]\ntreatment = 3\noutcome = "y"\nalpha = "0.05"\n[graph]\n'
                     'edges = "x -> y"\n')
    assert found == [
        "[graph].edges (line 6): must be a list of strings like \"a -> b\"; got 'x -> y'",
        "[study].treatment (line 2): must be a string in double quotes; got 3",
        ("[study].alpha (line 4): must be a number strictly between 0 and 1, such as 0.05; "
        "got '0.05'. Write a plain finite number such as 0.5"),
    ]


def test_error_wrong_types_in_variables():
    found = problems(HEAD + '[variables]\nincome = { measured = "no", cost = -3 }\n'
                     'x = "treatment"\n')
    assert "[variables].income.cost (line 7): must be a cost of zero or more; got -3" in found
    assert ("[variables].income.measured (line 7): must be true or false (no quotes); got 'no'"
            in found)
    assert ("[variables].x (line 8): must be an inline table such as { label = \"...\" }; got "
            "'treatment'") in found


def test_error_section_that_is_not_a_table():
    found = problems('study = 3\n[graph]\nedges = ["x -> y"]\n')
    assert found[0] == "[study]: must be a table written [study] on its own line; got the value 3"


def test_error_missing_treatment():
    assert only('[study]\noutcome = "y"\n[graph]\nedges = ["x -> y"]\n') == (
        "[study].treatment (line 1): is missing; name the treatment variable, e.g. treatment = "
        "\"grant\"")


def test_error_treatment_not_a_node_with_near_match():
    assert only('[study]\ntreatment = "grnt"\noutcome = "y"\n[graph]\n'
                'edges = ["grant -> y"]\n') == (
        "[study].treatment (line 2): the treatment 'grnt' is not a node of the graph (did you "
        "mean 'grant'?); add it to [graph].edges or fix the name")


def test_error_treatment_equals_outcome():
    assert only('[study]\ntreatment = "x"\noutcome = "x"\n[graph]\nedges = ["x -> y"]\n') == (
        "[study].outcome (line 3): is the same variable as the treatment ('x'); the treatment "
        "and the outcome must differ")


def test_error_categorical_treatment():
    assert only(HEAD + '[variables]\nx = { kind = "categorical" }\n') == (
        "[variables].x.kind (line 7): the treatment 'x' is declared categorical; the treatment "
        "must be numeric or binary (0/1). Recode it or pick one level")


def test_error_bad_alpha():
    assert only('[study]\ntreatment = "x"\noutcome = "y"\nalpha = 1.5\n[graph]\n'
                'edges = ["x -> y"]\n') == (
        "[study].alpha (line 4): must be a number strictly between 0 and 1, such as 0.05; got "
        "1.5")


def test_error_bad_choice():
    assert only('[study]\ntreatment = "x"\noutcome = "y"\ndesign = "rct"\n[graph]\n'
                'edges = ["x -> y"]\n') == (
        "[study].design (line 4): must be one of 'observational', 'randomized'; got 'rct'")


def test_error_reported_numbers_impossible():
    found = problems('[reported]\nestimate = 1.0\nstd_error = -2\np_value = 1.5\nci = [3, 1]\n'
                     'n = 10\ncovariates = 9\n')
    assert found == [
        ("[reported].std_error (line 3): must be positive; got -2. A standard error is never "
        "zero or negative: copy it from the table again"),
        "[reported].p_value (line 4): must be a two-sided p-value in (0, 1]; got 1.5",
        ("[reported].ci (line 5): is reversed or empty: low 3 is not below high 1; write "
        "[low, high]"),
        ("[reported].n (line 6): n = 10 with covariates = 9 leaves no residual degrees of "
        "freedom (dof = n - covariates - 2 must be positive)"),
    ]


def test_error_reported_without_estimate():
    assert only("[reported]\nstd_error = 1.0\n") == (
        "[reported].estimate (line 1): is missing; give the published estimate, e.g. "
        "estimate = -14.2")


def test_error_strengths_not_in_graph():
    found = problems('[study]\ntreatment = "x"\noutcome = "y"\n[graph]\nedges = ["x -> y"]\n'
                     '[strengths]\n"y -> x" = 0.3\n"x -> y" = 1.2\n"a -> b" = 0.1\n')
    assert found == [
        ("[strengths].\"y -> x\" (line 7): the edge 'y -> x' is not in [graph].edges (the graph "
        "has x -> y; check the direction); add the edge to the graph or remove this strength"),
        ("[strengths].\"x -> y\" (line 8): a standardised path coefficient must lie strictly "
        "between -1 and 1; got 1.2"),
        ("[strengths].\"a -> b\" (line 9): the edge 'a -> b' is not in [graph].edges; add the "
        "edge to the graph or remove this strength"),
    ]


def test_error_names_not_in_graph_with_near_matches():
    found = problems(HEAD + '[variables]\nincom = { label = "I" }\n[controls]\n'
                     'used = ["incme"]\n[sensitivity]\nbenchmarks = ["Income"]\n')
    assert found == [
        ("[variables].incom (line 7): the variable 'incom' is not a node of the graph (did you "
        "mean 'income'?); add it to [graph].edges or fix the name"),
        ("[controls].used[0] (line 9): the control 'incme' is not a node of the graph (did you "
        "mean 'income'?); add it to [graph].edges or fix the name"),
        ("[sensitivity].benchmarks[0] (line 11): the benchmark 'Income' is not a node of the "
        "graph (did you mean 'income'?); add it to [graph].edges or fix the name"),
    ]


def test_error_controls():
    assert only(HEAD + '[controls]\nused = "income"\n') == (
        "[controls].used (line 7): must be a list of variable names in double quotes, such as "
        "[\"income\", \"region\"]; got 'income'")
    assert only(HEAD + '[controls]\nused = ["income", "income"]\n') == (
        "[controls].used[1] (line 7): names 'income' twice; list each variable once")
    assert only(HEAD + '[controls]\nused = ["x"]\n') == (
        "[controls].used[0] (line 7): 'x' is the treatment; it cannot also be a control")
    assert only(HEAD + "[controls]\n") == (
        "[controls].used (line 6): is missing; list the controls the report adjusted for, e.g. "
        "used = [\"income\"] (or used = [] for none)")


def test_error_data_table():
    found = problems(HEAD + '[data]\nengine = "fast"\nbatch_rows = 10\n')
    assert found == [
        "[data].path (line 6): is missing; give the data file, e.g. path = \"data.csv\"",
        "[data].engine (line 7): must be one of 'auto', 'pandas', 'stream', 'dask'; got 'fast'",
        "[data].batch_rows (line 8): must be a whole number of rows of at least 1000; got 10",
    ]


def test_error_plan_and_sensitivity_values():
    found = problems(HEAD + "[plan]\nn = 2\nseed = -1\n[sensitivity]\nmultipliers = [0, 2]\n")
    assert "[plan].n (line 7): must be a planned sample size of at least 3; got 2" in found
    assert "[plan].seed (line 8): must be a whole number 0 or more; got -1" in found
    assert ("[sensitivity].multipliers (line 10): must be a list of positive numbers such as "
            "[1, 2, 3]; got [0, 2]") in found


def test_error_levels_need_categorical():
    assert only(HEAD + '[variables]\nincome = { levels = ["a", "b"] }\n') == (
        "[variables].income.levels (line 7): is only allowed with kind = \"categorical\"; add "
        "kind = \"categorical\" or remove levels")


def test_error_missing_graph():
    assert only('[study]\ntreatment = "x"\noutcome = "y"\n') == (
        "[graph]: is missing; a study needs [graph] edges = [\"a -> b\", ...] (or, to vet a "
        "published table only, a [reported] table)")


def test_error_empty_file():
    assert only("  \n\n") == (
        "file: is empty; a study file needs at least a [study] table with treatment and outcome "
        "and a [graph] table with edges, or a [reported] table")


def test_error_toml_syntax_with_line():
    # a bug fixed here: on Python < 3.14 the line was only inside the message, not in `line`
    assert only('[study]\ntreatment = "x"\noutcome = y\n') == (
        "TOML syntax (line 3): Invalid value (at line 3, column 11); fix the TOML syntax there "
        "(strings need double quotes, tables are written [name], lists [a, b])")


def test_error_binary_file(tmp_path):
    path = tmp_path / "study.toml"
    path.write_bytes(b"PK\x03\x04\x00\x00binary")
    with pytest.raises(StudyFileError) as info:
        load_study(path)
    assert str(info.value) == (f"study file {str(path)!r} has 1 problem:\n  - file: is a binary "
                               "file, not a TOML study file; pass the .toml file")


def test_error_not_utf8(tmp_path):
    path = tmp_path / "study.toml"
    path.write_bytes('[study]\ntitle = "Caf\u00e9"\n'.encode("latin-1"))   # é at byte 20
    with pytest.raises(StudyFileError, match=r"is not UTF-8 text \(bad byte at offset 20\); "
                                             r"save it as UTF-8"):
        load_study(path)


def test_error_missing_file_and_folder(tmp_path):
    with pytest.raises(StudyFileError, match=r"file: does not exist; check the path"):
        load_study(tmp_path / "nope.toml")
    with pytest.raises(StudyFileError, match=r"file: is a folder, not a study file"):
        load_study(tmp_path)


def test_study_file_path_is_in_the_message(tmp_path):
    path = Path(tmp_path) / "mine.toml"
    path.write_text('[study]\ntreatment = "x"\n', encoding="utf-8")
    with pytest.raises(StudyFileError) as info:
        load_study(path)
    assert str(info.value).startswith(f"study file {str(path)!r} has 1 problem:")

"""The ``causalcheck plan`` command as a user runs it: output formats, --out, errors."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest

from causalcheck.cli import main

GRANTS = """
[study]
title = "Heat-pump grants and winter energy bills"
treatment = "grant"
outcome = "bill_change"

[variables]
income     = { label = "Household income", cost = 0 }
attitude   = { measured = false, label = "Environmental attitude", cost = 40 }
floor_area = { measured = false, label = "Floor area", cost = 8 }
tenure     = { measured = false, label = "Owner or tenant", cost = 2 }

[graph]
edges = ["income -> grant", "income -> bill_change", "attitude -> grant",
         "attitude -> bill_change", "grant -> thermostat", "thermostat -> bill_change",
         "grant -> bill_change", "floor_area -> bill_change", "tenure -> grant",
         "tenure -> attitude"]

[strengths]
"income -> grant" = 0.3
"income -> bill_change" = 0.2
"attitude -> grant" = [0.2, 0.5]
"attitude -> bill_change" = [0.1, 0.35]
"grant -> bill_change" = -0.2
"grant -> thermostat" = 0.4
"thermostat -> bill_change" = -0.1
"floor_area -> bill_change" = 0.5
"tenure -> grant" = 0.3

[plan]
n = 2000
budget = 50
"""


def write(tmp_path: Path, text: str, name: str = "grants.toml") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(["plan", *argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_json_contract(tmp_path, capsys):
    code, out, err = run(capsys, str(write(tmp_path, GRANTS)), "--format", "json")
    assert code == 0, err
    document = json.loads(out)
    assert document["schema"] == "causalcheck/plan/1"
    assert document["n"] == 2000
    # true effect: grant -> bill_change plus grant -> thermostat -> bill_change (Wright 1934)
    assert document["true_effect"] == pytest.approx(-0.2 + 0.4 * -0.1, abs=1e-12)
    for option in document["options"]:
        for key in ("measure", "adjust_for", "cost", "bias", "std_error", "rmse", "valid",
                    "pareto", "over_range", "power"):
            assert key in option
        assert option["rmse"] == pytest.approx(math.hypot(option["bias"],
                                                          option["std_error"]))
    assert document["recommended"] in document["options"]
    assert document["recommended"]["measure"] == ["attitude", "floor_area"]
    assert document["recommended"]["cost"] == 48
    assert document["baseline"]["measure"] == [] and not document["baseline"]["valid"]
    assert document["strengths"]["defaulted"] == ["tenure -> attitude"]
    assert document["range_sweep"]["requested"] == 64
    assert document["simulation"] is None
    # the graph and the roles, for the report layer
    assert ["income", "grant"] in document["edges"]
    assert document["variables"]["attitude"] == {
        "role": "confounder", "roles": ["confounder"], "measured": False, "cost": 40.0}
    assert document["variables"]["thermostat"]["role"] == "mediator"
    assert document["study"]["title"] == "Heat-pump grants and winter energy bills"


def test_text_verdict_first_then_table(tmp_path, capsys):
    code, out, _ = run(capsys, str(write(tmp_path, GRANTS)))
    assert code == 0
    blocks = out.split("\n\n")
    assert blocks[0].startswith("causalcheck plan: Heat-pump grants and winter energy bills\n")
    verdict = " ".join(blocks[1].split())       # wrapped at 96 characters
    # the verdict names variables by their labels (causalcheck.report.verdict)
    assert verdict.startswith("Measure Environmental attitude and Floor area (cost 48, within "
                              "the budget of 50) and adjust for Environmental attitude, Floor "
                              "area and Household income")
    assert ("If you measure nothing more, the best you can do is adjust for Household income"
            in verdict)
    assert "1 edge had no strength and was given the default 0.2." in verdict
    table = blocks[2].splitlines()
    assert table[0].startswith("Options (* recommended")
    header = next(line for line in table if "adjust for" in line)
    assert "measure" in header and "RMSE" in header and "worst RMSE" in header
    # the table's rows are aligned: every row as wide as the header or narrower
    assert any(line.lstrip().startswith("*P") for line in table[2:])
    assert "tenure -> attitude: 0.2 (default: not in [strengths])" in out


def test_quiet_prints_the_verdict_only(tmp_path, capsys):
    code, out, _ = run(capsys, str(write(tmp_path, GRANTS)), "--quiet")
    assert code == 0
    assert out.count("\n") == 1 and out.startswith("Measure Environmental attitude and Floor area")


def test_simulation_in_json_and_seeded(tmp_path, capsys):
    path = str(write(tmp_path, GRANTS))
    _, first, err = run(capsys, path, "--format", "json", "--simulate", "300", "--seed", "7")
    _, second, _ = run(capsys, path, "--format", "json", "--simulate", "300", "--seed", "7")
    assert err == ""                      # no progress bar when stderr is not a terminal
    one, two = json.loads(first), json.loads(second)
    assert one["simulation"]["replications"] == 300 and one["simulation"]["seed"] == 7
    assert one["seed"] == 7 and one["range_sweep"]["seed"] == 7
    strip = [{k: v for k, v in o.items()} for o in one["simulation"]["options"]]
    assert strip == two["simulation"]["options"]
    valid = [o for o in one["simulation"]["options"] if o["adjust_for"] ==
             one["recommended"]["adjust_for"]]
    assert valid and 0.85 < valid[0]["coverage"] <= 1.0


def test_out_folder_written_and_never_clobbered(tmp_path, capsys):
    path = write(tmp_path, GRANTS)
    folder = tmp_path / "plan-out"
    code, _, _ = run(capsys, str(path), "--out", str(folder), "--quiet")
    assert code == 0
    written = {p.name for p in folder.iterdir()}
    assert {"result.json", "report.md", "report.html", "plan.png"} <= written
    assert json.loads((folder / "result.json").read_text())["schema"] == "causalcheck/plan/1"
    assert (folder / "plan.png").read_bytes()[:4] == b"\x89PNG"
    # a folder the user owns is refused, and nothing in it is touched
    mine = tmp_path / "mine"
    mine.mkdir()
    (mine / "notes.txt").write_text("keep me")
    code, _, err = run(capsys, str(path), "--out", str(mine))
    assert code == 2
    assert "is not empty and was not written by causalcheck" in err
    assert {p.name for p in mine.iterdir()} == {"notes.txt"}


def test_measure_nothing_more_verdict(tmp_path, capsys):
    text = ('[study]\ntreatment = "t"\noutcome = "y"\n[graph]\nedges = ["c -> t", "c -> y", '
            '"t -> y"]\n[strengths]\n"c -> t" = 0.4\n"c -> y" = 0.3\n"t -> y" = 0.1\n'
            '[plan]\nn = 500\n')
    code, out, _ = run(capsys, str(write(tmp_path, text, "simple.toml")), "--quiet")
    assert code == 0
    # by hand (path tracing): r_ty = 0.1 + 0.4*0.3 = 0.22, r_cy = 0.3 + 0.4*0.1 = 0.34,
    # R^2 = 0.1*0.22 + 0.3*0.34 = 0.124, SE = sqrt(0.876 / (497 * 0.84)) = 0.0458;
    # power ~ Phi(0.1/0.0458 - 1.965) = Phi(0.218) = 0.59 (normal approximation)
    assert out == ("Measure nothing more: adjusting for c, already measured, estimates the "
                   "effect of t on y without bias; at n = 500 its standard error is 0.046 "
                   "(RMSE 0.046) and a 95% interval excludes zero in about 59% of studies.\n")


# --------------------------------------------------------------------------------------------
# Bad input: exit code 2, one clear paragraph, no traceback


def assert_refused(capsys, tmp_path, text: str, *expected: str) -> str:
    code, out, err = run(capsys, str(write(tmp_path, text, "bad.toml")))
    assert code == 2
    assert out == ""
    assert "Traceback" not in err
    assert err.startswith("causalcheck plan: error: ")
    for piece in expected:
        assert piece in err
    return err


def test_error_parents_explain_all_of_a_variable(tmp_path, capsys):
    # income, attitude and grant together explain more than all of bill_change
    text = GRANTS.replace('"income -> bill_change" = 0.2', '"income -> bill_change" = 0.8')
    text = text.replace('"attitude -> bill_change" = [0.1, 0.35]',
                        '"attitude -> bill_change" = [0.5, 0.7]')
    assert_refused(capsys, tmp_path, text, "bad.toml",
                   "the strengths into 'bill_change' are impossible",
                   "income -> bill_change = 0.8",
                   "attitude -> bill_change = 0.6 (midpoint of 0.5 to 0.7)",
                   "would explain 1.083 of its variance",
                   "Lower some of these strengths",
                   "a range is checked at its midpoint, so narrow or lower it")


def test_error_strength_above_one(tmp_path, capsys):
    text = GRANTS.replace('"tenure -> grant" = 0.3', '"tenure -> grant" = 1.3')
    assert_refused(capsys, tmp_path, text, '[strengths]."tenure -> grant"',
                   "must lie strictly between -1 and 1; got 1.3")


def test_error_strength_for_missing_edge(tmp_path, capsys):
    text = GRANTS.replace('"tenure -> grant" = 0.3', '"tenure -> bill_change" = 0.3')
    assert_refused(capsys, tmp_path, text,
                   "the edge 'tenure -> bill_change' is not in [graph].edges")


def test_error_n_too_small(tmp_path, capsys):
    text = GRANTS.replace("n = 2000", "n = 7")
    assert_refused(capsys, tmp_path, text, "[plan].n", "n = 7 is too small for this graph",
                   "n must be at least 8")


def test_error_negative_cost(tmp_path, capsys):
    text = GRANTS.replace("cost = 40", "cost = -40")
    assert_refused(capsys, tmp_path, text, "[variables].attitude.cost",
                   "must be a cost of zero or more; got -40")


def test_error_negative_budget(tmp_path, capsys):
    text = GRANTS.replace("budget = 50", "budget = -5")
    assert_refused(capsys, tmp_path, text, "[plan].budget",
                   "must be a budget of zero or more; got -5")


def test_error_no_plan_n(tmp_path, capsys):
    text = GRANTS.replace("n = 2000\n", "")
    assert_refused(capsys, tmp_path, text, "[plan].n: is missing",
                   "planning needs the planned sample size")


def test_error_no_plan_table(tmp_path, capsys):
    text = GRANTS[:GRANTS.index("[plan]")]
    assert_refused(capsys, tmp_path, text, "[plan].n: is missing")


def test_error_simulate_needs_two_studies(tmp_path, capsys):
    with pytest.raises(SystemExit) as caught:
        main(["plan", str(write(tmp_path, GRANTS)), "--simulate", "1"])
    assert caught.value.code == 2
    assert "--simulate must be at least 2; got 1" in capsys.readouterr().err


def test_error_missing_study_file(tmp_path, capsys):
    code, _, err = run(capsys, str(tmp_path / "nowhere.toml"))
    assert code == 2 and "does not exist" in err and "Traceback" not in err

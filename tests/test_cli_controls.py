"""The ``causalcheck controls`` command, run through ``main([...])`` as a user would."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from causalcheck.cli import main

STUDY = """
[study]
title = "Heat-pump grants and winter energy bills"
treatment = "grant"
outcome = "bill_change"

[variables]
grant       = { label = "Heat-pump grant" }
income      = { label = "Household income", cost = 0 }
attitude    = { measured = false, label = "Environmental attitude", cost = 40 }
insulation  = { label = "Insulation survey", cost = 15 }
thermostat  = { label = "Thermostat setting" }
house_age   = { label = "Age of house", cost = 5 }

[graph]
edges = ["income -> grant", "income -> bill_change", "attitude -> grant",
         "attitude -> insulation", "insulation -> bill_change",
         "region -> grant", "region -> house_age", "house_age -> bill_change",
         "grant -> thermostat", "thermostat -> bill_change", "grant -> bill_change"]

[controls]
used = {used}
"""


def write(tmp_path: Path, text: str, name: str = "study.toml") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def study_file(tmp_path: Path, used: str = '["income", "thermostat"]') -> Path:
    return write(tmp_path, STUDY.replace("{used}", used))


def run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(["controls", *map(str, argv)])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def test_text_report_starts_with_the_verdict(tmp_path, capsys):
    code, out, err = run(capsys, study_file(tmp_path))
    assert code == 0 and err == ""
    lines = out.splitlines()
    assert lines[0] == "causalcheck controls: Heat-pump grants and winter energy bills"
    assert lines[3] == "Verdict"
    verdict = " ".join(out.split("\nVariables\n")[0].split())     # undo the line wrapping
    assert "are not a valid adjustment set" in verdict
    assert "Thermostat setting is a mediator" in verdict
    assert "adjusting for Age of house would block it" in verdict
    assert "Use the optimal set {house_age, income, insulation}" in verdict
    assert "The cheapest valid set is {income, insulation, region} (cost 15)" in verdict
    # the tables
    assert "  thermostat   yes       yes      mediator" in out
    assert "grant <- attitude -> insulation -> bill_change  open        open" in out
    assert "{income, insulation, region}     15    cheapest" in out


def test_quiet_prints_only_the_verdict(tmp_path, capsys):
    code, out, _ = run(capsys, study_file(tmp_path), "--quiet")
    assert code == 0
    # only the verdict paragraph (causalcheck.report.verdict), on one line
    assert "not a valid adjustment set" in out and out.count("\n") == 1
    assert "Variables" not in out and "Non-causal paths" not in out


def test_valid_controls(tmp_path, capsys):
    code, out, _ = run(capsys, study_file(tmp_path, '["income", "insulation", "region"]'),
                       "--fail-if-invalid")
    assert code == 0
    assert ("The declared controls (Household income, Insulation survey and region) are a "
            "valid adjustment set") in " ".join(out.split())


def test_json_contract(tmp_path, capsys):
    code, out, _ = run(capsys, study_file(tmp_path), "--format", "json")
    assert code == 0
    document = json.loads(out)
    for key in ("schema", "treatment", "outcome", "identifiable", "adjustment_sets",
                "controls", "variables", "biasing_paths"):
        assert key in document
    assert document["schema"] == "causalcheck/controls/1"
    assert document["treatment"] == "grant" and document["outcome"] == "bill_change"
    assert document["identifiable"] is True
    sets = document["adjustment_sets"]
    assert sets["minimal"] == sorted(sets["minimal"])
    assert all(s == sorted(s) for s in sets["minimal"])
    assert sets["minimal"] == [["house_age", "income", "insulation"],
                               ["income", "insulation", "region"]]
    assert sets["optimal"] == ["house_age", "income", "insulation"]
    assert sets["cheapest"] == {"set": ["income", "insulation", "region"], "cost": 15.0}
    controls = document["controls"]
    assert controls["used"] == ["income", "thermostat"] and controls["valid"] is False
    assert [(p["variable"], p["kind"]) for p in controls["problems"]] == [
        ("thermostat", "mediator"), ("house_age", "path_left_open"),
        ("insulation", "path_left_open")]
    assert document["variables"]["attitude"] == {
        "role": "confounder", "measured": False, "roles": ["confounder"],
        "label": "Environmental attitude", "cost": 40.0}
    assert all(isinstance(p["open_given_controls"], bool) for p in document["biasing_paths"])


def test_fail_if_invalid_exits_1(tmp_path, capsys):
    code, out, err = run(capsys, study_file(tmp_path), "--fail-if-invalid", "--quiet")
    assert code == 1
    assert "gate failed: the declared controls {income, thermostat} are not a valid " \
           "adjustment set (mediator, path_left_open)" in err
    assert "not a valid adjustment set" in out


def test_error_fail_if_invalid_without_controls(tmp_path, capsys):
    text = STUDY.split("[controls]")[0]
    code, out, err = run(capsys, write(tmp_path, text), "--fail-if-invalid")
    assert code == 2 and out == ""
    assert "has no [controls] table" in err and "Traceback" not in err


def test_out_writes_json_and_markdown(tmp_path, capsys):
    folder = tmp_path / "report"
    code, out, _ = run(capsys, study_file(tmp_path), "--out", folder)
    assert code == 0 and "Verdict" in out
    document = json.loads((folder / "result.json").read_text(encoding="utf-8"))
    assert document["schema"] == "causalcheck/controls/1"
    markdown = (folder / "report.md").read_text(encoding="utf-8")
    assert markdown.startswith("# Controls check: Heat-pump grants and winter energy bills")
    assert "| thermostat | yes | yes | mediator | Thermostat setting |" in markdown
    # a folder causalcheck wrote may be written again
    code, _, _ = run(capsys, study_file(tmp_path), "--out", folder)
    assert code == 0


def test_error_out_refuses_a_foreign_folder(tmp_path, capsys):
    folder = tmp_path / "mine"
    folder.mkdir()
    (folder / "notes.txt").write_text("keep me")
    code, out, err = run(capsys, study_file(tmp_path), "--out", folder)
    assert code == 2 and out == ""
    assert "is not empty and was not written by causalcheck" in err
    assert (folder / "notes.txt").read_text() == "keep me"
    assert not (folder / "result.json").exists()


@pytest.mark.parametrize("text, expected", [
    ("[study\ntreatment = 'x'\n", "TOML syntax"),
    ("[study]\ntreatment = \"x\"\noutcome = \"y\"\n[graph]\nedges = [\"x -> y\", \"y -> x\"]\n",
     "contain a cycle: x -> y -> x"),
    ("[study]\ntreatment = \"x\"\noutcome = \"y\"\n[graph]\nedges = [\"x -> y\", \"a - > b\"]\n",
     "[graph].edges[1] (line 5): 'a - > b' is not an edge"),
    ("[study]\ntreatment = \"x\"\noutcme = \"y\"\n[graph]\nedges = [\"x -> y\"]\n",
     "(did you mean 'outcome'?)"),
    (("[study]\ntreatment = \"x\"\noutcome = \"y\"\n[graph]\nedges = [\"x -> y\"]\n"
     "[controls]\nused = [\"z\"]\n"), "the control 'z' is not a node of the graph"),
    ("[reported]\nestimate = 1.0\nstd_error = 0.2\ndof = 30\n", "has no [graph] table"),
])
def test_error_malformed_study_exits_2_without_traceback(tmp_path, capsys, text, expected):
    code, out, err = run(capsys, write(tmp_path, text))
    assert code == 2 and out == ""
    assert err.startswith("causalcheck controls: error: ")
    assert expected in err
    assert "Traceback" not in err


def test_error_missing_and_binary_files(tmp_path, capsys):
    code, _, err = run(capsys, tmp_path / "nope.toml")
    assert code == 2 and "does not exist" in err
    binary = tmp_path / "data.toml"
    binary.write_bytes(b"\x00\x01\x02")
    code, _, err = run(capsys, binary)
    assert code == 2 and "is a binary file, not a TOML study file" in err

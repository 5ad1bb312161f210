"""Tests of causalcheck.vet (the result object, its JSON document, the CSV grid) and of the
text rendering in causalcheck.commands.vet."""

from __future__ import annotations

import csv
import json
import math

import numpy as np
import pytest

from causalcheck.commands.vet import render_markdown, render_text, verdict, write_figure
from causalcheck.errors import OutputError, ReportedError
from causalcheck.report.jsonout import dumps
from causalcheck.sensitivity import bias_sweep, bounds, robustness_values
from causalcheck.study import Reported, parse_study
from causalcheck.vet import SCHEMA, sweep_to_csv, vet

# Darfur, Cinelli & Hazlett (2020), Sec. 5 (from memory): estimate 0.0973, SE 0.0233, 783 dof,
# RV 13.88%, RV_{α=0.05} 7.63%, R²_{Y~D|X} 2.19%.
DARFUR = Reported(estimate=0.09731582, std_error=0.02325654, dof=783)

CONTRACT_KEYS = {"schema", "estimate", "std_error", "t", "dof", "partial_r2", "robustness_value",
                 "robustness_value_ci", "e_value"}


def test_darfur_document_follows_the_contract():
    document = json.loads(dumps(vet(DARFUR).to_dict()))
    assert CONTRACT_KEYS <= set(document)
    assert document["schema"] == SCHEMA == "causalcheck/vet/1"
    assert 100 * document["partial_r2"] == pytest.approx(2.19, abs=0.005)
    assert 100 * document["robustness_value"] == pytest.approx(13.88, abs=0.005)
    assert 100 * document["robustness_value_ci"] == pytest.approx(7.63, abs=0.005)
    assert document["e_value"] is None
    assert document["threshold"] == 0.0 and document["alpha"] == 0.05
    assert document["se_source"] == "std_error"
    assert document["extreme_case"]["r2dz_to_threshold"] == pytest.approx(
        document["partial_r2"], rel=1e-12)
    # the small sweep: equal strengths, adjusted numbers from the bias formulas
    row = document["bounds"][3]
    expected = bounds(0.09731582, 0.02325654, 783, row["r2dz"], row["r2yz"])
    assert row["adjusted_estimate"] == pytest.approx(float(expected.adjusted_estimate))
    assert any("no E-value" in n for n in document["notes"])


def test_ratio_measure_gives_e_value_and_no_robustness_values():
    # VanderWeele & Ding (2017) example RR 3.9 (1.8 to 8.7) (from memory): E-values 7.26 and 3.0.
    result = vet(Reported(estimate=3.9, ci=(1.8, 8.7), measure="risk_ratio"))
    document = result.to_dict()
    assert document["robustness_value"] is None and document["partial_r2"] is None
    assert document["e_value"]["point"] == pytest.approx(7.26, abs=0.005)
    assert document["e_value"]["ci"] == pytest.approx(3.0, abs=0.005)
    assert document["estimate"] == 3.9 and document["scale"] == "log"
    assert document["threshold"] == 1.0
    assert any("E-value is the sensitivity measure" in n for n in document["notes"])


def test_odds_ratio_rare_outcome_is_noted():
    result = vet(Reported(estimate=1.8, ci=(1.2, 2.7), measure="odds_ratio"))
    assert any("assumes the outcome is rare" in n for n in result.notes)
    common = vet(Reported(estimate=1.8, ci=(1.2, 2.7), measure="odds_ratio",
                          outcome_common=True))
    assert common.e_value.risk_ratio == pytest.approx(math.sqrt(1.8))


def test_difference_with_outcome_sd_gives_both():
    result = vet(Reported(estimate=0.0973, std_error=0.0232, dof=783, outcome_sd=0.5))
    assert result.robustness is not None and result.e_value is not None
    assert result.e_value.risk_ratio == pytest.approx(math.exp(0.91 * 0.0973 / 0.5))


def test_threshold_from_study_and_overrides():
    study = parse_study("""
[study]
alpha = 0.1
[reported]
estimate = 0.5
std_error = 0.1
dof = 200
[sensitivity]
threshold = 0.2
""")
    result = vet(study)
    expected = robustness_values(0.5, 0.1, 200, threshold=0.2, alpha=0.1)
    assert result.robustness.point == expected.point
    assert result.robustness.ci == expected.ci
    assert vet(study, threshold=0.0).robustness.point == robustness_values(0.5, 0.1, 200).point


def test_verdict_paragraph_in_plain_words():
    text = verdict(vet(DARFUR))
    assert ("A hidden confounder explaining 13.9% of the remaining variance of both the treatment "
            "and the outcome") in text
    # shown as every share in a report: at most one decimal (13.88%, 7.63% and 2.19% above)
    assert "would bring the estimate to the threshold, 0; one explaining 7.6% of both would " \
           "make the 95% confidence interval include 0" in text
    assert "at least 2.2% of the treatment's" in text


def test_verdict_when_the_interval_already_includes_the_threshold():
    text = verdict(vet(Reported(estimate=0.1, std_error=0.08, dof=300)))
    assert "The 95% confidence interval already includes 0, so no hidden confounding is " \
           "needed" in text


def test_verdict_for_a_ratio():
    text = verdict(vet(Reported(estimate=3.9, ci=(1.8, 8.7), measure="risk_ratio")))
    assert "by a risk ratio of 7.26 each" in text
    assert "one of 3.00 each could move the confidence interval to include 1" in text


def test_text_report_puts_the_verdict_first_then_tables():
    text = render_text(vet(DARFUR))
    heading, first = text.split("\n\n")[:2]
    assert heading == "causalcheck vet"        # the first line of every command's report
    assert first.startswith("The reported estimate is 0.0973")
    for heading in ("Reported numbers", "Robustness (Cinelli & Hazlett 2020)",
                    "Hypothetical confounders", "Extreme case"):
        assert heading in text
    assert "13.9%" in text and "7.6%" in text
    quiet = render_text(vet(DARFUR), quiet=True)
    assert "Reported numbers" not in quiet
    assert render_markdown(vet(DARFUR)).startswith("# Vetting a reported estimate\n\nThe reported")


def test_grid_and_csv_round_trip(tmp_path):
    result = vet(DARFUR)
    grid = result.grid(11)
    path = sweep_to_csv(grid, tmp_path / "grid.csv")
    with open(path, newline="") as handle:
        rows = list(csv.DictReader(handle))
    assert len(rows) == 121
    assert rows[0]["r2dz"] == "0.0" and float(rows[0]["adjusted_estimate"]) == 0.09731582
    last = rows[-1]
    check = bounds(0.09731582, 0.02325654, 783, float(last["r2dz"]), float(last["r2yz"]))
    assert float(last["ci_high"]) == float(check.ci_high)


def test_bias_sweep_to_csv(tmp_path):
    sweep = bias_sweep(2.0, [0, 1, 2], [0.5, 1.0])
    path = sweep_to_csv(sweep, tmp_path / "sweep.csv")
    lines = path.read_text().splitlines()
    assert lines[0] == "gamma,delta,adjusted_estimate"
    assert lines[-1] == "2.0,1.0,0.0"


def test_figure_is_written(tmp_path):
    path = write_figure(vet(DARFUR), tmp_path / "f.png", points=41)
    assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert write_figure(vet(Reported(estimate=2.0, ci=(1.2, 3.3), measure="risk_ratio")),
                        tmp_path / "g.png") is None


# --------------------------------------------------------------------------------------------
# Bad input


def test_error_grid_csv_never_overwrites(tmp_path):
    target = tmp_path / "mine.csv"
    target.write_text("precious\n")
    grid = vet(DARFUR).grid(5)
    with pytest.raises(OutputError, match=r"already exists; nothing was written\. Choose a new "
                                          r"file name, or pass --force"):
        sweep_to_csv(grid, target)
    assert target.read_text() == "precious\n"
    sweep_to_csv(grid, target, force=True)
    assert target.read_text().startswith("r2dz,r2yz")


def test_error_grid_csv_folder_and_missing_parent(tmp_path):
    grid = vet(DARFUR).grid(5)
    with pytest.raises(OutputError, match=r"is a folder; give a file name"):
        sweep_to_csv(grid, tmp_path)
    with pytest.raises(OutputError, match=r"the folder .* does not exist"):
        sweep_to_csv(grid, tmp_path / "no" / "grid.csv")


def test_error_nothing_to_compute():
    with pytest.raises(ReportedError, match=r"nothing can be computed from these numbers: the "
                                            r"robustness values need the residual degrees of "
                                            r"freedom"):
        vet(Reported(estimate=0.5, std_error=0.1))


def test_error_study_without_reported_table():
    study = parse_study('[study]\ntreatment = "x"\noutcome = "y"\n[graph]\nedges = ["x -> y"]\n')
    with pytest.raises(ReportedError, match=r"has no \[reported\] table; add one"):
        vet(study)


def test_error_negative_threshold_for_a_ratio():
    with pytest.raises(ReportedError, match=r"threshold = -1\.0 cannot be a risk ratio"):
        vet(Reported(estimate=2.0, ci=(1.2, 3.3), measure="risk_ratio"), threshold=-1.0)


def test_error_bad_alpha():
    with pytest.raises(ReportedError, match=r"alpha must be a number strictly between 0 and 1.*"
                                            r"got 1\.5"):
        vet(DARFUR, alpha=1.5)


def test_error_grid_for_a_ratio():
    with pytest.raises(ReportedError, match=r"a partial-R² grid needs the residual degrees"):
        vet(Reported(estimate=2.0, ci=(1.2, 3.3), measure="risk_ratio")).grid(5)


def test_no_nan_reaches_json():
    # a tiny dof still gives finite numbers; infeasible values become null with a note
    document = json.loads(dumps(vet(Reported(estimate=5.0, std_error=0.1, dof=3)).to_dict()))
    assert document["robustness_value"] > 0
    assert all(isinstance(r["adjusted_estimate"], float) for r in document["bounds"])
    assert np.isfinite(document["robustness_value_ci"])

"""Numerical care: degenerate-but-legal input gives a warning and a note, never a crash or NaN.

- Legal numbers whose result is undefined or infinite (an estimate on its threshold, an
  interval of infinite width at a tiny dof, too few residual degrees of freedom for the bounds)
  give a :class:`~causalcheck.errors.DegenerateWarning` (one ``warning:`` line on stderr from
  the command line) and the same words in the report's notes.
- Numbers at the edge of double precision either compute correctly or are refused with a
  ``CausalCheckError`` naming them, never an ``OverflowError`` or a numpy RuntimeWarning.
- No JSON the tool writes holds NaN or infinity: every document is parsed with a strict parser
  (``parse_constant`` raising), for the scenarios, the degenerate cases and the ``--out``
  folders.
"""

from __future__ import annotations

import json
import math
import shutil
import warnings
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import stats

from causalcheck import sensitivity
from causalcheck.cli import main
from causalcheck.errors import CausalCheckError, DegenerateWarning
from causalcheck.report.jsonout import dumps
from causalcheck.study import Reported
from causalcheck.vet import vet

ROOT = Path(__file__).resolve().parents[1]
SCENARIOS = ROOT / "scenarios"


def strict_json(text: str) -> dict:
    """Parse JSON, refusing NaN, Infinity and -Infinity (which ``json.loads`` accepts)."""
    def refuse(constant: str):
        raise ValueError(f"non-finite number {constant} in the JSON output")
    return json.loads(text, parse_constant=refuse)


def run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def warning_lines(err: str, command: str) -> list[str]:
    return [line for line in err.splitlines() if line.startswith(f"causalcheck {command}: "
                                                                 "warning: ")]


# --------------------------------------------------------------------------------------------
# vet: degenerate reported tables


def test_estimate_on_the_threshold_warns_and_notes(capsys):
    """t = 0: the robustness values are 0 by definition and the bias direction is undefined."""
    code, out, err = run(capsys, "vet", "--estimate", "0", "--se", "1", "--dof", "50",
                         "--format", "json")
    assert code == 0
    document = strict_json(out)
    assert document["robustness_value"] == 0.0 and document["robustness_value_ci"] == 0.0
    assert document["t"] == 0.0
    lines = warning_lines(err, "vet")
    assert len(lines) == 1 and "the estimate equals the threshold" in lines[0]
    assert any("direction in which a hidden confounder would move it is undefined" in n
               for n in document["notes"])


def test_estimate_on_a_nonzero_threshold_is_also_degenerate():
    with pytest.warns(DegenerateWarning, match="equals the threshold"):
        result = vet(Reported(estimate=0.3, std_error=0.1, dof=40), threshold=0.3)
    assert result.robustness.point == 0.0


def test_interval_of_infinite_width_at_a_tiny_dof(capsys):
    """dof = 1e-5: the 95% t quantile passes the double range; the CI is null, not inf."""
    code, out, err = run(capsys, "vet", "--estimate", "1", "--se", "1", "--dof", "1e-5",
                         "--outcome-sd", "2", "--format", "json")
    assert code == 0
    document = strict_json(out)
    assert document["ci_low"] is None and document["ci_high"] is None
    assert document["robustness_value"] is None          # dof <= 1: no partial-R² bounds
    assert document["e_value"]["ci"] == 1.0               # an infinite CI includes the null
    lines = warning_lines(err, "vet")
    assert any("t quantile is infinite" in line for line in lines)
    assert any("too few for the partial-R² bounds" in line for line in lines)
    assert any("no finite limits" in n for n in document["notes"])


def test_adjusted_intervals_of_infinite_width_just_above_one_dof(capsys):
    """dof = 1 + 1e-7: the bounds' intervals use dof - 1 = 1e-7, whose quantile is infinite."""
    code, out, err = run(capsys, "vet", "--estimate", "1", "--se", "1", "--dof", "1.0000001",
                         "--format", "json")
    assert code == 0
    document = strict_json(out)
    assert document["robustness_value"] == pytest.approx(0.6180339887, rel=1e-6)
    # RV at f = 1/sqrt(dof) ~ 1: (sqrt(5) - 1)/2, the golden-ratio conjugate (from the formula)
    assert document["robustness_value_ci"] == 0.0
    assert all(row["ci_low"] is None and row["ci_high"] is None for row in document["bounds"])
    assert warning_lines(err, "vet") and "1.0000001 residual degrees" in err


def test_too_few_dof_gives_null_robustness_values(capsys):
    code, out, err = run(capsys, "vet", "--estimate", "1", "--se", "0.5", "--dof", "1",
                         "--outcome-sd", "3", "--format", "json")
    assert code == 0
    document = strict_json(out)
    assert document["robustness_value"] is None and document["partial_r2"] is None
    assert document["e_value"]["point"] > 1
    assert "too few for the partial-R² bounds" in err


def test_text_report_of_a_degenerate_table_shows_the_note(capsys):
    code, out, _ = run(capsys, "vet", "--estimate", "0", "--se", "1", "--dof", "50")
    assert code == 0
    notes = out.split("\nNotes\n", 1)[1]
    assert "the estimate equals the threshold" in " ".join(notes.split())
    assert "nan" not in out.lower().replace("nant", "") and "inf " not in out


def test_critical_t_is_infinite_where_scipy_gives_a_wrong_finite_quantile():
    # scipy's t quantile at dof = 0.001 is a finite number whose tail area is not alpha
    # (scipy.stats on this machine); the true quantile exceeds the double range.
    wrong = stats.t.ppf(0.975, 0.001)
    assert math.isfinite(wrong) and abs(2 * stats.t.sf(wrong, 0.001) - 0.05) > 0.1
    assert sensitivity.critical_t(0.05, 0.001) == math.inf
    # where scipy is right the value is kept: dof = 1 is the Cauchy distribution, whose
    # quantile is tan(pi (p - 1/2)) (closed form, from memory): 12.706204736 at p = 0.975
    assert sensitivity.critical_t(0.05, 1.0) == pytest.approx(math.tan(math.pi * 0.475),
                                                              rel=1e-12)
    assert sensitivity.critical_t(0.05, 0.01) == pytest.approx(stats.t.ppf(0.975, 0.01))


@pytest.mark.parametrize("scale", [1e-200, 1e-100, 1e-8, 1.0, 1e8, 1e100, 1e200])
def test_robustness_values_do_not_depend_on_units(scale):
    """Rescaling the outcome (estimate and SE together) changes no robustness value, even at
    scales where se² or f² would under- or overflow a naive formula."""
    base = sensitivity.robustness_values(0.0973, 0.0232, 783)
    scaled = sensitivity.robustness_values(0.0973 * scale, 0.0232 * scale, 783)
    for key in ("point", "ci", "partial_r2", "extreme_r2dz"):
        assert getattr(scaled, key) == pytest.approx(getattr(base, key), rel=1e-12)
    extreme = sensitivity.extreme_bound(0.0973 * scale, 0.0232 * scale, 783)
    assert extreme.r2dz_to_threshold == pytest.approx(base.extreme_r2dz, rel=1e-12)


def test_error_numbers_past_double_precision_are_refused_by_name():
    with pytest.raises(CausalCheckError, match=r"std_error × √dof = 3.16e-300"):
        sensitivity.robustness_values(1.0, 1e-300, 10)
    with pytest.raises(CausalCheckError, match="standard errors .* from the threshold"):
        sensitivity.robustness_values(1.0, 1e-100, 10, threshold=1e100)
    with pytest.raises(CausalCheckError, match="too large for RR = exp"):
        sensitivity.e_value(1000.0, measure="difference", outcome_sd=1.0)


def test_error_vet_cli_names_the_impossible_precision(capsys):
    code, out, err = run(capsys, "vet", "--estimate", "1", "--se", "1e-300", "--dof", "10")
    assert code == 2 and out == "" and "Traceback" not in err
    assert "the reported numbers cannot be bounded" in err and "std_error × √dof" in err
    assert "express the outcome in other units" in err


def test_e_value_of_extreme_ratios_does_not_overflow():
    # E = RR + sqrt(RR (RR - 1)) ~ 2 RR for large RR (VanderWeele & Ding 2017 formula); RR^2
    # would overflow at 1e200, the factor-by-factor root does not
    value = sensitivity.risk_ratio_e_value(1e200)
    assert value == pytest.approx(2e200, rel=1e-12)
    assert sensitivity.risk_ratio_e_value(1e-200) == pytest.approx(2e200, rel=1e-12)
    assert sensitivity.smd_to_risk_ratio(1e4) == math.inf     # the limit, without a warning


# --------------------------------------------------------------------------------------------
# vet over random tables: only the tool's own errors, only its own warnings


finite = st.floats(allow_nan=False, allow_infinity=False, width=64)
positive = st.floats(min_value=1e-320, max_value=1e308, allow_nan=False, allow_infinity=False)
dofs = st.one_of(st.none(), st.floats(min_value=1e-300, max_value=1e300))


@st.composite
def reported_tables(draw) -> Reported:
    measure = draw(st.sampled_from(["difference", "risk_ratio", "odds_ratio",
                                    "hazard_ratio"]))
    estimate = draw(positive if measure != "difference" else finite)
    precision = draw(st.sampled_from(["std_error", "ci", "t", "p_value"]))
    fields: dict = {}
    if precision == "std_error":
        fields["std_error"] = draw(positive)
    elif precision == "ci":
        width = draw(positive)
        if measure == "difference":
            fields["ci"] = (estimate - width, estimate + width)
        else:
            fields["ci"] = (estimate / (1 + width), estimate * (1 + width))
    elif precision == "t":
        fields["t"] = draw(finite)
    else:
        fields["p_value"] = draw(st.floats(min_value=1e-300, max_value=1.0))
    return Reported(estimate=estimate, dof=draw(dofs), measure=measure,
                    outcome_sd=draw(st.one_of(st.none(), positive)),
                    outcome_common=draw(st.booleans()), **fields)


@settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(table=reported_tables(), threshold=st.one_of(st.none(), finite))
def test_vet_of_any_table_is_a_result_or_a_named_refusal(table, threshold):
    from causalcheck.commands.vet import render_markdown, render_text

    with warnings.catch_warnings():
        warnings.simplefilter("error")                  # any stray warning fails the test
        warnings.simplefilter("ignore", DegenerateWarning)
        try:
            result = vet(table, threshold=threshold)
        except CausalCheckError as error:
            assert str(error) and "Traceback" not in str(error)
            return
        document = strict_json(dumps(result.to_dict()))
        assert document["schema"] == "causalcheck/vet/1"
        render_text(result)
        render_markdown(result)
    rv = result.robustness
    if rv is not None:
        assert 0 <= rv.ci <= rv.point <= 1
        assert 0 <= rv.partial_r2 <= 1


# --------------------------------------------------------------------------------------------
# audit: degenerate data


def write_audit(folder: Path, rows: str, edges: str, *, extra: str = "") -> Path:
    (folder / "data.csv").write_text(rows, encoding="utf-8")
    study = folder / "study.toml"
    study.write_text(f'[study]\ntreatment = "x"\noutcome = "y"\n[data]\npath = "data.csv"\n'
                     f"[graph]\nedges = {edges}\n{extra}", encoding="utf-8")
    return study


def test_audit_with_one_residual_dof_notes_the_missing_robustness_values(tmp_path, capsys):
    rng = np.random.default_rng(1)
    z, v, w = rng.normal(size=(3, 6))
    x = z + v + rng.normal(size=6)
    y = x + z + v + w + rng.normal(size=6)
    rows = "x,y,z,v,w\n" + "".join(f"{a},{b},{c},{d},{e}\n" for a, b, c, d, e in
                                   zip(x, y, z, v, w))
    study = write_audit(tmp_path, rows, '["z -> x", "z -> y", "v -> x", "v -> y", "x -> y", '
                        '"w -> y"]', extra='[sensitivity]\nbenchmarks = ["z"]\n')
    code, out, err = run(capsys, "audit", study, "--format", "json")
    assert code == 0, err
    document = strict_json(out)
    assert document["estimates"]["adjusted"]["dof"] == 1
    assert document["sensitivity"]["robustness_value"] is None
    notes = " ".join(document["notes"])
    assert "no robustness values" in notes and "1 residual degree of freedom" in notes
    assert "no benchmark bounds" in notes


def test_audit_near_collinearity_is_a_note_naming_columns_and_condition(tmp_path, capsys):
    rng = np.random.default_rng(2)
    n = 200
    z = rng.normal(size=n)
    v = 2 * z + 1e-5 * rng.normal(size=n)          # nearly a copy of z
    x = z + rng.normal(size=n)
    y = x + z + rng.normal(size=n)
    rows = "x,y,z,v\n" + "".join(",".join(repr(float(c)) for c in row) + "\n"
                                 for row in zip(x, y, z, v))
    study = write_audit(tmp_path, rows, '["z -> x", "z -> y", "v -> x", "v -> y", "x -> y"]')
    code, out, err = run(capsys, "audit", study, "--format", "json")
    assert code == 0, err
    document = strict_json(out)
    notes = " ".join(document["notes"])
    assert "nearly collinear" in notes and "condition number" in notes
    assert "v" in notes and "z" in notes
    # a fit outside the notes' reach (the decomposition) warns on stderr in the tool's own
    # words, one line, never as a raw Python warning with a file name and line number
    assert "Warning:" not in err and "decompose.py" not in err
    assert all(line.startswith("causalcheck audit: warning: ") for line in err.splitlines())


# --------------------------------------------------------------------------------------------
# no NaN or infinity in any JSON the tool writes


SCENARIO_RUNS = [
    ("controls", "water_rebate"), ("audit", "water_rebate"), ("vet", "reading_app_review"),
    ("plan", "cycling_plan"), ("controls", "cycling_plan"), ("controls", "reading_app_review"),
]


@pytest.mark.parametrize("command,scenario", SCENARIO_RUNS,
                         ids=[f"{c}-{s}" for c, s in SCENARIO_RUNS])
def test_scenario_json_is_strict(command, scenario, tmp_path, capsys):
    folder = tmp_path / scenario
    shutil.copytree(SCENARIOS / scenario, folder)
    code, out, err = run(capsys, command, folder / "study.toml", "--format", "json",
                         "--out", tmp_path / "out")
    assert code in (0, 1), err
    strict_json(out)
    for written in (tmp_path / "out").rglob("*.json"):
        strict_json(written.read_text(encoding="utf-8"))
    assert (tmp_path / "out" / "result.json").is_file()


@pytest.mark.parametrize("argv", [
    ["--estimate", "1", "--se", "1", "--dof", "1.0000001"],
    ["--estimate", "1", "--se", "1", "--dof", "1e-5", "--outcome-sd", "2"],
    ["--estimate", "2", "--se", "0.3", "--dof", "1e-5", "--measure", "risk_ratio"],
    ["--estimate", "0", "--se", "1", "--dof", "50"],
], ids=["dof-just-above-1", "dof-tiny-difference", "dof-tiny-ratio", "t-zero"])
def test_degenerate_reports_written_to_out_are_strict_json(argv, tmp_path, capsys):
    code, out, err = run(capsys, "vet", *argv, "--format", "json", "--out", tmp_path / "r")
    assert code == 0, err
    document = strict_json(out)
    saved = strict_json((tmp_path / "r" / "result.json").read_text(encoding="utf-8"))
    assert saved["schema"] == document["schema"] == "causalcheck/vet/1"
    assert any("not a finite number" in n or "equals the threshold" in n
               for n in saved["notes"])

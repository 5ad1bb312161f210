"""Generate the invented published table and report text of the reading-app scenario (seeded).

A school district's report claims that a reading-practice app raises reading scores. The reviewer
receives only Table 2 (an adjusted coefficient, its standard error, the sample size and the
number of controls) and the report's prose. This script simulates the cohort behind the table,
fits the report's regression and writes the coefficient into a table file, so the numbers in
``study.toml`` can be reproduced: ``python scenarios/reading_app_review/generate.py``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

SEED = 4242
ROWS = 842


def published_table(rows: int = ROWS, seed: int = SEED) -> dict[str, float]:
    rng = np.random.default_rng(seed)
    parent_reading = rng.normal(size=rows)          # not in the report's model
    school_quality = rng.normal(size=rows)
    grade = rng.integers(3, 7, size=rows).astype(float)
    girl = (rng.random(rows) < 0.5).astype(float)
    free_meals = (rng.random(rows) < 0.3 - 0.1 * school_quality.clip(-1, 1)).astype(float)
    class_size = rng.normal(26, 3, size=rows)
    app_minutes = (1.2 + 0.45 * parent_reading + 0.25 * school_quality
                   + rng.normal(scale=0.9, size=rows)).clip(0, None)
    reading_score = (60 + 0.5 * app_minutes + 1.6 * parent_reading + 2.0 * school_quality
                     + 1.1 * grade + 0.8 * girl - 1.5 * free_meals - 0.1 * class_size
                     + rng.normal(scale=15.0, size=rows))
    design = np.column_stack([np.ones(rows), app_minutes, school_quality, grade, girl,
                              free_meals, class_size])
    coef, *_ = np.linalg.lstsq(design, reading_score, rcond=None)
    residual = reading_score - design @ coef
    dof = rows - design.shape[1]
    sigma2 = residual @ residual / dof
    covariance = sigma2 * np.linalg.inv(design.T @ design)
    return {"estimate": float(coef[1]), "std_error": float(np.sqrt(covariance[1, 1])),
            "n": rows, "covariates": design.shape[1] - 2}


if __name__ == "__main__":
    table = published_table()
    target = Path(__file__).with_name("table2.txt")
    target.write_text("".join(f"{k} = {v:.4g}\n" for k, v in table.items()))
    print(f"wrote {target}:\n{target.read_text()}")

"""Simulate a pilot data set for the cycling-cohort scenario from its assumed strengths (seeded).

The researcher has no data yet; the study file states rough standardised path strengths. This
script draws a small pilot (``pilot.csv``) from the linear-Gaussian model those strengths imply,
taking the midpoint of each range, so that the planning output can be compared with what an
audit of such data would show. Run ``python scenarios/cycling_plan/generate.py``.
"""

from __future__ import annotations

import tomllib
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 77
ROWS = 400


def generate(rows: int = ROWS, seed: int = SEED) -> pd.DataFrame:
    study = tomllib.loads(Path(__file__).with_name("study.toml").read_text())
    strengths = {}
    for key, value in study["strengths"].items():
        cause, effect = (part.strip() for part in key.split("->"))
        strengths[(cause, effect)] = float(np.mean(value))
    order = ["distance", "age", "health_habits", "shift_work", "fitness", "job_strain",
             "cycling", "commute_stress", "sick_days"]
    rng = np.random.default_rng(seed)
    values: dict[str, np.ndarray] = {}
    for node in order:
        parents = {c: b for (c, e), b in strengths.items() if e == node}
        signal = sum((b * values[c] for c, b in parents.items()), np.zeros(rows))
        # unit variance: the error variance is one minus the variance the parents explain
        explained = float(np.var(signal)) if parents else 0.0
        values[node] = signal + rng.normal(scale=np.sqrt(max(1 - explained, 0.05)), size=rows)
    return pd.DataFrame(values).round(4)


if __name__ == "__main__":
    target = Path(__file__).with_name("pilot.csv")
    generate().to_csv(target, index=False)
    print(f"wrote {target}")

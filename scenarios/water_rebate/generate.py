"""Generate the household data of the water-rebate scenario (invented; seeded).

A regional water utility offered a rebate on water-efficient fixtures. An analyst has one row
per household: whether it took the rebate, the change in monthly water use over the following
year, and what the utility's records say about the household. Some of what drives both uptake
and water use (how much a household cares about conservation) is not recorded.

Run ``python scenarios/water_rebate/generate.py`` to rewrite ``households.csv`` beside this file.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20261201
ROWS = 6000


def generate(rows: int = ROWS, seed: int = SEED) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    region = rng.choice(["coast", "valley", "plateau", "city"], size=rows,
                        p=[0.25, 0.25, 0.2, 0.3])
    region_use = pd.Series(region).map({"coast": 0.0, "valley": 1.5, "plateau": 2.5,
                                        "city": -1.0}).to_numpy()
    region_uptake = pd.Series(region).map({"coast": 0.0, "valley": 0.3, "plateau": 0.5,
                                           "city": -0.2}).to_numpy()
    income = rng.lognormal(mean=3.8, sigma=0.45, size=rows)            # k per year
    household_size = rng.poisson(1.6, size=rows) + 1
    garden = (rng.random(rows) < 0.35 + 0.004 * (income - income.mean())).astype(int)
    tenure_years = rng.gamma(2.0, 4.0, size=rows)
    conservation_minded = rng.normal(size=rows)                          # not recorded
    leaflet = (rng.random(rows) < 0.5).astype(int)                       # random mail-out

    uptake_score = (-1.2 + 0.025 * (income - 45) + 0.25 * (household_size - 2.6)
                    + 0.6 * garden + region_uptake + 0.55 * conservation_minded
                    + 0.7 * leaflet)
    rebate = (rng.random(rows) < 1 / (1 + np.exp(-uptake_score))).astype(int)
    efficient_fixtures = rng.poisson(0.4 + 2.2 * rebate)
    # change in monthly water use, cubic metres: the rebate lowers use mostly via fixtures
    water_use_change = (1.0 + 0.04 * (income - 45) + 0.9 * (household_size - 2.6)
                        + 1.8 * garden + region_use - 0.9 * conservation_minded
                        - 0.15 * tenure_years - 0.6 * efficient_fixtures - 0.4 * rebate
                        + rng.normal(scale=2.0, size=rows))
    follow_up_score = -0.3 + 0.8 * rebate - 0.25 * water_use_change
    answered_survey = (rng.random(rows) < 1 / (1 + np.exp(-follow_up_score))).astype(int)
    frame = pd.DataFrame({
        "rebate": rebate,
        "water_use_change": water_use_change.round(3),
        "income": income.round(2),
        "household_size": household_size,
        "garden": garden,
        "region": region,
        "tenure_years": tenure_years.round(2),
        "leaflet": leaflet,
        "efficient_fixtures": efficient_fixtures,
        "answered_survey": answered_survey,
    })
    # a few households with no income on file, as real records have
    missing = rng.random(rows) < 0.01
    frame.loc[missing, "income"] = np.nan
    return frame


if __name__ == "__main__":
    target = Path(__file__).with_name("households.csv")
    generate().to_csv(target, index=False)
    print(f"wrote {target}")

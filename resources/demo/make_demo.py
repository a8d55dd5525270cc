"""Simulate the bundled demo diary: an invented person, "Robin", over six weeks.

Robin and every answer in the demo are invented. Nothing here was collected from a real
person: the diary is drawn from a dynamic factor model with known parameters (written to
demo_truth.json beside the data), so a fit of the demo can be compared with the truth.

Scenario: 42 days from Monday 2 March 2026, 6 prompts a day, about 20% of prompts missed
and about 2% of items skipped. Nine items on a 0-100 slider measure three states:
tension (tense, restless, worried), low mood (sad, flat, hopeless) and energy (lively,
focused, rested). The states follow a stationary lag-1 model with inertias 0.3-0.5 and
three cross-lagged effects: tension raises the next prompt's low mood, energy lowers it,
and tension lowers the next prompt's energy. Each day starts afresh from the stationary
distribution (nights are not bridged). Answers are rounded to whole slider points and kept
within 0-100 (demo_truth.json records how many values the bounds touched).

Run:  python resources/demo/make_demo.py   (deterministic: the seed is fixed)
"""

from __future__ import annotations

import json
from datetime import date
from pathlib import Path

import numpy as np
import pandas as pd

from lagwise.models.lyapunov import spectral_radius
from lagwise.models.lyapunov import stationary_covariance
from lagwise.models.simulate import simulate_diary
from lagwise.models.spec import ModelSpec, State

HERE = Path(__file__).resolve().parent
SEED = 20260304
START = date(2026, 3, 2)
DAYS, PROMPTS = 42, 6
P_MISSED, P_ITEM_SKIP = 0.20, 0.02

STATES = (
    State("tension", ("tense", "restless", "worried")),
    State("low mood", ("sad", "flat", "hopeless")),
    State("energy", ("lively", "focused", "rested")),
)
# Row = state at t, column = state at t-1.
LAGGED = np.array([
    [0.40, 0.00, 0.00],    # tension
    [0.20, 0.50, -0.15],   # low mood
    [-0.15, 0.00, 0.30],   # energy
])
INNOVATION_SD = np.array([8.0, 7.0, 8.5])
INNOVATION_CORR = np.array([
    [1.00, 0.30, -0.20],
    [0.30, 1.00, -0.35],
    [-0.20, -0.35, 1.00],
])
LOADINGS = np.array([  # marker items (first of each state) load 1
    [1.00, 0, 0], [0.85, 0, 0], [1.10, 0, 0],
    [0, 1.00, 0], [0, 0.90, 0], [0, 0.75, 0],
    [0, 0, 1.00], [0, 0, 0.80], [0, 0, 0.70],
])
INTERCEPTS = np.array([40.0, 35.0, 42.0, 36.0, 38.0, 30.0, 55.0, 58.0, 52.0])
UNIQUE = np.array([40.0, 55.0, 45.0, 35.0, 50.0, 45.0, 40.0, 60.0, 70.0])


def main() -> None:
    spec = ModelSpec(states=STATES, lags=1,
                     paths=(tuple(tuple(bool(v) for v in row) for row in LAGGED != 0),))
    innovation = INNOVATION_CORR * np.outer(INNOVATION_SD, INNOVATION_SD)
    diary = simulate_diary(spec, loadings=LOADINGS, intercepts=INTERCEPTS, unique=UNIQUE,
                           lagged=[LAGGED], innovation=innovation, days=DAYS,
                           prompts_per_day=PROMPTS, p_missed=P_MISSED, p_item_skip=P_ITEM_SKIP,
                           seed=SEED, start=START)
    raw = diary.values
    values = np.clip(np.round(raw), 0.0, 100.0)
    clipped = int(np.sum((raw < -0.5) | (raw > 100.5)))

    table = pd.DataFrame(values, columns=list(spec.items))
    table.insert(0, "prompt", diary.prompt.astype(int))
    table.insert(0, "day", [diary.day_labels[d] for d in diary.day])
    table.to_csv(HERE / "demo_diary.csv", index=False, na_rep="", float_format="%.0f")

    answered = diary.answered
    truth = {
        "note": "Invented person and simulated data: these are the parameters the demo was drawn from.",
        "seed": SEED, "days": DAYS, "prompts_per_day": PROMPTS,
        "p_missed": P_MISSED, "p_item_skip": P_ITEM_SKIP,
        "missed_prompts": int((~answered).sum()),
        "skipped_items": int(np.isnan(raw[answered]).sum()),
        "values_at_bounds": clipped,
        "spec": spec.to_json(),
        "items": list(spec.items), "states": list(spec.state_names),
        "loadings": LOADINGS.tolist(),
        "intercepts": INTERCEPTS.tolist(),
        "unique": UNIQUE.tolist(),
        "lagged": [LAGGED.tolist()],
        "innovation": innovation.tolist(),
        "latent_cov": stationary_covariance([LAGGED], innovation).tolist(),
        "spectral_radius": spectral_radius([LAGGED]),
    }
    (HERE / "demo_truth.json").write_text(json.dumps(truth, indent=2) + "\n", encoding="utf-8")
    print(f"wrote {len(table)} prompts ({truth['missed_prompts']} missed), "
          f"{truth['skipped_items']} skipped items, {clipped} values at the 0-100 bounds")


if __name__ == "__main__":
    main()

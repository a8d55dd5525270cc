"""`lagwise fit --json` keeps its contract: the same keys with the same kinds of value.

tests/data/fit_json_contract.json holds the shape (every key path and the JSON kinds found
there) of the bundled demo's fit with each estimator, recorded before the engine was
reorganised; the demo is simulated and invented (resources/demo). Keys may be added only
where listed in ADDED; none may disappear or change kind (null aside: an estimate may be
missing in one run and present in another).
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from json_shape import shape
from lagwise.desktop.cli import main

HERE = Path(__file__).resolve().parent
DEMO = HERE.parent / "resources" / "demo" / "demo_diary.csv"
STATES = ["--state", "tension=tense,restless,worried", "--state", "mood=sad,flat,hopeless",
          "--state", "energy=lively,focused,rested"]
GRID = ["--day", "day", "--prompt", "prompt"]
EXTRA_ARGS = {"stationary": ["--lag2-check"], "first-copy-free": [], "exact": [],
              "continuous-time": ["--prompt-spacing", "2"]}
# keys added since the contract was recorded (each documented in README's JSON notes)
ADDED = {"$.flag_codes", "$.optimiser_message", "$.flag_codes[]", "$.se_method", "$.covariance", "$.covariance[]",
         "$.covariance[][]", "$.parameters[].se_model", "$.options.se", "$.fit.scaled",
         *(f"$.fit.scaled.{key}" for key in ("chi2", "df", "p", "scaling", "scaled_chi2",
                                             "scaled_p", "rmsea", "cfi", "tli")),
         "$.options.interval_unit", "$.options.night", "$.options.prompt_spacing"}
# the impulse responses (models.responses.Responses.to_json), written by every fit
RESPONSE_ARRAYS = [f"{form}{cumulative}{standardized}{part}" for form in ("unit", "orthogonal")
                   for cumulative in ("", "_cumulative") for standardized in ("", "_standardized")
                   for part in ("", "_se", "_lower", "_upper")]
ADDED |= {"$.responses", *(f"$.responses.{key}" for key in (
    "format", "states", "states[]", "horizon", "order", "order[]", "level", "interval",
    "replicates", "half_life", "half_life[]", "oscillates", "oscillates[]", "state_sd",
    "state_sd[]", "innovation_sd", "innovation_sd[]", "notes", "notes[]", "sentences",
    "sentences[]")), *(f"$.responses.{name}{depth}" for name in RESPONSE_ARRAYS
                        for depth in ("", "[]", "[][]", "[][][]"))}
# --bootstrap N adds one key, "bootstrap" (models.bootstrap.Bootstrap.to_json)
BOOTSTRAP = {"$.bootstrap", *(f"$.bootstrap.{key}" for key in (
    "replicates", "failed", "seed", "method", "block_length", "level", "parameters",
    "parameters[]", "intervals", "stability", "stability[]", "estimates", "estimates[]",
    "estimates[][]")),
    *(f"$.bootstrap.parameters[].{key}" for key in ("kind", "from", "to", "lag", "estimate")),
    *(f"$.bootstrap.stability[].{key}" for key in ("kind", "from", "to", "same_sign", "excludes_zero")),
    *(f"$.bootstrap.intervals.{name}{tail}" for name in ("percentile", "bias_corrected")
      for tail in ("", "[]", "[].kind", "[].from", "[].to", "[].lower", "[].upper"))}
ADDED |= BOOTSTRAP


@pytest.mark.parametrize("estimator", sorted(EXTRA_ARGS))
def test_fit_json_has_the_recorded_keys_and_kinds(estimator, tmp_path):
    contract = json.loads((HERE / "data" / "fit_json_contract.json").read_text())[estimator]
    out = tmp_path / "fit.json"
    assert main(["fit", str(DEMO), *GRID, *STATES, "--estimator", estimator,
                 *EXTRA_ARGS[estimator], "--json", str(out)]) == 0
    now = shape(json.loads(out.read_text()))
    missing = sorted(set(contract) - set(now))
    assert missing == []
    changed = {path: (sorted(now[path]), kinds) for path, kinds in contract.items()
               if not (now[path] - {"null"}) <= (set(kinds) - {"null"})}
    assert changed == {}
    assert sorted(set(now) - set(contract) - ADDED) == []


def test_bootstrap_adds_only_its_key(tmp_path):
    contract = json.loads((HERE / "data" / "fit_json_contract.json").read_text())["stationary"]
    out = tmp_path / "fit.json"
    assert main(["fit", str(DEMO), *GRID, *STATES, "--bootstrap", "4", "--jobs", "1",
                 "--json", str(out)]) == 0
    now = shape(json.loads(out.read_text()))
    assert sorted(set(now) - set(contract) - (ADDED - BOOTSTRAP)) == sorted(BOOTSTRAP)


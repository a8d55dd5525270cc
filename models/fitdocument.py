"""The JSON document of one fit, as `lagwise fit --json` writes it (and `lagwise batch`,
once per person): the result, its impulse responses and, when they were run, the lag-2
check and the bootstrap."""

from __future__ import annotations

from lagwise.models.bootstrap import Bootstrap
from lagwise.models.lag2check import Lag2Check
from lagwise.models.responses import Responses
from lagwise.models.results import FitResult, _finite


def fit_document(result: FitResult, responses: Responses, check: Lag2Check | None = None,
                 boot: Bootstrap | None = None) -> dict:
    """The fit's JSON (no NaN or infinity: those become null)."""
    doc = result.to_json()
    doc["responses"] = responses.to_json()
    if check is not None:
        doc["lag2_check"] = _finite(check.to_json())
    if boot is not None:
        doc["bootstrap"] = boot.to_json()
    return doc

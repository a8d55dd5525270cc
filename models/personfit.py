"""One person's part of a batch: the same model and settings fitted to their diary alone.

`fit_person` runs inside a worker (a local process or a cluster worker) and never raises for
a problem of the person's own: a diary that cannot be one, too few windows, a model the data
cannot carry, a numerical failure (any LagwiseError, or numpy/scipy giving up) is recorded
as the person's outcome with its reason in one line, so the batch goes on. The optional
bootstrap and lag-2 check run serially inside the worker.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass

import numpy as np

from lagwise.models import jsonread as jr
from lagwise.models.advice import data_readiness, fit_warnings
from lagwise.models.bootstrap import bootstrap
from lagwise.models.errors import Cancelled, LagwiseError
from lagwise.models.estimate import fit
from lagwise.models.estimators import FitOptions
from lagwise.models.fitdocument import fit_document
from lagwise.models.lag2check import lag2_check
from lagwise.models.responses import DEFAULT_HORIZON, impulse_responses
from lagwise.models.spec import ModelSpec
from lagwise.models.study import PersonDiary

FITTED, NOT_CONVERGED, FAILED = "fitted", "not converged", "failed"
STATUSES = (FITTED, NOT_CONVERGED, FAILED)
# a person's own problem: recorded, never raised (a bug still stops the batch)
PERSON_FAILURES = (LagwiseError, np.linalg.LinAlgError, ValueError, FloatingPointError,
                   ZeroDivisionError, OverflowError)


@dataclass(frozen=True)
class BatchSettings:
    """What every person is fitted with: the model, the estimator settings, and the optional
    bootstrap (replicates, seed) and lag-2 check."""

    spec: ModelSpec
    options: FitOptions = FitOptions()
    bootstrap: int | None = None
    seed: int = 0
    lag2_check: bool = False
    horizon: int = DEFAULT_HORIZON

    def to_json(self) -> dict:
        return {"spec": self.spec.to_json(), "options": self.options.to_json(),
                "bootstrap": self.bootstrap, "seed": self.seed, "lag2_check": self.lag2_check,
                "horizon": self.horizon}

    def fingerprint(self) -> str:
        """SHA-256 of the settings' JSON (keys sorted)."""
        return hashlib.sha256(json.dumps(self.to_json(), sort_keys=True).encode()).hexdigest()


def data_fingerprint(entry: PersonDiary) -> str:
    """SHA-256 of a person's diary (items, answers, grid, days), or of why there is none."""
    h = hashlib.sha256(entry.person.encode())
    diary = entry.diary
    if diary is None:
        h.update(b"problem\0" + str(entry.problem).encode())
        return h.hexdigest()
    h.update(json.dumps([list(diary.items), list(diary.day_labels)]).encode())
    for array in (diary.values, diary.segment, diary.day, diary.prompt):
        h.update(np.ascontiguousarray(array, dtype=float).tobytes())
    if diary.time is not None:
        h.update(np.ascontiguousarray(diary.time).view("int64").tobytes())
    return h.hexdigest()


@dataclass(frozen=True)
class PersonOutcome:
    """One person's result: status (fitted, not converged, failed), the reason when not
    fitted, the fit's JSON document (`lagwise fit --json`), the codes and titles of the fit's
    warnings (models.advice), the share of prompts answered, and the fingerprint of the
    settings and data it was made from (a resumed batch reuses it only when they match)."""

    person: str
    status: str
    fingerprint: str
    reason: str | None = None
    document: dict | None = None
    warnings: tuple[tuple[str, str], ...] = ()
    compliance: float | None = None

    @property
    def fitted(self) -> bool:
        return self.status == FITTED

    def to_json(self) -> dict:
        return {"format": "lagwise-person", "person": self.person, "status": self.status,
                "fingerprint": self.fingerprint, "reason": self.reason,
                "compliance": self.compliance,
                "warnings": [{"code": c, "title": t} for c, t in self.warnings],
                "fit": self.document}

    @classmethod
    def from_json(cls, doc: object, where: str = "") -> "PersonOutcome":
        """An outcome from `to_json` output; FieldError names a malformed field."""
        fields = jr.read_fields(doc, where, (
            jr.field("format", jr.choice, choices=("lagwise-person",)),
            jr.field("person", jr.text),
            jr.field("status", jr.choice, choices=STATUSES),
            jr.field("fingerprint", jr.text),
            jr.field("reason", jr.text, None, null=True, limit=jr.MAX_TEXT),
            jr.field("compliance", jr.number, None, null=True),
            jr.field("warnings", jr.tuple_of, [], item=_warning),
            jr.field("fit", _document, None),
        ), closed=True)
        fields.pop("format")
        fields["document"] = fields.pop("fit")
        return cls(**fields)


def fit_person(entry: PersonDiary, settings: BatchSettings, fingerprint: str) -> PersonOutcome:
    """Fit `settings` to one person (in a worker); the outcome, never a person's error."""
    if entry.diary is None:
        return PersonOutcome(entry.person, FAILED, fingerprint, reason=entry.problem)
    diary, spec, options = entry.diary, settings.spec, settings.options
    step = "fit"
    try:
        result = fit(diary, spec, options)
        responses = impulse_responses(result, settings.horizon)
        check = boot = None
        if result.converged and settings.lag2_check:
            step = "lag-2 check"
            check = lag2_check(diary, spec, options)
        if result.converged and settings.bootstrap:
            step = "bootstrap"
            boot = bootstrap(diary, spec, options, result, replicates=settings.bootstrap,
                             seed=settings.seed, jobs=1)
    except Cancelled:
        raise
    except PERSON_FAILURES as error:
        reason = " ".join(str(error).split()) or type(error).__name__
        return PersonOutcome(entry.person, FAILED, fingerprint, compliance=entry.compliance,
                             reason=reason if step == "fit" else f"{step}: {reason}")
    advice = fit_warnings(result, data_readiness(diary, result), check)
    status = FITTED if result.converged else NOT_CONVERGED
    return PersonOutcome(
        entry.person, status, fingerprint, compliance=entry.compliance,
        reason=None if result.converged else f"the optimiser did not converge ({result.message})",
        document=fit_document(result, responses, check, boot),
        warnings=tuple((str(a.code), a.title) for a in advice))


def _document(value: object, where: str) -> dict | None:
    return None if value is None else jr.obj(value, where, closed=False)


def _warning(value: object, where: str) -> tuple[str, str]:
    fields = jr.read_fields(value, where, (jr.field("code", jr.text), jr.field("title", jr.text)),
                            closed=True)
    return fields["code"], fields["title"]

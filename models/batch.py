"""Batch estimation: the same model and settings fitted to every person of a study, each
person on their own, in parallel.

The people are fitted by models.parallel: locally in worker processes (`jobs`) or on a
running Dask cluster (`scheduler`). Each person's outcome
(models.personfit) is written the moment it arrives (models.batchfiles), so an interrupted
batch resumes with the people still missing. Progress goes to the monitor per finished
person (fraction: people done of all); cancelling stops the queued people and keeps the
finished ones.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

from lagwise.models import batchfiles
from lagwise.models.across import Across, across_people, estimates_csv, estimates_wide_csv
from lagwise.models.atomic import write_output
from lagwise.models.parallel import run_tasks
from lagwise.models.personfit import BatchSettings, PersonOutcome, data_fingerprint, fit_person
from lagwise.models.progress import Monitor, checkpoint
from lagwise.models.study import Study


@dataclass(frozen=True)
class BatchOutcome:
    """Every person's outcome in study order, which of them were reused from an earlier run
    into the same folder, and the summaries across people."""

    outcomes: tuple[PersonOutcome, ...]
    reused: tuple[str, ...]
    across: Across

    @property
    def not_fitted(self) -> tuple[PersonOutcome, ...]:
        return tuple(o for o in self.outcomes if not o.fitted)


def run_batch(study: Study, settings: BatchSettings, out: str | Path, *,
              jobs: int | None = None, scheduler: str | None = None,
              monitor: Monitor | None = None) -> BatchOutcome:
    """Fit `settings` to every person of `study`, writing into folder `out`.

    People already in `out` with the same settings and data are not fitted again. Raises
    SpecError when `out` holds a batch made with other settings, OutputError when a file
    cannot be written, LagwiseError when the scheduler cannot be reached, and Cancelled
    (the finished people are kept) when the monitor asks to stop.
    """
    if jobs is not None and jobs < 1:
        raise ValueError("jobs should be 1 or more (None: every core)")
    folder = batchfiles.open_folder(out, settings)
    prints = person_fingerprints(study, settings)
    done: dict[str, PersonOutcome] = {}
    for entry in study.people:
        stored = batchfiles.load_outcome(folder, entry.person, prints[entry.person])
        if stored is not None:
            done[entry.person] = stored
    reused = tuple(done)
    todo = [e for e in study.people if e.person not in done]
    n = len(study.people)
    checkpoint(monitor, len(done) / max(n, 1),
               f"{len(done)} of {n} people already done; fitting {len(todo)}")
    if todo:
        runner = run_tasks(fit_person, [(e, settings, prints[e.person]) for e in todo],
                           jobs=jobs, scheduler=scheduler)
        try:
            for outcome in runner:
                batchfiles.save_outcome(folder, outcome)
                done[outcome.person] = outcome
                checkpoint(monitor, len(done) / n,
                           f"{outcome.person}: {outcome.status} ({len(done)} of {n} people)")
        finally:
            runner.close()   # cancels the people still queued (after a Cancelled or an error)
    outcomes = tuple(done[e.person] for e in study.people)
    across = across_people(outcomes)
    batchfiles.write_people(folder, outcomes)
    write_output(folder / batchfiles.SUMMARY,
                 json.dumps(across.to_json(), indent=2, allow_nan=False), "the batch summary")
    write_output(folder / batchfiles.ESTIMATES, estimates_csv(across), "the estimates table")
    write_output(folder / batchfiles.WIDE, estimates_wide_csv(across), "the wide estimates table")
    return BatchOutcome(outcomes, reused, across)


def person_fingerprints(study: Study, settings: BatchSettings) -> dict[str, str]:
    """Person -> the fingerprint of the settings and their data, as their outcome file
    holds it (models.batchfiles.load_outcome finds a finished person by it)."""
    common = settings.fingerprint()
    return {e.person: f"{common}:{data_fingerprint(e)}" for e in study.people}


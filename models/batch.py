"""Batch estimation: the same model and settings fitted to every person of a study, each
person on their own, in parallel.

Locally the people are fitted in joblib's loky worker processes (`jobs`, None: every core;
1: one after another in this process); given the address of a running Dask scheduler
(`scheduler="tcp://host:8786"`) they are submitted to that cluster through
dask.distributed's Client instead. Each person's outcome
(models.personfit) is written the moment it arrives (models.batchfiles), so an interrupted
batch resumes with the people still missing. Progress goes to the monitor per finished
person (fraction: people done of all); cancelling stops the queued people and keeps the
finished ones.
"""

from __future__ import annotations

import json
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import joblib

from lagwise.models import batchfiles
from lagwise.models.across import Across, across_people, estimates_csv
from lagwise.models.atomic import write_output
from lagwise.models.errors import LagwiseError
from lagwise.models.personfit import BatchSettings, PersonOutcome, data_fingerprint, fit_person
from lagwise.models.progress import Monitor, checkpoint
from lagwise.models.study import PersonDiary, Study

CONNECT_TIMEOUT = "20s"


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
        runner = _on_cluster(todo, settings, prints, scheduler) if scheduler else \
            _locally(todo, settings, prints, jobs)
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
    return BatchOutcome(outcomes, reused, across)


def person_fingerprints(study: Study, settings: BatchSettings) -> dict[str, str]:
    """Person -> the fingerprint of the settings and their data, as their outcome file
    holds it (models.batchfiles.load_outcome finds a finished person by it)."""
    common = settings.fingerprint()
    return {e.person: f"{common}:{data_fingerprint(e)}" for e in study.people}


def _locally(todo: list[PersonDiary], settings: BatchSettings, prints: dict[str, str],
             jobs: int | None) -> Iterator[PersonOutcome]:
    """Outcomes as they finish, from joblib's loky worker processes."""
    tasks = (joblib.delayed(fit_person)(e, settings, prints[e.person]) for e in todo)
    workers = min(joblib.cpu_count() if jobs is None else jobs, len(todo))
    outputs = joblib.Parallel(n_jobs=workers, backend="loky",
                              return_as="generator_unordered")(tasks)
    try:
        yield from outputs
    finally:
        outputs.close()


def _on_cluster(todo: list[PersonDiary], settings: BatchSettings, prints: dict[str, str],
                scheduler: str) -> Iterator[PersonOutcome]:
    """Outcomes as they finish, from the workers of the Dask cluster at `scheduler`."""
    from distributed import Client, as_completed   # only a cluster batch loads dask

    try:
        client = Client(scheduler, timeout=CONNECT_TIMEOUT, set_as_default=False)
    except (OSError, ValueError) as error:
        raise LagwiseError(f"cannot reach the scheduler at {scheduler} ({error})") from None
    futures = [client.submit(fit_person, e, settings, prints[e.person], pure=False)
               for e in todo]
    try:
        for future in as_completed(futures, loop=client.loop):
            yield future.result()
    finally:
        client.cancel(futures)
        client.close()

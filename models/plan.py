"""Plan the next diary by simulation: power, precision and the number of days.

`run_plan(truth, designs)` draws R diaries per design from the assumed truth
(models.plantruth, models.design), fits the model to each and summarises every free lagged
path per design (models.planresults). Each refit starts at the truth and computes the
estimator's own standard errors (robust for the lag-window estimators, model-based for
`exact`): the 95% Wald interval needs an error per diary, and these are the errors the
analysis of the real diary will report. Measured on one core (40 days of 6 prompts): a refit
costs 0.043 s without errors and 0.072 s with them for the demo model (0.023 / 0.037 s for
two single-item states); model-based errors cost the same as robust ones, and the cheaper
shortcut (no errors, the spread of the estimates over replicates as a known error) ignores
that each diary's error is itself estimated. The coverage column shows how honest the
intervals are (robust errors over 300 diaries of 40 days: 0.90-0.94).

With `lag2` (a k x k matrix of lag-2 effects) each diary is drawn with those effects added
and the lag-2 check (models.lag2check) is run on it: the share of its likelihood-ratio tests
below .05 is the check's power against them.

Replicates run through models.parallel (local processes or a Dask scheduler) in small
batches; replicate r of design d draws with its own generator from
`SeedSequence(seed).spawn(designs)[d].spawn(R)[r]`, so the answer depends on the seed only,
never on the number of workers. When the monitor asks to stop, the replicates finished so
far are summarised and returned (`Plan.complete` is False).
"""

from __future__ import annotations

import math
import os
from collections.abc import Sequence

import numpy as np

from lagwise.models.design import Design, simulate
from lagwise.models.errors import Cancelled, LagwiseError, SpecError
from lagwise.models.estimate import fit
from lagwise.models.lag2check import lag2_check
from lagwise.models.limits import Limit
from lagwise.models.parallel import run_tasks
from lagwise.models.planresults import Plan, Replicate, summarise
from lagwise.models.plantruth import Truth
from lagwise.models.progress import Monitor, checkpoint

REPLICATIONS = Limit("number of replications", 2, 100_000)
ALPHA = 0.05
MAX_BATCH = 10


def run_plan(truth: Truth, designs: Sequence[Design], *, replications: int = 200,
             seed: int = 0, lag2: np.ndarray | None = None, jobs: int | None = None,
             scheduler: str | None = None, monitor: Monitor | None = None) -> Plan:
    """Simulate and refit `replications` diaries of every design (module docstring)."""
    REPLICATIONS.check(replications)
    if not designs:
        raise SpecError("A plan needs at least one design.")
    if lag2 is not None and truth.spec.lags != 1:
        raise SpecError("The lag-2 check is planned for a model of lag order 1.")
    streams = [d.spawn(replications) for d in np.random.SeedSequence(seed).spawn(len(designs))]
    size = _batch_size(replications, len(designs), jobs)
    tasks = [(truth, design, index, range(a, min(a + size, replications)),
              streams[index][a:a + size], lag2)
             for index, design in enumerate(designs) for a in range(0, replications, size)]
    total = replications * len(designs)
    done: list[Replicate] = []
    complete = True
    checkpoint(monitor, 0.0, f"Simulating {total} diaries")
    runner = run_tasks(_run_batch, tasks, jobs=jobs, scheduler=scheduler)
    try:
        for batch in runner:
            done.extend(batch)
            checkpoint(monitor, len(done) / total, f"{len(done)} of {total} diaries fitted")
    except Cancelled:
        complete = False
    finally:
        runner.close()
    return summarise(truth, designs, replications, done, seed=seed, complete=complete,
                     lag2=lag2)


def _batch_size(replications: int, designs: int, jobs: int | None) -> int:
    """Replicates per task: a few tasks per worker, at most MAX_BATCH (progress, cancel)."""
    workers = jobs or os.cpu_count() or 1
    return max(1, min(MAX_BATCH, math.ceil(replications * designs / (4 * workers))))


def _run_batch(truth: Truth, design: Design, index: int, replicates: range,
               seeds: Sequence[np.random.SeedSequence],
               lag2: np.ndarray | None) -> list[Replicate]:
    """Simulate and refit the given replicates of one design (runs in a worker)."""
    paths = truth.lagged_paths()
    start, options = truth.start(), design.options
    out = []
    for r, seq in zip(replicates, seeds):
        rng = np.random.default_rng(seq)
        diary = simulate(truth, design, rng, lag2)
        estimate = lower = upper = np.full(len(paths), np.nan)
        converged, lag2_p = False, None
        try:
            result = fit(diary, truth.spec, options, start=start)
            converged = result.converged
            found = [result.get(kind, fr, to) for kind, fr, to, _, _ in paths]
            estimate = np.array([p.estimate for p in found])
            lower, upper = np.array([p.ci or (math.nan, math.nan) for p in found]).T
        except LagwiseError:   # a diary the model cannot be fitted to counts as not converged
            pass
        if lag2 is not None:
            try:
                lag2_p = lag2_check(diary, truth.spec, options).lr_p
            except LagwiseError:
                pass
        out.append(Replicate(index, r, converged and bool(np.isfinite(lower).all()),
                             estimate, lower, upper, lag2_p))
    return out

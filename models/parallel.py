"""Run independent tasks in parallel and receive their results as they finish: the one
backend of batch estimation (models.batch) and study planning (models.plan).

Locally the tasks run in joblib's loky worker processes (`jobs`, None: every core; 1: one
after another in this process); given the address of a running Dask scheduler
(`scheduler="tcp://host:8786"`) they are submitted to that cluster through
dask.distributed's Client instead. Closing the returned generator (or leaving it after an
error or a Cancelled) cancels the tasks still queued.
"""

from __future__ import annotations

import re
import warnings
from collections.abc import Callable, Iterator, Sequence
from typing import Any

import joblib

from lagwise.models.errors import LagwiseError, SpecError

CONNECT_TIMEOUT = "20s"
_ADDRESS = re.compile(r"(?:(tcp|tls)://)?([A-Za-z0-9_.\-]+|\[[0-9A-Fa-f:]+\]):(\d{1,5})/?")


def scheduler_address(text: str | None) -> str | None:
    """A Dask scheduler address as typed ("host:8786" or "tcp://host:8786"; tls too) in the
    form the client takes, or None for empty text (this computer's cores). SpecError in one
    line for anything else."""
    text = (text or "").strip()
    if not text:
        return None
    match = _ADDRESS.fullmatch(text)
    if match is None or not 0 < int(match.group(3)) < 65536:
        raise SpecError(f"'{text[:80]}' is not a scheduler address: type HOST:PORT, e.g. "
                        "tcp://192.168.1.20:8786 (empty: this computer)")
    return f"{match.group(1) or 'tcp'}://{match.group(2)}:{match.group(3)}"


def run_tasks(function: Callable[..., Any], tasks: Sequence[tuple], *,
              jobs: int | None = None, scheduler: str | None = None) -> Iterator[Any]:
    """`function(*task)` for every task, yielded in the order they finish.

    Raises LagwiseError when the scheduler cannot be reached, ValueError for jobs < 1.
    """
    if jobs is not None and jobs < 1:
        raise ValueError("jobs should be 1 or more (None: every core)")
    if not tasks:
        return (result for result in ())
    if scheduler:
        return _on_cluster(function, tasks, scheduler_address(scheduler))
    return _locally(function, tasks, jobs)


def _locally(function: Callable[..., Any], tasks: Sequence[tuple],
             jobs: int | None) -> Iterator[Any]:
    """Results as they finish, from joblib's loky worker processes."""
    workers = min(joblib.cpu_count() if jobs is None else jobs, len(tasks))
    outputs = joblib.Parallel(n_jobs=workers, backend="loky",
                              return_as="generator_unordered")(
        joblib.delayed(function)(*task) for task in tasks)
    try:
        for result in outputs:   # not `yield from`: it would close joblib's generator
            yield result         # before the warnings filter below is in place
    finally:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")   # joblib's note that unfinished tasks were dropped
            outputs.close()


def _on_cluster(function: Callable[..., Any], tasks: Sequence[tuple],
                scheduler: str) -> Iterator[Any]:
    """Results as they finish, from the workers of the Dask cluster at `scheduler`."""
    from distributed import Client, as_completed   # only a cluster run loads dask

    try:
        client = Client(scheduler, timeout=CONNECT_TIMEOUT, set_as_default=False)
    except (OSError, ValueError) as error:
        raise LagwiseError(f"cannot reach the scheduler at {scheduler} ({error})") from None
    futures = [client.submit(function, *task, pure=False) for task in tasks]
    try:
        for future in as_completed(futures, loop=client.loop):
            yield future.result()
    finally:
        client.cancel(futures)
        client.close()

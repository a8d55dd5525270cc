"""The window estimators against semopy on the speed diaries (`SPEED_CASES`).

What is timed, on one diary of complete answers:
- Lagwise: one whole `models.estimate.fit` call with the first-copy-free estimator (lag
  windows from the diary, start values, optimisation, standard errors, fit indices), BLAS
  on one thread as in every Lagwise fit; and the same call with the stationary estimator,
  for the ratio stationary / first-copy-free.
- semopy's covariance-only `semopy.Model` fitting the same first-copy-free window model
  (the same loadings, lagged paths, innovation and unique variances, equal across window
  copies, with a free covariance of the oldest copy's states: models.reference_sem,
  means="free") to the complete windows: `Model(desc)`, `fit(frame, obj="MLW")` (its
  default objective) and `model.inspect()` for the standard errors. The speed target
  applies to this peer: it is semopy's fastest route to estimates with standard errors for
  this model, since it works on the windows' covariance matrix, as Lagwise's window
  likelihood works on moments computed once. Its window means are left free (Lagwise
  models them), so its lagged paths are close to Lagwise's, not identical (max |dB|); its
  fit statistics (`calc_stats`) are not asked for, while Lagwise's time includes its fit
  indices, so the comparison leans towards semopy.
- For reference, no target: semopy's ModelMeans fitting Lagwise's mean structure too (item
  intercepts equal across copies, latent intercepts on the regressed copies; means="states")
  by full-information ML on the raw rows, with `inspect` and `calc_stats`: the identical
  model, so its lagged paths must agree with Lagwise's. Its cost grows with the rows (about
  2 minutes at T = 2,000), so it runs up to `MEANS_PEER_LIMIT` occasions unless asked.
semopy's time is its own (`ReferenceFit.seconds`: from building the model from its text to
the end of its report, with BLAS on one thread unless `semopy_threads="default"`); writing its
model text and data frame from Lagwise's windows is not counted. All runs of a case are
interleaved (cases.interleaved_best): one untimed warm-up of each, then `repeats` rounds in
which each runs once; the best time of each is kept.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from lagwise.models.bench.cases import MEANS_PEER_LIMIT, Case, bench_diary, interleaved_best, timed
from lagwise.models.estimators import FitOptions
from lagwise.models.progress import Monitor, checkpoint

TARGET_PEER = "semopy Model, covariance only: fit + inspect"
MEANS_PEER = "semopy ModelMeans, same model (reference)"


@dataclass(frozen=True)
class PeerTime:
    """One semopy peer: its label, best seconds (None when not run) and agreement."""

    name: str
    seconds: float | None
    ratio: float | None            # semopy seconds / Lagwise first-copy-free seconds
    max_path_difference: float | None
    converged: bool | None
    note: str = ""
    target: bool = False           # the speed target applies to this peer
    same_model: bool = False       # the identical model (mean structure included)


@dataclass(frozen=True)
class SpeedResult:
    case: Case
    n_windows: int
    lagwise_seconds: float
    lagwise_converged: bool
    stationary_seconds: float
    stationary_converged: bool
    peers: tuple[PeerTime, ...]

    @property
    def stationary_ratio(self) -> float:
        return self.stationary_seconds / self.lagwise_seconds


def measure_speed(case: Case, repeats: int = 3, means_peer: bool | None = None,
                  semopy_threads: str = "1", monitor: Monitor | None = None) -> SpeedResult:
    """Time Lagwise (both window estimators) and the semopy peers on one case, interleaved.
    `means_peer` None runs the ModelMeans reference up to MEANS_PEER_LIMIT occasions."""
    from lagwise.models import reference_sem
    from lagwise.models.estimate import fit
    from lagwise.models.windows import lag_windows

    spec, diary = bench_diary(case)
    windows = lag_windows(diary, 1)
    run_means = case.occasions <= MEANS_PEER_LIMIT if means_peer is None else means_peer

    def semopy_run(means: str, statistics: bool):
        def run():
            ref = reference_sem.fit_windows(windows, spec, means=means, precise=False,
                                            report=True, statistics=statistics,
                                            single_thread=semopy_threads == "1")
            return ref.seconds, ref
        return run

    runs = {
        "first-copy-free": timed(lambda: fit(diary, spec, FitOptions(estimator="first-copy-free"))),
        TARGET_PEER: semopy_run("free", statistics=False),
        "stationary": timed(lambda: fit(diary, spec, FitOptions(estimator="stationary"))),
    }
    if run_means:
        runs[MEANS_PEER] = semopy_run("states", statistics=True)
    checkpoint(monitor, 0.0, f"{case.label}: " + ", ".join(runs) + " (interleaved)")
    best = interleaved_best(runs, repeats)
    fcf_s, fcf = best["first-copy-free"]
    st_s, st = best["stationary"]
    peers = []
    for name in (TARGET_PEER, MEANS_PEER):
        if name not in best:
            peers.append(PeerTime(name, None, None, None, None,
                                  "not run: minutes per fit here (--all-peers runs it)",
                                  same_model=True))
            continue
        sec, ref = best[name]
        diff = float(np.max(np.abs(ref.lagged[0] - fcf.lagged[0])))
        peers.append(PeerTime(name, sec, sec / fcf_s, diff, ref.converged,
                              target=name == TARGET_PEER, same_model=name == MEANS_PEER))
    checkpoint(monitor, 1.0, f"{case.label}: done")
    return SpeedResult(case=case, n_windows=fcf.n_windows, lagwise_seconds=fcf_s,
                       lagwise_converged=fcf.converged, stationary_seconds=st_s,
                       stationary_converged=st.converged, peers=tuple(peers))

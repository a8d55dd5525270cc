"""The results of a study plan: per design and lagged path, what R simulated diaries showed.

Over the converged replicates (n of them) of a design, for a path with true value b:
power = share whose 95% interval excludes 0; bias = mean estimate - b; sd = the estimates'
empirical standard deviation; coverage = share whose interval holds b. Each has its Monte
Carlo standard error (Morris, White & Crowther 2019, Statistics in Medicine 38, Table 6):
sqrt(s (1 - s) / n) for a share s, sd / sqrt(n) for the bias, sd / sqrt(2 (n - 1)) for the
sd. The days needed for 80% power interpolate power linearly between the two designs
whose days enclose 0.8 (designs of one prompts, answered share and pattern, by days).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from lagwise.models.design import Design
from lagwise.models.kinds import Kind
from lagwise.models.numbers import fmt
from lagwise.models.plantruth import Truth

TARGET = 0.80
CAUTION = ("Planning assumes the model is right: the power shown is that of diaries drawn "
           "from the assumed model, not a promise about a real person.")


@dataclass(frozen=True, eq=False)
class Replicate:
    """One simulated diary's refit: estimates and 95% interval per path (truth order)."""

    design: int
    index: int
    converged: bool
    estimate: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    lag2_p: float | None = None


@dataclass(frozen=True)
class PathSummary:
    kind: Kind
    from_: str
    to: str
    truth: float
    power: float
    power_se: float
    bias: float
    bias_se: float
    sd: float
    sd_se: float
    coverage: float
    coverage_se: float

    @property
    def label(self) -> str:
        """'tension -> low mood', or 'tension (inertia)'."""
        return f"{self.from_} -> {self.to}" if self.kind != Kind.INERTIA else f"{self.to} (inertia)"

    def to_json(self) -> dict:
        return {"kind": str(self.kind), "from": self.from_, "to": self.to, "truth": self.truth,
                "power": _num(self.power), "power_mcse": _num(self.power_se),
                "bias": _num(self.bias), "bias_mcse": _num(self.bias_se),
                "sd": _num(self.sd), "sd_mcse": _num(self.sd_se),
                "coverage": _num(self.coverage), "coverage_mcse": _num(self.coverage_se)}


@dataclass(frozen=True)
class DesignSummary:
    design: Design
    replications: int          # diaries simulated (fewer than asked when stopped)
    converged: int
    paths: tuple[PathSummary, ...]
    lag2_power: float | None = None
    lag2_power_se: float | None = None

    @property
    def not_converged(self) -> float:
        return 1.0 - self.converged / self.replications if self.replications else math.nan

    @property
    def not_converged_se(self) -> float:
        return _share_se(self.not_converged, self.replications)

    def to_json(self) -> dict:
        d = self.design
        out = {"days": d.days, "prompts": d.prompts, "answered": d.answered,
               "pattern": d.pattern, "estimator": d.estimator, "night_gap": d.night_gap,
               "replications": self.replications, "converged": self.converged,
               "not_converged": _num(self.not_converged),
               "not_converged_mcse": _num(self.not_converged_se),
               "paths": [p.to_json() for p in self.paths]}
        if self.lag2_power is not None:
            out.update(lag2_power=_num(self.lag2_power), lag2_power_mcse=_num(self.lag2_power_se))
        return out


@dataclass(frozen=True)
class Plan:
    designs: tuple[DesignSummary, ...]
    asked: int                 # replications asked per design
    seed: int
    complete: bool

    def days_needed(self, index: int, target: float = TARGET) -> float | None:
        """Days for `target` power of path `index`, interpolated over the designs like the
        longest one (None: more than the longest design; its days when the shortest
        reaches it already)."""
        last = self.designs[-1].design
        rows = sorted((s.design.days, s.paths[index].power) for s in self.designs
                      if (s.design.prompts, s.design.answered, s.design.pattern)
                      == (last.prompts, last.answered, last.pattern)
                      and math.isfinite(s.paths[index].power))
        for n, (days, power) in enumerate(rows):
            if power >= target:
                if n == 0:
                    return float(days)
                d0, p0 = rows[n - 1]
                return d0 + (target - p0) * (days - d0) / (power - p0)
        return None

    def sentences(self) -> list[str]:
        """One plain sentence per path at the longest design, with the days needed."""
        top = max(self.designs, key=lambda s: s.design.days)
        out = []
        for n, p in enumerate(top.paths):
            need = self.days_needed(n)
            shortest = min(s.design.days for s in self.designs)
            days = ("more days than the longest design are needed for 80% power"
                    if need is None else
                    f"already the shortest design ({shortest} days) gives 80% power"
                    if need <= shortest else f"about {math.ceil(need)} days give 80% power")
            if not math.isfinite(p.power):
                out.append(f"With {top.design.words()}, no diary was fitted for {p.label}.")
            elif p.truth == 0.0:
                out.append(f"With {top.design.words()}, {_kind_words(p)}, which is 0 in the "
                           f"assumed model, is wrongly found in about {round(100 * p.power)}% "
                           f"of diaries (5% expected).")
            else:
                out.append(f"With {top.design.words()}, {_kind_words(p)} "
                           f"({fmt(p.truth, digits=2)}) is found in about "
                           f"{round(100 * p.power)}% of diaries; {days}.")
        return out

    def to_json(self) -> dict:
        paths = self.designs[0].paths
        return {"replications": self.asked, "seed": self.seed, "complete": self.complete,
                "designs": [s.to_json() for s in self.designs],
                "days_for_80_percent_power": [
                    {"kind": str(p.kind), "from": p.from_, "to": p.to,
                     "days": _num(self.days_needed(n))} for n, p in enumerate(paths)],
                "summary": self.sentences(), "caution": CAUTION}


def summarise(truth: Truth, designs: Sequence[Design], asked: int,
              replicates: Sequence[Replicate], *, seed: int, complete: bool,
              lag2: np.ndarray | None = None) -> Plan:
    """The Plan from the finished replicates (module docstring)."""
    paths = truth.lagged_paths()
    out = []
    for index, design in enumerate(designs):
        mine = sorted((r for r in replicates if r.design == index), key=lambda r: r.index)
        ok = [r for r in mine if r.converged]
        est = np.array([r.estimate for r in ok]).reshape(len(ok), len(paths))
        lo = np.array([r.lower for r in ok]).reshape(est.shape)
        hi = np.array([r.upper for r in ok]).reshape(est.shape)
        rows = tuple(_path(kind, fr, to, value, est[:, j], lo[:, j], hi[:, j])
                     for j, (kind, fr, to, _, value) in enumerate(paths))
        lag2_power = lag2_se = None
        if lag2 is not None:
            ps = [r.lag2_p for r in mine if r.lag2_p is not None]
            lag2_power = float(np.mean(np.array(ps) < 0.05)) if ps else math.nan
            lag2_se = _share_se(lag2_power, len(ps))
        out.append(DesignSummary(design, len(mine), len(ok), rows, lag2_power, lag2_se))
    return Plan(tuple(out), asked, seed, complete)


def _path(kind, fr, to, truth, est, lo, hi) -> PathSummary:
    n = est.size
    if n == 0:
        nan = math.nan
        return PathSummary(kind, fr, to, truth, nan, nan, nan, nan, nan, nan, nan, nan)
    power = float(np.mean((lo > 0) | (hi < 0)))
    coverage = float(np.mean((lo <= truth) & (truth <= hi)))
    sd = float(np.std(est, ddof=1)) if n > 1 else math.nan
    return PathSummary(kind, fr, to, truth, power, _share_se(power, n),
                       float(np.mean(est) - truth), sd / math.sqrt(n) if n > 1 else math.nan,
                       sd, sd / math.sqrt(2 * (n - 1)) if n > 1 else math.nan,
                       coverage, _share_se(coverage, n))


def _share_se(share: float, n: int) -> float:
    return math.sqrt(share * (1.0 - share) / n) if n > 0 and math.isfinite(share) else math.nan


def _kind_words(p: PathSummary) -> str:
    if p.kind == Kind.INERTIA:
        return f"the inertia of {p.to}"
    return f"the {p.kind.label.lower()} {p.from_} -> {p.to}"


def _num(value: float | None) -> float | None:
    return None if value is None or not math.isfinite(value) else float(value)


HEADER = ("Path", "Truth", "Days", "Diaries", "Power", "± MC", "Bias", "SD", "Coverage",
          "Not converged")
ALIGN = "<" + ">" * (len(HEADER) - 1)


def table_rows(plan: Plan) -> list[tuple[str, ...]]:
    """The results table (HEADER's columns), one row per path and design, numbers by fmt."""
    out = []
    for n in range(len(plan.designs[0].paths)):
        for s in plan.designs:
            p = s.paths[n]
            out.append((p.label, fmt(p.truth), fmt(s.design.days, "int"),
                        fmt(s.replications, "int"), fmt(p.power), fmt(p.power_se),
                        fmt(p.bias), fmt(p.sd), fmt(p.coverage), fmt(s.not_converged)))
    return out

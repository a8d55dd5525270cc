"""What one report shows, gathered once: `report_input(project, run)` -> `ReportInput`.

The report is built from this one value, whatever asks for it (the window's File ▸ Export
report…, `lagwise report`). It holds the fitted result with its settings, the diary's
counts and screening verdicts, the preparation steps, the warnings and cautions the window
shows (models.advice), and the lag-2 check, bootstrap and impulse responses when there are any.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from lagwise.models.advice import Advice, data_readiness, fit_warnings
from lagwise.models.bootstrap import Bootstrap
from lagwise.models.diary import Diary
from lagwise.models.errors import ProjectError
from lagwise.models.lag2check import Lag2Check
from lagwise.models.progress import Monitor, checkpoint
from lagwise.models.project import Project, lagwise_version, project_diary
from lagwise.models.project.estimates import project_fingerprint
from lagwise.models.responses import Responses, impulse_responses
from lagwise.models.results import FitResult
from lagwise.models.runs import find_run
from lagwise.models.screening import screen_diary


@dataclass(frozen=True)
class DiaryFacts:
    """The diary behind the result: its file, counts and screening verdicts."""

    file_name: str
    sha256: str | None
    days: int
    segments: int
    prompts: int             # scheduled prompts (occasions)
    answered: int            # prompts with at least one item answered
    complete_windows: int    # complete lag-1 windows
    missing: tuple[tuple[str, float], ...]    # (item, share of prompts without its answer)
    verdicts: tuple[tuple[str, str], ...]     # (item, stationarity reading)
    findings: tuple[str, ...]                 # the screening's rule-of-thumb warnings
    preparation: str                          # the preparation steps in words
    joined: bool = False                      # days joined into one series (windows span nights)

    @property
    def compliance(self) -> float | None:
        return self.answered / self.prompts if self.prompts else None


@dataclass(frozen=True, eq=False)
class ReportInput:
    """Everything one report shows (see the module docstring)."""

    title: str
    run: str | None
    result: FitResult
    diary: DiaryFacts
    warnings: tuple[Advice, ...]
    notes: str = ""
    check: Lag2Check | None = None
    bootstrap: Bootstrap | None = None
    responses: Responses | None = None
    version: str = ""
    current: bool = True     # False: the data, model or settings changed after the estimate


def report_input(project: Project, run: str | None = None, *, check: Lag2Check | None = None,
                 monitor: Monitor | None = None) -> ReportInput:
    """The report of one run of `project` (`run` None: the current run): its result, lag-2
    check (`check`, when given, replaces the stored one: the window's check of that model),
    bootstrap and note, with the diary as that run's preparation steps made it. ProjectError
    for a run the project does not hold, a project without results, or data that cannot be
    read."""
    if run is None and project.run is None:
        raise ProjectError(f"{project.name}: the project holds no results yet; estimate the "
                           "model first (lagwise fit PROJECT --save PROJECT)")
    chosen = project.run if run is None else find_run(project.runs, run)
    result = chosen.result
    current = chosen is project.run
    check = check if check is not None else chosen.lag2
    checkpoint(monitor, 0.1, "Reading the diary")
    as_run = replace(project, preparation=chosen.preparation)   # the run's own steps
    diary = project_diary(as_run)
    checkpoint(monitor, 0.3, "Screening the diary")
    facts = diary_facts(diary.select(result.items), as_run, dict(project.scales))
    warnings = fit_warnings(result, data_readiness(diary, result), check)
    responses = None
    if current and project.responses is not None and result.stationary:
        checkpoint(monitor, 0.7, "Impulse responses")
        choice = project.responses
        responses = impulse_responses(result, choice.horizon, choice.order or None,
                                      chosen.bootstrap)
    checkpoint(monitor, 1.0, "Report ready")
    notes = "\n\n".join(text for text in (project.notes, chosen.note) if text)
    return ReportInput(title=project.name, run=chosen.name, result=result, diary=facts,
                       warnings=warnings, notes=notes, check=check,
                       bootstrap=chosen.bootstrap, responses=responses,
                       version=lagwise_version(),
                       current=project.result_current if current else
                       chosen.fingerprint == project_fingerprint(project))


def diary_facts(diary: Diary, project: Project,
                scales: dict[str, tuple[float, float]]) -> DiaryFacts:
    """Counts, missingness and screening verdicts of the model's items of `diary`."""
    from lagwise.models.preparation import describe, steps_from_json  # statistics modules

    screening = screen_diary(diary, scales)
    missing = np.isnan(diary.values).mean(axis=0) if diary.n_occasions else np.zeros(diary.n_items)
    data = project.data
    return DiaryFacts(
        file_name=data.file_name if data is not None else "",
        sha256=data.sha256 if data is not None else None,
        days=diary.n_days, segments=int(np.unique(diary.segment).size),
        prompts=diary.n_occasions, answered=int(diary.answered.sum()),
        complete_windows=screening.readiness.complete_windows,
        missing=tuple((name, float(share)) for name, share in zip(diary.items, missing)),
        verdicts=tuple((s.name, s.reading) for s in screening.items),
        findings=screening.readiness.warnings,
        preparation=describe(steps_from_json(list(project.preparation))),
        joined=not project.time.days_independent)

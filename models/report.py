"""Plain-text report of a fit: what `lagwise fit` prints."""

from __future__ import annotations

from lagwise.models.bootstrap import Bootstrap
from lagwise.models.ctresults import effects_by_interval
from lagwise.models.estimators import ERRORS
from lagwise.models.kinds import Kind
from lagwise.models.lag2check import Lag2Check
from lagwise.models.numbers import fmt
from lagwise.models.responses import Responses
from lagwise.models.results import FitResult
from lagwise.models.texttable import table

def format_result(result: FitResult) -> str:
    lines = []
    status = "converged" if result.converged else "DID NOT CONVERGE"
    lines.append(f"Lagwise fit: estimator {result.estimator}, {status} "
                 f"({result.iterations} iterations, {result.seconds:.2f} s)")
    if not result.converged:
        lines.append(f"  {result.message}")
    lines.append(f"  {result.n_occasions} occasions, {result.data_used} used, "
                 f"{result.fit.n_free} free parameters, spectral radius {result.spectral_radius:.3f}")
    lines.append(f"  standard errors: {ERRORS[result.se_method]}")
    for kind in Kind:
        rows = result.table(kind)
        if not rows:
            continue
        lines.append("")
        lines.append(kind.title)
        cells = [[p.from_, p.to, fmt(p.estimate), fmt(p.se), fmt(p.p, 'p'), fmt(p.standardized),
                  ("" if p.ci is None else f"[{fmt(p.ci[0])}, {fmt(p.ci[1])}]")
                  + ("" if p.free else "  (fixed)")] for p in rows]
        lines += table(["from", "to", "estimate", "SE", "p", "std", " 95% interval"], cells,
                       "<<>>>><")
    if result.continuous is not None:
        lines += format_continuous(result)
    f = result.fit
    lines.append("")
    label = "exact likelihood of the series" if f.exact else "window pseudo-likelihood"
    lines.append(f"Fit ({label})")
    s = f.scaled
    if s is not None:
        lines.append(f"  calibrated test (mean-and-variance adjusted for overlapping windows): "
                     f"chi-square {fmt(s.chi2, digits=2)} on {fmt(s.df, digits=1)} df, p {fmt(s.p, 'p')}")
        lines.append(f"  calibrated RMSEA {fmt(s.rmsea)}   CFI {fmt(s.cfi)}   TLI {fmt(s.tli)}")
        lines.append("  unadjusted (windows as independent rows; for reference):")
    if f.chi2 is not None:
        lines.append(f"  chi-square {fmt(f.chi2, digits=2)} on {f.df} df, p {fmt(f.p, 'p')}")
    if f.rmsea is not None:
        ci = "" if f.rmsea_ci is None else f" (90% interval {fmt(f.rmsea_ci[0])} to {fmt(f.rmsea_ci[1])})"
        lines.append(f"  RMSEA {fmt(f.rmsea)}{ci}, close-fit p {fmt(f.rmsea_pclose, 'p')}")
    if f.cfi is not None:
        lines.append(f"  CFI {fmt(f.cfi)}   TLI {fmt(f.tli)}   SRMR {fmt(f.srmr)}")
    lines.append(f"  log-likelihood {fmt(f.loglik, digits=2)}   AIC {fmt(f.aic, digits=2)}   BIC {fmt(f.bic, digits=2)}")
    if result.flags:
        lines.append("")
        lines.append("Warnings")
        lines += [f"  ! {flag}" for flag in result.flags]
    notes = result.notes
    if notes:
        lines.append("")
        lines.append("Notes")
        lines += [f"  - {note}" for note in notes]
    lines.append("")
    lines.append("Cautions")
    lines += [f"  * {c}" for c in result.cautions]
    return "\n".join(lines)


def format_continuous(result: FitResult) -> list[str]:
    """The time settings of a continuous-time fit and its effects B(D) = expm(A D) over
    whole hours (from the default grid), with delta-method 95% bands."""
    ct = result.continuous
    effects = effects_by_interval(result)
    lines = ["", f"Time: drift per {ct.unit[:-1]}; intervals between prompts {fmt(ct.shortest)} to "
                 f"{fmt(ct.longest)} {ct.unit}, median {fmt(ct.median_interval)}; nights "
                 f"{'carried over' if ct.night == 'carry' else 'restart the states'}",
             f"  the lag-1 paths and innovations used by responses are those over the median "
             f"interval ({fmt(ct.median_interval)} {ct.unit})",
             "", f"Effects over an interval (state at t -> state at t + interval; 95% delta-method bands)"]
    states = result.states
    cells = []
    step = max(1, (effects.intervals.size - 1) // 8)
    for g in range(step, effects.intervals.size, step):
        for i, to in enumerate(states):
            cells.append([fmt(effects.intervals[g]), to] + [
                f"{fmt(effects.values[g, i, j])} [{fmt(effects.lower[g, i, j])}, "
                f"{fmt(effects.upper[g, i, j])}]" for j in range(len(states))])
    lines += table([ct.unit, "to \\ from", *states], cells, ">" + "<" * (len(states) + 1))
    return lines


def format_lag2(check: Lag2Check) -> str:
    """The lag-2 check as text: verdict, likelihood-ratio test, then each path's score test."""
    lines = ["Is lag 1 enough? (lag-2 check on windows of 3 prompts)",
             f"  {check.verdict}",
             f"  likelihood-ratio test: chi-square {fmt(check.lr_chi2, digits=2)} on {check.lr_df} df, "
             f"p {fmt(check.lr_p, 'p')}"]
    cells = [["lag-2 path" if t.kind == Kind.LAG2 else "unique autocorrelation", t.from_, t.to,
              fmt(t.score, digits=2), fmt(t.p, 'p'), fmt(t.p_holm, 'p'), fmt(t.epc),
              fmt(t.std_epc)] for t in sorted(check.paths, key=lambda t: -t.score)]
    lines += table(["test", "from", "to", "score", "p", "Holm p", "EPC", "std EPC"], cells,
                   "<<<>>>>>")
    lines += [f"  * {c}" for c in check.cautions]
    return "\n".join(lines)


def format_bootstrap(boot: Bootstrap) -> str:
    """The bootstrap as text: how it resampled, then each lagged path's stability."""
    how = ("whole days" if boot.block_length is None else
           f"stationary blocks of {fmt(boot.block_length, digits=1)} prompts on average")
    lines = [f"Stability of the lagged paths (bootstrap: {boot.replicates} replicates resampling "
             f"{how}, seed {boot.seed})"]
    cells = [[Kind(s.kind).label, s.from_, s.to, fmt(s.estimate), fmt(s.same_sign),
              f" [{fmt(s.lower)}, {fmt(s.upper)}]", "yes" if s.excludes_zero else "no"]
             for s in boot.stability()]
    lines += table(["path", "from", "to", "estimate", "same sign", " 95% interval (percentile)",
                    "excludes 0"], cells, "<<<>><<")
    if boot.warning:
        lines.append(f"  ! {boot.warning}")
    lines.append("  * Same sign: the share of replicates whose estimate has the sign of this "
                 "diary's estimate. Every free parameter's percentile and bias-corrected "
                 "interval is in the JSON.")
    return "\n".join(lines)


def format_responses(responses: Responses) -> str:
    """Unit responses in the states' own units, one block per shocked state (h = 1..H, with
    the band when there is one), then the half-lives and one sentence per state."""
    curve = responses.curve("unit")
    bands = {"delta": "delta method", "percentile": f"bootstrap percentiles, {responses.replicates} replicates"}
    band = bands.get(responses.interval)
    head = f"; {100 * responses.level:g}% bands: {band}" if band else "; no bands"
    lines = [f"Responses to a rise of 1 in each state (unit innovations, the states' own units{head})"]
    for j, shock in enumerate(responses.states):
        lines.append(f"  after a rise of 1 in {shock}")
        cells = []
        for h in range(1, responses.horizon + 1):
            row = [str(h)]
            for i in range(len(responses.states)):
                text = fmt(curve.estimate[h, i, j])
                if band:
                    text += f" [{fmt(curve.lower[h, i, j])}, {fmt(curve.upper[h, i, j])}]"
                row.append(text)
            cells.append(row)
        lines += table(["prompts", *responses.states], cells,
                       ">" + "<" * len(responses.states), indent="    ")
    halves = [f"{s} {'more than ' + str(responses.horizon) if h is None else h}"
              for s, h in zip(responses.states, responses.half_life)]
    lines.append("  half-life (prompts until a state's own response falls below half): " + ", ".join(halves))
    lines += [f"  - {sentence}" for sentence in responses.sentences()]
    return "\n".join(lines)

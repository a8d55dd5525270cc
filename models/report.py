"""Plain-text report of a fit: what `lagwise fit` prints."""

from __future__ import annotations

from lagwise.models.lag2check import Lag2Check
from lagwise.models.results import FitResult

KIND_TITLES = (
    ("loading", "Loadings (state -> item)"),
    ("intercept", "Intercepts"),
    ("unique", "Unique variances"),
    ("unique_autocorrelation", "Lag-1 autocorrelation of unique parts"),
    ("inertia", "Inertia (state at t-1 -> same state at t)"),
    ("cross_lagged", "Cross-lagged effects (state at t-1 -> other state at t)"),
    ("lag2", "Lag-2 paths (state at t-2 -> state at t)"),
    ("innovation", "Innovations (variances and covariances)"),
    ("partial_correlation", "Partial correlations of innovations"),
    ("first_copy", "Covariance of the oldest window copies (first-copy-free)"),
    ("latent_intercept", "Latent intercepts of the later window copies (first-copy-free)"),
)


def fmt(value: float | None, digits: int = 3) -> str:
    """Numbers as shown everywhere in reports: fixed decimals, a dash for none."""
    if value is None:
        return "-"
    return f"{value:.{digits}f}"


def fmt_p(value: float | None) -> str:
    if value is None:
        return "-"
    return "<.001" if value < 0.001 else f"{value:.3f}"


def format_result(result: FitResult) -> str:
    lines = []
    status = "converged" if result.converged else "DID NOT CONVERGE"
    lines.append(f"Lagwise fit: estimator {result.estimator}, {status} "
                 f"({result.iterations} iterations, {result.seconds:.2f} s)")
    if not result.converged:
        lines.append(f"  optimiser: {result.message}")
    lines.append(f"  {result.n_occasions} occasions, {result.data_used} used, "
                 f"{result.fit.n_free} free parameters, spectral radius {result.spectral_radius:.3f}")
    for title_kind, title in KIND_TITLES:
        rows = result.table(title_kind)
        if not rows:
            continue
        lines.append("")
        lines.append(title)
        lines.append(f"  {'from':<14}{'to':<14}{'estimate':>10}{'SE':>9}{'p':>8}{'std':>9}   95% interval")
        for p in rows:
            ci = "" if p.ci is None else f"[{fmt(p.ci[0])}, {fmt(p.ci[1])}]"
            mark = "" if p.free else "  (fixed)"
            lines.append(f"  {p.from_:<14.14}{p.to:<14.14}{fmt(p.estimate):>10}{fmt(p.se):>9}"
                         f"{fmt_p(p.p):>8}{fmt(p.standardized):>9}   {ci}{mark}")
    f = result.fit
    lines.append("")
    label = "exact likelihood of the series" if f.exact else "window pseudo-likelihood"
    lines.append(f"Fit ({label})")
    if f.chi2 is not None:
        lines.append(f"  chi-square {fmt(f.chi2, 2)} on {f.df} df, p {fmt_p(f.p)}")
    if f.rmsea is not None:
        ci = "" if f.rmsea_ci is None else f" (90% interval {fmt(f.rmsea_ci[0])} to {fmt(f.rmsea_ci[1])})"
        lines.append(f"  RMSEA {fmt(f.rmsea)}{ci}, close-fit p {fmt_p(f.rmsea_pclose)}")
    if f.cfi is not None:
        lines.append(f"  CFI {fmt(f.cfi)}   TLI {fmt(f.tli)}   SRMR {fmt(f.srmr)}")
    lines.append(f"  log-likelihood {fmt(f.loglik, 2)}   AIC {fmt(f.aic, 2)}   BIC {fmt(f.bic, 2)}")
    if result.flags:
        lines.append("")
        lines.append("Warnings")
        lines += [f"  ! {flag}" for flag in result.flags]
    notes = result.extras.get("notes") or []
    if notes:
        lines.append("")
        lines.append("Notes")
        lines += [f"  - {note}" for note in notes]
    lines.append("")
    lines.append("Cautions")
    lines += [f"  * {c}" for c in result.cautions]
    return "\n".join(lines)


def format_lag2(check: Lag2Check) -> str:
    """The lag-2 check as text: verdict, likelihood-ratio test, then each path's score test."""
    lines = ["Is lag 1 enough? (lag-2 check on depth-2 windows)",
             f"  {check.verdict}",
             f"  likelihood-ratio test: chi-square {fmt(check.lr_chi2, 2)} on {check.lr_df} df, "
             f"p {fmt_p(check.lr_p)}",
             f"  {'test':<26}{'from':<14}{'to':<14}{'score':>8}{'p':>8}{'Holm p':>8}{'EPC':>9}{'std EPC':>9}"]
    for t in sorted(check.paths, key=lambda t: -t.score):
        label = "lag-2 path" if t.kind == "lag2" else "unique autocorrelation"
        lines.append(f"  {label:<26}{t.from_:<14.14}{t.to:<14.14}{fmt(t.score, 2):>8}{fmt_p(t.p):>8}"
                     f"{fmt_p(t.p_holm):>8}{fmt(t.epc):>9}{fmt(t.std_epc):>9}")
    lines += [f"  * {c}" for c in check.cautions]
    return "\n".join(lines)

"""The methods paragraph of a report, written from the settings the fit actually used, and
the published references it cites (the same entries as the guide's reference list).
"""

from __future__ import annotations

import platform
from importlib.metadata import PackageNotFoundError, version

from lagwise.models.estimators import ERRORS, MISSING
from lagwise.models.kinds import Kind
from lagwise.models.numbers import fmt
from lagwise.models.reporting.source import ReportInput

REFERENCES = {
    "akaike": "Akaike, H. (1974). A new look at the statistical model identification. IEEE "
              "Transactions on Automatic Control, 19, 716-723.",
    "bentler": "Bentler, P. M. (1990). Comparative fit indexes in structural models. "
               "Psychological Bulletin, 107, 238-246.",
    "browne": "Browne, M. W., and Cudeck, R. (1993). Alternative ways of assessing model fit. "
              "In K. A. Bollen and J. S. Long (Eds.), Testing structural equation models "
              "(pp. 136-162). Sage.",
    "dickey": "Dickey, D. A., and Fuller, W. A. (1979). Distribution of the estimators for "
              "autoregressive time series with a unit root. Journal of the American "
              "Statistical Association, 74, 427-431.",
    "durbin": "Durbin, J., and Koopman, S. J. (2012). Time series analysis by state space "
              "methods (2nd ed.). Oxford University Press.",
    "efron": "Efron, B., and Tibshirani, R. J. (1993). An introduction to the bootstrap. "
             "Chapman and Hall.",
    "holm": "Holm, S. (1979). A simple sequentially rejective multiple test procedure. "
            "Scandinavian Journal of Statistics, 6, 65-70.",
    "hu": "Hu, L., and Bentler, P. M. (1999). Cutoff criteria for fit indexes in covariance "
          "structure analysis: Conventional criteria versus new alternatives. Structural "
          "Equation Modeling, 6, 1-55.",
    "kalman": "Kalman, R. E. (1960). A new approach to linear filtering and prediction "
              "problems. Journal of Basic Engineering, 82, 35-45.",
    "kpss": "Kwiatkowski, D., Phillips, P. C. B., Schmidt, P., and Shin, Y. (1992). Testing "
            "the null hypothesis of stationarity against the alternative of a unit root. "
            "Journal of Econometrics, 54, 159-178.",
    "little": "Little, R. J. A., and Rubin, D. B. (2019). Statistical analysis with missing "
              "data (3rd ed.). Wiley.",
    "lutkepohl": "Lütkepohl, H. (2005). New introduction to multiple time series analysis. "
                 "Springer.",
    "molenaar": "Molenaar, P. C. M. (1985). A dynamic factor model for the analysis of "
                "multivariate time series. Psychometrika, 50, 181-202.",
    "newey": "Newey, W. K., and West, K. D. (1987). A simple, positive semi-definite, "
             "heteroskedasticity and autocorrelation consistent covariance matrix. "
             "Econometrica, 55, 703-708.",
    "politis": "Politis, D. N., and Romano, J. P. (1994). The stationary bootstrap. Journal "
               "of the American Statistical Association, 89, 1303-1313.",
    "rao": "Rao, C. R. (1948). Large sample tests of statistical hypotheses concerning several "
           "parameters with applications to problems of estimation. Proceedings of the "
           "Cambridge Philosophical Society, 44, 50-57.",
    "satorra": "Satorra, A., and Bentler, P. M. (1994). Corrections to test statistics and "
               "standard errors in covariance structure analysis. In A. von Eye and C. C. "
               "Clogg (Eds.), Latent variables analysis (pp. 399-419). Sage.",
    "schwarz": "Schwarz, G. (1978). Estimating the dimension of a model. Annals of "
               "Statistics, 6, 461-464.",
    "steiger": "Steiger, J. H. (1990). Structural model evaluation and modification: An "
               "interval estimation approach. Multivariate Behavioral Research, 25, 173-180.",
    "tucker": "Tucker, L. R., and Lewis, C. (1973). A reliability coefficient for maximum "
              "likelihood factor analysis. Psychometrika, 38, 1-10.",
    "varin": "Varin, C., Reid, N., and Firth, D. (2011). An overview of composite likelihood "
             "methods. Statistica Sinica, 21, 5-42.",
    "white": "White, H. (1982). Maximum likelihood estimation of misspecified models. "
             "Econometrica, 50, 1-25.",
}
_INNOVATIONS = {
    "free": "the innovations' covariances were free",
    "independent": "the innovations were independent (covariances fixed at 0)",
    "partial": "the innovations were modelled through their variances and partial correlations",
}


def methods_paragraph(inp: ReportInput) -> tuple[str, tuple[str, ...]]:
    """(paragraph, keys of REFERENCES it cites, in citation order)."""
    result, facts = inp.result, inp.diary
    spec, options, method = result.spec, result.options, result.options.method
    cited: list[str] = []

    def cite(*keys: str) -> str:
        cited.extend(k for k in keys if k not in cited)
        return "; ".join(_short(k) for k in keys)

    lagged = [p for p in result.parameters if p.free and p.kind in (Kind.INERTIA,
              Kind.CROSS_LAGGED, Kind.LAG2)]
    inertias = sum(p.kind == Kind.INERTIA for p in lagged)
    crossed = len(lagged) - inertias
    ident = ("the loading of each state's marker item fixed at 1" if spec.identification ==
             "marker" else "each state's innovation variance fixed at 1")
    lag_words = "first-order" if spec.lags == 1 else "second-order" if spec.lags == 2 else "no"
    out = [f"A dynamic factor model ({cite('molenaar')}) with {spec.k} latent "
           f"state{'s' if spec.k != 1 else ''} measured by {len(result.items)} items and a "
           f"{lag_words} vector autoregression of the states was fitted to the diary: "
           f"{inertias} inertia and {crossed} cross-lagged or lag-2 path"
           f"{'s' if crossed != 1 else ''} were free, {_INNOVATIONS.get(spec.innovations, '')}, "
           f"and the model was identified with {ident}."]
    if spec.unique_autocorrelation:
        out.append(f"The unique parts of {', '.join(spec.unique_autocorrelation)} carried over "
                   "to the next prompt.")
    if method.uses_windows:
        depth = result.depth if result.depth is not None else spec.lags
        stationary = ("under stationarity (block-Toeplitz window covariance)" if not
                      method.free_first_copies else "with the oldest copy of each window free "
                      "(no stationarity assumed)")
        out.append(f"Estimation maximised the normal likelihood of stacked lag windows of "
                   f"{depth + 1} consecutive prompts {stationary}; the windows overlap, so this "
                   f"is a composite (pseudo-)likelihood ({cite('varin')}).")
        out.append(_missing_words(options.missing, cite))
        errors = ERRORS[result.se_method]
        refs = cite("white", "newey") if result.se_method == "robust" else ""
        out.append(f"Standard errors: {errors}" + (f" ({refs})." if refs else "."))
        night = ("Lag windows never spanned a night: each day was its own segment."
                 if not facts.joined else "The days were joined into one series, so lag "
                 "windows could span a night.")
        out.append(night)
    else:
        out.append(f"Estimation maximised the exact likelihood of the whole series computed by "
                   f"the Kalman filter ({cite('kalman', 'durbin')}); missed prompts were bridged "
                   f"by the filter, so every answered item counted (full-information maximum "
                   f"likelihood, {cite('little')}). Standard errors: {ERRORS[result.se_method]}.")
        out.append("Each day restarted from the states' stationary distribution." if
                   options.night_gap is None else f"The days were joined with "
                   f"{options.night_gap} missed prompts between them, so the states carried "
                   "over the night.")
    status = "converged" if result.converged else "did not converge"
    out.append(f"The optimiser {status} after {result.iterations} iterations, using "
               f"{result.data_used} from {facts.prompts} scheduled prompts.")
    fit = result.fit
    if fit.exact:
        out.append(f"Models are compared by AIC ({cite('akaike')}) and BIC ({cite('schwarz')}).")
    else:
        calibrated = (f"; the chi-square test was calibrated for the overlapping windows by a "
                      f"mean-and-variance adjustment ({cite('satorra')})" if fit.scaled else "")
        out.append(f"Fit is described by the chi-square test, RMSEA ({cite('steiger', 'browne')}), "
                   f"CFI ({cite('bentler')}), TLI ({cite('tucker')}), SRMR ({cite('hu')}), AIC "
                   f"({cite('akaike')}) and BIC ({cite('schwarz')}){calibrated}.")
    out.append(f"Each item was screened with the ADF ({cite('dickey')}) and KPSS "
               f"({cite('kpss')}) tests; preparation: {facts.preparation}.")
    if inp.check is not None:
        out.append(f"Whether lag 1 is enough was checked with a likelihood-ratio test and score "
                   f"tests ({cite('rao')}) of each lag-2 path, adjusted by Holm's procedure "
                   f"({cite('holm')}).")
    if inp.bootstrap is not None:
        boot = inp.bootstrap
        keys = ("efron",) if boot.block_length is None else ("efron", "politis")
        out.append(f"The stability of the lagged paths was checked by a bootstrap "
                   f"({cite(*keys)}) of {fmt(boot.replicates, 'int')} replicates.")
    if inp.responses is not None:
        out.append(f"Impulse responses follow {cite('lutkepohl')}.")
    out.append(f"Software: Lagwise {inp.version or 'unknown'} on Python "
               f"{platform.python_version()}, {_versions()}.")
    return " ".join(out), tuple(cited)


def _missing_words(missing: str, cite) -> str:
    if missing == "fiml":
        return (f"Missed answers were handled by full-information maximum likelihood over the "
                f"windows' missingness patterns ({cite('little')}): "
                f"{MISSING[missing].short}.")
    return f"Missed answers: {MISSING[missing].short} (windows with a missed answer dropped)."


def _short(key: str) -> str:
    """'Author, 1985', 'Author and Author, 1994' or 'Author et al., 1992' of a reference."""
    authors, rest = REFERENCES[key].split(" (", 1)
    surnames = [name.removeprefix("and ").split(",")[0].strip()
                for name in authors.split("., ") if name.strip()]
    year = rest[:4]
    if len(surnames) == 1:
        return f"{surnames[0]}, {year}"
    if len(surnames) == 2:
        return f"{surnames[0]} and {surnames[1]}, {year}"
    return f"{surnames[0]} et al., {year}"


def _versions() -> str:
    out = []
    for name in ("numpy", "scipy"):
        try:
            out.append(f"{name} {version(name)}")
        except PackageNotFoundError:
            continue
    return ", ".join(out)

"""Fit indices on the window covariance, with the usual SEM definitions.

chi2 = 2 (loglik_saturated - loglik_model) = N F_ML; df = moments - free parameters with
moments = w (w + 3) / 2 for a w-column window with a mean structure.
RMSEA = sqrt(max(chi2 - df, 0) / (df N)) (Steiger & Lind 1980), its 90% interval by
inverting the noncentral chi-square, close-fit p = P(chi2_df(lambda = 0.05^2 df N) >= chi2)
(Browne & Cudeck 1993). CFI (Bentler 1990) and TLI (Tucker & Lewis 1973) against the
independence baseline; SRMR (Bentler 1995): root mean square of (s_ij - sigma_ij) /
sqrt(s_ii s_jj) over i <= j. AIC = -2 loglik + 2 n_free, BIC = -2 loglik + n_free log N.
Calibrated for overlapping windows (models.robust): the scaled statistic T / c, c =
tr(U Gamma) / df (Satorra & Bentler 1994), the mean-and-variance adjusted one (Satterthwaite
1946), and RMSEA, CFI and TLI from the scaled statistics of the model and the baseline.
"""

from __future__ import annotations

import numpy as np
from scipy.special import chndtrinc
from scipy.stats import chi2 as chi2_dist
from scipy.stats import ncx2

from lagwise.models.results import FitIndices, ScaledFit
from lagwise.models.robust import Traces


def rmsea_interval(chi2: float, df: int, n: int, level: float = 0.90) -> tuple[float, float]:
    """Confidence interval for RMSEA from the noncentral chi-square (Browne & Cudeck 1993):
    each bound is the noncentrality at which the observed chi2 sits at the 1 - a/2 or a/2
    point (scipy.special.chndtrinc), 0 when even the central chi-square puts it below."""
    def bound(target: float) -> float:
        if chi2_dist.cdf(chi2, df) < target:
            return 0.0
        return float(chndtrinc(chi2, df, target))

    lam_lo, lam_hi = bound(1 - (1 - level) / 2), bound((1 - level) / 2)
    return float(np.sqrt(lam_lo / (df * n))), float(np.sqrt(lam_hi / (df * n)))


def srmr(sample_cov: np.ndarray, implied_cov: np.ndarray) -> float:
    d = np.sqrt(np.diag(sample_cov))
    resid = (sample_cov - implied_cov) / np.outer(d, d)
    iu = np.triu_indices_from(resid)
    return float(np.sqrt(np.mean(resid[iu] ** 2)))


def fit_indices(loglik: float, loglik_sat: float | None, loglik_base: float, n_free: int,
                width: int, n_obs: int, sample_cov: np.ndarray | None,
                implied_cov: np.ndarray) -> FitIndices:
    moments = width * (width + 3) // 2
    df = moments - n_free
    aic = -2.0 * loglik + 2.0 * n_free
    bic = -2.0 * loglik + n_free * np.log(n_obs)
    if loglik_sat is None:
        return FitIndices(None, df, None, None, None, None, None, None, None, loglik, aic, bic, n_free, n_obs)
    chi2 = max(2.0 * (loglik_sat - loglik), 0.0)
    chi2_b = max(2.0 * (loglik_sat - loglik_base), 0.0)
    df_b = moments - 2 * width
    if df > 0:
        p = float(chi2_dist.sf(chi2, df))
        rmsea = float(np.sqrt(max(chi2 - df, 0.0) / (df * n_obs)))
        ci = rmsea_interval(chi2, df, n_obs)
        pclose = float(ncx2.sf(chi2, df, 0.05 ** 2 * df * n_obs))
        tli = ((chi2_b / df_b - chi2 / df) / (chi2_b / df_b - 1.0)) if chi2_b / df_b > 1.0 else None
    else:
        p = rmsea = pclose = tli = None
        ci = None
    denom = max(chi2_b - df_b, chi2 - df, 0.0)
    cfi = 1.0 - max(chi2 - df, 0.0) / denom if denom > 0 else 1.0
    s = srmr(sample_cov, implied_cov) if sample_cov is not None else None
    return FitIndices(chi2=float(chi2), df=int(df), p=p, rmsea=rmsea, rmsea_ci=ci, rmsea_pclose=pclose,
                      cfi=float(cfi), tli=None if tli is None else float(tli), srmr=s,
                      loglik=float(loglik), aic=float(aic), bic=float(bic), n_free=n_free, n_obs=n_obs)


def scaled_fit(fit: FitIndices, width: int, base_chi2: float, traces: list[Traces]
               ) -> ScaledFit | None:
    """The calibrated figures from the traces of the model and of the independence baseline:
    T* = T d* / tr(U Gamma) on d* = tr(U Gamma)^2 / tr((U Gamma)^2), and the RMSEA, CFI and
    TLI formulas above with (T*, d*) for the model and the baseline."""
    model, base = traces
    df, n = fit.df, fit.n_obs
    df_b = width * (width + 3) // 2 - 2 * width
    if df <= 0 or model.first <= 0 or model.second <= 0 or fit.chi2 is None:
        return None
    chi2, d = _adjusted(fit.chi2, model)
    cfi = tli = None
    if df_b > 0 and base.first > 0 and base.second > 0:
        chi2_b, d_b = _adjusted(base_chi2, base)
        denom = max(chi2_b - d_b, chi2 - d, 0.0)
        cfi = 1.0 - max(chi2 - d, 0.0) / denom if denom > 0 else 1.0
        if chi2_b / d_b > 1.0:
            tli = (chi2_b / d_b - chi2 / d) / (chi2_b / d_b - 1.0)
    c = model.first / df
    return ScaledFit(chi2=chi2, df=d, p=float(chi2_dist.sf(chi2, d)), scaling=float(c),
                     scaled_chi2=float(fit.chi2 / c), scaled_p=float(chi2_dist.sf(fit.chi2 / c, df)),
                     rmsea=float(np.sqrt(max(chi2 - d, 0.0) / (d * n))),
                     cfi=None if cfi is None else float(cfi), tli=None if tli is None else float(tli))


def _adjusted(statistic: float, traces: Traces) -> tuple[float, float]:
    """(T*, d*): the mean-and-variance adjusted statistic and its degrees of freedom."""
    d = traces.first ** 2 / traces.second
    return float(statistic * d / traces.first), float(d)

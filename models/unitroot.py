"""The ADF unit-root test and the KPSS stationarity test of one series, in numpy, with a
bounded lag search and a cache, so screening stays fast on diaries of any length.

The series: an item's answered values in diary order, segments joined end to end and
missed prompts closed up (one series per item; models.screening).

ADF (Dickey & Fuller 1979; Said & Dickey 1984), constant, no trend: OLS of
    dx_t = a + rho x_{t-1} + c_1 dx_{t-1} + ... + c_k dx_{t-k} + e_t,
statistic t(rho). The lag k is chosen by AIC among 0..K on the common sample of the
largest regression, then the chosen regression is refitted on every row it can use (the
usual convention, as statsmodels' adfuller with autolag="AIC" does). The largest lag is
Schwert's (1989) rule K = ceil(12 (T / 100)^(1/4)), capped at MAX_ADF_LAG = 24 and at
T/2 - 2: the rule grows without bound (120 lags at a million answers), so the search costs
T x K^2 and would dominate screening of long diaries, while the lags that matter in a
diary span a day or two of prompts; up to T = 1,600 answers the cap changes nothing. All
nested regressions come from one Cholesky factor of the cross-product matrix of
[1, x_{t-1}, dx_{t-1..t-K}, dx_t], built in row blocks (memory bounded). p-value: MacKinnon's
(1994, Table 3, one variable, constant) response surface, p = Phi(polynomial in t).

KPSS (Kwiatkowski, Phillips, Schmidt & Shin 1992), level: residuals e = x - mean(x),
statistic sum(S_t^2) / (T^2 s^2), S_t the partial sums and s^2 the Bartlett-weighted long-run
variance with the lag chosen by the rule of Hobijn, Franses & Ooms (2004) (statsmodels'
nlags="auto"); autocovariances by FFT, so any lag costs O(T log T). p-value: linear
interpolation in the published table (0.347, 0.463, 0.574, 0.739 at 10, 5, 2.5, 1%), so
p lies between 0.01 and 0.10 and `bounded` says it is at an edge.
"""

from __future__ import annotations

import hashlib
import math
import threading
from collections import OrderedDict
from collections.abc import Callable
from typing import TypeVar

import numpy as np

MAX_ADF_LAG = 24
ROW_BLOCK = 65_536            # rows per block of the cross-product matrix
CACHE_SIZE = 256              # series kept by `cached_by_series`

# MacKinnon (1994), Table 3, N = 1, constant: tau bounds and the two polynomials
_TAU_MAX, _TAU_MIN, _TAU_STAR = 2.74, -18.83, -1.61
_SMALL_P = (2.1659, 1.4412, 3.8269e-2)
_LARGE_P = (1.7339, 9.3202e-1, -1.2745e-1, -1.0368e-2)
# Kwiatkowski et al. (1992), Table 1, level stationarity
_KPSS_CRITICAL = (0.347, 0.463, 0.574, 0.739)
_KPSS_P = (0.10, 0.05, 0.025, 0.01)


def adf_max_lag(n: int) -> int:
    """The largest lag searched for a series of n values (see the module docstring)."""
    return max(0, min(math.ceil(12.0 * (n / 100.0) ** 0.25), MAX_ADF_LAG, n // 2 - 2))


def adf(x: np.ndarray, max_lag: int | None = None) -> tuple[float, float, int]:
    """ADF test with a constant and the lag chosen by AIC: (statistic, p, lag).

    ValueError when the series is too short or its regressors collinear."""
    x = np.asarray(x, dtype=float)
    top = adf_max_lag(x.size) if max_lag is None else int(max_lag)
    if x.size // 2 - 2 < top or x.size < 6:
        raise ValueError(f"a series of {x.size} values is too short for the ADF test")
    dx = np.diff(x)
    r = _cholesky(_cross_products(x, dx, top))
    m = dx.size - top
    tail = np.cumsum((r[:-1, -1] ** 2)[::-1])[::-1]        # tail[j]: drop of SSR after j
    ssr = r[-1, -1] ** 2 + np.append(tail, 0.0)[2:]        # columns 0..j-1 kept, j = 2..top+2
    aic = m * np.log(ssr / m) + 2.0 * np.arange(2, top + 3)
    lag = int(np.argmin(aic))                              # first minimum: the smaller lag
    g = _cross_products(x, dx, lag)
    r = _cholesky(g)
    k = lag + 2
    n_rows = dx.size - lag
    s2 = r[-1, -1] ** 2 / (n_rows - k)
    inverse = np.linalg.inv(g[:k, :k])
    coef = np.linalg.solve(g[:k, :k], g[:k, -1])
    stat = float(coef[1] / math.sqrt(s2 * inverse[1, 1]))
    return stat, mackinnon_p(stat), lag


def mackinnon_p(stat: float) -> float:
    """Approximate p of an ADF statistic (constant, one variable; MacKinnon 1994)."""
    if stat > _TAU_MAX:
        return 1.0
    if stat < _TAU_MIN:
        return 0.0
    coef = _SMALL_P if stat <= _TAU_STAR else _LARGE_P
    z = sum(c * stat ** i for i, c in enumerate(coef))
    return 0.5 * math.erfc(-z / math.sqrt(2.0))


def kpss_level(x: np.ndarray) -> tuple[float, float, int, bool]:
    """KPSS test of level stationarity: (statistic, p, lags, p at the table's edge)."""
    x = np.asarray(x, dtype=float)
    n = x.size
    e = x - x.mean()
    size = 1 << int(2 * n - 1).bit_length()
    spectrum = np.fft.rfft(e, size)
    gamma = np.fft.irfft(spectrum.real ** 2 + spectrum.imag ** 2, size)[:n]  # sum e_t e_{t-i}
    cov_lags = int(n ** (2.0 / 9.0))
    scaled = gamma[1:cov_lags + 1] / (n / 2.0)
    s0 = gamma[0] / n + scaled.sum()
    s1 = float(np.arange(1, cov_lags + 1) @ scaled)
    lags = min(int(1.1447 * ((s1 / s0) ** 2) ** (1.0 / 3.0) * n ** (1.0 / 3.0)), n - 1)
    weights = 1.0 - np.arange(1, lags + 1) / (lags + 1.0)
    long_run = (gamma[0] + 2.0 * float(weights @ gamma[1:lags + 1])) / n
    stat = float(np.sum(np.cumsum(e) ** 2) / n ** 2 / long_run)
    p = float(np.interp(stat, _KPSS_CRITICAL, _KPSS_P))
    return stat, p, lags, p in (_KPSS_P[0], _KPSS_P[-1])


T = TypeVar("T")


def cached_by_series(function: Callable[[np.ndarray], T]) -> Callable[[np.ndarray], T]:
    """`function(x)` remembered by the bytes of x (the last CACHE_SIZE series; thread-safe):
    screening the same item of the same diary again costs one hash."""
    memory: OrderedDict[bytes, T] = OrderedDict()
    lock = threading.Lock()

    def call(x: np.ndarray) -> T:
        x = np.ascontiguousarray(x, dtype=float)
        key = hashlib.blake2b(x.tobytes(), digest_size=20).digest()
        with lock:
            if key in memory:
                memory.move_to_end(key)
                return memory[key]
        out = function(x)
        with lock:
            memory[key] = out
            while len(memory) > CACHE_SIZE:
                memory.popitem(last=False)
        return out

    call.__doc__ = function.__doc__
    call.__name__ = function.__name__
    call.cache_clear = memory.clear  # type: ignore[attr-defined]  # for timing a first run
    return call


def _cross_products(x: np.ndarray, dx: np.ndarray, lag: int) -> np.ndarray:
    """Z'Z of the ADF regression with `lag` lags, Z = [1, x_{t-1}, dx_{t-1..t-lag}, dx_t] over
    t = lag..len(dx)-1, columns centred (leaves the slopes and residuals unchanged)."""
    level = x[:-1] - x.mean()
    diff = dx - dx.mean()
    width = lag + 3
    out = np.zeros((width, width))
    for start in range(lag, dx.size, ROW_BLOCK):
        stop = min(start + ROW_BLOCK, dx.size)
        z = np.empty((stop - start, width))
        z[:, 0] = 1.0
        z[:, 1] = level[start:stop]
        for i in range(1, lag + 1):
            z[:, 1 + i] = diff[start - i:stop - i]
        z[:, -1] = diff[start:stop]
        out += z.T @ z
    return out


def _cholesky(g: np.ndarray) -> np.ndarray:
    """Upper factor R with R'R = g; ValueError when the regressors are collinear."""
    try:
        return np.linalg.cholesky(g).T
    except np.linalg.LinAlgError:
        raise ValueError("the answers change too rarely for the ADF regression") from None

"""Capacity-fade and decay-kinetics fitting: rate laws, AICc choice, confidence intervals.

Four models of the remaining capacity (or concentration, absorbance, integral) y
against time t (h), each written with a rate constant k in 1/h:

- ``linear``               y = y0 (1 - k t)             (zero order; k = initial fractional rate)
- ``first_order``          y = y0 exp(-k t)
- ``first_order_plateau``  y = y_inf + (y0 - y_inf) exp(-k t)
- ``second_order``         y = y0 / (1 + k t)           (k = k2 c0, pseudo-first-order at t = 0)

Models are fitted by non-linear least squares (scipy ``curve_fit``; optional robust
``soft_l1`` loss), compared by AICc (Hurvich & Tsai, Biometrika 1989, 76, 297;
Burnham & Anderson, Model Selection and Multimodel Inference, 2002) and reported with
95 % confidence intervals from the covariance matrix (Student t) or, as an option, a
seeded residual bootstrap (Efron & Tibshirani, An Introduction to the Bootstrap, 1993).
Half-lives: ln2/k (first order), 1/(k2 c0) (second order), c0/(2 k0) (zero order)
(Atkins, Physical Chemistry).

The step around these fits (settings, files, the rate table ``rates.csv``, conversion
of capacity fade to the decomposition rate of the charged species) is in
:mod:`redoxfront.fade.step`.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Callable, Iterable, Mapping

import numpy as np
import pandas as pd
from scipy import optimize, stats

from redoxfront.columns import (
    CI_HIGH_SUFFIX,
    CI_LOW_SUFFIX,
    FADE_AICC,
    FADE_AKAIKE_WEIGHT,
    FADE_CHOSEN,
    FADE_DELTA_AICC,
    FADE_MODEL,
    FADE_N_PARAMS,
    FADE_RSS,
    FADE_Y0,
    FADE_Y_INF,
    K_FADE,
)
from redoxfront.errors import DataError, SettingsError
from redoxfront.units import SECONDS_PER_DAY, SECONDS_PER_HOUR

MODELS: tuple[str, ...] = ("linear", "first_order", "first_order_plateau", "second_order")
HOURS_PER_DAY: float = SECONDS_PER_DAY / SECONDS_PER_HOUR


# ---- rate laws -------------------------------------------------------------------
@dataclass(frozen=True)
class RateLaw:
    """One model y(t; y0, k[, y_inf]) with k in 1/h, and its closed-form figures."""

    name: str
    params: tuple[str, ...]
    order: int
    func: Callable[..., np.ndarray]
    time_to_fraction: Callable[[dict[str, float], float], float]
    half_life_from_k: Callable[[float], float]


def _plateau_time(p: dict[str, float], f: float) -> float:
    y0, k, yi = p["y0"], p["k"], p["y_inf"]
    if k <= 0 or y0 == yi or (f * y0 - yi) / (y0 - yi) <= 0:
        return math.inf
    return -math.log((f * y0 - yi) / (y0 - yi)) / k


def _pos(k: float, value: float) -> float:
    return value if k > 0 else math.inf


RATE_LAWS: dict[str, RateLaw] = {
    "linear": RateLaw(
        "linear", ("y0", "k"), 1, lambda t, y0, k: y0 * (1.0 - k * t),
        lambda p, f: _pos(p["k"], (1.0 - f) / p["k"] if p["k"] else math.inf),
        lambda k: _pos(k, 0.5 / k if k else math.inf)),
    "first_order": RateLaw(
        "first_order", ("y0", "k"), 1, lambda t, y0, k: y0 * np.exp(-k * t),
        lambda p, f: _pos(p["k"], -math.log(f) / p["k"] if p["k"] else math.inf),
        lambda k: _pos(k, math.log(2.0) / k if k else math.inf)),
    "first_order_plateau": RateLaw(
        "first_order_plateau", ("y0", "k", "y_inf"), 1,
        lambda t, y0, k, yi: yi + (y0 - yi) * np.exp(-k * t),
        _plateau_time, lambda k: _pos(k, math.log(2.0) / k if k else math.inf)),
    "second_order": RateLaw(
        "second_order", ("y0", "k"), 2, lambda t, y0, k: y0 / (1.0 + k * t),
        lambda p, f: _pos(p["k"], (1.0 / f - 1.0) / p["k"] if p["k"] else math.inf),
        lambda k: _pos(k, 1.0 / k if k else math.inf)),
}


def first_order_k_from_retention(retention_fraction: float, period_h: float) -> float:
    """First-order k (1/h) from the fraction of capacity kept over one period: k = -ln(r)/period."""
    if not 0.0 < retention_fraction <= 1.0 or period_h <= 0:
        raise DataError(f"retention {retention_fraction!r} must be in (0, 1] and period > 0")
    return -math.log(retention_fraction) / period_h


def retention_percent_per_day(k_per_h: float) -> float:
    """Capacity kept after one day under first-order fade, %: 100 exp(-24 k)."""
    return 100.0 * math.exp(-k_per_h * HOURS_PER_DAY)


def aicc(rss: float, n: int, n_params: int) -> float:
    """AICc of a least-squares fit with Gaussian errors; K = n_params + 1 counts the variance.

    AIC = n ln(RSS/n) + 2K; AICc = AIC + 2K(K+1)/(n-K-1) (Hurvich & Tsai 1989;
    Burnham & Anderson 2002, eq. 2.14 ff.).
    """
    k = n_params + 1
    if n - k - 1 <= 0:
        return math.inf
    return n * math.log(max(rss, 1e-300) / n) + 2 * k + 2 * k * (k + 1) / (n - k - 1)


class FadeModel:
    """Fit one rate law to (t in h, y) and report k (1/h) with a 95 % confidence interval.

    Parameters
    ----------
    model : one of :data:`MODELS`.
    robust : use the ``soft_l1`` loss (scale from the residual MAD of a plain fit).
    bootstrap : number of residual-bootstrap refits for the CI of k; 0 uses the covariance.
    seed : seed of the bootstrap's random generator.
    """

    def __init__(self, model: str = "first_order", *, robust: bool = False, bootstrap: int = 0,
                 seed: int = 0, confidence: float = 0.95) -> None:
        if model not in RATE_LAWS:
            raise SettingsError(f"unknown model '{model}'; allowed: {', '.join(MODELS)}")
        self.model = model
        self.robust = robust
        self.bootstrap = bootstrap
        self.seed = seed
        self.confidence = confidence

    @property
    def law(self) -> RateLaw:
        return RATE_LAWS[self.model]

    # -- fitting in scaled units: t/T and y/Y, so k and y0 are of order one ----------
    def _fit_scaled(self, tn: np.ndarray, yn: np.ndarray, starts: list[np.ndarray],
                    loss: str = "linear", f_scale: float = 1.0) -> tuple[np.ndarray, np.ndarray]:
        lo, hi = self._bounds(yn)
        best: tuple[float, np.ndarray, np.ndarray] | None = None
        for p0 in starts:
            p0 = np.clip(p0, _nudge(lo, 1.0), _nudge(hi, -1.0))
            try:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore", optimize.OptimizeWarning)
                    popt, pcov = optimize.curve_fit(
                        self.law.func, tn, yn, p0=p0, bounds=(lo, hi), method="trf",
                        loss=loss, f_scale=f_scale, x_scale="jac", maxfev=20000)
            except (RuntimeError, ValueError):
                continue
            cost = float(np.sum(_rho(yn - self.law.func(tn, *popt), loss, f_scale)))
            if best is None or cost < best[0]:
                best = (cost, popt, pcov)
        if best is None:
            raise DataError(f"the {self.model} model did not converge")
        return best[1], best[2]

    def _bounds(self, yn: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        if self.model == "first_order_plateau":
            low_inf = min(0.0, 2.0 * float(np.min(yn)))
            return np.array([-np.inf, 0.0, low_inf]), np.array([np.inf, np.inf, float(np.max(yn))])
        if self.model == "second_order":
            return np.array([-np.inf, -0.999]), np.array([np.inf, np.inf])
        return np.array([-np.inf, -np.inf]), np.array([np.inf, np.inf])

    def _starts(self, tn: np.ndarray, yn: np.ndarray) -> list[np.ndarray]:
        pos = yn > 0
        k0 = 1.0
        if pos.sum() >= 2 and np.ptp(tn[pos]) > 0:
            k0 = float(-np.polyfit(tn[pos], np.log(yn[pos]), 1)[0])
        k0 = max(abs(k0), 1e-3)
        y0 = float(yn[0]) if yn[0] != 0 else 1.0
        starts = []
        for f in (1.0, 0.1, 10.0):
            if self.model == "first_order_plateau":
                for yi in (0.0, 0.5 * float(np.min(yn)), 0.9 * float(np.min(yn))):
                    starts.append(np.array([y0, k0 * f, yi]))
            else:
                starts.append(np.array([y0, k0 * f]))
        return starts

    def fit(self, t_h: Iterable[float], y: Iterable[float]) -> "FadeModel":
        """Fit the rate law; t in h from the first point, y in any unit."""
        t = np.asarray(t_h, dtype=float)
        yv = np.asarray(y, dtype=float)
        p = len(self.law.params)
        if len(t) < p + 1:
            raise DataError(f"{self.model}: {len(t)} points, at least {p + 1} needed")
        T = float(np.max(t) - np.min(t)) or 1.0
        Y = float(np.max(np.abs(yv))) or 1.0
        tn, yn = t / T, yv / Y
        popt, pcov = self._fit_scaled(tn, yn, self._starts(tn, yn))
        if self.robust:
            r = yn - self.law.func(tn, *popt)
            scale = max(1.4826 * float(np.median(np.abs(r - np.median(r)))), 1e-12)
            popt, pcov = self._fit_scaled(tn, yn, [popt], loss="soft_l1", f_scale=scale)
        scale_vec = np.array([Y, 1.0 / T, Y][:p])
        self.params_ = {name: float(v * s) for name, v, s in zip(self.law.params, popt, scale_vec)}
        self.cov_ = pcov * np.outer(scale_vec, scale_vec)
        self.n_ = len(t)
        self.dof_ = self.n_ - p
        self.residuals_ = yv - self.predict(t)
        self.rss_ = float(np.sum(self.residuals_**2))
        self.aicc_ = aicc(self.rss_, self.n_, p)
        self.stderr_ = {name: float(math.sqrt(max(self.cov_[i, i], 0.0)))
                        if np.isfinite(self.cov_[i, i]) else math.nan
                        for i, name in enumerate(self.law.params)}
        tq = float(stats.t.ppf(0.5 + self.confidence / 2.0, self.dof_)) if self.dof_ > 0 else math.inf
        k, se = self.params_["k"], self.stderr_["k"]
        self.k_ci_ = (k - tq * se, k + tq * se)
        self.ci_method_ = "covariance"
        if self.bootstrap > 0:
            self._bootstrap(t, yv, T, Y)
        return self

    def _bootstrap(self, t: np.ndarray, y: np.ndarray, T: float, Y: float) -> None:
        rng = np.random.default_rng(self.seed)
        fitted = self.predict(t)
        resid = self.residuals_ * math.sqrt(self.n_ / max(self.dof_, 1))  # leverage-free inflation
        start = np.array([self.params_[n] for n in self.law.params]) / np.array([Y, 1.0 / T, Y][
            : len(self.law.params)])
        ks = []
        for _ in range(self.bootstrap):
            yb = (fitted + rng.choice(resid, size=len(resid), replace=True)) / Y
            try:
                popt, _ = self._fit_scaled(t / T, yb, [start])
            except DataError:
                continue
            ks.append(popt[1] / T)
        if len(ks) >= max(10, self.bootstrap // 2):
            a = (1.0 - self.confidence) / 2.0
            self.k_ci_ = (float(np.quantile(ks, a)), float(np.quantile(ks, 1.0 - a)))
            self.ci_method_ = f"bootstrap ({len(ks)} refits)"
        self.bootstrap_k_ = np.asarray(ks)

    def predict(self, t_h: Iterable[float]) -> np.ndarray:
        """Model value at times t (h)."""
        return self.law.func(np.asarray(t_h, dtype=float),
                             *[self.params_[n] for n in self.law.params])

    def time_to_fraction(self, fraction: float) -> float:
        """Time (h) until y falls to ``fraction`` of y0; inf if never."""
        return self.law.time_to_fraction(self.params_, fraction)


def _nudge(bound: np.ndarray, direction: float) -> np.ndarray:
    """Move finite bounds a hair inwards so a start value is strictly feasible."""
    out = bound.astype(float).copy()
    fin = np.isfinite(out)
    out[fin] = out[fin] + direction * 1e-9 * (np.abs(out[fin]) + 1.0)
    return out


def _rho(r: np.ndarray, loss: str, f_scale: float) -> np.ndarray:
    if loss == "soft_l1":
        z = (r / f_scale) ** 2
        return 2.0 * (np.sqrt(1.0 + z) - 1.0)
    return r**2


@dataclass(frozen=True)
class ModelChoice:
    """All models fitted to one series, their AICc, and the chosen one."""

    fits: Mapping[str, FadeModel]
    chosen: str
    skipped: Mapping[str, str]

    def table(self) -> pd.DataFrame:
        """AICc, delta AICc, Akaike weight and k (1/h) with CI of every model fitted."""
        rows = []
        best = min(f.aicc_ for f in self.fits.values())
        w = {m: math.exp(-0.5 * (f.aicc_ - best)) for m, f in self.fits.items()}
        wsum = sum(w.values())
        for m, f in self.fits.items():
            rows.append({FADE_MODEL: m, FADE_CHOSEN: m == self.chosen, FADE_N_PARAMS: len(f.law.params),
                         FADE_AICC: f.aicc_, FADE_DELTA_AICC: f.aicc_ - best,
                         FADE_AKAIKE_WEIGHT: w[m] / wsum, FADE_RSS: f.rss_, K_FADE: f.params_["k"],
                         K_FADE + CI_LOW_SUFFIX: f.k_ci_[0], K_FADE + CI_HIGH_SUFFIX: f.k_ci_[1],
                         FADE_Y0: f.params_["y0"], FADE_Y_INF: f.params_.get("y_inf", math.nan)})
        return pd.DataFrame(rows)


def choose_model(t_h: np.ndarray, y: np.ndarray, models: Iterable[str] = MODELS, *,
                 allowed: Iterable[str] | None = None, robust: bool = False) -> ModelChoice:
    """Fit each model (those with enough points for AICc: n >= p + 3) and pick the lowest AICc.

    ``allowed`` restricts the choice (not the fitting) to some of the models.
    """
    fits: dict[str, FadeModel] = {}
    skipped: dict[str, str] = {}
    for m in models:
        p = len(RATE_LAWS[m].params)
        if len(t_h) < p + 3:
            skipped[m] = f"{len(t_h)} points, AICc needs at least {p + 3}"
            continue
        try:
            fits[m] = FadeModel(m, robust=robust).fit(t_h, y)
        except DataError as exc:
            skipped[m] = str(exc)
    pool = [m for m in fits if allowed is None or m in set(allowed)]
    if not pool:
        raise DataError("no model could be fitted: " + "; ".join(f"{m}: {r}" for m, r in skipped.items()))
    chosen = min(pool, key=lambda m: fits[m].aicc_)
    return ModelChoice(fits, chosen, skipped)

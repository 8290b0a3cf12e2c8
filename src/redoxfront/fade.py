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

Capacity fade of a cycled cell is converted to the decomposition rate of the charged
species with the time-averaged state of charge s (docs/fade.md): if only the charged
form decays, with order n, the total capacity fades with k_fade ~ k_dec * s**n, so
k_dec = k_fade / s**n (exact for first order; for second order exact only at constant
state of charge). Symmetric-cell data isolate one electrolyte (Goulet & Aziz,
J. Electrochem. Soc. 2018); full-cell data may include fade of the other side and
crossover, so their k is an upper bound and is labelled ``full``.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Iterable, Mapping

import numpy as np
import pandas as pd
from scipy import optimize, stats

from redoxfront import columns
from redoxfront.campaign import bounded, choice, load_campaign, section_from_mapping
from redoxfront.cycling import (
    CAPACITY_UNITS_MAH, CYCLE, ROLES, SIGNAL, TIME_H, TIME_UNITS_H, USED, SeriesData, load_series,
)
from redoxfront.errors import DataError, RedoxfrontError, SettingsError
from redoxfront.units import SECONDS_PER_DAY, SECONDS_PER_HOUR

MODELS: tuple[str, ...] = ("linear", "first_order", "first_order_plateau", "second_order")
HOURS_PER_DAY: float = SECONDS_PER_DAY / SECONDS_PER_HOUR

# ---- rate table (results/rates.csv) columns; read by the model-fitting step ----------
K_FIRST = "k_per_h"
K_SECOND = "k_l_per_mol_per_h"
K_FADE = "k_fade_per_h"
CI_LOW = "_ci95_low"
CI_HIGH = "_ci95_high"
CAPACITY_HALF_LIFE = "capacity_half_life_h"
FADE_PER_DAY = "fade_percent_per_day"
FADE_PER_CYCLE = "fade_percent_per_cycle"
TIME_TO_80 = "time_to_80_percent_h"
MEAN_SOC = "mean_state_of_charge"
RATE_TABLE_COLUMNS: tuple[str, ...] = (
    columns.ID, "status", "model", "data_kind", "cell_type", MEAN_SOC,
    K_FIRST, K_FIRST + CI_LOW, K_FIRST + CI_HIGH,
    columns.LOG10_K_FIRST, columns.LOG10_K_FIRST + CI_LOW, columns.LOG10_K_FIRST + CI_HIGH,
    K_SECOND, K_SECOND + CI_LOW, K_SECOND + CI_HIGH,
    columns.LOG10_K_SECOND, columns.LOG10_K_SECOND + CI_LOW, columns.LOG10_K_SECOND + CI_HIGH,
    K_FADE, K_FADE + CI_LOW, K_FADE + CI_HIGH,
    columns.HALF_LIFE, columns.HALF_LIFE + CI_LOW, columns.HALF_LIFE + CI_HIGH,
    CAPACITY_HALF_LIFE, FADE_PER_DAY, FADE_PER_CYCLE, TIME_TO_80,
    "ci_method", "n_points_used", "n_points_read", "source_file",
)
"""Columns of ``rates.csv`` in order. The target of the stability model is
``log10_k_per_h`` (decomposition of the charged species, 1/h); second-order fits
also fill ``log10_k_l_per_mol_per_h`` (L/(mol h)) when c0 is known."""


@dataclass(frozen=True)
class FadeSettings:
    """The ``[fade]`` campaign section (see docs/fade.md for every key)."""

    column_map: dict[str, str] = field(default_factory=dict)
    time_unit: str | None = field(default=None, metadata=choice(*TIME_UNITS_H))
    capacity_unit: str | None = field(default=None, metadata=choice(*CAPACITY_UNITS_MAH))
    capacity_basis: str = field(default="discharge", metadata=choice("discharge", "charge"))
    hours_per_cycle: float | None = field(default=None, metadata=bounded(1e-9, None))
    skip_first_cycles: int = field(default=0, metadata=bounded(0, None))
    models: tuple[str, ...] = MODELS
    rate_order: str = field(default="auto", metadata=choice("auto", "first", "second"))
    bootstrap: int = field(default=0, metadata=bounded(0, 100000))
    seed: int = field(default=20261201, metadata=bounded(0, 2**31 - 1))
    robust_loss: bool = False
    drop_spikes: bool = True
    spike_threshold: float = field(default=6.0, metadata=bounded(2.0, None))
    cell_type: str = field(default="symmetric", metadata=choice("symmetric", "full"))
    mean_state_of_charge: float = field(default=0.5, metadata=bounded(0.01, 1.0))
    initial_concentration_mol_per_l: float | None = field(default=None, metadata=bounded(1e-9, None))
    min_points: int = field(default=5, metadata=bounded(3, None))
    figures: bool = True
    figure_format: str = field(default="png", metadata=choice("png", "svg"))

    def __post_init__(self) -> None:
        if not self.models:
            raise SettingsError(f"[fade] models is empty; allowed values: {', '.join(MODELS)}")
        for m in self.models:
            if m not in MODELS:
                raise SettingsError(f"[fade] models: '{m}' is not a model; allowed values: "
                                    + ", ".join(MODELS))
        for role, header in self.column_map.items():
            if role not in ROLES:
                raise SettingsError(f"[fade] column_map key '{role}' is not a role; allowed keys: "
                                    + ", ".join(ROLES))
            if not isinstance(header, str):
                raise SettingsError(f"[fade] column_map.{role}: expected a header text, got {header!r}")
        if self.rate_order == "second" and "second_order" not in self.models:
            raise SettingsError("[fade] rate_order = 'second' needs 'second_order' in [fade] models")


def fade_settings(mapping: Mapping[str, Any] | None) -> FadeSettings:
    """Validate a ``[fade]`` table into :class:`FadeSettings`."""
    return section_from_mapping(FadeSettings, mapping, "fade")


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
            rows.append({"model": m, "chosen": m == self.chosen, "n_params": len(f.law.params),
                         "aicc": f.aicc_, "delta_aicc": f.aicc_ - best,
                         "akaike_weight": w[m] / wsum, "rss": f.rss_, K_FADE: f.params_["k"],
                         K_FADE + CI_LOW: f.k_ci_[0], K_FADE + CI_HIGH: f.k_ci_[1],
                         "y0": f.params_["y0"], "y_inf": f.params_.get("y_inf", math.nan)})
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


@dataclass(frozen=True)
class DatasetResult:
    """The fit of one dataset: the series, all models, the chosen one and its rates-table row."""

    dataset_id: str
    series: SeriesData
    choice: ModelChoice
    chosen_fit: FadeModel
    row: Mapping[str, Any]
    t0_h: float


def _log10(x: float) -> float:
    return math.log10(x) if x > 0 and math.isfinite(x) else math.nan


def fit_series(series: SeriesData, settings: FadeSettings, dataset_id: str) -> DatasetResult:
    """Fit one loaded series and compute its derived figures (one row of ``rates.csv``)."""
    tab = series.table[series.table[USED]]
    n = len(tab)
    if n < settings.min_points:
        raise DataError(f"{series.source}: {n} usable points, at least {settings.min_points} "
                        f"needed (of {len(series.table)} read; see the hygiene report)")
    t0 = float(tab[TIME_H].iloc[0])
    t = tab[TIME_H].to_numpy(float) - t0
    y = tab[SIGNAL].to_numpy(float)
    allowed = None
    if settings.rate_order == "first":
        allowed = [m for m in settings.models if m != "second_order"]
    elif settings.rate_order == "second":
        allowed = ["second_order"]
    mc = choose_model(t, y, settings.models, allowed=allowed, robust=settings.robust_loss)
    chosen = mc.chosen
    fit = FadeModel(chosen, robust=settings.robust_loss, bootstrap=settings.bootstrap,
                    seed=settings.seed).fit(t, y) if settings.bootstrap else mc.fits[chosen]
    law = fit.law
    decay = series.kind == "decay"
    soc = 1.0 if decay else settings.mean_state_of_charge
    conv = soc**law.order
    k_fade, (lo_fade, hi_fade) = fit.params_["k"], fit.k_ci_
    k, lo, hi = k_fade / conv, lo_fade / conv, hi_fade / conv
    k2 = k2_lo = k2_hi = math.nan
    if law.order == 2:
        c0 = (fit.params_["y0"] if series.signal_unit_factor_to_mol_per_l is not None
              else settings.initial_concentration_mol_per_l)
        if c0 and c0 > 0:
            k2, k2_lo, k2_hi = k / c0, lo / c0, hi / c0
    per_cycle = math.nan
    cyc = tab[CYCLE].to_numpy(float)
    if not decay and np.all(np.isfinite(cyc)) and n >= len(law.params) + 1:
        try:
            fc = FadeModel(chosen, robust=settings.robust_loss).fit(cyc - cyc[0], y)
            per_cycle = 100.0 * (1.0 - float(fc.predict([1.0])[0] / fc.predict([0.0])[0]))
        except DataError:
            pass
    y0 = float(fit.predict([0.0])[0])
    per_day = 100.0 * (1.0 - float(fit.predict([HOURS_PER_DAY])[0]) / y0) if y0 else math.nan
    hl = law.half_life_from_k
    row = {
        columns.ID: dataset_id, "status": "ok", "model": chosen, "data_kind": series.kind,
        "cell_type": "decay" if decay else settings.cell_type, MEAN_SOC: soc,
        K_FIRST: k, K_FIRST + CI_LOW: lo, K_FIRST + CI_HIGH: hi,
        columns.LOG10_K_FIRST: _log10(k), columns.LOG10_K_FIRST + CI_LOW: _log10(lo),
        columns.LOG10_K_FIRST + CI_HIGH: _log10(hi),
        K_SECOND: k2, K_SECOND + CI_LOW: k2_lo, K_SECOND + CI_HIGH: k2_hi,
        columns.LOG10_K_SECOND: _log10(k2), columns.LOG10_K_SECOND + CI_LOW: _log10(k2_lo),
        columns.LOG10_K_SECOND + CI_HIGH: _log10(k2_hi),
        K_FADE: k_fade, K_FADE + CI_LOW: lo_fade, K_FADE + CI_HIGH: hi_fade,
        columns.HALF_LIFE: hl(k), columns.HALF_LIFE + CI_LOW: hl(hi) if hi > 0 else math.nan,
        columns.HALF_LIFE + CI_HIGH: hl(lo) if lo > 0 else math.inf,
        CAPACITY_HALF_LIFE: fit.time_to_fraction(0.5), FADE_PER_DAY: per_day,
        FADE_PER_CYCLE: per_cycle, TIME_TO_80: fit.time_to_fraction(0.8),
        "ci_method": fit.ci_method_, "n_points_used": n, "n_points_read": len(series.table),
        "source_file": series.source,
    }
    return DatasetResult(dataset_id, series, mc, fit, row, t0)


def fit_fade_file(path: str | Path, settings: FadeSettings | None = None,
                  dataset_id: str | None = None) -> DatasetResult:
    """Load one cycler or decay file and fit it; id from ``dataset_id``, an id column or the file stem."""
    s = settings or FadeSettings()
    series = load_series(
        path, column_map=s.column_map, time_unit=s.time_unit, capacity_unit=s.capacity_unit,
        capacity_basis=s.capacity_basis, hours_per_cycle=s.hours_per_cycle,
        skip_first_cycles=s.skip_first_cycles, drop_spikes=s.drop_spikes,
        spike_threshold=s.spike_threshold)
    return fit_series(series, s, dataset_id or series.dataset_id or Path(path).stem)


DATA_SUFFIXES: tuple[str, ...] = (".csv", ".tsv", ".tab", ".txt", ".xlsx", ".xlsm")


def data_files(paths: str | Path | Iterable[str | Path]) -> list[Path]:
    """Expand files and folders into the data files to read (sorted; README files skipped)."""
    items = [paths] if isinstance(paths, (str, Path)) else list(paths)
    out: list[Path] = []
    for item in items:
        p = Path(item)
        if p.is_dir():
            out.extend(sorted(f for f in p.iterdir() if f.is_file()
                              and f.suffix.lower() in DATA_SUFFIXES
                              and not f.stem.lower().startswith("readme")))
        elif p.is_file():
            out.append(p)
        else:
            raise SettingsError(f"cycling input {p} does not exist; give an existing file or folder")
    if not out:
        raise SettingsError(f"no data files ({', '.join(DATA_SUFFIXES)}) found in {', '.join(map(str, items))}")
    return out


def fit_fade_folder(paths: str | Path | Iterable[str | Path], settings: FadeSettings | None,
                    out_dir: str | Path, progress: bool = True) -> pd.DataFrame:
    """Fit every file; write ``rates.csv``, ``fade_models.csv``, ``fade_cycles.csv``,
    ``fade_report.md`` and one figure per dataset to ``out_dir``; return the rate table.

    A file that cannot be used gets a row with its error in ``status`` and does not stop the batch.
    """
    from tqdm import tqdm

    s = settings or FadeSettings()
    files = data_files(paths)
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    rows, model_tabs, cycle_tabs = [], [], []
    report = ["# Capacity-fade fitting report", "",
              f"Settings: cell_type = {s.cell_type}, mean_state_of_charge = "
              f"{s.mean_state_of_charge:g}, models = {', '.join(s.models)}, rate_order = "
              f"{s.rate_order}, robust_loss = {s.robust_loss}, bootstrap = {s.bootstrap}.", ""]
    seen: set[str] = set()
    for f in tqdm(files, desc="fade", unit="file", disable=not progress or len(files) < 2):
        try:
            res = fit_fade_file(f, s)
        except RedoxfrontError as exc:
            rows.append({columns.ID: f.stem, "status": f"error: {exc}", "source_file": str(f)})
            report += [f"## {f.name}", "", f"- not fitted: {exc}", ""]
            continue
        did = res.dataset_id
        if did in seen:
            report.append(f"(id '{did}' appears in more than one file)")
        seen.add(did)
        rows.append(dict(res.row))
        mt = res.choice.table()
        mt.insert(0, columns.ID, did)
        model_tabs.append(mt)
        ct = res.series.table.copy()
        ct.insert(0, columns.ID, did)
        cycle_tabs.append(ct)
        report += [f"## {f.name} (id {did}, {res.series.kind})", ""]
        report += [f"- {line}" for line in res.series.report]
        report += [f"- model {m} skipped: {why}" for m, why in res.choice.skipped.items()]
        report += [f"- chosen model: {res.choice.chosen} (lowest AICc); k_fade = "
                   f"{res.chosen_fit.params_['k']:.4g} 1/h, k = {res.row[K_FIRST]:.4g} 1/h "
                   f"(95 % CI {res.row[K_FIRST + CI_LOW]:.4g} to {res.row[K_FIRST + CI_HIGH]:.4g}, "
                   f"{res.chosen_fit.ci_method_})", ""]
        if s.figures:
            from redoxfront.fade_plots import plot_fade_fit

            name = "".join(ch if ch.isalnum() or ch in "-_." else "_" for ch in did)
            plot_fade_fit(res, out / "figures" / f"fade_{name}.{s.figure_format}")
    rates = pd.DataFrame(rows).reindex(columns=list(RATE_TABLE_COLUMNS))
    rates.to_csv(out / "rates.csv", index=False)
    if model_tabs:
        pd.concat(model_tabs, ignore_index=True).to_csv(out / "fade_models.csv", index=False)
        pd.concat(cycle_tabs, ignore_index=True).to_csv(out / "fade_cycles.csv", index=False)
    (out / "fade_report.md").write_text("\n".join(report) + "\n", encoding="utf-8")
    return rates


def fade_campaign(campaign: str | Path, input_path: str | Path | None = None,
                  out_dir: str | Path | None = None, progress: bool = True) -> pd.DataFrame:
    """The ``fade`` command: read ``[fade]`` and ``[inputs] cycling`` of a campaign and fit."""
    camp = load_campaign(campaign)
    settings = fade_settings(camp.section("fade"))
    if input_path is None:
        if camp.inputs.cycling is None:
            raise SettingsError("no cycling data given: pass --input FILE_OR_FOLDER or set "
                                "[inputs] cycling = 'inputs/cycling' in the campaign")
        input_path = camp.path(camp.inputs.cycling)
    out = Path(out_dir) if out_dir is not None else camp.results_dir
    return fit_fade_folder(input_path, settings, out, progress=progress)

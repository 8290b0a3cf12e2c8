"""Ordinary least squares with the validation statistics a QSPR model needs.

One small estimator, :class:`OLSModel` (``fit`` / ``predict``), with intercept:
coefficients, standard errors, p-values, standardised coefficients, R2, adjusted
R2, F, RMSE, variance inflation factors; leave-one-out and k-fold Q2 in closed
form through the hat matrix (PRESS); y-randomisation; leverage and applicability
domain (h* = 3(p+1)/n); 95 % prediction intervals; and every coefficient as a
change of activation free energy, ddG‡ = -RT ln(10) d(log10 k), kcal/mol. Models
are saved and reloaded as JSON (:func:`load_model`). The campaign step that fits a
campaign's rate model is :func:`redoxfront.statistics.step.fit_campaign`.

References
----------
- Least squares by Householder QR of the column-scaled design: Golub & Van Loan,
  Matrix Computations, 4th ed., 2013, ch. 5.
- PRESS and the leave-one-out residual e_i / (1 - h_ii): Allen, Technometrics 1974,
  16, 125; the block (k-fold) form e_F / (I - H_FF): Belsley, Kuh & Welsch,
  Regression Diagnostics, 1980 (from memory).
- Validation, y-randomisation and the leverage domain: Tropsha, Mol. Inf. 2010, 29,
  476; OECD QSAR validation principles (2007); Rücker, Rücker & Meringer,
  J. Chem. Inf. Model. 2007, 47, 2345 (y-randomisation).
- External Q2 (F1): Shi et al., J. Chem. Inf. Comput. Sci. 2001, 41, 186 (from memory).
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Sequence

import numpy as np
import pandas as pd
from scipy import linalg, stats

from redoxfront.errors import DataError
from redoxfront.outputs import read_json_file, regenerate_hint, write_json
from redoxfront.units import STANDARD_TEMPERATURE_K, rt_ln10_kcal_per_mol

INTERCEPT = "intercept"
PI_LEVEL = 0.95
"""Coverage of every prediction interval (the column names say pi95)."""
VIF_WARN = 10.0
"""VIF above which a warning is raised (common practice, no source)."""
COLLINEAR_RCOND = 1e-10
"""Smallest singular value / largest of the standardised terms below which the
terms are called collinear and the fit refuses to run."""
MODEL_FORMAT = "redoxfront-ols-1"


def _as_matrix(
    X: Any, names: Sequence[str] | None
) -> tuple[np.ndarray, list[str], list[str] | None]:
    if isinstance(X, pd.DataFrame):
        ids = [str(i) for i in X.index]
        return X.to_numpy(dtype=float), [str(c) for c in X.columns], ids
    arr = np.asarray(X, dtype=float)
    if arr.ndim == 1:
        arr = arr[:, None]
    if names is None:
        names = [f"x{j + 1}" for j in range(arr.shape[1])]
    return arr, list(names), None


def check_design(X: np.ndarray, y: np.ndarray, names: Sequence[str], ids: Sequence[str]) -> None:
    """Raise :class:`DataError` for data an OLS fit cannot use, saying what to fix.

    Checks: missing values, fewer rows than terms + 2, a constant target, constant
    or collinear terms.
    """
    n, p = X.shape
    bad_y = [ids[i] for i in np.flatnonzero(~np.isfinite(y))]
    if bad_y:
        raise DataError(
            f"target missing or not finite for row(s) {', '.join(bad_y[:10])}; "
            "add the measured value or remove these rows from the training data"
        )
    for j, name in enumerate(names):
        bad = [ids[i] for i in np.flatnonzero(~np.isfinite(X[:, j]))]
        if bad:
            raise DataError(
                f"term '{name}' missing or not finite for row(s) {', '.join(bad[:10])}; "
                "fix the descriptor, remove these rows, or choose another term"
            )
    if n < p + 2:
        raise DataError(
            f"{n} training rows for {p} term(s) + intercept: need at least {p + 2}; "
            f"add {p + 2 - n} more measured row(s) or remove term(s)"
        )
    if np.ptp(y) == 0.0:
        raise DataError(
            "the target is the same for every training row; a model needs rows with "
            "different measured values"
        )
    if p == 0:
        return
    sd = X.std(axis=0)
    const = [names[j] for j in np.flatnonzero(sd <= 1e-12 * np.maximum(1.0, np.abs(X).max(axis=0)))]
    if const:
        raise DataError(
            f"term(s) {', '.join(const)} take the same value in every training row; "
            "remove them or add rows where they differ"
        )
    Z = (X - X.mean(axis=0)) / sd
    sv = np.linalg.svd(Z, compute_uv=False)
    if sv[-1] <= COLLINEAR_RCOND * sv[0]:
        # name the terms that take part in the near-null direction
        _, _, vt = np.linalg.svd(Z)
        part = [names[j] for j in np.flatnonzero(np.abs(vt[-1]) > 0.1)]
        raise DataError(
            f"terms {', '.join(part)} are collinear (one is a linear combination of the "
            "others over the training rows); remove one of them"
        )


@dataclass(frozen=True)
class YRandomisation:
    """Scrambled-target statistics: R2 and LOO Q2 of ``n`` seeded permutations."""

    r2: np.ndarray
    q2: np.ndarray
    seed: int
    p_value_q2: float
    """(1 + #{scrambled Q2 >= real Q2}) / (n + 1)."""

    def summary(self) -> dict[str, float]:
        return {
            "n_permutations": int(self.r2.size),
            "seed": int(self.seed),
            "r2_mean": float(np.mean(self.r2)),
            "r2_max": float(np.max(self.r2)),
            "q2_mean": float(np.mean(self.q2)),
            "q2_max": float(np.max(self.q2)),
            "q2_p95": float(np.percentile(self.q2, 95)),
            "p_value_q2": float(self.p_value_q2),
        }


def one_dof_warning(n: int, p: int) -> str:
    """The warning every output carries for a fit with one residual degree of freedom (n = p + 2)."""
    return (f"WARNING: {n} rows for {p} term(s) + intercept leave one residual degree of freedom: "
            "the scatter, standard errors, prediction intervals and Q2 rest on a single spare point "
            "and cannot be trusted; add measured rows before acting on this fit")


class OLSModel:
    """Ordinary least squares with intercept, validation statistics and intervals.

    Parameters
    ----------
    kfold : number of folds for the k-fold Q2 (capped at n; n folds = LOO).
    n_permutations : y-randomisation rounds (0 to skip).
    seed : seed for fold assignment and permutations.
    temperature_k : temperature (K) for ddG‡ = -RT ln(10) x coefficient, kcal/mol.
    """

    def __init__(
        self,
        kfold: int = 5,
        n_permutations: int = 200,
        seed: int = 0,
        temperature_k: float = STANDARD_TEMPERATURE_K,
    ) -> None:
        self.kfold = kfold
        self.n_permutations = n_permutations
        self.seed = seed
        self.temperature_k = temperature_k

    # ------------------------------------------------------------------ fit
    def fit(
        self,
        X: Any,
        y: Any,
        names: Sequence[str] | None = None,
        ids: Sequence[str] | None = None,
    ) -> "OLSModel":
        """Fit y = b0 + sum_j b_j x_j by least squares (QR of the column-scaled design)."""
        Xm, names_, ids_from_frame = _as_matrix(X, names)
        yv = np.asarray(y, dtype=float).ravel()
        n, p = Xm.shape
        if yv.size != n:
            raise DataError(f"{n} rows of terms but {yv.size} target values; give one per row")
        ids_ = [str(i) for i in (ids if ids is not None else ids_from_frame or range(1, n + 1))]
        check_design(Xm, yv, names_, ids_)
        A = np.column_stack([np.ones(n), Xm])
        scale = np.linalg.norm(A, axis=0)
        Q, R = np.linalg.qr(A / scale)
        coef_s = linalg.solve_triangular(R, Q.T @ yv)
        Rinv = linalg.solve_triangular(R, np.eye(p + 1))
        self.names_ = names_
        self.ids_ = ids_
        self.X_ = Xm
        self.y_ = yv
        self.n_, self.p_ = n, p
        self.df_resid_ = n - p - 1
        self.coef_ = coef_s / scale
        self.xtx_inv_ = (Rinv @ Rinv.T) / np.outer(scale, scale)
        self.hat_ = np.einsum("ij,ij->i", Q, Q)
        self.fitted_ = A @ self.coef_
        self.resid_ = yv - self.fitted_
        self._Q = Q
        self._compute_statistics()
        self.kfold_q2_, self.kfold_folds_ = self._kfold_q2()
        self.y_randomisation_ = (
            self.y_randomise(self.n_permutations, self.seed) if self.n_permutations > 0 else None
        )
        return self

    def _compute_statistics(self) -> None:
        n, p, df = self.n_, self.p_, self.df_resid_
        y, e = self.y_, self.resid_
        self.rss_ = float(e @ e)
        self.tss_ = float(np.sum((y - y.mean()) ** 2))
        self.sigma2_ = self.rss_ / df
        self.residual_standard_error_ = math.sqrt(self.sigma2_)
        self.rmse_ = math.sqrt(self.rss_ / n)
        self.r2_ = 1.0 - self.rss_ / self.tss_
        self.adj_r2_ = 1.0 - (1.0 - self.r2_) * (n - 1) / df
        if p > 0:
            self.f_ = ((self.tss_ - self.rss_) / p) / self.sigma2_
            self.f_p_value_ = float(stats.f.sf(self.f_, p, df))
        else:
            self.f_, self.f_p_value_ = float("nan"), float("nan")
        self.se_ = np.sqrt(np.diag(self.xtx_inv_) * self.sigma2_)
        self.t_ = self.coef_ / self.se_
        self.p_values_ = 2.0 * stats.t.sf(np.abs(self.t_), df)
        sx = self.X_.std(axis=0, ddof=1)
        self.standardised_coef_ = self.coef_[1:] * sx / y.std(ddof=1)
        if p >= 2:
            corr = np.corrcoef(self.X_, rowvar=False)
            self.vif_ = np.diag(np.linalg.inv(corr))
        else:
            self.vif_ = np.ones(p)
        h = self.hat_
        with np.errstate(divide="ignore", invalid="ignore"):
            self.loo_resid_ = np.where(h < 1 - 1e-10, e / (1.0 - h), np.nan)
            self.standardised_resid_ = np.where(
                h < 1 - 1e-10, e / (self.residual_standard_error_ * np.sqrt(1.0 - h)), np.nan
            )
        self.press_ = float(np.sum(self.loo_resid_**2))
        self.q2_loo_ = 1.0 - self.press_ / self.tss_
        self.loo_mae_ = float(np.mean(np.abs(self.loo_resid_)))
        self.leverage_threshold_ = 3.0 * (p + 1) / n
        self.warnings_: list[str] = []
        for name, v in zip(self.names_, self.vif_):
            if v > VIF_WARN:
                self.warnings_.append(
                    f"term '{name}' has VIF {v:.1f} (> {VIF_WARN:g}): it is largely explained "
                    "by the other terms; its coefficient is unstable"
                )
        if np.isnan(self.q2_loo_):
            self.warnings_.append("a training row has leverage 1; LOO Q2 is undefined")
        self.residual_dof_ = n - p - 1
        if self.residual_dof_ == 1:
            self.warnings_.insert(0, one_dof_warning(n, p))

    def _kfold_q2(self) -> tuple[float, np.ndarray]:
        """k-fold Q2 in closed form: each fold's held-out residuals are (I - H_FF)^-1 e_F."""
        n = self.n_
        k = max(2, min(int(self.kfold), n))
        rng = np.random.default_rng(self.seed)
        folds = np.empty(n, dtype=int)
        folds[rng.permutation(n)] = np.arange(n) % k
        press = 0.0
        for f in range(k):
            idx = np.flatnonzero(folds == f)
            QF = self._Q[idx]
            M = np.eye(idx.size) - QF @ QF.T
            try:
                ecv = np.linalg.solve(M, self.resid_[idx])
            except np.linalg.LinAlgError:
                return float("nan"), folds
            press += float(ecv @ ecv)
        return 1.0 - press / self.tss_, folds

    def y_randomise(self, n_permutations: int, seed: int) -> YRandomisation:
        """R2 and LOO Q2 of the same terms fitted to ``n_permutations`` scrambled targets.

        All permutations share the hat matrix, so this is a few matrix products.
        """
        rng = np.random.default_rng(seed)
        Y = np.stack([rng.permutation(self.y_) for _ in range(n_permutations)], axis=1)
        E = Y - self._Q @ (self._Q.T @ Y)
        rss = np.sum(E**2, axis=0)
        r2 = 1.0 - rss / self.tss_
        with np.errstate(divide="ignore", invalid="ignore"):
            press = np.sum((E / (1.0 - self.hat_)[:, None]) ** 2, axis=0)
        q2 = 1.0 - press / self.tss_
        pval = (1.0 + np.sum(q2 >= self.q2_loo_)) / (n_permutations + 1.0)
        return YRandomisation(r2=r2, q2=q2, seed=seed, p_value_q2=float(pval))

    # ------------------------------------------------------------ predict
    def _design(self, X: Any) -> np.ndarray:
        if isinstance(X, pd.DataFrame):
            missing = [c for c in self.names_ if c not in X.columns]
            if missing:
                raise DataError(f"prediction table lacks model term(s) {', '.join(missing)}")
            Xm = X[self.names_].to_numpy(dtype=float)
        else:
            Xm = np.asarray(X, dtype=float)
            if Xm.ndim == 1:
                Xm = Xm[:, None] if self.p_ == 1 else Xm[None, :]
        return np.column_stack([np.ones(len(Xm)), Xm])

    def predict(self, X: Any) -> np.ndarray:
        """Point predictions (NaN where a term is missing)."""
        return self._design(X) @ self.coef_

    def leverage(self, X: Any) -> np.ndarray:
        """Leverage h = x0 (X'X)^-1 x0' of new rows (intercept included)."""
        A = self._design(X)
        return np.einsum("ij,jk,ik->i", A, self.xtx_inv_, A)

    def predict_interval(self, X: Any, level: float = PI_LEVEL) -> pd.DataFrame:
        """Prediction, its 95 % prediction interval, leverage and domain flag per row.

        Interval: yhat +/- t(1-(1-level)/2, n-p-1) * s * sqrt(1 + h0).
        Domain: 'inside' if h0 <= h* = 3(p+1)/n else 'extrapolating' (Tropsha 2010).
        """
        A = self._design(X)
        yhat = A @ self.coef_
        h0 = np.einsum("ij,jk,ik->i", A, self.xtx_inv_, A)
        tq = stats.t.ppf(0.5 + level / 2.0, self.df_resid_)
        half = tq * self.residual_standard_error_ * np.sqrt(1.0 + h0)
        domain = np.where(
            np.isnan(yhat), "not predicted",
            np.where(h0 > self.leverage_threshold_, "extrapolating", "inside"),
        )
        index = X.index if isinstance(X, pd.DataFrame) else None
        return pd.DataFrame(
            {
                "prediction": yhat,
                "pi_low": yhat - half,
                "pi_high": yhat + half,
                "leverage": h0,
                "leverage_threshold": self.leverage_threshold_,
                "domain": domain,
            },
            index=index,
        )

    def external_validation(self, X: Any, y: Any) -> dict[str, float]:
        """Q2_ext (F1, against the training mean), R2 of observed vs predicted, RMSE."""
        yv = np.asarray(y, dtype=float).ravel()
        yhat = self.predict(X)
        ok = np.isfinite(yv) & np.isfinite(yhat)
        yv, yhat = yv[ok], yhat[ok]
        if yv.size == 0:
            raise DataError("the test set has no row with both a measured value and all terms")
        press = float(np.sum((yv - yhat) ** 2))
        ss_train = float(np.sum((yv - self.y_.mean()) ** 2))
        ss_test = float(np.sum((yv - yv.mean()) ** 2))
        return {
            "n_test": int(yv.size),
            "q2_ext_f1": 1.0 - press / ss_train if ss_train > 0 else float("nan"),
            "r2_test": 1.0 - press / ss_test if ss_test > 0 else float("nan"),
            "rmse_test": math.sqrt(press / yv.size),
        }

    # ------------------------------------------------------------ reports
    def ddg_kcal_per_mol(self) -> np.ndarray:
        """ddG‡ per unit of each term: -RT ln(10) x coefficient, kcal/mol (not the intercept)."""
        return -rt_ln10_kcal_per_mol(self.temperature_k) * self.coef_[1:]

    def coefficient_table(self) -> pd.DataFrame:
        """One row per parameter: estimate, SE, t, p, standardised coef, VIF, ddG‡ and its SE."""
        rt = rt_ln10_kcal_per_mol(self.temperature_k)
        nan = [float("nan")]
        return pd.DataFrame(
            {
                "term": [INTERCEPT, *self.names_],
                "coefficient": self.coef_,
                "standard_error": self.se_,
                "t": self.t_,
                "p_value": self.p_values_,
                "standardised_coefficient": nan + list(self.standardised_coef_),
                "vif": nan + list(self.vif_),
                "ddg_act_kcal_per_mol_per_unit": nan + list(-rt * self.coef_[1:]),
                "ddg_act_se_kcal_per_mol_per_unit": nan + list(rt * self.se_[1:]),
            }
        )

    def statistics(self) -> dict[str, Any]:
        """Fit and validation statistics as plain numbers (JSON-ready)."""
        d: dict[str, Any] = {
            "n_train": self.n_,
            "n_terms": self.p_,
            "df_resid": self.df_resid_,
            "r2": self.r2_,
            "adj_r2": self.adj_r2_,
            "f": self.f_,
            "f_p_value": self.f_p_value_,
            "rmse": self.rmse_,
            "residual_standard_error": self.residual_standard_error_,
            "press": self.press_,
            "q2_loo": self.q2_loo_,
            "loo_mae": self.loo_mae_,
            "q2_kfold": self.kfold_q2_,
            "kfold": int(max(2, min(int(self.kfold), self.n_))),
            "leverage_threshold": self.leverage_threshold_,
            "temperature_k": self.temperature_k,
        }
        if self.y_randomisation_ is not None:
            d["y_randomisation"] = self.y_randomisation_.summary()
        return {k: (None if isinstance(v, float) and not math.isfinite(v) else v) for k, v in d.items()}

    def training_table(self) -> pd.DataFrame:
        """Per training row: observed, fitted, residual, LOO residual, standardised residual, leverage."""
        return pd.DataFrame(
            {
                "id": self.ids_,
                "observed": self.y_,
                "fitted": self.fitted_,
                "residual": self.resid_,
                "loo_residual": self.loo_resid_,
                "standardised_residual": self.standardised_resid_,
                "leverage": self.hat_,
            }
        )

    # ------------------------------------------------------------ JSON
    def to_dict(self) -> dict[str, Any]:
        """Everything needed to predict again and to report: no pickle, plain JSON."""
        return {
            "format": MODEL_FORMAT,
            "terms": self.names_,
            "settings": {
                "kfold": self.kfold,
                "n_permutations": self.n_permutations,
                "seed": self.seed,
                "temperature_k": self.temperature_k,
            },
            "coefficients": self.coef_.tolist(),
            "xtx_inv": self.xtx_inv_.tolist(),
            "training": {
                "ids": self.ids_,
                "X": self.X_.tolist(),
                "y": self.y_.tolist(),
                "term_mean": self.X_.mean(axis=0).tolist(),
                "term_sd": self.X_.std(axis=0, ddof=1).tolist(),
            },
            "statistics": self.statistics(),
            "coefficient_table": json.loads(self.coefficient_table().to_json(orient="records")),
        }

    def save(self, path: str | Path, extra: dict[str, Any] | None = None) -> Path:
        """Write the model as JSON (``extra`` adds a free-form ``context`` block)."""
        d = self.to_dict()
        if extra:
            d["context"] = extra
        p = Path(path)
        p.parent.mkdir(parents=True, exist_ok=True)
        write_json(p, d)
        return p

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> "OLSModel":
        """Rebuild a fitted model from :meth:`to_dict` output (refits the stored rows and
        checks the coefficients agree with the stored ones)."""
        if d.get("format") != MODEL_FORMAT:
            raise DataError(f"not a redoxfront model file (format {d.get('format')!r})")
        s = d["settings"]
        m = cls(
            kfold=int(s["kfold"]),
            n_permutations=int(s["n_permutations"]),
            seed=int(s["seed"]),
            temperature_k=float(s["temperature_k"]),
        )
        tr = d["training"]
        m.fit(np.asarray(tr["X"], dtype=float), tr["y"], names=d["terms"], ids=tr["ids"])
        stored = np.asarray(d["coefficients"], dtype=float)
        if not np.allclose(stored, m.coef_, rtol=1e-9, atol=1e-12):
            raise DataError("model file coefficients do not match its training data; file edited?")
        m.coef_ = stored
        return m


def load_model(path: str | Path) -> OLSModel:
    """Load a model saved with :meth:`OLSModel.save` (JSON)."""
    p = Path(path)
    if not p.exists():
        raise DataError(f"no model file at {p}; run the fit command first")
    d = read_json_file(p, remedy=regenerate_hint(p))
    return OLSModel.from_dict(d)

"""The rate-model step of a campaign: read descriptors and measured rates, choose terms,
split, fit and validate an :class:`~redoxfront.statistics.regression.OLSModel`, predict every
candidate with a 95 % prediction interval and its applicability domain, save the model
(JSON) and the figures.

Reads ``results/descriptors.csv`` and the rates file; writes ``results/model.json``,
``results/predictions.csv`` and ``results/figures/``. The statistics and their
references are in :mod:`redoxfront.statistics.regression`.
"""

from __future__ import annotations

from dataclasses import dataclass
from dataclasses import field as dc_field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from redoxfront import columns
from redoxfront.campaign import bounded, choice
from redoxfront.errors import DataError
from redoxfront.csv_tables import write_csv
from redoxfront.outputs import read_table
from redoxfront.statistics.regression import OLSModel
from redoxfront.units import STANDARD_TEMPERATURE_K

if TYPE_CHECKING:
    from redoxfront.statistics.rate_sources import RateSources

STERIC_PREFIXES: tuple[str, ...] = (
    "sterimol_b1", "sterimol_b5", "sterimol_l", "sterimol", "buried_volume_percent",
    "ring_plane_clearance",
)
"""Column-name prefixes searched, in order, for the default steric term."""
POTENTIAL_TERM = "potential"


@dataclass(frozen=True)
class ModelSettings:
    """Campaign section ``[model]``.

    terms : model terms; "potential" means the calibrated potential if available,
        else the raw one. Empty: "potential" plus the first steric column found.
    search : rank every subset of 1..max_terms descriptors by LOO Q2 and use the best.
    pool / exclude : descriptor columns searched (empty pool: every numeric
        descriptor column) and columns left out of it.
    search_scrambled : whole searches repeated on scrambled targets (chance baseline).
    n_permutations : y-randomisation rounds for the fitted model (>= 100).
    split : 'auto' (the rates file's ``set`` column if present, else none), 'none',
        'marked' (the ``set`` column), or 'kennard-stone' (test_fraction held out).
    temperature_k : temperature for ddG‡ in kcal/mol.
    rate_order : 1 (k in 1/h) or 2 (k in L/(mol h)).
    rates : measured-rates file; default [inputs] measured_rates. Rates fitted by the fade
        step (results/rates.csv) train the model as well; a candidate with both uses the
        measured value (see :mod:`redoxfront.statistics.rate_sources`).
    """

    terms: tuple[str, ...] = ()
    search: bool = False
    max_terms: int = dc_field(default=2, metadata=bounded(1, 3))
    pool: tuple[str, ...] = ()
    exclude: tuple[str, ...] = ()
    search_scrambled: int = dc_field(default=20, metadata=bounded(0, 1000))
    n_permutations: int = dc_field(default=200, metadata=bounded(100, 100000))
    seed: int = dc_field(default=20261201, metadata=bounded(0, 2**31 - 1))
    kfold: int = dc_field(default=5, metadata=bounded(2, 1000))
    split: str = dc_field(default="auto", metadata=choice("auto", "none", "marked", "kennard-stone"))
    test_fraction: float = dc_field(default=0.2, metadata=bounded(0.05, 0.5))
    temperature_k: float = dc_field(default=STANDARD_TEMPERATURE_K, metadata=bounded(1.0, 1000.0))
    rate_order: int = dc_field(default=1, metadata=choice(1, 2))
    rates: str | None = None


@dataclass(frozen=True)
class FitReport:
    """Result of :func:`fit_campaign`: the model, its validation and where files went."""

    terms: tuple[str, ...]
    target: str
    coefficients: pd.DataFrame
    statistics: dict[str, Any]
    external: dict[str, Any] | None
    search: dict[str, Any] | None
    n_train: int
    n_test: int
    n_extrapolating: int
    model_path: Path
    predictions_path: Path
    figures: tuple[Path, ...]
    notes: tuple[str, ...]
    rate_sources: dict[str, int] = dc_field(default_factory=dict)
    """Candidates whose rate trained or tested the model, per source ('measured', 'fitted')."""
    rate_overrides: tuple[int, int] = (0, 0)
    """Fitted rates set aside for a measured one, and how many of those disagree with it."""

    def text(self) -> str:
        """A short plain-text summary for the terminal."""
        s = self.statistics
        lines = [n for n in self.notes if n.startswith("WARNING:")]  # first, where nobody misses them
        lines.append(f"{self.target} = fitted on {self.n_train} rows, terms: {', '.join(self.terms)}")
        if self.rate_sources:
            lines.append("rates: " + ", ".join(f"{k} {v}" for k, v in self.rate_sources.items()))
        lines.append(self.coefficients.to_string(index=False, float_format=lambda v: f"{v:.4g}"))
        lines.append(
            f"R2 {s['r2']:.3f}  adj R2 {s['adj_r2']:.3f}  RMSE {s['rmse']:.3f}  "
            f"Q2(LOO) {s['q2_loo']:.3f}  Q2({s['kfold']}-fold) {s['q2_kfold']:.3f}"
            if s.get("q2_loo") is not None and s.get("q2_kfold") is not None
            else f"R2 {s['r2']:.3f}  (Q2 undefined: a row has leverage 1)"
        )
        if "y_randomisation" in s:
            yr = s["y_randomisation"]
            lines.append(
                f"y-randomisation ({yr['n_permutations']}): scrambled Q2 mean {yr['q2_mean']:.3f}, "
                f"max {yr['q2_max']:.3f}, p = {yr['p_value_q2']:.3g}"
            )
        if self.external:
            e = self.external
            lines.append(f"external test ({e['n_test']} rows): Q2_ext {e['q2_ext_f1']:.3f}, RMSE {e['rmse_test']:.3f}")
        if self.search:
            lines.append(self.search["warning"])
        lines.append(f"{self.n_extrapolating} candidate(s) outside the applicability domain (extrapolating)")
        lines += [f"note: {n}" for n in self.notes if not n.startswith("WARNING:")]
        lines.append(f"model: {self.model_path}  predictions: {self.predictions_path}")
        return "\n".join(lines)


def _non_descriptor(col: str) -> bool:
    fixed = {
        columns.ID, columns.STATUS, columns.N_ELECTRONS, columns.MOLAR_MASS, columns.SOLUBILITY,
        columns.MEASURED, columns.RATE_ORDER, columns.LEVERAGE, columns.LEVERAGE_THRESHOLD,
        columns.STANDARDISED_RESIDUAL, "set", "class",
    }
    return col in fixed or col.startswith(("potential", "log10_k", "calibration")) or columns.is_bookkeeping(col)


def _rate_sources(campaign: Any, st: "ModelSettings", target: str) -> "RateSources":
    """The rates that train the model: measured file and fitted rates (results/rates.csv) both,
    the measured value winning for a candidate with both (see :mod:`rate_sources`)."""
    from redoxfront.statistics.rate_sources import collect_rates

    fitted = campaign.results_dir / "rates.csv"
    measured_rel = st.rates or campaign.inputs.measured_rates
    measured = campaign.path(measured_rel, "[model] rates / [inputs] measured_rates") if measured_rel else None
    if measured is not None and measured.resolve() == fitted.resolve():
        measured = None
    return collect_rates(measured, fitted, target)


def _resolve_potential(campaign: Any, table: pd.DataFrame) -> tuple[pd.DataFrame, str, list[str]]:
    from redoxfront.campaign import section_from_mapping as sfm
    from redoxfront.statistics.calibration import (
        CalibrationSettings,
        calibrate_table,
        read_measured_potentials,
    )

    ref = campaign.compute.reference
    cal = columns.potential_calibrated(ref)
    raw = columns.potential_uncalibrated(ref)
    if cal in table.columns and pd.to_numeric(table[cal], errors="coerce").notna().any():
        return table, cal, []
    if campaign.inputs.measured_potentials:
        measured, notes = read_measured_potentials(
            campaign.path(campaign.inputs.measured_potentials, "[inputs] measured_potentials"), ref,
            campaign.compute.solvent,
            (campaign.compute.user_reference_name, campaign.compute.user_reference_v_vs_fc))
        settings = sfm(CalibrationSettings, campaign.section("calibration"), "calibration")
        calibrated, report = calibrate_table(table, measured, ref, settings)
        if pd.to_numeric(calibrated[cal], errors="coerce").notna().any():
            return calibrated, cal, notes + ["potentials calibrated on the fly (run the calibrate command to store them)"]
        # too few measured potentials for a line: go on with the uncalibrated potential
        notes += list(report.notes) + ["no calibration possible: the model uses the uncalibrated potential"]
        if raw not in table.columns:
            raise DataError(f"descriptor table has no '{raw}' column; run the compute step first")
        return table, raw, notes
    if raw not in table.columns:
        raise DataError(f"descriptor table has no '{raw}' column; run the compute step first")
    return table, raw, ["no measured potentials: the model uses the uncalibrated potential"]


def fit_campaign(campaign: Any) -> FitReport:
    """Fit the decomposition-rate model of a campaign and predict every candidate.

    Reads ``results/descriptors.csv`` and the rates; writes ``results/model.json``,
    ``results/predictions.csv`` and figures under ``results/figures/``.
    """
    from redoxfront.campaign import section_from_mapping as sfm
    from redoxfront.statistics import figures as model_plots
    from redoxfront.statistics.term_search import search_terms
    from redoxfront.statistics.training_set import kennard_stone_split

    st = sfm(ModelSettings, campaign.section("model"), "model")
    target = columns.LOG10_K_FIRST if st.rate_order == 1 else columns.LOG10_K_SECOND
    pred_col = columns.LOG10_K_PRED_FIRST if st.rate_order == 1 else columns.LOG10_K_PRED_SECOND
    desc_path = campaign.results_dir / "descriptors.csv"
    table = read_table(desc_path, remedy=f"regenerate it with `redoxfront compute {campaign.folder}`",
                       required=[columns.ID])
    table[columns.ID] = table[columns.ID].astype(str)
    table, pot_col, notes = _resolve_potential(campaign, table)
    sources = _rate_sources(campaign, st, target)
    rates = sources.table
    notes += list(sources.notes)
    ok = table[columns.STATUS].astype(str).eq("ok") if columns.STATUS in table.columns else pd.Series(True, index=table.index)
    ok_ids = set(table.loc[ok, columns.ID])
    dropped = [i for i in rates[columns.ID] if i not in ok_ids]
    if dropped:
        notes.append(f"rated id(s) missing from the descriptor table or failed there, left out: {', '.join(dropped[:20])}")
    rates = rates[rates[columns.ID].isin(ok_ids)]
    if columns.ROLE in table.columns:  # a bipolar rate names no charged form: not guessed at
        bip_ids = set(table.loc[table[columns.ROLE].astype(str).str.strip().str.lower().eq("bipolar"), columns.ID])
        left = sorted(set(rates[columns.ID]) & bip_ids)
        if left:
            notes.append(f"rate(s) of bipolar candidate(s) {', '.join(left[:20])} left out of the model: a "
                         "bipolar candidate has two charged forms and the rate does not say which decayed")
            rates = rates[~rates[columns.ID].isin(bip_ids)]
    rate_cols = [c for c in rates.columns if c != columns.ID]
    data = table.drop(columns=[c for c in rate_cols if c in table.columns]).merge(
        rates, on=columns.ID, how="inner"
    )
    data = data.set_index(columns.ID)

    # ---- terms
    def real(term: str) -> str:
        return pot_col if term == POTENTIAL_TERM else term

    if st.terms:
        terms = tuple(real(t) for t in st.terms)
    else:
        steric = next(
            (c for pre in STERIC_PREFIXES for c in table.columns if str(c).startswith(pre)), None
        )
        if steric is None:
            raise DataError("no steric descriptor column found; set [model] terms, e.g. [\"potential\", \"<column>\"]")
        terms = (pot_col, steric)
        notes.append(f"default terms: potential and '{steric}'; set [model] terms to choose another")
    missing = [t for t in terms if t not in data.columns]
    if missing and not st.search:
        raise DataError(f"model term(s) {', '.join(missing)} not in the descriptor table; check [model] terms")

    # ---- split
    split = st.split
    if split == "auto":
        split = "marked" if "set" in data.columns else "none"
    if split == "marked":
        if "set" not in data.columns:
            raise DataError("[model] split = 'marked' needs a 'set' column (train/test) in the rates file")
        is_test = data["set"].eq("test").to_numpy()
    elif split == "kennard-stone":
        ks_cols = list(terms) if not st.search else _pool(table, st, pot_col)
        vals = data[ks_cols].apply(pd.to_numeric, errors="coerce")
        vals = vals.loc[:, vals.notna().all()]
        _, test_idx = kennard_stone_split(vals.to_numpy(float), st.test_fraction)
        is_test = np.zeros(len(data), dtype=bool)
        is_test[test_idx] = True
    else:
        is_test = np.zeros(len(data), dtype=bool)
    train, test = data[~is_test], data[is_test]
    # what trained the model, by source; rows held out as the external test set do not count
    trained_counts = {src: int((train[columns.RATE_SOURCE] == src).sum()) for src in ("measured", "fitted")}
    if len(test):
        trained_counts["held out as test set"] = int(len(test))

    # ---- search
    search_summary = None
    if st.search:
        pool = _pool(table, st, pot_col)
        res = search_terms(
            train[pool], train[target], max_terms=st.max_terms, n_scrambled=st.search_scrambled,
            seed=st.seed,
        )
        terms = res.best_terms
        search_summary = res.summary()
        search_summary["top"] = [
            {"terms": list(r.terms), "r2": r.r2, "q2_loo": r.q2_loo} for r in res.table.head(10).itertuples()
        ]

    # ---- fit and validate
    model = OLSModel(kfold=st.kfold, n_permutations=st.n_permutations, seed=st.seed,
                     temperature_k=st.temperature_k)
    Xtr = train[list(terms)].apply(pd.to_numeric, errors="coerce")
    model.fit(Xtr, train[target].to_numpy(float), ids=list(train.index))
    notes += model.warnings_
    external = None
    if len(test):
        Xte = test[list(terms)].apply(pd.to_numeric, errors="coerce")
        external = model.external_validation(Xte, test[target].to_numpy(float))

    # ---- predictions for every candidate
    allX = table.set_index(columns.ID)[list(terms)].apply(pd.to_numeric, errors="coerce")
    pi = model.predict_interval(allX)
    pred = pd.DataFrame({columns.ID: allX.index})
    for t in terms:
        pred[t] = allX[t].to_numpy()
    pred[pred_col] = pi["prediction"].to_numpy()
    pred[pred_col + columns.PI_LOW_SUFFIX] = pi["pi_low"].to_numpy()
    pred[pred_col + columns.PI_HIGH_SUFFIX] = pi["pi_high"].to_numpy()
    pred[columns.LEVERAGE] = pi["leverage"].to_numpy()
    pred[columns.LEVERAGE_THRESHOLD] = model.leverage_threshold_
    pred[columns.DOMAIN] = pi["domain"].to_numpy()
    pred[columns.RATE_ORDER] = st.rate_order
    membership = pd.Series("", index=allX.index)
    membership[membership.index.isin(train.index)] = "train"
    membership[membership.index.isin(test.index)] = "test"
    pred[columns.MODEL_SET] = membership.to_numpy()
    for c in rate_cols:
        if c != "set":
            pred[c] = pred[columns.ID].map(data[c])
    pred[columns.RATE_SOURCE] = pred[columns.RATE_SOURCE].fillna("")
    pred = pred.copy()  # one block per added column so far; consolidate before adding more
    pred[columns.STANDARDISED_RESIDUAL] = pred[columns.ID].map(
        pd.Series(model.standardised_resid_, index=model.ids_)
    )
    pred, form_notes = _predict_charged_forms(model, table, terms, pot_col, campaign.compute.reference,
                                              st.rate_order, pred)
    notes += form_notes
    # every candidate's own columns (identity, potentials, descriptors, user columns) come
    # along, so later steps read one table
    carried = table.drop(columns=[c for c in pred.columns if c != columns.ID and c in table.columns])
    pred = carried.merge(pred, on=columns.ID, how="left")
    out_dir = campaign.results_dir
    out_dir.mkdir(parents=True, exist_ok=True)
    warnings = [w for w in model.warnings_ if w.startswith("WARNING:")]
    pred = pred.copy()  # one block per dtype again after the many merges
    pred[columns.MODEL_WARNING] = warnings[0] if warnings else ""
    pred_path = out_dir / "predictions.csv"
    write_csv(pred, pred_path)
    n_extra = int((pred[columns.DOMAIN] == "extrapolating").sum())

    context = {
        "campaign": campaign.name,
        "target": target,
        "prediction_column": pred_col,
        "rate_order": st.rate_order,
        "potential_column": pot_col,
        "split": split,
        "rate_sources": {"files": list(sources.files), "counts": trained_counts,
                         "fitted_overridden_by_measured": sources.n_fitted_overridden,
                         "disagreeing": sources.n_disagreeing,
                         "rule": "a candidate with both a measured and a fitted rate uses the measured value; "
                                 "a measured value outside the fit's 95 % interval is reported"},
        "warnings": warnings,
        "n_test": int(len(test)),
        "external_validation": external,
        "search": search_summary,
        "settings": {k: (list(v) if isinstance(v, tuple) else v) for k, v in st.__dict__.items()},
        "notes": notes,
    }
    model_path = model.save(out_dir / "model.json", extra=context)

    # ---- figures
    fig_dir = out_dir / "figures"
    figs = [
        model_plots.williams_plot(
            model.hat_, model.standardised_resid_, model.leverage_threshold_, fig_dir / "williams.svg",
            test_leverage=pi.loc[test.index, "leverage"].to_numpy() if len(test) else None,
            test_residual=(
                (test[target].to_numpy(float) - pi.loc[test.index, "prediction"].to_numpy())
                / (model.residual_standard_error_ * np.sqrt(1 + pi.loc[test.index, "leverage"].to_numpy()))
            ) if len(test) else None,
        ),
        model_plots.observed_vs_predicted(
            model.y_, model.fitted_, fig_dir / "observed_vs_predicted.svg",
            label="log10 k (k in 1/h)" if target == columns.LOG10_K_FIRST else "log10 k (k in L/(mol h))",
            observed_test=test[target].to_numpy(float) if len(test) else None,
            predicted_test=pi.loc[test.index, "prediction"].to_numpy() if len(test) else None,
            loo_predicted_train=model.y_ - model.loo_resid_,
        ),
    ]
    if model.y_randomisation_ is not None:
        yr = model.y_randomisation_
        figs.append(model_plots.y_randomisation_histogram(
            yr.r2, yr.q2, model.r2_, model.q2_loo_, fig_dir / "y_randomisation.svg"))
    return FitReport(
        terms=tuple(terms), target=target, coefficients=model.coefficient_table(),
        statistics=model.statistics(), external=external, search=search_summary,
        n_train=model.n_, n_test=int(len(test)), n_extrapolating=n_extra,
        model_path=model_path, predictions_path=pred_path, figures=tuple(figs), notes=tuple(notes),
        rate_sources=trained_counts, rate_overrides=(sources.n_fitted_overridden, sources.n_disagreeing),
    )


def _predict_charged_forms(model: OLSModel, table: pd.DataFrame, terms: tuple[str, ...], pot_col: str,
                           ref: str, order: int, pred: pd.DataFrame) -> tuple[pd.DataFrame, list[str]]:
    """Predicted rates of both charged forms of every bipolar candidate.

    Rule (one rate model for both forms, stated): the campaign's model, fitted on one-role
    candidates, is evaluated for the radical anion with the candidate's reduction potential
    and for the radical cation with its oxidation potential in place of the potential term
    (calibrated when the model uses calibrated potentials, else uncalibrated), every other
    term unchanged. Radical anions and cations decompose by different routes, so a form
    unlike the training set is extrapolation: its leverage says so (``domain_<form>``).
    """
    if columns.ROLE not in table.columns:
        return pred, []
    bip = table[columns.ROLE].astype(str).str.strip().str.lower().eq("bipolar").to_numpy()
    if not bip.any():
        return pred, []
    notes = []
    basis = "calibrated" if pot_col == columns.potential_calibrated(ref) else "uncalibrated"
    X = table.loc[bip].set_index(columns.ID)[[t for t in terms if t != pot_col]].apply(pd.to_numeric, errors="coerce")
    ids = pred[columns.ID].to_numpy()
    for process, form in columns.CHARGED_FORMS.items():
        name = columns.process_potential(process, basis, ref)
        if pot_col in terms:
            values = pd.to_numeric(table.loc[bip, name], errors="coerce") if name in table.columns \
                else pd.Series(np.nan, index=table.index[bip])
            X[pot_col] = values.to_numpy()
            if values.isna().any():
                notes.append(f"bipolar {form} forms without a {basis} {process} potential are not predicted")
        pi = model.predict_interval(X[list(terms)])
        col_k = columns.log10_k_predicted_form(form, order)
        where = {i: k for k, i in enumerate(X.index)}
        pos = [where.get(i) for i in ids]

        def put(column: str, values: np.ndarray, fill: Any = np.nan) -> None:
            pred[column] = [values[p] if p is not None else fill for p in pos]

        put(col_k, pi["prediction"].to_numpy())
        put(col_k + columns.PI_LOW_SUFFIX, pi["pi_low"].to_numpy())
        put(col_k + columns.PI_HIGH_SUFFIX, pi["pi_high"].to_numpy())
        put(columns.form_column(form, columns.LEVERAGE), pi["leverage"].to_numpy())
        put(columns.form_column(form, columns.DOMAIN), pi["domain"].to_numpy(), "")
    return pred, notes


def _pool(table: pd.DataFrame, st: ModelSettings, pot_col: str) -> list[str]:
    if st.pool:
        pool = [pot_col if c == POTENTIAL_TERM else c for c in st.pool]
        missing = [c for c in pool if c not in table.columns]
        if missing:
            raise DataError(f"[model] pool column(s) {', '.join(missing)} not in the descriptor table")
        return pool
    pool = [pot_col] + [
        str(c) for c in table.columns
        if pd.api.types.is_numeric_dtype(table[c]) and not _non_descriptor(str(c))
        and str(c) not in st.exclude
    ]
    return [c for c in pool if c not in st.exclude]

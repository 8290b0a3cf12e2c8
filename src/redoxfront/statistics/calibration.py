"""Linear calibration of computed redox potentials against measured ones.

measured = a + b x computed, fitted by least squares (optionally per compound
class), applied to every candidate with a 95 % prediction interval. Semiempirical
potentials carry a constant offset and a slope error that a linear calibration
within one compound class largely removes (Davis & Fry, J. Phys. Chem. A 2010,
114, 12299). All potentials are in V against the campaign's reference electrode;
measured values are converted with :func:`redoxfront.units.convert_potential`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from redoxfront import columns
from redoxfront.campaign import Campaign, aqueous_settings, bounded, section_from_mapping
from redoxfront.errors import DataError, InputError
from redoxfront.csv_tables import write_csv
from redoxfront.outputs import read_table, write_json
from redoxfront.statistics.measured_ph import MEASURED_PH_NOTE, move_measured_to_ph
from redoxfront.statistics.regression import OLSModel, one_dof_warning
from redoxfront.units import STANDARD_TEMPERATURE_K, convert_potential, reference_key, reference_label

STATUS_CALIBRATED = "calibrated"
STATUS_OUTSIDE = "calibrated (outside calibration range)"
STATUS_UNCALIBRATED = "uncalibrated"
POOLED = "all"
MEASURED_COLUMNS = ("id", "potential_v", "reference", "solvent")


MIN_CALIBRATION_POINTS = 3
"""Fewest measured potentials a calibration line is fitted to (intercept, slope and one
residual degree of freedom); with fewer, potentials stay uncalibrated with a note."""


@dataclass(frozen=True)
class CalibrationSettings:
    """Campaign section ``[calibration]``.

    per_class : fit one line per value of the ``class`` column (classes with fewer
        than ``min_points_per_class`` measured rows use the pooled line).
    """

    per_class: bool = False
    min_points_per_class: int = field(default=4, metadata=bounded(3, None))


@dataclass(frozen=True)
class LineFit:
    """One calibration line: measured = intercept + slope x computed (V)."""

    group: str
    n: int
    slope: float
    slope_se: float
    intercept_v: float
    intercept_se_v: float
    r2: float
    rmse_v: float
    loo_mae_v: float
    computed_min_v: float
    computed_max_v: float


class Calibration:
    """A fitted linear calibration (small estimator: ``fit`` / ``predict``)."""

    def fit(self, computed_v: Any, measured_v: Any, ids: Any = None, group: str = POOLED) -> "Calibration":
        x = np.asarray(computed_v, dtype=float)
        self.model_ = OLSModel(kfold=x.size, n_permutations=0).fit(
            x[:, None], measured_v, names=["computed_potential_v"], ids=ids
        )
        m = self.model_
        self.line_ = LineFit(
            group=group,
            n=m.n_,
            slope=float(m.coef_[1]),
            slope_se=float(m.se_[1]),
            intercept_v=float(m.coef_[0]),
            intercept_se_v=float(m.se_[0]),
            r2=float(m.r2_),
            rmse_v=float(m.rmse_),
            loo_mae_v=float(m.loo_mae_),
            computed_min_v=float(x.min()),
            computed_max_v=float(x.max()),
        )
        return self

    def predict(self, computed_v: Any) -> pd.DataFrame:
        """Calibrated value, 95 % PI and status per computed potential (V)."""
        x = np.asarray(computed_v, dtype=float)
        pi = self.model_.predict_interval(x[:, None])
        inside = (x >= self.line_.computed_min_v) & (x <= self.line_.computed_max_v)
        status = np.where(
            np.isnan(x), STATUS_UNCALIBRATED, np.where(inside, STATUS_CALIBRATED, STATUS_OUTSIDE)
        )
        return pd.DataFrame(
            {"value": pi["prediction"].to_numpy(), "low": pi["pi_low"].to_numpy(),
             "high": pi["pi_high"].to_numpy(), "status": status}
        )


@dataclass(frozen=True)
class CalibrationReport:
    """What a calibration run fitted and left out."""

    reference: str
    lines: tuple[LineFit, ...]
    n_measured_used: int
    notes: tuple[str, ...]
    warnings: tuple[str, ...] = ()
    """Prominent warnings (a line with one residual degree of freedom), also in every output."""

    def to_dict(self) -> dict[str, Any]:
        return {
            "reference": self.reference,
            "n_measured_used": self.n_measured_used,
            "warnings": list(self.warnings),
            "lines": [l.__dict__ for l in self.lines],
            "notes": list(self.notes),
        }


def read_measured_potentials(path: Path, reference: str, compute_solvent: str | None = None,
                             user_reference: tuple[str, float | None] | None = None,
                             ) -> tuple[pd.DataFrame, list[str]]:
    """Read measured potentials; convert to ``reference``; average duplicate ids.

    Returns columns ``id``, ``measured_v`` (V vs reference), ``uncertainty_v`` (half-width
    of the measurement's 95 % interval, V, where the optional column gives it), ``class``
    and ``process`` ('reduction' or 'oxidation': which couple of a bipolar candidate was
    measured) if given, plus notes on skipped rows. An optional ``ph`` column (aqueous campaigns)
    is kept per row, unaveraged (the rows are moved to the campaign pH first,
    :func:`redoxfront.statistics.measured_ph.move_measured_to_ph`); a row vs RHE needs it. Rows
    with an unknown reference or non-numeric
    value are skipped with a note (a bad row never stops the batch). Rows measured in
    another solvent than ``compute_solvent`` (engine keyword) get a note; an Fc+/Fc
    reference in water gets a warning.
    """
    if not path.exists():
        raise InputError("file not found; check [inputs] measured_potentials", source=str(path))
    df = read_table(path, remedy="fix the file or [inputs] measured_potentials")
    df.columns = [str(c).strip().lower() for c in df.columns]
    missing = [c for c in MEASURED_COLUMNS if c not in df.columns]
    if missing:
        raise InputError(
            f"missing column(s) {', '.join(missing)}; need {', '.join(MEASURED_COLUMNS)} (class optional)",
            source=str(path),
        )
    notes: list[str] = []
    rows = []
    for i, r in df.iterrows():
        rid = str(r["id"])
        try:
            v = float(r["potential_v"])
            if not math.isfinite(v):
                raise ValueError
        except (TypeError, ValueError):
            notes.append(f"{path.name} row {i + 2} ({rid}): potential_v {r['potential_v']!r} is not a number; skipped")
            continue
        ph = math.nan
        if "ph" in df.columns and str(r["ph"]).strip() not in ("", "nan", "None"):
            try:
                ph = float(r["ph"])
            except (TypeError, ValueError):
                notes.append(f"{path.name} row {i + 2} ({rid}): ph {r['ph']!r} is not a number; skipped")
                continue
        try:
            ref_text = str(r["reference"]).strip()
            user_name, user_v = user_reference or ("", None)
            if user_name and ref_text.lower() == user_name.strip().lower():
                ref_text = "user"
            v = convert_potential(v, ref_text, reference, user_v, ph=ph if math.isfinite(ph) else None)
        except Exception as exc:  # unknown electrode name
            notes.append(f"{path.name} row {i + 2} ({rid}): {exc}; skipped")
            continue
        row = {"id": rid, "measured_v": v}
        if "ph" in df.columns:
            row["ph"] = ph
        if "uncertainty_v" in df.columns:
            try:
                u = float(r["uncertainty_v"])
            except (TypeError, ValueError):
                u = float("nan")
            row["uncertainty_v"] = abs(u) if math.isfinite(u) else float("nan")
        if "class" in df.columns:
            row["class"] = str(r["class"])
        if "process" in df.columns:
            proc = "" if pd.isna(r["process"]) else str(r["process"]).strip().lower()
            if proc not in ("", *columns.PROCESSES):
                notes.append(f"{path.name} row {i + 2} ({rid}): process {r['process']!r} is neither "
                             "'reduction' nor 'oxidation'; skipped")
                continue
            row["process"] = proc
        rows.append(row)
    solvents = sorted(set(df["solvent"].astype(str).str.strip().str.lower()))
    notes += solvent_notes(df, compute_solvent, path.name)
    if len(solvents) > 1:
        notes.append(
            f"measured potentials come from several solvents ({', '.join(solvents)}); "
            "reference conversions assume one solvent, calibrate per solvent if values differ"
        )
    extra = [c for c in ("uncertainty_v", "class", "process", "ph") if c in df.columns]
    out = pd.DataFrame(rows, columns=["id", "measured_v"] + extra)
    if "ph" in out.columns:  # averaged after each row is moved to the campaign pH
        return out, notes
    keys = ["id", "process"] if "process" in out.columns else ["id"]
    if out.duplicated(keys).any():
        notes.append("some ids were measured more than once; their values were averaged")
        agg: dict[str, str] = {"measured_v": "mean"}
        if "uncertainty_v" in out.columns:
            agg["uncertainty_v"] = "max"
        if "class" in out.columns:
            agg["class"] = "first"
        out = out.groupby(keys, as_index=False, sort=False).agg(agg)
    return out, notes


def solvent_notes(df: pd.DataFrame, compute_solvent: str | None, file_name: str) -> list[str]:
    """Notes on measured rows whose solvent differs from the compute's, and a warning for
    an Fc+/Fc reference in water (ferrocene is nearly insoluble there and the acetonitrile
    offset used for conversion does not apply; Connelly & Geiger, Chem. Rev. 1996, 96, 877,
    give it for acetonitrile)."""
    from redoxfront.campaign import SOLVENT_NAMES
    from redoxfront.units import REFERENCE_ALIASES

    notes: list[str] = []
    names = df["solvent"].astype(str).str.strip()
    keys = names.str.lower().map(lambda n: SOLVENT_NAMES.get(n, n))
    if compute_solvent:
        other = sorted(set(names[keys != compute_solvent]))
        if other:
            notes.append(
                f"{file_name}: potentials measured in {', '.join(other)} while the compute uses "
                f"{compute_solvent}: solvation and the reference's junction potential differ between "
                "solvents, so these values calibrate against a different scale; prefer measurements "
                "in the compute's solvent or calibrate per solvent (class column)"
            )
    refs = df["reference"].astype(str).str.strip().str.lower().map(lambda n: REFERENCE_ALIASES.get(n, n))
    fc_water = df.loc[(keys == "water") & (refs == "fc"), "id"].astype(str).tolist()
    if fc_water:
        notes.append(
            f"warning: {file_name}: Fc+/Fc reference in water for {', '.join(fc_water[:10])}: ferrocene "
            "is nearly insoluble in water and its offset to SHE used here is the acetonitrile value; "
            "report aqueous potentials against SHE, SCE or Ag/AgCl"
        )
    return notes


def calibrate_table(
    table: pd.DataFrame,
    measured: pd.DataFrame | None,
    reference: str,
    settings: CalibrationSettings = CalibrationSettings(),
    campaign_ph: float | None = None,
    temperature_k: float = STANDARD_TEMPERATURE_K,
) -> tuple[pd.DataFrame, CalibrationReport]:
    """Add the calibrated potential, its 95 % PI and the calibration status to ``table``.

    Without measured data every row is 'uncalibrated' and the calibrated columns are NaN.
    Only rows with status 'ok' and a finite raw potential are calibrated or used to fit.
    ``campaign_ph`` (aqueous campaigns): measured values are first moved to that pH along each
    couple's Nernst lines (:mod:`redoxfront.statistics.measured_ph`), flagged across a pKa.
    """
    ref = reference_key(reference)
    raw_col = columns.potential_uncalibrated(ref)
    if raw_col not in table.columns:
        raise DataError(f"descriptor table has no '{raw_col}' column; run the compute step first")
    t = table.copy()
    t[columns.ID] = t[columns.ID].astype(str)
    cal_col = columns.potential_calibrated(ref)
    lo_col, hi_col = columns.potential_calibrated_pi_low(ref), columns.potential_calibrated_pi_high(ref)
    t[cal_col] = np.nan
    t[lo_col] = np.nan
    t[hi_col] = np.nan
    t[columns.CALIBRATION_STATUS] = STATUS_UNCALIBRATED
    t[columns.CALIBRATION_GROUP] = ""
    notes: list[str] = []
    bipolar = _is_bipolar(t)
    if measured is None or measured.empty:
        notes.append("no measured potentials given: every potential is uncalibrated")
        _calibrate_bipolar(t, None, ref, notes, min_points=settings.min_points_per_class)
        return t, CalibrationReport(ref, (), 0, tuple(notes))
    # a bipolar candidate's measured rows belong to its two couples, calibrated apart below
    bipolar_ids = set(t.loc[bipolar, columns.ID])
    measured_bipolar = measured[measured["id"].isin(bipolar_ids)]
    measured = measured[~measured["id"].isin(bipolar_ids)]
    if campaign_ph is not None:
        measured, ph_notes = move_measured_to_ph(measured, t, campaign_ph, temperature_k)
        notes += ph_notes
        t[MEASURED_PH_NOTE] = t[columns.ID].map(measured.set_index("id")[MEASURED_PH_NOTE]).fillna("")
    elif "ph" in measured.columns:
        notes.append("the measured file has a 'ph' column but the campaign no [aqueous] section: pH ignored")
        agg = {c: ("mean" if c == "measured_v" else "max" if c == "uncertainty_v" else "first")
               for c in measured.columns if c not in ("id", "ph", "process")}
        measured = measured.groupby("id", as_index=False, sort=False).agg(agg)
    if "process" in measured.columns:
        measured = measured.drop(columns="process").drop_duplicates("id")
    if measured.empty:  # only bipolar candidates were measured
        lines = _calibrate_bipolar(t, measured_bipolar, ref, notes, min_points=settings.min_points_per_class)
        return t, CalibrationReport(ref, tuple(lines), 0, tuple(notes))
    ok = t[columns.STATUS].astype(str).eq("ok") if columns.STATUS in t.columns else pd.Series(True, index=t.index)
    raw = pd.to_numeric(t[raw_col], errors="coerce")
    usable = ok & raw.notna()
    meas_col = columns.potential_measured(ref)
    t[meas_col] = t[columns.ID].map(measured.set_index("id")["measured_v"])
    if "uncertainty_v" in measured.columns:
        t[columns.POTENTIAL_MEASURED_UNCERTAINTY] = t[columns.ID].map(measured.set_index("id")["uncertainty_v"])
    unknown = sorted(set(measured["id"]) - set(t[columns.ID]))
    if unknown:
        notes.append(f"measured id(s) not in the descriptor table, ignored: {', '.join(unknown[:20])}")
    not_ok = sorted(set(t.loc[t[meas_col].notna() & ~usable, columns.ID]))
    if not_ok:
        notes.append(f"measured id(s) whose computation failed, ignored in the fit: {', '.join(not_ok[:20])}")
    train = usable & t[meas_col].notna()
    if int(train.sum()) < MIN_CALIBRATION_POINTS:
        notes.append(
            f"only {int(train.sum())} usable measured potential(s); a calibration line needs at least "
            f"{MIN_CALIBRATION_POINTS} (two for the line, one to estimate its scatter): every potential "
            "stays uncalibrated; measure a few more candidates to calibrate")
        lines = _calibrate_bipolar(t, measured_bipolar, ref, notes, one_role=(t[meas_col], raw, usable),
                                   min_points=settings.min_points_per_class)  # bipolar couples go on
        return t, CalibrationReport(ref, tuple(lines), 0, tuple(notes))
    if settings.per_class:
        if "class" not in t.columns:
            raise DataError(
                "[calibration] per_class = true needs a 'class' column in the candidates "
                "(and descriptor table); add it or set per_class = false"
            )
        group = t["class"].astype(str)
    else:
        group = pd.Series(POOLED, index=t.index)
    pooled = Calibration().fit(raw[train], t.loc[train, meas_col], ids=t.loc[train, columns.ID])
    lines = [pooled.line_]
    fits: dict[str, Calibration] = {}
    if settings.per_class:
        for g, idx in group[train].groupby(group[train]).groups.items():
            if len(idx) >= settings.min_points_per_class:
                fits[str(g)] = Calibration().fit(raw[idx], t.loc[idx, meas_col], ids=t.loc[idx, columns.ID], group=str(g))
                lines.append(fits[str(g)].line_)
            else:
                notes.append(
                    f"class '{g}' has {len(idx)} measured row(s) (< {settings.min_points_per_class}); "
                    "it uses the pooled calibration"
                )
    use_group = group.where(group.isin(list(fits)), POOLED)
    warnings: list[str] = []
    t[columns.CALIBRATION_WARNING] = ""
    for g, idx in use_group[usable].groupby(use_group[usable]).groups.items():
        cal = fits.get(str(g), pooled)
        if cal.model_.residual_dof_ == 1:  # n = 3 for a line: written, but never without this
            w = f"calibration line '{g}': " + one_dof_warning(cal.line_.n, 1)
            warnings.append(w)
            t.loc[idx, columns.CALIBRATION_WARNING] = w
        pr = cal.predict(raw[idx].to_numpy())
        t.loc[idx, cal_col] = pr["value"].to_numpy()
        t.loc[idx, lo_col] = pr["low"].to_numpy()
        t.loc[idx, hi_col] = pr["high"].to_numpy()
        t.loc[idx, columns.CALIBRATION_STATUS] = pr["status"].to_numpy()
        t.loc[idx, columns.CALIBRATION_GROUP] = str(g)
    n_out = int((t[columns.CALIBRATION_STATUS] == STATUS_OUTSIDE).sum())
    if n_out:
        notes.append(
            f"{n_out} candidate(s) have computed potentials outside the calibration range; "
            "their calibrated values are extrapolations"
        )
    lines += _calibrate_bipolar(t, measured_bipolar, ref, notes, one_role=(t[meas_col], raw, usable),
                                min_points=settings.min_points_per_class)
    return t, CalibrationReport(ref, tuple(lines), int(train.sum()), tuple(notes), tuple(warnings))


def _is_bipolar(t: pd.DataFrame) -> pd.Series:
    if columns.ROLE not in t.columns:
        return pd.Series(False, index=t.index)
    return t[columns.ROLE].astype(str).str.strip().str.lower().eq("bipolar")


def _calibrate_bipolar(
    t: pd.DataFrame,
    measured: pd.DataFrame | None,
    ref: str,
    notes: list[str],
    one_role: tuple[pd.Series, pd.Series, pd.Series] | None = None,
    min_points: int = 4,
) -> list[LineFit]:
    """Calibrate both couples of the bipolar rows of ``t`` in place; return the lines fitted.

    Rule: the reduction potential of a bipolar candidate is calibrated on measured
    reductions only (anolyte rows, and bipolar rows with ``process = reduction``), its
    oxidation potential on measured oxidations only (catholyte rows, bipolar rows with
    ``process = oxidation``): one line per couple type, measured = a + b x computed, with
    its 95 % prediction interval, and at least ``min_points`` measured couples (the
    ``[calibration] min_points_per_class`` setting); with fewer the couple stays uncalibrated
    (and says so). ``one_role``: the one-role rows'
    measured potential, raw potential and usable mask.
    """
    bip = _is_bipolar(t)
    if not bip.any():
        return []
    role = t[columns.ROLE].astype(str).str.strip().str.lower()
    ok = t[columns.STATUS].astype(str).eq("ok") if columns.STATUS in t.columns else pd.Series(True, index=t.index)
    if measured is not None and not measured.empty and "process" not in measured.columns:
        measured = measured.assign(process="")
    if measured is not None and not measured.empty:
        blank = sorted(set(measured.loc[measured["process"].eq(""), "id"]))
        if blank:
            notes.append(f"measured potential(s) of bipolar candidate(s) {', '.join(blank[:20])} without a "
                         "process (reduction or oxidation) column value: skipped; add the process column")
    lines = []
    for process in columns.PROCESSES:
        raw_name = columns.process_potential(process, "uncalibrated", ref)
        raw = (pd.to_numeric(t[raw_name], errors="coerce") if raw_name in t.columns
               else pd.Series(np.nan, index=t.index))
        names = {b: columns.process_potential(process, b, ref) for b in ("calibrated", "measured")}
        lo_col = columns.process_potential(process, "calibrated", ref, "low")
        hi_col = columns.process_potential(process, "calibrated", ref, "high")
        status_col = columns.process_column(process, columns.CALIBRATION_STATUS)
        for c in (names["calibrated"], lo_col, hi_col, names["measured"]):
            t[c] = np.nan
        t.loc[bip, status_col] = STATUS_UNCALIBRATED
        if measured is not None and not measured.empty:
            m = measured[measured["process"].eq(process)].set_index("id")
            t.loc[bip, names["measured"]] = t.loc[bip, columns.ID].map(m["measured_v"])
            if "uncertainty_v" in m.columns:
                t.loc[bip, columns.process_column(process, columns.POTENTIAL_MEASURED_UNCERTAINTY)] = \
                    t.loc[bip, columns.ID].map(m["uncertainty_v"])
        x, y, ids = [], [], []
        if one_role is not None:
            meas, raw1, usable = one_role
            same = usable & meas.notna() & role.eq("anolyte" if process == "reduction" else "catholyte")
            x += list(raw1[same]); y += list(meas[same]); ids += list(t.loc[same, columns.ID])
        own = bip & ok & raw.notna() & t[names["measured"]].notna()
        x += list(raw[own]); y += list(t.loc[own, names["measured"]]); ids += list(t.loc[own, columns.ID])
        if len(x) < min_points:
            if measured is not None:
                notes.append(f"bipolar {process} potentials stay uncalibrated: {len(x)} measured "
                             f"{process}(s), a line needs {min_points} ([calibration] min_points_per_class)")
            continue
        cal = Calibration().fit(x, y, ids=ids, group=f"bipolar {process}")
        lines.append(cal.line_)
        rows = bip & ok & raw.notna()
        pr = cal.predict(raw[rows].to_numpy())
        t.loc[rows, names["calibrated"]] = pr["value"].to_numpy()
        t.loc[rows, lo_col] = pr["low"].to_numpy()
        t.loc[rows, hi_col] = pr["high"].to_numpy()
        t.loc[rows, status_col] = pr["status"].to_numpy()
    return lines


def calibrate_campaign(campaign: Campaign) -> pd.DataFrame:
    """Calibrate ``results/descriptors.csv`` in place; write ``results/calibration.json``
    and ``results/figures/calibration_parity.svg``. Returns the updated table."""
    settings = section_from_mapping(CalibrationSettings, campaign.section("calibration"), "calibration")
    ref = reference_key(campaign.compute.reference)
    path = campaign.results_dir / "descriptors.csv"
    table = read_table(path, remedy=f"regenerate it with `redoxfront compute {campaign.folder}`",
                       required=[columns.ID])
    measured, notes = (None, [])
    if campaign.inputs.measured_potentials:
        measured, notes = read_measured_potentials(
            campaign.path(campaign.inputs.measured_potentials, "[inputs] measured_potentials"), ref,
            campaign.compute.solvent,
            (campaign.compute.user_reference_name, campaign.compute.user_reference_v_vs_fc))
    aqueous = aqueous_settings(campaign)
    out, report = calibrate_table(table, measured, ref, settings,
                                  campaign_ph=aqueous.ph if aqueous is not None else None,
                                  temperature_k=aqueous.temperature_k if aqueous is not None else STANDARD_TEMPERATURE_K)
    write_csv(out, path)
    d = report.to_dict()
    d["reference_label"] = reference_label(ref, campaign.compute.user_reference_name)
    d["notes"] = notes + d["notes"]
    write_json(campaign.results_dir / "calibration.json", d)
    out.attrs["calibration"] = d
    if report.lines:
        from redoxfront.statistics.figures import calibration_parity

        line = report.lines[0]
        meas_col = columns.potential_measured(ref)
        used = out[out[meas_col].notna() & out[columns.CALIBRATION_STATUS].ne(STATUS_UNCALIBRATED)]
        same = out[out[columns.CALIBRATION_GROUP].astype(str).eq(line.group)] if columns.CALIBRATION_GROUP in out else out
        calibration_parity(
            used[columns.potential_uncalibrated(ref)].to_numpy(float), used[meas_col].to_numpy(float),
            line.slope, line.intercept_v, ref, campaign.results_dir / "figures" / "calibration_parity.svg",
            labels=used[columns.ID].tolist(),
            candidates_v=same[columns.potential_uncalibrated(ref)].to_numpy(float),
            band_low_v=same[columns.potential_calibrated_pi_low(ref)].to_numpy(float),
            band_high_v=same[columns.potential_calibrated_pi_high(ref)].to_numpy(float),
            calibrated_range_v=(line.computed_min_v, line.computed_max_v),
        )
    return out

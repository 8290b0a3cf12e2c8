"""Symmetric-cell metrics of bipolar candidates: the same molecule fills both tanks.

A bipolar molecule A is reduced in the negative tank (A + e- -> A.-) and oxidised in the
positive tank (A -> A.+ + e-) while the cell charges; the discharged electrolyte is the same
on both sides, so crossover does not mix two different molecules. Units as in
:mod:`redoxfront.ranking.cell_metrics` (V, Ah/L, mAh/g, Wh/L, mol/L, h).

Formulas (the rules of this module):
- cell voltage V = E(ox) - E(red), each potential the one a candidate is ranked on
  (measured, else calibrated against measured potentials of its own couple type, else
  uncalibrated with the published band of its couple type); its 95 % interval combines the
  two potentials' intervals as independent errors, side by side (root sum of squares).
- capacity of each tank Q = F c / 3600 Ah/L (one electron per molecule and tank, the same
  concentration c on both sides); energy density on the two-tank basis W = u V Q / 2 (both
  tanks' volumes count; Q Q / (Q + Q) = Q / 2), on the one-tank basis W = u V Q.
- half-life of each charged form from its own predicted rate (one rate model for both
  forms, evaluated at each form's potential: :func:`redoxfront.statistics.step._predict_charged_forms`),
  first order ln 2 / k or second order 1 / (k c0); the cell's half-life is that of the
  shorter-lived form (``life_limited_by``), with the lower and upper ends taken the same way.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from redoxfront import columns as col
from redoxfront.ranking.cell_metrics import (
    CellSettings,
    energy_density_wh_per_l,
    gravimetric_capacity_mah_per_g,
    half_life_h,
    resolve_rate_order,
    volumetric_capacity_ah_per_l,
)
from redoxfront.ranking.potential_bands import uncalibrated_interval
from redoxfront.ranking.windows import Window, window_flags

CELL_CONFIGURATION = col.CELL_CONFIGURATION
SYMMETRIC = "symmetric (same molecule in both tanks)"
LIFE_LIMITED_BY = col.LIFE_LIMITED_BY
_BASIS_ORDER = ("measured", "calibrated", "uncalibrated", "")


def _num(table: pd.DataFrame, name: str) -> np.ndarray:
    if name not in table.columns:
        return np.full(len(table), np.nan)
    return pd.to_numeric(table[name], errors="coerce").to_numpy(dtype=float)


def _couple(table: pd.DataFrame, process: str, ref: str, half_width_v: float | None):
    """Potential used for one couple of every row, its 95 % interval and its basis."""
    p = col.process_potential
    meas = _num(table, p(process, "measured", ref))
    meas_u = _num(table, col.process_column(process, col.POTENTIAL_MEASURED_UNCERTAINTY))
    cal = _num(table, p(process, "calibrated", ref))
    cal_lo, cal_hi = _num(table, p(process, "calibrated", ref, "low")), _num(table, p(process, "calibrated", ref, "high"))
    raw = _num(table, p(process, "uncalibrated", ref))
    one_role = "anolyte" if process == "reduction" else "catholyte"
    raw_lo, raw_hi, _ = uncalibrated_interval(raw, np.full(len(table), one_role, dtype=object),
                                              np.ones(len(table)), half_width_v)
    use_meas = np.isfinite(meas)
    use_cal = ~use_meas & np.isfinite(cal) & np.isfinite(cal_lo) & np.isfinite(cal_hi)
    e = np.where(use_meas, meas, np.where(use_cal, cal, raw))
    u = np.where(np.isfinite(meas_u), meas_u, 0.0)
    lo = np.where(use_meas, meas - u, np.where(use_cal, np.minimum(cal_lo, e), raw_lo))
    hi = np.where(use_meas, meas + u, np.where(use_cal, np.maximum(cal_hi, e), raw_hi))
    basis = np.where(use_meas, "measured", np.where(use_cal, "calibrated", np.where(np.isfinite(e), "uncalibrated", "")))
    return e, lo, hi, basis


def symmetric_cell_metrics(table: pd.DataFrame, settings: CellSettings, ref: str) -> pd.DataFrame:
    """Fill the cell columns of the bipolar rows of a :func:`cell_metrics` table.

    Every other row keeps its figures and gets ``cell_configuration`` 'paired' (best
    partner) or 'fixed counter potential'. Bipolar rows get the symmetric-cell voltage,
    capacities, energy density and half-life in the shared columns (so they are ranked
    beside ordinary candidates on the same objectives), plus both potentials used, both
    forms' half-lives and ``life_limited_by``. Returns a copy.
    """
    out = table.copy()
    role = out[col.ROLE].astype(str).str.strip().str.lower().to_numpy() if col.ROLE in out.columns \
        else np.full(len(out), "", dtype=object)
    bip = role == "bipolar"
    other = "fixed counter potential" if settings.counter == "potential" else "paired with the best partner"
    out[CELL_CONFIGURATION] = np.where(bip, SYMMETRIC, other)
    if not bip.any():
        return out
    notes = [[] for _ in range(len(out))]
    e, lo, hi, basis = {}, {}, {}, {}
    for process in col.PROCESSES:
        e[process], lo[process], hi[process], basis[process] = _couple(out, process, ref, settings.uncalibrated_uncertainty_v)
        out[col.process_potential(process, "used", ref)] = np.where(bip, e[process], np.nan)
        out[col.process_potential(process, "used", ref, "low")] = np.where(bip, lo[process], np.nan)
        out[col.process_potential(process, "used", ref, "high")] = np.where(bip, hi[process], np.nan)
        out[col.process_column(process, col.POTENTIAL_BASIS)] = np.where(bip, basis[process], "")
        for r in np.flatnonzero(bip & ~np.isfinite(e[process])):
            notes[r].append(f"no {process} potential: no symmetric-cell voltage")
    ox, red = e["oxidation"], e["reduction"]
    v = ox - red
    v_lo = v - np.hypot(ox - lo["oxidation"], hi["reduction"] - red)
    v_hi = v + np.hypot(hi["oxidation"] - ox, red - lo["reduction"])
    for r in np.flatnonzero(bip & np.isfinite(v) & (v <= 0)):
        notes[r].append(f"symmetric-cell voltage {v[r]:.3f} V is not positive: oxidation is easier than reduction")
    conc = _num(out, col.CONCENTRATION)
    q = volumetric_capacity_ah_per_l(1.0, conc)  # one electron per molecule in each tank
    kw = dict(tank_basis=settings.tank_basis, utilisation=settings.utilisation)
    mass = _num(out, col.MOLAR_MASS)
    for r in np.flatnonzero(bip & ~(mass > 0)):
        notes[r].append(f"no valid {col.MOLAR_MASS}: no mAh/g")

    # half-lives of both charged forms; the cell lives as long as the shorter-lived one
    order = resolve_rate_order(out, settings.rate_order)
    life, life_lo, life_hi, extrap = {}, {}, {}, np.zeros(len(out), dtype=bool)
    for process, form in col.CHARGED_FORMS.items():
        k_col = col.log10_k_predicted_form(form, order)
        logk = _num(out, k_col)
        k_lo, k_hi = _num(out, k_col + col.PI_LOW_SUFFIX), _num(out, k_col + col.PI_HIGH_SUFFIX)
        no_pi = np.isfinite(logk) & ~(np.isfinite(k_lo) & np.isfinite(k_hi))
        k_lo, k_hi = np.where(no_pi, logk, k_lo), np.where(no_pi, logk, k_hi)
        life[form] = half_life_h(logk, order, conc)
        life_lo[form] = half_life_h(np.maximum(k_hi, logk), order, conc)
        life_hi[form] = half_life_h(np.minimum(k_lo, logk), order, conc)
        for name, values in ((col.HALF_LIFE, life[form]), (col.HALF_LIFE_LOW, life_lo[form]),
                             (col.HALF_LIFE_HIGH, life_hi[form])):
            out[col.form_column(form, name)] = np.where(bip, values, np.nan)
        out[col.form_column(form, col.RATE_BASIS)] = np.where(bip & np.isfinite(logk), "predicted", "")
        for r in np.flatnonzero(bip & ~np.isfinite(logk)):
            notes[r].append(f"no predicted rate of the {form} form ('{k_col}'): no half-life")
        domain = out[col.form_column(form, col.DOMAIN)].astype(str).str.lower().to_numpy() \
            if col.form_column(form, col.DOMAIN) in out.columns else np.full(len(out), "", dtype=object)
        extrap |= domain == "extrapolating"
        status = out[col.process_column(process, col.CALIBRATION_STATUS)].astype(str).str.lower().to_numpy() \
            if col.process_column(process, col.CALIBRATION_STATUS) in out.columns else np.full(len(out), "", dtype=object)
        extrap |= np.char.find(status.astype(str), "outside") >= 0
    shorter = np.where(life["reduced"] <= life["oxidised"], "reduced", "oxidised")
    both = np.isfinite(life["reduced"]) & np.isfinite(life["oxidised"])
    t = np.where(both, np.fmin(life["reduced"], life["oxidised"]), np.nan)
    t_lo = np.where(both, np.fmin(life_lo["reduced"], life_lo["oxidised"]), np.nan)
    t_hi = np.where(both, np.fmin(life_hi["reduced"], life_hi["oxidised"]), np.nan)

    # both couples are checked against the electrolyte's window (set by cell_metrics)
    win = table.attrs.get("window")
    window = None if not win else Window(low_v=win["low_v"], high_v=win["high_v"], source=win["source"])
    flags = [window_flags(lo[p], hi[p], window) for p in col.PROCESSES]
    window_flag = np.array(["; ".join(f for f in pair if f) for pair in zip(*flags)], dtype=object)

    weaker = [max(b1, b2, key=_BASIS_ORDER.index) for b1, b2 in zip(basis["reduction"], basis["oxidation"])]
    set_ = {
        col.N_ELECTRONS: 1.0,
        col.PARTNER_ID: out[col.ID].astype(str).to_numpy(),
        col.POTENTIAL_BASIS: np.array(weaker, dtype=object),
        col.potential_used(ref): np.nan, col.potential_used_low(ref): np.nan, col.potential_used_high(ref): np.nan,
        col.POTENTIAL_FLAG: "",
        col.WINDOW_FLAG: window_flag,
        col.CELL_VOLTAGE: v, col.CELL_VOLTAGE_LOW: v_lo, col.CELL_VOLTAGE_HIGH: v_hi,
        col.CAPACITY_VOL: q, col.CAPACITY_GRAV: gravimetric_capacity_mah_per_g(1.0, mass),
        col.ENERGY_DENSITY: energy_density_wh_per_l(v, q, q, **kw),
        col.ENERGY_DENSITY_LOW: energy_density_wh_per_l(v_lo, q, q, **kw),
        col.ENERGY_DENSITY_HIGH: energy_density_wh_per_l(v_hi, q, q, **kw),
        col.RATE_ORDER: order,
        col.RATE_BASIS: np.where(both, "predicted", ""),
        col.HALF_LIFE: t, col.HALF_LIFE_LOW: t_lo, col.HALF_LIFE_HIGH: t_hi,
        LIFE_LIMITED_BY: np.where(both, shorter, ""),
        col.EXTRAPOLATING: extrap,
        col.RANKING_NOTE: np.array(["; ".join(n) for n in notes], dtype=object),
    }
    mask = pd.Series(bip, index=out.index)
    for name, values in set_.items():
        new = pd.Series(list(np.broadcast_to(np.asarray(values, dtype=object), (len(out),))), index=out.index)
        old = out[name] if name in out.columns else pd.Series("" if name == LIFE_LIMITED_BY else np.nan, index=out.index)
        merged = new.where(mask, old)
        out[name] = merged.infer_objects() if merged.dtype == object else merged
    return out


__all__ = ["CELL_CONFIGURATION", "LIFE_LIMITED_BY", "SYMMETRIC", "symmetric_cell_metrics"]

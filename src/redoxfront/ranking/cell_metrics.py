"""Cell metrics per candidate: cell voltage, theoretical capacities, energy density and
the half-life of the charged species, each with its 95 % interval where one exists.

Units: potentials and voltages V, capacities Ah/L and mAh/g, energy density Wh/L,
concentrations mol/L, rate constants 1/h (first order) or L/(mol h) (second order),
half-lives h.

Science (any electrochemistry or physical-chemistry text; values from redoxfront.units):
- capacity per litre of one electrolyte Q = n F c / 3600 Ah/L (26.80 Ah/L per mol/L
  per electron, CODATA 2018 Faraday constant); per gram n F / (3.6 M) mAh/g, with M the
  molar mass of the salt including counterions.
- energy density W = u V Q_c Q_p / (Q_c + Q_p) Wh/L on the two-tank basis: both
  electrolytes' volumes count, the counter tank holding the same charge; with matched
  capacities W = u V Q / 2 (all-vanadium worked example: 1.26 V, 1.6 mol/L, n = 1 gives
  ~27 Wh/L, Darling et al., Energy Environ. Sci. 2014, 7, 3459). The one-tank basis
  counts only the candidate's tank: W = u V Q. u is the usable fraction of the charge
  (state-of-charge window).
- half-life of the charged species: first order ln 2 / k, second order 1 / (k c0) with
  c0 the operating concentration (charged at full state of charge).
- directly computed, uncalibrated potentials are typically ~0.3 V off (Davis & Fry,
  J. Phys. Chem. A 2010, 114, 12299); the interval given to them is the band of their couple
  type measured on published potentials (:mod:`redoxfront.ranking.potential_bands`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from redoxfront import columns as col
from redoxfront.campaign import bounded, choice
from redoxfront.errors import InputError, SettingsError
from redoxfront.units import AH_PER_MOL_ELECTRONS, convert_potential, partner_couple


TANK_BASES: tuple[str, ...] = ("two-tank", "one-tank")
COUNTER_MODES: tuple[str, ...] = ("best-partner", "potential", "published")
TRUE_WORDS = frozenset({"true", "yes", "y", "1", "measured"})


@dataclass(frozen=True)
class CellSettings:
    """Campaign section ``[cell]``: how candidates are turned into cell figures.

    counter : 'best-partner' pairs each candidate with the candidate of the other role
        that gives the largest voltage; 'potential' uses ``counter_potential_v``; 'published'
        a fixed partner couple with a published potential (``counter_couple``, e.g.
        'ferricyanide', :data:`redoxfront.units.PUBLISHED_PARTNERS`).
    counter_couple : the published partner for 'published'.
    counter_potential_v : potential of the counter couple, V vs the campaign reference.
    counter_capacity_ah_per_l : capacity of the counter electrolyte for 'potential'
        mode, Ah/L; unset = the same as the candidate's (matched tanks).
    concentration_mol_per_l : operating concentration of the candidate, mol/L.
    solubility_mol_per_l : cap on the concentration, mol/L (a per-candidate column
        ``solubility_mol_per_l`` caps further).
    tank_basis : 'two-tank' (both electrolytes counted) or 'one-tank'.
    utilisation : usable fraction of the theoretical charge (state-of-charge window).
    rate_order : 1 (k in 1/h) or 2 (k in L/(mol h)) for the decomposition rate; unset =
        the order the rate model used (column ``rate_order``), else whichever predicted
        rate column the table holds.
    uncalibrated_uncertainty_v : half-width of a symmetric 95 % interval for uncalibrated
        potentials, V. Unset (default): the band of the couple type derived from published
        measurements (:mod:`redoxfront.ranking.potential_bands`).
    window_low_v, window_high_v : usable electrochemical window of the electrolyte, V vs the
        campaign reference; unset = the typical window of the campaign's solvent
        (:mod:`redoxfront.ranking.windows`). Candidates whose potential interval crosses it
        are flagged in ``window_flag``.
    ph : pH of an aqueous electrolyte (the water window moves by 59 mV per pH unit).
    water_overpotential_v : margin added to both water-splitting lines (kinetic overpotential).
    """

    counter: str = field(default="best-partner", metadata=choice(*COUNTER_MODES))
    counter_potential_v: float | None = None
    counter_couple: str = "ferricyanide"
    counter_capacity_ah_per_l: float | None = field(default=None, metadata=bounded(0.0, None))
    concentration_mol_per_l: float = field(default=0.5, metadata=bounded(0.0, 30.0))
    solubility_mol_per_l: float | None = field(default=None, metadata=bounded(0.0, None))
    tank_basis: str = field(default="two-tank", metadata=choice(*TANK_BASES))
    utilisation: float = field(default=1.0, metadata=bounded(0.0, 1.0))
    rate_order: int | None = field(default=None, metadata=choice(1, 2))
    uncalibrated_uncertainty_v: float | None = field(default=None, metadata=bounded(0.0, 5.0))
    window_low_v: float | None = None
    window_high_v: float | None = None
    ph: float = field(default=7.0, metadata=bounded(-1.0, 15.0))
    water_overpotential_v: float = field(default=0.0, metadata=bounded(0.0, 2.0))

    def __post_init__(self) -> None:
        if self.counter == "potential" and self.counter_potential_v is None:
            raise SettingsError(
                "[cell] counter = 'potential' needs counter_potential_v (V vs the campaign "
                "reference); add it or use counter = 'best-partner'"
            )
        if self.counter == "best-partner" and self.counter_potential_v is not None:
            raise SettingsError(
                "[cell] counter_potential_v is set but counter = 'best-partner'; "
                "set counter = 'potential' to use it, or remove it"
            )
        if self.counter == "published":
            partner_couple(self.counter_couple)  # a known name, or the error listing them
        if self.concentration_mol_per_l <= 0:
            raise SettingsError("[cell] concentration_mol_per_l must be > 0")
        if self.solubility_mol_per_l is not None and self.solubility_mol_per_l <= 0:
            raise SettingsError("[cell] solubility_mol_per_l must be > 0")
        if self.counter_capacity_ah_per_l is not None and self.counter_capacity_ah_per_l <= 0:
            raise SettingsError("[cell] counter_capacity_ah_per_l must be > 0")
        if self.utilisation <= 0:
            raise SettingsError("[cell] utilisation must be > 0 (a fraction up to 1)")


# ---- plain formulas (scalars or arrays) -----------------------------------------
def volumetric_capacity_ah_per_l(n_electrons: float | np.ndarray, concentration_mol_per_l: float | np.ndarray):
    """Theoretical capacity of one electrolyte, Ah/L: n F c / 3600."""
    return np.asarray(n_electrons, dtype=float) * AH_PER_MOL_ELECTRONS * np.asarray(concentration_mol_per_l, dtype=float)


def gravimetric_capacity_mah_per_g(n_electrons: float | np.ndarray, molar_mass_g_per_mol: float | np.ndarray):
    """Theoretical capacity of the salt, mAh/g: n F / (3.6 M), M including counterions."""
    m = np.asarray(molar_mass_g_per_mol, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(m > 0, np.asarray(n_electrons, dtype=float) * AH_PER_MOL_ELECTRONS * 1000.0 / m, np.nan)


def energy_density_wh_per_l(
    voltage_v: float | np.ndarray,
    capacity_ah_per_l: float | np.ndarray,
    counter_capacity_ah_per_l: float | np.ndarray | None = None,
    *,
    tank_basis: str = "two-tank",
    utilisation: float = 1.0,
):
    """Theoretical energy density, Wh/L of electrolyte.

    two-tank: u V Qc Qp / (Qc + Qp), the counter tank sized to hold the same charge
    (Qp = Qc when not given, giving u V Q / 2); one-tank: u V Qc.
    """
    if tank_basis not in TANK_BASES:
        raise SettingsError(f"tank basis '{tank_basis}' is not allowed; allowed: {', '.join(TANK_BASES)}")
    v = np.asarray(voltage_v, dtype=float)
    qc = np.asarray(capacity_ah_per_l, dtype=float)
    if tank_basis == "one-tank":
        return utilisation * v * qc
    qp = qc if counter_capacity_ah_per_l is None else np.asarray(counter_capacity_ah_per_l, dtype=float)
    return utilisation * v * qc * qp / (qc + qp)


def half_life_h(log10_k: float | np.ndarray, order: int, concentration_mol_per_l: float | np.ndarray = 1.0):
    """Half-life, h, from log10 of a rate constant.

    order 1: ln 2 / k, k in 1/h; order 2: 1 / (k c0), k in L/(mol h), c0 in mol/L.
    """
    k = np.power(10.0, np.asarray(log10_k, dtype=float))
    if order == 1:
        return math.log(2.0) / k
    if order == 2:
        return 1.0 / (k * np.asarray(concentration_mol_per_l, dtype=float))
    raise SettingsError(f"rate order must be 1 or 2, got {order}")


# ---- the table ----------------------------------------------------------------------
def _numeric(table: pd.DataFrame, name: str) -> pd.Series:
    if name not in table.columns:
        return pd.Series(np.nan, index=table.index)
    return pd.to_numeric(table[name], errors="coerce")


def truthy(values: pd.Series) -> pd.Series:
    """Flags given as booleans, 0/1 or words (true/yes/measured) -> bool."""
    if values.dtype == bool:
        return values
    return values.map(lambda v: str(v).strip().lower() in TRUE_WORDS if pd.notna(v) else False).astype(bool)


def _potentials(table: pd.DataFrame, settings: CellSettings, ref: str, notes: list[list[str]],
                role: np.ndarray, n_e: np.ndarray):
    """Potential used, its 95 % interval, basis and flag per row.

    Rule: a measured potential (converted to the campaign reference by the calibrate step)
    wins, with the measurement's own interval where the file gives one (``uncertainty_v``);
    else the calibrated potential with its prediction interval; else the uncalibrated one
    with the band of its couple type (:mod:`redoxfront.ranking.potential_bands`).
    Computed potentials of two-electron carriers get a wider interval and a flag.
    """
    from redoxfront.ranking.potential_bands import SECOND_STEP_FLAG, SECOND_STEP_OVERESTIMATE_V, uncalibrated_interval

    meas = _numeric(table, col.potential_measured(ref)).to_numpy()
    meas_u = _numeric(table, col.POTENTIAL_MEASURED_UNCERTAINTY).to_numpy()
    cal = _numeric(table, col.potential_calibrated(ref)).to_numpy()
    cal_lo = _numeric(table, col.potential_calibrated_pi_low(ref)).to_numpy()
    cal_hi = _numeric(table, col.potential_calibrated_pi_high(ref)).to_numpy()
    raw = _numeric(table, col.potential_uncalibrated(ref)).to_numpy()
    use_meas = np.isfinite(meas)
    use_cal = ~use_meas & np.isfinite(cal)
    e = np.where(use_meas, meas, np.where(use_cal, cal, raw))
    raw_lo, raw_hi, _flags = uncalibrated_interval(raw, role, n_e, settings.uncalibrated_uncertainty_v)
    hw = 0.5 * SECOND_STEP_OVERESTIMATE_V
    two = n_e == 2
    cath = role == "catholyte"
    has_pi = use_cal & np.isfinite(cal_lo) & np.isfinite(cal_hi)
    cal_lo2 = np.where(two & cath, cal_lo - hw, cal_lo)
    cal_hi2 = np.where(two & ~cath, cal_hi + hw, cal_hi)
    meas_ok = use_meas & np.isfinite(meas_u)
    lo = np.where(use_meas, np.where(meas_ok, meas - meas_u, meas),
                  np.where(has_pi, np.minimum(cal_lo2, e), raw_lo))
    hi = np.where(use_meas, np.where(meas_ok, meas + meas_u, meas),
                  np.where(has_pi, np.maximum(cal_hi2, e), raw_hi))
    basis = np.where(use_meas, "measured", np.where(use_cal, "calibrated", np.where(np.isfinite(e), "uncalibrated", "")))
    flag = np.where(~use_meas & two & np.isfinite(e), SECOND_STEP_FLAG, "")
    for r in np.flatnonzero(use_meas & ~meas_ok):
        notes[r].append("measured potential without an interval (no uncertainty_v given): taken as exact")
    for r in np.flatnonzero(use_cal & ~has_pi):
        notes[r].append("calibrated potential without interval: the uncalibrated band of its couple type used")
    lo = np.where(use_cal & ~has_pi, raw_lo - raw + e, lo)
    hi = np.where(use_cal & ~has_pi, raw_hi - raw + e, hi)
    if col.CAMPAIGN_PH in table.columns:  # aqueous: the bands were measured in organic solvents
        for r in np.flatnonzero(basis == "uncalibrated"):
            notes[r].append(
                "uncalibrated potential in water: proton and (di)anion solvation are poorly captured by the "
                "implicit solvent (errors near 1 V for two-electron anolytes), so its band understates the "
                "error; calibrate against measured aqueous potentials")
    for r in np.flatnonzero(~np.isfinite(e)):
        notes[r].append(
            f"no potential (columns {col.potential_measured(ref)} / {col.potential_calibrated(ref)} / "
            f"{col.potential_uncalibrated(ref)} empty)"
        )
    return e, lo, hi, basis, flag


def resolve_rate_order(table: pd.DataFrame, setting: int | None) -> int:
    """The decomposition-rate order to use: the setting, else the table's ``rate_order``
    column (one value), else 2 if only second-order predictions exist, else 1."""
    if setting is not None:
        return int(setting)
    if col.RATE_ORDER in table.columns:
        values = set(pd.to_numeric(table[col.RATE_ORDER], errors="coerce").dropna().astype(int))
        if len(values) > 1:
            raise SettingsError(
                f"the table mixes rate orders {sorted(values)}; set [cell] rate_order to 1 or 2"
            )
        if values and values <= {1, 2}:
            return values.pop()
    if col.LOG10_K_PRED_SECOND in table.columns and col.LOG10_K_PRED_FIRST not in table.columns:
        return 2
    return 1


def cell_metrics(
    table: pd.DataFrame,
    settings: CellSettings,
    ref: str,
    *,
    default_role: str = "catholyte",
    default_n_electrons: int = 1,
    solvent: str | None = None,
    user_reference_v_vs_fc: float | None = None,
) -> pd.DataFrame:
    """Cell voltage, capacities, energy density and half-life for every candidate.

    In water the window (:mod:`redoxfront.ranking.windows`, at ``[cell] ph``) also decides
    how many electrons count: a step of a two-electron couple beyond it transfers none
    (:mod:`redoxfront.ranking.water`), and capacity and energy density use the rest.

    ``table`` has one row per candidate (columns from :mod:`redoxfront.columns`); ``ref``
    is the campaign's reference electrode key (e.g. 'fc'). Returns a copy with the new
    columns (units in their names) and a ``ranking_note`` per row; rows that lack a
    value get NaN in the figures that need it and a note, never an exception.
    """
    if col.ID not in table.columns:
        raise InputError(f"the table has no '{col.ID}' column; every candidate needs an id", field=col.ID)
    out = table.copy().reset_index(drop=True)
    n = len(out)
    notes: list[list[str]] = [[] for _ in range(n)]
    ids = out[col.ID].astype(str).to_numpy()

    role = (out[col.ROLE] if col.ROLE in out.columns else pd.Series(default_role, index=out.index))
    role = role.fillna(default_role).astype(str).str.strip().str.lower().to_numpy()
    bad_role = ~np.isin(role, ["anolyte", "catholyte", "bipolar"])
    for r in np.flatnonzero(bad_role):
        notes[r].append(f"role '{role[r]}' is neither 'anolyte', 'catholyte' nor 'bipolar'")

    n_e = _numeric(out, col.N_ELECTRONS) if col.N_ELECTRONS in out.columns else pd.Series(float(default_n_electrons), index=out.index)
    n_e = n_e.fillna(float(default_n_electrons)).to_numpy()
    bad_n = ~((n_e > 0) & (np.round(n_e) == n_e))
    for r in np.flatnonzero(bad_n):
        notes[r].append(f"n_electrons {n_e[r]} is not a positive whole number")
    n_e = np.where(bad_n, np.nan, n_e)

    e, e_lo, e_hi, basis, pot_flag = _potentials(out, settings, ref, notes, role, n_e)
    e, e_lo, e_hi = (np.where(bad_role, np.nan, a) for a in (e, e_lo, e_hi))

    # concentration, capped by solubility
    conc = np.full(n, settings.concentration_mol_per_l)
    if settings.solubility_mol_per_l is not None:
        conc = np.minimum(conc, settings.solubility_mol_per_l)
    sol = _numeric(out, col.SOLUBILITY).to_numpy()
    sol_ok = np.isfinite(sol) & (sol > 0)
    conc = np.where(sol_ok, np.minimum(conc, np.where(sol_ok, sol, np.inf)), conc)
    capped = conc < settings.concentration_mol_per_l
    from redoxfront.ranking.windows import solvent_window, window_flags

    window = solvent_window(solvent or "", ref, ph=settings.ph, water_overpotential_v=settings.water_overpotential_v,
                            low_v=settings.window_low_v, high_v=settings.window_high_v,
                            user_v_vs_fc=user_reference_v_vs_fc)
    n_used = n_e
    if solvent == "water" and window is not None:
        from redoxfront.ranking.water import electrons_in_window

        raw = _numeric(out, col.potential_uncalibrated(ref)).to_numpy()
        offsets = np.column_stack([_numeric(out, col.potential_uncalibrated(ref, k)).to_numpy() - raw
                                   for k in (1, 2)])
        # a couple moving protons at this pH: its one-electron steps are not the computed
        # electron-transfer steps (the semiquinone's pKa is not computed), so it is judged whole
        protons = _numeric(out, col.PROTONS_AT_PH).to_numpy()
        offsets[np.isfinite(protons) & (protons != 0)] = np.nan
        n_used, wnotes = electrons_in_window(e, offsets, role, n_e, window)
        for r, text in enumerate(wnotes):
            if text:
                notes[r].append(text)
        out[col.ELECTRONS_AT_PH] = n_used
    q_vol = volumetric_capacity_ah_per_l(n_used, conc)
    mass = _numeric(out, col.MOLAR_MASS).to_numpy()
    for r in np.flatnonzero(~(mass > 0)):
        notes[r].append(f"no valid {col.MOLAR_MASS}: no mAh/g")
    q_grav = gravimetric_capacity_mah_per_g(n_used, mass)

    # counter electrolyte
    sign = np.where(role == "anolyte", -1.0, 1.0)  # V = sign * (E - E_counter)
    partner = np.full(n, "", dtype=object)
    if settings.counter in ("potential", "published"):
        if settings.counter == "published":  # no proton in the couple: the same at every pH
            p = partner_couple(settings.counter_couple)
            ec = convert_potential(float(p["potential_v_vs_she"]), "she", ref, user_reference_v_vs_fc)
        else:
            ec = float(settings.counter_potential_v)  # type: ignore[arg-type]
        v = sign * (e - ec)
        v_lo = np.where(sign > 0, e_lo - ec, ec - e_hi)
        v_hi = np.where(sign > 0, e_hi - ec, ec - e_lo)
        q_counter = None if settings.counter_capacity_ah_per_l is None else np.full(n, settings.counter_capacity_ah_per_l)
        partner[:] = "fixed" if settings.counter == "potential" else settings.counter_couple
    else:
        v = np.full(n, np.nan)
        v_lo = np.full(n, np.nan)
        v_hi = np.full(n, np.nan)
        q_counter = np.full(n, np.nan)
        ok = np.isfinite(e) & np.isfinite(n_e)
        for mine, theirs, pick in (("catholyte", "anolyte", np.argmin), ("anolyte", "catholyte", np.argmax)):
            rows = np.flatnonzero((role == mine) & np.isfinite(e))
            pool = np.flatnonzero((role == theirs) & ok)
            if len(rows) == 0:
                continue
            if len(pool) == 0:
                for r in rows:
                    notes[r].append(
                        f"no {theirs} among the candidates to pair with; set [cell] counter = 'potential' "
                        "and counter_potential_v"
                    )
                continue
            p = pool[pick(e[pool])]
            s = 1.0 if mine == "catholyte" else -1.0
            v[rows] = s * (e[rows] - e[p])
            # independent errors of both electrodes, combined per side
            if s > 0:
                d_lo = np.hypot(e[rows] - e_lo[rows], e_hi[p] - e[p])
                d_hi = np.hypot(e_hi[rows] - e[rows], e[p] - e_lo[p])
            else:
                d_lo = np.hypot(e_hi[rows] - e[rows], e[p] - e_lo[p])
                d_hi = np.hypot(e[rows] - e_lo[rows], e_hi[p] - e[p])
            v_lo[rows] = v[rows] - d_lo
            v_hi[rows] = v[rows] + d_hi
            partner[rows] = ids[p]
            q_counter[rows] = q_vol[p]
    for r in np.flatnonzero(np.isfinite(v) & (v <= 0)):
        notes[r].append(f"cell voltage {v[r]:.3f} V is not positive")

    kw = dict(tank_basis=settings.tank_basis, utilisation=settings.utilisation)
    with np.errstate(invalid="ignore", divide="ignore"):  # no usable electron: 0/0, set to 0 below
        w = energy_density_wh_per_l(v, q_vol, q_counter, **kw)
        w_lo = energy_density_wh_per_l(v_lo, q_vol, q_counter, **kw)
        w_hi = energy_density_wh_per_l(v_hi, q_vol, q_counter, **kw)
    w, w_lo, w_hi = (np.where(q_vol == 0, 0.0, a) for a in (w, w_lo, w_hi))  # no usable electron

    # decomposition rate and half-life
    order = resolve_rate_order(out, settings.rate_order)
    rate_col = col.LOG10_K_PRED_FIRST if order == 1 else col.LOG10_K_PRED_SECOND
    other_col = col.LOG10_K_PRED_SECOND if order == 1 else col.LOG10_K_PRED_FIRST
    if rate_col not in out.columns and other_col in out.columns:
        raise SettingsError(
            f"[cell] rate_order = {order} but the predictions hold '{other_col}', not "
            f"'{rate_col}'; set rate_order = {3 - order}"
        )
    # rule: a measured or fitted rate (rate_source) wins over the model's prediction, with
    # the measurement's or fit's own 95 % interval where known; the prediction stays in its column
    target = col.LOG10_K_FIRST if order == 1 else col.LOG10_K_SECOND
    own = _numeric(out, target).to_numpy()
    own_lo = _numeric(out, target + col.CI_LOW_SUFFIX).to_numpy()
    own_hi = _numeric(out, target + col.CI_HIGH_SUFFIX).to_numpy()
    source = (out[col.RATE_SOURCE].fillna("").astype(str).to_numpy() if col.RATE_SOURCE in out.columns
              else np.full(n, "", dtype=object))
    use_own = np.isfinite(own)
    pred = _numeric(out, rate_col).to_numpy()
    logk = np.where(use_own, own, pred)
    logk_lo = np.where(use_own, own_lo, _numeric(out, rate_col + col.PI_LOW_SUFFIX).to_numpy())
    logk_hi = np.where(use_own, own_hi, _numeric(out, rate_col + col.PI_HIGH_SUFFIX).to_numpy())
    rate_basis = np.where(use_own, np.where(source == "fitted", "fitted", "measured"),
                          np.where(np.isfinite(pred), "predicted", ""))
    no_pi = np.isfinite(logk) & ~(np.isfinite(logk_lo) & np.isfinite(logk_hi))
    for r in np.flatnonzero(~np.isfinite(logk)):
        notes[r].append(f"no measured, fitted or predicted rate ('{rate_col}'): no half-life")
    for r in np.flatnonzero(no_pi):
        notes[r].append(f"{rate_basis[r]} rate without interval: half-life taken as exact")
    logk_lo = np.where(no_pi, logk, np.minimum(logk_lo, logk))
    logk_hi = np.where(no_pi, logk, np.maximum(logk_hi, logk))
    t = half_life_h(logk, order, conc)
    t_lo = half_life_h(logk_hi, order, conc)  # faster decay -> shorter life
    t_hi = half_life_h(logk_lo, order, conc)

    domain = out[col.DOMAIN].astype(str).str.lower() if col.DOMAIN in out.columns else pd.Series("", index=out.index)
    status = (
        out[col.CALIBRATION_STATUS].astype(str).str.lower()
        if col.CALIBRATION_STATUS in out.columns else pd.Series("", index=out.index)
    )
    # a measured or fitted rate does not extrapolate the model; a measured potential needs no calibration
    extrap = (((domain == "extrapolating").to_numpy() & ~use_own)
              | (status.str.contains("outside").to_numpy() & (basis != "measured")))
    measured = truthy(out[col.MEASURED]) if col.MEASURED in out.columns else pd.Series(False, index=out.index)

    out[col.ROLE] = role
    out[col.N_ELECTRONS] = n_e
    out[col.POTENTIAL_BASIS] = basis
    out[col.potential_used(ref)] = e
    out[col.potential_used_low(ref)] = e_lo
    out[col.potential_used_high(ref)] = e_hi
    out[col.POTENTIAL_FLAG] = pot_flag
    out[col.WINDOW_FLAG] = window_flags(e_lo, e_hi, window)
    out.attrs["window"] = None if window is None else {"low_v": window.low_v, "high_v": window.high_v,
                                                       "source": window.source}
    out[col.PARTNER_ID] = partner
    out[col.CONCENTRATION] = conc
    out[col.CONCENTRATION_CAPPED] = capped
    out[col.CELL_VOLTAGE] = v
    out[col.CELL_VOLTAGE_LOW] = v_lo
    out[col.CELL_VOLTAGE_HIGH] = v_hi
    out[col.CAPACITY_VOL] = q_vol
    out[col.CAPACITY_GRAV] = q_grav
    out[col.ENERGY_DENSITY] = w
    out[col.ENERGY_DENSITY_LOW] = w_lo
    out[col.ENERGY_DENSITY_HIGH] = w_hi
    out[col.RATE_ORDER] = order
    out[col.RATE_BASIS] = rate_basis
    out[col.HALF_LIFE] = t
    out[col.HALF_LIFE_LOW] = t_lo
    out[col.HALF_LIFE_HIGH] = t_hi
    out[col.EXTRAPOLATING] = extrap
    out[col.MEASURED] = measured.to_numpy()
    out[col.RANKING_NOTE] = ["; ".join(x) for x in notes]
    return out

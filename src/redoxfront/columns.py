"""Column names shared between pipeline steps: one source of truth.

Every column that carries a unit names it (``_v``, ``_ev``, ``_h``, ...);
potentials also name their reference electrode (``_v_vs_fc``). Steps that read
another step's table import the name from here, never spell it again.
"""

from __future__ import annotations

ID = "id"
SMILES = "smiles"
CANONICAL_SMILES = "canonical_smiles"
STATUS = "status"
ROLE = "role"
N_ELECTRONS = "n_electrons"
MOLAR_MASS = "molar_mass_g_per_mol"
"""Molar mass of the discharged salt or molecule including counterions, g/mol."""


def potential_uncalibrated(ref: str, step: int | None = None) -> str:
    """Raw semiempirical potential (shift + absolute SHE only), V vs ``ref``."""
    s = "" if step is None else f"_{step}"
    return f"potential{s}_uncalibrated_v_vs_{ref}"


def potential_calibrated(ref: str) -> str:
    """Potential after linear calibration against measured values, V vs ``ref``."""
    return f"potential_calibrated_v_vs_{ref}"


def potential_calibrated_pi_low(ref: str) -> str:
    """Lower end of the 95 % prediction interval of the calibrated potential."""
    return f"potential_calibrated_pi95_low_v_vs_{ref}"


def potential_calibrated_pi_high(ref: str) -> str:
    """Upper end of the 95 % prediction interval of the calibrated potential."""
    return f"potential_calibrated_pi95_high_v_vs_{ref}"


def potential_measured(ref: str) -> str:
    """A user's measured potential converted to ``ref``, V."""
    return f"potential_measured_v_vs_{ref}"


CALIBRATION_STATUS = "calibration_status"
"""'calibrated', 'calibrated (outside calibration range)' or 'uncalibrated'."""

# decomposition rate: first order in 1/h, or second order in L/(mol h)
LOG10_K_FIRST = "log10_k_per_h"
LOG10_K_SECOND = "log10_k_l_per_mol_per_h"
LOG10_K_PRED_FIRST = "log10_k_predicted_per_h"
LOG10_K_PRED_SECOND = "log10_k_predicted_l_per_mol_per_h"
PI_LOW_SUFFIX = "_pi95_low"
PI_HIGH_SUFFIX = "_pi95_high"
LEVERAGE = "leverage"
LEVERAGE_THRESHOLD = "leverage_threshold"
DOMAIN = "domain"
"""'inside' or 'extrapolating' (leverage above h* = 3(p+1)/n, Tropsha 2010)."""

HALF_LIFE = "half_life_h"
CELL_VOLTAGE = "cell_voltage_v"
CAPACITY_VOL = "capacity_ah_per_l"
CAPACITY_GRAV = "capacity_mah_per_g"
ENERGY_DENSITY = "energy_density_wh_per_l"
PARETO_RANK = "pareto_rank"
P_FRONT = "probability_on_front"

# --- cell metrics and ranking (cell.py, pareto.py) -----------------------------
MEASURED = "measured"
"""True when the candidate's decomposition rate has been measured (not suggested again)."""
SOLUBILITY = "solubility_mol_per_l"
"""Optional per-candidate solubility cap, mol/L."""
POTENTIAL_BASIS = "potential_basis"
"""'calibrated' or 'uncalibrated': which potential the cell voltage used."""
PARTNER_ID = "partner_id"
"""Counter electrolyte of the cell: a candidate id (best partner) or 'fixed'."""
CONCENTRATION = "concentration_mol_per_l"
CONCENTRATION_CAPPED = "concentration_capped_by_solubility"
CELL_VOLTAGE_LOW = "cell_voltage_pi95_low_v"
CELL_VOLTAGE_HIGH = "cell_voltage_pi95_high_v"
ENERGY_DENSITY_LOW = "energy_density_pi95_low_wh_per_l"
ENERGY_DENSITY_HIGH = "energy_density_pi95_high_wh_per_l"
HALF_LIFE_LOW = "half_life_pi95_low_h"
HALF_LIFE_HIGH = "half_life_pi95_high_h"
RATE_ORDER = "rate_order"
EXTRAPOLATING = "extrapolating"
"""True when the rate model extrapolates or the potential lies outside the calibration range."""
RANKING_NOTE = "ranking_note"
CROWDING = "crowding_distance"
KNEE = "knee"
EXPECTED_HV_GAIN = "expected_hypervolume_gain"
"""Expected hypervolume gain of a pick, as a fraction of the normalised objective box."""
PICK_ORDER = "pick_order"

# --- calibration and rate model (appended by the statistics step) -------------
CALIBRATION_GROUP = "calibration_group"
"""Which calibration line a row used: 'all' (pooled) or its compound class."""
STANDARDISED_RESIDUAL = "standardised_residual"
"""Training rows: residual / (s sqrt(1 - h)), dimensionless (internally studentised)."""
MODEL_SET = "model_set"
"""'train', 'test' or '' (candidate without a measured rate)."""

# ---- descriptors (redoxfront.descriptors) ----------------------------------------
DESCRIPTOR_NOTES = "descriptor_notes"
"""Per-row reasons why some descriptor values are empty ('; '-separated)."""
REORGANISATION_ENERGY = "reorganisation_energy_ev"
"""Four-point inner-sphere reorganisation energy of the first redox couple, eV."""
ENSEMBLE_STATS: tuple[str, ...] = ("mean", "min", "max")
"""Boltzmann mean, minimum and maximum over conformers within the energy window."""


def descriptor_column(
    quantity: str, site: str | None = None, state: str | None = None, stat: str = "mean"
) -> str:
    """Name of a conformer-ensemble descriptor column.

    ``quantity`` carries its unit (``sterimol_l_angstrom``); then the site name, the
    redox state where it matters, and the statistic, e.g.
    ``descriptor_column("partial_charge_e", "tail", "charged", "min")`` ->
    ``partial_charge_e_tail_charged_min``.
    """
    parts = [quantity] + [p for p in (site, state) if p] + [stat]
    return "_".join(parts)


def conformers_used_column(state: str) -> str:
    """Number of conformers of ``state`` within the descriptor energy window."""
    return f"n_conformers_used_{state}"

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
HEAVY_ATOMS = "heavy_atoms"
"""Atoms other than hydrogen in the charge carrier (from the structure graph)."""
ROTATABLE_BONDS = "rotatable_bonds"
"""Rotatable bonds of the charge carrier, RDKit's strict definition (from the structure graph)."""
TPSA = "tpsa_angstrom2"
"""Topological polar surface area of the charge carrier, Angstrom^2 (Ertl, Rohde & Selzer,
J. Med. Chem. 2000, 43, 3714; from the structure graph)."""


def potential_uncalibrated(ref: str, step: int | None = None) -> str:
    """Raw semiempirical potential (shift + absolute SHE only), V vs ``ref``."""
    s = "" if step is None else f"_{step}"
    return f"potential{s}_uncalibrated_v_vs_{ref}"


PROCESSES: tuple[str, ...] = ("reduction", "oxidation")
"""The two couples of a bipolar candidate: reduction (A + e- -> A.-) and oxidation (A -> A.+ + e-)."""


def process_potential(process: str, basis: str, ref: str, bound: str | None = None) -> str:
    """Potential of one couple of a bipolar candidate, V vs ``ref``.

    ``process``: 'reduction' or 'oxidation'; ``basis``: 'uncalibrated', 'calibrated',
    'measured' or 'used' (the one ranked on); ``bound``: None, 'low' or 'high' for the ends
    of its 95 % interval, e.g. ``oxidation_potential_calibrated_pi95_low_v_vs_fc``.
    """
    b = "" if bound is None else f"_pi95_{bound}"
    return f"{process}_potential_{basis}{b}_v_vs_{ref}"


def process_column(process: str, name: str) -> str:
    """A per-couple column of a bipolar candidate without a reference, e.g.
    ``process_column('oxidation', 'calibration_status')`` -> ``oxidation_calibration_status``."""
    return f"{process}_{name}"


SYMMETRIC_GAP_UNCALIBRATED = "symmetric_cell_voltage_uncalibrated_v"
"""Bipolar candidates: E(oxidation) - E(reduction) from the raw potentials, V. Independent of
the reference electrode and of the empirical shift, which cancel in the difference."""
CHARGED_FORMS: dict[str, str] = {"reduction": "reduced", "oxidation": "oxidised"}
"""Couple -> the charged form it makes (the radical anion, the radical cation)."""


def log10_k_predicted_form(form: str, order: int) -> str:
    """Bipolar candidates: predicted log10 of the decomposition rate of one charged form
    ('reduced' or 'oxidised'), 1/h (order 1) or L/(mol h) (order 2)."""
    return f"log10_k_predicted_{form}_per_h" if order == 1 else f"log10_k_predicted_{form}_l_per_mol_per_h"


def form_column(form: str, name: str) -> str:
    """A per-charged-form column of a bipolar candidate, e.g. ``half_life_oxidised_h``,
    ``domain_reduced``: the form's name goes before the unit suffix."""
    if name.endswith("_h") and name.startswith("half_life"):
        return f"{name[:-2]}_{form}_h"
    return f"{name}_{form}"


CELL_CONFIGURATION = "cell_configuration"
"""How a candidate's cell is built: 'symmetric (same molecule in both tanks)' for a bipolar
candidate, 'paired with the best partner' or 'fixed counter potential' for the others."""
LIFE_LIMITED_BY = "life_limited_by"
"""Bipolar candidates: the charged form ('reduced' or 'oxidised') whose half-life limits the cell."""


SUBSTITUENT_PREFIX = "substituent_"
"""Library campaigns: ``substituent_<site>`` holds the substituent at each attachment point."""


def substituent_column(site: int) -> str:
    """Column naming the substituent at attachment point ``site`` of a library scaffold."""
    return f"{SUBSTITUENT_PREFIX}{site}"


STEP_SEPARATION = "potential_step_separation_uncalibrated_v"
"""Two-electron carriers: how much harder the second step is than the first, V (second
minus first for a catholyte, first minus second for an anolyte). Negative means potential
inversion: the intermediate disproportionates and the two steps merge into one wave."""


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

# --- cell metrics and ranking (redoxfront.ranking) -----------------------------
MEASURED = "measured"
"""True when the candidate's decomposition rate has been measured (not suggested again)."""
SOLUBILITY = "solubility_mol_per_l"
"""Optional per-candidate solubility cap, mol/L."""
POTENTIAL_BASIS = "potential_basis"
"""'measured', 'calibrated' or 'uncalibrated': which potential the cell voltage used."""


def potential_used(ref: str) -> str:
    """The potential a candidate is ranked on (measured, calibrated or uncalibrated: see
    ``potential_basis``), V vs ``ref``."""
    return f"potential_used_v_vs_{ref}"


def potential_used_low(ref: str) -> str:
    """Lower end of the 95 % interval of the potential a candidate is ranked on, V vs ``ref``."""
    return f"potential_used_pi95_low_v_vs_{ref}"


def potential_used_high(ref: str) -> str:
    """Upper end of the 95 % interval of the potential a candidate is ranked on, V vs ``ref``."""
    return f"potential_used_pi95_high_v_vs_{ref}"


POTENTIAL_FLAG = "potential_flag"
"""Why a potential's interval is wider than its basis alone gives (two-electron second step)."""
WINDOW_FLAG = "window_flag"
"""Whether the potential (with its interval) lies outside the electrolyte's usable window."""
POTENTIAL_MEASURED_UNCERTAINTY = "potential_measured_uncertainty_v"
"""Half-width of the 95 % interval of a measured potential, V (the measured file's ``uncertainty_v``)."""
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
RATE_BASIS = "rate_basis"
"""'measured', 'fitted' or 'predicted': which decomposition rate the half-life used."""

EXTRAPOLATING = "extrapolating"
"""True when the rate model extrapolates or the potential lies outside the calibration range."""
RANKING_NOTE = "ranking_note"
CROWDING = "crowding_distance"
KNEE = "knee"
EXPECTED_HV_GAIN = "expected_hypervolume_gain"
"""Expected hypervolume gain of a pick, as a fraction of the normalised objective box."""
PICK_ORDER = "pick_order"

# --- calibration and rate model (appended by the statistics step) -------------
CALIBRATION_WARNING = "calibration_warning"
"""Rows calibrated with a line of one residual degree of freedom carry its warning; else ''."""
MODEL_WARNING = "model_warning"
"""Every prediction of a rate model with one residual degree of freedom carries its warning."""
CALIBRATION_GROUP = "calibration_group"
"""Which calibration line a row used: 'all' (pooled) or its compound class."""
STANDARDISED_RESIDUAL = "standardised_residual"
"""Training rows: residual / (s sqrt(1 - h)), dimensionless (internally studentised)."""
RATE_SOURCE = "rate_source"
"""Where a candidate's decomposition rate came from: 'measured' (the measured-rates file)
or 'fitted' (a cycling or decay file, by the fade step); empty when it has none."""
RATE_SOURCE_DETAIL = "rate_source_detail"
"""The file and row of a measured rate, or the cycling file and 95 % CI of a fitted one."""
RATE_NOTE = "rate_note"
"""A candidate with both a measured and a fitted rate: which one was used and whether they disagree."""
MODEL_SET = "model_set"
"""'train', 'test' or '' (candidate without a measured rate)."""

# ---- bookkeeping columns of the descriptor table (not descriptors) ----------------
BOOKKEEPING_COLUMNS: tuple[str, ...] = (
    ID, SMILES, CANONICAL_SMILES, STATUS, ROLE, N_ELECTRONS, MOLAR_MASS, "counterions",
    "counterion_note", HEAVY_ATOMS, "charge_discharged", "charge_charged",
    "multiplicity_discharged", "multiplicity_charged", "conformers_embedded",
    "conformers_refined", "gradient_calls", "optimisations_converged", "wall_time_s",
    "engine_time_s", "from_store", "descriptor_notes", SOLUBILITY, MEASURED, CALIBRATION_STATUS,
    CALIBRATION_GROUP, POTENTIAL_MEASURED_UNCERTAINTY, "set", "class",
)
"""Columns of ``descriptors.csv`` that describe the run or the input, not the molecule:
never spanned by a training-set design nor searched as model terms."""
BOOKKEEPING_PREFIXES: tuple[str, ...] = (
    "n_conformers_used_", "potential_measured", "potential_calibrated", "log10_k", "calibration",
    SUBSTITUENT_PREFIX, "leverage", "domain",
)


def is_bookkeeping(name: str) -> bool:
    """True for a column that is not a molecular descriptor (see :data:`BOOKKEEPING_COLUMNS`)."""
    return name in BOOKKEEPING_COLUMNS or name.startswith(BOOKKEEPING_PREFIXES)


# ---- descriptors (redoxfront.descriptors) ----------------------------------------
DESCRIPTOR_NOTES = "descriptor_notes"
"""Per-row reasons why some descriptor values are empty ('; '-separated)."""
REORGANISATION_ENERGY = "reorganisation_energy_ev"
"""Four-point inner-sphere reorganisation energy of the first redox couple, eV."""
REORGANISATION_ENERGY_2 = "reorganisation_energy_2_ev"
"""The same for the second couple of a two-electron carrier (intermediate/charged), eV."""
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


# ---- fade step: per-cycle table (results/fade_cycles.csv, redoxfront.fade.files) ----
CYCLE = "cycle"
"""Cycle number as counted by the cycler (renumbered to keep increasing after a restart)."""
TIME_H = "time_h"
"""Time of the point or end of the cycle, h (from the first row of the file)."""
CHARGE_CAPACITY = "charge_capacity_mah"
DISCHARGE_CAPACITY = "discharge_capacity_mah"
COULOMBIC_EFFICIENCY = "coulombic_efficiency_percent"
RETENTION = "capacity_retention_percent"
"""Signal as a percentage of the first point used."""
SIGNAL = "signal"
"""The quantity that is fitted: capacity on the chosen basis (mAh) or the decay signal."""
USED = "used"
"""False for points set aside by the clean-up rules (reason in :data:`NOTE`)."""
NOTE = "note"

# ---- fade step: rate table (results/rates.csv, redoxfront.fade.step) ---------------
K_FIRST = "k_per_h"
"""Decomposition rate constant of the charged species, first order, 1/h."""
K_SECOND = "k_l_per_mol_per_h"
"""Second-order decomposition rate constant, L/(mol h) (needs c0)."""
K_FADE = "k_fade_per_h"
"""Fitted capacity-fade constant before the state-of-charge conversion, 1/h."""
CI_LOW_SUFFIX = "_ci95_low"
CI_HIGH_SUFFIX = "_ci95_high"
CAPACITY_HALF_LIFE = "capacity_half_life_h"
FADE_PER_DAY = "fade_percent_per_day"
FADE_PER_CYCLE = "fade_percent_per_cycle"
TIME_TO_80 = "time_to_80_percent_h"
MEAN_SOC = "mean_state_of_charge"
FADE_MODEL = "model"
"""Rate law chosen by AICc: 'linear', 'first_order', 'first_order_plateau' or 'second_order'."""
DATA_KIND = "data_kind"
"""'cycling' or 'decay'."""
CELL_TYPE = "cell_type"
"""'symmetric', 'full' or 'decay'."""
CI_METHOD = "ci_method"
N_POINTS_USED = "n_points_used"
N_POINTS_READ = "n_points_read"
SOURCE_FILE = "source_file"
RATE_TABLE_COLUMNS: tuple[str, ...] = (
    ID, STATUS, FADE_MODEL, DATA_KIND, CELL_TYPE, MEAN_SOC,
    K_FIRST, K_FIRST + CI_LOW_SUFFIX, K_FIRST + CI_HIGH_SUFFIX,
    LOG10_K_FIRST, LOG10_K_FIRST + CI_LOW_SUFFIX, LOG10_K_FIRST + CI_HIGH_SUFFIX,
    K_SECOND, K_SECOND + CI_LOW_SUFFIX, K_SECOND + CI_HIGH_SUFFIX,
    LOG10_K_SECOND, LOG10_K_SECOND + CI_LOW_SUFFIX, LOG10_K_SECOND + CI_HIGH_SUFFIX,
    K_FADE, K_FADE + CI_LOW_SUFFIX, K_FADE + CI_HIGH_SUFFIX,
    HALF_LIFE, HALF_LIFE + CI_LOW_SUFFIX, HALF_LIFE + CI_HIGH_SUFFIX,
    CAPACITY_HALF_LIFE, FADE_PER_DAY, FADE_PER_CYCLE, TIME_TO_80,
    CI_METHOD, N_POINTS_USED, N_POINTS_READ, SOURCE_FILE,
)
"""Columns of ``rates.csv`` in order. The target of the stability model is
``log10_k_per_h`` (decomposition of the charged species, 1/h); second-order fits
also fill ``log10_k_l_per_mol_per_h`` (L/(mol h)) when c0 is known."""

# ---- fade step: model comparison (results/fade_models.csv, redoxfront.fade.rate_laws) ----------
FADE_CHOSEN = "chosen"
"""True for the rate law chosen for the dataset (lowest AICc among the allowed ones)."""
FADE_N_PARAMS = "n_params"
"""Number of fitted parameters of the rate law (the variance is not counted)."""
FADE_AICC = "aicc"
"""Small-sample Akaike information criterion, dimensionless (Hurvich & Tsai 1989)."""
FADE_DELTA_AICC = "delta_aicc"
"""AICc minus the lowest AICc of the dataset, dimensionless."""
FADE_AKAIKE_WEIGHT = "akaike_weight"
"""exp(-delta/2) normalised over the models of the dataset, 0..1 (Burnham & Anderson 2002)."""
FADE_RSS = "rss"
"""Residual sum of squares, in squared units of the fitted signal (mAh^2 for capacity)."""
FADE_Y0 = "y0"
"""Fitted signal at the first point used, in the unit of the signal (mAh for capacity)."""
FADE_Y_INF = "y_inf"
"""Fitted plateau of ``first_order_plateau`` in the unit of the signal; empty for the others."""

# --- aqueous campaigns: proton-coupled couples (redoxfront.compute.aqueous) -------------
CAMPAIGN_PH = "campaign_ph"
"""pH the potentials of an aqueous campaign are given at ([aqueous] ph)."""
PKA_REDUCED = "pka_reduced"
"""pKa values of the protons the reduced form takes up (';' between, ascending); a candidate
column of that name gives them, else they are estimated."""
PKA_OXIDISED = "pka_oxidised"
"""pKa values of protons the oxidised form takes up (given only)."""
PKA_SOURCE = "pka_source"
"""'given', 'estimated' or 'none'."""
PKA_UNCERTAINTY = "pka_uncertainty"
"""Stated half-width of the pKa values, pKa units (estimated ones: wide)."""
PKA_REFERENCE = "pka_reference_acid"
"""Reference acid(s) of estimated pKa values and the empirical slope used."""
PROTON_SITES = "proton_sites"
"""Sites (element + canonical atom index + family) that take up protons on reduction."""
PROTONATION_FORMS = "protonation_forms"
"""The reduced forms computed (store name: SMILES, charge)."""
PROTONS_AT_PH = "protons_moved_at_ph"
"""m: protons moved with the n electrons at the campaign pH."""
NERNST_SLOPE_AT_PH = "potential_slope_at_ph_v_per_ph"
"""dE/dpH of the couple at the campaign pH, V per pH unit."""


def potential_electron_transfer_uncalibrated(ref: str) -> str:
    """Raw potential of the forms as computed (no proton moved), V vs ``ref``."""
    return f"potential_electron_transfer_uncalibrated_v_vs_{ref}"


def potential_ph0_uncalibrated(ref: str) -> str:
    """Raw potential extrapolated to pH 0 along the couple's lines, V vs ``ref``."""
    return f"potential_ph0_uncalibrated_v_vs_{ref}"
MEASURED_PH_NOTE = "measured_ph_note"
"""How a measured potential was moved to the campaign pH, and the pKa values it crossed."""
ELECTRONS_AT_PH = "electrons_usable_at_ph"
"""Electrons of the couple whose steps lie inside the water window at the campaign pH."""

"""Physical constants, unit conversions and reference-electrode potentials.

This module is the single source of truth for every constant and conversion in
redoxfront. Values are CODATA 2018 unless stated otherwise.
"""

from __future__ import annotations

import math

from redoxfront.errors import SettingsError

# --- CODATA 2018 (exact or recommended values) -------------------------------
FARADAY_C_PER_MOL: float = 96485.33212
"""Faraday constant, C/mol (CODATA 2018, exact as N_A * e)."""
AVOGADRO_PER_MOL: float = 6.02214076e23
"""Avogadro constant, 1/mol (CODATA 2018, exact)."""
ELEMENTARY_CHARGE_C: float = 1.602176634e-19
"""Elementary charge, C (CODATA 2018, exact)."""
GAS_CONSTANT_J_PER_MOL_K: float = 8.314462618
"""Molar gas constant, J/(mol K) (CODATA 2018, exact)."""
BOLTZMANN_EV_PER_K: float = 8.617333262e-5
"""Boltzmann constant, eV/K (CODATA 2018)."""
HARTREE_EV: float = 27.211386245988
"""Hartree energy, eV (CODATA 2018)."""
BOHR_ANGSTROM: float = 0.529177210903
"""Bohr radius, Angstrom (CODATA 2018)."""
CAL_J: float = 4.184
"""Thermochemical calorie, J (definition)."""

# --- derived conversions -------------------------------------------------------
EV_KJ_PER_MOL: float = ELEMENTARY_CHARGE_C * AVOGADRO_PER_MOL / 1000.0
"""1 eV per particle in kJ/mol (= F / 1000 numerically, 96.485 kJ/mol)."""
EV_KCAL_PER_MOL: float = EV_KJ_PER_MOL / CAL_J
"""1 eV per particle in kcal/mol (23.0605 kcal/mol)."""
HARTREE_KCAL_PER_MOL: float = HARTREE_EV * EV_KCAL_PER_MOL
"""1 Hartree per particle in kcal/mol (627.5095)."""
ANGSTROM_BOHR: float = 1.0 / BOHR_ANGSTROM
"""1 Angstrom in bohr."""
SECONDS_PER_HOUR: float = 3600.0
SECONDS_PER_DAY: float = 86400.0
STANDARD_TEMPERATURE_K: float = 298.15
"""Standard temperature, K (IUPAC)."""
AH_PER_MOL_ELECTRONS: float = FARADAY_C_PER_MOL / SECONDS_PER_HOUR
"""Charge of one mole of electrons in Ah (26.801 Ah/mol)."""

# --- absolute potential of the standard hydrogen electrode ---------------------
ABSOLUTE_SHE_V: dict[str, float] = {
    # Trasatti, Pure Appl. Chem. 1986, 58, 955 (IUPAC recommendation).
    "trasatti": 4.44,
    # Isse & Gennaro, J. Phys. Chem. B 2010, 114, 7894 (value from memory).
    "isse-gennaro": 4.28,
}
"""Absolute potential of the SHE, V, by the convention's name."""

# --- reference electrodes, potential vs SHE in V -------------------------------
# SCE and Ag/AgCl (sat. KCl): Bard & Faulkner, Electrochemical Methods, 2nd ed.
# Fc+/Fc in acetonitrile: +0.40 V vs SCE (Connelly & Geiger, Chem. Rev. 1996, 96, 877).
PLAUSIBLE_POTENTIAL_LIMIT_V_VS_FC: float = 5.0
"""A computed potential beyond +-5 V vs Fc+/Fc lies outside the stability window of any
liquid electrolyte (the widest organic ones span roughly -3.5 to +2.5 V vs Fc+/Fc; from memory,
no single source): it points to a wrong charge state or counterion, and is flagged."""
SCE_VS_SHE_V: float = 0.241
AGAGCL_SAT_KCL_VS_SHE_V: float = 0.197
FC_VS_SCE_MECN_V: float = 0.40

# Ag/Ag+ (0.01 M AgNO3 in acetonitrile, with 0.1 M tetraalkylammonium salt): Fc+/Fc lies
# +0.087 V against it (Pavlishchuk & Addison, Inorg. Chim. Acta 2000, 298, 97, Table 1; value
# from memory). Defined relative to Fc+/Fc so both non-aqueous references stay consistent.
FC_VS_AGAG_MECN_V: float = 0.087

REFERENCE_ELECTRODES_V_VS_SHE: dict[str, float] = {
    "she": 0.0,
    "sce": SCE_VS_SHE_V,
    "agagcl": AGAGCL_SAT_KCL_VS_SHE_V,
    "fc": SCE_VS_SHE_V + FC_VS_SCE_MECN_V,
    "agag": SCE_VS_SHE_V + FC_VS_SCE_MECN_V - FC_VS_AGAG_MECN_V,
}
"""Reference electrode potentials vs SHE, V. Keys are the short names used in
column names (``potential_v_vs_fc``) and campaign files."""

REFERENCE_ALIASES: dict[str, str] = {
    "she": "she",
    "nhe": "she",
    "sce": "sce",
    "agagcl": "agagcl",
    "ag/agcl": "agagcl",
    "ag/agcl (sat. kcl)": "agagcl",
    "fc": "fc",
    "fc+/fc": "fc",
    "fc/fc+": "fc",
    "ferrocene": "fc",
    "ferrocenium/ferrocene": "fc",
    "agag": "agag",
    "ag/ag+": "agag",
    "ag/agno3": "agag",
    "ag/ag+ (0.01 m agno3)": "agag",
    "ag/ag+ (0.01 m agno3, mecn)": "agag",
    "ag/ag+ (0.01 m agno3 in mecn)": "agag",
    "ag/ag+ (0.01 m agno3 in acetonitrile)": "agag",
    "user": "user",
    "rhe": "rhe",
    "reversible hydrogen electrode": "rhe",
}

RHE = "rhe"
"""Key of the reversible hydrogen electrode: its potential vs SHE depends on the pH."""

USER_REFERENCE = "user"
"""Key of the user-defined reference: its potential vs Fc+/Fc is stated in ``[compute]
user_reference_v_vs_fc`` (and its name in ``user_reference_name``)."""

REFERENCE_LABELS: dict[str, str] = {
    "she": "SHE",
    "sce": "SCE",
    "agagcl": "Ag/AgCl (sat. KCl)",
    "fc": "Fc+/Fc",
    "agag": "Ag/Ag+ (0.01 M AgNO3, MeCN)",
    "user": "user-defined reference",
    "rhe": "RHE",
}
"""How a reference is written wherever a person reads it (never the short key)."""


def reference_label(name: str, user_name: str | None = None) -> str:
    """The reference as a person reads it: ``Fc+/Fc``, ``SCE`` ... (the user's name for 'user')."""
    key = reference_key(name)
    if key == USER_REFERENCE and user_name:
        return user_name
    return REFERENCE_LABELS[key]


def reference_v_vs_she(name: str, user_v_vs_fc: float | None = None, ph: float | None = None,
                       temperature_k: float = STANDARD_TEMPERATURE_K) -> float:
    """Potential of a reference electrode vs SHE, V; the user-defined one needs its stated
    offset vs Fc+/Fc, the reversible hydrogen electrode (RHE) the pH of the solution it
    sits in: E(RHE) = -(ln 10) RT/F x pH vs SHE (it moves with pH)."""
    key = reference_key(name)
    if key == RHE:
        if ph is None:
            raise SettingsError(
                "a potential vs RHE needs the pH of its solution: give a 'ph' column in the measured "
                "potentials file (or set [aqueous] ph)"
            )
        return rhe_v_vs_she(float(ph), temperature_k)
    if key == USER_REFERENCE:
        if user_v_vs_fc is None:
            raise SettingsError(
                "the user-defined reference needs its potential vs Fc+/Fc: set [compute] "
                "user_reference_v_vs_fc (V)"
            )
        return REFERENCE_ELECTRODES_V_VS_SHE["fc"] + float(user_v_vs_fc)
    return REFERENCE_ELECTRODES_V_VS_SHE[key]


def reference_key(name: str) -> str:
    """Normalise a reference-electrode name (``Fc+/Fc``, ``Ag/AgCl``, ``SCE`` ...) to its short
    key (``fc``, ``agagcl``, ``sce``, ``she``, ``agag``, ``user``), the one in column names."""
    key = REFERENCE_ALIASES.get(" ".join(str(name).strip().lower().split()))
    if key is None:
        allowed = ", ".join(REFERENCE_LABELS[k] for k in REFERENCE_LABELS) + " (or the short keys " \
            + ", ".join(REFERENCE_LABELS) + ")"
        raise SettingsError(f"unknown reference electrode '{name}'; allowed: {allowed}")
    return key


def convert_potential(value_v: float, from_ref: str, to_ref: str, user_v_vs_fc: float | None = None,
                      ph: float | None = None, temperature_k: float = STANDARD_TEMPERATURE_K) -> float:
    """Convert a potential (V) measured against ``from_ref`` to one against ``to_ref``.

    E(vs B) = E(vs A) + E(A vs SHE) - E(B vs SHE). ``user_v_vs_fc``: the stated potential of
    the user-defined reference vs Fc+/Fc, V (needed only when 'user' is involved); ``ph``:
    the pH of the solution (needed only when RHE is involved).
    """
    a = reference_v_vs_she(from_ref, user_v_vs_fc, ph, temperature_k)
    b = reference_v_vs_she(to_ref, user_v_vs_fc, ph, temperature_k)
    return value_v + a - b


# --- water: Nernst slope, stability lines, a published aqueous partner ---------------------
def nernst_slope_v_per_ph(temperature_k: float = STANDARD_TEMPERATURE_K) -> float:
    """(ln 10) RT/F, V per pH unit: how far a couple moving one proton per electron shifts per
    pH unit (0.05916 V at 298.15 K from the CODATA 2018 R and F)."""
    return math.log(10.0) * GAS_CONSTANT_J_PER_MOL_K * temperature_k / FARADAY_C_PER_MOL


def rhe_v_vs_she(ph: float, temperature_k: float = STANDARD_TEMPERATURE_K) -> float:
    """Potential of the reversible hydrogen electrode vs SHE at ``ph``, V (-0.0592 V per pH)."""
    return -nernst_slope_v_per_ph(temperature_k) * float(ph)


OXYGEN_EVOLUTION_V_VS_SHE: float = 1.229
"""O2 + 4 H+ + 4 e- -> 2 H2O, standard potential vs SHE at 298.15 K, V (Bard, Parsons &
Jordan, Standard Potentials in Aqueous Solution, IUPAC 1985; value from memory). The
hydrogen line (2 H+ + 2 e- -> H2) is 0 V vs SHE by definition."""


def water_lines_v_vs_she(ph: float, temperature_k: float = STANDARD_TEMPERATURE_K) -> tuple[float, float]:
    """(hydrogen evolution, oxygen evolution) equilibrium potentials at ``ph``, V vs SHE.

    Both move by -(ln 10) RT/F per pH unit and stay 1.229 V apart: the thermodynamic
    stability window of water (Pourbaix, Atlas of Electrochemical Equilibria, 1974).
    """
    shift = rhe_v_vs_she(ph, temperature_k)
    return shift, OXYGEN_EVOLUTION_V_VS_SHE + shift


PUBLISHED_PARTNERS: dict[str, dict[str, object]] = {
    "ferricyanide": {
        "label": "ferri/ferrocyanide, [Fe(CN)6]3-/4-",
        "potential_v_vs_she": 0.361,
        "n_electrons": 1,
        "source": "Bard, Parsons & Jordan, Standard Potentials in Aqueous Solution (IUPAC 1985): "
                  "+0.361 V vs SHE, no proton in the couple (value from memory; ionic strength shifts it)",
    },
}
"""Fixed partner couples of aqueous cells with their published standard potentials and sources.
Ferri/ferrocyanide is the usual alkaline catholyte partner; it moves no proton, so its potential
does not change with pH in neutral and alkaline solution."""

PARTNER_ALIASES: dict[str, str] = {
    "ferricyanide": "ferricyanide", "ferrocyanide": "ferricyanide",
    "ferri/ferrocyanide": "ferricyanide", "[fe(cn)6]3-/4-": "ferricyanide",
}


def partner_couple(name: str) -> dict[str, object]:
    """A published fixed partner by name (``ferricyanide``), with potential vs SHE and source."""
    key = PARTNER_ALIASES.get(" ".join(str(name).strip().lower().split()))
    if key is None:
        raise SettingsError(
            f"unknown partner couple '{name}'; allowed: {', '.join(sorted(PARTNER_ALIASES))}")
    return PUBLISHED_PARTNERS[key]


def hartree_to_ev(energy_eh: float) -> float:
    """Hartree to eV (CODATA 2018)."""
    return energy_eh * HARTREE_EV


def rt_ln10_kcal_per_mol(temperature_k: float = STANDARD_TEMPERATURE_K) -> float:
    """RT ln(10) in kcal/mol: the free-energy change per decade of a rate constant."""
    return GAS_CONSTANT_J_PER_MOL_K * temperature_k * math.log(10.0) / (CAL_J * 1000.0)

# --- dipole moments --------------------------------------------------------------
SPEED_OF_LIGHT_M_PER_S: float = 299792458.0
"""Speed of light in vacuum, m/s (CODATA 2018, exact)."""
DEBYE_C_M: float = 1e-21 / SPEED_OF_LIGHT_M_PER_S
"""1 debye in C m (definition: 1e-18 statC cm)."""
E_BOHR_DEBYE: float = ELEMENTARY_CHARGE_C * BOHR_ANGSTROM * 1e-10 / DEBYE_C_M
"""1 e*bohr (atomic unit of dipole moment) in debye (2.5417 D)."""

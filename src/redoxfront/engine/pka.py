"""pKa estimates relative to a reference acid of the same family (proton exchange).

For an acid HA and a reference acid HR of the same family with a known pKa, the
exchange HA + R- -> A- + HR has dG_x = [G(A-) - G(HA)] - [G(R-) - G(HR)]; then

    pKa(HA) = pKa(HR) + s x dG_x / ((ln 10) RT)

(isodesmic or proton-exchange scheme: the proton's own solvation free energy and much of
the method's error cancel; e.g. Ho & Coote, Theor. Chem. Acc. 2010, 125, 3). ``s`` is an
empirical slope: continuum-solvation deprotonation energies spread the pKa scale too
widely, so s < 1 (values near 0.5 are usual for implicit solvent; from memory). Our value
for GFN2-xTB/ALPB(water) with the lowest of a few conformers was fitted on seven
para- and meta-substituted phenols with published pKa values (tests/test_engine_pka.py, CRC Handbook
values); it is :data:`EMPIRICAL_SLOPE`. Energies in Hartree, pKa in pKa units.

Every estimate is flagged ``estimated`` and carries :data:`ESTIMATE_UNCERTAINTY_PKA`, a wide
stated half-width: semiempirical pKa errors of several units are common.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from redoxfront.errors import SettingsError
from redoxfront.units import GAS_CONSTANT_J_PER_MOL_K, HARTREE_EV, STANDARD_TEMPERATURE_K, EV_KJ_PER_MOL

EMPIRICAL_SLOPE: float = 0.24
"""s of the exchange scheme: 0.235 fitted on seven substituted phenols (r = 0.99; see the module text)."""
ESTIMATE_UNCERTAINTY_PKA: float = 3.0
"""Stated half-width of an estimated pKa, pKa units."""

PHENOL_OH = "phenol O-H"
CARBOXYLIC_ACID = "carboxylic acid"
REDUCED_N_HETEROCYCLE_NH = "N-H of a reduced N-heterocycle"


@dataclass(frozen=True)
class ReferenceAcid:
    """A reference acid: SMILES of the acid form, the index of the heavy atom that holds the
    proton (in that SMILES' atom order), its pKa in water at 25 degC and the source."""

    family: str
    name: str
    smiles: str
    site_atom: int
    pka: float
    source: str


REFERENCE_ACIDS: dict[str, ReferenceAcid] = {
    PHENOL_OH: ReferenceAcid(PHENOL_OH, "phenol", "Oc1ccccc1", 0, 9.99,
                             "CRC Handbook of Chemistry and Physics, dissociation constants of organic "
                             "acids: phenol 9.99 (value from memory)"),
    CARBOXYLIC_ACID: ReferenceAcid(CARBOXYLIC_ACID, "benzoic acid", "OC(=O)c1ccccc1", 0, 4.20,
                                   "CRC Handbook of Chemistry and Physics: benzoic acid 4.20 (value from memory)"),
    REDUCED_N_HETEROCYCLE_NH: ReferenceAcid(
        REDUCED_N_HETEROCYCLE_NH, "1,5-dihydrolumiflavin (N1-H)", "CC1=CC2=C(C=C1C)N(C)C1=C(N2)C(=O)NC(=O)N1",
        18, 6.7, "reduced flavin N1-H pKa 6.7 (Macheroux, Kappes & Ealick, FEBS J. 2011, 278, 2625; "
                 "value from memory)"),
}
"""One reference acid per site family (families of :mod:`redoxfront.candidates.protonation`)."""


def reference_acid(family: str) -> ReferenceAcid:
    """The reference acid of a site family; unknown family -> SettingsError naming the allowed ones."""
    try:
        return REFERENCE_ACIDS[family]
    except KeyError:
        raise SettingsError(
            f"no reference acid for site family '{family}'; allowed: {', '.join(REFERENCE_ACIDS)}"
        ) from None


def deprotonation_energy_ev(e_acid_eh: float, e_base_eh: float) -> float:
    """E(A-) - E(HA), eV (electronic + implicit-solvent energies of the lowest conformers)."""
    return (e_base_eh - e_acid_eh) * HARTREE_EV


@dataclass(frozen=True)
class PkaEstimate:
    """An estimated pKa: value, stated half-width, and how it was obtained."""

    pka: float
    uncertainty: float
    reference: str
    slope: float
    source: str = "estimated"


def relative_pka(
    delta_e_ev: float,
    reference_delta_e_ev: float,
    reference_pka: float,
    *,
    slope: float = EMPIRICAL_SLOPE,
    temperature_k: float = STANDARD_TEMPERATURE_K,
) -> float:
    """pKa(HA) = pKa(HR) + s (dE(HA) - dE(HR)) / ((ln 10) RT); energies in eV per molecule."""
    rt_ln10_ev = math.log(10.0) * GAS_CONSTANT_J_PER_MOL_K * temperature_k / (EV_KJ_PER_MOL * 1000.0)
    return reference_pka + slope * (delta_e_ev - reference_delta_e_ev) / rt_ln10_ev


def estimate_pka(delta_e_ev: float, reference: ReferenceAcid, reference_delta_e_ev: float, *,
                 slope: float = EMPIRICAL_SLOPE, uncertainty: float = ESTIMATE_UNCERTAINTY_PKA) -> PkaEstimate:
    """The estimate of one site, flagged 'estimated', with its stated half-width."""
    value = relative_pka(delta_e_ev, reference_delta_e_ev, reference.pka, slope=slope)
    return PkaEstimate(value, uncertainty, f"{reference.name} (pKa {reference.pka:g})", slope)

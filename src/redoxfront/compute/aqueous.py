"""Proton-coupled couples in the compute step: protonation forms, pKa values, E at the pH.

For an aqueous campaign (``[aqueous]``), after a candidate's redox states: the reduced
forms holding the protons it takes up (anolytes written in their oxidised form; built by
:mod:`redoxfront.candidates.protonation`) are computed like any state (RDKit conformers,
GFN-xTB + ALPB water) and stored under the candidate's SMILES with their protonation
field; the pKa of each proton is the candidate's given value (column ``pka_reduced``) or
estimated against the reference acid of the site's family (:mod:`redoxfront.engine.pka`),
whose acid and base are computed and stored once per settings. The potential column of the
row is then the one at the campaign pH (:mod:`redoxfront.engine.proton_coupled`); the
potential of the forms as computed and the pH-0 value are kept beside it.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from typing import Any, Callable

import numpy as np
from rdkit import Chem

from redoxfront import columns as C
from redoxfront.campaign import AqueousSettings, ComputeSettings
from redoxfront.candidates.conformers import generate_conformers
from redoxfront.candidates.protonation import (
    ProtonLadder,
    deprotonated_molecule,
    form_molecule,
    reduced_ladder,
    site_patterns,
)
from redoxfront.candidates.structures import Candidate
from redoxfront.engine.optimizer import optimize_geometry
from redoxfront.engine.pka import (
    ESTIMATE_UNCERTAINTY_PKA,
    EMPIRICAL_SLOPE,
    deprotonation_energy_ev,
    estimate_pka,
    reference_acid,
)
from redoxfront.engine.proton_coupled import OXIDISED, REDUCED, ProtonCoupledCouple, ProtonSite, parse_pka_list
from redoxfront.engine.records import POSITION_DECIMALS, ConformerResult, StateResult, state_key
from redoxfront.engine.xtb import Engine
from redoxfront.errors import EngineError, InputError, SettingsError

Lookup = Callable[[str, str], "dict | None"]
Keep = Callable[[str, str, dict], dict]


def optimise_form(engine: Engine, mol_h: Chem.Mol, charge: int, uhf: int, settings: ComputeSettings) -> StateResult:
    """Lowest-energy structure of one form: RDKit conformers of ``mol_h``, the lowest
    ``refine_lowest`` optimised with the engine at ``charge`` and ``uhf`` unpaired electrons."""
    t0 = time.perf_counter()
    s0 = engine.stats.seconds
    starts, _ = generate_conformers(mol_h, settings.conformers, settings.seed)
    if not starts:
        raise InputError("no conformer could be embedded for a protonation form")
    numbers = np.array([a.GetAtomicNum() for a in mol_h.GetAtoms()])
    confs = []
    for i, start in enumerate(starts):
        opt = optimize_geometry(engine, numbers, np.asarray(start, dtype=float), charge, uhf, settings.optimizer,
                                spin_polarized=settings.spin_polarized and uhf > 0)
        r = opt.result
        confs.append(ConformerResult(
            positions_angstrom=opt.positions_angstrom.round(POSITION_DECIMALS), energy_eh=r.energy_eh,
            charges=r.charges, homo_eh=r.homo_eh, lumo_eh=r.lumo_eh, dipole_au=r.dipole_au,
            gradient_calls=opt.gradient_calls, converged=opt.converged, source_conformer=i))
    return StateResult(state=state_key(charge, uhf), charge=charge, uhf=uhf, conformers=tuple(confs),
                       wall_time_s=time.perf_counter() - t0, engine_time_s=engine.stats.seconds - s0)


def form_energy_eh(engine: Engine, smiles: str, mol_h: Chem.Mol, charge: int, uhf: int, label: str,
                   settings: ComputeSettings, lookup: Lookup, keep: Keep) -> float:
    """Lowest energy of a form, Eh: read from the store (``smiles``, state key with the
    protonation ``label``) or computed and stored. A stored failure raises EngineError again."""
    name = state_key(charge, uhf, label)
    payload = lookup(smiles, name)
    if payload is None:
        try:
            sr = optimise_form(engine, mol_h, charge, uhf, settings)
            payload = sr.to_json()
            payload["state"] = name
        except (EngineError, InputError) as exc:
            payload = {"failed": str(getattr(exc, "reason", exc))}
        payload = keep(smiles, name, payload)
    if "failed" in payload:
        raise EngineError(f"protonation form {name} of {smiles}: {payload['failed']}")
    return StateResult.from_json(payload).lowest.energy_eh


def reference_deprotonation_ev(engine: Engine, family: str, settings: ComputeSettings,
                               lookup: Lookup, keep: Keep) -> float:
    """E(base) - E(acid) of the family's reference acid, eV (computed once, then stored)."""
    ref = reference_acid(family)
    mol = Chem.MolFromSmiles(ref.smiles)
    canonical = Chem.MolToSmiles(mol)
    order = list(mol.GetPropsAsDict(True, True)["_smilesAtomOutputOrder"])
    site = order.index(ref.site_atom)
    acid, base = deprotonated_molecule(canonical, site)
    e_acid = form_energy_eh(engine, canonical, acid, Chem.GetFormalCharge(acid), 0, "", settings, lookup, keep)
    e_base = form_energy_eh(engine, canonical, base, Chem.GetFormalCharge(base), 0, f"-H@{site}", settings,
                            lookup, keep)
    return deprotonation_energy_ev(e_acid, e_base)


@dataclass(frozen=True)
class ProtonCoupling:
    """What the aqueous part adds to one candidate: its couple shape, forms and pKa values."""

    couple: ProtonCoupledCouple
    ladder: ProtonLadder | None
    pka_source: str
    pka_uncertainty: float
    reference_note: str


def _given(candidate: Candidate, column: str) -> tuple[float, ...]:
    where = f"candidate {candidate.id}, column {column}"
    try:
        return tuple(sorted(parse_pka_list(candidate.extra.get(column), where)))
    except SettingsError as exc:
        raise InputError(str(exc), row=candidate.row, field=column) from None


def proton_coupling(candidate: Candidate, e_anchor_v: float, reduced_energy_eh: float, engine: Engine,
                    settings: ComputeSettings, aqueous: AqueousSettings, lookup: Lookup, keep: Keep) -> ProtonCoupling:
    """The candidate's couple at any pH: given pKa values win; otherwise, for an anolyte written
    in its oxidised form, its reduced protonation forms are computed and their pKa estimated."""
    n = candidate.n_electrons
    red_given = _given(candidate, C.PKA_REDUCED)
    ox_given = _given(candidate, C.PKA_OXIDISED)
    slope = aqueous.pka_slope if aqueous.pka_slope is not None else EMPIRICAL_SLOPE
    width = aqueous.pka_uncertainty if aqueous.pka_uncertainty is not None else ESTIMATE_UNCERTAINTY_PKA
    sites = [ProtonSite(p, OXIDISED, source="given", label=f"oxidised site {i + 1}") for i, p in enumerate(ox_given)]
    ladder = None
    if candidate.role == "anolyte":
        q_red = Chem.GetFormalCharge(Chem.MolFromSmiles(candidate.main_smiles)) - n
        ladder = reduced_ladder(candidate.main_smiles, n, q_red, site_patterns(aqueous.sites))
    if red_given:
        sites += [ProtonSite(p, REDUCED, source="given", label=f"reduced site {i + 1}") for i, p in enumerate(red_given)]
        couple = ProtonCoupledCouple(e_anchor_v, n, tuple(sites), aqueous.temperature_k)
        return ProtonCoupling(couple, ladder, "given", 0.0, "")
    if ladder is None or len(ladder.forms) < 2 or not aqueous.estimate_pka:
        couple = ProtonCoupledCouple(e_anchor_v, n, tuple(sites), aqueous.temperature_k)
        return ProtonCoupling(couple, ladder, "given" if sites else "none", 0.0, "")
    smiles = candidate.main_smiles
    energies = [reduced_energy_eh]
    for form in ladder.forms[1:]:
        mol_h, _ = form_molecule(smiles, form.sites, form.charge)
        energies.append(form_energy_eh(engine, smiles, mol_h, form.charge, form.uhf, form.label, settings,
                                       lookup, keep))
    refs = []
    for k, info in enumerate(ladder.sites, start=1):
        ref_de = reference_deprotonation_ev(engine, info.family, settings, lookup, keep)
        est = estimate_pka(deprotonation_energy_ev(energies[k], energies[k - 1]), reference_acid(info.family),
                           ref_de, slope=slope, uncertainty=width)
        sites.append(ProtonSite(est.pka, REDUCED, source="estimated", uncertainty=width, label=info.label))
        if est.reference not in refs:
            refs.append(est.reference)
    couple = ProtonCoupledCouple(e_anchor_v, n, tuple(sites), aqueous.temperature_k)
    note = f"{'; '.join(refs)}; slope {slope:g}"
    return ProtonCoupling(couple, ladder, "estimated", width, note)


def aqueous_columns(coupling: ProtonCoupling, steps_v: list[float], ref: str, ph: float) -> dict[str, Any]:
    """Row entries of an aqueous candidate: the potential at the campaign pH in the usual
    column (each one-electron step moved by the couple's shift), the forms, pKa values and slope."""
    c = coupling.couple
    shift = float(c.shift_v(ph))
    red = sorted(s.pka for s in c.sites if s.form == REDUCED)
    ox = sorted(s.pka for s in c.sites if s.form == OXIDISED)
    row: dict[str, Any] = {
        C.CAMPAIGN_PH: ph,
        C.potential_electron_transfer_uncalibrated(ref): c.e_anchor_v,
        C.potential_uncalibrated(ref): c.e_anchor_v + shift,
        C.potential_ph0_uncalibrated(ref): c.standard_potential_ph0_v(),
        C.PKA_REDUCED: ";".join(f"{p:.2f}" for p in red),
        C.PKA_OXIDISED: ";".join(f"{p:.2f}" for p in ox),
        C.PKA_SOURCE: coupling.pka_source,
        C.PKA_UNCERTAINTY: coupling.pka_uncertainty,
        C.PKA_REFERENCE: coupling.reference_note,
        C.PROTONS_AT_PH: c.protons(ph),
        C.NERNST_SLOPE_AT_PH: c.slope_v_per_ph(ph),
    }
    if len(steps_v) == 2:  # both steps moved by the couple's mean shift (semiquinone pKa not computed)
        row[C.potential_uncalibrated(ref, 1)] = steps_v[0] + shift
        row[C.potential_uncalibrated(ref, 2)] = steps_v[1] + shift
    ladder = coupling.ladder
    if ladder is not None:
        row[C.PROTON_SITES] = "; ".join(s.label for s in ladder.sites)
        row[C.PROTONATION_FORMS] = "; ".join(
            f"{f.label or 'as computed'}: {f.smiles} (charge {f.charge:+d})" for f in ladder.forms)
    return row


def add_proton_coupling(row: dict[str, Any], candidate: Candidate, states: Any, steps_v: list[float],
                        settings: ComputeSettings, aqueous: AqueousSettings, engine: Engine,
                        lookup: Lookup, keep: Keep) -> dict[str, Any]:
    """The row of an aqueous candidate: potentials at the campaign pH and the proton columns.
    A protonation form that fails marks the row failed (its pH potential would be a guess)."""
    ref = settings.reference
    if candidate.role not in ("anolyte", "catholyte"):  # bipolar: two couples, protons not modelled
        return {**row, C.CAMPAIGN_PH: aqueous.ph, C.PKA_SOURCE: "none",
                C.PROTONATION_FORMS: f"{candidate.role}: proton coupling not modelled (potentials pH-independent)"}
    anchor = row[C.potential_uncalibrated(ref)]
    reduced = states.states["charged" if candidate.role == "anolyte" else "discharged"].lowest.energy_eh
    try:
        coupling = proton_coupling(candidate, anchor, reduced, engine, settings, aqueous, lookup, keep)
    except (EngineError, InputError) as exc:
        return {**row, C.STATUS: f"failed: protonation forms: {getattr(exc, 'reason', exc)}"}
    return {**row, **aqueous_columns(coupling, steps_v, ref, aqueous.ph)}

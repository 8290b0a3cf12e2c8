"""The compute step's table row of one candidate: identity, status, energies, potentials, cost.

Potentials from the lowest adiabatic energies of neighbouring redox states
(:mod:`redoxfront.engine.potentials`), uncalibrated, V vs the campaign's reference; a potential
beyond the plausible limit keeps its row but gets an ``implausible`` status. Bipolar candidates
get both couples and the symmetric-cell voltage.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from redoxfront import columns as C
from redoxfront.campaign import ComputeSettings
from redoxfront.compute.candidate import CandidateOutcome
from redoxfront.engine.potentials import potential_v, reduction_free_energy_ev
from redoxfront.engine.records import STATE_DISCHARGED, STATE_OXIDISED, STATE_REDUCED, StateResult
from redoxfront.units import HARTREE_EV, PLAUSIBLE_POTENTIAL_LIMIT_V_VS_FC, convert_potential


def candidate_row(outcome: CandidateOutcome, settings: ComputeSettings) -> dict[str, Any]:
    """One row of the descriptor table: identity, status, energies, potentials, cost."""
    cand = outcome.candidate
    ref = settings.reference
    row: dict[str, Any] = {
        C.ID: cand.id,
        C.SMILES: cand.smiles,
        C.CANONICAL_SMILES: cand.main_smiles,
        "counterions": ".".join(cand.counterions),
        "counterion_note": cand.counterion_note,
        C.ROLE: cand.role,
        C.N_ELECTRONS: cand.n_electrons,
        C.MOLAR_MASS: round(cand.molar_mass_g_per_mol, 3),
        "heavy_atoms": cand.heavy_atoms,
    }
    if outcome.states is None:
        row[C.STATUS] = f"failed: {outcome.failure}"
        return row
    states = list(outcome.states.states.values())
    if cand.role == "bipolar":
        return _bipolar_row(row, outcome, settings)
    first, last = states[0], states[-1]
    steps = []
    for prev, nxt in zip(states[:-1], states[1:]):
        dg = reduction_free_energy_ev(prev.lowest.energy_eh, nxt.lowest.energy_eh, cand.role)
        steps.append(potential_v(dg, shift_ev=settings.ipea_shift_ev, absolute_she=settings.absolute_she,
                                 reference=ref, user_reference_v_vs_fc=settings.user_reference_v_vs_fc))
    row[C.STATUS] = "ok"
    row[C.potential_uncalibrated(ref)] = float(np.mean(steps))
    vs_fc = [convert_potential(e, ref, "fc", settings.user_reference_v_vs_fc) for e in steps]
    worst = max(vs_fc, key=abs)
    if abs(worst) > PLAUSIBLE_POTENTIAL_LIMIT_V_VS_FC:  # kept in the table, left out of every later step
        row[C.STATUS] = (f"implausible: computed potential {worst:+.2f} V vs Fc+/Fc is beyond "
                         f"+-{PLAUSIBLE_POTENTIAL_LIMIT_V_VS_FC:.0f} V, outside any electrolyte window; "
                         "check the charge, counterions and role of this row")
    if len(steps) == 2:
        row[C.potential_uncalibrated(ref, 1)] = steps[0]
        row[C.potential_uncalibrated(ref, 2)] = steps[1]
        row[C.STEP_SEPARATION] = (steps[1] - steps[0]) * (1 if cand.role == "catholyte" else -1)
    row["charge_discharged"] = first.charge
    row["charge_charged"] = last.charge
    row["multiplicity_discharged"] = first.multiplicity
    row["multiplicity_charged"] = last.multiplicity
    row["adiabatic_change_on_charging_ev"] = (last.lowest.energy_eh - first.lowest.energy_eh) * HARTREE_EV
    low = first.lowest
    row["vertical_change_on_charging_ev"] = (low.vertical_energies_eh[states[1].state] - low.energy_eh) * HARTREE_EV
    for name, st in (("discharged", first), ("charged", last)):
        c = st.lowest
        row[f"homo_{name}_ev"] = c.homo_eh * HARTREE_EV
        row[f"lumo_{name}_ev"] = c.lumo_eh * HARTREE_EV
        row[f"gap_{name}_ev"] = (c.lumo_eh - c.homo_eh) * HARTREE_EV
    return _cost_columns(row, outcome, first)


def _cost_columns(row: dict[str, Any], outcome: CandidateOutcome, first: StateResult) -> dict[str, Any]:
    states = list(outcome.states.states.values())  # type: ignore[union-attr]
    row["conformers_embedded"] = outcome.conformers_embedded
    row["conformers_refined"] = len(first.conformers)
    row["gradient_calls"] = sum(c.gradient_calls for s in states for c in s.conformers)
    row["optimisations_converged"] = all(c.converged for s in states for c in s.conformers)
    row["wall_time_s"] = round(sum(s.wall_time_s for s in states), 3)
    row["engine_time_s"] = round(sum(s.engine_time_s for s in states), 3)
    row["from_store"] = outcome.new_engine_calls == 0
    return row


def _bipolar_row(row: dict[str, Any], outcome: CandidateOutcome, settings: ComputeSettings) -> dict[str, Any]:
    """The row of a bipolar candidate: both couples from the discharged state.

    E(red) of A + e- -> A.- and E(ox) of A.+ + e- -> A, each as for an anolyte or a catholyte
    row of the same molecule, and the symmetric-cell voltage E(ox) - E(red) (uncalibrated;
    the empirical shift and the reference cancel in it). The one-role potential column stays empty.
    """
    ref = settings.reference
    st = outcome.states.states  # type: ignore[union-attr]
    neutral = st[STATE_DISCHARGED]
    e0 = neutral.lowest.energy_eh
    pot = {}
    for process, form, role in (("reduction", STATE_REDUCED, "anolyte"), ("oxidation", STATE_OXIDISED, "catholyte")):
        dg = reduction_free_energy_ev(e0, st[form].lowest.energy_eh, role)
        pot[process] = potential_v(dg, shift_ev=settings.ipea_shift_ev, absolute_she=settings.absolute_she,
                                   reference=ref, user_reference_v_vs_fc=settings.user_reference_v_vs_fc)
        row[C.process_potential(process, "uncalibrated", ref)] = pot[process]
    row[C.STATUS] = "ok"
    worst = max((convert_potential(e, ref, "fc", settings.user_reference_v_vs_fc) for e in pot.values()), key=abs)
    if abs(worst) > PLAUSIBLE_POTENTIAL_LIMIT_V_VS_FC:  # the same rule as a one-role row
        row[C.STATUS] = (f"implausible: computed potential {worst:+.2f} V vs Fc+/Fc is beyond "
                         f"+-{PLAUSIBLE_POTENTIAL_LIMIT_V_VS_FC:.0f} V, outside any electrolyte window; "
                         "check the charge, counterions and role of this row")
    row[C.potential_uncalibrated(ref)] = float("nan")
    row[C.SYMMETRIC_GAP_UNCALIBRATED] = pot["oxidation"] - pot["reduction"]
    for name in (STATE_DISCHARGED, STATE_REDUCED, STATE_OXIDISED):
        row[f"charge_{name}"] = st[name].charge
        row[f"multiplicity_{name}"] = st[name].multiplicity
    low = neutral.lowest
    for process, form in (("reduction", STATE_REDUCED), ("oxidation", STATE_OXIDISED)):
        row[f"adiabatic_change_on_{process}_ev"] = (st[form].lowest.energy_eh - e0) * HARTREE_EV
        row[f"vertical_change_on_{process}_ev"] = (low.vertical_energies_eh[form] - low.energy_eh) * HARTREE_EV
    for name in (STATE_DISCHARGED, STATE_REDUCED, STATE_OXIDISED):
        c = st[name].lowest
        row[f"homo_{name}_ev"] = c.homo_eh * HARTREE_EV
        row[f"lumo_{name}_ev"] = c.lumo_eh * HARTREE_EV
        row[f"gap_{name}_ev"] = (c.lumo_eh - c.homo_eh) * HARTREE_EV
    return _cost_columns(row, outcome, neutral)


__all__ = ["candidate_row"]

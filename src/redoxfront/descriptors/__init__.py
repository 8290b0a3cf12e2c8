"""Steric and electronic descriptors of one candidate from its conformer ensembles.

Units are in every column name (``_angstrom``, ``_angstrom2``, ``_percent``, ``_ev``,
``_debye``, ``_e``); spin densities are in electrons (alpha - beta).

:func:`descriptors_for_candidate` turns the computed redox states of one candidate
(:class:`redoxfront.engine.records.CandidateStates`) into one flat row: per named site
(campaign ``[sites]``) Sterimol L/B1/B5, ring-plane clearance, percent buried volume,
accessible surface area, spin density and partial charges; per candidate the largest
spin density on a carbon, the spin-weighted exposure, HOMO/LUMO/gap, dipole moment,
the four-point reorganisation energy and a ``descriptor_notes`` column that says why any
value is empty. Every conformer-dependent value comes as Boltzmann mean, minimum and
maximum over conformers within an energy window (:mod:`redoxfront.descriptors.ensemble`).
Settings are the campaign's ``[descriptors]`` section (:class:`DescriptorSettings`).
"""

from __future__ import annotations

import dataclasses
import functools
import json

from dataclasses import dataclass, field
from typing import Any, Callable, Mapping

import numpy as np
from rdkit import Chem

from redoxfront import columns
from redoxfront.campaign import bounded, choice, section_from_mapping
from redoxfront.descriptors.buried_volume import percent_buried_volume
from redoxfront.descriptors.clearance import ring_of_attachment, ring_plane_clearance
from redoxfront.descriptors.electronic import (
    atomic_spin_populations,
    dipole_debye,
    reorganisation_energy,
)
from redoxfront.descriptors.ensemble import (
    EnsembleWeights,
    boltzmann_weights,
    summarise,
)
from redoxfront.descriptors.sites import (
    SiteMatch,
    SiteSpec,
    SitesSettings,
    match_sites,
    sites_from_mapping,
)
from redoxfront.descriptors.sterimol import sterimol, substituent_atoms, vdw_radii
from redoxfront.descriptors.surface import atom_sasa
from redoxfront.engine.records import (
    STATE_CHARGED,
    STATE_DISCHARGED,
    STATE_INTERMEDIATE,
    STATE_OXIDISED,
    STATE_REDUCED,
    CandidateStates,
    StateResult,
)
from redoxfront.errors import RedoxfrontError
from redoxfront.units import HARTREE_EV, STANDARD_TEMPERATURE_K

__all__ = [
    "DescriptorSettings",
    "SitesSettings",
    "SiteSpec",
    "atomic_spin_populations",
    "descriptor_columns",
    "descriptors_for_candidate",
    "sites_from_mapping",
]

STATES: tuple[str, ...] = (STATE_REDUCED, STATE_DISCHARGED, STATE_INTERMEDIATE, STATE_CHARGED, STATE_OXIDISED)
"""Every state name in chain order (a bipolar candidate: reduced, discharged, oxidised; its
reorganisation energies are then the reduction couple's and, as the second, the oxidation couple's)."""


@dataclass(frozen=True)
class DescriptorSettings:
    """The campaign's ``[descriptors]`` section: geometry source, radii and grid settings."""

    geometry_state: str = field(
        default=STATE_CHARGED, metadata=choice(STATE_DISCHARGED, STATE_INTERMEDIATE, STATE_CHARGED)
    )
    """Redox state whose conformers give the steric descriptors."""
    sterimol_radii: str = field(default="cpk", metadata=choice("cpk", "bondi"))
    sterimol_l_origin: str = field(default="verloop", metadata=choice("verloop", "attachment"))
    sterimol_l_correction_angstrom: float = field(default=0.40, metadata=bounded(0.0, 5.0))
    buried_volume_sphere_radius_angstrom: float = field(default=3.5, metadata=bounded(0.5, 20.0))
    buried_volume_radii_scale: float = field(default=1.17, metadata=bounded(0.5, 3.0))
    buried_volume_include_hydrogens: bool = False
    buried_volume_include_site_atom: bool = False
    buried_volume_grid_spacing_angstrom: float = field(default=0.1, metadata=bounded(0.02, 0.5))
    clearance_radii: str = field(default="bondi", metadata=choice("bondi", "cpk"))
    surface_probe_radius_angstrom: float = field(default=1.4, metadata=bounded(0.0, 5.0))
    surface_points_per_atom: int = field(default=480, metadata=bounded(50, 5000))
    energy_window_kcal_per_mol: float = field(default=3.0, metadata=bounded(0.0, None))
    temperature_k: float = field(default=STANDARD_TEMPERATURE_K, metadata=bounded(1.0, None))


_SETTINGS_CACHE: dict[str, tuple[SitesSettings, DescriptorSettings]] = {}
"""Validated settings by the text of the raw tables: a worker describes many candidates of one
campaign and validates its tables once (validation reads type hints, about 1 ms a time)."""


def _settings(
    sites: SitesSettings | Mapping[str, Any] | None,
    desc: DescriptorSettings | Mapping[str, Any] | None,
) -> tuple[SitesSettings, DescriptorSettings]:
    key = None
    if not isinstance(sites, SitesSettings) and not isinstance(desc, DescriptorSettings):
        try:
            key = json.dumps([sites, desc], sort_keys=True)
        except (TypeError, ValueError):  # not plain TOML data: validate every time
            key = None
        if key is not None and key in _SETTINGS_CACHE:
            return _SETTINGS_CACHE[key]
    s = sites if isinstance(sites, SitesSettings) else sites_from_mapping(sites)
    d = desc if isinstance(desc, DescriptorSettings) else section_from_mapping(
        DescriptorSettings, desc, "descriptors"
    )
    if key is not None and len(_SETTINGS_CACHE) < 64:
        _SETTINGS_CACHE[key] = (s, d)
    return s, d


def _is_bond(spec: SiteSpec) -> bool:
    return len(spec.map_numbers if spec.map_numbers is not None else spec.atoms) == 2


_SITE_ATOM_QUANTITIES = ("buried_volume_percent", "sasa_angstrom2", "spin_density")
_SITE_BOND_QUANTITIES = (
    "sterimol_l_angstrom",
    "sterimol_b1_angstrom",
    "sterimol_b5_angstrom",
    "ring_clearance_angstrom",
    "ring_clearance_above_angstrom",
    "ring_clearance_below_angstrom",
)
_GLOBAL_QUANTITIES = ("spin_density_max_carbon", "spin_exposure_angstrom2")
_STATE_QUANTITIES = ("homo_ev", "lumo_ev", "homo_lumo_gap_ev", "dipole_debye")


def descriptor_columns(
    sites_settings: SitesSettings | Mapping[str, Any] | None,
    states: tuple[str, ...] = (STATE_DISCHARGED, STATE_CHARGED),
) -> list[str]:
    """Every column :func:`descriptors_for_candidate` returns, in order, for these sites/states."""
    sites = sites_settings if isinstance(sites_settings, SitesSettings) else _settings(sites_settings, None)[0]
    try:
        return list(_columns(sites, tuple(states)))
    except TypeError:  # settings built by hand with a list inside: not hashable, not cached
        return list(_columns.__wrapped__(sites, tuple(states)))


@functools.lru_cache(maxsize=32)
def _columns(sites: SitesSettings, states: tuple[str, ...]) -> tuple[str, ...]:
    out: list[str] = []

    def add(quantity: str, site: str | None = None, state: str | None = None) -> None:
        out.extend(columns.descriptor_column(quantity, site, state, st) for st in columns.ENSEMBLE_STATS)

    for spec in sites.sites:
        quantities = (_SITE_BOND_QUANTITIES if _is_bond(spec) else ()) + _SITE_ATOM_QUANTITIES
        for q in quantities:
            add(q, spec.name)
        for st in states:
            add("partial_charge_e", spec.name, st)
    for q in _GLOBAL_QUANTITIES:
        add(q)
    for st in states:
        for q in _STATE_QUANTITIES:
            add(q, None, st)
    out.extend(columns.conformers_used_column(st) for st in states)
    out.append(columns.REORGANISATION_ENERGY)
    if STATE_INTERMEDIATE in states:
        out.append(columns.REORGANISATION_ENERGY_2)
    out.append(columns.DESCRIPTOR_NOTES)
    return tuple(out)


def _radical_state(cs: CandidateStates) -> StateResult | None:
    # bipolar: the radical cation (the positive tank's form) gives the spin descriptors
    for name in (STATE_CHARGED, STATE_INTERMEDIATE, STATE_OXIDISED, STATE_REDUCED, STATE_DISCHARGED):
        st = cs.states.get(name)
        if st is not None and st.uhf > 0 and st.conformers:
            return st
    return None


class _Row:
    """Collects columns and notes; each per-conformer computation runs guarded."""

    def __init__(self) -> None:
        self.values: dict[str, float | str] = {}
        self.notes: list[str] = []

    def note(self, text: str) -> None:
        if text not in self.notes:
            self.notes.append(text)

    def put(self, quantity: str, stats: Mapping[str, float], site: str | None = None,
            state: str | None = None) -> None:
        for st in columns.ENSEMBLE_STATS:
            self.values[columns.descriptor_column(quantity, site, state, st)] = stats[st]

    def per_conformer(
        self,
        quantities: tuple[str, ...],
        state: StateResult,
        ens: EnsembleWeights,
        fn: Callable[[int], tuple[float, ...]],
        site: str | None = None,
        label: str = "",
    ) -> None:
        """Evaluate ``fn(conformer_index)`` on the used conformers and store summaries."""
        vals = np.full((len(state.conformers), len(quantities)), np.nan)
        for k in ens.used:
            try:
                vals[k] = fn(int(k))
            except RedoxfrontError as exc:
                self.note(f"{label}: {exc}" if label else str(exc))
                break
        for j, q in enumerate(quantities):
            self.put(q, summarise(vals[:, j], ens), site, state.state if q == "partial_charge_e" else None)


class _Surfaces:
    """Accessible areas (square Angstrom) per conformer, each computed once per candidate: the
    whole molecule for the state whose spin exposure needs every atom (a site atom of that state
    then reads its area from there), one atom at a time otherwise."""

    def __init__(self, cs: CandidateStates, ds: DescriptorSettings, radii: np.ndarray, whole_for: str | None):
        self.cs, self.ds, self.radii, self.whole_for = cs, ds, radii, whole_for
        self._whole: dict[tuple[str, int], np.ndarray] = {}

    def _area(self, state: str, k: int, atoms: list[int] | None) -> np.ndarray:
        return atom_sasa(self.cs.states[state].conformers[k].positions_angstrom, self.radii,
                         probe_angstrom=self.ds.surface_probe_radius_angstrom,
                         n_points=self.ds.surface_points_per_atom, atoms=atoms)

    def whole(self, state: str, k: int) -> np.ndarray:
        if (state, k) not in self._whole:
            self._whole[state, k] = self._area(state, k, None)
        return self._whole[state, k]

    def atom(self, state: str, k: int, i: int) -> float:
        return float(self.whole(state, k)[i] if state == self.whole_for else self._area(state, k, [i])[0])


def descriptors_for_candidate(
    mol_with_hs: Chem.Mol,
    states: CandidateStates,
    sites_settings: SitesSettings | Mapping[str, Any] | None,
    descriptor_settings: DescriptorSettings | Mapping[str, Any] | None = None,
) -> dict[str, float | str]:
    """One flat row of descriptors for one computed candidate.

    ``mol_with_hs`` must be ``Chem.AddHs(Chem.MolFromSmiles(states.smiles))`` (the atom
    order of the records; atom-map numbers kept if sites use them). Settings may be the
    validated dataclasses or the raw campaign tables. Values that cannot be computed are
    NaN and ``descriptor_notes`` says why; chemistry misses never raise.
    Columns: see :func:`descriptor_columns`.
    """
    sites, ds = _settings(sites_settings, descriptor_settings)
    present = tuple(s for s in STATES if s in states.states and states.states[s].conformers)
    report_states = tuple(
        s for s in STATES if s in present or s in (STATE_DISCHARGED, STATE_CHARGED)
    )
    row = _Row()
    for name in descriptor_columns(sites, report_states):
        row.values[name] = float("nan")
    n_atoms = mol_with_hs.GetNumAtoms()
    for st_name in present:
        for conf in states.states[st_name].conformers:
            if np.shape(conf.positions_angstrom) != (n_atoms, 3):
                row.note(
                    f"{st_name} conformer {conf.source_conformer} has "
                    f"{np.shape(conf.positions_angstrom)[0]} atoms, the molecule {n_atoms}; "
                    "descriptors skipped"
                )
                row.values[columns.DESCRIPTOR_NOTES] = "; ".join(row.notes)
                return row.values
    matches = match_sites(mol_with_hs, sites)
    for m in matches.values():
        if not m.found:
            row.note(str(m.reason))
    ens = {
        s: boltzmann_weights(
            [c.energy_eh for c in states.states[s].conformers],
            window_kcal_per_mol=ds.energy_window_kcal_per_mol,
            temperature_k=ds.temperature_k,
        )
        for s in present
    }
    for s in present:
        row.values[columns.conformers_used_column(s)] = float(len(ens[s].used))

    rad = _radical_state(states)
    spins_stored = rad is not None and all(rad.conformers[k].spin_density is not None for k in ens[rad.state].used)
    try:  # one set of Bondi radii and one surface cache for the steric and the spin descriptors
        surfaces: _Surfaces | None = _Surfaces(states, ds, vdw_radii(mol_with_hs, "bondi"),
                                               rad.state if spins_stored and rad is not None else None)
    except RedoxfrontError as exc:  # an element without a radius: steric and exposure values stay empty
        row.note(str(exc))
        surfaces = None
    _steric(row, mol_with_hs, states, ds, sites, matches, ens, surfaces)
    _electronic(row, mol_with_hs, states, ds, matches, ens, present, surfaces)
    row.values[columns.DESCRIPTOR_NOTES] = "; ".join(row.notes)
    return row.values


def _steric(row: _Row, mol: Chem.Mol, cs: CandidateStates, ds: DescriptorSettings,
            sites: SitesSettings, matches: dict[str, SiteMatch],
            ens: dict[str, EnsembleWeights], surfaces: _Surfaces | None) -> None:
    geo_state = ds.geometry_state
    if geo_state not in cs.states and STATE_REDUCED in cs.states and STATE_OXIDISED in cs.states:
        # a bipolar candidate has two charged forms: one set of steric descriptors, from the
        # discharged geometry both forms are made from
        geo_state = STATE_DISCHARGED
        row.note(f"bipolar: steric descriptors from the {geo_state} geometry (no single {ds.geometry_state} state)")
    geo = cs.states.get(geo_state)
    if geo is None or not geo.conformers:
        row.note(f"no {geo_state} conformers; steric descriptors empty")
        return
    w = ens[geo_state]
    if surfaces is None:  # no radius for an element (noted)
        return
    r_bondi = surfaces.radii
    # the CPK set covers the same elements as the Bondi set, so it cannot fail here
    r_cpk = vdw_radii(mol, "cpk") if "cpk" in (ds.sterimol_radii, ds.clearance_radii) else r_bondi
    r_sterimol = r_cpk if ds.sterimol_radii == "cpk" else r_bondi
    r_clear = r_cpk if ds.clearance_radii == "cpk" else r_bondi
    r_bv = r_bondi * ds.buried_volume_radii_scale
    heavy = np.array([a.GetAtomicNum() > 1 for a in mol.GetAtoms()])
    # (centre atom, conformer) -> (buried volume, surface area): a site's places are measured
    # once, whether to pick one place ("min"/"max") or to report it, and a centre shared by
    # two sites once
    site_atom_cache: dict[tuple[int, int], tuple[float, float]] = {}

    for spec in sites.sites:
        m = matches[spec.name]
        if not m.found:
            continue
        label = f"site {spec.name}"
        if len(m.places) > 1 and m.summary == "mean":
            row.note(f"{label}: mean over {len(m.places)} non-equivalent places")

        def atom_fn(centre: int) -> Callable[[int], tuple[float, ...]]:
            include = np.ones(len(heavy), bool) if ds.buried_volume_include_hydrogens else heavy.copy()
            include[centre] = ds.buried_volume_include_site_atom

            def fn(k: int) -> tuple[float, ...]:
                if (centre, k) not in site_atom_cache:
                    x = geo.conformers[k].positions_angstrom
                    bv = percent_buried_volume(x, r_bv, centre, include,
                                               sphere_radius_angstrom=ds.buried_volume_sphere_radius_angstrom,
                                               spacing_angstrom=ds.buried_volume_grid_spacing_angstrom)
                    site_atom_cache[centre, k] = (bv, surfaces.atom(geo_state, k, centre))
                return site_atom_cache[centre, k]
            return fn

        if len(m.places) > 1 and m.summary in ("min", "max"):
            m = _one_place(m, [atom_fn(p[0]) for p in m.places], w, row, label)
            matches[spec.name] = m  # the electronic descriptors of the site use the same place
        row.per_conformer(("buried_volume_percent", "sasa_angstrom2"), geo, w,
                          _over_places([atom_fn(p[0]) for p in m.places], m.summary), spec.name, label)
        if not m.is_bond:
            continue
        try:
            bonds = [(a, b, substituent_atoms(mol, a, b)) for a, b in m.places]
        except RedoxfrontError as exc:
            row.note(f"{label}: {exc}")
            continue

        def sterimol_fn(a: int, b: int, sub: np.ndarray) -> Callable[[int], tuple[float, ...]]:
            z_first = mol.GetAtomWithIdx(b).GetAtomicNum()

            def fn(k: int) -> tuple[float, ...]:
                res = sterimol(geo.conformers[k].positions_angstrom, r_sterimol, a, b, sub,
                               l_origin=ds.sterimol_l_origin,
                               l_correction_angstrom=ds.sterimol_l_correction_angstrom,
                               first_element=z_first)
                return res.l_angstrom, res.b1_angstrom, res.b5_angstrom
            return fn

        row.per_conformer(_SITE_BOND_QUANTITIES[:3], geo, w,
                          _over_places([sterimol_fn(*bond) for bond in bonds], m.summary), spec.name, label)
        try:
            rings = [ring_of_attachment(mol, a, b) for a, b, _ in bonds]
        except RedoxfrontError as exc:
            row.note(f"{label}: {exc}")
            continue

        def clearance_fn(ring: tuple[int, ...], sub: np.ndarray) -> Callable[[int], tuple[float, ...]]:
            def fn(k: int) -> tuple[float, ...]:
                res = ring_plane_clearance(geo.conformers[k].positions_angstrom, r_clear, ring, sub)
                return res.clearance_angstrom, res.above_angstrom, res.below_angstrom
            return fn

        row.per_conformer(_SITE_BOND_QUANTITIES[3:], geo, w,
                          _over_places([clearance_fn(r, bond[2]) for r, bond in zip(rings, bonds)], m.summary),
                          spec.name, label)


_SUMMARIES: dict[str, Callable[..., np.ndarray]] = {"min": np.min, "max": np.max, "mean": np.mean}


def _one_place(m: SiteMatch, buried: list[Callable[[int], tuple[float, ...]]], w: EnsembleWeights,
               row: _Row, label: str) -> SiteMatch:
    """``several_places = "min"`` / ``"max"``: ONE place per site, the least (most) buried by the
    Boltzmann-weighted percent buried volume of the ensemble; every descriptor of the site is
    then taken at that place (ties: the first place in atom order)."""
    means = []
    for fn in buried:
        v = np.array([fn(int(k))[0] for k in w.used], dtype=float)
        means.append(float(np.sum(w.weights * v)) if np.all(np.isfinite(v)) else np.nan)
    arr = np.array(means)
    if not np.isfinite(arr).any():
        return m
    pick = int(np.nanargmin(arr) if m.summary == "min" else np.nanargmax(arr))
    place = m.places[pick]
    row.note(
        f"{label}: {len(m.places)} non-equivalent places; several_places = '{m.summary}' took the "
        f"{'least' if m.summary == 'min' else 'most'} buried one (atoms {', '.join(str(a + 1) for a in place)}, "
        f"{arr[pick]:.1f} % buried volume) for every descriptor of the site"
    )
    return dataclasses.replace(m, atoms=place, places=(place,))


def _over_places(fns: list[Callable[[int], tuple[float, ...]]], how: str) -> Callable[[int], tuple[float, ...]]:
    """One per-conformer function from one per place of a site: their min, max or mean, value by value."""
    if len(fns) == 1:
        return fns[0]

    def fn(k: int) -> tuple[float, ...]:
        return tuple(float(v) for v in _SUMMARIES[how](np.array([f(k) for f in fns], dtype=float), axis=0))
    return fn


def _at_places(per_atom: list[np.ndarray | None], m: SiteMatch) -> np.ndarray:
    """A per-conformer atom property at the site: per conformer, the summary over its places."""
    vals = np.array([[np.nan if a is None else float(np.asarray(a)[p[0]]) for a in per_atom]
                     for p in m.places])
    return vals[0] if len(m.places) == 1 else _SUMMARIES[m.summary](vals, axis=0)


def _electronic(row: _Row, mol: Chem.Mol, cs: CandidateStates, ds: DescriptorSettings,
                matches: dict[str, SiteMatch], ens: dict[str, EnsembleWeights],
                present: tuple[str, ...], surfaces: _Surfaces | None) -> None:
    masses = np.array([a.GetMass() for a in mol.GetAtoms()])
    is_carbon = np.array([a.GetAtomicNum() == 6 for a in mol.GetAtoms()])
    found = {n: m for n, m in matches.items() if m.found}
    for s in present:
        st = cs.states[s]

        def state_values(k: int, st: StateResult = st) -> tuple[float, ...]:
            c = st.conformers[k]
            homo, lumo = c.homo_eh * HARTREE_EV, c.lumo_eh * HARTREE_EV
            mu = dipole_debye(c.dipole_au, st.charge, c.positions_angstrom, masses)
            return homo, lumo, lumo - homo, mu

        vals = np.array([state_values(int(k)) if k in ens[s].used else [np.nan] * 4
                         for k in range(len(st.conformers))])
        for j, q in enumerate(_STATE_QUANTITIES):
            row.put(q, summarise(vals[:, j], ens[s]), None, s)
        for name, m in found.items():
            row.put("partial_charge_e", summarise(_at_places([c.charges for c in st.conformers], m), ens[s]),
                    name, s)
    rad = _radical_state(cs)
    if rad is None:
        row.note("no open-shell state; spin descriptors empty")
    else:
        w = ens[rad.state]
        spins = [c.spin_density for c in rad.conformers]
        if any(spins[k] is None for k in w.used):
            row.note(
                f"no spin densities stored for the {rad.state} state; set spin_polarized = true "
                "in [compute] to get them"
            )
        else:
            n = len(rad.conformers)
            max_c = np.full(n, np.nan)
            exposure = np.full(n, np.nan)
            for k in w.used:
                sp = np.asarray(spins[k], dtype=float)
                area = surfaces.whole(rad.state, int(k)) if surfaces is not None else np.full(len(sp), np.nan)
                max_c[k] = sp[is_carbon].max() if is_carbon.any() else np.nan
                exposure[k] = float(sp @ area)
            row.put("spin_density_max_carbon", summarise(max_c, w))
            row.put("spin_exposure_angstrom2", summarise(exposure, w))
            for name, m in found.items():
                row.put("spin_density", summarise(_at_places(spins, m), w), name)
    # reorganisation energy of each couple: discharged <-> next state (and, for n = 2,
    # intermediate <-> charged)
    chain = [cs.states[s] for s in STATES if s in cs.states]
    for column, (a, b) in zip((columns.REORGANISATION_ENERGY, columns.REORGANISATION_ENERGY_2),
                              zip(chain[:-1], chain[1:])):
        lam = reorganisation_energy(a, b)
        if lam is None:
            row.note(f"reorganisation energy {a.state}/{b.state} needs paired conformers with vertical energies")
            continue
        row.values[column] = lam.total_ev
        if lam.total_ev < -1e-3:
            row.note(
                f"negative reorganisation energy {a.state}/{b.state} ({lam.total_ev:.3f} eV): an "
                "optimisation did not reach the minimum of its state"
            )

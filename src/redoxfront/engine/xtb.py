"""The semiempirical engine behind one small interface.

``Engine.compute`` returns energy, gradient, charges, orbital energies and
occupations (and, when asked, spin populations) for one geometry. The default
backend is tblite (GFN2-xTB, Bannwarth, Ehlert & Grimme, J. Chem. Theory Comput.
2019, 15, 1652); xtb-python is an optional second backend behind the same interface.
Implicit solvent is ALPB (Ehlert et al., J. Chem. Theory Comput. 2021, 17, 4250).

Units: positions in Angstrom at the interface, Hartree and Hartree/bohr out.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from typing import Any, Protocol

import numpy as np

from redoxfront.errors import EngineError, SettingsError
from redoxfront.units import ANGSTROM_BOHR

TBLITE_GUESSES: dict[str, int] = {"sad": 0, "eeq": 1}
"""Names of tblite's start guesses and its codes for them (tblite's Python API: 0 SAD, 1 EEQ)."""

# Elements parametrised in GFN2-xTB and GFN1-xTB: H to Rn (Z = 1..86).
SUPPORTED_ELEMENTS_MAX_Z: int = 86


@dataclass(frozen=True)
class EngineResult:
    """One single-point result. Energies Eh; gradient Eh/bohr; dipole e*bohr."""

    energy_eh: float
    gradient_eh_per_bohr: np.ndarray
    charges: np.ndarray
    orbital_energies_eh: np.ndarray
    occupations: np.ndarray
    dipole_au: np.ndarray
    spin_populations: np.ndarray | None = None
    restart: Any = field(default=None, repr=False, compare=False)
    """The engine's converged wavefunction at this point (opaque, in memory only): the start
    guess of the next point of the same optimisation (``compute(..., guess=this)``)."""

    @property
    def homo_eh(self) -> float:
        occ = np.flatnonzero(self.occupations > 1e-6)
        return float(self.orbital_energies_eh[occ[-1]]) if occ.size else float("nan")

    @property
    def lumo_eh(self) -> float:
        virt = np.flatnonzero(self.occupations < 2.0 - 1e-6)
        occ = np.flatnonzero(self.occupations > 1e-6)
        # for open shells the singly occupied orbital is the HOMO; the LUMO is the next one
        above = virt[virt > occ[-1]] if occ.size else virt
        return float(self.orbital_energies_eh[above[0]]) if above.size else float("nan")


@dataclass
class EngineStats:
    """Counters of one engine instance: calls and seconds spent inside the engine."""

    calls: int = 0
    seconds: float = 0.0


class Engine(Protocol):
    """What the optimiser and the pipeline need from a semiempirical engine."""

    stats: EngineStats

    def compute(
        self,
        numbers: np.ndarray,
        positions_angstrom: np.ndarray,
        charge: int,
        uhf: int,
        *,
        spin_polarized: bool = False,
        guess: EngineResult | None = None,
    ) -> EngineResult: ...
    """One single point. ``guess``: an earlier result of the same state whose wavefunction
    starts the SCC; without it the SCC starts from the engine's own guess. The result
    depends only on the arguments, never on earlier calls (so a resumed run reproduces an
    uninterrupted one)."""


def _solvent_or_none(solvent: str | None) -> str | None:
    return None if solvent in (None, "", "none") else solvent


@dataclass
class TbliteEngine:
    """GFN-xTB through tblite's Python API.

    Reuses the calculator along a chain of points (each with the previous as ``guess``). The SCC restarts from the
    wavefunction of ``guess`` when one is given (the previous point of an optimisation, which
    saves iterations), else it starts afresh: never from whatever was computed last, so a
    result depends on its arguments alone, not on the order of earlier calls.
    """

    method: str = "GFN2-xTB"
    solvent: str | None = "acetonitrile"
    accuracy: float = 1.0
    """tblite's accuracy factor: 1 is its default; larger loosens the SCC convergence."""
    max_scc_iterations: int = 250
    guess: str = "sad"
    """Start of the SCC without a restart: 'sad' (superposition of atomic densities, tblite's
    default) or 'eeq' (charges of the electronegativity-equilibration model)."""
    stats: EngineStats = field(default_factory=EngineStats)
    _calc: object | None = field(default=None, repr=False)
    _key: tuple | None = field(default=None, repr=False)

    def _calculator(self, numbers, positions_bohr, charge, uhf, spin_polarized, reuse):
        from tblite.interface import Calculator

        key = (tuple(int(z) for z in numbers), charge, uhf, spin_polarized)
        if reuse and self._calc is not None and key == self._key:
            self._calc.update(positions=positions_bohr)
            return self._calc
        calc = Calculator(self.method, np.asarray(numbers), positions_bohr, charge=charge, uhf=uhf)
        calc.set("verbosity", 0)
        calc.set("accuracy", self.accuracy)
        calc.set("max-iter", self.max_scc_iterations)
        calc.set("guess", TBLITE_GUESSES[self.guess])
        solvent = _solvent_or_none(self.solvent)
        if solvent is not None:
            calc.add("alpb-solvation", solvent)
        if spin_polarized:
            calc.add("spin-polarization", 1.0)
            calc.set("save-integrals", 1)
        self._calc, self._key = calc, key
        return calc

    def compute(self, numbers, positions_angstrom, charge, uhf, *, spin_polarized=False, guess=None):
        t0 = time.perf_counter()
        pos = np.asarray(positions_angstrom, dtype=float) * ANGSTROM_BOHR
        key = (tuple(int(z) for z in numbers), int(charge), int(uhf), spin_polarized)
        start = guess.restart if guess is not None else None
        if start is not None and start[0] != key:  # another molecule or state: start afresh
            start = None
        try:
            # a point without a guess starts a new chain: a new calculator too, so nothing of
            # earlier calls (not even round-off of cached data) reaches its result
            calc = self._calculator(numbers, pos, int(charge), int(uhf), spin_polarized, start is not None)
            # copy: the guess's own wavefunction stays as it was, so it can start another point
            res = calc.singlepoint(start[1], copy=True) if start is not None else calc.singlepoint()
        except Exception as exc:  # tblite raises RuntimeError on SCC failure
            self._calc = self._key = None
            raise EngineError(f"tblite {self.method} failed (charge {charge}, uhf {uhf}): {exc}") from exc
        finally:
            self.stats.calls += 1
            self.stats.seconds += time.perf_counter() - t0
        t1 = time.perf_counter()
        occ = np.asarray(res.get("orbital-occupations"), dtype=float)
        eps = np.asarray(res.get("orbital-energies"), dtype=float)
        spin = None
        if occ.ndim == 2:  # spin-resolved: (2, norb)
            spin = _spin_populations_tblite(calc, res, len(numbers))
            occ_total = occ.sum(axis=0)
            eps = eps.mean(axis=0) if eps.ndim == 2 else eps
        else:
            occ_total = occ
        out = EngineResult(
            energy_eh=float(res.get("energy")),
            gradient_eh_per_bohr=np.array(res.get("gradient"), dtype=float),
            charges=np.array(res.get("charges"), dtype=float),
            orbital_energies_eh=eps,
            occupations=occ_total,
            dipole_au=np.array(res.get("dipole"), dtype=float),
            spin_populations=spin,
            restart=(key, res),
        )
        self.stats.seconds += time.perf_counter() - t1
        return out


def _spin_populations_tblite(calc, res, n_atoms: int) -> np.ndarray | None:
    """Mulliken spin populations (alpha - beta) per atom, e; they sum to the unpaired electrons.

    Gross populations diag(P_s S) of each spin channel, summed over the atom's
    orbitals (Mulliken, J. Chem. Phys. 1955, 23, 1833). Needs tblite's saved
    integrals (the overlap matrix); None when the result is not spin-resolved.
    """
    density = np.asarray(res.get("density-matrix"))
    if density.ndim != 3 or density.shape[0] != 2:
        return None
    overlap = np.asarray(res.get("overlap-matrix"))
    ao_atom = np.asarray(calc.get("shell-map"))[np.asarray(calc.get("orbital-map"))]
    gross = np.einsum("sij,ji->si", density, overlap)
    per_atom = np.zeros((2, n_atoms))
    for spin in range(2):
        np.add.at(per_atom[spin], ao_atom, gross[spin])
    return per_atom[0] - per_atom[1]


@dataclass
class XtbPythonEngine:
    """GFN-xTB through xtb-python (optional; wheels exist up to Python 3.11)."""

    method: str = "GFN2-xTB"
    solvent: str | None = "acetonitrile"
    accuracy: float = 1.0
    stats: EngineStats = field(default_factory=EngineStats)

    def compute(self, numbers, positions_angstrom, charge, uhf, *, spin_polarized=False, guess=None):
        # a new calculator per call: the SCC always starts afresh (``guess`` is not used)
        try:
            from xtb.interface import Calculator
            from xtb.libxtb import VERBOSITY_MUTED
            from xtb.utils import get_method, get_solvent
        except ImportError as exc:
            raise SettingsError(
                "engine 'xtb-python' needs the optional package xtb (pip install 'redoxfront[xtb]', "
                "Python <= 3.11); use engine = 'tblite' otherwise"
            ) from exc
        if spin_polarized:
            raise SettingsError("engine 'xtb-python' has no spin-polarised mode; use engine = 'tblite'")
        t0 = time.perf_counter()
        try:
            pos = np.asarray(positions_angstrom, dtype=float) * ANGSTROM_BOHR
            calc = Calculator(get_method(self.method), np.asarray(numbers), pos, charge=charge, uhf=uhf)
            calc.set_verbosity(VERBOSITY_MUTED)
            calc.set_accuracy(self.accuracy)
            solvent = _solvent_or_none(self.solvent)
            if solvent is not None:
                calc.set_solvent(get_solvent(solvent))
            res = calc.singlepoint()
            occ = np.asarray(res.get_orbital_occupations(), dtype=float)
            out = EngineResult(
                energy_eh=float(res.get_energy()),
                gradient_eh_per_bohr=np.array(res.get_gradient(), dtype=float),
                charges=np.array(res.get_charges(), dtype=float),
                orbital_energies_eh=np.asarray(res.get_orbital_eigenvalues(), dtype=float),
                occupations=occ,
                dipole_au=np.array(res.get_dipole(), dtype=float),
            )
        except SettingsError:
            raise
        except Exception as exc:
            raise EngineError(f"xtb-python {self.method} failed (charge {charge}, uhf {uhf}): {exc}") from exc
        finally:
            self.stats.calls += 1
            self.stats.seconds += time.perf_counter() - t0
        return out


def make_engine(name: str, method: str, solvent: str | None, *, accuracy: float = 1.0,
                guess: str = "sad") -> Engine:
    """Engine by its campaign name ('tblite' or 'xtb-python').

    ``accuracy`` and ``guess`` (tblite only; xtb-python keeps its own start guess) are the
    fast tier's knobs; the full tier uses the defaults.
    """
    if guess not in TBLITE_GUESSES:
        raise SettingsError(f"unknown start guess '{guess}'; allowed: {', '.join(TBLITE_GUESSES)}")
    if name == "tblite":
        return TbliteEngine(method=method, solvent=solvent, accuracy=accuracy, guess=guess)
    if name == "xtb-python":
        return XtbPythonEngine(method=method, solvent=solvent, accuracy=accuracy)
    raise SettingsError(f"unknown engine '{name}'; allowed: tblite, xtb-python")

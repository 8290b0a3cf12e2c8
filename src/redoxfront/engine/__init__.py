"""The semiempirical engine: energies, geometries and raw potentials of redox states.

Takes atoms, positions, charge and unpaired electrons; gives GFN-xTB energies and
gradients (tblite, ALPB solvent), optimised geometries (RFO optimiser), the records
of conformers and states, and uncalibrated potentials vs a named reference.
"""

from redoxfront.engine.optimizer import optimize_geometry
from redoxfront.engine.potentials import potential_v, reduction_free_energy_ev
from redoxfront.engine.records import CandidateStates, ConformerResult, StateResult
from redoxfront.engine.xtb import Engine, EngineResult, make_engine

__all__ = ["CandidateStates", "ConformerResult", "Engine", "EngineResult", "StateResult", "make_engine",
           "optimize_geometry", "potential_v", "reduction_free_energy_ev"]

"""The campaign file (TOML): settings, paths and their validation in one place.

A campaign folder holds ``campaign.toml``, ``inputs/``, ``results/`` and the
store ``cache.sqlite``. Every section of the TOML file maps to a frozen
dataclass; :func:`section_from_mapping` validates any such dataclass, so unknown
keys and bad values get one kind of error that names the key and what is allowed.
Modules that own a section (calibration, model, fade, cell, ranking) declare their
own dataclass and validate it with the same function.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import tomllib
import typing
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping, TypeVar

from redoxfront.errors import SettingsError
from redoxfront.units import (
    ABSOLUTE_SHE_V,
    RHE,
    STANDARD_TEMPERATURE_K,
    USER_REFERENCE,
    reference_key,
)

THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")
"""Environment variables that set BLAS/OpenMP threads per process ([compute] threads_per_worker);
they must be set before numpy or the engine load, so this module imports neither."""

T = TypeVar("T")

# Named ALPB solvents parametrised for GFN2-xTB (list as documented for the xtb/tblite
# ALPB model, Ehlert et al., J. Chem. Theory Comput. 2021, 17, 4250).
ALPB_SOLVENTS: tuple[str, ...] = (
    "acetone", "acetonitrile", "aniline", "benzaldehyde", "benzene", "ch2cl2",
    "chcl3", "cs2", "dioxane", "dmf", "dmso", "ether", "ethylacetate", "furane",
    "hexandecane", "hexane", "methanol", "nitromethane", "octanol", "phenol",
    "toluene", "thf", "water",
)
SOLVENT_NAMES: dict[str, str] = {
    "acetone": "acetone", "propanone": "acetone",
    "acetonitrile": "acetonitrile", "mecn": "acetonitrile", "ch3cn": "acetonitrile",
    "aniline": "aniline", "benzaldehyde": "benzaldehyde", "benzene": "benzene",
    "dichloromethane": "ch2cl2", "methylene chloride": "ch2cl2", "dcm": "ch2cl2", "ch2cl2": "ch2cl2",
    "chloroform": "chcl3", "trichloromethane": "chcl3", "chcl3": "chcl3",
    "carbon disulfide": "cs2", "cs2": "cs2",
    "1,4-dioxane": "dioxane", "dioxane": "dioxane",
    "n,n-dimethylformamide": "dmf", "dimethylformamide": "dmf", "dmf": "dmf",
    "dimethyl sulfoxide": "dmso", "dimethylsulfoxide": "dmso", "dmso": "dmso",
    "diethyl ether": "ether", "ether": "ether",
    "ethyl acetate": "ethylacetate", "ethylacetate": "ethylacetate",
    "furan": "furane", "furane": "furane",
    "hexadecane": "hexandecane", "n-hexadecane": "hexandecane", "hexandecane": "hexandecane",
    "hexane": "hexane", "n-hexane": "hexane",
    "methanol": "methanol", "meoh": "methanol",
    "nitromethane": "nitromethane",
    "1-octanol": "octanol", "octanol": "octanol", "n-octanol": "octanol",
    "phenol": "phenol", "toluene": "toluene",
    "tetrahydrofuran": "thf", "thf": "thf",
    "water": "water", "h2o": "water",
    "none": "none", "gas phase": "none", "vacuum": "none",
}
"""Chemical names (and common abbreviations) of the solvents the engine's ALPB model is
parametrised for, mapped to the engine's keywords (which include the spellings
'hexandecane' and 'furane'). Write the chemical name in campaign.toml."""

DIELECTRIC_CONSTANTS: dict[str, float] = {
    # relative permittivity near 20-25 degC; from memory of the CRC Handbook of Chemistry and
    # Physics table "Permittivity (dielectric constant) of liquids" -- check before relying on them
    "acetone": 20.7, "acetonitrile": 36.6, "aniline": 6.9, "benzaldehyde": 17.8, "benzene": 2.27,
    "ch2cl2": 8.93, "chcl3": 4.81, "cs2": 2.63, "dioxane": 2.21, "dmf": 36.7, "dmso": 46.7,
    "ether": 4.27, "ethylacetate": 6.02, "furane": 2.94, "hexandecane": 2.05, "hexane": 1.89,
    "methanol": 32.6, "nitromethane": 36.6, "octanol": 10.3, "phenol": 12.4, "toluene": 2.38,
    "thf": 7.52, "water": 78.4,
}
"""Dielectric constants of the parametrised solvents (engine keyword -> epsilon_r)."""

UNPARAMETRISED_SOLVENTS: dict[str, float] = {
    # same source and caveat as DIELECTRIC_CONSTANTS (from memory)
    "propylene carbonate": 64.9, "ethylene carbonate": 89.8, "dimethyl carbonate": 3.1,
    "diethyl carbonate": 2.8, "ethyl methyl carbonate": 3.0, "1,2-dimethoxyethane": 7.2,
    "dimethoxyethane": 7.2, "dme": 7.2, "diglyme": 7.2, "gamma-butyrolactone": 39.0,
    "sulfolane": 43.3, "n-methyl-2-pyrrolidone": 32.2, "nmp": 32.2, "n,n-dimethylacetamide": 37.8,
    "ethanol": 24.5, "2-propanol": 19.9, "isopropanol": 19.9, "propionitrile": 29.7,
    "butyronitrile": 24.8, "pc": 64.9,
}
"""Common electrolyte solvents the engine lacks, with their dielectric constants."""


def closest_solvent_proxies(epsilon: float, n: int = 2) -> list[tuple[str, float]]:
    """The ``n`` parametrised solvents closest in dielectric constant (keyword, epsilon_r)."""
    return sorted(DIELECTRIC_CONSTANTS.items(), key=lambda kv: abs(kv[1] - epsilon))[:n]


def solvent_keyword(name: str, where: str = "[compute] solvent") -> str:
    """The engine keyword of a solvent given by its chemical name (or keyword).

    A solvent the engine lacks (propylene carbonate, dimethoxyethane, ...) is an error that
    names the closest parametrised proxies by dielectric constant, for the user to choose
    explicitly; an unknown name lists the accepted ones.
    """
    key = str(name).strip().lower()
    if key in SOLVENT_NAMES:
        return SOLVENT_NAMES[key]
    if key in UNPARAMETRISED_SOLVENTS:
        eps = UNPARAMETRISED_SOLVENTS[key]
        proxies = ", ".join(f"'{k}' (epsilon {e:g})" for k, e in closest_solvent_proxies(eps))
        raise SettingsError(
            f"{where} = '{name}': the engine's implicit solvent (ALPB) has no parameters for it "
            f"(epsilon {eps:g}); the closest parametrised solvents by dielectric constant are "
            f"{proxies}. Choose one explicitly as a proxy; it reproduces the bulk polarity only, "
            "not specific solvation, so calibrate against potentials measured in your solvent"
        )
    names = sorted(k for k in SOLVENT_NAMES if k not in ("mecn", "ch3cn", "dcm", "h2o", "meoh"))
    raise SettingsError(f"{where} = '{name}' is not a known solvent; allowed: {', '.join(names)}")


METHODS: tuple[str, ...] = ("GFN2-xTB", "GFN1-xTB", "IPEA1-xTB")
ROLES: tuple[str, ...] = ("anolyte", "catholyte", "bipolar")
"""catholyte: oxidised on charging; anolyte: reduced; bipolar: both, one electron each way,
the same molecule filling both tanks of a symmetric cell."""


def choice(*values: Any) -> dict[str, Any]:
    """Field metadata: the value must be one of ``values``."""
    return {"choices": tuple(values)}


def bounded(lo: float | None = None, hi: float | None = None) -> dict[str, Any]:
    """Field metadata: the value must lie in [lo, hi]."""
    return {"min": lo, "max": hi}


def _check_type(value: Any, hint: Any, where: str) -> Any:
    origin = typing.get_origin(hint)
    args = typing.get_args(hint)
    if origin in (typing.Union, getattr(__import__("types"), "UnionType", None)):
        if value is None and type(None) in args:
            return None
        inner = [a for a in args if a is not type(None)]
        return _check_type(value, inner[0], where)
    if origin in (tuple, list):
        if not isinstance(value, (list, tuple)):
            raise SettingsError(f"{where}: expected a list, got {value!r}")
        item = args[0] if args else Any
        return tuple(_check_type(v, item, where) for v in value)
    if origin is dict:
        if not isinstance(value, Mapping):
            raise SettingsError(f"{where}: expected a table, got {value!r}")
        return dict(value)
    if hint is Any:
        return value
    if hint is bool:
        if not isinstance(value, bool):
            raise SettingsError(f"{where}: expected true or false, got {value!r}")
        return value
    if hint is int:
        if isinstance(value, bool) or not isinstance(value, int):
            raise SettingsError(f"{where}: expected a whole number, got {value!r}")
        return value
    if hint is float:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise SettingsError(f"{where}: expected a number, got {value!r}")
        return float(value)
    if hint is str:
        if not isinstance(value, str):
            raise SettingsError(f"{where}: expected text, got {value!r}")
        return value
    if dataclasses.is_dataclass(hint):
        if not isinstance(value, Mapping):
            raise SettingsError(f"{where}: expected a table, got {value!r}")
        section, _, key = where.partition("] ")
        return section_from_mapping(hint, value, f"{section.lstrip('[')}.{key}")
    return value


def section_from_mapping(cls: type[T], mapping: Mapping[str, Any] | None, section: str) -> T:
    """Build the dataclass ``cls`` from a TOML table, validating every key.

    Unknown keys, wrong types, values outside ``choices`` or bounds raise
    :class:`SettingsError` naming ``[section] key`` and the allowed values.
    """
    mapping = dict(mapping or {})
    hints = typing.get_type_hints(cls)
    fields = {f.name: f for f in dataclasses.fields(cls)}  # type: ignore[arg-type]
    unknown = sorted(set(mapping) - set(fields))
    if unknown:
        raise SettingsError(
            f"[{section}] unknown key '{unknown[0]}'; allowed keys: {', '.join(sorted(fields))}"
        )
    values: dict[str, Any] = {}
    for name, value in mapping.items():
        where = f"[{section}] {name}"
        value = _check_type(value, hints[name], where)
        meta = fields[name].metadata
        if "choices" in meta and value is not None:
            allowed = meta["choices"]
            if value not in allowed:
                raise SettingsError(
                    f"{where} = {value!r} is not allowed; allowed values: "
                    + ", ".join(str(a) for a in allowed)
                )
        lo, hi = meta.get("min"), meta.get("max")
        if value is not None and lo is not None and value < lo:
            raise SettingsError(f"{where} = {value!r} must be >= {lo}")
        if value is not None and hi is not None and value > hi:
            raise SettingsError(f"{where} = {value!r} must be <= {hi}")
        values[name] = value
    return cls(**values)


@dataclass(frozen=True)
class ConformerSettings:
    """Conformer ensemble settings (RDKit ETKDGv3 + MMFF94, then xTB refinement)."""

    n_generate: int = field(default=12, metadata=bounded(1, 1000))
    energy_window_kcal_per_mol: float = field(default=6.0, metadata=bounded(0.0, None))
    rmsd_threshold_angstrom: float = field(default=0.5, metadata=bounded(0.0, None))
    refine_lowest: int = field(default=3, metadata=bounded(1, 100))


@dataclass(frozen=True)
class OptimizerSettings:
    """Convergence criteria of the geometry optimiser, atomic units (Eh, bohr).

    Defaults are the customary quantum-chemistry thresholds (max force 4.5e-4,
    RMS force 3.0e-4 Eh/bohr, max step 1.8e-3, RMS step 1.2e-3 bohr; common
    practice, no source). Converged: both force criteria, and either both step
    criteria or an energy change below ``energy_change_eh`` (so a flat torsion with
    converged forces does not keep the optimiser wandering).
    """

    max_force_eh_per_bohr: float = field(default=4.5e-4, metadata=bounded(1e-7, None))
    rms_force_eh_per_bohr: float = field(default=3.0e-4, metadata=bounded(1e-7, None))
    max_step_bohr: float = field(default=1.8e-3, metadata=bounded(1e-7, None))
    rms_step_bohr: float = field(default=1.2e-3, metadata=bounded(1e-7, None))
    energy_change_eh: float = field(default=1e-6, metadata=bounded(0.0, None))
    max_iterations: int = field(default=300, metadata=bounded(1, 10000))
    trust_radius_bohr: float = field(default=0.3, metadata=bounded(0.01, 2.0))


@dataclass(frozen=True)
class ComputeSettings:
    """Everything that decides the semiempirical results of one candidate."""

    solvent: str = "acetonitrile"
    """Chemical name (``dichloromethane``, ``1-octanol``) or engine keyword; stored as the keyword."""
    method: str = field(default="GFN2-xTB", metadata=choice(*METHODS))
    role: str = field(default="catholyte", metadata=choice(*ROLES))
    n_electrons: int = field(default=1, metadata=choice(1, 2))
    reference: str = "fc"
    """Reference electrode of every reported potential, in any spelling the measured file
    accepts (``Fc+/Fc``, ``SCE``, ``Ag/AgCl``, ``Ag/Ag+``, ``user``); stored as its short key."""
    user_reference_name: str = "user-defined reference"
    user_reference_v_vs_fc: float | None = None
    """Stated potential of the user-defined reference ('user') vs Fc+/Fc, V."""
    absolute_she: str = field(default="trasatti", metadata=choice(*ABSOLUTE_SHE_V))
    counterion: str = ""
    """SMILES of one counterion (e.g. "[Cl-]", "F[B-](F)(F)F") that balances candidates given
    with a net charge (a dication written with one counterion or none): as many as make the
    salt neutral are added, and the row says so. Unset: such rows are rejected with the reason."""
    ipea_shift_ev: float = 4.8455
    spin_polarized: bool = False
    seed: int = field(default=20261201, metadata=bounded(0, 2**31 - 1))
    workers: int = field(default=2, metadata=bounded(1, 1024))
    threads_per_worker: int = field(default=1, metadata=bounded(1, 256))
    max_heavy_atoms: int = field(default=100, metadata=bounded(1, 10000))
    engine: str = field(default="tblite", metadata=choice("tblite", "xtb-python"))
    conformers: ConformerSettings = ConformerSettings()
    optimizer: OptimizerSettings = OptimizerSettings()

    def __post_init__(self) -> None:
        object.__setattr__(self, "solvent", solvent_keyword(self.solvent))
        name = str(self.reference).strip()
        key = USER_REFERENCE if name.lower() == self.user_reference_name.strip().lower() else reference_key(name)
        object.__setattr__(self, "reference", key)
        if key == RHE:
            raise SettingsError(
                "[compute] reference = 'RHE': the reversible hydrogen electrode moves with pH, so it "
                "cannot be the campaign's fixed scale; use SHE (or Ag/AgCl, SCE) and set [aqueous] ph. "
                "Measured potentials may still be given vs RHE with their pH per row"
            )
        if key == USER_REFERENCE and self.user_reference_v_vs_fc is None:
            raise SettingsError(
                f"[compute] reference = '{name}' is the user-defined reference: state its potential "
                "vs Fc+/Fc in [compute] user_reference_v_vs_fc (V)"
            )

    def result_hash(self) -> str:
        """Hash of the settings that change stored energies and geometries.

        Reference electrode, absolute SHE, shift, workers and threads only change
        how stored energies are reported or how fast they come, so they are left out:
        changing them recomputes nothing.
        """
        keep = {
            "solvent": self.solvent,
            "method": self.method,
            "spin_polarized": self.spin_polarized,
            "seed": self.seed,
            "engine": self.engine,
            "conformers": dataclasses.asdict(self.conformers),
            "optimizer": dataclasses.asdict(self.optimizer),
            "schema": 3,  # 2: vertical energies of both neighbouring states; 3: heavy atoms embedded first
        }
        text = json.dumps(keep, sort_keys=True)
        return hashlib.sha256(text.encode()).hexdigest()[:16]


@dataclass(frozen=True)
class AqueousSettings:
    """Section ``[aqueous]``: an electrolyte in water, potentials at the cell's pH.

    ph : pH of the cell's electrolyte; every potential is given at it (Nernst, with the
        pKa breakpoints of each couple).
    temperature_k : temperature of the Nernst slope, K.
    sites : replaces or switches off ('off') acceptor-site patterns by name (SMARTS), see
        :mod:`redoxfront.candidates.protonation`.
    estimate_pka : estimate pKa values a candidate does not give (proton-exchange scheme).
    pka_slope : empirical slope of the exchange scheme (default: the value fitted on phenols).
    pka_uncertainty : stated half-width of estimated pKa values, pKa units.
    The water window's overpotential allowance is ``[cell] water_overpotential_v``; the window
    follows this pH (``[cell] ph`` may be left out).
    """

    ph: float = field(default=7.0, metadata=bounded(-1.0, 15.0))
    temperature_k: float = field(default=STANDARD_TEMPERATURE_K, metadata=bounded(250.0, 400.0))
    sites: dict[str, str] = field(default_factory=dict)
    estimate_pka: bool = True
    pka_slope: float | None = field(default=None, metadata=bounded(0.05, 2.0))
    pka_uncertainty: float | None = field(default=None, metadata=bounded(0.0, 20.0))


def aqueous_settings(campaign: "Campaign") -> AqueousSettings | None:
    """The campaign's ``[aqueous]`` settings, or None for a campaign without that section."""
    if "aqueous" not in campaign.sections:
        return None
    settings = section_from_mapping(AqueousSettings, campaign.section("aqueous"), "aqueous")
    if campaign.compute.solvent != "water":
        raise SettingsError(
            f"[aqueous] is set but [compute] solvent = '{campaign.compute.solvent}'; set solvent = "
            "'water' for an aqueous campaign, or remove [aqueous]"
        )
    return settings


@dataclass(frozen=True)
class InputSettings:
    """Paths of the campaign's input files, relative to the campaign folder.

    Every path in the campaign file must resolve (links followed) inside the campaign folder;
    ``read_outside_campaign = true`` lets input files be read from elsewhere (shared measured
    data, say). Files the tool writes never leave the campaign folder, whatever this says.
    """

    candidates: str = "inputs/candidates.csv"
    measured_potentials: str | None = None
    measured_rates: str | None = None
    cycling: str | None = None
    read_outside_campaign: bool = False


@dataclass(frozen=True)
class Campaign:
    """A loaded campaign: its folder, name, compute settings and the raw other sections.

    Sections owned by other modules (``calibration``, ``model``, ``fade``, ``cell``,
    ``ranking``, ``sites``) are kept as raw tables in ``sections`` and validated by
    those modules with :func:`section_from_mapping`.
    """

    folder: Path
    name: str
    compute: ComputeSettings
    inputs: InputSettings
    sections: Mapping[str, Mapping[str, Any]]

    @property
    def results_dir(self) -> Path:
        """``results/`` of the campaign; refused when it is a link to somewhere else."""
        res = self.folder / "results"
        if res.is_symlink() or (res.exists() and not _inside(res, self.folder)):
            raise SettingsError(
                f"{res} is a link to {res.resolve()}, outside the campaign folder; results are written "
                "only inside the campaign: remove the link (or replace it with a folder)")
        return res

    @property
    def store_path(self) -> Path:
        return self.folder / "cache.sqlite"

    def path(self, relative: str, setting: str = "a path") -> Path:
        """Resolve an input path given in the campaign file against the campaign folder.

        Refused (SettingsError naming ``setting``) when it resolves outside the campaign folder,
        links followed, unless ``[inputs] read_outside_campaign = true``.
        """
        p = Path(relative)
        p = p if p.is_absolute() else self.folder / p
        if not self.inputs.read_outside_campaign and not _inside(p, self.folder):
            raise SettingsError(
                f"{setting} = '{relative}' resolves to {p.resolve()}, outside the campaign folder "
                f"{self.folder.resolve()}; copy the file into the campaign, or set "
                "[inputs] read_outside_campaign = true to read shared inputs from elsewhere")
        return p

    def output_path(self, relative: str, setting: str = "an output path") -> Path:
        """Resolve a path the tool writes to; it must stay inside the campaign folder (no opt-out)."""
        p = Path(relative)
        p = p if p.is_absolute() else self.folder / p
        if not _inside(p, self.folder):
            raise SettingsError(
                f"{setting} = '{relative}' resolves to {p.resolve()}, outside the campaign folder "
                f"{self.folder.resolve()}; files are written only inside the campaign: give a path "
                "such as 'inputs/library.csv'")
        return p

    def section(self, name: str) -> Mapping[str, Any]:
        return self.sections.get(name, {})


def _inside(path: Path, folder: Path) -> bool:
    """True when ``path`` (links followed, as far as it exists) lies within ``folder``."""
    return path.resolve().is_relative_to(folder.resolve())


OWNED_SECTIONS: tuple[str, ...] = (
    "calibration", "model", "fade", "cell", "ranking", "sites", "descriptors", "report", "library",
    "aqueous", "funnel",
)


def load_campaign(path: str | Path) -> Campaign:
    """Load and validate a campaign from ``campaign.toml`` or the folder holding it."""
    p = Path(path)
    toml_path = p / "campaign.toml" if p.is_dir() else p
    if not toml_path.exists():
        raise SettingsError(f"no campaign file at {toml_path}; create campaign.toml (see docs/)")
    if not toml_path.is_file():
        raise SettingsError(f"{toml_path} is not a regular file; give the campaign folder or its campaign.toml")
    raw = toml_path.read_bytes()
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise SettingsError(f"{toml_path}: not UTF-8 text (byte 0x{raw[exc.start]:02x} on line {line}, perhaps "
                            "Latin-1); TOML files are UTF-8: save it as UTF-8") from exc
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise SettingsError(f"{toml_path}: not valid TOML: {exc}") from exc
    return campaign_from_mapping(data, toml_path.parent)


def campaign_from_mapping(data: Mapping[str, Any], folder: Path) -> Campaign:
    """Validate a parsed campaign table (see :func:`load_campaign`)."""
    allowed = {"name", "compute", "inputs", *OWNED_SECTIONS}
    unknown = sorted(set(data) - allowed)
    if unknown:
        raise SettingsError(
            f"unknown section or key '{unknown[0]}' in campaign; allowed: {', '.join(sorted(allowed))}"
        )
    name = data.get("name", folder.name)
    if not isinstance(name, str):
        raise SettingsError(f"'name' must be text, got {name!r}")
    compute = section_from_mapping(ComputeSettings, data.get("compute"), "compute")
    reference_key(compute.reference)
    inputs = section_from_mapping(InputSettings, data.get("inputs"), "inputs")
    sections = {k: dict(data[k]) for k in OWNED_SECTIONS if k in data}
    campaign = Campaign(folder=folder, name=name, compute=compute, inputs=inputs, sections=sections)
    for key in ("candidates", "measured_potentials", "measured_rates", "cycling"):
        value = getattr(inputs, key)
        if value:  # refused here, before any step runs, when outside the campaign
            campaign.path(value, f"[inputs] {key}")
    return campaign

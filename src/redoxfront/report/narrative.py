"""The words of the report, written from the results: summary, pick facts, assumptions,
model statistics, method line and limitations. Plain text and plain dicts only; the
templates escape and lay them out.
"""

from __future__ import annotations

import dataclasses
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path
from typing import Any, Mapping

import pandas as pd

from redoxfront import __version__
from redoxfront import columns as C
from redoxfront import units
from redoxfront.campaign import Campaign
from redoxfront.ranking.potential_bands import REFERENCE_SET_BANDS
from redoxfront.report import formatting as F

OBJECTIVE_WORDS: dict[str, str] = {
    "cell_voltage": "cell voltage",
    "energy_density": "energy density",
    "half_life": "half-life of the charged species",
    "molar_mass": "molar mass (lower is better)",
}
"""Objective name -> how the report says it."""

_RED, _OX = REFERENCE_SET_BANDS["reduction"], REFERENCE_SET_BANDS["oxidation"]

LIMITATIONS: tuple[str, ...] = (
    "Potentials come from a fast semiempirical method (GFN2-xTB) with an implicit solvent. "
    "Without calibration against measured potentials, 95 % of their errors on published couples "
    f"span {_RED.q025_v:+.2f} to {_RED.q975_v:+.2f} V for reductions and {_OX.q025_v:+.2f} to {_OX.q975_v:+.2f} V "
    "for oxidations (docs/validation.md); "
    "after a linear calibration within one compound class, by about 0.05-0.1 V (Davis & Fry, "
    "J. Phys. Chem. A 2010, 114, 12299). Outside the range of the measured compounds the "
    "calibration is an extrapolation.",
    "The decomposition-rate model is a small linear regression on a handful of measured rates. "
    "It describes the compounds it was trained on; for a candidate unlike them (flagged "
    "'rate model extrapolates') its half-life is a guess, however narrow the interval looks.",
    "Half-lives assume one decomposition pathway with a single rate law at the stated "
    "concentration and temperature. Real cells add crossover, side reactions with the "
    "electrolyte, membrane and electrodes, and oxygen or water ingress, which these numbers ignore.",
    "Capacity and energy density are theoretical: every molecule at the stated concentration "
    "carries its electrons, at the stated utilisation. Solubility of both redox states, "
    "viscosity and conductivity are not predicted; check them by experiment.",
    "The electrolyte's stability window is a typical value for the solvent (or the campaign's "
    "own setting); the real window depends on electrode, salt and water content. Check both "
    "couples against the window of the electrolyte you use.",
    "The probability of lying on the front treats each candidate's interval as independent. "
    "Errors shared by a whole series (one calibration line, one model) move candidates together, "
    "so the ranking among close relatives is firmer than the absolute values.",
    "Picks are suggestions for the next experiments: the candidates that would most improve what "
    "is known about the front. They are not a guarantee of performance.",
)

FUNNEL_LIMITATION: str = (
    "Candidates the funnel left out were judged by the fast tier alone: one force-field conformer and "
    "a single-point proxy, mapped onto the full tier by a line fitted on this campaign's own full-tier "
    "results. Their estimates carry the line's 95 % prediction interval; a flexible molecule whose "
    "lowest conformer differs from the force-field one can be misjudged. They are not ranked.")
"""Said under Limitations when the funnel ran."""

RESULT_FILES: tuple[tuple[str, str], ...] = (
    ("fast_tier.csv", "first pass: every candidate's fast-tier values, its estimate of the full-tier potential "
                      "with the 95 % interval, and why it did or did not go to the full tier"),
    ("fast_tier_summary.json", "first pass: the funnel's rule, counts and tier line of each role"),
    ("descriptors.csv", "every candidate computed at the full tier: raw potentials, energies, descriptors, status"),
    ("geometries.sdf", "lowest optimised conformer of every redox state (open in a molecular viewer)"),
    ("input_problems.csv", "input rows that were rejected, with row, field and reason"),
    ("rates.csv", "rate constants fitted from the cycling and decay files"),
    ("calibration.json", "calibration lines, their statistics and prediction intervals"),
    ("model.json", "the decomposition-rate model, reloadable"),
    ("predictions.csv", "predicted rates with prediction intervals and the applicability domain"),
    ("ranking.csv", "cell metrics, Pareto ranks and front probabilities of every candidate"),
    ("picks.csv", "the suggested next experiments, in order"),
)
"""Files of ``results/`` a reader of the report may want next, with what each holds."""


def result_files(res: Path) -> list[dict[str, str]]:
    return [{"name": n, "what": w} for n, w in RESULT_FILES if (res / n).exists()]


def _with_interval(rec: Mapping[str, Any], key: str, low: str, high: str, kind: str, digits: int,
                   unit: str = "") -> str:
    """'20.8 (20.0–21.6) Wh/L': value, its 95 % interval where known, unit."""
    value = F.number(rec.get(key), kind, digits)
    if not value:
        return ""
    lo, hi = F.number(rec.get(low), kind, digits), F.number(rec.get(high), kind, digits)
    unit_text = f"{value} {unit}" if unit else value
    return f"{unit_text} ({F.range_text(lo, hi)})" if lo and hi and not lo == hi == value else unit_text


def _basis_words(rec: Mapping[str, Any]) -> str:
    basis = str(rec.get(C.POTENTIAL_BASIS) or "uncalibrated")
    return {"calibrated": "calibrated", "measured": "measured"}.get(basis.split()[0], basis)


def _interval(rec: Mapping[str, Any], low: str, high: str, kind: str, digits: int) -> str:
    lo, hi = F.number(rec.get(low), kind, digits), F.number(rec.get(high), kind, digits)
    return f"({F.range_text(lo, hi)})" if lo and hi and lo != hi else ""


def card_facts(rec: Mapping[str, Any], r: str, objectives: list[str] | tuple[str, ...] = ()) -> list[dict[str, str]]:
    """The numbers of one pick card: label, value with unit, its 95 % interval; ``r``: the
    reference electrode as a reader knows it."""
    half = F.significant(rec.get(C.HALF_LIFE), 2)
    words = F.duration_words(rec.get(C.HALF_LIFE))
    partner = rec.get(C.PARTNER_ID)
    symmetric = str(rec.get(C.ROLE, "")) == "bipolar"
    partner_words = ("" if F._missing(partner) else
                     " (symmetric cell: the same molecule in both tanks)" if symmetric else
                     " vs fixed counter" if str(partner) == "fixed" else f" with {partner}")
    cap = " · ".join(x for x in (
        F.fixed(rec.get(C.CAPACITY_VOL), 1) + " Ah/L" if F.as_float(rec.get(C.CAPACITY_VOL)) is not None else "",
        F.fixed(rec.get(C.CAPACITY_GRAV), 0) + " mAh/g" if F.as_float(rec.get(C.CAPACITY_GRAV)) is not None else "",
    ) if x)
    facts = [
        ("Potential", F.fixed(rec.get("potential_shown"), 2) + f" V vs {r}" if F.as_float(rec.get("potential_shown")) is not None else "",
         " · ".join(x for x in (_interval(rec, "potential_shown_low", "potential_shown_high", "fixed", 2), _basis_words(rec)) if x)),
        *_bipolar_potentials(rec, r),
        ("Cell voltage", F.fixed(rec.get(C.CELL_VOLTAGE), 2) + " V" + partner_words if F.as_float(rec.get(C.CELL_VOLTAGE)) is not None else "",
         _interval(rec, C.CELL_VOLTAGE_LOW, C.CELL_VOLTAGE_HIGH, "fixed", 2)),
        ("Capacity", cap, ""),
        ("Energy density", F.fixed(rec.get(C.ENERGY_DENSITY), 1) + " Wh/L" if F.as_float(rec.get(C.ENERGY_DENSITY)) is not None else "",
         _interval(rec, C.ENERGY_DENSITY_LOW, C.ENERGY_DENSITY_HIGH, "fixed", 1)),
        ("Half-life", f"{half} h" + (f" ({words})" if words else "") + _limited_words(rec) if half
         else "not predicted (no rate model yet)",
         _interval(rec, C.HALF_LIFE_LOW, C.HALF_LIFE_HIGH, "sig", 2) if half else ""),
        ("P(on front)", F.fixed(rec.get(C.P_FRONT), 2), ""),
    ]
    if "molar_mass" in objectives:
        facts.append(("Molar mass", F.fixed(rec.get(C.MOLAR_MASS), 1) + " g/mol" if F.as_float(rec.get(C.MOLAR_MASS)) is not None else "",
                      "with counterions" if not F._missing(rec.get("counterions")) and str(rec.get("counterions")).strip()
                      else ""))
    return [{"label": a, "value": b, "interval": c} for a, b, c in facts if b]


FORM_WORDS = {"reduced": "radical anion", "oxidised": "radical cation"}


def _bipolar_potentials(rec: Mapping[str, Any], r: str) -> list[tuple[str, str, str]]:
    """A bipolar candidate's two potentials for its card (none for other candidates)."""
    out = []
    for process, label in (("reduction", "Reduction"), ("oxidation", "Oxidation")):
        value = rec.get(f"{process}_shown")
        if F.as_float(value) is None:
            continue
        basis = str(rec.get(C.process_column(process, C.POTENTIAL_BASIS)) or "")
        out.append((label, F.fixed(value, 2) + f" V vs {r}", " · ".join(x for x in (
            _interval(rec, f"{process}_shown_low", f"{process}_shown_high", "fixed", 2), basis) if x)))
    return out


def _limited_words(rec: Mapping[str, Any]) -> str:
    """', limited by the radical anion (radical cation: 3100 h)' for a bipolar candidate."""
    form = str(rec.get(C.LIFE_LIMITED_BY) or "")
    if form not in FORM_WORDS:
        return ""
    other = "oxidised" if form == "reduced" else "reduced"
    life = F.significant(rec.get(C.form_column(other, C.HALF_LIFE)), 2)
    return f", limited by the {FORM_WORDS[form]}" + (f" ({FORM_WORDS[other]}: {life} h)" if life else "")


def building_blocks(rec: Mapping[str, Any]) -> list[dict[str, str]]:
    """A library candidate's substituent at each site of the scaffold, as one card line."""
    sites = sorted((k for k in rec if str(k).startswith(C.SUBSTITUENT_PREFIX)), key=str)
    text = ", ".join(f"{str(k).replace(C.SUBSTITUENT_PREFIX, 'site ')}: {rec[k]}" for k in sites
                     if not F._missing(rec[k]))
    return [{"label": "Substituents", "value": text, "interval": ""}] if text else []


def pick_sentence(rec: Mapping[str, Any], objectives: list[str]) -> str:
    """One sentence on a pick: its objectives with values and 95 % intervals."""
    parts = []
    for name in objectives:
        if name == "cell_voltage":
            v = _with_interval(rec, C.CELL_VOLTAGE, C.CELL_VOLTAGE_LOW, C.CELL_VOLTAGE_HIGH, "fixed", 2, "V")
            parts.append(f"cell voltage {v}" if v else "")
        elif name == "energy_density":
            v = _with_interval(rec, C.ENERGY_DENSITY, C.ENERGY_DENSITY_LOW, C.ENERGY_DENSITY_HIGH, "fixed", 1, "Wh/L")
            parts.append(f"energy density {v}" if v else "")
        elif name == "half_life":
            v = _with_interval(rec, C.HALF_LIFE, C.HALF_LIFE_LOW, C.HALF_LIFE_HIGH, "sig", 2, "h")
            parts.append(f"half-life {v}" if v else "")
        elif name == "molar_mass":
            v = F.fixed(rec.get(C.MOLAR_MASS), 1)
            parts.append(f"{v} g/mol" if v else "")
    text = ", ".join(x for x in parts if x)
    flags = [b["text"] for b in F.badges(rec) if b["style"] in ("warn", "bad")]
    if flags:
        text += f"; {', '.join(flags)}"
    return f"{rec[C.ID]}: {text}"


def model_facts(model: Mapping[str, Any], ref: str, label: str) -> dict[str, Any]:
    """Equation with units, statistics and coefficient table of the rate model."""
    st = model.get("statistics", {}) or {}
    ctx = model.get("context", {}) or {}
    target = ctx.get("target", C.LOG10_K_FIRST)
    unit = "1/h" if target == C.LOG10_K_FIRST else "L/(mol h)"
    terms = list(model.get("terms", []))
    coef = list(model.get("coefficients", []))
    eq = f"log10(k / {unit}) = {F.significant(coef[0], 3)}" if coef else ""
    for t, b in zip(terms, coef[1:]):
        sign = "−" if b < 0 else "+"
        eq += f" {sign} {F.significant(abs(b), 3)} × {describe_column(t, ref, label)}"
    yr = st.get("y_randomisation") or {}
    p_yr = yr.get("p_value_q2", yr.get("p_value"))
    ext = ctx.get("external_validation") or {}
    stats = [
        ("training rates", st.get("n_train"), "int", 0),
        ("R²", st.get("r2"), "fixed", 3),
        ("adjusted R²", st.get("adj_r2"), "fixed", 3),
        ("RMSE (log10 units)", st.get("rmse"), "fixed", 3),
        ("Q² (leave-one-out)", st.get("q2_loo"), "fixed", 3),
        (f"Q² ({st.get('kfold')}-fold)", st.get("q2_kfold"), "fixed", 3),
        ("y-randomisation p (Q²)", p_yr, "sig", 2),
        ("scrambled Q², mean", yr.get("q2_mean"), "fixed", 2),
        ("leverage threshold h*", st.get("leverage_threshold"), "fixed", 2),
        ("external test rows", ext.get("n_test"), "int", 0),
        ("Q²(ext, F1)", ext.get("q2_ext_f1"), "fixed", 3),
        ("RMSE of test rows", ext.get("rmse_test"), "fixed", 3),
    ]
    coef_rows = []
    for row in model.get("coefficient_table", []) or []:
        coef_rows.append({
            "term": "intercept" if row.get("term") == "intercept" else describe_column(str(row.get("term")), ref, label),
            "coefficient": F.significant(row.get("coefficient"), 3),
            "se": F.significant(row.get("standard_error"), 2),
            "p": F.significant(row.get("p_value"), 2),
            "vif": F.fixed(row.get("vif"), 1),
            "ddg": F.fixed(row.get("ddg_act_kcal_per_mol_per_unit"), 2),
        })
    counts = (ctx.get("rate_sources") or {}).get("counts") or {}
    return {
        "equation": eq,
        "rate_sources": (f"measured {counts.get('measured', 0)}, fitted from cycling files {counts.get('fitted', 0)}"
                         + (f"; {counts['held out as test set']} more held out as the test set"
                            if counts.get("held out as test set") else "")
                         if counts else "sources not recorded"),
        "stats": [{"label": a, "value": F.number(b, k, d)} for a, b, k, d in stats if F.as_float(b) is not None],
        "coefficients": coef_rows,
        "notes": [str(n) for n in ctx.get("notes", []) or [] if not str(n).startswith("WARNING:")],
        "warnings": [str(w) for w in ctx.get("warnings", []) or []],
        "n_permutations": yr.get("n_permutations"),
    }


_UNIT_WORDS = (
    ("_angstrom2", " (Å²)"), ("_angstrom", " (Å)"), ("_ev", " (eV)"), ("_percent", " (%)"),
    ("_debye", " (D)"), ("_e_", " (e) "),
)


def describe_column(name: str, ref: str, r: str) -> str:
    """A descriptor or potential column said in words with its unit (``r``: the reference's label)."""
    known = {
        C.potential_calibrated(ref): f"E calibrated (V vs {r})",
        C.potential_uncalibrated(ref): f"E uncalibrated (V vs {r})",
        C.potential_measured(ref): f"E measured (V vs {r})",
    }
    if name in known:
        return known[name]
    text = name
    for suffix, word in _UNIT_WORDS:
        if suffix in text:
            text = text.replace(suffix, "") + word
            break
    return text.replace("_", " ").replace("  ", " ").strip()


def calibration_facts(cal: Mapping[str, Any], label: str) -> dict[str, Any]:
    """Calibration lines in words: measured = intercept + slope × computed, with statistics."""
    lines = []
    for ln in cal.get("lines", []):
        lines.append({
            "group": str(ln.get("group", "all")),
            "n": ln.get("n"),
            "equation": f"E measured = {F.fixed(ln.get('intercept_v'), 3)} V + {F.fixed(ln.get('slope'), 3)} × E computed",
            "r2": F.fixed(ln.get("r2"), 3),
            "rmse": F.fixed(ln.get("rmse_v"), 3),
            "loo_mae": F.fixed(ln.get("loo_mae_v"), 3),
            "range": f"{F.fixed(ln.get('computed_min_v'), 2)} to {F.fixed(ln.get('computed_max_v'), 2)} V",
        })
    return {"lines": lines, "notes": [str(n) for n in cal.get("notes", [])],
            "warnings": [str(w) for w in cal.get("warnings", []) or []],
            "n_measured": cal.get("n_measured_used"), "reference": label}


FADE_LAW_WORDS = {
    "linear": "linear (zero order)", "first_order": "first order",
    "first_order_plateau": "first order with plateau", "second_order": "second order",
}


def fade_facts(rec: Mapping[str, Any]) -> dict[str, Any]:
    """One fade fit: rate constant with its 95 % interval, chosen law, half-life."""
    k = C.K_FIRST
    ok = str(rec.get(C.STATUS, "")) == "ok"
    return {
        "id": str(rec.get(C.ID)), "ok": ok, "status": str(rec.get(C.STATUS, "")),
        "law": FADE_LAW_WORDS.get(str(rec.get(C.FADE_MODEL)), str(rec.get(C.FADE_MODEL, ""))),
        "cell_type": "" if F._missing(rec.get(C.CELL_TYPE)) else str(rec.get(C.CELL_TYPE)),
        "k": _with_interval(rec, k, k + C.CI_LOW_SUFFIX, k + C.CI_HIGH_SUFFIX, "sig", 2),
        "half_life": _with_interval(rec, C.HALF_LIFE, C.HALF_LIFE + C.CI_LOW_SUFFIX, C.HALF_LIFE + C.CI_HIGH_SUFFIX, "sig", 2),
        "fade_per_day": F.significant(rec.get(C.FADE_PER_DAY), 2),
        "points": f"{F.number(rec.get(C.N_POINTS_USED), 'int', 0)} of {F.number(rec.get(C.N_POINTS_READ), 'int', 0)}",
        "source": "" if F._missing(rec.get(C.SOURCE_FILE)) else Path(str(rec.get(C.SOURCE_FILE))).name,
    }


def _software() -> str:
    parts = [f"redoxfront {__version__}"]
    for name in ("tblite", "rdkit", "numpy", "scipy", "statsmodels"):
        try:
            parts.append(f"{name} {version(name)}")
        except PackageNotFoundError:
            continue
    return ", ".join(parts)


def _spread(desc: pd.DataFrame | None, column: str) -> str:
    if desc is None or column not in desc:
        return ""
    ok = desc[desc[C.STATUS].astype(str).eq("ok")] if C.STATUS in desc else desc
    v = pd.to_numeric(ok[column], errors="coerce").dropna()
    if v.empty:
        return ""
    lo, hi, med = int(v.min()), int(v.max()), float(v.median())
    return f"{lo}" if lo == hi else f"{lo} to {hi} (median {med:g})"


def conformer_words(campaign: Campaign, desc: pd.DataFrame | None) -> str:
    """Conformer settings and the counts really embedded and refined, from descriptors.csv."""
    cs = campaign.compute.conformers
    text = (f"RDKit ETKDG + MMFF94: {cs.n_generate} conformers requested per candidate, the lowest "
            f"{cs.refine_lowest} refined with {campaign.compute.method}; RMSD pruning {cs.rmsd_threshold_angstrom:g} Å, "
            f"descriptor window {cs.energy_window_kcal_per_mol:g} kcal/mol.")
    embedded, refined = _spread(desc, "conformers_embedded"), _spread(desc, "conformers_refined")
    if embedded or refined:
        text += f" Actually embedded per candidate: {embedded or 'not recorded'}; refined: {refined or 'not recorded'}."
    used = _spread(desc, C.conformers_used_column("discharged"))
    if used:
        text += f" Within the descriptor window (discharged state): {used}."
    return text


def method_line(campaign: Campaign, desc: pd.DataFrame | None) -> str:
    s = campaign.compute
    solvent = "gas phase" if s.solvent == "none" else f"ALPB implicit {s.solvent}"
    return (f"{s.method} (tblite) in {solvent}, IPEA shift {s.ipea_shift_ev:g} eV; seed {s.seed}. "
            f"Software: {_software()}; settings hash {s.result_hash()} (the key of the stored states).")


def uncalibrated_band_words(roles: set[str]) -> str:
    """How the interval of an uncalibrated potential is made, for the couple types of ``roles``
    (a bipolar carrier has both): each band as offsets from the raw value, V, and, for
    reductions, what the published set behind the band covers."""
    from redoxfront.ranking.potential_bands import REDUCTION_SET_SCOPE, couple_type

    kinds = {k for r in roles for k in (("reduction", "oxidation") if r == "bipolar" else (couple_type(r),))}
    bands = [f"{kind}s {-REFERENCE_SET_BANDS[kind].q975_v:+.2f} to {-REFERENCE_SET_BANDS[kind].q025_v:+.2f} V"
             for kind in ("reduction", "oxidation") if kind in kinds]
    text = ("given the 95 % error band of their couple type, measured on published potentials ("
            + ", ".join(bands) + " around the raw value; two-electron carriers wider and flagged; see the "
            "ranking documentation).")
    return f"{text} {REDUCTION_SET_SCOPE}" if "reduction" in kinds else text


def assumptions(campaign: Campaign, cell: Any, desc: pd.DataFrame | None,
                summary: Mapping[str, Any], r: str) -> list[dict[str, str]]:
    """The cell and method assumptions behind every number, as label/value pairs (``r``: the
    reference electrode as a reader knows it)."""
    s = campaign.compute
    other = "anolyte" if s.role == "catholyte" else "catholyte"
    if cell.counter == "potential":
        counter = (f"a fixed counter couple at {cell.counter_potential_v:+.2f} V vs {r} (an {other} chosen by the "
                   f"campaign, [cell] counter_potential_v)")
    else:
        counter = f"for each candidate, the campaign's {other} giving the largest cell voltage"
    cap = (f"capped at {cell.solubility_mol_per_l:g} mol/L" if cell.solubility_mol_per_l else "no campaign-wide cap")
    if desc is not None and C.SOLUBILITY in desc and desc[C.SOLUBILITY].notna().any():
        cap += "; each candidate's solubility_mol_per_l column caps further"
    tank = ("two-tank: the volumes of both electrolytes count, the counter tank holding the same charge"
            if cell.tank_basis == "two-tank" else "one-tank: only the candidate's electrolyte volume counts")
    conv = (f"SCE = +{units.SCE_VS_SHE_V:.3f} V vs SHE, Ag/AgCl (sat. KCl) = +{units.AGAGCL_SAT_KCL_VS_SHE_V:.3f} V "
            f"vs SHE (Bard & Faulkner); Fc+/Fc = +{units.FC_VS_SCE_MECN_V:.2f} V vs SCE in acetonitrile "
            f"(Connelly & Geiger 1996); absolute SHE {units.ABSOLUTE_SHE_V[s.absolute_she]:.2f} V ({s.absolute_she})")
    order = cell.rate_order or "as the rate model (1: ln 2 / k; 2: 1 / (k c0))"
    role = f"{s.role}, {s.n_electrons} electron(s) per molecule"
    roles = {s.role} if desc is None or C.ROLE not in desc else set(desc[C.ROLE].dropna().astype(str)) or {s.role}
    if desc is not None and C.ROLE in desc and desc[C.ROLE].nunique() > 1:  # rows name their own role
        counts = desc[C.ROLE].astype(str).value_counts()
        role = "per row: " + ", ".join(f"{n} {r}" for r, n in counts.items()) + f" (campaign default: {role})"
    items = [
        ("Role", role),
        ("Counter electrode", counter),
        ("Concentration", f"{cell.concentration_mol_per_l:g} mol/L of the candidate; {cap}"),
        ("Tank basis", tank),
        ("Utilisation", f"{cell.utilisation * 100:g} % of the theoretical charge"),
        ("Solvent", "none (gas phase)" if s.solvent == "none" else f"{s.solvent} (ALPB implicit solvent)"),
        ("Electrolyte window", window_words(summary, r)),
        ("Reference electrode", f"potentials vs {r}; conversions: {conv}"),
        ("Uncalibrated potentials", (f"given a 95 % interval of ±{cell.uncalibrated_uncertainty_v:g} V ([cell] "
                                     "uncalibrated_uncertainty_v)") if cell.uncalibrated_uncertainty_v is not None else
         uncalibrated_band_words(roles)),
        ("Half-life", f"rate order {order}, at the operating concentration"),
        ("Method", method_line(campaign, desc)),
        ("Conformers", conformer_words(campaign, desc)),
    ]
    sym = summary.get("symmetric_cells") or {}
    if sym.get("n_bipolar"):
        rules = sym.get("rules", {})
        items.append(("Bipolar candidates", (
            f"{sym['n_bipolar']} candidate(s) fill both tanks of a symmetric cell (no partner). Cell voltage: "
            f"{rules.get('cell_voltage_v', '')}. Energy density: {rules.get('energy_density_wh_per_l', '')}. "
            f"Half-life: {rules.get('half_life_h', '')}; reduction and oxidation potentials are calibrated "
            "against measured potentials of their own kind")))
    if summary.get("objectives"):
        items.append(("Ranked on", ", ".join(OBJECTIVE_WORDS.get(o, o) for o in summary["objectives"])))
    return [{"label": a, "value": b} for a, b in items]


def window_words(summary: Mapping[str, Any], r: str) -> str:
    """The electrolyte window the ranking checked potentials against, and how many fell outside."""
    window = summary.get("electrochemical_window")
    if not window:
        return "not checked (no window known for this solvent; set [cell] window_low_v and window_high_v)"
    n_out = summary.get("n_outside_window")
    text = (f"{F.fixed(window.get('low_v'), 2)} to {F.fixed(window.get('high_v'), 2)} V vs {r} "
            f"({window.get('source', '')}); approximate: it depends on electrode, salt and water content")
    if n_out:
        text += f"; {n_out} candidate(s) flagged as (possibly) outside it"
    return text


def why_no_picks(campaign: Campaign, ranked: bool, res: Path) -> str:
    """Why there are no pick cards, in words that say what to do."""
    if ranked:
        return "The ranking ran, but no candidate could be ranked (see the table for the reasons)."
    if not (res / "descriptors.csv").exists():
        return "Nothing computed yet: run the compute step (redoxfront run)."
    from redoxfront.ranking.step import ranking_objectives

    if "half_life" in ranking_objectives(campaign):
        return ("No ranking: the objectives include half-life, which needs measured rates or cycling files for "
                "the rate model. Add them, or rank a first screen on cell voltage and molar mass "
                "([ranking] objectives = [\"cell_voltage\", \"molar_mass\"]).")
    return "No ranking yet: run the rank step."


def summary_paragraphs(desc: pd.DataFrame | None, table: Mapping[str, Any], cards: list[dict[str, Any]],
                       card_basis: str, models: Mapping[str, Any], summary: Mapping[str, Any],
                       ranked: bool, campaign: Campaign,
                       first_pass: Mapping[str, Any] | None = None) -> list[str]:
    """The summary, written from the results: counts, what the model learnt from, the
    top picks in a sentence each, and what not to over-read. ``first_pass``: the funnel's
    section (:mod:`redoxfront.report.first_pass`) when it ran: the counts then say both tiers."""
    out = []
    n_all = 0 if desc is None else len(desc)
    n_ok = int(desc[C.STATUS].astype(str).eq("ok").sum()) if desc is not None and C.STATUS in desc else 0
    rejected = len(table.get("problems", []))
    if first_pass:
        first = (f"{first_pass['n_candidates'] + rejected} candidate rows read; {first_pass['n_fast_ok']} got the "
                 f"fast tier (first pass); {first_pass['n_full']} went on to the full tier, of which {n_ok} computed"
                 + (f", {n_all - n_ok} failed" if n_all - n_ok else "")
                 + (f"; {rejected} rejected at input" if rejected else "")
                 + f". The other {first_pass['n_left_out']} have only a fast tier estimate and are not ranked "
                 "(see First pass); every number below is from the full tier unless it says otherwise.")
    else:
        first = (f"{n_all + rejected} candidate rows read; {n_ok} computed"
                 + (f", {n_all - n_ok} failed" if n_all - n_ok else "")
                 + (f", {rejected} rejected at input" if rejected else "") + ".")
    cal = models.get("calibration")
    if cal:
        first += (f" Potentials calibrated against {cal['n_measured']} measured potentials "
                  f"(leave-one-out mean error {cal['lines'][0]['loo_mae']} V).")
    else:
        first += (" Potentials are uncalibrated (no measured potentials): on published couples their errors "
                  "reach -0.6 to +0.8 V (oxidations) and -0.4 to +0.4 V (reductions).")
    model = models.get("model")
    if model:
        stats = {s["label"]: s["value"] for s in model["stats"]}
        first += (f" The decomposition-rate model was trained on {stats.get('training rates', '?')} rates"
                  f" ({model.get('rate_sources', 'sources not recorded')}; "
                  f"R² {stats.get('R²', '?')}, Q² leave-one-out {stats.get('Q² (leave-one-out)', '?')}"
                  + (f", y-randomisation p {stats['y-randomisation p (Q²)']}" if "y-randomisation p (Q²)" in stats else "")
                  + ").")
    else:
        first += " No rate model yet (no measured rates or cycling files), so no half-lives."
    out.append(first)
    if ranked:
        objs = ", ".join(OBJECTIVE_WORDS.get(o, o) for o in summary.get("objectives", []))
        second = (f"{summary.get('n_ranked', 0)} candidates ranked on {objs}; {summary.get('n_first_front', 0)} "
                  f"lie on the first front.")
        if cards:
            second += (" Suggested next to make: " if card_basis == "picks" else
                       " Every ranked candidate is measured; the first front, most probable first: ")
            second += " ".join(f"({k + 1}) {c['sentence']}." for k, c in enumerate(cards[:3])) + " Brackets hold 95 % intervals."
        out.append(second)
    cautions = []
    rows = table.get("rows", [])
    n_extra = sum(any(b["text"].startswith("rate model extrapolates") for b in r["badges"]) for r in rows)
    n_raw = sum(any(b["text"].startswith("uncalibrated") for b in r["badges"]) for r in rows)
    n_out = sum(any(b["text"] == "outside calibration range" for b in r["badges"]) for r in rows)
    if n_extra:
        cautions.append(f"{n_extra} candidate(s) lie outside the rate model's domain: their half-lives are extrapolations")
    if n_out:
        cautions.append(f"{n_out} candidate(s) have computed potentials outside the calibration range")
    if n_raw:
        cautions.append(f"{n_raw} candidate(s) use uncalibrated potentials (errors of several tenths of a volt: "
                        "see their wide intervals)")
    if cautions:
        out.append("Do not over-read: " + "; ".join(cautions) + ". These are marked in every figure and table.")
    return out

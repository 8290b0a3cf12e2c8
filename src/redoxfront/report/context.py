"""Gather what the report shows into one plain dict (the templates only lay it out).

Reads the files the steps wrote under ``results/`` (descriptors, calibration, rates,
model, predictions, ranking, picks, input problems, figures); every section is filled
from what exists, and says what is missing and why when a step did not run. No HTML is
made here except the inline SVG of figures and structure drawings (cleaned by
:func:`redoxfront.figure_style.svg_for_html`).
"""

from __future__ import annotations

import base64
import datetime as _dt
from pathlib import Path
from typing import Any

import pandas as pd

from redoxfront import __version__
from redoxfront import columns as C
from redoxfront.campaign import Campaign
from redoxfront.figure_style import svg_for_html
from redoxfront.outputs import read_json_file, read_table, regenerate_hint
from redoxfront.report import formatting as F
from redoxfront.report import narrative
from redoxfront.report.first_pass import FIGURE_STEM, first_pass_section
from redoxfront.report.safety import AQUEOUS_SAFETY_NOTES, SAFETY_NOTES
from redoxfront.report.structures import structure_svg

MAX_TABLE_ROWS = 2000
"""The candidate table shows at most this many rows (best first); the CSV holds all."""


def read_csv(path: Path) -> pd.DataFrame | None:
    """A result table with ids and user strings as text, or None when absent."""
    if not path.exists():
        return None
    return read_table(path, remedy=regenerate_hint(path))  # 'NA' and '001' stay ids


def read_json(path: Path) -> dict[str, Any] | None:
    return read_json_file(path, remedy=regenerate_hint(path)) if path.exists() else None


def figure(res: Path, stem: str, title: str, caption: str = "") -> dict[str, str] | None:
    """A figure of ``results/figures/`` for the page: SVG inline, PNG as a data URI."""
    folder = res / "figures"
    svg = folder / f"{stem}.svg"
    if svg.exists():
        markup = svg_for_html(svg.read_text(encoding="utf-8"), title=title, id_prefix=f"{stem}-")
        return {"title": title, "svg": markup, "png": "", "caption": caption}
    png = folder / f"{stem}.png"
    if png.exists():
        data = base64.b64encode(png.read_bytes()).decode("ascii")
        return {"title": title, "svg": "", "png": f"data:image/png;base64,{data}", "caption": caption}
    return None


def shown_potential(table: pd.DataFrame, ref: str) -> pd.DataFrame:
    """Add the potential each candidate is ranked on, with its 95 % interval (columns
    ``potential_shown*``): the ranking's ``potential_used`` columns where the ranking ran,
    else the calibrated potential with its prediction interval, else the uncalibrated one
    (no interval: the ranking gives it its band)."""
    t = table.copy()

    def col(name: str) -> pd.Series:
        return pd.to_numeric(t[name], errors="coerce") if name in t else pd.Series(float("nan"), index=t.index)

    for process in C.PROCESSES:  # bipolar candidates: both couples, the same rule
        used = C.process_potential(process, "used", ref)
        if used in t:
            t[f"{process}_shown"] = col(used)
            t[f"{process}_shown_low"] = col(C.process_potential(process, "used", ref, "low"))
            t[f"{process}_shown_high"] = col(C.process_potential(process, "used", ref, "high"))
        elif C.process_potential(process, "uncalibrated", ref) in t:
            cal_p = col(C.process_potential(process, "calibrated", ref))
            t[f"{process}_shown"] = cal_p.where(cal_p.notna(), col(C.process_potential(process, "uncalibrated", ref)))
            t[f"{process}_shown_low"] = col(C.process_potential(process, "calibrated", ref, "low"))
            t[f"{process}_shown_high"] = col(C.process_potential(process, "calibrated", ref, "high"))
    if C.potential_used(ref) in t:
        t["potential_shown"] = col(C.potential_used(ref))
        t["potential_shown_low"] = col(C.potential_used_low(ref))
        t["potential_shown_high"] = col(C.potential_used_high(ref))
        return t
    cal, raw = col(C.potential_calibrated(ref)), col(C.potential_uncalibrated(ref))
    use_cal = cal.notna()
    t["potential_shown"] = cal.where(use_cal, raw)
    t["potential_shown_low"] = col(C.potential_calibrated_pi_low(ref)).where(use_cal)
    t["potential_shown_high"] = col(C.potential_calibrated_pi_high(ref)).where(use_cal)
    if C.POTENTIAL_BASIS not in t:
        t[C.POTENTIAL_BASIS] = use_cal.map({True: "calibrated", False: "uncalibrated"}).where(t["potential_shown"].notna(), "")
    return t


def candidate_table(res: Path) -> tuple[pd.DataFrame | None, str]:
    """The most complete table of candidates and the file it came from."""
    for name in ("ranking.csv", "predictions.csv", "descriptors.csv"):
        t = read_csv(res / name)
        if t is not None:
            return t, name
    return None, ""


def row_note(rec: dict[str, Any], hide: tuple[str, ...] = ()) -> str:
    """The ranking note of a row without the parts that start with one of ``hide``
    (said once for the whole campaign instead)."""
    note = rec.get(C.RANKING_NOTE)
    if F._missing(note):
        return ""
    parts = [p.strip() for p in str(note).split(";")]
    return "; ".join(p for p in parts if p and not p.startswith(hide))


def _rows(table: pd.DataFrame, columns: tuple[F.Column, ...], hide_notes: tuple[str, ...]) -> list[dict[str, Any]]:
    out = []
    for rec in table.to_dict("records"):
        out.append({"cells": [F.cell(rec, c) for c in columns], "badges": F.badges(rec),
                    "note": row_note(rec, hide_notes)})
    return out


NO_MODEL_NOTES: tuple[str, ...] = ("no predicted rate", "no measured, fitted or predicted rate")
"""Row notes that only repeat that there is no rate model (the summary says it once)."""


def table_section(table: pd.DataFrame | None, label: str, res: Path,
                  hide_notes: tuple[str, ...] = ()) -> dict[str, Any]:
    """Whole candidate table (headers, rows with badges) and the rows left out, with reasons."""
    out: dict[str, Any] = {"headers": [], "rows": [], "truncated": 0, "problems": [], "failed": [],
                           "unranked": [], "n_lead": 0}
    if table is not None and len(table):
        ok = table[C.STATUS].astype(str).eq("ok") if C.STATUS in table else pd.Series(True, index=table.index)
        shown = table[ok]
        cols = tuple(c for c in F.table_columns(label) if c.key in shown.columns and shown[c.key].notna().any())
        subs = [c for c in shown.columns if str(c).startswith(C.SUBSTITUENT_PREFIX)]
        smiles = tuple(c for c in cols if c.key == C.SMILES)
        cols = tuple(c for c in cols if c.key != C.SMILES)
        lead = tuple(c for c in cols if c.key in F.LEAD_COLUMNS)
        rest = tuple(c for c in cols if c.key not in F.LEAD_COLUMNS)
        sub_cols = tuple(F.Column(s, s.replace(C.SUBSTITUENT_PREFIX, "Site "), kind="text",
                                  note="substituent at this site of the scaffold") for s in subs)
        cols = lead + rest + sub_cols + smiles
        out["n_lead"] = len(lead)
        out["headers"] = [{"text": c.header, "unit": c.unit, "numeric": c.kind != "text", "note": c.note,
                           "screen_only": c.screen_only} for c in cols]
        out["truncated"] = max(0, len(shown) - MAX_TABLE_ROWS)
        out["rows"] = _rows(shown.head(MAX_TABLE_ROWS), cols, hide_notes)
        failed = table[~ok]
        out["failed"] = [{"id": str(r[C.ID]), "reason": str(r[C.STATUS])} for _, r in failed.iterrows()]
        if C.RANKING_NOTE in shown and C.PARETO_RANK in shown:
            left = shown[shown[C.PARETO_RANK].isna()]
            out["unranked"] = [{"id": str(r[C.ID]), "reason": str(r[C.RANKING_NOTE])} for _, r in left.iterrows()]
    problems = read_csv(res / "input_problems.csv")
    if problems is not None and len(problems):
        out["problems"] = [{k: ("" if F._missing(v) else str(v)) for k, v in r.items()}
                           for r in problems.to_dict("records")]
    return out


def pick_cards(table: pd.DataFrame | None, objectives: list[str], label: str,
               hide_notes: tuple[str, ...] = ()) -> tuple[list[dict[str, Any]], str]:
    """One card per pick (or, when every ranked candidate is measured, the first front)."""
    if table is None or C.PARETO_RANK not in table or table[C.PARETO_RANK].notna().sum() == 0:
        return [], ""
    if C.PICK_ORDER in table and table[C.PICK_ORDER].notna().any():
        chosen = table[table[C.PICK_ORDER].notna()].sort_values(C.PICK_ORDER)
        basis = "picks"
    else:
        chosen = table[table[C.PARETO_RANK] == 1].sort_values(C.P_FRONT, ascending=False).head(5)
        basis = "front"
    cards = []
    for k, rec in enumerate(chosen.to_dict("records")):
        cards.append({
            "order": k + 1,
            "id": str(rec[C.ID]),
            "smiles": "" if F._missing(rec.get(C.SMILES)) else str(rec[C.SMILES]),
            "structure": structure_svg(str(rec.get(C.SMILES, "")), id_prefix=f"pick{k + 1}-"),
            "facts": narrative.card_facts(rec, label, objectives) + narrative.building_blocks(rec),
            "badges": F.badges(rec),
            "note": row_note(rec, hide_notes),
            "sentence": narrative.pick_sentence(rec, objectives),
        })
    return cards, basis


POTENTIAL_HEADERS = ("Potential", "Reduction potential", "Oxidation potential")
POTENTIAL_FACTS = ("Potential", "Reduction", "Oxidation")


def full_tier_labels(cards: list[dict[str, Any]], tab: dict[str, Any]) -> None:
    """After a funnel the page shows numbers of two tiers: the potentials of the pick cards and
    of the candidate table (all full-tier rows) say 'full tier' (in place)."""
    for h in tab.get("headers", []):
        if h["text"] in POTENTIAL_HEADERS:
            h["text"] += " (full tier)"
    for card in cards:
        for f in card["facts"]:
            if f["label"] in POTENTIAL_FACTS or f["label"].endswith("potential"):
                f["interval"] = " · ".join(x for x in (f["interval"], "full tier") if x)


def model_section(res: Path, ref: str, label: str) -> dict[str, Any]:
    """Rate model (equation, statistics, coefficients, figures), calibration and fade fits."""
    model = read_json(res / "model.json")
    out: dict[str, Any] = {"model": None, "calibration": None, "fade": []}
    if model is not None:
        out["model"] = narrative.model_facts(model, ref, label)
        out["model"]["figures"] = [f for f in (
            figure(res, "observed_vs_predicted", "Observed against predicted log10 k",
                   "Filled: fitted; open: leave-one-out predictions of the same training rows; "
                   "triangles: external test rows. The dashed line is y = x."),
            figure(res, "williams", "Williams plot",
                   "Standardised residual against leverage; right of the dashed line h* = 3(p+1)/n a "
                   "prediction extrapolates (Tropsha, Mol. Inf. 2010, 29, 476)."),
            figure(res, "y_randomisation", "y-randomisation",
                   "R² and Q² of models fitted to scrambled rates; the real model should sit far to the right."),
        ) if f]
    cal = read_json(res / "calibration.json")
    if cal and cal.get("lines"):
        out["calibration"] = narrative.calibration_facts(cal, label)
        fig = figure(res, "calibration_parity", "Calibration of computed potentials",
                     "Measured against computed potential with the fitted line and its 95 % prediction band.")
        out["calibration"]["figures"] = [fig] if fig else []
    rates = read_csv(res / "rates.csv")
    if rates is not None and len(rates):
        from redoxfront.fade.figures import fade_figure_stem

        for rec in rates.to_dict("records"):
            fit = narrative.fade_facts(rec)
            fit["figure"] = figure(res, fade_figure_stem(str(rec[C.ID])), f"Fade fit of {rec[C.ID]}")
            out["fade"].append(fit)
    return out


def front_section(res: Path, summary: dict[str, Any]) -> dict[str, Any]:
    """Text and figures of the trade-off front, from the campaign's own objectives."""
    objectives = list(summary.get("objectives", []))
    figs = [f for f in (
        figure(res, "front", "Trade-off front",
               "Each point is a candidate; the line joins the first front of the two objectives drawn. "
               "Bars are 95 % intervals; numbers are the picks. Marker shapes say which values to trust "
               "less (see the legend)."),
        figure(res, "objectives_pairwise", "Objectives pairwise",
               "Every pair of objectives; fill: probability of lying on the first front; marker shapes "
               "as in the front figure.") if len(objectives) > 2 else None,
    ) if f]
    return {"objectives": [narrative.OBJECTIVE_WORDS.get(o, o) for o in objectives],
            "n_ranked": summary.get("n_ranked"), "n_candidates": summary.get("n_candidates"),
            "n_first_front": summary.get("n_first_front"), "knee_id": summary.get("knee_id"),
            "hypervolume_fraction": F.fixed(summary.get("hypervolume_fraction"), 2), "figures": figs}


def pourbaix_section(res: Path, summary: dict[str, Any], desc: Any, label: str) -> dict[str, Any]:
    """The aqueous picks against pH: figure, campaign pH, partner and pKa provenance."""
    aq = summary.get("aqueous", {})
    sources = set()
    if desc is not None and C.PKA_SOURCE in desc.columns:
        sources = set(desc[C.PKA_SOURCE].dropna().astype(str)) - {"none", ""}
    words = {"estimated": "estimated pKa values carry a stated +-3 units and are flagged 'estimated'",
             "given": "given pKa values as stated in the candidates file"}
    partner = summary.get("partner") or {}
    rows = []
    picks = read_csv(res / "picks.csv")
    if desc is not None and picks is not None and C.ID in picks.columns and C.ID in desc.columns:
        d = desc.assign(**{C.ID: desc[C.ID].astype(str)}).drop_duplicates(C.ID).set_index(C.ID)
        for pid in picks[C.ID].astype(str):
            if pid not in d.index:
                continue
            r = d.loc[pid]

            def text(column: str) -> str:
                v = r.get(column)
                return "" if v is None or (isinstance(v, float) and pd.isna(v)) else str(v)

            unc = text(C.PKA_UNCERTAINTY)
            rows.append({
                "id": pid, "forms": text(C.PROTONATION_FORMS) or "none (no proton site)",
                "pka": (text(C.PKA_REDUCED) or "none") + (f" ({text(C.PKA_SOURCE)}"
                                                          + (f", +-{F.fixed(float(unc), 1)}" if unc not in ("", "0.0") else "")
                                                          + ")" if text(C.PKA_SOURCE) else ""),
                "pka_ox": text(C.PKA_OXIDISED),
                "protons": text(C.PROTONS_AT_PH),
                "slope": F.fixed(1000 * float(r[C.NERNST_SLOPE_AT_PH]), 1) if text(C.NERNST_SLOPE_AT_PH) else "",
            })
    return {
        "rows": rows,
        "ph": F.fixed(aq.get("ph"), 1),
        "reference": label,
        "overpotential": F.fixed(aq.get("water_overpotential_v"), 2) if aq.get("water_overpotential_v") else "",
        "n_losing": aq.get("n_losing_electrons_to_the_window", 0),
        "partner": (f"{partner.get('label')} at {partner.get('potential_v_vs_she')} V vs SHE "
                    f"({partner.get('source')})") if partner else "",
        "pka_words": "; ".join(words[s] for s in sorted(sources) if s in words) or "no pKa known: flat lines",
        "figure": figure(res, "pourbaix_picks", "Picks against pH",
                         "E vs pH of each pick with the water lines and the campaign's pH."),
    }


def gather(campaign: Campaign, title: str, note: str) -> dict[str, Any]:
    """The whole report as a plain dict: one key per section, in reading order."""
    res = campaign.results_dir
    ref = campaign.compute.reference
    label = F.reference_name(ref, campaign.compute.user_reference_name)
    from redoxfront.ranking.cell_metrics import CellSettings
    from redoxfront.campaign import section_from_mapping

    cell = section_from_mapping(CellSettings, campaign.section("cell"), "cell")
    desc = read_csv(res / "descriptors.csv")
    table, source = candidate_table(res)
    if table is not None:
        table = shown_potential(table, ref)
    summary = read_json(res / "ranking_summary.json") or {}
    ranked = source == "ranking.csv"
    objectives = list(summary.get("objectives", [])) if ranked else []
    models = model_section(res, ref, label)
    hide = NO_MODEL_NOTES if models["model"] is None else ()
    cards, card_basis = pick_cards(table if ranked else None, objectives, label, hide)
    tab = table_section(table, label, res, hide)
    first_pass = first_pass_section(res, ref, label)
    if first_pass is not None:
        full_tier_labels(cards, tab)
        if first_pass["figure"]:
            first_pass["figure"] = figure(
                res, FIGURE_STEM, "Full tier against fast tier",
                "Each coloured point is a candidate computed at both tiers (filled: calibration sample; open: "
                "selected by the rule or went on anyway); the line is the tier line fitted on them and the band "
                "its 95 % prediction interval; grey points are the candidates the rule left out, at their fast "
                "tier estimate. Potentials uncalibrated (not against measurements).")
    return {
        "title": title or campaign.name,
        "campaign": campaign.name,
        "version": __version__,
        "date": _dt.datetime.now().strftime("%Y-%m-%d %H:%M"),
        "banner": note,
        "reference": label,
        "summary": narrative.summary_paragraphs(desc, tab, cards, card_basis, models, summary, ranked, campaign,
                                                first_pass),
        "picks": {"cards": cards, "basis": card_basis, "ranked": ranked,
                  "why_none": narrative.why_no_picks(campaign, ranked, res)},
        "safety": list(SAFETY_NOTES) + (list(AQUEOUS_SAFETY_NOTES) if campaign.compute.solvent == "water" else []),
        "assumptions": narrative.assumptions(campaign, cell, desc, summary, label),
        "method": narrative.method_line(campaign, desc),
        "front": front_section(res, summary) if ranked else None,
        "pourbaix": pourbaix_section(res, summary, desc, label) if ranked and summary.get("aqueous") else None,
        "table": tab,
        "table_source": source,
        "first_pass": first_pass,
        **models,
        "limitations": list(narrative.LIMITATIONS) + ([narrative.FUNNEL_LIMITATION] if first_pass else []),
        "files": narrative.result_files(res),
    }

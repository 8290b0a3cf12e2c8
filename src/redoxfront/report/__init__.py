"""The campaign report: one self-contained HTML file a battery team can read.

``write_report(campaign)`` reads what the steps wrote under ``results/`` (ranking,
picks, model, calibration, rates, input problems, figures) and writes
``results/report.html`` with the figures embedded, every string HTML-escaped.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterable

import pandas as pd

from redoxfront import __version__
from redoxfront import columns as C
from redoxfront.campaign import Campaign, section_from_mapping
from redoxfront.outputs import read_json_file, read_table, regenerate_hint, write_text
from redoxfront.report.safety import SAFETY_NOTES


def _software() -> str:
    """Versions of the programs the numbers came from, for the record."""
    from importlib.metadata import PackageNotFoundError, version

    parts = [f"redoxfront {__version__}"]
    for name in ("tblite", "rdkit", "numpy", "scipy", "statsmodels"):
        try:
            parts.append(f"{name} {version(name)}")
        except PackageNotFoundError:
            continue
    return ", ".join(parts)


@dataclass(frozen=True)
class ReportSettings:
    """Campaign section ``[report]``: a note shown at the top (e.g. that data are invented)."""

    note: str = ""
    title: str = ""


_STYLE = """
body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;margin:2rem auto;max-width:72rem;
color:#1f2933;line-height:1.45;padding:0 1rem}
h1{font-size:1.6rem;margin-bottom:.2rem}h2{font-size:1.2rem;border-bottom:1px solid #d9e2ec;
padding-bottom:.2rem;margin-top:2rem}
table{border-collapse:collapse;font-size:.85rem;margin:.5rem 0}
th,td{border-bottom:1px solid #e4e7eb;padding:.25rem .5rem;text-align:right}
th{background:#f5f7fa}td.t,th.t{text-align:left}
.banner{background:#fff3c4;border:1px solid #f0b429;padding:.6rem 1rem;border-radius:4px}
.warn{color:#8d2b0b}.muted{color:#616e7c;font-size:.85rem}
img{max-width:100%;border:1px solid #e4e7eb;margin:.5rem 0}
code{font-size:.85rem}.scroll{overflow-x:auto}
"""


def _e(value: Any) -> str:
    return html.escape(str(value), quote=True)


def _fmt(value: Any, digits: int = 3) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return ""
    if isinstance(value, (bool,)):
        return "yes" if value else "no"
    if isinstance(value, float):
        if value != 0 and (abs(value) >= 1e4 or abs(value) < 1e-3):
            return f"{value:.{digits}g}"
        return f"{value:.{digits}f}".rstrip("0").rstrip(".") if digits else f"{value:.0f}"
    return str(value)


def _table(df: pd.DataFrame, text_columns: Iterable[str] = ()) -> str:
    text = set(text_columns)
    head = "".join(f'<th class="{"t" if c in text else ""}">{_e(c)}</th>' for c in df.columns)
    rows = []
    for _, r in df.iterrows():
        cells = "".join(
            f'<td class="{"t" if c in text else ""}">{_e(_fmt(r[c]))}</td>' for c in df.columns
        )
        rows.append(f"<tr>{cells}</tr>")
    return (f'<div class="scroll"><table><thead><tr>{head}</tr></thead>'
            f"<tbody>{''.join(rows)}</tbody></table></div>")


def _figure(path: Path, alt: str) -> str:
    if not path.exists():
        return ""
    data = base64.b64encode(path.read_bytes()).decode("ascii")
    return f'<img alt="{_e(alt)}" src="data:image/png;base64,{data}">'


def _read_csv(path: Path) -> pd.DataFrame | None:
    return read_table(path, remedy=regenerate_hint(path)) if path.exists() else None


def _read_json(path: Path) -> dict[str, Any] | None:
    return read_json_file(path, remedy=regenerate_hint(path)) if path.exists() else None


def _picks_section(res: Path, ref: str) -> str:
    picks = _read_csv(res / "picks.csv")
    if picks is None or picks.empty:
        return "<p>No picks: run the ranking step (it needs predicted half-lives and cell voltages).</p>"
    keep = [c for c in (
        "pick_order", C.ID, C.SMILES, C.CELL_VOLTAGE, C.ENERGY_DENSITY, C.HALF_LIFE,
        C.HALF_LIFE_LOW, C.HALF_LIFE_HIGH, C.P_FRONT, C.PARETO_RANK, C.MOLAR_MASS,
        C.POTENTIAL_BASIS, C.DOMAIN,
    ) if c in picks.columns]
    subs = [c for c in picks.columns if c.startswith(C.SUBSTITUENT_PREFIX)]  # library campaigns
    keep = keep[:3] + subs + keep[3:]
    return (
        "<p>Suggested next candidates to make: the ones that most raise the expected hypervolume "
        "of the front, among those not yet measured. Half-life intervals are 95 % prediction "
        "intervals; <span class='warn'>extrapolating</span> rows lie outside the model's "
        "applicability domain (leverage above h* = 3(p+1)/n).</p>"
        + _table(picks[keep], text_columns=(C.ID, C.SMILES, C.POTENTIAL_BASIS, C.DOMAIN, *subs))
    )


def _ranking_section(res: Path) -> str:
    ranking = _read_csv(res / "ranking.csv")
    summary = _read_json(res / "ranking_summary.json") or {}
    if ranking is None:
        return "<p>No ranking yet.</p>"
    front = ranking[ranking.get(C.PARETO_RANK) == 1] if C.PARETO_RANK in ranking else ranking.iloc[:0]
    keep = [c for c in (C.ID, C.SMILES, C.CELL_VOLTAGE, C.ENERGY_DENSITY, C.HALF_LIFE, C.P_FRONT,
                        C.MOLAR_MASS, C.DOMAIN) if c in ranking.columns]
    text = (f"<p>{summary.get('n_ranked', len(ranking))} of {summary.get('n_candidates', len(ranking))} "
            f"candidates ranked on {_e(', '.join(summary.get('objectives', [])))}; "
            f"{summary.get('n_first_front', len(front))} on the first front; knee: "
            f"<b>{_e(summary.get('knee_id') or 'none')}</b>.</p>")
    figs = _figure(res / "figures" / "front.png", "trade-off front") + _figure(
        res / "figures" / "objectives_pairwise.png", "objectives pairwise")
    sort = [c for c in (C.P_FRONT,) if c in front.columns]
    front = front.sort_values(sort, ascending=False) if sort else front
    return text + figs + "<h3>First front</h3>" + _table(front[keep], text_columns=(C.ID, C.SMILES, C.DOMAIN))


def _model_section(res: Path) -> str:
    model = _read_json(res / "model.json")
    if model is None:
        return "<p>No decomposition-rate model: give measured rates or cycling files and run the fit step.</p>"
    st = model.get("statistics", {})
    coef = pd.DataFrame(model.get("coefficient_table", []))
    keep = [c for c in ("term", "coefficient", "standard_error", "p_value", "standardised_coefficient",
                        "vif", "ddg_act_kcal_per_mol_per_unit") if c in coef.columns]
    yr = st.get("y_randomisation") or {}
    line = (f"n = {st.get('n_train')}, R² = {_fmt(st.get('r2'))}, adjusted R² = {_fmt(st.get('adj_r2'))}, "
            f"RMSE = {_fmt(st.get('rmse'))}, Q²(LOO) = {_fmt(st.get('q2_loo'))}, "
            f"Q²({st.get('kfold')}-fold) = {_fmt(st.get('q2_kfold'))}")
    if yr:
        line += f"; y-randomisation p = {_fmt(yr.get('p_value'))}"
    return (f"<p>{_e(line)}.</p>" + (_table(coef[keep], text_columns=("term",)) if keep else "")
            + "<p class='muted'>ddG‡ per unit = -RT ln(10) x coefficient: the change in activation free "
              "energy of decomposition per unit of the descriptor, kcal/mol.</p>"
            + _figure(res / "figures" / "williams.png", "Williams plot")
            + _figure(res / "figures" / "observed_vs_predicted.png", "observed vs predicted"))


def _calibration_section(res: Path) -> str:
    cal = _read_json(res / "calibration.json")
    if not cal or not cal.get("lines"):
        return ("<p class='warn'>Potentials are <b>uncalibrated</b>: raw GFN2-xTB values are typically "
                "off by ~0.3 V. Give measured potentials of a few candidates to calibrate.</p>")
    lines = pd.DataFrame(cal["lines"])
    notes = "".join(f"<li>{_e(n)}</li>" for n in cal.get("notes", []))
    return (_table(lines, text_columns=("group",)) + (f"<ul>{notes}</ul>" if notes else "")
            + _figure(res / "figures" / "calibration_parity.png", "calibration parity plot"))


def _problems_section(res: Path) -> str:
    parts = []
    problems = _read_csv(res / "input_problems.csv")
    if problems is not None and not problems.empty:
        parts.append("<p>Input rows rejected (the rest of the batch went on):</p>"
                     + _table(problems, text_columns=problems.columns))
    desc = _read_csv(res / "descriptors.csv")
    if desc is not None and C.STATUS in desc:
        failed = desc[desc[C.STATUS] != "ok"][[C.ID, C.STATUS]]
        if not failed.empty:
            parts.append("<p>Candidates whose calculation failed:</p>" + _table(failed, text_columns=failed.columns))
    return "".join(parts) or "<p>No rejected rows and no failed calculations.</p>"


def render_report(campaign: Campaign) -> str:
    """The report as one HTML string (figures embedded, every string escaped)."""
    res = campaign.results_dir
    from redoxfront.units import reference_label

    ref = campaign.compute.reference
    rs = section_from_mapping(ReportSettings, campaign.section("report"), "report")
    banner = f'<p class="banner">{_e(rs.note)}</p>' if rs.note else ""
    title = rs.title or campaign.name
    desc = _read_csv(res / "descriptors.csv")
    n_ok = int((desc[C.STATUS] == "ok").sum()) if desc is not None and C.STATUS in desc else 0
    n_all = 0 if desc is None else len(desc)
    s = campaign.compute
    method = (f"{s.method} (tblite) with ALPB({s.solvent}); {s.role}, {s.n_electrons} electron(s); "
              f"potentials vs {reference_label(ref, s.user_reference_name)}; {s.conformers.refine_lowest} conformers refined of "
              f"{s.conformers.n_generate} generated; seed {s.seed}. Software: {_software()}; "
              f"settings hash {s.result_hash()} (the key of the stored states).")
    safety = "".join(f"<li>{_e(t)}</li>" for t in SAFETY_NOTES)
    stamp = _dt.datetime.now().strftime("%Y-%m-%d %H:%M")
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<title>{_e(title)}: candidate report</title><style>{_STYLE}</style></head>
<body>
<h1>{_e(title)}</h1>
<p class="muted">redoxfront {_e(__version__)}, {stamp}. {n_ok} of {n_all} candidates computed.</p>
{banner}
<h2>Picks for the battery team</h2>{_picks_section(res, ref)}
<h2>Safety</h2><ul>{safety}</ul>
<h2>Trade-off front</h2>{_ranking_section(res)}
<h2>Decomposition-rate model</h2>{_model_section(res)}
<h2>Calibration of potentials</h2>{_calibration_section(res)}
<h2>Problems</h2>{_problems_section(res)}
<h2>Files</h2>{_files_section(res)}
<h2>Method</h2><p>{_e(method)}</p>
<p class="muted">Potentials: E = -(G(red) - G(ox) + shift)/F - E_abs(SHE), shift {_e(s.ipea_shift_ev)} eV,
E_abs(SHE) from '{_e(s.absolute_she)}'; then a linear calibration against measured potentials.
Cell energy density counts both tanks unless the campaign says otherwise. See the documentation
pages (docs/) for references.</p>
</body></html>
"""


RESULT_FILES: tuple[tuple[str, str], ...] = (
    ("descriptors.csv", "every candidate: raw potentials, energies, descriptors, status"),
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


def _files_section(res: Path) -> str:
    rows = "".join(f'<tr><td class="t"><code>{_e(name)}</code></td><td class="t">{_e(what)}</td></tr>'
                   for name, what in RESULT_FILES if (res / name).exists())
    if not rows:
        return "<p>No result files yet.</p>"
    return f'<p>Next to this report, in <code>results/</code>:</p><table>{rows}</table>'


def write_report(campaign: Campaign) -> Path:
    """Write ``results/report.html`` and return its path."""
    out = campaign.results_dir / "report.html"
    out.parent.mkdir(parents=True, exist_ok=True)
    write_text(out, render_report(campaign))
    return out

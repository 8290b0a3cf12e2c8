"""Measured potentials at another pH, moved to the campaign's pH along each couple's lines.

A potential measured at pH p_m is moved to the campaign's pH p_c by the candidate's own
Nernst lines (:class:`redoxfront.engine.proton_coupled.ProtonCoupledCouple`, with the pKa
values of the descriptor table, given or estimated): E(p_c) = E(p_m) + [E_line(p_c) -
E_line(p_m)]. When a pKa lies between the two pH values, the moved value depends on that
pKa's accuracy, so the row is flagged (``measured_ph_note``). Units: V, pH units.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from redoxfront import columns
from redoxfront.engine.proton_coupled import OXIDISED, REDUCED, ProtonCoupledCouple, ProtonSite, parse_pka_list
from redoxfront.units import STANDARD_TEMPERATURE_K

MEASURED_PH_NOTE = columns.MEASURED_PH_NOTE


def couple_from_row(row: pd.Series, temperature_k: float = STANDARD_TEMPERATURE_K) -> ProtonCoupledCouple:
    """The couple's lines (anchor 0 V) from a descriptor-table row's pKa columns and n."""
    n = row.get(columns.N_ELECTRONS)
    n = int(float(n)) if n is not None and str(n) not in ("", "nan") else 1
    where = f"candidate {row.get(columns.ID)}"
    sites = [ProtonSite(p, REDUCED, source=str(row.get(columns.PKA_SOURCE, "")))
             for p in parse_pka_list(row.get(columns.PKA_REDUCED), f"{where}, {columns.PKA_REDUCED}")]
    sites += [ProtonSite(p, OXIDISED, source="given")
              for p in parse_pka_list(row.get(columns.PKA_OXIDISED), f"{where}, {columns.PKA_OXIDISED}")]
    return ProtonCoupledCouple(0.0, max(n, 1), tuple(sites), temperature_k)


def move_measured_to_ph(measured: pd.DataFrame, table: pd.DataFrame, campaign_ph: float,
                        temperature_k: float = STANDARD_TEMPERATURE_K) -> tuple[pd.DataFrame, list[str]]:
    """Measured rows (``id``, ``measured_v``, optional ``ph``) moved to ``campaign_ph`` and then
    averaged per id; adds :data:`MEASURED_PH_NOTE`. Rows without a pH are taken as measured at
    the campaign pH (with a note)."""
    notes: list[str] = []
    rows = table.assign(**{columns.ID: table[columns.ID].astype(str)}).drop_duplicates(columns.ID).set_index(columns.ID)
    out = measured.copy()
    if "ph" not in out.columns:
        out["ph"] = np.nan
    moved, texts = [], []
    no_ph = []
    for _, r in out.iterrows():
        ph = float(r["ph"]) if r["ph"] is not None and not pd.isna(r["ph"]) else math.nan
        if not math.isfinite(ph):
            no_ph.append(str(r["id"]))
            moved.append(r["measured_v"])
            texts.append(f"no pH given: taken as measured at pH {campaign_ph:g}")
            continue
        if abs(ph - campaign_ph) < 1e-9 or str(r["id"]) not in rows.index:
            moved.append(r["measured_v"])
            texts.append("" if abs(ph - campaign_ph) < 1e-9 else f"measured at pH {ph:g}, not moved (not in the table)")
            continue
        couple = couple_from_row(rows.loc[str(r["id"])], temperature_k)
        value, crossed = couple.move(float(r["measured_v"]), ph, campaign_ph)
        moved.append(value)
        text = f"measured at pH {ph:g}, moved to pH {campaign_ph:g} ({value - r['measured_v']:+.3f} V)"
        if crossed:
            src = rows.loc[str(r["id"])].get(columns.PKA_SOURCE, "")
            text += (f"; flag: pKa {', '.join(f'{p:.2f}' for p in crossed)} ({src}) lies between: the moved "
                     "value is only as good as that pKa")
        texts.append(text)
    if no_ph:
        notes.append(f"measured potentials without a pH ({', '.join(no_ph[:10])}): taken as measured at the "
                     f"campaign pH {campaign_ph:g}; add a 'ph' column")
    flagged = [str(i) for i, t in zip(out["id"], texts) if "flag:" in t]
    if flagged:
        notes.append(f"measured potentials moved across a pKa to pH {campaign_ph:g}: {', '.join(flagged[:10])}")
    out["measured_v"] = moved
    out[MEASURED_PH_NOTE] = texts
    agg: dict[str, object] = {"measured_v": "mean", MEASURED_PH_NOTE: lambda s: "; ".join(x for x in s if x)}
    if "uncertainty_v" in out.columns:
        agg["uncertainty_v"] = "max"
    if "class" in out.columns:
        agg["class"] = "first"
    if out["id"].duplicated().any():
        notes.append("some ids were measured more than once; their values (moved to the campaign pH) were averaged")
    out = out.groupby("id", as_index=False, sort=False).agg(agg)
    return out, notes

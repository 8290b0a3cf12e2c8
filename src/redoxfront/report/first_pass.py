"""The report's first-pass section: the fast tier and the funnel, when they ran.

Reads ``results/fast_tier.csv`` and ``results/fast_tier_summary.json`` (written by
:mod:`redoxfront.compute.funnel`) and gives a plain dict: how many candidates got the fast tier,
the rule, how many went on to the full tier and why, the tier line of each role, the figure of
the full tier against the fast tier with the line and its 95 % band, and the best candidates the
rule left out with their fast-tier estimate and its interval. Every number says its tier.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from redoxfront.compute.fast_tier import FAST_ORBITAL_PROXY, FAST_STATUS, fast_vertical_column
from redoxfront.compute.funnel import SELECTION_COLUMN, better_sign, estimate_column, full_column
from redoxfront.outputs import read_json_file, read_table, regenerate_hint
from redoxfront.report import formatting as F

LEFT_OUT_SHOWN = 10
"""Best left-out candidates listed per role (the CSV holds every one)."""
FIGURE_STEM = "fast_tier_line"
"""``results/figures/fast_tier_line.svg``, drawn when the report is written."""

NOT_SELECTED = "not selected"
SAMPLE = "calibration sample"
RULE_WORDS = {
    "top_fraction": "the best {pct} of each role by the fast tier's estimate of the full-tier potential "
                    "(highest for catholytes, lowest for anolytes)",
    "interval_reaches_cut": "the best {pct} of each role by the fast tier's estimate, plus every candidate "
                            "whose 95 % interval reaches the estimate at that cut",
}


def proxy_words(proxy: str, ref_label: str) -> tuple[str, str]:
    """How the report names the fast-tier value the line uses, and its axis label with unit."""
    if proxy == "vertical":
        return ("the vertical potential (both states at one force-field geometry, uncalibrated)",
                f"fast tier: vertical potential (V vs {ref_label})")
    return ("the orbital proxy (-HOMO of a catholyte, -LUMO of an anolyte, at one force-field geometry)",
            "fast tier: orbital proxy -HOMO / -LUMO (eV)")


def _reason_counts(selection: pd.Series) -> list[dict[str, Any]]:
    """Why candidates went to the full tier, with counts, in the order a reader asks."""
    s = selection.astype(str)
    out = []
    n_sample = int((s == SAMPLE).sum())
    if n_sample:
        out.append({"reason": "calibration sample (evenly spread over the fast-tier values, to fit the tier line)",
                    "n": n_sample})
    rule = s[s.str.startswith("selected by rule")]
    for text, n in rule.value_counts().items():
        out.append({"reason": str(text), "n": int(n)})
    anyway = s[s.str.startswith("full tier: ")].str.replace("full tier: ", "", regex=False)
    for text, n in anyway.value_counts().items():
        out.append({"reason": f"went on anyway: {text}", "n": int(n)})
    return out


def _line_rows(lines: dict[str, Any], x_unit: str, ref_label: str) -> list[dict[str, str]]:
    rows = []
    for role, line in lines.items():
        if not line.get("fitted"):
            rows.append({"role": role, "fitted": "", "reason": str(line.get("reason", "not fitted"))})
            continue
        a, b = F.as_float(line.get("intercept_v")), F.as_float(line.get("slope"))
        sign = "-" if b is not None and b < 0 else "+"
        rows.append({
            "role": role, "fitted": "yes", "reason": "",
            "equation": (f"E(full tier) = {F.fixed(a, 3)} {sign} {F.fixed(abs(b), 3) if b is not None else ''} "
                         f"× fast-tier value"),
            "intercept": F.fixed(a, 3), "slope": F.fixed(b, 3), "slope_unit": f"V per {x_unit}",
            "n": str(line.get("n", "")), "residual_sd": F.fixed(line.get("residual_sd_v"), 3),
        })
    return rows


def _left_out(fast: pd.DataFrame, est: str, low: str, high: str, vcol: str) -> list[dict[str, Any]]:
    """Per role, the best candidates the rule left out, best first by the fast tier's estimate."""
    out = []
    for role in sorted(fast["role"].astype(str).unique()):
        rows = fast[(fast["role"].astype(str) == role) & (fast[SELECTION_COLUMN].astype(str) == NOT_SELECTED)]
        if not len(rows):
            continue
        score = better_sign(role) * pd.to_numeric(rows[est], errors="coerce")
        if score.isna().all():  # no tier line: the fast-tier value orders them
            score = better_sign(role) * pd.to_numeric(rows[vcol], errors="coerce")
        best = rows.loc[score.sort_values(ascending=False, na_position="last").index[:LEFT_OUT_SHOWN]]
        out.append({"role": role, "n": len(rows), "rows": [{
            "id": str(r["id"]),
            "estimate": F.fixed(r.get(est), 2),
            "interval": F.range_text(F.fixed(r.get(low), 2), F.fixed(r.get(high), 2))
            if F.as_float(r.get(low)) is not None and F.as_float(r.get(high)) is not None else "",
            "fast_value": F.fixed(r.get(vcol), 3),
        } for r in best.to_dict("records")]})
    return out


def _panels(fast: pd.DataFrame, est: str, low: str, high: str, full: str, vcol: str) -> list[Any]:
    from redoxfront.report.figures import TierPanel

    panels = []
    ok = fast[FAST_STATUS].astype(str) == "ok"
    for role in sorted(fast.loc[ok, "role"].astype(str).unique()):
        rows = fast[ok & (fast["role"].astype(str) == role)]

        def num(column: str) -> np.ndarray:
            return pd.to_numeric(rows[column], errors="coerce").to_numpy(dtype=float) if column in rows \
                else np.full(len(rows), np.nan)

        if not np.isfinite(num(full)).any():
            continue
        panels.append(TierPanel(role, num(vcol), num(full), num(est), num(low), num(high),
                                (rows[SELECTION_COLUMN].astype(str) == SAMPLE).to_numpy()))
    return panels


def first_pass_section(res: Path, ref: str, ref_label: str) -> dict[str, Any] | None:
    """The first-pass section, or None when the funnel did not run (no ``fast_tier.csv``).

    ``ref``: the reference key of the column names; ``ref_label``: how the reader knows it.
    Also draws ``results/figures/fast_tier_line.svg`` from the same table.
    """
    path = res / "fast_tier.csv"
    if not path.exists():
        return None
    fast = read_table(path, remedy=regenerate_hint(path))
    summary_path = res / "fast_tier_summary.json"
    summary = read_json_file(summary_path, remedy=regenerate_hint(summary_path)) if summary_path.exists() else {}
    proxy = str(summary.get("proxy", "orbital"))
    vcol = str(summary.get("proxy_column") or (FAST_ORBITAL_PROXY if proxy == "orbital" else fast_vertical_column(ref)))
    est, low, high, full = estimate_column(ref), estimate_column(ref, "low"), estimate_column(ref, "high"), full_column(ref)
    for column in (vcol, est, low, high, full, SELECTION_COLUMN, FAST_STATUS, "role"):
        if column not in fast:
            fast[column] = np.nan if column not in (SELECTION_COLUMN, FAST_STATUS, "role") else ""
    status = fast[FAST_STATUS].astype(str)
    selection = fast[SELECTION_COLUMN].astype(str)
    n_fast_ok = int((status == "ok").sum())
    failed = status.str.startswith("failed")
    fraction = F.as_float(summary.get("fraction"))
    pct = f"{100 * fraction:g} %" if fraction is not None else "share"
    rule = str(summary.get("rule", ""))
    proxy_text, x_label = proxy_words(proxy, ref_label)
    x_unit = "V" if proxy == "vertical" else "eV"
    figure = None
    panels = _panels(fast, est, low, high, full, vcol)
    if panels:
        from redoxfront.report.figures import tier_line_figure

        tier_line_figure(panels, x_label, f"full tier: E uncalibrated (V vs {ref_label})",
                         res / "figures" / f"{FIGURE_STEM}.svg")
        figure = {"stem": FIGURE_STEM}
    return {
        "n_candidates": len(fast),
        "n_fast_ok": n_fast_ok,
        "n_fast_failed": int(failed.sum()),
        "n_not_in_fast": int(len(fast) - n_fast_ok - failed.sum()),
        "rule": rule,
        "rule_words": RULE_WORDS[rule].format(pct=pct) if rule in RULE_WORDS else f"the rule '{rule}'",
        "proxy_words": proxy_text,
        "x_unit": x_unit,
        "n_full": int((selection != NOT_SELECTED).sum()),
        "n_left_out": int((selection == NOT_SELECTED).sum()),
        "reasons": _reason_counts(selection[selection != NOT_SELECTED]),
        "lines": _line_rows(dict(summary.get("tier_lines", {})), x_unit, ref_label),
        "left_out": _left_out(fast, est, low, high, vcol),
        "figure": figure,
        "reference": ref_label,
    }

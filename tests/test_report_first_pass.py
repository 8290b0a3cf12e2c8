"""The report's first-pass section after a funnel: counts, rule, tier line, figure and the best
candidates the rule left out, every number labelled with its tier."""

from __future__ import annotations

import json
import re

import numpy as np
import pytest
from report_campaigns import HOSTILE_ID

from redoxfront.compute.fast_tier import FAST_ORBITAL_PROXY, FAST_STATUS
from redoxfront.compute.funnel import SELECTION_COLUMN, estimate_column, full_column
from redoxfront.outputs import read_table


def _section(html: str, name: str) -> str:
    return html.split(f'<section id="{name}"', 1)[1].split("</section>", 1)[0]


def test_first_pass_section_states_the_funnel_and_its_tier_line(funnel_results):
    import statsmodels.api as sm

    res = funnel_results / "results"
    html = (res / "report.html").read_text(encoding="utf-8")
    fast = read_table(res / "fast_tier.csv", remedy="rerun")
    summary = json.loads((res / "fast_tier_summary.json").read_text())
    order = [html.index(f'<section id="{s}"') for s in ("candidates", "first-pass", "model")]
    assert order == sorted(order)
    sec = _section(html, "first-pass")
    ok = fast[FAST_STATUS] == "ok"
    assert f"{int(ok.sum())} of {len(fast)} candidates got the <b>fast tier</b>" in sec
    # why each went on: the counts of fast_tier.csv, one row per reason
    reasons = dict(re.findall(r'<tr><td class="text">([^<]*)</td><td>(\d+)</td></tr>',
                              sec.split('id="first-pass-reasons"', 1)[1].split("</table>", 1)[0]))
    sel = fast[SELECTION_COLUMN]
    assert int(reasons[next(k for k in reasons if k.startswith("calibration sample"))]) == int((sel == "calibration sample").sum()) == 3
    rule_rows = {k: int(v) for k, v in reasons.items() if k.startswith("selected by rule")}
    assert sum(rule_rows.values()) == int(sel.str.startswith("selected by rule").sum()) >= 1
    n_left = int((sel == "not selected").sum())
    assert f"{n_left} did not and are not ranked" in sec and n_left >= 3
    # the tier line as fitted, checked against statsmodels OLS on the rows with both tiers
    both = fast[ok & fast[full_column("fc")].notna()]
    x = both[FAST_ORBITAL_PROXY].astype(float).to_numpy()
    y = both[full_column("fc")].astype(float).to_numpy()
    fit = sm.OLS(y, sm.add_constant(x)).fit()
    line = summary["tier_lines"]["catholyte"]
    # statsmodels OLS (PyPI): same intercept, slope and residual SD (sqrt of the scale)
    assert (line["intercept_v"], line["slope"], line["residual_sd_v"]) == pytest.approx(
        (fit.params[0], fit.params[1], np.sqrt(fit.scale)), abs=1e-9)
    lines = sec.split('id="tier-lines"', 1)[1].split("</table>", 1)[0]
    assert f"<td>{fit.params[0]:.3f}</td><td>{fit.params[1]:.3f}</td><td>{len(x)}</td><td>{np.sqrt(fit.scale):.3f}</td>" in lines
    # the figure: inline SVG of full tier against fast tier
    assert "<svg" in sec and "Full tier against fast tier" in sec and "prediction band" in sec
    # the best left out, best first (highest estimate of a catholyte), with the fast tier estimate
    # and its 95 % prediction interval as statsmodels gives them at each candidate's fast-tier value
    table = sec.split('<table class="plain left-out">', 1)[1].split("</table>", 1)[0]
    assert "Fast tier estimate of the full-tier potential" in table and "fast tier estimate" in table
    shown = re.findall(r'<tr><td class="text">([^<]*)</td><td>([^<]*)</td><td>([^<]*)</td><td>([^<]*)</td></tr>', table)
    left = fast[sel == "not selected"]
    frame = fit.get_prediction(sm.add_constant(left[FAST_ORBITAL_PROXY].astype(float).to_numpy(), has_constant="add")) \
        .summary_frame(alpha=0.05)
    frame.index = left["id"].to_numpy()
    frame = frame.sort_values("mean", ascending=False)
    assert [s[0] for s in shown] == [str(i).replace("<", "&lt;").replace(">", "&gt;") for i in frame.index[:10]]
    for (cid, est, interval, _), (_, r) in zip(shown, frame.iterrows()):
        assert est == f"{r['mean']:.2f}"
        assert interval == f"{r['obs_ci_lower']:.2f}–{r['obs_ci_upper']:.2f}"
    assert left[estimate_column("fc")].astype(float).to_numpy() == pytest.approx(
        fit.predict(sm.add_constant(left[FAST_ORBITAL_PROXY].astype(float).to_numpy(), has_constant="add")), abs=1e-9)


def test_after_a_funnel_every_potential_says_its_tier(funnel_results):
    res = funnel_results / "results"
    html = (res / "report.html").read_text(encoding="utf-8")
    fast = read_table(res / "fast_tier.csv", remedy="rerun")
    n_left = int((fast[SELECTION_COLUMN] == "not selected").sum())
    summary = _section(html, "summary")
    # the counts of both tiers, not just of the full-tier rows
    assert f"{len(fast)} candidate rows read; {len(fast)} got the fast tier (first pass)" in summary
    assert f"The other {n_left} have only a fast tier estimate and are not ranked" in summary
    cand = _section(html, "candidates")
    assert "Potential (full tier)" in cand and "Every row is a full-tier result" in cand
    assert f"{n_left} candidates were left out by the funnel's rule" in cand
    assert f"(full-tier results only; the {n_left} left out after the fast tier" in _section(html, "front")
    picks = _section(html, "picks")
    assert picks.count("full tier") >= 1  # each card's potential says its tier
    assert "fast_tier.csv" in _section(html, "files")
    assert "<img src=x" not in html and HOSTILE_ID.replace("<", "&lt;").replace(">", "&gt;") in html


def test_no_first_pass_section_without_a_funnel(first_screen_results):
    html = (first_screen_results / "results" / "report.html").read_text(encoding="utf-8")
    assert 'id="first-pass"' not in html and "(full tier)" not in html  # one tier: nothing to tell apart


def test_left_out_order_and_figure_panels_for_both_roles(tmp_path):
    import pandas as pd

    from redoxfront.report.first_pass import first_pass_section

    res = tmp_path / "results"
    res.mkdir()
    rows = []
    for role, sign in (("catholyte", 1.0), ("anolyte", -1.0)):
        for i in range(8):
            fast_value = 5.0 + 0.1 * i
            est = sign * (0.2 + 0.5 * fast_value)
            chosen = "calibration sample" if i in (0, 3, 7) else "not selected"
            rows.append({"id": f"{role[0]}{i}", "role": role, FAST_STATUS: "ok", FAST_ORBITAL_PROXY: fast_value,
                         estimate_column("fc"): est, estimate_column("fc", "low"): est - 0.1,
                         estimate_column("fc", "high"): est + 0.1, SELECTION_COLUMN: chosen,
                         full_column("fc"): est + 0.01 if chosen != "not selected" else np.nan})
    rows.append({"id": "bp", "role": "bipolar", FAST_STATUS: "not in the fast tier: bipolar rows go to the full tier",
                 SELECTION_COLUMN: "full tier: not in the fast tier: bipolar rows go to the full tier"})
    pd.DataFrame(rows).to_csv(res / "fast_tier.csv", index=False)
    (res / "fast_tier_summary.json").write_text(json.dumps({
        "rule": "top_fraction", "proxy": "orbital", "proxy_column": FAST_ORBITAL_PROXY, "fraction": 0.2,
        "tier_lines": {"catholyte": {"fitted": True, "intercept_v": 0.2, "slope": 0.5, "n": 3, "residual_sd_v": 0.01},
                       "anolyte": {"fitted": False, "reason": "fewer than 3 candidates with both tiers"}}}))
    sec = first_pass_section(res, "fc", "Fc+/Fc")
    assert (sec["n_candidates"], sec["n_fast_ok"], sec["n_not_in_fast"], sec["n_full"], sec["n_left_out"]) == (17, 16, 1, 7, 10)
    assert [r["n"] for r in sec["reasons"]] == [6, 1] and sec["reasons"][1]["reason"].startswith("went on anyway")
    left = {g["role"]: [r["id"] for r in g["rows"]] for g in sec["left_out"]}
    # docs/funnel.md, the rule: the best catholytes have the highest potentials, the best
    # anolytes the lowest (the wider cell window); left-out lists follow the same order
    assert left["catholyte"] == ["c6", "c5", "c4", "c2", "c1"]
    assert left["anolyte"] == ["a6", "a5", "a4", "a2", "a1"]
    assert [ln["fitted"] for ln in sec["lines"]] == ["yes", ""] and "fewer than 3" in sec["lines"][1]["reason"]
    assert sec["lines"][0]["equation"] == "E(full tier) = 0.200 + 0.500 × fast-tier value"
    svg = (res / "figures" / "fast_tier_line.svg").read_text()
    assert "anolytes" in svg and "catholytes" in svg  # one panel per role, text kept as text

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
    picks = _section(html, "picks")
    assert picks.count("full tier") >= 1  # each card's potential says its tier
    assert "fast_tier.csv" in _section(html, "files")
    assert "<img src=x" not in html and HOSTILE_ID.replace("<", "&lt;").replace(">", "&gt;") in html


def test_no_first_pass_section_without_a_funnel(first_screen_results):
    html = (first_screen_results / "results" / "report.html").read_text(encoding="utf-8")
    assert 'id="first-pass"' not in html and "(full tier)" not in html  # one tier: nothing to tell apart

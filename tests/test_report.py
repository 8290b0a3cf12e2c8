"""The report reads without the tool: human headers, meaningful rounding, the numbers the
result files hold, sections in order, ids as text, and a correct first-screen report."""

from __future__ import annotations

import json
import re

import pandas as pd
import pytest
from report_campaigns import HOSTILE_ID

from redoxfront import columns as C
from redoxfront.report import formatting as F

SECTION_ORDER = ["title", "summary", "picks", "safety", "assumptions", "front", "candidates", "model",
                 "limitations", "files"]


def _html(folder) -> str:
    return (folder / "results" / "report.html").read_text(encoding="utf-8")


def _table_rows(html: str) -> list[str]:
    body = html.split('<table class="sortable" id="candidate-table">', 1)[1].split("<tbody>", 1)[1].split("</tbody>", 1)[0]
    return re.findall(r"<tr>(.*?)</tr>", body, re.S)


def test_significant_figures_and_fixed_decimals():
    # common practice, no source: 2 significant figures, no exponent for ordinary sizes
    assert F.significant(3437.788, 2) == "3400"
    assert F.significant(0.012345, 2) == "0.012"
    assert F.significant(53.2, 2) == "53"
    assert F.significant(2.5e7, 2) == "2.5 × 10⁷"
    assert F.fixed(1.23456, 2) == "1.23"
    assert F.fixed(-0.001, 2) == "0.00"  # no "-0.00"
    assert F.significant(float("nan")) == "" and F.fixed(None, 1) == ""


def test_badges_carry_text_and_unknown_flag_values_still_show():
    row = {C.POTENTIAL_BASIS: "uncalibrated", C.DOMAIN: "extrapolating", C.KNEE: "True", C.MEASURED: False,
           C.RATE_BASIS: "predicted"}
    texts = [b["text"] for b in F.badges(row)]
    # common practice, no source: colour is never the only signal, every badge has words
    assert texts == ["uncalibrated potential", "rate model extrapolates", "knee of the front"]
    assert F.badges({C.DOMAIN: "borderline"}) == [{"text": "domain: borderline", "style": "info", "detail": ""}]


def test_demo_report_sections_in_order_and_self_contained(demo_results):
    html = _html(demo_results)
    positions = [html.index(f'id="{s}"') for s in SECTION_ORDER]
    assert positions == sorted(positions)
    # self-contained: no resource fetched from anywhere (common practice, no source)
    assert re.search(r"https?://", html) is None
    assert "<img src=x" not in html and "&lt;img src=x onerror=alert(1)&gt;" in html
    assert "Invented demo" in html  # the campaign's own banner


def test_demo_table_has_human_headers_and_rounded_numbers(demo_results):
    html = _html(demo_results)
    ranking = pd.read_csv(demo_results / "results" / "ranking.csv", dtype={C.ID: str})
    heads = re.findall(r'<th scope="col"[^>]*><button type="button">(.*?)</button>', html)
    assert heads[:4] == ["Pick", "Candidate", "Flags", 'Potential<span class="unit">V vs Fc+/Fc</span>']
    assert 'Half-life<span class="unit">h</span>' in heads
    assert not any(C.HALF_LIFE_LOW in h or "_" in re.sub(r"<[^>]+>", "", h) for h in heads)
    rows = _table_rows(html)
    assert len(rows) == int(ranking[C.STATUS].eq("ok").sum())
    # half-life to 2 significant figures, energy density to 0.1 Wh/L (the precision)
    best = ranking.iloc[0]
    first = rows[0]
    assert f'data-sort="{float(best[C.HALF_LIFE])!r}">{F.significant(best[C.HALF_LIFE], 2)}<' in first
    assert f">{best[C.ENERGY_DENSITY]:.1f}<" in first


def test_demo_model_section_states_y_randomisation_p_and_equation(demo_results):
    html = _html(demo_results)
    model = json.loads((demo_results / "results" / "model.json").read_text())
    p = model["statistics"]["y_randomisation"]["p_value_q2"]
    assert f"<dt>y-randomisation p (Q²)</dt><dd>{F.significant(p, 2)}</dd>" in html
    b0 = model["coefficients"][0]
    assert f"log10(k / 1/h) = {F.significant(b0, 3)}" in html
    for fade_id in ("dmb-04", "dmb-11", "dmb-17"):  # every fade fit has its row and figure
        assert f'aria-label="Fade fit of {fade_id}"' in html or f'alt="Fade fit of {fade_id}"' in html


def test_demo_method_reports_conformers_really_embedded(demo_results):
    html = _html(demo_results)
    desc = pd.read_csv(demo_results / "results" / "descriptors.csv")
    ok = desc[desc[C.STATUS] == "ok"]
    lo, hi = int(ok["conformers_embedded"].min()), int(ok["conformers_embedded"].max())
    text = f"Actually embedded per candidate: {lo}" if lo == hi else f"Actually embedded per candidate: {lo} to {hi}"
    assert text in html
    assert "2 conformers requested per candidate, the lowest 1 refined" in html


def test_demo_rejected_row_listed_with_reason(demo_results):
    html = _html(demo_results)
    left = html.split("<h3>Left out, with reasons</h3>", 1)[1]
    assert "bad-row" in left and "cannot parse SMILES" in left


def test_first_screen_report_has_picks_and_no_missing_half_life_claims(first_screen_results):
    html = _html(first_screen_results)
    assert "No picks" not in html and "run the ranking step" not in html
    cards = re.findall(r'<article class="card">', html)
    assert len(cards) == 2  # n_suggestions = 2
    assert "not predicted (no rate model yet)" in html
    assert "uncalibrated potential" in html
    assert "&lt;img src=x onerror=alert(1)&gt;" in html and HOSTILE_ID not in html
    assert "ranked on cell voltage, molar mass (lower is better)" in html
    assert "no half-life" not in html  # no rate model: said once in the summary, not on every row


@pytest.mark.parametrize("smiles, atoms", [("COc1ccc(OC)cc1", 10), ("not a smiles", 0)])
def test_structure_drawing_is_inline_svg_without_urls(smiles, atoms):
    from redoxfront.report.structures import structure_svg

    svg = structure_svg(smiles)
    if atoms == 0:
        assert svg == ""
        return
    assert svg.startswith("<svg") and "http" not in svg and "<?xml" not in svg
    # RDKit: one drawn element per heavy atom (class atom-N), 1,4-dimethoxybenzene has 10
    assert len(set(re.findall(r"atom-(\d+)", svg))) == atoms


def test_model_domain_badge_left_out_when_the_rate_was_measured():
    # a measured rate does not depend on the model, so its domain is no warning (common practice, no source)
    row = {C.POTENTIAL_BASIS: "measured", C.DOMAIN: "extrapolating", C.RATE_BASIS: "measured",
           C.CALIBRATION_STATUS: "calibrated (outside calibration range)"}
    assert [b["text"] for b in F.badges(row)] == ["measured potential", "rate measured"]


def test_window_flag_shows_its_own_words_as_a_warning():
    # free-text flags from the ranking keep their words (common practice, no source)
    row = {C.WINDOW_FLAG: "may be outside the window: above the oxidation limit 2.50 V (acetonitrile)"}
    assert F.badges(row) == [{"text": "electrolyte window: may be outside the window", "style": "warn",
                              "detail": row[C.WINDOW_FLAG]}]


def test_demo_assumptions_state_the_window_checked(demo_results):
    html = _html(demo_results)
    summary = json.loads((demo_results / "results" / "ranking_summary.json").read_text())
    window = summary["electrochemical_window"]
    assert f"<dt>Electrolyte window</dt><dd>{window['low_v']:.2f} to {window['high_v']:.2f} V vs Fc+/Fc" in html


def test_card_intervals_of_negative_potentials_read_as_ranges_and_counterions_named_only_when_there():
    from redoxfront.report.narrative import card_facts

    rec = {"potential_shown": -2.76, "potential_shown_low": -3.13, "potential_shown_high": -2.32,
           C.POTENTIAL_BASIS: "uncalibrated", C.MOLAR_MASS: 130.15, "counterions": ""}
    facts = {f["label"]: f for f in card_facts(rec, "Fc+/Fc", objectives=("molar_mass",))}
    assert facts["Potential"]["value"] == "-2.76 V vs Fc+/Fc"
    assert facts["Potential"]["interval"] == "(-3.13 to -2.32) · uncalibrated"  # not "-3.13–-2.32"
    assert facts["Molar mass"]["interval"] == ""  # a neutral molecule has no counterions to mention
    rec.update({"counterions": "F[B-](F)(F)F", C.MOLAR_MASS: 217.0})
    facts = {f["label"]: f for f in card_facts(rec, "Fc+/Fc", objectives=("molar_mass",))}
    assert facts["Molar mass"]["interval"] == "with counterions"
    assert F.range_text("20.0", "21.6") == "20.0–21.6"

"""Front figures follow the campaign's objectives and mark the points to trust less."""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from redoxfront import columns as col
from redoxfront.figure_style import ACCENT, CAUTION, svg_for_html
from redoxfront.ranking.figures import plot_front, plot_pairwise


def _table(n: int = 8) -> pd.DataFrame:
    """Invented ranked table: voltage rises with mass, so every row is on the first front
    of (max voltage, min mass); two rows extrapolate, half are uncalibrated."""
    rng = np.random.default_rng(3)
    v = np.linspace(1.5, 2.6, n)
    t = pd.DataFrame({
        col.ID: [f"c{i}" for i in range(n)],
        col.CELL_VOLTAGE: v, col.CELL_VOLTAGE_LOW: v - 0.3, col.CELL_VOLTAGE_HIGH: v + 0.3,
        col.MOLAR_MASS: np.linspace(200, 380, n),
        col.ENERGY_DENSITY: v * 6.7, col.ENERGY_DENSITY_LOW: v * 6.0, col.ENERGY_DENSITY_HIGH: v * 7.4,
        col.HALF_LIFE: 10 ** rng.uniform(1, 3, n),
        col.PARETO_RANK: 1, col.P_FRONT: np.linspace(0.2, 1.0, n),
        col.KNEE: [i == 3 for i in range(n)], col.PICK_ORDER: pd.array([1, 2] + [pd.NA] * (n - 2), dtype="Int64"),
        col.EXTRAPOLATING: [i in (1, 5) for i in range(n)],
        col.POTENTIAL_BASIS: ["uncalibrated" if i % 2 else "calibrated" for i in range(n)],
    })
    t[col.HALF_LIFE_LOW], t[col.HALF_LIFE_HIGH] = t[col.HALF_LIFE] / 3, t[col.HALF_LIFE] * 3
    return t


def test_first_screen_front_has_no_half_life_axis(tmp_path):
    svg = plot_front(_table(), ("cell_voltage", "molar_mass"), tmp_path / "front.svg").read_text()
    # the axes are the campaign's objectives (common practice, no source)
    assert "molar mass incl. counterions (g/mol), lower is better" in svg and "cell voltage (V)" in svg
    assert "half-life" not in svg
    # every kind of point is named in the legend, and drawn with its own edge colour
    assert "extrapolating (outside model domain or calibration range)" in svg
    assert "uncalibrated potential (wide interval)" in svg
    assert f"stroke: {ACCENT}" in svg and f"stroke: {CAUTION}" in svg
    assert "knee: c3" in svg


def test_pairwise_marks_extrapolating_points(tmp_path):
    svg = plot_pairwise(_table(), ("energy_density", "half_life", "molar_mass"), tmp_path / "pairs.svg").read_text()
    # three objectives give three panels; the extrapolating diamonds have a visible edge
    assert len(re.findall(r'<g id="axes_\d+">', svg)) >= 3
    assert re.search(rf"stroke: {ACCENT}; stroke-width: 1\.\d+", svg)
    assert "extrapolating (outside model domain or calibration range)" in svg


def test_inline_svg_has_no_url_and_keeps_ids_as_text(tmp_path):
    t = _table()
    t.loc[3, col.ID] = "<img src=x onerror=alert(1)> $x$"
    html = svg_for_html(plot_front(t, ("cell_voltage", "molar_mass"), tmp_path / "f.svg").read_text(), id_prefix="f-")
    assert "http" not in html and "<?xml" not in html and "<img" not in html
    assert "knee: &lt;img src=x onerror=alert(1)&gt; $x$" in html  # escaped, dollars drawn as text


def test_a_large_library_draws_its_grey_cloud_as_one_image_and_the_front_as_markers(tmp_path):
    from redoxfront.ranking.figures import RASTER_ABOVE

    rng = np.random.default_rng(8)
    n = RASTER_ABOVE * 3
    v = rng.normal(2.8, 0.3, n)
    t = pd.DataFrame({
        col.ID: [f"lib{i:05d}" for i in range(n)], col.CELL_VOLTAGE: v, col.CELL_VOLTAGE_LOW: v - 0.15,
        col.CELL_VOLTAGE_HIGH: v + 0.15, col.MOLAR_MASS: rng.uniform(150, 600, n),
        col.PARETO_RANK: 2, col.P_FRONT: 0.0, col.KNEE: False, col.PICK_ORDER: pd.array([pd.NA] * n, dtype="Int64"),
        col.EXTRAPOLATING: rng.random(n) < 0.05, col.POTENTIAL_BASIS: "calibrated",
    })
    front = np.argsort(-v)[:5]  # five invented front members, the best of them the knee and pick 1
    t.loc[front, col.PARETO_RANK] = 1
    t.loc[front, col.P_FRONT] = 0.9
    t.loc[front[0], col.KNEE] = True
    t.loc[front[0], col.PICK_ORDER] = 1
    svg = plot_front(t, ("cell_voltage", "molar_mass"), tmp_path / "front.svg").read_text()
    # common practice, no source: a dense cloud goes in a raster layer, so one <image> instead of
    # one <use> per grey point; the front's markers, the knee and the legend stay vector
    assert svg.count("<image") >= 1
    assert svg.count("<use ") < 200
    assert f"knee: {t.loc[front[0], col.ID]}" in svg and "first front" in svg
    assert "extrapolating (outside model domain or calibration range)" in svg
    assert (tmp_path / "front.svg").stat().st_size < 1_000_000
    pairs = plot_pairwise(t, ("cell_voltage", "molar_mass"), tmp_path / "pairs.svg").read_text()
    assert pairs.count("<image") >= 1 and pairs.count("<use ") < 200


def test_log_axis_ticks_are_plain_numbers_or_unicode_powers_without_mathtext(tmp_path):
    from redoxfront.figure_style import log_axis, plain_power_of_ten, plt, save_figure

    # common practice, no source: 10^4 written with a superscript exponent; -3 uses the superscript minus
    assert [plain_power_of_ten(v) for v in (1e-3, 0.01, 1.0, 1000.0, 1e4, 3e5, 0.0)] == [
        "10\u207b\u00b3", "0.01", "1", "1000", "10\u2074", "3\u00d710\u2075", ""]
    fig, ax = plt.subplots()
    ax.plot([0.5, 2e5], [1, 2])
    log_axis(ax, "x")
    svg = save_figure(fig, tmp_path / "log.svg").read_text()
    assert ax.get_xscale() == "log" and "10\u2075" in svg and "1000" in svg

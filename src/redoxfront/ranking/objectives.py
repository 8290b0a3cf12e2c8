"""What a campaign can rank on: objective names, the column each reads and its direction."""

from __future__ import annotations

from redoxfront import columns as col

OBJECTIVES: dict[str, tuple[str, bool]] = {
    "cell_voltage": (col.CELL_VOLTAGE, True),
    "energy_density": (col.ENERGY_DENSITY, True),
    "half_life": (col.HALF_LIFE, True),
    "molar_mass": (col.MOLAR_MASS, False),
}
"""Objective name -> (column, maximised). Half-life is ranked on its log10."""

INTERVAL_COLUMNS: dict[str, tuple[str, str]] = {
    col.CELL_VOLTAGE: (col.CELL_VOLTAGE_LOW, col.CELL_VOLTAGE_HIGH),
    col.ENERGY_DENSITY: (col.ENERGY_DENSITY_LOW, col.ENERGY_DENSITY_HIGH),
    col.HALF_LIFE: (col.HALF_LIFE_LOW, col.HALF_LIFE_HIGH),
}
"""Objective column -> the columns of its 95 % interval (low, high)."""

FIGURE_COLUMNS: tuple[str, ...] = (
    col.ID, col.PARETO_RANK, col.P_FRONT, col.PICK_ORDER, col.KNEE, col.EXTRAPOLATING,
    col.POTENTIAL_BASIS, *(c for pair in INTERVAL_COLUMNS.values() for c in pair))
"""Columns the ranking figures read besides the plotted objectives (all that is sent to the
process that draws them)."""

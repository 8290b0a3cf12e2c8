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

"""Fade fitting: capacity or concentration decay to decomposition rates.

Takes cycler and decay files (CSV, TSV, XLSX); gives cleaned series, rate laws chosen
by AICc, ``results/rates.csv`` (k and half-life with 95 % intervals) and one figure
per dataset.
"""

from redoxfront.fade.step import FadeSettings, fade_campaign, fit_fade_file

__all__ = ["FadeSettings", "fade_campaign", "fit_fade_file"]

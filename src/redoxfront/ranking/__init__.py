"""Ranking: cell metrics, the trade-off (Pareto) front and the picks.

Takes calibrated potentials and predicted rates; gives cell voltage, capacities,
energy density and half-life per candidate, Pareto ranks with the probability of
lying on the front, picks and next experiments (``ranking.csv``, ``picks.csv``).
"""

from redoxfront.ranking.objectives import OBJECTIVES
from redoxfront.ranking.step import rank_campaign, ranking_objectives

__all__ = ["OBJECTIVES", "rank_campaign", "ranking_objectives"]

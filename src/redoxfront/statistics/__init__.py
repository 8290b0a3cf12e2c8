"""Statistics: calibration of potentials and the decomposition-rate model.

Takes computed descriptors with measured potentials and rates; gives calibrated
potentials with prediction intervals, a validated regression model (``model.json``),
predictions with their applicability domain, and training-set designs.
"""

from redoxfront.statistics.calibration import calibrate_campaign
from redoxfront.statistics.regression import OLSModel, load_model
from redoxfront.statistics.step import fit_campaign
from redoxfront.statistics.training_set import choose_training_for_campaign

__all__ = ["OLSModel", "calibrate_campaign", "choose_training_for_campaign", "fit_campaign", "load_model"]

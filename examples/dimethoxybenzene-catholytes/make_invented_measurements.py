"""Write the invented 'measured' potentials and decay rates of the demo campaign.

Everything this script writes is INVENTED for the demo: numbers are drawn from a
made-up linear rule around the raw computed values plus seeded noise. They are not
measurements of any real molecule. Run once after `redoxfront compute` on this
folder; the files it wrote are committed in inputs/.
"""

import numpy as np
import pandas as pd

rng = np.random.default_rng(20261201)
table = pd.read_csv("results/descriptors.csv").set_index("id")
raw = table["potential_uncalibrated_v_vs_fc"]

# invented "cyclic voltammetry" half-wave potentials: a made-up linear rule plus noise,
# reported against two different reference electrodes to exercise the conversion
made = ["dmb", "dmb-01", "dmb-02", "dmb-03", "dmb-05", "dmb-07", "dmb-08", "dmb-09", "dmb-10", "dmb-12", "dmb-13"]
pot = 0.30 + 0.80 * raw[made] + rng.normal(0.0, 0.03, len(made))
refs = ["fc" if i % 3 else "sce" for i in range(len(made))]
values = [p + (0.40 if r == "sce" else 0.0) for p, r in zip(pot, refs)]  # Fc+/Fc = +0.40 V vs SCE
pd.DataFrame({
    "id": made, "potential_v": np.round(values, 3), "reference": refs, "solvent": "acetonitrile",
}).to_csv("inputs/measured_potentials.csv", index=False)

# invented first-order decay rate constants of the radical cations (1/h)
trained = ["dmb", "dmb-01", "dmb-02", "dmb-03", "dmb-05", "dmb-07", "dmb-08", "dmb-10", "dmb-12", "dmb-15"]
tested = ["dmb-09", "dmb-13"]
ids = trained + tested
e_cal = 0.30 + 0.80 * raw[ids]
exposure = table.loc[ids, "spin_exposure_angstrom2_mean"]
log10k = -4.0 + 1.2 * (e_cal - 0.6) + 0.15 * exposure + rng.normal(0.0, 0.10, len(ids))
pd.DataFrame({
    "id": ids, "log10_k_per_h": np.round(log10k, 3), "set": ["train"] * len(trained) + ["test"] * len(tested),
    "method": "invented: UV-vis decay after bulk electrolysis",
}).to_csv("inputs/measured_rates.csv", index=False)
print("wrote inputs/measured_potentials.csv and inputs/measured_rates.csv (invented)")

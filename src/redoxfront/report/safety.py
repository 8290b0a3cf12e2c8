"""Safety notes shown in every report and in the docs. Plain text; the report escapes it."""

SAFETY_NOTES: tuple[str, ...] = (
    "These are computed rankings, not handling advice. Before making or charging any candidate, "
    "read the safety data sheets of every reagent, solvent and salt, and follow your local codes "
    "and your institution's licensed practice.",
    "Charged organic charge carriers are radical ions or reactive closed-shell ions: they may react "
    "with air, water, light and each other, and their decomposition products are unknown. Prepare "
    "and store charged electrolytes under inert atmosphere, in small quantities, and label them.",
    "Common non-aqueous electrolyte solvents (acetonitrile, propylene and ethylene carbonate, "
    "dimethoxyethane, THF) are flammable, and several are toxic by inhalation or skin contact. "
    "Work in a fume hood, away from ignition sources.",
    "Supporting salts such as LiPF6, LiBF4 and NaPF6 release hydrogen fluoride with moisture; "
    "perchlorate salts are oxidisers and can be explosive with organics. Handle dry, in a glovebox "
    "where possible, with HF first aid (calcium gluconate) at hand where your site requires it.",
    "Flow cells and their pumps, tubing and tanks are pressurised systems with electrical hazards: "
    "check pressure ratings, use secondary containment for the electrolyte tanks, and never leave "
    "a cell cycling unattended without the safeguards your site requires.",
)

AQUEOUS_SAFETY_NOTES: tuple[str, ...] = (
    "Alkaline (e.g. 1 M KOH or NaOH) and acidic (e.g. 1 M H2SO4) supporting electrolytes are corrosive "
    "to skin and eyes, and alkali attacks glass and some seals: wear eye protection and gloves rated "
    "for them, and check every wetted part of the rig against the electrolyte.",
    "An anolyte charged near or beyond the hydrogen-evolution line makes hydrogen gas, and a catholyte "
    "beyond the oxygen line makes oxygen: vent the tanks, keep ignition sources away, and do not "
    "let the gas collect in a closed headspace. The water-window flags in this report are "
    "thermodynamic estimates, not a guarantee that no gas forms.",
    "Ferro/ferricyanide is stable in neutral and alkaline solution but releases hydrogen cyanide "
    "with strong acid: never mix it with acidic electrolyte or waste. Follow the safety data sheets, "
    "your local codes and licensed practice.",
)
"""Extra notes for campaigns in water (shown with :data:`SAFETY_NOTES`)."""

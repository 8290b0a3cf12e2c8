"""Electrons that transfer inside the water window at the campaign pH.

The window itself (hydrogen and oxygen evolution lines at ``[cell] ph``, 1.229 V apart, both
-59 mV per pH unit, widened by ``[cell] water_overpotential_v``) is
:func:`redoxfront.ranking.windows.solvent_window`; its flag (``window_flag``) judges the
couple's potential interval. Here each one-electron step of a couple is judged: an anolyte
step below the hydrogen line, or a catholyte step above the oxygen line, evolves gas instead
of charging the molecule, so it does not count as an electron that transfers at that pH;
capacity and energy density use the rest. One-electron couples, and couples that move protons
at the campaign pH (whose one-electron steps are not the computed electron-transfer steps),
are judged on their potential as a whole.
Units: V vs the campaign reference.
"""

from __future__ import annotations

import numpy as np

from redoxfront.ranking.windows import Window


def electrons_in_window(
    e_used: np.ndarray,
    step_offsets: np.ndarray,
    role: np.ndarray,
    n_e: np.ndarray,
    window: Window,
) -> tuple[np.ndarray, list[str]]:
    """Electrons usable per row and a note for rows that lose some.

    ``step_offsets``: (rows, 2) offsets of the two one-electron steps from the couple's
    potential (NaN where there are none; then the couple's potential is judged).
    """
    n = len(e_used)
    usable = np.array(n_e, dtype=float)
    notes = [""] * n
    for r in range(n):
        if not np.isfinite(e_used[r]) or not np.isfinite(n_e[r]):
            continue
        offs = step_offsets[r]
        steps = e_used[r] + offs if n_e[r] == 2 and np.all(np.isfinite(offs)) else np.full(int(n_e[r]), e_used[r])
        bad = steps < window.low_v if role[r] == "anolyte" else steps > window.high_v
        usable[r] = float(np.sum(~bad))
        if np.any(bad):
            line, name = (window.low_v, "hydrogen") if role[r] == "anolyte" else (window.high_v, "oxygen")
            notes[r] = (f"{int(np.sum(bad))} of {int(n_e[r])} electron(s) beyond the {name} evolution limit "
                        f"{line:+.3f} V ({window.source}): {int(usable[r])} counted for capacity")
    return usable, notes

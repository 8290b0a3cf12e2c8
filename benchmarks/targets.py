"""Ratios to targets, shared by the benchmark scripts: one rule for 'meets' and 'misses'."""

from __future__ import annotations

import os


def ratio_to_target(label: str, value: float, target: float, higher_is_better: bool,
                    missed: list[str]) -> tuple[float, bool]:
    """Ratio of a measured figure to its target (<= 1 meets it); a miss is added to ``missed``."""
    ratio = target / value if higher_is_better else value / target
    ok = ratio <= 1.0
    if not ok:
        missed.append(label)
    return ratio, ok


def finish(missed: list[str], *, all_loads: bool = False) -> int:
    """Print the load average at the end and the misses; the exit code (1 on any miss)."""
    loads = os.getloadavg()
    print("load average at end: " + (f"{' '.join(f'{x:.2f}' for x in loads)} (1, 5, 15 min)" if all_loads
                                     else f"{loads[0]:.2f} (1 min)"))
    if missed:
        print("MISSED: " + "; ".join(missed))
    return 1 if missed else 0

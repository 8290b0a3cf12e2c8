"""Proton-coupled couples: the potential at a given pH from pKa breakpoints (Nernst).

A couple ox + n e- + m H+ -> red H_m moves m protons with n electrons. Its potential
falls by (ln 10) RT/F x (m/n) per pH unit (0.05916 V at 298.15 K for m = n), and m
changes at the pKa values of the reduced and oxidised forms: between two neighbouring
pKa values the line is straight,

    E(pH) = E0(pH 0 of that range) - (ln 10) RT/F x (m/n) x pH,

and the lines join at the breakpoints (Nernst equation with the acid dissociation
equilibria of both forms; any electrochemistry text, e.g. Bard & Faulkner,
Electrochemical Methods, 2nd ed., ch. 2, and the quinone diagrams of Huskinson et al.,
Nature 2014, 505, 195).

Anchor: ``e_anchor_v`` is the potential of the two forms as computed (or written), the
*anchor forms*. Every pKa names a proton of one form relative to its anchor: ``gained``
(a proton the anchor form takes up below that pKa: E.g. the reduced quinone dianion
Q2- becomes QH- then QH2) or ``lost`` (a proton the anchor form gives up above it).
Protonation stabilises the form that holds the proton, so with k = (ln 10) RT/F,

    E(pH) = E_anchor + (k/n) [ sum_red,gained (pKa - pH)+ + sum_red,lost (pH - pKa)+
                               - sum_ox,gained (pKa - pH)+ - sum_ox,lost (pH - pKa)+ ]

with (x)+ = max(x, 0): the piecewise-linear limit of the full expression, exact away
from the breakpoints. Units: V, pH units, K.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from redoxfront.errors import SettingsError
from redoxfront.units import STANDARD_TEMPERATURE_K, nernst_slope_v_per_ph

REDUCED = "reduced"
OXIDISED = "oxidised"
GAINED = "gained"
LOST = "lost"
PH_RANGE: tuple[float, float] = (0.0, 14.0)
"""pH range of the Pourbaix view."""


@dataclass(frozen=True)
class ProtonSite:
    """One acid-base equilibrium of a form of the couple.

    ``pka``: its pKa (acid dissociation of the protonated one); ``form``: 'reduced' or
    'oxidised'; ``kind``: 'gained' (the anchor form lacks the proton) or 'lost' (the anchor
    holds it); ``source``: 'given', 'estimated' or 'published'; ``uncertainty``: half-width of
    its stated interval, pKa units (0 when given without one); ``label``: site as a person
    reads it (``O3 (phenol O-H)``).
    """

    pka: float
    form: str = REDUCED
    kind: str = GAINED
    source: str = "given"
    uncertainty: float = 0.0
    label: str = ""

    def __post_init__(self) -> None:
        if self.form not in (REDUCED, OXIDISED):
            raise SettingsError(f"proton site form '{self.form}': allowed {REDUCED}, {OXIDISED}")
        if self.kind not in (GAINED, LOST):
            raise SettingsError(f"proton site kind '{self.kind}': allowed {GAINED}, {LOST}")
        if not np.isfinite(self.pka):
            raise SettingsError(f"proton site {self.label or ''} has no finite pKa ({self.pka!r})")


@dataclass(frozen=True)
class ProtonCoupledCouple:
    """A couple of n electrons with the acid-base equilibria of both forms.

    ``e_anchor_v``: potential of the anchor forms (any reference, V); ``n_electrons``;
    ``sites``: the :class:`ProtonSite` of both forms.
    """

    e_anchor_v: float
    n_electrons: int
    sites: tuple[ProtonSite, ...] = field(default_factory=tuple)
    temperature_k: float = STANDARD_TEMPERATURE_K

    def __post_init__(self) -> None:
        if self.n_electrons < 1:
            raise SettingsError(f"a couple moves at least one electron, got n = {self.n_electrons}")

    @property
    def breakpoints(self) -> tuple[float, ...]:
        """The pKa values where the slope changes, ascending."""
        return tuple(sorted(s.pka for s in self.sites))

    def shift_v(self, ph: float | np.ndarray) -> np.ndarray:
        """E(pH) - E_anchor, V."""
        ph = np.asarray(ph, dtype=float)
        total = np.zeros_like(ph)
        for s in self.sites:
            held = np.maximum(s.pka - ph, 0.0) if s.kind == GAINED else np.maximum(ph - s.pka, 0.0)
            total = total + (held if s.form == REDUCED else -held)
        return nernst_slope_v_per_ph(self.temperature_k) / self.n_electrons * total

    def potential_v(self, ph: float | np.ndarray) -> float | np.ndarray:
        """Potential at ``ph``, V on the anchor's reference."""
        out = self.e_anchor_v + self.shift_v(ph)
        return float(out) if np.ndim(out) == 0 else out

    def protons(self, ph: float) -> int:
        """m: protons moved with the n electrons at ``ph`` (inside a range, not on a breakpoint)."""
        m = 0
        for s in self.sites:
            if s.kind == GAINED:
                held = 1 if ph < s.pka else 0
            else:
                held = 0 if ph > s.pka else 1
                held -= 1  # relative to the anchor, which holds it
            m += held if s.form == REDUCED else -held
        return m

    def slope_v_per_ph(self, ph: float) -> float:
        """dE/dpH at ``ph``: -(ln 10) RT/F x m/n, V per pH unit."""
        return -nernst_slope_v_per_ph(self.temperature_k) * self.protons(ph) / self.n_electrons

    def standard_potential_ph0_v(self) -> float:
        """E0 at pH 0 of the couple as it runs at pH 0 (the line of the lowest range, at pH 0)."""
        return float(self.potential_v(0.0))

    def pkas_between(self, ph_a: float, ph_b: float) -> tuple[float, ...]:
        """The pKa values strictly between two pH values (a measurement moved across them
        depends on their accuracy)."""
        lo, hi = sorted((float(ph_a), float(ph_b)))
        return tuple(p for p in self.breakpoints if lo < p < hi)

    def move(self, e_v: float, from_ph: float, to_ph: float) -> tuple[float, tuple[float, ...]]:
        """A potential measured at ``from_ph`` moved to ``to_ph`` along this couple's lines,
        with the pKa values crossed on the way (flag them)."""
        d = float(self.potential_v(to_ph)) - float(self.potential_v(from_ph))
        return e_v + d, self.pkas_between(from_ph, to_ph)


def pourbaix_curve(couple: ProtonCoupledCouple, ph_range: tuple[float, float] = PH_RANGE,
                   points: int = 141) -> tuple[np.ndarray, np.ndarray]:
    """(pH grid, E(pH)) for drawing; the breakpoints inside the range are on the grid."""
    grid = np.linspace(ph_range[0], ph_range[1], points)
    extra = [p for p in couple.breakpoints if ph_range[0] < p < ph_range[1]]
    grid = np.unique(np.concatenate([grid, extra]))
    return grid, np.asarray(couple.potential_v(grid), dtype=float)


def parse_pka_list(text: object, where: str) -> tuple[float, ...]:
    """pKa values written in one cell: '9.9', '9.9;11.4' (';' or space between). Empty -> ()."""
    if text is None:
        return ()
    if isinstance(text, (int, float)):
        return () if not np.isfinite(text) else (float(text),)
    raw = str(text).replace(";", " ").replace("|", " ").split()
    out = []
    for item in raw:
        try:
            out.append(float(item))
        except ValueError:
            raise SettingsError(f"{where}: pKa '{item}' is not a number; write e.g. 9.9;11.4") from None
    return tuple(out)

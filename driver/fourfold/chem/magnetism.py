"""Magnetic moments: the spin-only μ_eff of a spin state, and where measured moments are known to exceed it.

μ_eff = g√(S(S+1)) μB with g = 2, i.e. √(4S(S+1)) = √(n(n+2)) for n = 2S unpaired electrons. This is what a
magnetometer or an Evans NMR measurement is compared with first; states with an orbitally degenerate ground
term, or one mixed with a near excited term by spin–orbit coupling, measure above it.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

from ..errors import InputError


def spin_only_moment(spin2s: int) -> float:
    """Spin-only effective moment in Bohr magnetons for 2S unpaired electrons: √(n(n+2)), n = 2S."""
    if isinstance(spin2s, bool) or not isinstance(spin2s, numbers.Integral) or spin2s < 0:
        raise InputError(f"2S must be a whole number of unpaired electrons (0, 1, 2, ...), got {spin2s!r}")
    return math.sqrt(int(spin2s) * (int(spin2s) + 2))


@dataclass(frozen=True)
class OrbitalContribution:
    """A measured μ_eff range above spin-only for one metal ion, arrangement and spin, with its source."""

    low_mu_b: float
    high_mu_b: float
    why: str
    source: str

    def note(self, spin2s: int) -> str:
        return (f"measured μ_eff is typically {self.low_mu_b:.1f}–{self.high_mu_b:.1f} μB, above the spin-only "
                f"{spin_only_moment(spin2s):.2f} μB ({self.why}; {self.source})")


_HANDBOOKS = ("B. N. Figgis, M. A. Hitchman, Ligand Field Theory and Its Applications, Wiley-VCH 2000; "
              "A. Earnshaw, Introduction to Magnetochemistry, Academic Press 1968 (from memory)")

# (metal, oxidation state, arrangement, 2S) -> the measured range. Only ions whose range we can source.
ORBITAL_CONTRIBUTIONS: dict[tuple[str, int, str, int], OrbitalContribution] = {
    ("Co", 2, "T-4", 3): OrbitalContribution(
        4.4, 4.8, "⁴A₂ ground term mixed with ⁴T₂ by spin–orbit coupling", _HANDBOOKS),
    ("Ni", 2, "T-4", 2): OrbitalContribution(
        3.2, 4.1, "orbitally degenerate ³T₁ ground term, first-order orbital contribution", _HANDBOOKS),
}


def orbital_contribution(metal: str, oxidation_state: int, arrangement: str,
                         spin2s: int) -> OrbitalContribution | None:
    """The known measured range when an orbital contribution raises μ_eff above spin-only, else None."""
    return ORBITAL_CONTRIBUTIONS.get((metal, int(oxidation_state), arrangement, int(spin2s)))

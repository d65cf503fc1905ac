"""Approximate spin projection of a broken-symmetry singlet (Yamaguchi's formula).

A broken-symmetry (BS) UKS singlet mixes the singlet with the triplet (⟨S²⟩ near 1 for two unpaired
electrons). With a Heisenberg picture E(S) = a − J·S(S+1), the BS and high-spin (HS) solutions at the same
geometry give J = (E_BS − E_HS)/(⟨S²⟩_HS − ⟨S²⟩_BS) and the pure singlet's energy a = E_BS + J·⟨S²⟩_BS:

    E_S = E_BS + (E_BS − E_HS) · ⟨S²⟩_BS / (⟨S²⟩_HS − ⟨S²⟩_BS)

K. Yamaguchi, Y. Takahara, T. Fueno, in Applied Quantum Chemistry (V. H. Smith et al., eds.), Reidel, 1986,
p. 155; K. Yamaguchi, F. Jensen, A. Dorigo, K. N. Houk, Chem. Phys. Lett. 1988, 149, 537 (from memory).
For a closed-shell-like BS solution (⟨S²⟩_BS → 0) the correction vanishes.
"""

from __future__ import annotations

from ..errors import ComputeError

_MIN_S2_GAP = 0.1  # below this ⟨S²⟩_HS − ⟨S²⟩_BS the formula divides by noise (fourfold default)


def projected_singlet_energy_hartree(bs_energy_hartree: float, bs_s2: float, hs_energy_hartree: float,
                                     hs_s2: float) -> float:
    """Yamaguchi-projected singlet energy from a BS singlet and its high-spin partner at the same geometry."""
    gap = hs_s2 - bs_s2
    if gap < _MIN_S2_GAP:
        raise ComputeError(f"spin projection needs ⟨S²⟩(high spin) well above ⟨S²⟩(BS); got {hs_s2:.3f} and "
                           f"{bs_s2:.3f}")
    return bs_energy_hartree + (bs_energy_hartree - hs_energy_hartree) * bs_s2 / gap

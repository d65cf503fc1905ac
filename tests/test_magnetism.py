"""Spin-only magnetic moments against the handbook table, and the orbital-contribution notes."""

import pytest

from fourfold.chem.magnetism import orbital_contribution, spin_only_moment
from fourfold.errors import InputError


@pytest.mark.parametrize("unpaired, moment_mu_b", [(0, 0.0), (1, 1.73), (2, 2.83), (3, 3.87), (4, 4.90), (5, 5.92)])
def test_spin_only_moments_match_the_handbook_table(unpaired, moment_mu_b):
    # Spin-only μ_eff = √(n(n+2)) μB: 1.73, 2.83, 3.87, 4.90, 5.92 for n = 1–5 (N. N. Greenwood,
    # A. Earnshaw, Chemistry of the Elements, 2nd ed., 1997, table of spin-only moments; from memory).
    assert spin_only_moment(unpaired) == pytest.approx(moment_mu_b, abs=0.005)


def test_tetrahedral_cobalt_and_nickel_measure_above_spin_only():
    # T-4 Co(II) 4.4–4.8 μB, T-4 Ni(II) 3.2–4.1 μB, both above spin-only (Figgis & Hitchman, Ligand Field
    # Theory and Its Applications, 2000; Earnshaw, Introduction to Magnetochemistry, 1968; from memory).
    cobalt = orbital_contribution("Co", 2, "T-4", 3)
    nickel = orbital_contribution("Ni", 2, "T-4", 2)
    assert (cobalt.low_mu_b, cobalt.high_mu_b) == (4.4, 4.8)
    assert (nickel.low_mu_b, nickel.high_mu_b) == (3.2, 4.1)
    assert cobalt.low_mu_b > spin_only_moment(3) and nickel.low_mu_b > spin_only_moment(2)
    assert "3.87 μB" in cobalt.note(3)
    # Planar Ni(II) is diamagnetic: no note (common practice, no source).
    assert orbital_contribution("Ni", 2, "SP-4", 0) is None


@pytest.mark.parametrize("bad", [-1, 1.5, True])
def test_bad_spin_is_an_input_error(bad):
    with pytest.raises(InputError, match="2S must be a whole number"):
        spin_only_moment(bad)

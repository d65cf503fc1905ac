"""Relaxation with geomeTRIC: held keeps the L–M–L arrangement, free finds where a state goes."""

from itertools import combinations

import numpy as np
import pytest
from ase import Atoms

from fourfold.compute.relax import RelaxInterrupted, relax
from fourfold.compute.xtb_engine import XtbPotential
from fourfold.errors import InputError, NotConverged
from fourfold.geometry.polyhedra import d2d_path
from fourfold.geometry.shape import tau4

# Unit vectors from a metal at the origin: regular tetrahedron and square (common practice, no source).
TETRAHEDRON = np.array([[1, 1, 1], [1, -1, -1], [-1, 1, -1], [-1, -1, 1]]) / np.sqrt(3.0)
SQUARE = np.array([[1, 0, 0], [0, 1, 0], [-1, 0, 0], [0, -1, 0]], dtype=float)


def nicl4(directions, bond_scale=(1.0, 1.0, 1.0, 1.0), jitter_angstrom=0.0):
    """[NiCl4]2- with Ni at the origin and Cl at 2.2 Å × bond_scale along ``directions``."""
    positions = np.vstack([[0.0, 0.0, 0.0], 2.2 * np.asarray(bond_scale)[:, None] * directions])
    positions += np.random.default_rng(7).uniform(-jitter_angstrom, jitter_angstrom, positions.shape)
    return Atoms(["Ni"] + ["Cl"] * 4, positions=positions)


def ligand_angles_deg(positions):
    bonds = positions[1:5] - positions[0]
    units = bonds / np.linalg.norm(bonds, axis=1)[:, None]
    return np.array([np.degrees(np.arccos(np.clip(units[i] @ units[j], -1, 1)))
                     for i, j in combinations(range(4), 2)])


def screen_potential(spin2s, **options):
    return XtbPotential(["Ni", "Cl", "Cl", "Cl", "Cl"], charge=-2, spin2s=spin2s, **options)


@pytest.mark.parametrize("directions, arrangement", [(TETRAHEDRON, "T-4"), (SQUARE, "SP-4")])
@pytest.mark.parametrize("spin2s", [0, 2])
def test_held_relaxation_keeps_the_arrangement(directions, arrangement, spin2s):
    # Unequal bonds and a 3 mÅ jitter break the symmetry, so nothing but the constraints keeps the
    # angles (the SP-4 triplet falls to a flattened tetrahedron when free: next test).
    start = nicl4(directions, bond_scale=(0.95, 1.0, 1.05, 1.1), jitter_angstrom=0.003)
    result = relax(start, screen_potential(spin2s), "held", arrangement)
    assert result.converged, result.message
    ideal = ligand_angles_deg(nicl4(directions).get_positions())
    final = result.atoms.get_positions()
    # Held relaxations keep every L–M–L angle within 0.5° of the ideal arrangement (trans angles included).
    assert np.abs(ligand_angles_deg(final) - ideal).max() < 0.5
    # Bond lengths relax: the 2.09–2.42 Å start bonds are not all at the xTB minimum (common practice, no source).
    start_bonds = np.linalg.norm(start.get_positions()[1:5] - start.get_positions()[0], axis=1)
    final_bonds = np.linalg.norm(final[1:5] - final[0], axis=1)
    assert np.abs(final_bonds - start_bonds).max() > 0.05
    # Held square: both d8 states are orbitally non-degenerate in D4h, so no Jahn–Teller force and the
    # four bonds end equal. T-4 d8 states are degenerate (3T1, and the open t2 shell of the singlet)
    # and distort along the bonds (Jahn & Teller, Proc. R. Soc. A 1937, 161, 220, from memory).
    if arrangement == "SP-4":
        assert np.ptp(final_bonds) < 0.01


@pytest.mark.parametrize("trans_angle_deg", [160.0, 175.0])
def test_held_path_point_keeps_its_angles(trans_angle_deg):
    # A point on the D2d flattening path T-4 -> SP-4 (Casanova et al., J. Am. Chem.
    # Soc. 2004, 126, 1755, from memory), held as the runner holds path points near the square.
    start = nicl4(d2d_path(trans_angle_deg))
    result = relax(start, screen_potential(0), "held", "SP-4")
    assert result.converged, result.message
    drift_deg = ligand_angles_deg(result.atoms.get_positions()) - ligand_angles_deg(start.get_positions())
    assert np.abs(drift_deg).max() < 0.5


def test_held_jahn_teller_state_distorts_from_an_ideal_start():
    # T-4 d8 triplet: e⁴t2⁴, an orbitally degenerate 3T1 state, so equal bonds are not a minimum even
    # with the angles held (Jahn & Teller, Proc. R. Soc. A 1937, 161, 220, from memory). From the exactly
    # symmetric start the relaxation must still find the distortion, as it would from any other start.
    result = relax(nicl4(TETRAHEDRON), screen_potential(2), "held", "T-4")
    assert result.converged, result.message
    final = result.atoms.get_positions()
    assert np.ptp(np.linalg.norm(final[1:5] - final[0], axis=1)) > 0.05
    assert np.abs(ligand_angles_deg(final) - ligand_angles_deg(nicl4(TETRAHEDRON).get_positions())).max() < 0.5


def test_free_square_triplet_falls_towards_tetrahedron():
    # Check: free SP-4 [NiCl4]2- at 2S = 2 ends with tau4 > 0.6 (a planar d8 triplet is not a
    # minimum: why fourfold also relaxes free). tau4: Yang, Powell, Houser, Dalton Trans. 2007, 955.
    result = relax(nicl4(SQUARE), screen_potential(2), "free", "SP-4")
    assert result.converged, result.message
    positions = result.atoms.get_positions()
    assert tau4(positions[0], positions[1:5]) > 0.6


def test_step_bound_ends_unconverged_without_raising():
    result = relax(nicl4(SQUARE), screen_potential(2), "free", "SP-4", max_steps=2)
    assert not result.converged
    assert result.steps == 2
    assert "max_steps=2" in result.message
    assert result.gradient_calls >= 2


def test_potential_failure_names_the_step_and_keeps_the_last_geometry():
    inner = screen_potential(2)
    calls = []

    def failing_after_three(positions_angstrom):
        if len(calls) == 3:
            raise NotConverged("SCF not converged")
        calls.append(np.array(positions_angstrom))
        return inner(positions_angstrom)

    with pytest.raises(RelaxInterrupted, match="step") as caught:
        relax(nicl4(TETRAHEDRON, bond_scale=(0.95, 1.0, 1.05, 1.1)), failing_after_three, "held", "T-4")
    assert isinstance(caught.value, NotConverged)
    np.testing.assert_allclose(caught.value.last_atoms.get_positions(), calls[-1], atol=1e-12)


def test_logs_go_to_log_path_and_nothing_to_cwd_or_terminal(tmp_path, monkeypatch, capfd):
    workdir = tmp_path / "cwd"
    workdir.mkdir()
    monkeypatch.chdir(workdir)
    log_path = tmp_path / "relax.log"
    relax(nicl4(SQUARE), screen_potential(0), "held", "SP-4", log_path=log_path)
    out, err = capfd.readouterr()
    assert out == "" and err == ""
    assert list(workdir.iterdir()) == []
    assert "Converged" in log_path.read_text()


def test_held_rejects_a_start_of_another_shape():
    # A tetrahedron has no trans L–M–L angle, a square has two (common practice, no source).
    with pytest.raises(InputError, match="SP-4"):
        relax(nicl4(TETRAHEDRON), screen_potential(2), "held", "SP-4")


@pytest.mark.parametrize("option", [{"kind": "rigid"}, {"arrangement": "OC-6"}, {"convergence": "sloppy"},
                                    {"donor_indices": (1, 2, 3, 9)}, {"donor_indices": (0, 1, 2, 3)}])
def test_unknown_options_are_input_errors(option):
    arguments = {"kind": "free", "arrangement": "T-4", **option}
    with pytest.raises(InputError):
        relax(nicl4(TETRAHEDRON), screen_potential(2), **arguments)


def _bite_and_twist_deg(atoms):
    """The en chelate's N–Ni–N angle and the angle between the N–Ni–N and Cl–Ni–Cl planes."""
    p = atoms.get_positions()
    u = [(p[i] - p[0]) / np.linalg.norm(p[i] - p[0]) for i in (1, 2, 3, 4)]
    bite = np.degrees(np.arccos(np.clip(u[0] @ u[1], -1, 1)))
    n1, n2 = np.cross(u[0], u[1]), np.cross(u[2], u[3])
    twist = np.degrees(np.arccos(np.clip(abs(n1 @ n2) / np.linalg.norm(n1) / np.linalg.norm(n2), 0, 1)))
    return bite, twist


@pytest.mark.parametrize("arrangement, spin2s, twist_deg", [("SP-4", 0, 0.0), ("T-4", 2, 90.0)])
def test_held_chelate_keeps_the_arrangement_not_the_bite(arrangement, spin2s, twist_deg):
    # [Ni(en)Cl2]: the chelate and Cl–Ni–Cl planes are one plane in SP-4 and perpendicular in T-4 (the
    # tetrahedron's opposite edges are perpendicular) [common practice, no source]. The held relaxation keeps
    # that, but not the bite (no constraint names both chelate donors): it stays near the fragment's own
    # (M(en) bites are 82–86°, common practice, no source) and goes to neither 90° nor 109.5°.
    from fourfold.chem.complex import complex_from_formula
    from fourfold.compute.relax import held_constraints
    from fourfold.geometry.builder import build

    cx = complex_from_formula("[Ni(en)Cl2]")
    start = build(cx, arrangement)
    assert start.info["chelate_pairs"] == [(1, 2)]
    frozen = held_constraints(start.get_positions(), arrangement, 0, [1, 2, 3, 4], start.info["chelate_pairs"])
    assert not any(line.startswith("angle") and {"2", "3"} <= set(line.split()[1:]) for line in frozen.splitlines())
    potential = XtbPotential(start.get_chemical_symbols(), charge=0, spin2s=spin2s)
    result = relax(start, potential, "held", arrangement, max_steps=150)
    assert result.converged, result.message
    _, start_twist = _bite_and_twist_deg(start)
    bite, twist = _bite_and_twist_deg(result.atoms)
    assert start_twist == pytest.approx(twist_deg, abs=1e-6)
    assert twist == pytest.approx(twist_deg, abs=3.0)
    assert bite == pytest.approx(84.0, abs=6.0)
    assert abs(bite - 90.0) > 3.0 and abs(bite - 109.47) > 3.0

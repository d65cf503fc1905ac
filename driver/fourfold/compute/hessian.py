"""Harmonic frequencies of a structure: Hessians, normal modes, and the minimum check.

Hessians come in Eh/bohr², shape (3N, 3N), atom-major (x0, y0, z0, x1, ...), from one of:

* finite differences of gradients: ``displacements`` lists the 6N displaced structures (each gradient can be
  a job of its own, so they run in parallel and resume), ``hessian_from_gradients`` assembles the Hessian
  from their gradients in the same order; ``finite_difference_hessian`` does both in one process for a
  cheap potential (GFN2-xTB: ``xtb_hessian``);
* PySCF's analytic Hessian (``fourfold.compute.pyscf_engine.energy_hessian``), for the DFT levels it covers.

``harmonic_analysis`` mass-weights the Hessian (ASE's standard atomic masses), projects out the overall
translations and (Eckart) rotations, and diagonalises in the space of the 3N − 6 (linear: 3N − 5)
internal motions, so exactly that many frequencies come back, never near-zero leftovers of rigid motion.
Frequencies are in cm⁻¹, an imaginary one as a negative number.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..units import BOHR_ANGSTROM, wavenumber_cm_from_eigenvalue

Potential = Callable[[np.ndarray], tuple[float, np.ndarray]]

# Central-difference step. The second derivative's error grows as step² (anharmonicity), the gradients'
# noise as 1/step. Measured with GFN2-xTB (tight SCC): 0.0025, 0.005 and 0.01 Å give H2O frequencies within
# 0.9 cm⁻¹ and C2v T-4 [NiCl4]2- triplet ones within 0.2 cm⁻¹ of each other; 0.02 Å moves the H2O bend by 3.5.
STEP_ANGSTROM = 0.005
# tblite SCC accuracy for Hessian gradients. Its default 1.0 (tuned for relaxations) moves soft modes of
# [NiCl4]2- by up to 2 cm⁻¹ and the H2O stretches by 0.7; 0.1 and 0.01 agree within 0.1 cm⁻¹ (measured);
# 0.01 costs 1.4–1.8× the CPU of 1.0 for these gradients (under a second for [NiCl4]2-).
XTB_HESSIAN_ACCURACY = 0.01
# A free minimum whose lowest mode is imaginary by more than this is flagged. 20i cm⁻¹ is the usual
# cut: smaller imaginary values of soft modes (methyl rotations, ligand librations) come from the
# grid, convergence thresholds and finite differences rather than a saddle point (common practice,
# no source). Measured: GFN2-xTB structures relaxed to geomeTRIC's default criteria keep soft modes at
# 15i–19i ([NiCl4]2- SP-4 singlet, T-4 triplet) that are real after tight criteria (the SP-4 singlet then
# puckers to D2d, trans angles 163°): relax tightly before frequencies.
IMAGINARY_THRESHOLD_CM = 20.0
_AXES = "xyz"


@dataclass(frozen=True)
class Displacement:
    """One displaced structure of a finite-difference Hessian: ``atom`` moved by ``sign`` × step along ``axis``."""

    atom: int
    axis: int
    sign: int
    step_angstrom: float
    positions_angstrom: np.ndarray = field(repr=False, compare=False)

    @property
    def label(self) -> str:
        """Short stable name such as ``3y-`` (atom 3, y axis, minus): part of a job key."""
        return f"{self.atom}{_AXES[self.axis]}{'+' if self.sign > 0 else '-'}"


def displacements(atoms, step_angstrom: float = STEP_ANGSTROM) -> list[Displacement]:
    """The 6N displaced structures of a central-difference Hessian, in the order ``hessian_from_gradients`` expects.

    Order: atom 0 x+, x−, y+, y−, z+, z−, then atom 1, ... Only positions change; charge and spin stay.
    """
    if not step_angstrom > 0:
        raise InputError(f"finite-difference step must be positive, got {step_angstrom} Å")
    reference = np.asarray(atoms.get_positions(), dtype=float)
    found = []
    for atom in range(len(reference)):
        for axis in range(3):
            for sign in (1, -1):
                moved = reference.copy()
                moved[atom, axis] += sign * step_angstrom
                found.append(Displacement(atom, axis, sign, float(step_angstrom), moved))
    return found


def hessian_from_gradients(gradients_hartree_per_bohr: Sequence[np.ndarray], step_angstrom: float) -> np.ndarray:
    """Central-difference Hessian (Eh/bohr², (3N, 3N), symmetrised) from the gradients at the displacements.

    ``gradients_hartree_per_bohr``: one (N, 3) gradient per displacement, in the order of ``displacements``.
    """
    gradients = [np.asarray(g, dtype=float).ravel() for g in gradients_hartree_per_bohr]
    size = len(gradients[0]) if gradients else 0
    if size == 0 or len(gradients) != 2 * size or any(len(g) != size for g in gradients):
        raise InputError(f"need 6N gradients of N atoms each (6N = {2 * size}), got {len(gradients)}")
    step_bohr = step_angstrom / BOHR_ANGSTROM
    columns = [(gradients[2 * k] - gradients[2 * k + 1]) / (2.0 * step_bohr) for k in range(size)]
    hessian = np.array(columns).T
    return 0.5 * (hessian + hessian.T)


def finite_difference_hessian(potential: Potential, atoms, step_angstrom: float = STEP_ANGSTROM) -> np.ndarray:
    """Central-difference Hessian (Eh/bohr²) at ``atoms`` of a potential (Å → energy, gradient in Eh/bohr)."""
    moves = displacements(atoms, step_angstrom)
    return hessian_from_gradients([potential(move.positions_angstrom)[1] for move in moves], step_angstrom)


def xtb_hessian(atoms, charge: int, spin2s: int, solvent: str | float | None = None,
                step_angstrom: float = STEP_ANGSTROM, threads: int = 1) -> np.ndarray:
    """GFN2-xTB Hessian (Eh/bohr²) by central differences of tblite gradients (tblite has no analytic one).

    Same model as the screen level's relaxations (spin polarisation on), SCC converged to
    ``XTB_HESSIAN_ACCURACY``.
    """
    from .xtb_engine import XtbPotential

    potential = XtbPotential(atoms.get_chemical_symbols(), charge, spin2s, solvent=solvent,
                             accuracy=XTB_HESSIAN_ACCURACY, threads=threads)
    return finite_difference_hessian(potential, atoms, step_angstrom)


@dataclass(frozen=True)
class Vibrations:
    """Harmonic analysis of one structure.

    ``frequencies_cm``: the 3N − 6 (linear 3N − 5) harmonic wavenumbers, ascending, imaginary ones negative.
    ``modes``: one Cartesian displacement pattern per frequency, shape (n, N, 3), each of unit length
    (the mass-weighted eigenvector divided by √m, normalised).
    """

    frequencies_cm: np.ndarray
    modes: np.ndarray = field(repr=False)
    linear: bool


def _rigid_motions(positions_bohr: np.ndarray, masses_amu: np.ndarray) -> np.ndarray:
    """Orthonormal mass-weighted translations and rotations about the centre of mass, as rows (5 or 6)."""
    centred = positions_bohr - masses_amu @ positions_bohr / masses_amu.sum()
    root = np.sqrt(masses_amu)
    vectors = []
    for axis in range(3):
        translation = np.zeros_like(centred)
        translation[:, axis] = root
        vectors.append(translation.ravel())
    for axis in np.eye(3):
        vectors.append((np.cross(axis, centred) * root[:, None]).ravel())
    u, singular, _ = np.linalg.svd(np.array(vectors).T, full_matrices=False)
    # A linear molecule has one rotation of zero length (about its axis); drop it.
    return u[:, singular > 1e-6 * singular.max()].T


def harmonic_analysis(atoms, hessian_hartree_per_bohr2: np.ndarray) -> Vibrations:
    """Frequencies (cm⁻¹) and normal modes of ``atoms`` from a Cartesian Hessian (Eh/bohr²).

    Masses are ASE's standard atomic masses (``atoms.get_masses()``, amu). Translations and rotations are
    projected out of the mass-weighted Hessian (Eckart conditions at the given geometry), which is then
    diagonalised in the orthogonal complement: exactly 3N − 6 (linear: 3N − 5) vibrations.
    """
    n_atoms = len(atoms)
    hessian = np.asarray(hessian_hartree_per_bohr2, dtype=float)
    if n_atoms < 2 or hessian.shape != (3 * n_atoms, 3 * n_atoms):
        raise InputError(f"need a ({3 * n_atoms}, {3 * n_atoms}) Hessian for {n_atoms} atoms (at least two), "
                         f"got shape {hessian.shape}")
    masses_amu = np.asarray(atoms.get_masses(), dtype=float)
    positions_bohr = np.asarray(atoms.get_positions(), dtype=float) / BOHR_ANGSTROM
    weights = np.repeat(1.0 / np.sqrt(masses_amu), 3)
    mass_weighted = hessian * np.outer(weights, weights)
    rigid = _rigid_motions(positions_bohr, masses_amu)
    # Orthonormal basis of the internal motions: the complement of the rigid ones.
    complement = np.linalg.svd(np.eye(3 * n_atoms) - rigid.T @ rigid)[0][:, : 3 * n_atoms - len(rigid)]
    eigenvalues, vectors = np.linalg.eigh(complement.T @ mass_weighted @ complement)
    cartesian = (complement @ vectors).T * weights
    cartesian /= np.linalg.norm(cartesian, axis=1, keepdims=True)
    return Vibrations(frequencies_cm=wavenumber_cm_from_eigenvalue(eigenvalues),
                      modes=cartesian.reshape(-1, n_atoms, 3), linear=len(rigid) == 5)


def imaginary_modes(frequencies_cm, threshold_cm: float = IMAGINARY_THRESHOLD_CM) -> np.ndarray:
    """Indices of the modes imaginary by more than ``threshold_cm`` (below −threshold), most imaginary first."""
    if threshold_cm < 0:
        raise InputError(f"the imaginary-mode threshold is a size in cm⁻¹, not negative: got {threshold_cm}")
    frequencies = np.asarray(frequencies_cm, dtype=float)
    found = np.flatnonzero(frequencies < -threshold_cm)
    return found[np.argsort(frequencies[found])]


def displace_along(atoms, mode, amplitude_angstrom: float):
    """A copy of ``atoms`` moved along a normal mode so the most displaced atom moves ``amplitude_angstrom``.

    The step off a saddle point before relaxing again; the sign of the amplitude picks the direction.
    """
    pattern = np.asarray(mode, dtype=float).reshape(len(atoms), 3)
    largest = np.linalg.norm(pattern, axis=1).max()
    if largest == 0:
        raise InputError("the mode has no displacement")
    moved = atoms.copy()
    moved.positions = atoms.get_positions() + pattern * (amplitude_angstrom / largest)
    return moved

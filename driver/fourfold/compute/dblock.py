"""The calculated ligand field: five d levels from the converged Kohn–Sham/Fock operator.

Method. The AO basis is orthogonalised symmetrically (Löwdin, S^-1/2), which keeps each orthonormal
function as close as possible to its AO; the metal's valence d shell (the first d shell on the metal:
3d, or 4d/5d behind the def2 ECP) gives five orthonormal d functions. The operator is diagonalised in
the full basis and the five eigenvectors with the largest weight on those d functions (the d-dominated,
metal–ligand antibonding orbitals of ligand-field theory) are kept. Their d components U (5×5,
Löwdin-orthonormalised) and energies ε give the effective ligand-field matrix H = U diag(ε) Uᵀ in the d
basis, whose eigenvalues are the five d levels and whose eigenvectors give their characters on
``D_ORBITALS`` = (xy, yz, z2, xz, x2-y2), PySCF's real-spherical order (m = −2 … 2) in the molecule's
Cartesian frame — so the caller's geometry decides the frame (fourfold's builder puts the metal at the
origin, index 0, and the SP-4 plane in xy).

Choices, each measured (PBE/def2-SVP; T-4 [NiCl4]2- triplet at Ni–Cl 2.27 Å, SP-4 [PdCl4]2- singlet at
Pd–Cl 2.31 Å):
- Not the bare 5×5 block of the operator in orthogonalised d functions: for [NiCl4]2- that block puts
  two t2 functions ~1000 cm⁻¹ *below* the e pair (diagonal elements of orthogonalised AOs miss the
  antibonding push that defines the ligand field); the orbital route gives e below t2 by ≈ 4000 cm⁻¹
  (Δt from spectra: 3500–4100 cm⁻¹, Lever 1984, from memory).
- Not PySCF's meta-Löwdin: with its default ANO pre-orthogonalisation the d functions of an ECP atom
  (Pd) are not rotation-covariant (the same molecule turned by 45° about z gives different d weights
  and picks a σ-bonding orbital), and without it the σ-bonding orbital of [PdCl4]2- has more d weight
  than the σ* one. Symmetric Löwdin is rotation-covariant and keeps σ* (d weight 0.51 against 0.39).
  ``selection_margin`` reports how clear the choice was.

Open shells: the operator is the spin average (F_α + F_β)/2. The α operator alone of a high-spin ion is
an inverted field (its d-dominated orbitals lie below the ligand levels: measured, e and t2 swap), and
the β operator alone splits occupied from empty d by the exchange hole; the average is a
closed-shell-like ligand-field operator. ``spin="alpha"``/``"beta"`` take one channel. A restricted
calculation has one operator.

The matrix is returned in cm⁻¹ with its barycentre (trace/5) removed, ready for a least-squares fit of
angular-overlap parameters (``fourfold.field.aom``); the barycentre itself is kept in hartree.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..field.aom import D_ORBITALS, d_levels, level_labels
from ..units import convert_energy

SPIN_CHOICES = ("average", "alpha", "beta")
# PySCF's real-spherical d labels -> fourfold's names
_PYSCF_D_LABELS = {"xy": "xy", "yz": "yz", "z^2": "z2", "xz": "xz", "x2-y2": "x2-y2"}


@dataclass(frozen=True, eq=False)
class DLevels:
    """Five d levels, ascending.

    ``characters[i, k]``: weight of D_ORBITALS[i] in level k (columns sum to 1), as in
    ``fourfold.field.aom.d_levels``. ``matrix_cm``: the 5×5 ligand-field matrix in D_ORBITALS order,
    cm⁻¹, trace removed. ``d_weights``: weight of the five kept orbitals on the metal d functions (near 1:
    ionic; near 0.5: strongly covalent); ``selection_margin``: how much more d weight the fifth kept
    orbital has than the best orbital left out (small values: the choice between a bonding and an
    antibonding partner was close). ``d_population``: electrons in all of the metal's Löwdin d
    functions, every d shell (a check of the d count; covalency adds a few tenths).
    """

    energies_hartree: np.ndarray = field(repr=False)
    relative_cm: np.ndarray
    labels: tuple[str, ...]
    characters: np.ndarray = field(repr=False)
    matrix_cm: np.ndarray = field(repr=False)
    barycentre_hartree: float
    d_weights: np.ndarray
    selection_margin: float
    d_population: float
    spin: str
    shell: str


def metal_d_indices(mol, metal_index: int = 0) -> tuple[np.ndarray, str]:
    """AO indices of the metal's valence d shell in D_ORBITALS order, and the shell's label (e.g. '3d')."""
    if not 0 <= metal_index < mol.natm:
        raise InputError(f"metal index {metal_index} is outside the molecule's {mol.natm} atoms")
    labels = mol.ao_labels(fmt=False)  # (atom, symbol, shell like '3d', function like 'dxy')
    on_metal = [(i, shell, function) for i, (atom, _, shell, function) in enumerate(labels)
                if atom == metal_index and shell.endswith("d")]
    if not on_metal:
        raise InputError(f"atom {metal_index} ({mol.atom_symbol(metal_index)}) has no d functions in this basis")
    shell = min({s for _, s, _ in on_metal}, key=lambda s: int(s[:-1]))  # lowest n: the valence d shell
    by_name = {_PYSCF_D_LABELS[function]: i for i, s, function in on_metal if s == shell}
    return np.array([by_name[name] for name in D_ORBITALS]), shell


def _operator(fock: np.ndarray, spin: str) -> np.ndarray:
    if spin not in SPIN_CHOICES:
        raise InputError(f"spin '{spin}' is not one of {', '.join(SPIN_CHOICES)}")
    if fock.ndim == 2:
        return fock
    return {"average": 0.5 * (fock[0] + fock[1]), "alpha": fock[0], "beta": fock[1]}[spin]


@dataclass(frozen=True, eq=False)
class _DOrbitals:
    """The operator's orbitals and which five of them are d-dominated (internal to this module)."""

    overlap: np.ndarray
    orthonormal: np.ndarray      # Löwdin S^-1/2
    energies: np.ndarray         # ascending
    orbitals: np.ndarray         # columns, S-orthonormal
    kept: np.ndarray             # indices of the five d-dominated orbitals, ascending energy
    weights: np.ndarray          # d weight of every orbital
    d_parts: np.ndarray          # 5 × nmo components on the orthonormal d functions
    margin: float
    shell: str


def _d_orbitals(mol, operator: np.ndarray, metal_index: int) -> _DOrbitals:
    import scipy.linalg
    from pyscf import lo

    overlap = mol.intor_symmetric("int1e_ovlp")
    d_index, shell = metal_d_indices(mol, metal_index)
    orthonormal = lo.orth.lowdin(overlap)              # S^-1/2: columns orthonormal, closest to the AOs
    projector = orthonormal[:, d_index].T @ overlap    # coefficients on the orthonormal d functions
    energies, orbitals = scipy.linalg.eigh(operator, overlap)
    d_parts = projector @ orbitals                     # 5 × nmo
    weights = np.sum(d_parts**2, axis=0)
    order = np.argsort(weights)
    kept = np.sort(order[-5:])
    margin = float(weights[order[-5]] - weights[order[-6]]) if len(weights) > 5 else float(weights.min())
    return _DOrbitals(overlap, orthonormal, energies, orbitals, kept, weights, d_parts, margin, shell)


def project_d_block(mol, fock: np.ndarray, density: np.ndarray, metal_index: int = 0,
                    spin: str = "average") -> DLevels:
    """Ligand-field d levels of the AO-basis operator ``fock`` (hartree; (2, nao, nao) for UKS)."""
    found = _d_orbitals(mol, _operator(np.asarray(fock), spin), metal_index)
    left, _, right = np.linalg.svd(found.d_parts[:, found.kept])
    frame = left @ right                                   # Löwdin-orthonormalised d components
    matrix = frame @ np.diag(found.energies[found.kept]) @ frame.T
    matrix = 0.5 * (matrix + matrix.T)
    levels, characters = d_levels(matrix)
    barycentre = float(np.trace(matrix) / 5.0)
    total_density = density[0] + density[1] if density.ndim == 3 else density
    every_d = [i for i, (atom, _, shell_name, _) in enumerate(mol.ao_labels(fmt=False))
               if atom == metal_index and shell_name.endswith("d")]
    all_d = found.orthonormal[:, every_d].T @ found.overlap
    population = float(np.trace(all_d @ total_density @ all_d.T))
    return DLevels(
        energies_hartree=levels,
        relative_cm=convert_energy(levels - barycentre, "hartree", "cm"),
        labels=tuple(level_labels(characters)),
        characters=characters,
        matrix_cm=convert_energy(matrix - barycentre * np.eye(5), "hartree", "cm"),
        barycentre_hartree=barycentre,
        d_weights=found.weights[found.kept],
        selection_margin=found.margin,
        d_population=population,
        spin=spin if np.asarray(fock).ndim == 3 else "restricted",
        shell=found.shell,
    )


def d_levels_from_result(result, metal_index: int = 0, spin: str = "average") -> DLevels:
    """``project_d_block`` for a converged ``ScfResult`` (its Mole is rebuilt from ``mole_json``)."""
    from pyscf import gto

    if not result.converged:
        raise InputError("d levels need a converged SCF: this result did not converge")
    mol = gto.loads(result.mole_json)
    mol.verbose = 0
    return project_d_block(mol, result.fock_hartree, result.density, metal_index, spin)


# ------------------------------------------------------------------------------- d configurations

DEGENERATE_CM = 10.0      # estimate levels closer than this form one set, within which only the count matters
DONOR_INDICES = (1, 2, 3, 4)  # fourfold's builder: the metal first, then the four donors in site order


@dataclass(frozen=True, eq=False)
class DTarget:
    """An intended d configuration: which ligand-field levels each spin occupies.

    ``vectors`` (5 × 5): the levels' eigenvectors as columns, ascending, on ``D_ORBITALS`` in the frame
    where the donors point along ``directions`` (4 × 3 unit vectors, donor sites in order).
    ``alpha``/``beta``: 0 or 1 per level. ``levels_cm``: the level energies, which group degenerate levels.
    """

    vectors: np.ndarray
    alpha: tuple[int, ...]
    beta: tuple[int, ...]
    levels_cm: tuple[float, ...]
    directions: np.ndarray

    def __post_init__(self):
        for name in ("alpha", "beta"):
            values = getattr(self, name)
            if len(values) != 5 or any(v not in (0, 1) for v in values):
                raise InputError(f"{name} d occupation must be five 0/1 values (ascending levels), got {values!r}")
        if np.shape(self.vectors) != (5, 5) or np.shape(self.directions) != (4, 3):
            raise InputError("a d target needs 5 × 5 level vectors and 4 donor directions")

    def groups(self) -> list[list[int]]:
        """Indices of the levels in each degenerate set, ascending."""
        found: list[list[int]] = []
        for index, energy in enumerate(self.levels_cm):
            if found and energy - self.levels_cm[found[-1][-1]] < DEGENERATE_CM:
                found[-1].append(index)
            else:
                found.append([index])
        return found

    def as_dict(self) -> dict:
        return {"alpha": list(self.alpha), "beta": list(self.beta), "levels_cm": list(self.levels_cm)}


def target_for(cx, arrangement: str, spin2s: int, isomer: str | None = None,
               overrides: dict[str, float] | None = None) -> DTarget:
    """The ligand-field estimate's configuration of one state (aufbau in the AOM levels, α first), as a
    DTarget in the builder's frame (``fourfold.field.estimate`` computes the same levels)."""
    from ..field.estimate import ligand_field_matrix_cm, occupations, parameters_for
    from ..geometry.builder import isomer_by_label
    from ..geometry.polyhedra import unit_vectors

    params = parameters_for(cx, overrides)
    names = tuple(lig.name for lig in cx.ligands)
    order = isomer_by_label(cx, arrangement, isomer).order
    directions = unit_vectors(arrangement)
    matrix = ligand_field_matrix_cm(directions, [params.ligands[names[i]] for i in order], params.e_ds_ratio.value)
    levels, vectors = np.linalg.eigh(matrix)
    total = occupations(cx.d_electrons, cx.check_spin(spin2s))
    return DTarget(vectors=vectors, alpha=tuple(int(n >= 1) for n in total), beta=tuple(int(n == 2) for n in total),
                   levels_cm=tuple(float(x) for x in levels), directions=np.asarray(directions, dtype=float))


# Real d functions as traceless symmetric 3 × 3 forms f(r) = rᵀ Q r, Frobenius-orthonormal, D_ORBITALS order.
_D_FORMS = np.array([
    [[0, 1, 0], [1, 0, 0], [0, 0, 0]],
    [[0, 0, 0], [0, 0, 1], [0, 1, 0]],
    [[-1 / np.sqrt(3), 0, 0], [0, -1 / np.sqrt(3), 0], [0, 0, 2 / np.sqrt(3)]],
    [[0, 0, 1], [0, 0, 0], [1, 0, 0]],
    [[1, 0, 0], [0, -1, 0], [0, 0, 0]],
]) / np.sqrt(2)


def d_rotation(rotation: np.ndarray) -> np.ndarray:
    """5 × 5 matrix taking d-function coefficients to those of the functions rotated by ``rotation`` (3 × 3):
    f(R⁻¹ r) = rᵀ R Q Rᵀ r, expanded again on the forms."""
    return np.einsum("jab,ac,icd,bd->ji", _D_FORMS, rotation, _D_FORMS, rotation)


def _frame_rotation(mol, target: DTarget, metal_index: int, donors) -> np.ndarray:
    """Rotation (Kabsch) taking the target's donor directions onto the molecule's, reflections excluded."""
    coords = mol.atom_coords()
    bonds = coords[list(donors)] - coords[metal_index]
    actual = bonds / np.linalg.norm(bonds, axis=1, keepdims=True)
    left, _, right = np.linalg.svd(np.asarray(target.directions).T @ actual)
    sign = np.sign(np.linalg.det(right.T @ left.T))
    return right.T @ np.diag([1.0, 1.0, sign]) @ left.T


def _pure_d_orbitals(mol, fock: np.ndarray, metal_index: int) -> tuple[_DOrbitals, np.ndarray]:
    """The operator's d-dominated orbitals recombined so that orbital i has d character on D_ORBITALS[i] only."""
    found = _d_orbitals(mol, _operator(np.asarray(fock), "average"), metal_index)
    left, _, right = np.linalg.svd(found.d_parts[:, found.kept])
    return found, found.orbitals[:, found.kept] @ (left @ right).T


def d_configuration_density(mol, fock: np.ndarray, target: DTarget, metal_index: int = 0,
                            donors=DONOR_INDICES) -> np.ndarray:
    """A UKS start density (2, nao, nao) with the target's d levels occupied, each spin as it asks.

    The orbitals are those of the spin-averaged ``fock`` (any AO-basis operator: a converged one, or one
    built on a guess density). Its five d-dominated orbitals are recombined into the target's levels,
    turned into the molecule's frame; each spin's remaining electrons (``mol.nelec``) fill the other
    orbitals from the bottom, so the ligand and core levels stay as the operator orders them.
    """
    found, pure = _pure_d_orbitals(mol, fock, metal_index)
    levels = pure @ d_rotation(_frame_rotation(mol, target, metal_index, donors)) @ target.vectors
    others = np.setdiff1d(np.arange(len(found.energies)), found.kept)
    densities = []
    for name, wanted, electrons in zip(("alpha", "beta"), (target.alpha, target.beta), mol.nelec, strict=False):
        in_d = levels[:, np.asarray(wanted, dtype=bool)]
        rest = int(electrons) - in_d.shape[1]
        if rest < 0:
            raise InputError(f"the d target puts {in_d.shape[1]} {name} electrons in d levels, but the "
                             f"molecule has only {electrons} {name} electrons")
        coefficients = np.hstack([found.orbitals[:, others[:rest]], in_d])
        densities.append(coefficients @ coefficients.T)
    return np.array(densities)


def target_occupations(mol, fock: np.ndarray, density: np.ndarray, target: DTarget, metal_index: int = 0,
                       donors=DONOR_INDICES) -> np.ndarray:
    """Electrons per spin (2, 5; α row first, each 0–1) in the target's levels, from a converged density.

    The levels are built as in ``d_configuration_density`` from the converged ``fock``; the occupation of
    orbital φ is φᵀ S D S φ. A restricted density is split evenly between the spins.
    """
    found, pure = _pure_d_orbitals(mol, fock, metal_index)
    levels = pure @ d_rotation(_frame_rotation(mol, target, metal_index, donors)) @ target.vectors
    density = np.asarray(density)
    per_spin = density if density.ndim == 3 else np.array((density * 0.5, density * 0.5))
    projected = found.overlap @ levels
    return np.array([np.einsum("ik,ij,jk->k", projected, d, projected) for d in per_spin])


def occupation_matches(occupations: np.ndarray, target: DTarget) -> bool:
    """Whether each spin puts the target's number of electrons (to ±0.5) into each degenerate set of levels."""
    wanted = np.array((target.alpha, target.beta), dtype=float)
    return all(abs(occupations[spin, group].sum() - wanted[spin, group].sum()) < 0.5
               for spin in (0, 1) for group in target.groups())

"""Relaxation with geomeTRIC driven by any potential callable.

A potential is ``positions_angstrom (N, 3) -> (energy_hartree, gradient_hartree_per_bohr (N, 3))``.

Two kinds (a fourfold default):

* ``held`` keeps the L–M–L arrangement of the given geometry: every L–M–L angle that is not near
  linear (above ``HOLDABLE_ANGLE_DEG``) is held at its value there, and for a square two dihedrals
  keep the donors and the metal in one plane. Angles near 180° are never constrained (the angle
  coordinate is ill-defined there). In a square, out-of-plane motions change the cis angles only to
  second order, hence the plane dihedrals.
  Bond lengths and the ligands' own internal coordinates relax.
  With chelates a bite angle is never held as such, and the start has the fragment's own bite (the
  builder's), never 90° or 109.5°. A square is held by what makes it one: the donor-ring and metal-in-plane
  dihedrals above and the angles between donors of two monodentate ligands; the chelates' bites and the
  angles next to them relax in the plane. Any other arrangement holds every L–M–L angle but the bites
  and the near-linear ones. Holding less there is not enough: with only the donor-ring dihedrals (which
  fix the angle between a chelate's plane and the other donors' plane) and the X–M–X angle, the metal
  slid within a held donor set and a T-4 [Ni(en)Cl2] singlet ended as a seesaw (tau4 0.64, GFN2-xTB);
  holding the four chelate–monodentate angles too leaves a single chelate's bite at its start value,
  the fragment's own.
* ``free`` is unconstrained.

Neither starts exactly where it is told to, because from an exactly symmetric start the gradient
keeps the symmetry. A free relaxation starts from the given geometry with every atom displaced by a
small fixed pseudo-random amount: from the ideal square a free SP-4 [NiCl4]2- triplet otherwise
stays on the square saddle point (measured: tau4 = 0.000). A held relaxation starts with each donor
moved along its own M–L axis (no L–M–L angle changes): a Jahn–Teller-active state such as the T-4
d8 triplet otherwise keeps four equal bonds from an ideal start. The displacements are at most
``NUDGE_ANGSTROM`` and the same in every run. The Jahn–Teller surface stays flat with more than one
stationary point, so such end points still depend a little on the start (measured, PBE/def2-SVP held
T-4 [NiCl4]2- triplet: Ni–Cl 2.307–2.355 Å from the ideal start, 2.313–2.386 Å and 1.1 kJ/mol lower
from the GFN2-xTB pre-relaxed one; benchmarks/prerelax).
(Displacing a held start off its angles and letting geomeTRIC restore them fails: near-linear trans
angles make geomeTRIC rebuild its coordinates, which it cannot do in a constrained optimisation.)

geomeTRIC's log goes to ``log_path`` (or nowhere) and its scratch files to a temporary directory.
"""

from __future__ import annotations

import logging
import tempfile
from collections.abc import Callable, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from itertools import combinations

import numpy as np
from geometric.engine import Engine
from geometric.errors import Error as GeometricError
from geometric.errors import GeomOptNotConvergedError
from geometric.internal import DelocalizedInternalCoordinates
from geometric.molecule import Molecule
from geometric.nifty import RawFileHandler
from geometric.optimize import Optimizer
from geometric.params import OptParams
from geometric.prepare import parse_constraints

from ..errors import ComputeError, FourfoldError, InputError, NotConverged
from ..geometry.polyhedra import ARRANGEMENTS
from ..units import angstrom_to_bohr, bohr_to_angstrom

Potential = Callable[[np.ndarray], tuple[float, np.ndarray]]

KINDS = ("held", "free")

# Above this an L–M–L angle counts as trans when the start is checked against its arrangement.
LINEAR_ANGLE_DEG = 150.0
# Up to this every L–M–L angle can be held as an angle: a start with no angle above it has all six
# held (a flattened tetrahedron on the T-4 -> SP-4 path included; its cis angles and plane dihedrals
# alone leave the trans angles free to drift, measured 0.1° at a trans angle of 155°).
HOLDABLE_ANGLE_DEG = 170.0
# How many trans L–M–L angles each ideal arrangement has (SS-4: both seesaw definitions have one).
_TRANS_ANGLES = {"T-4": 0, "SP-4": 2, "SS-4": 1, "trigonal-pyramid": 0}

# Largest Cartesian displacement of the start; fixed seed, so runs are reproducible.
NUDGE_ANGSTROM = 0.02
_NUDGE_SEED = 4

# fourfold's convergence names -> geomeTRIC convergence sets.
CONVERGENCE_SETS = {"default": "GAU", "loose": "GAU_LOOSE", "tight": "GAU_TIGHT"}


@dataclass
class RelaxResult:
    """Outcome of one relaxation (plain data)."""

    atoms: object  # ase.Atoms at the last accepted geometry
    energy_hartree: float
    converged: bool
    steps: int
    gradient_calls: int
    kind: str
    message: str


class RelaxInterrupted(NotConverged):
    """The potential failed (e.g. SCF not converged) during a relaxation.

    ``last_atoms`` is the last geometry whose energy and gradient were computed (the start geometry
    if the first call failed): a retry with stronger SCF settings starts from there.
    """

    def __init__(self, message: str, last_atoms, step: int):
        super().__init__(message)
        self.last_atoms = last_atoms
        self.step = step


def _angle_deg(positions, metal_index: int, i: int, j: int) -> float:
    a = positions[i] - positions[metal_index]
    b = positions[j] - positions[metal_index]
    cosine = np.dot(a, b) / (np.linalg.norm(a) * np.linalg.norm(b))
    return float(np.degrees(np.arccos(np.clip(cosine, -1.0, 1.0))))


def _checked_donors(n_atoms: int, metal_index: int, donor_indices: Sequence[int]) -> list[int]:
    donors = [int(d) for d in donor_indices]
    indices = donors + [metal_index]
    if len(donors) != 4 or len(set(indices)) != 5 or not all(0 <= i < n_atoms for i in indices):
        raise InputError(f"need a metal index and four distinct donor indices among {n_atoms} atoms, "
                         f"got metal {metal_index}, donors {donors}")
    return donors


def held_constraints(positions_angstrom, arrangement: str, metal_index: int,
                     donor_indices: Sequence[int], chelate_pairs: Sequence[Sequence[int]] = ()) -> str:
    """geomeTRIC ``$freeze`` block that keeps the start geometry's L–M–L arrangement.

    ``chelate_pairs`` are the atom indices of each chelate's two donors. InputError when the start
    geometry's count of near-linear L–M–L angles does not match the arrangement (wrong donor indices or
    a start geometry of another shape).
    """
    if arrangement not in ARRANGEMENTS:
        raise InputError(f"unknown arrangement '{arrangement}': use one of {', '.join(ARRANGEMENTS)}")
    positions = np.asarray(positions_angstrom, dtype=float).reshape(-1, 3)
    donors = _checked_donors(len(positions), metal_index, donor_indices)
    pairs = list(combinations(donors, 2))
    trans = [p for p in pairs if _angle_deg(positions, metal_index, *p) > LINEAR_ANGLE_DEG]
    if len(trans) != _TRANS_ANGLES[arrangement]:
        raise InputError(
            f"start geometry does not look {arrangement}: {len(trans)} L–M–L angles above "
            f"{LINEAR_ANGLE_DEG:.0f}°, expected {_TRANS_ANGLES[arrangement]} (check donor indices)"
        )
    if chelate_pairs:
        return _chelate_constraints(arrangement, metal_index, donors, pairs, trans, chelate_pairs)
    all_holdable = all(_angle_deg(positions, metal_index, *p) <= HOLDABLE_ANGLE_DEG for p in pairs)
    held = pairs if all_holdable else [p for p in pairs if p not in trans]
    # geomeTRIC numbers atoms from 1.
    m = metal_index + 1
    lines = ["$freeze"] + [f"angle {i + 1} {m} {j + 1}" for i, j in held]
    if arrangement == "SP-4" and not all_holdable:
        (a, c), (b, d) = trans
        if len({a, b, c, d}) != 4:
            raise InputError("start geometry does not look SP-4: its two trans angles share a donor")
        # Ring a-b-c-d: the donors' plane, and the metal in it.
        lines.append(f"dihedral {a + 1} {b + 1} {c + 1} {d + 1}")
        lines.append(f"dihedral {a + 1} {b + 1} {c + 1} {m}")
    return "\n".join(lines) + "\n"


def _chelate_constraints(arrangement, metal_index, donors, pairs, trans, chelate_pairs) -> str:
    """The held constraints of a complex with chelates (module docstring)."""
    bites = {frozenset(int(i) for i in pair) for pair in chelate_pairs}
    if not all(len(bite) == 2 and bite <= set(donors) for bite in bites):
        raise InputError(f"chelate donor pairs {list(chelate_pairs)} must be pairs of the donors {donors}")
    m = metal_index + 1
    if arrangement != "SP-4":
        held = [p for p in pairs if frozenset(p) not in bites and p not in trans]
        return "\n".join(["$freeze"] + [f"angle {i + 1} {m} {j + 1}" for i, j in held]) + "\n"
    chelated = set().union(*bites)
    (p, r), (q, t) = trans  # the square's diagonals: p-q-r-t is its donor ring
    if len({p, q, r, t}) != 4:
        raise InputError("start geometry does not look SP-4: its two trans angles share a donor")
    held = [pair for pair in pairs if not set(pair) & chelated and pair not in trans]
    lines = ["$freeze"] + [f"angle {i + 1} {m} {j + 1}" for i, j in held]
    lines += [f"dihedral {p + 1} {q + 1} {r + 1} {t + 1}", f"dihedral {p + 1} {q + 1} {r + 1} {m}"]
    return "\n".join(lines) + "\n"


class _PotentialEngine(Engine):
    """geomeTRIC engine that evaluates a fourfold potential and counts the calls."""

    def __init__(self, molecule, potential: Potential, numpy_errors: dict):
        super().__init__(molecule)
        self.potential = potential
        self.numpy_errors = numpy_errors
        self.calls = 0
        self.last_good_positions_angstrom = None

    def calc_new(self, coords, dirname):
        positions_angstrom = bohr_to_angstrom(np.asarray(coords, dtype=float).reshape(-1, 3))
        # The potential runs under the caller's numpy error settings, not geomeTRIC's.
        with np.errstate(**self.numpy_errors):
            energy_hartree, gradient_hartree_per_bohr = self.potential(positions_angstrom)
        self.calls += 1
        self.last_good_positions_angstrom = positions_angstrom
        return {"energy": float(energy_hartree),
                "gradient": np.asarray(gradient_hartree_per_bohr, dtype=float).ravel()}


@contextmanager
def _geometric_log(log_path):
    """Route geomeTRIC's logger to log_path (or discard it) and never to the terminal."""
    geo_logger = logging.getLogger("geometric")
    saved = (geo_logger.handlers[:], geo_logger.propagate)
    handler = RawFileHandler(str(log_path), mode="a") if log_path else logging.NullHandler()
    geo_logger.handlers = [handler]
    geo_logger.propagate = False
    try:
        yield
    finally:
        handler.close()
        geo_logger.handlers, geo_logger.propagate = saved


def _nudged(positions_angstrom: np.ndarray) -> np.ndarray:
    """Every atom displaced (free start)."""
    rng = np.random.default_rng(_NUDGE_SEED)
    return positions_angstrom + rng.uniform(-NUDGE_ANGSTROM, NUDGE_ANGSTROM, positions_angstrom.shape)


def _stretched(positions_angstrom: np.ndarray, metal_index: int, donor_indices: Sequence[int]) -> np.ndarray:
    """Each donor moved along its M–L axis (held start): bond lengths change, L–M–L angles do not."""
    rng = np.random.default_rng(_NUDGE_SEED)
    out = positions_angstrom.copy()
    for donor, shift_angstrom in zip(donor_indices, rng.uniform(-NUDGE_ANGSTROM, NUDGE_ANGSTROM, 4), strict=False):
        bond = out[donor] - out[metal_index]
        out[donor] += shift_angstrom * bond / np.linalg.norm(bond)
    return out


def _atoms_at(atoms, positions_angstrom):
    out = atoms.copy()
    out.calc = None
    out.set_positions(positions_angstrom)
    return out


def _internal_coordinates(molecule, kind: str, arrangement: str, metal_index: int,
                          donor_indices: Sequence[int], chelate_pairs):
    """TRIC coordinates (geomeTRIC's default); for ``held`` with the constraints frozen at the start."""
    constraints, constraint_values = None, None
    if kind == "held":
        text = held_constraints(molecule.xyzs[0], arrangement, metal_index, donor_indices, chelate_pairs)
        constraints, constraint_values = parse_constraints(molecule, text)
    return DelocalizedInternalCoordinates(
        molecule, build=True, connect=False, addcart=False, constraints=constraints,
        cvals=constraint_values[0] if constraint_values else None,
    )


def relax(atoms, potential: Potential, kind: str, arrangement: str, metal_index: int = 0,
          donor_indices: Sequence[int] = (1, 2, 3, 4), max_steps: int = 100,
          convergence: str = "default", log_path=None, chelate_pairs=None) -> RelaxResult:
    """Relax ``atoms`` on ``potential``: ``held`` keeps the L–M–L arrangement, ``free`` does not.

    ``chelate_pairs`` (atom indices of each chelate's two donors) default to the builder's
    ``atoms.info["chelate_pairs"]``.

    Ends after at most ``max_steps`` optimisation steps; an unconverged end is a result
    (converged=False), not an error. A potential raising NotConverged makes this raise
    RelaxInterrupted (a NotConverged) naming the step, with the last good geometry attached.
    """
    if kind not in KINDS:
        raise InputError(f"unknown relaxation kind '{kind}': use held or free")
    if arrangement not in ARRANGEMENTS:
        raise InputError(f"unknown arrangement '{arrangement}': use one of {', '.join(ARRANGEMENTS)}")
    if convergence not in CONVERGENCE_SETS:
        raise InputError(f"unknown convergence '{convergence}': use one of {', '.join(CONVERGENCE_SETS)}")
    if max_steps < 1:
        raise InputError(f"max_steps must be at least 1, got {max_steps}")

    given_angstrom = np.asarray(atoms.get_positions(), dtype=float)
    donors = _checked_donors(len(given_angstrom), metal_index, donor_indices)
    if kind == "held":
        start_angstrom = _stretched(given_angstrom, metal_index, donors)
    else:
        start_angstrom = _nudged(given_angstrom)
    molecule = Molecule()
    molecule.elem = list(atoms.get_chemical_symbols())
    molecule.xyzs = [start_angstrom.copy()]
    engine = _PotentialEngine(molecule, potential, np.geterr())

    # geomeTRIC divides by zero-valued eigenvalues of planar fragments on purpose (internal.py,
    # rotation regularisation); those numpy warnings are noise on the terminal.
    with (tempfile.TemporaryDirectory(prefix="fourfold-relax-") as scratch, _geometric_log(log_path),
          np.errstate(divide="ignore", invalid="ignore")):
        chelates = atoms.info.get("chelate_pairs", ()) if chelate_pairs is None else chelate_pairs
        coordinates = _internal_coordinates(engine.M, kind, arrangement, metal_index, donors, chelates)
        params = OptParams(maxiter=max_steps, convergence_set=CONVERGENCE_SETS[convergence])
        optimizer = Optimizer(angstrom_to_bohr(start_angstrom).ravel(), engine.M, coordinates,
                              engine, scratch, params, print_info=False)
        try:
            optimizer.optimizeGeometry()
            converged, message = True, f"converged in {optimizer.Iteration} steps"
        except GeomOptNotConvergedError:
            converged = False
            message = f"not converged after {optimizer.Iteration} steps (max_steps={max_steps})"
        except NotConverged as err:
            last = engine.last_good_positions_angstrom
            last_atoms = _atoms_at(atoms, given_angstrom if last is None else last)
            raise RelaxInterrupted(
                f"{kind} relaxation interrupted at step {optimizer.Iteration} "
                f"(gradient call {engine.calls + 1}): {err}", last_atoms, optimizer.Iteration,
            ) from err
        except FourfoldError:
            raise
        except (GeometricError, ValueError, RuntimeError, np.linalg.LinAlgError) as err:
            # geomeTRIC also raises bare ValueError/RuntimeError (e.g. when a constrained coordinate
            # system has to be rebuilt); the potential's own errors passed through above.
            first_line = str(err).strip().splitlines()[0] if str(err).strip() else type(err).__name__
            raise ComputeError(f"geomeTRIC failed in a {kind} relaxation at step {optimizer.Iteration}: "
                               f"{first_line}") from err

    final_angstrom = bohr_to_angstrom(np.asarray(optimizer.X, dtype=float).reshape(-1, 3))
    return RelaxResult(
        atoms=_atoms_at(atoms, final_angstrom),
        energy_hartree=float(optimizer.E),
        converged=converged,
        steps=int(optimizer.Iteration),
        gradient_calls=int(engine.calls),
        kind=kind,
        message=message,
    )

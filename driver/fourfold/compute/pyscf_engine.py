"""PySCF engine: Mole building (with ECPs), guesses, the state search, D3(BJ), C-PCM, gradients, Hessians.

Inputs are an ``ase.Atoms`` (positions in Å), the total charge and 2S (PySCF's ``mol.spin``) and a
``Level``. Results are plain data (``ScfResult``) so a worker process can hand them to the driver.

Decisions:
- Closed-shell singlets run restricted; open shells unrestricted. A singlet is then checked for an
  RKS → UKS instability (``compute.stability``); when a lower UKS solution exists it is converged and
  reported as a broken-symmetry singlet with its ⟨S²⟩, never as a closed shell.
- Each state is converged from several starts and every open-shell solution is checked for an internal
  instability, followed downhill (``compute.state_search``); the lowest solution of the right spin
  character is kept. Each start climbs the SCF ladder (``compute.scf_ladder``) until a rung converges;
  non-convergence of every start is a result with ``converged=False``.
- D3(BJ) comes from the ``dftd3`` package (``DFTD3Dispersion``; PySCF's own ``mf.disp`` hook needs
  pyscf-dispersion, which is not a dependency) and is added to the energy and the gradient here.
- PySCF output goes to the per-calculation log file (or nowhere), never to the terminal: PySCF copies
  its warnings to ``sys.stderr`` when it logs to a file, so stderr is redirected during a calculation.
"""

from __future__ import annotations

import contextlib
import os
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import ComputeError, InputError, NotConverged
from ..units import HARTREE_KJ_MOL
from .levels import Level
from .scf_ladder import RUNGS, MeanFields, finish_on_grid, ladder
from .state_search import BROKEN_SYMMETRY_S2, Outcome, right_spin_character, search
from .threads import pyscf_threads

S2_TOLERANCE = 0.1            # |<S²> − S(S+1)| above this flags spin contamination (common practice, no source)
AUFBAU_TOLERANCE_HARTREE = 1e-5
ECP_MIN_Z = 37                # 4d/5d metals and everything heavier than Kr get an ECP
LOG_VERBOSITY = 4             # PySCF's INFO: SCF cycles and summaries, without timings


@dataclass(frozen=True, eq=False)
class ScfResult:
    """One SCF: plain numbers and arrays only (picklable, no PySCF objects).

    ``energy_hartree`` is the total energy including the C-PCM solvation and the D3(BJ) dispersion
    (``dispersion_hartree``). ``rung`` is the ladder rung that converged (None if none did; then
    ``reason`` says why). ``cycles`` counts SCF iterations over all rungs and, for a singlet, over the
    RKS and UKS runs (newton macro-iterations count one each).
    ``homo_lumo_gap_hartree`` is the smallest per-spin gap, LUMO(σ) − HOMO(σ); it is negative exactly
    when a spin channel is not filled in aufbau order (``aufbau`` False).
    Arrays: ``mo_energy_hartree``, ``mo_coeff``, ``mo_occ`` (leading axis of 2 for UKS), the converged
    ``density`` (AO basis, reusable as a guess) and ``fock_hartree`` (AO basis, the KS/Fock operator at
    convergence, for the d-block projection). ``mole_json`` rebuilds the Mole (``pyscf.gto.loads``).

    The state search (``fourfold.compute.state_search``): ``starts`` holds one plain record per start
    (``label``, ``energy_hartree`` with dispersion, ``converged``, ``s2``, ``cycles``, ``restricted``,
    ``instabilities_followed``, ``stability_eigenvalue``), ``start_won`` the label of the start whose
    solution this is, ``spread_kj_mol`` the highest minus the lowest converged start energy.
    ``stability_eigenvalue``: the lowest orbital-Hessian eigenvalue of this solution (hartree; RKS → UKS
    for a restricted singlet, UKS internal otherwise; None when not analysed; negative = unstable).
    ``right_spin_character``: ⟨S²⟩ nearer S(S+1) than the next spin state's value. With a d target:
    ``d_target`` (its α/β level occupations and level energies), ``d_occupation`` (α row, β row: electrons
    in the target's five levels, ascending) and ``occupation_matches`` (each degenerate set holds the
    intended count per spin); None without a target.
    """

    energy_hartree: float
    converged: bool
    rung: str | None
    cycles: int
    reason: str
    spin2s: int
    restricted: bool
    s2: float
    s2_expected: float
    spin_contaminated: bool
    broken_symmetry: bool
    homo_lumo_gap_hartree: float
    aufbau: bool
    dispersion_hartree: float
    wall_seconds: float
    log_path: str | None
    notes: tuple[str, ...]
    mole_json: str = field(repr=False)
    mo_energy_hartree: np.ndarray = field(repr=False)
    mo_coeff: np.ndarray = field(repr=False)
    mo_occ: np.ndarray = field(repr=False)
    density: np.ndarray = field(repr=False)
    fock_hartree: np.ndarray = field(repr=False)
    starts: tuple[dict, ...] = ()
    start_won: str | None = None
    spread_kj_mol: float = 0.0
    stability_eigenvalue: float | None = None
    right_spin_character: bool = True
    d_target: dict | None = None
    d_occupation: tuple[tuple[float, ...], tuple[float, ...]] | None = None
    occupation_matches: bool | None = None


# ---------------------------------------------------------------------------------------------- Mole

def _ecp_for(basis: str, ecp: str | None, heavy: list[str]) -> dict[str, str]:
    if not heavy or ecp is None:
        return {}
    if ecp == "auto":
        if not basis.lower().startswith("def2"):
            raise InputError(f"basis '{basis}' has no matching def2 ECP for {', '.join(heavy)}: "
                             "use a def2 basis or name the ECP in the level (ecp = ...)")
        ecp = basis  # PySCF's ECP library maps every def2 basis name to the def2 ECP
    return {symbol: ecp for symbol in heavy}


def build_mole(atoms, charge: int, spin2s: int, basis: str, ecp: str | None = "auto", stream=None):
    """A built ``pyscf.gto.Mole`` for ``atoms`` (Å); ECP on every atom with Z > 36 (``ecp="auto"``).

    ComputeError if an atom with Z > 36 ends up without an ECP; InputError if the electron count and
    2S have different parity or 2S exceeds the electron count. PySCF logs to ``stream`` (an open log
    file) at INFO level, or not at all (verbose 0) without one.
    """
    from pyscf import gto

    numbers = [int(z) for z in atoms.get_atomic_numbers()]
    symbols = list(atoms.get_chemical_symbols())
    heavy = sorted({s for s, z in zip(symbols, numbers, strict=False) if z >= ECP_MIN_Z})
    mol = gto.Mole()
    mol.atom = [(s, tuple(float(x) for x in p)) for s, p in zip(symbols, np.asarray(atoms.positions, dtype=float), strict=False)]
    mol.unit = "Angstrom"
    mol.basis = basis
    mol.ecp = _ecp_for(basis, ecp, heavy)
    mol.charge = int(charge)
    mol.spin = int(spin2s)
    if stream is not None:
        mol.stdout = stream
    mol.verbose = LOG_VERBOSITY if stream is not None else 0
    nelectron = sum(numbers) - int(charge)
    if spin2s < 0 or spin2s > nelectron or (nelectron - spin2s) % 2:
        raise InputError(f"2S = {spin2s} is impossible with {nelectron} electrons (charge {charge}): "
                         "2S must have the parity of the electron count")
    try:
        mol.build(parse_arg=False, dump_input=False)
    except (RuntimeError, KeyError, ValueError) as exc:
        raise ComputeError(f"PySCF could not build the molecule (basis {basis}, ecp {ecp}): {exc}") from exc
    bare = [mol.atom_symbol(i) for i in range(mol.natm)
            if numbers[i] >= ECP_MIN_Z and mol.atom_nelec_core(i) == 0]
    if bare:
        raise ComputeError(f"atoms {', '.join(sorted(set(bare)))} (Z > 36) have no ECP: fourfold always "
                           "uses the matching def2 ECP for 4d/5d metals (level ecp = \"auto\")")
    if heavy and not mol.has_ecp():
        raise ComputeError("heavy atoms present but the Mole has no ECP")
    return mol


# ------------------------------------------------------------------------------------------- output

@contextlib.contextmanager
def _log_stream(log_path):
    """The open log file (or None), with stderr sent there so PySCF's WARN copies stay off the terminal."""
    if log_path is None:
        with open(os.devnull, "w") as sink, contextlib.redirect_stderr(sink):
            yield None
        return
    Path(log_path).parent.mkdir(parents=True, exist_ok=True)
    with open(log_path, "a") as stream, contextlib.redirect_stderr(stream):
        yield stream


# -------------------------------------------------------------------------------------- dispersion

def dispersion_correction(mol, level: Level) -> tuple[float, np.ndarray]:
    """D3(BJ) energy (Eh) and gradient (Eh/bohr) from the dftd3 package, zeros without dispersion."""
    if level.dispersion is None:
        return 0.0, np.zeros((mol.natm, 3))
    from dftd3.pyscf import DFTD3Dispersion

    xc = level.functional if level.method == "dft" else "hf"
    try:
        energy, gradient, _ = DFTD3Dispersion(mol, xc=xc, version=level.dispersion).kernel()
    except Exception as exc:  # the dftd3 library raises its own error types for unknown functionals
        raise ComputeError(f"D3(BJ) parameters are not available for '{xc}': {exc}") from exc
    return float(energy), np.asarray(gradient)


def _spin_form(dm: np.ndarray | None, restricted: bool, nao: int) -> np.ndarray | None:
    """A density in the shape the SCF wants: (nao, nao) for RKS, (2, nao, nao) for UKS."""
    if dm is None:
        return None
    dm = np.asarray(dm)
    if dm.shape[-1] != nao:
        return None
    if restricted:
        return dm[0] + dm[1] if dm.ndim == 3 else dm
    return dm if dm.ndim == 3 else np.array((dm * 0.5, dm * 0.5))


def _guess_density(mol, guess, restricted: bool, keep_spin: bool = False) -> tuple[np.ndarray | None, str | None]:
    """Density from a guess: an array, an ScfResult or a PySCF chkfile; projected across bases.

    A guess from another spin state passes on its total density, split evenly between α and β, unless
    ``keep_spin`` (a neighbour start of the state search keeps its α and β densities).
    Returns (density or None, a note when the guess could not be used).
    """
    from pyscf import gto, scf

    if guess is None:
        return None, None
    if isinstance(guess, np.ndarray):
        dm = _spin_form(guess, restricted, mol.nao)
        return dm, None if dm is not None else f"guess density has {guess.shape[-1]} AOs, not {mol.nao}: cold start"
    if isinstance(guess, ScfResult):
        old_mol, mo_coeff, mo_occ = gto.loads(guess.mole_json), guess.mo_coeff, guess.mo_occ
    elif isinstance(guess, (str, os.PathLike)):
        if not Path(guess).exists():
            return None, f"guess chkfile {guess} not found: cold start"
        old_mol, data = scf.chkfile.load_scf(str(guess))
        mo_coeff, mo_occ = np.asarray(data["mo_coeff"]), np.asarray(data["mo_occ"])
    else:
        raise InputError(f"a guess must be a density array, an ScfResult or a chkfile path, got {type(guess).__name__}")
    if [old_mol.atom_symbol(i) for i in range(old_mol.natm)] != [mol.atom_symbol(i) for i in range(mol.natm)]:
        return None, "guess belongs to other atoms: cold start"
    if gto.same_basis_set(old_mol, mol):  # same basis, perhaps another geometry
        dm = _density_from_orbitals(mo_coeff, mo_occ)
    else:
        # A different basis (e.g. def2-SVP relaxation -> def2-TZVP single point): project the orbitals.
        from pyscf.scf.addons import project_mo_nr2nr

        old_mol.stdout, old_mol.verbose = mol.stdout, 0
        if mo_coeff.ndim == 3:
            mo_coeff = np.array([project_mo_nr2nr(old_mol, c, mol) for c in mo_coeff])
        else:
            mo_coeff = project_mo_nr2nr(old_mol, mo_coeff, mol)
        dm = _density_from_orbitals(mo_coeff, mo_occ)
    old_spin2s = int(round(mo_occ[0].sum() - mo_occ[1].sum())) if mo_occ.ndim == 2 else 0
    if old_spin2s != mol.spin and dm.ndim == 3 and not keep_spin:
        # Another spin state: carry over the spatial density, not its spin polarisation (measured on
        # T-4 [CoCl4]2-: the quartet's own α/β densities seed the doublet worse than a cold start).
        dm = dm[0] + dm[1]
    return _spin_form(dm, restricted, mol.nao), None


def _density_from_orbitals(mo_coeff: np.ndarray, mo_occ: np.ndarray) -> np.ndarray:
    if mo_coeff.ndim == 3:
        return np.array([(c * o) @ c.T for c, o in zip(mo_coeff, mo_occ, strict=False)])
    return (mo_coeff * mo_occ) @ mo_coeff.T


# ----------------------------------------------------------------------------------------- results

def _gap_and_aufbau(mo_energy: np.ndarray, mo_occ: np.ndarray) -> tuple[float, bool]:
    gaps = []
    for energies, occupations in zip(np.atleast_2d(mo_energy), np.atleast_2d(mo_occ), strict=False):
        occupied, virtual = energies[occupations > 0], energies[occupations == 0]
        if len(occupied) and len(virtual):
            gaps.append(float(virtual.min() - occupied.max()))
    gap = min(gaps) if gaps else float("inf")
    return gap, gap > -AUFBAU_TOLERANCE_HARTREE


def _s2(mf, restricted: bool, spin2s: int) -> float:
    if restricted:
        return spin2s / 2.0 * (spin2s / 2.0 + 1.0)
    return float(mf.spin_square()[0])


def _fock_from_orbitals(mf, mol, mo_energy: np.ndarray, mo_coeff: np.ndarray, dm: np.ndarray) -> np.ndarray:
    """The converged (unshifted) Fock matrix F = S C ε Cᵀ S, exact for a square C (C⁻¹ = Cᵀ S).

    PySCF's last diagonalisation has no level shift, so this is the plain operator, rebuilt without the
    cost of another Fock build; with linear dependencies removed (C not square) it is built afresh.
    """
    if mo_coeff.shape[-1] != mo_coeff.shape[-2]:
        return np.asarray(mf.get_fock(dm=dm))
    overlap = mol.intor_symmetric("int1e_ovlp")
    if mo_coeff.ndim == 3:
        return np.array([_fock_from_orbitals(mf, mol, e, c, dm) for e, c in zip(mo_energy, mo_coeff, strict=False)])
    projected = overlap @ mo_coeff
    return (projected * mo_energy) @ projected.T


def _search_fields(outcome: Outcome, mol, spin2s: int, dispersion: float, d_target, fock, dm) -> dict:
    """The state-search part of a result: every start, the winner, the spread and the d configuration."""
    from .dblock import occupation_matches, target_occupations

    records = tuple(solution.record(spin2s, dispersion) for solution in outcome.solutions)
    energies = [r["energy_hartree"] for r in records if r["converged"]]
    winner = outcome.winner
    fields = {"starts": records, "start_won": winner.label,
              "spread_kj_mol": (max(energies) - min(energies)) * HARTREE_KJ_MOL if energies else 0.0,
              "stability_eigenvalue": winner.eigenvalue}
    if d_target is not None and winner.run.mf.mo_coeff is not None:
        occupations = target_occupations(mol, fock, dm, d_target)
        fields.update(d_target=d_target.as_dict(), d_occupation=tuple(tuple(float(x) for x in row)
                                                                       for row in occupations),
                      occupation_matches=occupation_matches(occupations, d_target))
    return fields


def _result(outcome: Outcome, run, mol, spin2s: int, dispersion: float, started: float, log_path,
            notes: list[str], d_target=None) -> ScfResult:
    mf, restricted = run.mf, outcome.winner.restricted
    s2_expected = spin2s / 2.0 * (spin2s / 2.0 + 1.0)
    if mf.mo_coeff is None:  # the ladder failed before a single diagonalisation
        empty = np.zeros((0,))
        energy, s2, dm, fock, mo_e, mo_c, mo_o = float("nan"), float("nan"), empty, empty, empty, empty, empty
        gap, aufbau = float("nan"), False
    else:
        s2 = _s2(mf, restricted, spin2s)
        dm = mf.make_rdm1()
        mo_e, mo_c, mo_o = np.asarray(mf.mo_energy), np.asarray(mf.mo_coeff), np.asarray(mf.mo_occ)
        fock = _fock_from_orbitals(mf, mol, mo_e, mo_c, dm)
        energy = float(mf.e_tot) + dispersion
        gap, aufbau = _gap_and_aufbau(mo_e, mo_o)
    searched = _search_fields(outcome, mol, spin2s, dispersion, d_target, fock, dm)
    if searched.get("occupation_matches") is False:
        notes.append("the converged d occupation differs from the intended configuration")
    if mf.mo_coeff is not None and not aufbau:
        notes.append("the solution is not aufbau: an empty orbital lies below an occupied one")
    character = bool(np.isfinite(s2) and right_spin_character(s2, spin2s))
    if run.converged and not character:
        notes.append(f"<S2> = {s2:.2f} is nearer the next higher spin state: no start gave a purer solution")
    cycles = outcome.cycles + (run.cycles - outcome.winner.run.cycles)
    reason = "" if run.converged else (
        f"SCF not converged after rungs {', '.join(RUNGS)} ({cycles} cycles)"
        + (f"; {'; '.join(run.failures)}" if run.failures else ""))
    return ScfResult(
        energy_hartree=energy, converged=run.converged, rung=run.rung, cycles=cycles, reason=reason,
        spin2s=spin2s, restricted=restricted, s2=s2, s2_expected=s2_expected,
        spin_contaminated=bool(abs(s2 - s2_expected) > S2_TOLERANCE),
        broken_symmetry=bool(spin2s == 0 and not restricted and s2 > BROKEN_SYMMETRY_S2),
        homo_lumo_gap_hartree=gap, aufbau=aufbau, dispersion_hartree=dispersion,
        wall_seconds=time.perf_counter() - started, log_path=str(log_path) if log_path else None,
        notes=tuple(notes), mole_json=mol.dumps(), mo_energy_hartree=mo_e, mo_coeff=mo_c, mo_occ=mo_o,
        density=np.asarray(dm), fock_hartree=np.asarray(fock), right_spin_character=character, **searched,
    )


FORMS = (None, "restricted", "unrestricted")
NEIGHBOUR_CONV_TOL_HARTREE = 1e-4  # a neighbour state converged as a start only (common practice, no source)


def _neighbour_densities(mol, neighbours, notes: list[str]) -> list[tuple[str, object]]:
    """(label, density callable) of each given neighbouring-state guess, with its own spin polarisation."""
    found = []
    for index, neighbour in enumerate(neighbours):
        dm, note = _guess_density(mol, neighbour, restricted=False, keep_spin=True)
        if note:
            notes.append(f"neighbour {index + 1}: {note}")
        if dm is None:
            continue
        spin = getattr(neighbour, "spin2s", None)
        found.append((f"neighbour 2S={spin}" if spin is not None else f"neighbour {index + 1}", lambda dm=dm: dm))
    return found


def _neighbour_spin_starts(mol, level: Level, scf_grid: int, spins, notes: list[str], spent: list[int]):
    """(label, density callable) for each neighbouring spin state converged here, at this geometry.

    The neighbour runs its default start only (RKS for a singlet), when the search reaches it, converged to
    ``NEIGHBOUR_CONV_TOL_HARTREE`` only (it is a start density; the start itself converges fully); its
    cycles go to ``spent``. Its α and β densities are the start (``keep_spin``), so one spin flips.
    """
    def start(spin2s: int):
        other = mol.copy()
        other.spin = spin2s
        other.build(False, False)
        mf = MeanFields(other, level, scf_grid).get(spin2s == 0)
        mf.conv_tol = max(mf.conv_tol, NEIGHBOUR_CONV_TOL_HARTREE)
        run = ladder(mf, None)
        spent.append(run.cycles)
        if not run.converged:
            notes.append(f"neighbour 2S={spin2s} did not converge at this geometry: that start skipped")
            return None
        dm = np.asarray(run.mf.make_rdm1())
        return dm if dm.ndim == 3 else np.array((dm * 0.5, dm * 0.5))

    return [(f"neighbour 2S={spin}", lambda spin=spin: start(spin)) for spin in spins]


def _d_start(mol, d_target):
    """The d-configuration start: the target's levels occupied in the orbitals of a solution's operator
    (the lowest so far; PySCF's minao guess when nothing has converged). None when the lowest solution
    already holds the intended occupation: a start built to it could only come back there."""
    from .dblock import d_configuration_density, occupation_matches, target_occupations

    def start(mf, notes: list[str]):
        if mf.mo_coeff is None:
            return d_configuration_density(mol, mf.get_fock(dm=mf.get_init_guess()), d_target)
        dm = mf.make_rdm1()
        fock = _fock_from_orbitals(mf, mol, np.asarray(mf.mo_energy), np.asarray(mf.mo_coeff), dm)
        if mf.converged and occupation_matches(target_occupations(mol, fock, dm, d_target), d_target):
            notes.append("d-configuration start skipped: the lowest solution already has the intended d occupation")
            return None
        return d_configuration_density(mol, fock, d_target)

    return start


def _calculate(atoms, charge, spin2s, level, guess, stream, cycle_cap_first_rung, chkfile, form,
               neighbours=(), d_target=None, run_search=True, neighbour_spins=()):
    """Everything but the result packing: (outcome, finished run, mol, dispersion, notes)."""
    if form not in FORMS:
        raise InputError(f"form '{form}' is not one of restricted, unrestricted or None (decide)")
    mol = build_mole(atoms, charge, spin2s, level.basis, level.ecp, stream=stream)
    notes = []
    if level.solvent is None and charge <= -2:
        notes.append(f"charge {charge} in the gas phase: the outermost electrons may be unbound "
                     "(a solvent model is advised)")
    restricted_start = spin2s == 0 and form != "unrestricted"
    dm0, note = _guess_density(mol, guess, restricted_start)
    if note:
        notes.append(note)
    scf_grid = level.scf_grid_level if level.scf_grid_level is not None else level.grid_level
    fields = MeanFields(mol, level, scf_grid)
    spent: list[int] = []
    starts = (_neighbour_densities(mol, neighbours, notes)
              + _neighbour_spin_starts(mol, level, scf_grid, neighbour_spins, notes, spent)) if run_search else ()
    outcome = search(fields, spin2s, dm0, cycle_cap_first_rung, notes, form, neighbours=starts,
                     d_start=_d_start(mol, d_target) if d_target is not None and run_search else None,
                     run_search=run_search)
    if spent:
        notes.append(f"neighbour spin states converged at this geometry as starts: {sum(spent)} cycles")
        outcome.cycles += sum(spent)
    run = finish_on_grid(outcome.winner.run, level.grid_level)
    if chkfile is not None and run.mf.mo_coeff is not None:
        from pyscf.scf import chkfile as chk

        chk.dump_scf(mol, str(chkfile), run.mf.e_tot, run.mf.mo_energy, run.mf.mo_coeff, run.mf.mo_occ)
    dispersion, _ = dispersion_correction(mol, level)
    return outcome, run, mol, dispersion, notes


def run_scf(atoms, charge: int, spin2s: int, level: Level, guess=None, log_path=None, threads: int = 1,
            cycle_cap_first_rung: int | None = None, chkfile=None, form: str | None = None,
            neighbour_guesses=(), d_target=None, search_starts: bool = True, neighbour_spins=()) -> ScfResult:
    """One SCF single point at ``level``: the state search, singlet stability, D3(BJ), C-PCM.

    ``guess``: None (minao), a density array, a previous ScfResult or a PySCF chkfile path (projected
    to this basis if it differs); the default start. ``chkfile``: where to save the converged orbitals
    (PySCF format). ``cycle_cap_first_rung`` caps the default start's DIIS rung (the ladder then takes
    over). ``form``: None decides (a singlet runs RKS, then the broken-symmetry search), ``"restricted"``
    or ``"unrestricted"`` force one and run the default start alone (a relaxation keeps the form its first
    step found).
    ``neighbour_guesses``: converged results (or chkfiles, densities) of other spin states at the same
    geometry, each one more start. ``neighbour_spins``: 2S values of neighbouring states to converge here
    (default start only, when the search reaches them), each one more start. ``d_target``: the intended d
    configuration (``dblock.DTarget``, e.g. ``dblock.target_for``), one more start and the check of the converged occupation.
    ``search_starts`` False: the default start only, no stability analysis of open shells.
    Never raises for non-convergence: the result has ``converged=False`` and a ``reason``.
    """
    started = time.perf_counter()
    with _log_stream(log_path) as stream, pyscf_threads(threads):
        outcome, run, mol, dispersion, notes = _calculate(
            atoms, charge, spin2s, level, guess, stream, cycle_cap_first_rung, chkfile, form,
            neighbour_guesses, d_target, search_starts, neighbour_spins)
        return _result(outcome, run, mol, spin2s, dispersion, started, log_path, notes, d_target)


# -------------------------------------------------------------------------------------- gradients

def energy_gradient(atoms, charge: int, spin2s: int, level: Level, guess=None, log_path=None,
                    threads: int = 1, form: str | None = None, neighbour_guesses=(), d_target=None,
                    search_starts: bool = False) -> tuple[float, np.ndarray, ScfResult]:
    """Energy (Eh), gradient (Eh/bohr, shape (N, 3); SCF with C-PCM plus D3(BJ)) and the ScfResult.

    The state search runs only when asked (``search_starts``), as at a relaxation's first step.
    Raises NotConverged (with the ScfResult as ``.result``) when the ladder fails: a gradient of an
    unconverged SCF would mislead the optimiser.
    """
    started = time.perf_counter()
    with _log_stream(log_path) as stream, pyscf_threads(threads):
        outcome, run, mol, dispersion, notes = _calculate(
            atoms, charge, spin2s, level, guess, stream, None, None, form, neighbour_guesses, d_target,
            search_starts)
        result = _result(outcome, run, mol, spin2s, dispersion, started, log_path, notes, d_target)
        if not result.converged:
            error = NotConverged(result.reason)
            error.result = result
            raise error
        scf_gradient = run.mf.nuc_grad_method()
        scf_gradient.verbose = mol.verbose
        gradient = np.asarray(scf_gradient.kernel()) + dispersion_correction(mol, level)[1]
    return result.energy_hartree, gradient, result


class PyscfPotential:
    """Callable ``positions_angstrom (N, 3) -> (energy_hartree, gradient_hartree_per_bohr)`` for relax.

    The first call runs the state search (``neighbour_guesses``, ``d_target`` as in ``run_scf``; off with
    ``search_starts=False``); each later call seeds the SCF with the previous call's converged density
    and keeps the form (RKS or UKS) the first call found, so the search runs once per relaxation.
    ``last`` is the latest ScfResult, ``results`` all of them.
    """

    def __init__(self, atoms, charge: int, spin2s: int, level: Level, guess=None, log_path=None,
                 threads: int = 1, neighbour_guesses=(), d_target=None, search_starts: bool = True):
        self.atoms = atoms.copy()
        self.charge, self.spin2s, self.level = int(charge), int(spin2s), level
        self.guess, self.log_path, self.threads = guess, log_path, threads
        self.neighbour_guesses, self.d_target, self.search_starts = tuple(neighbour_guesses), d_target, search_starts
        self.last: ScfResult | None = None
        self.results: list[ScfResult] = []

    def __call__(self, positions_angstrom) -> tuple[float, np.ndarray]:
        self.atoms.positions = np.asarray(positions_angstrom, dtype=float).reshape(-1, 3)
        if self.last is None:
            energy, gradient, result = energy_gradient(
                self.atoms, self.charge, self.spin2s, self.level, guess=self.guess, log_path=self.log_path,
                threads=self.threads, neighbour_guesses=self.neighbour_guesses, d_target=self.d_target,
                search_starts=self.search_starts)
        else:
            energy, gradient, result = energy_gradient(
                self.atoms, self.charge, self.spin2s, self.level, guess=self.last.density,
                log_path=self.log_path, threads=self.threads,
                form="restricted" if self.last.restricted else "unrestricted")
        self.last = result
        self.results.append(result)
        return energy, gradient


# -------------------------------------------------------------------------------------- Hessians

DISPERSION_STEP_BOHR = 1e-4  # central differences of the analytic D3(BJ) gradient (smooth, cheap)


def analytic_hessian_problem(level: Level) -> str | None:
    """Why PySCF's analytic Hessian cannot serve ``level`` (None when it can).

    Read in PySCF 2.14's hessian modules: RHF/UHF and RKS/UKS with LDA, GGA, meta-GGA and hybrid
    functionals, with density fitting, ECPs and C-PCM are covered; non-local (VV10-type) functionals are
    not. D3(BJ) is not PySCF's (it comes from the dftd3 package) and is added by ``dispersion_hessian``.
    """
    if level.method not in ("hf", "dft"):
        return f"level '{level.name}' is a {level.method} level, not a PySCF one"
    if level.method == "dft":
        from pyscf.dft import libxc

        if libxc.is_nlc(level.functional):
            return f"PySCF has no analytic Hessian for the non-local functional '{level.functional}'"
    return None


def dispersion_hessian(mol, level: Level, step_bohr: float = DISPERSION_STEP_BOHR) -> np.ndarray:
    """D3(BJ) Hessian (Eh/bohr², (3N, 3N)) by central differences of the dftd3 gradient; zeros without it."""
    size = 3 * mol.natm
    hessian = np.zeros((size, size))
    if level.dispersion is None:
        return hessian
    coords_bohr = mol.atom_coords()
    for column in range(size):
        atom, axis = divmod(column, 3)
        gradients = []
        for sign in (1.0, -1.0):
            moved = coords_bohr.copy()
            moved[atom, axis] += sign * step_bohr
            gradients.append(dispersion_correction(mol.set_geom_(moved, unit="Bohr", inplace=False), level)[1])
        hessian[:, column] = (gradients[0] - gradients[1]).ravel() / (2.0 * step_bohr)
    return 0.5 * (hessian + hessian.T)


def energy_hessian(atoms, charge: int, spin2s: int, level: Level, guess=None, log_path=None,
                   threads: int = 1, form: str | None = None) -> tuple[float, np.ndarray, ScfResult]:
    """Energy (Eh), analytic Hessian (Eh/bohr², (3N, 3N), atom-major x, y, z) and the ScfResult.

    The Hessian is PySCF's analytic one of the converged SCF (with C-PCM and density fitting as in the
    level) plus the D3(BJ) part from ``dispersion_hessian``. InputError when PySCF cannot do it for this
    level (``analytic_hessian_problem``; use finite differences of gradients then); NotConverged (with
    ``.result``) when the SCF ladder fails.
    """
    problem = analytic_hessian_problem(level)
    if problem:
        raise InputError(f"{problem}: use finite differences of gradients (fourfold.compute.hessian)")
    started = time.perf_counter()
    with _log_stream(log_path) as stream, pyscf_threads(threads):
        # the state search already ran on this structure's relaxation: one start from its orbitals
        outcome, run, mol, dispersion, notes = _calculate(
            atoms, charge, spin2s, level, guess, stream, None, None, form, run_search=False)
        result = _result(outcome, run, mol, spin2s, dispersion, started, log_path, notes, None)
        if not result.converged:
            error = NotConverged(result.reason)
            error.result = result
            raise error
        # A second-order (newton) SCF object has no Hessian of its own: back to the plain mean field.
        mf = run.mf.undo_soscf() if hasattr(run.mf, "undo_soscf") else run.mf
        solver = mf.Hessian()
        solver.verbose = mol.verbose
        per_atom = np.asarray(solver.kernel())  # (N, N, 3, 3): d²E / dx_ia dx_jb
        size = 3 * mol.natm
        hessian = per_atom.transpose(0, 2, 1, 3).reshape(size, size) + dispersion_hessian(mol, level)
    return result.energy_hartree, 0.5 * (hessian + hessian.T), result

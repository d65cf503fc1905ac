"""PySCF engine: Mole building (with ECPs), the SCF ladder, singlet stability, D3(BJ), C-PCM, gradients.

Inputs are an ``ase.Atoms`` (positions in Å), the total charge and 2S (PySCF's ``mol.spin``) and a
``Level``. Results are plain data (``ScfResult``) so a worker process can hand them to the driver.

Decisions (DESIGN.md "Chemistry decisions"):
- Closed-shell singlets run restricted; open shells unrestricted. A singlet is then checked for an
  RKS → UKS instability (compute.stability); when a lower UKS solution exists it is
  converged and reported as a broken-symmetry singlet with its ⟨S²⟩, never as a closed shell.
- The SCF ladder (``RUNGS``) runs until one rung converges: DIIS from the minao guess (or the given
  guess), level shift + damping, second order (newton), Fermi smearing to get a guess followed by an
  integer-occupation SCF. Non-convergence after the ladder is a result with ``converged=False``.
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
from typing import Any

import numpy as np

from ..errors import ComputeError, InputError, NotConverged
from .levels import Level, solvent_epsilon
from .stability import rks_to_uks_instability
from .threads import pyscf_threads

RUNGS = ("diis", "shift_damp", "newton", "smearing")
S2_TOLERANCE = 0.1            # |<S²> − S(S+1)| above this flags spin contamination (DESIGN.md)
BROKEN_SYMMETRY_S2 = 0.1      # a singlet UKS solution with <S²> above this is open-shell
LOWER_ENERGY_HARTREE = 1e-6   # a UKS singlet must lie this far below the RKS one to be kept
AUFBAU_TOLERANCE_HARTREE = 1e-5
SHIFT_HARTREE = 0.3           # level shift of the second rung (common practice, no source)
DAMPING = 0.5                 # density damping of the second rung (common practice, no source)
SMEARING_SIGMA_HARTREE = 0.01  # Fermi smearing width of the fourth rung (common practice, no source)
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
    heavy = sorted({s for s, z in zip(symbols, numbers) if z >= ECP_MIN_Z})
    mol = gto.Mole()
    mol.atom = [(s, tuple(float(x) for x in p)) for s, p in zip(symbols, np.asarray(atoms.positions, dtype=float))]
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


# -------------------------------------------------------------------------------------- mean fields

def _mean_field(mol, level: Level, restricted: bool, grid_level: int):
    """The SCF object for ``level`` on ``mol``: RKS/UKS (RHF/UHF), density fitting, C-PCM."""
    from pyscf import dft, scf

    if level.method == "hf":
        mf = scf.RHF(mol) if restricted else scf.UHF(mol)
    elif level.method == "dft":
        mf = dft.RKS(mol) if restricted else dft.UKS(mol)
        mf.xc = level.functional
        mf.grids.level = grid_level
    else:
        raise InputError(f"level '{level.name}' is a {level.method} level: the PySCF engine runs hf and dft only")
    if level.density_fit:
        mf = mf.density_fit()
    if level.solvent is not None:
        mf = mf.PCM()
        mf.with_solvent.method = "C-PCM"
        mf.with_solvent.eps = solvent_epsilon(level.solvent)
    mf.conv_tol = level.conv_tol
    mf.max_cycle = level.max_cycles
    mf.chkfile = None
    return mf


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


class _CycleCounter:
    """SCF callback counting iterations (PySCF passes 'cycle' for DIIS, 'imacro' for newton)."""

    def __init__(self):
        self.count = 0

    def __call__(self, envs: dict[str, Any]):
        index = envs.get("cycle", envs.get("imacro"))
        if index is not None:
            self.count = max(self.count, int(index) + 1)


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


def _guess_density(mol, guess, restricted: bool) -> tuple[np.ndarray | None, str | None]:
    """Density from a guess: an array, an ScfResult or a PySCF chkfile; projected across bases.

    A guess from another spin state passes on its total density, split evenly between α and β.
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
    if old_spin2s != mol.spin and dm.ndim == 3:
        # Another spin state: carry over the spatial density, not its spin polarisation (measured on
        # T-4 [CoCl4]2-: the quartet's own α/β densities seed the doublet worse than a cold start).
        dm = dm[0] + dm[1]
    return _spin_form(dm, restricted, mol.nao), None


def _density_from_orbitals(mo_coeff: np.ndarray, mo_occ: np.ndarray) -> np.ndarray:
    if mo_coeff.ndim == 3:
        return np.array([(c * o) @ c.T for c, o in zip(mo_coeff, mo_occ)])
    return (mo_coeff * mo_occ) @ mo_coeff.T


# ---------------------------------------------------------------------------------------- the ladder

@dataclass
class _Run:
    """Working state of one ladder run (internal; the mean field stays inside the worker)."""

    mf: Any
    converged: bool
    rung: str | None
    cycles: int
    failures: list[str]


def _run_rung(mf, rung: str, dm0, max_cycle: int) -> tuple[Any, bool, int, str | None]:
    """Run one rung from ``dm0``; returns (mean field used, converged, cycles, failure note)."""
    counter = _CycleCounter()
    try:
        if rung == "diis":
            work = mf.copy()
            work.max_cycle = max_cycle
            work.callback = counter
            work.kernel(dm0=dm0)
        elif rung == "shift_damp":
            work = mf.copy()
            work.level_shift, work.damp, work.max_cycle = SHIFT_HARTREE, DAMPING, max_cycle
            work.callback = counter
            work.kernel(dm0=dm0)
        elif rung == "newton":
            work = mf.copy().newton()
            work.max_cycle = max_cycle
            work.callback = counter
            work.kernel(dm0=dm0)
        elif rung == "smearing":
            smeared = mf.copy().smearing(sigma=SMEARING_SIGMA_HARTREE, method="fermi", fix_spin=True)
            smeared.max_cycle, smeared.callback = max_cycle, counter
            smeared.kernel(dm0=dm0)
            work = mf.copy()
            work.max_cycle, work.callback = max_cycle, counter
            offset = counter.count
            counter.count = 0
            work.kernel(dm0=smeared.make_rdm1())
            counter.count += offset
        else:
            raise ValueError(rung)
    except (np.linalg.LinAlgError, RuntimeError, ValueError, FloatingPointError) as exc:
        return mf, False, counter.count, f"{rung}: {type(exc).__name__}: {exc}"
    return work, bool(work.converged), counter.count, None


def _rung_cap(rung: str, max_cycles: int) -> int:
    """Cycle budget of a rung: newton's macro-iterations each cost several Fock builds, so fewer."""
    return max(1, -(-max_cycles // 4)) if rung == "newton" else max_cycles


def _ladder(mf, dm0, cycle_cap_first_rung: int | None, rungs: tuple[str, ...] = RUNGS) -> _Run:
    """Climb ``rungs`` from ``dm0`` until one converges; each rung starts from the last density reached."""
    cycles, failures, last = 0, [], None
    for index, rung in enumerate(rungs):
        cap = _rung_cap(rung, mf.max_cycle)
        if index == 0 and cycle_cap_first_rung is not None:
            cap = int(cycle_cap_first_rung)
        work, converged, used, failure = _run_rung(mf, rung, dm0, cap)
        cycles += used
        if failure:
            failures.append(failure)
        if work.mo_coeff is not None:
            last = work
            dm0 = work.make_rdm1()
        if converged:
            return _Run(work, True, rung, cycles, failures)
    return _Run(last if last is not None else mf, False, None, cycles, failures)


def _finish_on_grid(run: _Run, grid_level: int) -> _Run:
    """Re-converge on the final grid from the light-grid density (same rung, cycles added)."""
    mf = run.mf
    if not run.converged or not hasattr(mf, "grids") or mf.grids.level == grid_level:
        return run
    work = mf._scf.copy() if hasattr(mf, "_scf") else mf.copy()  # after newton: finish with plain DIIS
    work.grids = work.grids.copy()
    work.grids.level = grid_level
    work.grids.build()
    counter = _CycleCounter()
    work.callback = counter
    work.kernel(dm0=mf.make_rdm1())
    return _Run(work, bool(work.converged), run.rung, run.cycles + counter.count, run.failures)


# ------------------------------------------------------------------------------ singlet stability

def _mixed_homo_lumo_guess(mf) -> np.ndarray:
    """Broken-symmetry guess from restricted orbitals: α gets (HOMO+LUMO)/√2, β (HOMO−LUMO)/√2.

    Common practice (e.g. a 'guess=mix' start), no source.
    """
    mo, occ = mf.mo_coeff, mf.mo_occ
    homo = int(np.flatnonzero(occ > 0)[-1])
    lumo = homo + 1
    mo_a, mo_b = mo.copy(), mo.copy()
    mo_a[:, homo] = (mo[:, homo] + mo[:, lumo]) / np.sqrt(2)
    mo_b[:, homo] = (mo[:, homo] - mo[:, lumo]) / np.sqrt(2)
    half = occ * 0.5
    return np.array([(mo_a * half) @ mo_a.T, (mo_b * half) @ mo_b.T])


# ----------------------------------------------------------------------------------------- results

def _gap_and_aufbau(mo_energy: np.ndarray, mo_occ: np.ndarray) -> tuple[float, bool]:
    gaps = []
    for energies, occupations in zip(np.atleast_2d(mo_energy), np.atleast_2d(mo_occ)):
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
        return np.array([_fock_from_orbitals(mf, mol, e, c, dm) for e, c in zip(mo_energy, mo_coeff)])
    projected = overlap @ mo_coeff
    return (projected * mo_energy) @ projected.T


def _result(run: _Run, mol, spin2s: int, restricted: bool, dispersion: float, started: float, log_path,
            notes: list[str], extra_cycles: int) -> ScfResult:
    mf = run.mf
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
    cycles = run.cycles + extra_cycles
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
        density=np.asarray(dm), fock_hartree=np.asarray(fock),
    )


FORMS = (None, "restricted", "unrestricted")


def _solve(mol, level: Level, spin2s: int, guess, cycle_cap_first_rung, notes: list[str], form):
    """The ladder and, for a singlet without a given form, the broken-symmetry search.

    A singlet (form None) runs RKS with DIIS only (at most half the cycle budget). If that converges,
    the RKS → UKS stability analysis decides whether a broken-symmetry UKS solution is sought; if it
    does not, the UKS search starts at once from a HOMO/LUMO-mixed guess. The stronger rungs are spent
    on UKS, whose space contains the closed shell, not on RKS (DESIGN.md: tetrahedral singlets converged
    only as broken-symmetry UKS solutions, and one did not converge restricted even with newton).
    Returns (run, restricted, cycles spent on the discarded alternative).
    """
    scf_grid = level.scf_grid_level if level.scf_grid_level is not None else level.grid_level
    restricted = spin2s == 0 and form != "unrestricted"
    dm0, note = _guess_density(mol, guess, restricted)
    if note:
        notes.append(note)
    search = restricted and form is None
    rungs = RUNGS[:1] if search else RUNGS
    if search and cycle_cap_first_rung is None:
        # Closed shells that converge do so in 10–24 DIIS cycles (DESIGN.md); spend no more on the probe.
        cycle_cap_first_rung = max(1, level.max_cycles // 2)
    run = _finish_on_grid(_ladder(_mean_field(mol, level, restricted, scf_grid), dm0, cycle_cap_first_rung,
                                  rungs), level.grid_level)
    if not search:
        return run, restricted, 0
    if run.converged:
        _, uks_dm = rks_to_uks_instability(run.mf)
        if uks_dm is None:
            notes.append("RKS solution stable towards UKS")
            return run, True, 0
    elif run.mf.mo_coeff is not None:
        uks_dm = _mixed_homo_lumo_guess(run.mf)
        notes.append("RKS did not converge with DIIS: UKS from a HOMO/LUMO-mixed guess")
    else:
        return run, True, 0
    uks = _finish_on_grid(_ladder(_mean_field(mol, level, False, scf_grid), uks_dm, None), level.grid_level)
    if not uks.converged:
        notes.append("broken-symmetry UKS search did not converge")
        return (uks, False, run.cycles) if not run.converged else (run, True, uks.cycles)
    if not run.converged or uks.mf.e_tot < run.mf.e_tot - LOWER_ENERGY_HARTREE:
        if _s2(uks.mf, False, 0) <= BROKEN_SYMMETRY_S2:
            notes.append("UKS singlet converged to a closed-shell solution")
        return uks, False, run.cycles
    notes.append("UKS search from the RKS instability found no lower solution")
    return run, True, uks.cycles


def _calculate(atoms, charge, spin2s, level, guess, stream, cycle_cap_first_rung, chkfile, form):
    """Everything but the result packing: (run, mol, restricted, dispersion, notes, extra cycles)."""
    if form not in FORMS:
        raise InputError(f"form '{form}' is not one of restricted, unrestricted or None (decide)")
    mol = build_mole(atoms, charge, spin2s, level.basis, level.ecp, stream=stream)
    notes = []
    if level.solvent is None and charge <= -2:
        notes.append(f"charge {charge} in the gas phase: the outermost electrons may be unbound "
                     "(a solvent model is advised)")
    run, restricted, extra = _solve(mol, level, spin2s, guess, cycle_cap_first_rung, notes, form)
    if chkfile is not None and run.mf.mo_coeff is not None:
        from pyscf.scf import chkfile as chk

        chk.dump_scf(mol, str(chkfile), run.mf.e_tot, run.mf.mo_energy, run.mf.mo_coeff, run.mf.mo_occ)
    dispersion, _ = dispersion_correction(mol, level)
    return run, mol, restricted, dispersion, notes, extra


def run_scf(atoms, charge: int, spin2s: int, level: Level, guess=None, log_path=None, threads: int = 1,
            cycle_cap_first_rung: int | None = None, chkfile=None, form: str | None = None) -> ScfResult:
    """One SCF single point at ``level``: ladder, singlet stability, D3(BJ), C-PCM.

    ``guess``: None (minao), a density array, a previous ScfResult or a PySCF chkfile path (projected
    to this basis if it differs). ``chkfile``: where to save the converged orbitals (PySCF format).
    ``cycle_cap_first_rung`` caps the DIIS rung (the ladder then takes over). ``form``: None decides
    (a singlet runs RKS, then the broken-symmetry search), ``"restricted"`` or ``"unrestricted"`` force
    one (a relaxation keeps the form its first step found).
    Never raises for non-convergence: the result has ``converged=False`` and a ``reason``.
    """
    started = time.perf_counter()
    with _log_stream(log_path) as stream, pyscf_threads(threads):
        run, mol, restricted, dispersion, notes, extra = _calculate(
            atoms, charge, spin2s, level, guess, stream, cycle_cap_first_rung, chkfile, form)
        return _result(run, mol, spin2s, restricted, dispersion, started, log_path, notes, extra)


# -------------------------------------------------------------------------------------- gradients

def energy_gradient(atoms, charge: int, spin2s: int, level: Level, guess=None, log_path=None,
                    threads: int = 1, form: str | None = None) -> tuple[float, np.ndarray, ScfResult]:
    """Energy (Eh), gradient (Eh/bohr, shape (N, 3); SCF with C-PCM plus D3(BJ)) and the ScfResult.

    Raises NotConverged (with the ScfResult as ``.result``) when the ladder fails: a gradient of an
    unconverged SCF would mislead the optimiser.
    """
    started = time.perf_counter()
    with _log_stream(log_path) as stream, pyscf_threads(threads):
        run, mol, restricted, dispersion, notes, extra = _calculate(
            atoms, charge, spin2s, level, guess, stream, None, None, form)
        result = _result(run, mol, spin2s, restricted, dispersion, started, log_path, notes, extra)
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

    Each call seeds the SCF with the previous call's converged density, and after the first call keeps
    the form (RKS or UKS) that call found, so the singlet stability search runs once per relaxation.
    ``last`` is the latest ScfResult, ``results`` all of them.
    """

    def __init__(self, atoms, charge: int, spin2s: int, level: Level, guess=None, log_path=None,
                 threads: int = 1):
        self.atoms = atoms.copy()
        self.charge, self.spin2s, self.level = int(charge), int(spin2s), level
        self.guess, self.log_path, self.threads = guess, log_path, threads
        self.last: ScfResult | None = None
        self.results: list[ScfResult] = []

    def __call__(self, positions_angstrom) -> tuple[float, np.ndarray]:
        self.atoms.positions = np.asarray(positions_angstrom, dtype=float).reshape(-1, 3)
        if self.last is None:
            guess, form = self.guess, None
        else:
            guess, form = self.last.density, ("restricted" if self.last.restricted else "unrestricted")
        energy, gradient, result = energy_gradient(self.atoms, self.charge, self.spin2s, self.level,
                                                   guess=guess, log_path=self.log_path,
                                                   threads=self.threads, form=form)
        self.last = result
        self.results.append(result)
        return energy, gradient

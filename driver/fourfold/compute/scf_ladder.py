"""The SCF ladder: mean-field objects for a level, and the rungs tried in turn until one converges.

``MeanFields`` builds the RKS/UKS (RHF/UHF) objects of one calculation once and lets them share what
depends only on the geometry and the basis (the density-fitting tensor, the integration grid), so the
starts, stability analyses and both spin forms of a state search pay for them once.

The ladder (``RUNGS``): DIIS from the start density, level shift + damping, second order (newton),
Fermi smearing to get a guess followed by an integer-occupation SCF. Every rung after the first starts
from the lowest-energy density any earlier rung reached, not from the start density or a diverged last
iterate. Cycles are counted over all rungs (newton macro-iterations count one each).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..errors import InputError
from .levels import Level, solvent_epsilon

RUNGS = ("diis", "shift_damp", "newton", "smearing")
SHIFT_HARTREE = 0.3           # level shift of the second rung (common practice, no source)
DAMPING = 0.5                 # density damping of the second rung (common practice, no source)
SMEARING_SIGMA_HARTREE = 0.01  # Fermi smearing width of the fourth rung (common practice, no source)


def mean_field(mol, level: Level, restricted: bool, grid_level: int):
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


class MeanFields:
    """The restricted and unrestricted SCF objects of one calculation, built on first use.

    The second one built takes the first one's density-fitting object (its three-index tensor is built
    once, on the first Fock build) and integration grid: both depend only on the molecule and the basis.
    """

    def __init__(self, mol, level: Level, grid_level: int):
        self.mol, self.level, self.grid_level = mol, level, grid_level
        self._built: dict[bool, Any] = {}

    def get(self, restricted: bool):
        if restricted not in self._built:
            mf = mean_field(self.mol, self.level, restricted, self.grid_level)
            for other in self._built.values():
                if hasattr(other, "with_df") and hasattr(mf, "with_df"):
                    mf.with_df = other.with_df
                if hasattr(other, "grids") and hasattr(mf, "grids"):
                    mf.grids = other.grids
            self._built[restricted] = mf
        return self._built[restricted]


class CycleCounter:
    """SCF callback: counts iterations (PySCF passes 'cycle' for DIIS, 'imacro' for newton) and keeps the
    lowest-energy density seen, the start of the next rung when this one fails."""

    def __init__(self):
        self.count = 0
        self.best_energy = float("inf")
        self.best_density = None

    def __call__(self, envs: dict[str, Any]):
        index = envs.get("cycle", envs.get("imacro"))
        if index is not None:
            self.count = max(self.count, int(index) + 1)
        energy, density = envs.get("e_tot"), envs.get("dm")
        if energy is not None and density is not None and np.isfinite(energy) and energy < self.best_energy:
            self.best_energy, self.best_density = float(energy), np.array(density)


@dataclass
class Run:
    """Working state of one ladder run (internal; the mean field stays inside the worker)."""

    mf: Any
    converged: bool
    rung: str | None
    cycles: int
    failures: list[str]


def plain(mf):
    """The plain SCF object behind a second-order (newton) one, with its converged orbitals."""
    return mf.undo_soscf() if hasattr(mf, "undo_soscf") else mf


def _run_rung(mf, rung: str, dm0, max_cycle: int, counter: CycleCounter) -> tuple[Any, bool, str | None]:
    """Run one rung from ``dm0``; returns (mean field used, converged, failure note)."""
    try:
        if rung == "diis":
            work = mf.copy()
        elif rung == "shift_damp":
            work = mf.copy()
            work.level_shift, work.damp = SHIFT_HARTREE, DAMPING
        elif rung == "newton":
            work = mf.copy().newton()
        elif rung == "smearing":
            smeared = mf.copy().smearing(sigma=SMEARING_SIGMA_HARTREE, method="fermi", fix_spin=True)
            smeared.max_cycle, smeared.callback = max_cycle, counter
            smeared.kernel(dm0=dm0)
            offset, counter.count = counter.count, 0
            dm0 = smeared.make_rdm1()
            work = mf.copy()
        else:
            raise ValueError(rung)
        work.max_cycle, work.callback = max_cycle, counter
        work.kernel(dm0=dm0)
        if rung == "smearing":
            counter.count += offset
    except (np.linalg.LinAlgError, RuntimeError, ValueError, FloatingPointError) as exc:
        return mf, False, f"{rung}: {type(exc).__name__}: {exc}"
    return work, bool(work.converged), None


def _rung_cap(rung: str, max_cycles: int) -> int:
    """Cycle budget of a rung: newton's macro-iterations each cost several Fock builds, so fewer."""
    return max(1, -(-max_cycles // 4)) if rung == "newton" else max_cycles


def ladder(mf, dm0, cycle_cap_first_rung: int | None = None, rungs: tuple[str, ...] = RUNGS) -> Run:
    """Climb ``rungs`` from ``dm0`` until one converges; each rung starts from the best density reached."""
    cycles, failures, last = 0, [], None
    best_energy = float("inf")
    for index, rung in enumerate(rungs):
        cap = _rung_cap(rung, mf.max_cycle)
        if index == 0 and cycle_cap_first_rung is not None:
            cap = int(cycle_cap_first_rung)
        counter = CycleCounter()
        work, converged, failure = _run_rung(mf, rung, dm0, cap, counter)
        cycles += counter.count
        if failure:
            failures.append(failure)
        if work.mo_coeff is not None:
            last = work
        if converged:
            return Run(plain(work), True, rung, cycles, failures)
        if counter.best_density is not None and counter.best_energy < best_energy:
            best_energy, dm0 = counter.best_energy, counter.best_density
    return Run(plain(last) if last is not None else mf, False, None, cycles, failures)


def finish_on_grid(run: Run, grid_level: int) -> Run:
    """Re-converge on the final grid from the light-grid density (same rung, cycles added)."""
    mf = run.mf
    if not run.converged or not hasattr(mf, "grids") or mf.grids.level == grid_level:
        return run
    work = mf.copy()
    work.grids = work.grids.copy()
    work.grids.level = grid_level
    work.grids.build()
    counter = CycleCounter()
    work.callback = counter
    work.kernel(dm0=mf.make_rdm1())
    return Run(work, bool(work.converged), run.rung, run.cycles + counter.count, run.failures)

"""State search: one spin state converged from several starts, each followed downhill, the lowest kept.

An SCF converges to the solution nearest its start, and an open-shell d-metal state has several (each
a different d configuration, or a spin-coupling pattern). Measured with B3LYP-D3(BJ)/def2-SVP at
GFN2-xTB-held structures: the SP-4 [NiCl4]2- triplet from PySCF's default guess lands 54.8 kJ/mol above
the solution reached from the singlet's density; at the ideal T-4 [CoCl4]2- structure the doublet started
from the quartet's total density lands 98 kJ/mol above the one from the default guess (⟨S²⟩ 0.757 against
1.753), and that solution is a saddle point: the UKS stability analysis finds a negative Hessian
eigenvalue and two steps along it reach the lower solution.

Starts, in order:
1. ``default``: the given guess, else PySCF's minao guess. A singlet first runs restricted (DIIS only);
   when the RKS → UKS analysis finds an instability, UKS continues from the rotated orbitals, and a
   closed shell stable towards UKS ends the search (nothing else could come out lower: the other starts
   are skipped and the notes say so).
2. ``Hückel guess`` (open shells only): PySCF's Hückel guess from occupation-averaged atomic orbitals
   (Lehtola, J. Chem. Theory Comput. 15, 1593 (2019); docs/sources.md, lehtola2019-guess), a second cold
   start that costs one SCF. Measured at `quick` on the demo's T-4 [NiCl4]2- triplet (GFN2-xTB geometry):
   it converges in 13 cycles to a solution 11.5 kJ/mol below the one the minao guess reaches in 14, which
   the stability analysis does not see (a separate minimum).
3. ``neighbour 2S=…``: the converged α and β densities of another spin state at the same geometry, as
   they are; the first diagonalisation re-occupies them for this 2S, which flips one spin. The neighbour
   is converged only when this start is reached (a stable closed shell never pays for it).
4. ``d-configuration``: the ligand-field configuration intended for this state
   (``fourfold.compute.dblock.DTarget``), built on the lowest solution found so far.
Every unrestricted solution gets the internal stability analysis; an instability is followed (a new SCF
from the rotated orbitals) up to ``FOLLOW_MAX`` times while the energy goes down. A start that ends on a
solution already analysed is not analysed again.

The winner is the lowest converged solution of the right spin character (``right_spin_character``); the
result records every start's energy, which start won and the spread.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .scf_ladder import RUNGS, MeanFields, Run, ladder
from .stability import rks_to_uks_instability, uks_internal_instability

FOLLOW_MAX = 3                  # instability steps followed from one start
SAME_ENERGY_HARTREE = 1e-4      # two solutions this close in energy (0.26 kJ/mol) and ⟨S²⟩ are the same one
SAME_S2 = 0.02
LOWER_ENERGY_HARTREE = 1e-6     # a solution must lie this far below another to replace it
BROKEN_SYMMETRY_S2 = 0.1        # a singlet UKS solution with <S²> above this is open-shell
SPIN_CHARACTER_MARGIN = 0.1


def right_spin_character(s2: float, spin2s: int) -> bool:
    """Whether ⟨S²⟩ is nearer S(S+1) than (S+1)(S+2): not mostly the next higher spin state.

    The midpoint is S(S+1) + S + 1; a broken-symmetry singlet of two electrons sits at ⟨S²⟩ = 1, on it,
    so ``SPIN_CHARACTER_MARGIN`` is allowed beyond. E.g. a doublet with ⟨S²⟩ 1.75 (three open shells,
    one of them β) passes; one with 3.7 is a quartet in disguise.
    """
    s = spin2s / 2.0
    return s2 <= s * (s + 1.0) + s + 1.0 + SPIN_CHARACTER_MARGIN


@dataclass
class Solution:
    """Where one start ended (internal): its run, the form, instability steps and the lowest Hessian
    eigenvalue of the final solution (None when not analysed)."""

    label: str
    run: Run
    restricted: bool
    cycles: int
    followed: int = 0
    eigenvalue: float | None = None
    first_energy: float | None = None   # before any instability was followed

    @property
    def energy(self) -> float:
        return float(self.run.mf.e_tot) if self.run.mf.mo_coeff is not None else float("nan")

    def s2(self, spin2s: int) -> float:
        if self.restricted:
            return spin2s / 2.0 * (spin2s / 2.0 + 1.0)
        return float(self.run.mf.spin_square()[0])

    def record(self, spin2s: int, dispersion_hartree: float) -> dict:
        return {"label": self.label, "energy_hartree": self.energy + dispersion_hartree,
                "converged": self.run.converged, "s2": self.s2(spin2s) if self.run.mf.mo_coeff is not None
                else float("nan"), "cycles": self.cycles, "restricted": self.restricted,
                "instabilities_followed": self.followed, "stability_eigenvalue": self.eigenvalue,
                "first_energy_hartree": (self.first_energy if self.first_energy is not None else self.energy)
                + dispersion_hartree}


@dataclass
class Outcome:
    """The search's result: the winner, every start's solution and all SCF cycles spent."""

    winner: Solution
    solutions: list[Solution]
    cycles: int


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


def _restricted_singlet(fields: MeanFields, dm0, cycle_cap, max_cycles: int, notes: list[str]) -> list[Solution]:
    """A singlet's default start: RKS with DIIS only, then the broken-symmetry UKS search.

    RKS gets at most half the cycle budget. If it converges, the RKS → UKS stability analysis decides
    whether a broken-symmetry UKS solution is sought; if it does not, the UKS search starts at once from a
    HOMO/LUMO-mixed guess. The stronger rungs are spent on UKS, whose space contains the closed shell:
    tetrahedral singlets converged only as broken-symmetry UKS solutions, and one did not converge
    restricted even with newton. Returns the solutions found, the one to keep first; a single restricted
    solution means a closed shell stable towards UKS.
    """
    if cycle_cap is None:
        cycle_cap = max(1, max_cycles // 2)  # closed shells that converge do so in 10–24 DIIS cycles
    run = ladder(fields.get(True), dm0, cycle_cap, RUNGS[:1])
    rks = Solution("default (RKS)", run, True, run.cycles)
    if run.converged:
        rks.eigenvalue, uks_dm = rks_to_uks_instability(run.mf)
        if uks_dm is None:
            notes.append("RKS solution stable towards UKS")
            return [rks]
    elif run.mf.mo_coeff is not None:
        uks_dm = _mixed_homo_lumo_guess(run.mf)
        notes.append("RKS did not converge with DIIS: UKS from a HOMO/LUMO-mixed guess")
    else:
        return [rks]
    run = ladder(fields.get(False), uks_dm)
    uks = Solution("default (UKS)", run, False, run.cycles)
    if not uks.run.converged:
        notes.append("broken-symmetry UKS search did not converge")
        return [uks, rks] if not rks.run.converged else [rks, uks]
    if not rks.run.converged or uks.energy < rks.energy - LOWER_ENERGY_HARTREE:
        if uks.s2(0) <= BROKEN_SYMMETRY_S2:
            notes.append("UKS singlet converged to a closed-shell solution")
        return [uks, rks]
    notes.append("UKS search from the RKS instability found no lower solution")
    return [rks, uks]


def _same(a: Solution, b: Solution, spin2s: int) -> bool:
    return (a.run.converged and b.run.converged and abs(a.energy - b.energy) < SAME_ENERGY_HARTREE
            and abs(a.s2(spin2s) - b.s2(spin2s)) < SAME_S2)


def _follow(fields: MeanFields, solution: Solution, analysed: list[Solution], spin2s: int, notes: list[str]):
    """Internal stability of an unrestricted solution, and instabilities followed downhill (in place)."""
    if solution.restricted or not solution.run.converged:
        return
    for known in analysed:
        if _same(solution, known, spin2s):
            solution.eigenvalue = known.eigenvalue
            return
    solution.first_energy = solution.energy
    while True:
        solution.eigenvalue, rotated = uks_internal_instability(solution.run.mf)
        if rotated is None or solution.followed >= FOLLOW_MAX:
            break
        mf = solution.run.mf
        step = ladder(fields.get(False), mf.make_rdm1(rotated, mf.mo_occ))
        solution.cycles += step.cycles
        if not step.converged or step.mf.e_tot > mf.e_tot - LOWER_ENERGY_HARTREE:
            notes.append(f"start '{solution.label}': following the instability found no lower solution")
            break
        solution.run, solution.followed = step, solution.followed + 1
    if solution.followed:
        notes.append(f"start '{solution.label}': {solution.followed} instability step(s) followed downhill")
    analysed.append(solution)


def choose(solutions: list[Solution], spin2s: int) -> Solution:
    """The lowest converged solution of the right spin character; else the lowest converged; else the first."""
    converged = [s for s in solutions if s.run.converged]
    right = [s for s in converged if right_spin_character(s.s2(spin2s), spin2s)]
    pool = right or converged
    if not pool:
        return solutions[0]
    best = pool[0]
    for candidate in pool[1:]:
        if candidate.energy < best.energy - LOWER_ENERGY_HARTREE:
            best = candidate
    return best


def search(fields: MeanFields, spin2s: int, dm0, cycle_cap, notes: list[str], form: str | None,
           neighbours=(), d_start=None, run_search: bool = True) -> Outcome:
    """Every start for one state, each followed downhill; the winner chosen by ``choose``.

    ``dm0``: the default start's density (None: minao). ``form``: None decides (singlets try RKS first),
    "restricted"/"unrestricted" force one and run the default start alone (a relaxation step).
    ``neighbours``: (label, callable) pairs, each callable returning a UKS density or None (computed only
    when the search gets that far). ``d_start``: a callable taking the lowest solution's mean
    field and the notes, returning the d-configuration start density, or None when that start cannot
    differ (it says why in the notes). ``run_search`` False: the default start only.
    """
    if spin2s == 0 and form is None:
        solutions = _restricted_singlet(fields, dm0, cycle_cap, fields.level.max_cycles, notes)
    else:
        restricted = spin2s == 0 and form == "restricted"
        run = ladder(fields.get(restricted), dm0, cycle_cap)
        solutions = [Solution("default", run, restricted, run.cycles)]
    if not run_search or form is not None:
        return Outcome(solutions[0], solutions, sum(s.cycles for s in solutions))
    if len(solutions) == 1 and solutions[0].restricted and solutions[0].run.converged:
        notes.append("closed-shell singlet stable towards UKS: neighbour and d-configuration starts skipped")
        return Outcome(solutions[0], solutions, solutions[0].cycles)
    analysed: list[Solution] = []
    for solution in solutions:
        _follow(fields, solution, analysed, spin2s, notes)
    starts = []
    if spin2s > 0:
        starts.append(("Hückel guess", lambda: fields.get(False).get_init_guess(key="huckel")))
    starts += list(neighbours)
    if d_start is not None:
        starts.append(("d-configuration", lambda: d_start(choose(solutions, spin2s).run.mf, notes)))
    for label, density in starts:
        dm = density()
        if dm is None:
            continue
        run = ladder(fields.get(False), dm)
        solution = Solution(label, run, False, run.cycles)
        _follow(fields, solution, analysed, spin2s, notes)
        for known in solutions:
            if _same(solution, known, spin2s):
                notes.append(f"start '{label}' reached the solution of start '{known.label}'")
                break
        solutions.append(solution)
    return Outcome(choose(solutions, spin2s), solutions, sum(s.cycles for s in solutions))

"""The comparison: computed energies of every arrangement × isomer × 2S beside the ligand-field estimate.

Built from a study's store (final jobs only) and the study itself (for the estimate and the job list), so
it can be made again at any time from the folder. Energies are relative to the complex's lowest computed
state, converted only here (CODATA 2018, fourfold.units).

The verdict (the computed ground state) rests on free minima where the study has free relaxations: each is
named by where it ended (nearest reference shape by CShM, tau4), not where it started, because a held
relaxation forbids the Jahn–Teller flattening and the C2v opening of the boundary cases. Held energies stay
as the arrangement ladder ("what holding SP-4 costs"). A study with held relaxations only gets a
"held only" verdict that says what it cannot see. A state that failed, is pending or did not converge is
left out of the verdict and named: the verdict is then "incomplete". Broken-symmetry singlets enter with
their Yamaguchi-projected energy where the triplet at the same geometry was computed (both are shown).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field

from ..compute.levels import level_for_charge
from ..units import convert_energy, energy_unit

SPIN_CONTAMINATION_LIMIT = 0.1  # |⟨S²⟩ − S(S+1)| above this is flagged (fourfold default)
POPULATION_WINDOW_KJ_MOL = 10.0  # T-4/SP-4 populations are given when the forms lie this close (fourfold default)
START_SPREAD_LIMIT_KJ_MOL = 4.0  # starts of one state further apart than this are shown beside it (fourfold default)
FREE_MINIMA, HELD_ONLY = "free minima", "held only"
HELD_ONLY_BLIND_SPOT = ("held relaxations keep the ideal L–M–L angles, so they cannot show a Jahn–Teller "
                        "flattening or a C2v opening of the tetrahedron; add free relaxations for a verdict on minima")


@dataclass
class StateRecord:
    formula: str
    arrangement: str
    isomer: str
    spin2s: int
    kind: str
    status: str  # done | failed | pending
    engine: str | None = None
    energy_hartree: float | None = None
    relative_kj_mol: float | None = None
    estimate_kj_mol: float | None = None
    converged: bool | None = None
    reason: str | None = None
    tau4: float | None = None
    tau4_prime: float | None = None
    nearest_shape: str | None = None
    s2: float | None = None
    s2_expected: float | None = None
    spin_contaminated: bool | None = None
    broken_symmetry: bool | None = None
    rung: str | None = None
    cycles: int | None = None
    steps: int | None = None
    d_levels_cm: list | None = None
    fitted_e_sigma_cm: dict | None = None  # ligand name -> AOM e_σ fitted to the projected d block
    fitted_e_pi_cm: dict | None = None
    wall_seconds: float | None = None
    d_level_labels: list | None = None
    fit_tied_pi: bool | None = None
    fit_rms_cm: float | None = None
    fit_condition_number: float | None = None
    fit_withheld: str | None = None  # why the AOM fit of this state's d block is not reported
    fit_at_bound: list | None = None
    trans_angle_deg: float | None = None  # path points only
    job_key: str | None = None
    geometry_converged: bool | None = None  # the parent relaxation of a single point
    homo_energy_hartree: float | None = None
    aufbau: bool | None = None
    projected_energy_hartree: float | None = None  # Yamaguchi-projected BS singlet
    high_spin_energy_hartree: float | None = None  # the triplet at the BS singlet's geometry
    unprojected_relative_kj_mol: float | None = None
    starts: list | None = None  # state search: every SCF start's label and energy
    spread_kj_mol: float | None = None
    start_won: str | None = None
    occupation_matches: bool | None = None
    frequencies_cm: list | None = None  # free minima: harmonic frequencies (imaginary negative)
    n_imaginary: int | None = None
    frequency_level: str | None = None
    zpe_hartree: float | None = None
    enthalpy_hartree: float | None = None
    entropy_hartree_per_k: float | None = None
    gibbs_hartree: float | None = None
    symmetry_number: int | None = None
    relative_gibbs_kj_mol: float | None = None
    mu_eff_spin_only: float | None = None  # μB
    warnings: list = field(default_factory=list)

    structure: tuple | None = field(default=None, repr=False)  # (symbols, positions Å) of the final structure

    @property
    def name(self) -> str:
        return f"{self.arrangement} {self.isomer}".strip()

    @property
    def verdict_energy_hartree(self) -> float | None:
        """The energy the verdict uses: the projected one for a BS singlet where it exists."""
        return self.projected_energy_hartree if self.projected_energy_hartree is not None else self.energy_hartree

    @property
    def exclusion(self) -> str | None:
        """Why this state cannot enter a verdict (None: it can)."""
        if self.status != "done" or self.energy_hartree is None:
            return self.status if not self.reason else f"{self.status}: {self.reason}"
        if self.converged is False:
            return "not converged"
        if self.geometry_converged is False:
            return "its relaxation did not converge"
        return None

    @property
    def ended_as(self) -> str:
        """Where a free relaxation ended (nearest reference shape); a held one is its arrangement."""
        if self.kind == "free" and self.nearest_shape:
            return self.nearest_shape
        return self.arrangement

    @property
    def impure(self) -> str | None:
        """'broken-symmetry' / 'spin-contaminated' for solutions whose spin is not what the label says."""
        if self.broken_symmetry:
            return "broken-symmetry"
        if self.spin_contaminated:
            return "spin-contaminated"
        return None


@dataclass
class ComplexComparison:
    formula: str
    d_electrons: int
    records: list[StateRecord]
    estimate: object  # fourfold.field.estimate.Estimate
    level: str
    path_records: list[StateRecord] = field(default_factory=list)  # held relaxations along the D2d path
    temperature_k: float = 298.15  # of the free energies (the study's)

    @property
    def ladder_kind(self) -> str:
        """Which relaxations make the arrangement ladder: held where the study has them, else free."""
        return "held" if any(r.kind == "held" for r in self.records) else "free"

    def held_or_free(self) -> list[StateRecord]:
        """The arrangement ladder ("what holding SP-4 costs"): every state of the ladder's kind with an energy.
        Unlike the verdict it keeps states whose relaxation stopped unconverged (their notes say so)."""
        return [r for r in self.records if r.kind == self.ladder_kind and r.status == "done"
                and r.energy_hartree is not None]

    @property
    def basis(self) -> str:
        """Which energies the verdict uses: free minima where the study has free relaxations, else held only."""
        return FREE_MINIMA if any(r.kind == "free" for r in self.records) else HELD_ONLY

    def _basis_records(self) -> list[StateRecord]:
        kind = "free" if self.basis == FREE_MINIMA else "held"
        return [r for r in self.records if r.kind == kind]

    def verdict_records(self) -> list[StateRecord]:
        return [r for r in self._basis_records() if r.exclusion is None]

    def missing(self) -> list[tuple[StateRecord, str]]:
        """States the verdict needs but cannot use, each with the reason."""
        return [(r, r.exclusion) for r in self._basis_records() if r.exclusion is not None]

    @property
    def complete(self) -> bool:
        return not self.missing()

    def _ranked(self) -> list[StateRecord]:
        return sorted(self.verdict_records(), key=lambda r: r.verdict_energy_hartree)

    @property
    def computed_ground(self) -> StateRecord | None:
        ranked = self._ranked()
        return ranked[0] if ranked else None

    @property
    def ground_by_gibbs(self) -> StateRecord | None:
        """The verdict's ground state by free energy G(T), where every verdict state has one."""
        states = self.verdict_records()
        if not states or any(r.gibbs_hartree is None for r in states):
            return None
        return min(states, key=lambda r: r.gibbs_hartree)

    def populations(self, temperature_k: float, window_kj_mol: float = POPULATION_WINDOW_KJ_MOL) -> dict[str, float]:
        """Boltzmann populations of the T-4 and SP-4 forms (by where their minima ended, all spins) at
        ``temperature_k`` from G — what a solution measurement sees — when the two lowest forms lie within
        ``window_kj_mol``; empty otherwise or without free energies."""
        import math

        from ..units import GAS_CONSTANT_J_PER_MOL_K

        states = [r for r in self.verdict_records() if r.relative_gibbs_kj_mol is not None
                  and r.ended_as in ("T-4", "SP-4")]
        lowest = {shape: min((r.relative_gibbs_kj_mol for r in states if r.ended_as == shape), default=None)
                  for shape in ("T-4", "SP-4")}
        if None in lowest.values() or abs(lowest["T-4"] - lowest["SP-4"]) > window_kj_mol:
            return {}
        rt_kj_mol = GAS_CONSTANT_J_PER_MOL_K * temperature_k / 1000.0
        weights = {shape: sum(math.exp(-r.relative_gibbs_kj_mol / rt_kj_mol) for r in states if r.ended_as == shape)
                   for shape in lowest}
        total = sum(weights.values())
        return {shape: weight / total for shape, weight in weights.items()}

    @property
    def runner_up(self) -> StateRecord | None:
        ranked = self._ranked()
        return ranked[1] if len(ranked) > 1 else None

    def verdict_warnings(self, unit: str = "kj") -> list[str]:
        """What a referee would ask about the verdict: missing states, impure spin, starts that disagree
        (energies in ``unit``, the report's)."""
        u = energy_unit(unit)
        found = [f"verdict incomplete: {r.name} {r.kind} 2S={r.spin2s} {why}" for r, why in self.missing()]
        if self.basis == HELD_ONLY:
            found.append(f"held-only verdict: {HELD_ONLY_BLIND_SPOT}")
        for role, r in (("ground state", self.computed_ground), ("runner-up", self.runner_up)):
            if r is not None and r.impure:
                found.append(f"the {role} ({r.name}, 2S={r.spin2s}) is a {r.impure} solution (⟨S²⟩ {r.s2:.2f})")
        for r in self.records:
            if r.spread_kj_mol is not None and r.spread_kj_mol > START_SPREAD_LIMIT_KJ_MOL:
                found.append(f"{r.name} {r.kind} 2S={r.spin2s}: SCF starts differ by "
                             f"{u.from_kj_mol(r.spread_kj_mol):.{u.digits}f} {u.header} "
                             f"(lowest kept, from the {r.start_won} start)")
            if r.aufbau is False or r.occupation_matches is False:
                found.append(f"{r.name} {r.kind} 2S={r.spin2s}: the converged occupation is not the intended "
                             "one (non-aufbau or another d configuration): possibly an excited solution")
        return found

    def delta_sp_t_kj_mol(self) -> dict[int, float]:
        """Computed E(SP-4) − E(T-4) per 2S (lowest isomer of each) on the arrangement ladder."""
        found = {}
        records = self.held_or_free()
        for spin2s in sorted({r.spin2s for r in records}):
            sp = [r.relative_kj_mol for r in records if r.spin2s == spin2s and r.ended_as == "SP-4"]
            t = [r.relative_kj_mol for r in records if r.spin2s == spin2s and r.ended_as == "T-4"]
            if sp and t:
                found[spin2s] = min(sp) - min(t)
        return found

    def estimated_delta_kj_mol(self) -> dict[int, float]:
        return {s: convert_energy(v, "cm", "kj") for s, v in self.estimate.delta_sp_t_cm().items()}

    def lowest_delta_sp_t_kj_mol(self) -> float | None:
        """Computed E(lowest SP-4 state) − E(lowest T-4 state), any spin, on the arrangement ladder."""
        records = self.held_or_free()
        sp = [r.relative_kj_mol for r in records if r.ended_as == "SP-4"]
        t = [r.relative_kj_mol for r in records if r.ended_as == "T-4"]
        return min(sp) - min(t) if sp and t else None

    def estimated_lowest_delta_sp_t_kj_mol(self) -> float | None:
        arrangements = {s.arrangement for s in self.estimate.states}
        if not {"SP-4", "T-4"} <= arrangements:
            return None
        lowest = {a: min(s.energy_cm for s in self.estimate.states if s.arrangement == a) for a in ("SP-4", "T-4")}
        return convert_energy(lowest["SP-4"] - lowest["T-4"], "cm", "kj")

    def agrees(self) -> bool | None:
        """Same ground state (shape where the verdict's state ended, and 2S) as the estimate; None if none."""
        ground = self.computed_ground
        if ground is None:
            return None
        e = self.estimate.ground
        return (ground.ended_as, ground.spin2s) == (e.arrangement, e.spin2s)


@dataclass
class Comparison:
    title: str
    level: str
    complexes: list[ComplexComparison]
    warnings: list[str]
    temperature_k: float = 298.15
    pressure_bar: float = 1.0

    def as_dict(self) -> dict:
        out = {"title": self.title, "level": self.level, "warnings": self.warnings, "temperature_k": self.temperature_k,
               "pressure_bar": self.pressure_bar, "complexes": []}
        for c in self.complexes:
            g, g_by_gibbs = c.computed_ground, c.ground_by_gibbs
            e = c.estimate.ground
            out["complexes"].append({
                "formula": c.formula, "level": c.level, "d_electrons": c.d_electrons,
                "states": [{k: v for k, v in asdict(r).items() if k not in ("warnings", "structure")} for r in c.records],
                "ground": None if g is None else {"arrangement": g.arrangement, "isomer": g.isomer, "spin2s": g.spin2s,
                                                  "kind": g.kind, "ended_as": g.ended_as, "tau4": g.tau4,
                                                  "mu_eff_spin_only": g.mu_eff_spin_only},
                "ground_by_gibbs": None if g_by_gibbs is None else {
                    "arrangement": g_by_gibbs.arrangement, "isomer": g_by_gibbs.isomer, "spin2s": g_by_gibbs.spin2s,
                    "kind": g_by_gibbs.kind, "ended_as": g_by_gibbs.ended_as, "mu_eff_spin_only": g_by_gibbs.mu_eff_spin_only},
                "populations": c.populations(self.temperature_k),
                "verdict": {"basis": c.basis, "complete": c.complete,
                            "missing": [{"state": r.name, "kind": r.kind, "spin2s": r.spin2s, "reason": why}
                                        for r, why in c.missing()],
                            "warnings": c.verdict_warnings()},
                "estimate_ground": {"arrangement": e.arrangement, "isomer": e.isomer, "spin2s": e.spin2s},
                "agree": c.agrees(),
                "delta_sp_minus_t_kj_mol": {str(k): v for k, v in c.delta_sp_t_kj_mol().items()},
                "estimate_delta_sp_minus_t_kj_mol": {str(k): v for k, v in c.estimated_delta_kj_mol().items()},
                "path": [{k: v for k, v in asdict(r).items() if k not in ("warnings", "structure")} for r in c.path_records],
            })
        return out


def build_comparison(study, results_by_key: dict) -> Comparison:
    """Comparison from a study and {job_key: stored result} (missing keys are pending jobs)."""
    from ..field.estimate import estimate
    from ..study.jobs import expand

    all_final = [j for j in expand(study) if j.final]
    final_jobs = [j for j in all_final if not j.spec.is_path_point]
    path_jobs = [j for j in all_final if j.spec.is_path_point]
    warnings = []
    complexes = []
    for entry in study.complexes:
        cx = entry.complex
        est = estimate(cx, entry.arrangements, entry.estimate_overrides, spins=entry.spins)
        records = [_record(cx.formula, job, results_by_key.get(job.key), est, warnings,
                           results_by_key.get(job.parent) if job.parent else None)
                   for job in final_jobs if job.spec.formula == cx.formula]
        path_records = [_record(cx.formula, job, results_by_key.get(job.key), None, warnings)
                        for job in path_jobs if job.spec.formula == cx.formula]
        done = [r for r in records if r.status == "done" and r.energy_hartree is not None]
        lowest = min(r.verdict_energy_hartree for r in done) if done else None
        for r in done:
            r.relative_kj_mol = convert_energy(r.verdict_energy_hartree - lowest, "hartree", "kj")
            if r.projected_energy_hartree is not None:
                r.unprojected_relative_kj_mol = convert_energy(r.energy_hartree - lowest, "hartree", "kj")
        _thermochemistry(records, study.temperature_k, study.pressure_bar)
        _relative_path_energies(path_records, lowest, study.level)
        warnings += _charge_warnings(cx, records, level_for_charge(study.level, cx.charge))
        complexes.append(ComplexComparison(cx.formula, cx.d_electrons, records, est, study.level.name, path_records,
                                           study.temperature_k))
    caveats = energy_caveats(study.level, any(r.gibbs_hartree is not None for c in complexes for r in c.records))
    return Comparison(study.title, study.level.name, complexes, _unique(warnings + caveats), study.temperature_k,
                      study.pressure_bar)


def _unique(lines: list[str]) -> list[str]:
    return list(dict.fromkeys(lines))


def _charge_warnings(cx, records: list[StateRecord], level) -> list[str]:
    """An anion's outermost electrons may be unbound: a gas-phase dianion, or any positive HOMO energy."""
    found = []
    if cx.charge <= -2 and level.method != "xtb" and level.solvent is None:
        found.append(f"{cx.formula} is a {abs(cx.charge)}− anion computed in the gas phase: its outer "
                     "electrons may be unbound; prefer a solvent (C-PCM) for final numbers.")
    unbound = [r for r in records if r.homo_energy_hartree is not None and r.homo_energy_hartree > 0]
    if cx.charge < 0 and unbound:
        names = ", ".join(f"{r.name} 2S={r.spin2s} {r.kind}" for r in unbound)
        found.append(f"{cx.formula}: positive HOMO energy (an unbound electron) in {names}; these energies are not "
                     "reliable without a solvent model or diffuse functions.")
    return found


def energy_caveats(level, free_energies: bool = False) -> list[str]:
    """What every report says about the energies it shows."""
    from ..compute.levels import exact_exchange_fraction

    found = ["ΔE values are electronic energies: no zero-point, thermal or entropy terms are included."]
    if free_energies:
        found.append("ΔG values add ZPE, thermal and entropy terms of the ideal gas (1 bar standard state, rigid "
                     "rotor with the structure's symmetry number, electronic entropy R ln(2S+1), Grimme's "
                     "quasi-RRHO entropy below 100 cm⁻¹: S. Grimme, Chem. Eur. J. 2012, 18, 9955) from harmonic "
                     "frequencies at the level named per state; with a solvent, the continuum enters through the "
                     "electronic energy only.")
    if level.method == "xtb":
        return found
    fraction = exact_exchange_fraction(level)
    found.append(f"{level.functional.upper() if level.functional else 'HF'} has {100 * fraction:.0f} % exact "
                 "exchange; more exact exchange favours high spin, so spin-state gaps carry a bias of the functional "
                 "(Reiher, Salomon, Hess, Theor. Chem. Acc. 2001, 107, 48; Swart, J. Chem. Theory "
                 "Comput. 2008, 4, 2057 — from memory).")
    return found


_RESULT_FIELDS = ("energy_hartree", "converged", "reason", "tau4", "tau4_prime", "nearest_shape", "s2", "s2_expected",
                  "spin_contaminated", "broken_symmetry", "rung", "cycles", "steps", "d_levels_cm", "d_level_labels",
                  "fitted_e_sigma_cm", "fitted_e_pi_cm", "fit_tied_pi", "wall_seconds", "geometry_converged",
                  "homo_energy_hartree", "aufbau", "projected_energy_hartree", "high_spin_energy_hartree", "starts",
                  "spread_kj_mol", "start_won", "occupation_matches", "fit_rms_cm", "fit_condition_number",
                  "fit_withheld", "fit_at_bound")


_FREQUENCY_FIELDS = ("frequencies_cm", "n_imaginary", "frequency_level")


def _thermochemistry(records: list[StateRecord], temperature_k: float, pressure_bar: float) -> None:
    """ZPE, H, S, G(T) of every state with frequencies, on its verdict energy; G relative to the lowest G."""
    from ase import Atoms

    from ..compute.thermo import thermochemistry
    from ..units import BAR_PASCAL

    for r in records:
        if r.frequencies_cm is None or r.exclusion is not None or r.structure is None:
            continue
        found = thermochemistry(Atoms(*r.structure), r.frequencies_cm, r.spin2s, r.verdict_energy_hartree,
                                temperature_k=temperature_k, pressure_pa=pressure_bar * BAR_PASCAL)
        r.zpe_hartree, r.enthalpy_hartree = found.zpe_hartree, found.enthalpy_hartree
        r.entropy_hartree_per_k, r.gibbs_hartree = found.entropy_hartree_per_k, found.gibbs_hartree
        r.symmetry_number = found.symmetry_number
    with_g = [r for r in records if r.gibbs_hartree is not None]
    if with_g:
        lowest = min(r.gibbs_hartree for r in with_g)
        for r in with_g:
            r.relative_gibbs_kj_mol = convert_energy(r.gibbs_hartree - lowest, "hartree", "kj")


def _record(formula: str, job, result: dict | None, est, warnings: list, parent: dict | None = None) -> StateRecord:
    """One job's row; ``est`` (the complex's Estimate) fills estimate_kj_mol, None for path points. A single
    point takes the frequencies of the checked minimum it was computed on (its parent)."""
    from ..chem.magnetism import spin_only_moment

    s = job.spec
    record = StateRecord(formula, s.arrangement, s.isomer, s.spin2s, s.kind,
                         status="pending" if result is None else result["status"], engine=s.method,
                         job_key=job.key, trans_angle_deg=s.trans_angle_deg)
    record.mu_eff_spin_only = spin_only_moment(s.spin2s)
    if est is not None:
        record.estimate_kj_mol = est.state(s.arrangement, s.spin2s, s.isomer).energy_kj_mol
    if result is not None:
        for name in _RESULT_FIELDS:
            if result.get(name) is not None:
                setattr(record, name, result[name])
        for name in _FREQUENCY_FIELDS:
            source = result if result.get(name) is not None else (parent or {})
            if source.get(name) is not None:
                setattr(record, name, source[name])
        if result.get("symbols"):
            record.structure = (result["symbols"], result["positions_angstrom"])
        record.warnings = list(result.get("warnings", []))
        for w in record.warnings:
            if w not in warnings:
                warnings.append(w)
    return record


def _relative_path_energies(path_records: list[StateRecord], lowest_hartree: float | None, level) -> None:
    """Path energies on the same zero as the states (the complex's lowest state), else the path's lowest.

    Path points are relaxed at the level's own geometry level (fourfold.study.jobs), so both sets of
    energies come from the same kind of structure and share a zero."""
    done = [r for r in path_records if r.status == "done" and r.energy_hartree is not None]
    if not done:
        return
    zero = lowest_hartree if lowest_hartree is not None else min(r.energy_hartree for r in done)
    for r in done:
        r.relative_kj_mol = convert_energy(r.energy_hartree - zero, "hartree", "kj")


def comparison_from_store(study, store) -> Comparison:
    """The comparison of a study from a ResultStore (fourfold.study.store) holding its results."""
    return build_comparison(study, {r["job_key"]: r for r in store.results()})


@dataclass(frozen=True)
class Crossing:
    isomer: str
    spins: tuple[int, int]
    trans_angle_deg: float
    relative_kj_mol: float


def spin_crossings(path_records) -> list[Crossing]:
    """Where two spin states' path energies change order, by linear interpolation between adjacent points."""
    done = [r for r in path_records if r.status == "done" and r.relative_kj_mol is not None]
    found = []
    for isomer in sorted({r.isomer for r in done}):
        curves = {}
        for r in done:
            if r.isomer == isomer:
                curves.setdefault(r.spin2s, {})[round(r.trans_angle_deg, 6)] = r.relative_kj_mol
        spins = sorted(curves)
        for i, a in enumerate(spins):
            for b in spins[i + 1:]:
                angles = sorted(set(curves[a]) & set(curves[b]))
                for left, right in zip(angles, angles[1:], strict=False):
                    d0 = curves[a][left] - curves[b][left]
                    d1 = curves[a][right] - curves[b][right]
                    if d0 * d1 < 0:
                        t = d0 / (d0 - d1)
                        angle = left + t * (right - left)
                        energy = curves[a][left] + t * (curves[a][right] - curves[a][left])
                        found.append(Crossing(isomer, (a, b), angle, energy))
    return found

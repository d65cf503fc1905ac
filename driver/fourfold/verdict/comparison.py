"""The comparison: computed energies of every arrangement × isomer × 2S beside the ligand-field estimate.

Built from a study's store (final jobs only) and the study itself (for the estimate and the job list), so
it can be made again at any time from the folder. Energies are relative to the complex's lowest computed
state, converted only here (CODATA 2018, fourfold.units).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field

from ..units import convert_energy

SPIN_CONTAMINATION_LIMIT = 0.1  # |⟨S²⟩ − S(S+1)| above this is flagged (fourfold default)


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
    trans_angle_deg: float | None = None  # path points only
    job_key: str | None = None
    warnings: list = field(default_factory=list)

    @property
    def name(self) -> str:
        return f"{self.arrangement} {self.isomer}".strip()


@dataclass
class ComplexComparison:
    formula: str
    d_electrons: int
    records: list[StateRecord]
    estimate: object  # fourfold.field.estimate.Estimate
    level: str
    path_records: list[StateRecord] = field(default_factory=list)  # held relaxations along the D2d path

    def held_or_free(self) -> list[StateRecord]:
        """Records that define a state's energy: held relaxations where the study has them, else free."""
        kinds = {r.kind for r in self.records if r.status == "done"}
        preferred = "held" if "held" in kinds else "free"
        return [r for r in self.records if r.kind == preferred and r.status == "done" and r.energy_hartree is not None]

    @property
    def computed_ground(self) -> StateRecord | None:
        candidates = self.held_or_free()
        return min(candidates, key=lambda r: r.energy_hartree) if candidates else None

    def delta_sp_t_kj_mol(self) -> dict[int, float]:
        """Computed E(SP-4) − E(T-4) per 2S (lowest isomer of each)."""
        found = {}
        records = self.held_or_free()
        for spin2s in sorted({r.spin2s for r in records}):
            sp = [r.relative_kj_mol for r in records if r.spin2s == spin2s and r.arrangement == "SP-4"]
            t = [r.relative_kj_mol for r in records if r.spin2s == spin2s and r.arrangement == "T-4"]
            if sp and t:
                found[spin2s] = min(sp) - min(t)
        return found

    def estimated_delta_kj_mol(self) -> dict[int, float]:
        return {s: convert_energy(v, "cm", "kj") for s, v in self.estimate.delta_sp_t_cm().items()}

    def lowest_delta_sp_t_kj_mol(self) -> float | None:
        """Computed E(lowest SP-4 state) − E(lowest T-4 state), any spin: the number that decides the shape."""
        records = self.held_or_free()
        sp = [r.relative_kj_mol for r in records if r.arrangement == "SP-4"]
        t = [r.relative_kj_mol for r in records if r.arrangement == "T-4"]
        return min(sp) - min(t) if sp and t else None

    def estimated_lowest_delta_sp_t_kj_mol(self) -> float | None:
        arrangements = {s.arrangement for s in self.estimate.states}
        if not {"SP-4", "T-4"} <= arrangements:
            return None
        lowest = {a: min(s.energy_cm for s in self.estimate.states if s.arrangement == a) for a in ("SP-4", "T-4")}
        return convert_energy(lowest["SP-4"] - lowest["T-4"], "cm", "kj")

    def agrees(self) -> bool | None:
        ground = self.computed_ground
        if ground is None:
            return None
        e = self.estimate.ground
        return (ground.arrangement, ground.spin2s) == (e.arrangement, e.spin2s)


@dataclass
class Comparison:
    title: str
    level: str
    complexes: list[ComplexComparison]
    warnings: list[str]

    def as_dict(self) -> dict:
        out = {"title": self.title, "level": self.level, "warnings": self.warnings, "complexes": []}
        for c in self.complexes:
            g = c.computed_ground
            e = c.estimate.ground
            out["complexes"].append({
                "formula": c.formula, "level": c.level, "d_electrons": c.d_electrons,
                "states": [{k: v for k, v in asdict(r).items() if k != "warnings"} for r in c.records],
                "ground": None if g is None else {"arrangement": g.arrangement, "isomer": g.isomer, "spin2s": g.spin2s},
                "estimate_ground": {"arrangement": e.arrangement, "isomer": e.isomer, "spin2s": e.spin2s},
                "agree": c.agrees(),
                "delta_sp_minus_t_kj_mol": {str(k): v for k, v in c.delta_sp_t_kj_mol().items()},
                "estimate_delta_sp_minus_t_kj_mol": {str(k): v for k, v in c.estimated_delta_kj_mol().items()},
                "path": [{k: v for k, v in asdict(r).items() if k != "warnings"} for r in c.path_records],
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
        records = [_record(cx.formula, job, results_by_key.get(job.key), est, warnings)
                   for job in final_jobs if job.spec.formula == cx.formula]
        path_records = [_record(cx.formula, job, results_by_key.get(job.key), None, warnings)
                        for job in path_jobs if job.spec.formula == cx.formula]
        done = [r for r in records if r.status == "done" and r.energy_hartree is not None]
        lowest = min(r.energy_hartree for r in done) if done else None
        for r in done:
            r.relative_kj_mol = convert_energy(r.energy_hartree - lowest, "hartree", "kj")
        _relative_path_energies(path_records, lowest)
        if cx.charge <= -2 and study.level.method != "xtb" and study.level.solvent is None:
            warnings.append(f"{cx.formula} is a {abs(cx.charge)}− anion computed in the gas phase: its outer "
                            "electrons may be unbound; prefer a solvent (C-PCM) for final numbers.")
        complexes.append(ComplexComparison(cx.formula, cx.d_electrons, records, est, study.level.name, path_records))
    return Comparison(study.title, study.level.name, complexes, warnings)


_RESULT_FIELDS = ("energy_hartree", "converged", "reason", "tau4", "tau4_prime", "nearest_shape", "s2", "s2_expected",
                  "spin_contaminated", "broken_symmetry", "rung", "cycles", "steps", "d_levels_cm", "d_level_labels",
                  "fitted_e_sigma_cm", "fitted_e_pi_cm", "fit_tied_pi", "wall_seconds")


def _record(formula: str, job, result: dict | None, est, warnings: list) -> StateRecord:
    """One job's row; ``est`` (the complex's Estimate) fills estimate_kj_mol, None for path points."""
    s = job.spec
    record = StateRecord(formula, s.arrangement, s.isomer, s.spin2s, s.kind,
                         status="pending" if result is None else result["status"], engine=s.method,
                         job_key=job.key, trans_angle_deg=s.trans_angle_deg)
    if est is not None:
        record.estimate_kj_mol = est.state(s.arrangement, s.spin2s, s.isomer).energy_kj_mol
    if result is not None:
        for name in _RESULT_FIELDS:
            if result.get(name) is not None:
                setattr(record, name, result[name])
        record.warnings = list(result.get("warnings", []))
        for w in record.warnings:
            if w not in warnings:
                warnings.append(w)
    return record


def _relative_path_energies(path_records: list[StateRecord], lowest_hartree: float | None) -> None:
    """Path energies on the same zero as the states (the complex's lowest state), else the path's lowest."""
    done = [r for r in path_records if r.status == "done" and r.energy_hartree is not None]
    if not done:
        return
    zero = lowest_hartree if lowest_hartree is not None else min(r.energy_hartree for r in done)
    for r in done:
        r.relative_kj_mol = convert_energy(r.energy_hartree - zero, "hartree", "kj")


def comparison_from_store(study, store) -> Comparison:
    """The comparison of a study from a ResultStore (fourfold.study.store) holding its results."""
    return build_comparison(study, {r["job_key"]: r for r in store.results()})

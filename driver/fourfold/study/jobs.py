"""A study expanded into jobs, each with a stable key.

A job is one calculation: (complex, arrangement, isomer, 2S, engine settings, task). Its key is the SHA-256
of its canonical JSON (sorted keys; start coordinates rounded to 1e-6 Å where they are inputs; the parent
job's key where the start comes from another job; the versions of fourfold, PySCF, tblite, geomeTRIC).
Same inputs give the same key; any change of settings gives a new one. Jobs of different levels that do the
same work (the GFN2-xTB relaxation under a `quick` single point is the `screen` result) share a key.

Chains per state and relaxation kind:
  screen    relax (xTB) [→ frequencies (xTB)]
  quick     relax (xTB) [→ frequencies (xTB)] → single-point (DFT)
  standard  relax-held (xTB, pre-relax) → relax (DFT) [→ frequencies (DFT)] → single-point (DFT, larger basis)
            when asked
The frequency step (in brackets) follows free relaxations when the study asks for frequencies (the default).
Path points (recipe `path_points = N`): held relaxations along the D2d path in the same chain as the
states, so at `standard` they are relaxed at the DFT geometry level and share the states' energy zero.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass, field, replace
from functools import cache
from importlib import metadata

import numpy as np

from ..chem.complex import Complex
from ..compute.levels import level_for_charge
from ..geometry.builder import build, build_path_point
from ..geometry.isomers import isomers_of
from ..geometry.polyhedra import TETRAHEDRAL_ANGLE_DEG

TASKS = ("relax-held", "relax-free", "frequencies", "single-point", "path-point")
_VERSIONED = ("fourfold", "pyscf", "tblite", "geometric")


@cache
def code_versions() -> dict[str, str]:
    versions = {}
    for name in _VERSIONED:
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            versions[name] = "absent"
    return versions


@dataclass(frozen=True)
class JobSpec:
    """Everything a worker needs to run one job, as typed fields. ``to_dict()`` is the plain form the job
    key and the store see; its keys and values are those of the untyped dicts fourfold wrote before
    JobSpec existed, so keys of existing stores do not move (tests/test_jobs.py pins them)."""

    formula: str
    complex: dict  # complex_spec(): metal, oxidation state, ligand names, custom ligands
    charge: int
    arrangement: str  # an arrangement symbol, or "path" for a point on the D2d path
    isomer: str
    spin2s: int
    kind: str  # held | free
    max_steps: int
    engine: dict  # geometry_engine() / relax_engine() / single_point_engine()
    trans_angle_deg: float | None = None  # path points only

    @property
    def method(self) -> str:
        return self.engine["method"]

    @property
    def is_path_point(self) -> bool:
        return self.arrangement == "path"

    def to_dict(self) -> dict:
        data = {"formula": self.formula, "complex": self.complex, "charge": self.charge,
                "arrangement": self.arrangement, "isomer": self.isomer, "spin2s": self.spin2s, "kind": self.kind,
                "max_steps": self.max_steps, "engine": self.engine}
        if self.trans_angle_deg is not None:
            data["trans_angle_deg"] = self.trans_angle_deg
        return data

    @classmethod
    def from_dict(cls, data: dict) -> JobSpec:
        return cls(**data)


@dataclass(frozen=True)
class Job:
    key: str
    task: str
    spec: JobSpec
    parent: str | None
    final: bool  # its energy is the one the comparison uses for its state
    label: str = field(compare=False)

    @property
    def state(self) -> tuple:
        s = self.spec
        return (s.formula, s.arrangement, s.isomer, s.spin2s, s.kind, s.trans_angle_deg)


def complex_spec(cx: Complex) -> dict:
    """Plain-data description of a complex, enough to rebuild it in a worker (custom ligands included)."""
    from ..chem.ligands import bundled_ligands

    bundled = bundled_ligands()
    custom = {}
    for lig in cx.ligands:
        if lig.name not in bundled or bundled[lig.name] != lig:
            custom[lig.name] = {
                "symbols": list(lig.symbols), "positions_angstrom": np.round(lig.positions_angstrom, 6).tolist(),
                "charge": lig.charge, "label": lig.label, "distance_angstrom": lig.distance_angstrom,
                "f": lig.f.value, "pi_ratio": lig.pi_ratio.value, "h": lig.h.value, "denticity": lig.denticity,
            }
    return {"metal": cx.metal.symbol, "oxidation_state": cx.oxidation_state,
            "ligands": [lig.name for lig in cx.ligands], "custom_ligands": custom}


def job_key(payload: dict) -> str:
    text = json.dumps({**payload, "versions": code_versions()}, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()


def _rounded_positions(atoms) -> list:
    return np.round(atoms.get_positions(), 6).tolist()


def path_angles_deg(points: int) -> list[float]:
    """`points` trans angles from T-4 (109.47°) to SP-4 (180°), evenly spaced."""
    return [float(a) for a in np.linspace(TETRAHEDRAL_ANGLE_DEG, 180.0, points)]


class _Builder:
    """Collects jobs, deduplicating by key (two chains may share a first step)."""

    def __init__(self):
        self.jobs: dict[str, Job] = {}

    def add(self, task: str, spec: JobSpec, parent: str | None, start_positions: list | None, final: bool,
            label: str) -> str:
        key = job_key({"task": task, "spec": spec.to_dict(), "parent": parent, "start": start_positions})
        if key not in self.jobs or (final and not self.jobs[key].final):
            self.jobs[key] = Job(key, task, spec, parent, final, label)
        return key


# Solvents of data/solvents.toml that tblite's parametrised ALPB does not know by name: these go to xTB as
# their dielectric constant (non-empirical ALPB) instead.
_XTB_UNNAMED_SOLVENTS = ("n,n-dimethylformamide", "carbon tetrachloride", "pyridine")


def geometry_engine(level) -> dict:
    """Engine settings of the GFN2-xTB relaxations (screen level, pre-relaxer, quick geometries)."""
    solvent = level.solvent
    if solvent in _XTB_UNNAMED_SOLVENTS:
        from ..compute.levels import solvent_epsilon

        solvent = solvent_epsilon(solvent)
    return {"method": "xtb", "solvent": solvent, "spin_polarization": True}


def _dft_engine(level, basis: str) -> dict:
    # Only what changes the numbers goes into the key: the preset's name and the chaining fields do not, nor
    # ion_solvent, which level_for_charge has already turned into the complex's solvent.
    engine = replace(level, name=level.method, basis=basis, geometry_from="self", single_point_basis=None).to_dict()
    engine.pop("ion_solvent")
    return engine


def relax_engine(level) -> dict:
    return _dft_engine(level, level.basis)


def single_point_engine(level) -> dict:
    return _dft_engine(level, level.single_point_basis or level.basis)


def _state_chain(builder: _Builder, level, base: JobSpec, atoms, label: str, frequencies: bool) -> None:
    """The jobs of one state. A free relaxation is followed by its frequency job (tight relaxation, Hessian,
    minimum check) when the study asks for frequencies; a single point then runs on that checked minimum."""
    xtb = replace(base, engine=geometry_engine(level))
    relax_task = "path-point" if base.is_path_point else f"relax-{base.kind}"
    start = _rounded_positions(atoms)
    checked = frequencies and base.kind == "free" and not base.is_path_point
    if level.method == "xtb":
        geometry = builder.add(relax_task, xtb, None, start, not checked, label)
        if checked:
            builder.add("frequencies", xtb, geometry, None, True, label)
        return
    if level.geometry_from == "xtb":
        geometry = builder.add(relax_task, xtb, None, start, False, label)
        if checked:
            geometry = builder.add("frequencies", xtb, geometry, None, False, label)
        builder.add("single-point", replace(base, engine=single_point_engine(level)), geometry, None, True, label)
        return
    pre = builder.add(relax_task if base.kind == "held" else "relax-held", replace(xtb, kind="held"), None, start,
                      False, label)
    has_sp = level.single_point_basis is not None
    dft_spec = replace(base, engine=relax_engine(level))
    dft = builder.add(relax_task, dft_spec, pre, None, not has_sp and not checked, label)
    if checked:
        dft = builder.add("frequencies", dft_spec, dft, None, not has_sp, label)
    if has_sp:
        builder.add("single-point", replace(base, engine=single_point_engine(level)), dft, None, True, label)


def expand(study) -> list[Job]:
    """All jobs of a study, parents before children."""
    builder = _Builder()
    max_steps = study.run.get("max_steps", 100)
    for entry in study.complexes:
        cx = entry.complex
        level = level_for_charge(study.level, cx.charge)
        common = {"formula": cx.formula, "complex": complex_spec(cx), "charge": cx.charge, "max_steps": max_steps,
                  "engine": {}}
        for arrangement in entry.arrangements:
            for isomer in isomers_of(cx, arrangement):
                atoms = build(cx, arrangement, isomer)
                for spin2s in entry.spins:
                    for kind in study.relaxations:
                        base = JobSpec(**common, arrangement=arrangement, isomer=isomer.label, spin2s=spin2s, kind=kind)
                        label = f"{cx.formula} {arrangement} {isomer.label} 2S={spin2s} {kind}".replace("  ", " ")
                        _state_chain(builder, level, base, atoms, label, study.frequencies)
        if study.path_points and "SP-4" in entry.arrangements:
            for isomer in isomers_of(cx, "SP-4"):
                for angle in path_angles_deg(study.path_points):
                    atoms = build_path_point(cx, angle, isomer.label)
                    for spin2s in entry.spins:
                        base = JobSpec(**common, arrangement="path", isomer=isomer.label, spin2s=spin2s, kind="held",
                                       trans_angle_deg=round(angle, 6))
                        label = f"{cx.formula} path {angle:.1f}° {isomer.label} 2S={spin2s}".replace("  ", " ")
                        _state_chain(builder, level, base, atoms, label, study.frequencies)
    return list(builder.jobs.values())

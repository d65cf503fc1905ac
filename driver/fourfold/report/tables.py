"""The comparison as tables: per complex and per study; tidy CSV, Markdown, LaTeX (booktabs) and JSON.

Tables (``study_tables``):
  states        one row per computed state (complex × arrangement × isomer × 2S × relaxation kind)
  states_<cx>   per complex, for reading: held and free energies and the estimate side by side
  deltas        ΔE(SP-4 − T-4) per complex and 2S, computed and estimated, with their difference
  summary       one row per complex: ground states computed and estimated, agreement, ΔE, tau4
  ligand_field  AOM e_σ/e_π fitted to the calculated d block beside the values the estimate used
  path          the D2d path points (when the recipe asks for them)

CSV and JSON carry full precision and machine column names with the unit in the name
(``relative_energy_kj_mol``; ``_cm-1`` for wavenumbers); Markdown and LaTeX are rounded for reading. Energies
are shown in one unit chosen by the caller (kJ/mol by default); AOM parameters always in cm⁻¹, the unit
they are quoted in. Relative energies come from the stored hartree values through fourfold.units only.
Warnings (the GFN2-xTB caveat among them) go below every energy table and into each CSV row they concern.
"""

from __future__ import annotations

import json

from ..chem.complex import spin_label
from ..chem.magnetism import spin_only_moment
from ..chem.notation import formula_slug
from ..geometry.polyhedra import arrangement_rank
from ..units import energy_unit
from ..verdict.comparison import START_SPREAD_LIMIT_KJ_MOL
from .markup import multiplicity_word
from .table import Column, Table, json_rows, md_escape, to_markdown

FORMATS = ("csv", "md", "tex", "json")


def _energy_column(key_stem: str, text: str, tex: str, unit: str, where: str = "all") -> Column:
    u = energy_unit(unit)
    return Column(f"{key_stem}_{u.suffix}", f"{text} / {u.header}", f"{tex} / {u.tex}", "number", u.digits, where)


def _in(value_kj_mol, unit):
    return energy_unit(unit).from_kj_mol(value_kj_mol)


def _sorted_records(records):
    return sorted(records, key=lambda r: (arrangement_rank(r.arrangement), r.isomer, r.spin2s, r.kind))


def _note(record, unit: str) -> str:
    """Everything a reader must know about one state's numbers, in a few words (energies in ``unit``)."""
    u = energy_unit(unit)
    if record.status != "done":
        return record.status if not record.reason else f"{record.status}: {record.reason}"
    notes = []
    if record.broken_symmetry:
        notes.append("broken-symmetry singlet" + (
            f", projected (unprojected {_signed(u.from_kj_mol(record.unprojected_relative_kj_mol), u.digits)} "
            f"{u.header})"
            if record.projected_energy_hartree is not None else ", unprojected"))
    elif record.spin_contaminated:
        notes.append("spin contaminated")
    if record.converged is False:
        notes.append("not converged")
    if record.geometry_converged is False:
        notes.append("relaxation not converged")
    if record.kind == "free" and record.nearest_shape and record.nearest_shape != record.arrangement:
        notes.append(f"ended {record.nearest_shape}")
    if record.spread_kj_mol is not None and record.spread_kj_mol > START_SPREAD_LIMIT_KJ_MOL:
        notes.append(f"starts spread {u.from_kj_mol(record.spread_kj_mol):.{u.digits}f} {u.header}")
    if record.aufbau is False or record.occupation_matches is False:
        notes.append("occupation off")
    return "; ".join(notes)


def _state_words(arrangement: str, isomer: str, spin2s: int) -> str:
    return f"{arrangement} {isomer}".strip() + f", {multiplicity_word(spin2s)}"


def states_table(comparison, unit: str) -> Table:
    """Tidy: one row per state and relaxation kind, every complex."""
    columns = [
        Column("formula", "complex", "complex", "formula"),
        Column("d_electrons", "dⁿ", "$d^n$", "number", 0),
        Column("arrangement", "arrangement", "arrangement"),
        Column("isomer", "isomer", "isomer"),
        Column("spin2s", "2S", "$2S$", "number", 0),
        Column("multiplicity", "2S+1", "$2S+1$", "number", 0, "data"),
        Column("spin_state", "spin", "spin"),
        Column("relaxation", "relaxation", "relaxation"),
        Column("status", "status", "status"),
        Column("converged", "converged", "conv.", "bool"),
        Column("energy_hartree", "E / Eh", r"$E$ / $E_\mathrm{h}$", "number", 6),
        _energy_column("relative_energy", "ΔE calc", r"$\Delta E_\mathrm{calc}$", unit),
        _energy_column("estimate_energy", "ΔE est", r"$\Delta E_\mathrm{est}$", unit),
        Column("s2", "⟨S²⟩", r"$\langle S^2\rangle$", "number", 2),
        Column("s2_expected", "S(S+1)", "$S(S+1)$", "number", 2, "data"),
        Column("mu_eff_spin_only", "μ_eff / μB", r"$\mu_\mathrm{eff}$ / $\mu_\mathrm{B}$", "number", 2, "data"),
        Column("projected_energy_hartree", "E proj / Eh", "", "number", 6, "data"),
        Column("n_imaginary", "imaginary modes", "", "number", 0, "data"),
        Column("frequency_level", "frequencies from", "", where="data"),
        Column("zpe_hartree", "ZPE / Eh", "", "number", 6, "data"),
        Column("enthalpy_hartree", "H / Eh", "", "number", 6, "data"),
        Column("gibbs_hartree", "G / Eh", "", "number", 6, "data"),
        _energy_column("relative_gibbs", "ΔG", r"$\Delta G$", unit, "data"),
        Column("spin_contaminated", "contaminated", "contam.", "bool", where="data"),
        Column("broken_symmetry", "broken symmetry", "BS", "bool", where="data"),
        Column("tau4", "τ₄", r"$\tau_4$", "number", 2),
        Column("tau4_prime", "τ₄′", r"$\tau_4'$", "number", 2),
        Column("nearest_shape", "nearest shape", "shape"),
        Column("engine", "engine", "engine", where="data"),
        Column("level", "level", "level", where="data"),
        Column("note", "note", "note", where="data"),
        Column("warnings", "warnings", "warnings", where="data"),
        Column("job_key", "job key", "job key", where="data"),
    ]
    rows = []
    for c in comparison.complexes:
        for r in _sorted_records(c.records):
            rows.append({
                "formula": c.formula, "d_electrons": c.d_electrons, "arrangement": r.arrangement, "isomer": r.isomer,
                "spin2s": r.spin2s, "multiplicity": r.spin2s + 1, "spin_state": multiplicity_word(r.spin2s),
                "relaxation": r.kind, "status": r.status, "converged": r.converged, "energy_hartree": r.energy_hartree,
                columns[11].key: _in(r.relative_kj_mol, unit), columns[12].key: _in(r.estimate_kj_mol, unit),
                "s2": r.s2, "s2_expected": r.s2_expected, "spin_contaminated": r.spin_contaminated,
                "mu_eff_spin_only": r.mu_eff_spin_only, "projected_energy_hartree": r.projected_energy_hartree,
                "n_imaginary": r.n_imaginary, "frequency_level": r.frequency_level, "zpe_hartree": r.zpe_hartree,
                "enthalpy_hartree": r.enthalpy_hartree, "gibbs_hartree": r.gibbs_hartree,
                f"relative_gibbs_{energy_unit(unit).suffix}": _in(r.relative_gibbs_kj_mol, unit),
                "broken_symmetry": r.broken_symmetry, "tau4": r.tau4, "tau4_prime": r.tau4_prime,
                "nearest_shape": r.nearest_shape, "engine": r.engine, "level": c.level, "note": _note(r, unit),
                "warnings": "; ".join(r.warnings), "job_key": r.job_key,
            })
    return Table("states", "Every computed state", columns, rows, list(comparison.warnings), display=False)


def complex_table(c, unit: str, warnings: list[str]) -> Table:
    """For reading: one row per arrangement × isomer × 2S, held and free energies beside the estimate."""
    kinds = [k for k in ("held", "free") if any(r.kind == k for r in c.records)]
    shape_kind = "free" if "free" in kinds else (kinds[0] if kinds else "held")
    columns = [Column("state", "state", "state"), Column("spin", "spin", "spin")]
    for kind in kinds:
        columns.append(_energy_column(f"relative_energy_{kind}", f"ΔE {kind}", rf"$\Delta E_\mathrm{{{kind}}}$", unit))
    has_gibbs = any(r.relative_gibbs_kj_mol is not None for r in c.records)
    if has_gibbs:
        columns.append(_energy_column("relative_gibbs_free", "ΔG free", r"$\Delta G_\mathrm{free}$", unit))
    columns += [
        _energy_column("estimate_energy", "ΔE est", r"$\Delta E_\mathrm{est}$", unit),
        Column("mu_eff", "μ_eff / μB", r"$\mu_\mathrm{eff}$ / $\mu_\mathrm{B}$", "number", 2),
        Column("s2", "⟨S²⟩", r"$\langle S^2\rangle$", "number", 2),
        Column("tau4", f"τ₄ ({shape_kind})", rf"$\tau_4$ ({shape_kind})", "number", 2),
        Column("tau4_prime", f"τ₄′ ({shape_kind})", rf"$\tau_4'$ ({shape_kind})", "number", 2),
        Column("nearest_shape", f"shape ({shape_kind})", f"shape ({shape_kind})"),
        Column("converged", "converged", "conv."),
        Column("note", "note", "note"),
    ]
    groups: dict[tuple, dict] = {}
    for r in _sorted_records(c.records):
        groups.setdefault((r.arrangement, r.isomer, r.spin2s), {})[r.kind] = r
    rows = []
    for (arrangement, isomer, spin2s), by_kind in groups.items():
        first = by_kind.get("held") or next(iter(by_kind.values()))
        shaped = by_kind.get(shape_kind, first)
        row = {"state": f"{arrangement} {isomer}".strip(), "spin": spin_label(spin2s), "s2": first.s2,
               "mu_eff": spin_only_moment(spin2s),
               "tau4": shaped.tau4, "tau4_prime": shaped.tau4_prime,
               "nearest_shape": shaped.nearest_shape}
        for kind in kinds:
            r = by_kind.get(kind)
            row[f"relative_energy_{kind}_{energy_unit(unit).suffix}"] = None if r is None else _in(r.relative_kj_mol, unit)
        row[f"estimate_energy_{energy_unit(unit).suffix}"] = _in(first.estimate_kj_mol, unit)
        if has_gibbs and "free" in by_kind:
            row[f"relative_gibbs_free_{energy_unit(unit).suffix}"] = _in(by_kind["free"].relative_gibbs_kj_mol, unit)
        row["converged"] = " / ".join(f"{k}: {_yes_no(by_kind[k].converged)}" if len(kinds) > 1
                                      else _yes_no(by_kind[k].converged) for k in kinds if k in by_kind)
        row["note"] = "; ".join(f"{k}: {n}" if len(kinds) > 1 else n
                                for k in kinds if k in by_kind and (n := _note(by_kind[k], unit)))
        rows.append(row)
    title = f"{{formula}} (d{c.d_electrons}), level {c.level}: energies relative to the lowest state"
    return Table(f"states_{formula_slug(c.formula)}", title, columns, rows, _complex_warnings(c, warnings),
                 _verdicts(c, unit), tidy=False, formula=c.formula)


DIFFERENCE_FLAG_KJ_MOL = 20.0  # computed − estimated ΔE beyond this is flagged "large" (fourfold default)


def _signed(value, digits: int) -> str:
    return "—" if value is None else f"{value:+.{digits}f}".replace("-", "−")


def _orbital_note(c, record) -> str:
    from ..chem.complex import complex_from_formula
    from ..chem.magnetism import orbital_contribution

    cx = complex_from_formula(c.formula)
    found = orbital_contribution(cx.metal.symbol, cx.oxidation_state, record.ended_as, record.spin2s)
    return found.note(record.spin2s) if found else ""


def ground_words(record) -> str:
    """A verdict state in words: where a free minimum ended, or the held arrangement."""
    words = _state_words(record.ended_as, record.isomer if record.ended_as == record.arrangement else "",
                         record.spin2s)
    if record.kind == "free":
        tau4 = "" if record.tau4 is None else f", τ₄ {record.tau4:.2f}"
        words += f" (free minimum from the {record.name} start{tau4})"
    return words


def _verdicts(c, unit: str) -> list[str]:
    """The verdict (on which energies, complete or not), then ΔE(SP-4 − T-4) per spin with the difference."""
    u = energy_unit(unit)
    g, e = c.computed_ground, c.estimate.ground
    computed = "not computed" if g is None else ground_words(g)
    same = {None: "", True: " Same ground state.", False: " Different ground states."}[c.agrees()]
    lines = [f"Ground state ({c.basis}{'' if c.complete else ', INCOMPLETE'}): computed {computed}; estimated "
             f"{_state_words(e.arrangement, e.isomer, e.spin2s)}.{same}"]
    by_gibbs = c.ground_by_gibbs
    if by_gibbs is not None:
        differs = g is None or (by_gibbs.ended_as, by_gibbs.spin2s) != (g.ended_as, g.spin2s)
        lines.append(f"Ground state by G({c.temperature_k:g} K): {ground_words(by_gibbs)}"
                     + (" — differs from the ground state by E." if differs else ", as by E."))
    populations = c.populations(c.temperature_k)
    if populations:
        lines.append(f"Populations at {c.temperature_k:g} K from ΔG: "
                     + ", ".join(f"{shape} {share:.0%}" for shape, share in populations.items()) + ".")
    if g is not None:
        moment = f"Spin-only μ_eff of the ground state: {spin_only_moment(g.spin2s):.2f} μB"
        note = _orbital_note(c, g)
        lines.append(moment + (f"; {note}" if note else "") + ".")
    lines += [f"Warning: {w}." for w in c.verdict_warnings(unit)]
    calc, est = c.delta_sp_t_kj_mol(), c.estimated_delta_kj_mol()
    ladder = "held" if c.ladder_kind == "held" else "free minima by final shape"
    for spin2s in sorted(set(calc) | set(est)):
        a, b = _in(calc.get(spin2s), unit), _in(est.get(spin2s), unit)
        difference = ""
        if a is not None and b is not None:
            large = abs(calc[spin2s] - est[spin2s]) > DIFFERENCE_FLAG_KJ_MOL
            difference = (f", difference {_signed(a - b, u.digits)} {u.header}"
                          + (f" (more than {u.from_kj_mol(DIFFERENCE_FLAG_KJ_MOL):.{u.digits}f} {u.header})"
                             if large else ""))
        lines.append(f"ΔE(SP-4 − T-4), {multiplicity_word(spin2s)} ({ladder}): computed {_signed(a, u.digits)} "
                     f"{u.header}, estimated {_signed(b, u.digits)} {u.header}{difference}.")
    return lines


def _complex_warnings(c, warnings: list[str]) -> list[str]:
    own = {w for r in c.records for w in r.warnings}
    return [w for w in warnings if w in own or c.formula in w]


def _yes_no(value) -> str:
    return "—" if value is None else ("yes" if value else "no")


def deltas_table(comparison, unit: str) -> Table:
    columns = [
        Column("formula", "complex", "complex", "formula"),
        Column("spin2s", "2S", "$2S$", "number", 0),
        Column("spin_state", "spin", "spin"),
        _energy_column("delta_computed", "ΔE(SP-4 − T-4) calc", r"$\Delta E_\mathrm{calc}$", unit),
        _energy_column("delta_estimated", "ΔE(SP-4 − T-4) est", r"$\Delta E_\mathrm{est}$", unit),
        _energy_column("difference", "calc − est", r"calc $-$ est", unit),
    ]
    rows = []
    for c in comparison.complexes:
        calc, est = c.delta_sp_t_kj_mol(), c.estimated_delta_kj_mol()
        for spin2s in sorted(set(calc) | set(est)):
            a, b = calc.get(spin2s), est.get(spin2s)
            rows.append({"formula": c.formula, "spin2s": spin2s, "spin_state": multiplicity_word(spin2s),
                         columns[3].key: _in(a, unit), columns[4].key: _in(b, unit),
                         columns[5].key: None if a is None or b is None else _in(a - b, unit)})
    return Table("deltas", "ΔE(SP-4 − T-4) per spin state (lowest isomer of each; positive: T-4 lower)", columns, rows,
                 list(comparison.warnings))


def summary_table(comparison, unit: str) -> Table:
    columns = [
        Column("formula", "complex", "complex", "formula"),
        Column("d_electrons", "dⁿ", "$d^n$", "number", 0),
        Column("computed_ground", "ground state (calc)", "ground state (calc)"),
        Column("estimated_ground", "ground state (est)", "ground state (est)"),
        Column("same_ground", "same ground state", "same ground", "bool"),
        Column("verdict_basis", "verdict on", "verdict on"),
        Column("verdict_complete", "complete", "complete", "bool"),
        _energy_column("delta_computed", "ΔE calc", r"$\Delta E_\mathrm{calc}$", unit),
        _energy_column("delta_estimated", "ΔE est", r"$\Delta E_\mathrm{est}$", unit),
        Column("tau4_ground", "τ₄ (ground)", r"$\tau_4$ (ground)", "number", 2),
        Column("computed_ground_arrangement", "", "", where="data"),
        Column("computed_ground_isomer", "", "", where="data"),
        Column("computed_ground_spin2s", "", "", "number", 0, "data"),
        Column("estimated_ground_arrangement", "", "", where="data"),
        Column("estimated_ground_isomer", "", "", where="data"),
        Column("estimated_ground_spin2s", "", "", "number", 0, "data"),
    ]
    rows = []
    for c in comparison.complexes:
        g, e = c.computed_ground, c.estimate.ground
        rows.append({
            "formula": c.formula, "d_electrons": c.d_electrons,
            "computed_ground": None if g is None else _state_words(g.ended_as, g.isomer, g.spin2s),
            "estimated_ground": _state_words(e.arrangement, e.isomer, e.spin2s), "same_ground": c.agrees(),
            "verdict_basis": c.basis, "verdict_complete": c.complete,
            columns[7].key: _in(c.lowest_delta_sp_t_kj_mol(), unit),
            columns[8].key: _in(c.estimated_lowest_delta_sp_t_kj_mol(), unit),
            "tau4_ground": None if g is None else g.tau4,
            "computed_ground_arrangement": None if g is None else g.ended_as,
            "computed_ground_isomer": None if g is None else g.isomer,
            "computed_ground_spin2s": None if g is None else g.spin2s,
            "estimated_ground_arrangement": e.arrangement, "estimated_ground_isomer": e.isomer,
            "estimated_ground_spin2s": e.spin2s,
        })
    title = (f"{comparison.title}, level {comparison.level}: ground states; ΔE = E(lowest SP-4 state) − "
             "E(lowest T-4 state), positive: tetrahedral")
    return Table("summary", title, columns, rows, list(comparison.warnings))


def ligand_field_table(comparison) -> Table:
    """Fitted AOM parameters of the lowest computed state of each arrangement beside the estimate's inputs; a fit
    that is not physical (ill-conditioned, poor, or a stored one with a negative e_σ) is withheld with the reason."""
    from ..field.fit import CONDITION_LIMIT, RESIDUAL_LIMIT_FRACTION

    columns = [
        Column("formula", "complex", "complex", "formula"),
        Column("state", "fitted on", "fitted on"),
        Column("ligand", "ligand", "ligand"),
        Column("e_sigma_fitted_cm-1", "e_σ fit / cm⁻¹", r"$e_\sigma$ fit / cm$^{-1}$", "number", 0),
        Column("e_pi_fitted_cm-1", "e_π fit / cm⁻¹", r"$e_\pi$ fit / cm$^{-1}$", "number", 0),
        Column("e_pi_tied", "e_π tied", r"$e_\pi$ tied", "bool"),
        Column("e_sigma_estimate_cm-1", "e_σ est / cm⁻¹", r"$e_\sigma$ est / cm$^{-1}$", "number", 0),
        Column("e_pi_estimate_cm-1", "e_π est / cm⁻¹", r"$e_\pi$ est / cm$^{-1}$", "number", 0),
        Column("fit_rms_cm-1", "fit rms / cm⁻¹", r"fit rms / cm$^{-1}$", "number", 0),
        Column("fit_condition_number", "condition", "condition", "number", 1),
        Column("fit_note", "note", "note"),
        Column("e_sigma_source", "", "", where="data"),
    ]
    rows = []
    for c in comparison.complexes:
        fitted = _lowest_per_arrangement([r for r in c.held_or_free() if r.fitted_e_sigma_cm or r.fit_withheld])
        params = c.estimate.parameters.ligands
        for record in fitted or [None]:
            withheld = None if record is None else _fit_withheld(record)
            for name, p in params.items():
                shown = record is not None and withheld is None
                e_sigma = record.fitted_e_sigma_cm.get(name) if shown else None
                rows.append({
                    "formula": c.formula,
                    "state": None if record is None else _state_words(record.arrangement, record.isomer, record.spin2s),
                    "ligand": name, "e_sigma_fitted_cm-1": e_sigma,
                    "e_pi_fitted_cm-1": (record.fitted_e_pi_cm or {}).get(name) if shown else None,
                    "e_pi_tied": record.fit_tied_pi if shown else None,
                    "e_sigma_estimate_cm-1": p.e_sigma_cm.value, "e_pi_estimate_cm-1": p.e_pi_cm.value,
                    "fit_rms_cm-1": None if record is None else record.fit_rms_cm,
                    "fit_condition_number": None if record is None else record.fit_condition_number,
                    "fit_note": None if record is None else (f"withheld: {withheld}" if withheld else
                                                             _fit_remark(record, name, e_sigma, p.e_sigma_cm.value)),
                    "e_sigma_source": p.e_sigma_cm.source,
                })
    notes = [f"Fits: bounded least squares (e_σ ≥ 0, e_π of the ligand's π sign) to the Kohn–Sham d block projected "
             "on the metal, of only the parameters it determines (e_π tied to e_σ by the ligand's default ratio where "
             "the arrangement cannot separate them, as in T-4); withheld when the design's condition number exceeds "
             f"{CONDITION_LIMIT:.0f}, the rms residual exceeds {100 * RESIDUAL_LIMIT_FRACTION:.0f} % of the d-level "
             "spread, an e_σ ends at its bound or |e_π| exceeds e_σ.",
             "Fitted values come from Kohn–Sham orbital energies, whose gap between filled and empty d levels "
             "carries exchange (wider with more exact exchange): compare their trends between ligands and "
             "arrangements, not their size with the spectroscopic values the estimate uses."]
    if not any(r["state"] for r in rows):
        notes.append(f"No calculated ligand field at level {comparison.level}: only the estimate's parameters "
                     "are listed (the d block comes from a DFT calculation).")
    return Table("ligand_field", "AOM parameters: fitted to the calculation vs used by the estimate", columns, rows,
                 notes)


FIT_ESTIMATE_RATIO_FLAG = 2.0  # a fitted e_σ beyond this factor of the estimate's is remarked on (fourfold default)


def _fit_withheld(record) -> str | None:
    """Why a state's fit is not shown: the fit's own reason, or a fit stored before fits were bounded and checked
    (no condition number), negative e_σ named."""
    if record.fit_withheld:
        return record.fit_withheld
    if record.fit_condition_number is None:
        negative = sorted(k for k, v in (record.fitted_e_sigma_cm or {}).items() if v < 0)
        return ((f"negative e_σ ({', '.join(negative)}); " if negative else "")
                + "an unchecked fit stored by an earlier fourfold (no condition number): compute the state again")
    return None


def _fit_remark(record, ligand: str, e_sigma, estimate) -> str:
    remarks = [f"{b} held at 0 by the bound" for b in (record.fit_at_bound or []) if f"({ligand})" in b or b == "e_ds"]
    if e_sigma and estimate and not 1 / FIT_ESTIMATE_RATIO_FLAG <= e_sigma / estimate <= FIT_ESTIMATE_RATIO_FLAG:
        remarks.append(f"e_σ {e_sigma / estimate:.1f} × the estimate's")
    return "; ".join(remarks)


def _lowest_per_arrangement(records):
    best = {}
    for r in records:
        key = (r.arrangement, r.isomer)
        if key not in best or r.energy_hartree < best[key].energy_hartree:
            best[key] = r
    return [best[k] for k in sorted(best, key=lambda k: (arrangement_rank(k[0]), k[1]))]


def path_table(comparison, unit: str) -> Table:
    columns = [
        Column("formula", "complex", "complex", "formula"),
        Column("isomer", "isomer", "isomer"),
        Column("trans_angle_deg", "trans angle / °", r"trans angle / $^\circ$", "number", 1),
        Column("spin2s", "2S", "$2S$", "number", 0),
        Column("spin_state", "spin", "spin"),
        Column("status", "status", "status"),
        Column("converged", "converged", "conv.", "bool"),
        Column("energy_hartree", "E / Eh", r"$E$ / $E_\mathrm{h}$", "number", 6),
        _energy_column("relative_energy", "ΔE", r"$\Delta E$", unit),
        Column("tau4", "τ₄", r"$\tau_4$", "number", 2),
        Column("engine", "engine", "engine", where="data"),
        Column("warnings", "warnings", "warnings", where="data"),
        Column("job_key", "job key", "job key", where="data"),
    ]
    rows = []
    for c in comparison.complexes:
        for r in sorted(c.path_records, key=lambda r: (r.isomer, r.spin2s, r.trans_angle_deg)):
            rows.append({"formula": c.formula, "isomer": r.isomer, "trans_angle_deg": r.trans_angle_deg,
                         "spin2s": r.spin2s, "spin_state": multiplicity_word(r.spin2s), "status": r.status,
                         "converged": r.converged, "energy_hartree": r.energy_hartree,
                         columns[8].key: _in(r.relative_kj_mol, unit), "tau4": r.tau4, "engine": r.engine,
                         "warnings": "; ".join(r.warnings), "job_key": r.job_key})
    return Table("path", "D2d path T-4 → SP-4 (held relaxations; energies on the zero of the states table)",
                 columns, rows, list(comparison.warnings))


def study_tables(comparison, unit: str = "kj") -> list[Table]:
    """Every table of a comparison in one energy unit; the path table only when the study has path points."""
    tables = [summary_table(comparison, unit), deltas_table(comparison, unit), states_table(comparison, unit)]
    tables += [complex_table(c, unit, comparison.warnings) for c in comparison.complexes]
    tables.append(ligand_field_table(comparison))
    if any(c.path_records for c in comparison.complexes):
        tables.append(path_table(comparison, unit))
    return tables


def markdown_report(tables: list[Table], comparison, unit: str, safety_markdown: str = "") -> str:
    """All tables in one Markdown file: the caveats once at the top, then each table with its own notes."""
    lines = [f"# {md_escape(comparison.title)}", "", f"Level: `{comparison.level}`. Energies in {energy_unit(unit).label} "
             "(CODATA 2018 conversions), relative to each complex's lowest computed state; estimates relative to "
             "the estimate's lowest state.", ""]
    if comparison.warnings:
        lines += ["## Caveats", ""] + [f"- {w}" for w in comparison.warnings] + [""]
    for table in tables:
        lines.append(to_markdown(table, skip_notes=comparison.warnings))
    if safety_markdown:
        lines.append(safety_markdown)
    return "\n".join(lines)


def to_json(tables: list[Table], comparison, unit: str) -> str:
    u = energy_unit(unit)
    data = {
        "title": comparison.title, "level": comparison.level, "energy_unit": u.label,
        "column_suffix": u.suffix, "warnings": list(comparison.warnings),
        "tables": {t.name: json_rows(t) for t in tables if t.tidy},
        "notes": {t.name: t.notes for t in tables if t.notes},
        "estimates": {c.formula: c.estimate.as_dict() for c in comparison.complexes},
    }
    return json.dumps(data, indent=2, ensure_ascii=False) + "\n"

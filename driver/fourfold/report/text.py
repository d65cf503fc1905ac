"""Plain-text tables for the terminal (monospace, units in every header)."""

from __future__ import annotations

from ..chem.complex import spin_label
from ..units import UNIT_LABELS, canonical_unit, cm_to_kj_mol, convert_energy


def _table(headers: list[str], rows: list[list[str]], right: set[int] | None = None) -> str:
    right = right if right is not None else set(range(1, len(headers)))
    widths = [max(len(str(x)) for x in column) for column in zip(headers, *rows)]
    def line(cells):
        return "  ".join(str(c).rjust(w) if i in right else str(c).ljust(w) for i, (c, w) in enumerate(zip(cells, widths)))
    return "\n".join([line(headers), "  ".join("-" * w for w in widths), *(line(r) for r in rows)])


def _occupation_marks(occupation) -> str:
    return " ".join({0: "·", 1: "↑", 2: "↑↓"}[n] for n in occupation)


def _state_name(arrangement: str, isomer: str) -> str:
    return f"{arrangement} {isomer}".strip()


def estimate_text(result) -> str:
    """The estimate as a chemist reads it: d levels per arrangement, terms per state, ΔE, ground state."""
    out = [f"Ligand-field estimate for {result.formula}  (d{result.d_electrons})", ""]
    seen = set()
    for s in result.states:
        key = (s.arrangement, s.isomer)
        if key in seen:
            continue
        seen.add(key)
        levels = "  ".join(f"{label} {value:,.0f}" for label, value in zip(s.level_labels, s.levels_cm))
        out.append(f"{_state_name(*key):14s} d levels (cm⁻¹, low → high): {levels}")
    out.append("")
    headers = ["state", "spin", "occupation", "ligand field / cm⁻¹", "pairing / cm⁻¹", "repulsion / cm⁻¹",
               "E rel / cm⁻¹", "E rel / kJ mol⁻¹"]
    rows = [[_state_name(s.arrangement, s.isomer), spin_label(s.spin2s), _occupation_marks(s.occupation),
             f"{s.ligand_field_cm:,.0f}", f"{s.pairing_cm:,.0f}", f"{s.repulsion_cm:,.0f}",
             f"{s.energy_cm:,.0f}", f"{s.energy_kj_mol:.1f}"]
            for s in sorted(result.states, key=lambda s: s.energy_cm)]
    out.append(_table(headers, rows, right={3, 4, 5, 6, 7}))
    deltas = result.delta_sp_t_cm()
    if deltas:
        out.append("")
        for spin2s, delta_cm in deltas.items():
            out.append(f"ΔE(SP-4 − T-4), {spin_label(spin2s)}: {delta_cm:,.0f} cm⁻¹ = {cm_to_kj_mol(delta_cm):.1f} kJ/mol")
    g = result.ground
    out += ["", f"Estimated ground state: {_state_name(g.arrangement, g.isomer)}, {spin_label(g.spin2s)}"]
    out += [f"Confidence: {note}" for note in result.confidence_notes] + [""]
    out.append(_parameters_text(result.parameters))
    return "\n".join(out)


def _parameters_text(params) -> str:
    lines = ["Parameters used (value — source):"]
    for name, p in params.ligands.items():
        lines.append(f"  {name}: e_σ {p.e_sigma_cm.value:,.0f} cm⁻¹ — {p.e_sigma_cm.source}")
        lines.append(f"  {name}: e_π {p.e_pi_cm.value:,.0f} cm⁻¹ — {p.e_pi_cm.source}")
        lines.append(f"  {name}: h {p.h.value} — {p.h.source}; cone {p.cone_deg.value:.0f}° — {p.cone_deg.source}")
    lines.append(f"  metal: B {params.racah_b_cm.value:,.0f} cm⁻¹ — {params.racah_b_cm.source}")
    lines.append(f"  metal: C {params.racah_c_cm.value:,.0f} cm⁻¹ — {params.racah_c_cm.source}")
    lines.append(f"  metal: k {params.k.value} — {params.k.source}")
    lines.append(f"  nephelauxetic β = 1 − h̄·k = {params.beta:.3f}; pairing D = β·(7/6)(5B/2 + C) = {params.pairing_d_cm:,.0f} cm⁻¹")
    lines.append(f"  e_ds/e_σ {params.e_ds_ratio.value} — {params.e_ds_ratio.source}")
    lines.append(f"  e scale {params.e_scale.value} — {params.e_scale.source}")
    lines.append(f"  repulsion: ε {params.steric_scale_cm.value:,.0f} cm⁻¹, n {params.steric_exponent.value:g}, "
                 f"charge screening {params.screening.value:g} — {params.steric_scale_cm.source}")
    return "\n".join(lines)


def structures_text(cx, rows: list[dict]) -> str:
    headers = ["arrangement", "isomer", "tau4", "tau4′", "nearest shape (S)", "file"]
    body = [[r["arrangement"], r["isomer"] or "—", f"{r['tau4']:.3f}", f"{r['tau4_prime']:.3f}",
             f"{r['nearest_shape']} ({r['shape_measures'][r['nearest_shape']]:.2f})", r["file"]] for r in rows]
    return f"Ideal structures of {cx.formula} (d{cx.d_electrons}, charge {cx.charge:+d})\n\n" + _table(headers, body, right={2, 3})


def _number(value, digits=1, empty="—"):
    return empty if value is None else f"{value:.{digits}f}"


def _in_unit(value_kj_mol, unit: str):
    return None if value_kj_mol is None else convert_energy(value_kj_mol, "kj", unit)


# shown digits per energy unit (about 0.1 kJ/mol everywhere) and the unit as a table header writes it
UNIT_DIGITS = {"kj_mol": 1, "kcal_mol": 1, "ev": 3, "cm": 0, "hartree": 5}
UNIT_HEADERS = {"kj_mol": "kJ mol⁻¹", "kcal_mol": "kcal mol⁻¹", "ev": "eV", "cm": "cm⁻¹", "hartree": "Eh"}


def comparison_text(comparison, unit: str = "kj") -> str:
    """Per complex: every state with computed and estimated relative energies, then the verdicts."""
    unit = canonical_unit(unit)
    digits, header, label = UNIT_DIGITS[unit], UNIT_HEADERS[unit], UNIT_LABELS[unit]
    out = [f"{comparison.title} — level {comparison.level}", ""]
    for c in comparison.complexes:
        out.append(f"{c.formula}  (d{c.d_electrons})")
        headers = ["state", "spin", "relax", f"ΔE calc / {header}", f"ΔE est / {header}", "tau4", "shape", "⟨S²⟩",
                   "conv", "note"]
        rows = []
        order = {"T-4": 0, "SP-4": 1, "SS-4": 2, "vTBPY-4": 3}
        for r in sorted(c.records, key=lambda r: (order.get(r.arrangement, 9), r.isomer, r.spin2s, r.kind)):
            note = ""
            if r.status != "done":
                note = r.status if not r.reason else f"{r.status}: {r.reason}"
            elif r.broken_symmetry:
                note = "broken-symmetry singlet"
            elif r.spin_contaminated:
                note = "spin contaminated"
            s2 = "—" if r.s2 is None else f"{r.s2:.2f}"
            rows.append([r.name, spin_label(r.spin2s), r.kind, _number(_in_unit(r.relative_kj_mol, unit), digits),
                         _number(_in_unit(r.estimate_kj_mol, unit), digits),
                         _number(r.tau4, 2), r.nearest_shape or "—", s2,
                         "—" if r.converged is None else ("yes" if r.converged else "no"), note[:60]])
        out.append(_table(headers, rows, right={3, 4, 5, 7}))
        g, e = c.computed_ground, c.estimate.ground
        calc = "—" if g is None else f"{g.name}, {spin_label(g.spin2s)}"
        est = f"{_state_name(e.arrangement, e.isomer)}, {spin_label(e.spin2s)}"
        verdict = "" if c.agrees() is None else ("  (agree)" if c.agrees() else "  (DISAGREE)")
        out.append(f"ground state: computed {calc}; estimated {est}{verdict}")
        calc_delta, est_delta = c.delta_sp_t_kj_mol(), c.estimated_delta_kj_mol()
        for spin2s in sorted(set(calc_delta) | set(est_delta)):
            a, b = _in_unit(calc_delta.get(spin2s), unit), _in_unit(est_delta.get(spin2s), unit)
            diff = "" if a is None or b is None else f", difference {a - b:+.{digits}f}"
            out.append(f"ΔE(SP-4 − T-4) {spin_label(spin2s)}: computed {_number(a, digits)} {label}, "
                       f"estimated {_number(b, digits)} {label}{diff}")
        out.append("")
    for warning in comparison.warnings:
        out.append(f"note: {warning}")
    return "\n".join(out).rstrip() + "\n"


def run_summary_text(summary, out_dir) -> str:
    line = (f"{summary.total} jobs: {summary.done} done, {summary.failed} failed "
            f"({summary.ran} run now, {summary.skipped} already in the store) in {summary.wall_seconds:.0f} s; "
            f"results in {out_dir}")
    if summary.failures:
        line += "\nfailed: " + "; ".join(f"{label} — {reason}" for label, reason in summary.failures[:10])
    return line


def status_text(found: dict) -> str:
    lines = [f"{found['folder']}: {found['title']} (level {found['level']})",
             f"{found['total']} jobs: {found['done']} done, {found['failed']} failed, {found['pending']} pending"]
    for failure in found["failures"]:
        lines.append(f"  failed: {failure['label']} [{failure['task']}] — {failure['reason']}")
    return "\n".join(lines)


def report_text(report) -> str:
    """What `fourfold report` prints: the comparison, one summary line per complex, where the files went."""
    from .tables import summary_table

    unit = report.unit
    table = summary_table(report.comparison, unit)
    headers = ["complex", "dⁿ", "ground (calc)", "ground (est)", "agree", f"ΔE calc / {UNIT_HEADERS[unit]}",
               f"ΔE est / {UNIT_HEADERS[unit]}", "tau4"]
    keys = [c.key for c in table.columns[:8]]
    digits = UNIT_DIGITS[unit]
    rows = []
    for row in table.rows:
        agree = row["agree"]
        rows.append([row["formula"], str(row["d_electrons"]), row["computed_ground"] or "—", row["estimated_ground"],
                     "—" if agree is None else ("yes" if agree else "NO"), _number(row[keys[5]], digits),
                     _number(row[keys[6]], digits), _number(row["tau4_ground"], 2)])
    summary = ("Summary (ΔE = lowest SP-4 state − lowest T-4 state; positive: tetrahedral)\n"
               + _table(headers, rows, right={1, 5, 6, 7}))
    return "\n".join([comparison_text(report.comparison, unit), summary, "", report.summary_line()]) + "\n"

"""What the terminal shows: the same Table objects the written report uses, rendered as monospace text."""

from __future__ import annotations

from ..chem.complex import spin_label
from ..chem.magnetism import spin_only_moment
from ..units import cm_to_kj_mol, energy_unit
from .table import Column, Table, to_text
from .tables import complex_table, summary_table


def _occupation_marks(occupation) -> str:
    return " ".join({0: "·", 1: "↑", 2: "↑↓"}[n] for n in occupation)


def _state_name(arrangement: str, isomer: str) -> str:
    return f"{arrangement} {isomer}".strip()


def estimate_table(result) -> Table:
    """The estimate's states, lowest first: occupations and the three energy terms."""
    columns = [Column("state", "state", "state"), Column("spin", "spin", "spin"),
               Column("occupation", "occupation", "occupation"),
               Column("mu_eff", "μ_eff / μB", "", "number", 2),
               Column("ligand_field_cm-1", "ligand field / cm⁻¹", "", "number", 0),
               Column("pairing_cm-1", "pairing / cm⁻¹", "", "number", 0),
               Column("repulsion_cm-1", "repulsion / cm⁻¹", "", "number", 0),
               Column("energy_cm-1", "E rel / cm⁻¹", "", "number", 0),
               Column("energy_kj_mol", "E rel / kJ mol⁻¹", "", "number", 1)]
    rows = [{"state": _state_name(s.arrangement, s.isomer), "spin": spin_label(s.spin2s),
             "occupation": _occupation_marks(s.occupation), "mu_eff": spin_only_moment(s.spin2s),
             "ligand_field_cm-1": s.ligand_field_cm,
             "pairing_cm-1": s.pairing_cm, "repulsion_cm-1": s.repulsion_cm, "energy_cm-1": s.energy_cm,
             "energy_kj_mol": s.energy_kj_mol} for s in sorted(result.states, key=lambda s: s.energy_cm)]
    return Table("estimate", f"Ligand-field estimate for {{formula}}  (d{result.d_electrons})", columns, rows,
                 formula=result.formula)


def complex_header(cx, charge_assumed: bool = False) -> str:
    """The metal's oxidation state, d count and the charge, and a plain word when the charge was assumed."""
    charge = f"{cx.charge:+d}" if cx.charge else "0"
    line = f"{cx.metal.symbol}({cx.oxidation_state:+d}), d{cx.d_electrons}, charge {charge}"
    if charge_assumed:
        line += (f" — no charge was written, so {charge} is assumed and {cx.metal.symbol} is "
                 f"{cx.oxidation_state:+d} by the charge balance; write the charge (e.g. [NiCl4]2-) if that is not meant")
    return line


def estimate_text(result, cx=None, charge_assumed: bool = False) -> str:
    """The estimate as a chemist reads it: d levels per arrangement, terms per state, ΔE, ground state."""
    table = estimate_table(result)
    out = [table.heading("text")] + ([complex_header(cx, charge_assumed)] if cx is not None else []) + [""]
    seen = set()
    for s in result.states:
        key = (s.arrangement, s.isomer)
        if key in seen:
            continue
        seen.add(key)
        levels = "  ".join(f"{label} {value:,.0f}" for label, value in zip(s.level_labels, s.levels_cm, strict=False))
        out.append(f"{_state_name(*key):14s} d levels (cm⁻¹, low → high): {levels}")
    out += ["", to_text(table, title=False).rstrip("\n")]
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
    lines.append(f"  nephelauxetic β = 1 − h̄·k = {params.beta:.3f}; "
                 f"pairing D = β·(7/6)(5B/2 + C) = {params.pairing_d_cm:,.0f} cm⁻¹")
    lines.append(f"  e_ds/e_σ {params.e_ds_ratio.value} — {params.e_ds_ratio.source}")
    lines.append(f"  e scale {params.e_scale.value} — {params.e_scale.source}")
    lines.append(f"  repulsion: ε {params.steric_scale_cm.value:,.0f} cm⁻¹, n {params.steric_exponent.value:g}, "
                 f"charge screening {params.screening.value:g} — {params.steric_scale_cm.source}")
    return "\n".join(lines)


def structures_text(cx, rows: list[dict]) -> str:
    columns = [Column("arrangement", "arrangement", ""), Column("isomer", "isomer", ""),
               Column("tau4", "tau4", "", "number", 3), Column("tau4_prime", "tau4′", "", "number", 3),
               Column("shape", "nearest shape (S)", ""), Column("file", "file", "")]
    body = [{**r, "shape": f"{r['nearest_shape']} ({r['shape_measures'][r['nearest_shape']]:.2f})"} for r in rows]
    title = f"Ideal structures of {{formula}} (d{cx.d_electrons}, charge {cx.charge:+d})"
    return to_text(Table("structures", title, columns, body, formula=cx.formula))


def comparison_text(comparison, unit: str = "kj") -> str:
    """Per complex: the states table of the written report, its verdict lines and notes; then the caveats."""
    out = [f"{comparison.title} — level {comparison.level}", ""]
    for c in comparison.complexes:
        out.append(to_text(complex_table(c, unit, comparison.warnings), skip_notes=comparison.warnings))
    out += [f"note: {warning}" for warning in comparison.warnings]
    return "\n".join(out).rstrip() + "\n"


def run_summary_text(summary, out_dir) -> str:
    line = (f"{summary.total} jobs: {summary.done} done, {summary.failed} failed "
            f"({summary.ran} run now, {summary.skipped} already in the store) in {summary.wall_seconds:.0f} s; "
            f"results in {out_dir}")
    if summary.ran and summary.wall_seconds > 0:
        line += (f"\nthe jobs' own times add up to {summary.job_seconds:.0f} s: {summary.workers} workers kept "
                 f"{summary.job_seconds / (summary.workers * summary.wall_seconds):.0%} busy")
    if summary.failures:
        line += "\nfailed: " + "; ".join(f"{label} — {reason}" for label, reason in summary.failures[:10])
    return line


def status_text(found: dict) -> str:
    lines = [f"{found['folder']}: {found['title']} (level {found['level']}; store {found['store']})",
             f"{found['total']} jobs: {found['done']} done, {found['failed']} failed, {found['running']} running, "
             f"{found['pending']} pending"]
    if found["run_on"]:
        eta = found["eta_seconds"]
        lines.append(f"a run is on ({found['run_holder']})" + ("" if eta is None else
                     f"; about {eta / 60:.0f} min left at the mean time of the jobs done so far"))
    for formula, counts in found["per_complex"].items():
        lines.append(f"  {formula}: " + ", ".join(f"{n} {state}" for state, n in counts.items() if n))
    for failure in found["failures"]:
        lines.append(f"  failed: {failure['label']} [{failure['task']}] — {failure['reason']}")
    return "\n".join(lines)


def report_text(report) -> str:
    """What `fourfold report` prints: the comparison, the summary table, where the files went."""
    unit = energy_unit(report.unit).name
    summary = to_text(summary_table(report.comparison, unit), skip_notes=report.comparison.warnings)
    return "\n".join([comparison_text(report.comparison, unit), "Summary", summary, report.summary_line()]) + "\n"


def ligands_text(rows: list[dict]) -> str:
    """The ligand library (fourfold.field.ligand_library rows) as a terminal table; the sources of f and of the
    published cone angles as numbered notes."""
    from ..chem.metals import get_metal
    from ..field.ligand_library import REFERENCE_ION

    sources: dict[str, int] = {}

    def mark(pair: dict | None) -> str:
        return "" if pair is None else f" [{sources.setdefault(pair['source'], len(sources) + 1)}]"

    metal, charge = REFERENCE_ION
    columns = [Column("name", "ligand", ""), Column("formula", "formula", ""), Column("denticity", "dent.", ""),
               Column("donors", "donors", ""), Column("charge", "charge", ""),
               Column("e", f"e_σ / e_π at {metal}({charge:+d}) / cm⁻¹", ""), Column("f", "f", ""),
               Column("cone", "cone / °", ""), Column("tolman", "Tolman / °", ""),
               Column("bite_angle_deg", "bite / °", "", "number", 1)]
    body = []
    for row in rows:
        published = row["published_cone_angle_deg"]
        body.append({
            "name": row["name"], "formula": row["formula"], "denticity": str(row["denticity"]),
            "donors": ",".join(row["donors"]), "charge": f"{row['charge']:+d}",
            "e": f"{row['e_sigma_ni2_cm']['value']:,.0f} / {row['e_pi_ni2_cm']['value']:,.0f}",
            "f": f"{row['f']['value']:g}{mark(row['f'])}",
            "cone": " / ".join(f"{x:.0f}" for x in row["cone_angle_deg"]),
            "tolman": None if published is None else f"{published['value']:.0f}{mark(published)}",
            "bite_angle_deg": row["bite_angle_deg"]})
    g_kk = get_metal(metal).g(charge).value
    notes = [f"e_σ, e_π: Δ = 1.5·f·g with g({metal}({charge:+d})) = {g_kk} kK, Δ = 3e_σ − 4e_π, e_π = pi_ratio·e_σ. "
             "Cone: exact cone about the M–donor axis of the built fragment, M–donor 2.28 Å, Bondi radii, per donor "
             "for chelates; Tolman: published. Bite: D–M–D at the start M–donor distance."]
    notes += [f"[{number}] {source}" for source, number in sources.items()]
    return to_text(Table("ligands", "fourfold's ligand library", columns, body, notes), title=False)

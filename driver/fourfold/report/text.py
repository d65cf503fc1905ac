"""Plain-text tables for the terminal (monospace, units in every header)."""

from __future__ import annotations

from ..chem.complex import spin_label
from ..units import cm_to_kj_mol


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
    out += ["", f"Estimated ground state: {_state_name(g.arrangement, g.isomer)}, {spin_label(g.spin2s)}", ""]
    out.append(_parameters_text(result.parameters))
    return "\n".join(out)


def _parameters_text(params) -> str:
    lines = ["Parameters used (value — source):"]
    for name, p in params.ligands.items():
        lines.append(f"  {name}: e_σ {p.e_sigma_cm.value:,.0f} cm⁻¹ — {p.e_sigma_cm.source}")
        lines.append(f"  {name}: e_π {p.e_pi_cm.value:,.0f} cm⁻¹ — {p.e_pi_cm.source}")
        lines.append(f"  {name}: h {p.h.value} — {p.h.source}; repulsion K {p.repulsion_cm.value:,.0f} cm⁻¹ — {p.repulsion_cm.source}")
    lines.append(f"  metal: B {params.racah_b_cm.value:,.0f} cm⁻¹ — {params.racah_b_cm.source}")
    lines.append(f"  metal: C {params.racah_c_cm.value:,.0f} cm⁻¹ — {params.racah_c_cm.source}")
    lines.append(f"  metal: k {params.k.value} — {params.k.source}")
    lines.append(f"  nephelauxetic β = 1 − h̄·k = {params.beta:.3f}; pairing D = β·(7/6)(5B/2 + C) = {params.pairing_d_cm:,.0f} cm⁻¹")
    lines.append(f"  e_ds/e_σ {params.e_ds_ratio.value} — {params.e_ds_ratio.source}")
    lines.append(f"  e scale {params.e_scale.value} — {params.e_scale.source}")
    return "\n".join(lines)


def structures_text(cx, rows: list[dict]) -> str:
    headers = ["arrangement", "isomer", "tau4", "tau4′", "nearest shape (S)", "file"]
    body = [[r["arrangement"], r["isomer"] or "—", f"{r['tau4']:.3f}", f"{r['tau4_prime']:.3f}",
             f"{r['nearest_shape']} ({r['shape_measures'][r['nearest_shape']]:.2f})", r["file"]] for r in rows]
    return f"Ideal structures of {cx.formula} (d{cx.d_electrons}, charge {cx.charge:+d})\n\n" + _table(headers, body, right={2, 3})

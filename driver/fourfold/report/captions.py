"""Captions: one per figure and per table, and the texts an annotated figure prints as its title and notes.

A journal figure carries no title and no caveats: they live in its caption, written here from the same
functions the annotated figures use, so figure and caption cannot say different things. Formulas are set
in Unicode everywhere ([NiCl₄]²⁻), also inside the study's warnings.
"""

from __future__ import annotations

import re

from ..chem.notation import formula_slug
from ..compute.xtb_engine import XTB_SPIN_WARNING
from ..units import energy_unit
from .markup import formula_unicode, multiplicity_word

AGREEMENT_BAND_KJ_MOL = 10.0  # parity-plot band: typical DFT spin-state error scale (fourfold default)

XTB_NOTE = "GFN2-xTB energies: spin-state gaps are a screen only, not a verdict"
BS_MARK, CONTAMINATED_MARK = "BS", "*"
_GAS_PHASE = re.compile(r"^(?P<formula>.+?) is a (?P<charge>\d+)− anion computed in the gas phase: (?P<rest>.+)$")


def typeset(text: str, formulas) -> str:
    """``text`` with every formula of ``formulas`` in Unicode ('[NiCl4]2-' -> '[NiCl₄]²⁻'), longest first."""
    names = sorted(set(formulas), key=len, reverse=True)
    if not names:
        return text
    return re.sub("|".join(map(re.escape, names)), lambda m: formula_unicode(m.group(0)), text)


def _join(words: list[str]) -> str:
    return words[0] if len(words) == 1 else ", ".join(words[:-1]) + " and " + words[-1]


def merge_gas_phase(warnings) -> list[str]:
    """The study's 'X is a 2− anion computed in the gas phase' warnings as one line (at the first one's place)."""
    found = [(w, _GAS_PHASE.match(w)) for w in warnings]
    anions = [m for _, m in found if m]
    if len(anions) < 2:
        return list(warnings)
    charges = {m["charge"] for m in anions}
    kind = f"{anions[0]['charge']}− anions" if len(charges) == 1 else "anions"
    rest = anions[0]["rest"].replace("its outer electrons", "their outer electrons")
    merged = f"{_join([m['formula'] for m in anions])} are {kind} computed in the gas phase: {rest}"
    out, placed = [], False
    for w, m in found:
        if not m:
            out.append(w)
        elif not placed:
            out.append(merged)
            placed = True
    return out


def _formulas(comparison) -> list[str]:
    return [c.formula for c in comparison.complexes]


def _is_xtb(records) -> bool:
    return any(r.engine == "xtb" and r.energy_hartree is not None for r in records)


def complex_notes(records, formula: str, warnings) -> list[str]:
    """The caveats every energy figure of a complex carries: the xTB one, and the study's warnings that name the
    complex (a dianion in the gas phase, an unbound electron)."""
    notes = [XTB_NOTE] if _is_xtb(records) else []
    return notes + [typeset(w, [formula]) for w in warnings if formula in w and w != XTB_SPIN_WARNING]


def _general_caveats(comparison) -> list[str]:
    """The study's warnings that name no complex (energy basis, exact exchange): for captions of energy figures."""
    return [typeset(w, _formulas(comparison)) for w in comparison.warnings
            if w != XTB_SPIN_WARNING and not any(c.formula in w for c in comparison.complexes)]


def _range(values, digits: int = 2) -> str:
    low, high = min(values), max(values)
    return f"{low:.{digits}f}" if f"{low:.{digits}f}" == f"{high:.{digits}f}" else f"{low:.{digits}f}–{high:.{digits}f}"


def broken_symmetry_note(records) -> str | None:
    """What the BS mark means for the states shown: their ⟨S²⟩ range and whether the energies are projected."""
    bs = [r for r in records if r.broken_symmetry]
    if not bs:
        return None
    s2 = [r.s2 for r in bs if r.s2 is not None]
    text = "BS: broken-symmetry singlet (open-shell UKS solution" + (f", ⟨S²⟩ {_range(s2)})" if s2 else ")")
    projected = [r for r in bs if r.projected_energy_hartree is not None]
    if len(projected) == len(bs):
        return text + "; energy Yamaguchi-projected against the triplet at the same geometry"
    if not projected:
        return text + "; energy unprojected (no triplet at the same geometry)"
    return (text + f"; energy projected for {', '.join(r.name for r in projected)}, unprojected for "
            + ", ".join(r.name for r in bs if r.projected_energy_hartree is None))


def contamination_note(records) -> str | None:
    flagged = [r for r in records if r.spin_contaminated and not r.broken_symmetry]
    if not flagged:
        return None
    s2 = [r.s2 for r in flagged if r.s2 is not None]
    return f"{CONTAMINATED_MARK}: spin contaminated, |⟨S²⟩ − S(S+1)| > 0.1" + (f" (⟨S²⟩ {_range(s2)})" if s2 else "")


# ---- per figure: title and notes ------------------------------------------------------------------------

def ladder_title(c) -> str:
    return f"{formula_unicode(c.formula)}, spin-state ladder ({c.level})"


def ladder_notes(c, warnings) -> list[str]:
    shown = c.held_or_free()
    notes = complex_notes(c.records, c.formula, warnings)
    notes += [n for n in (broken_symmetry_note(shown), contamination_note(shown)) if n]
    missing = [f"{r.name} {multiplicity_word(r.spin2s)} ({r.kind}: {r.status})"
               for r in c.records if r.status != "done"]
    if missing:
        notes.append("not computed: " + "; ".join(missing[:4]) + (" …" if len(missing) > 4 else ""))
    return notes


def d_levels_title(c) -> str:
    return f"{formula_unicode(c.formula)}: d-orbital splitting (barycentre at 0)"


def d_levels_notes(c, has_dft: bool) -> list[str]:
    if not has_dft:
        why = "GFN2-xTB has none" if _is_xtb(c.records) else "no computed state carries them"
        return [f"no projected DFT d levels at level {c.level} ({why}): estimate only"]
    notes = ["DFT: d-dominated Kohn–Sham levels projected on the metal; electrons by aufbau for the state's 2S"]
    if any(r.broken_symmetry and r.d_levels_cm for r in c.held_or_free()):
        notes.append("BS: broken-symmetry singlet, its two unpaired electrons drawn with opposite spins on "
                     "different orbitals (not a closed-shell pair)")
    return notes


def parity_notes(comparison) -> list[str]:
    notes = [XTB_NOTE] if any(_is_xtb(c.records) for c in comparison.complexes) else []
    named = [w for w in comparison.warnings
             if w != XTB_SPIN_WARNING and any(c.formula in w for c in comparison.complexes)]
    notes += [typeset(w, _formulas(comparison)) for w in merge_gas_phase(named)]
    notes.append("ΔE: lowest SP-4 state minus lowest T-4 state (any spin); held relaxations where present")
    return notes


def path_title(c, point_group: str = "D₂d") -> str:
    """``point_group`` as the output sets it (mathtext 'D$_{2d}$' in a figure)."""
    return f"{formula_unicode(c.formula)}, {point_group} path (held relaxations)"


def path_notes(c, warnings, crossings) -> list[str]:
    done = [r for r in c.path_records if r.status == "done" and r.relative_kj_mol is not None]
    notes = complex_notes(done, c.formula, warnings)
    if crossings:
        notes.append("crossings: linear interpolation between neighbouring path points")
    failed = [r for r in c.path_records if r.status != "done"]
    if failed:
        notes.append(f"{len(failed)} path point(s) not computed")
    return notes


# ---- captions -------------------------------------------------------------------------------------------

def _sentences(parts) -> str:
    return " ".join(p if p.endswith(".") else p + "." for p in parts if p)


def _capital(text: str) -> str:
    return text[:1].upper() + text[1:]


def _ladder_caption(c, comparison, unit) -> str:
    kind = "held" if any(r.kind == "held" for r in c.held_or_free()) else "free"
    body = (f"Energies / {unit.header} relative to the complex's lowest computed state: computed ({kind} "
            "relaxations; left bar of each arrangement) beside the ligand-field (AOM) estimate (right bar, relative "
            "to the estimate's lowest state); dotted lines join the same state; numbers beside the bars are the "
            "multiplicity 2S+1")
    notes = ladder_notes(c, comparison.warnings) + _general_caveats(comparison)
    return _sentences([ladder_title(c), body, *map(_capital, notes)])


def _d_levels_caption(c, comparison, unit) -> str:
    has_dft = any(r.d_levels_cm for r in c.held_or_free())
    body = ("d-orbital energies / 10³ cm⁻¹, each column relative to its barycentre. For each arrangement (named "
            "below its panel with the state drawn): the angular-overlap (AOM) estimate"
            + (", and the projected Kohn–Sham d levels of the lowest computed state of that arrangement (DFT)"
               if has_dft else "")
            + "; arrows are the state's d electrons. Levels closer than a label's height are drawn side by side and "
            "named together; primes tell apart separate levels of the same character")
    return _sentences([d_levels_title(c), body, *map(_capital, d_levels_notes(c, has_dft))])


def _parity_caption(comparison, unit) -> str:
    band = unit.from_kj_mol(AGREEMENT_BAND_KJ_MOL)
    body = (f"Estimated against computed ΔE(SP-4 − T-4) / {unit.header} per complex; dashed line: parity; band: "
            f"±{band:.{unit.digits}f} {unit.header}; grey quadrants: estimate and calculation prefer the same "
            "geometry (upper right: both T-4 lower; lower left: both SP-4 lower); circles: same ground state "
            "(arrangement and spin), triangles: different ground states")
    notes = parity_notes(comparison) + _general_caveats(comparison)
    return _sentences([f"{comparison.title}: ligand-field estimate against calculation ({comparison.level})", body,
                       *map(_capital, notes)])


def _path_caption(c, comparison, unit) -> str:
    from ..verdict.comparison import spin_crossings

    crossings = spin_crossings(c.path_records)
    body = (f"Energy / {unit.header} (on the zero of the states table) against the trans L–M–L angle along the D₂d "
            "path from T-4 (109.5°) to SP-4 (180°), per spin state" + (" and SP-4 isomer" if any(
                r.isomer for r in c.path_records) else "") + ("; open circles: spin crossings" if crossings else ""))
    notes = path_notes(c, comparison.warnings, crossings) + _general_caveats(comparison)
    return _sentences([path_title(c), body, *map(_capital, notes)])


def figure_caption(name: str, comparison, unit: str = "kj") -> str:
    """The caption of figure ``name`` (a key of fourfold.report.figures.study_figures)."""
    u = energy_unit(unit)
    if name == "parity":
        return _parity_caption(comparison, u)
    by_slug = {formula_slug(c.formula): c for c in comparison.complexes}
    for prefix, write in (("ladder_", _ladder_caption), ("d_levels_", _d_levels_caption), ("path_", _path_caption)):
        if name.startswith(prefix) and name[len(prefix):] in by_slug:
            return write(by_slug[name[len(prefix):]], comparison, u)
    raise KeyError(f"no caption for figure {name!r}")


def table_caption(table, comparison, unit: str = "kj") -> str:
    """A table's title, the units of its columns and its notes."""
    u = energy_unit(unit)
    units = []
    if any(column.key.endswith(f"_{u.suffix}") for column in table.columns):
        units.append(f"energies in {u.header}")
    if any(column.key.endswith("_cm-1") for column in table.columns) and u.suffix != "cm-1":
        units.append("AOM parameters in cm⁻¹")
    notes = [typeset(n, _formulas(comparison)) for n in merge_gas_phase(table.notes)]
    return _sentences([table.heading("md"), _capital("; ".join(units)) if units else "", *notes])


def captions_markdown(comparison, figure_names, tables, unit: str = "kj") -> str:
    """captions.md: one caption per figure and per table, in the order they are written."""
    lines = [f"# Captions: {comparison.title}", "", "## Figures", ""]
    for name in figure_names:
        lines += [f"**Figure `{name}`.** {figure_caption(name, comparison, unit)}", ""]
    lines += ["## Tables", ""]
    for table in tables:
        lines += [f"**Table `{table.name}`.** {table_caption(table, comparison, unit)}", ""]
    return "\n".join(lines)

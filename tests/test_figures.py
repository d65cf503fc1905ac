"""Figures for print: the journal style, labels that stay beside their data and off each other, broken-symmetry
singlets drawn as such, captions that carry what the figures leave out.

The comparisons here are built from StateRecords, not from a calculation: their energies and d levels are layout
fixtures chosen to crowd the figures (near-degenerate levels, points in the agreement band, two SP-4 isomers),
with no physical claim, except the [NiCl2(PH3)2] d levels, which fourfold computed for its demo study. The checks
are geometric (text boxes, positions in data coordinates; legible print figures: common practice, no source) or
about what the texts say. Where a fixture follows a fact of the trade, the fact is named beside it.
"""

import re

import pytest
from matplotlib.text import Text

from fourfold.chem.complex import complex_from_formula
from fourfold.compute.levels import get_level
from fourfold.errors import InputError
from fourfold.field.estimate import estimate
from fourfold.report import captions, figures
from fourfold.units import HARTREE_KJ_MOL
from fourfold.verdict.comparison import Comparison, ComplexComparison, StateRecord, _charge_warnings, energy_caveats

# The split t2 set of a tetrahedral triplet whose projection gives two levels the same mixed label: the case the
# d-splitting figure named twice ("d_yz/xy") in one column.
T4_SPLIT_T2 = dict(d_levels_cm=[-2600.0, -2500.0, 1500.0, 1650.0, 1950.0],
                   d_level_labels=["z2", "x2-y2", "yz/xy", "xz", "yz/xy"])


def _record(formula, arrangement, isomer, spin2s, energy_hartree, **fields):
    fields.setdefault("status", "done")
    fields.setdefault("converged", True)
    fields.setdefault("engine", "dft")
    return StateRecord(formula, arrangement, isomer, spin2s, "held", energy_hartree=energy_hartree, **fields)


def _complex(formula, records):
    cx = complex_from_formula(formula)
    lowest = min(r.verdict_energy_hartree for r in records)
    for r in records:
        r.relative_kj_mol = (r.verdict_energy_hartree - lowest) * HARTREE_KJ_MOL
        r.estimate_kj_mol = 0.0
        if r.projected_energy_hartree is not None:
            r.unprojected_relative_kj_mol = (r.energy_hartree - lowest) * HARTREE_KJ_MOL
    return cx, ComplexComparison(cx.formula, cx.d_electrons, records, estimate(cx), "quick")


def _study():
    """Three nickel(II) complexes at a DFT level in the gas phase: two dianions (one gas-phase warning each) and a
    neutral bis(phosphine) with cis and trans SP-4 isomers and broken-symmetry singlets."""
    tetrachloro = [
        _record("[NiCl4]2-", "T-4", "", 2, -10.000, s2=2.01, **T4_SPLIT_T2),
        # a broken-symmetry singlet of two antiferromagnetically coupled unpaired electrons has ⟨S²⟩ near 1
        # (Noodleman, J. Chem. Phys. 1981, 74, 5737; from memory)
        _record("[NiCl4]2-", "T-4", "", 0, -9.990, s2=0.98, broken_symmetry=True, projected_energy_hartree=-9.992),
        _record("[NiCl4]2-", "SP-4", "", 0, -9.985, s2=0.0, d_levels_cm=[-4200.0, -3900.0, -3900.0, -2500.0, 14500.0],
                d_level_labels=["z2", "xz", "yz", "xy", "x2-y2"]),
        _record("[NiCl4]2-", "SP-4", "", 2, -9.990, s2=2.02),
    ]
    # d levels as fourfold projected them for the demo's held [NiCl2(PH3)2] structures (B3LYP/def2-SVP): a crowded
    # T-4 column of mixed characters beside planar columns spanning 60 000 cm⁻¹
    phosphine = [
        _record("[NiCl2(PH3)2]", "T-4", "", 2, -20.000, s2=2.01,
                d_levels_cm=[-10319.0, -7277.0, -6226.0, -2700.0, 26521.0],
                d_level_labels=["xy/yz", "xz", "z2", "x2-y2/xz", "yz/xy"]),
        _record("[NiCl2(PH3)2]", "T-4", "", 0, -19.990, s2=0.31, broken_symmetry=True),
        _record("[NiCl2(PH3)2]", "SP-4", "cis", 0, -20.010, s2=0.0,
                d_levels_cm=[-23035.0, -11830.0, -1144.0, -278.0, 36286.0],
                d_level_labels=["xy", "xz/yz", "z2", "yz/xz", "x2-y2"]),
        _record("[NiCl2(PH3)2]", "SP-4", "cis", 2, -19.985, s2=2.02),
        _record("[NiCl2(PH3)2]", "SP-4", "trans", 0, -20.006, s2=0.50, broken_symmetry=True,
                projected_energy_hartree=-20.008, d_levels_cm=[-23635.0, -8892.0, -3438.0, 742.0, 35223.0],
                d_level_labels=["xy", "yz", "z2", "xz", "x2-y2"]),
        _record("[NiCl2(PH3)2]", "SP-4", "trans", 2, -19.990, s2=2.0),
    ]
    tetrabromo = [_record("[NiBr4]2-", "T-4", "", 2, -30.0), _record("[NiBr4]2-", "SP-4", "", 0, -29.99)]
    level = get_level("quick")
    complexes, warnings = [], []
    for formula, records in (("[NiCl4]2-", tetrachloro), ("[NiCl2(PH3)2]", phosphine), ("[NiBr4]2-", tetrabromo)):
        cx, c = _complex(formula, records)
        complexes.append(c)
        warnings += _charge_warnings(cx, records, level)
    return Comparison("figure test", "quick", complexes, warnings + energy_caveats(level))


@pytest.fixture(scope="module")
def study():
    return _study()


@pytest.fixture(scope="module")
def journal(study):
    return figures.study_figures(study, "kj", style="journal")


@pytest.fixture(scope="module")
def annotated(study):
    return figures.study_figures(study, "kj", style="annotated")


def _all_texts(fig):
    """Every visible text of a figure with its display box: figure texts, titles, axis and tick labels, legends,
    texts on the axes."""
    renderer = fig.canvas.get_renderer()
    fig.canvas.draw()
    found = [(t, "figure") for t in fig.texts]  # the suptitle among them
    for ax in _every_axes(fig):
        found += [(t, ax) for t in ax.texts]
        found += [(t, ax) for t in (ax.title, ax._left_title, ax._right_title, ax.xaxis.label, ax.yaxis.label)]
        (x0, x1), (y0, y1) = sorted(ax.get_xlim()), sorted(ax.get_ylim())
        found += [(t, ax) for t in ax.get_xticklabels(which="both") if x0 <= t.get_position()[0] <= x1]
        found += [(t, ax) for t in ax.get_yticklabels() if y0 <= t.get_position()[1] <= y1]  # ticks drawn
        legend = ax.get_legend()
        if legend is not None:
            found += [(t, ax) for t in legend.get_texts() + [legend.get_title()]]
    return [(t, owner, t.get_window_extent(renderer)) for t, owner in found if t.get_visible() and t.get_text().strip()]


def _every_axes(fig):
    """The figure's axes and their children (a secondary axis)."""
    return [a for ax in fig.axes for a in (ax, *ax.child_axes)]


def _overlaps(fig):
    """Pairs of texts whose boxes overlap, among the texts of one axes (and the figure's own texts)."""
    texts = _all_texts(fig)
    clashes = []
    for i, (a, owner_a, box_a) in enumerate(texts):
        for b, owner_b, box_b in texts[i + 1:]:
            if owner_a is owner_b and box_a.overlaps(box_b):
                clashes.append((a.get_text(), b.get_text()))
    return clashes


def test_journal_figures_carry_only_axis_tick_legend_and_data_labels(journal, annotated):
    assert set(journal) == set(annotated) == {"ladder_NiCl4_2-", "d_levels_NiCl4_2-", "ladder_NiCl2PH32",
                                              "d_levels_NiCl2PH32", "ladder_NiBr4_2-", "d_levels_NiBr4_2-", "parity"}
    for name, fig in journal.items():
        assert not fig.texts, name  # no caveats under the figure
        assert fig._suptitle is None or not fig._suptitle.get_text(), name
        for ax in _every_axes(fig):
            assert not any(t.get_text() for t in (ax.title, ax._left_title, ax._right_title)), name
            strays = [t.get_text() for t in ax.texts if t.get_text().strip() and t.get_gid() != figures.DATA_LABEL]
            assert not strays, (name, strays)
    # the annotated style keeps its title and notes: the check above can fail
    assert annotated["ladder_NiCl4_2-"].axes[0].get_title(loc="left") == "[NiCl₄]²⁻, spin-state ladder (quick)"
    assert annotated["ladder_NiCl4_2-"].texts


def test_a_figure_style_outside_the_two_is_one_clear_error(study):
    with pytest.raises(InputError) as error:
        figures.study_figures(study, "kj", style="poster")
    assert "annotated, journal" in str(error.value) and "\n" not in str(error.value)


@pytest.mark.parametrize("style", ["journal", "annotated"])
def test_no_two_texts_overlap(style, journal, annotated):
    for name, fig in {"journal": journal, "annotated": annotated}[style].items():
        assert not _overlaps(fig), name


def _d_columns(fig):
    """Per panel: (estimate labels, DFT labels, bars, electron arrows) with display boxes."""
    renderer = fig.canvas.get_renderer()
    fig.canvas.draw()
    panels = []
    for ax in fig.axes:
        labels = [t for t in ax.texts if t.get_gid() == figures.DATA_LABEL]
        bars = [(line, line.get_window_extent(renderer)) for line in ax.lines if line.get_gid() == "d-level"]
        arrows = [(p, p.get_window_extent(renderer)) for p in ax.patches if (p.get_gid() or "").startswith("electron")]
        panels.append(([t for t in labels if t.get_ha() == "right"], [t for t in labels if t.get_ha() == "left"],
                       bars, arrows, ax))
    return panels


@pytest.mark.parametrize("name", ["d_levels_NiCl4_2-", "d_levels_NiCl2PH32"])
def test_d_levels_name_each_row_once_beside_its_own_bars(journal, name):
    fig = journal[name]
    renderer = fig.canvas.get_renderer()
    for est_labels, dft_labels, bars, _, _ in _d_columns(fig):
        for column in (est_labels, dft_labels):
            names = [t.get_text() for t in column]
            assert len(names) == len(set(names)), names
            for label in column:
                box = label.get_window_extent(renderer)
                # a bar at the label's height (within its box) that ends right beside it
                beside = [b for _, b in bars if box.y0 - 1 <= (b.y0 + b.y1) / 2 <= box.y1 + 1
                          and min(abs(box.x0 - b.x1), abs(b.x0 - box.x1)) < 12]
                assert beside, label.get_text()
    if name == "d_levels_NiCl4_2-":  # the split t2 of the T-4 DFT column: one label naming the d functions shared
        t4_dft = _d_columns(fig)[0][1]
        assert any(re.search(r"xy.*xz.*yz", t.get_text()) for t in t4_dft)


def test_repeated_characters_in_separate_rows_get_primes():
    names = figures._row_names([[[0]], [[1]], [[2]]], ["yz/xy", "z2", "yz/xy"])
    assert names == [["yz/xy"], ["z2"], ["yz/xy'"]]


def test_broken_symmetry_singlet_has_its_unpaired_spins_opposite_on_different_orbitals(journal):
    # a broken-symmetry singlet is an open-shell solution with one unpaired α and one unpaired β electron on
    # different centres/orbitals (Noodleman, J. Chem. Phys. 1981, 74, 5737; from memory): never a closed-shell pair
    fig = journal["d_levels_NiCl2PH32"]
    trans = _d_columns(fig)[-1]
    assert [t.get_text() for t in trans[4].get_xticklabels()] == ["AOM est.", "DFT (BS)"]
    dft_colour = figures.OKABE_ITO["vermillion"]
    bars = [(line.get_ydata()[0], box) for line, box in trans[2] if line.get_color() == dft_colour]
    spins = []
    for _, box in sorted(bars, key=lambda item: item[0]):
        mine = [p for p, a in trans[3] if box.x0 <= (a.x0 + a.x1) / 2 <= box.x1 and a.y0 <= box.y0 <= a.y1]
        spins.append(sorted(p.get_gid() for p in mine))
    # d8: three pairs below, then one up and one down on the two highest orbitals
    pair = ["electron-down", "electron-up"]
    assert spins == [pair, pair, pair, ["electron-up"], ["electron-down"]]


@pytest.mark.parametrize("name", ["d_levels_NiCl4_2-", "d_levels_NiCl2PH32"])
def test_bars_are_at_least_as_wide_as_their_arrows(journal, name):
    for _, _, bars, arrows, _ in _d_columns(journal[name]):
        assert arrows
        for _, arrow in arrows:
            assert any(bar.x0 - 0.5 <= arrow.x0 and arrow.x1 <= bar.x1 + 0.5 for _, bar in bars)


def test_ladder_group_labels_apart_and_energies_are_the_verdicts(journal, study):
    fig = journal["ladder_NiCl2PH32"]
    ax = fig.axes[0]
    renderer = fig.canvas.get_renderer()
    fig.canvas.draw()
    ticks = [t.get_window_extent(renderer) for t in ax.get_xticklabels()]
    assert len(ticks) == 3 and not any(a.overlaps(b) for i, a in enumerate(ticks) for b in ticks[i + 1:])
    trans_bs = next(r for r in study.complexes[1].records if r.isomer == "trans" and r.spin2s == 0)
    bar = next(line for line in ax.lines if line.get_gid() == "calc:SP-4 trans:0")
    # the projected energy, not the raw broken-symmetry one
    assert bar.get_ydata()[0] == pytest.approx((trans_bs.projected_energy_hartree + 20.010) * HARTREE_KJ_MOL)


def test_broken_symmetry_note_gives_the_s2_range_shown_and_the_projection(study):
    notes = captions.ladder_notes(study.complexes[1], study.warnings)
    bs = [n for n in notes if n.startswith("BS")]
    assert bs == ["BS: broken-symmetry singlet (open-shell UKS solution, ⟨S²⟩ 0.31–0.50); energy projected for "
                  "SP-4 trans, unprojected for T-4"]
    assert captions.broken_symmetry_note(study.complexes[0].records).endswith(
        "⟨S²⟩ 0.98); energy Yamaguchi-projected against the triplet at the same geometry")


def test_parity_labels_stay_out_of_the_agreement_band(study, journal, annotated):
    for fig in (journal["parity"], annotated["parity"]):
        ax = fig.axes[0]
        renderer = fig.canvas.get_renderer()
        fig.canvas.draw()
        band = figures.AGREEMENT_BAND_KJ_MOL
        labels = [t for t in ax.texts if t.get_text().strip()]
        assert {t.get_text() for t in labels} >= {"[NiCl₄]²⁻", "[NiCl₂(PH₃)₂]", "[NiBr₄]²⁻"}
        for t in labels:
            box = Text.get_window_extent(t, renderer)  # the text itself, without its leader line
            (x0, y0), (x1, y1) = ax.transData.inverted().transform([[box.x0, box.y0], [box.x1, box.y1]])
            assert y0 - x1 > band or y1 - x0 < -band, t.get_text()
    # the fixture puts a point inside the band, so its label had to move out
    assert any(abs(computed - estimated) < band for _, estimated, computed, _ in figures.parity_points(study))


def test_gas_phase_caveats_merge_into_one_line(study):
    notes = captions.parity_notes(study)
    gas = [n for n in notes if "gas phase" in n]
    assert gas == ["[NiCl₄]²⁻ and [NiBr₄]²⁻ are 2− anions computed in the gas phase: their outer electrons may be "
                   "unbound; prefer a solvent (C-PCM) for final numbers."]


def test_formulas_are_set_the_same_in_figures_and_captions(study, annotated):
    raw = re.compile(r"\[Ni[A-Za-z]+\d|\]\d[+-]")  # '[NiCl4', ']2-': a formula left in plain text
    for name, fig in annotated.items():
        for text, _, _ in _all_texts(fig):
            assert not raw.search(text.get_text()), (name, text.get_text())
    from fourfold.report.tables import study_tables

    markdown = captions.captions_markdown(study, list(annotated), study_tables(study, "kj"), "kj")
    assert not raw.search(markdown)
    assert markdown.count("**Figure") == len(annotated) and "[NiCl₄]²⁻" in markdown
    assert "**Table `ligand_field`.**" in markdown and "kJ mol⁻¹" in markdown


def test_captions_hold_what_the_journal_figures_leave_out(study):
    text = captions.figure_caption("ladder_NiCl2PH32", study, "kj")
    assert text.startswith("[NiCl₂(PH₃)₂], spin-state ladder (quick).")
    assert "⟨S²⟩ 0.31–0.50" in text and "kJ mol⁻¹" in text and "no zero-point" in text
    assert "broken-symmetry singlet" in captions.figure_caption("d_levels_NiCl2PH32", study, "kj")
    assert "±2.4 kcal mol⁻¹" in captions.figure_caption("parity", study, "kcal")
    with pytest.raises(KeyError):
        captions.figure_caption("ladder_NiI4_2-", study, "kj")


def test_path_figure_in_journal_style_names_its_ends_as_ticks():
    _, c = _complex("[NiCl4]2-", [_record("[NiCl4]2-", "T-4", "", 2, -10.0),
                                  _record("[NiCl4]2-", "SP-4", "", 0, -9.99)])
    angles = [109.47, 144.7, 180.0]
    for spin2s, energies in ((2, [-10.0, -9.995, -9.985]), (0, [-9.98, -9.992, -9.99])):
        for angle, energy in zip(angles, energies, strict=False):
            c.path_records.append(_record("[NiCl4]2-", "SP-4", "", spin2s, energy, trans_angle_deg=angle,
                                          relative_kj_mol=(energy + 10.0) * HARTREE_KJ_MOL))
    fig = figures.path_figure(c, "kj", style="journal")
    assert not fig.texts and not any(ax.title.get_text() or ax._left_title.get_text() for ax in _every_axes(fig))
    labels = [t.get_text() for ax in _every_axes(fig) for t in ax.get_xticklabels()]
    assert "T-4" in labels and "SP-4" in labels
    assert all(t.get_gid() == figures.DATA_LABEL for t in fig.axes[0].texts) and fig.axes[0].texts  # the crossing
    assert not _overlaps(fig)

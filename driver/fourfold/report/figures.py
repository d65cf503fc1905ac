"""Figures of a comparison, sized and styled for print.

Each function returns a matplotlib ``Figure`` (object-oriented API, Agg canvas, no pyplot state); ``save_figure``
writes it as vector PDF and SVG plus a 300 dpi PNG.

  ladder_figure      spin-state ladder of one complex: computed levels beside estimated ones
  d_levels_figure    d-orbital splitting per arrangement: AOM estimate beside the projected DFT levels
  parity_figure      estimate vs computed ΔE(SP-4 − T-4) across the study, parity line and agreement band
  path_figure        energy along the D2d path T-4 → SP-4 per spin state, spin crossings marked

Style (fourfold's own): the Okabe–Ito colour-blind-safe palette (M. Okabe, K. Ito, "Color Universal Design",
2008), one colour and one marker per spin state so the figures also read in greyscale, 7–8 pt text at the
printed size, units on every axis. Widths: one column 85 mm, two columns 178 mm (common journal sizes;
common practice, no source).
"""

from __future__ import annotations

import os
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..compute.xtb_engine import XTB_SPIN_WARNING
from ..chem.notation import formula_slug
from ..geometry.polyhedra import arrangement_rank
from ..units import energy_unit
from .markup import formula_unicode, multiplicity_word, orbital_mathtext

SINGLE_COLUMN_IN = 85 / 25.4
DOUBLE_COLUMN_IN = 178 / 25.4
PNG_DPI = 300
FIGURE_FORMATS = ("pdf", "svg", "png")
AGREEMENT_BAND_KJ_MOL = 10.0  # parity-plot band: typical DFT spin-state error scale (fourfold default)

OKABE_ITO = {"black": "#000000", "orange": "#E69F00", "sky blue": "#56B4E9", "bluish green": "#009E73",
             "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "reddish purple": "#CC79A7"}
# the light Okabe–Ito colours (sky blue, yellow) last or not at all: thin lines in them fade on white paper
_SPIN_COLOURS = {0: "blue", 1: "bluish green", 2: "vermillion", 3: "orange", 4: "reddish purple", 5: "sky blue"}
_SPIN_MARKERS = {0: "o", 1: "v", 2: "s", 3: "^", 4: "D", 5: "P"}
_ISOMER_LINES = {"": "-", "trans": "-", "cis": "--"}
_GREY = "#6b6b6b"
# Units and formulas in Unicode (DejaVu Sans has the sub- and superscript digits): mathtext parsing was the
# largest cost of writing a report (measured with cProfile), so it is kept for the orbital labels only.
XTB_NOTE = "GFN2-xTB energies: spin-state gaps are a screen only, not a verdict"

_STYLE = {
    "font.family": "DejaVu Sans", "font.size": 8, "axes.labelsize": 8, "axes.titlesize": 8,
    "xtick.labelsize": 7, "ytick.labelsize": 7, "legend.fontsize": 7, "legend.frameon": False,
    "axes.linewidth": 0.6, "xtick.major.width": 0.6, "ytick.major.width": 0.6, "xtick.direction": "out",
    "ytick.direction": "out", "axes.spines.top": False, "axes.spines.right": False, "lines.linewidth": 1.2,
    "mathtext.default": "regular",  # upright d in the orbital labels
    "pdf.fonttype": 42, "ps.fonttype": 42,  # TrueType in PDF: text stays text, editable in a journal's tools
    "svg.fonttype": "path", "svg.hashsalt": "fourfold",  # reproducible SVG ids
    "savefig.dpi": PNG_DPI, "savefig.bbox": "tight", "savefig.pad_inches": 0.02,
}


def spin_colour(spin2s: int) -> str:
    return OKABE_ITO[_SPIN_COLOURS.get(spin2s, "black")]


def spin_marker(spin2s: int) -> str:
    return _SPIN_MARKERS.get(spin2s, "X")


def unit_math(unit: str) -> str:
    return energy_unit(unit).header


@contextmanager
def _style():
    import matplotlib

    with matplotlib.rc_context(_STYLE):
        yield


def _new_figure(width_in: float, height_in: float):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width_in, height_in), layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def _width(columns: int) -> float:
    return DOUBLE_COLUMN_IN if columns == 2 else SINGLE_COLUMN_IN


def _in_unit(value_kj_mol, unit):
    return energy_unit(unit).from_kj_mol(value_kj_mol)


def _spread(targets, gap: float) -> np.ndarray:
    """Label positions as near their targets as possible and at least ``gap`` apart (same order)."""
    targets = np.asarray(targets, dtype=float)
    order = np.argsort(targets, kind="stable")
    blocks = [[float(targets[i]), 1] for i in order]  # [mean target, count]; merged while they overlap
    merged = []
    for block in blocks:
        merged.append(block)
        while len(merged) > 1:
            (m1, n1), (m2, n2) = merged[-2], merged[-1]
            top_of_lower = m1 + gap * (n1 - 1) / 2
            bottom_of_upper = m2 - gap * (n2 - 1) / 2
            if bottom_of_upper - top_of_lower >= gap:
                break
            merged[-2:] = [[(m1 * n1 + m2 * n2) / (n1 + n2), n1 + n2]]
    placed = []
    for mean, count in merged:
        placed += [mean + gap * (k - (count - 1) / 2) for k in range(count)]
    out = np.empty(len(targets))
    out[order] = placed
    return out


def _caveats(fig, lines: list[str]) -> None:
    """Notes under the figure, wrapped to its width (6 pt DejaVu Sans: about 3.3 pt per character)."""
    import textwrap

    if lines:
        per_line = int(fig.get_figwidth() * 72 / 3.4)
        text = "\n".join(textwrap.fill(line, per_line) for line in lines)
        fig.text(0.0, 0.0, text, fontsize=6, color=_GREY, ha="left", va="top", style="italic",
                 transform=fig.transFigure)


def _complex_notes(records, formula: str, warnings) -> list[str]:
    """The caveats every energy figure of a complex carries: the xTB one, and the study's warnings that name
    the complex (a dianion in the gas phase)."""
    notes = [XTB_NOTE] if _is_xtb(records) else []
    return notes + [w for w in warnings if formula in w and w != XTB_SPIN_WARNING]


def _is_xtb(records) -> bool:
    return any(r.engine == "xtb" and r.energy_hartree is not None for r in records)


def _groups(c) -> list[tuple[str, str]]:
    found = {(s.arrangement, s.isomer) for s in c.estimate.states} | {(r.arrangement, r.isomer) for r in c.records}
    return sorted(found, key=lambda g: (arrangement_rank(g[0]), g[1]))


def _group_label(group) -> str:
    return f"{group[0]} {group[1]}".strip()


# ---- spin-state ladder ---------------------------------------------------------------------------------

def ladder_figure(c, unit: str = "kj", columns: int = 1, warnings=()):
    """Levels of every arrangement × isomer × 2S of one complex: computed (left) beside estimated (right)."""
    from matplotlib.lines import Line2D

    unit = energy_unit(unit).name
    groups = _groups(c)
    computed = {(r.arrangement, r.isomer, r.spin2s): _in_unit(r.relative_kj_mol, unit) for r in c.held_or_free()}
    marks = {(r.arrangement, r.isomer, r.spin2s): " BS" if r.broken_symmetry else ("*" if r.spin_contaminated else "")
             for r in c.held_or_free()}
    estimated = {(s.arrangement, s.isomer, s.spin2s): _in_unit(s.energy_kj_mol, unit) for s in c.estimate.states}
    spins = sorted({key[2] for key in estimated} | {key[2] for key in computed})
    width, inner = 0.27, 0.07  # bar length and half the gap between a group's two columns (group pitch 1)
    with _style():
        fig = _new_figure(_width(columns if len(groups) <= 3 else 2), 2.9)
        ax = fig.add_subplot()
        values = [v for v in (*computed.values(), *estimated.values()) if v is not None]
        span = (max(values) - min(values)) if values else 1.0
        gap = 0.06 * (span or 1.0)
        labels = []
        for i, group in enumerate(groups):
            for side, table in ((-1, computed), (1, estimated)):
                keys = [(*group, s) for s in spins if table.get((*group, s)) is not None]
                if not keys:
                    continue
                x0, x1 = (i - inner - width, i - inner) if side < 0 else (i + inner, i + inner + width)
                energies = [table[k] for k in keys]
                for key, energy in zip(keys, energies):
                    ax.plot([x0, x1], [energy, energy], color=spin_colour(key[2]), lw=2.0, solid_capstyle="butt",
                            gid=f"{'calc' if side < 0 else 'est'}:{_group_label(group)}:{key[2]}")
                label_x = x0 - 0.025 if side < 0 else x1 + 0.025
                for key, y in zip(keys, _spread(energies, gap)):
                    mark = marks.get(key, "") if side < 0 else ""
                    labels.append(ax.text(label_x, y, f"{key[2] + 1}{mark}", color=spin_colour(key[2]), fontsize=6.5,
                                          fontweight="bold", ha="right" if side < 0 else "left", va="center"))
            for s in spins:  # correlation lines: the same state, computed and estimated
                a, b = computed.get((*group, s)), estimated.get((*group, s))
                if a is not None and b is not None:
                    ax.plot([i - inner, i + inner], [a, b], color=spin_colour(s), lw=0.6, ls=":")
        ax.set_xticks(range(len(groups)), [_group_label(g) for g in groups], fontweight="bold", fontsize=7.5)
        ax.set_xticks([x for i in range(len(groups)) for x in (i - inner - width / 2, i + inner + width / 2)],
                      [t for _ in groups for t in ("calc.", "est.")], minor=True, fontsize=6.5)
        ax.tick_params(axis="x", which="both", length=0)
        ax.tick_params(axis="x", which="major", pad=11)
        ax.tick_params(axis="x", which="minor", pad=2)
        ax.set_xlim(-0.5, len(groups) - 0.5)
        ax.set_ylabel(f"relative energy / {unit_math(unit)}")
        ax.spines["bottom"].set_visible(False)
        ax.axhline(0.0, color=_GREY, lw=0.4, zorder=0)
        ax.set_title(f"{formula_unicode(c.formula)}, spin-state ladder ({c.level})", loc="left")
        handles = [Line2D([], [], color=spin_colour(s), lw=2.0, label=f"{s + 1}  {multiplicity_word(s)}") for s in spins]
        ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.0, 1.0), handlelength=1.2, borderaxespad=0.2,
                  title="2S+1", title_fontsize=7, alignment="left")
        notes = _complex_notes(c.records, c.formula, warnings)
        flagged = [r for r in c.held_or_free() if r.broken_symmetry or r.spin_contaminated]
        if any(r.broken_symmetry for r in flagged):
            notes.append("BS: broken-symmetry singlet (open-shell UKS solution, ⟨S²⟩ near 1), not a closed-shell one")
        if any(r.spin_contaminated and not r.broken_symmetry for r in flagged):
            notes.append("*: spin contaminated, |⟨S²⟩ − S(S+1)| > 0.1")
        missing = [f"{r.name} {multiplicity_word(r.spin2s)} ({r.kind}: {r.status})"
                   for r in c.records if r.status != "done"]
        if missing:
            notes.append("not computed: " + "; ".join(missing[:4]) + (" …" if len(missing) > 4 else ""))
        _caveats(fig, notes)
        fig.canvas.draw()  # lay out, then widen the x range just enough for the outermost labels
        left = [t for t in labels if t.get_position()[0] < 0]
        right = [t for t in labels if t.get_position()[0] > len(groups) - 1]
        if left:
            _fit_labels(ax, left, right, len(groups) - 1 + inner + width)
    return fig


# ---- d-orbital splitting -------------------------------------------------------------------------------

def _degenerate_sets(levels, tolerance) -> list[list[int]]:
    sets = []
    for i in np.argsort(levels):
        if sets and abs(levels[i] - levels[sets[-1][-1]]) <= tolerance:
            sets[-1].append(int(i))
        else:
            sets.append([int(i)])
    return sets


_ORBITAL_ORDER = {"xy": 0, "xz": 1, "yz": 2, "z2": 3, "x2-y2": 4}


def _set_label(labels) -> str:
    """'$d_{xz}$' for one level, '$d_{xz,yz}$' for a degenerate set; 'xz/yz' (mixed character) kept as such."""
    if len(labels) == 1:
        return orbital_mathtext(labels[0])
    parts = set(p for label in labels for p in label.split("/"))
    return orbital_mathtext(",".join(sorted(parts, key=lambda p: _ORBITAL_ORDER.get(p, 9))))


LEVEL_WIDTH, LEVEL_SPACE = 0.26, 0.07  # one d level's bar and the gap beside it, in panel x units


@dataclass(frozen=True)
class _Column:
    sets: list  # indices of the levels in each (near-)degenerate set, ascending
    heights: list  # energy of each set
    offsets: dict  # level index -> x offset from the column centre
    half_width: float
    arrow_len: float


def _column_layout(levels_k, tolerance_k, arrow_len) -> _Column:
    """Where each level goes. Sets closer than an electron arrow would reach share a row, side by side (each at
    its own energy), so arrows of neighbouring levels never run into each other."""
    pitch = LEVEL_WIDTH + LEVEL_SPACE
    levels_k = np.asarray(levels_k, dtype=float)
    sets = _degenerate_sets(levels_k, tolerance_k)
    heights = [float(levels_k[s].mean()) for s in sets]
    rows = [[0]]
    for k in range(1, len(sets)):
        if heights[k] - heights[rows[-1][-1]] < 0.75 * arrow_len:
            rows[-1].append(k)
        else:
            rows.append([k])
    if len(rows) > 1:
        row_heights = [np.mean([heights[k] for k in row]) for row in rows]
        arrow_len = min(arrow_len, 0.65 * float(np.min(np.diff(row_heights))))
    offsets, widest = {}, 0
    for row in rows:
        members = [index for k in row for index in sets[k]]
        widest = max(widest, len(members))
        for position, index in enumerate(members):
            offsets[index] = (position - (len(members) - 1) / 2) * pitch
    return _Column(sets, heights, offsets, widest * pitch / 2, arrow_len)


def _draw_levels(ax, x_centre, column: _Column, labels, occupation, colour, label_side, gap) -> list:
    """One column of d levels: bars, electrons as arrows, one label per set at one side; returns the labels."""
    width, length = LEVEL_WIDTH, column.arrow_len
    texts = []
    for members, y, y_label in zip(column.sets, column.heights, _spread(column.heights, gap)):
        for index in members:
            x = x_centre + column.offsets[index]
            ax.plot([x - width / 2, x + width / 2], [y, y], color=colour, lw=1.6, solid_capstyle="butt")
            for dx, direction in {0: [], 1: [(0.0, 1)], 2: [(-width / 5, 1), (width / 5, -1)]}[occupation[index]]:
                ax.annotate("", xy=(x + dx, y + direction * length / 2), xytext=(x + dx, y - direction * length / 2),
                            arrowprops=dict(arrowstyle="-|>,head_length=0.25,head_width=0.12", lw=0.7, color="black",
                                            shrinkA=0, shrinkB=0))
        texts.append(ax.text(x_centre + label_side * (column.half_width + 0.06), y_label,
                             _set_label([labels[i] for i in members]), fontsize=6.5,
                             ha="left" if label_side > 0 else "right", va="center"))
    return texts


def _fit_labels(ax, left_texts, right_texts, right_edge: float, pad_px: float = 6.0) -> None:
    """x limits just wide enough for the labels left and right of the columns, whatever the panel's width.

    With the panel W px wide and a label w px wide anchored at a, the limits solve
    x_min = a_L − w_L·S/W and x_max = a_R + w_R·S/W with S = x_max − x_min."""
    renderer = ax.figure.canvas.get_renderer()
    panel_px = ax.get_window_extent(renderer).width

    def widest(texts):
        return max((t.get_window_extent(renderer).width for t in texts), default=0.0) + pad_px

    w_left, w_right = widest(left_texts), (widest(right_texts) if right_texts else pad_px)
    a_left = min(t.get_position()[0] for t in left_texts)
    a_right = max(t.get_position()[0] for t in right_texts) if right_texts else right_edge
    fraction = min((w_left + w_right) / panel_px, 0.8)
    span = (a_right - a_left) / (1.0 - fraction)
    ax.set_xlim(a_left - w_left * span / panel_px, a_right + w_right * span / panel_px)


def _aufbau(n_electrons: int, spin2s: int):
    from ..field.estimate import occupations

    return occupations(n_electrons, spin2s)


def d_levels_figure(c, columns: int | None = None):
    """Per arrangement × isomer: AOM estimate (left) and projected DFT d levels (right, when the level has them),
    both relative to their barycentre, electrons of the state drawn by aufbau."""
    groups = [g for g in _groups(c) if any((s.arrangement, s.isomer) == g for s in c.estimate.states)]
    has_dft = any(r.d_levels_cm for r in c.held_or_free())
    columns = columns or (2 if len(groups) > 2 or has_dft else 1)
    with _style():
        fig = _new_figure(_width(columns), 2.6)
        axes = fig.subplots(1, len(groups), sharey=True, squeeze=False)[0]
        panels = []
        for group in groups:
            dft = [r for r in c.held_or_free() if (r.arrangement, r.isomer) == group and r.d_levels_cm]
            record = min(dft, key=lambda r: r.energy_hartree) if dft else None
            if record is not None:
                state = c.estimate.state(group[0], record.spin2s, group[1])
            else:
                state = min((s for s in c.estimate.states if (s.arrangement, s.isomer) == group),
                            key=lambda s: s.energy_cm)
            panels.append((group, state, record))
        all_k = [np.asarray(s.levels_cm) / 1000 - np.mean(s.levels_cm) / 1000 for _, s, _ in panels]
        all_k += [np.asarray(r.d_levels_cm) / 1000 for _, _, r in panels if r is not None]
        span = max(float(np.ptp(levels)) for levels in all_k) or 1.0
        fitting = []
        for ax, (group, state, record) in zip(axes, panels):
            est_k = np.asarray(state.levels_cm) / 1000
            est_k = est_k - est_k.mean()
            tolerance, arrow, gap = max(0.05, 0.02 * span), 0.07 * span, 0.075 * span
            est = _column_layout(est_k, tolerance, arrow)
            left = _draw_levels(ax, 0.0, est, state.level_labels, state.occupation, OKABE_ITO["blue"], -1, gap)
            ticks, names, right, edge = [0.0], ["AOM est."], [], est.half_width + 0.1
            if record is not None:
                dft = _column_layout(np.asarray(record.d_levels_cm) / 1000, tolerance, arrow)
                x_dft = est.half_width + 0.35 + dft.half_width
                right = _draw_levels(ax, x_dft, dft, record.d_level_labels or [""] * 5,
                                     _aufbau(c.d_electrons, record.spin2s), OKABE_ITO["vermillion"], 1, gap)
                ticks.append(x_dft)
                names.append("DFT")
            ax.set_xticks(ticks, names)
            ax.tick_params(axis="x", length=0)
            fitting.append((ax, left, right, edge))
            ax.spines["bottom"].set_visible(False)
            ax.set_title(f"{_group_label(group)}, {multiplicity_word(state.spin2s)}", fontsize=7.5)
        axes[0].set_ylabel("d-orbital energy / 10³ cm⁻¹")
        for ax in axes[1:]:
            ax.tick_params(axis="y", labelleft=False)
        fig.suptitle(f"{formula_unicode(c.formula)}: d-orbital splitting (barycentre at 0)", fontsize=8, x=0.0,
                     ha="left")
        fig.canvas.draw()  # lay the panels out, then size each one's x range to its labels
        for ax, left, right, edge in fitting:
            _fit_labels(ax, left, right, edge)
        notes = []
        if not any(r for _, _, r in panels):
            notes.append(f"no projected DFT d levels at level {c.level} (GFN2-xTB has none): estimate only")
        else:
            notes.append("DFT: d-dominated Kohn–Sham levels projected on the metal; electrons by aufbau for the "
                         "state's 2S")
        _caveats(fig, notes)
    return fig


# ---- parity ---------------------------------------------------------------------------------------------

def _place_labels(ax, points, texts, obstacles=()):
    """Put each label next to its point where it overlaps no other label, point, obstacle (text artists already
    on the axes) or the axes edge."""
    fig = ax.figure
    renderer = fig.canvas.get_renderer()
    candidates = [((5, 4), "left", "bottom"), ((5, -4), "left", "top"), ((-5, 4), "right", "bottom"),
                  ((-5, -4), "right", "top"), ((7, 0), "left", "center"), ((-7, 0), "right", "center"),
                  ((0, 7), "center", "bottom"), ((0, -7), "center", "top")]
    fig.canvas.draw()
    point_boxes = []
    for x, y in points:
        px, py = ax.transData.transform((x, y))
        point_boxes.append((px - 4, py - 4, px + 4, py + 4))
    axes_box = ax.get_window_extent(renderer)
    placed = [tuple(o.get_window_extent(renderer).extents) for o in obstacles]
    artists = []
    for (x, y), text in zip(points, texts):
        best = None
        for offset, ha, va in candidates:
            artist = ax.annotate(text, (x, y), xytext=offset, textcoords="offset points", ha=ha, va=va, fontsize=6.5)
            box = artist.get_window_extent(renderer)
            bounds = (box.x0, box.y0, box.x1, box.y1)
            clash = sum(_overlap(bounds, other) for other in placed + point_boxes)
            outside = box.x0 < axes_box.x0 or box.x1 > axes_box.x1 or box.y0 < axes_box.y0 or box.y1 > axes_box.y1
            score = clash + (1e6 if outside else 0.0)
            if best is None or score < best[0]:
                if best is not None:
                    best[1].remove()
                best = (score, artist, bounds)
            else:
                artist.remove()
            if score == 0:
                break
        placed.append(best[2])
        artists.append(best[1])
    return artists


def _overlap(a, b) -> float:
    width = min(a[2], b[2]) - max(a[0], b[0])
    height = min(a[3], b[3]) - max(a[1], b[1])
    return width * height if width > 0 and height > 0 else 0.0


def parity_points(comparison) -> list[tuple[str, float, float, bool | None]]:
    """(formula, estimated ΔE, computed ΔE, ground states agree) in kJ/mol, lowest state of each arrangement."""
    points = []
    for c in comparison.complexes:
        computed, estimated = c.lowest_delta_sp_t_kj_mol(), c.estimated_lowest_delta_sp_t_kj_mol()
        if computed is not None and estimated is not None:
            points.append((c.formula, estimated, computed, c.agrees()))
    return points


def parity_figure(comparison, unit: str = "kj", columns: int = 1, band_kj_mol: float = AGREEMENT_BAND_KJ_MOL):
    """Estimated against computed ΔE(SP-4 − T-4) per complex; None when no complex has both numbers."""
    unit = energy_unit(unit).name
    points = parity_points(comparison)
    if not points:
        return None
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    xs = np.array([_in_unit(p[1], unit) for p in points])
    ys = np.array([_in_unit(p[2], unit) for p in points])
    band = _in_unit(band_kj_mol, unit)
    with _style():
        width = _width(columns)
        fig = _new_figure(width, width * 0.92 if columns == 1 else 4.2)
        ax = fig.add_subplot()
        reach = max(float(np.max(np.abs(np.concatenate([xs, ys])))), 2 * band) * 1.18
        lo, hi = -reach, reach
        ax.fill_between([0, hi], 0, hi, color="#e8e8e8", lw=0, zorder=0)
        ax.fill_between([lo, 0], lo, 0, color="#e8e8e8", lw=0, zorder=0)
        ax.fill_between([lo, hi], [lo - band, hi - band], [lo + band, hi + band], color=OKABE_ITO["sky blue"],
                        alpha=0.35, lw=0, zorder=1)
        ax.plot([lo, hi], [lo, hi], color="black", lw=0.8, ls="--", zorder=2)
        ax.axhline(0, color=_GREY, lw=0.5, zorder=1)
        ax.axvline(0, color=_GREY, lw=0.5, zorder=1)
        for x, y, (_, _, _, agree) in zip(xs, ys, points):
            ax.plot(x, y, marker="o" if agree else "^", ms=5, ls="none", zorder=3, mec="black", mew=0.5,
                    color=OKABE_ITO["blue"] if agree else OKABE_ITO["vermillion"], gid="parity-point")
        ax.set_xlim(lo, hi)
        ax.set_ylim(lo, hi)
        ax.set_aspect("equal")
        delta = "ΔE(SP-4 − T-4)"
        ax.set_xlabel(f"{delta}, estimate / {unit_math(unit)}")
        ax.set_ylabel(f"{delta}, computed / {unit_math(unit)}")
        # quadrant captions beside the x = 0 line at the top and bottom edges, away from the diagonal band
        captions = [ax.text(0.52, 0.98, "both: T-4 lower", transform=ax.transAxes, ha="left", va="top", fontsize=6.5,
                            color=_GREY),
                    ax.text(0.48, 0.02, "both: SP-4 lower", transform=ax.transAxes, ha="right", va="bottom",
                            fontsize=6.5, color=_GREY)]
        band_text = f"{band:.{0 if unit == 'cm' else 1}f}".rstrip("0").rstrip(".")
        handles = [Line2D([], [], color="black", ls="--", lw=0.8, label="parity"),
                   Patch(color=OKABE_ITO["sky blue"], alpha=0.35, label=f"±{band_text} {unit_math(unit)}"),
                   Patch(color="#e8e8e8", label="same geometry verdict"),
                   Line2D([], [], marker="o", ls="none", color=OKABE_ITO["blue"], mec="black", mew=0.5,
                          label="same ground state")]
        if any(p[3] is False for p in points):
            handles.append(Line2D([], [], marker="^", ls="none", color=OKABE_ITO["vermillion"], mec="black", mew=0.5,
                                  label="different ground state"))
        ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(0.0, -0.16), ncol=2, fontsize=6.5,
                  handlelength=1.4, columnspacing=1.0)
        _place_labels(ax, list(zip(xs, ys)), [formula_unicode(p[0]) for p in points], obstacles=captions)
        notes = [XTB_NOTE] if any(_is_xtb(c.records) for c in comparison.complexes) else []
        notes += [w for w in comparison.warnings if w != XTB_SPIN_WARNING
                  and any(c.formula in w for c in comparison.complexes)]
        notes.append("ΔE: lowest SP-4 state minus lowest T-4 state (any spin); held relaxations where present")
        _caveats(fig, notes)
    return fig


# ---- distortion path ------------------------------------------------------------------------------------

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
                for left, right in zip(angles, angles[1:]):
                    d0 = curves[a][left] - curves[b][left]
                    d1 = curves[a][right] - curves[b][right]
                    if d0 * d1 < 0:
                        t = d0 / (d0 - d1)
                        angle = left + t * (right - left)
                        energy = curves[a][left] + t * (curves[a][right] - curves[a][left])
                        found.append(Crossing(isomer, (a, b), angle, energy))
    return found


def path_figure(c, unit: str = "kj", columns: int = 1, warnings=()):
    """Energy against the trans L–M–L angle for each spin (and SP-4 isomer); None without path points."""
    unit = energy_unit(unit).name
    done = [r for r in c.path_records if r.status == "done" and r.relative_kj_mol is not None]
    if not done:
        return None
    from matplotlib.lines import Line2D

    isomers = sorted({r.isomer for r in done})
    spins = sorted({r.spin2s for r in done})
    with _style():
        fig = _new_figure(_width(columns), 2.7)
        ax = fig.add_subplot()
        for isomer in isomers:
            for s in spins:
                curve = sorted((r.trans_angle_deg, _in_unit(r.relative_kj_mol, unit)) for r in done
                               if r.isomer == isomer and r.spin2s == s)
                if curve:
                    x, y = zip(*curve)
                    ax.plot(x, y, color=spin_colour(s), marker=spin_marker(s), ms=4, ls=_ISOMER_LINES.get(isomer, "-"),
                            mec="white", mew=0.4, gid=f"path:{isomer}:{s}")
        crossings = spin_crossings(c.path_records)
        for crossing in crossings:
            ax.plot(crossing.trans_angle_deg, _in_unit(crossing.relative_kj_mol, unit), marker="o", ms=8, mfc="none",
                    mec="black", mew=0.9, ls="none", zorder=5, gid="spin-crossing")
        ax.set_xlabel("trans L–M–L angle / °")
        ax.set_ylabel(f"relative energy / {unit_math(unit)}")
        ax.set_xlim(105, 184.5)
        ax.set_xticks(range(110, 181, 10))
        ax.margins(y=0.18)
        for angle, name, ha in ((109.47, "T-4", "left"), (180.0, "SP-4", "right")):
            ax.annotate(name, xy=(angle, 1.0), xycoords=("data", "axes fraction"), xytext=(0, 2),
                        textcoords="offset points", ha=ha, va="bottom", fontsize=6.5, color=_GREY)
        handles = [Line2D([], [], color=spin_colour(s), marker=spin_marker(s), ms=4, label=multiplicity_word(s))
                   for s in spins]
        if len(isomers) > 1 or isomers[0]:
            handles += [Line2D([], [], color="black", ls=_ISOMER_LINES.get(i, "-"), label=i or "—") for i in isomers]
        if crossings:
            handles.append(Line2D([], [], marker="o", ms=7, mfc="none", mec="black", ls="none", label="spin crossing"))
        ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.0, 1.0), borderaxespad=0.2, handlelength=1.8)
        ax.set_title(f"{formula_unicode(c.formula)}, D$_{{2d}}$ path (held relaxations)", loc="left", pad=12)
        _place_labels(ax, [(x.trans_angle_deg, _in_unit(x.relative_kj_mol, unit)) for x in crossings],
                      [f"≈{x.trans_angle_deg:.0f}°" for x in crossings])
        notes = _complex_notes(done, c.formula, warnings)
        if crossings:
            notes.append("crossings: linear interpolation between neighbouring path points")
        failed = [r for r in c.path_records if r.status != "done"]
        if failed:
            notes.append(f"{len(failed)} path point(s) not computed")
        _caveats(fig, notes)
    return fig


# ---- files ----------------------------------------------------------------------------------------------

def study_figures(comparison, unit: str = "kj") -> dict:
    """name -> Figure for every figure the comparison supports."""
    figures = {}
    for c in comparison.complexes:
        figures[f"ladder_{formula_slug(c.formula)}"] = ladder_figure(c, unit, warnings=comparison.warnings)
        figures[f"d_levels_{formula_slug(c.formula)}"] = d_levels_figure(c)
        path = path_figure(c, unit, warnings=comparison.warnings)
        if path is not None:
            figures[f"path_{formula_slug(c.formula)}"] = path
    parity = parity_figure(comparison, unit)
    if parity is not None:
        figures["parity"] = parity
    return figures


_METADATA = {"pdf": {"Creator": "fourfold", "CreationDate": None}, "svg": {"Creator": "fourfold", "Date": None},
             "png": {"Software": "fourfold"}}


def save_figure(fig, stem, formats=FIGURE_FORMATS) -> list[Path]:
    """Write ``stem``.pdf/.svg/.png (300 dpi); each file appears complete or not at all."""
    stem = Path(stem)
    stem.parent.mkdir(parents=True, exist_ok=True)
    written = []
    with _style():
        for extension in formats:
            target = stem.with_suffix(f".{extension}")
            partial = target.with_name(f".{target.name}.{os.getpid()}.partial")
            fig.savefig(partial, format=extension, dpi=PNG_DPI, metadata=_METADATA[extension])
            os.replace(partial, target)
            written.append(target)
    return written

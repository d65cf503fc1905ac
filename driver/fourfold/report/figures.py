"""Figures of a comparison, sized and styled for print.

Each function returns a matplotlib ``Figure`` (object-oriented API, Agg canvas, no pyplot state); ``save_figure``
writes it as vector PDF and SVG plus a 300 dpi PNG.

  ladder_figure      spin-state ladder of one complex: computed levels beside estimated ones
  d_levels_figure    d-orbital splitting per arrangement: AOM estimate beside the projected DFT levels
  parity_figure      estimate vs computed ΔE(SP-4 − T-4) across the study, parity line and agreement band
  path_figure        energy along the D2d path T-4 → SP-4 per spin state, spin crossings marked

Two styles: ``annotated`` (a title and the caveats under the figure, for reading the study folder) and
``journal`` (axis labels, tick labels, legends and data labels only: title and caveats go to the caption,
fourfold.report.captions).

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

from ..chem.notation import formula_slug
from ..errors import InputError
from ..geometry.polyhedra import arrangement_rank
from ..units import energy_unit
from ..verdict.comparison import spin_crossings
from . import captions
from .captions import AGREEMENT_BAND_KJ_MOL
from .markup import formula_unicode, multiplicity_word, orbital_mathtext

SINGLE_COLUMN_IN = 85 / 25.4
DOUBLE_COLUMN_IN = 178 / 25.4
PNG_DPI = 300
FIGURE_FORMATS = ("pdf", "svg", "png")

OKABE_ITO = {"black": "#000000", "orange": "#E69F00", "sky blue": "#56B4E9", "bluish green": "#009E73",
             "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "reddish purple": "#CC79A7"}
# the light Okabe–Ito colours (sky blue, yellow) last or not at all: thin lines in them fade on white paper
_SPIN_COLOURS = {0: "blue", 1: "bluish green", 2: "vermillion", 3: "orange", 4: "reddish purple", 5: "sky blue"}
_SPIN_MARKERS = {0: "o", 1: "v", 2: "s", 3: "^", 4: "D", 5: "P"}
_ISOMER_LINES = {"": "-", "trans": "-", "cis": "--"}
_GREY = "#6b6b6b"
# Units and formulas in Unicode (DejaVu Sans has the sub- and superscript digits): mathtext parsing was the
# largest cost of writing a report (measured with cProfile), so it is kept for the orbital labels only.
FIGURE_STYLES = ("annotated", "journal")
DATA_LABEL = "data-label"  # gid of every text that labels a datum (a journal figure has no other text)

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


def check_style(style: str) -> str:
    if style not in FIGURE_STYLES:
        raise InputError(f"figure style must be one of {', '.join(FIGURE_STYLES)}, got {style!r}")
    return style


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


def _settle(fig) -> None:
    """Lay the figure out: constrained layout moves the axes by a few pixels between the first and second draw
    (measured), so anything placed in pixels waits for the second."""
    fig.canvas.draw()
    fig.canvas.draw()


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


def _groups(c) -> list[tuple[str, str]]:
    found = {(s.arrangement, s.isomer) for s in c.estimate.states} | {(r.arrangement, r.isomer) for r in c.records}
    return sorted(found, key=lambda g: (arrangement_rank(g[0]), g[1]))


def _group_label(group) -> str:
    return f"{group[0]} {group[1]}".strip()


def _group_tick(group, two_lines: bool) -> str:
    """A group's tick label: the isomer under the arrangement where any group has one, so neighbours never touch."""
    return "\n".join(p for p in group if p) if two_lines else _group_label(group)


# ---- spin-state ladder ---------------------------------------------------------------------------------

LADDER_ENERGIES = ("E", "G")


def ladder_figure(c, unit: str = "kj", columns: int = 1, warnings=(), style: str = "annotated", energy: str = "E"):
    """Levels of every arrangement × isomer × 2S of one complex: computed (left) beside estimated (right); the
    computed energies are the verdict's (Yamaguchi-projected for a broken-symmetry singlet where possible):
    electronic energies of the arrangement ladder (``energy`` "E"), or free energies G(T) of the free minima by
    their starting arrangement ("G")."""
    from matplotlib.lines import Line2D

    check_style(style)
    if energy not in LADDER_ENERGIES:
        raise InputError(f"the spin ladder shows E or G, not {energy!r}")
    axis_label = "relative free energy G" if energy == "G" else "relative energy"  # `energy` is reused below
    unit = energy_unit(unit).name
    groups = _groups(c)
    if energy == "G":
        shown = [r for r in c.records if r.kind == "free" and r.relative_gibbs_kj_mol is not None]
        computed = {(r.arrangement, r.isomer, r.spin2s): _in_unit(r.relative_gibbs_kj_mol, unit) for r in shown}
    else:
        shown = c.held_or_free()
        computed = {(r.arrangement, r.isomer, r.spin2s): _in_unit(r.relative_kj_mol, unit) for r in shown}
    marks = {(r.arrangement, r.isomer, r.spin2s): f" {captions.BS_MARK}" if r.broken_symmetry
             else (captions.CONTAMINATED_MARK if r.spin_contaminated else "") for r in shown}
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
        between = {}  # gap after group i -> [(label, energy)]: group i's estimates and group i+1's computed levels
        for i, group in enumerate(groups):
            for side, table in ((-1, computed), (1, estimated)):
                keys = [(*group, s) for s in spins if table.get((*group, s)) is not None]
                if not keys:
                    continue
                x0, x1 = (i - inner - width, i - inner) if side < 0 else (i + inner, i + inner + width)
                energies = [table[k] for k in keys]
                for key, energy in zip(keys, energies, strict=False):
                    ax.plot([x0, x1], [energy, energy], color=spin_colour(key[2]), lw=2.0, solid_capstyle="butt",
                            gid=f"{'calc' if side < 0 else 'est'}:{_group_label(group)}:{key[2]}")
                label_x = x0 - 0.025 if side < 0 else x1 + 0.025
                for key, y, energy in zip(keys, _spread(energies, gap), energies, strict=False):
                    mark = marks.get(key, "") if side < 0 else ""
                    labels.append(ax.text(label_x, y, f"{key[2] + 1}{mark}", color=spin_colour(key[2]), fontsize=6.5,
                                          fontweight="bold", ha="right" if side < 0 else "left", va="center",
                                          gid=DATA_LABEL))
                    between.setdefault(i - 1 if side < 0 else i, []).append((labels[-1], energy))
            for s in spins:  # correlation lines: the same state, computed and estimated
                a, b = computed.get((*group, s)), estimated.get((*group, s))
                if a is not None and b is not None:
                    ax.plot([i - inner, i + inner], [a, b], color=spin_colour(s), lw=0.6, ls=":")
        two_lines = any(g[1] for g in groups)
        ax.set_xticks(range(len(groups)), [_group_tick(g, two_lines) for g in groups], fontweight="bold",
                      fontsize=7.5, linespacing=1.0)
        ax.set_xticks([x for i in range(len(groups)) for x in (i - inner - width / 2, i + inner + width / 2)],
                      [t for _ in groups for t in ("calc.", "est.")], minor=True, fontsize=6.5)
        ax.tick_params(axis="x", which="both", length=0)
        ax.tick_params(axis="x", which="major", pad=11)
        ax.tick_params(axis="x", which="minor", pad=2)
        ax.set_xlim(-0.5, len(groups) - 0.5)
        ax.set_ylabel(f"{axis_label} / {unit_math(unit)}")
        ax.spines["bottom"].set_visible(False)
        ax.axhline(0.0, color=_GREY, lw=0.4, zorder=0)
        handles = [Line2D([], [], color=spin_colour(s), lw=2.0, label=f"{s + 1}  {multiplicity_word(s)}")
                   for s in spins]
        ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.0, 1.0), handlelength=1.2, borderaxespad=0.2,
                  title="2S+1", title_fontsize=7, alignment="left")
        if style == "annotated":
            ax.set_title(captions.ladder_title(c), loc="left")
            _caveats(fig, captions.ladder_notes(c, warnings))
        _settle(fig)  # lay out, then widen the x range just enough for the outermost labels
        left = [t for t in labels if t.get_position()[0] < 0]
        right = [t for t in labels if t.get_position()[0] > len(groups) - 1]
        if left:
            _fit_labels(ax, left, right, len(groups) - 1 + inner + width)
        _part_neighbours(ax, [between[g] for g in range(len(groups) - 1) if g in between])
    return fig


def _part_neighbours(ax, gaps) -> None:
    """Labels facing each other across the space between two groups: where any two meet, that space's labels
    are spread together by their heights (each as near its level as the others allow)."""
    fig = ax.figure
    renderer = fig.canvas.get_renderer()
    _settle(fig)
    per_px = np.ptp(ax.get_ylim()) / ax.get_window_extent(renderer).height
    for placed in gaps:
        boxes = [label.get_window_extent(renderer) for label, _ in placed]
        if any(a.overlaps(b) for i, a in enumerate(boxes) for b in boxes[i + 1:]):
            height = 1.15 * max(box.height for box in boxes) * per_px
            for (label, _), y in zip(placed, _spread([energy for _, energy in placed], height), strict=False):
                label.set_y(y)


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


def _set_name(labels) -> str:
    """'xz' for one level, 'xz,yz' for several (the d functions they share out among them); 'yz/xy' (one level
    of mixed character) kept as such."""
    if len(labels) == 1:
        return labels[0]
    parts = set(p for label in labels for p in label.split("/"))
    return ",".join(sorted(parts, key=lambda p: _ORBITAL_ORDER.get(p, 9)))


def _row_names(sets_per_row, labels) -> list[list[str]]:
    """Names of each row's sets in bar order, one name per set; a row whose sets would repeat a name (levels of
    the same mixed character, as a split t2 set) is named once for all the d functions it holds. A name met
    again in a higher row gets a prime (separate levels of the same character)."""
    rows = []
    for sets in sets_per_row:
        names = [_set_name([labels[i] for i in members]) for members in sets]
        if len(set(names)) < len(names):
            names = [_set_name([labels[i] for members in sets for i in members])]
        rows.append(names)
    seen: dict[str, int] = {}
    primed = []
    for names in rows:
        primed.append([name + "'" * seen.get(name, 0) for name in names])
        for name in names:
            seen[name] = seen.get(name, 0) + 1
    return primed


def _mathtext(names: list[str]) -> str:
    """A row's label: each set's name as mathtext, primes kept, in bar order."""
    pieces = []
    for name in names:
        primes = len(name) - len(name.rstrip("'"))
        text = orbital_mathtext(name.rstrip("'"))
        pieces.append(text + "′" * primes)  # after the subscript, not over it
    return ", ".join(pieces)


LEVEL_WIDTH, LEVEL_SPACE = 0.26, 0.07  # one d level's bar and the gap beside it, in panel x units
LABEL_PAD = 0.05  # between a row's outer bar and its label, panel x units
MIN_COLUMN_GAP = 0.35  # between the estimate and DFT columns, panel x units
LEVEL_FONT_PT, PANEL_FONT_PT = 6.5, 7.5


@dataclass(frozen=True)
class _Column:
    sets: list  # indices of the levels in each (near-)degenerate set, ascending
    heights: list  # energy of each set
    rows: list  # set indices drawn side by side and named by one label (closer than a label's height)
    names: list  # each row's label (mathtext)
    offsets: dict  # level index -> x offset from the column centre
    row_half_widths: list
    half_width: float
    arrow_len: float


def _column_layout(levels_k, labels, tolerance_k, arrow_len, row_gap) -> _Column:
    """Where each level goes. Sets closer than ``row_gap`` (a label's height) share a row, side by side, each
    at its own energy: the row gets one label at its own height, and arrows of neighbouring levels never meet."""
    pitch = LEVEL_WIDTH + LEVEL_SPACE
    levels_k = np.asarray(levels_k, dtype=float)
    sets = _degenerate_sets(levels_k, tolerance_k)
    heights = [float(levels_k[s].mean()) for s in sets]
    rows = [[0]]
    for k in range(1, len(sets)):
        if heights[k] - heights[rows[-1][-1]] < row_gap:
            rows[-1].append(k)
        else:
            rows.append([k])
    if len(rows) > 1:  # arrows of neighbouring rows stop short of each other
        closest = min(heights[row[0]] - heights[below[-1]] for below, row in zip(rows, rows[1:], strict=False))
        arrow_len = min(arrow_len, 0.9 * closest)
    offsets, half_widths = {}, []
    for row in rows:
        members = [index for k in row for index in sets[k]]
        half_widths.append(len(members) * pitch / 2 - LEVEL_SPACE / 2)
        for position, index in enumerate(members):
            offsets[index] = (position - (len(members) - 1) / 2) * pitch
    names = [_mathtext(n) for n in _row_names([[sets[k] for k in row] for row in rows], labels)]
    return _Column(sets, heights, rows, names, offsets, half_widths, max(half_widths), arrow_len)


def _electrons(occupation, broken_symmetry: bool) -> list[list[int]]:
    """Spins (+1 up, −1 down) per level. A broken-symmetry singlet keeps its two unpaired electrons on different
    orbitals with opposite spins (the second one down), not as a closed-shell pair."""
    spins, singles = [], 0
    for count in occupation:
        if count == 2:
            spins.append([1, -1])
        elif count == 1:
            spins.append([-1] if broken_symmetry and singles % 2 else [1])
            singles += 1
        else:
            spins.append([])
    return spins


def _draw_levels(ax, x_centre, column: _Column, electrons, colour, label_side) -> list:
    """One column of d levels: bars, electrons as arrows (inside their bar), one label per row naming its levels
    in bar order, level with the row's outer bar beside it; returns the labels."""
    from matplotlib.patches import FancyArrowPatch

    width, length = LEVEL_WIDTH, column.arrow_len
    texts = []
    for row, name, half_width in zip(column.rows, column.names, column.row_half_widths, strict=False):
        for k in row:
            y = column.heights[k]
            for index in column.sets[k]:
                x = x_centre + column.offsets[index]
                ax.plot([x - width / 2, x + width / 2], [y, y], color=colour, lw=1.6, solid_capstyle="butt",
                        gid="d-level")
                spins = electrons[index]
                for dx, spin in zip((0.0,) if len(spins) == 1 else (-width / 4.5, width / 4.5), spins, strict=False):
                    ax.add_patch(FancyArrowPatch((x + dx, y - spin * length / 2), (x + dx, y + spin * length / 2),
                                                 arrowstyle="-|>,head_length=0.45,head_width=0.2", mutation_scale=6.0,
                                                 lw=0.7, color="black", shrinkA=0, shrinkB=0,
                                                 gid="electron-up" if spin > 0 else "electron-down"))
        y_row = column.heights[row[-1] if label_side > 0 else row[0]]  # level with the bar next to the label
        label = ax.text(x_centre + label_side * (half_width + LABEL_PAD), y_row, name, fontsize=LEVEL_FONT_PT,
                        ha="left" if label_side > 0 else "right", va="center", gid=DATA_LABEL)
        label.set_in_layout(False)  # _fit_labels makes room inside the panel; the layout must not shrink it first
        texts.append(label)
    return texts


def _widest_px(ax, strings, fontsize) -> float:
    """Width in display pixels of the widest of ``strings`` as they would be drawn on ``ax`` (or a figure)."""
    renderer = ax.figure.canvas.get_renderer()
    widest = 0.0
    for text in strings:
        probe = ax.text(0.0, 0.0, text, fontsize=fontsize)
        widest = max(widest, probe.get_window_extent(renderer).width)
        probe.remove()
    return widest


COLUMN_PT_PER_UNIT = 50.0  # a panel's width per x unit of its columns when laid out: a bar 13 pt long


def _panel_need_pt(fig, est: _Column, dft: _Column | None, name: str, pad_pt: float = 4.5) -> float:
    """Width a panel needs (points): its level labels and its columns at COLUMN_PT_PER_UNIT, and at least its name."""
    to_pt = 72.0 / fig.dpi
    units = 2 * est.half_width + 2 * LABEL_PAD
    labels = _widest_px(fig, est.names, LEVEL_FONT_PT) * to_pt + 2 * pad_pt
    if dft is not None:
        units += MIN_COLUMN_GAP + 2 * dft.half_width
        labels += _widest_px(fig, dft.names, LEVEL_FONT_PT) * to_pt
    return max(labels + units * COLUMN_PT_PER_UNIT, _widest_px(fig, [name], PANEL_FONT_PT) * to_pt + 2 * pad_pt)


def _column_gap(ax, est: _Column, dft: _Column, tick_names, pad_px: float = 6.0) -> float:
    """The gap (panel x units) between the estimate and DFT columns that keeps their tick labels apart once
    ``_fit_labels`` has sized the panel for the level labels (same arithmetic, solved for the gap)."""
    import matplotlib

    panel_px = ax.get_window_extent(ax.figure.canvas.get_renderer()).width
    labels_px = _widest_px(ax, est.names, LEVEL_FONT_PT) + _widest_px(ax, dft.names, LEVEL_FONT_PT) + 2 * pad_px
    available_px = panel_px * (1.0 - min(labels_px / panel_px, 0.8))
    ticks_px = sum(_widest_px(ax, [n], matplotlib.rcParams["xtick.labelsize"]) for n in tick_names) / 2 + 2 * pad_px
    fixed = 2 * est.half_width + 2 * dft.half_width + 2 * LABEL_PAD  # the columns and their label pads
    half = est.half_width + dft.half_width + 2 * LABEL_PAD
    share = min(ticks_px / available_px, 0.9)  # centre distance ≥ ticks_px: (span − half)/span ≥ share
    return max(MIN_COLUMN_GAP, half / (1.0 - share) - fixed)


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


def _dft_electrons(d_electrons: int, record) -> list[list[int]]:
    """The computed state's d electrons: aufbau for its 2S, a broken-symmetry singlet as the triplet's
    configuration with its two unpaired spins opposite."""
    if record.broken_symmetry and record.spin2s == 0:
        return _electrons(_aufbau(d_electrons, 2), True)
    return _electrons(_aufbau(d_electrons, record.spin2s), False)


def _panel_name(group, state) -> str:
    return f"{_group_label(group)}, {multiplicity_word(state.spin2s)}"


def d_levels_figure(c, columns: int | None = None, style: str = "annotated"):
    """Per arrangement × isomer: AOM estimate (left) and projected DFT d levels (right, when the level has them),
    both relative to their barycentre, electrons of the state drawn by aufbau."""
    check_style(style)
    groups = [g for g in _groups(c) if any((s.arrangement, s.isomer) == g for s in c.estimate.states)]
    has_dft = any(r.d_levels_cm for r in c.held_or_free())
    columns = columns or (2 if len(groups) > 2 or has_dft else 1)
    with _style():
        fig = _new_figure(_width(columns), 2.6)
        panels = []
        for group in groups:
            dft = [r for r in c.held_or_free() if (r.arrangement, r.isomer) == group and r.d_levels_cm]
            record = min(dft, key=lambda r: r.verdict_energy_hartree) if dft else None
            if record is not None:
                state = c.estimate.state(group[0], record.spin2s, group[1])
            else:
                state = min((s for s in c.estimate.states if (s.arrangement, s.isomer) == group),
                            key=lambda s: s.energy_cm)
            panels.append((group, state, record))
        all_k = [np.asarray(s.levels_cm) / 1000 - np.mean(s.levels_cm) / 1000 for _, s, _ in panels]
        all_k += [np.asarray(r.d_levels_cm) / 1000 for _, _, r in panels if r is not None]
        span = max(float(np.ptp(levels)) for levels in all_k) or 1.0
        tolerance, arrow, row_gap = max(0.05, 0.02 * span), 0.07 * span, 0.085 * span
        layouts = []
        for _, state, record in panels:
            est_k = np.asarray(state.levels_cm) / 1000
            est = _column_layout(est_k - est_k.mean(), state.level_labels, tolerance, arrow, row_gap)
            dft = None if record is None else _column_layout(np.asarray(record.d_levels_cm) / 1000,
                                                              record.d_level_labels or [""] * 5, tolerance, arrow,
                                                              row_gap)
            layouts.append((est, dft))
        # panels as wide as their labels and columns need, so long labels never squeeze a panel's bars
        needs = [_panel_need_pt(fig, est, dft, _panel_name(group, state))
                 for (est, dft), (group, state, _) in zip(layouts, panels, strict=False)]
        axes = fig.subplots(1, len(groups), sharey=True, squeeze=False, gridspec_kw={"width_ratios": needs})[0]
        axes[0].set_ylabel("d-orbital energy / 10³ cm⁻¹")
        for ax in axes[1:]:
            ax.tick_params(axis="y", labelleft=False)
        for ax in axes:
            ax.tick_params(axis="x", length=0)
            ax.spines["bottom"].set_visible(False)
            ax.set_xticks([0.0], ["AOM est."])  # the final ticks' row of text, for the layout below
        _settle(fig)  # the panels' widths, for the gap between columns
        fitting = []
        for ax, (group, state, record), (est, dft) in zip(axes, panels, layouts, strict=False):
            left = _draw_levels(ax, 0.0, est, _electrons(state.occupation, False), OKABE_ITO["blue"], -1)
            ticks, names, right, edge = [0.0], ["AOM est."], [], est.half_width + 0.1
            if record is not None:
                names.append(f"DFT ({captions.BS_MARK})" if record.broken_symmetry else "DFT")
                x_dft = est.half_width + _column_gap(ax, est, dft, names) + dft.half_width
                right = _draw_levels(ax, x_dft, dft, _dft_electrons(c.d_electrons, record), OKABE_ITO["vermillion"], 1)
                ticks.append(x_dft)
            ax.set_xticks(ticks, names)
            fitting.append((ax, left, right, edge))
            if style == "annotated":
                ax.set_title(_panel_name(group, state), fontsize=PANEL_FONT_PT)
            else:
                ax.set_xlabel(_panel_name(group, state), fontsize=PANEL_FONT_PT)
        if style == "annotated":
            fig.suptitle(captions.d_levels_title(c), fontsize=8, x=0.0, ha="left")
            _caveats(fig, captions.d_levels_notes(c, any(r for _, _, r in panels)))
        _settle(fig)  # lay the panels out, then size each one's x range to its labels
        for ax, left, right, edge in fitting:
            _fit_labels(ax, left, right, edge)
    return fig


# ---- parity ---------------------------------------------------------------------------------------------

_NEAR = [((5, 4), "left", "bottom"), ((5, -4), "left", "top"), ((-5, 4), "right", "bottom"),
         ((-5, -4), "right", "top"), ((7, 0), "left", "center"), ((-7, 0), "right", "center"),
         ((0, 7), "center", "bottom"), ((0, -7), "center", "top")]
_LEADER_FROM_PT = 9.0  # labels further from their point than this get a leader line


def _far_candidates():
    """Offsets (points) further out in eight directions, nearest first: labels there get a leader line."""
    found = []
    for distance in (12, 18, 26, 36, 48, 62):
        for dx, dy in ((-1, 1), (1, -1), (1, 1), (-1, -1), (0, 1), (0, -1), (1, 0), (-1, 0)):
            ha = "left" if dx > 0 else ("right" if dx < 0 else "center")
            va = "bottom" if dy > 0 else ("top" if dy < 0 else "center")
            found.append(((dx * distance * 0.75, dy * distance * 0.75) if dx and dy else
                          (dx * distance, dy * distance), ha, va))
    return found


def _place_labels(ax, points, texts, obstacles=(), keep_out=None, first=()):
    """Put each label next to its point where it overlaps no other label, point, obstacle (text artists already
    on the axes), the axes edge or the region ``keep_out(bounds_px)`` says is forbidden, and lies nearer its own
    point than any other; further out when nothing near is free. A label far from its point, or nearer another
    point after all, gets a leader line. Points whose index is in ``first`` (the most constrained) are labelled
    first; the labels come back in the order of ``points``."""
    fig = ax.figure
    renderer = fig.canvas.get_renderer()
    _settle(fig)
    point_boxes = _point_boxes(ax, points)  # a margin round each point: no label covers a point
    centres = [ax.transData.transform(p) for p in points]
    axes_box = ax.get_window_extent(renderer)
    placed = [tuple(o.get_window_extent(renderer).extents) for o in obstacles]
    artists = {}
    for i in sorted(range(len(points)), key=lambda i: i not in first):
        best = None
        for offset, ha, va in _NEAR + _far_candidates():
            artist = ax.annotate(texts[i], points[i], xytext=offset, textcoords="offset points", ha=ha, va=va,
                                 fontsize=6.5, gid=DATA_LABEL)
            box = artist.get_window_extent(renderer)
            bounds = (box.x0, box.y0, box.x1, box.y1)
            # worst first: off the axes, in the forbidden region, on another text, on a point, nearer another point
            outside = box.x0 < axes_box.x0 or box.x1 > axes_box.x1 or box.y0 < axes_box.y0 or box.y1 > axes_box.y1
            forbidden = keep_out is not None and keep_out(bounds)
            on_text = sum(1 for other in placed if _overlap(bounds, other) > 0)
            on_point = sum(1 for other in point_boxes if _overlap(bounds, other) > 0)
            astray = _nearest(bounds, centres) != i
            score = 1e6 * outside + 1e5 * forbidden + 2e4 * on_text + 1e4 * on_point + 5e3 * astray
            if best is None or score < best[0]:
                if best is not None:
                    best[1].remove()
                best = (score, artist, bounds, (offset, ha, va), np.hypot(*offset) > _LEADER_FROM_PT or astray)
            else:
                artist.remove()
            if score == 0:
                break
        _, artist, bounds, (offset, ha, va), leader = best
        if leader:  # the same label, with a line to its point
            artist.remove()
            artist = ax.annotate(texts[i], points[i], xytext=offset, textcoords="offset points", ha=ha, va=va,
                                 fontsize=6.5, gid=DATA_LABEL,
                                 arrowprops=dict(arrowstyle="-", lw=0.4, color=_GREY, shrinkA=1, shrinkB=3))
        artist.set_in_layout(False)  # placed for this layout: it must not change it
        placed.append(bounds)
        artists[i] = artist
    return [artists[i] for i in range(len(points))]


def _nearest(bounds, centres) -> int:
    """Index of the point nearest to a box (display pixels)."""
    x0, y0, x1, y1 = bounds
    return int(np.argmin([np.hypot(max(x0 - cx, 0, cx - x1), max(y0 - cy, 0, cy - y1)) for cx, cy in centres]))


def _point_boxes(ax, points, half_px: float = 6.0) -> list[tuple]:
    boxes = []
    for x, y in points:
        px, py = ax.transData.transform((x, y))
        boxes.append((px - half_px, py - half_px, px + half_px, py + half_px))
    return boxes


# each grey quadrant's caption in one of its two corners away from the diagonal (axes fractions; limits symmetric)
_QUADRANT_CORNERS = {"both:\nT-4 lower": [((0.52, 0.98), "left", "top"), ((0.98, 0.52), "right", "bottom")],
                     "both:\nSP-4 lower": [((0.48, 0.02), "right", "bottom"), ((0.02, 0.48), "left", "top")]}


def _quadrant_captions(ax, points, keep_out) -> list:
    """Name the two grey quadrants, each in the corner where it covers no point and stays out of the band."""
    fig = ax.figure
    _settle(fig)
    renderer = fig.canvas.get_renderer()
    boxes = _point_boxes(ax, points)
    placed = []
    for text, corners in _QUADRANT_CORNERS.items():
        best = None
        for position, ha, va in corners:
            artist = ax.text(*position, text, transform=ax.transAxes, ha=ha, va=va, fontsize=6.5, color=_GREY,
                             linespacing=1.0, in_layout=False)
            box = artist.get_window_extent(renderer)
            bounds = (box.x0, box.y0, box.x1, box.y1)
            score = sum(_overlap(bounds, other) for other in boxes) + (1e5 if keep_out(bounds) else 0.0)
            if best is None or score < best[0]:
                if best is not None:
                    best[1].remove()
                best = (score, artist)
            else:
                artist.remove()
        placed.append(best[1])
    return placed


def band_distance(ax, bounds_px) -> float:
    """How far (data units of y − x) a box in display pixels stays from the parity line: the smallest |y − x| over
    the box, 0 when the box crosses the line (equal, linear axes)."""
    (x0, y0), (x1, y1) = ax.transData.inverted().transform([bounds_px[:2], bounds_px[2:]])
    low, high = y0 - x1, y1 - x0
    return 0.0 if low <= 0.0 <= high else min(abs(low), abs(high))


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


def _half_step_limit(reach: float) -> float:
    """A symmetric axis limit at least ``reach``, half a tick step beyond the outermost tick, so the x and y tick
    labels at the shared corner never meet."""
    from matplotlib.ticker import MaxNLocator

    ticks = MaxNLocator(nbins=6, steps=[1, 2, 2.5, 5, 10]).tick_values(-reach, reach)
    step = float(ticks[1] - ticks[0])
    return (np.ceil(reach / step - 0.5) + 0.5) * step


def parity_figure(comparison, unit: str = "kj", columns: int = 1, band_kj_mol: float = AGREEMENT_BAND_KJ_MOL,
                  style: str = "annotated"):
    """Estimated against computed ΔE(SP-4 − T-4) per complex; None when no complex has both numbers. Labels stay
    outside the agreement band (with a leader line where their point lies in it)."""
    check_style(style)
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
        reach = max(float(np.max(np.abs(np.concatenate([xs, ys])))), 2 * band) * 1.3  # room for labels at the edge
        hi = _half_step_limit(reach)
        lo = -hi
        ax.fill_between([0, hi], 0, hi, color="#e8e8e8", lw=0, zorder=0)
        ax.fill_between([lo, 0], lo, 0, color="#e8e8e8", lw=0, zorder=0)
        ax.fill_between([lo, hi], [lo - band, hi - band], [lo + band, hi + band], color=OKABE_ITO["sky blue"],
                        alpha=0.35, lw=0, zorder=1, gid="parity-band")
        ax.plot([lo, hi], [lo, hi], color="black", lw=0.8, ls="--", zorder=2)
        ax.axhline(0, color=_GREY, lw=0.5, zorder=1)
        ax.axvline(0, color=_GREY, lw=0.5, zorder=1)
        for x, y, (_, _, _, agree) in zip(xs, ys, points, strict=False):
            ax.plot(x, y, marker="o" if agree else "^", ms=5, ls="none", zorder=3, mec="black", mew=0.5,
                    color=OKABE_ITO["blue"] if agree else OKABE_ITO["vermillion"], gid="parity-point")
        ax.set_xlim(lo, hi)
        ax.set_ylim(lo, hi)
        ax.set_aspect("equal")
        delta = "ΔE(SP-4 − T-4)"
        ax.set_xlabel(f"{delta}, estimate / {unit_math(unit)}")
        ax.set_ylabel(f"{delta}, computed / {unit_math(unit)}")
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
        def keep_out(bounds):
            return band_distance(ax, bounds) <= band

        quadrants = []
        if style == "annotated":
            _caveats(fig, captions.parity_notes(comparison))
            quadrants = _quadrant_captions(ax, list(zip(xs, ys, strict=False)), keep_out)
        _place_labels(ax, list(zip(xs, ys, strict=False)), [formula_unicode(p[0]) for p in points], obstacles=quadrants,
                      keep_out=keep_out, first={i for i, (x, y) in enumerate(zip(xs, ys, strict=False)) if abs(y - x) <= band})
    return fig


# ---- distortion path ------------------------------------------------------------------------------------

def path_figure(c, unit: str = "kj", columns: int = 1, warnings=(), style: str = "annotated"):
    """Energy against the trans L–M–L angle for each spin (and SP-4 isomer); None without path points."""
    check_style(style)
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
                    x, y = zip(*curve, strict=False)
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
        ends = ax.secondary_xaxis("top")  # the path's two ends named as tick labels, not as loose text
        ends.set_xticks([109.47, 180.0], ["T-4", "SP-4"], fontsize=6.5, color=_GREY)
        ends.tick_params(length=2, color=_GREY, pad=1)
        handles = [Line2D([], [], color=spin_colour(s), marker=spin_marker(s), ms=4, label=multiplicity_word(s))
                   for s in spins]
        if len(isomers) > 1 or isomers[0]:
            handles += [Line2D([], [], color="black", ls=_ISOMER_LINES.get(i, "-"), label=i or "—") for i in isomers]
        if crossings:
            handles.append(Line2D([], [], marker="o", ms=7, mfc="none", mec="black", ls="none", label="spin crossing"))
        ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.0, 1.0), borderaxespad=0.2, handlelength=1.8)
        _place_labels(ax, [(x.trans_angle_deg, _in_unit(x.relative_kj_mol, unit)) for x in crossings],
                      [f"≈{x.trans_angle_deg:.0f}°" for x in crossings])
        if style == "annotated":
            ax.set_title(captions.path_title(c, point_group="D$_{2d}$"), loc="left")
            _caveats(fig, captions.path_notes(c, warnings, crossings))
    return fig


# ---- files ----------------------------------------------------------------------------------------------

def study_figures(comparison, unit: str = "kj", style: str = "annotated", ladder_energy: str = "E") -> dict:
    """name -> Figure for every figure the comparison supports, in ``style`` (annotated or journal); the spin
    ladders show ``ladder_energy`` (E, or G where the study has free energies)."""
    check_style(style)
    figures = {}
    for c in comparison.complexes:
        figures[f"ladder_{formula_slug(c.formula)}"] = ladder_figure(c, unit, warnings=comparison.warnings, style=style,
                                                                     energy=ladder_energy)
        figures[f"d_levels_{formula_slug(c.formula)}"] = d_levels_figure(c, style=style)
        path = path_figure(c, unit, warnings=comparison.warnings, style=style)
        if path is not None:
            figures[f"path_{formula_slug(c.formula)}"] = path
    parity = parity_figure(comparison, unit, style=style)
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
            try:
                fig.savefig(partial, format=extension, dpi=PNG_DPI, metadata=_METADATA[extension])
            except Exception as error:
                partial.unlink(missing_ok=True)
                # matplotlib's PDF writer, cut off by a full disk, fails again while closing its stream: the
                # error that reaches here is then an AttributeError whose context is the real OSError
                cause = error if isinstance(error, OSError) else error.__context__
                if isinstance(cause, OSError):
                    raise cause from None
                raise
            os.replace(partial, target)
            written.append(target)
    return written

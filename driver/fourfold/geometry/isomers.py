"""Which distinct ways four ligands can sit on the sites of an arrangement.

Two assignments of ligands to sites are the same isomer when a symmetry operation of the ideal polyhedron
(proper or improper: enantiomers have the same energy, so one of a pair is enough) maps one onto the other.
The operations are found as the site permutations that keep every site–site angle. A chelate's two donors
must sit on sites close enough for one ligand to span (no trans-spanning two-donor chelate), and the
sites each chelate holds are part of what a symmetry operation has to map.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cache
from itertools import permutations

import numpy as np

from .polyhedra import unit_vectors

# Largest site–site angle a two-donor chelate spans: bites are 70–100°, so cis sites of every arrangement
# (90°, 109.5°, the 120° of the trigonal pyramid's equator) but never trans ones [common practice, no source].
CHELATE_SPAN_MAX_DEG = 125.0


@dataclass(frozen=True)
class Isomer:
    """``label`` is '' when the composition has a single isomer on this arrangement; ``order[k]`` is the
    index (into the complex's donor sites, ``Complex.sites``; for monodentate ligands the ligand index) of the
    donor on site k of ``unit_vectors(arrangement)``."""

    arrangement: str
    label: str
    order: tuple[int, ...]


@cache
def _site_symmetry(arrangement: str) -> tuple[tuple[int, ...], ...]:
    vectors = unit_vectors(arrangement)
    gram = np.round(vectors @ vectors.T, 8)
    return tuple(p for p in permutations(range(4)) if np.array_equal(gram[np.ix_(p, p)], gram))


@cache
def _spannable(arrangement: str) -> frozenset:
    vectors = unit_vectors(arrangement)
    limit = np.cos(np.radians(CHELATE_SPAN_MAX_DEG))
    return frozenset(frozenset((i, j)) for i, j in permutations(range(4), 2) if vectors[i] @ vectors[j] > limit)


def isomers_of(cx, arrangement: str) -> list[Isomer]:
    """Distinct isomers of a complex (its donor sites and chelates) on an arrangement."""
    return isomers(cx.site_names, arrangement, cx.chelate_site_pairs)


def isomers(site_names: tuple[str, ...], arrangement: str,
            chelate_pairs: tuple[tuple[int, int], ...] = ()) -> list[Isomer]:
    """Distinct isomers of four donor sites on an arrangement, with labels a chemist reads.

    ``chelate_pairs`` are the pairs of indices into ``site_names`` that one chelate holds.
    SP-4: 'cis'/'trans' for MA2B2 and MA2BC (the A pair), 'trans-A,B' style for MABCD; SS-4 and trigonal-pyramid:
    'ax-…' naming the ligands on the axial site(s); T-4 has no isomers of these kinds.
    """
    symmetry = _site_symmetry(arrangement)
    spannable = _spannable(arrangement)
    seen, found = set(), []
    for order in sorted(set(permutations(range(4)))):
        position = {site: k for k, site in enumerate(order)}
        spans = frozenset(frozenset((position[a], position[b])) for a, b in chelate_pairs)
        if not spans <= spannable:
            continue
        names = tuple(site_names[i] for i in order)
        if (names, spans) in seen:
            continue
        for p in symmetry:
            inverse = {old: new for new, old in enumerate(p)}
            seen.add((tuple(names[p[k]] for k in range(4)), frozenset(frozenset(inverse[k] for k in s) for s in spans)))
        found.append((order, names))
    if len(found) == 1:
        return [Isomer(arrangement, "", found[0][0])]
    return [Isomer(arrangement, _label(arrangement, names), order) for order, names in found]


def _label(arrangement: str, names: tuple[str, ...]) -> str:
    if arrangement == "SP-4":
        trans_pairs = [(names[0], names[2]), (names[1], names[3])]
        counts = {n: names.count(n) for n in names}
        doubled = [n for n, c in counts.items() if c == 2]
        if doubled:
            pair = doubled[0] if len(doubled) == 1 else sorted(doubled)[0]
            return "trans" if (pair, pair) in trans_pairs else "cis"
        first = sorted(names)[0]
        partner = next(b if a == first else a for a, b in trans_pairs if first in (a, b))
        return f"trans-{first},{partner}"
    if arrangement == "SS-4":
        return "ax-" + ",".join(sorted((names[0], names[2])))
    if arrangement == "trigonal-pyramid":
        return f"ax-{names[0]}"
    return "-".join(names)

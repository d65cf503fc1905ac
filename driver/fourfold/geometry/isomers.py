"""Which distinct ways four ligands can sit on the sites of an arrangement.

Two assignments of ligands to sites are the same isomer when a symmetry operation of the ideal polyhedron
(proper or improper: enantiomers have the same energy, so one of a pair is enough) maps one onto the other.
The operations are found as the site permutations that keep every site–site angle.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cache
from itertools import permutations

import numpy as np

from .polyhedra import unit_vectors


@dataclass(frozen=True)
class Isomer:
    """``label`` is '' when the composition has a single isomer on this arrangement; ``order[k]`` is the
    index (into the complex's ligand tuple) of the ligand on site k of ``unit_vectors(arrangement)``."""

    arrangement: str
    label: str
    order: tuple[int, ...]


@cache
def _site_symmetry(arrangement: str) -> tuple[tuple[int, ...], ...]:
    vectors = unit_vectors(arrangement)
    gram = np.round(vectors @ vectors.T, 8)
    return tuple(p for p in permutations(range(4)) if np.array_equal(gram[np.ix_(p, p)], gram))


def isomers(ligand_names: tuple[str, ...], arrangement: str) -> list[Isomer]:
    """Distinct isomers of a composition on an arrangement, with labels a chemist reads.

    SP-4: 'cis'/'trans' for MA2B2 and MA2BC (the A pair), 'trans-A,B' style for MABCD; SS-4 and vTBPY-4:
    'ax-…' naming the ligands on the axial site(s); T-4 has no isomers of these kinds.
    """
    symmetry = _site_symmetry(arrangement)
    seen, found = set(), []
    for order in sorted(set(permutations(range(4)))):
        names = tuple(ligand_names[i] for i in order)
        if names in seen:
            continue
        images = {tuple(names[p[k]] for k in range(4)) for p in symmetry}
        seen |= images
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
    if arrangement == "vTBPY-4":
        return f"ax-{names[0]}"
    return "-".join(names)

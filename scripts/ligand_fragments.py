"""Build the 3D fragments of fourfold's bundled ligands (run once, offline; not imported by fourfold).

Each ligand is built from internal coordinates in a model complex — a monodentate ligand L in Ni(CO)3L,
the reference complex of Tolman's cone angles and electronic parameters (C. A. Tolman, Chem. Rev. 1977, 77,
313), a chelate in [PdCl2(L)] — with a few random conformers (substituent torsions, ring puckers). Each
is relaxed with GFN2-xTB (tblite, gas phase, through fourfold.compute.relax, free), conformers whose bonds
changed are dropped. A chelate keeps its lowest conformer; a monodentate ligand keeps the most compact
(smallest cone angle) of the conformers within FOLD_WINDOW_KJ_MOL of its lowest, since a crowded ligand
folds its substituents back (Tolman's cone angles assume exactly that). The kept ligand atoms are written
into data/ligands.toml in the frame fourfold.chem.ligands describes (the model's metal fixes that frame and
then is dropped; a chelate keeps its metal–donor distance as ``distance_angstrom``, the start distance
at which its bite is the relaxed one).

    PYTHONPATH=driver OMP_NUM_THREADS=1 python scripts/ligand_fragments.py [NAME ...]

Prints one line per conformer (energy, steps) and rewrites the ``atoms = [...]`` array of each ligand.
"""

from __future__ import annotations

import re
import sys
from pathlib import Path

import numpy as np
from ase import Atoms

from fourfold.chem.ligands import covalent_radius_angstrom
from fourfold.compute.relax import relax
from fourfold.compute.xtb_engine import XtbPotential
from fourfold.errors import FourfoldError
from fourfold.units import hartree_to_kj_mol

DATA = Path(__file__).resolve().parents[1] / "driver" / "fourfold" / "data" / "ligands.toml"
BOND_FACTOR = 1.25  # atoms closer than 1.25 × (sum of covalent radii) are bonded
MAX_DRAWS = 200
FOLD_WINDOW_KJ_MOL = 10.0  # about 4 kT at room temperature [common practice, no source]
_H_BOND = {"C": 1.09, "N": 1.01, "O": 0.97, "P": 1.41}


def nerf(a, b, c, bond, angle_deg, torsion_deg):
    """Position of D with |CD| = bond, angle BCD = angle and dihedral ABCD = torsion."""
    a, b, c = map(np.asarray, (a, b, c))
    bc = (c - b) / np.linalg.norm(c - b)
    n = np.cross(b - a, bc)
    n /= np.linalg.norm(n)
    m = np.cross(n, bc)
    angle, torsion = np.radians(angle_deg), np.radians(torsion_deg)
    d = np.array([-bond * np.cos(angle), bond * np.sin(angle) * np.cos(torsion), bond * np.sin(angle) * np.sin(torsion)])
    return c + d[0] * bc + d[1] * m + d[2] * n


class Model:
    """Heavy atoms with their hydrogen counts; hydrogens are added last from the local geometry."""

    def __init__(self):
        self.symbols, self.positions, self.hydrogens, self.planar = [], [], [], []

    def add(self, symbol, position, hydrogens=0, planar=False) -> int:
        self.symbols.append(symbol)
        self.positions.append(np.asarray(position, dtype=float))
        self.hydrogens.append(hydrogens)
        self.planar.append(planar)
        return len(self.symbols) - 1

    def p(self, index):
        return self.positions[index]

    def neighbours(self, index):
        return [j for j in range(len(self.symbols)) if j != index and np.linalg.norm(self.p(j) - self.p(index))
                < BOND_FACTOR * (covalent_radius_angstrom(self.symbols[j]) + covalent_radius_angstrom(self.symbols[index]))]

    def with_hydrogens(self, rng) -> tuple[list[str], np.ndarray, set]:
        """Symbols, positions and the intended bonds (the skeleton's and each H to its atom)."""
        symbols, positions = list(self.symbols), list(self.positions)
        bonds = _bond_set(symbols, np.array(positions))
        for index, count in enumerate(self.hydrogens):
            if not count:
                continue
            centre = self.p(index)
            bonds_here = [(self.p(j) - centre) / np.linalg.norm(self.p(j) - centre) for j in self.neighbours(index)]
            length = _H_BOND[self.symbols[index]]
            for direction in _hydrogen_directions(bonds_here, count, self.planar[index], rng):
                bonds.add((index, len(symbols)))
                symbols.append("H")
                positions.append(centre + length * direction)
        return symbols, np.array(positions), bonds


def _hydrogen_directions(bonds, count, planar, rng):
    bonds = [np.asarray(b) for b in bonds]
    if planar or len(bonds) == 3:
        return [-(sum(bonds)) / np.linalg.norm(sum(bonds))]
    if len(bonds) == 2:
        bisector = -(bonds[0] + bonds[1]) / np.linalg.norm(bonds[0] + bonds[1])
        normal = np.cross(bonds[0], bonds[1]) / np.linalg.norm(np.cross(bonds[0], bonds[1]))
        half = np.radians(54.75)
        out = [np.cos(half) * bisector + np.sin(half) * normal, np.cos(half) * bisector - np.sin(half) * normal]
        return out[:count]
    axis = -bonds[0]
    reference = np.array([1.0, 0.0, 0.0]) if abs(axis[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
    u = np.cross(axis, reference)
    u /= np.linalg.norm(u)
    v = np.cross(axis, u)
    start = rng.uniform(0, 2 * np.pi)
    tilt = np.radians(180.0 - 109.47)
    return [np.cos(tilt) * axis + np.sin(tilt) * (np.cos(start + k * 2 * np.pi / 3) * u + np.sin(start + k * 2 * np.pi / 3) * v)
            for k in range(count)]


# ---------------------------------------------------------------- substituents on a donor ---------------

def methyl(model, anchor, parent, grand, bond, angle, torsion):
    return model.add("C", nerf(model.p(grand), model.p(parent), model.p(anchor), bond, angle, torsion), 3)


def phenyl(model, anchor, parent, grand, bond, angle, torsion, twist):
    ipso = model.add("C", nerf(model.p(grand), model.p(parent), model.p(anchor), bond, angle, torsion))
    ring = [ipso]
    ring.append(model.add("C", nerf(model.p(parent), model.p(anchor), model.p(ipso), 1.39, 120, twist), 1, True))
    ring.append(model.add("C", nerf(model.p(anchor), model.p(ipso), model.p(ring[1]), 1.39, 120, 180), 1, True))
    for _ in range(3):
        ring.append(model.add("C", nerf(model.p(ring[-3]), model.p(ring[-2]), model.p(ring[-1]), 1.39, 120, 0), 1, True))
    return ipso


def cyclohexyl(model, anchor, parent, grand, bond, angle, torsion, twist):
    ipso = model.add("C", nerf(model.p(grand), model.p(parent), model.p(anchor), bond, angle, torsion), 1)
    c2 = model.add("C", nerf(model.p(parent), model.p(anchor), model.p(ipso), 1.53, 111, twist), 2)
    c3 = model.add("C", nerf(model.p(anchor), model.p(ipso), model.p(c2), 1.53, 111, 180), 2)
    c4 = model.add("C", nerf(model.p(ipso), model.p(c2), model.p(c3), 1.53, 111, -55), 2)
    c5 = model.add("C", nerf(model.p(c2), model.p(c3), model.p(c4), 1.53, 111, 55), 2)
    model.add("C", nerf(model.p(c3), model.p(c4), model.p(c5), 1.53, 111, -55), 2)
    return ipso


def tert_butyl(model, anchor, parent, grand, bond, angle, torsion, twist):
    quaternary = model.add("C", nerf(model.p(grand), model.p(parent), model.p(anchor), bond, angle, torsion))
    for k in range(3):
        methyl(model, quaternary, anchor, parent, 1.54, 110, twist + 120 * k)
    return quaternary


def methoxy(model, anchor, parent, grand, bond, angle, torsion, twist):
    oxygen = model.add("O", nerf(model.p(grand), model.p(parent), model.p(anchor), bond, angle, torsion))
    methyl(model, oxygen, anchor, parent, 1.43, 120, twist)
    return oxygen


# ---------------------------------------------------------------- model complexes ----------------------

def tolman_model(donor: str):
    """Ni(CO)3 below a donor at the origin (Ni on −z); returns the model, the donor, the metal and a
    reference atom for torsions."""
    model = Model()
    metal = model.add("Ni", [0.0, 0.0, -2.2])
    carbons = []
    for k in range(3):
        phi = 2 * np.pi * k / 3 + np.pi / 3
        direction = np.array([np.sqrt(8) / 3 * np.cos(phi), np.sqrt(8) / 3 * np.sin(phi), -1 / 3])
        carbons.append(model.add("C", model.p(metal) + 1.80 * direction))
        model.add("O", model.p(metal) + 2.95 * direction)
    donor_index = model.add(donor, [0.0, 0.0, 0.0])
    return model, donor_index, metal, carbons[0]


def monodentate(donor, groups, rng, model_charge=0):
    """Donor with three (or fewer) groups (builder, bond, M–D–X angle, extra torsion)."""
    model, d, metal, reference = tolman_model(donor)
    for k, (builder, bond, angle) in enumerate(groups):
        torsion = 120.0 * k + rng.normal(0, 10)
        extra = rng.uniform(0, 360)
        if builder is methyl:
            methyl(model, d, metal, reference, bond, angle, torsion)
        else:
            builder(model, d, metal, reference, bond, angle, torsion, extra)
    return model, d, metal, model_charge


def chelate_model(bite_deg, distance):
    """Pd with two Cl trans to the chelate's donor sites; donors go at ±bite/2 about +x."""
    model = Model()
    metal = model.add("Pd", [0.0, 0.0, 0.0])
    for sign in (1, -1):
        model.add("Cl", [-2.3 * np.cos(np.radians(45)), sign * 2.3 * np.sin(np.radians(45)), 0.0])
    half = np.radians(bite_deg) / 2
    sites = [distance * np.array([np.cos(half), sign * np.sin(half), 0.0]) for sign in (1, -1)]
    return model, metal, sites


def hexagon(p1, p2, away, side=1.39):
    """The other four vertices of a planar regular hexagon with edge p1→p2, on the side away from ``away``."""
    p1, p2, away = map(np.asarray, (p1, p2, away))
    edge = (p2 - p1) / np.linalg.norm(p2 - p1)
    normal = np.array([-edge[1], edge[0], 0.0])
    if normal @ (away - (p1 + p2) / 2) > 0:
        normal = -normal
    centre = (p1 + p2) / 2 + normal * side * np.sqrt(3) / 2
    out, current = [], p2
    for _ in range(4):
        offset = current - centre
        angle = np.radians(60.0) * (1 if np.cross(p2 - centre, p1 - centre)[2] < 0 else -1)
        rotation = np.array([[np.cos(angle), -np.sin(angle), 0], [np.sin(angle), np.cos(angle), 0], [0, 0, 1]])
        current = centre + rotation @ offset
        out.append(current)
    return out


def backbone(model, donors, pucker, donor_symbol, carbons):
    """CH2 chain between two donors (2 or 3 carbons), puckered out of the plane by ±pucker Å."""
    a, b = model.p(donors[0]), model.p(donors[1])
    if carbons == 2:
        x = (a[0] + b[0]) / 2 + (1.5 if donor_symbol == "P" else 1.2)
        return [model.add("C", [x, 0.75, pucker], 2), model.add("C", [x, -0.75, -pucker], 2)]
    first = model.add("C", a + np.array([1.75, -0.55, 0.3]), 2)
    middle = model.add("C", [a[0] + 2.2, 0.0, 0.3 + 2.7 * pucker], 2)
    last = model.add("C", b + np.array([1.75, 0.55, 0.3]), 2)
    return [first, middle, last]


def bridged(donor_symbol, carbons, substituent, rng, bite, distance):
    """R2D–(CH2)n–DR2 chelates (en, tmeda, dmpe, dppe, dppp) on PdCl2."""
    model, metal, sites = chelate_model(bite, distance)
    hydrogens = 2 if substituent is None else 0
    donors = [model.add(donor_symbol, site, hydrogens) for site in sites]
    chain = backbone(model, donors, rng.choice([-1, 1]) * 0.35, donor_symbol, carbons)
    if substituent is not None:
        builder, bond = substituent
        for donor, first in zip(donors, (chain[0], chain[-1]), strict=False):
            for angle in (rng.normal(60, 10), rng.normal(-60, 10)):
                torsion = 180.0 + angle
                if builder is methyl:
                    methyl(model, donor, metal, first, bond, 115, torsion)
                else:
                    builder(model, donor, metal, first, bond, 115, torsion, rng.uniform(0, 360))
    return model, donors, metal, 0


def bipyridine(rng, bite, distance):
    """Two pyridine rings joined by C2–C2' (1.48 Å), N1 and N1' bound, cis and planar."""
    model, metal, _ = chelate_model(bite, distance)
    step = 1.34 * np.array([-np.sin(np.radians(60)), np.cos(np.radians(60)), 0.0])
    height = 0.74 + step[1]
    x = np.sqrt(distance**2 - height**2) - step[0]
    nitrogens, carbons = [], []
    for sign in (1, -1):
        carbon = np.array([x, sign * 0.74, 0.0])
        nitrogens.append(carbon + step * np.array([1, sign, 1]))
        carbons.append(carbon)
    donors = [model.add("N", position) for position in nitrogens]
    for nitrogen, carbon, other in zip(nitrogens, carbons, carbons[::-1], strict=False):
        model.add("C", carbon)
        for position in hexagon(carbon, nitrogen, other):
            model.add("C", position, 1, True)
    return model, donors, metal, 0


def phenanthroline(rng, bite, distance):
    """Three angularly fused hexagons (side 1.39 Å), N1 and N10 in the bay, bound."""
    model, metal, _ = chelate_model(bite, distance)
    side = 1.39
    apothem = side * np.sqrt(3) / 2
    x_middle = np.sqrt(distance**2 - side**2) + 2 * apothem
    centres = [np.array([x_middle, 0.0, 0.0])]
    centres += [centres[0] + 2 * apothem * np.array([np.cos(a), np.sin(a), 0.0]) for a in np.radians([120, 240])]
    positions = []
    for centre in centres:
        for angle in np.radians(30 + 60 * np.arange(6)):
            position = centre + side * np.array([np.cos(angle), np.sin(angle), 0.0])
            if all(np.linalg.norm(position - q) > 0.1 for q in positions):  # fused rings share vertices
                positions.append(position)
    nitrogens = sorted(sorted(range(len(positions)), key=lambda i: np.linalg.norm(positions[i]))[:2],
                       key=lambda i: -positions[i][1])
    donors = [model.add("N", positions[i]) for i in nitrogens]
    for i, position in enumerate(positions):
        if i not in nitrogens:
            ring_neighbours = sum(np.linalg.norm(position - q) < 1.6 for j, q in enumerate(positions) if j != i)
            model.add("C", position, 1 if ring_neighbours == 2 else 0, True)
    return model, donors, metal, 0


def planar_ring(kind, rng, bite, distance):
    """acac⁻ (six-membered O,O ring), ox²⁻ and dmgH⁻ (five-membered O,O / N,N rings), in the xy plane."""
    model, metal, sites = chelate_model(bite, distance)
    if kind == "acac":
        o1, o2 = (model.add("O", site) for site in sites)
        model.add("C", [2.65, 1.20, 0.0])
        model.add("C", [3.30, 0.0, 0.0], 1, True)
        model.add("C", [2.65, -1.20, 0.0])
        model.add("C", [3.60, 2.38, 0.0], 3)
        model.add("C", [3.60, -2.38, 0.0], 3)
        return model, [o1, o2], metal, -1
    if kind == "ox":
        o1, o2 = (model.add("O", site) for site in sites)
        model.add("C", [2.65, 0.78, 0.0])
        model.add("C", [2.65, -0.78, 0.0])
        model.add("O", [3.25, 1.87, 0.0])
        model.add("O", [3.25, -1.87, 0.0])
        return model, [o1, o2], metal, -2
    n1, n2 = (model.add("N", site) for site in sites)
    model.add("C", [2.60, 0.73, 0.0])
    model.add("C", [2.60, -0.73, 0.0])
    model.add("C", [3.60, 1.85, 0.0], 3)
    model.add("C", [3.60, -1.85, 0.0], 3)
    model.add("O", [0.85, 2.62, 0.0], 1)  # the oxime O–H of dmgH⁻
    model.add("O", [0.85, -2.62, 0.0])
    return model, [n1, n2], metal, -1


def acetate(rng):
    model, d, metal, reference = tolman_model("O")
    carbon = model.add("C", nerf(model.p(reference), model.p(metal), model.p(d), 1.28, 125, rng.uniform(0, 360)))
    syn = rng.choice([0.0, 180.0])  # the free O syn or anti to the metal, the methyl opposite
    model.add("O", nerf(model.p(metal), model.p(d), model.p(carbon), 1.24, 124, syn))
    model.add("C", nerf(model.p(metal), model.p(d), model.p(carbon), 1.52, 116, syn + 180), 3)
    return model, d, metal, -1


def linear(donor, partner, end, lengths, hydrogens):
    """M–D≡X–Y ligands: MeCN (N≡C–CH3), CNMe (C≡N–CH3)."""
    model, d, metal, _ = tolman_model(donor)
    model.add(partner, [0.0, 0.0, lengths[0]])
    model.add(end, [0.0, 0.0, lengths[0] + lengths[1]], hydrogens)
    return model, d, metal, 0


LIGANDS = {
    "PPh3": (4, lambda rng: monodentate("P", [(phenyl, 1.83, 114)] * 3, rng)),
    "PMe3": (3, lambda rng: monodentate("P", [(methyl, 1.83, 115)] * 3, rng)),
    "PCy3": (6, lambda rng: monodentate("P", [(cyclohexyl, 1.86, 113)] * 3, rng)),
    "PtBu3": (3, lambda rng: monodentate("P", [(tert_butyl, 1.90, 108)] * 3, rng)),
    "P(OMe)3": (6, lambda rng: monodentate("P", [(methoxy, 1.60, 117)] * 3, rng)),
    "PMe2Ph": (3, lambda rng: monodentate("P", [(methyl, 1.83, 115), (methyl, 1.83, 115), (phenyl, 1.83, 115)], rng)),
    "AsPh3": (4, lambda rng: monodentate("As", [(phenyl, 1.95, 115)] * 3, rng)),
    "NMe3": (1, lambda rng: monodentate("N", [(methyl, 1.48, 109)] * 3, rng)),
    "MeCN": (1, lambda rng: linear("N", "C", "C", (1.15, 1.46), 3)),
    "CNMe": (1, lambda rng: linear("C", "N", "C", (1.17, 1.42), 3)),
    "OAc": (4, acetate),
    "en": (2, lambda rng: bridged("N", 2, None, rng, 84, 2.05)),
    "tmeda": (3, lambda rng: bridged("N", 2, (methyl, 1.48), rng, 86, 2.10)),
    "dmpe": (3, lambda rng: bridged("P", 2, (methyl, 1.83), rng, 86, 2.25)),
    "dppe": (3, lambda rng: bridged("P", 2, (phenyl, 1.83), rng, 86, 2.25)),
    "dppp": (3, lambda rng: bridged("P", 3, (phenyl, 1.83), rng, 92, 2.25)),
    "bipy": (1, lambda rng: bipyridine(rng, 80, 2.03)),
    "phen": (1, lambda rng: phenanthroline(rng, 80, 2.05)),
    "acac": (1, lambda rng: planar_ring("acac", rng, 92, 1.98)),
    "ox": (1, lambda rng: planar_ring("ox", rng, 84, 2.00)),
    "dmg": (2, lambda rng: planar_ring("dmg", rng, 80, 1.98)),
}


def _bond_set(symbols, positions):
    radii = np.array([covalent_radius_angstrom(s) for s in symbols])
    distances = np.linalg.norm(positions[:, None] - positions[None], axis=2)
    return {(i, j) for i in range(len(symbols)) for j in range(i + 1, len(symbols))
            if distances[i, j] < BOND_FACTOR * (radii[i] + radii[j])}


def conformers(name: str, seed: int = 11):
    """Relaxed conformers of one ligand's model complex, lowest first: (energy_hartree, atoms, donors, metal)."""
    count, make = LIGANDS[name]
    rng = np.random.default_rng(seed)
    found = []
    for trial in range(count):
        for _ in range(MAX_DRAWS):  # redraw torsions until no two atoms that should not be bonded touch
            model, donors, metal, charge = make(rng)
            donors = [donors] if isinstance(donors, int) else donors
            symbols, positions, intended = model.with_hydrogens(rng)
            if _bond_set(symbols, positions) == intended:
                break
        else:
            print(f"{name} conformer {trial}: no clash-free start in {MAX_DRAWS} draws", flush=True)
            continue
        atoms = Atoms(symbols, positions=positions)
        ligand = [i for i in range(len(atoms)) if i not in _model_only(model, donors)]
        coordinated = _coordination(model, metal)
        potential = XtbPotential(symbols, charge=charge, spin2s=0)
        arrangement = "T-4" if symbols[metal] == "Ni" else "SP-4"
        try:
            result = relax(atoms, potential, "free", arrangement, metal_index=metal, donor_indices=coordinated,
                           max_steps=400, convergence="default")
        except FourfoldError as error:  # a start that fails is reported and skipped; the others decide
            print(f"{name} conformer {trial}: failed ({error})", flush=True)
            continue
        before = {b for b in _bond_set(symbols, positions) if b[0] in ligand and b[1] in ligand}
        after = {b for b in _bond_set(symbols, result.atoms.get_positions()) if b[0] in ligand and b[1] in ligand}
        intact = before == after
        print(f"{name} conformer {trial}: E = {result.energy_hartree:.6f} Eh, {result.steps} steps, "
              f"converged {result.converged}, bonds intact {intact}", flush=True)
        if intact and result.converged:
            found.append((result.energy_hartree, result.atoms, donors, metal, ligand))
    found.sort(key=lambda item: item[0])
    if found:
        spread = [hartree_to_kj_mol(e - found[0][0]) for e, *_ in found]
        print(f"{name}: {len(found)} conformers, kJ/mol above the lowest: {', '.join(f'{x:.1f}' for x in spread)}")
    return found


def _model_only(model, donors):
    """Indices of the model complex's metal and co-ligand atoms (everything before the first donor)."""
    return set(range(min(donors)))


def _coordination(model, metal):
    """The metal's four donor atoms in the model."""
    distances = [np.linalg.norm(model.p(j) - model.p(metal)) if j != metal else np.inf for j in range(len(model.symbols))]
    return sorted(np.argsort(distances)[:4].tolist())


def fragment_frame(positions, donors, metal):
    """Ligand coordinates in fourfold's frame (chem.ligands): donors first."""
    if len(donors) == 1:
        d = positions[donors[0]]
        z = (d - positions[metal]) / np.linalg.norm(d - positions[metal])
        reference = np.array([1.0, 0.0, 0.0]) if abs(z[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
        x = np.cross(reference, z)
        x /= np.linalg.norm(x)
        return (positions - d) @ np.column_stack([x, np.cross(z, x), z])
    d0, d1 = positions[donors[0]], positions[donors[1]]
    middle = (d0 + d1) / 2
    y = (d0 - d1) / np.linalg.norm(d0 - d1)
    x = middle - positions[metal]
    x -= (x @ y) * y
    x /= np.linalg.norm(x)
    return (positions - middle) @ np.column_stack([x, y, np.cross(x, y)])


def write_atoms(name: str, symbols, positions, distance_angstrom=None) -> None:
    """Rewrite the ligand's ``atoms`` array (and a chelate's ``distance_angstrom``) in data/ligands.toml."""
    text = DATA.read_text()
    header = re.search(rf'^\[(?:{re.escape(name)}|"{re.escape(name)}")\]\n', text, flags=re.MULTILINE)
    if header is None:
        raise SystemExit(f"{name}: no [{name}] table in {DATA}")
    start = text.index("atoms = [", header.end())
    end = text.index("\n]\n", start) + 3
    rows = "\n".join(f'  ["{s}", {x:.4f}, {y:.4f}, {z:.4f}],' for s, (x, y, z) in zip(symbols, positions, strict=False))
    block = f"atoms = [\n{rows}\n]\n"
    table = text[header.end():start]
    if distance_angstrom is not None:
        table = (re.sub(r"^distance_angstrom = .*\n", "", table, flags=re.MULTILINE)
                 + f"distance_angstrom = {distance_angstrom:.3f}\n")
    DATA.write_text(text[:header.end()] + table + block + text[end:])


def _fragment(found_item):
    _, atoms, donors, metal, ligand = found_item
    order = donors + [i for i in ligand if i not in donors]
    positions = fragment_frame(atoms.get_positions(), donors, metal)[order]
    return [atoms.get_chemical_symbols()[i] for i in order], np.round(positions, 4) + 0.0, len(donors)


def _cone_deg(symbols, positions, denticity) -> float:
    from fourfold.chem.ligands import Ligand
    from fourfold.chem.metals import Sourced
    from fourfold.geometry.cone import cone_angle_deg

    unused = Sourced(0.0, "not used for a cone angle")
    fragment = Ligand("fragment", "fragment", 0, tuple(symbols), np.asarray(positions), unused, unused, unused,
                      denticity=denticity)
    return cone_angle_deg(fragment)


def main(names):
    for name in names or LIGANDS:
        found = conformers(name)
        if not found:
            print(f"{name}: no usable conformer", flush=True)
            continue
        kept = found[0]
        if len(found[0][2]) == 1:
            lowest = found[0][0]
            near = [item for item in found if hartree_to_kj_mol(item[0] - lowest) <= FOLD_WINDOW_KJ_MOL]
            cones = [_cone_deg(*_fragment(item)) for item in near]
            kept = near[int(np.argmin(cones))]
            print(f"{name}: cone angles of the conformers within {FOLD_WINDOW_KJ_MOL} kJ/mol: "
                  f"{', '.join(f'{c:.1f}' for c in cones)}; kept {min(cones):.1f}")
        symbols, positions, _ = _fragment(kept)
        _, atoms, donors, metal, _ = kept
        # a chelate starts at its model's metal–donor distance, so that its bite is the relaxed one
        distance = None if len(donors) == 1 else float(np.mean(atoms.get_distances(metal, donors)))
        write_atoms(name, symbols, positions, distance)


if __name__ == "__main__":
    main(sys.argv[1:])

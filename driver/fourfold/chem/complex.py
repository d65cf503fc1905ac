"""Complex: a metal ion with four donor atoms (monodentate ligands and two-donor chelates); charge balance,
d count and allowed spins."""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass

from ..errors import InputError
from .formula import parse_formula
from .ligands import Ligand, get_ligand, ligand_lookup
from .metals import Metal, get_metal

COORDINATION_NUMBER = 4
SPIN_WORDS = {1: "singlet", 2: "doublet", 3: "triplet", 4: "quartet", 5: "quintet", 6: "sextet"}


def spin_label(spin2s: int) -> str:
    """'triplet (2S=2)' style label; spin is always stored as 2S."""
    multiplicity = spin2s + 1
    return f"{SPIN_WORDS.get(multiplicity, f'{multiplicity}-et')} (2S={spin2s})"


@dataclass(frozen=True)
class Complex:
    metal: Metal
    oxidation_state: int
    ligands: tuple[Ligand, ...]

    def __post_init__(self):
        donors = sum(lig.denticity for lig in self.ligands)
        if donors != COORDINATION_NUMBER:
            raise InputError(f"{self.metal.symbol} has {_count_words(self.ligands)}: {_FOUR_DONORS}")
        self.metal.d_electrons(self.oxidation_state)  # validates the oxidation state

    @property
    def sites(self) -> tuple[tuple[int, int], ...]:
        """The four donor atoms as (index into ``ligands``, which donor of that ligand), ligands in order."""
        return tuple((i, k) for i, lig in enumerate(self.ligands) for k in range(lig.denticity))

    @property
    def site_names(self) -> tuple[str, ...]:
        """Per donor site the ligand's name; the two ends of a chelate with different donor elements are told
        apart ('gly:N', 'gly:O'), so isomers that swap them count as different."""
        names = []
        for i, k in self.sites:
            ligand = self.ligands[i]
            symmetric = len(set(ligand.donors)) == 1
            names.append(ligand.name if symmetric else f"{ligand.name}:{ligand.donors[k]}")
        return tuple(names)

    @property
    def chelate_site_pairs(self) -> tuple[tuple[int, int], ...]:
        """Pairs of site indices held by one chelate."""
        sites = self.sites
        return tuple((sites.index((i, 0)), sites.index((i, 1))) for i, lig in enumerate(self.ligands) if lig.is_chelate)

    @property
    def charge(self) -> int:
        return self.oxidation_state + sum(lig.charge for lig in self.ligands)

    @property
    def d_electrons(self) -> int:
        return self.metal.d_electrons(self.oxidation_state)

    @property
    def allowed_spin2s(self) -> tuple[int, ...]:
        """2S from the lowest (0 or 1) up to min(n, 10 − n) unpaired d electrons."""
        n = self.d_electrons
        top = min(n, 10 - n)
        return tuple(range(top % 2, top + 1, 2))

    def check_spin(self, spin2s: int) -> int:
        if spin2s not in self.allowed_spin2s:
            allowed = ", ".join(str(s) for s in self.allowed_spin2s)
            if spin2s < 0:
                why = "negative"
            elif (spin2s - self.d_electrons) % 2:
                why = "wrong parity"
            else:
                why = f"more unpaired electrons than d{self.d_electrons} allows"
            raise InputError(
                f"2S = {spin2s} is impossible for {self.formula} (d{self.d_electrons}, {why}): use one of {allowed}"
            )
        return spin2s

    @property
    def composition(self) -> Counter:
        return Counter(lig.name for lig in self.ligands)

    @property
    def formula(self) -> str:
        """Canonical formula: ligands grouped in order of first appearance, charge after the bracket."""
        parts = []
        for name, count in self.composition.items():
            bare = len(name) <= 2 and name[0].isupper() and (name[1:] == "" or name[1:].islower())
            token = name if bare else f"({name})"
            if count == 1 and token.startswith("("):
                token = token[1:-1] if len(self.composition) == 1 else token
            parts.append(token + (str(count) if count > 1 else ""))
        charge = self.charge
        suffix = "" if charge == 0 else f"{abs(charge) if abs(charge) > 1 else ''}{'+' if charge > 0 else '-'}"
        return f"[{self.metal.symbol}{''.join(parts)}]{suffix}"


def complex_from_formula(text: str, custom_ligands: dict[str, Ligand] | None = None) -> Complex:
    """Parse a formula; the oxidation state follows from the charge (or is checked against a roman numeral)."""
    parsed = parse_formula(text, {alias: lig.name for alias, lig in ligand_lookup(custom_ligands).items()})
    metal = get_metal(parsed.metal)
    ligands = tuple(get_ligand(name, custom_ligands) for name in parsed.ligands)
    ligand_charge = sum(lig.charge for lig in ligands)
    if parsed.oxidation_state is not None:
        return complex_explicit(metal.symbol, parsed.oxidation_state, ligands, charge=parsed.charge)
    if sum(lig.denticity for lig in ligands) != COORDINATION_NUMBER:
        raise InputError(f"'{text}' has {_count_words(ligands)}: {_FOUR_DONORS}")
    return Complex(metal, parsed.charge - ligand_charge, ligands)


_FOUR_DONORS = "fourfold handles four-coordinate complexes (four donor atoms; a chelate such as en counts two)"


def _count_words(ligands) -> str:
    donors = sum(lig.denticity for lig in ligands)
    if donors == len(ligands):
        return f"{len(ligands)} ligands"
    return f"{len(ligands)} ligands with {donors} donor atoms"


def complex_explicit(metal: str, oxidation_state: int, ligands, charge: int | None = None,
                     custom_ligands: dict[str, Ligand] | None = None) -> Complex:
    """Explicit form: metal symbol, oxidation state, four ligands (names or Ligand), optional overall charge."""
    resolved = tuple(lig if isinstance(lig, Ligand) else get_ligand(lig, custom_ligands) for lig in ligands)
    cx = Complex(get_metal(metal), int(oxidation_state), resolved)
    if charge is not None and charge != cx.charge:
        ligand_charge = sum(lig.charge for lig in resolved)
        raise InputError(
            f"charge does not add up: {metal}({oxidation_state:+d}) + ligands ({ligand_charge:+d}) = {cx.charge:+d}, "
            f"but the overall charge given is {charge:+d}; fix the oxidation state or the charge"
        )
    return cx

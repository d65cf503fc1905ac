"""Safety cautions: the right lines for the right compounds, every metal and ligand decided, sources on every line."""

import copy

import pytest

from fourfold.chem.complex import complex_from_formula
from fourfold.chem.hazards import (
    CLOSING_LINES,
    COMPUTED_IS_NOT_EXPERIMENT,
    DEFERRAL,
    cautions_for,
    cautions_markdown,
    cautions_text,
    hazard_table,
    parse_hazard_table,
)
from fourfold.chem.ligands import custom_ligand
from fourfold.data import load_table
from fourfold.errors import InputError


def titles(lines):
    """The title of each specific caution (the part before the first colon), closing lines left out."""
    return [line.split(":", 1)[0] for line in lines if line not in CLOSING_LINES]


def test_nickel_tetracarbonyl_gives_the_carbonyl_line_and_the_nickel_line():
    # Ni(CO)4: NIOSH IDLH documentation (1994): REL 0.001 ppm, IDLH 2 ppm, potential occupational carcinogen;
    # nickel compounds: IARC Monographs vol. 100C (2012), Group 1.
    lines = cautions_for(complex_from_formula("Ni(CO)4"))
    assert titles(lines) == ["Nickel carbonyl", "Nickel"]
    assert "IDLH 2 ppm" in lines[0] and "Group 1" in lines[1]
    assert lines[-2:] == list(CLOSING_LINES)


def test_the_nickel_carbonyl_line_replaces_the_general_carbon_monoxide_line():
    # the general CO line still applies where no combination replaces it: NIOSH REL for CO 35 ppm TWA
    # (OSHA Chemical Sampling Information, carbon monoxide)
    assert "Carbon monoxide" not in titles(cautions_for(complex_from_formula("Ni(CO)4")))
    cobalt = cautions_for(complex_from_formula("[Co(CO)4]-"))
    assert titles(cobalt) == ["Cobalt", "Carbon monoxide"]
    assert "35 ppm" in cobalt[1]


def test_mercury_tetracyanide_gives_mercury_and_cyanide():
    # mercury: IARC Monographs vol. 58 (1993); cyanides release HCN with acids: EUH032, Regulation (EC)
    # 1272/2008 Annex II 1.2.3 ("such as salts of hydrogen cyanide"); NIOSH IDLH 25 mg/m3 as CN (1994).
    lines = cautions_for(complex_from_formula("[Hg(CN)4]2-"))
    assert titles(lines) == ["Mercury", "Cyanide"]
    assert "hydrogen cyanide" in lines[1] and "EUH032" in lines[1]


def test_tetrachloronickelate_gives_the_nickel_line_only():
    # IARC Monographs vol. 100C (2012): nickel compounds Group 1; chloride adds nothing beyond the metal.
    assert titles(cautions_for(complex_from_formula("[NiCl4]2-"))) == ["Nickel"]


def test_tetrachlorozincate_gives_no_specific_line_but_still_the_closing_lines():
    # zinc(II) chloride complexes: no element-specific caution (zinc compounds are in no IARC group 1–2B and
    # carry no CLP carcinogen class; common practice, no source)
    assert cautions_for(complex_from_formula("[ZnCl4]2-")) == list(CLOSING_LINES)


@pytest.mark.parametrize("formula,expected", [
    # organomercury: Nierenberg et al., N. Engl. J. Med. 1998, 338, 1672 (dimethylmercury through latex gloves)
    ("[Hg(CH3)4]2-", ["Organomercury", "Mercury"]),
    # PH3: NIOSH IDLH documentation (1994) REL 0.3 ppm, IDLH 50 ppm; Pocket Guide "may ignite spontaneously"
    ("[NiCl2(PH3)2]", ["Nickel", "Phosphine gas"]),
    # PMe3 pyrophoric: suppliers' SDS, H250 (from memory)
    ("[NiCl2(PMe3)2]", ["Nickel", "Pyrophoric phosphine"]),
    # Cr(VI) compounds: IARC vol. 100C (2012) Group 1; Cr(III): IARC vol. 49 (1990) Group 3 (from memory)
    ("[CrCl4]-", ["Chromium"]),
    # every Tc isotope is radioactive: NUBASE2020 (Kondev et al., Chin. Phys. C 2021, 45, 030001; from memory)
    ("[TcCl4]3-", ["Technetium (radioactive)"]),
    # OsO4: International Chemical Safety Card 0528 (1997)
    ("[OsCl4]2-", ["Osmium"]),
    # TiCl4 hydrolyses violently: Greenwood & Earnshaw, Chemistry of the Elements, 1997 (from memory)
    ("[TiCl4]", ["Early-metal halide"]),
    # cadmium compounds: IARC vol. 100C (2012) Group 1
    ("[CdCl4]2-", ["Cadmium"]),
    # soluble Co(II) salts: IARC vol. 131, Group 2A (Karagas et al., Lancet Oncol. 2022, 23, 577)
    ("[Co(NCS)4]2-", ["Cobalt", "Thiocyanate"]),
    # metal hydrides and methyls: H250/H260, Regulation (EC) 1272/2008 Annex III; Bretherick 2007 (from memory)
    ("[Fe(H)4]2-", ["Metal hydride"]),
    ("[PtCl2(PF3)2]", ["Platinum", "Phosphorus trifluoride"]),
])
def test_formula_gets_the_cautions_of_its_metal_and_ligands(formula, expected):
    assert titles(cautions_for(complex_from_formula(formula))) == expected


def test_a_titanium_ii_chloride_is_not_a_hydrolysing_high_valent_halide():
    # the early-metal halide line covers oxidation states +4 and +5 (TiCl4, VCl4, NbCl5; Greenwood & Earnshaw
    # 1997, from memory); [TiCl4]2- is Ti(+2)
    assert titles(cautions_for(complex_from_formula("[TiCl4]2-"))) == []


def test_metal_symbol_and_ligand_names_give_the_same_lines_as_a_complex():
    assert cautions_for(("Ni", ["CO"] * 4)) == cautions_for(complex_from_formula("Ni(CO)4"))
    assert cautions_for([("Hg", ["CN"] * 4, 2)]) == cautions_for(complex_from_formula("[Hg(CN)4]2-"))
    # aliases resolve as in formulas: 'Me' is the methyl ligand (data/ligands.toml)
    assert "Organomercury" in titles(cautions_for(("Hg", ["Me", "Me", "Cl", "Cl"])))


def test_an_unknown_oxidation_state_keeps_an_oxidation_state_specific_line():
    # a caution too many beats one missing: without the state the Ti(+4)/(+5) halide line is kept
    assert titles(cautions_for(("Ti", ["Cl"] * 4))) == ["Early-metal halide"]
    assert titles(cautions_for(("Ti", ["Cl"] * 4, 2))) == []


def test_lines_are_deduplicated_and_in_table_order_whatever_the_input_order():
    a, b, c = (complex_from_formula(f) for f in ("[Ni(CN)4]2-", "[NiCl4]2-", "[NiCl2(PH3)2]"))
    forward, backward = cautions_for([a, b, c]), cautions_for([c, b, a])
    assert forward == backward
    assert titles(forward) == ["Nickel", "Cyanide", "Phosphine gas"]
    assert forward[1].endswith("(applies to [Ni(CN)4]2-)")
    assert "applies to" not in forward[0]  # the nickel line applies to all three


def test_a_ligand_the_table_does_not_know_is_named_and_judged_by_its_atoms():
    # arsenic compounds: IARC vol. 100C (2012), inorganic arsenic Group 1
    arsine = custom_ligand("AsMe3x", "As 0 0 0\nC 1.6 0 0.8\nC -0.8 1.4 0.8\nC -0.8 -1.4 0.8", 0, 0)
    lines = cautions_for(("Pd", [arsine, arsine, "Cl", "Cl"], 2))
    assert titles(lines) == ["Palladium", "Arsenic", "Unlisted ligand"]
    assert "'AsMe3x'" in lines[2]


def test_bad_input_is_an_input_error():
    with pytest.raises(InputError, match="Complex objects"):
        cautions_for([42])


def test_text_block_ends_with_the_deferral_and_names_the_compounds():
    text = cautions_text([complex_from_formula("[NiCl4]2-"), complex_from_formula("[Ni(CN)4]2-")])
    assert text.startswith("Safety ([NiCl4]2-, [Ni(CN)4]2-):")
    flat = " ".join(text.split())
    assert flat.endswith(DEFERRAL) and COMPUTED_IS_NOT_EXPERIMENT in flat
    assert all(len(line) <= 110 for line in text.splitlines())
    assert " ".join(cautions_text([]).split()).endswith(DEFERRAL)


def test_markdown_block_lists_full_sources_and_ends_with_the_deferral():
    md = cautions_markdown(complex_from_formula("[Hg(CN)4]2-"), heading="### Safety")
    assert md.startswith("### Safety\n")
    assert "- **Mercury.**" in md and "- **Cyanide.**" in md
    assert "Beryllium, Cadmium, Mercury" in md  # the full title of IARC vol. 58, from [sources]
    assert md.rstrip().endswith(DEFERRAL)
    assert cautions_markdown(complex_from_formula("[ZnCl4]2-")).rstrip().endswith(DEFERRAL)


# --- the table itself -------------------------------------------------------------------------------------

def test_every_caution_in_the_table_names_a_source():
    table = hazard_table()
    entries = [*table.elements.values(), *table.families.values(), *(c.entry for c in table.combinations)]
    cautions = [e for e in entries if e.text is not None]
    assert len(cautions) >= 30
    for entry in cautions:
        assert entry.citation.strip(), entry.key
        assert all(s.short and s.full for s in entry.sources + entry.from_memory), entry.key


def test_every_metal_fourfold_builds_is_decided():
    # walks metals.toml, so a metal added there without a hazard decision fails here
    table = hazard_table()
    metals = {symbol for symbol in load_table("metals") if symbol != "sources"}
    missing = metals - set(table.elements)
    assert not missing, f"add these metals to data/hazards.toml [elements] (a caution or none): {sorted(missing)}"
    listed_as_buildable = {s for s, b in table.buildable.items() if b}
    assert listed_as_buildable == metals  # buildable = false only for elements fourfold does not build
    for symbol in ("Ni", "Co", "Cd", "Hg", "Cr", "Tc", "Os"):
        assert table.elements[symbol].text is not None, symbol
    for symbol in ("Tl", "Pb"):  # not buildable as the metal, kept for custom ligands
        assert table.buildable[symbol] is False and table.elements[symbol].text is not None


def test_every_bundled_ligand_is_in_a_family():
    # walks ligands.toml, so a ligand added there without a family (or the 'none' family) fails here
    table = hazard_table()
    raw = load_table("ligands")
    unmapped = [name for name, row in raw.items() if name not in ("sources", "radii_pm")
                and not any(n in table.family_of for n in (name, *row.get("aliases", [])))]
    assert not unmapped, f"add these ligands to a [ligand_families] entry of data/hazards.toml: {unmapped}"


def test_the_ligands_being_added_are_already_in_a_family():
    # the ligand set grows (phosphines, arsines, amines, chelates); their usual names are mapped in advance
    family_of = hazard_table().family_of
    expected = {"PPh3": "phosphine_solid", "PCy3": "phosphine_solid", "P(t-Bu)3": "phosphine_pyrophoric",
                "P(OMe)3": "phosphite", "PMe2Ph": "phosphine_liquid", "AsPh3": "arsine", "NMe3": "trimethylamine",
                "MeCN": "nitrile", "CNMe": "isocyanide", "OAc": "none", "en": "diamine", "tmeda": "diamine",
                "bipy": "polypyridine", "phen": "polypyridine", "acac": "diketonate", "dppe": "phosphine_solid",
                "dppp": "phosphine_solid", "dmpe": "phosphine_pyrophoric", "ox": "oxalate", "dmg": "dioxime"}
    assert {name: family_of.get(name) for name in expected} == expected


# --- a malformed table is a one-line InputError -------------------------------------------------------------

def _raw():
    return copy.deepcopy(load_table("hazards"))


def _broken(change):
    raw = _raw()
    change(raw)
    return raw


@pytest.mark.parametrize("change,message", [
    (lambda r: r["elements"]["Ni"].pop("sources") and r["elements"]["Ni"].pop("from_memory"), "at least one key"),
    (lambda r: r["elements"]["Ni"].update(sources=["nowhere"]), "'nowhere'"),
    (lambda r: r["elements"]["Zn"].pop("none"), "either 'caution'"),
    (lambda r: r["elements"]["Ni"].update(colour="green"), "unknown keys"),
    (lambda r: r["ligand_families"]["fluoride"]["ligands"].append("Cl"), "already in family"),
    (lambda r: r["combinations"][0].update(any_family=["carbonyls"]), "family that"),
    (lambda r: r["combinations"][0].update(supersedes=["Xx"]), "neither a ligand family nor an element"),
    (lambda r: r["sources"].update(bad={"short": "x"}), "short"),
    (lambda r: r.update(extra={}), "unknown tables"),
])
def test_malformed_table_is_a_one_line_input_error(change, message):
    with pytest.raises(InputError, match="hazard table") as caught:
        parse_hazard_table(_broken(change))
    assert message in str(caught.value)
    assert "\n" not in str(caught.value)


def test_the_bundled_table_parses_as_shipped():
    assert parse_hazard_table(_raw()).family_of["CN"] == "cyanide"

"""The observed set (data/observed.toml): it loads, every entry carries a published source, and the formula
fourfold parses agrees with the oxidation state, d count and charge written down by hand in the file.

The observations themselves are cited per entry in the data file; the d count check rests on the textbook
rule d count = group number − oxidation state (common practice, no source).
"""

from __future__ import annotations

import copy

import pytest

from fourfold.chem.complex import complex_from_formula
from fourfold.data import load_table
from fourfold.errors import InputError
from fourfold.study.observed import available, bundled_observed, load_observed

ENTRIES = bundled_observed()
AVAILABLE = available()


def test_file_loads_with_unique_names():
    assert len({e.name for e in ENTRIES}) == len(ENTRIES) >= 24


@pytest.mark.parametrize("entry", ENTRIES, ids=lambda e: e.name)
def test_every_entry_has_a_tagged_source(entry):
    assert entry.sources
    assert all(s.cite and s.check in ("checked", "from memory") for s in entry.sources)
    assert entry.distances_angstrom or entry.distance_missing
    if entry.distances_angstrom:
        assert entry.distance_source is not None


@pytest.mark.parametrize("entry", AVAILABLE, ids=lambda e: e.name)
def test_formula_parses_to_the_written_charge_and_d_count(entry):
    cx = complex_from_formula(entry.formula)
    assert (cx.metal.symbol, cx.oxidation_state, cx.charge, cx.d_electrons) == (
        entry.metal, entry.oxidation_state, entry.charge, entry.d_electrons)
    assert entry.spin2s in cx.allowed_spin2s
    # distances are keyed by ligands that occur in the formula
    names = {lig.name for lig in cx.ligands} | {alias for lig in cx.ligands for alias in lig.aliases}
    assert {ligand for ligand, _ in entry.distances_angstrom} <= names


@pytest.mark.parametrize("entry", AVAILABLE, ids=lambda e: e.name)
def test_canonical_formula_parses_back_to_the_same_complex(entry):
    # Single-letter ligands once printed as '[Hg(I)4]2-', which reads back as mercury(I).
    cx = complex_from_formula(entry.formula)
    again = complex_from_formula(cx.formula)
    assert (again.oxidation_state, again.composition, again.charge) == (cx.oxidation_state, cx.composition, cx.charge)


def test_entries_waiting_for_ligands_name_them():
    waiting = [e for e in ENTRIES if e not in AVAILABLE]
    assert all(e.needs_ligands for e in waiting)
    for entry in waiting:
        with pytest.raises(InputError):
            complex_from_formula(entry.formula)


def test_set_spans_what_the_validation_needs():
    # Required breadth: ≥ 20 complexes, d5–d10, 3d/4d/5d, charges −3 to +2, both shapes, several spins.
    assert len(AVAILABLE) >= 20
    assert {e.d_electrons for e in AVAILABLE} >= {5, 6, 7, 8, 9, 10}
    assert {e.row for e in AVAILABLE} == {"3d", "4d", "5d"}
    assert {e.charge for e in AVAILABLE} >= {-3, -2, -1, 0, 1, 2}
    assert {e.arrangement for e in AVAILABLE} == {"T-4", "SP-4"}
    assert {e.spin2s for e in AVAILABLE} >= {0, 1, 2, 3, 4, 5}
    assert sum(not e.used_in_calibration for e in AVAILABLE) >= 20


def test_calibration_flags_match_the_estimates_reference_list():
    # The 17 complexes the estimate's repulsion constant was chosen on (DEVELOPERS.md).
    calibration = {"[NiCl4]2-", "[NiBr4]2-", "[Ni(CN)4]2-", "[PdCl4]2-", "[PtCl4]2-", "[CoCl4]2-",
                   "[Co(NCS)4]2-", "[Cu(NH3)4]2+", "Ni(CO)4", "[ZnCl4]2-", "[MnCl4]2-", "[FeCl4]-",
                   "[FeCl4]2-", "[AuCl4]-", "[Rh(CO)2Cl2]-", "[Pt(NH3)4]2+", "[NiCl2(PMe3)2]"}
    assert {e.formula for e in ENTRIES if e.used_in_calibration} == calibration


def _with(change):
    table = copy.deepcopy(load_table("observed"))
    change(table["complex"][0])
    return table


@pytest.mark.parametrize("change,message", [
    (lambda e: e.pop("sources"), "missing sources"),
    (lambda e: e.update(d_electrons=6), "d_electrons 6"),
    (lambda e: e.update(spin2s_observed=4), "spin2s_observed 4 is impossible"),
    (lambda e: e.update(arrangement_observed="Td"), "arrangement_observed must be one of"),
    (lambda e: e.update(sources=["nowhere"]), "'nowhere' is not in [sources]"),
    (lambda e: e.update(ml_distance_angstrom={"Cl": 23.7}), "is not a bond length"),
    (lambda e: e.pop("distance_source"), "give ml_distance_angstrom with distance_source"),
    (lambda e: e.update(colour="blue"), "unknown keys colour"),
])
def test_malformed_entries_get_one_line_errors(change, message):
    with pytest.raises(InputError) as error:
        load_observed(_with(change))
    assert message in str(error.value) and "\n" not in str(error.value)

"""Levels of theory: presets, custom levels from recipe tables, the solvent table."""

import dataclasses

import pytest

from fourfold.compute.levels import (
    LEVEL_KEYS,
    PRESETS,
    Level,
    canonical_solvent,
    custom_level,
    get_level,
    known_solvents,
    solvent_epsilon,
)
from fourfold.errors import InputError


def test_the_three_presets_exist_with_the_documented_roles():
    # The tiers fourfold documents in compute/levels.py: screen (xTB), quick (xTB geometries + hybrid DFT
    # single points), standard (DFT relaxations in solvent + larger-basis single points).
    assert set(PRESETS) == {"screen", "quick", "standard"}
    assert get_level("screen").method == "xtb"
    quick, standard = get_level("quick"), get_level("standard")
    assert quick.method == "dft" and quick.geometry_from == "xtb" and quick.dispersion == "d3bj"
    assert quick.density_fit and quick.basis == "def2-svp" and quick.ecp == "auto"
    assert standard.geometry_from == "self" and standard.solvent is not None
    assert standard.single_point_basis == "def2-tzvp" and standard.functional == "tpssh"


def test_preset_names_are_case_insensitive_and_unknown_names_list_the_presets():
    assert get_level(" Quick ") is get_level("quick")
    with pytest.raises(InputError, match="screen, quick, standard"):
        get_level("overnight")


def test_custom_level_from_a_recipe_table_normalises_text():
    level = custom_level({"name": "Mine", "functional": "PBE0", "basis": "def2-SVP", "grid_level": 2,
                          "solvent": "DCM", "dispersion": "D3BJ", "conv_tol": 1e-9})
    assert (level.name, level.method, level.functional, level.basis) == ("mine", "dft", "pbe0", "def2-svp")
    assert level.solvent == "dichloromethane" and level.dispersion == "d3bj"
    assert level.conv_tol == 1e-9 and level.density_fit is True


def test_custom_level_starts_from_a_base_preset_and_none_words_clear_a_field():
    level = custom_level({"base": "standard", "solvent": "gas", "single_point_basis": "none"})
    standard = get_level("standard")
    assert level.solvent is None and level.single_point_basis is None
    assert level.functional == standard.functional and level.basis == standard.basis
    assert level.name == "standard-custom"


def test_to_dict_is_plain_complete_and_round_trips():
    for level in PRESETS.values():
        data = level.to_dict()
        assert tuple(data) == LEVEL_KEYS
        assert all(isinstance(v, (str, int, float, bool, type(None))) for v in data.values())
        assert custom_level(data) == level


def test_unknown_keys_raise_and_list_the_valid_keys():
    with pytest.raises(InputError) as info:
        custom_level({"functional": "b3lyp", "grid": 3})
    message = str(info.value)
    assert "grid" in message and "grid_level" in message and "max_cycles" in message


@pytest.mark.parametrize("key, value", [
    ("grid_level", "fine"), ("grid_level", 2.5), ("grid_level", True), ("density_fit", 1),
    ("conv_tol", "tight"), ("functional", 3), ("max_cycles", None),
])
def test_wrong_types_raise_input_error(key, value):
    with pytest.raises(InputError, match=key):
        custom_level({"functional": "b3lyp", key: value})


@pytest.mark.parametrize("table, fragment", [
    ({"method": "ccsd"}, "method"), ({"method": "dft"}, "functional"), ({"functional": "b3lyp", "grid_level": 12}, "0–9"),
    ({"functional": "b3lyp", "dispersion": "d4"}, "dispersion"), ({"functional": "b3lyp", "solvent": "lava"}, "solvent"),
    ({"functional": "b3lyp", "geometry_from": "crystal"}, "geometry_from"), ({"functional": "b3lyp", "conv_tol": 0}, "conv_tol"),
])
def test_bad_values_raise_input_error(table, fragment):
    with pytest.raises(InputError, match=fragment):
        custom_level(table)


def test_levels_are_frozen():
    with pytest.raises(dataclasses.FrozenInstanceError):
        get_level("quick").basis = "sto-3g"
    assert isinstance(get_level("quick"), Level)


def test_solvent_table_matches_the_minnesota_values_carried_by_pyscf():
    # Minnesota Solvent Descriptor Database (Kelly, Cramer, Truhlar et al.), as copied in
    # pyscf/solvent/smd.py `solvent_db` (5th column: dielectric constant at 298 K) — outside fourfold.
    from pyscf.solvent.smd import solvent_db

    pyscf_eps = {name.lower(): values[5] for name, values in solvent_db.items()}
    for name in known_solvents():
        assert solvent_epsilon(name) == pytest.approx(pyscf_eps[name], rel=1e-9), name


def test_solvent_values_agree_with_handbook_figures():
    # CRC Handbook of Chemistry and Physics, permittivity of liquids near 25 °C (from memory):
    # water 78.36, dichloromethane 8.93, tetrahydrofuran 7.52 (20 °C), toluene 2.38, DMSO 47.2.
    for name, crc in [("water", 78.36), ("dichloromethane", 8.93), ("thf", 7.52), ("toluene", 2.38),
                      ("dmso", 47.2)]:
        assert solvent_epsilon(name) == pytest.approx(crc, rel=0.03), name


def test_unknown_solvent_lists_the_known_ones():
    assert canonical_solvent("MeCN") == "acetonitrile"
    with pytest.raises(InputError, match="acetonitrile.*water"):
        solvent_epsilon("seawater")

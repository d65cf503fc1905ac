"""The command line as a user meets it: lazy start-up, one-line errors with exit status 2, JSON fields."""

import json
import subprocess
import sys

import pytest

from conftest import run_fourfold as run


def test_help_does_not_import_heavy_modules():
    code = ("import sys; from click.testing import CliRunner; from fourfold.cli import main; "
            "r = CliRunner().invoke(main, ['--help']); assert r.exit_code == 0, r.output; "
            "print(','.join(m for m in ('pyscf', 'matplotlib', 'ase.db', 'tblite', 'geometric') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.strip()
    assert out == ""


def test_estimate_json_fields_and_textbook_ground_states():
    # [NiCl4]2- Td triplet; [Ni(CN)4]2- and [PdCl4]2- planar singlets (docs/sources.md#four-coordinate-rules)
    for formula, ground in (("[NiCl4]2-", ("T-4", 2)), ("[Ni(CN)4]2-", ("SP-4", 0)), ("[PdCl4]2-", ("SP-4", 0))):
        data = json.loads(run("estimate", formula, "--json", check=True).stdout)
        assert {"formula", "d_electrons", "states", "ground"} <= set(data)
        assert (data["ground"]["arrangement"], data["ground"]["spin2s"]) == ground
        state = data["states"][0]
        assert {"arrangement", "isomer", "spin2s", "energy_cm", "energy_kj_mol", "terms"} <= set(state)


def test_estimate_text_prints_units_and_ground():
    out = run("estimate", "[NiCl2(PMe3)2]", check=True).stdout
    assert "cm⁻¹" in out and "kJ/mol" in out and "Estimated ground state" in out and "trans" in out


def test_build_writes_extended_xyz(tmp_path):
    from ase.io import read

    data = json.loads(run("build", "[NiCl2(PMe3)2]", "--out", str(tmp_path), "--json", check=True).stdout)
    labels = {(s["arrangement"], s["isomer"]) for s in data["structures"]}
    assert {("T-4", ""), ("SP-4", "cis"), ("SP-4", "trans")} <= labels
    for s in data["structures"]:
        atoms = read(s["file"], format="extxyz")
        assert atoms.info["arrangement"] == s["arrangement"] and atoms.info["charge"] == 0
        assert len(atoms) == s["atoms"]


@pytest.mark.parametrize("args,fragment", [
    (("estimate", "[XxCl4]2-"), "unknown element"),
    (("estimate", "[NiQ4]2-"), "unknown ligand"),
    (("estimate", "[NiCl3]-"), "3 ligands"),
    (("estimate", "[Ni(II)Cl4]"), "charge does not add up"),
    (("estimate", "[NiCl4]3+"), "oxidation state +7"),
    (("estimate", "[NiCl4"), "malformed formula"),
    (("estimate", "[NiCl4]2-", "--set", "Cl.e_sigma=abc"), "must be a number"),
    (("estimate", "[NiCl4]2-", "--set", "Q.e_sigma=1"), "cannot override"),
    (("build", "[CCl4]"), "not a transition metal"),
    (("estimate", "[NiCl4]2-", "--spin", "1"), "wrong parity"),
    (("estimate", "[NiCl4]2-", "--spin", "4"), "more unpaired electrons"),
])
def test_bad_input_one_line_exit_2(args, fragment):
    result = run(*args)
    assert result.returncode == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ") and fragment in lines[0]
    assert "Traceback" not in result.stderr

"""Long validations (pytest -m slow): computed ground states at `quick` against facts of the trade.

Each complex: T-4 and SP-4, every allowed 2S, held relaxations (xTB geometries, B3LYP-D3(BJ)/def2-SVP
single points). Takes tens of minutes on 2 cores.
"""

import pytest

from fourfold.pipeline import scan

pytestmark = pytest.mark.slow


@pytest.mark.parametrize("formula,arrangement,spin2s", [
    ("[NiCl4]2-", "T-4", 2),    # Td, S = 1: Stucky, Folkers, Kistenmacher, Acta Cryst. 1967, 23, 1064 (from memory)
    ("[Ni(CN)4]2-", "SP-4", 0),  # D4h, S = 0: Musselman, Stecher, Watkins, Inorg. Chem. 1980, 19, 3400
    ("[PdCl4]2-", "SP-4", 0),   # D4h, S = 0: Mais, Owston, Wood, Acta Cryst. 1972, B28, 393 (from memory)
])
def test_quick_ground_states(tmp_path, formula, arrangement, spin2s):
    result = scan(formula, "quick", out_dir=tmp_path, relaxations=("held",))
    assert all(r.status == "done" for r in result.records), [(r.name, r.spin2s, r.reason) for r in result.records]
    ground = result.computed_ground
    assert (ground.arrangement, ground.spin2s) == (arrangement, spin2s)

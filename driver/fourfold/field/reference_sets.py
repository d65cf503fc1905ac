"""Complexes of known arrangement and spin that score the estimate.

``training`` (data/estimate_training.toml) is what the estimate's repulsion constants are calibrated on;
``validation`` (data/estimate_validation.toml) holds other complexes and is never used to tune anything.
A prediction is right when the estimate's ground state has the observed arrangement and 2S; the isomer,
where one is recorded, is scored apart.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..chem.complex import complex_from_formula
from ..data import load_table
from ..errors import InputError
from .estimate import estimate

SETS = ("training", "validation")


@dataclass(frozen=True)
class Observed:
    formula: str
    arrangement: str
    spin2s: int
    isomer: str | None
    source: str
    evidence: str

    @property
    def closed_shell_d10(self) -> bool:
        return complex_from_formula(self.formula).d_electrons == 10


@dataclass(frozen=True)
class Prediction:
    observed: Observed
    arrangement: str
    isomer: str
    spin2s: int
    margin_cm: float  # how far above the predicted ground state the lowest state of another (arrangement, 2S) lies

    @property
    def right(self) -> bool:
        return (self.arrangement, self.spin2s) == (self.observed.arrangement, self.observed.spin2s)

    @property
    def isomer_right(self) -> bool | None:
        return None if self.observed.isomer is None else self.right and self.isomer == self.observed.isomer


def reference_set(name: str) -> list[Observed]:
    if name not in SETS:
        raise InputError(f"unknown reference set '{name}': use one of {', '.join(SETS)}")
    table = load_table(f"estimate_{name}")
    return [Observed(row["formula"], row["arrangement"], row["spin2s"], row.get("isomer"),
                     table["sources"][row["source"]], row["evidence"]) for row in table["complex"]]


def predict(observed: Observed, overrides: dict[str, float] | None = None) -> Prediction:
    result = estimate(complex_from_formula(observed.formula), overrides=overrides)
    ground = result.ground
    others = [s.energy_cm for s in result.states if (s.arrangement, s.spin2s) != (ground.arrangement, ground.spin2s)]
    return Prediction(observed, ground.arrangement, ground.isomer, ground.spin2s, min(others) - ground.energy_cm)


def score(predictions: list[Prediction]) -> tuple[int, int]:
    """(right, total) over arrangement and 2S."""
    return sum(p.right for p in predictions), len(predictions)

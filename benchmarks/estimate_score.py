#!/usr/bin/env python
"""estimate_score: how often the ligand-field estimate gets the observed arrangement and spin.

Run: ``benchmarks/estimate_score`` prints, for the training set (data/estimate_training.toml) and the
validation set (data/estimate_validation.toml), every complex's observed and estimated ground state and
the margin to the next (arrangement, 2S), then both scores last. The validation score is also split into
open-shell and d10 complexes (a d10 ion's arrangement follows from the model's form, not its constants).

``benchmarks/estimate_score --calibrate`` searches the repulsion's three constants (steric scale ε, exponent n,
charge screening s; fourfold.field.estimate) on the training set only: it ranks grid points by training
score, then by the smallest margin among the complexes they get right, and prints the best points and
the full-score window. The validation set is not read in that mode.
"""

import os

for _name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_name] = "1"

import argparse  # noqa: E402
from itertools import product  # noqa: E402

import numpy as np  # noqa: E402

from fourfold.chem.complex import complex_from_formula, spin_label  # noqa: E402
from fourfold.field.estimate import estimate  # noqa: E402
from fourfold.field.reference_sets import predict, reference_set, score  # noqa: E402
from fourfold.units import cm_to_kj_mol  # noqa: E402

SCREENINGS = (0.0, 0.05, 0.075, 0.1, 0.125, 0.15, 0.175, 0.2, 0.25, 0.3, 0.4, 0.5, 0.7, 1.0)
EXPONENTS = (1, 1.5, 2, 2.5, 3, 4, 6, 8, 10, 12)
SCALES_CM = (30, 60, 125, 250, 500, 750, 1000, 1500, 2000, 3000, 4000, 6000, 8000, 12000, 16000, 24000, 32000)


def _state(arrangement, isomer, spin2s) -> str:
    return f"{arrangement} {isomer or ''} {spin_label(spin2s)}".replace("  ", " ")


def report(name: str) -> list:
    predictions = [predict(entry) for entry in reference_set(name)]
    print(f"\n{name} set")
    print(f"{'complex':24s} {'observed':30s} {'estimated':30s} {'margin kJ/mol':>13s}")
    for p in predictions:
        o = p.observed
        mark = "" if p.right else "   ✗"
        print(f"{o.formula:24s} {_state(o.arrangement, o.isomer, o.spin2s):30s} "
              f"{_state(p.arrangement, p.isomer, p.spin2s):30s} {cm_to_kj_mol(p.margin_cm):13.1f}{mark}")
    return predictions


def _terms(entry, exponent=None):
    """Per state (arrangement, 2S, ligand field + pairing, repulsion) of one complex; the repulsion is the steric
    part at ε = 1 and this exponent, or the electrostatic part at s = 1 when no exponent is given."""
    overrides = ({"steric_scale": 1.0, "steric_exponent": exponent, "screening": 0.0} if exponent is not None
                 else {"steric_scale": 0.0, "screening": 1.0})
    result = estimate(complex_from_formula(entry.formula), overrides=overrides)
    return [(s.arrangement, s.spin2s, s.ligand_field_cm + s.pairing_cm, s.repulsion_cm) for s in result.states]


def calibrate() -> None:
    # The repulsion is ε·S(n) + s·C per state, so each complex needs one estimate per exponent and one for C;
    # the grid then only adds numbers.
    entries = reference_set("training")
    tables = []
    for entry in entries:
        electrostatic = np.array([row[3] for row in _terms(entry)])
        steric = {n: np.array([row[3] for row in _terms(entry, n)]) for n in EXPONENTS}
        rows = _terms(entry, EXPONENTS[0])
        base = np.array([row[2] for row in rows])
        labels = [(row[0], row[1]) for row in rows]
        observed = np.array([label == (entry.arrangement, entry.spin2s) for label in labels])
        tables.append((entry.formula, base, steric, electrostatic, labels, observed))
    ranked = []
    for screening, exponent, scale in product(SCREENINGS, EXPONENTS, SCALES_CM):
        right, margins, missed = 0, [], []
        for formula, base, steric, electrostatic, labels, observed in tables:
            energy = base + scale * steric[exponent] + screening * electrostatic
            ground = labels[int(np.argmin(energy))]
            other = min(e for e, label in zip(energy, labels, strict=False) if label != ground)
            if observed[int(np.argmin(energy))]:
                right += 1
                margins.append(other - energy.min())
            else:
                missed.append(formula)
        ranked.append((right, min(margins, default=0.0), screening, exponent, scale, missed))
    ranked.sort(key=lambda row: (-row[0], -row[1]))
    print(f"{'right':>5s} {'min margin kJ/mol':>17s} {'screening':>9s} {'exponent':>8s} {'scale cm-1':>10s}  missed")
    for right, margin, screening, exponent, scale, missed in ranked[:15]:
        print(f"{right:>3d}/{len(entries)} {cm_to_kj_mol(margin):17.1f} {screening:9.3f} {exponent:8g} {scale:10d}  "
              f"{', '.join(missed)}")
    best = ranked[0][0]
    window = [row for row in ranked if row[0] == best]
    print(f"\n{len(window)} of {len(ranked)} grid points reach {best}/{len(entries)}: screening "
          f"{min(r[2] for r in window)}–{max(r[2] for r in window)}, exponent {min(r[3] for r in window)}–"
          f"{max(r[3] for r in window)}, scale {min(r[4] for r in window)}–{max(r[4] for r in window)} cm-1")
    _, margin, screening, exponent, scale, _ = ranked[0]
    print(f"best: screening {screening}, exponent {exponent}, scale {scale} cm-1 (min margin {cm_to_kj_mol(margin):.1f} kJ/mol)")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--calibrate", action="store_true", help="search the repulsion constants on the training set")
    if parser.parse_args().calibrate:
        calibrate()
        return
    training = report("training")
    validation = report("validation")
    open_shell = [p for p in validation if not p.observed.closed_shell_d10]
    d10 = [p for p in validation if p.observed.closed_shell_d10]
    print()
    for label, predictions in (("validation, open shell", open_shell), ("validation, d10", d10)):
        right, total = score(predictions)
        print(f"{label}: {right}/{total}")
    isomers = [p.isomer_right for p in training + validation if p.isomer_right is not None]
    print(f"isomer, where observed (both sets): {sum(isomers)}/{len(isomers)}")
    for label, predictions in (("training", training), ("validation", validation)):
        right, total = score(predictions)
        print(f"{label} score: {right}/{total} = {right / total:.2f}")


if __name__ == "__main__":
    main()

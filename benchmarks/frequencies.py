#!/usr/bin/env python
"""frequencies: cost of a GFN2-xTB Hessian relative to the GFN2-xTB free relaxation it follows.

Run: ``benchmarks/frequencies [--formula "[NiCl4]2-"] [--arrangement T-4] [--spin2s 2] [--rounds 2]``.
Each round relaxes the builder's ideal structure freely (fourfold's ``relax``, GFN2-xTB with spin
polarisation, one thread) with geomeTRIC's default and tight criteria, then computes the central-difference
Hessian (6N gradients, ``fourfold.compute.hessian.xtb_hessian``) at each end point, all side by side in one
run and in the order A B B A over two rounds. Gradient calls are deterministic counts; CPU seconds are
this process's. Prints a table, then the CPU ratio Hessian / relaxation last (for each criterion).
"""

import os

for _name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_name] = "1"

import argparse  # noqa: E402
import time  # noqa: E402

from fourfold.chem.complex import complex_from_formula  # noqa: E402
from fourfold.compute.hessian import harmonic_analysis, imaginary_modes, xtb_hessian  # noqa: E402
from fourfold.compute.relax import relax  # noqa: E402
from fourfold.compute.xtb_engine import XtbPotential  # noqa: E402
from fourfold.geometry.builder import build  # noqa: E402


def timed(work):
    started = time.process_time()
    value = work()
    return value, time.process_time() - started


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--formula", default="[NiCl4]2-")
    parser.add_argument("--arrangement", default="T-4")
    parser.add_argument("--spin2s", type=int, default=2)
    parser.add_argument("--rounds", type=int, default=2)
    args = parser.parse_args()
    cx = complex_from_formula(args.formula)
    spin2s = cx.check_spin(args.spin2s)
    start = build(cx, args.arrangement)
    n_atoms = len(start)
    print(f"{args.formula} {args.arrangement} 2S={spin2s}, GFN2-xTB, {n_atoms} atoms, one thread")
    print(f"{'criteria':<9}{'step':>6}{'relax calls':>13}{'relax CPU s':>13}{'Hessian calls':>15}{'Hessian CPU s':>15}"
          f"{'lowest cm-1':>13}{'n imag':>8}")
    totals = {}
    order = ["default", "tight"]
    for round_index in range(args.rounds):
        for criteria in (order if round_index % 2 == 0 else order[::-1]):
            potential = XtbPotential(start.get_chemical_symbols(), cx.charge, spin2s)
            outcome, relax_cpu = timed(lambda p=potential, c=criteria: relax(start, p, "free", args.arrangement,
                                                                             convergence=c))
            hessian, hessian_cpu = timed(lambda o=outcome: xtb_hessian(o.atoms, cx.charge, spin2s))
            frequencies = harmonic_analysis(outcome.atoms, hessian).frequencies_cm
            relax_sum, hessian_sum = totals.get(criteria, (0.0, 0.0))
            totals[criteria] = (relax_sum + relax_cpu, hessian_sum + hessian_cpu)
            print(f"{criteria:<9}{outcome.steps:>6}{outcome.gradient_calls:>13}{relax_cpu:>13.2f}{6 * n_atoms:>15}"
                  f"{hessian_cpu:>15.2f}{frequencies[0]:>13.1f}{len(imaginary_modes(frequencies)):>8}")
    for criteria in order:
        relax_cpu, hessian_cpu = totals[criteria]
        print(f"Hessian / {criteria} relaxation, CPU: {hessian_cpu / relax_cpu:.2f}")


if __name__ == "__main__":
    main()

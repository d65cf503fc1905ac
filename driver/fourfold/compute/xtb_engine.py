"""GFN2-xTB through tblite: the screening tier and the pre-relaxer.

``XtbPotential`` is a callable ``positions_angstrom (N, 3) -> (energy_hartree, gradient_hartree_per_bohr)``,
the form every relaxation in fourfold takes (see ``fourfold.compute.relax``).

Spin: ``spin2s`` unpaired electrons (tblite's ``uhf``). tblite's spin-polarisation term
(``calc.add("spin-polarization", 1.0)``) is on by default because plain GFN2-xTB orders the
[NiCl4]2- spin states the wrong way round. Measured with tblite 0.8.0 and geomeTRIC 1.1.1: free
gas-phase relaxations (``relax(..., "free", ...)``) from the ideal shape (Ni–Cl 2.2 Å, Pd–Cl 2.3 Å,
Ni–C 1.86 Å, C–N 1.15 Å); E(T-4 triplet) − E(SP-4 singlet) in kJ/mol, and the end points' tau4:

    ============  ======================  =======================  ===========================
    complex       plain GFN2-xTB          spin-polarised           tau4 (triplet / singlet)
    ============  ======================  =======================  ===========================
    [NiCl4]2-     +37.8 (wrong ground)    −16.2 (T-4 triplet)      0.93–0.98 / 0.01
    [Ni(CN)4]2-   +164.1                  +133.8 (SP-4 singlet)    0.86–0.87 / 0.00
    [PdCl4]2-     +82.4                   +40.4 (SP-4 singlet)     0.93–0.99 / 0.00
    ============  ======================  =======================  ===========================

Spin polarisation puts all three ground states where experiment has them (docs/sources.md#four-coordinate-rules); each
relaxation took 6–34 steps and 0.2–0.9 s. A free SP-4 triplet falls to the flattened tetrahedron
(tau4 ≈ 0.95). The gaps themselves are not to be trusted (``XTB_SPIN_WARNING``).

Solvent: a name goes to tblite's parametrised ALPB model (GFN2 parameters); a number is taken as a
dielectric constant for the non-empirical ALPB form (GBε with the P16 Born kernel).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from ..errors import ComputeError, InputError, NotConverged
from ..units import angstrom_to_bohr
from .threads import thread_limits

XTB_SPIN_WARNING = (
    "GFN2-xTB (screen level) spin-state energies are a screen only: xTB spin gaps are not reliable "
    "(without spin polarisation it even gets the [NiCl4]2- ground state wrong); "
    "confirm any spin verdict at a DFT level."
)

# Default tblite SCC settings (tblite's own defaults, named here so callers can tighten them).
DEFAULT_ACCURACY = 1.0
DEFAULT_MAX_ITERATIONS = 250


def _atomic_numbers(symbols_or_numbers: Sequence) -> np.ndarray:
    from ase.data import atomic_numbers

    numbers = []
    for item in symbols_or_numbers:
        if isinstance(item, str):
            if item not in atomic_numbers:
                raise InputError(f"unknown element symbol '{item}': use a symbol such as Ni, Cl, C")
            numbers.append(atomic_numbers[item])
        else:
            numbers.append(int(item))
    return np.asarray(numbers, dtype=np.int32)


def _check_spin(numbers: np.ndarray, charge: int, spin2s: int) -> None:
    """Electron count and 2S must have the same parity (core shells hold even numbers of electrons)."""
    if spin2s < 0:
        raise InputError(f"2S must be zero or positive, got {spin2s}")
    n_electrons = int(numbers.sum()) - charge
    if (n_electrons - spin2s) % 2:
        raise InputError(
            f"2S = {spin2s} is impossible with {n_electrons} electrons (charge {charge}): "
            f"use an {'odd' if n_electrons % 2 else 'even'} 2S"
        )


class XtbPotential:
    """GFN2-xTB energy and gradient for one molecule, charge and spin; geometry varies per call.

    The tblite calculator is built on the first call and reused, and each SCC starts from the
    previous wavefunction. The calculator is not picklable, so it is dropped when the potential is
    pickled (e.g. sent to a worker process) and rebuilt there.
    """

    def __init__(
        self,
        symbols_or_numbers: Sequence,
        charge: int,
        spin2s: int,
        solvent: str | float | None = None,
        spin_polarization: bool = True,
        accuracy: float = DEFAULT_ACCURACY,
        max_iterations: int = DEFAULT_MAX_ITERATIONS,
        threads: int = 1,
    ):
        self.numbers = _atomic_numbers(symbols_or_numbers)
        self.charge = int(charge)
        self.spin2s = int(spin2s)
        _check_spin(self.numbers, self.charge, self.spin2s)
        if isinstance(solvent, str) and not solvent.strip():
            solvent = None
        if solvent is not None and not isinstance(solvent, str) and float(solvent) <= 1.0:
            raise InputError(f"solvent dielectric constant must be above 1, got {solvent}")
        self.solvent = solvent
        self.spin_polarization = bool(spin_polarization)
        self.accuracy = float(accuracy)
        self.max_iterations = int(max_iterations)
        if threads < 1:
            raise InputError(f"threads must be at least 1, got {threads}")
        self.threads = int(threads)
        self._calc = None
        self._result = None

    def __getstate__(self):
        state = self.__dict__.copy()
        state["_calc"] = None
        state["_result"] = None
        return state

    def __call__(self, positions_angstrom) -> tuple[float, np.ndarray]:
        from tblite.exceptions import TBLiteRuntimeError

        positions_bohr = angstrom_to_bohr(np.asarray(positions_angstrom, dtype=float).reshape(-1, 3))
        if positions_bohr.shape[0] != len(self.numbers):
            raise InputError(
                f"got {positions_bohr.shape[0]} positions for {len(self.numbers)} atoms"
            )
        if self._calc is None:
            self._calc = self._new_calculator(positions_bohr)
        else:
            self._calc.update(positions=positions_bohr)
        try:
            # Set per call: a 9-atom SCC measured 3–7 ms on one thread and 80–110 ms (up to 2 s) on two
            # threads of a busy 2-core machine.
            with thread_limits(self.threads):
                self._result = self._calc.singlepoint(self._result)
        except TBLiteRuntimeError as err:
            # A failed SCC leaves a wavefunction that should not seed the next call.
            self._result = None
            message = str(err).strip()
            if "not converged" in message.lower():
                raise NotConverged(f"GFN2-xTB SCC: {message}") from err
            raise ComputeError(f"GFN2-xTB failed: {message}") from err
        return float(self._result.get("energy")), np.array(self._result.get("gradient"))

    def _new_calculator(self, positions_bohr: np.ndarray):
        from tblite.exceptions import TBLiteRuntimeError
        from tblite.interface import Calculator

        # tblite logs through a Python callback: a no-op keeps it off the terminal.
        calc = Calculator(
            "GFN2-xTB", self.numbers, positions_bohr, charge=float(self.charge), uhf=self.spin2s,
            color=False, logger=lambda _message: None,
        )
        calc.set("verbosity", 0)
        calc.set("accuracy", self.accuracy)
        calc.set("max-iter", self.max_iterations)
        if self.spin_polarization:
            calc.add("spin-polarization", 1.0)
        if self.solvent is not None:
            try:
                if isinstance(self.solvent, str):
                    calc.add("alpb-solvation", self.solvent.strip().lower())
                else:
                    calc.add("gbe-solvation", float(self.solvent), "p16")
            except TBLiteRuntimeError as err:
                raise InputError(
                    f"solvent '{self.solvent}' is not known to tblite's ALPB model: "
                    "use a common name (water, acetonitrile, dmso, ch2cl2, thf, ...) or a dielectric constant"
                ) from err
        return calc

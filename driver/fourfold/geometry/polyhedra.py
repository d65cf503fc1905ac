"""Ideal four-coordinate polyhedra as unit vectors from a metal at the origin, and the D2d path T-4 -> SP-4.

Symbols are the IUPAC polyhedral symbols (Nomenclature of Inorganic Chemistry 2005, Table IR-9.3); IUPAC gives
the axially vacant trigonal bipyramid (C3v) no four-coordinate symbol, so fourfold calls it by a descriptive
name of its own, "trigonal-pyramid".
"""

import numpy as np

from fourfold.errors import InputError

ARRANGEMENTS = ("T-4", "SP-4", "SS-4", "trigonal-pyramid")

TETRAHEDRAL_ANGLE_DEG = float(np.degrees(np.arccos(-1.0 / 3.0)))

# The T-4 angle is often written to four decimals (109.4712°), a hair below the exact value: accept that.
_PATH_ANGLE_TOLERANCE_DEG = 1e-4


def d2d_path(trans_angle_deg: float) -> np.ndarray:
    """Unit vectors (4, 3) of a D2d-flattened tetrahedron with trans angle 2φ (degrees).

    Ligands 0/2 span the trans angle in the xz plane (about +z), ligands 1/3 in the yz plane (about −z), so
    the two pairs' planes are perpendicular. 2φ = arccos(−1/3) gives the regular tetrahedron, 2φ = 180° the
    square on +x, +y, −x, −y (the order of ``unit_vectors("SP-4")``: trans pairs (0, 2) and (1, 3)).
    """
    try:
        angle_deg = float(trans_angle_deg)
    except (TypeError, ValueError):
        raise InputError(f"trans angle must be a number of degrees, got {trans_angle_deg!r}") from None
    if not TETRAHEDRAL_ANGLE_DEG - _PATH_ANGLE_TOLERANCE_DEG <= angle_deg <= 180.0:
        raise InputError(
            f"trans angle {angle_deg}° is off the D2d path: give a value from "
            f"{TETRAHEDRAL_ANGLE_DEG:.4f}° (T-4) to 180° (SP-4)"
        )
    half_rad = np.radians(angle_deg) / 2.0
    s, c = np.sin(half_rad), np.cos(half_rad)
    return np.array([[s, 0.0, c], [0.0, s, -c], [-s, 0.0, c], [0.0, -s, -c]])


def _seesaw() -> np.ndarray:
    # Trans pair on ±z (ligands 0/2, like the trans pairs of SP-4), the other two cis on +x and +y.
    return np.array([[0.0, 0.0, 1.0], [1.0, 0.0, 0.0], [0.0, 0.0, -1.0], [0.0, 1.0, 0.0]])


def _trigonal_pyramid() -> np.ndarray:
    # Axial ligand 0 on +z; ligands 1-3 equatorial at 120° to each other (C3v).
    azimuth_rad = np.radians([0.0, 120.0, 240.0])
    equatorial = np.column_stack([np.cos(azimuth_rad), np.sin(azimuth_rad), np.zeros(3)])
    return np.vstack([[0.0, 0.0, 1.0], equatorial])


def _cube_tetrahedron() -> np.ndarray:
    # Alternate corners of a cube, (1,1,1)/√3 and its C2 images: the textbook frame in which the e set is
    # (z², x²−y²) and t2 is (xy, xz, yz). It is d2d_path(θ) turned 45° about z (same site order).
    return np.array([[1.0, 1.0, 1.0], [-1.0, 1.0, -1.0], [-1.0, -1.0, 1.0], [1.0, -1.0, -1.0]]) / np.sqrt(3.0)


_UNIT_VECTORS = {
    "T-4": _cube_tetrahedron(),
    "SP-4": np.array([[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [-1.0, 0.0, 0.0], [0.0, -1.0, 0.0]]),
    "SS-4": _seesaw(),
    "trigonal-pyramid": _trigonal_pyramid(),
}


def unit_vectors(arrangement: str) -> np.ndarray:
    """Unit vectors (4, 3) from the metal at the origin to the four donors of an ideal arrangement.

    - ``T-4``: regular tetrahedron on alternate cube corners (textbook frame: e = z², x²−y²); the
      109.47° end of ``d2d_path`` turned by 45° about z.
    - ``SP-4``: square on +x, +y, −x, −y; trans pairs (0, 2) and (1, 3), neighbours are cis.
    - ``SS-4``: the seesaw taken as the cis-divacant octahedron: ligands 0/2 trans on ±z (180°), ligands
      1/3 on +x/+y, 90° to each other and to the axis; angles (β, α) = (180°, 90°), tau4 0.638. "Seesaw" is
      ambiguous (the SF4-like equatorially vacant trigonal bipyramid has (180°, 120°), tau4 0.425); this one
      is used because it is the SS-4 reference of the Alvarez continuous-shape-measure tables, so our
      shape measures compare with theirs.
    - ``trigonal-pyramid``: axially vacant trigonal bipyramid (C3v): ligand 0 axial on +z, ligands 1-3 equatorial.
    """
    try:
        vectors = _UNIT_VECTORS[arrangement]
    except (KeyError, TypeError):
        raise InputError(
            f"unknown arrangement {arrangement!r}: use one of {', '.join(ARRANGEMENTS)}"
        ) from None
    return vectors.copy()


def arrangement_rank(arrangement: str) -> int:
    """Position of an arrangement in ARRANGEMENTS (the order every table and figure lists them in); others last."""
    return ARRANGEMENTS.index(arrangement) if arrangement in ARRANGEMENTS else len(ARRANGEMENTS)
